"""The frozen cells, executed in fresh namespaces on the same data, reproduce the estimate.

- specbench form: bit for bit (``np.array_equal``) for every estimator and a grid of settings.
- plain numpy/scipy form: to floating-point precision (rtol 1e-10).  For Welch and the
  periodogram the reference is the core's own result, which the core's tests check against
  ``scipy.signal.welch`` / ``scipy.signal.periodogram`` (scipy, reference library); the
  plain cell calls those functions, so these tests also tie the confidence bands written
  out in the cell (Percival & Walden 1993, eq. (292b) dof; chi-square quantiles) to the
  core's.
"""

from __future__ import annotations

import ast
import dataclasses
import datetime as dt
import re
import warnings

import numpy as np
import pytest
from freeze_support import FS, assert_close, make_state, run_cell

import specbench as sb
from specbench.freeze import FreezeState, code_cell, read_settings, save_state

SPECTRAL_GRID = [
    sb.Welch(),
    sb.Welch(segment_length=512, overlap=0.75, window=("kaiser", 8.6)),
    sb.Welch(segment_length=600, overlap=0.3, detrend="linear", scaling="spectrum"),
    sb.Welch(segment_length=256, average="median"),  # odd number of segments
    sb.Welch(segment_length=400, overlap=0.0, average="median", detrend="none"),  # even number
    sb.Welch(segment_length=1000, nfft=1537, sides="twosided", window="flattop"),  # odd nfft
    sb.Welch(segment_length=512, nfft=1024, sides="twosided", confidence=0.9),
    sb.Welch(segment_length=333, overlap=0.61, window=("tukey", 0.25), nfft=401),
    sb.Welch(window=("general_cosine", (0.5, 0.5)), overlap=0.1 + 0.2),
    sb.Welch(segment_length=512, gaps="skip"),
    sb.Welch(segment_length=512, gaps="skip", average="median", sides="twosided"),
    sb.Periodogram(),
    sb.Periodogram(window="hann", detrend="linear", scaling="spectrum"),
    sb.Periodogram(nfft=20_001, sides="twosided"),
    sb.Multitaper(segment_length=2048),
    sb.Multitaper(bandwidth=2.5, tapers=3, adaptive=False, segment_length=1024, nfft=2048),
    sb.Multitaper(segment_length=1000, detrend="linear", scaling="spectrum"),
    sb.Multitaper(bandwidth=3.0, segment_length=1500, sides="twosided", nfft=1501, detrend="none"),
    sb.Multitaper(bandwidth=2.0, tapers=1, confidence=0.8),  # whole record, one taper
    sb.Correlogram(),
    sb.Correlogram(max_lag=100, lag_window="bartlett", nfft=1000, detrend="linear"),
    sb.Correlogram(max_lag=64, nfft=513, sides="twosided", scaling="spectrum"),
    sb.Correlogram(max_lag=200, lag_window="parzen", nfft=400, sides="twosided", detrend="none"),
]

ACF_GRID = [
    sb.Autocorrelation(),
    sb.Autocorrelation(max_lag=0.05),
    sb.Autocorrelation(max_lag=0.3, normalize=False, unbiased=True),
    sb.Autocorrelation(max_lag=0.1, band="bartlett", detrend="linear", confidence=0.99),
    sb.Autocorrelation(max_lag=0.02, band="bartlett", normalize=False, detrend="none"),
    sb.Autocorrelation(unbiased=True, band="white", confidence=0.9),
]

SPECTRUM_PARTS = ("freq", "value", "lower", "upper", "dof")
CORRELATION_PARTS = ("lag", "value", "lower", "upper")
SCIPY_NAMES = {"freq": "freq", "value": "psd", "lower": "lower", "upper": "upper", "dof": "dof"}
SCIPY_ACF_NAMES = {"lag": "lag", "value": "acf", "lower": "acf_lower", "upper": "acf_upper"}


def _ids(grid):
    return [repr(e) for e in grid]


def _pairs():
    """Every spectral setting, each with one autocorrelation setting (cycled)."""
    return [(est, ACF_GRID[i % len(ACF_GRID)]) for i, est in enumerate(SPECTRAL_GRID)]


