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
