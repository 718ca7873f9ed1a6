"""Bounded memory: blocks are streamed; integer data is converted block by block."""

import tracemalloc

import numpy as np
import scipy.signal

import specbench as sb


def peak_of(fn):
    fn()  # warm caches (windows, work buffers)
    tracemalloc.start()
    fn()
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return peak


def test_int16_record_is_not_copied_whole_and_matches_float():
    x = (np.random.default_rng(0).standard_normal(4_000_000) * 1000).astype(np.int16)
    est = sb.Welch(segment_length=2048)
    spec = est(x, fs=1.0)
    _, ref = scipy.signal.welch(x.astype(np.float64), nperseg=2048)
    np.testing.assert_allclose(spec.value[1:], ref[1:], rtol=2e-5)
    # a float64 copy of the record would be 32 MB; the int16 record itself is 8 MB
    assert peak_of(lambda: est(x, fs=1.0)) < 8e6


def test_gap_skipping_memory_does_not_scale_with_the_record():
    x = np.random.default_rng(1).standard_normal(4_000_000).astype(np.float32)
    x[1_000_000:1_000_050] = np.nan
    est = sb.Welch(segment_length=4096, gaps="skip")
    assert est(x, fs=1.0).info["segments_skipped"] == 2  # starts 997376 and 999424
    assert peak_of(lambda: est(x, fs=1.0)) < 0.5 * x.nbytes


def test_partial_sums_are_consumed_as_they_come():
    # long segments: 4 per block, 256 kB per block's partial sum; a list of them for the
    # 4e6-sample record would hold about 16 MB
    small = np.random.default_rng(2).standard_normal(1_000_000)
    big = np.random.default_rng(2).standard_normal(4_000_000)
    est = sb.Welch(segment_length=65536, overlap=0.75)
    assert peak_of(lambda: est(big, fs=1.0)) < peak_of(lambda: est(small, fs=1.0)) + 4e6
