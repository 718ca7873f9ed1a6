"""The plain numpy/scipy form of a frozen estimate.

Each estimator is written out with the operations its core implementation performs, in
scipy's vocabulary (``nperseg``, ``noverlap``, ...): ``scipy.signal.welch`` and
``scipy.signal.periodogram`` where they compute the same estimate, explicit FFT lines
otherwise (multitaper, Blackman-Tukey, autocorrelation, Welch with segments skipped at
gaps).  The confidence band is a few explicit lines: the equivalent degrees of freedom as
the core computes them and ``scipy.stats.chi2.ppf``.  Where a method has no faithful
plain form the cell says so instead of emitting something approximate.

Every cell assigns ``freq``, ``psd``, ``dof``, ``lower``, ``upper`` (and ``lag``, ``acf``,
``acf_lower``, ``acf_upper`` for the autocorrelation), with the channel on the first axis,
exactly as ``spectrum.value`` / ``correlation.value`` are shaped.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

import numpy as np

from ..estimators import Autocorrelation, Correlogram, Multitaper, Periodogram, Welch
from ._describe import container_converter, input_guard, one_line, origin_call, py, wrap_comment
from ._state import FreezeState

__all__ = ["scipy_body", "numpy_selection", "register_plain_form"]

#: estimator class -> ``writer(state, name, estimator, options) -> lines``: the plain-form lines
#: of a named analysis beyond psd/acf (the analysis modules of the freeze layer register theirs)
PLAIN_FORMS: dict[type, Callable[[FreezeState, str, Any, dict], list[str]]] = {}


def register_plain_form(cls: type, writer: Callable[[FreezeState, str, Any, dict], list[str]]) -> None:
    """Teach the plain numpy/scipy cell an analysis of estimator class ``cls``.

    ``writer(state, name, estimator, options)`` returns the analysis' lines (they may use
    ``np``, ``scipy.signal``, ``scipy.stats``, ``scipy.fft``, the data variable
    ``state.data_name`` and ``fs``), every name they assign prefixed with ``name + "_"``;
    ``options`` are the analysis' choices (``state.options[name]``, ``{}`` when none).
    """
    PLAIN_FORMS[cls] = writer

EDGE_NOTE = "# DC (and Nyquist, for an even FFT length) of real data: half the degrees of freedom"


# --------------------------------------------------------------------------- data


def numpy_selection(state: FreezeState) -> tuple[float, int | None, tuple[int, int] | None, Any]:
    """``(fs, channel row, (i0, i1) sample range, analysed signal)`` as plain indices.

    The indices are those the Signal methods pick, checked against the analysed signal
    itself (same memory, same shape), so the plain slice gives the same samples.
    """
    s = state.signal
    if state.fs_override is not None:
        s = s.with_fs(state.fs_override)
    row = None
    if state.channel is not None:
        row = list(s.channels).index(state.channel)
        s = s.channel(state.channel)
    cols = None
    if state.span is not None:
        cut = s.span(*state.span)
        i0 = int(round((cut.t0 - s.t0) * s.fs))
        i1 = i0 + cut.n_samples
        plain = s.data[:, i0:i1]
        same_view = (
            plain.shape == cut.data.shape
            and plain.__array_interface__["data"][0] == cut.data.__array_interface__["data"][0]
        )
        if not same_view and not (plain.shape == cut.data.shape and np.array_equal(plain, cut.data)):
            raise RuntimeError(  # pragma: no cover - guards against a change in Signal.span
                f"cannot express the span {state.span} as a sample range: Signal.span picked other samples"
            )
        cols = (i0, i1)
        s = cut
    return float(s.fs), row, cols, s


def _data_lines(state: FreezeState, var: str) -> list[str]:
    signal = state.signal
    name = state.data_name
    fs, row, cols, analysed = numpy_selection(state)
    shape = f"{signal.n_channels} channel{'s' if signal.n_channels != 1 else ''} {list(signal.channels)}"
    text = (
        f"INPUT: define `{name}` before running this cell: the data given to the workbench, as an "
        f"array with samples on the last axis ({shape} x {signal.n_samples:,} samples at "
        f"{signal.fs:.9g} Hz); from a specbench Signal, pass its .data."
    )
    made = origin_call(getattr(signal, "origin", None))
    converter = container_converter(signal)
    if made is None and converter is not None:
        kind = signal.source.split(":")[0][len("the "):]
        text += f" specbench takes them from the {kind} with sb.Signal.{converter}({name}).data"
    if made is not None:
        steps = "".join(
            "." + f"{kind}({', '.join(py(a) for a in args)})" for kind, *args in getattr(signal, "selection", ())
        )
        text += f" specbench reads it with {made}{steps}.data"
    out = wrap_comment(text)
    what = (f"an array of {signal.n_channels} channel{'s' if signal.n_channels != 1 else ''} x "
            f"{signal.n_samples:,} samples (samples on the last axis)")
    out += input_guard(name, what)
    if state.fs_override is not None:
        out.append(f"fs = {py(fs)}  # Hz, set in the workbench (the data says {signal.fs:.9g} Hz)")
    else:
        out.append(f"fs = {py(fs)}  # Hz")
    index = []
    what = []
    if row is not None:
        index.append(f"{row}:{row + 1}")
        what.append(f"channel {state.channel!r}")
    if cols is not None:
        if row is None:
            index.append(":")
        index.append(f"{cols[0]}:{cols[1]}")
        what.append(f"{state.span[0]:.9g} s to {state.span[1]:.9g} s")
    sel = f"[{', '.join(index)}]" if index else ""
    comment = one_line(", ".join(what + ["shape (channels, samples)"]))
    line = f"{var} = np.atleast_2d({name}){sel}  # {comment}"
    if len(line) > 88:
        out.append(f"# {comment}")
        line = f"{var} = np.atleast_2d({name}){sel}"
    out.append(line)
    if analysed.data.dtype == np.float32 or analysed.data.dtype == np.complex64:
        out += wrap_comment(
            f"{var} is single precision: specbench transforms its segments in single precision and "
            "sums in double, so expect agreement to about 1e-6 here, not 1e-12."
        )
    return out


def _finite_check(var: str, owner: str) -> list[str]:
    return [
        f"if not np.all(np.isfinite({var})):",
        f'    raise ValueError("NaN or inf samples: {owner} does not estimate through them.")',
    ]


# --------------------------------------------------------------------------- band


def _edge_lines(onesided: bool, real: bool, nfft: int | None) -> list[str]:
    """Halve the dof at DC and Nyquist; ``nfft`` None: the cell's variable ``nfft`` decides."""
    if not real:
        return []
    if nfft is not None:
        if onesided:
            idx = "[0, -1]" if nfft % 2 == 0 else "0"
        else:
            idx = f"[0, {nfft // 2}]" if nfft % 2 == 0 else "0"
        return [EDGE_NOTE, f"dof[..., {idx}] *= 0.5"]
    other = "-1" if onesided else "nfft // 2"
    return [EDGE_NOTE, f"dof[..., [0, {other}] if nfft % 2 == 0 else [0]] *= 0.5"]


