"""Figures of merit of the estimate on screen, recomputed with every estimate.

Pure Python but for :class:`MeritPanel` (ipywidgets imported when a panel is made), so that
the analyses and the controller compute their figures headless.

Each figure is read from the result (never recomputed differently from the estimator):
resolution and ENBW, segments, degrees of freedom, the width of the confidence band in
dB, the window's highest sidelobe, the Parseval ratio, what part of the data was used
and how long it took.
"""

from __future__ import annotations

import html
from dataclasses import dataclass

import numpy as np

__all__ = ["Merit", "spectrum_merits", "MeritPanel", "fmt", "duration"]


def fmt(v: float, digits: int = 4) -> str:
    """A number for people: 4 significant digits, no exponent between 1e-3 and 1e5."""
    if v is None or not np.isfinite(v):
        return "—" if v is None else str(v)
    a = abs(v)
    if a != 0 and (a < 1e-3 or a >= 1e5):
        return f"{v:.{digits - 1}e}"
    return f"{v:.{digits}g}"


@dataclass(frozen=True)
class Merit:
    key: str
    name: str
    text: str
    help: str
    value: float | None = None


def duration(seconds: float) -> str:
    """``"12.3 ms"`` below a second, ``"1.81 s"`` above."""
    if seconds is None or not np.isfinite(seconds):
        return "—"
    return f"{fmt(seconds * 1e3, 3)} ms" if seconds < 1 else f"{fmt(seconds, 3)} s"


def _dof_text(spec) -> tuple[str, float]:
    dof = np.broadcast_to(spec.dof, spec.value.shape)
    inner = dof[..., 1:-1] if dof.shape[-1] > 2 else dof
    lo, hi, med = float(np.min(inner)), float(np.max(inner)), float(np.median(inner))
    if np.isclose(lo, hi, rtol=1e-9):
        return fmt(med), med
    return f"{fmt(med)} (median; {fmt(lo)}–{fmt(hi)})", med


def enbw_bins(spec) -> float | None:
    """ENBW in bins of the segment (or tapered) length; None where no segment applies."""
    info = spec.info
    if "enbw_bins" in info:
        return float(info["enbw_bins"])
    if "nperseg" in info:
        return float(spec.resolution * info["nperseg"] / spec.fs)
    return None


def spectrum_merits(spec, corr=None, update_seconds: float | None = None) -> list[Merit]:
    """The figures of merit of a one-channel spectrum (and correlation)."""
    info = spec.info
    out = [Merit("resolution", "Resolution", f"{fmt(spec.resolution)} Hz",
                 "Equivalent noise bandwidth of the spectral window, in Hz.", float(spec.resolution))]
    enbw = enbw_bins(spec)
    out.append(Merit("enbw", "ENBW", "—" if enbw is None else f"{fmt(enbw)} bins",
                     "Equivalent noise bandwidth in bins of the segment length (fs / segment length).", enbw))
    seg = f"{spec.segments:,}"
    if info.get("segments_skipped"):
        seg += f" ({info['segments_skipped']:,} skipped at gaps)"
    if "tapers" in info:
        seg += f" × {info['tapers']} tapers"
    out.append(Merit("segments", "Segments", seg, "Segments averaged.", float(spec.segments)))
    dtext, dmed = _dof_text(spec)
    out.append(Merit("dof", "Degrees of freedom", dtext,
                     "Equivalent degrees of freedom per bin (DC and Nyquist carry half).", dmed))
    band = spec.band_db()
    out.append(Merit("band_db", f"{100 * spec.confidence:g} % band width", f"{fmt(band)} dB",
                     "Width of the confidence band, 10 log10(upper / lower), at interior bins.", band))
    side = info.get("highest_sidelobe_db")
    out.append(Merit("sidelobe", "Highest sidelobe", "—" if side is None else f"{fmt(side)} dB",
                     "Highest sidelobe of the data window relative to its main lobe (leakage).",
                     None if side is None else float(side)))
    ratio = float(np.ravel(spec.parseval_ratio())[0])
    out.append(Merit("parseval", "Parseval ratio", f"{ratio:.4f}" if np.isfinite(ratio) else fmt(ratio),
                     "Integral of the density over the variance of the detrended data used: 1 within "
                     "estimator bias.", ratio))
    used = int(spec.samples_used)
    out.append(Merit("samples", "Samples used", f"{used:,}" + (
        f" ({info['samples_dropped']:,} left over)" if info.get("samples_dropped") else ""),
        "Samples that entered the estimate.", float(used)))
    out.append(Merit("seconds", "Seconds used", f"{fmt(used / spec.fs)} s", "Duration of the samples used.",
                     used / spec.fs))
    t = info.get("compute_seconds", float("nan"))
    timing = f"PSD {duration(t)}"
    if corr is not None:
        timing += f" · ACF {duration(corr.info.get('compute_seconds', float('nan')))}"
    if update_seconds is not None:
        timing += f" · update {duration(update_seconds)}"
    t *= 1e3
    out.append(Merit("compute", "Compute time", timing, "Estimation time, and the whole update (Python side).", t))
    return out


class MeritPanel:
    """A grid of the figures of merit (CSS class ``sb-merit``)."""

    def __init__(self) -> None:
        import ipywidgets as W  # the figures themselves (above) are pure Python

        self.widget = W.HTML()
        self.widget.add_class("sb-merit")
        self.merits: list[Merit] = []

    def show(self, merits: list[Merit]) -> None:
        self.merits = list(merits)
        cells = "".join(
            f"<div class='sb-merit-cell sb-merit-{m.key}' title='{html.escape(m.help, quote=True)}'>"
            f"<div class='sb-merit-name'>{html.escape(m.name)}</div>"
            f"<div class='sb-merit-value'>{html.escape(m.text)}</div></div>"
            for m in merits
        )
        self.widget.value = f"<div class='sb-merit-grid'>{cells}</div>"

    def as_dict(self) -> dict[str, Merit]:
        return {m.key: m for m in self.merits}
