"""`specbench estimate --scheduler ADDRESS`: the estimate runs on a dask.distributed
cluster with the numbers of the in-process run (bit for bit); a scheduler that does not
answer is a clear error within a few seconds and nothing is written."""

import time

import numpy as np
import pytest

import specbench as sb
from specbench.cli import main
from specbench.freeze import save_settings

distributed = pytest.importorskip("distributed")


@pytest.fixture
def npy_file(tmp_path):
    x = np.random.default_rng(8).standard_normal((2, 150_000))
    path = tmp_path / "run.npy"
    np.save(path, x)
    return path


def test_unreachable_scheduler_is_a_clear_error_within_seconds(tmp_path, npy_file, capsys):
    settings = save_settings(sb.Welch(segment_length=512), tmp_path / "w.json")
    out = tmp_path / "out.csv"
    t0 = time.perf_counter()
    code = main(["estimate", str(npy_file), "-s", str(settings), "-o", str(out), "--fs", "100",
                 "--scheduler", "tcp://127.0.0.1:9"])
    elapsed = time.perf_counter() - t0
    err = capsys.readouterr().err
    assert code == 2 and elapsed < 20
    assert "--scheduler 'tcp://127.0.0.1:9': no dask scheduler answered within 5 s" in err
    assert "dask scheduler" in err and "Traceback" not in err
    assert not out.exists()


def test_estimate_on_a_local_cluster_equals_the_in_process_run(tmp_path, npy_file):
    settings = save_settings(sb.Welch(segment_length=1024), tmp_path / "w.json")
    here, there = tmp_path / "here.npz", tmp_path / "there.npz"
    assert main(["estimate", str(npy_file), "-s", str(settings), "-o", str(here), "--fs", "100", "-q"]) == 0
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False, protocol="tcp", host="127.0.0.1",
                                  dashboard_address=None) as cluster:
        assert main(["estimate", str(npy_file), "-s", str(settings), "-o", str(there), "--fs", "100", "-q",
                     "--scheduler", cluster.scheduler_address]) == 0
    a, b = np.load(here), np.load(there)
    for key in ("freq_hz", "value", "lower", "upper"):
        np.testing.assert_array_equal(a[key], b[key])
