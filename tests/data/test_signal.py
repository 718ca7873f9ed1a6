"""Signal: storage without copies, views, validation, provenance steps, conversions."""

import numpy as np
import pytest
from numpy.testing import assert_array_equal

from specbench._errors import InputError
from specbench.data import Signal, demo


class TestConstruction:
    def test_1d_becomes_a_view_of_shape_1_n(self):
        x = np.arange(100.0)
        sig = Signal(x, fs=10.0)
        assert sig.data.shape == (1, 100)
        assert np.shares_memory(sig.data, x)
        assert sig.channels == ("ch0",)
        assert sig.unit == "" and sig.t0 == 0.0 and sig.origin is None
        assert sig.n_samples == 100 and sig.n_channels == 1
        assert sig.duration == 10.0

    def test_2d_stays_and_is_read_only_while_the_callers_array_is_not(self):
        x = np.zeros((3, 50))
        sig = Signal(x, fs=5, channels=["a", "b", "c"], unit=["V", "V", "A"])
        assert np.shares_memory(sig.data, x)
        assert not sig.data.flags.writeable and x.flags.writeable
        assert sig.unit == ("V", "V", "A")
        assert sig.units() == ("V", "V", "A")
        assert sig.fs == 5.0 and isinstance(sig.fs, float)

    def test_same_unit_for_all_channels_collapses_to_one_string(self):
        assert Signal(np.zeros((2, 4)), 1, unit=["g", "g"]).unit == "g"

    def test_memmap_stays_a_memmap(self, tmp_path):
        path = tmp_path / "x.dat"
        np.arange(64, dtype=np.float32).tofile(path)
        mm = np.memmap(path, dtype=np.float32, mode="r")
        sig = Signal(mm, fs=8)
        assert isinstance(sig.data, np.memmap)
        assert isinstance(sig.channel(0).data, np.memmap)
        assert isinstance(sig.span(1, 2).data, np.memmap)
        assert "memory map" in repr(sig)

    def test_time_axis(self):
        sig = Signal(np.zeros(4), fs=2, t0=10.0)
        assert_array_equal(sig.time, [10.0, 10.5, 11.0, 11.5])

    @pytest.mark.parametrize("fs", [0, -1, np.nan, np.inf, "fast", None])
    def test_bad_rate(self, fs):
        with pytest.raises(InputError, match="sample rate fs must be a positive, finite"):
            Signal(np.zeros(4), fs=fs)

    def test_text_data(self):
        with pytest.raises(InputError, match="must be numeric; got dtype <U1"):
            Signal(np.array(["a", "b"]), fs=1)

    def test_3d_data(self):
        with pytest.raises(InputError, match=r"got shape \(2, 2, 2\)"):
            Signal(np.zeros((2, 2, 2)), fs=1)

    def test_empty_data(self):
        with pytest.raises(InputError, match="holds no samples"):
            Signal(np.zeros((1, 0)), fs=1)

    def test_name_count(self):
        with pytest.raises(InputError, match=r"2 channel names \['a', 'b'\] given for data "
                                             "with 3 channels"):
            Signal(np.zeros((3, 10)), fs=1, channels=["a", "b"])

    def test_duplicate_names(self):
        with pytest.raises(InputError, match="'a' appears more than once"):
            Signal(np.zeros((2, 10)), fs=1, channels=["a", "a"])

    def test_unit_count(self):
        with pytest.raises(InputError, match="3 units"):
            Signal(np.zeros((2, 10)), fs=1, unit=["V", "V", "V"])

    def test_repr_is_one_readable_line(self):
        sig = Signal(np.zeros((2, 5000)), 1000, channels=["x", "y"], unit="m/s^2",
                     source="bench run 3")
        text = repr(sig)
        assert "\n" not in text
        for part in ("2 channels", "[x, y]", "5,000 samples", "1000 Hz", "5 s", "'m/s^2'",
                     "bench run 3"):
            assert part in text


