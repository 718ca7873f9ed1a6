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


# ---------------------------------------------------------------- staged updates
# A change that needs quick analyses and a slow one (the noise model re-fits on every new data
# selection) commits the quick ones first, the new selection with them; the slow one follows
# in the worker thread, its view marked as showing the earlier selection until then.

@pytest.fixture(scope="module")
def two_channels():
    rng = np.random.default_rng(5)
    x = rng.standard_normal((2, 400_000))
    x[1] = 0.5 * x[0] + x[1]
    return sb.Signal(x, fs=1000.0, channels=["a", "b"], unit="V")


def _staged(bench):
    """The quick part and the slow part the cost model sees for a channel change."""
    s = bench._session
    costs = {slot.name: slot.analysis.expected_seconds(slot.est, s.select(s.sel)) for slot in s.slots.values()}
    return costs


def test_a_new_selection_shows_the_quick_views_first_and_the_noise_model_follows(two_channels):
    bench = sb.Workbench(two_channels)
    costs = _staged(bench)
    if costs["noise"] <= 0.5 or costs["psd"] + costs["acf"] + costs["cross"] > 0.5:
        pytest.skip(f"this machine's cost model does not split the update: {costs}")
    host = bench._hosts["noise"]
    before = bench.result("noise")
    seen = {}

    async def main():
        bench.controls["channel"].value = "b"
        await _wait(lambda: bench.channel == "b")
        # the PSD and autocorrelation are of channel b; the noise model still of a, and says so
        s = bench._session
        seen["busy"] = bench.busy
        seen["stale"] = [n for n, slot in s.slots.items() if s.stale(slot)]
        seen["title"] = host.title.value
        seen["classes"] = list(host.widget._dom_classes)
        seen["pin"] = sorted(bench.pin().shown)
        bench.clear_pins()
        seen["code"] = bench.code()
        seen["merits"] = set(bench.merits)
        seen["noise"] = bench.result("noise")
        await _wait(lambda: not bench.busy)
        await asyncio.sleep(0.05)

    asyncio.run(main())
    assert seen["busy"] and seen["stale"] == ["noise"] and seen["noise"] is before
    assert "of channel &#x27;a&#x27;, the whole record, an earlier data selection" in seen["title"]
    assert "sb-stale" in seen["classes"]
    assert seen["pin"] == ["acf", "cross", "psd"]  # a pin holds the current views only
    assert "AllanDeviation" not in seen["code"] and "fit_noise" not in seen["code"]
    assert not any(k.startswith("noise") for k in seen["merits"])
    # done: the noise model of channel b, the same numbers as computed directly
    after = bench.result("noise")
    assert after is not before and not bench._session.stale(bench._session.slots["noise"])
    direct = bench.estimator_of("noise").allan()(bench.selected).channel(0)
    np.testing.assert_array_equal(after.allan.value, direct.value)
    assert direct.n == 400_000 and after.allan.n == direct.n
    assert host.title.value == host._TITLE and "sb-stale" not in host.widget._dom_classes
    assert "AllanDeviation" in bench.code()
    assert "Not applied" not in bench.status and "earlier" not in bench.status


def test_a_cancelled_noise_model_stays_marked_and_is_recomputed_with_the_next_change(two_channels):
    bench = sb.Workbench(two_channels)
    costs = _staged(bench)
    if costs["noise"] <= 0.5 or costs["psd"] + costs["acf"] + costs["cross"] > 0.5:
        pytest.skip(f"this machine's cost model does not split the update: {costs}")
    before = bench.result("noise")

    async def main():
        bench.controls["span"].value = (10.0, 390.0)
        await _wait(lambda: bench.span == (10.0, 390.0) and bench.busy)
        assert bench.cancel()
        await _wait(lambda: not bench.busy)
        await asyncio.sleep(0.05)
        assert bench.result("noise") is before
        assert "cancelled" in bench.status
        assert "Noise model on screen is of channel 'a', the whole record, not of the selection above; " \
               "it is recomputed with the next change." in bench.status
        bench.controls["window"].value = "hamming"  # any change: the stale view recomputes too
        await _wait(lambda: bench.busy)
        await _wait(lambda: not bench.busy)
        await asyncio.sleep(0.05)

    asyncio.run(main())
    s = bench._session
    assert not s.stale(s.slots["noise"]) and bench.result("noise") is not before
    assert bench.result("noise").allan.n == 380_000  # of the span 10 to 390 s at 1 kHz
    assert "earlier" not in bench.status and "Not applied" not in bench.status