def _band_lines(confidence: float) -> list[str]:
    return [
        "",
        "# Confidence band: chi-square, dof degrees of freedom (Percival & Walden 1993, ch. 6)",
        f"alpha = 1.0 - {py(confidence)}",
        "lower = psd * (dof / scipy.stats.chi2.ppf(1 - alpha / 2, dof))",
        "upper = psd * (dof / scipy.stats.chi2.ppf(alpha / 2, dof))",
    ]


def _shift_lines(onesided: bool) -> list[str]:
    if onesided:
        return []
    return [
        "",
        "# Two-sided: ascending frequencies from -fs/2, as specbench reports them",
        "freq = np.fft.fftshift(freq)",
        "psd, dof, lower, upper = (np.fft.fftshift(a, axes=-1) for a in (psd, dof, lower, upper))",
    ]


def _fold_lines(nfft: int | None) -> list[str]:
    """One-sided density: double every bin but DC (and Nyquist for an even nfft)."""
    note = "# one-sided: add the negative frequencies (DC and Nyquist have none)"
    if nfft is not None:
        return [note, "psd[..., 1:-1] *= 2" if nfft % 2 == 0 else "psd[..., 1:] *= 2"]
    return [note, "if nfft % 2 == 0:", "    psd[..., 1:-1] *= 2", "else:", "    psd[..., 1:] *= 2"]


