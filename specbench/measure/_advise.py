"""The settings advisor: estimator settings that meet stated targets on a record, ranked.

For a record of ``n`` samples at ``fs`` every candidate's figures follow from its settings
alone (they do not depend on the data values), so thousands of candidates are scored in well
under a second, whatever the record length:

* resolution (Hz): ENBW of the spectral window, ``ENBW_bins fs / L`` for Welch and the
  periodogram (Harris 1978), the equal-weight multitaper window's ENBW, ``fs / sum w_m**2``
  for Blackman-Tukey (Percival & Walden 1993, section 6.7);
* band width (dB): ``10 log10(upper / lower)`` of the chi-square interval at the confidence
  level with the estimator's equivalent dof (Welch with overlap: Percival & Walden 1993
  eq. (292b); multitaper ``2 K`` per segment; Blackman-Tukey ``2 N / sum w_m**2``);
* highest sidelobe (dB): of the window (:func:`specbench.window_info`), of the tapers' mean
  spectral window outside its main lobe (multitaper), of the lag window's spectral window;
* expected compute time: ``estimator.expected_seconds(n)`` (a model of the work times this
  machine's measured speed).

Ranking (our rule): among the candidates that meet every target given,

* resolution target only -> the narrowest band (most stable estimate) first;
* band target only -> the finest resolution first;
* both -> the smallest ``log(resolution / target) + log(band / target)`` (the most margin on
  both, shared evenly); ties broken by compute time.

A resolution finer than the record allows (``fs / n``, the rectangular window's ENBW over the
whole record) raises :class:`MeasurementError` naming the best attainable value.
"""

from __future__ import annotations

import functools
import math
import numbers
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..estimators._dof import band_factors
from ..estimators.spectral import Correlogram, Multitaper, Periodogram, Welch
from ..estimators.windows import _lag_correlation, get_window, window_info
from ._results import MeasurementError
from ._structure import SHAPE_N, _lag_structure, _multitaper_structure

__all__ = ["advise", "Advice", "Candidate"]

WINDOWS = ("boxcar", "hann", "hamming", "blackman", "blackmanharris", ("kaiser", 14.0), "flattop")
OVERLAPS = (0.0, 0.5, 0.75)
NWS = (2.0, 3.0, 4.0, 6.0)
LAG_WINDOWS = ("parzen", "bartlett")


@dataclass(frozen=True)
class Candidate:
    """One ranked setting: ``estimator`` and its ``figures`` on this record, and why it ranks there."""

    rank: int
    estimator: Any
    figures: dict
    reason: str

    @property
    def code(self) -> str:
        return f"est = sb.{self.estimator!r}"

    def __repr__(self) -> str:
        f = self.figures
        return (f"<#{self.rank} {self.estimator!r}: resolution {f['resolution_hz']:.4g} Hz, band "
                f"{f['band_db']:.2f} dB, sidelobe {f['sidelobe_db']:.1f} dB, ~{f['seconds']:.2g} s>")


@dataclass(frozen=True)
class Advice:
    """Candidates meeting the targets, best first (``advice[0]``), with the trade-off chart."""

    candidates: tuple
    targets: dict
    considered: int
    record: dict
    frontier: tuple = ()
    notes: tuple = field(default_factory=tuple)

    def __len__(self) -> int:
        return len(self.candidates)

    def __getitem__(self, i):
        return self.candidates[i]

    def __iter__(self):
        return iter(self.candidates)

    @property
    def best(self) -> Candidate:
        return self.candidates[0]

    def to_dataframe(self):
        import pandas as pd

        rows = [{"rank": c.rank, "estimator": repr(c.estimator), **c.figures, "reason": c.reason}
                for c in self.candidates]
        return pd.DataFrame(rows).set_index("rank")

    def chart(self, top: int = 200):
        """A bqplot figure: resolution (log x) against band width (y) over the candidates,
        coloured by the highest sidelobe, the chosen one marked; the settings that miss the
        targets drawn faintly behind."""
        try:
            import bqplot as bq
        except ImportError as e:
            raise MeasurementError(
                f"advice.chart() draws with bqplot, which is missing ({e.name}). Install it with "
                'pip install "specbench[lab]", or use advice.svg() for a static chart.'
            ) from None
        from ._chart import advice_figure

        return advice_figure(self, bq, top=top)

    def svg(self, width: int = 640, height: int = 400) -> str:
        """The same chart as a standalone SVG string (no plotting library needed)."""
        from ._chart import advice_svg

        return advice_svg(self, width=width, height=height)

    def __repr__(self) -> str:
        t = ", ".join(f"{k}={v!r}" for k, v in self.targets.items() if v is not None)
        lines = [f"<Advice ({t}): {len(self.candidates)} of {self.considered} settings meet the targets"]
        lines += [f"  {c!r}\n     {c.reason}" for c in self.candidates[:5]]
        return "\n".join(lines) + ">"