def _assert_same(ns, state):
    spec, corr = ns["spectrum"], ns["correlation"]
    for part in SPECTRUM_PARTS:
        a, b = getattr(spec, part), getattr(state.spectrum, part)
        assert a.shape == b.shape and np.array_equal(a, b), f"spectrum.{part} differs"
    assert spec.estimator == state.estimator
    for part in CORRELATION_PARTS:
        a, b = getattr(corr, part), getattr(state.correlation, part)
        assert a.shape == b.shape and np.array_equal(a, b), f"correlation.{part} differs"
    assert corr.estimator == state.correlation_estimator


def _assert_scipy_close(ns, state, rtol=1e-10):
    for part, name in SCIPY_NAMES.items():
        assert_close(ns[name], getattr(state.spectrum, part), rtol, what=name)
    for part, name in SCIPY_ACF_NAMES.items():
        assert_close(ns[name], getattr(state.correlation, part), rtol, what=name)


# --------------------------------------------------------------------------- the grid


@pytest.mark.parametrize("est, acf", _pairs(), ids=_ids(SPECTRAL_GRID))
def test_specbench_form_is_bit_for_bit(signal, est, acf):
    state = make_state(signal, est, acf, channel="shaker", span=(1.5, 21.5))
    ns = run_cell(code_cell(state, "specbench"), x=signal)
    _assert_same(ns, state)


@pytest.mark.parametrize("est, acf", _pairs(), ids=_ids(SPECTRAL_GRID))
def test_scipy_form_agrees_to_floating_point_precision(signal, est, acf):
    state = make_state(signal, est, acf, channel="shaker", span=(1.5, 21.5))
    code = code_cell(state, "scipy")
    assert "specbench" not in _code_only(code)
    ns = run_cell(code, x=signal.data)
    _assert_scipy_close(ns, state)


@pytest.mark.parametrize("acf", ACF_GRID, ids=_ids(ACF_GRID))
def test_every_autocorrelation_setting_both_forms(signal, acf):
    state = make_state(signal, sb.Welch(segment_length=512), acf, channel="frame")
    _assert_same(run_cell(code_cell(state, "specbench"), x=signal), state)
    _assert_scipy_close(run_cell(code_cell(state, "scipy"), x=signal.data), state)


@pytest.mark.parametrize(
    "est",
    [sb.Welch(segment_length=1024, detrend="linear"), sb.Multitaper(segment_length=1024), sb.Correlogram(max_lag=128)],
    ids=repr,
)
def test_all_channels_fs_override_and_no_span(signal, est):
    """channel=None analyses every channel (2-D results); the fs override changes the span's samples."""
    state = make_state(signal, est, sb.Autocorrelation(max_lag=0.02), fs=1250.0, span=(0.25, 12.0))
    assert state.spectrum.value.shape[0] == 2
    assert state.analysed_signal().fs == 1250.0
    _assert_same(run_cell(code_cell(state, "specbench"), x=signal), state)
    ns = run_cell(code_cell(state, "scipy"), x=signal.data)
    _assert_scipy_close(ns, state)


def test_whole_record_without_selection(signal):
    state = make_state(signal, sb.Welch(segment_length=2048), sb.Autocorrelation())
    code = code_cell(state, "specbench")
    assert "sig = x if isinstance(x, sb.Signal) else sb.Signal(\n    x, fs=1000.0, channels=" in code
    assert ".span(" not in code and ".channel(" not in code
    _assert_same(run_cell(code, x=signal), state)
    scode = code_cell(state, "scipy")
    assert "samples = np.atleast_2d(x)  #" in scode
    _assert_scipy_close(run_cell(scode, x=signal.data), state)


# --------------------------------------------------------------------------- data sources


def test_in_memory_array_given_to_the_workbench(record):
    """The workbench wrapped a plain array: the cell wraps it the same way (same fs, channel names)."""
    sig = sb.Signal(record, fs=FS)
    state = make_state(sig, sb.Welch(segment_length=1024), channel="ch1", span=(2.0, 9.0), data_name="accel")
    code = code_cell(state, "specbench")
    assert "sig = accel if isinstance(accel, sb.Signal) else sb.Signal(accel, fs=1000.0)" in code
    _assert_same(run_cell(code, accel=record), state)
    _assert_same(run_cell(code, accel=sig), state)
    _assert_scipy_close(run_cell(code_cell(state, "scipy"), accel=record), state)


