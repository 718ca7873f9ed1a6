"""The Workbench driven through its controls, headless (no browser, no kernel).

With no event loop running, every control change computes before it returns, so each
assertion sees the finished update.  Each check compares the estimate on screen with a
fresh call of the estimator on the selected samples: bit for bit.
"""

import asyncio
import logging

import bqplot as bq
import numpy as np
import pytest
import scipy.signal
from widget_support import FS, assert_same_correlation, assert_same_spectrum

import specbench as sb
from specbench.widgets._controls import (
    BoolControl,
    ChoiceControl,
    NumberControl,
    OptionalControl,
    PowerOfTwoControl,
    WindowControl,
)
from specbench.widgets._reduce import MAX_POINTS
from specbench.widgets._views import fmt, spectrum_trace

DATA_KEYS = ("channel", "fs", "span")
VIEW_KEYS = ("plot_as", "freq_axis")


def fresh(bench):
    return bench.estimator(bench.selected)


def check_consistent(bench):
    """Screen, estimator and a fresh estimate agree; the marks show the estimate on screen."""
    assert "Not applied" not in bench.status, bench.status
    assert_same_spectrum(bench.spectrum, fresh(bench))
    assert_same_correlation(bench.correlation, bench.correlation_estimator(bench.selected))
    view = bench._psd
    tr = spectrum_trace(bench.spectrum.channel(0), view.kind, view.xlog)
    np.testing.assert_array_equal(view.line.y, tr.y)
    np.testing.assert_array_equal(view.line.x, tr.x)
    np.testing.assert_array_equal(view.band.y, np.vstack([tr.upper, tr.lower]))
    c = bench.correlation.channel(0)
    np.testing.assert_array_equal(bench._acf.line.y, c.value)


def another_value(bench, key):
    """A valid value different from the control's current one."""
    c = bench.controls[key]
    v = c.value
    if isinstance(c, OptionalControl):
        if v is None:
            return c.inner.value  # unticking "auto" starts from what auto resolved to
        return None
    if isinstance(c, WindowControl):
        return "blackman" if v == "hamming" else "hamming"
    if isinstance(c, ChoiceControl):
        options = c._values()
        return options[(options.index(v) + 1) % len(options)]
    if isinstance(c, BoolControl):
        return not v
    if isinstance(c, PowerOfTwoControl):
        return v // 2
    if isinstance(c, NumberControl):
        if c.slider is not None and c.scale != "log":
            return round((c.slider.min + c.slider.max) / 2, 2)
        return v - 1 if v - 1 >= (c.interval.low or 0) else v * 2
    raise AssertionError(f"no rule for {type(c).__name__}")


def field_value(bench, key):
    if key.startswith("acf_"):
        return getattr(bench.correlation_estimator, key[4:])
    return getattr(bench.estimator, key)


@pytest.mark.parametrize("cls", [sb.Welch, sb.Periodogram, sb.Multitaper, sb.Correlogram])
def test_every_control_of_every_method(sig, cls):
    bench = sb.Workbench(sig, cls())
    check_consistent(bench)
    keys = [k for k in bench.controls if k not in ("method", *DATA_KEYS, *VIEW_KEYS)
            and not k.startswith(("cross_", "noise_"))]  # tests/widgets/test_cross_view.py, test_noise_view.py
    assert set(cls.params()) <= set(keys)  # every field has a control
    assert {f"acf_{k}" for k in sb.Autocorrelation.params() if k != "detrend"} <= set(keys)
    for key in keys:
        before = (bench.spectrum, bench.correlation)
        new = another_value(bench, key)
        bench.controls[key].value = new
        assert field_value(bench, key) == new, (key, new, bench.status)
        check_consistent(bench)
        assert (bench.spectrum, bench.correlation) != before
    assert type(bench.estimator) is cls


def test_the_data_strip_detrend_applies_to_both_views(bench):
    bench.controls["detrend"].value = "linear"
    assert bench.estimator.detrend == "linear"
    assert bench.correlation_estimator.detrend == "linear"
    check_consistent(bench)


