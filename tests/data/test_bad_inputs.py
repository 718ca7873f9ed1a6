"""The catalogue of bad inputs: each one raises InputError naming the file, the place and
the fix.  The messages are matched, so a vaguer message fails the test."""

import builtins
import re
import struct

import numpy as np
import pandas as pd
import pytest
from scipy.io import wavfile

from specbench._errors import InputError
from specbench.data import Signal, load


def _rng():
    """A fresh, seeded generator for each use: tests share no generator state."""
    return np.random.default_rng(11)



def _csv(tmp_path, text, name="bad.csv"):
    path = tmp_path / name
    path.write_text(text)
    return path


def _raises(path, pattern, **kwargs):
    with pytest.raises(InputError, match=pattern) as info:
        load(path, **kwargs)
    return str(info.value)


class TestTextFiles:
    def test_empty_file(self, tmp_path):
        _raises(_csv(tmp_path, ""), r"bad.csv is empty \(0 bytes\)\. Check that the export")

    def test_blank_lines_only(self, tmp_path):
        _raises(_csv(tmp_path, "\n\n  \n"), r"bad.csv is empty: there is no row of data")

    def test_comments_only(self, tmp_path):
        _raises(_csv(tmp_path, "# a\n# b\n"), r"bad.csv holds only comment lines")

    def test_header_only(self, tmp_path):
        _raises(_csv(tmp_path, "t,x,y\n"),
                r"bad.csv has a header \('t', 'x', 'y'\) but no data rows\. Check that the "
                "export finished")

    def test_ragged_row_with_too_many_fields(self, tmp_path):
        text = "t,x,y\n0,1,2\n0.1,1,2\n0.2,1,2,3\n0.3,1,2\n"
        _raises(_csv(tmp_path, text), r"bad.csv: line 4 has 4 fields but the table has 3 "
                r"\(header 't', 'x', 'y'\): '0.2,1,2,3'\. Repair or remove the ragged line")

    def test_ragged_row_with_too_few_fields(self, tmp_path):
        text = "t,x,y\n0,1,2\n0.1,1,2\n0.2,1\n0.3,1,2\n"
        _raises(_csv(tmp_path, text), r"bad.csv: line 4 has 2 fields but the table has 3")

    def test_cut_off_last_line(self, tmp_path):
        text = "t,x,y\n" + "".join(f"{i / 10},1,2\n" for i in range(20)) + "2.0,1"
        _raises(_csv(tmp_path, text), r"line 22 has 2 fields.*a cut-off last line")

    def test_non_numeric_cell(self, tmp_path):
        text = "# logger v2\nt,x\n0,1\n0.1,abc\n0.2,3\n"
        _raises(_csv(tmp_path, text), r"bad.csv: line 4, column 'x', holds 'abc', which is "
                r"not a number \(decimal mark '\.'\)\. Repair the cell, or choose the numeric "
                r"columns with channels=")

    def test_text_that_is_no_csv(self, tmp_path):
        text = "Dear colleague,\nplease find the measurements attached.\nRegards\n"
        _raises(_csv(tmp_path, text, "notes.txt"),
                r"notes.txt does not look like a table of numbers: line \d reads .*, with no "
                r"number in it.*Load a delimited file of numbers")

    def test_binary_file_with_a_text_extension(self, tmp_path):
        path = tmp_path / "dump.csv"
        path.write_bytes(np.arange(100, dtype=np.float64).tobytes())
        _raises(path, r"dump.csv is not a text file \(it holds NUL bytes\)\. For binary data "
                r"pass format='raw' with dtype= and fs=")

    @pytest.mark.parametrize("rows", [1, 2])
    def test_one_or_two_samples(self, tmp_path, rows):
        text = "t,x\n" + "".join(f"{i / 10},{i}\n" for i in range(rows))
        _raises(_csv(tmp_path, text), rf"bad.csv holds {rows} samples? per channel; at least 3 "
                "are needed")

    def test_no_rate(self, tmp_path):
        _raises(_csv(tmp_path, "x,y\n1,2\n3,4\n5,6\n"),
                r"bad.csv states no sample rate\. Pass fs=<samples per second> or "
                r"time_column=<name of the time column>\.$")

    def test_unknown_channel(self, tmp_path):
        _raises(_csv(tmp_path, "t,x\n0,1\n1,2\n2,3\n"),
                r"bad.csv has no channel 'z'; its channels are \['x'\]", channels=["z"])

    def test_time_column_named_as_a_channel(self, tmp_path):
        _raises(_csv(tmp_path, "t,x\n0,1\n1,2\n2,3\n"),
                r"'t' in bad.csv is the time column, not a channel\. Pass time_column=False",
                channels=["t"])

    def test_unknown_time_column(self, tmp_path):
        _raises(_csv(tmp_path, "a,b\n0,1\n1,2\n2,3\n"),
                r"bad.csv has no column 'time' for time_column; its columns are \['a', 'b'\]",
                time_column="time")

    def test_two_time_like_columns(self, tmp_path):
        _raises(_csv(tmp_path, "t,time_ms,x\n0,0,1\n1,1000,2\n2,2000,3\n"),
                r"Several columns of bad.csv look like time: \['t', 'time_ms'\]\. Choose one "
                r"with time_column=")

    def test_time_column_with_a_unit_that_is_no_time(self, tmp_path):
        _raises(_csv(tmp_path, "time [V],x\n0,1\n1,2\n2,3\n"),
                r"time column 'time' of bad.csv has the unit 'V', which is not a time unit.*"
                r"Rename the unit in the header, or pass time_column=False with fs=")

    def test_bad_date(self, tmp_path):
        text = ("timestamp,x\n2024-01-01T00:00:00.000,1\n2024-01-01T00:00:00.010,2\n"
                "yesterday,3\n2024-01-01T00:00:00.030,4\n")
        _raises(_csv(tmp_path, text), r"holds 'yesterday' at line 4 of bad.csv, which is "
                r"neither a number nor an ISO 8601 date-time")


