"""Colours, line styles and the small style sheet of the workbench.

The palette is our own, chosen by computation (see DEVELOPERS.md, "The look"): the current
estimate is a deep petrol blue, the pins are warm and earthy hues with one violet, ordered
so that pins drawn with the same dash pattern stay far apart in colour for people with
protanopia, deuteranopia or tritanopia too (simulated with Machado, Oliveira & Fernandes
2009), and every line has a contrast of at least 3:1 on both JupyterLab themes' backgrounds
(WCAG 2.1 contrast ratio). ``tests/widgets/test_style.py`` checks both.  Every other colour
(text, borders, backgrounds) comes from JupyterLab's own CSS variables, so the widget
follows the theme.
"""

from __future__ import annotations

import math

import ipywidgets as W

__all__ = ["ASYMPTOTE", "AXIS_LABEL", "BAND_OPACITY", "CURRENT", "MARKER", "MARKER_BAND_OPACITY", "MODEL",
           "PIN_BAND_OPACITY", "PIN_STYLES", "PIN_MARKERS", "pin_look", "marker_path", "gapped", "style_sheet"]

#: the current estimate (line and band): petrol blue
CURRENT = "#1b7396"
#: axis labels in the theme's text colour (bqplot's dark styling would make them orange)
AXIS_LABEL = "var(--jp-ui-font-color1)"
#: opacity of the current estimate's shaded confidence band
BAND_OPACITY = 0.28
#: opacity of a pinned estimate's band: lighter than the current one's
PIN_BAND_OPACITY = 0.12

#: (colour, dash) of pins 1..8: violet, mustard, stone, amber, rosewood, moss, vermilion,
#: umber, with the dash cycling dashed / dotted / dash-dotted, so neighbours differ in both
PIN_STYLES: tuple[tuple[str, str], ...] = (
    ("#a43fe0", "dashed"),
    ("#a08a10", "dotted"),
    ("#858070", "dash_dotted"),
    ("#de7410", "dashed"),
    ("#b0506a", "dotted"),
    ("#5f8a2c", "dash_dotted"),
    ("#cc3a1a", "dashed"),
    ("#8f6238", "dotted"),
)

#: the measurement cursors (band cursor, peak marker, harmonic cursors): orchid, contrast 5.0:1 on
#: white and 3.8:1 on JupyterLab's dark background, CIELAB distance >= 37 from the estimate and
#: every pin colour (computed like the palette above)
MARKER = "#c4309a"
#: opacity of the band cursor's shaded span
MARKER_BAND_OPACITY = 0.10

#: the marker of pins 1..8, drawn at a few points along the pin's line (MARKERS_PER_LINE in the
#: visible range, staggered so that pins' markers do not sit on one another): with it every pin
#: has a (dash, marker) pair of its own, so the eight tell apart without colour (print, colour-
#: vision deficiency); bqplot only has three dash patterns besides solid.
PIN_MARKERS: tuple[str, ...] = ("circle", "square", "triangle-up", "diamond", "triangle-down", "cross",
                                "crosshair", "plus")
#: pin colour -> marker (each pin colour is used once)
PIN_MARKER = {c: m for (c, _), m in zip(PIN_STYLES, PIN_MARKERS)}
MARKERS_PER_LINE = 8
#: marker area in px^2, as bqplot's Scatter ``default_size`` measures it (about 6 px across)
MARKER_SIZE = 36
#: stroke width of the markers drawn as strokes only (``plus``, ``crosshair``) and of every marker's outline
MARKER_STROKE = 1.4


def pin_look(index: int) -> tuple[str, str, str]:
    """(colour, dash, marker) of pin ``index`` (0-based) of :data:`PIN_STYLES`."""
    colour, dash = PIN_STYLES[index]
    return colour, dash, PIN_MARKERS[index]


