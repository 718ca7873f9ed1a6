"""The look of the views: palette, pin bands, minimum y span and ticks, x-only zoom.

Outside references: the contrast ratio is WCAG 2.1's (W3C, "Web Content Accessibility
Guidelines 2.1", 2018, success criterion 1.4.11: 3:1 for graphical objects; relative
luminance as defined there). Colour-vision deficiency is simulated with the severity-1.0
matrices of Machado, Oliveira & Fernandes, "A Physiologically-based Model for Simulation of
Color Vision Deficiency", IEEE TVCG 15(6), 2009 (applied to linear sRGB; the coefficients
are written from memory of the paper's table), colour differences in CIE 1976 L*a*b*
(D65). The JupyterLab background colours are those of its Light theme (#ffffff) and of the
darkest layer of its Dark theme (#111111, from memory).
"""

from __future__ import annotations

import itertools
import math
import re

import numpy as np
import pytest
from widget_support import FS

import specbench as sb
from specbench.widgets import _style
from specbench.widgets._views import MIN_DB, MIN_DECADES, log_ticks, y_limits

MACHADO = {
    "normal": np.eye(3),
    "protanopia": np.array([[0.152286, 1.052583, -0.204868], [0.114503, 0.786281, 0.099216],
                            [-0.003882, -0.048116, 1.051998]]),
    "deuteranopia": np.array([[0.367322, 0.860646, -0.227968], [0.280085, 0.672501, 0.047413],
                              [-0.011820, 0.042940, 0.968881]]),
    "tritanopia": np.array([[1.255528, -0.076749, -0.178779], [-0.078411, 0.930809, 0.147602],
                            [0.004733, 0.691367, 0.303900]]),
}
BACKGROUNDS = {"JupyterLab Light": "#ffffff", "JupyterLab Dark": "#111111"}


def _rgb(h):
    return np.array([int(h[i:i + 2], 16) / 255 for i in (1, 3, 5)])


def _linear(c):
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def _luminance(h):
    return float(np.array([0.2126, 0.7152, 0.0722]) @ _linear(_rgb(h)))


def _contrast(a, b):
    hi, lo = sorted((_luminance(a), _luminance(b)), reverse=True)
    return (hi + 0.05) / (lo + 0.05)


def _lab(lin):
    xyz = np.array([[0.4124, 0.3576, 0.1805], [0.2126, 0.7152, 0.0722], [0.0193, 0.1192, 0.9505]]) @ np.clip(lin, 0, 1)
    t = xyz / np.array([0.95047, 1.0, 1.08883])
    f = np.where(t > 0.008856, np.cbrt(t), 7.787 * t + 16 / 116)
    return np.array([116 * f[1] - 16, 500 * (f[0] - f[1]), 200 * (f[1] - f[2])])


def _delta_e(a, b, vision):
    m = MACHADO[vision]
    return float(np.linalg.norm(_lab(m @ _linear(_rgb(a))) - _lab(m @ _linear(_rgb(b)))))


def _worst(a, b):
    return min(_delta_e(a, b, v) for v in MACHADO)


PINS = [c for c, _ in _style.PIN_STYLES]


def test_the_sanity_of_the_colour_science():
    """WCAG's own extremes: black on white is 21:1; a colour is 0 from itself in every vision."""
    assert _contrast("#000000", "#ffffff") == pytest.approx(21.0)
    assert _worst(_style.CURRENT, _style.CURRENT) == 0.0
    # protanopia and deuteranopia all but merge a pure red and a pure green of equal lightness
    assert _delta_e("#c83c3c", "#3c8c3c", "deuteranopia") < 0.5 * _delta_e("#c83c3c", "#3c8c3c", "normal")


@pytest.mark.parametrize("theme", BACKGROUNDS)
def test_every_line_reads_on_both_themes(theme):
    for colour in [_style.CURRENT, *PINS]:
        assert _contrast(colour, BACKGROUNDS[theme]) >= 3.0, (colour, theme)


def test_pins_stand_apart_from_the_estimate_and_from_pins_of_the_same_dash_in_every_vision():
    for pin in PINS:
        assert _worst(pin, _style.CURRENT) >= 15.0, pin
    dashes = [d for _, d in _style.PIN_STYLES]
    assert "solid" not in dashes  # the estimate on screen is the only solid line
    for (i, a), (j, b) in itertools.combinations(enumerate(_style.PIN_STYLES), 2):
        if a[1] == b[1]:
            assert _worst(a[0], b[0]) >= 15.0, (a, b)
        if j == i + 1:
            assert a[1] != b[1] and _worst(a[0], b[0]) >= 10.0, (a, b)
    assert len(set(PINS)) == len(PINS)