class TestTimestamps:
    def _file(self, tmp_path, t, name="time.csv"):
        path = tmp_path / name
        pd.DataFrame({"t": t, "x": np.arange(len(t), dtype=float)}).to_csv(path, index=False)
        return path

    def test_duplicates(self, tmp_path):
        t = np.arange(50) / 100.0
        t[21] = t[20]
        _raises(self._file(tmp_path, t),
                r"The time column 't' of time.csv repeats t = 0.2 s at line 22 of time.csv and "
                r"line 23 of time.csv \(1 duplicate timestamp in all\)\. Remove duplicated rows")

    def test_decreasing(self, tmp_path):
        t = np.arange(50) / 100.0
        t[30:] -= 0.2
        _raises(self._file(tmp_path, t),
                r"The time column 't' of time.csv decreases: t = 0.29 s at line 31 of time.csv "
                r"is followed by t = 0.1 s at line 32.*Sort the rows by time")

    def test_gap(self, tmp_path):
        t = np.delete(np.arange(100) / 100.0, [40, 41, 42, 70])
        msg = _raises(self._file(tmp_path, t),
                      r"The time column 't' of time.csv has 2 gaps \(4 missing samples at 100 "
                      r"Hz\)\. The largest follows t = 0.39 s at line 41 of time.csv: 3 samples "
                      r"\(0.03 s\) missing before t = 0.43 s\.")
        assert "on_gap='fill'" in msg and "sb.Welch(gaps='skip')" in msg and "fs=" in msg

    def test_jitter_beyond_tolerance(self, tmp_path):
        t = np.arange(100) / 100.0
        t[57] += 0.004  # 0.4 of an interval
        msg = _raises(self._file(tmp_path, t),
                      r"The time column 't' of time.csv is not uniform: t = 0.574 s at line 59 "
                      r"of time.csv lies \+0.39\d sample intervals off the fitted grid")
        assert "max_jitter=0.25 (a fraction of the sample interval)" in msg
        assert load(self._file(tmp_path, t), max_jitter=0.45).fs == 100.0

    def test_given_rate_disagrees(self, tmp_path):
        path = self._file(tmp_path, np.arange(1000) / 1001.0)
        _raises(path, r"fs=1000 Hz was given, but the time column 't' of time.csv advances "
                r"at 1001 Hz.*Leave fs out to use the rate of the timestamps", fs=1000)

    def test_missing_timestamp(self, tmp_path):
        path = _csv(tmp_path, "t,x\n0,1\n0.1,2\n,3\n0.3,4\n")
        _raises(path, r"The time column 't' of bad.csv has 1 missing or non-finite value, "
                r"first at line 4 of bad.csv\. Every row needs a timestamp")

    def test_bad_options(self, tmp_path):
        path = self._file(tmp_path, np.arange(10) / 10)
        _raises(path, r"on_gap must be one of \('error', 'fill'\); got 'drop'", on_gap="drop")
        _raises(path, r"max_jitter must lie in \(0, 0.5\)", max_jitter=0.7)