def marker_path(marker: str, size: float = MARKER_SIZE) -> str:
    """SVG path data of ``marker`` of area ``size`` centred on (0, 0), as bqplot's front end draws it.

    The same formulas as bqplot 0.13's ``Markers.ts`` (d3-symbol shapes plus bqplot's own
    ``plus`` and ``crosshair``), so the exported picture shows the marker the browser shows.
    """
    def f(v: float) -> str:
        return f"{v:.2f}"

    if marker == "circle":
        r = math.sqrt(size / math.pi)
        return f"M0,{f(r)}A{f(r)},{f(r)} 0 1,1 0,{f(-r)}A{f(r)},{f(r)} 0 1,1 0,{f(r)}Z"
    if marker == "square":
        h = math.sqrt(size) / 2
        return f"M{f(-h)},{f(-h)}L{f(h)},{f(-h)} {f(h)},{f(h)} {f(-h)},{f(h)}Z"
    if marker == "diamond":
        t = math.tan(math.pi / 6)
        a = math.sqrt(size / (2 * t))
        b = a * t
        return f"M0,{f(-a)}L{f(b)},0 0,{f(a)} {f(-b)},0Z"
    if marker in ("triangle-up", "triangle-down"):
        r3 = math.sqrt(3)
        a = math.sqrt(size / r3)
        b = a * r3 / 2
        sign = -1 if marker == "triangle-up" else 1
        return f"M0,{f(sign * b)}L{f(a)},{f(-sign * b)} {f(-a)},{f(-sign * b)}Z"
    if marker == "cross":
        a = math.sqrt(size / 5) / 2
        return (f"M{f(-3 * a)},{f(-a)}H{f(-a)}V{f(-3 * a)}H{f(a)}V{f(-a)}H{f(3 * a)}V{f(a)}H{f(a)}V{f(3 * a)}"
                f"H{f(-a)}V{f(a)}H{f(-3 * a)}Z")
    if marker == "plus":
        h = math.sqrt(size) / 2
        return f"M0,{f(-h)}L0,{f(h)}M{f(-h)},0L{f(h)},0"
    if marker == "crosshair":
        h = math.sqrt(size) / 2
        return f"M{f(-h)},{f(-h)}L{f(h)},{f(h)}M{f(-h)},{f(h)}L{f(h)},{f(-h)}"
    if marker == "arrow":  # bqplot's arrow at its default skew 0.5: an apex angle of 60 - 55 * 0.5 degrees
        t = math.tan(math.radians(60 - 55 * 0.5))
        s = math.sqrt(size / t)
        r = s * t / 2
        return f"M0,{f(-s)}L{f(r)},{f(s)} {f(-r)},{f(s)}Z"
    raise ValueError(f"no SVG form for the marker {marker!r}; the pin markers are {PIN_MARKERS}")


#: markers drawn as strokes only (no area to fill)
STROKE_MARKERS = frozenset({"plus", "crosshair"})

#: SVG dash arrays matching bqplot's line styles (for the swatches in the pin table and the export)
DASH_ARRAY = {"solid": "", "dashed": "6,3", "dotted": "2,3", "dash_dotted": "6,3,2,3"}

#: a fitted model's curve (over the Allan deviation and the PSD): electric violet, picked like the pins
#: (3:1 on both themes, far in CIELAB from the estimate, the marker, every pin and the asymptote grey in
#: all four visions; tests/widgets/test_look.py)
MODEL = "#7a1df8"
#: the straight-line asymptotes of single noise terms, and their labels: a neutral grey
ASYMPTOTE = "#8a8f98"

#: the type of the figures (axis ticks and labels) and of the exported pictures
FONT_FAMILY = "var(--jp-ui-font-family, system-ui, sans-serif)"
TICK_FONT_PX = 11
LABEL_FONT_PX = 12