class TestWindowControl:
    def test_parameter_shown_and_driven(self, bench):
        w = bench.controls["window"]
        w.dropdown.value = "kaiser"
        assert bench.estimator.window == ("kaiser", 8.6)
        w.param_entries[0].value = 4.0
        assert bench.estimator.window == ("kaiser", 4.0)
        check_consistent(bench)
        w.dropdown.value = "hann"
        assert bench.estimator.window == "hann" and w.param_entries == []

    def test_bad_parameter_is_reported_on_the_window_control(self, bench):
        good = bench.spectrum
        w = bench.controls["window"]
        w.dropdown.value = "kaiser"
        w.param_entries[0].value = -1.0
        assert "window" in bench.status and "beta" in bench.status
        assert w.invalid and bench.spectrum.estimator.window == ("kaiser", 8.6)
        assert good is not bench.spectrum  # the kaiser estimate (8.6) was good and is kept


class TestMethodSwitch:
    def test_explicit_choices_carry_over(self, bench):
        c = bench.controls
        c["window"].value = "blackman"
        c["nfft"].value = 2048
        c["confidence"].value = 0.9
        c["method"].value = "Periodogram"
        est = bench.estimator
        assert isinstance(est, sb.Periodogram)
        assert est.window == "blackman" and est.confidence == 0.9
        assert est.nfft is None  # 2048 is shorter than the record: refused by the periodogram, left out
        check_consistent(bench)
        assert "gaps" not in bench.controls and "segment_length" not in bench.controls

    def test_defaults_do_not_leak_and_return_restores(self, bench):
        c = bench.controls
        c["segment_length"].value = 4096
        c["method"].value = "Periodogram"
        assert bench.estimator.window == "boxcar"  # Welch's default Hann was not chosen
        c["method"].value = "Multitaper"
        assert bench.estimator == sb.Multitaper()  # Welch's segment_length went through Periodogram
        c["method"].value = "Welch"
        assert bench.estimator == sb.Welch(segment_length=4096)
        check_consistent(bench)

    def test_a_concrete_value_replaces_an_automatic_default(self, bench):
        bench.controls["method"].value = "Multitaper"
        # Welch's (default) 1024 rather than tapers over the whole record
        assert bench.estimator == sb.Multitaper(segment_length=1024)
        bench.controls["segment_length"].value = None
        bench.controls["method"].value = "Welch"
        assert bench.estimator == sb.Welch()  # None is no concrete value for Welch

    def test_segment_length_carries_into_multitaper(self, bench):
        bench.controls["segment_length"].value = 2048
        bench.controls["method"].value = "Multitaper"
        assert bench.estimator == sb.Multitaper(segment_length=2048)
        assert bench.spectrum.segments == bench.selected.n_samples // 2048


class TestOptionalFields:
    def test_auto_box_and_entry(self, bench):
        nfft = bench.controls["nfft"]
        assert nfft.value is None and nfft.inner.value == 1024  # what auto resolved to
        nfft.auto.value = False
        assert bench.estimator.nfft == 1024
        nfft.inner.entry.value = 3000  # any length, not only powers of two
        assert bench.estimator.nfft == 3000
        assert bench.spectrum.freq.size == 1501
        nfft.auto.value = True
        assert bench.estimator.nfft is None
        check_consistent(bench)

    def test_acf_max_lag_in_seconds(self, bench):
        lag = bench.controls["acf_max_lag"]
        lag.value = 0.25
        assert bench.correlation_estimator.max_lag == 0.25
        assert bench.correlation.lag[-1] == pytest.approx(0.25)
        assert bench.correlation.lag.size == 251
        check_consistent(bench)