def test_in_memory_signal_with_its_own_selection(signal):
    """A Signal already cut by the user (origin None, selection steps): the variable is that Signal."""
    given = signal.span(3.0, 23.0)
    state = make_state(given, sb.Multitaper(segment_length=512), channel="frame", span=(1.0, 11.0))
    _assert_same(run_cell(code_cell(state, "specbench"), x=given), state)
    _assert_scipy_close(run_cell(code_cell(state, "scipy"), x=given.data), state)


def test_csv_file_source(tmp_path, record, monkeypatch):
    path = tmp_path / "stand_run.csv"
    t = np.arange(record.shape[1]) / FS
    np.savetxt(path, np.column_stack([t, record.T]), fmt="%.17g", delimiter=",",
               header="time [s],shaker [m/s^2],frame [m/s^2]", comments="")
    monkeypatch.chdir(tmp_path)
    sig = sb.load("stand_run.csv", time_column="time")
    state = make_state(sig, sb.Welch(segment_length=1024, overlap=0.75), sb.Autocorrelation(max_lag=0.1),
                       channel="frame", span=(4.0, 20.0))
    code = code_cell(state, "specbench")
    assert "sig = sb.load('stand_run.csv', time_column='time').channel('frame').span(4.0, 20.0)" in code
    _assert_same(run_cell(code), state)
    scode = code_cell(state, "scipy")
    assert "sb.load('stand_run.csv', time_column='time').data" in scode  # says how to get `x`
    _assert_scipy_close(run_cell(scode, x=sb.load("stand_run.csv", time_column="time").data), state)


def test_memory_mapped_npy_with_preselected_channel(tmp_path, record):
    path = tmp_path / "stand.npy"
    np.save(path, record.astype(np.float64))
    sig = sb.load(str(path), fs=FS).channel("ch0")  # the user cut it before the workbench
    assert isinstance(sig.data.base, np.memmap) or isinstance(sig.data, np.memmap)
    state = make_state(sig, sb.Welch(segment_length=2048, average="median"), span=(0.5, 20.5))
    code = code_cell(state, "specbench")
    assert f"sig = sb.load({str(path)!r}, fs=1000.0)\nsig = sig.channel('ch0').span(0.5, 20.5)\n" in code
    _assert_same(run_cell(code), state)
    _assert_scipy_close(run_cell(code_cell(state, "scipy"), x=sig.data), state)


def test_demo_source():
    sig = sb.demo("white-noise", duration=30.0, seed=3)
    state = make_state(sig, sb.Correlogram(max_lag=64), sb.Autocorrelation(max_lag=0.05), span=(1.0, 29.0))
    code = code_cell(state, "specbench")
    assert "sb.demo('white-noise', duration=30.0, seed=3)" in code
    _assert_same(run_cell(code), state)
    _assert_scipy_close(run_cell(code_cell(state, "scipy"), x=sig.data), state)


def test_demo_with_gaps_and_welch_skip():
    """Welch(gaps='skip') on a record with NaN samples: the explicit loop of the plain form matches."""
    sig = sb.demo("test-stand-nan")
    assert not np.all(np.isfinite(sig.data))
    est = sb.Welch(segment_length=1024, gaps="skip")
    state = FreezeState(signal=sig, data_name="x", channel=sig.channels[0], span=None, fs_override=None,
                        estimator=est, correlation_estimator=sb.Autocorrelation())
    data = state.analysed_signal()
    state = dataclasses.replace(state, spectrum=est(data))
    assert state.spectrum.info["segments_skipped"] > 0
    ns = {"x": sig}
    with pytest.raises(sb.InputError, match="non-finite"):  # the autocorrelation refuses the NaNs
        exec(compile(code_cell(state, "specbench"), "<frozen>", "exec"), ns)
    assert np.array_equal(ns["spectrum"].value, state.spectrum.value)  # the PSD line ran first
    scode = code_cell(state, "scipy")
    assert "gaps='skip'" in scode and "scipy.signal.welch(" not in scode
    ns = {"x": sig.data}
    with pytest.raises(ValueError, match="NaN or inf"):  # the plain autocorrelation refuses them too
        exec(compile(scode, "<frozen>", "exec"), ns)
    for part, name in SCIPY_NAMES.items():  # the PSD lines ran before the autocorrelation lines
        assert_close(ns[name], getattr(state.spectrum, part), what=name)


