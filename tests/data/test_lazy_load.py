"""sb.load(lazy=...) opens HDF5 datasets and zarr stores as dask arrays, read chunk by chunk
when estimated, with the same numbers as in memory (bit for bit); bad paths are clear errors."""

import numpy as np
import pytest

import specbench as sb

da = pytest.importorskip("dask.array")
dask = pytest.importorskip("dask")


def _record():
    rng = np.random.default_rng(5)
    return rng.standard_normal((2, 200_000))


def test_zarr_store_opens_lazily_and_estimates_like_memory(tmp_path):
    zarr = pytest.importorskip("zarr")
    x = _record()
    store = tmp_path / "run.zarr"
    z = zarr.open(str(store), mode="w", shape=x.shape, chunks=(2, 30_000), dtype="f8")
    z[:] = x
    z.attrs["fs"] = 2000.0
    z.attrs["unit"] = "m/s^2"
    est = sb.Welch(segment_length=1024)
    sig = sb.load(store, lazy=est)
    assert isinstance(sig.data, da.Array) and sig.fs == 2000.0 and sig.unit == "m/s^2"
    from specbench.data._load import _lazy_chunks

    # chunks of a long record: whole channels, a multiple of the stored chunk and of the step
    _, length = _lazy_chunks((2, 10**8), (2, 30_000), {"axis": -1, "lazy": est})
    assert length % 30_000 == 0 and length % 512 == 0 and length <= 1 << 21
    assert "lazily" in sig.source
    with dask.config.set(scheduler="threads"):
        got = est(sig)
    np.testing.assert_array_equal(got.value, est(x, fs=2000.0).value)


def test_zarr_group_needs_key_and_missing_store_is_clear(tmp_path):
    zarr = pytest.importorskip("zarr")
    g = zarr.open_group(str(tmp_path / "g.zarr"), mode="w")
    g.create_array("a", shape=(1000,), dtype="f8")[:] = np.arange(1000.0)
    g.create_array("b", shape=(1000,), dtype="f8")[:] = np.arange(1000.0)
    with pytest.raises(sb.InputError, match=r"zarr group with the arrays \['a', 'b'\]; choose one with key="):
        sb.load(tmp_path / "g.zarr", fs=1.0)
    assert sb.load(tmp_path / "g.zarr", key="b", fs=1.0).n_samples == 1000
    with pytest.raises(sb.InputError, match=r"No zarr store .*nope\.zarr.*Check the path"):
        sb.load(tmp_path / "nope.zarr", fs=1.0)


def test_hdf5_chunked_dataset_lazily(tmp_path):
    h5py = pytest.importorskip("h5py")
    x = _record()
    path = tmp_path / "run.h5"
    with h5py.File(path, "w") as f:
        d = f.create_dataset("accel", data=x, chunks=(2, 25_000), compression="gzip")
        d.attrs["fs"] = 1000.0
    sig = sb.load(path, lazy=True)
    assert isinstance(sig.data, da.Array)
    est = sb.Multitaper(segment_length=4096)
    with dask.config.set(scheduler="sync"):
        got = est(sig)
    np.testing.assert_array_equal(got.value, est(sb.load(path)).value)
    with pytest.raises(sb.InputError, match="lazy does not apply to csv files"):
        p = tmp_path / "a.csv"
        p.write_text("t,x\n0,1\n1,2\n2,3\n3,4\n")
        sb.load(p, lazy=True)