class TestBadSettings:
    def test_invalid_field_keeps_the_last_good_estimate(self, bench):
        good = bench.spectrum
        est = bench.estimator
        c = bench.controls["overlap"]
        c.value = 1.5
        assert bench.status.startswith("Not applied: The 'overlap' parameter of Welch must be a float")
        assert "The last good estimate stays on screen" in bench.status
        assert c.invalid and "sb-invalid" in c._dom_classes
        assert bench.spectrum is good and bench.estimator is est
        # another change still cannot apply while overlap is wrong
        bench.controls["window"].value = "hamming"
        assert bench.spectrum is good and "overlap" in bench.status and c.invalid
        c.value = 0.75
        assert not c.invalid and "Not applied" not in bench.status
        assert bench.estimator == sb.Welch(window="hamming", overlap=0.75)
        check_consistent(bench)

    def test_segment_longer_than_the_span(self, bench):
        good = bench.spectrum
        c = bench.controls["segment_length"]
        c.value = 65536
        assert "segment_length of Welch is 65536 samples" in bench.status
        assert "Choose segment_length <= 40000" in bench.status
        assert c.invalid and bench.spectrum is good and bench.estimator == sb.Welch()
        c.value = 8192
        assert not c.invalid and bench.estimator.segment_length == 8192
        c.value = 65536
        c.value = 8192  # back to the settings on screen: the failure no longer applies
        assert not c.invalid and "Not applied" not in bench.status

    def test_span_too_short_for_the_segment_is_refused_whole(self, bench):
        bench.controls["segment_length"].value = 8192
        before = (bench.spectrum, bench.correlation, bench.span)
        bench.controls["span"].value = (1.0, 5.0)  # 4000 samples < 8192
        assert bench.status.startswith("Not applied: The new data selection was not applied")
        assert (bench.spectrum, bench.correlation, bench.span) == before
        assert bench.controls["span"].invalid and bench.controls["segment_length"].invalid
        bench.controls["segment_length"].value = 2048  # the fix: both apply now
        assert bench.span == (1.0, 5.0) and bench.estimator.segment_length == 2048
        assert not bench.controls["span"].invalid
        check_consistent(bench)

    def test_span_outside_the_record(self, bench):
        good = bench.spectrum
        bench.controls["span"].value = (10.0, 99.0)
        assert "reaches outside the record" in bench.status
        assert bench.controls["span"].invalid and bench.spectrum is good

    def test_bad_sample_rate(self, bench):
        good = bench.spectrum
        bench.controls["fs"].value = -5.0
        assert "sample rate" in bench.status and bench.controls["fs"].invalid
        assert bench.spectrum is good
        bench.controls["fs"].value = None
        assert not bench.controls["fs"].invalid and "Not applied" not in bench.status

    def test_unexpected_error_is_one_line_and_logged(self, bench, monkeypatch, caplog):
        def boom(self, x, fs=None):
            raise RuntimeError("boom")

        good = bench.spectrum
        monkeypatch.setattr(sb.Welch, "__call__", boom)
        with caplog.at_level(logging.ERROR, logger="specbench.widgets"):
            bench.controls["overlap"].value = 0.25  # must not raise
        assert "Internal error: RuntimeError: boom; please report." in bench.status
        assert bench.spectrum is good
        assert any("boom" in r.getMessage() or (r.exc_info and "boom" in str(r.exc_info[1]))
                   for r in caplog.records)

    def test_a_warning_becomes_a_note_not_output(self, bench):
        bench.controls["method"].value = "Correlogram"
        bench.controls["lag_window"].value = "hann"  # gives negative densities here
        assert bench.estimator.lag_window == "hann"
        assert bench.status.startswith("Note: The 'hann' lag window gave a negative density")
        with pytest.warns(sb.SpecbenchWarning, match="negative density"):
            check_consistent(bench)  # the same estimate outside the widget warns as usual


class TestFromCode:
    def test_setting_the_estimator_updates_everything(self, bench):
        est = sb.Welch(window=("tukey", 0.3), segment_length=2000, overlap=0.6, nfft=4096)
        bench.estimator = est
        assert bench.estimator is est
        c = bench.controls
        assert c["window"].value == ("tukey", 0.3) and c["segment_length"].value == 2000
        assert c["overlap"].value == 0.6 and c["nfft"].value == 4096
        check_consistent(bench)

    def test_setting_another_method(self, bench):
        bench.estimator = sb.Multitaper(bandwidth=3.0, segment_length=4096)
        assert bench.controls["method"].value == "Multitaper"
        assert bench.controls["bandwidth"].value == 3.0
        check_consistent(bench)

    def test_a_failing_estimator_from_code_raises_and_changes_nothing(self, bench):
        good, est = bench.spectrum, bench.estimator
        with pytest.raises(sb.InputError, match="segment_length of Welch is 1048576"):
            bench.estimator = sb.Welch(segment_length=1 << 20)
        assert bench.spectrum is good and bench.estimator is est
        assert bench.controls["segment_length"].value == est.segment_length
        assert "segment_length" in bench.status

    def test_not_a_psd_estimator(self, bench):
        with pytest.raises(sb.SettingsError, match="PSD estimator"):
            bench.estimator = sb.Autocorrelation()

    def test_correlation_estimator(self, bench):
        bench.correlation_estimator = sb.Autocorrelation(max_lag=0.1, band="bartlett", detrend="linear")
        assert bench.controls["acf_band"].value == "bartlett"
        assert bench.estimator.detrend == "linear"  # shared with the PSD
        check_consistent(bench)

    def test_inside_a_running_loop_the_setter_is_still_synchronous(self, bench):
        async def main():
            bench.estimator = sb.Welch(segment_length=512)
            assert bench.spectrum.estimator == sb.Welch(segment_length=512)

        asyncio.run(main())