def test_single_precision_record_is_stated(record):
    sig = sb.Signal(record.astype(np.float32), fs=FS)
    state = make_state(sig, sb.Welch(segment_length=1024), channel="ch0")
    scode = code_cell(state, "scipy")
    assert "single precision" in scode
    ns = run_cell(scode, x=sig.data)
    assert_close(ns["psd"], state.spectrum.value, rtol=1e-5, what="psd (float32)")
    _assert_same(run_cell(code_cell(state, "specbench"), x=sig), state)


def test_complex_record_two_sided(record):
    z = record[0] + 1j * record[1]
    sig = sb.Signal(z, fs=FS)
    est = sb.Welch(segment_length=500, overlap=0.6)
    state = FreezeState(signal=sig, data_name="x", channel=None, span=(1.0, 10.0), fs_override=None,
                        estimator=est, correlation_estimator=sb.Autocorrelation())
    state = dataclasses.replace(state, spectrum=est(state.analysed_signal()))
    scode = code_cell(state, "scipy")
    assert "return_onesided=False" in scode and "Autocorrelation: no plain" in scode
    ns = run_cell(scode, x=z)
    for part, name in SCIPY_NAMES.items():
        assert_close(ns[name], getattr(state.spectrum, part), what=name)


# --------------------------------------------------------------------------- readability


def _code_only(code: str) -> str:
    return "\n".join(line for line in code.splitlines() if not line.lstrip().startswith("#"))


def test_constructor_shows_only_non_default_fields(signal):
    est = sb.Welch(segment_length=4096, overlap=0.75)
    code = code_cell(make_state(signal, est, compute=False), "specbench")
    assert "psd_estimator = sb.Welch(segment_length=4096, overlap=0.75)\n" in code
    assert "acf_estimator = sb.Autocorrelation()\n" in code
    assert "spectrum = psd_estimator(sig)\ncorrelation = acf_estimator(sig)\n" in code


@pytest.mark.parametrize("est", SPECTRAL_GRID + ACF_GRID, ids=_ids(SPECTRAL_GRID + ACF_GRID))
def test_constructor_round_trips_exactly(est):
    """repr keeps every bit of every float; the constructor line rebuilds an equal estimator."""
    rebuilt = eval("sb." + repr(est), {"sb": sb})
    assert rebuilt == est and rebuilt.to_dict() == est.to_dict()


def test_header_states_source_date_version_and_figures_of_merit(signal):
    state = make_state(signal, sb.Welch(segment_length=1024), channel="shaker", span=(1.5, 21.5))
    now = dt.datetime(2024, 5, 6, 7, 8, 9, tzinfo=dt.timezone.utc)
    code = code_cell(state, "specbench", now=now)
    head = code.split("import", 1)[0]
    assert f"specbench {sb.__version__}, frozen 2024-05-06T07:08:09+00:00" in head
    assert "in-memory data `x`: 2 channels ['shaker', 'frame'] x 24,000 samples at 1000 Hz" in head
    assert "channel 'shaker', 1.5 s to 21.5 s: 1 x 20,000 samples" in head
    spec = state.spectrum
    flat = " ".join(line.lstrip("# ") for line in head.splitlines())
    assert f"resolution {spec.resolution:.4g} Hz (ENBW 1.500 bins)" in flat
    assert f"{spec.segments} segments" in flat
    assert f"{np.median(spec.dof[1:-1]):.4g} dof per bin" in flat
    assert f"95 % band {spec.band_db():.3g} dB wide" in flat
    assert f"Parseval ratio {float(spec.parseval_ratio()[0]):.4f}" in flat
    assert all(len(line) <= 100 for line in code.splitlines())
    assert all(len(line) <= 100 for line in code_cell(state, "scipy", now=now).splitlines())


def test_header_without_or_with_stale_estimate(signal):
    state = make_state(signal, sb.Welch(), compute=False)
    assert "no estimate had been computed" in code_cell(state)
    stale = make_state(signal, sb.Welch())
    stale = dataclasses.replace(stale, estimator=sb.Welch(segment_length=2048))
    assert "made with other settings" in code_cell(stale)