class TestNonFinite:
    def test_nan_inf_and_empty_cells(self, tmp_path):
        text = "t,x,y\n0,1,2\n0.1,nan,2\n0.2,1,inf\n0.3,1,\n0.4,1,2\n"
        msg = _raises(_csv(tmp_path, text),
                      r"bad.csv has 3 non-finite values \(NaN, inf or empty cells\), first at "
                      r"line 3 of bad.csv channel 'x' \(NaN\), line 4 of bad.csv channel 'y' "
                      r"\(\+inf\), line 5 of bad.csv channel 'y' \(NaN\)\.")
        assert "on_gap='fill'" in msg and "sb.Welch(gaps='skip')" in msg

    def test_fill_keeps_them_and_says_so(self, tmp_path):
        text = "t,x\n0,1\n0.1,nan\n0.2,-inf\n0.3,1\n"
        sig = load(_csv(tmp_path, text), on_gap="fill")
        assert np.isnan(sig.data[0, 1]) and np.isneginf(sig.data[0, 2])
        assert "2 non-finite samples kept as gaps" in sig.source

    def test_nan_in_npz(self, tmp_path):
        path = tmp_path / "n.npz"
        x = np.zeros(100)
        x[[17, 60]] = np.nan
        np.savez(path, x=x)
        _raises(path, r"n.npz\['x'\] has 2 non-finite values.*first at sample 17 channel "
                r"'ch0' \(NaN\), sample 60", fs=10)


class TestWav:
    def test_not_a_wav(self, tmp_path):
        path = _csv(tmp_path, "hello world, this is text", "fake.wav")
        _raises(path, r"fake.wav is not a WAV file \(no RIFF/WAVE header\)")

    def test_cut_short(self, tmp_path):
        path = tmp_path / "cut.wav"
        path.write_bytes(b"RIFF" + struct.pack("<I", 100) + b"WAVE")
        _raises(path, r"cut.wav has no 'fmt ' chunk: the WAV file is cut short or damaged")

    def test_too_short(self, tmp_path):
        path = tmp_path / "two.wav"
        wavfile.write(path, 8000, np.array([1, 2], dtype=np.int16))
        _raises(path, r"two.wav holds 2 samples per channel; at least 3")


class TestRaw:
    def test_no_dtype(self, tmp_path):
        path = tmp_path / "r.bin"
        np.zeros(10).tofile(path)
        _raises(path, r"r.bin is raw binary: pass dtype= \(e.g. 'float32', '<i2'\), "
                r"n_channels=, interleaved= and fs=")

    def test_not_a_dtype(self, tmp_path):
        path = tmp_path / "r.bin"
        np.zeros(10).tofile(path)
        _raises(path, r"dtype='int24' is not a NumPy dtype", dtype="int24", fs=1)

    def test_non_numeric_dtype(self, tmp_path):
        path = tmp_path / "r.bin"
        np.zeros(10).tofile(path)
        _raises(path, r"dtype='U4' \(<U4\) is not a numeric sample type", dtype="U4", fs=1)

    def test_size_not_a_whole_number_of_frames(self, tmp_path):
        path = tmp_path / "r.bin"
        np.zeros(10, dtype=np.float32).tofile(path)  # 40 bytes
        _raises(path, r"r.bin has 40 bytes; after offset=0 that is 40 bytes, not a whole "
                r"number of 3-channel frames of float64 \(24 bytes each\)\. The dtype, "
                r"n_channels or offset is wrong", dtype="float64", n_channels=3, fs=1)

    def test_wrong_byte_order(self, tmp_path):
        path = tmp_path / "be.bin"
        _rng().standard_normal(4000).astype(">f8").tofile(path)
        _raises(path, r"The first 4000 samples of be.bin, read as float64 \(little-endian\), "
                r"include values beyond 1e30: the dtype, byte order", dtype="<f8", fs=1)

    def test_no_rate(self, tmp_path):
        path = tmp_path / "r.bin"
        np.zeros(10, dtype=np.int16).tofile(path)
        _raises(path, r"r.bin states no sample rate\. Pass fs=<samples per second>\.",
                dtype="int16")


