"""The Workbench's cross-channel analysis: results equal to sb.CrossSpectrum, the pair
menus, the delay readout, a failing setting keeps the last good view, and freezing."""

import numpy as np
import pytest

import specbench as sb
from specbench.widgets import Workbench


@pytest.fixture
def duct():
    return sb.demo("delay-pair", duration=30.0)


def test_cross_view_shows_the_pair_and_the_delay(duct):
    wb = Workbench(duct)
    assert "cross" in wb.analyses
    host = wb.views["cross"]
    full = wb.result("cross")
    ref = sb.CrossSpectrum()(duct, pair="all")
    assert np.array_equal(full.csd, ref.csd)
    shown = host._shown
    assert shown.channels == ("upstream", "downstream")
    assert np.array_equal(shown.coherence, ref.pair("upstream", "downstream").coherence)
    assert "interval" in host.delay.value and "4.9%" in host.delay.value
    assert 0 < host.band_hi.value < 250  # default band: where the pair is clearly coherent
    with pytest.warns(sb.SpecbenchWarning, match="4.9% of the segment length"):
        d = shown.delay(band=(host.band_lo.value, host.band_hi.value))
    assert abs(d.value - 0.025) < 0.1 / duct.fs and f"delay {d.value * 1e3:.4g} ms" in host.delay.value
    pts = wb.mark_points()
    assert all(pts[f"cross/{q}/current"] <= 2400 for q in ("coherence", "phase", "gain"))
    assert "cross_threshold" in [m.key for m in wb.analyses["cross"].merits(shown, {})]


def test_pair_menus_redraw_without_recomputing(duct):
    wb = Workbench(duct)
    host = wb.views["cross"]
    before = wb.result("cross")
    host.x_menu.value = "downstream"
    host.y_menu.value = "upstream"
    assert wb.result("cross") is before
    assert host._shown.channels == ("downstream", "upstream")
    assert "delay -24.9" in host.delay.value or "delay -25" in host.delay.value
    host.y_menu.value = "downstream"  # same channel twice: refused, last pair kept
    assert "two different channels" in host.delay.value and host._shown.channels == ("downstream", "upstream")


def test_a_channel_change_leaves_the_cross_result_and_a_span_change_recomputes_it(duct):
    # the cross analysis computes every pair (channels="all"): the channel chosen for the
    # PSD and autocorrelation is not among its inputs, so changing it costs nothing there
    wb = Workbench(duct)
    before, psd = wb.result("cross"), wb.result("psd")
    wb.controls["channel"].value = "downstream"
    assert wb.result("cross") is before
    assert wb.result("psd") is not psd and wb.result("psd").channels == ("downstream",)
    np.testing.assert_array_equal(wb.result("psd").value[0], sb.Welch()(duct.data[1], fs=duct.fs).value)
    wb.controls["span"].value = (1.0, 20.0)
    after = wb.result("cross")
    assert after is not before
    ref = sb.CrossSpectrum()(duct.data[:, int(duct.fs):int(20 * duct.fs)], fs=duct.fs, pair="all")
    assert after.csd.shape == ref.csd.shape
    wb.controls["channel"].value = "upstream"  # back: psd from its cache or computed, cross kept
    assert wb.result("cross") is after and wb.result("psd").channels == ("upstream",)


def test_settings_change_delay_band_and_bad_setting_keeps_the_last_view(duct):
    wb = Workbench(duct)
    host = wb.views["cross"]
    wb.set_estimator("cross", sb.CrossSpectrum(segment_length=4096))
    assert wb.result("cross").segments == sb.CrossSpectrum(segment_length=4096)(duct, pair="all").segments
    d = host._shown.delay(band=(host.band_lo.value, host.band_hi.value))
    assert "4.9%" not in host.delay.value and abs(d.value - 0.025) < 0.05 / duct.fs
    host.band_lo.value, host.band_hi.value = 10.0, 10.2
    assert "at least 2 are needed" in host.delay.value
    good = wb.result("cross")
    with pytest.raises(sb.SpecbenchError):
        wb.set_estimator("cross", sb.CrossSpectrum(segment_length=1 << 17))
    assert wb.result("cross") is good


def test_single_channel_record_says_what_the_view_needs():
    wb = Workbench(sb.demo("white-noise", duration=5.0))
    host = wb.views["cross"]
    assert "compares two channels" in host.delay.value
    assert "Internal error" not in wb.status and "cross" not in wb.code()


def test_frozen_cell_reproduces_the_cross_result_bit_for_bit(duct):
    wb = Workbench(duct)
    wb.set_estimator("cross", sb.CrossSpectrum(segment_length=2048, overlap=0.75))
    code = wb.code()
    assert "cross_estimator = sb.CrossSpectrum(segment_length=2048, overlap=0.75)" in code
    ns: dict = {}
    exec(compile(code, "<frozen>", "exec"), ns)
    shown = wb.views["cross"]._shown
    assert np.array_equal(ns["cross"].coherence, shown.coherence)
    assert np.array_equal(ns["cross"].gain_upper, shown.gain_upper)
    assert ns["cross_delay"].value == shown.delay(band=wb.analyses["cross"].band).value


