"""The engines report blocks done of each pass (used by `specbench estimate`'s progress bar)."""

import numpy as np

import specbench as sb
from specbench.estimators._engine import block_segments, reporting_progress


def test_welch_reports_every_block_in_order():
    calls = []
    x = np.random.default_rng(0).standard_normal(1_000_000)
    with reporting_progress(lambda done, total: calls.append((done, total))):
        spec = sb.Welch(segment_length=1024)(x, fs=1.0)
    nblocks = -(-spec.segments // block_segments(1024))
    assert calls == [(k, nblocks) for k in range(1, nblocks + 1)]


def test_multitaper_reports_one_pass_per_taper_and_nothing_outside():
    calls = []
    x = np.random.default_rng(1).standard_normal(200_000)
    est = sb.Multitaper(segment_length=4096, bandwidth=2.0)
    with reporting_progress(lambda done, total: calls.append((done, total))):
        est(x, fs=1.0)
    starts = [c for c in calls if c[0] == 1]
    assert len(starts) == est.n_tapers and calls[-1][0] == calls[-1][1]
    n = len(calls)
    est(x, fs=1.0)  # outside the context: no reports
    assert len(calls) == n
