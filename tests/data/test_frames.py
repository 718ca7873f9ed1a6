"""pandas and xarray objects: conversion to Signal, and estimators accepting them directly;
the gap path end to end (loader fills NaN, Welch skips the segments that touch it); the
memory-mapped path in small."""

import subprocess
import sys

import numpy as np
import pandas as pd
import pytest
import xarray as xr
from numpy.testing import assert_allclose, assert_array_equal

import specbench.estimators
from specbench._errors import InputError
from specbench.data import Signal, load


def _rng():
    """A fresh, seeded generator for each use: tests share no generator state."""
    return np.random.default_rng(5)



class TestPandas:
    def test_datetime_index_at_250_hz_gives_exactly_250(self):
        # pandas.date_range with freq="4ms": intervals of exactly 4 000 000 ns
        idx = pd.date_range("2024-05-01 12:00", periods=25_000, freq="4ms")
        sig = Signal.from_pandas(pd.Series(_rng().standard_normal(25_000), index=idx, name="p"))
        assert sig.fs == 250.0
        assert sig.channels == ("p",)
        assert sig.start == np.datetime64("2024-05-01T12:00", "ns") and sig.t0 == 0.0

    def test_timezone_aware_index(self):
        idx = pd.date_range("2024-03-31 00:59:59", periods=2000, freq="1ms", tz="Europe/Berlin")
        assert Signal.from_pandas(pd.Series(0.0, index=idx)).fs == 1000.0

    def test_frame_with_float_index_in_seconds(self):
        frame = pd.DataFrame(_rng().standard_normal((1000, 2)), columns=["a", "b"],
                             index=np.arange(1000) / 512.0 + 3.0)
        sig = Signal.from_pandas(frame, unit="V")
        assert sig.fs == 512.0 and sig.t0 == 3.0 and sig.unit == "V"
        assert_array_equal(sig.data, frame.to_numpy().T)

    def test_time_column(self):
        frame = pd.DataFrame({"elapsed": np.arange(100) * 0.01, "x": 1.0, "y": 2.0})
        sig = Signal.from_pandas(frame)
        assert sig.fs == 100.0 and sig.channels == ("x", "y")

    def test_timedelta_index(self):
        idx = pd.timedelta_range(0, periods=300, freq="500us")
        assert Signal.from_pandas(pd.Series(0.0, index=idx)).fs == 2000.0

    def test_range_index_with_fs(self):
        sig = Signal.from_pandas(pd.DataFrame({"x": np.arange(10.0)}), fs=20)
        assert sig.fs == 20.0

    def test_nullable_dtype(self):
        s = pd.Series(pd.array([1.0, 2.0, None, 4.0], dtype="Float64"), index=np.arange(4) / 4.0)
        sig = Signal.from_pandas(s, on_gap="fill")
        assert np.isnan(sig.data[0, 2])

    def test_gap_fill(self):
        idx = pd.date_range("2024-01-01", periods=100, freq="10ms").delete([50, 51])
        sig = Signal.from_pandas(pd.Series(1.0, index=idx), on_gap="fill")
        assert sig.n_samples == 100 and np.isnan(sig.data[0, 50:52]).all()


class TestXarray:
    def test_time_coordinate_and_channel_dim(self):
        t = np.arange(2000) / 1000.0
        da = xr.DataArray(_rng().standard_normal((3, 2000)), dims=("sensor", "time"),
                          coords={"sensor": ["x", "y", "z"], "time": t}, name="accel",
                          attrs={"units": "m/s^2"})
        sig = Signal.from_xarray(da)
        assert sig.fs == 1000.0 and sig.channels == ("x", "y", "z") and sig.unit == "m/s^2"
        assert_array_equal(sig.data, da.values)

    def test_time_first_is_transposed(self):
        da = xr.DataArray(_rng().standard_normal((500, 2)), dims=("t", "ch"),
                          coords={"t": np.arange(500) / 50.0})
        sig = Signal.from_xarray(da)
        assert sig.data.shape == (2, 500) and sig.channels == ("ch0", "ch1")

    def test_datetime_coordinate(self):
        t = pd.date_range("2024-01-01", periods=1000, freq="2ms")
        da = xr.DataArray(np.zeros(1000), dims="sample", coords={"sample": t})
        assert Signal.from_xarray(da).fs == 500.0

    def test_rate_attribute_without_coordinate(self):
        da = xr.DataArray(np.zeros(100), dims="time", attrs={"sample_rate": 64.0})
        assert Signal.from_xarray(da).fs == 64.0

    def test_dataset_is_refused(self):
        ds = xr.Dataset({"a": ("time", np.zeros(10))})
        with pytest.raises(InputError, match=r"Got an xarray Dataset with variables \['a'\]; "
                                             r"pass one DataArray"):
            Signal.from_xarray(ds)


