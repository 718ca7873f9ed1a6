"""bench.export: the views as SVG / PNG files that hold exactly the traces on screen.

The SVG is parsed as XML (the W3C SVG 1.1 namespace); the PNG is checked by its signature
and IHDR chunk (ISO/IEC 15948:2004, "PNG: Portable Network Graphics", sections 5.2 and
11.2.2) and decoded with Pillow to look at its pixels.
"""

from __future__ import annotations

import re
import struct
import xml.etree.ElementTree as ET

import numpy as np
import pytest

import specbench as sb
from specbench.widgets import _style
from specbench.widgets._export import ExportError

SVG = "{http://www.w3.org/2000/svg}"


@pytest.fixture
def pinned(sig):
    bench = sb.Workbench(sig)
    bench.pin()
    bench.estimator = bench.estimator.replace(segment_length=256)
    bench.pin()
    bench.estimator = bench.estimator.replace(segment_length=4096, window="blackmanharris")
    return bench


def _finite_points(mark):
    y = np.atleast_2d(np.asarray(mark.y, dtype=float))
    x = np.asarray(mark.x, dtype=float)
    return [int(np.sum(np.isfinite(x) & np.isfinite(row) & ((row > 0) if type(mark.scales["y"]).__name__ ==
                                                             "LogScale" else True))) for row in y]


def test_svg_holds_every_trace_pin_band_legend_and_caption(pinned, tmp_path):
    path = pinned.export(tmp_path / "views.svg")
    root = ET.parse(path).getroot()
    assert root.tag == f"{SVG}svg" and float(root.get("width")) > 800
    traces = root.findall(f".//{SVG}path[@class='sb-trace']")
    by = {}
    for t in traces:
        by.setdefault((t.get("data-view"), t.get("data-role")), []).append(t)
    for view, name in ((pinned._psd, "power"), (pinned._acf, "autocorrelation")):
        line = by[(name, "line")]
        assert len(line) == 1
        # the same points as the mark the browser draws (finite, and positive on a log axis)
        assert int(line[0].get("data-points")) == _finite_points(view.line)[0]
        assert line[0].get("d").count("L") + line[0].get("d").count("M") == int(line[0].get("data-points"))
        assert line[0].get("stroke") == _style.CURRENT
        assert len(by[(name, "band")]) == 1 and by[(name, "band")][0].get("fill") == _style.CURRENT
        pins = by[(name, "pin")]
        assert [p.get("stroke") for p in pins] == [c for c, _ in _style.PIN_STYLES[:2]]
        assert [p.get("stroke-dasharray") for p in pins] == [_style.DASH_ARRAY[d] for _, d in _style.PIN_STYLES[:2]]
        assert [int(p.get("data-points")) for p in pins] == [_finite_points(m)[0] for m in view.pin_lines[:2]]
        bands = by[(name, "pin-band")]
        assert len(bands) == 2 and all(float(b.get("fill-opacity")) == _style.PIN_BAND_OPACITY for b in bands)
    text = [("".join(t.itertext())) for t in root.iter(f"{SVG}text")]
    assert "Power spectral density" in text and "Autocorrelation" in text
    assert "Frequency (Hz)" in text and "Lag (s)" in text and any(t.startswith("PSD (V^2/Hz)") for t in text)
    legend = [t for t in text if t.startswith(("pin ", "estimate on screen"))]
    assert legend[0] == "estimate on screen"
    assert [t.split(": ", 1)[1] for t in legend[1:]] == [p.label for p in pinned.pins]
    caption = " ".join(t.get("class") and "".join(t.itertext()) for t in root.iter(f"{SVG}text")
                       if t.get("class") == "sb-caption")
    assert repr(pinned.estimator) in caption and "Autocorrelation()" in caption and "channel 'left'" in caption
    # tick labels are those of the axes on screen
    ticks = [t for t in text if re.fullmatch(r"\d(\.\d+)?e-?\d+", t)]
    want = [f"{v:.0e}".split("e")[0] + "e" + str(int(f"{v:.0e}".split("e")[1]))
            for v in pinned._psd.ax_y.tick_values if pinned._psd.ys.min <= v <= pinned._psd.ys.max]
    assert ticks[: len(want)] == want  # the PSD panel comes first (the noise view's log ticks follow)