_CSS = """
<style>
.sb-workbench { gap: 6px; color: var(--jp-ui-font-color1); }
.sb-workbench .sb-section-title {
  font-size: var(--jp-ui-font-size0, 11px); text-transform: uppercase; letter-spacing: .06em;
  color: var(--jp-ui-font-color2); margin: 8px 0 2px 0; border-bottom: 1px solid var(--jp-border-color2);
}
.sb-workbench .sb-control-label { color: var(--jp-ui-font-color1); text-align: left; white-space: nowrap;
  margin-right: 6px; }
.sb-workbench .sb-control-label .widget-html-content { text-align: left; }
.sb-workbench .sb-invalid input, .sb-workbench .sb-invalid select {
  border-color: var(--jp-error-color1) !important;
  box-shadow: 0 0 0 1px var(--jp-error-color1) !important;
}
.sb-workbench .sb-invalid .sb-control-label { color: var(--jp-error-color1); }
.sb-workbench .sb-status { padding: 3px 8px; border-left: 3px solid var(--jp-border-color2);
  background: var(--jp-layout-color2); min-height: 1.6em; }
.sb-workbench .sb-status.sb-status-error { border-left-color: var(--jp-error-color1); }
.sb-workbench .sb-status.sb-status-note { border-left-color: var(--jp-warn-color1); }
.sb-workbench .sb-status.sb-status-busy { border-left-color: var(--jp-brand-color1); }
.sb-workbench .sb-status .sb-err { color: var(--jp-error-color1); font-weight: 600; }
.sb-workbench .sb-status .sb-note { color: var(--jp-warn-color1); font-weight: 600; }
.sb-workbench .sb-muted { color: var(--jp-ui-font-color2); }
.sb-workbench .sb-measure-table { column-gap: 8px; row-gap: 5px; align-items: center; padding: 2px; }
.sb-workbench .sb-mt-cell { font-variant-numeric: tabular-nums; min-width: 0 !important; width: auto; margin: 0; }
.sb-workbench .sb-mt-cell, .sb-workbench .sb-mt-cell .widget-html-content { white-space: normal;
  overflow-wrap: anywhere; line-height: 1.35; }
.sb-workbench .sb-mt-head { font-size: var(--jp-ui-font-size0, 11px); color: var(--jp-ui-font-color2);
  border-bottom: 1px solid var(--jp-border-color2); }
.sb-workbench .sb-mt-span4 { grid-column: span 4; white-space: normal; }
.sb-workbench .sb-mt-wide { grid-column: 1 / -1; white-space: normal; }
.sb-workbench .sb-tone-button { height: 24px; line-height: 22px; padding: 0 8px; justify-self: start;
  font-variant-numeric: tabular-nums; border-left: 3px solid #c4309a; }
.sb-workbench .sb-tool-compact .widget-toggle-button, .sb-workbench .sb-tool-compact-button { padding: 0 2px; }
.sb-workbench .sb-advise-text { white-space: normal; min-width: 0; flex: 1 1 auto; }
.sb-workbench .sb-advise-text code { font-size: var(--jp-code-font-size, 12px); }
.sb-workbench .sb-merit-grid { display: grid; grid-template-columns: repeat(auto-fill, minmax(130px, 1fr));
  gap: 4px 10px; }
.sb-workbench .sb-merit-cell { border-top: 1px solid var(--jp-border-color2); padding-top: 2px; }
.sb-workbench .sb-merit-name { font-size: var(--jp-ui-font-size0, 11px); color: var(--jp-ui-font-color2); }
.sb-workbench .sb-merit-value { font-variant-numeric: tabular-nums; }
.sb-workbench .sb-merit-compute { grid-column: span 2; }
.sb-workbench .sb-readout { font-variant-numeric: tabular-nums; color: var(--jp-ui-font-color1);
  min-height: 1.4em; }
.sb-workbench table.sb-pin-table { border-collapse: collapse; width: 100%; }
.sb-workbench .sb-pin-row { border-top: 1px solid var(--jp-border-color2); align-items: center; }
.sb-workbench .sb-pin-row .sb-pin-settings { color: var(--jp-ui-font-color2);
  font-family: var(--jp-code-font-family); font-size: var(--jp-code-font-size, 12px); }
.sb-workbench .sb-view-title { font-weight: 600; }
.sb-workbench .sb-stale > * + * { opacity: 0.45; }
.sb-workbench .sb-stale-note { color: var(--jp-warn-color1); font-style: italic; }
.sb-workbench table.sb-term-table { border-collapse: collapse; width: 100%; margin: 4px 0; }
.sb-workbench table.sb-term-table th { text-align: left; font-weight: 600; color: var(--jp-ui-font-color2);
  font-size: var(--jp-ui-font-size0, 11px); border-bottom: 1px solid var(--jp-border-color1); padding: 2px 6px; }
.sb-workbench table.sb-term-table td { padding: 2px 6px; border-bottom: 1px solid var(--jp-border-color3, #eee); }
.sb-workbench table.sb-term-table td.sb-num { font-variant-numeric: tabular-nums; white-space: nowrap; }
.sb-workbench table.sb-term-table td, .sb-workbench table.sb-term-table th { overflow-wrap: normal; }
.sb-workbench table.sb-term-table td:first-child, .sb-workbench table.sb-term-table th { white-space: nowrap; }
.sb-workbench .sb-noise-table .widget-html-content { line-height: 1.45; }
.sb-workbench .sb-noise-quality, .sb-workbench .sb-noise-filter { margin: 6px 0; }
.sb-workbench .sb-noise-filter { font-variant-numeric: tabular-nums; overflow-wrap: anywhere; }
.sb-workbench .sb-noise-caution { font-size: var(--jp-ui-font-size0, 11px); margin-top: 6px; }
.sb-workbench .sb-gap-small { gap: 4px 6px; }
.sb-workbench .sb-gap-medium { gap: 4px 12px; }
.sb-workbench .sb-gap-wide { gap: 2px 18px; }
.sb-workbench .bqplot .mainheading { font-size: 13px; }
.sb-workbench .bqplot text { font-family: var(--jp-ui-font-family, system-ui, sans-serif); }
.sb-workbench .bqplot .axis .tick text { font-size: 11px; fill: var(--jp-ui-font-color1); }
.sb-workbench .bqplot .axislabel { font-size: 12px; }

/* Layout: nothing inside the widget scrolls sideways, nothing is clipped (checked by
   tests/browser/test_layout.py at 1000, 1400 and 1920 px). ipywidgets sets sizes as inline
   styles, hence the !important. */
.sb-workbench, .sb-workbench .jupyter-widgets { box-sizing: border-box; }
.sb-workbench .widget-box { min-width: 0; }
/* a plot, slider or block that fills its row (width 100%) does so without side margins */
.sb-workbench .jupyter-widgets.bqplot, .sb-workbench .jupyter-widgets[style*="width: 100%"] {
  margin-left: 0 !important; margin-right: 0 !important; max-width: 100%; }
.sb-workbench .jupyter-widgets.bqplot { width: 100% !important; min-width: 0 !important; }
/* the two views sit side by side while each gets 380 px, else one above the other */
.sb-workbench .widget-vbox:has(> .sb-psd), .sb-workbench .widget-vbox:has(> .sb-acf),
.sb-workbench .widget-vbox[class*="sb-view-"] {
  min-width: min(100%, 380px) !important; }
/* the control columns: a grid of columns at least wide enough for a label and its longest option */
.sb-workbench .sb-controls { display: grid !important; grid-template-columns: repeat(auto-fill, minmax(300px, 1fr));
  align-items: start; }
.sb-workbench .sb-controls > .widget-box { min-width: 0 !important; max-width: none !important;
  width: auto !important; }
/* a control's row wraps (label above the editor) rather than running out of its column */
.sb-workbench .sb-control > .widget-hbox, .sb-workbench .sb-control .widget-hbox { flex-wrap: wrap; row-gap: 2px; }
.sb-workbench .widget-dropdown { width: auto !important; max-width: 100%; flex: 0 1 auto !important; }
.sb-workbench .widget-dropdown > select { width: auto; min-width: 80px; max-width: 100%; flex: 0 1 auto; }
.sb-workbench .widget-checkbox { width: auto !important; max-width: 100%; height: auto; }
.sb-workbench .widget-checkbox > label, .sb-workbench .widget-checkbox label.widget-label-basic {
  overflow: visible; white-space: normal; width: auto; line-height: 1.3; }
.sb-workbench .widget-checkbox span { white-space: normal; }
.sb-workbench .widget-toggle-buttons { flex-wrap: nowrap; }
.sb-workbench .widget-toggle-buttons .widget-toggle-button { overflow: visible; }
.sb-workbench .widget-label, .sb-workbench .widget-html-content { overflow-wrap: anywhere; }
.sb-workbench pre { white-space: pre-wrap; overflow-wrap: anywhere; max-width: 100%; }
</style>
"""


def gapped(box: W.Box, size: str) -> W.Box:
    """Space a box's children ("small", "medium" or "wide"); ipywidgets' Layout has no gap."""
    box.add_class(f"sb-gap-{size}")
    return box


def style_sheet() -> W.HTML:
    """An HTML widget holding the workbench style sheet (scoped to ``.sb-workbench``)."""
    return W.HTML(_CSS, layout=W.Layout(display="none"))
