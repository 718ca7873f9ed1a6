"""The cross-channel analysis of the Workbench: coherence with its significance level and
band, phase with band, gain with band, and the delay readout with its interval.

The analysis computes every channel pair of the selected span at once
(``CrossSpectrum(...)(signal, pair="all")``: one FFT per segment and channel) and shows
the pair chosen in its two channel menus; changing the pair redraws without recomputing.
"""

from __future__ import annotations

import contextlib
import html
import math
import warnings
from typing import Any

import bqplot as bq
import ipywidgets as W
import numpy as np

from .._errors import SpecbenchError
from ._analysis import Analysis, register_analysis
from ._merit import Merit, fmt
from ._reduce import reduce_sorted
from ._style import CURRENT, gapped
from ._viewhost import DisplayOption
from ._views import Trace, _TraceView, _yrange

__all__ = ["CrossAnalysis", "CrossHost"]

#: colour of the significance level (coherence threshold)
THRESHOLD = "#8a8f98"


def _trace(freq, value, lower, upper, unit, lo, hi, log=False) -> Trace:
    start = 1 if freq.size > 1 and freq[0] == 0 else 0  # DC: the removed mean's residue
    f, v, a, b = freq[start:], value[start:], lower[start:], upper[start:]
    red = reduce_sorted(f, v, lo=lo, hi=hi)
    x, y = red.take(f), red.take(v)
    lo_env, hi_env = red.envelope(a, "min"), red.envelope(b, "max")
    interior = (red.index > 0) & (red.index < f.size - 1)
    yr = _yrange([y[interior], lo_env[interior], hi_env[interior]], log)
    if log:
        # a lower bound of 0 (gain unknown below: incoherent bins) cannot sit on a log axis: the
        # band then reaches the lowest value shown instead of leaving a hole in the band
        floor = yr[0] if yr is not None else np.nan
        lo_env = np.where(lo_env > 0, lo_env, np.where(hi_env > 0, np.minimum(floor, hi_env), np.nan))
        y, hi_env = (np.where(q > 0, q, np.nan) for q in (y, hi_env))
    return Trace(x.astype(float), y.astype(float), lo_env.astype(float), hi_env.astype(float), unit, yr,
                 int(freq.size))


def _nearest(axis: np.ndarray, x: float) -> int:
    i = int(np.clip(np.searchsorted(axis, x), 0, axis.size - 1))
    if i > 0 and abs(axis[i - 1] - x) <= abs(axis[i] - x):
        i -= 1
    return i


class _PairView(_TraceView):
    x_label = "Frequency (Hz)"
    quantity = ""

    def __init__(self, title: str) -> None:
        super().__init__(title, height="230px")
        self.tool.layout.display = "none"  # read only: zoom on three stacked views would drift apart

    def _values(self, r):
        raise NotImplementedError

    def _trace(self, result, lo, hi) -> Trace:
        v, a, b, unit = self._values(result)
        return _trace(result.freq, v, a, b, unit, lo, hi, self._ylog())

    def _readout_text(self, x: float) -> str:
        r = self.result
        i = _nearest(r.freq, x)
        v, a, b, unit = self._values(r)
        u = f" {html.escape(unit)}" if unit else ""
        pct = f"{r.confidence * 100:g} %"
        return (f"<b>{fmt(r.freq[i])} Hz</b>: {self.quantity} {fmt(v[i])}{u} "
                f"<span class='sb-muted'>({pct} band {fmt(a[i])} to {fmt(b[i])})</span>")


