"""The advisor's trade-off chart: resolution against band width, leakage as colour.

Our own look: the settings that miss a target are small grey dots behind; those that meet
every target are coloured by their highest sidelobe on a light-to-deep blue ramp; the chosen
setting is a ring with its rank; dashed lines mark the targets.
"""

from __future__ import annotations

import html
import math
from typing import Any

import numpy as np

CHOSEN = "#d0671f"
RAMP = ("#c9dcf0", "#1d4f8c")  # sidelobe -20 dB (light) .. -120 dB (deep)
BACKGROUND = "#b9b9b9"


def _split(advice: Any) -> tuple[np.ndarray, np.ndarray]:
    allpts = np.array(advice.frontier, dtype=float).reshape(-1, 3)
    good = np.array([(c.figures["resolution_hz"], c.figures["band_db"], c.figures["sidelobe_db"])
                     for c in advice.candidates], dtype=float).reshape(-1, 3)
    return allpts, good


def advice_figure(advice: Any, bq: Any, top: int = 200):
    """A bqplot Figure of the candidates (ipywidgets front end)."""
    allpts, good = _split(advice)
    good = good[:top]
    xs = bq.LogScale()
    ys = bq.LinearScale(min=0.0)
    cs = bq.ColorScale(colors=[RAMP[1], RAMP[0]], min=-120.0, max=-20.0)
    back = bq.Scatter(x=allpts[:, 0], y=allpts[:, 1], scales={"x": xs, "y": ys}, colors=[BACKGROUND],
                      default_size=8, opacities=[0.5], stroke=None)
    front = bq.Scatter(x=good[:, 0], y=good[:, 1], color=good[:, 2], scales={"x": xs, "y": ys, "color": cs},
                       default_size=36, stroke="white", tooltip=bq.Tooltip(fields=["x", "y", "color"],
                       labels=["resolution Hz", "band dB", "sidelobe dB"], formats=[".4g", ".2f", ".0f"]))
    chosen = bq.Scatter(x=good[:1, 0], y=good[:1, 1], scales={"x": xs, "y": ys}, marker="circle",
                        colors=[CHOSEN], stroke=CHOSEN, stroke_width=3, default_size=220, fill=False)
    label = bq.Label(x=good[:1, 0], y=good[:1, 1], scales={"x": xs, "y": ys}, text=["  #1"], colors=[CHOSEN],
                     default_size=13, x_offset=10, y_offset=-6, font_weight="bold")
    marks = [back, front, chosen, label]
    t = advice.targets
    ymax = float(np.nanmax(allpts[:, 1])) if allpts.size else 1.0
    xmin, xmax = float(np.nanmin(allpts[:, 0])), float(np.nanmax(allpts[:, 0]))
    if t.get("resolution") is not None:
        marks.append(bq.Lines(x=[t["resolution"]] * 2, y=[0, ymax], scales={"x": xs, "y": ys}, colors=[CHOSEN],
                              line_style="dashed", stroke_width=1))
    if t.get("band_db") is not None:
        marks.append(bq.Lines(x=[xmin, xmax], y=[t["band_db"]] * 2, scales={"x": xs, "y": ys}, colors=[CHOSEN],
                              line_style="dashed", stroke_width=1))
    ax_x = bq.Axis(scale=xs, label="resolution (Hz)", tick_format=".3g")
    ax_y = bq.Axis(scale=ys, side="left", label="band width (dB)", tick_format=".1f")
    ax_c = bq.ColorAxis(scale=cs, side="right", label="highest sidelobe (dB)")
    best = advice.candidates[0]
    return bq.Figure(marks=marks, axes=[ax_x, ax_y, ax_c], title=f"#1 {best.estimator!r}",
                     fig_margin=dict(top=40, bottom=50, left=60, right=90),
                     layout={"width": "100%", "height": "380px"})


def _mix(frac: float) -> str:
    a = [int(RAMP[0][i:i + 2], 16) for i in (1, 3, 5)]
    b = [int(RAMP[1][i:i + 2], 16) for i in (1, 3, 5)]
    c = [round(x + (y - x) * frac) for x, y in zip(a, b)]
    return "#" + "".join(f"{v:02x}" for v in c)


def advice_svg(advice: Any, width: int = 640, height: int = 400) -> str:
    """A standalone SVG of the chart (no plotting library)."""
    allpts, good = _split(advice)
    left, right, top, bottom = 64, 24, 30, 48
    pw, ph = width - left - right, height - top - bottom
    lx = np.log10(allpts[:, 0])
    x0, x1 = math.floor(lx.min()), math.ceil(lx.max())
    y1 = float(np.nanmax(allpts[:, 1])) * 1.05

    def px(x):
        return left + (math.log10(x) - x0) / max(x1 - x0, 1e-9) * pw

    def py(y):
        return top + ph - y / y1 * ph

    out = [f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" '
           f'font-family="sans-serif" font-size="11">',
           f'<rect x="{left}" y="{top}" width="{pw}" height="{ph}" fill="none" stroke="#888"/>']
    for d in range(x0, x1 + 1):
        x = px(10.0**d)
        out.append(f'<line x1="{x:.1f}" y1="{top + ph}" x2="{x:.1f}" y2="{top + ph + 4}" stroke="#888"/>'
                   f'<text x="{x:.1f}" y="{top + ph + 16}" text-anchor="middle">{10.0**d:g}</text>')
    step = 10 ** math.floor(math.log10(y1 / 2)) if y1 > 0 else 1
    y = 0.0
    while y <= y1:
        out.append(f'<text x="{left - 6}" y="{py(y) + 4:.1f}" text-anchor="end">{y:g}</text>')
        y += step
    for x, yv, _ in allpts:
        out.append(f'<circle cx="{px(x):.1f}" cy="{py(yv):.1f}" r="1.6" fill="{BACKGROUND}" opacity="0.6"/>')
    for x, yv, s in good[::-1]:
        frac = min(1.0, max(0.0, (-s - 20) / 100))
        out.append(f'<circle cx="{px(x):.1f}" cy="{py(yv):.1f}" r="4" fill="{_mix(frac)}" stroke="white"/>')
    if good.size:
        out.append(f'<circle cx="{px(good[0, 0]):.1f}" cy="{py(good[0, 1]):.1f}" r="9" fill="none" '
                   f'stroke="{CHOSEN}" stroke-width="2.5"/>'
                   f'<text x="{px(good[0, 0]) + 12:.1f}" y="{py(good[0, 1]) - 6:.1f}" fill="{CHOSEN}" '
                   f'font-weight="bold">#1 {html.escape(repr(advice.candidates[0].estimator))}</text>')
    t = advice.targets
    if t.get("resolution") is not None:
        x = px(t["resolution"])
        out.append(f'<line x1="{x:.1f}" y1="{top}" x2="{x:.1f}" y2="{top + ph}" stroke="{CHOSEN}" '
                   'stroke-dasharray="5,3"/>')
    if t.get("band_db") is not None:
        yv = py(t["band_db"])
        out.append(f'<line x1="{left}" y1="{yv:.1f}" x2="{left + pw}" y2="{yv:.1f}" stroke="{CHOSEN}" '
                   'stroke-dasharray="5,3"/>')
    out.append(f'<text x="{left + pw / 2}" y="{height - 10}" text-anchor="middle">resolution (Hz)</text>'
               f'<text x="14" y="{top + ph / 2}" text-anchor="middle" transform="rotate(-90 14 {top + ph / 2})">'
               'band width (dB)</text></svg>')
    return "".join(out)
