"""Cross-channel spectral analysis: cross-spectral density, coherence, phase, transfer
function and time delay, each with its uncertainty.

References
----------
.. [W] P. D. Welch, "The use of fast Fourier transform for the estimation of power
   spectra," IEEE Trans. Audio Electroacoust. AU-15(2), 70-73, 1967.
.. [C87] G. C. Carter, "Coherence and time delay estimation," Proc. IEEE 75(2), 236-255,
   1987: the threshold ``1 - alpha**(1/(n_d - 1))`` of zero-coherence estimates (memory).
.. [EG] L. D. Enochson and N. R. Goodman, "Gaussian approximations to the distribution of
   sample coherence," AFFDL-TR-65-57, 1965: ``atanh|gamma|`` is about normal with mean
   ``atanh|gamma| + 1/(2(n_d - 1))`` and variance ``1/(2(n_d - 1))`` (memory).
.. [BP] J. S. Bendat and A. G. Piersol, *Random Data: Analysis and Measurement
   Procedures*, 4th ed., Wiley, 2010, sec. 9.2: normalised random errors of the phase,
   ``sigma[phi] ~ sqrt(1 - gamma^2) / (|gamma| sqrt(2 n_d))`` rad, and of the gain
   ``eps[|H|]`` the same (Table 9.6; memory).
.. [G65] N. R. Goodman, "Measurement of matrix frequency response functions and multiple
   coherence functions," AFFDL-TR-65-56, 1965: with noise on the output only, the region
   ``|H1 - H|^2 <= F_{2, 2 n_d - 2; conf} (1 - g^2) G_yy / ((n_d - 1) G_xx)`` covers ``H``
   with probability ``conf`` (also Bendat & Piersol 2010 sec. 9.2; memory).
.. [LH] J.-S. Lee, K. W. Hoppel, S. A. Mango and A. R. Miller, "Intensity and phase statistics
   of multilook polarimetric and interferometric SAR imagery," IEEE Trans. Geosci. Remote
   Sens. 32(5), 1017-1028, 1994: the density of the phase of an n-look sample cross spectrum
   (used to check the phase variance; memory).
.. [KC] C. H. Knapp and G. C. Carter, "The generalized correlation method for estimation of
   time delay," IEEE Trans. ASSP 24(4), 320-327, 1976: variance of a cross-correlation peak
   ``int (2 pi f)^2 S_xx S_yy (1 - gamma^2) df / (T [int (2 pi f)^2 |S_xy| df]^2)`` (memory).
.. [PW] D. B. Percival and A. T. Walden, *Spectral Analysis for Physical Applications*,
   1993, eq. (292b): the variance of an average of overlapping windowed periodograms.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, field
from typing import Any, ClassVar

import numpy as np
import scipy.fft
from scipy import optimize, stats

from .._errors import InputError, SpecbenchWarning
from ._base import Estimator
from ._channels import _channel_index, select_channels
from ._common import (
    Timer,
    confidence_field,
    detrend_field,
    gaps_skip_field,
    nfft_field,
    nonfinite_error,
    overlap_field,
    segment_length_field,
    too_short,
    window_field,
)
from ._cross_engine import cross_segment_products
from ._dof import welch_dof
from ._engine import clean_segments
from ._params import Options, param
from ._results import density_unit, power_unit, register_method
from .windows import get_window, window_info, window_label

__all__ = ["CrossSpectrum", "CrossSpectrumResult", "Delay", "select_channels"]


def _z(confidence: float) -> float:
    return float(stats.norm.ppf(0.5 + confidence / 2))


# ---------------------------------------------------------------- results


@dataclass(frozen=True)
class Delay:
    """A time-delay estimate with its standard error and interval.

    ``value`` in seconds; positive means the second channel (``y``) lags the first.
    ``method`` says how it was obtained and where its standard error comes from.
    """

    value: float
    stderr: float
    lower: float
    upper: float
    confidence: float
    method: str
    channels: tuple | None = None
    band: tuple | None = None
    info: dict = field(default_factory=dict)

    @property
    def samples(self) -> float:
        """The delay in samples (``value * fs``)."""
        return self.value * self.info["fs"]

    def __repr__(self) -> str:
        pct = f"{self.confidence * 100:g} %"
        return (f"Delay({self.value * 1e3:.5g} ms +- {self.stderr * 1e3:.3g} ms (1 sigma), "
                f"{pct} interval [{self.lower * 1e3:.5g}, {self.upper * 1e3:.5g}] ms; {self.method})")


@dataclass(frozen=True, eq=False)
class CrossSpectrumResult:
    """Cross-spectral estimate of a channel pair (arrays ``(nfreq,)``) or of all pairs of
    ``C`` channels (arrays ``(C, C, nfreq)``, index ``[a, b]`` for ``a`` -> ``b``).

    Attributes
    ----------
    freq : (nfreq,) Hz
    csd : complex one-sided cross-spectral density ``G_xy`` (``conj(X) Y``, as
        ``scipy.signal.csd``), in ``unit_x*unit_y/Hz`` (density scaling)
    psd : real auto-spectra ``G_xx, G_yy`` (shape ``(2, nfreq)``, or ``(C, nfreq)``)
    coherence, coherence_lower, coherence_upper : magnitude-squared coherence and its band
        (Fisher z-transform of ``|gamma|``, Enochson & Goodman 1965; Bendat & Piersol 2010
        sec. 9.2), from ``independent_bins``
    coherence_threshold : (nfreq,) level that an estimate of zero true coherence exceeds
        with probability ``1 - confidence`` (Carter 1987)
    phase, phase_lower, phase_upper : rad, of ``G_xy`` (y relative to x; a delay ``d`` gives
        ``-2 pi f d``); band ``+- t eps`` with the normalised random error
        ``eps = sqrt(1 - g^2) / (|g| sqrt(2 (n_d - 1)))`` (Bendat & Piersol 2010 Table 9.6) and
        the Student t quantile with ``2 n_d - 2`` dof; ``+- pi`` (phase unknown) where the
        coherence is below the threshold
    transfer, gain, gain_lower, gain_upper : ``H1 = G_xy / G_xx`` and ``|H1|`` with the band
        ``|H1| exp(+- t eps)``; where Goodman's (1965) confidence circle of ``H1``, radius
        ``r^2 = F_{2, 2 n_d - 2} (1 - g^2) G_yy / ((n_d - 1) G_xx)``, reaches
        ``GAIN_CIRCLE_RATIO`` (0.35) of ``|H1|`` (low coherence, including bins below the
        threshold) the band is ``[max(0, |H1| - r), |H1| + r]``, which covers at least the
        nominal level (Bendat & Piersol 2010 sec. 9.2; memory)
    transfer_h2 : ``H2 = G_yy / G_yx``
    segments : K, segments averaged
    independent_segments : n_d, the overlap-corrected number of independent segments
        ``K^2 / (K + 2 sum_d (K - d) rho(d))`` with ``rho(d) = |sum_t w_t w_{t + d step}|^2``
        (window normalised to unit energy; Percival & Walden 1993 eq. (292b)): half the
        Welch degrees of freedom
    independent_bins : (nfreq,) n_d per bin (half at DC and Nyquist)
    """

    freq: np.ndarray
    csd: np.ndarray
    psd: np.ndarray
    coherence: np.ndarray
    coherence_lower: np.ndarray
    coherence_upper: np.ndarray
    coherence_threshold: np.ndarray
    phase: np.ndarray
    phase_lower: np.ndarray
    phase_upper: np.ndarray
    transfer: np.ndarray
    gain: np.ndarray
    gain_lower: np.ndarray
    gain_upper: np.ndarray
    transfer_h2: np.ndarray
    segments: int
    independent_segments: float
    independent_bins: np.ndarray
    resolution: float
    fs: float
    channels: tuple
    units: tuple
    confidence: float
    estimator: Any
    samples_used: int
    info: dict = field(default_factory=dict)

    # generic names used by tables and the conformance suite: the coherence and its band
    @property
    def value(self) -> np.ndarray:
        return self.coherence

    @property
    def lower(self) -> np.ndarray:
        return self.coherence_lower

    @property
    def upper(self) -> np.ndarray:
        return self.coherence_upper

    @property
    def is_matrix(self) -> bool:
        return self.csd.ndim == 3

    @property
    def gain_h2(self) -> np.ndarray:
        return np.abs(self.transfer_h2)

    @property
    def unit(self) -> str:
        """Unit of ``csd`` (pair results)."""
        ux, uy = self.units[0], self.units[-1]
        prod = power_unit(ux) if ux == uy else (f"{ux}*{uy}" if ux and uy else ux or uy)
        if self.estimator.scaling == "density":
            return density_unit(ux) if ux == uy else f"{prod}/Hz"
        return prod

    @property
    def gain_unit(self) -> str:
        ux, uy = self.units[0], self.units[-1]
        return "" if ux == uy else f"{uy}/{ux}" if ux else uy

    def pair(self, a: int | str, b: int | str) -> CrossSpectrumResult:
        """The result of one pair ``a -> b`` out of a full-matrix result."""
        if not self.is_matrix:
            keys = {self.channels[0]: 0, self.channels[1]: 1, 0: 0, 1: 1}
            if (a, b) in ((self.channels[0], self.channels[1]), (0, 1)):
                return self
            if a in keys and b in keys and keys[a] != keys[b]:
                raise InputError("This result is for one pair; estimate the reversed pair with pair=(b, a).")
            raise InputError(f"No pair ({a!r}, {b!r}) in a result for {self.channels}.")
        c = self.csd.shape[0]
        i, j = _channel_index(a, self.channels, c), _channel_index(b, self.channels, c)
        if i == j:
            raise InputError(f"pair({a!r}, {b!r}) names one channel twice; choose two different channels.")
        pick = {k: getattr(self, k)[i, j] for k in (
            "csd", "coherence", "coherence_lower", "coherence_upper", "phase", "phase_lower",
            "phase_upper", "transfer", "gain", "gain_lower", "gain_upper", "transfer_h2")}
        from dataclasses import replace

        return replace(self, psd=self.psd[[i, j]], channels=(self.channels[i], self.channels[j]),
                       units=(self.units[i], self.units[j]), **pick)

    def delay(self, band: tuple[float, float] | None = None) -> Delay:
        """Time delay of ``y`` relative to ``x`` from the slope of the phase.

        Over the bins of ``band`` (Hz; default the whole range) whose coherence exceeds
        ``coherence_threshold``, the phase relative to a coarse delay (the peak of the
        phase-only inverse transform, to 1/8 sample) is fitted by weighted least squares
        ``phi(f) = a - 2 pi f d``, weights ``1 / sigma[phi]^2`` with
        ``sigma[phi]^2 = (1 - g^2) / (2 (n_d - 1) g^2)`` (Bendat & Piersol 2010, with
        ``n_d - 1`` as in the phase band).  Before the fit the phase is corrected for the
        segment misalignment: the two channels' windows see samples ``d`` apart, which tilts
        the expected phase by ``(d ln|G_xy|/df) m(d)`` where ``|G_xy|`` slopes (``m`` a moment
        of the spectral window; first order, our derivation; ``info["misalignment_correction"]``
        gives its effect on ``d``).  The standard error is the larger of two sandwich
        variances with the window's bin-to-bin correlation ``|c_j|^2``,
        ``c_j = sum_t w_t^2 exp(-2i pi j t / nfft) / sum_t w_t^2``: the model's (inflated by
        the residual scatter when that exceeds the model, ``info["residual_scatter"]``) and
        the residuals' own.  The interval is ``d +- z stderr``.  Measured 90 % coverage is in
        the tests; at low coherence with few segments (``n_d`` ~ 30, coherence ~ 0.25) it
        falls to about 0.86, because bins that pass the threshold by chance carry random
        phases.  Choose a band where the two channels are clearly coherent: in a filter's
        stop band the phase can jump by pi (sign changes of a linear-phase response), which
        no straight line fits.
        """
        if self.is_matrix:
            raise InputError(
                "delay() needs one pair: take it from res.pair(a, b).delay(...), or estimate "
                "with pair=(a, b)."
            )
        return _phase_delay(self, band)

    def to_dataframe(self):
        import pandas as pd

        if self.is_matrix:
            raise InputError("to_dataframe() works on one pair: use res.pair(a, b).to_dataframe().")
        cols = {k: getattr(self, k) for k in (
            "coherence", "coherence_lower", "coherence_upper", "coherence_threshold", "phase",
            "phase_lower", "phase_upper", "gain", "gain_lower", "gain_upper")}
        cols = {"csd_real": self.csd.real, "csd_imag": self.csd.imag, **cols}
        return pd.DataFrame(cols, index=pd.Index(self.freq, name="freq_hz"))

    def __repr__(self) -> str:
        what = (f"{len(self.channels)} channels (all pairs)" if self.is_matrix
                else f"{self.channels[0]} -> {self.channels[1]}")
        return (f"<CrossSpectrumResult {what}: {self.freq.size} bins to {self.freq[-1]:g} Hz, "
                f"resolution {self.resolution:.4g} Hz, K = {self.segments} segments, "
                f"n_d = {self.independent_segments:.4g} independent; {self.estimator!r}>")


# ---------------------------------------------------------------- estimator


#: the gain band is Goodman's circle projection where its radius reaches this fraction of |H1|
GAIN_CIRCLE_RATIO = 0.35


def _coherence_bands(coh: np.ndarray, nd: np.ndarray, confidence: float):
    """Fisher z band of |gamma| (Enochson & Goodman 1965), returned for gamma^2."""
    z = _z(confidence)
    ndm1 = np.maximum(nd - 1.0, 1e-12)
    with np.errstate(divide="ignore", invalid="ignore"):
        zh = np.arctanh(np.sqrt(np.clip(coh, 0.0, 1.0 - 1e-16))) - 1.0 / (2.0 * ndm1)
        sd = 1.0 / np.sqrt(2.0 * ndm1)
        lo = np.tanh(np.maximum(zh - z * sd, 0.0)) ** 2
        hi = np.tanh(np.maximum(zh + z * sd, 0.0)) ** 2
    return lo, np.maximum(hi, lo)


def _random_error(coh: np.ndarray, nd: np.ndarray) -> np.ndarray:
    """sqrt(1 - gamma^2) / (|gamma| sqrt(2 n_d)) (Bendat & Piersol 2010, Table 9.6)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.sqrt(np.clip(1.0 - coh, 0.0, None)) / (np.sqrt(coh) * np.sqrt(2.0 * nd))