class TestArrays:
    def test_transposed_npy(self, tmp_path):
        path = tmp_path / "cols.npy"
        np.save(path, np.zeros((1000, 3)))
        _raises(path, r"cols.npy holds an array of 1000 channels x 3 samples: more channels "
                r"than samples.*Pass axis=0", fs=10)

    def test_3d(self, tmp_path):
        path = tmp_path / "cube.npy"
        np.save(path, np.zeros((2, 3, 4)))
        _raises(path, r"cube.npy holds a 3-D array of shape \(2, 3, 4\)", fs=1)

    def test_object_array(self, tmp_path):
        path = tmp_path / "obj.npy"
        np.save(path, np.array([{"a": 1}], dtype=object), allow_pickle=True)
        _raises(path, r"obj.npy is not a readable .npy file", fs=1)

    def test_npz_needs_a_key(self, tmp_path):
        path = tmp_path / "ab.npz"
        np.savez(path, a=np.zeros(10), b=np.zeros(10))
        _raises(path, r"ab.npz holds the arrays \['a', 'b'\]; choose the samples with key=",
                fs=1)

    def test_npz_wrong_key(self, tmp_path):
        path = tmp_path / "ab.npz"
        np.savez(path, a=np.zeros(10))
        _raises(path, r"ab.npz has no array 'c'; it holds \['a'\]\. Pass key=", fs=1, key="c")


class TestHdf5:
    def test_missing_dataset(self, tmp_path):
        h5py = pytest.importorskip("h5py")
        path = tmp_path / "daq.h5"
        with h5py.File(path, "w") as f:
            f.create_dataset("run1/accel", data=np.zeros(10))
            f.create_dataset("run1/force", data=np.zeros(10))
        _raises(path, r"daq.h5 has no dataset '/run2/accel'; its datasets are "
                r"\['/run1/accel', '/run1/force'\]\. Pass key=", key="/run2/accel", fs=1)

    def test_several_datasets_and_no_key(self, tmp_path):
        h5py = pytest.importorskip("h5py")
        path = tmp_path / "daq.h5"
        with h5py.File(path, "w") as f:
            f.create_dataset("a", data=np.zeros(10))
            f.create_dataset("b", data=np.zeros(10))
        _raises(path, r"daq.h5 holds the datasets \['/a', '/b'\]; choose one with key=", fs=1)

    def test_rate_attribute_disagrees(self, tmp_path):
        h5py = pytest.importorskip("h5py")
        path = tmp_path / "daq.h5"
        with h5py.File(path, "w") as f:
            f.create_dataset("x", data=np.zeros(10)).attrs["fs"] = 1000.0
        _raises(path, r"fs=2000 Hz was given, but the attribute 'fs' of /x in daq.h5 says "
                r"1000 Hz", fs=2000)

    def test_no_rate(self, tmp_path):
        h5py = pytest.importorskip("h5py")
        path = tmp_path / "daq.h5"
        with h5py.File(path, "w") as f:
            f.create_dataset("x", data=np.zeros(10))
        _raises(path, r"daq.h5:/x states no sample rate\. Pass fs=<samples per second> \(or store an 'fs' "
                "attribute on the dataset\\)")

    def test_h5py_missing_names_the_extra(self, tmp_path, monkeypatch):
        path = tmp_path / "x.h5"
        path.write_bytes(b"\x89HDF\r\n\x1a\n" + bytes(100))
        real = builtins.__import__

        def no_h5py(name, *args, **kwargs):
            if name == "h5py":
                raise ImportError("hidden")
            return real(name, *args, **kwargs)

        monkeypatch.setattr(builtins, "__import__", no_h5py)
        _raises(path, re.escape("Reading HDF5 files needs the optional package 'h5py'. Install "
                                "it with: pip install 'specbench[hdf5]'"), fs=1)


