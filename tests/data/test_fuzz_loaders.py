"""Property-based fuzz of the loaders (hypothesis): every outcome is a Signal whose samples match
an independent parse of the same content (numpy, written from the generated values), or an
InputError; never another exception, never a lost or shifted row.  Bounded in time."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp

import specbench as sb
from specbench._errors import InputError

FUZZ = settings(max_examples=120, deadline=None, database=None,
                suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])

cells = st.one_of(st.floats(min_value=-1e6, max_value=1e6, allow_nan=False, width=64),
                  st.integers(min_value=-10**6, max_value=10**6).map(float), st.just(math.nan))


@st.composite
def tables(draw):
    n_rows = draw(st.integers(3, 30))
    n_cols = draw(st.integers(1, 4))
    values = np.array(draw(st.lists(st.lists(cells, min_size=n_cols, max_size=n_cols),
                                    min_size=n_rows, max_size=n_rows)))
    delimiter = draw(st.sampled_from([",", ";", "\t", " "]))
    decimal = draw(st.sampled_from([".", ","])) if delimiter != "," else "."
    header = draw(st.booleans())
    fmt = draw(st.sampled_from(["repr", "%.6g", "%.3f"]))
    return values, delimiter, decimal, header, fmt


def _cell(x, fmt, decimal, delimiter):
    if math.isnan(x):
        return "NaN" if delimiter == " " else draw_missing(x)
    text = repr(float(x)) if fmt == "repr" else fmt % x
    return text.replace(".", decimal) if decimal == "," else text


def draw_missing(_x):
    return ""


def _expected(values, fmt):
    if fmt == "repr":
        return values.T
    return np.vectorize(lambda x: x if math.isnan(x) else float(fmt % x))(values).T


@FUZZ
@given(tables())
def test_written_tables_load_exactly_or_are_refused(tmp_path_factory, table):
    values, delimiter, decimal, header, fmt = table
    path = tmp_path_factory.mktemp("fuzz") / "f.csv"
    lines = []
    if header:
        lines.append(delimiter.join(f"c{j}" for j in range(values.shape[1])))
    lines += [delimiter.join(_cell(x, fmt, decimal, delimiter) for x in row) for row in values]
    first = 1 if header else 0
    if values.shape[1] == 1:  # empty lines before the first or after the last sample of a one-column
        for i in (first, -1):  # file are not samples (documented): write those gaps as NaN
            lines[i] = lines[i] or "NaN"
    path.write_text("\n".join(lines) + "\n")
    try:
        sig = sb.load(path, fs=10.0, on_gap="fill")
    except InputError as exc:
        assert str(exc)  # a named problem; e.g. an all-integer two-column file: both readings offered
        return
    expected = _expected(values, fmt)
    assert sig.data.shape == expected.shape, (sig.source, "\n".join(lines[:5]))
    np.testing.assert_array_equal(sig.data, expected)
    if header:
        assert sig.channels == tuple(f"c{j}" for j in range(values.shape[1]))


@FUZZ
@given(st.text(alphabet="0123456789.,;-+eE \tNA#\n\r\u2212", max_size=300))
def test_any_text_is_a_signal_or_an_input_error(tmp_path_factory, text):
    path = tmp_path_factory.mktemp("fuzz") / "t.csv"
    path.write_text(text, encoding="utf-8")
    try:
        sig = sb.load(path, fs=10.0, on_gap="fill")
    except InputError:
        return
    lines = [ln for ln in text.replace("\r\n", "\n").replace("\r", "\n").split("\n") if ln.strip()]
    assert 3 <= sig.n_samples <= len(text.replace("\r\n", "\n").replace("\r", "\n").split("\n"))
    commented = sum(ln.lstrip().startswith("#") for ln in lines)
    assert sig.n_samples >= len(lines) - 2 - commented - text.count("\u2212")  # header/units only


DTYPES = st.sampled_from([np.float64, np.float32, np.int16, np.int32, np.complex128, np.uint8])
RATES = st.one_of(st.floats(allow_nan=True, allow_infinity=True), st.just(True), st.just(0), st.just("1000"),
                  st.just(None), st.integers(-5, 5000))


@FUZZ
@given(hnp.arrays(DTYPES, hnp.array_shapes(min_dims=1, max_dims=3, min_side=1, max_side=12)), RATES,
       st.booleans(), st.data())
def test_arrays_given_to_signal(array, fs, use_mask, data):
    given_array = array
    if use_mask:
        mask = data.draw(hnp.arrays(np.bool_, array.shape))
        given_array = np.ma.masked_array(array, mask=mask)
    try:
        sig = sb.Signal(given_array, fs=fs)
    except InputError:
        return
    assert not isinstance(fs, bool)
    assert math.isfinite(float(fs)) and float(fs) > 0
    expected = np.atleast_2d(array)
    if use_mask and np.ma.getmaskarray(given_array).any():
        expected = np.where(np.atleast_2d(np.ma.getmaskarray(given_array)), np.nan, expected)
    assert sig.data.shape == expected.shape and sig.n_channels <= sig.n_samples
    np.testing.assert_array_equal(sig.data, expected)


@FUZZ
@given(st.one_of(st.floats(), st.booleans(), st.text(max_size=5), st.lists(st.integers(-4, 4), max_size=3),
                 st.integers(-4, 4)))
def test_channel_choices_on_load(tmp_path_factory, channels):
    path = tmp_path_factory.mktemp("fuzz") / "a.npy"
    np.save(path, np.arange(30.0).reshape(3, 10))
    try:
        sig = sb.load(path, fs=10.0, channels=channels)
    except InputError:
        return
    picks = [channels] if not isinstance(channels, list) else channels
    assert all(isinstance(c, int) and not isinstance(c, bool) for c in picks)
    np.testing.assert_array_equal(sig.data, np.arange(30.0).reshape(3, 10)[[c % 3 for c in picks]])


if __name__ == "__main__":  # pragma: no cover
    pytest.main([__file__, "-q", "--hypothesis-show-statistics"])