class TestCoalescing:
    def test_changes_faster_than_the_compute_are_coalesced(self, bench, monkeypatch):
        runs = []
        from specbench.widgets._controller import Controller

        run = Controller.run
        monkeypatch.setattr(Controller, "run", lambda self, *a: (runs.append(1), run(self, *a)))

        async def main():
            for v in (0.1, 0.2, 0.3, 0.4):
                bench.controls["overlap"].value = v
            assert bench.estimator.overlap == 0.5  # not computed yet: the loop is busy with us
            await asyncio.sleep(0.2)

        asyncio.run(main())
        assert len(runs) == 1  # one compute for four changes: the latest settings won
        assert bench.estimator.overlap == 0.4
        check_consistent(bench)

    def test_a_lone_change_waits_for_nothing_and_a_quick_follower_is_deferred(self, bench, monkeypatch):
        """Leading edge: after an idle spell the update starts once the event handler returns
        (no coalescing delay on a lone change); a change arriving sooner than
        COALESCE_SECONDS after the last update waits the rest of that time."""
        from specbench.widgets import _scheduler

        sched = bench._scheduler
        seen = {}

        async def main():
            bench.controls["overlap"].value = 0.6
            seen["first"] = type(sched._handle)
            await asyncio.sleep(0)  # one turn of the loop: the update runs
            seen["first done"] = bench.estimator.overlap
            monkeypatch.setattr(_scheduler, "COALESCE_SECONDS", 30.0)  # "soon after" on any machine
            bench.controls["overlap"].value = 0.7
            seen["second"] = type(sched._handle)
            await asyncio.sleep(0.05)
            seen["second pending"] = (bench.estimator.overlap, sched.pending())
            bench.flush()

        asyncio.run(main())
        assert seen["first"] is asyncio.Handle and seen["first done"] == 0.6
        assert seen["second"] is asyncio.TimerHandle and seen["second pending"] == (0.6, True)
        assert bench.estimator.overlap == 0.7
        check_consistent(bench)

    def test_flush_computes_now(self, bench):
        async def main():
            bench.controls["segment_length"].value = 2048
            bench.flush()
            assert bench.estimator.segment_length == 2048

        asyncio.run(main())


class TestDataSelection:
    def test_channel_and_span_change_the_samples(self, bench, sig):
        bench.controls["channel"].value = "right"
        bench.controls["span"].value = (2.0, 22.0)
        assert bench.channel == "right" and bench.span == (2.0, 22.0)
        sel = bench.selected
        assert sel.n_samples == 20_000 and sel.channels == ("right",)
        np.testing.assert_array_equal(sel.data[0], sig.data[1, 2000:22000])
        assert_same_spectrum(bench.spectrum, bench.estimator(sig.channel("right").span(2.0, 22.0)))
        assert bench.correlation.n == 20_000
        check_consistent(bench)

    def test_brushing_sets_the_span(self, bench):
        strip = bench._strip
        strip.brush.brushing = True
        strip.brush.selected = np.array([3.14159, 12.71828])
        assert bench.span is None  # nothing happens while the brush moves
        strip.brush.brushing = False
        assert bench.span == (3.14, 12.72)  # a brush is as precise as a pixel
        assert bench.controls["span"].value == (3.14, 12.72)
        assert bench.selected.n_samples == 9580

    def test_whole_record(self, bench):
        bench.controls["span"].value = (1.0, 9.0)
        bench.controls["span"].whole.click()
        assert bench.span is None and bench.selected.n_samples == 40_000

    def test_sample_rate_override(self, bench):
        bench.controls["span"].value = (10.0, 30.0)
        bench.controls["fs"].value = 2 * FS
        assert bench.fs_override == 2 * FS
        assert bench.spectrum.freq[-1] == FS  # Nyquist of the new rate
        assert bench.span == (5.0, 15.0)  # the span follows the samples
        assert bench.selected.n_samples == 20_000
        assert bench.correlation.lag[1] == 1 / (2 * FS)
        check_consistent(bench)
        bench.controls["fs"].back.click()
        assert bench.fs_override is None and bench.span == (10.0, 30.0)

    def test_scipy_reference_on_the_selected_span(self, bench, sig):
        """Against scipy.signal.welch (Virtanen et al., SciPy 1.0, Nature Methods 17, 2020)."""
        bench.controls["span"].value = (5.0, 25.0)
        bench.controls["window"].value = "hamming"
        bench.controls["segment_length"].value = 2048
        x = sig.data[0, 5000:25000]
        f, p = scipy.signal.welch(x, fs=FS, window="hamming", nperseg=2048, noverlap=1024)
        np.testing.assert_allclose(bench.spectrum.freq, f, rtol=0, atol=0)
        np.testing.assert_allclose(bench.spectrum.value[0], p, rtol=1e-12, atol=0)


