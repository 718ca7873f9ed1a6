"""sb.load on well-formed files of every format, checked against the libraries that wrote
them (pandas, scipy.io.wavfile, numpy, h5py) and against the provenance contract."""

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_array_equal
from scipy.io import wavfile

from specbench._errors import InputError
from specbench.data import load


def _rng():
    """A fresh, seeded generator for each use: tests share no generator state."""
    return np.random.default_rng(7)



def _repeat(sig):
    """Rebuild a loaded signal from its origin and selection (the freeze contract)."""
    again = load(sig.origin["path"], **sig.origin["kwargs"])
    for step, *args in sig.selection:
        again = getattr(again, step)(*args)
    return again


class TestCsv:
    def test_pandas_to_csv_reads_back_equal(self, tmp_path):
        # outside reference: pandas.DataFrame.to_csv writes the shortest round-trip repr
        n = 2000
        frame = pd.DataFrame({"t": np.arange(n) / 500.0, "x": _rng().standard_normal(n),
                              "y": _rng().standard_normal(n) * 1e-7})
        path = tmp_path / "run.csv"
        frame.to_csv(path, index=False)
        sig = load(path)
        assert sig.fs == 500.0
        assert sig.channels == ("x", "y")
        assert_array_equal(sig.data, frame[["x", "y"]].to_numpy().T)
        assert "time column 't'" in sig.source and "jitter" in sig.source
        assert sig.origin == {"kind": "load", "path": str(path), "kwargs": {}}

    def test_pandas_index_column_named_time(self, tmp_path):
        # outside reference: DataFrame.to_csv with a named float index
        idx = pd.Index(np.arange(300) * 0.001 + 2.0, name="time")
        frame = pd.DataFrame({"p": _rng().standard_normal(300)}, index=idx)
        path = tmp_path / "p.csv"
        frame.to_csv(path)
        sig = load(path)
        assert sig.fs == 1000.0 and sig.t0 == 2.0
        assert_array_equal(sig.data[0], frame["p"].to_numpy())

    def test_semicolon_decimal_comma_units_and_comments(self, tmp_path):
        path = tmp_path / "logger.csv"
        lines = ["# exported by a data logger", "# channel map: 1=accel", "Time [ms];accel [g];"
                 "temp [degC]"]
        lines += [f"{4 * i};{i * 0.5:.2f};{20 + i / 10:.1f}".replace(".", ",") for i in range(50)]
        path.write_text("\n".join(lines) + "\n", encoding="utf-8")
        sig = load(path)
        assert sig.fs == 250.0
        assert sig.channels == ("accel", "temp")
        assert sig.unit == ("g", "degC")
        assert sig.data[0, 3] == 1.5 and sig.data[1, 10] == 21.0
        assert "delimiter ';'" in sig.source and "decimal ','" in sig.source

    def test_tsv_with_unit_row_and_explicit_fs(self, tmp_path):
        path = tmp_path / "strain.tsv"
        rows = ["gauge1\tgauge2", "ustrain\tustrain"] + [f"{i}\t{-i}" for i in range(20)]
        path.write_text("\n".join(rows))
        sig = load(path, fs=100)
        assert sig.unit == "ustrain" and sig.channels == ("gauge1", "gauge2")
        assert_array_equal(sig.data[1], -np.arange(20.0))
        assert sig.origin["kwargs"] == {"fs": 100}

    def test_whitespace_no_header(self, tmp_path):
        path = tmp_path / "plain.txt"
        np.savetxt(path, np.column_stack([np.arange(10.0), np.arange(10.0) ** 2]))
        sig = load(path, fs=50.0)
        assert sig.channels == ("ch0", "ch1")
        assert_array_equal(sig.data[1], np.arange(10.0) ** 2)

    def test_headerless_time_column_by_index(self, tmp_path):
        path = tmp_path / "plain.csv"
        np.savetxt(path, np.column_stack([np.arange(10) / 8.0, np.ones(10)]), delimiter=",")
        sig = load(path, time_column=0)
        assert sig.fs == 8.0 and sig.channels == ("ch1",)

    def test_iso_timestamps(self, tmp_path):
        # outside reference: pandas.date_range and DataFrame.to_csv write ISO 8601 stamps
        idx = pd.date_range("2024-05-01 08:00", periods=400, freq="2ms", name="timestamp")
        frame = pd.DataFrame({"v": _rng().standard_normal(400)}, index=idx)
        path = tmp_path / "dates.csv"
        frame.to_csv(path)
        sig = load(path)
        assert sig.fs == 500.0
        assert sig.start == np.datetime64("2024-05-01T08:00:00", "ns")

    def test_channels_select_and_order(self, tmp_path):
        path = tmp_path / "abc.csv"
        pd.DataFrame({"t": np.arange(10) / 10, "a": 1.0, "b": 2.0, "c": 3.0}).to_csv(
            path, index=False)
        sig = load(path, channels=["c", "a"])
        assert sig.channels == ("c", "a")
        assert_array_equal(sig.data[:, 0], [3.0, 1.0])

    def test_time_column_given_with_consistent_fs(self, tmp_path):
        path = tmp_path / "t.csv"
        pd.DataFrame({"t": np.arange(100) / 200.0, "x": 0.0}).to_csv(path, index=False)
        sig = load(path, fs=200.0)
        assert sig.fs == 200.0 and "as given, consistent with" in sig.source

    def test_gap_fill_puts_nan_in_the_missing_places(self, tmp_path):
        t = np.arange(100) / 100.0
        keep = np.r_[0:40, 43:100]  # samples 40, 41, 42 missing
        path = tmp_path / "gap.csv"
        pd.DataFrame({"t": t[keep], "x": keep.astype(float)}).to_csv(path, index=False)
        sig = load(path, on_gap="fill")
        assert sig.n_samples == 100 and sig.fs == 100.0
        assert np.isnan(sig.data[0, 40:43]).all()
        assert_array_equal(sig.data[0, keep], keep)  # nothing shifted
        assert "1 gap filled with 3 NaN samples" in sig.source

    def test_quantised_timestamps_give_the_mean_rate(self, tmp_path):
        # 3 kHz written with 6 decimals: the intervals alternate 0.000333 / 0.000334 s
        n = 3000
        path = tmp_path / "q.csv"
        pd.DataFrame({"t": np.round(np.arange(n) / 3000.0, 6), "x": 1.0}).to_csv(
            path, index=False)
        sig = load(path)
        assert sig.fs == 3000.0

    def test_jittery_timestamps_within_tolerance(self, tmp_path):
        n = 5000
        t = np.arange(n) / 1000.0 + _rng().uniform(-0.1e-3, 0.1e-3, n)  # 0.1 interval
        path = tmp_path / "j.csv"
        pd.DataFrame({"t": t, "x": 1.0}).to_csv(path, index=False)
        sig = load(path)
        assert sig.fs == pytest.approx(1000.0, rel=1e-4)
        assert "jitter rms 0.058" in sig.source or "jitter rms 0.057" in sig.source

    def test_load_is_repeatable_from_origin(self, tmp_path):
        path = tmp_path / "r.csv"
        pd.DataFrame({"time_s": np.arange(500) / 50.0, "a": _rng().standard_normal(500),
                      "b": _rng().standard_normal(500)}).to_csv(path, index=False)
        sig = load(path, channels=["b"]).span(1.0, 4.0)
        assert_array_equal(_repeat(sig).data, sig.data)

    def test_without_pandas_the_plain_reader_gives_the_same(self, tmp_path, monkeypatch):
        import builtins

        path = tmp_path / "same.csv"
        frame = pd.DataFrame({"t": np.arange(200) / 20.0, "x": _rng().standard_normal(200)})
        frame.to_csv(path, index=False)
        fast = load(path)
        real_import = builtins.__import__

        def no_pandas(name, *args, **kwargs):
            if name == "pandas" or name.startswith("pandas."):
                raise ImportError("pandas hidden for this test")
            return real_import(name, *args, **kwargs)

        monkeypatch.setattr(builtins, "__import__", no_pandas)
        slow = load(path)
        assert_array_equal(slow.data, fast.data)
        assert slow.fs == fast.fs