def _detrend_expr(kind: str, arr: str) -> str:
    if kind == "none":
        return arr
    return f"scipy.signal.detrend({arr}, type={kind!r}, axis=-1)"


def _scipy_detrend(kind: str) -> str:
    return "False" if kind == "none" else repr(kind)


# --------------------------------------------------------------------------- Welch / periodogram


def _welch_dof_lines(var: str, masked: bool) -> list[str]:
    lines = [
        "",
        "# Degrees of freedom of an average of overlapping segments (Percival & Walden 1993,",
        "# eq. (292b)): c(d) is the correlation of the window with itself d steps later",
    ]
    if not masked:
        lines += [
            f"nseg = ({var}.shape[-1] - nperseg) // step + 1",
            "total = float(nseg)",
            "d = 1",
            "while d * step < nperseg and d < nseg:",
            "    c = np.dot(w[: nperseg - d * step], w[d * step :]) / np.dot(w, w)",
            "    total += 2.0 * c * c * (nseg - d)",
            "    d += 1",
        ]
    else:
        lines += [
            "u = used.astype(np.float64)  # pairs of used segments d steps apart: np.dot(u[:-d], u[d:])",
            "total = float(nseg)",
            "d = 1",
            "while d * step < nperseg and d < u.size:",
            "    c = np.dot(w[: nperseg - d * step], w[d * step :]) / np.dot(w, w)",
            "    total += 2.0 * c * c * np.dot(u[:-d], u[d:])",
            "    d += 1",
        ]
    lines.append("dof = np.full(freq.size, 2.0 * nseg * nseg / total)")
    return lines


_MEDIAN_DOF = [
    "# median average: the dof of the median of nseg independent exponential variables (exact",
    "# moments of order statistics) times the same overlap penalty as the mean",
    "inv = 1.0 / np.arange(1, nseg + 1)",
    "k = (nseg + 1) // 2",
    "m1, m2 = inv[nseg - k :].sum(), (inv[nseg - k :] ** 2).sum()",
    "if nseg % 2 == 0:",
    "    gap = 1.0 / (nseg - k)",
    "    m1, m2 = m1 + gap / 2, m2 + gap * gap / 4",
    "dof *= (2.0 * m1 * m1 / m2) / (2.0 * nseg)",
]


def _welch(est: Welch, var: str, onesided: bool, real: bool) -> list[str]:
    nfft = est.nfft or est.segment_length
    window = py(est.window)
    head = [
        "",
        f"# PSD: Welch's method, {est.average} of overlapping segments",
        f"nperseg, noverlap, nfft = {est.segment_length}, {est.noverlap}, {nfft}",
        "step = nperseg - noverlap",
        f"w = scipy.signal.get_window({window}, nperseg)  # periodic (DFT-even)",
    ]
    if est.gaps == "skip":
        body = _welch_skip(est, var, onesided, nfft)
        dof = _welch_dof_lines(var, masked=True)
    else:
        body = _finite_check(var, "Welch(gaps='error')") + [
            "freq, psd = scipy.signal.welch(",
            f"    {var}, fs=fs, window=w, nperseg=nperseg, noverlap=noverlap, nfft=nfft,",
            f"    detrend={_scipy_detrend(est.detrend)}, return_onesided={onesided}, scaling={est.scaling!r},",
            f"    average={est.average!r}, axis=-1,",
            ")",
        ]
        dof = _welch_dof_lines(var, masked=False)
    if est.average == "median":
        dof += _MEDIAN_DOF
    return head + body + dof + _edge_lines(onesided, real, nfft)