def test_png_is_a_valid_picture_of_the_views(pinned, tmp_path):
    pytest.importorskip("resvg_py")
    path = pinned.export(tmp_path / "views.png")
    data = path.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and data[12:16] == b"IHDR"
    width, height = struct.unpack(">II", data[16:24])
    svg = pinned.export(tmp_path / "views.svg")
    root = ET.parse(svg).getroot()
    assert (width, height) == (2 * int(float(root.get("width"))), 2 * int(float(root.get("height"))))
    from PIL import Image

    img = np.asarray(Image.open(path).convert("RGB")).astype(int)
    current = np.array([int(_style.CURRENT[i:i + 2], 16) for i in (1, 3, 5)])
    near = np.all(np.abs(img - current) < 12, axis=-1)
    assert near.sum() > 2000  # the estimate's line is drawn in its colour
    assert np.all(img[0, 0] == 255)  # light theme: white background
    dark = pinned.export(tmp_path / "dark.png", theme="dark")
    assert np.all(np.asarray(Image.open(dark).convert("RGB"))[0, 0] == 17)


def test_export_errors(pinned, tmp_path):
    with pytest.raises(ExportError, match=r"give a file name ending in .svg or .png"):
        pinned.export(tmp_path / "v.pdf")
    with pytest.raises(ExportError, match=r"the folder .* does not exist"):
        pinned.export(tmp_path / "nope" / "v.svg")
    with pytest.raises(ExportError, match=r"theme must be one of 'light', 'dark'"):
        pinned.export(tmp_path / "v.svg", theme="blue")
    assert isinstance(ExportError("x"), sb.SpecbenchError)


def test_the_export_button_writes_the_file_and_says_so(pinned, tmp_path):
    row = next(w for w in _walk(pinned) if "sb-export-button" in getattr(w, "_dom_classes", ()))
    box = next(w for w in _walk(pinned) if "sb-export-path" in getattr(w, "_dom_classes", ()))
    result = next(w for w in _walk(pinned) if "sb-export-result" in getattr(w, "_dom_classes", ()))
    box.value = str(tmp_path / "from_button.svg")
    row.click()
    assert (tmp_path / "from_button.svg").exists() and result.value.startswith("Wrote ")
    box.value = str(tmp_path / "x.bmp")
    row.click()
    assert "sb-err" in result.value and "ending in .svg or .png" in result.value


def _walk(widget):
    yield widget
    for child in getattr(widget, "children", ()):
        yield from _walk(child)


def test_export_draws_every_pins_look(sig, tmp_path):
    """Eight pins: each view's picture holds every pin's line (its dash) and its markers (its shape)."""
    bench = sb.Workbench(sig)
    for i in range(8):
        bench.controls["overlap"].value = round(0.1 * i, 1)
        bench.pin()
    root = ET.parse(bench.export(tmp_path / "eight.svg")).getroot()
    for name in ("power", "autocorrelation"):
        lines = root.findall(f".//{SVG}path[@data-view='{name}'][@data-role='pin']")
        assert [(p.get("stroke"), p.get("stroke-dasharray")) for p in lines] == [
            (c, _style.DASH_ARRAY[d]) for c, d in _style.PIN_STYLES]
        groups = root.findall(f".//{SVG}g[@data-view='{name}'][@data-role='pin-marker']")
        assert [g.get("data-marker") for g in groups] == list(_style.PIN_MARKERS)
        for g, (colour, _dash) in zip(groups, _style.PIN_STYLES):
            shapes = g.findall(f"{SVG}path")
            assert len(shapes) == int(g.get("data-points")) == _style.MARKERS_PER_LINE
            painted = {s.get("fill") if s.get("fill") != "none" else s.get("stroke") for s in shapes}
            assert painted == {colour}
            assert shapes[0].get("d") == _style.marker_path(g.get("data-marker"))
    legend = root.findall(f".//{SVG}g[@class='sb-legend-item']")
    assert len(legend) == 9 and all(item.find(f"{SVG}path") is not None for item in legend[1:])