class TestViews:
    def test_plot_as_and_frequency_axis(self, bench):
        view = bench._psd
        spec = bench.spectrum.channel(0)
        bench.controls["plot_as"].value = "db"
        np.testing.assert_allclose(view.line.y, 10 * np.log10(spec.value[1:]))
        assert isinstance(view.ys, bq.LinearScale) and "dB re 1 V^2/Hz" in view.ax_y.label
        bench.controls["plot_as"].value = "asd"
        np.testing.assert_allclose(view.line.y, np.sqrt(spec.value[1:]))
        assert isinstance(view.ys, bq.LogScale) and view.ax_y.label == "ASD (V/√Hz)"
        bench.controls["freq_axis"].value = "linear"
        assert isinstance(view.xs, bq.LinearScale)
        assert all(m.scales["x"] is view.xs for m in view.figure.marks)
        assert view.figure.interaction.scale is view.xs
        bench.controls["plot_as"].value = "density"
        assert view.ax_y.label == "PSD (V^2/Hz)" and view.ax_x.label == "Frequency (Hz)"

    def test_units_come_from_the_signal(self):
        s = sb.Signal(np.random.default_rng(0).standard_normal(5000), fs=100.0, unit="m/s^2")
        bench = sb.Workbench(s, correlation_estimator=sb.Autocorrelation(normalize=False))
        assert bench._psd.ax_y.label == "PSD ((m/s^2)^2/Hz)"
        assert bench._acf.ax_y.label == "Autocovariance ((m/s^2)^2)"
        assert bench._acf.ax_x.label == "Lag (s)"
        assert bench._strip.ax_y.label == "m/s^2"

    def test_readout_reads_the_full_resolution_result(self, bench):
        bench.controls["segment_length"].value = 4096
        spec = bench.spectrum.channel(0)
        text = bench.read("psd", 50.1)
        i = int(np.argmin(np.abs(spec.freq - 50.1)))
        assert f"{spec.freq[i]:.4g} Hz" in text
        assert f"{fmt(spec.value[i])} V^2/Hz" in text and f"{fmt(spec.upper[i])}]" in text
        acf = bench.read("acf", 0.0101)
        assert "lag 0.01 s" in acf and "(10 samples)" in acf
        bench.controls["window"].value = "hamming"  # the readout follows a new estimate
        assert bench._psd.readout.value != text
        bench.controls["plot_as"].value = "db"  # and the display unit
        assert "dB re 1 V^2/Hz" in bench._psd.readout.value

    def test_zoom_reduces_the_visible_range_again(self, big_sig):
        bench = sb.Workbench(big_sig, sb.Periodogram())
        view = bench._psd
        whole = view.line.x.copy()
        assert whole.size <= MAX_POINTS
        view.tool.value = "zoom"
        assert isinstance(view.figure.interaction, bq.interacts.PanZoom)
        view.xs.min, view.xs.max = 100.0, 101.0  # as the front end's pan-zoom does
        assert view.zoomed
        zoomed = view.line.x
        assert zoomed.size <= MAX_POINTS
        inside = (zoomed >= 100.0) & (zoomed <= 101.0)
        assert inside.sum() == 1001  # every bin (df = 1 mHz) of the visible range, none reduced
        view.reset.click()
        assert not view.zoomed and view.line.x.size == whole.size