class TestEstimatorsAcceptContainers:
    @pytest.fixture(scope="class")
    def welch(self):
        return specbench.estimators.Welch(segment_length=256)

    def test_series_frame_and_dataarray_give_the_signal_result(self, welch):
        x = _rng().standard_normal((2, 8192))
        t = np.arange(8192) / 1024.0
        ref = welch(Signal(x, 1024.0))
        frame = pd.DataFrame(x.T, index=t, columns=["a", "b"])
        da = xr.DataArray(x, dims=("ch", "time"), coords={"time": t})
        for obj in (frame, da):
            spec = welch(obj)
            assert_array_equal(spec.value, ref.value)
        assert_array_equal(welch(frame["a"]).value, ref.value[:1])  # a 1-channel Signal

    def test_the_data_layer_does_not_import_pandas(self):
        # The data and estimator layers import pandas, xarray and h5py only on use.  The
        # package root is bypassed (its widget layer pulls in bqplot, which imports pandas).
        code = (
            "import sys, types, importlib.util\n"
            "spec = importlib.util.find_spec('specbench')\n"
            "pkg = types.ModuleType('specbench')\n"
            "pkg.__path__ = list(spec.submodule_search_locations)\n"
            "sys.modules['specbench'] = pkg\n"
            "import specbench.data, specbench.estimators\n"
            "print(*(m in sys.modules for m in ('pandas', 'xarray', 'h5py')))\n"
        )
        out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                             check=True)
        assert out.stdout.split() == ["False", "False", "False"]


class TestGapsEndToEnd:
    def test_fill_then_welch_skip(self, tmp_path):
        Welch = specbench.estimators.Welch
        fs, n = 1000.0, 20_000
        t = np.arange(n) / fs
        x = _rng().standard_normal(n)
        keep = np.ones(n, bool)
        keep[7_000:7_050] = False  # 50 rows lost by the logger
        path = tmp_path / "gappy.csv"
        pd.DataFrame({"t": t[keep], "x": x[keep]}).to_csv(path, index=False)
        with pytest.raises(InputError, match="on_gap='fill'"):
            load(path)
        sig = load(path, on_gap="fill")
        assert "1 gap filled with 50 NaN samples" in sig.source
        with pytest.raises(InputError, match="non-finite"):
            Welch(segment_length=512)(sig)
        spec = Welch(segment_length=512, overlap=0.5, gaps="skip")(sig)
        # segments [256 k, 256 k + 512) touch rows 7000..7049 for k = 26, 27 only
        assert spec.info["segments_skipped"] == 2
        assert spec.segments == (n - 512) // 256 + 1 - 2
        # The same segments from the clean record give the same average.
        clean = Welch(segment_length=512, overlap=0.5)(Signal(x, fs))
        assert_allclose(spec.value.mean(), clean.value.mean(), rtol=0.02)


class TestMemoryMap:
    def test_npy_memmap_estimates_like_the_array_in_memory(self, tmp_path):
        Welch = specbench.estimators.Welch
        x = _rng().standard_normal((2, 1_000_000)).astype(np.float32)  # 8 MB
        path = tmp_path / "big.npy"
        np.save(path, x)
        sig = load(path, fs=2000.0)
        assert isinstance(sig.data, np.memmap)
        est = Welch(segment_length=4096, overlap=0.75)
        assert_array_equal(est(sig).value, est(x, fs=2000.0).value)

    def test_raw_interleaved_memmap_estimates_like_the_array(self, tmp_path):
        Welch = specbench.estimators.Welch
        frames = _rng().standard_normal((500_000, 3))
        path = tmp_path / "daq.bin"
        frames.tofile(path)
        sig = load(path, dtype="<f8", n_channels=3, fs=10_000.0)
        assert isinstance(sig.data, np.memmap) and not sig.data.flags.c_contiguous
        est = Welch(segment_length=1024)
        assert_allclose(est(sig).value, est(frames.T.copy(), fs=10_000.0).value, rtol=1e-12)


def test_converter_takes_the_estimators_rate():
    from specbench.data._frames import convert

    series = pd.Series(np.zeros(100))  # RangeIndex: no time of its own
    assert convert(series, fs=50.0).fs == 50.0
    assert convert(np.zeros(3)) is None
    with pytest.raises(InputError, match="states no sample rate"):
        convert(series)
