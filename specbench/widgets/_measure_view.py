"""The measurement cursors on the PSD view, the measurements table and the advise panel.

- :class:`MeasureLayer` draws on the PSD view (a layer of :class:`._views.SpectrumView`): the
  band cursor (a shaded span, set with the view's *band* tool by dragging, or typed), a
  marker on the strongest tone, and harmonic cursors at multiples of a fundamental.
- :class:`MeasurePanel` is the table under the figures of merit: band RMS and band power of
  the band with their intervals and dof, the noise floor, the tones (a click on a tone's
  frequency centres the view on it and makes it the harmonics' fundamental) and the harmonic
  readings; and the row of measurement controls (band edges, harmonics, "y fits visible").
- :class:`AdvisePanel`: targets typed by the user, ``sb.advise`` on the selected record with a
  progress bar, the ranked candidates with an *apply* button each, and the trade-off chart.

The state is :class:`._measure.MeasureState` (pure Python, on the analysis); these classes
only show it and forward the user's actions.
"""

from __future__ import annotations

import html
import math
import time
from typing import Any

import bqplot as bq
import ipywidgets as W
import numpy as np

from .._errors import SpecbenchError
from ._measure import MeasureState, Readings, harmonic_band
from ._merit import duration, fmt
from ._style import AXIS_LABEL, MARKER, MARKER_BAND_OPACITY, gapped

__all__ = ["MeasureLayer", "MeasurePanel", "AdvisePanel"]


def _unit(u: Any) -> str:
    return html.escape(u if isinstance(u, str) else "")


def _interval(m: Any) -> str:
    return f"[{fmt(float(m.lower))}, {fmt(float(m.upper))}]"