class TestNumpy:
    def test_npy_is_a_memory_map(self, tmp_path):
        x = _rng().standard_normal((2, 4096)).astype(np.float32)
        path = tmp_path / "x.npy"
        np.save(path, x)
        sig = load(path, fs=1000)
        assert isinstance(sig.data, np.memmap)
        assert_array_equal(sig.data, x)
        assert "memory-mapped" in sig.source

    def test_npy_samples_down_the_rows(self, tmp_path):
        x = _rng().standard_normal((500, 3))
        path = tmp_path / "cols.npy"
        np.save(path, x)
        sig = load(path, fs=10, axis=0, channels=[2])
        assert_array_equal(sig.data[0], x[:, 2])
        assert isinstance(sig.data, np.memmap)

    def test_npz_key_and_time_array(self, tmp_path):
        path = tmp_path / "rec.npz"
        t = np.arange(1000) / 2048.0
        np.savez(path, t=t, accel=_rng().standard_normal((2, 1000)))
        sig = load(path)
        assert sig.fs == 2048.0 and sig.n_channels == 2

    def test_npz_key_by_name(self, tmp_path):
        path = tmp_path / "two.npz"
        np.savez(path, a=np.zeros(50), b=np.ones(50))
        sig = load(path, key="b", fs=5)
        assert_array_equal(sig.data[0], np.ones(50))
        assert sig.origin["kwargs"] == {"key": "b", "fs": 5}


