"""Power spectral density estimators: Welch, periodogram, Thomson multitaper, Blackman-Tukey.

Each estimator is a frozen dataclass of its settings; calling it on data returns a
:class:`~specbench.estimators._results.Spectrum` with a chi-square confidence band from
the estimator's equivalent degrees of freedom.

References
----------
.. [1] P. D. Welch, "The use of fast Fourier transform for the estimation of power
   spectra," IEEE Trans. Audio Electroacoust. AU-15(2), 70-73, 1967.
.. [2] D. J. Thomson, "Spectrum estimation and harmonic analysis," Proc. IEEE 70(9),
   1055-1096, 1982.
.. [3] R. B. Blackman and J. W. Tukey, *The Measurement of Power Spectra*, Dover, 1958.
.. [4] D. B. Percival and A. T. Walden, *Spectral Analysis for Physical Applications*,
   Cambridge University Press, 1993.
"""

from __future__ import annotations

import functools
import math
import threading
import warnings
from dataclasses import dataclass
from typing import Any, ClassVar

import numpy as np
import scipy.fft
import scipy.signal
from scipy.signal.windows import dpss

from .._errors import InputError, SpecbenchWarning
from ._base import Estimator
from ._common import (
    Timer,
    check_finite_result,
    confidence_field,
    detrend_field,
    gaps_skip_field,
    memory_budget,
    nfft_field,
    nonfinite_error,
    onesided_for,
    overlap_field,
    restore_shape,
    samples_of,
    scaling_field,
    segment_length_field,
    sides_field,
    too_short,
    window_field,
)
from ._cost import _segment_model
from ._dof import band_factors, edge_bins, median_bias, median_dof_factor, welch_dof
from ._dpss import BASE_LENGTH, HalfTapers, _base, half_tapers, seed_base
from ._engine import (
    _scratch,
    checkpoint,
    clean_segments,
    detrended_variance,
    expect_passes,
    is_lazy,
    map_spans,
    ordered_map,
    segment_power,
    trend_coefficients,
)
from ._params import Boolean, Interval, Optional, Options, param
from ._results import Spectrum
from .correlation import detrended_copyless_products
from .windows import get_window, window_info, window_label

__all__ = ["Welch", "Periodogram", "Multitaper", "Correlogram", "SpectralEstimator"]


@dataclass(frozen=True, kw_only=True, repr=False)
class SpectralEstimator(Estimator, abstract=True):
    """Common behaviour of the PSD estimators: call on data, get a :class:`Spectrum`."""

    #: the estimator leaves some trailing samples out (segments) -> reported in info
    method: ClassVar[str] = ""

    def __call__(self, x: Any, fs: float | None = None) -> Spectrum:
        """Estimate the spectrum of ``x``.

        Parameters
        ----------
        x : array_like, Signal, pandas or xarray object
            Samples on the last axis; leading axes are channels.
        fs : float, optional
            Sample rate in Hz; required for plain arrays, taken from a Signal otherwise.
        """
        samples, x2 = samples_of(x, fs)
        onesided = onesided_for(self.sides, x2, type(self).__name__)
        # non-finite samples surface as a non-finite result, reported below with their place
        with Timer() as t, np.errstate(invalid="ignore", over="ignore"):
            parts = self._estimate(x2, samples.fs, onesided)
        value = parts.pop("value")
        check_finite_result(value, x2, type(self).__name__, parts.pop("limit"))
        dof = parts.pop("dof")
        lo, hi = band_factors(dof, self.confidence)
        freq = parts.pop("freq")
        if not onesided:
            freq = np.fft.fftshift(freq)
            value, lo, hi, dof = (np.fft.fftshift(a, axes=-1) for a in (value, lo, hi, dof))
        lead = samples.data.shape[:-1]
        value = restore_shape(value, lead)
        dof = restore_shape(dof, lead) if dof.ndim == 2 else dof
        lo = lo if lo.ndim == 1 else restore_shape(lo, lead)
        hi = hi if hi.ndim == 1 else restore_shape(hi, lead)
        info = parts.pop("info")
        info["compute_seconds"] = t.seconds
        return Spectrum(
            freq=freq,
            value=value,
            lower=value * lo,
            upper=value * hi,
            dof=dof,
            fs=samples.fs,
            data_unit=samples.unit,
            scaling=self.scaling,
            confidence=self.confidence,
            estimator=self,
            channels=samples.channels,
            onesided=onesided,
            variance=restore_shape(parts.pop("variance")[:, None], lead)[..., 0],
            info=info,
            **parts,
        )

    def _estimate(self, x: np.ndarray, fs: float, onesided: bool) -> dict:
        raise NotImplementedError


def _freqs(nfft: int, fs: float, onesided: bool) -> np.ndarray:
    return scipy.fft.rfftfreq(nfft, 1 / fs) if onesided else scipy.fft.fftfreq(nfft, 1 / fs)


def _one_sided(p: np.ndarray, nfft: int) -> None:
    """Double every bin except DC (and Nyquist for even nfft), in place (scipy's rule)."""
    if nfft % 2:
        p[..., 1:] *= 2
    else:
        p[..., 1:-1] *= 2


def _edge_dof(nu: np.ndarray, nfft: int, onesided: bool, real: bool) -> np.ndarray:
    """DC and Nyquist bins of real data carry half the degrees of freedom."""
    if real:
        nu[..., edge_bins(nu.shape[-1], nfft, onesided)] *= 0.5
    return nu


#: bins per piece of the threaded median (large enough that a piece outweighs its hand-off)
MEDIAN_BINS = 128


def _segment_median(power: np.ndarray) -> np.ndarray:
    """``np.median(power, axis=1)`` of (C, segments, bins), in pieces of bins on the engine
    threads when large (a selection per bin: the same values, so the same bits; about 1.5x
    faster on two cores at 4882 segments x 2049 bins)."""
    c, nseg, nfreq = power.shape
    if power.size < (1 << 20) or nfreq < 2 * MEDIAN_BINS:
        return np.median(power, axis=1)
    out = np.empty((c, nfreq))

    def piece(f0: int) -> None:
        out[:, f0:f0 + MEDIAN_BINS] = np.median(power[:, :, f0:f0 + MEDIAN_BINS], axis=1)

    for _ in ordered_map(piece, range(0, nfreq, MEDIAN_BINS), report_blocks=False):
        pass
    return out


