"""Bad input gets a clear error naming the problem and the fix; nothing is clamped."""

import numpy as np
import pytest

import specbench as sb


@pytest.mark.parametrize(
    "call, match",
    [
        (lambda: sb.Welch()(np.zeros(100)), r"plain array carries no sample rate\. Pass fs="),
        (lambda: sb.Welch()(np.zeros(100), fs=-1), r"fs must be a positive, finite number"),
        (lambda: sb.Welch()(np.zeros(100), fs="fast"), r"fs must be a positive number in Hz\. Got 'fast'"),
        (lambda: sb.Welch()(np.array([]), fs=1.0), r"0 samples on its last axis; at least 2"),
        (lambda: sb.Welch()(np.zeros((4, 1)), fs=1.0), r"transpose a \(samples, channels\) array with \.T"),
        (lambda: sb.Welch()(np.float64(3.0), fs=1.0), r"scalar"),
        (lambda: sb.Welch()(np.array(["a", "b"]), fs=1.0), r"dtype <U1, which is not numeric"),
        (lambda: sb.Welch()({"a": 1}, fs=1.0), r"object of type dict"),
        (
            lambda: sb.Welch(segment_length=4096)(np.zeros(1000), fs=1.0),
            r"segment_length of Welch is 4096 samples, but the data has only 1000\. Choose segment_length <= 1000 "
            r"\(for example 512\)",
        ),
        (lambda: sb.Welch(sides="onesided")(np.zeros(2048, complex), fs=1.0), r"sides='twosided'"),
        (lambda: sb.Periodogram(nfft=10)(np.zeros(100), fs=1.0), r"never truncates data"),
        (lambda: sb.Multitaper(segment_length=64, bandwidth=40.0)(np.zeros(100), fs=1.0), r"allow NW < 32"),
        (lambda: sb.Correlogram(max_lag=500)(np.zeros(100), fs=1.0), r"max_lag of Correlogram is 500"),
        (lambda: sb.Correlogram()(np.zeros(1000, complex), fs=1.0), r"real data only"),
    ],
)
def test_input_errors(call, match):
    with pytest.raises(sb.InputError, match=match):
        call()


def test_nonfinite_error_names_count_first_positions_and_channel():
    x = np.zeros((2, 5000))
    x[1, 300] = np.inf
    x[1, 301:303] = np.nan
    with pytest.raises(
        sb.InputError,
        match=r"3 non-finite samples \(NaN or inf\), first at sample 300 of channel 1, sample 301 of channel 1.*"
        r"gaps='skip'",
    ):
        sb.Welch()(x, fs=1.0)
    for est in (sb.Periodogram(), sb.Multitaper(segment_length=1000), sb.Correlogram()):
        with pytest.raises(sb.InputError, match="3 non-finite samples"):
            est(x, fs=1.0)


def test_all_segments_gapped_is_an_error():
    x = np.random.default_rng(0).standard_normal(2048)
    x[::100] = np.nan
    with pytest.raises(sb.InputError, match=r"Every one of the 3 segments touches a non-finite sample"):
        sb.Welch(gaps="skip")(x, fs=1.0)


def test_signal_with_conflicting_fs():
    sig = type("S", (), dict(data=np.zeros((1, 100)), fs=10.0, channels=("a",), unit=""))()
    with pytest.raises(sb.InputError, match=r"fs=20\.0 was passed for a signal whose sample rate is 10\.0 Hz"):
        sb.Welch(segment_length=64)(sig, fs=20.0)
    assert sb.Welch(segment_length=64)(sig, fs=10.0).fs == 10.0


def test_trailing_samples_are_reported_not_hidden():
    spec = sb.Welch(segment_length=256, overlap=0.5)(np.random.default_rng(1).standard_normal(1000), fs=1.0)
    assert spec.segments == 6 and spec.samples_used == 896 and spec.info["samples_dropped"] == 104


def test_float32_is_not_upcast_as_a_whole():
    import tracemalloc

    x = np.random.default_rng(2).standard_normal(4_000_000).astype(np.float32)
    est = sb.Welch(segment_length=4096, overlap=0.75)
    est(x[:100_000], fs=1.0)  # warm caches
    tracemalloc.start()
    est(x, fs=1.0)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    # the record is 16 MB; a float64 copy alone would be 32 MB (scipy: 8-16x the input)
    assert peak < 0.75 * x.nbytes, peak


def _noise(n=4096, seed=0):
    return np.random.default_rng(seed).standard_normal(n)


