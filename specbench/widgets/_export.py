"""Export the views as a picture: SVG written here from the bqplot objects, PNG rendered from it.

:func:`figure_svg` draws one bqplot ``Figure`` from its Python-side objects: the marks'
data (the reduced traces the browser draws, so the picture holds exactly the points on
screen), their scales' ranges (linear or logarithmic), colours, dash patterns, band
opacities and the axes' labels and tick values.  :func:`views_svg` puts several views side
by side with their titles, a legend of the pins and a caption line of the settings;
:func:`export_views` writes it as ``.svg`` or, through ``resvg-py`` (a self-contained
wheel: ``pip install "specbench[export]"``), as ``.png``.

Every drawn trace is a ``<path class="sb-trace">`` carrying ``data-view``, ``data-role``
(``band``, ``line``, ``pin-band``, ``pin``) and ``data-points`` (the points it holds), so a
test (or a reader) can check the file against the marks.  A pin's markers are a
``<g class="sb-markers" data-role="pin-marker" data-marker=...>`` of ``<path>`` shapes drawn
with the formulas of bqplot's front end (:func:`._style.marker_path`).
"""

from __future__ import annotations

import html
import math
import os
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from .._errors import SpecbenchError
from ._style import (
    CURRENT,
    DASH_ARRAY,
    LABEL_FONT_PX,
    MARKER_SIZE,
    MARKER_STROKE,
    STROKE_MARKERS,
    TICK_FONT_PX,
    marker_path,
)
from ._views import linear_ticks, log_ticks

__all__ = ["ExportError", "THEMES", "LegendEntry", "figure_svg", "views_svg", "export_views", "svg_to_png"]

FORMATS = (".svg", ".png")


class ExportError(SpecbenchError, ValueError):
    """A picture cannot be written as asked (format, folder, missing renderer)."""


#: the two JupyterLab themes' colours, for the background and text of the picture
THEMES = {
    "light": {"background": "#ffffff", "text": "#1f1f1f", "muted": "#616161", "grid": "#d9d9d9", "axis": "#5a5a5a"},
    "dark": {"background": "#111111", "text": "#e7e7e7", "muted": "#a8a8a8", "grid": "#3a3a3a", "axis": "#9a9a9a"},
}
FONT = "DejaVu Sans, Helvetica, Arial, sans-serif"


@dataclass(frozen=True)
class LegendEntry:
    label: str
    colour: str
    dash: str = "solid"
    marker: str | None = None


def _marker_svg(marker: str, colour: str, x: float, y: float, size: float = MARKER_SIZE,
                stroke_width: float = MARKER_STROKE) -> str:
    paint = (f'fill="none" stroke="{colour}" stroke-width="{stroke_width:.2g}"' if marker in STROKE_MARKERS
             else f'fill="{colour}" stroke="none"')
    return f'<path transform="translate({x:.2f},{y:.2f})" d="{marker_path(marker, size)}" {paint}/>'


def _markers_svg(view: str, role: str, marker: str, colour: str, px: np.ndarray, py: np.ndarray,
                 size: float, stroke_width: float = MARKER_STROKE) -> list[str]:
    """A ``<g class="sb-markers">`` of ``marker`` shapes at the finite points (px, py)."""
    ok = np.isfinite(px) & np.isfinite(py)
    return [f'<g class="sb-markers" data-view="{_esc(view)}" data-role="{_esc(role)}" '
            f'data-marker="{_esc(marker)}" data-points="{int(ok.sum())}">',
            *(_marker_svg(marker, colour, a, b, size, stroke_width) for a, b in zip(px[ok], py[ok])), "</g>"]


def _esc(text: Any) -> str:
    return html.escape(str(text), quote=True)


def _is_log(scale: Any) -> bool:
    return type(scale).__name__ == "LogScale"