def _polygon_area(d):
    """Area of a closed SVG path of straight segments (M/L/H/V, absolute), by the shoelace formula."""
    pts, x, y = [], 0.0, 0.0
    for cmd, args in re.findall(r"([MLHVZ])([^MLHVZ]*)", d):
        nums = [float(v) for v in re.findall(r"-?\d+(?:\.\d+)?", args)]
        if cmd in "ML":
            for i in range(0, len(nums), 2):
                x, y = nums[i], nums[i + 1]
                pts.append((x, y))
        elif cmd == "H":
            x = nums[0]
            pts.append((x, y))
        elif cmd == "V":
            y = nums[0]
            pts.append((x, y))
    xs, ys = np.array(pts).T
    return 0.5 * abs(float(np.dot(xs, np.roll(ys, -1)) - np.dot(ys, np.roll(xs, -1))))


def test_every_pin_has_a_look_of_its_own_even_without_colour():
    """Eight pins, eight (colour, dash, marker) looks; the (dash, marker) pairs alone differ too, so
    the pins tell apart in print and in any colour vision, and neighbours differ in dash and marker."""
    looks = [_style.pin_look(i) for i in range(len(_style.PIN_STYLES))]
    assert len(looks) == 8 and len(set(looks)) == 8
    assert len({(dash, marker) for _, dash, marker in looks}) == 8
    assert len(set(_style.PIN_MARKERS)) == 8
    for a, b in zip(looks, looks[1:]):
        assert a[1] != b[1] and a[2] != b[2]
    assert all(_style.PIN_MARKER[c] == m for c, _, m in looks)


@pytest.mark.parametrize("marker", ["square", "diamond", "triangle-up", "triangle-down", "cross"])
def test_marker_shapes_have_the_area_bqplot_gives_them(marker):
    """A marker's size is its area in px^2 (the d3-shape convention for symbol size, which
    bqplot's Scatter ``default_size`` follows; from memory of the d3-shape documentation)."""
    assert _polygon_area(_style.marker_path(marker, 36.0)) == pytest.approx(36.0, rel=5e-3)  # 0.01 px rounding


def test_pin_markers_sit_on_their_lines_and_apart_from_other_pins(sig):
    bench = sb.Workbench(sig)
    for i in range(8):
        bench.controls["overlap"].value = round(0.1 * i, 1)
        bench.pin()
    for view in (bench._psd, bench._acf):
        dots = [m for m in view.figure.marks if m in view.pin_markers]
        assert [m.marker for m in dots] == [p.marker for p in bench.pins] == list(_style.PIN_MARKERS)
        seen = set()
        for m, line, pin in zip(dots, view.pin_lines, bench.pins):
            assert m.colors == [pin.color] and line.colors == [pin.color] and line.line_style == pin.line_style
            x, y = np.asarray(m.x), np.asarray(m.y)
            assert x.size == _style.MARKERS_PER_LINE
            lx, ly = np.asarray(line.x), np.asarray(line.y)
            for a, b in zip(x, y):  # each marker is a point of the pin's own trace
                assert np.any((lx == a) & (ly == b))
            seen |= set(x.tolist())
        # staggered: most markers have an x of their own (where the frequency bins are coarser than
        # the stagger, near the low end of a log axis, neighbours can land on one bin)
        assert len(seen) > 5 * _style.MARKERS_PER_LINE


def test_the_palette_is_not_a_well_known_default_cycle():
    """Not the default cycle of the common plotting libraries (their first colours, from memory)."""
    known = {"#1f77b4", "#ff7f0e", "#2ca02c", "#d62728", "#9467bd", "#8c564b", "#e377c2", "#7f7f7f",
             "#bcbd22", "#17becf", "#636efa", "#ef553b", "#00cc96", "#4c72b0", "#dd8452", "#55a868"}
    for colour in [_style.CURRENT, *PINS]:
        assert all(_delta_e(colour, k, "normal") > 8.0 for k in known), colour


# --------------------------------------------------------------------------- y range and ticks


