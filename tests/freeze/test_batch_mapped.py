"""`specbench estimate --scheduler`: a memory-mapped input is read by the workers, which
open the file themselves from its path, offset, dtype and strides; the client sends no
samples. Reference: the in-process run of the same settings (bit for bit), NumPy's own
memory map for the samples of each block."""

import pickle
import threading

import numpy as np
import pytest

import specbench as sb
from specbench.cli import main
from specbench.freeze import save_settings
from specbench.freeze._batch import BatchError, MappedSamples, _on_cluster
from specbench.freeze._state import Selection

distributed = pytest.importorskip("distributed")


@pytest.fixture
def raw_file(tmp_path):
    # 3 interleaved float32 channels after a 64-byte header: the channel rows are strided views
    x = np.random.default_rng(11).standard_normal((300_000, 3)).astype("<f4")
    path = tmp_path / "run.bin"
    with open(path, "wb") as f:
        f.write(b"\0" * 64)
        f.write(x.tobytes())
    return path, x.T


def test_a_selection_of_a_memory_map_is_described_not_read(raw_file):
    path, ref = raw_file
    sig = sb.load(path, dtype="<f4", n_channels=3, interleaved=True, offset=64, fs=1000.0)
    sel = Selection(channel="ch2", span=(10.0, 250.0), fs=None).apply(sig)
    mapped = MappedSamples.of(sel.data)
    assert mapped is not None and mapped.path == str(path)
    lazy = _on_cluster(sel).data
    # the graph holds the file's description, not its samples (the selection is 960 kB)
    assert len(pickle.dumps(dict(lazy.__dask_graph__()))) < 20_000
    np.testing.assert_array_equal(lazy.compute(scheduler="sync"), np.asarray(sel.data))
    np.testing.assert_array_equal(np.asarray(sel.data)[0], ref[2, 10_000:250_000])
    # not a memory map: no description (the caller falls back to sending the array)
    assert MappedSamples.of(np.asarray(sel.data).copy()) is None


def test_estimate_on_a_local_cluster_reads_the_blocks_on_the_workers(tmp_path, monkeypatch):
    path = tmp_path / "run.npy"
    np.save(path, np.random.default_rng(12).standard_normal((2, 400_000)))
    est = sb.Welch(segment_length=1024)
    settings = save_settings(est, tmp_path / "w.json")
    here, there = tmp_path / "here.npz", tmp_path / "there.npz"
    opts = ["--fs", "1000"]
    readers = []
    real = MappedSamples.__getitem__

    def spy(self, key):
        readers.append(threading.current_thread() is threading.main_thread())
        return real(self, key)

    monkeypatch.setattr(MappedSamples, "__getitem__", spy)
    assert main(["estimate", str(path), "-s", str(settings), "-o", str(here), "-q", *opts]) == 0
    assert readers == []  # in process: the memory map is read directly
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False, protocol="tcp",
                                  host="127.0.0.1", dashboard_address=None) as cluster:
        assert main(["estimate", str(path), "-s", str(settings), "-o", str(there), "-q", *opts,
                     "--scheduler", cluster.scheduler_address]) == 0
    assert readers and not any(readers)  # every block was read in a worker's thread
    a, b = np.load(here), np.load(there)
    for key in ("freq_hz", "value", "lower", "upper"):
        np.testing.assert_array_equal(a[key], b[key])


def test_a_file_changed_under_the_workers_is_named(tmp_path, raw_file):
    path, _ = raw_file
    sig = sb.load(path, dtype="<f4", n_channels=3, interleaved=True, offset=64, fs=1000.0)
    mapped = MappedSamples.of(sig.data)
    MappedSamples._open.clear()
    with open(path, "ab") as f:
        f.write(b"\0" * 12)
    with pytest.raises(BatchError, match="changed while it was being estimated"):
        mapped[:, :10]