class MeasureLayer:
    """Band cursor, peak marker and harmonic cursors over a :class:`._views.SpectrumView`."""

    def __init__(self, view: Any, state: MeasureState, on_band: Any) -> None:
        self.view = view
        self.state = state
        self.on_band = on_band  # callable(f1, f2): the user dragged a band
        self.unit_y = bq.LinearScale(min=0.0, max=1.0)  # full plot height, whatever the y axis
        self.shade = bq.Lines(x=np.zeros(0), y=np.zeros((2, 0)), fill="between", colors=[MARKER, MARKER],
                              fill_colors=[MARKER], fill_opacities=[MARKER_BAND_OPACITY], opacities=[0.0, 0.0],
                              stroke_width=0.0, enable_hover=False, apply_clip=True,
                              scales={"x": view.xs, "y": self.unit_y})
        self.edges = bq.Lines(apply_clip=True, x=np.ones((2, 2)), y=np.zeros((2, 2)), colors=[MARKER],
                              stroke_width=1.2, enable_hover=False, visible=False,
                              scales={"x": view.xs, "y": self.unit_y})
        self.harmonics = bq.Lines(apply_clip=True, x=np.ones((1, 2)), y=np.zeros((1, 2)), colors=[MARKER],
                                  line_style="dotted", stroke_width=1.2, enable_hover=False, visible=False,
                                  scales={"x": view.xs, "y": self.unit_y})
        self.harmonic_labels = bq.Label(apply_clip=True, x=np.zeros(0), y=np.zeros(0), text=[], colors=[MARKER],
                                        default_size=11, x_offset=3, align="start",
                                        scales={"x": view.xs, "y": self.unit_y})
        self.peak = bq.Scatter(apply_clip=True, x=np.zeros(0), y=np.zeros(0), marker="arrow", colors=[MARKER],
                               stroke="white", default_size=70, enable_hover=False, visible=False,
                               scales={"x": view.xs, "y": view.ys})
        self.peak_label = bq.Label(apply_clip=True, x=np.zeros(0), y=np.zeros(0), text=[], colors=[MARKER],
                                   default_size=11, y_offset=-12, align="middle", font_weight="bold",
                                   scales={"x": view.xs, "y": view.ys})
        view.layers.append(self)
        view.extra_tools["band"] = self._brush
        opts = [o for o in view.tool.options if (o[1] if isinstance(o, tuple) else o) != "band"]
        tips = list(view.tool.tooltips)[: len(opts)]
        view.tool.options = [*opts, ("band", "band")]
        view.tool.tooltips = [*tips, "Drag across the plot to set the band cursor: its RMS, power and "
                                     "interval appear in the measurements table."]
        view.tool.style.button_width = "40px"
        view.reset.layout.width, view.reset.layout.flex = "58px", "0 0 58px"
        view.tool.add_class("sb-tool-compact")
        view.reset.add_class("sb-tool-compact-button")

    # -- tool --------------------------------------------------------------------------
    def _brush(self):
        sel = bq.interacts.BrushIntervalSelector(scale=self.view.xs, marks=[], color=MARKER)
        # the front end may send the end of the drag before or after the last selection
        sel.observe(self._brushed, names=["brushing", "selected"])
        self._selector = sel
        return sel

    def _brushed(self, change) -> None:
        if self._selector.brushing:  # still dragging
            return
        sel = self._selector.selected
        if sel is None or len(sel) != 2:
            return
        # a dragged band reads as a person would type it: 4 significant digits
        a, b = (float(f"{float(v):.4g}") for v in sel)
        if a != b and self.state.band != (min(a, b), max(a, b)):
            self.on_band(a, b)
            # a fresh selector: the brush's own rectangle goes, the band cursor's shade stays
            self.view._set_tool()

    # -- the layer protocol of SpectrumView ----------------------------------------------
    def marks(self) -> list:
        """The marks in the figure now: only the cursors in use (no hidden marks in the plot)."""
        out = []
        if self.state.band is not None:
            out += [self.shade, self.edges]
        r = self.state.last
        if r is not None and r.fundamental is not None and r.harmonics:
            out += [self.harmonics, self.harmonic_labels]
        if r is not None and r.tones.ok and len(r.tones.result):
            out += [self.peak, self.peak_label]
        return out

    def holds(self) -> list:
        return [self.shade, self.edges, self.harmonics, self.harmonic_labels, self.peak, self.peak_label]

    def draw(self, cur: Any) -> None:
        """Put the cursors where the state says (called inside the view's synchronised redraw)."""
        v = self.view
        for m in (self.shade, self.edges, self.harmonics, self.harmonic_labels):
            m.scales = {"x": v.xs, "y": self.unit_y}
        for m in (self.peak, self.peak_label):
            m.scales = {"x": v.xs, "y": v.ys}
        spec = v.result
        band = self.state.band
        lo, hi = v.visible_range()
        lo = -math.inf if lo is None else float(lo)
        hi = math.inf if hi is None else float(hi)
        if band is not None and spec is not None and band[1] >= lo and band[0] <= hi:
            f1, f2 = band
            self.shade.x = np.array([f1, f2], dtype=float)
            self.shade.y = np.array([[1.0, 1.0], [0.0, 0.0]])
            self.edges.x = np.array([[f1, f1], [f2, f2]], dtype=float)
            self.edges.y = np.array([[0.0, 1.0], [0.0, 1.0]])
            self.edges.visible = True
        else:
            self.shade.x = np.zeros(0)
            self.shade.y = np.zeros((2, 0))
            self.edges.visible = False
        readings = self.state.last
        tones = readings.tones.result if readings is not None and readings.tones.ok else None
        if tones is not None and len(tones) and spec is not None:
            t = tones[0]
            value = v.result.view(v.kind, index=int(t.bin))[0]
            self.peak.x = np.array([t.freq])
            self.peak.y = np.array([float(value)])
            self.peak.visible = True
            self.peak_label.x = np.array([t.freq])
            self.peak_label.y = np.array([float(value)])
            self.peak_label.text = [f"{fmt(t.freq)} Hz"]
        else:
            self.peak.x = self.peak.y = np.zeros(0)
            self.peak.visible = False
            self.peak_label.text = []
            self.peak_label.x = self.peak_label.y = np.zeros(0)
        f0 = None if readings is None else readings.fundamental
        if f0 is not None and spec is not None and readings.harmonics:
            top = float(spec.freq[-1])
            on = [(n, n * f0) for n in range(1, len(readings.harmonics) + 1) if n * f0 <= top and lo <= n * f0 <= hi]
            if on:
                self.harmonics.x = np.array([[x, x] for _, x in on], dtype=float)
                self.harmonics.y = np.array([[0.0, 1.0]] * len(on))
                self.harmonics.visible = True
                self.harmonic_labels.x = np.array([x for _, x in on], dtype=float)
                self.harmonic_labels.y = np.full(len(on), 0.95)
                self.harmonic_labels.text = [f"{n}×" for n, _ in on]
                return
        self.harmonics.visible = False
        self.harmonic_labels.text = []
        self.harmonic_labels.x = self.harmonic_labels.y = np.zeros(0)


