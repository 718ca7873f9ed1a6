"""The engines report blocks done of each pass (used by `specbench estimate`'s progress bar)."""

import numpy as np

import specbench as sb
from specbench.estimators._engine import (
    GROUP_SAMPLES,
    block_segments,
    group_blocks,
    reporting_progress,
    segment_spans,
)


def test_welch_reports_every_block_in_order():
    calls = []
    x = np.random.default_rng(0).standard_normal(4_000_000)
    with reporting_progress(lambda done, total: calls.append((done, total))):
        spec = sb.Welch(segment_length=1024)(x, fs=1.0)
    # one report per task: the blocks of segments, gathered into tasks of GROUP_SAMPLES
    per = block_segments(1024)
    spans, blocks = segment_spans(spec.segments, per, None, spec.info["step"], 1024)
    ntasks = len(group_blocks(spans, blocks, GROUP_SAMPLES)[0])
    assert ntasks > 1 and len(spans) > ntasks  # several tasks, of several blocks each
    assert calls == [(k, ntasks) for k in range(1, ntasks + 1)]


def test_multitaper_reports_one_pass_per_taper_and_the_weights_and_nothing_outside():
    calls = []
    x = np.random.default_rng(1).standard_normal(200_000)
    est = sb.Multitaper(segment_length=4096, bandwidth=2.0)
    with reporting_progress(lambda done, total: calls.append((done, total))):
        est(x, fs=1.0)
    starts = [c for c in calls if c[0] == 1]
    # one pass per taper, then one over the frequency chunks of the adaptive weighting
    assert len(starts) == est.n_tapers + 1 and calls[-1][0] == calls[-1][1]
    n = len(calls)
    est(x, fs=1.0)  # outside the context: no reports
    assert len(calls) == n


# ---------------------------------------------------------------- public progress= / cancel=

import threading  # noqa: E402

import pytest  # noqa: E402

from specbench.estimators import estimator_classes  # noqa: E402


def _calls(est, x):
    if isinstance(est, sb.CrossCorrelation):
        return lambda **kw: est(x, x[::-1].copy(), fs=1.0, **kw)
    return lambda **kw: est(x, fs=1.0, **kw)


@pytest.mark.parametrize("est", [sb.Welch(segment_length=256), sb.Periodogram(), sb.Multitaper(segment_length=2048),
                                 sb.Correlogram(max_lag=64), sb.Autocorrelation(max_lag=64.0),
                                 sb.CrossCorrelation(max_lag=64.0)], ids=lambda e: type(e).__name__)
def test_progress_fraction_is_nondecreasing_and_ends_at_one(est):
    x = np.random.default_rng(2).standard_normal(300_000)
    fractions = []
    got = _calls(est, x)(progress=fractions.append)
    ref = _calls(est, x)()
    assert fractions and fractions[-1] == 1.0
    assert all(0 <= a <= b <= 1 for a, b in zip(fractions, fractions[1:]))
    assert fractions.count(1.0) == 1  # 1.0 only once the result is ready
    np.testing.assert_array_equal(got.value, ref.value)


def test_multitaper_fraction_spans_all_tapers():
    x = np.random.default_rng(3).standard_normal(400_000)
    fractions = []
    sb.Multitaper(segment_length=4096, bandwidth=3.0)(x, fs=1.0, progress=fractions.append)
    # several passes (one per taper or one for all): the fraction never restarts
    assert len(fractions) > 5 and fractions[len(fractions) // 2] < 0.9


def test_progress_callback_may_cancel_and_nothing_is_left_running():
    x = np.random.default_rng(4).standard_normal(2_000_000)
    est = sb.Welch(segment_length=512, overlap=0.75)
    ref = est(x, fs=1.0).value
    seen = []

    def stop(f):
        seen.append(f)
        if len(seen) == 3:
            raise sb.Cancelled("stopped by the test")

    with pytest.raises(sb.Cancelled, match="stopped by the test"):
        est(x, fs=1.0, progress=stop)
    assert len(seen) == 3  # no more reports after the cancel
    # the worker threads took no more blocks and left their buffers consistent: the next
    # call gives the same bits
    np.testing.assert_array_equal(est(x, fs=1.0).value, ref)


def test_cancel_token_from_another_thread():
    x = np.random.default_rng(5).standard_normal(4_000_000)
    est = sb.Welch(segment_length=256, overlap=0.75)
    token = sb.CancelToken()
    started = threading.Event()
    outcome = {}

    def work():
        try:
            outcome["result"] = est(x, fs=1.0, progress=lambda f: started.set(), cancel=token)
        except sb.Cancelled as e:
            outcome["error"] = e

    t = threading.Thread(target=work)
    t.start()
    assert started.wait(30)
    token.cancel()
    t.join(30)
    assert not t.is_alive()
    assert "result" not in outcome
    assert isinstance(outcome["error"], sb.SpecbenchError)
    assert "cancelled" in str(outcome["error"])
    # an already-cancelled token stops before any work; reset makes it usable again
    with pytest.raises(sb.Cancelled):
        est(x[:10_000], fs=1.0, cancel=token)
    token.reset()
    assert est(x[:10_000], fs=1.0, cancel=token).segments > 0


def test_bad_progress_and_cancel_arguments():
    x = np.zeros(1000)
    with pytest.raises(sb.SettingsError, match="progress must be a callable"):
        sb.Welch(segment_length=64)(x, fs=1.0, progress=0.5)
    with pytest.raises(sb.SettingsError, match="cancel must be a specbench.CancelToken"):
        sb.Welch(segment_length=64)(x, fs=1.0, cancel=True)


@pytest.mark.parametrize("kind", sorted(estimator_classes()))
def test_expected_seconds_for_every_estimator(kind):
    est = estimator_classes()[kind]()
    small, large = est.expected_seconds(100_000), est.expected_seconds(10_000_000)
    assert 0 < small < large < 3600
    assert est.expected_seconds(1_000_000, n_channels=4) > est.expected_seconds(1_000_000)
    with pytest.raises(sb.SettingsError, match="n_samples >= 1"):
        est.expected_seconds(0)