def test_a_workbench_built_in_a_kernel_shows_the_quick_views_before_the_noise_model(two_channels):
    costs = _staged(sb.Workbench(two_channels))
    if costs["noise"] <= 0.5 or costs["psd"] + costs["acf"] + costs["cross"] > 0.5:
        pytest.skip(f"this machine's cost model does not split the update: {costs}")
    seen = {}

    async def main():
        bench = sb.Workbench(two_channels)  # a running loop, as in a kernel cell
        seen["psd"] = bench.spectrum is not None
        seen["noise"] = bench.result("noise")
        seen["busy"] = bench.busy
        bench.flush()  # waits for the worker and commits its result
        seen["after"] = bench.result("noise")
        seen["bench"] = bench

    asyncio.run(main())
    assert seen["psd"] and seen["noise"] is None and seen["busy"]
    assert seen["after"] is not None and seen["after"].model is not None


def test_a_workbench_built_in_a_kernel_has_its_main_estimate_even_when_nothing_is_quick(two_channels, monkeypatch):
    """When no quick part can be split off (every analysis slow on this machine), the first
    estimate is computed before the constructor returns, as before staging."""
    from specbench.widgets import _controller

    monkeypatch.setattr(_controller, "BACKGROUND_SECONDS", 1e-6)  # every analysis counts as slow
    seen = {}

    async def main():
        bench = sb.Workbench(two_channels)
        seen["psd"], seen["busy"] = bench.spectrum, bench.busy
        seen["noise"] = bench.result("noise")

    asyncio.run(main())
    assert seen["psd"] is not None and not seen["busy"] and seen["noise"] is not None


def test_a_long_update_draws_the_main_view_first_and_the_others_follow(two_channels, monkeypatch):
    """An update expected above FIRST_VIEW_SECONDS commits (and draws) the PSD alone first,
    then the other views in the same event-loop turn: the browser sees the PSD at once; code
    running after the change sees every view updated.  A new data selection goes in with
    the first commit; until the second, the other views say they show the earlier one."""
    from specbench.widgets import _controller

    bench = sb.Workbench(two_channels)
    monkeypatch.setattr(_controller, "FIRST_VIEW_SECONDS", 1e-9)  # every update counts as long
    monkeypatch.setattr(_controller, "BACKGROUND_SECONDS", 1e9)  # and none goes to the worker
    ctl, s = bench._ctl, bench._session
    commits = []
    finish = ctl._finish

    def recording(job, t0):
        finish(job, t0)
        commits.append(([slot.name for slot, _ in job.todo], s.stale(s.slots["acf"]), bench.channel))

    ctl._finish = recording

    async def main():
        bench.controls["detrend"].value = "linear"  # shared by the PSD, the ACF and the cross view
        await asyncio.sleep(0.1)
        seen["detrend"] = list(commits)
        commits.clear()
        bench.controls["channel"].value = "b"
        await asyncio.sleep(0.1)
        seen["channel"] = list(commits)

    seen = {}
    asyncio.run(main())
    first, *rest = seen["detrend"]
    assert first[0] == ["psd"] and rest and all("psd" not in names for names, _, _ in rest)
    assert "acf" in sum((names for names, _, _ in rest), [])
    assert bench.correlation.estimator.detrend == "linear" and bench.spectrum.estimator.detrend == "linear"
    first, *rest = seen["channel"]
    assert first == (["psd"], True, "b")  # the new selection with the PSD; the ACF still of 'a'
    assert rest and rest[-1][1] is False
    assert bench.correlation.channels == ("b",) and not any(s.stale(slot) for slot in s.slots.values())