def _averaged_periodogram(
    est: Any,
    x: np.ndarray,
    fs: float,
    onesided: bool,
    *,
    nperseg: int,
    step: int,
    nfft: int,
    average: str,
    mask: np.ndarray | None,
) -> dict:
    """The Welch / periodogram computation on (C, N) data."""
    w = get_window(est.window, nperseg)
    n = x.shape[-1]
    n_all = (n - nperseg) // step + 1
    segments = None if mask is None else np.nonzero(mask)[0]
    if segments is not None and segments.size == 0:
        raise InputError(
            f"Every one of the {n_all} segments touches a non-finite sample, so "
            f"{type(est).__name__}(gaps='skip') has nothing left to average. Use a shorter "
            "segment_length, or a span with fewer gaps."
        )
    median = average == "median"
    if median:
        nfreq = nfft if not onesided else nfft // 2 + 1
        need = x.shape[0] * (n_all if segments is None else segments.size) * nfreq * 8
        if need > memory_budget():
            raise InputError(
                f"Median averaging keeps every segment's periodogram: {x.shape[0]} channel(s) x "
                f"{n_all if segments is None else segments.size:,} segments x {nfreq:,} bins need "
                f"{need / 2**30:.1f} GiB, more than the {memory_budget() / 2**30:.1f} GiB (a quarter of this "
                "machine's memory) an estimate may take. Use average='mean', less overlap or a longer "
                "segment_length (fewer segments), or a shorter span.", field="average", owner=type(est).__name__,
            )
    power, nseg = segment_power(
        x, window=w, step=step, nfft=nfft, detrend=est.detrend, twosided=not onesided,
        segments=segments, keep_each=median,
    )
    if median:
        value = _segment_median(power) / median_bias(nseg)
    else:
        value = power / nseg
    if est.scaling == "density":
        value *= 1.0 / (fs * float(np.dot(w, w)))
    else:
        value *= 1.0 / float(w.sum()) ** 2
    if onesided:
        _one_sided(value, nfft)
    nu = welch_dof(w, step, nseg if mask is None else mask)
    if median:
        nu *= median_dof_factor(nseg)
    real = not np.iscomplexobj(x)
    dof = _edge_dof(np.full(value.shape[-1], nu), nfft, onesided, real)
    info = window_info(est.window, nperseg)
    used_len = (n_all - 1) * step + nperseg
    if mask is None:
        variance = detrended_variance(x[:, :used_len], est.detrend)
    else:  # each clean stretch detrended on its own, weighted by its length
        ends = segments * step + nperseg
        breaks = np.nonzero(segments[1:] * step > ends[:-1])[0]
        run_first = np.r_[segments[0], segments[breaks + 1]] * step
        run_last = np.r_[ends[breaks], ends[-1]]
        lengths = run_last - run_first
        parts = [detrended_variance(x[:, a:b], est.detrend) for a, b in zip(run_first, run_last)]
        variance = np.average(np.stack(parts), axis=0, weights=lengths)
    return dict(
        value=value,
        dof=dof,
        freq=_freqs(nfft, fs, onesided),
        resolution=info.enbw_bins * fs / nperseg,
        segments=nseg,
        samples_used=used_len,
        variance=variance,
        limit=used_len,
        info=dict(
            nperseg=nperseg,
            noverlap=nperseg - step,
            step=step,
            nfft=nfft,
            window_label=window_label(est.window),
            enbw_bins=info.enbw_bins,
            highest_sidelobe_db=info.highest_sidelobe_db,
            segments_skipped=0 if mask is None else int(n_all - nseg),
            samples_dropped=n - used_len,
        ),
    )


# ---------------------------------------------------------------- Welch