def test_multitaper_and_correlogram_figures(signal):
    mt = make_state(signal, sb.Multitaper(segment_length=1024), channel="frame")
    flat = " ".join(line.lstrip("# ") for line in code_cell(mt).splitlines())
    assert "tapers, 2W = " in flat
    bt = make_state(signal, sb.Correlogram(max_lag=100), channel="frame")
    flat = " ".join(line.lstrip("# ") for line in code_cell(bt).splitlines())
    assert "max lag 100 samples, parzen lag window" in flat


def test_cells_are_valid_python_with_no_specbench_in_the_scipy_form(signal):
    for est in SPECTRAL_GRID:
        state = make_state(signal, est, compute=False, channel="frame")
        for style in ("specbench", "scipy"):
            tree = ast.parse(code_cell(state, style))
            imported = {a.name.split(".")[0] for node in ast.walk(tree) if isinstance(node, (ast.Import,))
                        for a in node.names}
            if style == "scipy":
                assert imported == {"numpy", "scipy"}
            else:
                assert imported == {"specbench"}


def test_scipy_form_uses_scipy_vocabulary(signal):
    state = make_state(signal, sb.Welch(segment_length=2048, overlap=0.75), compute=False)
    code = code_cell(state, "scipy")
    assert "nperseg, noverlap, nfft = 2048, 1536, 2048" in code
    assert re.search(r"freq, psd = scipy\.signal\.welch\(\n\s+samples, fs=fs, window=w, nperseg=nperseg, "
                     r"noverlap=noverlap, nfft=nfft,", code)
    assert "scipy.stats.chi2.ppf(1 - alpha / 2, dof)" in code


def test_rerunning_a_cell_gives_the_same_result(signal):
    """The cells never rebind the user's data variable, so running one twice changes nothing."""
    state = make_state(signal, sb.Welch(segment_length=512), channel="frame", span=(1.0, 5.0))
    for style, data in (("specbench", signal), ("scipy", signal.data)):
        code = code_cell(state, style)
        ns = run_cell(code, x=data)
        first = {k: np.copy(v) for k, v in ns.items() if isinstance(v, np.ndarray)}
        exec(compile(code, "<frozen>", "exec"), ns)
        assert ns["x"] is data
        for k, v in first.items():
            assert np.array_equal(ns[k], v), k


def test_hann_lag_window_warning_is_kept_in_the_specbench_form(signal):
    """A lag window that can go negative warns in the workbench and in the frozen cell alike."""
    est = sb.Correlogram(max_lag=400, lag_window="hamming", detrend="none")
    with pytest.warns(sb.SpecbenchWarning, match="negative density") as seen:
        state = make_state(signal, est, channel="shaker")
        ns = run_cell(code_cell(state, "specbench"), x=signal)
    assert sum(issubclass(w.category, sb.SpecbenchWarning) for w in seen) == 2
    _assert_same(ns, state)
    assert np.any(state.spectrum.value < 0)
    _assert_scipy_close(run_cell(code_cell(state, "scipy"), x=signal.data), state)


# --------------------------------------------------------------------------- errors


def test_bad_style_and_data_names(signal):
    state = make_state(signal, sb.Welch(), compute=False)
    with pytest.raises(sb.SettingsError, match="style must be one of 'specbench', 'scipy'; got 'matlab'"):
        code_cell(state, "matlab")
    for bad, pattern in [
        ("2x", "must be a Python variable name"),
        ("class", "must be a Python variable name"),
        ("list", "would hide a builtin"),
        ("np", "would hide a builtin or a module"),
        ("psd_estimator", "a name the frozen cell assigns itself"),
    ]:
        with pytest.raises(sb.SettingsError, match=pattern):
            code_cell(dataclasses.replace(state, data_name=bad), "specbench")
    with pytest.raises(sb.SettingsError, match="a name the frozen cell assigns itself"):
        code_cell(dataclasses.replace(state, data_name="psd"), "scipy")


def test_data_name_sig_or_samples_does_not_collide(signal):
    state = make_state(signal, sb.Welch(segment_length=512), channel="frame", data_name="sig")
    ns = run_cell(code_cell(state, "specbench"), sig=signal)
    assert np.array_equal(ns["spectrum"].value, state.spectrum.value)
    state = dataclasses.replace(state, data_name="samples")
    ns = run_cell(code_cell(state, "scipy"), samples=signal.data)
    assert_close(ns["psd"], state.spectrum.value)