@dataclass(frozen=True, kw_only=True, repr=False)
class CrossSpectrum(Estimator):
    """Welch-type averaged cross periodograms of two (or all) channels.

    Welch's averaging [1]_ applied to cross periodograms.

    Each channel is cut into segments of ``segment_length`` samples overlapping by
    ``overlap``; each segment is detrended, windowed and transformed once, and
    ``conj(X_a) X_b`` is averaged over segments for every pair.  For the same settings the
    cross-spectral density equals ``scipy.signal.csd`` and the coherence
    ``scipy.signal.coherence`` to floating-point precision.

    Uncertainty comes from ``n_d``, the overlap-corrected number of independent segments
    (half the Welch degrees of freedom, Percival & Walden 1993 eq. (292b)):

    - coherence threshold ``1 - alpha**(1/(n_d - 1))``, ``alpha = 1 - confidence``
      (Carter 1987): zero true coherence exceeds it with probability ``alpha``;
    - coherence band: Fisher z-transform of ``|gamma|`` with bias ``1/(2(n_d - 1))`` and
      variance ``1/(2(n_d - 1))`` (Enochson & Goodman 1965; Bendat & Piersol 2010 sec. 9.2);
    - phase band ``phi +- t eps``, gain band ``|H1| exp(+- t eps)`` with the normalised
      random error ``eps = sqrt(1 - gamma^2) / (|gamma| sqrt(2 (n_d - 1)))`` (Bendat &
      Piersol 2010, Table 9.6) and the Student t quantile with ``2 n_d - 2`` dof; where the
      coherence is below the threshold the phase band is ``+- pi``.  The log gain band is
      first order in the error: at low coherence (it covered ~0.91 at a nominal 0.95 below
      coherence 0.2) the gain band is the gain range of Goodman's (1965) confidence circle
      of ``H1`` instead, exact for the circle and conservative for the gain (measured
      coverage by coherence level in the tests).

    Call it as ``xs(signal, pair=("a", "b"))`` (names or indices), ``xs(x, y, fs=...)``,
    or ``xs(signal)`` for all pairs of a multichannel signal (``res.pair(a, b)``).  A
    two-channel signal without ``pair`` gives the pair ``(0, 1)``; ``pair="all"`` always
    gives the full matrix.

    Parameters
    ----------
    window : str or tuple, default 'hann'
        Taper applied to each segment: a name, or (name, parameter) for windows that take one.
        Allowed: a window name such as 'hann' or a tuple (name, parameter) such as ('kaiser', 8.6).
    segment_length : int, default 1024
        Samples per segment: longer gives finer resolution and fewer averages.
        Allowed: an integer in the range [4, inf).
    overlap : float, default 0.5
        Fraction of each segment shared with the next.
        Allowed: a float in the range [0, 1).
    detrend : {'none', 'constant', 'linear'}, default 'constant'
        Removed from each segment before windowing: nothing, its mean, or its least-squares line.
        Allowed: one of 'none', 'constant', 'linear'.
    scaling : {'density', 'spectrum'}, default 'density'
        density: unit^2/Hz; spectrum: unit^2. Coherence, phase and gain do not depend on it.
        Allowed: one of 'density', 'spectrum'.
    nfft : int or None, default None
        FFT length per segment (>= segment length; zero padding interpolates).
        Allowed: None (no zero padding) or an integer in the range [2, 16777216].
    confidence : float, default 0.95
        Probability that the band covers the true spectrum at a given frequency.
        Allowed: a float in the range (0, 1).
    gaps : {'error', 'skip'}, default 'error'
        error: non-finite samples are an error; skip: leave out segments that touch them.
        Allowed: one of 'error', 'skip'.

    References
    ----------
    .. [1] P. D. Welch, "The use of fast Fourier transform for the estimation of power
       spectra," IEEE Trans. Audio Electroacoust. AU-15(2), 70-73, 1967.

    Examples
    --------
    >>> import numpy as np, specbench as sb
    >>> rng = np.random.default_rng(1)
    >>> x = rng.standard_normal(200_000)
    >>> y = x + rng.standard_normal(x.size)          # signal-to-noise ratio s = 1
    >>> res = sb.CrossSpectrum(segment_length=512)(x, y, fs=1000.0)
    >>> c = res.coherence[1:-1].mean()                # bias (1 - g^2)^2 / n_d ~ 0.0003
    >>> print(f"coherence {c:.3f} (s/(1+s) = 0.5), n_d = {res.independent_segments:.0f}")
    coherence 0.501 (s/(1+s) = 0.5), n_d = 739
    """

    kind: ClassVar[str] = "CrossSpectrum"
    title: ClassVar[str] = "Cross spectrum (averaged segments)"

    window: Any = window_field("hann")
    segment_length: int = segment_length_field()
    overlap: float = overlap_field()
    detrend: str = detrend_field()
    scaling: str = param(
        "density",
        Options(("density", "spectrum")),
        label="Scaling",
        group="display",
        help="density: unit^2/Hz; spectrum: unit^2. Coherence, phase and gain do not depend on it.",
    )
    nfft: int | None = nfft_field("FFT length per segment (>= segment length; zero padding interpolates).")
    confidence: float = confidence_field()
    gaps: str = gaps_skip_field()

    def _check(self) -> None:
        if self.nfft is not None and self.nfft < self.segment_length:
            self._fail("nfft", f"None or an integer >= segment_length ({self.segment_length})",
                       "Zero padding can only lengthen a segment.")

    @property
    def noverlap(self) -> int:
        return int(math.floor(self.overlap * self.segment_length))

    def __call__(self, x: Any, y: Any = None, *, fs: float | None = None,
                 pair: tuple | None = None) -> CrossSpectrumResult:
        """Estimate the cross spectra of ``x`` and ``y``, of ``pair``, or of all channels."""
        ch = select_channels("CrossSpectrum", x, y, fs, pair, allow_matrix=True)
        if any(np.iscomplexobj(c) for c in ch.data):
            raise InputError("CrossSpectrum supports real data only; pass the real and imaginary parts separately.")
        n = ch.data[0].shape[-1]
        nperseg = self.segment_length
        if nperseg > n:
            raise too_short("CrossSpectrum", "segment_length", nperseg, n,
                            f"Choose segment_length <= {n // 2} so that at least two segments are "
                            "averaged, or analyse a longer span.")
        step = nperseg - self.noverlap
        nfft = self.nfft or nperseg
        n_all = (n - nperseg) // step + 1
        mask = None
        if self.gaps == "skip":
            clean = np.ones(n_all, dtype=bool)
            for c in ch.data:
                clean &= clean_segments(c[None, :], nperseg, step)
            if not clean.all():
                mask = clean
                if not mask.any():
                    raise InputError(
                        f"Every one of the {n_all} segments touches a non-finite sample, so "
                        "CrossSpectrum(gaps='skip') has nothing left to average. Use a shorter "
                        "segment_length, or a span with fewer gaps."
                    )
        used = n_all if mask is None else int(mask.sum())
        if used < 2:
            raise InputError(
                f"CrossSpectrum would average {used} segment{'s' if used != 1 else ''} "
                f"(segment_length={nperseg} of {n} samples{', after leaving out gaps' if mask is not None else ''}): "
                "with one segment the coherence is identically 1 whatever the data, so it says "
                f"nothing. Choose a shorter segment_length (at most {max(4, n // 2)}, ideally "
                "giving 8 or more segments) or a longer record.", field="segment_length", owner="CrossSpectrum"
            )
        w = get_window(self.window, nperseg)
        with Timer() as t, np.errstate(invalid="ignore", over="ignore"):
            s, k = cross_segment_products(ch.data, window=w, step=step, nfft=nfft, detrend=self.detrend,
                                          segments=None if mask is None else np.nonzero(mask)[0])
        diag = np.arange(len(ch.data))
        if not np.all(np.isfinite(s[diag, diag].real)):
            for c in ch.data:
                if not np.all(np.isfinite(c)):
                    raise nonfinite_error(c[None, :], "CrossSpectrum")
        scale = 1.0 / (ch.fs * float(np.dot(w, w))) if self.scaling == "density" else 1.0 / float(w.sum()) ** 2
        g = s * (scale / k)
        if nfft % 2:
            g[..., 1:] *= 2
        else:
            g[..., 1:-1] *= 2
        nd = welch_dof(w, step, k if mask is None else mask) / 2.0
        ndb = np.full(g.shape[-1], nd)
        ndb[0] *= 0.5
        if nfft % 2 == 0:
            ndb[-1] *= 0.5
        auto = g[diag, diag].real  # (C, F)
        with np.errstate(divide="ignore", invalid="ignore"):
            coh = np.abs(g) ** 2 / auto[:, None, :] / auto[None, :, :]
            h1 = g / auto[:, None, :]
            h2 = auto[None, :, :] / np.conj(g)
        alpha = 1.0 - self.confidence
        thr = 1.0 - alpha ** (1.0 / np.maximum(ndb - 1.0, 1e-12))
        clo, chi = _coherence_bands(coh, ndb, self.confidence)
        eps = _random_error(coh, ndb - 1.0)
        tq = stats.t.ppf(0.5 + self.confidence / 2, np.maximum(2.0 * ndb - 2.0, 1.0))
        significant = coh > thr
        phase = np.angle(g)
        half = np.where(significant, np.minimum(tq * eps, np.pi), np.pi)
        gain = np.abs(h1)
        with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
            # Goodman's (1965) confidence circle of H1 (noise on y only): |H1 - H| <= radius with
            # probability `confidence` at every coherence; radius^2 = F_{2, 2 n_d - 2} (1 - g^2)
            # G_yy / ((n_d - 1) G_xx) (Bendat & Piersol 2010 sec. 9.2; memory)
            fq = stats.f.ppf(self.confidence, 2.0, np.maximum(2.0 * ndb - 2.0, 1.0))
            radius = np.sqrt(fq / np.maximum(ndb - 1.0, 1e-12) * np.clip(1.0 - coh, 0.0, None)
                             * auto[None, :, :] / auto[:, None, :])
            # the log band |H1| exp(+- t eps) is first order in radius / |H1|; where that is not
            # small (low coherence: coverage fell to ~0.91 at 0.95) the band is the circle's gain
            # range [|H1| - radius, |H1| + radius] instead (covers at least the nominal level)
            wide = ~(radius < GAIN_CIRCLE_RATIO * gain)
            glo = np.where(wide, np.maximum(gain - radius, 0.0), gain * np.exp(-tq * eps))
            ghi = np.where(wide, gain + radius, gain * np.exp(tq * eps))
        info = window_info(self.window, nperseg)
        freq = scipy.fft.rfftfreq(nfft, 1.0 / ch.fs)
        arrays = dict(csd=g, coherence=coh, coherence_lower=clo, coherence_upper=chi, phase=phase,
                      phase_lower=phase - half, phase_upper=phase + half, transfer=h1, gain=gain,
                      gain_lower=glo, gain_upper=ghi, transfer_h2=h2)
        if not ch.matrix:
            arrays = {key: v[0, 1] for key, v in arrays.items()}
        return CrossSpectrumResult(
            freq=freq, psd=auto, coherence_threshold=thr, segments=int(k), independent_segments=float(nd),
            independent_bins=ndb, resolution=info.enbw_bins * ch.fs / nperseg, fs=ch.fs,
            channels=ch.names, units=ch.units, confidence=self.confidence, estimator=self,
            samples_used=(n_all - 1) * step + nperseg,
            info=dict(nperseg=nperseg, noverlap=nperseg - step, step=step, nfft=nfft,
                      window_label=window_label(self.window), enbw_bins=info.enbw_bins,
                      segments_skipped=0 if mask is None else int(n_all - k),
                      samples_dropped=n - ((n_all - 1) * step + nperseg),
                      compute_seconds=t.seconds),
            **arrays,
        )


