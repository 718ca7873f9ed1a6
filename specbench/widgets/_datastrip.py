"""The data strip: channel, sample rate, analysis span, detrending and the overview trace.

The overview shows the whole record of the chosen channel, reduced for display with its
peaks kept (computed once per channel and cached); brushing it chooses the analysis span.
The span is in seconds from the record start, on the time axis of the effective sample
rate (the file's, or the override).
"""

from __future__ import annotations

import html
import math
from typing import Any

import bqplot as bq
import ipywidgets as W
import numpy as np

from ._controls import ENTRY_WIDTH, ChoiceControl, FieldControl, _assign
from ._merit import fmt
from ._reduce import overview
from ._style import AXIS_LABEL, CURRENT, gapped
from ._views import linear_ticks

__all__ = ["DataStrip", "RateControl", "SpanControl"]


class RateControl(FieldControl):
    """Sample rate: shows the effective rate; ``value`` is the override (None: the file's)."""

    def __init__(self, native_fs: float) -> None:
        self.native_fs = float(native_fs)
        super().__init__("fs", "Sample rate", "Samples per second. Type another rate to override the "
                         "one the data came with; 'file rate' goes back to it.", "Hz", value=None)

    def _build(self):
        self.entry = W.FloatText(layout=W.Layout(width="110px"))
        self._listen(self.entry)
        self.back = W.Button(description="file rate", layout=W.Layout(width="76px"),
                             tooltip="Use the sample rate the data came with.")
        self.back.on_click(lambda _: setattr(self, "value", None))
        return [self.entry]

    def _extra_rows(self):
        return []

    def _show(self, value):
        _assign(self.entry, value=self.native_fs if value is None else value)
        self.back.disabled = value is None

    def _read(self):
        v = self.entry.value
        return None if v == self.native_fs else v


class SpanControl(FieldControl):
    """Analysis span ``(start_s, stop_s)`` or None (the whole record), by entry or brushing."""

    def __init__(self) -> None:
        super().__init__("span", "Span", "Part of the record analysed, in seconds from its start. "
                         "Brush the overview trace, or type the limits.", "s", value=None)

    def _build(self):
        self.start = W.FloatText(layout=W.Layout(width=ENTRY_WIDTH))
        self.stop = W.FloatText(layout=W.Layout(width=ENTRY_WIDTH))
        self.whole = W.Button(description="whole record", layout=W.Layout(width="112px"),
                              tooltip="Analyse the whole record.")
        self.whole.on_click(lambda _: setattr(self, "value", None))
        self.extent: tuple[float, float] = (0.0, 0.0)
        for e in (self.start, self.stop):
            self._listen(e)
        return [self.start, W.HTML("&nbsp;to&nbsp;"), self.stop]

    def _editors(self):
        return [self.start, self.stop]

    def set_extent(self, duration: float) -> None:
        self.extent = (0.0, float(duration))
        with self._silence():
            self._show(self.value)

    def _show(self, value):
        if value is not None and not (isinstance(value, (tuple, list)) and len(value) == 2):
            return  # not a span: the workbench refuses it with a message on this control
        a, b = self.extent if value is None else value
        _assign(self.start, value=a)
        _assign(self.stop, value=b)
        self.whole.disabled = value is None

    def _read(self):
        a, b = float(self.start.value), float(self.stop.value)
        if (a, b) == self.extent:
            return None
        return (a, b)