@pytest.mark.parametrize(
    "call, kind, match",
    [
        # finite data whose power overflows: named as such, with the fix (was "0 non-finite samples")
        (lambda x: sb.Welch()(x * 1e200, fs=1.0), sb.InputError,
         r"finite, but their power overflows: the largest \|sample\| is 3\.9e\+200.* float64 .* Scale the data"),
        (lambda x: sb.Welch()((x * 1e30).astype(np.float32), fs=1.0), sb.InputError,
         r"power overflows.* float32 number \(3\.4e\+38\)\. .*\(x\.astype\(np\.float64\)\)"),
        (lambda x: sb.Autocorrelation()(x * 1e200, fs=1.0), sb.InputError, r"power overflows"),
        (lambda x: sb.Correlogram()(x * 1e200, fs=1.0), sb.InputError, r"power overflows"),
        (lambda x: sb.Multitaper()(x * 1e200, fs=1.0), sb.InputError, r"power overflows"),
        # constant data
        (lambda x: sb.Multitaper()(np.ones(4096), fs=1.0), sb.InputError,
         r"The data are constant \(every sample equals 1\): a constant has no spectrum"),
        (lambda x: sb.Multitaper(segment_length=512)(np.vstack([x, np.full(4096, 2.0)]), fs=1.0), sb.InputError,
         r"Channel 1 is constant \(every sample equals 2\)"),
        (lambda x: sb.Autocorrelation()(np.ones(4096), fs=1.0), sb.InputError,
         r"Autocorrelation: the data has zero variance after detrending \(constant data\)"),
        (lambda x: sb.Autocorrelation(detrend="none", normalize=False)(np.zeros(100), fs=1.0), sb.InputError,
         r"zero variance"),
        (lambda x: sb.CrossCorrelation(band="bartlett")(np.ones(4096), x, fs=1.0), sb.InputError,
         r"CrossCorrelation: channel 'x' has zero variance after detrending"),
        # windows that scipy cannot build, or that pass nothing
        (lambda x: sb.Welch(window=("dpss", 600.0))(x, fs=1.0), sb.SettingsError,
         r"The window \('dpss', 600\.0\) needs NW < n/2, but it is applied to 1024 samples \(NW < 512\)"),
        (lambda x: sb.Welch(window=("general_cosine", (0.0, 0.0))), sb.SettingsError,
         r"All its coefficients are zero, so the window passes nothing"),
        # arguments
        (lambda x: sb.Welch(segment_lenght=256), sb.SettingsError,
         r"Welch has no parameter 'segment_lenght'\. Did you mean 'segment_length'\? Its parameters are: window,"),
        (lambda x: sb.Multitaper(bandwith=3.0), sb.SettingsError, r"Did you mean 'bandwidth'\?"),
        (lambda x: sb.Autocorrelation(zzz=1), sb.SettingsError, r"Autocorrelation has no parameter 'zzz'\. Its"),
        (lambda x: sb.Welch(256), sb.SettingsError,
         r"Welch takes its settings by name only; got 1 positional argument\(s\) \(256\)"),
        (lambda x: sb.Welch(nfft=2**40), sb.SettingsError,
         r"'nfft' parameter of Welch must be None \(no zero padding\) or an integer in the range \[2, 16777216\]\. "
         r"Got 1099511627776 instead\. Zero padding beyond 2\*\*24"),
        (lambda x: sb.Periodogram(nfft=2**25), sb.SettingsError, r"\[2, 16777216\]"),
        # median averaging whose segment matrix would not fit: refused before allocating
        (lambda x: sb.Welch(segment_length=16, overlap=0.9, average="median", nfft=2**24)(np.zeros(10**6), fs=1.0),
         sb.InputError, r"Median averaging keeps every segment's periodogram: 1 channel\(s\) x 499,993 segments x "
         r"8,388,609 bins need 31249\.6 GiB, more than the .* GiB \(a quarter of this machine's memory\)"),
        # input
        (lambda x: sb.Welch(segment_length=256)(x, fs=True), sb.InputError,
         r"fs must be a positive number in Hz, not a bool \(fs=True would mean 1 Hz\)"),
        (lambda x: sb.Welch()(np.zeros((10000, 3)), fs=1.0), sb.InputError,
         r"shape \(10000, 3\): 10,000 channels of 3 samples each, which looks like a \(samples, channels\) array "
         r"passed the wrong way round\. Samples go on the last axis: pass x\.T \(shape \(3, 10000\)\)"),
        (lambda x: sb.Welch(segment_length=256)(np.ma.masked_greater(x, 3.0), fs=1.0), sb.InputError,
         r"2 non-finite samples \(NaN or inf\), first at sample 219, sample 3801"),
    ],
)
def test_edge_messages(call, kind, match):
    with pytest.raises(kind, match=match):
        call(_noise())


def test_masked_samples_are_gaps_for_the_gap_policy():
    x = _noise()
    masked = np.ma.masked_greater(x, 3.0)
    est = sb.Welch(segment_length=256, gaps="skip")
    spec = est(masked, fs=1.0)
    filled = np.where(masked.mask, np.nan, x)
    ref = est(filled, fs=1.0)
    assert spec.info["segments_skipped"] == ref.info["segments_skipped"] > 0
    np.testing.assert_array_equal(spec.value, ref.value)
    # an all-False mask is just the data
    np.testing.assert_array_equal(sb.Welch(segment_length=256)(np.ma.masked_array(x, mask=False), fs=1.0).value,
                                  sb.Welch(segment_length=256)(x, fs=1.0).value)


@pytest.mark.parametrize("n", [4, 5, 7])
def test_short_segments_allowed_by_the_constraint_work(n):
    # Welch accepts segment_length >= 4; window_info accepts them too (it required 8)
    spec = sb.Welch(segment_length=n, window="flattop")(_noise(256), fs=1.0)
    assert spec.resolution > 0 and np.all(np.isfinite(spec.value))
    assert sb.window_info("hann", n).enbw_bins > 1


def test_estimator_copies_still_work():
    import copy
    import pickle

    est = sb.Welch(segment_length=64)
    assert copy.deepcopy(est) == est and pickle.loads(pickle.dumps(est)) == est
    assert est.replace(overlap=0.25).overlap == 0.25
