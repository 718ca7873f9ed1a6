"""Exact spectral truth of the simulated demo processes.

Every random part of a demo is a linear process driven by white Gaussian noise: a
*source* ``u = e / A(z)`` (white, first-order autoregressive -- the sampled first-order
Gauss-Markov process --, second-order autoregressive -- a sampled damped resonance -- or a
random walk), seen in a channel through a finite impulse response ``B(z)`` (a gain, a
filter, a delay).  For these the density of the *sampled* process is known exactly:

    S(f) = q / fs * |B(e^{iw})|^2 / |A(e^{iw})|^2,   w = 2 pi f / fs      (two-sided)

(Priestley 1981, "Spectral Analysis and Time Series", sec. 4.12, the spectrum of an
ARMA process; memory).  The one-sided density is ``2 S(f)`` on ``0 < f < fs/2``; at 0
and fs/2 it is ``S(f)``, the value a one-sided Welch estimate has there
(``scipy.signal.welch`` does not double those bins).  Components in different channels
that share a source are correlated; their cross-spectrum is
``q / fs * B_i conj(B_j) / |A|^2``.

Deterministic tones ("lines") have no density: ``psd`` gives the continuous part only,
and the lines are listed in :attr:`Truth.lines` (frequency in Hz, mean square A^2/2).
Their autocorrelation, averaged over a random phase, is ``A^2/2 cos(2 pi f tau)`` and is
included in :meth:`Truth.acf`.  A random walk has no stationary density; ``psd`` gives
its pseudo-spectrum ``q / (fs 4 sin^2(w/2))`` (NaN at 0 Hz), which a segment-averaged
estimate with mean removal approaches away from its lowest few bins; its ``acf`` is NaN.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np
from scipy import signal as _sig

__all__ = ["Source", "Component", "Line", "Truth"]


@dataclass(frozen=True)
class Source:
    """White noise of variance ``q`` through ``1/A(z)``; ``a`` is ``(1,)``, ``(1, a1)``,
    ``(1, a1, a2)`` (complex poles) or ``(1, -1)`` (random walk)."""

    q: float
    a: tuple[float, ...] = (1.0,)

    @property
    def random_walk(self) -> bool:
        return len(self.a) == 2 and self.a[1] == -1.0

    def density(self, w: np.ndarray, fs: float) -> np.ndarray:
        """Two-sided density of ``u`` at angular frequencies ``w`` (rad/sample)."""
        z = np.exp(-1j * w)
        a = np.polyval(np.asarray(self.a)[::-1], z)  # A(z) = sum a_k z^-k
        with np.errstate(divide="ignore"):
            return self.q / fs / np.abs(a) ** 2

    def acf(self, m: np.ndarray) -> np.ndarray:
        """Autocovariance of ``u`` at integer lags ``m`` (NaN for a random walk)."""
        m = np.abs(np.asarray(m, dtype=np.int64))
        if len(self.a) == 1:
            return np.where(m == 0, self.q, 0.0)
        if self.random_walk:
            return np.full(m.shape, np.nan)
        if len(self.a) == 2:
            phi = -self.a[1]
            return self.q / (1 - phi**2) * phi ** m.astype(np.float64)
        a1, a2 = self.a[1], self.a[2]
        # Yule-Walker for an AR(2) (Box & Jenkins 1976, sec. 3.2.4; memory), closed form
        # over the complex pole pair p, conj(p): r_k = 2 Re(c p^k).
        r0 = self.q * (1 + a2) / ((1 - a2) * ((1 + a2) ** 2 - a1**2))
        r1 = -a1 * r0 / (1 + a2)
        p = np.roots([1.0, a1, a2])[0]
        alpha = r0 / 2
        beta = (alpha * p.real - r1 / 2) / p.imag
        return 2 * np.real((alpha + 1j * beta) * p ** m.astype(np.float64))

    def memory(self) -> int:
        """Samples after which the start-up transient of ``1/A`` is below 1e-17."""
        if len(self.a) == 1 or self.random_walk:
            return 0
        radius = float(np.max(np.abs(np.roots(self.a))))
        return int(np.ceil(np.log(1e-17) / np.log(radius))) + 1

    def generate(self, n: int, rng: np.random.Generator) -> np.ndarray:
        """``n`` samples of ``u``, started in its stationary state (a walk starts at 0)."""
        e = rng.standard_normal(n) * np.sqrt(self.q)
        if len(self.a) == 1:
            return e
        if self.random_walk:
            return np.cumsum(e)
        if len(self.a) == 2:  # exact stationary start: u[-1] ~ N(0, var)
            phi = -self.a[1]
            u_prev = rng.standard_normal() * np.sqrt(self.q / (1 - phi**2))
            out, _ = _sig.lfilter([1.0], self.a, e, zi=[phi * u_prev])
            return out
        burn = self.memory()
        pre = rng.standard_normal(burn) * np.sqrt(self.q)
        return _sig.lfilter([1.0], self.a, np.concatenate([pre, e]))[burn:]


@dataclass(frozen=True)
class Component:
    """A source seen in a channel through the FIR ``b`` (gain, filter, integer delay)."""

    source: int
    b: tuple[float, ...] = (1.0,)

    def response(self, w: np.ndarray) -> np.ndarray:
        return np.polyval(np.asarray(self.b)[::-1], np.exp(-1j * w))


@dataclass(frozen=True)
class Line:
    """A tone ``amplitude * cos(2 pi freq t + phase)``."""

    freq: float
    amplitude: float
    phase: float = 0.0

    @property
    def mean_square(self) -> float:
        return self.amplitude**2 / 2


@dataclass(frozen=True)
class Truth:
    """True one-sided densities (unit^2/Hz) and autocovariances of a demo's channels.

    Attributes
    ----------
    fs : float
        Sample rate (Hz) of the sampled process described.
    description : str
        What the truth covers and what it leaves out.
    unknown_below : float
        Below this frequency (Hz) the density is not known (slow deterministic drift):
        ``psd`` gives NaN there.
    """

    fs: float
    sources: tuple[Source, ...]
    channels: tuple[tuple[Component, ...], ...]
    line_table: tuple[tuple[Line, ...], ...]
    description: str = ""
    unknown_below: float = 0.0
    extras: dict = field(default_factory=dict)

    # -- density ------------------------------------------------------------------------
    def psd(self, freq: np.ndarray) -> np.ndarray:
        """True one-sided PSD (unit^2/Hz), shape (n_channels, len(freq)).

        Continuous part only: the tones in :attr:`lines` carry their power at single
        frequencies.  NaN outside [0, fs/2], below ``unknown_below`` and at 0 Hz for a
        random walk.
        """
        return np.real(np.stack([self.csd(freq, i, i) for i in range(len(self.channels))]))

    def csd(self, freq: np.ndarray, i: int, j: int) -> np.ndarray:
        """True one-sided cross-spectral density of channels ``i`` and ``j``
        (``E[X_i conj(X_j)]`` convention), shape (len(freq),)."""
        f = np.atleast_1d(np.asarray(freq, dtype=np.float64))
        w = 2 * np.pi * f / self.fs
        total = np.zeros(f.shape, dtype=np.complex128)
        with np.errstate(invalid="ignore"):  # a walk's infinite density at 0 Hz -> NaN
            self._add_csd(total, w, i, j)
        nyq = self.fs / 2
        edge = np.isclose(f, 0.0, atol=1e-12 * nyq) | np.isclose(f, nyq, rtol=1e-12)
        total = np.where(edge, total, 2 * total)
        bad = (f < -1e-12 * nyq) | (f > nyq * (1 + 1e-12)) | (f < self.unknown_below)
        bad |= ~np.isfinite(total)
        return np.where(bad, np.nan, total)

    def _add_csd(self, total: np.ndarray, w: np.ndarray, i: int, j: int) -> None:
        for ci in self.channels[i]:
            for cj in self.channels[j]:
                if ci.source == cj.source:
                    src = self.sources[ci.source]
                    total += src.density(w, self.fs) * ci.response(w) * np.conj(cj.response(w))

    def coherence(self, freq: np.ndarray, i: int = 0, j: int = 1) -> np.ndarray:
        """True magnitude-squared coherence of channels ``i`` and ``j``."""
        sij = self.csd(freq, i, j)
        return np.abs(sij) ** 2 / (np.real(self.csd(freq, i, i)) * np.real(self.csd(freq, j, j)))

    # -- correlation --------------------------------------------------------------------
    def acf(self, lag_s: np.ndarray) -> np.ndarray:
        """True autocovariance (unit^2) at lags in seconds, shape (n_channels, len(lag)).

        Lags are rounded to whole samples (NaN when a lag is more than 1e-6 of a sample
        off the grid).  Tones enter as ``A^2/2 cos(2 pi f tau)``; a random walk makes the
        result NaN.
        """
        lag = np.atleast_1d(np.asarray(lag_s, dtype=np.float64))
        k = np.rint(lag * self.fs)
        off = np.abs(lag * self.fs - k) > 1e-6
        out = np.empty((len(self.channels), lag.size))
        for c in range(len(self.channels)):
            out[c] = self._ccf(k.astype(np.int64), c, c)
            for line in self.line_table[c]:
                out[c] += line.mean_square * np.cos(2 * np.pi * line.freq * k / self.fs)
        out[:, off] = np.nan
        return out

    def _ccf(self, k: np.ndarray, i: int, j: int) -> np.ndarray:
        """``E[x_i[t] x_j[t + k]]`` of the random part."""
        total = np.zeros(k.shape)
        for ci in self.channels[i]:
            for cj in self.channels[j]:
                if ci.source != cj.source:
                    continue
                src = self.sources[ci.source]
                for p, bp in enumerate(ci.b):
                    for q, bq in enumerate(cj.b):
                        if bp and bq:
                            total += bp * bq * src.acf(k + p - q)
        return total

    def ccf(self, lag_s: np.ndarray, i: int = 0, j: int = 1) -> np.ndarray:
        """True cross-covariance ``E[x_i(t) x_j(t + lag)]`` (unit^2) at lags in seconds."""
        k = np.rint(np.atleast_1d(np.asarray(lag_s, dtype=np.float64)) * self.fs)
        return self._ccf(k.astype(np.int64), i, j)

    def variance(self) -> np.ndarray:
        """Variance of each channel's random part plus the tones' mean square."""
        return self.acf(np.zeros(1))[:, 0]

    # -- lines ------------------------------------------------------------------------
    @property
    def lines(self) -> tuple[tuple[tuple[float, float], ...], ...]:
        """Per channel, the tones as ``(frequency Hz, mean square unit^2)``."""
        return tuple(tuple((ln.freq, ln.mean_square) for ln in ch) for ch in self.line_table)

    def near_lines(self, freq: np.ndarray, width: float) -> np.ndarray:
        """Boolean (n_channels, len(freq)): within ``width`` Hz of a tone of the channel."""
        f = np.atleast_1d(np.asarray(freq, dtype=np.float64))
        out = np.zeros((len(self.channels), f.size), dtype=bool)
        for c, ch in enumerate(self.line_table):
            for line in ch:
                out[c] |= np.abs(f - line.freq) <= width
        return out

    # -- derived truths ---------------------------------------------------------------
    def take(self, indices: list[int]) -> Truth:
        """The truth of a subset of the channels."""
        return replace(self, channels=tuple(self.channels[i] for i in indices),
                       line_table=tuple(self.line_table[i] for i in indices))

    def rescaled(self, factor: float) -> Truth:
        """The truth when the same samples are read at ``factor`` times the rate."""
        lines = tuple(tuple(replace(ln, freq=ln.freq * factor) for ln in ch)
                      for ch in self.line_table)
        return replace(self, fs=self.fs * factor, line_table=lines,
                       unknown_below=self.unknown_below * factor)

    def generate(self, n: int, rng: np.random.Generator) -> np.ndarray:
        """``n`` samples of every channel's random part plus tones, shape (channels, n)."""
        longest = max((len(c.b) for ch in self.channels for c in ch), default=1)
        drawn = [s.generate(n + longest - 1, rng) for s in self.sources]
        out = np.zeros((len(self.channels), n))
        t = np.arange(n) / self.fs
        for c, ch in enumerate(self.channels):
            for comp in ch:
                u = drawn[comp.source]
                nb = len(comp.b)
                out[c] += _sig.lfilter(comp.b, [1.0], u)[longest - 1:][:n] if nb > 1 else (
                    comp.b[0] * u[longest - 1:])
            for line in self.line_table[c]:
                out[c] += line.amplitude * np.cos(2 * np.pi * line.freq * t + line.phase)
        return out
