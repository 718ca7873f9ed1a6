"""Tones: detection above the local floor, frequency and amplitude by a fit of the window's own kernel.

Detection rule
--------------
The local floor is the median of the density in blocks of ``B`` bins (``B >= 32`` and at least
16 fit regions), divided by the chi-square median bias ``chi2.ppf(0.5, nu)/nu`` and
interpolated (in dB) between block centres.  A bin is a tone candidate when it is a local
maximum and exceeds the floor by the factor ``chi2.isf(p / M, nu) / nu``: for noise alone a
bin's estimate is ``floor * chi2_nu / nu``, so with ``M`` bins searched the probability that
any of them crosses is at most ``p`` (Bonferroni; ``p = false_alarm`` per spectrum, 0.01 by
default).  A candidate within the main lobe of a stronger tone, or below twice the
stronger tone's leakage envelope at its distance (the spectral window's sidelobes), is
leakage and is dropped.

Frequency and amplitude
-----------------------
Around the peak bin ``k`` the floor-subtracted estimate ``y_m`` (``m = -h..h``, ``h`` the
half width where the response stays above -13 dB) is fitted by least squares with
``T K(m - delta)``, ``K`` the estimator's own tone response (``|W|**2`` of the window,
the mean of the tapers' ``|W_k|**2`` for multitaper, the lag window's spectral window for
Blackman-Tukey; :mod:`._structure`).  ``delta`` is found on a 0.005-bin grid and refined by
a parabola through the objective; ``T`` is the on-bin peak density, so the amplitude is
corrected for the coherent gain and the scalloping at ``delta`` at once: the RMS amplitude is
``sqrt(T * resolution)`` (taper estimators: a sine of peak amplitude A reads ``A**2/2`` in
the power view on a bin) and ``sqrt(T fs / W_lag(0))`` for Blackman-Tukey.  With no noise the
fit is exact, so the bias is the noise's alone.

Standard errors
---------------
By the delta method: the derivatives of ``(delta, T)`` with respect to ``y`` (implicit
function of the fit's normal equation) with the covariance of the bins under tone plus noise,
``Cov(P_j, P_k) = (2/nu) N**2 r(j-k) + 2 T N Re(D_j* D_k C_jk) g_tone`` (complex Gaussian
moments; ``D`` the tapers' transforms, ``C`` their cross spectral windows, ``g_tone`` the
segment-overlap factor of the tone-noise term).  Also reported: the Cramer-Rao bound for one
real tone in white noise, ``var f >= 12 fs**2 / ((2 pi)**2 eta N (N**2 - 1))`` with
``eta = A_rms**2 / sigma**2`` (Rife & Boorstyn 1974, IEEE Trans. Inf. Theory 20(5); Kay 1993
eq. (3.41), from memory).
"""

from __future__ import annotations

import math
import numbers
from typing import Any

import numpy as np
from scipy import stats

from ._bands import _density, _layout
from ._results import MeasurementError, Tone, Tones
from ._structure import Structure, structure_of

__all__ = ["tones", "local_floor", "fit_tone"]

GRID = np.round(np.arange(-1.0, 1.0 + 1e-9, 0.005), 6)

RULE = ("local maximum above the block-median floor (chi-square median bias corrected) by "
        "chi2.isf(p/M, nu)/nu (Bonferroni over M bins searched); leakage of stronger tones "
        "(main lobe, sidelobe envelope) dropped; frequency and amplitude by a least-squares fit "
        "of the estimator's own tone response; standard errors by the delta method")