class TestPaths:
    def test_missing_file(self, tmp_path):
        _raises(tmp_path / "nope.csv", r"No file '.*nope.csv' \(working directory")

    def test_unknown_extension(self, tmp_path):
        _raises(_csv(tmp_path, "1\n2\n", "x.xyz"),
                r"x.xyz: the extension '.xyz' is not one specbench reads .*Pass format= with "
                r"one of \['csv', 'hdf5', 'npy', 'npz', 'raw', 'wav', 'zarr'\]")

    def test_folder(self, tmp_path):
        _raises(tmp_path, r"is a folder; pass the path of a file in it")


class TestFrames:
    def test_range_index_needs_a_rate(self):
        with pytest.raises(InputError, match=r"the DataFrame states no sample rate\. Pass "
                                             r"fs=<samples per second> or a time index"):
            Signal.from_pandas(pd.DataFrame({"x": np.zeros(10)}))

    def test_non_numeric_column(self):
        frame = pd.DataFrame({"x": np.zeros(10), "label": ["a"] * 10})
        with pytest.raises(InputError, match=r"Column 'label' of the DataFrame has dtype "
                                             r"(object|str).*channels=\[\.\.\.\]"):
            Signal.from_pandas(frame, fs=1)

    def test_gap_in_a_datetime_index(self):
        idx = pd.date_range("2024-01-01", periods=100, freq="10ms").delete([50, 51])
        series = pd.Series(np.zeros(98), index=idx)
        with pytest.raises(InputError, match=r"The index of the Series has 1 gap \(2 missing "
                                             r"samples at 100 Hz\)\. The largest follows time "
                                             r"2024-01-01T00:00:00.490 at row 49 \(index "
                                             r"2024-01-01 00:00:00.490000\) of the Series: 2 "
                                             r"samples \(0.02 s\) missing"):
            Signal.from_pandas(series)

    def test_nan_in_a_series(self):
        s = pd.Series([0.0, 1.0, np.nan, 3.0], index=np.arange(4) / 4.0)
        with pytest.raises(InputError, match=r"the Series has 1 non-finite value.*row 2 "
                                             r"\(index 0.5\)"):
            Signal.from_pandas(s)


class TestMore:
    def test_absurd_last_timestamp_is_not_filled(self, tmp_path):
        t = np.arange(100) / 100.0
        t[-1] = 1e6  # a typo of a year's worth of seconds
        path = tmp_path / "typo.csv"
        pd.DataFrame({"t": t, "x": 0.0}).to_csv(path, index=False)
        with pytest.raises(InputError, match=r"Filling the gaps of the time column 't' of "
                                             r"typo.csv would add 99,999,901 NaN samples to 100 "
                                             r"real ones; the largest gap follows t = 0.98 s at "
                                             r"line 100 of typo.csv"):
            load(path, on_gap="fill")

    def test_invalid_utf8_after_the_first_block(self, tmp_path):
        path = tmp_path / "enc.csv"
        body = "t,x\n" + "".join(f"{i / 10},{i}\n" for i in range(30000))
        path.write_bytes(body.encode() + b"3000,\xff\xfe\n")
        with pytest.raises(InputError, match=r"enc.csv is not valid utf-8-sig text at byte "
                                             r"\d+ .*Re-save it as UTF-8"):
            load(path)