def _welch_skip(est: Welch, var: str, onesided: bool, nfft: int) -> list[str]:
    fft = "scipy.fft.rfft" if onesided else "scipy.fft.fft"
    seg = _detrend_expr(est.detrend, "seg")
    lines = [
        "# gaps='skip': leave out the segments that touch a NaN or inf sample (no scipy.signal.welch",
        "# equivalent, so the average is written out)",
        f"n_all = ({var}.shape[-1] - nperseg) // step + 1",
        "starts = np.arange(n_all) * step",
        f"bad = np.concatenate([[0], np.cumsum(~np.all(np.isfinite({var}), axis=0))])",
        "used = bad[starts + nperseg] - bad[starts] == 0",
        "nseg = int(used.sum())",
        "if nseg == 0:",
        '    raise ValueError("Every segment touches a NaN or inf sample; nothing is left to average.")',
        "powers = []",
        "for s in starts[used]:",
        f"    seg = {var}[:, s : s + nperseg]",
        *([] if est.detrend == "none" else [f"    seg = {seg}"]),
        f"    spec = {fft}(seg * w, n=nfft, axis=-1)",
        "    powers.append(spec.real**2 + spec.imag**2)",
    ]
    if est.average == "mean":
        lines.append("psd = np.sum(powers, axis=0) / nseg")
    else:
        lines += [
            "# median, divided by its bias for exponential variables (as scipy.signal.welch does)",
            "ii = 2.0 * np.arange(1.0, (nseg - 1) // 2 + 1)",
            "psd = np.median(powers, axis=0) / (1 + np.sum(1.0 / (ii + 1) - 1.0 / ii))",
        ]
    if est.scaling == "density":
        lines.append("psd = psd / (fs * np.dot(w, w))  # density: unit^2/Hz")
    else:
        lines.append("psd = psd / w.sum() ** 2  # power spectrum: unit^2")
    if onesided:
        lines += _fold_lines(nfft)
        lines.append("freq = scipy.fft.rfftfreq(nfft, 1 / fs)")
    else:
        lines.append("freq = scipy.fft.fftfreq(nfft, 1 / fs)")
    return lines


def _periodogram(est: Periodogram, var: str, onesided: bool, real: bool) -> list[str]:
    lines = ["", "# PSD: the periodogram of the whole record (a single windowed segment)"]
    if est.nfft is None:
        lines.append(f"nfft = {var}.shape[-1]")
    else:
        lines += [
            f"nfft = {est.nfft}",
            f"if nfft < {var}.shape[-1]:",
            '    raise ValueError("nfft is shorter than the record; the periodogram never truncates data.")',
        ]
    lines += _finite_check(var, "Periodogram")
    lines += [
        "freq, psd = scipy.signal.periodogram(",
        f"    {var}, fs=fs, window={py(est.window)}, nfft=nfft, detrend={_scipy_detrend(est.detrend)},",
        f"    return_onesided={onesided}, scaling={est.scaling!r}, axis=-1,",
        ")",
        "",
        "# One periodogram: a chi-square with 2 degrees of freedom per bin",
        "dof = np.full(freq.size, 2.0)",
    ]
    return lines + _edge_lines(onesided, real, None)


# --------------------------------------------------------------------------- multitaper