@pytest.mark.parametrize("kind", ["DataFrame", "Series", "DataArray"])
def test_pandas_and_xarray_given_to_the_workbench(record, kind):
    """The workbench converts these with sb.Signal.from_pandas / from_xarray; the cell does the same."""
    pd = pytest.importorskip("pandas")
    xr = pytest.importorskip("xarray")
    t = np.arange(record.shape[1]) / FS
    if kind == "DataFrame":
        obj = pd.DataFrame({"shaker": record[0], "frame": record[1]}, index=pd.Index(t, name="t"))
        sig = sb.Signal.from_pandas(obj)
    elif kind == "Series":
        obj = pd.Series(record[1], index=pd.Index(t, name="t"), name="frame")
        sig = sb.Signal.from_pandas(obj)
    else:
        obj = xr.DataArray(record, dims=("channel", "time"), coords={"time": t, "channel": ["shaker", "frame"]})
        sig = sb.Signal.from_xarray(obj)
    state = make_state(sig, sb.Welch(segment_length=1024), channel=sig.channels[-1] if len(sig.channels) > 1
                       else None, span=(1.0, 15.0))
    code = code_cell(state, "specbench")
    assert "from_xarray(x)" in code if kind == "DataArray" else "from_pandas(x)" in code
    _assert_same(run_cell(code, x=obj), state)
    _assert_same(run_cell(code, x=sig), state)
    _assert_scipy_close(run_cell(code_cell(state, "scipy"), x=sig.data), state)


# --------------------------------------------------------------------------- outside references


def test_plain_welch_dof_matches_harris_overlap_correlation(signal):
    """The dof lines of the plain cell, against a published figure: the Hann window at 50 %
    overlap has an overlap correlation of 16.7 % (F. J. Harris, Proc. IEEE 66(1), 1978,
    Table I), so with only adjacent segments overlapping, eq. (292b) of Percival & Walden
    (1993) gives dof = 2 n^2 / (n + 2 (n - 1) c^2) with c = 0.167 (to the table's 3 digits)."""
    state = make_state(signal, sb.Welch(segment_length=1000, overlap=0.5), channel="frame")
    ns = run_cell(code_cell(state, "scipy"), x=signal.data)
    n = ns["nseg"]
    assert n == 47
    # the table's 0.167 stands for any c in [0.1665, 0.1675)
    high, low = (2 * n * n / (n + 2 * (n - 1) * c**2) for c in (0.1665, 0.1675))
    assert np.all((low < ns["dof"][1:-1]) & (ns["dof"][1:-1] < high))
    assert np.all((low / 2 < ns["dof"][[0, -1]]) & (ns["dof"][[0, -1]] < high / 2))


def test_plain_autocorrelation_band_matches_statsmodels(signal):
    """The plain cell's Bartlett band equals statsmodels.tsa.stattools.acf(alpha=...) (statsmodels,
    reference library), which implements Bartlett's (1946) formula."""
    stattools = pytest.importorskip("statsmodels.tsa.stattools")
    acf = sb.Autocorrelation(max_lag=0.08, band="bartlett", confidence=0.95)
    state = make_state(signal, sb.Welch(segment_length=512), acf, channel="shaker", span=(0.0, 12.0))
    ns = run_cell(code_cell(state, "scipy"), x=signal.data)
    x = state.analysed_signal().data[0]
    kwargs = {"result_object": False} if "result_object" in stattools.acf.__code__.co_varnames else {}
    ref, conf = stattools.acf(x, nlags=80, alpha=0.05, fft=True, **kwargs)
    np.testing.assert_allclose(ns["acf"][0], ref, rtol=1e-10, atol=1e-13)
    np.testing.assert_allclose(ns["acf_lower"][0], conf[:, 0], rtol=1e-10, atol=1e-13)
    np.testing.assert_allclose(ns["acf_upper"][0], conf[:, 1], rtol=1e-10, atol=1e-13)


# --------------------------------------------------------------------------- inputs and fingerprints

_SOURCES = ("array", "signal", "demo", "npy")


def _source(kind, record, tmp_path):
    if kind == "array":
        return sb.Signal(record, fs=FS)
    if kind == "signal":
        return sb.Signal(record, fs=FS, channels=["shaker", "frame"], unit="m/s^2")
    if kind == "demo":
        return sb.demo("white-noise", duration=20.0)
    np.save(tmp_path / "run.npy", record)
    return sb.load(tmp_path / "run.npy", fs=FS)