def _domain(scale: Any, values: list[np.ndarray]) -> tuple[float, float]:
    lo, hi = scale.min, scale.max
    if lo is None or hi is None:
        finite = [v[np.isfinite(v) & ((v > 0) if _is_log(scale) else True)] for v in values]
        finite = [v for v in finite if v.size]
        if not finite:
            return (1.0, 10.0) if _is_log(scale) else (0.0, 1.0)
        lo = min(float(v.min()) for v in finite) if lo is None else lo
        hi = max(float(v.max()) for v in finite) if hi is None else hi
    lo, hi = float(lo), float(hi)
    if hi <= lo:
        hi = lo * 10 if _is_log(scale) and lo > 0 else lo + 1.0
    return lo, hi


class _Map:
    """Data -> pixel for one axis (log10 on a LogScale)."""

    def __init__(self, scale: Any, lo: float, hi: float, p0: float, p1: float) -> None:
        self.log = _is_log(scale)
        self.lo, self.hi = (math.log10(lo), math.log10(hi)) if self.log else (lo, hi)
        self.p0, self.p1 = p0, p1
        self.domain = (lo, hi)

    def __call__(self, v: np.ndarray) -> np.ndarray:
        v = np.asarray(v, dtype=float)
        with np.errstate(divide="ignore", invalid="ignore"):
            t = np.log10(np.where(v > 0, v, np.nan)) if self.log else v
        return self.p0 + (t - self.lo) / (self.hi - self.lo) * (self.p1 - self.p0)


def _path(px: np.ndarray, py: np.ndarray) -> tuple[str, int]:
    """SVG path data through the finite points (a gap where a point is NaN); and the point count."""
    ok = np.isfinite(px) & np.isfinite(py)
    parts, pen = [], False
    for x, y, good in zip(px, py, ok):
        if not good:
            pen = False
            continue
        parts.append(f"{'L' if pen else 'M'}{x:.2f},{y:.2f}")
        pen = True
    return "".join(parts), int(ok.sum())


def _dash(style: str) -> str:
    arr = DASH_ARRAY.get(style, "")
    return f' stroke-dasharray="{arr}"' if arr else ""


def _tick_text(v: float, fmt: str | None, log: bool) -> str:
    """The tick label as the browser writes it (d3-format: ``1e-4``, ``0.5``, ``1000``)."""
    if fmt == ".0e" or (log and fmt is None and (abs(v) < 1e-3 or abs(v) >= 1e4)):
        mantissa, exponent = f"{v:.0e}".split("e")
        return f"{mantissa}e{int(exponent)}"
    return f"{v:g}"