class TestWav:
    @pytest.mark.parametrize("dtype,scale", [(np.int16, 2.0**-15), (np.int32, 2.0**-31)])
    def test_scipy_wavfile_round_trip(self, tmp_path, dtype, scale):
        # outside reference: scipy.io.wavfile.write
        info = np.iinfo(dtype)
        raw = _rng().integers(info.min, info.max, size=(3000, 2), endpoint=True).astype(dtype)
        path = tmp_path / "mic.wav"
        wavfile.write(path, 48000, raw)
        sig = load(path)
        assert sig.fs == 48000.0 and sig.n_channels == 2 and sig.unit == "FS"
        assert_array_equal(sig.data, raw.T.astype(np.float64) * scale)
        bits = 8 * np.dtype(dtype).itemsize
        assert f"{bits}-bit integer PCM scaled to full scale" in sig.source
        assert sig.data.dtype == (np.float32 if bits == 16 else np.float64)

    def test_24_bit(self, tmp_path):
        # A 24-bit PCM file written by hand (RIFF/WAVE, format 1, 3-byte samples).
        values = np.array([0, 1, -1, 2**23 - 1, -(2**23), 12345], dtype=np.int32)
        data = b"".join(int(v).to_bytes(3, "little", signed=True) for v in values)
        path = tmp_path / "pcm24.wav"
        _write_wav(path, fmt_tag=1, channels=1, rate=96000, bits=24, data=data)
        sig = load(path)
        assert sig.data.dtype == np.float32
        assert_array_equal(sig.data[0], values / 2.0**23)
        assert "24-bit integer PCM" in sig.source

    def test_float_wav_kept_as_stored(self, tmp_path):
        x = _rng().standard_normal(1000).astype(np.float32)
        path = tmp_path / "f.wav"
        wavfile.write(path, 8000, x)
        sig = load(path)
        assert_array_equal(sig.data[0], x) and sig.unit == ""

    def test_uint8(self, tmp_path):
        raw = np.array([0, 128, 255, 64] * 10, dtype=np.uint8)
        path = tmp_path / "u8.wav"
        wavfile.write(path, 8000, raw)
        assert_array_equal(load(path).data[0, :4], [-1.0, 0.0, 127 / 128, -0.5])

    def test_fs_must_agree_with_the_header(self, tmp_path):
        path = tmp_path / "h.wav"
        wavfile.write(path, 44100, np.zeros(100, dtype=np.int16))
        with pytest.raises(InputError, match=r"fs=48000 Hz was given, but the WAV header of "
                                             r"h.wav says 44100 Hz.*\.with_fs\(48000\)"):
            load(path, fs=48000)
        assert load(path, fs=44100).fs == 44100.0