def _floor_model(spec: Any, dens: np.ndarray, block: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Block centres and the log of the bias-corrected block medians (the local floor's knots)."""
    lay = _layout(spec)
    st = structure_of(spec)
    nf = dens.shape[-1]
    h = st.half_width()
    b = block or max(32, 16 * (2 * h + 1))
    b = min(b, nf)
    nb = max(1, nf // b)
    used = nb * b
    blocks = dens[:used].reshape(nb, b)
    med = np.partition(blocks, b // 2, axis=1)[:, b // 2]
    if used < nf:  # the tail joins the last block's estimate
        med[-1] = np.median(dens[(nb - 1) * b:])
    centre_bins = np.arange(nb) * b + b // 2
    nub = _dof_at(spec, lay, centre_bins)  # the dof vary slowly: the block centre's
    uniq, inv = np.unique(nub, return_inverse=True)
    med = med / (stats.chi2.ppf(0.5, uniq) / uniq)[inv]
    centres = np.arange(nb) * b + (b - 1) / 2
    with np.errstate(divide="ignore"):
        lg = np.log(np.maximum(med, np.finfo(float).tiny))
    return centres, lg


def _floor_at(model: tuple[np.ndarray, np.ndarray], idx: np.ndarray) -> np.ndarray:
    centres, lg = model
    return np.exp(np.interp(idx, centres, lg))


def local_floor(spec: Any, dens: np.ndarray | None = None, block: int | None = None) -> np.ndarray:
    """Per-bin local noise floor: bias-corrected block medians interpolated in dB."""
    dens = _density(spec) if dens is None else dens
    return _floor_at(_floor_model(spec, dens, block), np.arange(dens.shape[-1]))


def _dof_at(spec: Any, lay: dict, idx: np.ndarray) -> np.ndarray:
    """The interior dof (edges doubled) at bins ``idx``, without broadcasting the whole axis."""
    dof = np.asarray(spec.dof, dtype=np.float64)
    idx = np.asarray(idx)
    nu = np.full(idx.shape, float(dof)) if dof.ndim == 0 else np.broadcast_to(dof, lay["freq"].shape)[idx]
    return np.where(lay["edge"][idx], 2 * nu, nu)


def _table(st: Structure, h: int) -> np.ndarray:
    key = ("fit", h)
    if key not in st._cache:
        st._cache[key] = st.kernel_table(np.arange(-h, h + 1), GRID)  # (G, 2h+1)
    return st._cache[key]


def fit_tone(st: Structure, y: np.ndarray, h: int) -> tuple[np.ndarray, np.ndarray]:
    """Least-squares ``(delta, T)`` of ``y ~ T K(m - delta)`` for rows of ``y`` (shape (n, 2h+1))."""
    tab = _table(st, h)
    u = y @ tab.T  # (n, G)
    v = (tab * tab).sum(axis=1)  # (G,)
    obj = np.where(u > 0, u * u / v, -np.inf)
    i = np.argmax(obj, axis=1)
    i = np.clip(i, 1, GRID.size - 2)
    rows = np.arange(y.shape[0])
    o0, o1, o2 = obj[rows, i - 1], obj[rows, i], obj[rows, i + 1]
    den = o0 - 2 * o1 + o2
    with np.errstate(invalid="ignore", divide="ignore"):
        shift = np.where(np.isfinite(den) & (den < 0), 0.5 * (o0 - o2) / den, 0.0)
    shift = np.clip(shift, -0.5, 0.5)
    delta = GRID[i] + shift * (GRID[1] - GRID[0])
    m = np.arange(-h, h + 1)
    k = st.kernel(m[None, :] - delta[:, None])
    t = (y * k).sum(axis=1) / (k * k).sum(axis=1)
    return delta, t


def _kernel_derivs(st: Structure, m: np.ndarray, delta: float) -> tuple:
    e = 1e-3
    k0 = st.kernel(m - delta)
    kp = st.kernel(m - delta - e)
    km = st.kernel(m - delta + e)
    d1 = (kp - km) / (2 * e)  # d/d delta of K(m - delta)
    d2 = (kp - 2 * k0 + km) / (e * e)
    return k0, d1, d2


def _offset_transform(st: Structure, size: int) -> tuple[np.ndarray, np.ndarray]:
    """``E[d, u] = exp(-2 pi i d u / nfft)`` for the bin offsets ``d = -(size-1) .. size-1`` and
    the index ``(j - k) + size - 1`` of each pair of ``size`` consecutive bins (cached).

    ``sum_u g_u exp(-2 pi i (m_j - m_k) u / nfft)`` depends on the pair only through the
    offset ``m_j - m_k``: ``(E @ g)[index]`` is that matrix at ``2 size - 1`` transforms of
    ``g`` instead of ``size**2``."""
    key = ("offsets", size)
    if key not in st._cache:
        n = st.tapers.shape[-1]
        d = np.arange(-(size - 1), size)
        e = np.exp(-2j * np.pi * np.multiply.outer(d, np.arange(n)) / (st.pad * n))
        j = np.arange(size)
        st._cache[key] = (e, j[:, None] - j[None, :] + size - 1)
    return st._cache[key]


def _covariance(st: Structure, spec: Any, m: np.ndarray, delta: float, t0: float, noise: float,
                nu_bin: float) -> np.ndarray:
    """Covariance of the bins ``k + m`` under a tone ``(delta, t0)`` on a floor ``noise``.

    Noise-noise term ``(2/nu) N**2 r(j - k)``.  Tone-noise term (complex Gaussian moments,
    segments ``a`` and ``b = a + s`` of an average of ``n``):
    ``(2 T N / Z) (1/n) sum_s (1 - |s|/n) Re(D_j* D_k exp(i 2 pi (delta - m_j) s D / nfft) C_s(j - k))``
    with ``C_s(d) = sum_u h_u h_{u + s D} exp(-i 2 pi d u / nfft)``; for ``K`` tapers the mean over
    taper pairs of one segment.  Scaled by the ratio of the estimate's own dof to the structure's.
    """
    d = np.abs(m[:, None] - m[None, :])
    r = np.where(d < st.r.size, st.r[np.minimum(d, st.r.size - 1)], 0.0)
    noise_part = (2.0 / nu_bin) * noise * noise * r
    if st.kind == "lag":
        kk = np.maximum(st.kernel(m - delta), 0.0)
        return noise_part + (2.0 / nu_bin) * 2 * noise * t0 * np.sqrt(np.outer(kk, kk)) * r
    h = st.tapers
    n = h.shape[-1]
    nfft_e = st.pad * n
    dk = st.dtft(m - delta)  # (K, M)
    z = float((np.abs(st.dtft(np.zeros(1))) ** 2).mean())
    kt = h.shape[0]
    if kt == 1 and st.seg_terms and spec.segments > 1:
        e, pair = _offset_transform(st, m.size)  # (2M - 1, n), (M, M)
        w = h[0]
        total = np.real(np.conj(dk[0])[:, None] * dk[0][None, :] * (e @ (w * w))[pair])
        g0 = 1.0
        for shift, c, wgt in st.seg_terms:
            fwd = np.zeros(n)
            fwd[: n - shift] = w[: n - shift] * w[shift:]
            back = np.zeros(n)
            back[shift:] = w[shift:] * w[: n - shift]
            for sgn, g in ((1, fwd), (-1, back)):
                rot = np.exp(2j * np.pi * (delta - m)[:, None] * sgn * shift / nfft_e)
                total += wgt * np.real(np.conj(dk[0])[:, None] * dk[0][None, :] * rot * (e @ g)[pair])
            g0 += 2 * wgt * c * c
        # (1/n) sum_s (1 - |s|/n) ..., relative to the noise-only dof of the same average (g0 / n)
        cross = total / g0
        ratio = 2.0 / nu_bin
    else:
        # sum_ab conj(D_aj) D_bk C_ab(j - k) = sum_t A_jt B_kt, A_jt = sum_a conj(D_aj) h_at e^{-i2pi j t/F}
        e = np.exp(-2j * np.pi * np.multiply.outer(m, np.arange(n)) / nfft_e)  # (M, n)
        a_mat = (np.conj(dk).T @ h) * e
        b_mat = (dk.T @ h) * np.conj(e)
        cross = np.real(a_mat @ b_mat.T) / (kt * kt)
        ratio = st.nu_struct / nu_bin
    return noise_part + 2 * (t0 / z) * noise * cross * ratio


def _stderr(st: Structure, spec: Any, y: np.ndarray, h: int, delta: float, t0: float, noise: float,
            nu_bin: float) -> tuple[float, float]:
    m = np.arange(-h, h + 1).astype(np.float64)
    k, k1, k2 = _kernel_derivs(st, m, delta)
    u, u1, u2 = y @ k, y @ k1, y @ k2
    v, v1, v2 = k @ k, 2 * (k @ k1), 2 * (k1 @ k1 + k @ k2)
    dg_dy = 2 * v * k1 - v1 * k
    dg_dd = 2 * u2 * v + u1 * v1 - u * v2
    if dg_dd == 0 or not np.isfinite(dg_dd):
        return math.nan, math.nan
    jd = -dg_dy / dg_dd
    dt_dd = (u1 * v - u * v1) / (v * v)
    jt = k / v + dt_dd * jd
    cov = _covariance(st, spec, m.astype(int), delta, t0, noise, nu_bin)
    var_d = float(jd @ cov @ jd)
    var_t = float(jt @ cov @ jt)
    return math.sqrt(max(var_d, 0.0)), math.sqrt(max(var_t, 0.0))


def _threshold_table(nu_lo: float, nu_hi: float, uniq: np.ndarray | None, p: float):
    """``nu -> chi2.isf(p, nu) / nu`` as a function of an array, and its smallest value over the
    dof range.  Many distinct dof (adaptive multitaper) are interpolated on a log grid of 512 dof
    values (smooth in nu; relative error below 1e-4)."""
    if nu_lo == nu_hi:
        v = float(stats.chi2.isf(p, nu_lo) / nu_lo)
        return (lambda nu: np.full(np.shape(nu), v)), v
    if uniq is not None:
        vals = stats.chi2.isf(p, uniq) / uniq
        return (lambda nu: vals[np.searchsorted(uniq, nu)]), float(vals.min())
    grid = np.geomspace(nu_lo, nu_hi, 512)
    vals = stats.chi2.isf(p, grid) / grid
    return (lambda nu: np.interp(np.log(nu), np.log(grid), vals)), float(vals.min())


def _threshold(nu: np.ndarray, p: float) -> np.ndarray:
    """``chi2.isf(p, nu) / nu`` per bin (see :func:`_threshold_table`)."""
    lo, hi = float(nu.min()), float(nu.max())
    uniq = None
    if lo != hi and np.unique(nu[:: max(1, nu.size // 4096)]).size < 16 and np.unique(nu).size < 256:
        uniq = np.unique(nu)
    return _threshold_table(lo, hi, uniq, p)[0](nu)


def _tone_gain(st: Structure, spec: Any) -> float:
    """On-bin peak density per unit mean-square amplitude."""
    if st.kind == "lag":
        w = st.lag_weights
        return float(w[0] + 2 * w[1:].sum()) / spec.fs
    return 1.0 / spec.resolution


def tones(spec: Any, max_count: int = 10, *, false_alarm: float = 0.01, f1: float | None = None,
          f2: float | None = None) -> Tones:
    """Tones above the local noise floor, strongest first (see the module notes for the rules).

    Examples
    --------
    >>> import numpy as np, specbench as sb
    >>> t = np.arange(100_000) / 1000.0
    >>> x = np.sin(2 * np.pi * 123.4567 * t) + 0.01 * np.random.default_rng(0).standard_normal(t.size)
    >>> q = sb.Welch(segment_length=4096, window="blackmanharris")(x, fs=1000.0).tones()[0]
    >>> print(f"{q.freq:.4f} Hz +- {q.freq_stderr:.1e} Hz, RMS {q.amplitude:.4f} (sine of amplitude 1: 0.7071)")
    123.4567 Hz +- 1.0e-05 Hz, RMS 0.7071 (sine of amplitude 1: 0.7071)
    """
    if np.ndim(spec.value) == 2 and np.shape(spec.value)[0] == 1:
        spec = spec.channel(0)
    if np.ndim(spec.value) != 1:
        names = spec.channels or tuple(range(np.shape(spec.value)[0]))
        raise MeasurementError(
            f"tones: the spectrum has {np.shape(spec.value)[0]} channels {names}; tones are found per channel. "
            "Use spec.channel(name).tones(...)."
        )
    if isinstance(max_count, bool) or not isinstance(max_count, numbers.Integral) or max_count < 1:
        raise MeasurementError(f"tones: max_count must be a positive integer. Got {max_count!r} instead.")
    if not (isinstance(false_alarm, numbers.Real) and 0 < false_alarm < 1):
        raise MeasurementError(f"tones: false_alarm must be a probability in (0, 1). Got {false_alarm!r} instead.")
    lay = _layout(spec)
    st = structure_of(spec)
    dens = _density(spec)
    freq = lay["freq"]
    nf = freq.size
    h = st.lobe_half_width()
    a_cov, b_cov = lay["coverage"]
    lo_f = a_cov if f1 is None else f1
    hi_f = b_cov if f2 is None else f2
    if f1 is not None or f2 is not None:
        from ._bands import _check_band

        lo_f, hi_f = _check_band(spec, lo_f, hi_f, "tones")
    model = _floor_model(spec, dens)
    # the searched bins are one contiguous run: slices, never index arrays over the whole axis
    i0 = int(np.searchsorted(freq, lo_f, side="left"))
    i1 = int(np.searchsorted(freq, hi_f, side="right"))
    lobe = st.lobe_half_width()
    # a tone within a main lobe of DC or Nyquist overlaps its mirror image and cannot be fitted
    i0, i1 = max(i0, max(1, lobe)), min(i1, nf - max(1, lobe))
    m_bins = max(1, i1 - i0)
    p_bin = false_alarm / m_bins
    dof = np.asarray(spec.dof, dtype=np.float64)
    if i1 <= i0:
        nu_run = np.ones(1)
    elif dof.ndim == 0 and not lay["edge"][i0:i1].any():
        nu_run = np.full(1, float(dof))
    elif lay["edge"][i0:i1].any():  # a two-sided spectrum's zero bin lies inside the run
        nu_run = _dof_at(spec, lay, np.arange(i0, i1))
    else:
        nu_run = np.broadcast_to(dof, freq.shape)[i0:i1]
    nu_lo, nu_hi = float(nu_run.min()), float(nu_run.max())
    uniq = None
    if nu_lo != nu_hi and np.unique(nu_run[:: max(1, nu_run.size // 4096)]).size < 16 \
            and np.unique(nu_run).size < 256:
        uniq = np.unique(nu_run)
    fac_of, fac_min = _threshold_table(nu_lo, nu_hi, uniq, p_bin)
    if i1 > i0:
        s = dens[i0:i1]
        peak = np.flatnonzero((s >= dens[i0 - 1:i1 - 1]) & (s > dens[i0 + 1:i1 + 1])) + i0
        # the threshold is at least fac_min: test that first, then the bin's own dof
        peak = peak[dens[peak] > fac_min * _floor_at(model, peak)]
        cand = peak[dens[peak] > fac_of(_dof_at(spec, lay, peak)) * _floor_at(model, peak)]
        # the median threshold over the searched bins: the threshold falls with nu, so it is the
        # threshold at the median dof (the mean of the two middle ones for an even count)
        if nu_lo == nu_hi:
            mid_fac = fac_of(np.array([nu_lo]))
        else:
            mm = nu_run.size
            mid = np.partition(nu_run, [(mm - 1) // 2, mm // 2])[[(mm - 1) // 2, mm // 2]]
            mid_fac = fac_of(mid)
        thr_db = float(10 * np.log10(np.mean(mid_fac)))
    else:
        cand = np.zeros(0, dtype=np.int64)
        thr_db = math.nan
    unit = spec.data_unit if isinstance(spec.data_unit, str) else ""
    args = [f"max_count={max_count}"]
    if false_alarm != 0.01:
        args.append(f"false_alarm={float(false_alarm)!r}")
    if f1 is not None:
        args.append(f"f1={float(f1)!r}")
    if f2 is not None:
        args.append(f"f2={float(f2)!r}")
    base = dict(threshold_db=thr_db, false_alarm=float(false_alarm), confidence=spec.confidence, rule=RULE,
                unit=unit, code=f"spec.tones({', '.join(args)})")
    if cand.size == 0:
        return Tones(items=(), note=(f"No bin in {lo_f:g}..{hi_f:g} Hz exceeds the local floor by the detection "
                                     f"threshold ({thr_db:.1f} dB at false-alarm probability {false_alarm:g})."),
                     **base)
    order = cand[np.argsort(dens[cand])[::-1]]
    fl = dict(zip(order[: 50 * max_count].tolist(), _floor_at(model, order[: 50 * max_count]).tolist()))
    accepted: list[int] = []
    for k in order[: 50 * max_count]:
        ok = True
        for a in accepted:
            dist = abs(int(k) - a)
            if dist <= max(h + 1, lobe):
                ok = False
                break
            leak = fl[k] + 2 * (dens[a] - fl[a]) * st.envelope(np.array([float(dist)]))[0]
            if dens[k] < leak:
                ok = False
                break
        if ok:
            accepted.append(int(k))
            if len(accepted) == max_count:
                break
    gain = _tone_gain(st, spec)
    z = stats.norm.ppf(0.5 + spec.confidence / 2)
    df = lay["df"]
    ns = int(spec.samples_used)
    items = []
    idx = np.array(accepted)
    offs = np.arange(-h, h + 1)
    # centre the fit region on the lobe's centroid (flat-topped responses peak anywhere on the top)
    pos = np.clip(idx[:, None] + offs[None, :], 0, nf - 1)
    yc = np.maximum(dens[pos] - _floor_at(model, idx)[:, None], 0.0)
    shift = np.rint((yc * offs).sum(axis=1) / np.maximum(yc.sum(axis=1), np.finfo(float).tiny)).astype(int)
    idx = np.clip(idx + shift, h, nf - 1 - h)
    pos = np.clip(idx[:, None] + offs[None, :], 0, nf - 1)
    floor_idx = _floor_at(model, idx)
    nu_idx = _dof_at(spec, lay, idx)
    y = dens[pos] - floor_idx[:, None]
    deltas, ts = fit_tone(st, y, h)
    from ..estimators.spectral import Multitaper

    adaptive = isinstance(spec.estimator, Multitaper) and spec.estimator.adaptive and st.tapers.shape[0] > 1
    note = ""
    if adaptive:
        note = ("Adaptive multitaper weights reshape the spectral window around a tone, so no frequency "
                "standard error is given (NaN); estimate with Multitaper(adaptive=False) for one.")
    for k, yk, dlt, t0, noise, nu_k in zip(idx, y, deltas, ts, floor_idx.tolist(), nu_idx.tolist()):
        sd_d, sd_t = _stderr(st, spec, yk, h, float(dlt), float(t0), noise, nu_k)
        if adaptive:
            sd_d = math.nan
        f = float(freq[k] + dlt * df)
        ms = max(float(t0), 0.0) / gain
        amp = math.sqrt(ms)
        sd_a = 0.5 * amp * sd_t / t0 if t0 > 0 else math.nan
        sigma2 = noise * spec.fs / 2
        eta = ms / sigma2 if sigma2 > 0 else math.inf
        crb = math.sqrt(12 * spec.fs**2 / ((2 * math.pi) ** 2 * eta * ns * (ns * ns - 1.0))) if eta > 0 else math.nan
        snr = 10 * math.log10(ms / (noise * spec.resolution)) if noise > 0 else math.inf
        items.append(Tone(
            freq=f, freq_stderr=sd_d * df, freq_lower=f - z * sd_d * df, freq_upper=f + z * sd_d * df,
            freq_crb=crb, amplitude=amp, amplitude_stderr=sd_a, amplitude_lower=max(0.0, amp - z * sd_a),
            amplitude_upper=amp + z * sd_a, level_db=20 * math.log10(amp) if amp > 0 else -math.inf,
            snr_db=snr, floor=noise, bin=int(k), offset=float(dlt), unit=unit,
        ))
    return Tones(items=tuple(items), note=note, **base)