def test_a_flat_spectrum_gets_at_least_a_decade_and_three_ticks():
    lo, hi = y_limits(0.95e-3, 1.05e-3, log=True)
    assert math.log10(hi / lo) == pytest.approx(MIN_DECADES)
    assert math.sqrt(lo * hi) == pytest.approx(math.sqrt(0.95e-3 * 1.05e-3))
    assert len(log_ticks(lo, hi)) >= 3
    lo, hi = y_limits(-30.2, -29.8, log=False, min_linear=MIN_DB)
    assert hi - lo == pytest.approx(MIN_DB)
    lo, hi = y_limits(1e-6, 1e-1, log=True)  # a wide range keeps its 4 % margin only
    assert lo < 1e-6 and hi > 1e-1 and math.log10(hi / lo) == pytest.approx(5 * 1.08)


def test_white_noise_in_the_workbench():
    x = np.random.default_rng(11).standard_normal(200_000)
    bench = sb.Workbench(sb.Signal(x, fs=FS))
    view = bench._psd
    assert math.log10(view.ys.max / view.ys.min) >= MIN_DECADES - 1e-9
    assert len(view.ax_y.tick_values) >= 3
    view.plot_as.value = "db"
    assert view.ys.max - view.ys.min >= MIN_DB - 1e-9 and len(view.ax_y.tick_values) >= 3


# --------------------------------------------------------------------------- pins and zoom


def _bands_of(view):
    cursors = [m for layer in getattr(view, "layers", []) for m in layer.marks()]  # e.g. the band cursor
    return [m for m in view.figure.marks if getattr(m, "fill", "none") == "between" and m is not view.band
            and m not in cursors]


def test_pins_keep_their_band_lighter_and_the_bands_toggle(sig):
    bench = sb.Workbench(sig)
    bench.pin()
    bench.estimator = bench.estimator.replace(segment_length=256)
    bench.pin()
    for view in (bench._psd, bench._acf):
        bands = _bands_of(view)
        assert len(bands) == 2
        for band, (_result, colour, _dash) in zip(bands, view.pinned):
            assert band.fill_colors == [colour] and band.fill_opacities == [_style.PIN_BAND_OPACITY]
            assert _style.PIN_BAND_OPACITY < _style.BAND_OPACITY
            assert np.asarray(band.y).shape[0] == 2 and np.asarray(band.y).shape[1] == np.asarray(band.x).size > 0
        # the bands lie under the estimate's band and lines
        marks = list(view.figure.marks)
        assert max(marks.index(b) for b in bands) < marks.index(view.band) < marks.index(view.line)
        view.pin_band_toggle.value = False
        assert _bands_of(view) == [] and all(m in view.figure.marks for m in view.pin_lines[:2])
        view.pin_band_toggle.value = True
        assert len(_bands_of(view)) == 2


def test_zoom_is_x_only_and_y_fits_the_visible_part(sig):
    bench = sb.Workbench(sig.channel("right"))  # a 120 Hz tone on white noise
    view = bench._psd
    view.tool.value = "zoom"
    zoom = view.figure.interaction
    assert list(zoom.scales) == ["x"]
    whole = (view.ys.min, view.ys.max)
    view.zoom_x(200.0, 400.0)  # away from the tone: y shrinks to the noise
    assert view.zoomed and (view.xs.min, view.xs.max) == (200.0, 400.0)
    assert view.ys.max < whole[1] / 10
    assert math.log10(view.ys.max / view.ys.min) >= MIN_DECADES - 1e-9
    spec = bench.spectrum
    value, lower, upper = (np.ravel(a) for a in (spec.value, spec.lower, spec.upper))
    inside = (spec.freq >= 200) & (spec.freq <= 400)
    assert view.ys.max >= np.max(upper[inside]) and view.ys.min <= np.min(lower[inside])
    view.zoom_x(100.0, 140.0)  # the tone in view: y reaches it
    assert view.ys.max >= np.max(value[(spec.freq >= 100) & (spec.freq <= 140)])
    view.reset_zoom()
    assert not view.zoomed and (view.ys.min, view.ys.max) == pytest.approx(whole)


def test_the_model_curve_and_asymptotes_read_on_both_themes_and_stand_apart():
    # WCAG 2.1 contrast 3:1 (graphical objects) on both JupyterLab backgrounds; the model curve
    # at least 15 CIELAB units from the estimate, the measurement marker, every pin and the
    # asymptote grey in normal vision and the three simulated deficiencies (Machado et al. 2009)
    for colour in (_style.MODEL, _style.ASYMPTOTE):
        for bg in BACKGROUNDS.values():
            assert _contrast(colour, bg) >= 3.0, (colour, bg)
    for other in [_style.CURRENT, _style.MARKER, _style.ASYMPTOTE, *PINS]:
        assert _worst(_style.MODEL, other) >= 15.0, other
