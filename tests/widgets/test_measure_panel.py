"""The PSD view's measurements (band cursor, tones, floor, harmonic cursors), their table, the
frozen cell's measurement lines, and the advise panel, driven headless (no browser).

Outside references: band power of white noise ``2 sigma**2 (f2 - f1) / fs`` for a one-sided
density (Parseval; Bendat & Piersol, *Random Data*, 4th ed. 2010, eq. (5.67), from memory);
a sine of amplitude A has RMS ``A / sqrt(2)`` (common practice).
"""

from __future__ import annotations

import math

import numpy as np
import pytest

import specbench as sb
from specbench.widgets._measure import MeasureState

FS = 1000.0
N = 100_000


@pytest.fixture(scope="module")
def record():
    rng = np.random.default_rng(5)
    t = np.arange(N) / FS
    x = 0.1 * rng.standard_normal(N) + 0.5 * np.sin(2 * np.pi * 50.3 * t) + 0.1 * np.sin(2 * np.pi * 100.6 * t)
    x.setflags(write=False)
    return x


@pytest.fixture()
def bench(record):
    return sb.Workbench(sb.Signal(record, fs=FS, unit="m/s^2"), analyses=[sb.widgets.SpectrumAnalysis()])


def test_state_reads_every_measurement_and_keeps_messages():
    rng = np.random.default_rng(1)
    spec = sb.Welch(segment_length=512)(rng.standard_normal(50_000), fs=FS)
    st = MeasureState()
    r = st.read(spec)
    assert not r.band_rms.ok and "drag" in r.band_rms.message  # no band yet: says how to set one
    assert r.floor.ok and r.tones.ok
    st.set_band(300.0, 100.0)  # either order
    assert st.band == (100.0, 300.0)
    r = st.read(spec)
    # white noise of unit variance: band power 2 (f2 - f1) / fs = 0.4 (Parseval, one-sided density)
    assert r.band_power.result.lower < 0.4 < r.band_power.result.upper
    assert r.band_rms.result.value == pytest.approx(math.sqrt(r.band_power.result.value))
    st.set_band(100.0, 100.5)  # narrower than one bin (1.95 Hz): the reading says so, the others stay
    r = st.read(spec)
    assert not r.band_power.ok and "narrower than one bin" in r.band_power.message and r.floor.ok
    with pytest.raises(sb.SpecbenchError, match="finite"):
        st.set_band(float("nan"), 3.0)
    with pytest.raises(sb.SpecbenchError, match="0..20"):
        st.set_harmonics(10.0, 21)


def test_band_cursor_table_and_readout(bench):
    host = bench.views["psd"]
    host.table.set_band(100.0, 150.0)  # what the band tool's drag and the typed edges both call
    r = host.measure.last
    m = r.band_rms.result
    assert m.band == (100.0, 150.0) and m.lower < m.value < m.upper
    assert host.layer.edges.visible and list(np.asarray(host.layer.shade.x)) == [100.0, 150.0]
    text = " ".join(getattr(c, "value", "") for c in host.table.table.children)
    assert "Band RMS" in text and f"{m.value:.4g}" in text and "95%" in text
    assert "band 100–150 Hz" in host.table.readout.value
    # the tones: the 50.3 Hz sine of amplitude 0.5 is the strongest, RMS 0.5 / sqrt(2)
    tones = r.tones.result
    assert abs(tones[0].freq - 50.3) < 0.01 and tones[0].amplitude == pytest.approx(0.5 / math.sqrt(2), rel=0.02)
    assert host.layer.peak.visible and float(host.layer.peak.x[0]) == tones[0].freq
    assert len(host.table.tone_buttons) == len(tones)


def test_brush_end_sets_the_band(bench):
    host = bench.views["psd"]
    view = host.view
    view.tool.value = "band"
    sel = view.figure.interaction
    assert type(sel).__name__ == "BrushIntervalSelector"
    sel.brushing = True
    sel.selected = np.array([210.0, 160.0])
    assert host.measure.band is None  # still dragging
    sel.brushing = False
    assert host.measure.band == (160.0, 210.0) and host.measure.last.band_rms.ok


