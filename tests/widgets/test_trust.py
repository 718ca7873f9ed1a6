"""The Workbench at its edges: hostile strings, bad control values, gaps, and random control sequences.

Every bad value a user or code can set gets a clear message on the control that holds it (and
in the status line); no sequence of changes leaves the widget stuck or showing an internal
error (property-based, hypothesis).
"""

import html
import re

import ipywidgets as W
import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from widget_support import FS, assert_same_spectrum

import specbench as sb

HOSTILE = "<img src=x onerror=alert(1)>"


def _html_values(widget, seen=None):
    """Every HTML string the widget tree sends to the page."""
    seen = set() if seen is None else seen
    if id(widget) in seen:
        return []
    seen.add(id(widget))
    out = []
    if isinstance(widget, (W.HTML, W.HTMLMath)):
        out.append(widget.value)
    if isinstance(widget, W.Label) and getattr(widget, "value", None):
        out.append(widget.value)
    for child in getattr(widget, "children", ()) or ():
        out += _html_values(child, seen)
    return out


def test_hostile_names_and_units_are_escaped_everywhere():
    rng = np.random.default_rng(1)
    sig = sb.Signal(rng.standard_normal((2, 8000)), fs=FS, channels=[HOSTILE, "b<script>alert(2)</script>"],
                    unit=HOSTILE)
    bench = sb.Workbench(sig)
    bench.read("psd", 100.0)
    bench.read("acf", 0.01)
    bench.pin()
    bench.controls["segment_length"].value = 1 << 20  # an error message that names the data
    bench.controls["channel"].value = "b<script>alert(2)</script>"
    values = _html_values(bench)
    assert values, "no HTML widgets found"
    for v in values:
        assert "<img" not in v and "<script" not in v, v
    assert any(html.escape(HOSTILE) in v for v in values)  # shown, as text


@pytest.fixture
def small():
    rng = np.random.default_rng(2)
    return sb.Signal(rng.standard_normal((2, 8000)), fs=FS, channels=["a", "b"], unit="V")


@pytest.mark.parametrize("key, value, words", [
    ("fs", "1 kHz", "sample rate"),
    ("fs", True, "sample rate"),
    ("fs", float("nan"), "sample rate"),
    ("channel", None, "channel"),
    ("channel", "nope", "channel"),
    ("span", (5.0,), "span"),
    ("span", "0-5", "span"),
    ("span", (4.0, 2.0), "start before it stops"),
    ("method", "no-such-method", "Unknown method"),
    ("plot_as", "sideways", "plot option"),
    ("freq_axis", 3, "frequency axis"),
    ("overlap", "half", "overlap"),
    ("segment_length", -3, "segment_length"),
    ("acf_max_lag", "long", "max_lag"),
])
def test_bad_values_get_a_clear_message_on_their_control(small, key, value, words):
    bench = sb.Workbench(small)
    good = bench.spectrum
    bench.controls[key].value = value
    assert "Internal error" not in bench.status and "Traceback" not in bench.status
    assert words.lower() in bench.status.lower(), bench.status
    assert bench.controls[key].invalid, key
    assert bench.spectrum is good and bench.spectrum.estimator == bench.estimator


def test_switching_method_after_a_failure_leaves_no_stale_controls(small):
    bench = sb.Workbench(small)
    bench.controls["fs"].value = "fast"
    bench.controls["method"].value = "Multitaper"
    assert "bandwidth" in bench.controls and "average" not in bench.controls
    bench.controls["fs"].value = None
    assert isinstance(bench.estimator, sb.Multitaper) and "Not applied" not in bench.status
    bench.controls["method"].value = "Welch"
    assert isinstance(bench.estimator, sb.Welch) and "bandwidth" not in bench.controls


