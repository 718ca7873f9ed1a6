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


def _plot_frame(root):
    """(left, top, right, bottom) of the first plot's frame in an exported picture."""
    frame = [r for r in root.iter(f"{SVG}rect") if r.get("fill") == "none"][0]
    left, top = float(frame.get("x")), float(frame.get("y"))
    return left, top, left + float(frame.get("width")), top + float(frame.get("height"))


def _points(d):
    return np.array([[float(v) for v in xy.split(",")] for xy in re.findall(r"[-\d.]+,[-\d.]+", d)])


def test_the_measurement_cursors_are_exported_where_they_are_drawn(tmp_path):
    """The band cursor (a shade over the plot's full height between its edges), the peak marker
    at the strongest tone and the harmonic cursors with their labels are in the picture, at the
    frequencies the view draws them (the x axis's scale, linear or logarithmic, as on screen)."""
    fs, n = 1000.0, 100_000
    t = np.arange(n) / fs
    x = 0.1 * np.random.default_rng(5).standard_normal(n) + 0.5 * np.sin(2 * np.pi * 50.3 * t)
    bench = sb.Workbench(sb.Signal(x, fs=fs, unit="m/s^2"), analyses=[sb.widgets.SpectrumAnalysis()])
    host = bench.views["psd"]
    host.table.set_band(100.0, 150.0)

    def px(f, left, right):
        xs = host.view.xs
        lo, hi = float(xs.min), float(xs.max)
        if type(xs).__name__ == "LogScale":
            f, lo, hi = np.log10(f), np.log10(lo), np.log10(hi)
        return left + (f - lo) / (hi - lo) * (right - left)

    root = ET.parse(bench.export(tmp_path / "band.svg")).getroot()
    left, top, right, bottom = _plot_frame(root)
    cursors = [p for p in root.iter(f"{SVG}path") if p.get("data-role") == "cursor"]
    shade = [p for p in cursors if p.get("fill") == _style.MARKER]
    assert len(shade) == 1 and float(shade[0].get("fill-opacity")) == pytest.approx(_style.MARKER_BAND_OPACITY)
    pts = _points(shade[0].get("d"))
    assert pts[:, 0].min() == pytest.approx(px(100.0, left, right), abs=0.02)
    assert pts[:, 0].max() == pytest.approx(px(150.0, left, right), abs=0.02)
    assert pts[:, 1].min() == pytest.approx(top, abs=0.02) and pts[:, 1].max() == pytest.approx(bottom, abs=0.02)
    edges = [p for p in cursors if p.get("stroke") == _style.MARKER]
    assert len(edges) == 2
    for path, f in zip(edges, (100.0, 150.0)):
        (x1, y1), (x2, y2) = _points(path.get("d"))
        assert x1 == x2 == pytest.approx(px(f, left, right), abs=0.02)
        assert sorted((y1, y2)) == pytest.approx([top, bottom], abs=0.02)
    tone = host.measure.last.tones.result[0]
    peak = [g for g in root.iter(f"{SVG}g") if g.get("data-role") == "cursor"]
    assert len(peak) == 1 and peak[0].get("data-marker") == "arrow" and peak[0].get("data-points") == "1"
    shift = re.match(r"translate\(([-\d.]+),", peak[0][0].get("transform"))
    assert float(shift.group(1)) == pytest.approx(px(tone.freq, left, right), abs=0.02)
    labels = ["".join(t.itertext()) for t in root.iter(f"{SVG}text") if t.get("data-role") == "cursor"]
    assert labels == list(host.layer.peak_label.text)

    # a tone clicked: the view zooms on it and the harmonic cursors (dotted, labelled) appear
    host.table.harmonic_count.value = 3
    host.table.tone_buttons[0].click()
    assert host.layer.harmonics.visible
    root = ET.parse(bench.export(tmp_path / "harmonics.svg")).getroot()
    left, top, right, bottom = _plot_frame(root)
    dotted = [p for p in root.iter(f"{SVG}path") if p.get("data-role") == "cursor"
              and p.get("stroke-dasharray") == _style.DASH_ARRAY["dotted"]]
    drawn_x = np.atleast_2d(np.asarray(host.layer.harmonics.x, dtype=float))[:, 0]
    assert len(dotted) == len(drawn_x) >= 1
    assert [_points(p.get("d"))[0, 0] for p in dotted] == pytest.approx([px(f, left, right) for f in drawn_x],
                                                                         abs=0.02)
    labels = ["".join(t.itertext()) for t in root.iter(f"{SVG}text") if t.get("data-role") == "cursor"]
    assert [lab for lab in labels if lab.endswith("×")] == list(host.layer.harmonic_labels.text)


def test_every_figure_of_every_analysis_is_exported_with_the_points_the_view_draws(tmp_path):
    """The cross view's three figures (coherence, phase, gain) each get a panel of their own, and
    the Allan deviation's points (a marker on every averaging time) are in the picture."""
    bench = sb.Workbench(sb.demo("test-stand", duration=20))
    root = ET.parse(bench.export(tmp_path / "all.svg")).getroot()
    titles = ["".join(t.itertext()) for t in root.iter(f"{SVG}text") if t.get("font-weight") == "bold"]
    cross = [v.title.value if hasattr(v.title, "value") else v.title for v in bench.views["cross"].views]
    assert len(cross) == 3 and all(any(c in t for t in titles) for c in ("Coherence", "Phase", "Gain")), titles
    # six panels (PSD, autocorrelation, three cross figures, Allan deviation): three to a row
    rows = {}
    for t in root.iter(f"{SVG}text"):
        if t.get("class") == "sb-title":
            rows.setdefault(float(t.get("y")), []).append(float(t.get("x")))
    assert sorted(len(xs) for xs in rows.values()) == [3, 3], rows
    assert float(root.get("width")) == pytest.approx(3 * 560)
    points = [g for g in root.iter(f"{SVG}g") if g.get("data-role") == "line-points"]
    taus = bench.result("noise").allan.tau
    adev = bench.result("noise").allan.value
    assert len(points) == 1 and points[0].get("data-marker") == "circle"
    assert int(points[0].get("data-points")) == int(np.sum(np.isfinite(adev) & (adev > 0))) == len(points[0]) > 0
    assert taus.size >= len(points[0])