def _write_wav(path, *, fmt_tag, channels, rate, bits, data):
    import struct

    block = channels * bits // 8
    fmt = struct.pack("<HHIIHH", fmt_tag, channels, rate, rate * block, block, bits)
    body = b"WAVE" + b"fmt " + struct.pack("<I", len(fmt)) + fmt
    body += b"data" + struct.pack("<I", len(data)) + data + (b"\0" if len(data) % 2 else b"")
    path.write_bytes(b"RIFF" + struct.pack("<I", len(body)) + body)


class TestHdf5:
    def test_dataset_with_rate_attribute_is_memory_mapped(self, tmp_path):
        h5py = pytest.importorskip("h5py")
        x = _rng().standard_normal((2, 5000))
        path = tmp_path / "daq.h5"
        with h5py.File(path, "w") as f:
            grp = f.create_group("run1")
            grp.attrs["sample_rate"] = 12800.0
            d = grp.create_dataset("accel", data=x)
            d.attrs["units"] = "m/s^2"
            f.create_dataset("notes_count", data=np.arange(3))
        sig = load(path, key="/run1/accel")
        assert sig.fs == 12800.0 and sig.unit == "m/s^2"
        assert isinstance(sig.data, np.memmap)
        assert_array_equal(sig.data, x)
        assert "'sample_rate' of /run1" in sig.source

    def test_chunked_compressed_is_read_and_fs_argument(self, tmp_path):
        h5py = pytest.importorskip("h5py")
        x = _rng().standard_normal(3000).astype(np.float32)
        path = tmp_path / "c.hdf5"
        with h5py.File(path, "w") as f:
            f.create_dataset("p", data=x, compression="gzip", chunks=(1000,))
        sig = load(path, fs=100.0)
        assert not isinstance(sig.data, np.memmap)
        assert_array_equal(sig.data[0], x)

    def test_time_dataset(self, tmp_path):
        h5py = pytest.importorskip("h5py")
        path = tmp_path / "t.h5"
        with h5py.File(path, "w") as f:
            f.create_dataset("x", data=np.zeros(400))
            f.create_dataset("time", data=np.arange(400) / 400.0)
        sig = load(path, key="/x", time_column="/time")
        assert sig.fs == 400.0


class TestRaw:
    def test_interleaved_int16_memory_map(self, tmp_path):
        frames = _rng().integers(-3000, 3000, size=(1000, 4)).astype("<i2")
        path = tmp_path / "stand.bin"
        frames.tofile(path)
        sig = load(path, dtype="<i2", n_channels=4, fs=51200)
        assert isinstance(sig.data, np.memmap)
        assert sig.data.shape == (4, 1000)
        assert_array_equal(sig.data, frames.T)
        assert sig.origin["kwargs"] == {"dtype": "<i2", "n_channels": 4, "fs": 51200}

    def test_planar_float32_with_header(self, tmp_path):
        x = _rng().standard_normal((2, 700)).astype(np.float32)
        path = tmp_path / "p.raw"
        path.write_bytes(b"HDR!" * 4 + x.tobytes())
        sig = load(path, dtype=np.float32, n_channels=2, interleaved=False, offset=16, fs=10,
                   channels=[1])
        assert_array_equal(sig.data[0], x[1])
        assert sig.origin["kwargs"]["dtype"] == "<f4"

    def test_big_endian(self, tmp_path):
        x = np.arange(100, dtype=">f8")
        path = tmp_path / "be.bin"
        x.tofile(path)
        assert_array_equal(load(path, dtype=">f8", fs=1).data[0], np.arange(100.0))


class TestFormatSelection:
    def test_format_overrides_extension(self, tmp_path):
        path = tmp_path / "data.log"
        path.write_text("x\n1\n2\n3\n4\n")
        assert load(path, format="csv", fs=1).n_samples == 4

    def test_option_for_another_format(self, tmp_path):
        path = tmp_path / "a.csv"
        path.write_text("x\n1\n2\n3\n")
        with pytest.raises(InputError, match=r"dtype does not apply to csv files \(a.csv\)"):
            load(path, fs=1, dtype="int16")