# ---------------------------------------------------------------- figures of each family
@functools.lru_cache(maxsize=256)
def _window_figures(window: Any, n: int) -> tuple[float, float, np.ndarray]:
    ns = min(n, 4096)
    info = window_info(window, ns)
    w = np.asarray(get_window(window, ns), dtype=np.float64)
    return info.enbw_bins, info.highest_sidelobe_db, w


def _welch_dof(w: np.ndarray, step_frac: float, nseg: int) -> float:
    ns = w.size
    step = max(1, int(round(step_frac * ns)))
    total = float(nseg)
    d = 1
    while d * step < ns and d < nseg:
        total += 2.0 * (nseg - d) * _lag_correlation(w, d * step) ** 2
        d += 1
    return 2.0 * nseg * nseg / total


@functools.lru_cache(maxsize=64)
def _mt_figures(nw: float, k: int) -> tuple[float, float]:
    st = _multitaper_structure(nw, k, SHAPE_N, SHAPE_N)
    h = st.tapers
    sums = h.sum(axis=1)
    enbw_bins = SHAPE_N * k / float(np.dot(sums, sums))
    lobe = st.lobe_half_width()
    x = np.arange(lobe, min(256, SHAPE_N // 2), 0.25)
    side = float(10 * np.log10(np.max(np.abs(st.kernel(x)))))
    return enbw_bins, side


@functools.lru_cache(maxsize=64)
def _lag_sidelobe(lag_window: str, m: int) -> float:
    w = Correlogram(max_lag=m, lag_window=lag_window).lag_weights()
    nfft = max(2, 1 << math.ceil(math.log2(2 * m)))
    st = _lag_structure(w, nfft, "")
    lobe = st.lobe_half_width()
    x = np.arange(lobe, nfft // 2, 0.25)
    k = np.abs(st.kernel(x))
    return float(10 * np.log10(max(np.max(k), 1e-30)))


@functools.lru_cache(maxsize=64)
def _lag_figures(lag_window: str, m: int) -> tuple[float, float]:
    """``sum w_m**2`` of the lag window and the highest sidelobe of its spectral window (its shape,
    in units of ``1/M``, barely changes with ``M``: evaluated at ``M <= 256``)."""
    w = Correlogram(max_lag=m, lag_window=lag_window).lag_weights()
    sw2 = float(w[0] ** 2 + 2 * np.sum(w[1:] ** 2))
    return sw2, _lag_sidelobe(lag_window, min(m, 256))


def _lengths(n: int, lo: int = 64) -> list[int]:
    out = []
    length = lo
    while length <= n:
        out.append(length)
        length *= 2
    return out


def _candidates(n: int, fs: float) -> list[tuple[Any, dict]]:
    rows = []
    for window in WINDOWS:
        for seg in _lengths(n):
            enbw, side, w = _window_figures(window, seg)
            for ov in OVERLAPS:
                est = Welch(window=window, segment_length=seg, overlap=ov)
                step = seg - est.noverlap
                nseg = (n - seg) // step + 1
                if ov > 0 and nseg < 2:
                    continue
                dof = _welch_dof(w, step / seg, nseg)
                rows.append((est, dict(resolution_hz=enbw * fs / seg, dof=dof, sidelobe_db=side, segments=nseg)))
    for window in ("boxcar", "hann", "blackmanharris"):
        enbw, side, _ = _window_figures(window, n)
        rows.append((Periodogram(window=window), dict(resolution_hz=enbw * fs / n, dof=2.0, sidelobe_db=side,
                                                      segments=1)))
    for nw in NWS:
        k = int(2 * nw) - 1
        enbw, side = _mt_figures(nw, k)
        for seg in [*_lengths(n, lo=max(64, int(8 * nw))), None]:
            length = n if seg is None else seg
            if seg is not None and seg == n:
                continue
            nseg = n // length
            est = Multitaper(bandwidth=nw, segment_length=seg, adaptive=False)
            rows.append((est, dict(resolution_hz=enbw * fs / length, dof=2.0 * k * nseg, sidelobe_db=side,
                                   segments=nseg)))
    for lw in LAG_WINDOWS:
        for m in _lengths(min(n // 4, 1 << 16), lo=16):
            sw2, side = _lag_figures(lw, m)
            est = Correlogram(max_lag=m, lag_window=lw)
            rows.append((est, dict(resolution_hz=fs / sw2, dof=2.0 * n / sw2, sidelobe_db=side, segments=1)))
    return rows


def _positive(name: str, value: Any, unit: str) -> float | None:
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, numbers.Real) or not math.isfinite(value) or value <= 0:
        raise MeasurementError(f"advise: {name} must be a positive number ({unit}) or None. Got {value!r} instead.")
    return float(value)


def advise(sig: Any, resolution: float | None = None, band_db: float | None = None,
           sidelobe_db: float | None = None, max_seconds: float | None = None, *, fs: float | None = None,
           confidence: float = 0.95, top: int = 20, progress: Callable[[float], None] | None = None) -> Advice:
    """Rank estimator settings that meet the targets on this record (see the module notes).

    Parameters
    ----------
    sig : Signal, array or anything an estimator accepts (samples on the last axis)
    resolution : float, optional
        Finest resolution needed, Hz (candidates with ``resolution_hz <= resolution``).
    band_db : float, optional
        Widest acceptable confidence band, dB (``10 log10(upper / lower)``).
    sidelobe_db : float, optional
        Highest acceptable sidelobe (leakage), dB, negative (e.g. ``-60``).
    max_seconds : float, optional
        Longest acceptable expected compute time on this machine.
    confidence : float
        Confidence level of the band (also set on the candidates).
    top : int
        Candidates returned.
    progress : callable(fraction), optional
        Called with 0..1 while the candidates are scored.
    """
    from ..estimators._common import samples_of

    resolution = _positive("resolution", resolution, "Hz")
    band_db = _positive("band_db", band_db, "dB")
    max_seconds = _positive("max_seconds", max_seconds, "s")
    if sidelobe_db is not None and (isinstance(sidelobe_db, bool) or not isinstance(sidelobe_db, numbers.Real)
                                    or not math.isfinite(sidelobe_db) or sidelobe_db >= 0):
        raise MeasurementError(f"advise: sidelobe_db must be a negative level in dB (e.g. -60) or None. "
                               f"Got {sidelobe_db!r} instead.")
    if resolution is None and band_db is None:
        raise MeasurementError("advise: give a resolution (Hz) or a band_db (dB) target, or both; the others "
                               "(sidelobe_db, max_seconds) only narrow the choice.")
    samples, x2 = samples_of(sig, fs)
    n = int(x2.shape[-1])
    nch = int(np.prod(x2.shape[:-1])) if x2.ndim > 1 else 1
    rate = float(samples.fs)
    finest = rate / n
    if resolution is not None and resolution < finest * (1 - 1e-12):
        raise MeasurementError(
            f"advise: a resolution of {resolution:g} Hz is finer than this record allows: {n:,} samples at "
            f"{rate:g} Hz give at best {finest:.6g} Hz (the whole record with a rectangular window). Ask for "
            f"resolution >= {finest:.6g} Hz, or record at least {math.ceil(rate / resolution):,} samples "
            f"({rate and 1 / resolution:.4g} s)."
        )
    t0 = time.perf_counter()
    rows = _candidates(n, rate)
    dofs = np.array([r[1]["dof"] for r in rows])
    lo, hi = band_factors(dofs, confidence)
    bands = 10 * np.log10(hi / lo)
    scored = []
    total = len(rows)
    for i, ((est, fig), bd) in enumerate(zip(rows, bands)):
        est = est.replace(confidence=confidence)
        fig = dict(fig, band_db=float(bd), seconds=float(est.expected_seconds(n, nch, x2.dtype)))
        scored.append((est, fig))
        if progress is not None and (i % 32 == 0 or i == total - 1):
            progress((i + 1) / total)

    def meets(fig: dict) -> list[str]:
        miss = []
        if resolution is not None and fig["resolution_hz"] > resolution * (1 + 1e-9):
            miss.append("resolution")
        if band_db is not None and fig["band_db"] > band_db:
            miss.append("band")
        if sidelobe_db is not None and fig["sidelobe_db"] > sidelobe_db:
            miss.append("sidelobe")
        if max_seconds is not None and fig["seconds"] > max_seconds:
            miss.append("time")
        return miss

    ok = [(e, f) for e, f in scored if not meets(f)]
    targets = dict(resolution=resolution, band_db=band_db, sidelobe_db=sidelobe_db, max_seconds=max_seconds,
                   confidence=confidence)
    if not ok:
        def shortfall(f):
            s = 0.0
            if resolution is not None:
                s += max(0.0, math.log(f["resolution_hz"] / resolution))
            if band_db is not None:
                s += max(0.0, math.log(f["band_db"] / band_db))
            if sidelobe_db is not None:
                s += max(0.0, (f["sidelobe_db"] - sidelobe_db) / 20)
            if max_seconds is not None:
                s += max(0.0, math.log(f["seconds"] / max_seconds))
            return s

        e, f = min(scored, key=lambda ef: shortfall(ef[1]))
        raise MeasurementError(
            f"advise: no setting meets all the targets on {n:,} samples at {rate:g} Hz ({', '.join(meets(f))} "
            f"missed by the closest). Closest: {e!r} with resolution {f['resolution_hz']:.4g} Hz, band "
            f"{f['band_db']:.3g} dB, sidelobe {f['sidelobe_db']:.1f} dB, ~{f['seconds']:.2g} s. Relax a target: a "
            "finer resolution needs longer segments and so gives fewer averages (a wider band), or record longer."
        )

    def key(ef):
        f = ef[1]
        if resolution is not None and band_db is not None:
            s = math.log(f["resolution_hz"] / resolution) + math.log(f["band_db"] / band_db)
        elif resolution is not None:
            s = f["band_db"]
        else:
            s = f["resolution_hz"]
        return (round(s, 9), f["seconds"])

    ok.sort(key=key)
    best_f = ok[0][1]
    out = []
    for rank, (e, f) in enumerate(ok[:top], start=1):
        out.append(Candidate(rank=rank, estimator=e, figures=f, reason=_reason(rank, f, best_f, resolution, band_db)))
    frontier = _frontier(scored)
    if progress is not None:
        progress(1.0)
    notes = (f"{len(ok)} of {len(scored)} settings meet the targets; scored in {time.perf_counter() - t0:.2f} s",)
    return Advice(candidates=tuple(out), targets=targets, considered=len(scored),
                  record=dict(samples=n, fs=rate, channels=nch, finest_resolution_hz=finest),
                  frontier=frontier, notes=notes)


def _reason(rank: int, f: dict, best: dict, resolution, band_db) -> str:
    core = (f"resolution {f['resolution_hz']:.4g} Hz, band {f['band_db']:.2f} dB ({f['dof']:.0f} dof), "
            f"sidelobe {f['sidelobe_db']:.0f} dB, ~{f['seconds']:.2g} s")
    if rank == 1:
        if resolution is not None and band_db is not None:
            why = "most margin on both resolution and band among the settings that meet every target"
        elif resolution is not None:
            why = "the narrowest band (most averaging) at the required resolution"
        else:
            why = "the finest resolution within the band target"
        return f"{core}: {why}."
    parts = []
    if f["band_db"] > best["band_db"] + 0.005:
        parts.append(f"band {f['band_db'] - best['band_db']:.2f} dB wider than #1")
    if f["resolution_hz"] > best["resolution_hz"] * 1.001:
        parts.append(f"resolution {f['resolution_hz'] / best['resolution_hz']:.2f}x coarser")
    elif f["resolution_hz"] < best["resolution_hz"] * 0.999:
        parts.append(f"resolution {best['resolution_hz'] / f['resolution_hz']:.2f}x finer")
    if f["sidelobe_db"] < best["sidelobe_db"] - 0.5:
        parts.append(f"{best['sidelobe_db'] - f['sidelobe_db']:.0f} dB less leakage")
    if f["seconds"] > 1.5 * best["seconds"]:
        parts.append(f"{f['seconds'] / max(best['seconds'], 1e-9):.1f}x the compute time")
    return f"{core}: " + ("; ".join(parts) if parts else "as good as #1 on the targets, ranked by compute time") + "."


def _frontier(scored: list) -> tuple:
    """All scored settings as (resolution, band, sidelobe) for the chart's background."""
    return tuple((f["resolution_hz"], f["band_db"], f["sidelobe_db"]) for _, f in scored)