# ---------------------------------------------------------------- delay from the phase slope


def _bin_correlation(window: np.ndarray, nfft: int, max_shift: int) -> np.ndarray:
    """|c_j|^2, j = 0..max_shift: correlation of cross-spectral errors j bins apart."""
    w2 = window.astype(np.float64) ** 2
    if w2.size <= nfft and max_shift <= nfft // 2:
        # c_j = sum_t w2_t exp(-2 pi i j t / nfft) / sum w2: bins 0..max_shift of the transform
        c = scipy.fft.rfft(w2, n=nfft)[: max_shift + 1] / w2.sum()
    else:
        t = np.arange(w2.size)
        j = np.arange(max_shift + 1)[:, None]
        c = (w2[None, :] * np.exp(-2j * np.pi * j * t[None, :] / nfft)).sum(axis=1) / w2.sum()
    return np.abs(c) ** 2


def _log_magnitude(g: np.ndarray) -> np.ndarray:
    """ln|g| with DC (0 after detrending) and exact zeros replaced by their neighbours' level."""
    mag = np.abs(g).astype(np.float64)
    positive = mag > 0
    floor = float(mag[positive].min()) if positive.any() else 1.0
    out = np.log(np.where(positive, mag, floor))
    if out.size > 2:
        out[0] = out[1]
    return out