class CoherenceView(_PairView):
    css = "sb-cross-coherence"
    quantity = "coherence"

    def __init__(self) -> None:
        super().__init__("Coherence")
        self.threshold = bq.Lines(x=np.zeros(0), y=np.zeros(0), scales={"x": self.xs, "y": self.ys},
                                  colors=[THRESHOLD], line_style="dashed", stroke_width=1.2, enable_hover=False)

    def _values(self, r):
        return r.coherence, r.coherence_lower, r.coherence_upper, ""

    def redraw(self) -> None:
        super().redraw()
        r = self.result
        if r is None:
            return
        with self.threshold.hold_sync():
            f = r.freq[1:] if r.freq.size > 1 else r.freq
            thr = r.coherence_threshold[1:] if r.freq.size > 1 else r.coherence_threshold
            self.threshold.x = np.array([f[0], f[-1]], dtype=float)
            self.threshold.y = np.array([thr[thr.size // 2]] * 2, dtype=float)
            self.threshold.scales = {"x": self.xs, "y": self.ys}
        if self.threshold not in self.figure.marks:
            self.figure.marks = [*self.figure.marks[:-1], self.threshold, self.figure.marks[-1]]
        self._guard += 1
        try:
            self.ys.min, self.ys.max = 0.0, 1.0
        finally:
            self._guard -= 1
        self._ticks()

    def _readout_text(self, x: float) -> str:
        text = super()._readout_text(x)
        r = self.result
        i = _nearest(r.freq, x)
        level = r.coherence_threshold[i]
        verdict = "above" if r.coherence[i] > level else "below"
        return text + f" <span class='sb-muted'>{verdict} the significance level {fmt(level, 3)}</span>"


class PhaseView(_PairView):
    css = "sb-cross-phase"
    quantity = "phase"

    def __init__(self) -> None:
        super().__init__("Phase of y relative to x")

    def _values(self, r):
        return np.degrees(r.phase), np.degrees(r.phase_lower), np.degrees(r.phase_upper), "deg"


class GainView(_PairView):
    css = "sb-cross-gain"
    quantity = "gain"

    def __init__(self) -> None:
        self._log = bq.LogScale()
        super().__init__("Gain |H1| = |G_xy / G_xx|")

    def _make_scales(self):
        return bq.LinearScale(), bq.LogScale()

    def _ylog(self) -> bool:
        return True

    def _values(self, r):
        return r.gain, r.gain_lower, r.gain_upper, r.gain_unit


def coherent_band_edge(r: Any, level: float = 0.5) -> float:
    """Upper edge (Hz) of the default delay band: the highest bin where the coherence,
    smoothed over 5 bins, exceeds ``level`` and the significance level (half the sample rate
    when no bin does).  Above it a stop band's sign changes would bias a phase-slope fit."""
    coh = np.convolve(r.coherence, np.ones(5) / 5, mode="same")
    ok = np.nonzero((coh > level) & (r.coherence > r.coherence_threshold))[0]
    if ok.size == 0:
        return float(r.fs / 2)
    return float(r.freq[ok[-1]])


class CrossHost:
    """The cross view: pair menus, delay band and readout, and the three stacked plots."""

    def __init__(self, analysis: CrossAnalysis) -> None:
        self.analysis = analysis
        self.views = [CoherenceView(), PhaseView(), GainView()]
        self.figure = self.views[0].figure
        self._pinned: list = []
        self._shown = None
        self._syncing = False
        self.x_menu = W.Dropdown(options=["-"], description="x (input)", layout=W.Layout(width="210px"),
                                 tooltip="The reference channel: phase and gain are of y relative to x.")
        self.y_menu = W.Dropdown(options=["-"], description="y (output)", layout=W.Layout(width="210px"),
                                 tooltip="The channel compared with x.")
        self.band_lo = W.BoundedFloatText(value=0.0, min=0.0, max=1e12, description="delay band (Hz)", step=1.0,
                                          layout=W.Layout(width="200px"), style={"description_width": "auto"},
                                          tooltip="Lower edge (Hz) of the band the delay is fitted over.")
        self.band_hi = W.BoundedFloatText(value=0.0, min=0.0, max=1e12, description="to", step=1.0,
                                          layout=W.Layout(width="120px"), style={"description_width": "auto"},
                                          tooltip="Upper edge (Hz). First set to the top of the clearly coherent "
                                                  "band (smoothed coherence above 0.5); 0 means half the "
                                                  "sample rate.")
        self.delay = W.HTML("<span class='sb-muted'>delay: —</span>")
        self.delay.add_class("sb-readout")
        self._options = {
            "cross_x": DisplayOption("cross_x", self.x_menu, "x channel"),
            "cross_y": DisplayOption("cross_y", self.y_menu, "y channel"),
        }
        for w in (self.x_menu, self.y_menu):
            w.observe(self._pair_changed, names="value")
        for w in (self.band_lo, self.band_hi):
            w.observe(lambda ch: self._update_delay(), names="value")
        title = W.HTML("<span class='sb-view-title'>Cross spectrum</span>")
        row = gapped(W.HBox([title, self.x_menu, self.y_menu, self.band_lo, self.band_hi],
                            layout=W.Layout(flex_flow="row wrap", align_items="center")), "medium")
        row.add_class("sb-cross-pair")
        stack = [W.VBox([v.header, v.figure, v.footer]) for v in self.views]
        # a row of its own below the PSD and autocorrelation pair: three stacked plots need the width
        self.widget = W.VBox([row, self.delay, *stack],
                             layout=W.Layout(flex="1 1 100%", width="100%", min_width="250px"))
        self.widget.add_class("sb-view-cross")

    # -- pair ------------------------------------------------------------------------
    def _set_channels(self, names: tuple) -> None:
        names = list(names)
        if list(self.x_menu.options) == names:
            return
        x, y = self.analysis.pair
        x = x if x in names else names[0]
        y = y if y in names and y != x else next(n for n in names if n != x)
        self._syncing = True
        try:
            for menu, value in ((self.x_menu, x), (self.y_menu, y)):
                menu.options = names
                menu.value = value
        finally:
            self._syncing = False
        self.analysis.pair = (x, y)

    def _pair_changed(self, change) -> None:
        if self._syncing:
            return
        x, y = self.x_menu.value, self.y_menu.value
        if x == "-" or y == "-" or (x, y) == self.analysis.pair:
            return
        if x == y:
            self.delay.value = ("<span class='sb-err'>Choose two different channels for x and y.</span> "
                                "<span class='sb-muted'>The view keeps the last pair.</span>")
            return
        self.analysis.pair = (x, y)
        full = self.analysis.last_result
        if full is not None:
            pinned = [(self.analysis.shown(p[3]) if len(p) > 3 else p[0], p[1], p[2]) for p in self._pinned]
            self.show(self.analysis.shown(full), pinned)

    # -- protocol --------------------------------------------------------------------
    def show(self, shown: Any, pinned: list) -> None:
        if shown is None and self.analysis.last_result is None and self.analysis.single is not None:
            self.delay.value = (f"<span class='sb-muted'>The cross spectrum compares two channels; this record "
                                f"has one ({html.escape(', '.join(self.analysis.single))}). Open the Workbench "
                                "on a multichannel signal to see coherence, phase, gain and delay.</span>")
            for box in self.widget.children[2:]:
                box.layout.display = "none"
            return
        for box in self.widget.children[2:]:
            box.layout.display = None
        if self.analysis.last_result is not None:
            self._set_channels(self.analysis.last_result.channels)
        self._pinned = list(pinned)
        if shown is None:
            return
        self._shown = shown
        if self.band_hi.value == 0.0:  # first estimate: the band where the pair is clearly coherent
            self._syncing = True
            try:
                self.band_hi.value = coherent_band_edge(shown)
            finally:
                self._syncing = False
        for v in self.views:
            v.show(shown, [p for p in pinned if p[0] is not None])
        self._update_delay()

    def _update_delay(self) -> None:
        r = self._shown
        if r is None or self._syncing:
            return
        lo, hi = float(self.band_lo.value), float(self.band_hi.value) or r.fs / 2
        self.analysis.band = (lo, hi)
        try:
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always")
                d = r.delay(band=(lo, min(hi, r.fs / 2)))
        except SpecbenchError as e:
            self.analysis.delay_note = str(e)
            self.delay.value = f"<span class='sb-note'>delay:</span> {html.escape(str(e))}"
            return
        except Exception as e:  # a readout never raises into the front end
            self.analysis.delay_note = f"no reading ({type(e).__name__})"
            self.delay.value = f"<span class='sb-err'>delay: no reading ({html.escape(type(e).__name__)})</span>"
            return
        self.analysis.delay_note = "; ".join(str(w.message) for w in caught) or None
        pct = f"{d.confidence * 100:g} %"
        note = "".join(f" <span class='sb-note'>{html.escape(str(w.message))}</span>" for w in caught)
        self.delay.value = (
            f"<b>delay {fmt(d.value * 1e3)} ms</b> (y after x) &plusmn; {fmt(d.stderr * 1e3, 3)} ms "
            f"<span class='sb-muted'>{pct} interval {fmt(d.lower * 1e3)} to {fmt(d.upper * 1e3)} ms; "
            f"{d.info['bins_used']} coherent bins of {d.info['bins_in_band']} in {fmt(lo)} to {fmt(hi)} Hz; "
            f"{fmt(d.value * r.fs, 4)} samples</span>{note}"
        )

    def holds(self) -> list:
        out = []
        for v in self.views:
            out += [v.figure, v.band, v.line, v.ax_y, v.xs, v.ys, *v.pin_lines]
        return out + [self.views[0].threshold]

    def controls(self) -> dict[str, Any]:
        return dict(self._options)

    def marks_points(self) -> dict[str, int]:
        out = {}
        for v in self.views:
            out.update({f"{v.quantity}/{k}": n for k, n in v.marks_points().items()})
        return out

    def read(self, x: float) -> str:
        return "<br>".join(v.read_at(x) for v in self.views)


@register_analysis
class CrossAnalysis(Analysis):
    """Coherence, phase, gain and delay of two channels (sb.CrossSpectrum)."""

    name = "cross"
    title = "Cross spectrum"
    prefix = "cross_"
    method_label = "Cross method"
    channels = "all"

    def __init__(self) -> None:
        self.pair: tuple = ("", "")
        self.band: tuple | None = None
        self.last_result = None
        self._made: tuple | None = None
        #: variable name of in-memory data in the frozen cell (the Workbench's default)
        self.data_name = "x"
        self.single: list | None = None
        #: why the delay readout has no clean value (None when it has one)
        self.delay_note: str | None = None

    def classes(self) -> list[type]:
        from ..estimators import CrossSpectrum

        return [CrossSpectrum]

    def compute(self, est: Any, selected: Any, *, progress: Any = None, cancel: Any = None) -> Any:
        if selected.n_channels < 2:
            # nothing to compare: the view says so (not an error of the user's settings)
            self.last_result = None
            self.single = list(selected.channels)
            return None
        kwargs = {k: v for k, v in (("progress", progress), ("cancel", cancel)) if v is not None}
        result = est(selected, pair="all", **kwargs)
        self._made = (getattr(selected, "origin", None), tuple(getattr(selected, "selection", ())),
                      selected)
        self.last_result = result
        names = result.channels
        if self.pair[0] not in names or self.pair[1] not in names or self.pair[0] == self.pair[1]:
            self.pair = (names[0], names[1])
        return result

    def shown(self, result: Any) -> Any:
        if result is None:
            return None
        if not result.is_matrix:
            return result
        x, y = self.pair
        if x not in result.channels or y not in result.channels or x == y:
            x, y = result.channels[0], result.channels[1]
        return result.pair(x, y)

    def result_size(self, result: Any) -> int:
        return 1 if result is None else int(result.freq.size * len(result.channels) ** 2)

    def merits(self, shown: Any, others: dict) -> list:
        if shown is None:
            return []
        inner = slice(1, -1) if shown.freq.size > 2 else slice(None)
        sig = shown.coherence[inner] > shown.coherence_threshold[inner]
        level = float(np.median(shown.coherence_threshold[inner]))
        out = [
            Merit("cross_pair", "pair", f"{shown.channels[0]} → {shown.channels[1]}",
                  "Phase and gain are of y (second) relative to x (first)."),
            Merit("cross_resolution", "resolution", f"{fmt(shown.resolution)} Hz",
                  "Equivalent noise bandwidth of the segment window.", shown.resolution),
            Merit("cross_segments", "segments", f"{shown.segments} ({fmt(shown.independent_segments, 3)} independent)",
                  "Segments averaged, and the overlap-corrected number of independent segments n_d.",
                  shown.independent_segments),
            Merit("cross_threshold", "significance level", fmt(level, 3),
                  "Coherence that zero true coherence exceeds with probability 1 - confidence "
                  "(Carter 1987: 1 - alpha^(1/(n_d - 1))).", level),
            Merit("cross_coherent", "coherent bins", f"{100 * float(sig.mean()):.0f} %",
                  "Share of the bins whose coherence is above the significance level.", float(sig.mean())),
        ]
        return out

    def make_view(self) -> CrossHost:
        return CrossHost(self)

    def pin_text(self, est: Any, shown: Any) -> str:
        pair = f" ({shown.channels[0]} → {shown.channels[1]})" if shown is not None else ""
        return repr(est) + pair

    def freeze_lines(self, est: Any, data_var: str) -> list[str] | None:
        from ..freeze._describe import origin_call, py, wrap_comment

        if self.last_result is None:
            return None
        x, y = self.pair
        lines = []
        origin, steps, selected = self._made if self._made else (None, (), None)
        if selected is None:
            return None
        made = origin_call(origin)
        chain = "".join(f".{k}({', '.join(py(a) for a in args)})" for k, *args in steps if k != "channel")
        if made is not None:
            lines.append(f"cross_signal = {made}{chain}  # every channel, same rate and span")
        else:
            name = self.data_name
            lines += [f"# every channel of `{name}` (the data given to the workbench), same rate and span",
                      f"cross_signal = {name} if isinstance({name}, sb.Signal) else sb.Signal("
                      f"{name}, fs={selected.fs!r}, channels={py(list(selected.channels))})"]
            if chain:
                lines.append(f"cross_signal = cross_signal{chain}")
        lines += [f"cross_estimator = sb.{est!r}",
                  f"cross = cross_estimator(cross_signal, pair={py((x, y))})"]
        if self.band is not None:
            call = f"cross.delay(band={py(tuple(float(b) for b in self.band))})"
            if self.delay_note is None:
                lines.append(f"cross_delay = {call}")
            else:  # the readout had no clean value: say why instead of a line that raises or warns
                lines += wrap_comment(f"{call} is left out: {self.delay_note}")
        return lines

    def settings_entry(self, est: Any) -> tuple[Any, dict | None]:
        """The pair on screen (and the delay band, when its readout has a clean value) go into the
        settings file's options; the plain numpy/scipy cell reads them too.  A one-channel record
        has nothing to compare: the entry is left out (``specbench estimate`` would refuse it)."""
        if self.last_result is None and self.single is not None:
            return None, None
        if self.last_result is None:
            return est, None
        out: dict = {"pair": list(self.pair)}
        if self.band is not None and self.delay_note is None:
            out["band"] = [float(b) for b in self.band]
        return est, out


_ = (contextlib, math, CURRENT)
