"""The two result views: the PSD and the autocorrelation, each with its shaded band.

A view owns one bqplot Figure with a band mark (``Lines`` with ``fill="between"`` on a
two-row y), the current estimate's line, one line and one lighter band per pin (the pin
bands can be hidden with the view's "pin bands" toggle), and two tools: *read* (an
``IndexSelector``: move over the plot, click to hold, and the readout gives the nearest
bin of the full-resolution result) and *zoom* (``PanZoom`` on the x axis only: drag to
pan, wheel to zoom; the y axis follows, fitted to the visible part, and a zoomed view is
reduced again over its visible range, so zooming in shows every bin).

The y range keeps a minimum span (:data:`MIN_DECADES` on a logarithmic axis,
:data:`MIN_DB` in dB, a fraction of the largest magnitude on a linear axis), so that the
ordinary scatter of a flat spectrum does not fill the plot as if it were structure, and
the axes always carry at least three ticks.

Marks never receive more than :data:`~specbench.widgets._reduce.MAX_POINTS` points: the
traces are reduced by :func:`~specbench.widgets._reduce.reduce_sorted` (min/max per
column, peaks kept) and the band by its per-column envelope.
"""

from __future__ import annotations

import contextlib
import dataclasses
import html
import math
import weakref
from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any

import bqplot as bq
import ipywidgets as W
import numpy as np

from ._merit import fmt
from ._reduce import reduce_sorted
from ._style import (
    AXIS_LABEL,
    BAND_OPACITY,
    CURRENT,
    MARKER_SIZE,
    MARKER_STROKE,
    MARKERS_PER_LINE,
    PIN_BAND_OPACITY,
    PIN_MARKER,
    PIN_MARKERS,
    gapped,
)

__all__ = ["Trace", "Overlay", "SpectrumView", "CorrelationView", "spectrum_trace", "correlation_trace", "fmt"]

#: smallest y span of a logarithmic axis, in decades
MIN_DECADES = 1.0
#: smallest y span of a dB axis
MIN_DB = 10.0
#: smallest y span of a linear axis, as a fraction of the largest magnitude shown
MIN_LINEAR_FRACTION = 0.2

#: "Plot as" choices: (menu label, Spectrum.view kind)
PLOT_AS = (("density", "density"), ("amplitude density", "asd"), ("dB", "db"), ("power", "power"))


def _nearest(axis: np.ndarray, x: float) -> int:
    """Index of the sample of the ascending ``axis`` nearest to ``x``."""
    i = int(np.clip(np.searchsorted(axis, x), 0, axis.size - 1))
    if i > 0 and abs(axis[i - 1] - x) <= abs(axis[i] - x):
        i -= 1
    return i


def _set_range(scale, lo: float, hi: float) -> None:
    """Set a scale's range in an order that keeps min <= max at every step."""
    if scale.max is not None and lo > scale.max:
        scale.max, scale.min = hi, lo
    else:
        scale.min, scale.max = lo, hi


def log_ticks(lo: float, hi: float, most: int = 9) -> list[float]:
    """Tick values for a logarithmic axis over [lo, hi]: decades, then 1-2-5, then 1..9."""
    if not (lo > 0 and hi > lo and math.isfinite(lo) and math.isfinite(hi)):
        return []
    d0, d1 = math.floor(math.log10(lo)), math.ceil(math.log10(hi))
    for mantissas in ((1,), (1, 2, 5), (1, 2, 3, 4, 5, 6, 7, 8, 9)):
        ticks = [m * 10.0**d for d in range(d0, d1 + 1) for m in mantissas]
        ticks = [t for t in ticks if lo <= t <= hi]
        if len(ticks) >= 3 or mantissas[-1] == 9:
            break
    if len(ticks) > most:  # thin out decades on a very wide range
        step = math.ceil(len(ticks) / most)
        ticks = ticks[::step]
    return ticks


