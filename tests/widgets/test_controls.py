"""Controls generated from the estimators' constraint tables (no browser)."""

import pytest

import specbench as sb
from specbench.estimators import estimator_classes
from specbench.estimators._params import Boolean, Interval, Optional, Options, ParamSpec
from specbench.estimators.windows import WINDOWS, Window
from specbench.models._allan import TauGrid
from specbench.widgets._controls import (
    BoolControl,
    ChoiceControl,
    Context,
    NumberControl,
    OptionalControl,
    PowerOfTwoControl,
    WindowControl,
    control_for,
)

CTX = Context(n=100_000, fs=1000.0)

EXPECTED = {Options: ChoiceControl, Boolean: BoolControl, Window: WindowControl, Optional: OptionalControl}
EXPECTED[TauGrid] = ChoiceControl  # AllanDeviation.taus: the named grids (explicit times from code)


def _all_fields():
    for kind, cls in estimator_classes().items():
        for name, spec in cls.params().items():
            yield pytest.param(cls, name, spec, id=f"{kind}.{name}")


@pytest.mark.parametrize("cls, name, spec", list(_all_fields()))
def test_every_field_of_every_estimator_gets_a_control(cls, name, spec):
    c = control_for(name, spec, CTX, value=spec.default)
    assert c.value == spec.default
    kind = type(spec.constraint)
    if kind is Interval:
        expected = PowerOfTwoControl if spec.scale == "log2" and spec.constraint.kind is int else NumberControl
    else:
        expected = EXPECTED[kind]
    assert isinstance(c, expected)
    assert f"sb-control-{name.replace('_', '-')}" in c._dom_classes


def test_a_new_field_needs_no_widget_code():
    spec = ParamSpec("smoothing", 3, Interval(int, 1, 64), "Smoothing", "Bins averaged.", scale="log2")
    c = control_for("smoothing", spec, CTX, value=3)
    assert isinstance(c, PowerOfTwoControl)
    assert [v for _, v in c.slider.options] == [1, 2, 4, 8, 16, 32, 64]
    c.slider.value = 16
    assert c.value == 16 and c.entry.value == 16


class TestPowerOfTwo:
    def make(self, n=100_000):
        return control_for("segment_length", sb.Welch.params()["segment_length"], Context(n, 1000.0), value=1024)

    def test_slider_over_powers_of_two_up_to_the_span(self):
        c = self.make()
        values = [v for _, v in c.slider.options]
        assert values[0] == 4 and values[-1] == 65536
        assert all(v & (v - 1) == 0 for v in values)
        c.set_context(Context(5000, 1000.0))
        assert [v for _, v in c.slider.options][-1] == 4096

    def test_entry_takes_any_length(self):
        c = self.make()
        c.entry.value = 3000
        assert c.value == 3000
        assert c.slider.value == 1024  # no power of two is 3000: the slider stays
        c.slider.value = 8192
        assert c.value == 8192 and c.entry.value == 8192

    def test_value_from_code_shows_in_both(self):
        c = self.make()
        c.value = 512
        assert c.entry.value == 512 and c.slider.value == 512


class TestNumber:
    def test_overlap_slider_holds_round_values_exactly(self):
        c = control_for("overlap", sb.Welch.params()["overlap"], CTX, value=0.5)
        s = c.slider
        assert (s.min, s.max, s.step) == (0.0, 0.99, 0.01)
        assert s.value == 0.5

    def test_a_slider_rounding_its_value_is_not_an_edit(self):
        c = control_for("overlap", sb.Welch.params()["overlap"], CTX, value=0.5)
        c.value = 0.6667  # from code, off the slider's grid
        seen = []
        c.observe(lambda ch: seen.append(ch["new"]), names="value")
        assert c.slider.value == 0.67  # the slider is put on its grid
        c.slider.value = 0.67 + 1e-12  # what a front end may send back after its own rounding
        assert c.value == 0.6667 and seen == []
        c.slider.value = 0.7  # a real move
        assert c.value == 0.7

    def test_entries_never_clamp(self):
        c = control_for("overlap", sb.Welch.params()["overlap"], CTX, value=0.5)
        c.entry.value = 1.5
        assert c.value == 1.5  # the estimator, not the control, says what is wrong

    def test_log_slider_in_seconds_spans_one_sample_to_the_record(self):
        c = control_for("max_lag", sb.Autocorrelation.params()["max_lag"], CTX, value=None)
        s = c.inner.slider
        assert s.min == pytest.approx(-3.0) and s.max == pytest.approx(2.0, abs=1e-4)


class TestOptional:
    def make(self):
        return control_for("nfft", sb.Welch.params()["nfft"], CTX, value=None)

    def test_auto_means_none_and_disables_the_editors(self):
        c = self.make()
        assert c.value is None and c.auto.value is True
        assert c.inner.entry.disabled and c.inner.slider.disabled

    def test_unticking_starts_from_the_suggestion(self):
        c = self.make()
        c.suggest(2048)
        c.auto.value = False
        assert c.value == 2048
        assert not c.inner.entry.disabled
        c.inner.slider.value = 8192
        assert c.value == 8192
        c.auto.value = True
        assert c.value is None

    def test_value_from_code(self):
        c = self.make()
        c.value = 4096
        assert c.auto.value is False and c.inner.entry.value == 4096
        c.value = None
        assert c.auto.value is True


class TestWindow:
    def make(self, value="hann"):
        return control_for("window", sb.Welch.params()["window"], CTX, value=value)

    def test_menu_lists_the_interactive_windows(self):
        c = self.make()
        names = [v for _, v in c.dropdown.options]
        assert names == [k for k, w in WINDOWS.items() if w.interactive]

    def test_parameter_entries_only_for_windows_that_take_them(self):
        c = self.make()
        assert c.param_entries == []
        c.dropdown.value = "kaiser"
        assert c.value == ("kaiser", 8.6)
        assert [e.description for e in c.param_entries] == ["beta"]
        c.param_entries[0].value = 5.0
        assert c.value == ("kaiser", 5.0)
        c.dropdown.value = "hamming"
        assert c.value == "hamming" and c.param_entries == []
        c.dropdown.value = "kaiser"  # its parameter is remembered
        assert c.value == ("kaiser", 5.0)
        c.dropdown.value = "general_gaussian"
        assert [e.description for e in c.param_entries] == ["p", "sig"]
        assert c.value == ("general_gaussian", 1.5, 128.0)

    def test_value_from_code(self):
        c = self.make()
        c.value = ("tukey", 0.25)
        assert c.dropdown.value == "tukey" and c.param_entries[0].value == 0.25

    def test_a_window_set_in_code_but_not_in_the_menu_is_shown(self):
        c = self.make(("general_cosine", (0.5, 0.5)))
        assert c.dropdown.value == "general_cosine"
        assert c.value == ("general_cosine", (0.5, 0.5))


def test_invalid_mark_toggles_a_css_class():
    c = control_for("overlap", sb.Welch.params()["overlap"], CTX, value=0.5)
    c.set_invalid("The 'overlap' parameter of Welch must be ...")
    assert c.invalid and "sb-invalid" in c._dom_classes
    c.set_invalid(None)
    assert not c.invalid