class TestRowsAreNeverLost:
    """Every row of a table is loaded or named in an error; a row is a header or units row
    only when no cell of it is a number (and some cell is text other than a missing marker)."""

    def test_one_column_decimal_comma_is_one_channel(self, tmp_path):
        sig = load(_csv(tmp_path, "0,125\n0,250\n-0,375\n0,5\n"), fs=10.0)
        assert sig.channels == ("ch0",)
        np.testing.assert_array_equal(sig.data[0], [0.125, 0.25, -0.375, 0.5])
        assert "one column, decimal ','" in sig.source

    def test_one_column_decimal_comma_under_a_one_name_header(self, tmp_path):
        sig = load(_csv(tmp_path, "accel [g]\n0,125\n0,250\n1,5\n"), fs=10.0)
        assert sig.channels == ("accel",) and sig.unit == "g"
        np.testing.assert_array_equal(sig.data[0], [0.125, 0.25, 1.5])

    def test_decimal_comma_or_two_integer_columns_is_refused(self, tmp_path):
        path = _csv(tmp_path, "12,5\n13,25\n14,75\n")
        _raises(path, r"bad.csv: lines such as '12,5' read either as one column of numbers "
                      r"with a decimal comma or as two columns of integers.*Give decimal=',' "
                      r"for one column.*or delimiter=',' for two columns", fs=10.0)
        np.testing.assert_array_equal(load(path, fs=10.0, decimal=",").data[0], [12.5, 13.25, 14.75])
        assert load(path, fs=10.0, delimiter=",").data.tolist() == [[12, 13, 14], [5, 25, 75]]

    def test_both_commas_refused(self, tmp_path):
        _raises(_csv(tmp_path, "1,5\n2,5\n3,5\n"), r"delimiter=',' and decimal=',' cannot both "
                r"be a comma", fs=10.0, delimiter=",", decimal=",")

    def test_na_row_is_data_not_units(self, tmp_path):
        path = _csv(tmp_path, "a,b\nNA,NA\n1,2\n3,4\n")
        _raises(path, r"bad.csv has 2 non-finite values.*first at line 2 of bad.csv", fs=10.0)
        sig = load(path, fs=10.0, on_gap="fill")
        assert sig.channels == ("a", "b") and sig.unit == ""
        np.testing.assert_array_equal(sig.data, [[np.nan, 1, 3], [np.nan, 2, 4]])

    def test_first_data_row_with_an_empty_cell_is_data(self, tmp_path):
        path = _csv(tmp_path, "a,b\n,1\n1,2\n3,4\n")
        _raises(path, r"non-finite value.*first at line 2 of bad.csv channel 'a'", fs=10.0)
        np.testing.assert_array_equal(load(path, fs=10.0, on_gap="fill").data,
                                      [[np.nan, 1, 3], [1, 2, 4]])

    def test_headerless_first_row_with_an_empty_cell_is_kept(self, tmp_path):
        path = _csv(tmp_path, ",1\n1,2\n3,4\n")
        _raises(path, r"first at line 1 of bad.csv channel 'ch0'", fs=10.0)
        sig = load(path, fs=10.0, on_gap="fill")
        assert sig.channels == ("ch0", "ch1") and sig.n_samples == 3

    def test_partly_numeric_first_row_is_named_not_taken_for_a_header(self, tmp_path):
        _raises(_csv(tmp_path, "time,1\n0,2\n0.1,3\n0.2,4\n"),
                r"bad.csv: line 1, column 1, holds 'time', which is not a number.*skip_rows=.*a "
                r"header row is one with no number in it", fs=10.0)

    def test_empty_line_inside_a_one_column_file_is_a_missing_sample(self, tmp_path):
        path = _csv(tmp_path, "1\n2\n\n3\n4\n\n\n")
        _raises(path, r"bad.csv has 1 non-finite value .*first at line 3 of bad.csv", fs=10.0)
        sig = load(path, fs=10.0, on_gap="fill")
        np.testing.assert_array_equal(sig.data[0], [1, 2, np.nan, 3, 4])  # later samples stay put

    def test_comment_line_inside_a_one_column_file_is_not_a_sample(self, tmp_path):
        sig = load(_csv(tmp_path, "1\n2\n# pause\n\n3\n4\n"), fs=10.0, on_gap="fill")
        np.testing.assert_array_equal(sig.data[0], [1, 2, np.nan, 3, 4])

    def test_metadata_above_the_header_and_skip_rows(self, tmp_path):
        path = _csv(tmp_path, "Device: X1\nOperator: J\ntime,a\n0,1\n0.1,2\n0.2,3\n")
        msg = _raises(path, r"bad.csv: line 2, column 'Device: X1', holds 'Operator: J'.*If line 2 "
                            r"and the lines above it are metadata or a header, pass skip_rows=")
        assert "skip_rows" in msg
        sig = load(path, skip_rows=2)
        assert sig.channels == ("a",) and sig.fs == 10.0
        np.testing.assert_array_equal(sig.data[0], [1, 2, 3])

    @pytest.mark.parametrize("bad", [-1, 1.5, True, "2"])
    def test_bad_skip_rows(self, tmp_path, bad):
        _raises(_csv(tmp_path, "1\n2\n3\n"), r"skip_rows must be a whole number of lines >= 0",
                fs=10.0, skip_rows=bad)