def figure_svg(figure: Any, x0: float, y0: float, width: float, height: float, *, view: str = "",
               roles: dict[int, str] | None = None, theme: str = "light") -> tuple[str, list[dict]]:
    """The SVG elements drawing ``figure`` in the box (x0, y0, width, height), and a record per trace.

    ``roles`` names the role of a mark by its ``id()`` (``band``, ``line``, ``pin-band``, ``pin``,
    ``cursor``, ``model``); unnamed marks are ``line`` (or ``band`` when filled).  ``Lines``,
    ``Scatter`` and ``Label`` marks are drawn, hidden ones (``visible=False``) not.  A mark on a
    y scale of its own with fixed ``min``/``max`` (the measurement cursors span the plot's
    height on a 0..1 scale) is drawn on that scale; a mark on any other y scale is not drawn.
    """
    colours = THEMES[theme]
    margin = getattr(figure, "fig_margin", None) or {"top": 12, "bottom": 46, "left": 72, "right": 30}
    left, right = x0 + margin["left"], x0 + width - margin["right"]
    top, bottom = y0 + margin["top"], y0 + height - margin["bottom"]
    marks = [m for m in figure.marks if type(m).__name__ in ("Lines", "Scatter", "Label")
             and getattr(m, "visible", True) is not False]
    axes = list(figure.axes)
    xscale = next((a.scale for a in axes if a.orientation != "vertical"), marks[0].scales["x"] if marks else None)
    yscale = next((a.scale for a in axes if a.orientation == "vertical"), marks[0].scales["y"] if marks else None)

    def own_scale(m) -> bool:  # a fixed scale of the mark's own, e.g. 0..1 over the plot's height
        s = m.scales.get("y")
        return s is not yscale and s is not None and getattr(s, "min", None) is not None \
            and getattr(s, "max", None) is not None and not _is_log(s)

    marks = [m for m in marks if yscale is None or m.scales.get("y") is yscale or own_scale(m)]
    on_axis = [m for m in marks if not own_scale(m) and type(m).__name__ != "Label"]
    xs_all = [np.asarray(m.x, dtype=float).ravel() for m in on_axis]
    ys_all = [np.asarray(m.y, dtype=float).ravel() for m in on_axis]
    mx = _Map(xscale, *_domain(xscale, xs_all), left, right)
    my = _Map(yscale, *_domain(yscale, ys_all), bottom, top)
    out: list[str] = []
    records: list[dict] = []
    clip = f"clip-{view or id(figure)}"
    out.append(f'<clipPath id="{clip}"><rect x="{left:.2f}" y="{top:.2f}" width="{right - left:.2f}" '
               f'height="{bottom - top:.2f}"/></clipPath>')
    # grid and ticks
    for ax in axes:
        vertical = ax.orientation == "vertical"
        m = my if vertical else mx
        lo, hi = m.domain
        ticks = ax.tick_values
        ticks = list(np.asarray(ticks, dtype=float)) if ticks is not None and len(ticks) else (
            log_ticks(lo, hi) if m.log else linear_ticks(lo, hi, 5 if vertical else 6))
        for t in ticks:
            if not (min(lo, hi) <= t <= max(lo, hi)):
                continue
            p = float(m(np.array([t]))[0])
            text = _esc(_tick_text(t, ax.tick_format, m.log))
            if vertical:
                out.append(f'<line class="sb-grid" x1="{left:.2f}" x2="{right:.2f}" y1="{p:.2f}" y2="{p:.2f}" '
                           f'stroke="{colours["grid"]}" stroke-dasharray="4,3" stroke-width="0.8"/>')
                out.append(f'<text class="sb-tick" x="{left - 6:.2f}" y="{p + 4:.2f}" text-anchor="end" '
                           f'font-size="{TICK_FONT_PX}" fill="{colours["text"]}">{text}</text>')
            else:
                out.append(f'<line class="sb-grid" x1="{p:.2f}" x2="{p:.2f}" y1="{top:.2f}" y2="{bottom:.2f}" '
                           f'stroke="{colours["grid"]}" stroke-dasharray="4,3" stroke-width="0.8"/>')
                out.append(f'<text class="sb-tick" x="{p:.2f}" y="{bottom + 16:.2f}" text-anchor="middle" '
                           f'font-size="{TICK_FONT_PX}" fill="{colours["text"]}">{text}</text>')
        if ax.label:
            if vertical:
                cx, cy = x0 + 16, (top + bottom) / 2
                out.append(f'<text class="sb-axis-label" x="{cx:.2f}" y="{cy:.2f}" text-anchor="middle" '
                           f'transform="rotate(-90 {cx:.2f} {cy:.2f})" font-size="{LABEL_FONT_PX}" '
                           f'fill="{colours["text"]}">{_esc(ax.label)}</text>')
            else:
                out.append(f'<text class="sb-axis-label" x="{(left + right) / 2:.2f}" y="{bottom + 36:.2f}" '
                           f'text-anchor="middle" font-size="{LABEL_FONT_PX}" fill="{colours["text"]}">'
                           f'{_esc(ax.label)}</text>')
    out.append(f'<g clip-path="url(#{clip})">')
    roles = roles or {}
    for mark in marks:
        role = roles.get(id(mark))
        my_m = (_Map(mark.scales["y"], float(mark.scales["y"].min), float(mark.scales["y"].max), bottom, top)
                if own_scale(mark) else my)
        if type(mark).__name__ == "Label":
            colour = (list(mark.colors) or [CURRENT])[0]
            px = mx(np.asarray(mark.x, dtype=float).ravel())
            py = my_m(np.asarray(mark.y, dtype=float).ravel())
            dx, dy = float(getattr(mark, "x_offset", 0) or 0), float(getattr(mark, "y_offset", 0) or 0)
            anchor = {"start": "start", "end": "end"}.get(getattr(mark, "align", "start"), "middle")
            size = float(getattr(mark, "default_size", TICK_FONT_PX) or TICK_FONT_PX)
            bold = ' font-weight="bold"' if getattr(mark, "font_weight", "") == "bold" else ""
            texts = list(mark.text)
            shown = 0
            for a, b, t in zip(px, py, texts):
                if np.isfinite(a) and np.isfinite(b):
                    out.append(f'<text class="sb-label" data-view="{_esc(view)}" data-role="{_esc(role or "label")}" '
                               f'x="{a + dx:.2f}" y="{b + dy:.2f}" text-anchor="{anchor}" font-size="{size:.3g}"'
                               f'{bold} fill="{colour}">{_esc(t)}</text>')
                    shown += 1
            records.append({"view": view, "role": role or "label", "points": shown, "colour": colour})
            continue
        x = np.asarray(mark.x, dtype=float)
        y = np.asarray(mark.y, dtype=float)
        if type(mark).__name__ == "Scatter":
            x = x.ravel()
            colour = (list(mark.colors) or [CURRENT])[0]
            px, py = mx(x), my_m(y.ravel())
            ok = np.isfinite(px) & np.isfinite(py)
            if role == "pin-marker":
                marker = getattr(mark, "marker", "circle")
                size = float(getattr(mark, "default_size", MARKER_SIZE))
                width_m = float(getattr(mark, "stroke_width", MARKER_STROKE) or MARKER_STROKE)
                out += _markers_svg(view, role, marker, colour, px, py, size, width_m)
                records.append({"view": view, "role": role, "points": int(ok.sum()), "colour": colour,
                                "marker": marker})
                continue
            marker = getattr(mark, "marker", "circle")
            if role == "cursor":  # e.g. the peak marker of the measurements: its own shape and size
                size = float(getattr(mark, "default_size", MARKER_SIZE))
                out += _markers_svg(view, role, marker, colour, px, py, size)
            else:
                for a, b in zip(px[ok], py[ok]):
                    out.append(f'<circle cx="{a:.2f}" cy="{b:.2f}" r="2.5" fill="{colour}"/>')
            records.append({"view": view, "role": role or "points", "points": int(ok.sum()), "colour": colour,
                            "marker": marker})
            continue
        rows = np.atleast_2d(y)
        xrows = np.atleast_2d(x)  # one x per line, or one shared by every line
        if xrows.shape[0] not in (1, rows.shape[0]):
            continue
        x = xrows[0]
        colours_m = list(mark.colors) or [CURRENT]
        if getattr(mark, "fill", "none") == "between" and rows.shape[0] == 2:
            fill = (list(mark.fill_colors) or colours_m)[0]
            opacity = (list(mark.fill_opacities) or [1.0])[0]
            upper, lower = rows[0], rows[1]
            ok = np.isfinite(mx(x)) & np.isfinite(my_m(upper)) & np.isfinite(my_m(lower))
            if ok.sum() >= 2:
                xp = mx(x[ok])
                d = "M" + "L".join(f"{a:.2f},{b:.2f}" for a, b in zip(xp, my_m(upper[ok])))
                d += "L" + "L".join(f"{a:.2f},{b:.2f}" for a, b in zip(xp[::-1], my_m(lower[ok])[::-1])) + "Z"
                role_b = role or "band"
                out.append(f'<path class="sb-trace" data-view="{_esc(view)}" data-role="{role_b}" '
                           f'data-points="{int(ok.sum())}" d="{d}" fill="{fill}" fill-opacity="{opacity:.3g}" '
                           f'stroke="none"/>')
                records.append({"view": view, "role": role_b, "points": int(ok.sum()), "colour": fill,
                                "opacity": float(opacity)})
            continue
        width_px = float(getattr(mark, "stroke_width", 1.5) or 1.5)
        opacities = list(getattr(mark, "opacities", None) or [])
        for i, row in enumerate(rows):
            colour = colours_m[i % len(colours_m)]
            if opacities and float(opacities[i % len(opacities)]) == 0:
                continue  # drawn invisible on screen
            px_row = mx(xrows[i] if xrows.shape[0] > 1 else x)
            d, n = _path(px_row, my_m(row))
            if not n:
                continue
            role_l = role or "line"
            out.append(f'<path class="sb-trace" data-view="{_esc(view)}" data-role="{role_l}" data-points="{n}" '
                       f'd="{d}" fill="none" stroke="{colour}" stroke-width="{width_px:.2g}"'
                       f'{_dash(getattr(mark, "line_style", "solid"))} stroke-linejoin="round"/>')
            records.append({"view": view, "role": role_l, "points": n, "colour": colour,
                            "dash": getattr(mark, "line_style", "solid")})
            marker = getattr(mark, "marker", None)
            if marker:  # a point at every sample of the line (e.g. the Allan deviation's taus)
                size = float(getattr(mark, "marker_size", MARKER_SIZE) or MARKER_SIZE)
                out += _markers_svg(view, f"{role_l}-points", marker, colour, px_row, my_m(row), size)
    out.append("</g>")
    out.append(f'<rect x="{left:.2f}" y="{top:.2f}" width="{right - left:.2f}" height="{bottom - top:.2f}" '
               f'fill="none" stroke="{colours["axis"]}" stroke-width="0.8"/>')
    return "\n".join(out), records