def _misalignment_moment(window: np.ndarray, tau: float) -> float:
    """m(tau) = int u |W(u)|^2 sin(2 pi u tau) du / int |W(u)|^2 cos(2 pi u tau) du (u in cycles
    per sample, tau in samples) on a fine grid of the window's transform."""
    if tau == 0:
        return 0.0
    n = scipy.fft.next_fast_len(8 * window.size)
    w2 = np.abs(scipy.fft.fft(window.astype(np.float64), n=n)) ** 2
    u = scipy.fft.fftfreq(n)
    den = float(np.sum(w2 * np.cos(2 * np.pi * u * tau)))
    return float(np.sum(u * w2 * np.sin(2 * np.pi * u * tau))) / den if den > 0 else 0.0


def _banded_meat(u: np.ndarray, idx: np.ndarray, rho: np.ndarray, nbins: int) -> np.ndarray:
    """sum_kl u_k u_l^T rho(|idx_k - idx_l|) for rho zero beyond its length (no n x n matrix)."""
    full = np.zeros((nbins, u.shape[1]))
    full[idx] = u
    out = rho[0] * full.T @ full
    for j in range(1, min(rho.size, nbins)):
        cross = full[:-j].T @ full[j:]
        out += rho[j] * (cross + cross.T)
    return out