class TestTruncatedWav:
    def _wav(self, tmp_path, keep):
        path = tmp_path / "full.wav"
        x = (np.random.default_rng(3).standard_normal((4000, 2)) * 3000).astype("<i2")
        wavfile.write(path, 8000, x)
        cut = tmp_path / "cut.wav"
        cut.write_bytes(path.read_bytes()[:keep])
        return cut

    @pytest.mark.parametrize("keep", [44 + 4 * 1000, 8022])
    def test_header_claims_more_frames_than_present(self, tmp_path, keep):
        path = self._wav(tmp_path, keep)
        held = (keep - 44) // 4
        _raises(path, rf"cut.wav: its header claims 4,000 frames \(16,000 bytes of samples\) but "
                      rf"the file holds {held:,} .*cut short.*format='raw', offset=44, "
                      r"n_channels=2, fs=8000")


class TestSignalArguments:
    @pytest.mark.parametrize("flag", [True, False, np.True_])
    def test_fs_bool_refused(self, flag):
        with pytest.raises(InputError, match=r"fs must be a number in Hz; got fs=(np\.)?(True|False)"
                                             r" \(a bool, not a rate\)"):
            Signal(np.zeros(100), fs=flag)

    def test_load_fs_bool_refused(self, tmp_path):
        _raises(_csv(tmp_path, "1\n2\n3\n"), r"got fs=True \(a bool, not a rate\)", fs=True)

    @pytest.mark.parametrize("index", [0.5, np.float64(1.0), [0.5], True])
    def test_fractional_channel_index_refused(self, tmp_path, index):
        path = tmp_path / "a.npy"
        np.save(path, np.zeros((3, 100)))
        _raises(path, r"channels= takes names \(str\) or whole-number indices \(int\); got .* "
                      r"is never rounded", fs=10.0, channels=index)

    def test_signal_channel_float_refused(self):
        sig = Signal(np.zeros((3, 100)), fs=10.0)
        with pytest.raises(InputError, match=r"A channel is chosen by name \(str\) or index "
                                             r"\(int\); got 0.5 of type float"):
            sig.channel(0.5)

    def test_transposed_array_is_named(self):
        with pytest.raises(InputError, match=r"Signal data of shape \(10000, 3\) has more channels "
                                             r"\(10,000\) than samples \(3\).*probably a \(samples, "
                                             r"channels\) array\. Pass data\.T \(shape \(3, 10000\)\)"):
            Signal(np.zeros((10000, 3)), fs=100.0)

    def test_masked_samples_become_gaps(self):
        x = np.ma.masked_array(np.arange(10.0), mask=[0, 1, 0, 0, 1, 0, 0, 0, 0, 0])
        sig = Signal(x, fs=10.0)
        np.testing.assert_array_equal(sig.data[0], [0, np.nan, 2, 3, np.nan, 5, 6, 7, 8, 9])
        assert "2 masked samples of the masked array set to NaN (gaps)" in sig.source
        assert not np.isnan(x.data).any()  # the caller's array is not changed
        ints = Signal(np.ma.masked_array(np.arange(10), mask=[1] + [0] * 9), fs=10.0)
        assert ints.data.dtype == np.float64 and np.isnan(ints.data[0, 0])
        plain = Signal(np.ma.masked_array(np.arange(10)), fs=10.0)
        assert plain.data.dtype.kind == "i" and "masked" not in plain.source

    def test_masked_samples_are_refused_by_an_estimator(self):
        import specbench as sb

        x = np.ma.masked_array(np.random.default_rng(4).standard_normal(4096))
        x[100] = np.ma.masked
        with pytest.raises(sb.SpecbenchError, match=r"(?i)non-finite|NaN|gap"):
            sb.Welch(segment_length=256)(Signal(x, fs=100.0))