def _multitaper(est: Multitaper, var: str, onesided: bool, real: bool) -> list[str]:
    k = est.n_tapers
    adaptive = est.adaptive and k > 1
    fft = "scipy.fft.rfft" if onesided else "scipy.fft.fft"
    lines = [
        "",
        f"# PSD: Thomson's multitaper method, {k} DPSS taper{'s' if k != 1 else ''}, NW = {est.bandwidth:g}, "
        + ("adaptive weights" if adaptive else "equal weights"),
        "# (Thomson 1982; Percival & Walden 1993, eqs. (368a), (370a))",
        f"nw, k = {py(est.bandwidth)}, {k}",
    ]
    if est.segment_length is None:
        lines.append(f"seg = {var}.shape[-1]  # tapered length: the whole record")
    else:
        lines.append(f"seg = {est.segment_length}  # tapered length: non-overlapping segments, averaged")
    lines.append(f"nfft = {est.nfft}" if est.nfft is not None else "nfft = seg")
    lines += _finite_check(var, "Multitaper")
    lines += [
        f"nseg = {var}.shape[-1] // seg",
        "used = nseg * seg",
        "tapers, ratios = scipy.signal.windows.dpss(seg, nw, Kmax=k, sym=True, norm=2, return_ratios=True)",
        "tapers, ratios = np.atleast_2d(tapers), np.atleast_1d(ratios)",
        f"blocks = {var}[:, :used].reshape({var}.shape[0], nseg, seg)",
        *([] if est.detrend == "none" else [f"blocks = {_detrend_expr(est.detrend, 'blocks')}  # each segment"]),
        "# eigenspectra sk (channels, tapers, frequencies), per Hz:",
        "# the mean over segments of |FFT(taper * segment)|^2",
        "sk = []",
        "for h in tapers:",
        f"    spec = {fft}(blocks * h, n=nfft, axis=-1)",
        "    sk.append((spec.real**2 + spec.imag**2).mean(axis=1))",
        "sk = np.stack(sk, axis=1) / fs",
    ]
    if adaptive:
        vkind = est.detrend if real else ("none" if est.detrend == "none" else "constant")
        lines += [
            "",
            "# Adaptive weights b_k, iterated to convergence; sigma^2 is the detrended data's variance",
            f"xv = {_detrend_expr(vkind, f'{var}[:, :used]')}",
            "variance = np.mean(np.abs(xv) ** 2, axis=-1)",
            "lam = ratios[None, :, None]",
            "broad = (1 - lam) * variance[:, None, None] / fs",
            "s = sk[:, :2].mean(axis=1, keepdims=True)",
            "for _ in range(200):",
            "    b2 = lam * s**2 / (lam * s + broad) ** 2",
            "    new = (b2 * sk).sum(axis=1, keepdims=True) / b2.sum(axis=1, keepdims=True)",
            "    done = np.max(np.abs(new - s) / np.maximum(new, np.finfo(float).tiny)) < 1e-10",
            "    s = new",
            "    if done:",
            "        break",
            "b2 = lam * s**2 / (lam * s + broad) ** 2",
            "psd = s[:, 0]",
        ]
    else:
        lines.append("psd = sk.mean(axis=1)")
    lines += ["", "# Degrees of freedom of the weighted eigenspectra, per segment, times the segments"]
    if real:
        lines += [
            "# (Percival & Walden 1993 eq. (370a), ch. 7): within W of DC and Nyquist each taper's",
            "# spectral window overlaps its mirror image, |U_jl(2f)|^2 with U_jl the DFT of h_j h_l",
            "d = (2 * np.arange(psd.shape[-1])) % nfft",
            "d = np.minimum(d, nfft - d)",
            "near = np.nonzero(d < 2 * nw * nfft / seg)[0]",
            "u = np.array([[np.abs(scipy.fft.rfft(hj * hl, n=nfft)[d[near]]) ** 2 for hl in tapers] for hj in tapers])",
        ]
    if adaptive:
        lines += [
            "a = b2 / b2.sum(axis=1, keepdims=True)  # the weights as used",
            "denom = np.sum(a * a, axis=1)",
        ]
        if real:
            lines.append('denom[:, near] += np.einsum("cjf,jlf,clf->cf", a[:, :, near], u, a[:, :, near])')
        lines.append("dof = 2.0 / denom * nseg")
    else:
        lines.append("dof = np.full(psd.shape[-1], 2.0 * k * nseg)  # 2 per taper and segment")
        if real:
            lines.append("dof[near] = 2.0 * k * k / (k + u.sum(axis=(0, 1))) * nseg  # K at DC and Nyquist")
    if est.scaling == "spectrum":
        lines += [
            "sums = tapers.sum(axis=1)",
            "psd = psd * (fs * k / np.dot(sums, sums))  # power spectrum: density x the tapers' ENBW (Hz)",
        ]
    if onesided:
        lines += _fold_lines(None)
        lines.append("freq = scipy.fft.rfftfreq(nfft, 1 / fs)")
    else:
        lines.append("freq = scipy.fft.fftfreq(nfft, 1 / fs)")
    return lines


# --------------------------------------------------------------------------- Blackman-Tukey