def test_tone_click_centres_and_harmonics_follow(bench):
    host = bench.views["psd"]
    host.table.harmonic_count.value = 3
    first = host.measure.last.tones.result
    second = first[1]
    host.table.tone_buttons[1].click()
    view = host.view
    assert view.zoomed and view.xs.min < second.freq < view.xs.max
    assert (view.xs.max - view.xs.min) < 100 * bench.spectrum.resolution
    # y fits what is visible: the top of the range is near the tone, not the stronger 50 Hz tone
    assert host.measure.fundamental == second.freq
    labels = [h.label for h in host.measure.last.harmonics]
    assert labels[1].startswith("2×") and f"{2 * second.freq:.6g}" in labels[1]
    assert host.layer.harmonics.visible  # only the cursors inside the zoomed range are drawn
    assert list(host.layer.harmonic_labels.text) == ["1×"]
    assert np.asarray(host.layer.harmonics.x).ravel()[0] == pytest.approx(second.freq)
    ymax_fit = view.ys.max
    host.table.fit_y.value = False  # keep the whole estimate's y range while zoomed
    assert view.ys.max > ymax_fit
    view.reset_zoom()
    assert np.asarray(host.layer.harmonics.x).shape == (3, 2) and list(host.layer.harmonic_labels.text) == [
        "1×", "2×", "3×"]


def test_frozen_cell_reproduces_the_table(bench, record):
    host = bench.views["psd"]
    host.table.set_band(120.0, 180.0)
    host.table.harmonic_count.value = 2
    code = bench.code()
    assert "band_rms = spectrum.band_rms(120.0, 180.0)" in code and "harmonics = [" in code
    ns = {"x": record}
    exec(code, ns)
    r = host.measure.last
    for var, reading in (("band_rms", r.band_rms), ("band_power", r.band_power), ("noise_floor", r.floor)):
        got = ns[var]
        assert (got.value, got.lower, got.upper) == (reading.result.value, reading.result.lower,
                                                     reading.result.upper)
    assert [t.freq for t in ns["tones"]] == [t.freq for t in r.tones.result]
    assert [h.value for h in ns["harmonics"]] == [h.result.value for h in r.harmonics]
    plain = bench.code(style="scipy")  # no plain form of the readings: the cell says so and still runs
    assert "band_rms" not in plain and "no plain numpy/scipy form" in plain
    exec(plain, {"x": record})


def test_failing_reading_never_breaks_the_view(bench):
    host = bench.views["psd"]
    host.table.band_lo.value, host.table.band_hi.value = 100.0, 9000.0  # beyond fs/2
    host.table.band_set.click()
    r = host.measure.last
    assert not r.band_rms.ok and "outside the spectrum" in r.band_rms.message
    assert r.tones.ok and bench.spectrum is not None


def test_advise_panel_applies_a_candidate(bench):
    adv = bench.views["psd"].advise
    adv.resolution.value = 1.0
    adv.band_db.value = 3.0
    adv.sidelobe_db.value = -40.0
    a = adv.propose()
    assert a is not None and len(a) and adv.progress_calls >= 2  # the progress bar moved
    assert all(c.figures["resolution_hz"] <= 1.0 and c.figures["band_db"] <= 3.0 for c in a)
    assert adv.chart_box.children  # the trade-off chart
    before = bench.estimator
    adv.list.children[1].children[0].click()  # apply #2
    bench.flush()
    assert bench.estimator == a[1].estimator != before
    assert bench.spectrum.estimator == a[1].estimator
    assert bench.views["psd"].measure.last.tones.ok  # readings follow the new estimate


def test_advise_impossible_target_message(bench):
    adv = bench.views["psd"].advise
    adv.resolution.value = 1e-4  # finer than 100 s of record allows (0.01 Hz)
    assert adv.propose() is None
    assert "finer than this record allows" in adv.note.value and adv.list.children == ()
