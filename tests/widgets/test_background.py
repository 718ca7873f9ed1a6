"""Long computations run in a worker thread: progress, remaining time, cancel, supersede (headless).

A front-end change (inside a running event loop) whose cost model expects more than half a
second runs in the background; the event loop stays free to handle the Cancel button and
further changes.  A change made by code still completes before it returns.
"""

import asyncio
import time

import numpy as np
import pytest

import specbench as sb


@pytest.fixture(scope="module")
def long_sig():
    return sb.Signal(np.random.default_rng(11).standard_normal(2_000_000), fs=1000.0, channels=["x"])


def _needs_background(sig):
    est = sb.Multitaper()
    return est.expected_seconds(sig.n_samples) > 0.5


async def _wait(cond, timeout=60.0):
    t0 = time.perf_counter()
    while not cond():
        if time.perf_counter() - t0 > timeout:
            raise AssertionError("timed out")
        await asyncio.sleep(0.02)


def test_cancel_keeps_the_last_good_result(long_sig):
    if not _needs_background(long_sig):
        pytest.skip("this machine's cost model expects the whole-record multitaper under 0.5 s")
    bench = sb.Workbench(long_sig, sb.Multitaper(segment_length=4096))
    good, good_est = bench.spectrum, bench.estimator
    seen = []
    bench._statusline.bar.observe(lambda ch: seen.append(ch["new"]), names="value")

    async def main():
        bench.controls["segment_length"].value = None  # taper the whole record: long
        await _wait(lambda: bench.busy)
        assert "expected" in bench._statusline.text.value and "Computing" in bench._statusline.text.value
        assert bench._statusline.progress.layout.display is None  # the bar and the Cancel button show
        assert "computing" in bench.status
        await _wait(lambda: len(seen) >= 2)  # the engine's block counter moves the bar
        assert bench.spectrum is good  # nothing committed while it runs
        bench._statusline.cancel_button.click()
        await _wait(lambda: not bench.busy)
        await asyncio.sleep(0.05)

    t0 = time.perf_counter()
    asyncio.run(main())
    assert time.perf_counter() - t0 < 30
    assert bench.spectrum is good and bench.estimator == good_est
    assert "cancelled" in bench.status and "last good estimate stays on screen" in bench.status
    assert all(0.0 <= v <= 1.0 for v in seen) and seen == sorted(seen)
    assert bench._statusline.progress.layout.display == "none"


def test_a_newer_change_supersedes_the_running_computation(long_sig):
    if not _needs_background(long_sig):
        pytest.skip("this machine's cost model expects the whole-record multitaper under 0.5 s")
    bench = sb.Workbench(long_sig, sb.Multitaper(segment_length=4096))

    async def main():
        bench.controls["segment_length"].value = None
        await _wait(lambda: bench.busy)
        bench.controls["method"].value = "Periodogram"  # cheap: cancels the multitaper and runs
        await _wait(lambda: not bench.busy and isinstance(bench.estimator, sb.Periodogram))

    asyncio.run(main())
    assert isinstance(bench.estimator, sb.Periodogram) and bench.spectrum.estimator == bench.estimator
    assert "Not applied" not in bench.status


def test_code_changes_still_complete_before_they_return(long_sig):
    bench = sb.Workbench(long_sig)

    async def main():
        bench.estimator = sb.Multitaper(segment_length=4096)  # code: synchronous even in a loop
        assert bench.spectrum.estimator == sb.Multitaper(segment_length=4096) and not bench.busy

    asyncio.run(main())