def _autocovariance_lines(var: str, detrend: str) -> list[str]:
    return [
        f"n = {var}.shape[-1]",
        f"xd = {_detrend_expr(detrend, var)}",
        "nfft_r = scipy.fft.next_fast_len(n + m, real=True)  # no circular wrap-around",
        "spec = scipy.fft.rfft(xd, n=nfft_r, axis=-1)",
        "# s_k = sum_t x_t x_(t+k), k = 0..m",
        "s = scipy.fft.irfft(spec.real**2 + spec.imag**2, n=nfft_r, axis=-1)[:, : m + 1]",
    ]


def _correlogram(est: Correlogram, var: str, onesided: bool, real: bool) -> list[str]:
    m = est.max_lag
    lines = [
        "",
        f"# PSD: Blackman-Tukey correlogram, autocovariance to lag {m} tapered by a {est.lag_window} lag window",
        f"m = {m}",
        f"nfft = {est.nfft}" if est.nfft is not None else "nfft = max(2, 1 << int(np.ceil(np.log2(2 * m))))",
        f"if m >= {var}.shape[-1]:",
        f'    raise ValueError(f"max_lag = {{m}} needs more than {{{var}.shape[-1]}} samples.")',
    ]
    lines += _finite_check(var, "Correlogram")
    lines += _autocovariance_lines(var, est.detrend)
    lines += [
        "r = s / n  # biased autocovariance r_0..r_m",
        f"w = scipy.signal.get_window({est.lag_window!r}, 2 * m + 1, fftbins=False)[m:]  # lag weights w_0..w_m",
        "c = r * w",
        "psd = (2 * scipy.fft.rfft(c, n=nfft, axis=-1).real - c[:, :1]) / fs  # sum over lags -m..m",
    ]
    if onesided:
        lines += _fold_lines(None)
        lines.append("freq = scipy.fft.rfftfreq(nfft, 1 / fs)")
    else:
        lines += [
            "psd = np.concatenate([psd, psd[:, 1 : (nfft + 1) // 2][:, ::-1]], axis=-1)  # f < 0",
            "freq = scipy.fft.fftfreq(nfft, 1 / fs)",
        ]
    lines.append("sw2 = w[0] ** 2 + 2 * np.sum(w[1:] ** 2)")
    if est.scaling == "spectrum":
        lines += [
            "# power spectrum: a sine of amplitude A on a bin reads A^2/2; the line factor is the",
            "# spectral window's height at its centre, with the biased estimate's 1 - k/n",
            "line = w[0] + 2 * np.dot(w[1:], 1 - np.arange(1, m + 1) / n)",
            "psd = psd * (fs / line)",
        ]
    lines += [
        "",
        "# Degrees of freedom 2 N / sum_k w_k^2 (Percival & Walden 1993, sec. 6.7)",
        "dof = np.full(freq.size, 2.0 * n / sw2)",
    ]
    return lines + _edge_lines(onesided, True, None)


# --------------------------------------------------------------------------- autocorrelation


