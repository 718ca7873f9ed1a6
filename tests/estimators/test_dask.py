"""Every estimator on dask arrays (and xarray / Signal backed by them) gives the in-memory
result bit for bit, on the single-threaded and threaded schedulers and on a 2-worker
LocalCluster, without materialising the array in the client.

The reference is the in-memory estimate, itself checked against scipy.signal (Welch,
periodogram, csd), statsmodels (acf) and numpy in the other test modules.
"""

import os
import threading

import numpy as np
import pytest

import specbench as sb
from specbench.estimators import _engine

da = pytest.importorskip("dask.array")
dask = pytest.importorskip("dask")


def _estimators():
    ests = [
        ("welch", sb.Welch(segment_length=1024, overlap=0.75)),
        ("welch-median-linear", sb.Welch(segment_length=512, average="median", detrend="linear")),
        ("welch-twosided", sb.Welch(segment_length=256, sides="twosided", nfft=512)),
        ("periodogram", sb.Periodogram(window="hann")),
        ("multitaper-whole", sb.Multitaper(bandwidth=3.0)),
        ("multitaper-segments", sb.Multitaper(segment_length=4096, adaptive=False)),
        ("correlogram", sb.Correlogram(max_lag=200)),
        ("autocorrelation", sb.Autocorrelation(max_lag=150.0, band="bartlett")),
        ("crosscorrelation", sb.CrossCorrelation(max_lag=80.0)),
    ]
    for name, factory in (("crossspectrum", "CrossSpectrum"), ("covariance", "Covariance"),
                          ("allandeviation", "AllanDeviation")):
        if hasattr(sb, factory):
            ests.append((name, getattr(sb, factory)()))
    return ests


ESTIMATORS = _estimators()


def _record(n=300_000, dtype=np.float64, seed=0):
    rng = np.random.default_rng(seed)
    x = rng.standard_normal((2, n)).cumsum(axis=1) * 0.01 + rng.standard_normal((2, n))
    return x.astype(dtype)


def _arrays(result):
    """The numeric arrays of a result object, by name (None-valued ones skipped)."""
    out = {}
    for name in ("value", "lower", "upper", "dof", "freq", "lag", "csd", "coherence", "matrix", "tau"):
        v = getattr(result, name, None)
        if v is not None and not callable(v):
            out[name] = np.asarray(v)
    return out


def _call(est, data, fs=1000.0):
    if isinstance(data, np.ndarray) or hasattr(data, "dask"):
        return est(data, fs=fs)
    return est(data)


def _assert_same(a, b):
    ra, rb = _arrays(a), _arrays(b)
    assert ra.keys() == rb.keys() and ra
    for k in ra:
        np.testing.assert_array_equal(ra[k], rb[k], err_msg=k)


@pytest.fixture
def no_client_compute(monkeypatch):
    """Fail if anything turns the whole dask array into a NumPy array in the client."""

    def refuse(self, *args, **kwargs):
        raise AssertionError(f"a dask array of shape {self.shape} was materialised in the client")

    monkeypatch.setattr(da.Array, "__array__", refuse)


@pytest.mark.parametrize("scheduler", ["sync", "threads"])
@pytest.mark.parametrize("name, est", ESTIMATORS, ids=[n for n, _ in ESTIMATORS])
def test_dask_input_equals_in_memory_bit_for_bit(name, est, scheduler, no_client_compute):
    x = _record()
    ref = _call(est, x)
    lazy = da.from_array(x, chunks=(2, 70_001))  # chunks unrelated to the segments
    with dask.config.set(scheduler=scheduler):
        got = _call(est, lazy)
    _assert_same(ref, got)


def test_float32_dask_stays_float32_and_equal():
    x = _record(200_000, np.float32)
    est = sb.Welch(segment_length=2048)
    with dask.config.set(scheduler="threads"):
        got = est(da.from_array(x, chunks=(2, 50_000)), fs=1.0)
    np.testing.assert_array_equal(got.value, est(x, fs=1.0).value)


def test_signal_and_xarray_wrap_dask_lazily(no_client_compute):
    xr = pytest.importorskip("xarray")
    x = _record(120_000)
    lazy = da.from_array(x, chunks=(2, 40_000))
    sig = sb.Signal(lazy, fs=500.0, channels=["a", "b"], unit="m/s^2")
    assert isinstance(sig.data, da.Array)  # not computed
    arr = xr.DataArray(lazy, dims=("channel", "time"),
                       coords={"channel": ["a", "b"], "time": np.arange(x.shape[1]) / 500.0})
    est = sb.Welch(segment_length=512)
    ref = est(sb.Signal(x, fs=500.0, channels=["a", "b"], unit="m/s^2"))
    with dask.config.set(scheduler="threads"):
        for obj in (sig, arr):
            got = est(obj)
            np.testing.assert_array_equal(got.value, ref.value)
        np.testing.assert_array_equal(est(sig.channel("b")).value.ravel(), ref.value[1])
    assert got.channels == ("a", "b")