class TestChannel:
    sig = Signal(np.arange(30.0).reshape(3, 10), fs=10, channels=["a", "b", "c"],
                 unit=["V", "A", "W"])

    @pytest.mark.parametrize("key", ["b", 1, -2])
    def test_by_name_or_index(self, key):
        ch = self.sig.channel(key)
        assert ch.channels == ("b",) and ch.unit == "A"
        assert_array_equal(ch.data, [np.arange(10.0, 20.0)])
        assert np.shares_memory(ch.data, self.sig.data)
        assert ch.selection == (("channel", "b"),)

    def test_unknown_name(self):
        with pytest.raises(InputError, match=r"No channel named 'z'; the channels are "
                                             r"\['a', 'b', 'c'\]"):
            self.sig.channel("z")

    def test_index_out_of_range(self):
        with pytest.raises(InputError, match=r"Channel index 3 is out of range.*0\.\.2"):
            self.sig.channel(3)


class TestSpan:
    sig = Signal(np.arange(1000.0), fs=100.0, t0=5.0)

    def test_view_and_bounds(self):
        part = self.sig.span(1.0, 2.5)
        assert part.n_samples == 150
        assert part.data[0, 0] == 100.0 and part.data[0, -1] == 249.0
        assert np.shares_memory(part.data, self.sig.data)
        assert part.t0 == 6.0
        assert part.selection == (("span", 1.0, 2.5),)

    def test_float_rounding_does_not_lose_a_sample(self):
        # 0.1 * 30 is 3.0000000000000004 in binary: still sample 3
        part = Signal(np.arange(100.0), fs=30.0).span(0.1, 0.2)
        assert part.data[0, 0] == 3.0 and part.n_samples == 3

    def test_whole_record(self):
        assert self.sig.span(0, self.sig.duration).n_samples == 1000

    def test_out_of_range_is_not_clamped(self):
        with pytest.raises(InputError, match="reaches outside the record: the record spans 0 "
                                             r"to 10 s \(1000 samples at 100 Hz\)"):
            self.sig.span(9.0, 11.0)
        with pytest.raises(InputError, match="reaches outside"):
            self.sig.span(-1.0, 1.0)

    def test_empty(self):
        with pytest.raises(InputError, match="holds no sample"):
            self.sig.span(2.0, 2.0)
        with pytest.raises(InputError, match="holds no sample"):
            self.sig.span(2.001, 2.005)

    def test_nested_spans_accumulate_steps(self):
        part = self.sig.span(1.0, 5.0).span(0.5, 1.0)
        assert part.selection == (("span", 1.0, 5.0), ("span", 0.5, 1.0))
        assert part.data[0, 0] == 150.0


class TestWithFs:
    def test_same_samples_new_rate(self):
        sig = Signal(np.arange(10.0), fs=10)
        other = sig.with_fs(20)
        assert other.fs == 20.0 and other.duration == 0.5
        assert np.shares_memory(other.data, sig.data)
        assert other.selection == (("with_fs", 20.0),)

    def test_demo_truth_follows_the_rate(self):
        sig = demo("white-noise", duration=1.0)
        twice = sig.with_fs(2 * sig.fs)
        # white noise of variance 1: one-sided density 2/fs
        assert twice.truth.psd([100.0])[0, 0] == pytest.approx(2 / 2000.0)
        assert sig.truth.psd([100.0])[0, 0] == pytest.approx(2 / 1000.0)


class TestProvenance:
    def test_demo_origin_and_steps_rebuild_bit_for_bit(self):
        sig = demo("delay-pair", duration=10.0).channel("downstream").span(2.0, 7.5)
        assert sig.origin == {"kind": "demo", "name": "delay-pair", "kwargs": {"duration": 10.0}}
        again = demo(sig.origin["name"], **sig.origin["kwargs"])
        for step, *args in sig.selection:
            again = getattr(again, step)(*args)
        assert_array_equal(again.data, sig.data)
        assert again.t0 == sig.t0

    def test_channel_keeps_its_part_of_the_truth(self):
        sig = demo("delay-pair", duration=10.0)
        f = np.array([10.0, 100.0])
        assert_array_equal(sig.channel(1).truth.psd(f), sig.truth.psd(f)[1:])