def _wrap(text: str, chars: int) -> list[str]:
    words, lines, cur = text.split(), [], ""
    for w in words:
        if cur and len(cur) + 1 + len(w) > chars:
            lines.append(cur)
            cur = w
        else:
            cur = f"{cur} {w}" if cur else w
    if cur:
        lines.append(cur)
    return lines or [""]


def views_svg(views: Sequence[tuple[str, Any, dict[int, str] | None]], legend: Sequence[LegendEntry], caption: str,
              *, panel_width: int = 560, panel_height: int = 360, columns: int = 3,
              theme: str = "light") -> tuple[str, list[dict]]:
    """A complete SVG document: the views with titles (``columns`` to a row), the legend and the caption.

    Parameters
    ----------
    views : sequence of (title, bqplot Figure, roles)
        What to draw, left to right and then row by row; ``roles`` as in :func:`figure_svg` (may be None).
    legend : sequence of LegendEntry
        The current estimate and the pins, in order.
    caption : str
        The settings line under the plots (wrapped to the width).
    theme : {"light", "dark"}
        Background and text colours of JupyterLab's light or dark theme.
    """
    if theme not in THEMES:
        raise ExportError(f"theme must be one of {', '.join(map(repr, THEMES))}; got {theme!r}.")
    colours = THEMES[theme]
    title_h = 26
    columns = max(1, min(int(columns), len(views)))
    rows = -(-len(views) // columns)
    width = panel_width * columns
    body: list[str] = []
    records: list[dict] = []
    for i, (title, fig, roles) in enumerate(views):
        x0, y0 = (i % columns) * panel_width, (i // columns) * (title_h + panel_height)
        body.append(f'<text class="sb-title" x="{x0 + 16}" y="{y0 + 18}" font-size="13" font-weight="bold" '
                    f'fill="{colours["text"]}">{_esc(title)}</text>')
        svg, recs = figure_svg(fig, x0, y0 + title_h, panel_width, panel_height,
                               view=title.split()[0].lower() if title else str(i), roles=roles, theme=theme)
        for r in recs:
            r["view_title"] = title
        body.append(svg)
        records += recs
    y = rows * (title_h + panel_height) + 18
    x = 16
    for entry in legend:
        label = _esc(entry.label)
        item_w = 34 + 6.6 * len(entry.label) + 18
        if x + item_w > width - 8 and x > 16:
            x, y = 16, y + 18
        body.append(f'<g class="sb-legend-item"><line x1="{x}" x2="{x + 28}" y1="{y - 4}" y2="{y - 4}" '
                    f'stroke="{entry.colour}" stroke-width="2.2"{_dash(entry.dash)}/>'
                    + (_marker_svg(entry.marker, entry.colour, x + 14, y - 4) if entry.marker else "") +
                    f'<text x="{x + 34}" y="{y}" font-size="{LABEL_FONT_PX}" fill="{colours["text"]}">{label}</text>'
                    "</g>")
        x += item_w
    y += 22
    for line in _wrap(caption, max(40, int(width / 6.4))):
        body.append(f'<text class="sb-caption" x="16" y="{y}" font-size="{TICK_FONT_PX}" '
                    f'fill="{colours["muted"]}">{_esc(line)}</text>')
        y += 15
    height = y + 6
    doc = (f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" '
           f'viewBox="0 0 {width} {height}" font-family="{FONT}">\n'
           f'<rect class="sb-background" width="100%" height="100%" fill="{colours["background"]}"/>\n'
           + "\n".join(body) + "\n</svg>\n")
    return doc, records


def svg_to_png(svg: str, scale: float = 2.0) -> bytes:
    """PNG bytes of an SVG document (rendered by resvg-py, with the system's fonts)."""
    try:
        import resvg_py
    except ImportError:
        raise ExportError(
            'PNG export needs the resvg-py package: pip install "specbench[export]" (or resvg-py). '
            "SVG export works without it: give a path ending in .svg."
        ) from None
    return bytes(resvg_py.svg_to_bytes(svg_string=svg, zoom=float(scale)))


def export_views(path: str | os.PathLike, views, legend, caption, *, theme: str = "light",
                 scale: float = 2.0, panel_width: int = 560, panel_height: int = 360) -> Path:
    """Write :func:`views_svg` to ``path`` (``.svg``, or ``.png`` at ``scale`` pixels per unit)."""
    path = Path(path)
    suffix = path.suffix.lower()
    if suffix not in FORMATS:
        raise ExportError(f"cannot export to {str(path)!r}: give a file name ending in .svg or .png.")
    if path.is_dir():
        raise ExportError(f"{str(path)!r} is a folder; give a file name such as {str(path / 'views.svg')!r}.")
    if not path.parent.is_dir():
        raise ExportError(f"cannot write {str(path)!r}: the folder {str(path.parent)!r} does not exist.")
    svg, _ = views_svg(views, legend, caption, panel_width=panel_width, panel_height=panel_height, theme=theme)
    data = svg.encode("utf-8") if suffix == ".svg" else svg_to_png(svg, scale)
    tmp = path.with_name(f".{path.name}.tmp")
    try:
        tmp.write_bytes(data)
        os.replace(tmp, path)
    except OSError as e:
        raise ExportError(f"cannot write {str(path)!r}: {e.strerror or e}.") from None
    return path


# --------------------------------------------------------------------------- the workbench's views


def _plain(text: str) -> str:
    import re

    return html.unescape(re.sub(r"<[^>]+>", "", text or "")).strip()


def _view_objects(bench: Any) -> list[tuple[str, Any]]:
    """(name, view) of every analysis view on screen, PSD and autocorrelation first."""
    views = getattr(bench, "views", None)
    if isinstance(views, dict) and views:
        return list(views.items())
    return [(name, getattr(bench, attr)) for name, attr in (("psd", "_psd"), ("acf", "_acf"))
            if getattr(bench, attr, None) is not None]


def _roles(view: Any) -> dict[int, str]:
    roles: dict[int, str] = {}
    for attr, role in (("band", "band"), ("line", "line")):
        if getattr(view, attr, None) is not None:
            roles[id(getattr(view, attr))] = role
    for attr, role in (("pin_bands", "pin-band"), ("pin_lines", "pin"), ("pin_markers", "pin-marker")):
        for m in getattr(view, attr, None) or []:
            roles[id(m)] = role
    for m in (getattr(view, "overlay_lines", None) or {}).values():  # models of other analyses
        roles[id(m)] = "model"
    for layer in getattr(view, "layers", None) or []:  # measurement cursors
        for m in layer.marks():
            roles[id(m)] = "cursor"
    return roles


def bench_views(bench: Any) -> list[tuple[str, Any, dict[int, str]]]:
    """(title, figure, roles) of the workbench's views, as :func:`views_svg` takes them."""
    out = []
    for name, host in _view_objects(bench):
        # a view host wraps the view of its analysis, or several (the cross view: coherence,
        # phase and gain, each a figure of its own)
        many = getattr(host, "views", None)
        views = list(many) if isinstance(many, (list, tuple)) and many else [getattr(host, "view", host)]
        for view in views:
            figure = getattr(view, "figure", None) or (getattr(host, "figure", None) if len(views) == 1 else None)
            if figure is None:
                continue
            title = _plain(getattr(getattr(view, "title", None), "value", "")) or getattr(view, "title", "") or name
            out.append((str(title), figure, _roles(view)))
    return out


def bench_legend(bench: Any) -> list[LegendEntry]:
    entries = [LegendEntry("estimate on screen", CURRENT, "solid")]
    for i, pin in enumerate(getattr(bench, "pins", ()) or ()):
        label = getattr(pin, "label", "") or f"pin {i + 1}"
        entries.append(LegendEntry(f"pin {i + 1}: {label}", getattr(pin, "color", CURRENT),
                                   getattr(pin, "line_style", "dashed"), getattr(pin, "marker", None)))
    return entries


def bench_caption(bench: Any) -> str:
    from ..freeze._describe import one_line, selection_text, source_text, specbench_version

    state = bench.freeze_state()
    parts = [repr(state.estimator)]
    if getattr(state, "correlation_estimator", None) is not None:
        parts.append(repr(state.correlation_estimator))
    for name, est in (getattr(state, "analyses", None) or {}).items():
        parts.append(f"{name}: {est!r}")
    parts.append(f"analysed: {selection_text(state)}")
    parts.append(f"data: {source_text(state.signal, state.data_name)}")
    parts.append(f"specbench {specbench_version()}")
    return one_line(" · ".join(parts))


def export_bench(bench: Any, path: str | os.PathLike, *, theme: str = "light", scale: float = 2.0) -> Path:
    """``bench.export(path)``: the views on screen as ``.svg`` or ``.png``, with legend and caption."""
    views = bench_views(bench)
    if not views or all(getattr(v[1], "marks", None) in (None, []) for v in views):
        raise ExportError("There is nothing on screen to export yet: wait for the first estimate.")
    return export_views(path, views, bench_legend(bench), bench_caption(bench), theme=theme, scale=scale)


def export_control(bench: Any):
    """The widget's picture row: a file name, an Export button, and what happened."""
    import ipywidgets as W

    from ._style import gapped

    path = W.Text(value="specbench_views.svg", placeholder="views.svg or views.png",
                  layout=W.Layout(width="240px"))
    path.add_class("sb-export-path")
    button = W.Button(description="Export picture", icon="image",
                      tooltip="Write the views as shown (with the pins' legend and the settings) to the file: "
                              ".svg, or .png.", layout=W.Layout(width="auto"))
    button.add_class("sb-export-button")
    result = W.HTML("")
    result.add_class("sb-export-result")

    def click(_):
        try:
            written = export_bench(bench, path.value.strip() or "specbench_views.svg")
        except SpecbenchError as e:
            result.value = f"<span class='sb-err'>{html.escape(str(e))}</span>"
            return
        except Exception as e:  # the widget never shows a traceback
            result.value = f"<span class='sb-err'>Export failed: {html.escape(type(e).__name__)}: " \
                           f"{html.escape(str(e))}</span>"
            return
        size = written.stat().st_size
        result.value = f"Wrote {html.escape(str(written.resolve()))} ({size:,} bytes)."

    button.on_click(click)
    return gapped(W.HBox([path, button, result], layout=W.Layout(align_items="center", flex_flow="row wrap")),
                  "small")