def _cell(text: str, cls: str = "") -> W.HTML:
    w = W.HTML(text)
    w.add_class("sb-mt-cell")
    if cls:
        w.add_class(cls)
    return w


class MeasurePanel:
    """The measurements table and the measurement controls of the PSD view."""

    COLUMNS = ("measurement", "value", "interval", "where", "detail")

    def __init__(self, view: Any, state: MeasureState, on_change: Any) -> None:
        self.view = view
        self.state = state
        self.on_change = on_change  # callable(): the state changed, read again and redraw
        self.spec = None
        self.message: str | None = None
        self.band_lo = W.FloatText(value=0.0, description="band (Hz)", step=None, style={"description_width": "auto"},
                                   layout=W.Layout(width="170px"), tooltip="Lower edge of the band cursor, Hz.")
        self.band_hi = W.FloatText(value=0.0, description="to", step=None, style={"description_width": "auto"},
                                   layout=W.Layout(width="130px"), tooltip="Upper edge of the band cursor, Hz.")
        for w in (self.band_lo, self.band_hi):
            w.add_class("sb-band-edge")
        self.band_lo.add_class("sb-band-lo")
        self.band_hi.add_class("sb-band-hi")
        self.band_set = W.Button(description="set band", layout=W.Layout(width="auto"),
                                 tooltip="Measure between the two edges typed.")
        self.band_set.add_class("sb-band-set")
        self.band_set.on_click(lambda _: self._typed_band())
        self.harmonic_count = W.BoundedIntText(value=0, min=0, max=20, description="harmonics",
                                               style={"description_width": "auto"}, layout=W.Layout(width="140px"),
                                               tooltip="Harmonic cursors at 1x..Nx the fundamental (the strongest "
                                                       "tone, or the tone last clicked in the table); 0: none.")
        self.harmonic_count.add_class("sb-harmonic-count")
        self.harmonic_count.observe(lambda ch: self._harmonics(), names="value")
        self.fit_y = W.ToggleButton(value=True, description="y fits visible", layout=W.Layout(width="auto"),
                                    tooltip="While zoomed, fit the y axis to the visible part (on) or keep the "
                                            "whole estimate's range (off).")
        self.fit_y.add_class("sb-fit-y")
        self.fit_y.observe(lambda ch: self._fit_y(), names="value")
        self.readout = W.HTML("")
        self.readout.add_class("sb-readout")
        self.readout.add_class("sb-measure-readout")
        self.controls = gapped(W.HBox([self.band_lo, self.band_hi, self.band_set, self.harmonic_count, self.fit_y],
                                      layout=W.Layout(flex_flow="row wrap", align_items="center")), "small")
        self.controls.add_class("sb-measure-controls")
        # narrow windows: the value columns share the width and their text wraps; the label and
        # tone-button column keeps its content's width
        self.table = W.GridBox(layout=W.Layout(grid_template_columns="max-content minmax(min-content, 1fr) "
                                                                     "minmax(0, 1.3fr) minmax(0, 1fr) minmax(0, 1fr)",
                                               width="100%"))
        self.table.add_class("sb-measure-table")
        self.widget = W.VBox([self.table], layout=W.Layout(width="100%"))
        self.widget.add_class("sb-measurements")
        self.tone_buttons: list[W.Button] = []
        self._cell_pool: list[W.HTML] = []
        self._button_pool: list[W.Button] = []
        self._used = self._buttons_used = 0

    # -- user actions ------------------------------------------------------------------
    def _typed_band(self) -> None:
        self.set_band(self.band_lo.value, self.band_hi.value)

    def set_band(self, f1: float, f2: float) -> None:
        try:
            self.state.set_band(f1, f2)
        except SpecbenchError as e:
            self.message = str(e)
            self.show(self.spec)
            return
        self.message = None
        self.on_change()

    def _harmonics(self) -> None:
        try:
            self.state.set_harmonics(self.state.fundamental, int(self.harmonic_count.value))
        except SpecbenchError as e:
            self.message = str(e)
            return
        self.on_change()

    def _fit_y(self) -> None:
        self.view.fit_visible = bool(self.fit_y.value)
        self.view.redraw()

    def centre(self, freq: float) -> None:
        """Centre the view on ``freq`` (a tone), about +-25 resolution bandwidths wide; the read
        tool reads there, and the tone becomes the harmonics' fundamental."""
        spec = self.spec
        if spec is None:
            return
        half = 25 * max(float(spec.resolution), float(spec.df))
        lo, hi = max(freq - half, float(spec.freq[1] if spec.freq.size > 1 else spec.freq[0])), freq + half
        lo = max(lo, freq / 2) if self.view.xlog else lo
        hi = min(hi, float(spec.freq[-1]))
        self.state.fundamental = float(freq)
        if hi > lo:
            self.view.zoom_x(lo, hi)
        self.view.read_at(freq)
        self.on_change()

    # -- show --------------------------------------------------------------------------
    def _cell(self, text: str, cls: str = "") -> W.HTML:
        """The next cell of the table, reused from the last update when there is one."""
        pool = self._cell_pool
        if self._used == len(pool):
            pool.append(_cell(text, cls))
        w = pool[self._used]
        self._used += 1
        classes = ("sb-mt-cell", cls) if cls else ("sb-mt-cell",)
        if tuple(w._dom_classes) != classes:
            w._dom_classes = classes
        if w.value != text:
            w.value = text
        return w

    def _tone_button(self, freq: float) -> W.Button:
        """The next tone button (reused); a click centres the view on ``freq``."""
        pool = self._button_pool
        if self._buttons_used == len(pool):
            b = W.Button(layout=W.Layout(width="auto"))
            b.add_class("sb-tone-button")
            b.on_click(lambda button: self.centre(button._sb_freq))
            pool.append(b)
        b = pool[self._buttons_used]
        self._buttons_used += 1
        b._sb_freq = float(freq)
        b.description = f"{fmt(freq, 7)} Hz"
        b.tooltip = f"Centre the view on {freq:.7g} Hz (harmonics follow this tone)."
        return b

    def show(self, spec: Any) -> None:
        self.spec = spec
        r = self.state.last
        if r is None or spec is None:
            self.table.children = []
            return
        if self.state.band is not None:
            self.band_lo.value, self.band_hi.value = self.state.band
        self._used = self._buttons_used = 0  # the table's widgets are reused in order: no new comms
        rows: list = [self._cell(c, "sb-mt-head") for c in self.COLUMNS]
        rows += self._measurement_row(r.band_rms, "RMS")
        rows += self._measurement_row(r.band_power, "power")
        rows += self._measurement_row(r.floor, "floor")
        rows += self._tone_rows(r)
        for h in r.harmonics:
            rows += self._measurement_row(h, "harmonic")
        if self.message:
            rows += [self._cell(f"<span class='sb-err'>{html.escape(self.message)}</span>", "sb-mt-wide")]
        self.table.children = rows
        self.readout.value = self._readout(r)

    def _measurement_row(self, reading: Any, kind: str) -> list:
        label = self._cell(f"<b>{html.escape(reading.label)}</b>", f"sb-mt-{reading.key}")
        if not reading.ok:
            return [label, self._cell(f"<span class='sb-muted'>{html.escape(reading.message or '')}</span>",
                                 "sb-mt-span4")]
        m = reading.result
        where = f"{fmt(m.band[0])} – {fmt(m.band[1])} Hz"
        pct = f"{m.confidence:.0%}"
        detail = f"{fmt(float(m.dof), 3)} dof · {m.bins:,} bins"
        if kind == "floor":
            detail = f"median of {m.bins:,} bins"
        return [label, self._cell(f"{fmt(float(m.value))} {_unit(m.unit)}", "sb-mt-value"),
                self._cell(f"{pct} {_interval(m)}", "sb-mt-interval"), self._cell(where),
                self._cell(f"<span class='sb-muted'>{detail}</span>")]

    def _tone_rows(self, r: Readings) -> list:
        reading = r.tones
        head = self._cell("<b>Tones</b>", "sb-mt-tones")
        if not reading.ok:
            note = html.escape(reading.message or "")
            return [head, self._cell(f"<span class='sb-muted'>{note}</span>", "sb-mt-span4")]
        tones = reading.result
        if not len(tones):
            return [head, self._cell(f"<span class='sb-muted'>none: {html.escape(tones.note)}</span>", "sb-mt-span4")]
        out = []
        self.tone_buttons = []
        for i, t in enumerate(tones):
            b = self._tone_button(t.freq)
            self.tone_buttons.append(b)
            u = _unit(t.unit)
            se = "—" if not math.isfinite(t.freq_stderr) else f"± {fmt(t.freq_stderr, 2)} Hz"
            out += [self._cell("<b>Tones</b>" if i == 0 else "", "sb-mt-tones" if i == 0 else ""), b,
                    self._cell(f"{fmt(t.amplitude)} {u} RMS", "sb-mt-value"),
                    self._cell(f"[{fmt(t.amplitude_lower)}, {fmt(t.amplitude_upper)}] {se}", "sb-mt-interval"),
                    self._cell(f"<span class='sb-muted'>{t.level_db:.1f} dB · SNR {t.snr_db:.1f} dB</span>")]
        return out

    def _readout(self, r: Readings) -> str:
        parts = []
        if r.band_rms.ok:
            m = r.band_rms.result
            parts.append(f"<b>band {fmt(m.band[0])}–{fmt(m.band[1])} Hz</b> RMS {fmt(float(m.value))} "
                         f"{_unit(m.unit)} <span class='sb-muted'>{m.confidence:.0%}</span> {_interval(m)}")
        if r.tones.ok and len(r.tones.result):
            t = r.tones.result[0]
            se = "" if not math.isfinite(t.freq_stderr) else f" ± {fmt(t.freq_stderr, 2)}"
            parts.append(f"<b>peak {fmt(t.freq, 7)}{se} Hz</b> {fmt(t.amplitude)} {_unit(t.unit)} RMS "
                         f"<span class='sb-muted'>SNR {t.snr_db:.1f} dB</span>")
        return "<br>".join(parts)