class TestDisplayBudget:
    def test_no_mark_gets_more_than_5000_points_at_1e7_samples(self, big_sig):
        bench = sb.Workbench(big_sig, correlation_estimator=sb.Autocorrelation(max_lag=1.5))
        assert bench.correlation.lag.size == 15_001
        points = bench.mark_points()
        assert max(points.values()) <= MAX_POINTS, points
        assert bench._strip.trace.y.max() == 80.0  # the spike survives the overview
        bench.estimator = sb.Periodogram()
        assert bench.spectrum.freq.size == 5_000_001  # the full result stays in Python
        bench.pin()
        bench.controls["freq_axis"].value = "linear"
        points = bench.mark_points()
        assert set(points) >= {"psd/band", "psd/current", "psd/pin1", "acf/band", "acf/current",
                               "acf/pin1", "overview/trace"}
        assert max(points.values()) <= MAX_POINTS, points
        for fig in bench.figures.values():
            for m in fig.marks:
                assert np.asarray(m.y).size <= MAX_POINTS and np.asarray(m.x).size <= MAX_POINTS


class TestPins:
    def test_pin_overlay_labels_and_removal(self, bench):
        c = bench.controls
        first = bench.pin()
        assert first.label == "Welch"  # alone, it is named by its method and changed fields
        c["segment_length"].value = 4096
        c["window"].value = "hamming"
        second = bench.pin()
        assert [p.label for p in bench.pins] == ["window=hann, segment_length=1024",
                                                 "window=hamming, segment_length=4096"]
        assert first.color != second.color and first.line_style != second.line_style
        for view in (bench._psd, bench._acf):
            pin_marks = [m for m in view.figure.marks if m in view.pin_lines]
            assert len(pin_marks) == 2
            assert pin_marks[1].colors == [second.color] and pin_marks[1].line_style == second.line_style
        np.testing.assert_array_equal(bench._psd.pin_lines[0].y,
                                      spectrum_trace(first.spectrum.channel(0), "density", True).y)
        assert len(bench._pins.board.table.children) == 2
        bench.remove_pin(0)
        assert [p.label for p in bench.pins] == ["Welch window='hamming', segment_length=4096".replace(
            "window='hamming'", "window=hamming")]
        assert sum(m in bench._psd.pin_lines for m in bench._psd.figure.marks) == 1
        bench._pins.board.table.children[0].children[1].click()  # its remove button
        assert bench.pins == ()
        assert not any(m in bench._psd.pin_lines for m in bench._psd.figure.marks)

    def test_labels_name_data_differences_and_user_labels_stay(self, bench):
        bench.pin(label="reference")
        bench.controls["channel"].value = "right"
        bench.pin()
        labels = [p.label for p in bench.pins]
        assert labels == ["reference", "channel=right"]

    def test_eight_pins_at_most(self, bench):
        for i in range(8):
            bench.controls["overlap"].value = round(0.1 * i, 1)
            bench.pin()
        assert len({(p.color, p.line_style) for p in bench.pins}) == 8
        with pytest.raises(sb.SpecbenchError, match="8 pins"):
            bench.pin()
        assert "8 pins are on screen" in bench.status
        bench._pins.board.pin_button.click()  # the button says so too, without raising
        assert len(bench.pins) == 8 and "8 pins" in bench.status
        bench._pins.board.clear_button.click()
        assert bench.pins == () and "8 pins" not in bench.status

    def test_removed_styles_are_reused(self, bench):
        a = bench.pin()
        bench.controls["overlap"].value = 0.25
        bench.pin()
        bench.remove_pin(a)
        bench.controls["overlap"].value = 0.75
        c = bench.pin()
        assert (c.color, c.line_style) == (a.color, a.line_style)


class TestMerits:
    def test_figures_follow_the_estimate(self, bench):
        m = bench.merits
        spec = bench.spectrum
        assert m["resolution"].value == spec.resolution == pytest.approx(1.5 * FS / 1024)
        assert m["enbw"].value == pytest.approx(1.5)
        assert m["segments"].value == spec.segments == 77
        assert m["dof"].value == pytest.approx(float(np.median(spec.dof[1:-1])))
        assert m["band_db"].value == pytest.approx(spec.band_db())
        assert m["sidelobe"].value == pytest.approx(-31.47, abs=0.01)  # Hann: Harris (1978) Table I: -32 dB
        assert m["parseval"].value == pytest.approx(float(spec.parseval_ratio()[0]))
        assert m["samples"].value == spec.samples_used == 39_936
        assert m["seconds"].value == pytest.approx(39.936)
        bench.controls["segment_length"].value = 4096
        assert bench.merits["segments"].value == 18
        assert bench.merits["resolution"].value == pytest.approx(1.5 * FS / 4096)

    def test_multitaper_figures(self, bench):
        bench.estimator = sb.Multitaper(segment_length=4096)
        m = bench.merits
        assert m["sidelobe"].text == "—"
        assert "× 7 tapers" in m["segments"].text
        assert m["enbw"].value == pytest.approx(bench.spectrum.resolution * 4096 / FS)