@dataclass(frozen=True, kw_only=True, repr=False)
class Welch(SpectralEstimator):
    """Welch's overlapped segment averaging.

    Welch's method [1]_: the record is cut into segments of ``segment_length`` samples that overlap by the
    fraction ``overlap`` (``noverlap = floor(overlap * segment_length)`` samples); each is
    detrended, windowed and Fourier transformed, and the periodograms are averaged (mean,
    or median for robustness to transients).  For the same settings it equals
    ``scipy.signal.welch`` to floating-point precision.

    The confidence band uses the equivalent degrees of freedom of the average including
    the correlation between overlapping segments (Percival & Walden 1993, eq. (292b)).
    Median averaging: the median of ``n`` segments gets the dof of the median of ``n``
    independent exponential variables (exact moments), times the same overlap penalty as
    the mean (our method, checked by Monte Carlo coverage).

    Parameters
    ----------
    window : str or tuple, default 'hann'
        Taper of each segment, e.g. ``"hann"`` or ``("kaiser", 8.6)``.
        Allowed: a window name such as 'hann' or a tuple (name, parameter) such as ('kaiser', 8.6).
    segment_length : int, default 1024
        Samples per segment; the frequency resolution is ``ENBW * fs / segment_length``.
        Allowed: an integer in the range [4, inf).
    overlap : float, default 0.5
        Fraction of a segment shared with the next, in [0, 1).
        Allowed: a float in the range [0, 1).
    average : {'mean', 'median'}, default 'mean'
        mean: most stable for stationary noise; median: robust to transients.
        Allowed: one of 'mean', 'median'.
    detrend : {'none', 'constant', 'linear'}, default 'constant'
        Removed from each segment before windowing: nothing, its mean, or its least-squares line.
        Allowed: one of 'none', 'constant', 'linear'.
    scaling : {'density', 'spectrum'}, default 'density'
        density: unit^2/Hz (noise levels); spectrum: unit^2 (a sine of amplitude A reads A^2/2).
        Allowed: one of 'density', 'spectrum'.
    sides : {'auto', 'onesided', 'twosided'}, default 'auto'
        auto: one-sided for real data, two-sided for complex data.
        Allowed: one of 'auto', 'onesided', 'twosided'.
    nfft : int or None, default None
        FFT length per segment (>= segment length; zero padding interpolates).
        Allowed: None (no zero padding) or an integer in the range [2, 16777216].
    confidence : float, default 0.95
        Probability that the band covers the true spectrum at a given frequency.
        Allowed: a float in the range (0, 1).
    gaps : {'error', 'skip'}, default 'error'
        ``"skip"`` leaves out the segments that touch a non-finite sample, counts them
        (``spectrum.info["segments_skipped"]``) and computes the dof from the segments used.
        Allowed: one of 'error', 'skip'.

    References
    ----------
    .. [1] P. D. Welch, "The use of fast Fourier transform for the estimation of power
       spectra," IEEE Trans. Audio Electroacoust. AU-15(2), 70-73, 1967.

    Examples
    --------
    >>> import numpy as np, specbench as sb
    >>> rng = np.random.default_rng(0)
    >>> x = rng.standard_normal(100_000)            # unit variance, fs = 1 kHz
    >>> spec = sb.Welch(segment_length=1024)(x, fs=1000.0)
    >>> print(f"{np.median(spec.value):.4f} V^2/Hz")  # white level 2 sigma^2 / fs
    0.0020 V^2/Hz
    >>> print(f"{spec.segments} segments, {spec.dof[5]:.1f} degrees of freedom")  # 36 N^2/(19 N - 1)
    194 segments, 367.7 degrees of freedom
    >>> print(f"RMS from the spectrum {np.sqrt(spec.value.sum() * spec.df):.3f}, from the samples {x.std():.3f}")
    RMS from the spectrum 0.999, from the samples 1.000
    """

    title: ClassVar[str] = "Welch (averaged segments)"

    window: Any = window_field("hann")
    segment_length: int = segment_length_field()
    overlap: float = overlap_field()
    average: str = param(
        "mean",
        Options(("mean", "median")),
        label="Averaging",
        group="band",
        help="mean: most stable for stationary noise; median: robust to transients.",
    )
    detrend: str = detrend_field()
    scaling: str = scaling_field()
    sides: str = sides_field()
    nfft: int | None = nfft_field("FFT length per segment (>= segment length; zero padding interpolates).")
    confidence: float = confidence_field()
    gaps: str = gaps_skip_field()

    def _check(self) -> None:
        if self.nfft is not None and self.nfft < self.segment_length:
            self._fail(
                "nfft",
                f"None or an integer >= segment_length ({self.segment_length})",
                "Zero padding can only lengthen a segment.",
            )

    @property
    def noverlap(self) -> int:
        """Overlap in samples, ``floor(overlap * segment_length)``."""
        return int(math.floor(self.overlap * self.segment_length))

    def _estimate(self, x: np.ndarray, fs: float, onesided: bool) -> dict:
        n = x.shape[-1]
        nperseg = self.segment_length
        if nperseg > n:
            raise too_short(
                "Welch", "segment_length", nperseg, n,
                f"Choose segment_length <= {n} (for example {1 << (n.bit_length() - 1)}), "
                "or analyse a longer span.",
            )
        step = nperseg - self.noverlap
        mask = None
        if self.gaps == "skip":
            clean = clean_segments(x, nperseg, step)
            if not clean.all():
                mask = clean
        return _averaged_periodogram(
            self, x, fs, onesided, nperseg=nperseg, step=step,
            nfft=self.nfft or nperseg, average=self.average, mask=mask,
        )


# ---------------------------------------------------------------- Periodogram


@dataclass(frozen=True, kw_only=True, repr=False)
class Periodogram(SpectralEstimator):
    """The (modified) periodogram of the whole record: one windowed segment.

    Finest resolution and 2 degrees of freedom per bin (1 at DC and Nyquist): the
    relative standard error is 100 %, whatever the record length.  Equals
    ``scipy.signal.periodogram`` for the same settings.

    Parameters
    ----------
    window : str or tuple, default 'boxcar'
        Taper applied to each segment: a name, or (name, parameter) for windows that take one.
        Allowed: a window name such as 'hann' or a tuple (name, parameter) such as ('kaiser', 8.6).
    detrend : {'none', 'constant', 'linear'}, default 'constant'
        Removed from each segment before windowing: nothing, its mean, or its least-squares line.
        Allowed: one of 'none', 'constant', 'linear'.
    scaling : {'density', 'spectrum'}, default 'density'
        density: unit^2/Hz (noise levels); spectrum: unit^2 (a sine of amplitude A reads A^2/2).
        Allowed: one of 'density', 'spectrum'.
    sides : {'auto', 'onesided', 'twosided'}, default 'auto'
        auto: one-sided for real data, two-sided for complex data.
        Allowed: one of 'auto', 'onesided', 'twosided'.
    nfft : int or None, default None
        FFT length (>= the number of samples; zero padding interpolates).
        Allowed: None (no zero padding) or an integer in the range [2, 16777216].
    confidence : float, default 0.95
        Probability that the band covers the true spectrum at a given frequency.
        Allowed: a float in the range (0, 1).
    """

    title: ClassVar[str] = "Periodogram (whole record)"

    window: Any = window_field("boxcar")
    detrend: str = detrend_field()
    scaling: str = scaling_field()
    sides: str = sides_field()
    nfft: int | None = nfft_field("FFT length (>= the number of samples; zero padding interpolates).")
    confidence: float = confidence_field()

    def _estimate(self, x: np.ndarray, fs: float, onesided: bool) -> dict:
        n = x.shape[-1]
        nfft = self.nfft or n
        if nfft < n:
            raise InputError(
                f"The nfft of Periodogram is {nfft}, shorter than the {n} samples of the data; "
                "the periodogram never truncates data. Leave nfft=None, or choose nfft >= "
                f"{n}, or analyse a shorter span.", field="nfft", owner="Periodogram",
            )
        return _averaged_periodogram(
            self, x, fs, onesided, nperseg=n, step=n, nfft=nfft, average="mean", mask=None
        )


# ---------------------------------------------------------------- Multitaper


_TAPERS_BUILT: set = set()

#: tapers longer than this are computed by :mod:`._dpss` (exact eigenvectors in O(N)
#: per taper) instead of ``scipy.signal.windows.dpss`` (2.6 s at 1e6 samples here)
FAST_DPSS_MIN = 1 << 17