def linear_ticks(lo: float, hi: float, target: int = 6) -> list[float]:
    """Round tick values (steps of 1, 2, 2.5 or 5 times a power of ten) over [lo, hi]."""
    if not (math.isfinite(lo) and math.isfinite(hi)) or hi <= lo:
        return []
    raw = (hi - lo) / max(1, target - 1)
    mag = 10.0 ** math.floor(math.log10(raw))
    step = next(m * mag for m in (1, 2, 2.5, 5, 10) if m * mag >= raw)
    first = math.ceil(lo / step - 1e-9) * step
    n = int(math.floor((hi - first) / step + 1e-9)) + 1
    return [round(first + i * step, 12) for i in range(max(0, n))]


def y_limits(lo: float, hi: float, log: bool, min_linear: float = 0.0) -> tuple[float, float]:
    """The y range shown for data in ``[lo, hi]``: a 4 % margin, and at least a minimum span.

    On a logarithmic axis the span is at least :data:`MIN_DECADES` decades, centred on the
    data (geometric middle); on a linear axis at least ``min_linear`` (and never zero).
    """
    if log:
        if not (lo > 0 and hi > 0):
            return lo, hi
        span = math.log10(hi / lo)
        if span < MIN_DECADES:
            mid = 0.5 * (math.log10(lo) + math.log10(hi))
            return 10 ** (mid - MIN_DECADES / 2), 10 ** (mid + MIN_DECADES / 2)
        return lo / 10 ** (0.04 * span), hi * 10 ** (0.04 * span)
    span = hi - lo
    floor = min_linear if min_linear > 0 else max(abs(hi), abs(lo), 1.0) * 0.2
    if span < floor:
        mid = 0.5 * (lo + hi)
        return mid - floor / 2, mid + floor / 2
    return lo - 0.04 * span, hi + 0.04 * span


@dataclass(frozen=True)
class Overlay:
    """A model curve another analysis draws over a view (e.g. a fitted noise model's PSD).

    ``density(freq, onesided)`` returns the model's power spectral density in the
    estimate's unit^2/Hz at ``freq`` (Hz; one-sided when ``onesided``); the PSD view converts
    it to the "plot as" form of the estimate (amplitude density, dB, power).  It is drawn,
    never fitted to: the y range follows the estimates only.
    """

    key: str
    label: str
    density: Any
    colour: str
    dash: str = "solid"


@dataclass(frozen=True)
class Trace:
    """A reduced trace ready for marks: x, the estimate and the band envelope."""

    x: np.ndarray
    y: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    unit: str
    #: y range of the interior points (DC and Nyquist, with half the dof, left out)
    yrange: tuple[float, float] | None
    full_size: int

    @property
    def size(self) -> int:
        return int(self.x.size)


def _yrange(values: Iterable[np.ndarray], log: bool) -> tuple[float, float] | None:
    lo, hi = math.inf, -math.inf
    for v in values:
        v = v[np.isfinite(v)]
        if log:
            v = v[v > 0]
        if v.size:
            lo, hi = min(lo, float(v.min())), max(hi, float(v.max()))
    if not math.isfinite(lo) or not math.isfinite(hi):
        return None
    return lo, hi


def spectrum_trace(spec, kind: str, xlog: bool, lo: float | None = None, hi: float | None = None) -> Trace:
    """The display trace of a one-channel Spectrum in view ``kind`` ("density", "asd", "db", "power").

    The DC bin is left out when the estimator detrended the data (it then holds only the
    residual of the removed mean), and on a logarithmic frequency axis.
    """
    value, lower, upper, unit = spec.view(kind)
    f = spec.freq
    start = 0
    if f.size > 1 and f[0] == 0 and getattr(spec.estimator, "detrend", "none") != "none":
        start = 1
    f, value, lower, upper = f[start:], value[start:], lower[start:], upper[start:]
    red = reduce_sorted(f, value, log=xlog, lo=lo, hi=hi)
    x = red.take(f)
    y = red.take(value)
    lo_env = red.envelope(lower, "min")
    hi_env = red.envelope(upper, "max")
    ylog = kind != "db"
    interior = (red.index > 0) & (red.index < f.size - 1)
    yr = _yrange([y[interior], lo_env[interior], hi_env[interior]], ylog)
    if ylog:
        y, lo_env, hi_env = (np.where(a > 0, a, np.nan) for a in (y, lo_env, hi_env))
    return Trace(x.astype(float), y.astype(float), lo_env.astype(float), hi_env.astype(float),
                 unit, yr, int(spec.freq.size))