class TestClearInsteadOfRaw:
    """Mistakes that raised raw Python/numpy/h5py exceptions or gave a garbled message."""

    def test_unknown_keyword_suggests_the_nearest(self, tmp_path):
        path = _csv(tmp_path, "1\n2\n3\n")
        _raises(path, r"sb.load has no argument 'on_gaps'\. Did you mean on_gap=\? Its arguments are fs, ",
                on_gaps="fill")
        _raises(path, r"sb.load has no argument 'sample_rate'\. (Did you mean .*)?Its arguments",
                sample_rate=10)

    def test_positional_argument_is_named(self, tmp_path):
        with pytest.raises(InputError, match=r"sb.load takes the path as its only positional argument; got 1 "
                                             r"more \(1000\)\. Pass the others by name, e.g. sb.load\(path, "
                                             r"fs=1000.0\)"):
            load(_csv(tmp_path, "1\n2\n3\n"), 1000)

    def test_missing_path(self):
        with pytest.raises(InputError, match=r"sb.load needs the path of the file to load"):
            load()

    @pytest.mark.parametrize("offset", [-2, 1.5, True])
    def test_bad_raw_offset(self, tmp_path, offset):
        path = tmp_path / "r.bin"
        np.zeros(100, "<i2").tofile(path)
        _raises(path, rf"offset must be a whole number of bytes >= 0 \(the header to skip at the start of "
                      rf"r.bin\); got {re.escape(repr(offset))}", dtype="<i2", fs=10.0, offset=offset)

    def test_permission_denied(self, tmp_path, monkeypatch):
        path = _csv(tmp_path, "1\n2\n3\n", name="locked.csv")
        real_open = builtins.open

        def denied(file, *args, **kwargs):  # root ignores chmod; simulate the denial at open
            if str(file) == str(path):
                raise PermissionError(13, "Permission denied", str(file))
            return real_open(file, *args, **kwargs)

        monkeypatch.setattr(builtins, "open", denied)
        _raises(path, r"locked.csv cannot be read: permission denied .*Check the file's permissions", fs=10.0)

    @pytest.mark.parametrize("value", ["1 kHz", b"1 kHz"])
    def test_hdf5_rate_stored_as_text(self, tmp_path, value):
        h5py = pytest.importorskip("h5py")
        path = tmp_path / "daq.h5"
        with h5py.File(path, "w") as f:
            f.create_dataset("x", data=np.zeros(100)).attrs["fs"] = np.bytes_(value) if isinstance(
                value, bytes) else value
        _raises(path, r"the attribute 'fs' of /x in daq.h5 holds '1 kHz', not a number of Hz\. Store the "
                      r"rate as a number .*or pass fs=")

    def test_unicode_minus_is_pointed_out(self, tmp_path):
        _raises(_csv(tmp_path, "a\n1.5\n\u22122.5\n3\n"),
                r"line 3, column 'a', holds '\u22122.5'.*U\+2212 MINUS SIGN where a number has the ASCII minus "
                r"'-' \('-2.5' would read\)", fs=10.0)

    @pytest.mark.parametrize("text, sep", [("a;b\n1.234,5;2\n2.345,5;3\n3;4\n", "'.'"),
                                           ("a\n1 234.5\n2\n3\n", "space"),
                                           ("1\u202f234.5\n2\n3\n", "narrow no-break space")])
    def test_thousands_separators_are_named(self, tmp_path, text, sep):
        _raises(_csv(tmp_path, text), rf"It looks like a number with the thousands separator {sep}; "
                                      r"specbench reads no thousands separators", fs=10.0)


def test_empty_channel_list_is_refused(tmp_path):  # found by tests/data/test_fuzz_loaders.py
    path = tmp_path / "a.npy"
    np.save(path, np.zeros((3, 100)))
    _raises(path, r"channels=\[\] selects no channel of a.npy\. Name at least one of", fs=10.0, channels=[])


# found by the loader fuzz (tests/data/test_fuzz_loaders.py): a tab row of empty cells was skipped
def test_tab_row_of_empty_cells_is_kept(tmp_path):
    path = _csv(tmp_path, "1\t2\n\t\n3\t4\n\n5\t6\n")
    _raises(path, r"bad.csv has 2 non-finite values.*first at line 2 of bad.csv", fs=10.0)
    sig = load(path, fs=10.0, on_gap="fill")
    np.testing.assert_array_equal(sig.data, [[1, np.nan, 3, 5], [2, np.nan, 4, 6]])  # the blank line is no row
    first = load(_csv(tmp_path, "\t\n1\t2\n3\t4\n", name="first.csv"), fs=10.0, on_gap="fill")
    np.testing.assert_array_equal(first.data, [[np.nan, 1, 3], [np.nan, 2, 4]])  # also as the first row