def test_every_cross_control_drives_the_estimator(duct):
    # controls generated from CrossSpectrum's constraint table (prefix "cross_")
    wb = Workbench(duct)
    keys = [k for k in wb.controls if k.startswith("cross_") and k[6:] in sb.CrossSpectrum.params()]
    assert {f"cross_{k}" for k in sb.CrossSpectrum.params() if k not in ("detrend", "gaps")} <= set(keys)
    changes = {"cross_segment_length": 2048, "cross_overlap": 0.6, "cross_confidence": 0.9,
               "cross_scaling": "spectrum", "cross_window": "hamming"}
    for key, value in changes.items():
        before = wb.result("cross")
        wb.controls[key].value = value
        assert getattr(wb.estimator_of("cross"), key[6:]) == value, (key, wb.status)
        assert wb.result("cross") is not before
    assert wb.views["cross"]._shown.confidence == 0.9


def test_in_memory_data_freezes_under_its_own_name(duct):
    frame = duct.data.copy()
    wb = Workbench(sb.Signal(frame, fs=duct.fs, channels=list(duct.channels)), data_name="pressures",
                   estimators={"cross": sb.CrossSpectrum(segment_length=2048)})
    code = wb.code()
    assert "cross_signal = pressures if isinstance(pressures, sb.Signal)" in code
    ns = {"pressures": frame}
    exec(compile(code, "<frozen>", "exec"), ns)
    assert np.array_equal(ns["cross"].coherence, wb.views["cross"]._shown.coherence)


def test_plain_scipy_cell_reproduces_the_cross_numbers_on_screen():
    # bench.code(style="scipy"): scipy.signal.csd / welch / coherence plus explicit lines for the
    # threshold (Carter 1987) and the bands, on the pair and span on screen; compared with the
    # Workbench's own numbers (scipy.signal.csd is the outside reference, as in test_cross.py).
    rng = np.random.default_rng(11)
    raw = rng.standard_normal((3, 40_000))
    raw[2] = np.convolve(raw[0], [0.3, 0.5, 0.2], mode="same") + 0.6 * raw[2]
    sig = sb.Signal(raw, fs=1000.0, channels=["drive", "spare", "response"], unit="V")
    wb = Workbench(sig, data_name="volts", estimators={"cross": sb.CrossSpectrum(segment_length=512, overlap=0.6)})
    wb.controls["span"].value = (2.0, 37.0)
    wb.controls["fs"].value = 2000.0
    host = wb.views["cross"]
    host.x_menu.value, host.y_menu.value = "drive", "response"
    shown = host._shown
    assert shown.channels == ("drive", "response") and shown.fs == 2000.0
    code = wb.code(style="scipy")
    assert "scipy.signal.csd(cross_x, cross_y, **cross_kw)" in code
    assert "cross_threshold = 1.0 - (1.0 - cross_confidence)" in code
    ns = {"volts": raw}
    exec(compile(code, "<frozen>", "exec"), ns)
    np.testing.assert_array_equal(ns["cross_freq"], shown.freq)
    np.testing.assert_allclose(ns["cross_csd"], shown.csd, rtol=1e-10, atol=1e-18)
    for k in ("coherence", "coherence_lower", "coherence_upper", "phase", "phase_lower", "phase_upper",
              "gain", "gain_lower", "gain_upper"):
        np.testing.assert_allclose(ns[f"cross_{k}"][1:-1], getattr(shown, k)[1:-1], rtol=1e-8, atol=1e-12,
                                   err_msg=k)  # DC: 0/0 after detrending in both
    np.testing.assert_allclose(ns["cross_threshold"], shown.coherence_threshold, rtol=1e-12)
    # the PSD of the data strip's channel is still there, unchanged by the cross lines
    np.testing.assert_allclose(ns["psd"], wb.spectrum.value, rtol=1e-9)
    # the settings file carries the pair (options) for `specbench estimate`
    assert wb.freeze_state().options["cross"]["pair"] == ["drive", "response"]


def test_plain_scipy_cell_of_a_single_channel_record_has_no_cross_lines():
    wb = Workbench(sb.demo("white-noise", duration=5.0))
    assert "cross_" not in wb.code(style="scipy")


def test_gain_band_reaching_zero_is_drawn_to_the_axis_floor_on_the_log_scale():
    # incoherent bins have gain_lower = 0 (Goodman's circle reaches the origin): on the log axis
    # the band must reach the lowest value shown, not leave holes (NaN) in the band
    from specbench.widgets._cross_view import _trace

    f = np.linspace(0.0, 100.0, 201)
    value = np.full(f.size, 0.1)
    lower = np.where(f > 50, 0.0, 0.08)
    upper = np.full(f.size, 0.3)
    t = _trace(f, value, lower, upper, "", None, None, log=True)
    assert np.all(np.isfinite(t.lower)) and np.all(t.lower > 0)
    assert np.min(t.lower) == pytest.approx(0.08)  # the floor: the lowest positive value shown