def _visible(tr: Trace, lo: float, hi: float, log: bool) -> Trace:
    """``tr`` with its y range taken over ``lo <= x <= hi`` only (the zoomed part)."""
    inside = (tr.x >= lo) & (tr.x <= hi)
    if not inside.any():
        return tr
    yr = _yrange([tr.y[inside], tr.lower[inside], tr.upper[inside]], log)
    return dataclasses.replace(tr, yrange=yr if yr is not None else tr.yrange)


def correlation_trace(corr, lo: float | None = None, hi: float | None = None) -> Trace:
    """The display trace of a one-channel Correlation (lag in seconds)."""
    red = reduce_sorted(corr.lag, corr.value, lo=lo, hi=hi)
    x, y = red.take(corr.lag), red.take(corr.value)
    lo_env, hi_env = red.envelope(corr.lower, "min"), red.envelope(corr.upper, "max")
    yr = _yrange([y, lo_env, hi_env], False)
    return Trace(x.astype(float), y.astype(float), lo_env.astype(float), hi_env.astype(float),
                 corr.unit, yr, int(corr.lag.size))


def marker_points(tr: Trace, lo: float | None, hi: float | None, xlog: bool, ylog: bool,
                  slot: int) -> tuple[np.ndarray, np.ndarray]:
    """Where a pin's markers sit: :data:`MARKERS_PER_LINE` points of its trace, evenly spaced in
    the axis's own measure (logarithmic or linear) over the visible x range, offset by the
    pin's ``slot`` (one eighth of the spacing per slot) so that pins' markers do not coincide."""
    x, y = np.asarray(tr.x, dtype=float), np.asarray(tr.y, dtype=float)
    ok = np.isfinite(x) & np.isfinite(y)
    if xlog:
        ok &= x > 0
    if ylog:
        ok &= y > 0
    x, y = x[ok], y[ok]
    if x.size == 0:
        return np.zeros(0), np.zeros(0)
    a = float(x[0]) if lo is None else max(float(lo), float(x[0]))
    b = float(x[-1]) if hi is None else min(float(hi), float(x[-1]))
    if xlog:
        a, b = math.log10(max(a, float(x[0]))), math.log10(max(b, float(x[0])))
    if not b > a:
        return np.zeros(0), np.zeros(0)
    t = (np.arange(MARKERS_PER_LINE) + (slot % len(PIN_MARKERS) + 0.5) / len(PIN_MARKERS)) / MARKERS_PER_LINE
    targets = a + t * (b - a)
    if xlog:
        targets = 10.0 ** targets
    idx = np.clip(np.searchsorted(x, targets), 0, x.size - 1)
    return x[idx], y[idx]