def _check_band(band: Any, fs: float, owner: str) -> tuple[float, float]:
    nyq = fs / 2
    if band is None:
        return 0.0, nyq
    try:
        f1, f2 = (float(v) for v in band)
    except (TypeError, ValueError):
        raise InputError(f"{owner}: band= must be two frequencies (f1, f2) in Hz; got {band!r}.") from None
    if not (math.isfinite(f1) and math.isfinite(f2)) or f1 >= f2:
        raise InputError(f"{owner}: band=({f1:g}, {f2:g}) Hz must have f1 < f2. Give band=(low, high).")
    if f1 < 0 or f2 > nyq * (1 + 1e-12):
        raise InputError(
            f"{owner}: band=({f1:g}, {f2:g}) Hz lies outside the data's range 0 to {nyq:g} Hz "
            f"(half the sample rate {fs:g} Hz). Choose a band inside it."
        )
    return f1, f2


def _phase_delay(res: CrossSpectrumResult, band: Any) -> Delay:
    f1, f2 = _check_band(band, res.fs, "delay()")
    freq = res.freq
    interior = np.ones(freq.size, dtype=bool)
    interior[0] = False
    if res.info["nfft"] % 2 == 0:
        interior[-1] = False
    inband = (freq >= f1) & (freq <= f2) & interior
    coherent = inband & (res.coherence > res.coherence_threshold)
    if coherent.sum() < 2:
        top = float(np.max(res.coherence[inband])) if inband.any() else float("nan")
        raise InputError(
            f"delay(band=({f1:g}, {f2:g}) Hz): {int(coherent.sum())} bin(s) of {int(inband.sum())} in the "
            f"band have coherence above the threshold {float(np.median(res.coherence_threshold)):.3g} "
            f"(largest {top:.3g}); at least 2 are needed to fit a phase slope. Choose a band where "
            "the channels are coherent, or raise the number of segments (shorter segment_length, "
            "longer record)."
        )
    idx = np.nonzero(coherent)[0]
    g = res.csd
    nfft = res.info["nfft"]
    # coarse delay: peak of the phase-only (unit-magnitude) inverse transform over coherent bins
    up = 8
    spec = np.zeros(nfft * up // 2 + 1, dtype=np.complex128)
    spec[idx] = g[idx] / np.abs(g[idx])
    cc = scipy.fft.irfft(spec, n=nfft * up)
    kmax = int(np.argmax(cc))
    if kmax > nfft * up // 2:
        kmax -= nfft * up
    tau0 = kmax / (res.fs * up)  # irfft of conj(X) Y peaks at +d when y lags x by d
    misaligned = abs(tau0) * res.fs / res.info["nperseg"]
    if misaligned > 0.03:
        warnings.warn(
            f"The delay ({tau0 * res.fs:.3g} samples) is {misaligned:.1%} of the segment length "
            f"({res.info['nperseg']}): segments of the two channels overlap only partly, which biases "
            "the phase slope towards zero delay (Carter 1987). Use a segment_length of at least "
            f"{int(np.ceil(abs(tau0) * res.fs / 0.03))} samples, or the cross-correlation delay.",
            SpecbenchWarning, stacklevel=3,
        )
    f = freq[idx]
    # residual phase after the coarse delay (within 1/16 sample: |residual| < pi/8 at Nyquist),
    # wrapped, not unwrapped: a chance-coherent bin with a random phase then cannot shift
    # the bins after it by 2 pi
    resid = np.angle(g[idx] * np.exp(2j * np.pi * f * tau0))
    window = get_window(res.estimator.window, res.info["nperseg"])
    # segment misalignment: the two channels' windows see samples tau0 apart, so the expected
    # phase is that of the spectral window |W|^2 smoothing G_xy e^{+2 pi i u tau0}: to first
    # order phi + (d ln|G_xy| / df) m(tau0), m = int u |W|^2 sin(2 pi u tau0) du / int |W|^2
    # cos(2 pi u tau0) du (f, u in cycles per sample).  Where |G_xy| slopes this tilts the
    # phase line towards zero delay; it is removed before the fit (our derivation).
    shift = np.gradient(_log_magnitude(g), (freq[1] - freq[0]) / res.fs)[idx] * _misalignment_moment(
        window, tau0 * res.fs)
    resid = resid + shift
    # phase variance (1 - g^2) / (2 (n_d - 1) g^2): Bendat & Piersol's normalised random error
    # with n_d - 1, as the phase band; the variance of the phase density of Lee et al. (1994)
    # [LH] is within 5 % of it for g^2 >= 0.5 and n_d >= 14 (checked in the tests)
    sigma = _random_error(res.coherence[idx], np.maximum(res.independent_bins[idx] - 1.0, 1e-12))
    wts = 1.0 / sigma**2
    a = np.stack([np.ones_like(f), f], axis=1)
    aw = a * wts[:, None]
    bread = np.linalg.inv(a.T @ aw)
    coef = bread @ (aw.T @ resid)
    # sandwich variances with the window's bin-to-bin correlation |c_j|^2 (banded): the model's
    # (errors sigma), and the residuals' own (errors r); the larger one is reported, the model's
    # first inflated by the residual scatter when that exceeds the model's expectation
    rho = _bin_correlation(window, nfft, 64)
    r = resid - a @ coef
    model = _banded_meat(aw * sigma[:, None], idx, rho, freq.size)
    observed = _banded_meat(aw * r[:, None], idx, rho, freq.size)
    expected = idx.size - float(np.trace(bread @ model))  # E[r' W r] under the model
    scatter = float(np.sum(wts * r * r)) / expected if expected > 0 else 1.0
    cov_model = bread @ model @ bread * max(scatter, 1.0)
    cov_obs = bread @ observed @ bread
    value = tau0 - coef[1] / (2 * np.pi)
    stderr = math.sqrt(max(cov_model[1, 1], cov_obs[1, 1], 0.0)) / (2 * np.pi)
    z = _z(res.confidence)
    return Delay(
        value=float(value), stderr=float(stderr), lower=float(value - z * stderr),
        upper=float(value + z * stderr), confidence=res.confidence,
        method=("weighted least-squares phase slope over coherent bins, segment misalignment removed; "
                "stderr: Bendat & Piersol 2010 phase errors, sandwich with the window's bin correlation"),
        channels=res.channels, band=(f1, f2),
        info=dict(fs=res.fs, bins_used=int(idx.size), bins_in_band=int(inband.sum()),
                  intercept_rad=float(coef[0]), coarse_delay=float(tau0), misalignment=misaligned,
                  misalignment_correction=float(-(bread @ (aw.T @ shift))[1] / (2 * np.pi)),
                  residual_scatter=scatter),
    )


# ---------------------------------------------------------------- delay from a cross-correlation peak


def _sinc_sum(tau: float, k: np.ndarray, r: np.ndarray, deriv: int = 0) -> float:
    """Whittaker-Shannon interpolation sum_k r_k sinc(tau - k) (in samples) or a derivative."""
    u = tau - k
    if deriv == 0:
        return float(np.dot(r, np.sinc(u)))
    pu = np.pi * u
    small = np.abs(u) < 1e-6
    safe = np.where(small, 1.0, u)
    if deriv == 1:
        d = np.where(small, 0.0, (np.cos(pu) * pu - np.sin(pu)) / (np.pi * safe**2))
        return float(np.dot(r, d))
    psafe = np.pi * safe
    d2 = (-(psafe**2) * np.sin(psafe) - 2 * psafe * np.cos(psafe) + 2 * np.sin(psafe)) / (np.pi * safe**3)
    d2 = np.where(small, -(np.pi**2) / 3.0, d2)
    return float(np.dot(r, d2))


def correlation_delay(corr: Any, half_width: int = 32) -> Delay:
    """Delay of a cross :class:`Correlation` from its peak, with a standard error.

    The peak is refined to a fraction of a sample by maximising the band-limited
    (Whittaker-Shannon, sinc) interpolation of the correlation over +-``half_width``
    lags around the largest sample.  The standard error is the linearised variance of a
    cross-correlation peak (Knapp & Carter 1976, with the Bartlett/Hannan-Thomson variance
    of the correlation's slope): ``var = int (2 pi f)^2 (S_xx S_yy - |S_xy|^2) df /
    (T R''(d)^2)``, with two-sided spectra from the correlations (Blackman-Tukey with a
    triangular lag window centred on the peak), ``T`` the record length and ``R''`` the
    curvature of the interpolated peak.
    """
    if corr.kind != "cross":
        raise InputError("delay() needs a cross-correlation (sb.CrossCorrelation), not an autocorrelation.")
    if np.ndim(corr.value) != 1:
        raise InputError("delay() needs the correlation of one pair of channels.")
    if "auto" not in corr.info:
        raise InputError("This cross-correlation carries no autocorrelations; recompute it with this specbench.")
    fs = corr.fs
    m = corr.info["max_lag_samples"]
    norm = corr.info.get("norm", 1.0) if corr.estimator.normalize else 1.0
    r = np.asarray(corr.value, dtype=np.float64) * norm  # unnormalised, lags -m..m
    lags = np.arange(-m, m + 1)
    i0 = int(np.argmax(np.abs(r)))
    sign = 1.0 if r[i0] >= 0 else -1.0
    if i0 in (0, 2 * m):
        raise InputError(
            f"The cross-correlation peaks at the edge of its lag range (lag {lags[i0] / fs:g} s = max_lag): "
            "the true peak may lie beyond it. Choose a larger max_lag."
        )
    lo_i, hi_i = max(0, i0 - half_width), min(2 * m + 1, i0 + half_width + 1)
    kk = lags[lo_i:hi_i].astype(np.float64)
    rr = sign * r[lo_i:hi_i]
    k0 = float(lags[i0])
    opt = optimize.minimize_scalar(lambda t: -_sinc_sum(t, kk, rr), bounds=(k0 - 1.0, k0 + 1.0),
                                   method="bounded", options=dict(xatol=1e-7))
    d_samples = float(opt.x)
    curv = _sinc_sum(d_samples, kk, rr, deriv=2) * fs * fs  # unit^2 / s^2 (R'' in seconds)
    # spectra from the correlations (two-sided, unit^2/Hz), triangular lag window
    raa, rbb = (np.asarray(v, dtype=np.float64) for v in corr.info["auto"])
    mw = int(min(m - abs(lags[i0]), raa.size - 1))
    nfft = scipy.fft.next_fast_len(8 * max(mw, 8))
    tri = 1.0 - np.arange(mw + 1) / (mw + 1)

    def bt_even(rv):
        seq = np.zeros(nfft)
        seq[: mw + 1] = rv[: mw + 1] * tri
        seq[nfft - mw:] = (rv[1: mw + 1] * tri[1:])[::-1]
        return scipy.fft.rfft(seq).real / fs

    sxx, syy = bt_even(raa), bt_even(rbb)
    seq = np.zeros(nfft)
    centre = i0
    for j in range(-mw, mw + 1):
        seq[j % nfft] = r[centre + j] * tri[abs(j)]
    sxy = np.abs(scipy.fft.rfft(seq)) / fs
    f = scipy.fft.rfftfreq(nfft, 1.0 / fs)
    wgt = np.full(f.size, 2.0)  # two-sided integral over a one-sided grid
    wgt[0] = 1.0
    if nfft % 2 == 0:
        wgt[-1] = 1.0
    df = fs / nfft
    num = float(np.sum(wgt * (2 * np.pi * f) ** 2 * np.clip(sxx * syy - sxy**2, 0.0, None)) * df)
    pairs = corr.info.get("pairs")  # present pairs per lag, with gaps
    t_len = (float(pairs[i0]) if pairs is not None else corr.n) / fs
    if curv >= 0 or not math.isfinite(curv):
        raise InputError("The cross-correlation has no peak to fit (flat or noisy around its maximum). "
                         "Choose a larger max_lag or a longer record.")
    var = num / (t_len * curv * curv)
    value = d_samples / fs
    stderr = math.sqrt(var)
    z = _z(corr.confidence)
    return Delay(
        value=value, stderr=stderr, lower=value - z * stderr, upper=value + z * stderr,
        confidence=corr.confidence,
        method="cross-correlation peak, sinc-interpolated; stderr: Knapp & Carter 1976 peak variance",
        channels=corr.channels,
        info=dict(fs=fs, peak_sample=int(lags[i0]), peak_value=float(r[i0] / norm), sign=sign),
    )


register_method("delay", correlation_delay)  # Correlation.delay() of a cross-correlation