class TestFreeze:
    def test_freeze_state(self, bench, sig):
        bench.controls["channel"].value = "right"
        bench.controls["span"].value = (1.0, 21.0)
        st = bench.freeze_state()
        assert st.signal is sig and st.data_name == "x" and st.channel == "right"
        assert st.span == (1.0, 21.0) and st.fs_override is None
        assert st.estimator is bench.estimator and st.correlation_estimator is bench.correlation_estimator
        assert st.spectrum is bench.spectrum
        np.testing.assert_array_equal(st.analysed_signal().data, bench.selected.data)

    def test_code_reproduces_the_estimate(self, sig):
        bench = sb.Workbench(sig, sb.Welch(segment_length=2048), data_name="rec")
        code = bench.code()
        ns = {"rec": sig}
        exec(code, ns)  # noqa: S102 - the frozen cell, run as a user would
        spectra = [v for v in ns.values() if isinstance(v, sb.Spectrum)]
        assert spectra, code
        assert_same_spectrum(spectra[0], bench.spectrum)
        assert "scipy.signal" in bench.code(style="scipy")

    def test_one_channel_signal_has_no_channel(self):
        s = sb.Signal(np.random.default_rng(0).standard_normal(4000), fs=100.0)
        assert sb.Workbench(s).freeze_state().channel is None


def test_the_workbench_is_an_ipywidgets_container(bench):
    import ipywidgets as W

    assert isinstance(bench, W.VBox)
    assert "sb-workbench" in bench._dom_classes
    classes = set()

    def walk(w):
        classes.update(getattr(w, "_dom_classes", ()))
        for child in getattr(w, "children", ()):
            walk(child)

    walk(bench)
    for css in ("sb-datastrip", "sb-controls", "sb-status", "sb-merit", "sb-pins", "sb-pin-button",
                "sb-control-segment-length", "sb-control-acf-max-lag", "sb-readout"):
        assert css in classes, css
    assert "sb-psd" in bench.figures["psd"]._dom_classes and "sb-acf" in bench.figures["acf"]._dom_classes


def test_demo_opens(bench):
    demo = sb.Workbench(sb.demo("test-stand"))
    assert demo.spectrum is not None and "Not applied" not in demo.status
    assert demo.controls["channel"].dropdown.options == ("drive_end", "free_end")


def test_a_record_too_short_for_the_first_estimate_still_opens():
    s = sb.Signal(np.random.default_rng(0).standard_normal(500), fs=100.0)
    bench = sb.Workbench(s)  # the default segment (1024 samples) is longer than the record
    assert bench.spectrum is None and bench.estimator == sb.Welch()
    assert "segment_length of Welch is 1024 samples, but the data has only 500" in bench.status
    assert bench.controls["segment_length"].invalid
    assert bench.correlation is not None  # the autocorrelation needs no segment
    with pytest.raises(sb.SpecbenchError, match="no estimate on screen"):
        bench.pin()
    bench.controls["segment_length"].value = 128
    assert bench.spectrum.estimator == sb.Welch(segment_length=128)
    check_consistent(bench)


def test_constructor_arguments(sig):
    bench = sb.Workbench(sig, channel="right", span=(2, 12), fs=500.0)
    assert (bench.channel, bench.span, bench.fs_override) == ("right", (2.0, 12.0), 500.0)
    assert bench.selected.n_samples == 5000 and bench.controls["span"].value == (2.0, 12.0)
    with pytest.raises(sb.InputError, match="reaches outside the record"):
        sb.Workbench(sig, span=(0.0, 999.0))
    with pytest.raises(sb.InputError, match="No channel named 'middle'"):
        sb.Workbench(sig, channel="middle")
    with pytest.raises(sb.SettingsError, match="identifier"):
        sb.Workbench(sig, data_name="my data")
    with pytest.raises(sb.InputError, match="needs a Signal"):
        sb.Workbench(np.zeros(100))