class _TraceView:
    """Figure, band, current line, pin lines, read/zoom tools and the readout."""

    #: css class of the figure
    css = ""
    x_label = ""

    def __init__(self, title: str, height: str = "360px") -> None:
        self._guard = 0
        self.zoomed = False
        #: zoomed: y fits the visible part (True) or keeps the whole estimate's range (False)
        self.fit_visible = True
        #: further tools of the tool menu: value -> callable returning a bqplot interaction
        self.extra_tools: dict[str, Any] = {}
        self.result = None  # the full-resolution result on screen
        self._read_x: float | None = None  # where the read tool was last
        self.pinned: list[tuple[Any, str, str]] = []  # (result, colour, dash)
        self._cache: weakref.WeakKeyDictionary = weakref.WeakKeyDictionary()
        self.xs, self.ys = self._make_scales()
        self.band = bq.Lines(
            x=np.zeros(0), y=np.zeros((2, 0)), scales={"x": self.xs, "y": self.ys}, fill="between",
            colors=[CURRENT, CURRENT], fill_colors=[CURRENT], fill_opacities=[BAND_OPACITY],
            opacities=[0.0, 0.0], stroke_width=0.0, enable_hover=False, apply_clip=True,
        )
        self.line = bq.Lines(x=np.zeros(0), y=np.zeros(0), scales={"x": self.xs, "y": self.ys},
                             colors=[CURRENT], stroke_width=1.6, enable_hover=False)
        self.pin_lines: list[bq.Lines] = []
        self.pin_bands: list[bq.Lines] = []
        self.pin_markers: list[bq.Scatter] = []  # a few markers along each pin line (its marker shape)
        self.ax_x, self.ax_y = self._make_axes()
        self.figure = bq.Figure(
            marks=[self.band, self.line], axes=[self.ax_x, self.ax_y],
            fig_margin=dict(top=12, bottom=46, left=72, right=30), padding_y=0.0,
            animation_duration=0, display_toolbar=False,
            layout=W.Layout(width="100%", height=height, min_width="250px"),
        )
        self.figure.add_class(self.css)
        self.readout = W.HTML("<span class='sb-muted'>Click the plot to read values; move to follow, "
                              "click again to hold.</span>")
        self.readout.add_class("sb-readout")
        self.title = W.HTML(f"<span class='sb-view-title'>{title}</span>", layout=W.Layout(flex="1 1 auto"))
        self.tool = W.ToggleButtons(options=[("read", "read"), ("zoom", "zoom")], value="read",
                                    style={"button_width": "56px"}, tooltips=[
                                        "Click the plot for values; move to follow, click again to hold.",
                                        "Drag sideways to pan, wheel to zoom the x axis; y follows the "
                                        "visible part. 'whole' resets."])
        self.pin_band_toggle = W.ToggleButton(value=True, description="pin bands",
                                              tooltip="Show the confidence band of every pinned estimate.",
                                              layout=W.Layout(width="auto"))
        self.pin_band_toggle.add_class("sb-pin-band-toggle")
        self.pin_band_toggle.observe(lambda ch: self.redraw(), names="value")
        self.reset = W.Button(description="whole", layout=W.Layout(width="60px", flex="0 0 60px"),
                              tooltip="Show the whole estimate again (undo zoom).")
        self.reset.on_click(lambda _: self.reset_zoom())
        self.tool.observe(lambda ch: self._set_tool(), names="value")
        self.header = gapped(W.HBox([self.title, self.pin_band_toggle, self.tool, self.reset],
                                    layout=W.Layout(align_items="center", flex_flow="row wrap")), "small")
        self.footer = gapped(W.HBox([self.readout], layout=W.Layout(flex_flow="row wrap", align_items="center")),
                             "medium")
        self._watch_scales()
        self._set_tool()

    # -- scales and tools ------------------------------------------------------------
    def _make_axes(self, y_label: str = "") -> tuple[bq.Axis, bq.Axis]:
        ax_x = bq.Axis(scale=self.xs, label_color=AXIS_LABEL, label=self.x_label, grid_lines="dashed",
                       label_offset="32px")
        ax_y = bq.Axis(scale=self.ys, side="left", label_color=AXIS_LABEL, label=y_label, grid_lines="dashed",
                       label_offset="52px")
        return ax_x, ax_y

    def _make_scales(self):
        return bq.LinearScale(), bq.LinearScale()

    def _watch_scales(self) -> None:
        for s in (self.xs, self.ys):
            s.observe(self._scale_moved, names=["min", "max"])

    def _unwatch_scales(self) -> None:
        for s in (self.xs, self.ys):
            with contextlib.suppress(ValueError):
                s.unobserve(self._scale_moved, names=["min", "max"])

    def _scale_moved(self, change) -> None:
        if self._guard:
            return
        # the front end panned or zoomed the x axis: reduce again over the visible range and
        # fit y to what is visible
        self.zoomed = True
        if change["owner"] is self.xs:
            self.redraw()
        else:
            self._ticks()

    def _set_tool(self) -> None:
        if self.tool.value in self.extra_tools:
            self.figure.interaction = self.extra_tools[self.tool.value]()
        elif self.tool.value == "zoom":
            self.figure.interaction = bq.interacts.PanZoom(scales={"x": [self.xs]})
        else:
            sel = bq.interacts.IndexSelector(scale=self.xs, marks=[], color="var(--jp-ui-font-color2)", line_width=1)
            sel.observe(self._read, names="selected")
            self.figure.interaction = sel

    def _set_scales(self, xs, ys) -> None:
        """Swap scales (linear <-> log) on every mark, the axes and the tools."""
        if xs is self.xs and ys is self.ys:
            return
        self._unwatch_scales()
        self.xs, self.ys = xs, ys
        for m in self.figure.marks:
            m.scales = {"x": xs, "y": ys}
        # new axes rather than a new scale on the old ones: bqplot's front end does not redraw
        # the ticks of an axis whose scale object is replaced
        self.ax_x, self.ax_y = self._make_axes(self.ax_y.label)
        self.figure.axes = [self.ax_x, self.ax_y]
        self._watch_scales()
        self._set_tool()

    def reset_zoom(self) -> None:
        self.zoomed = False
        self.redraw()

    def zoom_x(self, lo: float, hi: float) -> None:
        """Show ``lo <= x <= hi`` (what the zoom tool does), with y fitted to the visible part."""
        if not hi > lo:
            raise ValueError(f"zoom_x needs lo < hi; got {lo!r}, {hi!r}")
        self._guard += 1
        try:
            _set_range(self.xs, float(lo), float(hi))
        finally:
            self._guard -= 1
        self.zoomed = True
        self.redraw()

    # -- data --------------------------------------------------------------------------
    def _trace(self, result, lo, hi) -> Trace:
        raise NotImplementedError

    def _ylog(self) -> bool:
        return False

    def _trace_cached(self, result, lo, hi) -> Trace:
        key = (self._trace_key(), lo, hi)
        per = self._cache.setdefault(result, {})
        tr = per.get(key)
        if tr is None:
            if len(per) > 8:
                per.clear()
            tr = per[key] = self._trace(result, lo, hi)
        return tr

    def _trace_key(self) -> tuple:
        return ()

    def visible_range(self) -> tuple[float | None, float | None]:
        if not self.zoomed:
            return None, None
        return self.xs.min, self.xs.max

    def show(self, result, pinned: list[tuple[Any, str, str]] | None = None) -> None:
        """Put ``result`` (and the pinned results) on screen in one synchronised step."""
        self.result = result
        if pinned is not None:
            self.pinned = list(pinned)
        self.redraw()
        if self._read_x is not None:  # the readout follows the new estimate
            self.readout.value = self._readout_text(self._read_x)

    def redraw(self) -> None:
        if self.result is None:
            return
        lo, hi = self.visible_range()
        cur = self._trace_cached(self.result, lo, hi)
        pins = [(self._trace_cached(r, lo, hi), c, d) for r, c, d in self.pinned]
        while len(self.pin_lines) < len(pins):
            self.pin_lines.append(bq.Lines(x=np.zeros(0), y=np.zeros(0), scales={"x": self.xs, "y": self.ys},
                                           stroke_width=1.3, enable_hover=False))
        while len(self.pin_markers) < len(pins):
            self.pin_markers.append(bq.Scatter(
                x=np.zeros(0), y=np.zeros(0), scales={"x": self.xs, "y": self.ys}, default_size=MARKER_SIZE,
                stroke_width=MARKER_STROKE, enable_hover=False, apply_clip=True))
        while len(self.pin_bands) < len(pins):
            self.pin_bands.append(bq.Lines(
                x=np.zeros(0), y=np.zeros((2, 0)), scales={"x": self.xs, "y": self.ys}, fill="between",
                fill_opacities=[PIN_BAND_OPACITY], opacities=[0.0, 0.0], stroke_width=0.0,
                enable_hover=False, apply_clip=True))
        used = self.pin_lines[: len(pins)]
        dots = self.pin_markers[: len(pins)]
        bands = self.pin_bands[: len(pins)] if self.pin_band_toggle.value else []
        extra = self._extra_marks(cur)
        # pin bands under the current band, the pin lines (and their markers) over it, the current line on top
        marks = [*bands, self.band, *used, *dots, *extra, self.line]
        holds = [self.figure, self.band, self.line, self.ax_y, self.xs, self.ys, *used, *dots, *bands, *extra]
        with contextlib.ExitStack() as stack:
            for w in holds:
                stack.enter_context(w.hold_sync())
            self.band.x = cur.x
            self.band.y = np.vstack([cur.upper, cur.lower])
            self.line.x = cur.x
            self.line.y = cur.y
            self._draw_extra(cur, extra)
            for m, (tr, colour, dash) in zip(used, pins):
                m.x, m.y = tr.x, tr.y
                m.colors = [colour]
                m.line_style = dash
                m.scales = {"x": self.xs, "y": self.ys}
            for m, (tr, colour, _dash) in zip(dots, pins):
                marker = PIN_MARKER.get(colour, PIN_MARKERS[0])
                slot = PIN_MARKERS.index(marker)
                m.x, m.y = marker_points(tr, lo, hi, self._xlog(), self._ylog(), slot)
                m.marker = marker
                m.colors = [colour]
                m.stroke = colour
                m.scales = {"x": self.xs, "y": self.ys}
            for m, (tr, colour, _dash) in zip(bands, pins):
                m.x = tr.x
                m.y = np.vstack([tr.upper, tr.lower])
                m.colors = [colour, colour]
                m.fill_colors = [colour]
                m.scales = {"x": self.xs, "y": self.ys}
            if list(self.figure.marks) != marks:
                self.figure.marks = marks
            self.ax_y.label = self._y_label(cur)
            traces = [cur] + [p[0] for p in pins]
            if self.zoomed and lo is not None and hi is not None:
                if self.fit_visible:
                    traces = [_visible(t, lo, hi, self._ylog()) for t in traces]
                else:  # y keeps the range of the whole estimates
                    traces = [self._trace_cached(r, None, None) for r in (self.result, *[p[0] for p in self.pinned])]
            self._fit_y(traces)  # zoomed: y fits the visible part
            if not self.zoomed:
                self._fit_x(traces)
            self._ticks()

    def _extra_marks(self, cur: Trace) -> list:
        """Marks drawn between the pins and the current line (none here)."""
        return []

    def _draw_extra(self, cur: Trace, marks: list) -> None:
        """Fill the marks of :meth:`_extra_marks` for the current trace ``cur``."""

    def _fit_x(self, traces: list[Trace]) -> None:
        xs = [t.x for t in traces if t.size]
        self._guard += 1
        try:
            if not xs:
                self.xs.min = self.xs.max = None
                return
            lo, hi = min(float(x[0]) for x in xs), max(float(x[-1]) for x in xs)
            if hi <= lo:
                lo, hi = (lo / 2, hi * 2) if self._xlog() else (lo - 0.5, hi + 0.5)
            _set_range(self.xs, lo, hi)
        finally:
            self._guard -= 1

    def _xlog(self) -> bool:
        return False

    def _ticks(self) -> None:
        """Readable tick values on logarithmic axes (bqplot's own crowd and overlap)."""
        for ax, scale, log in ((self.ax_x, self.xs, self._xlog()), (self.ax_y, self.ys, self._ylog())):
            if scale.min is None or scale.max is None:
                ax.tick_values, ax.tick_format = None, None
                continue
            lo, hi = float(scale.min), float(scale.max)
            if log:
                ax.tick_values = np.array(log_ticks(lo, hi, most=7 if ax is self.ax_x else 6))
                ax.tick_format = "~g" if ax is self.ax_x else ".0e"
            else:
                ax.tick_values = np.array(linear_ticks(lo, hi, 6 if ax is self.ax_x else 5))
                ax.tick_format = "~g"

    def _fit_y(self, traces: list[Trace]) -> None:
        ranges = [t.yrange for t in traces if t.yrange is not None]
        self._guard += 1
        try:
            if not ranges:
                self.ys.min = self.ys.max = None
                return
            lo, hi = min(r[0] for r in ranges), max(r[1] for r in ranges)
            lo, hi = y_limits(lo, hi, self._ylog(), self._min_linear_span(lo, hi))
            _set_range(self.ys, lo, hi)
        finally:
            self._guard -= 1

    def _min_linear_span(self, lo: float, hi: float) -> float:
        return MIN_LINEAR_FRACTION * max(abs(lo), abs(hi))

    def _y_label(self, tr: Trace) -> str:
        return tr.unit

    def marks_points(self) -> dict[str, int]:
        """Points held by every mark (band rows counted): for the display-budget checks."""
        out = {"band": int(np.asarray(self.band.y).size), "current": int(np.asarray(self.line.y).size)}
        for i, m in enumerate(self.pin_lines):
            if m in self.figure.marks:
                out[f"pin{i + 1}"] = int(np.asarray(m.y).size)
        return out

    # -- readout ----------------------------------------------------------------------
    def _read(self, change) -> None:
        sel = change["new"]
        if self.result is None or sel is None or len(sel) == 0:
            return
        try:
            self._read_x = float(sel[0])
            self.readout.value = self._readout_text(self._read_x)
        except Exception as e:  # a readout must never raise into the front end
            self.readout.value = f"<span class='sb-muted'>no reading ({type(e).__name__})</span>"

    def read_at(self, x: float) -> str:
        """The readout text at ``x`` (what the read tool shows there)."""
        self._read_x = float(x)
        self.readout.value = self._readout_text(self._read_x)
        return self.readout.value

    def _readout_text(self, x: float) -> str:
        raise NotImplementedError