@functools.lru_cache(maxsize=4)
def _long_tapers(n: int, nw: float, k: int) -> HalfTapers:
    return half_tapers(n, nw, k)


@functools.lru_cache(maxsize=8)
def _tapers(n: int, nw: float, k: int) -> tuple[np.ndarray, np.ndarray]:
    """Unit-energy DPSS tapers (k, n) and their concentration ratios, cached."""
    if n > FAST_DPSS_MIN:
        t = _long_tapers(n, nw, k)
        h, ratios = t.full(), np.array(t.ratios)
    else:
        h, ratios = dpss(n, nw, Kmax=k, sym=True, norm=2, return_ratios=True)
    h = np.atleast_2d(h)
    h.setflags(write=False)
    return h, np.atleast_1d(ratios)


def _record_tapers(n: int, nw: float, k: int):
    """``(apply(j, src, out), concentrations, taper sums)`` for whole-record tapers."""
    if n > FAST_DPSS_MIN:
        tapers = _long_tapers(n, float(nw), k)
        return tapers.apply, np.array(tapers.ratios), tapers.sums()
    h, lam = _tapers(n, float(nw), k)

    def apply(j, src, out):
        return np.multiply(src, h[j], out=out, casting="unsafe")

    return apply, lam, h.sum(axis=1)


def _taper_seed(n: int, nw: float, k: int) -> tuple:
    """What a dask task needs to rebuild the client's tapers bit for bit."""
    if n > FAST_DPSS_MIN:
        return ("base", _base(float(nw), k))
    return ("full", _tapers(n, float(nw), k)[0])