def test_status_before_any_good_estimate_and_pin_without_one():
    from specbench.widgets import CorrelationAnalysis, SpectrumAnalysis

    s = sb.Signal(np.random.default_rng(0).standard_normal(500), fs=100.0)
    # every analysis open: the noise model does fit 500 samples, and the status says it is on screen
    full = sb.Workbench(s, correlation_estimator=sb.Autocorrelation(max_lag=50.0))
    assert full.spectrum is None and "On screen: Noise model" in full.status
    bench = sb.Workbench(s, correlation_estimator=sb.Autocorrelation(max_lag=50.0),
                         analyses=[SpectrumAnalysis(), CorrelationAnalysis()])
    assert bench.spectrum is None and bench.correlation is None
    assert "last good estimate stays" not in bench.status
    assert "Nothing is on screen yet" in bench.status
    bench._pins.board.pin_button.click()  # the button says so, without raising
    assert "no estimate on screen to pin" in bench.status


def test_gappy_data_opens_with_the_gap_policy_it_needs():
    rng = np.random.default_rng(4)
    x = rng.standard_normal(20_000)
    x[5000:5100] = np.nan  # what sb.load(..., on_gap="fill") gives
    bench = sb.Workbench(sb.Signal(x, fs=FS))
    assert bench.estimator.gaps == "skip"
    assert "gaps" in bench.status and "Welch(gaps='skip')" in bench.status
    assert bench.spectrum is not None
    bench.pin()


# ------------------------------------------------------------------ random sequences
KEYS_VALUES = {
    "segment_length": st.sampled_from([16, 256, 1024, 4096, 1 << 16, 0, -1, "x", None, 3.5]),
    "overlap": st.sampled_from([0.0, 0.5, 0.75, 0.99, 1.0, -0.1, "a", None]),
    "window": st.sampled_from(["hann", "hamming", ("kaiser", 8.0), "nope", None, 7]),
    "detrend": st.sampled_from(["constant", "linear", False, "cubic", None]),
    "confidence": st.sampled_from([0.9, 0.95, 0.99, 1.5, 0.0, "x"]),
    "method": st.sampled_from(["Welch", "Periodogram", "Multitaper", "Correlogram", "bogus", None]),
    "acf_max_lag": st.sampled_from([None, 0.05, 1.0, 100.0, -1.0, "x"]),
    "channel": st.sampled_from(["a", "b", None, "zz", 3]),
    "fs": st.sampled_from([None, 500.0, 2000.0, -1.0, 0.0, "1 kHz", float("inf")]),
    "span": st.sampled_from([None, (0.0, 4.0), (1.0, 2.0), (3.0, 1.0), (0.0, 99.0), (1.0,), "x"]),
    "plot_as": st.sampled_from(["density", "asd", "db", "bogus"]),
}

steps = st.lists(st.sampled_from(sorted(KEYS_VALUES)).flatmap(
    lambda k: st.tuples(st.just(k), KEYS_VALUES[k])), min_size=1, max_size=7)


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(seq=steps)
def test_random_control_sequences_never_leave_the_widget_stuck(small, seq):
    bench = sb.Workbench(small)
    for key, value in seq:
        c = bench.controls.get(key)
        if c is None:  # a field of another method
            continue
        c.value = value
        assert not re.search(r"Internal error|Traceback", bench.status), (seq, bench.status)
        if bench.spectrum is not None:
            assert bench.spectrum.estimator == bench.estimator
        if bench.correlation is not None:
            assert bench.correlation.estimator == bench.correlation_estimator
    # code puts everything back to a valid setting, and the controls then work again
    for key, value in (("channel", "a"), ("fs", None), ("span", None), ("plot_as", "density")):
        bench.controls[key].value = value
    bench.estimator = sb.Welch(segment_length=512)
    bench.correlation_estimator = sb.Autocorrelation()
    assert "Not applied" not in bench.status, bench.status
    bench.controls["overlap"].value = 0.25
    assert bench.estimator == sb.Welch(segment_length=512, overlap=0.25)
    assert_same_spectrum(bench.spectrum, bench.estimator(bench.selected))


def test_the_freeze_panel_says_when_its_code_is_out_of_date(small):
    bench = sb.Workbench(small)
    panel = bench._panel
    panel.refresh()
    assert not panel.stale and "Frozen" in panel.message.value
    bench.controls["overlap"].value = 0.25
    assert panel.stale and "Out of date" in panel.message.value
    assert "sb-freeze-stale" in panel._dom_classes
    panel.refresh()
    assert not panel.stale and "Out of date" not in panel.message.value
    assert "overlap=0.25" in panel.code