class AdvisePanel:
    """Targets, ``sb.advise`` with progress, ranked candidates with *apply*, and the trade-off chart."""

    def __init__(self, get_selected: Any = None, apply: Any = None, get_estimator: Any = None) -> None:
        self.get_selected = get_selected
        self.apply = apply
        self.get_estimator = get_estimator
        self.advice = None
        self.seconds: float | None = None
        self.progress_calls = 0

        def box(desc, tip, width="150px", cls=""):
            w = W.FloatText(value=0.0, description=desc, style={"description_width": "auto"},
                            layout=W.Layout(width=width), tooltip=tip)
            w.add_class(f"sb-advise-{cls}")
            return w

        self.resolution = box("resolution (Hz)", "Finest resolution needed (ENBW), Hz; 0: no target.",
                              "170px", "resolution")
        self.band_db = box("band (dB)", "Widest confidence band, 10 log10(upper/lower), dB; 0: no target.",
                           "130px", "band")
        self.sidelobe_db = box("sidelobe (dB)", "Highest sidelobe allowed (leakage), a negative dB level; "
                               "0: no target.", "150px", "sidelobe")
        self.max_seconds = box("max s", "Longest expected compute time on this machine, s; 0: no limit.",
                               "110px", "seconds")
        self.run = W.Button(description="propose settings", icon="search", layout=W.Layout(width="auto"),
                            tooltip="Rank estimator settings that meet these targets on the selected record.")
        self.run.add_class("sb-advise-run")
        self.run.on_click(lambda _: self.propose())
        self.bar = W.FloatProgress(value=0.0, min=0.0, max=1.0, layout=W.Layout(width="160px", display="none"))
        self.bar.add_class("sb-advise-progress")
        self.note = W.HTML("<span class='sb-muted'>Type one or more targets and propose: each candidate can be "
                           "applied with one click.</span>")
        self.note.add_class("sb-advise-note")
        self.list = W.VBox(layout=W.Layout(width="100%"))
        self.list.add_class("sb-advise-list")
        self.chart_box = W.Box(layout=W.Layout(width="100%"))
        self.chart_box.add_class("sb-advise-chart")
        row = gapped(W.HBox([self.resolution, self.band_db, self.sidelobe_db, self.max_seconds, self.run, self.bar],
                            layout=W.Layout(flex_flow="row wrap", align_items="center")), "small")
        self.widget = gapped(W.VBox([row, self.note, self.list, self.chart_box], layout=W.Layout(width="100%")),
                             "small")
        self.widget.add_class("sb-advise")

    def targets(self) -> dict:
        def val(w):
            v = float(w.value)
            return None if v == 0 or not math.isfinite(v) else v

        return {"resolution": val(self.resolution), "band_db": val(self.band_db),
                "sidelobe_db": val(self.sidelobe_db), "max_seconds": val(self.max_seconds)}

    def _progress(self, fraction: float) -> None:
        self.progress_calls += 1
        self.bar.value = min(max(float(fraction), 0.0), 1.0)

    def propose(self) -> Any:
        """Run the advisor on the selected record; never raises (the message shows in the panel)."""
        from ..measure import advise

        if self.get_selected is None:
            return None
        self.progress_calls = 0
        self.bar.value = 0.0
        self.bar.layout.display = None
        self.note.value = "<span class='sb-muted'>scoring settings…</span>"
        t0 = time.perf_counter()
        try:
            conf = getattr(self.get_estimator(), "confidence", 0.95) if self.get_estimator else 0.95
            self.advice = advise(self.get_selected(), confidence=conf, top=8, progress=self._progress,
                                 **self.targets())
        except SpecbenchError as e:
            self.advice = None
            self.note.value = f"<span class='sb-err'>{html.escape(str(e))}</span>"
            self.list.children = []
            self.chart_box.children = []
            return None
        finally:
            self.seconds = time.perf_counter() - t0
            self.bar.layout.display = "none"
        a = self.advice
        if not len(a):
            self.note.value = (f"<span class='sb-note'>None of {a.considered} settings meets every target.</span> "
                               + html.escape(" ".join(a.notes)))
            self.list.children = []
            self.chart_box.children = []
            return a
        self.note.value = (f"<span class='sb-muted'>{len(a)} of {a.considered:,} settings meet the targets "
                           f"(scored in {duration(self.seconds)}); best first.</span>")
        rows = []
        for c in a.candidates:
            b = W.Button(description=f"apply #{c.rank}", layout=W.Layout(width="84px", flex="0 0 84px"),
                         tooltip=f"Use sb.{c.estimator!r}: every view and readout updates.")
            b.add_class("sb-advise-apply")
            b.on_click(lambda _, est=c.estimator: self._apply(est))
            text = W.HTML(f"<code>{html.escape(repr(c.estimator))}</code> <span class='sb-muted'>— "
                          f"{html.escape(c.reason)}</span>")
            text.add_class("sb-advise-text")
            rows.append(gapped(W.HBox([b, text], layout=W.Layout(align_items="center")), "small"))
        self.list.children = rows
        try:
            fig = a.chart()
            fig.axes = [ax for ax in fig.axes if type(ax).__name__ != "ColorAxis"]  # legend in words below
            fig.fig_margin = dict(top=40, bottom=50, left=64, right=24)
            for ax in fig.axes:  # the theme's text colour, as in the views
                ax.label_color = AXIS_LABEL
            # look at the candidates: the settings far from every target stay behind, off the edges
            res = np.array([c.figures["resolution_hz"] for c in a.candidates])
            bands = np.array([c.figures["band_db"] for c in a.candidates])
            t = self.targets()
            top = max(float(bands.max()) * 2.5, 3.0 * (t["band_db"] or 0.0))
            xs, ys = fig.axes[0].scale, fig.axes[1].scale
            ys.min, ys.max = 0.0, top
            want = [float(res.min()) / 8, float(res.max()) * 8]
            if t["resolution"]:
                want = [min(want[0], t["resolution"] / 3), max(want[1], t["resolution"] * 3)]
            xs.min, xs.max = want
            fig.title_style = {"fill": "var(--jp-ui-font-color1)", "font-size": "13px"}
            fig.layout.height = "320px"
            fig.add_class("sb-advise-figure")
            legend = W.HTML("<span class='sb-muted'>Each dot is a setting: resolution against the width of its "
                            "confidence band. Grey: misses a target. Coloured: meets every target, light blue "
                            "(sidelobe -20 dB, more leakage) to deep blue (-120 dB). Ring: #1. Dashed: the "
                            "targets.</span>")
            legend.add_class("sb-advise-legend")
            self.chart_box.children = [W.VBox([fig, legend], layout=W.Layout(width="100%"))]
        except SpecbenchError:
            self.chart_box.children = []
        return a

    def _apply(self, est: Any) -> None:
        if self.apply is not None:
            self.apply(est)


_ = harmonic_band