class SpectrumView(_TraceView):
    css = "sb-psd"
    x_label = "Frequency (Hz)"

    def __init__(self) -> None:
        self._xs_lin, self._xs_log = bq.LinearScale(), bq.LogScale()
        self._ys_lin, self._ys_log = bq.LinearScale(), bq.LogScale()
        self.kind = "density"
        self.xlog = True
        super().__init__("Power spectral density")
        self.plot_as = W.Dropdown(options=list(PLOT_AS), value="density", description="plot as",
                                  style={"description_width": "52px"}, layout=W.Layout(width="200px"))
        self.plot_as.tooltip = "How the estimate is drawn; the estimate itself does not change."
        self.freq_axis = W.ToggleButtons(options=[("log", "log"), ("linear", "linear")], value="log",
                                         style={"button_width": "66px"},
                                         tooltips=["Logarithmic frequency axis.", "Linear frequency axis."])
        self.plot_as.observe(lambda ch: self.set_display(kind=ch["new"]), names="value")
        self.freq_axis.observe(lambda ch: self.set_display(xlog=ch["new"] == "log"), names="value")
        self.footer.children = [self.plot_as, self.freq_axis, self.readout]
        #: objects with ``marks()`` and ``draw(trace)`` drawn with the estimate (over the pins)
        self.layers: list = []
        # model curves of other analyses (set_overlays); the toggle shows only while there are some
        self.overlays: list[Overlay] = []
        self.overlay_lines: dict[str, bq.Lines] = {}
        self.overlay_toggle = W.ToggleButton(value=True, description="models", layout=W.Layout(
            width="auto", display="none"), tooltip="Show the model curves of the other analyses (e.g. the "
                                                  "fitted noise model) over the estimate.")
        self.overlay_toggle.add_class("sb-overlay-toggle")
        self.overlay_toggle.observe(lambda ch: self.redraw(), names="value")
        self.footer.children = [self.plot_as, self.freq_axis, self.overlay_toggle, self.readout]

    def set_overlays(self, overlays: list[Overlay]) -> None:
        """The model curves to draw over the estimate (drawn at the next :meth:`redraw`)."""
        self.overlays = list(overlays)
        self.overlay_toggle.layout.display = None if self.overlays else "none"
        for o in self.overlays:
            if o.key not in self.overlay_lines:
                line = bq.Lines(x=np.zeros(0), y=np.zeros(0), scales={"x": self.xs, "y": self.ys},
                                stroke_width=1.8, enable_hover=False, apply_clip=True)
                self.overlay_lines[o.key] = line

    def _extra_marks(self, cur: Trace) -> list:
        out = [self.overlay_lines[o.key] for o in self.overlays] if self.overlay_toggle.value else []
        for layer in self.layers:  # e.g. the measurement cursors (widgets/_measure_view.py)
            out += layer.marks()
        return out

    def overlay_values(self, overlay: Overlay, freq: np.ndarray) -> np.ndarray:
        """``overlay`` at ``freq`` in the view's "plot as" form of the estimate on screen."""
        spec = self.result
        with np.errstate(divide="ignore", invalid="ignore"):
            d = np.asarray(overlay.density(freq, bool(getattr(spec, "onesided", True))), dtype=float)
            d = np.where(np.isfinite(d) & (d > 0), d, np.nan)
            if self.kind == "asd":
                return np.sqrt(d)
            if self.kind == "db":
                return 10 * np.log10(d)
            if self.kind == "power":
                return d * spec.info.get("line_bandwidth_hz", spec.resolution)
            return d

    def _draw_extra(self, cur: Trace, marks: list) -> None:
        for layer in self.layers:
            layer.draw(cur)
        if not self.overlay_toggle.value:
            return
        for o, m in zip(self.overlays, marks):
            try:
                y = self.overlay_values(o, cur.x)
            except Exception:  # a model curve never breaks the view of the estimate
                y = np.full(cur.x.shape, np.nan)
            m.x, m.y = cur.x, y
            m.colors = [o.colour]
            m.line_style = o.dash
            m.labels = [o.label]
            m.scales = {"x": self.xs, "y": self.ys}

    def _make_scales(self):
        return self._xs_log, self._ys_log

    def _ylog(self) -> bool:
        return self.kind != "db"

    def _xlog(self) -> bool:
        return self.xlog

    def _trace_key(self) -> tuple:
        return (self.kind, self.xlog)

    def _trace(self, result, lo, hi) -> Trace:
        return spectrum_trace(result, self.kind, self.xlog, lo, hi)

    def set_display(self, kind: str | None = None, xlog: bool | None = None) -> None:
        if kind is not None:
            self.kind = kind
        if xlog is not None:
            self.xlog = xlog
        xs = self._xs_log if self.xlog else self._xs_lin
        ys = self._ys_log if self._ylog() else self._ys_lin
        self.zoomed = False
        self._set_scales(xs, ys)
        self.redraw()
        if self._read_x is not None and self.result is not None:
            self.readout.value = self._readout_text(self._read_x)

    def _min_linear_span(self, lo: float, hi: float) -> float:
        return MIN_DB if self.kind == "db" else super()._min_linear_span(lo, hi)

    def marks_points(self) -> dict[str, int]:
        out = super().marks_points()
        for key, m in self.overlay_lines.items():
            if m in self.figure.marks:
                out[f"overlay/{key}"] = int(np.asarray(m.y).size)
        return out

    def _y_label(self, tr: Trace) -> str:
        name = {"density": "PSD", "asd": "ASD", "db": "PSD", "power": "Power"}[self.kind]
        return f"{name} ({tr.unit})" if tr.unit else name

    def _readout_text(self, x: float) -> str:
        spec = self.result
        f = spec.freq
        i = _nearest(f, x)
        value, lower, upper, unit = spec.view(self.kind, index=i)  # that bin only: this runs on mouse moves
        dof = np.broadcast_to(spec.dof, spec.value.shape)[..., i]
        return (f"<b>{fmt(f[i])} Hz</b> &nbsp; {fmt(value)} {html.escape(unit)} &nbsp; "
                f"<span class='sb-muted'>{spec.confidence:.0%} band</span> [{fmt(lower)}, {fmt(upper)}]"
                f" &nbsp; <span class='sb-muted'>dof</span> {fmt(float(dof))}")


class CorrelationView(_TraceView):
    css = "sb-acf"
    x_label = "Lag (s)"

    def __init__(self) -> None:
        super().__init__("Autocorrelation")

    def _trace(self, result, lo, hi) -> Trace:
        return correlation_trace(result, lo, hi)

    def _y_label(self, tr: Trace) -> str:
        return f"Autocovariance ({tr.unit})" if tr.unit else "Autocorrelation"

    def _readout_text(self, x: float) -> str:
        c = self.result
        lag = c.lag
        i = _nearest(lag, x)
        unit = f" {html.escape(c.unit)}" if c.unit else ""
        band = "white-noise band" if c.band == "white" else "Bartlett band"
        return (f"<b>lag {fmt(lag[i])} s</b> ({i} samples) &nbsp; {fmt(c.value[i])}{unit} &nbsp; "
                f"<span class='sb-muted'>{c.confidence:.0%} {band}</span> [{fmt(c.lower[i])}, {fmt(c.upper[i])}]")