def _declared_input(code):
    """The variable the cell's INPUT line names (the only thing the cell says it needs)."""
    match = re.search(r"^# INPUT: define `(\w+)` before running this cell", code, re.M)
    assert match, "the plain cell must name its input on an '# INPUT:' line"
    return match.group(1)


@pytest.mark.parametrize("kind", _SOURCES)
@pytest.mark.parametrize("est", [sb.Welch(segment_length=512), sb.Periodogram(), sb.Multitaper(segment_length=1024),
                                 sb.Correlogram(max_lag=200)], ids=repr)
def test_every_plain_cell_runs_given_only_what_it_says_it_needs(tmp_path, record, kind, est):
    sig = _source(kind, record, tmp_path)
    state = make_state(sig, est, sb.Autocorrelation(max_lag=0.05), span=(1.0, 9.0), data_name="run_data")
    code = code_cell(state, "scipy")
    name = _declared_input(code)
    assert name == "run_data"
    ns = run_cell(code, **{name: sig.data})
    assert_close(ns["psd"], state.spectrum.value, what="psd")
    assert_close(ns["acf"], state.correlation.value, what="acf")
    with pytest.raises(RuntimeError, match=r"This frozen cell needs its input `run_data`: an array of "
                                           rf"{sig.n_channels} channels? x {sig.n_samples:,} samples"):
        run_cell(code)
    # the specbench form of in-memory data says the same; loaded and demo data need nothing
    scode = code_cell(state, "specbench")
    if kind in ("array", "signal"):
        with pytest.raises(RuntimeError, match=r"This frozen cell needs its input `run_data`"):
            run_cell(scode)
    else:
        with warnings.catch_warnings():
            warnings.simplefilter("error", sb.SpecbenchWarning)
            assert np.array_equal(run_cell(scode)["spectrum"].value, state.spectrum.value)


def test_the_specbench_cell_warns_when_its_data_differ(signal):
    state = make_state(signal, sb.Welch(segment_length=512), channel="frame")
    code = code_cell(state, "specbench")
    made = sb.fingerprint(state.analysed_signal())
    assert f"    content={made.content!r}," in code and "sb.check_data(sig, made_on, check=True)" in code
    with warnings.catch_warnings():
        warnings.simplefilter("error", sb.SpecbenchWarning)
        assert np.array_equal(run_cell(code, x=signal)["spectrum"].value, state.spectrum.value)
    shorter = sb.Signal(signal.data[:, :15000], fs=signal.fs, channels=signal.channels, unit=signal.unit)
    with pytest.warns(sb.SpecbenchWarning) as caught:
        run_cell(code, x=shorter)
    text = str(caught[0].message)
    assert text.startswith("The data differ from the data this cell was frozen on: length 15,000 samples, "
                           "made on 24,000; span 0 to 15 s, made on 0 to 24 s; content (the samples differ).")
    assert "pass check=False to sb.check_data" in text
    changed = signal.data.copy()
    changed[1, 5000] *= 1.0 + 1e-9
    with pytest.warns(sb.SpecbenchWarning, match=r"frozen on: content \(the samples differ\)\."):
        run_cell(code, x=sb.Signal(changed, fs=signal.fs, channels=signal.channels, unit=signal.unit))
    with pytest.warns(sb.SpecbenchWarning,
                      match=r"frozen on: rate 1024 Hz, made on 1000 Hz; span 0 to 23.4375 s, made on 0 to 24 s\. "):
        run_cell(code, x=signal.with_fs(1024.0))
    reuse = code.replace("check=True)", "check=False)")
    with warnings.catch_warnings():
        warnings.simplefilter("error", sb.SpecbenchWarning)
        run_cell(reuse, x=shorter)


def test_settings_from_a_state_record_the_fingerprint(tmp_path, signal):
    state = make_state(signal, sb.Welch(segment_length=512), channel="frame", span=(2.0, 20.0), compute=False)
    s = read_settings(save_state(state, tmp_path / "s.json"))
    assert s.fingerprint == sb.fingerprint(state.analysed_signal())
    assert read_settings(save_state(state, tmp_path / "n.json", fingerprint=False)).fingerprint is None