class DataStrip:
    """The widgets of the data strip; the workbench observes the controls' ``value``."""

    def __init__(self, signal: Any) -> None:
        self.signal = signal
        self._overviews: dict[int, tuple[np.ndarray, np.ndarray]] = {}
        self._guard = 0
        names = list(signal.channels)
        self.channel = ChoiceControl(
            "channel", "Channel", names, "The channel analysed.", value=names[0],
        )
        self.channel.dropdown.disabled = len(names) == 1
        self.rate = RateControl(signal.fs)
        self.span = SpanControl()
        self.fields_box = gapped(W.HBox(layout=W.Layout(flex_flow="row wrap")), "wide")
        self.info = W.HTML()
        self.info.add_class("sb-data-info")

        self.xs = bq.LinearScale()
        self.ys = bq.LinearScale()
        self.trace = bq.Lines(x=np.zeros(0), y=np.zeros(0), scales={"x": self.xs, "y": self.ys},
                              colors=["var(--jp-ui-font-color2)"], stroke_width=1.0, enable_hover=False)
        self.brush = bq.interacts.BrushIntervalSelector(scale=self.xs, marks=[], color=CURRENT)
        self.brush.observe(self._brushed, names=["brushing", "selected"])
        self.ax_x = ax_x = bq.Axis(scale=self.xs, label_color=AXIS_LABEL, label="Time from record start (s)",
                                   label_offset="30px", tick_format="~g")
        self.ax_y = bq.Axis(scale=self.ys, side="left", label_color=AXIS_LABEL, num_ticks=3, label_offset="48px")
        self.figure = bq.Figure(
            marks=[self.trace], axes=[ax_x, self.ax_y], interaction=self.brush,
            fig_margin=dict(top=6, bottom=40, left=72, right=30), padding_y=0.05, animation_duration=0,
            display_toolbar=False,
            layout=W.Layout(width="100%", height="136px"),
        )
        self.figure.add_class("sb-overview")
        hint = W.HTML("<span class='sb-muted'>Brush the trace to choose the span; click outside the "
                      "brushed part to clear it.</span>")
        row1 = gapped(W.HBox([self.channel, self.rate, self.rate.back], layout=W.Layout(flex_flow="row wrap")),
                      "wide")
        row2 = gapped(W.HBox([self.span, self.span.whole, self.fields_box],
                             layout=W.Layout(flex_flow="row wrap", align_items="flex-start")), "wide")
        self.widget = W.VBox([row1, row2, self.info, self.figure, hint])
        self.widget.add_class("sb-datastrip")
        self.on_brush = None  # set by the workbench: callable(span or None)

    # -- overview --------------------------------------------------------------------
    def _overview(self, index: int) -> tuple[np.ndarray, np.ndarray]:
        cached = self._overviews.get(index)
        if cached is None:
            y = self.signal.data[index]
            t, v = overview(y, 1.0)  # t in samples; scaled by the effective rate on display
            cached = self._overviews[index] = (t, v)
        return cached

    def show(self, index: int, fs: float, unit: str, span: tuple[float, float] | None, n_span: int) -> None:
        """Draw the overview of channel ``index`` at rate ``fs`` and describe record and span."""
        t, v = self._overview(index)
        n = self.signal.n_samples
        duration = n / fs
        self.span.set_extent(duration)
        with self.figure.hold_sync(), self.trace.hold_sync():
            self.trace.x = t / fs
            self.trace.y = v
            self.ax_y.label = unit
            self.xs.min, self.xs.max = 0.0, duration
            self.ax_x.tick_values = np.array(linear_ticks(0.0, duration, 9))
        self._guard += 1
        try:
            self.brush.selected = None if span is None else np.array(span, dtype=float)
        finally:
            self._guard -= 1
        a, b = (0.0, duration) if span is None else span
        self.info.value = (
            f"<span class='sb-muted'>Record</span> {n:,} samples · {fmt(duration)} s at {fmt(fs)} Hz"
            + (f" · {html.escape(unit)}" if unit else "")
            + f" &nbsp;&nbsp; <span class='sb-muted'>Span</span> {fmt(a)} to {fmt(b)} s · {n_span:,} samples"
            + ("" if span is not None else " (whole record)")
        )

    def _brushed(self, change) -> None:
        if self._guard or self.brush.brushing:
            return
        sel = self.brush.selected
        if sel is None or len(sel) < 2:
            span = None
        else:
            a, b = sorted(float(s) for s in sel[:2])
            if not (math.isfinite(a) and math.isfinite(b)) or b <= a:
                span = None
            else:
                # a brush is as precise as a pixel: keep about 4 significant digits of the record
                duration = self.span.extent[1]
                digits = max(0, 3 - math.floor(math.log10(duration))) if duration > 0 else 6
                a, b = round(max(a, 0.0), digits), round(min(b, duration), digits)
                span = (a, b) if b > a else None
        if self.on_brush is not None:
            self.on_brush(span)

    def marks_points(self) -> int:
        return int(np.asarray(self.trace.y).size)