def _eigen_kernel(rec: np.ndarray, js: tuple, c0: float, c1: float, nw: float, k: int, nfft: int,
                  twosided: bool, seed: tuple | None = None, into: Any = None) -> list:
    """``|FFT(taper_j * (rec - c0 - c1 t))|**2`` for the tapers ``js`` of one channel's record.

    ``into``: optional ``(rows, buffers)``: write the spectra into ``rows[i]`` and keep the
    work buffers of this thread in ``buffers`` (one call's lifetime) instead of fresh
    arrays per taper (a 1e7-sample record: 120 MB of fresh memory per taper, slow to touch
    here).  The float64 one-sided transform is then ``numpy.fft.rfft(out=)`` into the
    thread's buffer (also without ``into``, so that a dask worker computes the same bits):
    the same pocketfft algorithm as ``scipy.fft.rfft`` (measured bit for bit equal at 1e7
    samples), without its fresh output array.
    """
    rec = rec.reshape(-1)
    n = rec.size
    if seed is not None and seed[0] == "full":
        h = seed[1]

        def apply(j, src, out):
            return np.multiply(src, h[j], out=out, casting="unsafe")
    else:
        if seed is not None:
            seed_base(nw, k, seed[1])
        apply = _record_tapers(n, nw, k)[0]
    single = rec.dtype in (np.float32, np.int16, np.int8, np.uint8)
    work = np.dtype(np.float32 if single else np.float64)
    fft = scipy.fft.fft if twosided else scipy.fft.rfft
    rows, buffers = into if into is not None else (None, None)
    mine = buffers.setdefault(threading.get_ident(), {}) if buffers is not None else None
    out = []
    for i, j in enumerate(js):
        buf = _scratch("taper-record", (n,), work)
        np.subtract(rec, c0, out=buf, casting="unsafe")
        if c1 != 0.0:
            buf -= (c1 * np.arange(n)).astype(work, copy=False)
        apply(j, buf, buf)
        double = not twosided and work == np.float64
        if double:  # the same transform in memory and on a dask worker (the same bits)
            spec = None if mine is None else mine.get("spec")
            if mine is not None and (spec is None or spec.size != nfft // 2 + 1):
                spec = mine["spec"] = np.empty(nfft // 2 + 1, dtype=np.complex128)
            spec = np.fft.rfft(buf, n=nfft, out=spec)
        else:
            spec = fft(buf, n=nfft, workers=1)
        with np.errstate(over="ignore", invalid="ignore"):  # reported from the result, with the cause
            dst = np.multiply(spec.real, spec.real, out=rows[i] if rows is not None and double else None)
            im = spec.imag
            np.multiply(im, im, out=im)
            dst += im
        if rows is not None and dst is not rows[i]:
            rows[i][...] = dst
        out.append(rows[i] if rows is not None else dst)
    return out


def _whole_record_eigenspectra(x: Any, n: int, nw: float, k: int, nfft: int, detrend: str,
                               twosided: bool) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """``|FFT(taper_j * detrend(x_c))|**2`` for every channel and taper of one whole record.

    In memory: one item of work per (channel, taper), two at a time on the engine threads.
    A dask array: one task per channel (the whole-record FFT needs the channel in one
    place: it is read where the task runs, not in the client).  Each item writes its own
    row, so the bits depend neither on the thread count nor on the scheduler.
    Returns ``(sk (C, K, F), concentrations (K,), taper sums (K,))``; real data only.
    """
    c = x.shape[0]
    _, lam, sums = _record_tapers(n, nw, k)
    checkpoint()
    c0, c1 = trend_coefficients(x, detrend)
    nfreq = nfft if twosided else nfft // 2 + 1
    sk = np.empty((c, k, nfreq))
    if not is_lazy(x):
        items = [(ch, j) for ch in range(c) for j in range(k)]
        buffers: dict = {}

        def run(item):
            ch, j = item
            _eigen_kernel(x[ch], (j,), c0[ch], c1[ch], nw, k, nfft, twosided, into=([sk[ch, j]], buffers))

        for _ in ordered_map(run, items):
            pass
        buffers.clear()
    else:
        for ch in range(c):
            (rows,) = map_spans(_eigen_kernel, x[ch : ch + 1], [(0, n)], [(tuple(range(k)), c0[ch], c1[ch])],
                                (nw, k, nfft, twosided, _taper_seed(n, nw, k)))
            sk[ch] = rows
    return sk, lam, sums


#: frequencies per item of the adaptive weighting (its buffers stay in the L2 cache)
CHUNK_ADAPTIVE = 1 << 13


def _adaptive(sk: np.ndarray, lam: np.ndarray, sigma2: np.ndarray, fs: float,
              near: np.ndarray | None = None, u: np.ndarray | None = None):
    """Thomson's adaptive weighting, iterated to convergence at every frequency.

    ``sk``: (C, K, F) two-sided eigenspectra; ``lam``: (K,) concentrations; ``sigma2``:
    (C,) data variance.  With ``b_k = S / (l_k S + (1 - l_k) sigma^2 / fs)`` the weights
    are ``d_k^2 = l_k b_k^2`` and the estimate ``sum d_k^2 S_k / sum d_k^2`` (Percival &
    Walden 1993 eqs. (368a), (369a); Thomson 1982); the dof are those of the weights as
    used, :func:`_taper_dof` (``near``, ``u``: the mirror-image overlap near DC and
    Nyquist, :func:`_mirror_overlap`).  Each frequency iterates until its own
    relative change is below 1e-10 (at most 200 times); the frequencies are done in fixed
    chunks on the engine threads.
    """
    c, k, f = sk.shape
    value = np.empty((c, f))
    dof = np.empty((c, f))
    lam_col = lam[:, None]
    chunk = CHUNK_ADAPTIVE
    items = [(ch, f0) for ch in range(c) for f0 in range(0, f, chunk)]

    def run(item):
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):  # reported from the result
            _run(item)

    def _run(item):
        ch, f0 = item
        f1 = min(f, f0 + chunk)
        spec = sk[ch, :, f0:f1]
        broad = (1 - lam_col) * (sigma2[ch] / fs)
        s = spec[:2].mean(axis=0)
        # active: the chunk's frequencies still moving (None: all of them -- while every
        # one moves, nothing is gathered or scattered; the first iterations are like that)
        active, pending = None, False
        sub, cur = spec, s.copy()
        # b2 = lam cur**2 / (lam cur + broad)**2 and new = sum(b2 sub) / sum(b2), written
        # into the thread's buffers (the same operations in the same order: the same bits)
        bufs = _scratch("adaptive", (3, k, chunk), np.dtype(np.float64))
        for _ in range(200):
            m = cur.size
            b2, den, prod = bufs[0, :, :m], bufs[1, :, :m], bufs[2, :, :m]
            np.multiply(lam_col, np.square(cur), out=b2)
            np.multiply(lam_col, cur, out=den)
            np.add(den, broad, out=den)
            np.square(den, out=den)
            np.divide(b2, den, out=b2)
            np.multiply(b2, sub, out=prod)
            new = prod.sum(axis=0)
            new /= b2.sum(axis=0)
            moving = np.abs(new - cur) >= 1e-10 * np.maximum(new, np.finfo(float).tiny)
            if active is None and moving.all():
                cur, pending = new, True
                continue
            pending = False
            if active is None:
                s[:] = new
            else:
                s[active] = new
            if not moving.any():
                break
            keep = np.nonzero(moving)[0]
            active = keep if active is None else active[keep]
            sub, cur = sub[:, keep], new[keep]
        if pending:  # 200 iterations with every frequency still moving
            s[:] = cur
        b2 = lam_col * s**2 / (lam_col * s + broad) ** 2
        value[ch, f0:f1] = s
        a = b2 / b2.sum(axis=0)  # the weights as used
        denom = np.sum(a * a, axis=0)
        if near is not None and near.size:
            inside = (near >= f0) & (near < f1)
            if inside.any():
                idx = near[inside] - f0
                an = a[:, idx]
                denom[idx] += np.einsum("jf,jlf,lf->f", an, u[:, :, inside], an)
        dof[ch, f0:f1] = 2.0 / denom

    for _ in ordered_map(run, items):
        pass
    return value, dof


#: taper length on which the mirror-image overlap of long tapers is evaluated: that of
#: the seed tapers the long ones are built from (already computed, no second eigenproblem)
MIRROR_PROXY = BASE_LENGTH


@functools.lru_cache(maxsize=8)
def _mirror_overlap(seg: int, nw: float, k: int, nfft: int, nfreq: int) -> tuple[np.ndarray, np.ndarray]:
    """Bins within W of DC or Nyquist and ``|U_jl(2f)|^2`` there, shape (K, K, bins).

    For real data the eigencoefficient ``J_k(f)`` is correlated with ``J_k(-f)``: for a
    locally white spectrum ``E[J_j(f) J_l(f)] = S U_jl(2f)`` with
    ``U_jl(g) = sum_t h_j,t h_l,t e^{-i 2 pi g t}`` (the tapers' spectral windows
    overlapping their mirror images; Percival & Walden 1993, ch. 7, the tapered estimate
    at f = 0 and f = fs/2).  ``U_jl(2f)`` is concentrated in ``|f| < W``, so only those
    bins (and their mirror at fs/2) are listed; elsewhere it is of the order of the
    leakage ``1 - lambda`` and neglected.
    """
    # d = min(2f mod nfft, nfft - (2f mod nfft)) is small only near f = 0, nfft/2 and nfft:
    # it is evaluated on those candidates, not on every bin (the same bins; 0.1 s less at 1e7)
    reach = int(math.ceil(nw * nfft / seg)) + 2
    cand = np.unique(np.concatenate([np.arange(0, reach), np.arange(nfft // 2 - reach, nfft // 2 + reach + 1),
                                     np.arange(nfft - reach, nfft)]))
    cand = cand[(cand >= 0) & (cand < nfreq)]
    d = (2 * cand) % nfft
    d = np.minimum(d, nfft - d)
    inside = d < 2 * nw * nfft / seg
    near, dn = cand[inside], d[inside]
    u = np.empty((k, k, near.size))
    if seg <= FAST_DPSS_MIN:
        h, _ = _tapers(seg, nw, k)
        for j in range(k):
            for m in range(j, k):
                u[j, m] = u[m, j] = np.abs(scipy.fft.rfft(h[j] * h[m], n=nfft)[dn]) ** 2
    else:
        # long tapers: |U_jl| depends on f / W only (the tapers converge to prolate
        # functions), so it is evaluated on tapers of MIRROR_PROXY samples at the same
        # f / W (direct sums), those of the seed tapers (:func:`._dpss._base`)
        h = _base(nw, k)[0]
        t = np.arange(MIRROR_PROXY)
        for i, di in enumerate(dn):
            e = np.exp(-2j * np.pi * (di / nfft) * (seg / MIRROR_PROXY) * t)
            u[:, :, i] = np.abs((h * e) @ h.T) ** 2
    near.setflags(write=False)
    u.setflags(write=False)
    return near, u


def _taper_dof(k: int, nfreq: int, near: np.ndarray, u: np.ndarray | None) -> np.ndarray:
    """Variance-matching dof of ``sum_k a_k S_k``; here equal weights ``a_k = 1/K``.

    ``Var = S^2 (sum_k a_k^2 + sum_jl a_j a_l |U_jl(2f)|^2)`` for a locally white Gaussian
    process and orthonormal tapers (the second term only at the bins ``near`` DC and
    Nyquist of real data, see :func:`_mirror_overlap`), so ``nu = 2 / (sum a^2 + a'|U|^2 a)``:
    ``2K`` away from the ends, ``K`` at f = 0 and f = fs/2.  Adaptive weights ``a_k = d_k^2 /
    sum d_l^2`` use the same expression in :func:`_adaptive` (Percival & Walden 1993
    eq. (370a), ``2 (sum d_k^2)^2 / sum d_k^4``, with the weights as used; Thomson 1982).
    """
    nu = np.full(nfreq, 2.0 * k)
    if near.size:
        nu[near] = 2.0 * k * k / (k + u.sum(axis=(0, 1)))
    return nu


def _multitaper_cost(est: Any, n: int, c: int, itemsize: int) -> dict:
    """Work model of :class:`Multitaper` for :meth:`~Estimator.expected_seconds`.

    Whole record (fitted on ``tests/benchmarks/bench_cost.py``, 1e6 and 1e7 samples):
    tapers about 50 sample passes per taper and sample (one inverse-iteration step and two
    residuals on the half problem, two tapers at a time), per taper one transform of
    ``nfft`` (at the price of its length: see ``_cost.DIRECT_FACTORS``) and 14 passes,
    adaptive weights 40 passes per taper and frequency, bands 60 per frequency.
    """
    seg = min(est.segment_length or n, n)
    nfft = max(est.nfft or seg, seg)
    k = est.n_tapers
    nseg = max(1, n // seg)
    nfreq = nfft // 2 + 1
    fixed, passes = 1e-3, 0.0
    if (seg, float(est.bandwidth), k) not in _TAPERS_BUILT:
        if seg > FAST_DPSS_MIN:  # short seed tapers, then one tridiagonal solve per taper
            fixed += 0.12 * k / 7
            passes += 50.0 * seg * k
        else:  # scipy.signal.windows.dpss: about 1.6 us per sample for 7 tapers here
            fixed += 1.6e-6 * seg * k / 7
    if nseg == 1:
        fft = [(c * k, nfft, True)]  # one transform per taper, two tapers at a time
        passes += 14.0 * c * k * n + 60.0 * c * nfreq
        if est.adaptive and k > 1:
            passes += 40.0 * c * k * nfreq
        return dict(fft=fft, passes=passes, fixed=fixed, scale=1.0)
    m = _segment_model(n, c, seg, seg, nfft, itemsize, passes=k)
    fft, passes = m["fft"], passes + m["passes"]
    if est.adaptive and k > 1:
        passes += 90.0 * c * k * nfreq
    return dict(fft=fft, passes=passes, fixed=fixed)


@dataclass(frozen=True, kw_only=True, repr=False)
class Multitaper(SpectralEstimator):
    """Thomson's multitaper estimate with discrete prolate spheroidal (DPSS) tapers.

    Thomson's method [1]_.
    ``tapers`` orthogonal tapers of time-half-bandwidth ``bandwidth`` (NW) each give an
    eigenspectrum; their average has ``2K`` degrees of freedom (equal weights) or the
    frequency-dependent dof of Thomson's adaptive weights.  The spectral window is about
    ``2W = 2 NW fs / n`` wide.  For real data the dof fall from ``2K`` to ``K`` within
    ``W`` of DC and Nyquist, where each taper's spectral window overlaps its mirror image
    (Percival & Walden 1993, ch. 7; the variance of the estimate there is derived in
    :func:`_taper_dof`); adaptive weights get the dof of the weights actually used,
    ``2 (sum d_k^2)^2 / sum d_k^4`` (P&W eq. (370a)).  ``segment_length`` optionally applies the estimate to
    non-overlapping segments and averages them (``2K`` per segment): tapers of a whole
    long record are costly to build (about 1.4 s at 1e6 samples), so long records are
    best cut into segments.

    With adaptive weighting over several segments, the weights are computed once from
    the segment-averaged eigenspectra (our simplification).

    Parameters
    ----------
    bandwidth : float, default 4.0
        NW: the spectral window is 2NW bins wide; more NW allows more tapers.
        Allowed: a float in the range [0.5, inf).
    tapers : int or None, default None
        Number of DPSS tapers K (at most 2NW); default 2NW - 1.
        Allowed: None (2NW - 1) or an integer in the range [1, inf).
    adaptive : bool, default True
        Thomson's adaptive weighting (reduces broadband leakage).
        Allowed: True or False.
    segment_length : int or None, default None
        Apply the tapers to non-overlapping segments of this length and average.
        Allowed: None (whole record) or an integer in the range [8, inf).
    detrend : {'none', 'constant', 'linear'}, default 'constant'
        Removed from each segment before windowing: nothing, its mean, or its least-squares line.
        Allowed: one of 'none', 'constant', 'linear'.
    scaling : {'density', 'spectrum'}, default 'density'
        density: unit^2/Hz (noise levels); spectrum: unit^2 (a sine of amplitude A reads A^2/2).
        Allowed: one of 'density', 'spectrum'.
    sides : {'auto', 'onesided', 'twosided'}, default 'auto'
        auto: one-sided for real data, two-sided for complex data.
        Allowed: one of 'auto', 'onesided', 'twosided'.
    nfft : int or None, default None
        FFT length (>= the tapered length; zero padding interpolates).
        Allowed: None (no zero padding) or an integer in the range [2, 16777216].
    confidence : float, default 0.95
        Probability that the band covers the true spectrum at a given frequency.
        Allowed: a float in the range (0, 1).

    References
    ----------
    .. [1] D. J. Thomson, "Spectrum estimation and harmonic analysis," Proc. IEEE 70(9),
       1055-1096, 1982.
    """

    title: ClassVar[str] = "Thomson multitaper"

    bandwidth: float = param(
        4.0,
        Interval(float, 0.5, None),
        label="Time-bandwidth NW",
        group="window",
        help="NW: the spectral window is 2NW bins wide; more NW allows more tapers.",
    )
    tapers: int | None = param(
        None,
        Optional(Interval(int, 1, None), "2NW - 1"),
        label="Tapers",
        group="window",
        help="Number of DPSS tapers K (at most 2NW); default 2NW - 1.",
    )
    adaptive: bool = param(
        True,
        Boolean(),
        label="Adaptive weights",
        group="band",
        help="Thomson's adaptive weighting (reduces broadband leakage).",
    )
    segment_length: int | None = param(
        None,
        Optional(Interval(int, 8, None), "whole record"),
        label="Segment length",
        unit="samples",
        scale="log2",
        group="window",
        help="Apply the tapers to non-overlapping segments of this length and average.",
    )
    detrend: str = detrend_field()
    scaling: str = scaling_field()
    sides: str = sides_field()
    nfft: int | None = nfft_field("FFT length (>= the tapered length; zero padding interpolates).")
    confidence: float = confidence_field()

    @property
    def n_tapers(self) -> int:
        return self.tapers if self.tapers is not None else max(1, int(math.floor(2 * self.bandwidth)) - 1)

    def _cost(self, n: int, c: int, itemsize: int) -> dict:
        return _multitaper_cost(self, n, c, itemsize)

    def _check(self) -> None:
        if self.tapers is not None and self.tapers > math.floor(2 * self.bandwidth):
            self._fail(
                "tapers",
                f"None or an integer in the range [1, {math.floor(2 * self.bandwidth)}] (2NW)",
                "Tapers beyond 2NW are poorly concentrated; raise bandwidth to use more.",
            )
        if self.nfft is not None and self.segment_length is not None and self.nfft < self.segment_length:
            self._fail("nfft", f"None or an integer >= segment_length ({self.segment_length})")

    def _estimate(self, x: np.ndarray, fs: float, onesided: bool) -> dict:
        n = x.shape[-1]
        seg = self.segment_length or n
        if seg > n:
            raise too_short(
                "Multitaper", "segment_length", seg, n,
                f"Choose segment_length <= {n}, or None for the whole record.",
            )
        if self.bandwidth >= seg / 2:
            raise InputError(
                f"The bandwidth (NW) of Multitaper is {self.bandwidth:g}, but tapers of "
                f"{seg} samples allow NW < {seg / 2:g}. Choose a smaller bandwidth or a longer segment.",
                field="bandwidth", owner="Multitaper",
            )
        nfft = self.nfft or seg
        if nfft < seg:
            raise InputError(
                f"The nfft of Multitaper is {nfft}, shorter than the tapered length {seg}. "
                f"Leave nfft=None or choose nfft >= {seg}.", field="nfft", owner="Multitaper",
            )
        k = self.n_tapers
        key = (seg, float(self.bandwidth), k)
        nseg = n // seg
        used = nseg * seg
        if nseg == 1 and not np.iscomplexobj(x):
            expect_passes(2 if self.adaptive and k > 1 else 1)
            sk, lam, sums = _whole_record_eigenspectra(
                x[:, :used], seg, self.bandwidth, k, nfft, self.detrend, not onesided
            )
            sk /= fs
        else:
            h, lam = _tapers(*key)
            sums = h.sum(axis=1)
            expect_passes(k + (1 if self.adaptive and k > 1 else 0))
            sk = np.empty((x.shape[0], k, nfft if not onesided else nfft // 2 + 1))
            for j, taper in enumerate(h):
                p, _ = segment_power(
                    x, window=taper, step=seg, nfft=nfft, detrend=self.detrend, twosided=not onesided
                )
                np.multiply(p, 1.0 / (nseg * fs), out=sk[:, j])
        _TAPERS_BUILT.add(key)
        # (C, K, F) two-sided density of each taper
        if not np.all(np.isfinite(sk)):
            raise nonfinite_error(x, "Multitaper", used)
        checkpoint()
        variance = detrended_variance(x[:, :used], self.detrend)
        real = not np.iscomplexobj(x)
        nfreq = sk.shape[-1]
        near, u = _mirror_overlap(seg, float(self.bandwidth), k, nfft, nfreq) if real else (np.arange(0), None)
        # independent non-overlapping segments add their dof
        if self.adaptive and k > 1:
            value, dof = _adaptive(sk, lam, variance, fs, near, u)
            dof = dof * nseg
        else:
            value = sk.mean(axis=1)
            dof = _taper_dof(k, nfreq, near, u) * nseg
        # resolution: ENBW of the average spectral window of equally weighted tapers
        enbw_hz = fs * k / float(np.dot(sums, sums)) if np.dot(sums, sums) > 0 else math.nan
        if self.scaling == "spectrum":
            value = value * enbw_hz
        if onesided:
            _one_sided(value, nfft)
        return dict(
            value=value,
            dof=dof,
            freq=_freqs(nfft, fs, onesided),
            resolution=enbw_hz,
            segments=nseg,
            samples_used=used,
            variance=variance,
            limit=used,
            info=dict(
                nperseg=seg,
                nfft=nfft,
                tapers=k,
                bandwidth_hz=2 * self.bandwidth * fs / seg,
                concentrations=lam.copy(),
                samples_dropped=n - used,
            ),
        )


# ---------------------------------------------------------------- Blackman-Tukey

LAG_WINDOWS = ("parzen", "bartlett", "hann", "hamming")


@dataclass(frozen=True, kw_only=True, repr=False)
class Correlogram(SpectralEstimator):
    """Blackman-Tukey lag-window (correlogram) estimate.

    The method of Blackman and Tukey [1]_.
    The biased autocovariance up to ``max_lag`` samples, tapered by a lag window
    ``w_k``, is Fourier transformed: ``S(f) = dt sum_{|k|<=M} w_k r_k e^{-i 2 pi f k dt}``.
    Degrees of freedom ``2 N / sum_k w_k^2`` and bandwidth ``B_W = fs / sum_k w_k^2``
    (Percival & Walden 1993, section 6.7; from memory): ``resolution`` is ``B_W``.  The
    power spectrum (``scaling="spectrum"``, ``view("power")``) divides the density by the
    line factor ``dt sum_{|k|<=M} w_k (1 - |k|/N)`` instead: the height of the spectral
    window at its centre, so that a sine of amplitude ``A`` on a bin reads ``A^2/2``
    (the ``1 - |k|/N`` is the biased autocovariance's own taper; common practice).
    ``info["line_bandwidth_hz"]`` holds ``fs / sum w_k (1 - |k|/N)``.  Parzen and Bartlett lag windows
    never give negative estimates; Hann and Hamming can, and a warning then says so.
    Real data only.

    Parameters
    ----------
    max_lag : int, default 256
        Largest lag M of the autocovariance used; resolution is about fs/M.
        Allowed: an integer in the range [1, inf).
    lag_window : {'parzen', 'bartlett', 'hann', 'hamming'}, default 'parzen'
        Taper of the autocovariance; parzen and bartlett keep the estimate positive.
        Allowed: one of 'parzen', 'bartlett', 'hann', 'hamming'.
    detrend : {'none', 'constant', 'linear'}, default 'constant'
        Removed from the record first: nothing, its mean, or its least-squares line.
        Allowed: one of 'none', 'constant', 'linear'.
    scaling : {'density', 'spectrum'}, default 'density'
        density: unit^2/Hz (noise levels); spectrum: unit^2 (a sine of amplitude A reads A^2/2).
        Allowed: one of 'density', 'spectrum'.
    sides : {'auto', 'onesided', 'twosided'}, default 'auto'
        auto: one-sided for real data, two-sided for complex data.
        Allowed: one of 'auto', 'onesided', 'twosided'.
    nfft : int or None, default None
        FFT length (> max_lag); default the power of two >= 2 max_lag.
        Allowed: None (no zero padding) or an integer in the range [2, 16777216].
    confidence : float, default 0.95
        Probability that the band covers the true spectrum at a given frequency.
        Allowed: a float in the range (0, 1).

    References
    ----------
    .. [1] R. B. Blackman and J. W. Tukey, *The Measurement of Power Spectra*, Dover, 1958.
    """

    title: ClassVar[str] = "Blackman-Tukey (correlogram)"

    max_lag: int = param(
        256,
        Interval(int, 1, None),
        label="Maximum lag",
        unit="samples",
        scale="log2",
        group="window",
        help="Largest lag M of the autocovariance used; resolution is about fs/M.",
    )
    lag_window: str = param(
        "parzen",
        Options(LAG_WINDOWS),
        label="Lag window",
        group="window",
        help="Taper of the autocovariance; parzen and bartlett keep the estimate positive.",
    )
    detrend: str = detrend_field()
    scaling: str = scaling_field()
    sides: str = sides_field()
    nfft: int | None = nfft_field("FFT length (> max_lag); default the power of two >= 2 max_lag.")
    confidence: float = confidence_field()

    def _check(self) -> None:
        if self.nfft is not None and self.nfft <= self.max_lag:
            self._fail("nfft", f"None or an integer > max_lag ({self.max_lag})")

    def lag_weights(self) -> np.ndarray:
        """``w_k`` for ``k = 0..max_lag`` (symmetric window of length ``2 max_lag + 1``)."""
        m = self.max_lag
        return scipy.signal.get_window(self.lag_window, 2 * m + 1, fftbins=False)[m:]

    def _estimate(self, x: np.ndarray, fs: float, onesided: bool) -> dict:
        if np.iscomplexobj(x):
            raise InputError(
                "Correlogram supports real data only. Use Welch or Multitaper for complex data."
            )
        n = x.shape[-1]
        m = self.max_lag
        if m >= n:
            raise too_short(
                "Correlogram", "max_lag", m, n, f"Choose max_lag < {n} (typically n/10 or less)."
            )
        nfft = self.nfft or max(2, 1 << math.ceil(math.log2(2 * m)))
        r = detrended_copyless_products(x, x, m, self.detrend) / n
        if not np.all(np.isfinite(r)):
            raise nonfinite_error(x, "Correlogram")
        w = self.lag_weights()
        c = r * w
        two = (2 * scipy.fft.rfft(c, n=nfft, axis=-1).real - c[:, :1]) / fs
        if not onesided:
            full = np.concatenate([two, two[:, 1:(nfft + 1) // 2][:, ::-1]], axis=-1)
            value = full
        else:
            value = two.copy()
            _one_sided(value, nfft)
        sw2 = float(w[0] ** 2 + 2 * np.sum(w[1:] ** 2))
        bw = fs / sw2
        # line factor: the spectral window's height at its centre (see the class docstring)
        line_bw = fs / float(w[0] + 2 * np.dot(w[1:], 1 - np.arange(1, m + 1) / n))
        if self.scaling == "spectrum":
            value = value * line_bw
        neg = int(np.sum(value < 0))
        if neg:
            warnings.warn(
                f"The {self.lag_window!r} lag window gave a negative density at {neg} bin(s); "
                "use lag_window='parzen' or 'bartlett', which cannot.",
                SpecbenchWarning,
                stacklevel=3,
            )
        dof = _edge_dof(np.full(value.shape[-1], 2.0 * n / sw2), nfft, onesided, True)
        return dict(
            value=value,
            dof=dof,
            freq=_freqs(nfft, fs, onesided),
            resolution=bw,
            segments=1,
            samples_used=n,
            variance=r[:, 0].copy(),
            limit=n,
            info=dict(nfft=nfft, max_lag=m, lag_window=self.lag_window, sum_w2=sw2, line_bandwidth_hz=line_bw),
        )