def test_gaps_skip_on_dask_names_and_skips_the_same_segments():
    x = _record(100_000)
    x[0, 5000] = np.nan
    est = sb.Welch(segment_length=1024, gaps="skip")
    ref = est(x, fs=1.0)
    with dask.config.set(scheduler="sync"):
        got = est(da.from_array(x, chunks=(2, 30_000)), fs=1.0)
    np.testing.assert_array_equal(got.value, ref.value)
    assert got.info["segments_skipped"] == ref.info["segments_skipped"] > 0
    with pytest.raises(sb.InputError, match="non-finite sample.*first at sample 5000"):
        with dask.config.set(scheduler="sync"):
            sb.Welch(segment_length=1024)(da.from_array(x, chunks=(2, 30_000)), fs=1.0)


def test_unknown_chunk_sizes_are_a_clear_error():
    x = da.from_array(np.arange(10_000.0), chunks=1000)
    unknown = x[x > -1]  # boolean indexing: chunk sizes become NaN
    with pytest.raises(sb.InputError, match=r"unknown chunk sizes.*x\.compute_chunk_sizes\(\)"):
        sb.Welch(segment_length=256)(unknown, fs=1.0)
    with pytest.raises(sb.InputError, match=r"compute_chunk_sizes"):
        sb.Autocorrelation()(unknown, fs=1.0)
    spec = sb.Welch(segment_length=256)(unknown.compute_chunk_sizes(), fs=1.0)
    np.testing.assert_array_equal(spec.value, sb.Welch(segment_length=256)(np.arange(10_000.0), fs=1.0).value)


def test_client_memory_stays_bounded_by_a_few_blocks(monkeypatch):
    """A lazily generated 2**23-sample array (64 MB) estimated with the threaded scheduler:
    the client's peak extra memory (tracemalloc: numpy reports its buffers) stays at a few
    tasks' worth, far below the array."""
    import tracemalloc

    monkeypatch.setattr(_engine, "TASK_SAMPLES", 1 << 17)
    n = 1 << 23
    lazy = da.random.default_rng(3).standard_normal(n, chunks=1 << 17)
    est = sb.Welch(segment_length=4096)
    with dask.config.set(scheduler="threads"):
        est(lazy[: 1 << 19], fs=1.0)  # warm-up (imports, caches)
        tracemalloc.start()
        spec = est(lazy, fs=1.0)
        _, peak = tracemalloc.get_traced_memory()
        tracemalloc.stop()
    assert spec.segments == (n - 4096) // 2048 + 1
    assert peak < n * 8 / 4, f"peak {peak / 2**20:.1f} MB for a {n * 8 / 2**20:.0f} MB array"


def test_progress_and_cancel_reach_dask_computations():
    lazy = da.from_array(_record(400_000), chunks=(2, 50_000))
    fractions = []
    token = sb.CancelToken()
    with dask.config.set(scheduler="threads"):
        sb.Welch(segment_length=256)(lazy, fs=1.0, progress=fractions.append)
        assert fractions[-1] == 1.0 and len(fractions) > 3

        def stop(f):
            token.cancel()

        with pytest.raises(sb.Cancelled):
            sb.Welch(segment_length=256)(lazy, fs=1.0, progress=stop, cancel=token)


# ---------------------------------------------------------------- a 2-worker LocalCluster

@pytest.fixture(scope="module")
def cluster_client():
    distributed = pytest.importorskip("distributed")
    with dask.config.set({"distributed.scheduler.allowed-failures": 0}):
        cluster = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                           host="127.0.0.1", dashboard_address=None, silence_logs=50)
        client = distributed.Client(cluster)
        try:
            yield client
        finally:
            client.close()
            cluster.close()


def test_cluster_results_equal_in_memory_bit_for_bit(cluster_client):
    from distributed import get_task_stream

    x = _record(250_000)
    lazy = da.from_array(x, chunks=(2, 60_000))
    with get_task_stream(cluster_client) as stream:
        for _, est in ESTIMATORS:
            _assert_same(_call(est, x), _call(est, lazy))
    # the per-block kernels ran as tasks on the two worker processes
    ours = [t for t in stream.data if str(t["key"]).strip("()',").startswith("_run_group")]
    assert ours and {t["worker"] for t in ours} == set(cluster_client.scheduler_info()["workers"])


def test_a_worker_that_dies_is_named(cluster_client):
    def die(block):
        if block.shape[-1] and block[0, 0] == -12345.0:
            os._exit(1)
        return block

    x = _record(200_000)
    x[0, 100_000] = -12345.0
    lazy = da.from_array(x, chunks=(2, 100_000)).map_blocks(die, dtype=x.dtype)
    with pytest.raises(sb.SpecbenchError, match=r"dask computation failed.*KilledWorker.*No result was produced"):
        sb.Welch(segment_length=1024)(lazy, fs=1.0)
    cluster_client.wait_for_workers(2, timeout=60)


def test_progress_callbacks_run_in_the_calling_thread_on_a_cluster(cluster_client):
    lazy = da.from_array(_record(200_000), chunks=(2, 50_000))
    threads = set()
    sb.Welch(segment_length=512)(lazy, fs=1.0, progress=lambda f: threads.add(threading.get_ident()))
    assert threads == {threading.get_ident()}