def _autocorrelation(est: Autocorrelation, var: str, finite_checked: bool) -> list[str]:
    lines = ["", "# Autocorrelation of the detrended data, r_k = (1/N) sum_t x_t x_(t+k)"]
    if est.unbiased:
        lines[-1] = "# Autocorrelation of the detrended data, r_k = 1/(N - k) sum_t x_t x_(t+k)"
    if est.max_lag is None:
        lines += [f"m = min({var}.shape[-1] - 1, 2048)  # max_lag=None: the first 2048 lags"]
    else:
        lines += [
            f"m = int(np.floor({py(est.max_lag)} * fs + 1e-9))  # max_lag = {est.max_lag:g} s",
            f"if not 1 <= m <= {var}.shape[-1] - 1:",
            f'    raise ValueError(f"max_lag is {{m}} samples; it must be in 1..{{{var}.shape[-1] - 1}}.")',
        ]
    if not finite_checked:
        lines += _finite_check(var, "Autocorrelation")
    lines += _autocovariance_lines(var, est.detrend)
    lines += [
        "k = np.arange(m + 1)",
        "r = s / (n - k)" if est.unbiased else "r = s / n",
        "r0 = r[:, :1]",
        "rho = r / np.where(r0 > 0, r0, 1.0)",
        "lag = k / fs  # s",
        "acf = rho" if est.normalize else "acf = r  # autocovariance, unit^2",
        f"z = scipy.stats.norm.ppf(0.5 + {py(est.confidence)} / 2)",
    ]
    scale = "" if est.normalize else " * r0"
    if est.band == "white":
        sd = "1 / np.sqrt(n - k)" if est.unbiased else "np.sqrt(n - k) / n"
        lines += [
            "# band of a white process, centred on zero (Box & Jenkins 1976)",
            f"half = z * ({sd})[None, :]" + (" * np.ones_like(r0)" if est.normalize else scale),
            "acf_lower, acf_upper = -half, half.copy()",
        ]
    else:
        lines += [
            "# Bartlett's (1946) large-lag variance (1 + 2 sum_(j<k) rho_j^2) / N, around the estimate",
            "var = np.ones_like(rho) / n",
            "var[:, 0] = 0",
            "var[:, 2:] *= 1 + 2 * np.cumsum(rho[:, 1:-1] ** 2, axis=-1)",
            f"half = z * np.sqrt(var){scale}",
            "acf_lower, acf_upper = acf - half, acf + half",
        ]
    lines.append("acf_lower[:, 0] = acf_upper[:, 0] = acf[:, 0]")
    return lines


# --------------------------------------------------------------------------- assembly

_SPECTRAL = {Welch: _welch, Periodogram: _periodogram, Multitaper: _multitaper, Correlogram: _correlogram}


def scipy_body(state: FreezeState) -> str:
    """Imports, data lines and estimate lines of the plain numpy/scipy cell."""
    var = "samples" if state.data_name != "samples" else "analysed"
    real = not np.iscomplexobj(state.signal.data)
    est = state.estimator
    lines = ["import numpy as np", "import scipy.fft", "import scipy.signal", "import scipy.stats", ""]
    lines += _data_lines(state, var)
    writer = _SPECTRAL.get(type(est))
    if writer is None:
        lines += ["", f"# {type(est).__name__}: no plain numpy/scipy form is written for this estimator; "
                  "use the specbench form."]
    else:
        sides = est.sides
        onesided = sides == "onesided" or (sides == "auto" and real)
        lines += writer(est, var, onesided, real)
        lines += _band_lines(est.confidence)
        lines += _shift_lines(onesided)
    acf = state.correlation_estimator
    if acf is not None:
        if type(acf) is Autocorrelation and acf.gaps == "pairs":
            lines += ["", "# Autocorrelation(gaps='pairs'): the present-pair lag sums have no faithful plain "
                      "numpy/scipy form here; use the specbench form."]
        elif type(acf) is Autocorrelation and real:
            # the PSD lines already refused non-finite samples, except Welch(gaps='skip')
            checked = writer is not None and getattr(est, "gaps", "error") == "error"
            lines += _autocorrelation(acf, var, finite_checked=checked)
        else:
            lines += ["", f"# {type(acf).__name__}: no plain numpy/scipy form is written for it on this data; "
                      "use the specbench form."]
    lines += _analysis_lines(state)
    if getattr(state, "code_lines", {}).get("psd"):  # the workbench's measurement readings
        lines += ["", "# The workbench's measurements (band RMS and power with their Satterthwaite dof, tones by",
                  "# the estimator's own tone response, noise floor) have no plain numpy/scipy form: they are",
                  "# in the specbench form of this cell (style='specbench')."]
    return "\n".join(lines) + "\n"


def _analysis_lines(state: FreezeState) -> list[str]:
    """The plain-form lines of the named analyses beyond psd/acf, in the workbench's order."""
    out: list[str] = []
    for name, est in getattr(state, "analyses", {}).items():
        writer = PLAIN_FORMS.get(type(est))
        if writer is None:
            out += [""] + wrap_comment(f"Analysis {name!r} ({type(est).__name__}): no plain numpy/scipy form is "
                                       "written for it; use the specbench form.")
            continue
        out += writer(state, name, est, dict(getattr(state, "options", {}).get(name, {})))
    return out
