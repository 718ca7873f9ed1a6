"""``sb.load``: read a recording from a file into a :class:`Signal`.

One reader per format, chosen from a table by the file extension (or ``format=``); each
reader returns a :class:`~specbench.data._assemble.Record`, and
:func:`~specbench.data._assemble.assemble` applies the checks common to all formats.
"""

from __future__ import annotations

import math
import os
import struct
import warnings
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

import numpy as np

from .._errors import InputError
from ._assemble import Record, assemble, select_columns
from ._signal import Signal
from ._text import column_is_text, read_text, sniff
from ._timebase import DEFAULT_MAX_JITTER, find_time_column, time_axis

__all__ = ["load", "FORMATS", "EXTENSIONS"]

#: Attribute names read as a sample rate in Hz (HDF5, xarray), in order of preference.
RATE_ATTRIBUTES = ("fs", "sample_rate", "sampling_rate", "sample_rate_hz", "samplerate",
                   "sampling_frequency")
#: Attribute names read as a sample interval in seconds (the rate is its inverse).
INTERVAL_ATTRIBUTES = ("dt", "sample_interval", "sampling_interval")
UNIT_ATTRIBUTES = ("unit", "units")
CHANNEL_ATTRIBUTES = ("channels", "channel_names")


# -- readers ----------------------------------------------------------------------------
def _read_csv(path: Path, o: dict) -> Record:
    skip = o["skip_rows"]
    if isinstance(skip, bool) or not isinstance(skip, (int, np.integer)) or skip < 0:
        raise InputError(f"skip_rows must be a whole number of lines >= 0 (the lines above the "
                         f"header); got {skip!r}.")
    dialect = sniff(path, delimiter=o["delimiter"], decimal=o["decimal"], comment=o["comment"],
                    skip_rows=o["skip_rows"])
    names = list(dialect.names) if dialect.names else [f"ch{j}" for j in range(dialect.n_fields)]
    units = list(dialect.units) if dialect.units else [""] * dialect.n_fields
    if dialect.names is None and o["time_column"] is None:
        tj, tunit = None, ""  # no header, no name to recognise: never guess a time column
    else:
        tj, tunit = find_time_column(names, o["time_column"], path.name)
    if tunit == "" and tj is not None and units[tj]:
        tunit = units[tj]
    # a time column of dates is read as text and parsed as ISO 8601
    dates = tj is not None and column_is_text(path, dialect, tj)
    table = read_text(path, dialect, text_columns=(tj,) if dates else ())
    reserved = {names[tj]: "the time column"} if tj is not None else None
    data_cols = [j for j in range(dialect.n_fields) if j != tj]
    pick = select_columns([names[j] for j in data_cols], o["channels"], path.name, reserved)
    cols = [data_cols[i] for i in pick]
    if not cols:
        raise InputError(f"{path.name} has only a time column and no data column. Load a "
                         "file with at least one column of samples.")
    data = np.vstack([table.columns[j] for j in cols])
    rec = Record(data, path.name, names=[names[j] for j in cols], units=[units[j] for j in cols],
                 where=table.where, notes=[dialect.describe()], rate_hint="fs= or time_column=")
    if tj is not None:
        axis, rec.start, rec.t0 = time_axis(
            table.columns[tj], label=f"time column {names[tj]!r} of {path.name}",
            row=table.where, unit=tunit)
        rec.time = axis
    return rec


def _read_npy(path: Path, o: dict) -> Record:
    try:
        arr = np.load(path, mmap_mode="r", allow_pickle=False)
    except ValueError as exc:
        raise InputError(f"{path.name} is not a readable .npy file ({exc}). Save arrays "
                         "with numpy.save; object arrays cannot be loaded.") from exc
    return _array_record(arr, path.name, o, memmap=isinstance(arr, np.memmap))


def _read_npz(path: Path, o: dict) -> Record:
    try:
        archive = np.load(path, allow_pickle=False)
    except (ValueError, OSError) as exc:
        raise InputError(f"{path.name} is not a readable .npz archive ({exc}).") from exc
    with archive:
        keys = list(archive.files)
        tj, tunit = find_time_column(keys, o["time_column"], path.name)
        key = o["key"]
        candidates = [k for j, k in enumerate(keys) if j != tj]
        if key is None:
            if len(candidates) != 1:
                raise InputError(f"{path.name} holds the arrays {keys}; choose the samples "
                                 "with key=<name>" + (" (and the time with time_column=)"
                                                      if tj is None else "") + ".")
            key = candidates[0]
        if key not in keys:
            raise InputError(f"{path.name} has no array {key!r}; it holds {keys}. Pass "
                             "key= with one of those names.")
        rec = _array_record(archive[key], f"{path.name}[{key!r}]", o, memmap=False)
        if tj is not None:
            label = f"time array {keys[tj]!r} of {path.name}"
            rec.time, rec.start, rec.t0 = time_axis(archive[keys[tj]], label=label,
                                                    row=_index_row, unit=tunit)
            rec.rate_hint = "fs= or time_column="
    return rec


def _index_row(i: int) -> str:
    return f"index {i}"


def _array_record(arr: np.ndarray, label: str, o: dict, *, memmap: bool) -> Record:
    if arr.dtype.kind not in "biufc":
        raise InputError(f"{label} holds data of dtype {arr.dtype}, which is not numeric. "
                         "Save the samples as a numeric array.")
    axis = o["axis"]
    if arr.ndim == 1:
        data = arr[np.newaxis, :]
    elif arr.ndim == 2:
        if axis not in (-1, 0, 1):
            raise InputError(f"axis={axis!r} is not an axis of the 2-D array in {label}; "
                             "pass axis=-1 (samples along the rows' length) or axis=0.")
        data = arr if axis in (-1, 1) else arr.T
    else:
        raise InputError(f"{label} holds a {arr.ndim}-D array of shape {arr.shape}; a record "
                         "is 1-D (samples) or 2-D (channels, samples). Reshape it, or save "
                         "one record per file.")
    names = [f"ch{i}" for i in range(data.shape[0])]
    pick = select_columns(names, o["channels"], label)
    data = _take_rows(data, pick)
    return Record(data, label, names=[names[i] for i in pick], scan=not memmap,
                  notes=["memory-mapped"] if memmap else [])


def _take_rows(data: np.ndarray, pick: list[int]) -> np.ndarray:
    """Rows ``pick`` of ``data``, as a view (slice) whenever they are evenly spaced."""
    if pick == list(range(data.shape[0])):
        return data
    steps = {b - a for a, b in zip(pick, pick[1:])}
    if len(pick) == 1 or (len(steps) == 1 and min(steps) > 0):
        step = steps.pop() if steps else 1
        return data[pick[0]:pick[-1] + 1:step]
    if hasattr(data, "dask"):  # a lazy dask array stays lazy
        return data[pick]
    return np.ascontiguousarray(data[pick])


# WAV integer PCM: container dtype -> (offset, scale) so that float = (int - offset) * scale
# spans full scale [-1, 1).  24-bit samples arrive left-justified in int32 (scipy).
_PCM_SCALE = {
    "u1": (128, 1.0 / 128, np.float32),
    "i2": (0, 1.0 / 32768, np.float32),
    "i4": (0, 1.0 / 2**31, None),  # float32 for <= 24 bits (exact), float64 for 32 bits
    "i8": (0, 1.0 / 2**63, np.float64),
}


def _read_wav(path: Path, o: dict) -> Record:
    from scipy.io import wavfile

    info = _wav_info(path)
    _check_wav_length(path, info, None)
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", wavfile.WavFileWarning)
            rate, raw = wavfile.read(path)
    except (ValueError, EOFError, struct.error) as exc:
        raise InputError(f"{path.name} could not be read as a WAV file ({exc}). Export it "
                         "as PCM or IEEE-float WAV, or load the samples another way.") from exc
    frames = raw[:, np.newaxis] if raw.ndim == 1 else raw  # (samples, channels)
    _check_wav_length(path, info, frames.shape[0])
    kind = raw.dtype.kind
    if kind in "iu":
        offset, scale, out = _PCM_SCALE[raw.dtype.str[1:]]
        if out is None:
            out = np.float32 if info["bits"] <= 24 else np.float64
        data = np.empty((frames.shape[1], frames.shape[0]), dtype=out)
        for c in range(frames.shape[1]):  # one channel at a time bounds the temporaries
            column = frames[:, c].astype(out)
            if offset:
                column -= offset
            np.multiply(column, scale, out=data[c])
        note = (f"{info['bits']}-bit integer PCM scaled to full scale ±1 (x {scale:.6g}"
                + (f" after subtracting {offset}" if offset else "") + ")")
        unit = "FS"
    else:
        data = np.ascontiguousarray(frames.T)
        note = f"{info['bits']}-bit float PCM as stored"
        unit = ""
    names = [f"ch{i}" for i in range(data.shape[0])]
    pick = select_columns(names, o["channels"], path.name)
    data = _take_rows(data, pick)
    return Record(data, path.name, names=[names[i] for i in pick], units=[unit] * len(pick),
                  fs=float(rate), fs_note=f"the WAV header of {path.name}", notes=[note],
                  where=lambda i: f"frame {i}")


def _check_wav_length(path: Path, info: dict, got: int | None) -> None:
    """Refuse a WAV whose header claims more frames than the file holds (a cut copy)."""
    align = info.get("align") or max(1, info["channels"] * info["bits"] // 8)
    size = info["data_bytes"]
    if size in (0xFFFFFFFF, 0):  # streaming writers leave the size unset; RF64 keeps it elsewhere
        return
    claimed = size // align
    present = max(0, info["file_bytes"] - info["data_offset"]) // align
    if present < claimed or (got is not None and got < claimed):
        held = present if got is None else min(got, present)
        raise InputError(
            f"{path.name}: its header claims {claimed:,} frames ({size:,} bytes of samples) but "
            f"the file holds {held:,} ({100 * held / claimed:.3g} %): the file is cut short (an "
            "interrupted copy or recording). Copy or export it again; to analyse the frames "
            f"that are there, load them as raw binary: format='raw', offset={info['data_offset']}, "
            f"n_channels={info['channels']}, fs={info['rate']} and the sample dtype "
            "(e.g. dtype='<i2' for 16-bit PCM).",
        )


def _wav_info(path: Path) -> dict:
    """Bits per sample and format of a RIFF/WAVE file (only what messages need)."""
    with open(path, "rb") as f:
        head = f.read(12)
        if len(head) < 12 or head[:4] not in (b"RIFF", b"RIFX", b"RF64") or head[8:12] != b"WAVE":
            raise InputError(f"{path.name} is not a WAV file (no RIFF/WAVE header). Check the "
                             "file, or give format= for another kind of file.")
        endian = ">" if head[:4] == b"RIFX" else "<"
        info: dict = {}
        while True:
            chunk = f.read(8)
            if len(chunk) < 8:
                missing = "'data'" if "tag" in info else "'fmt '"
                raise InputError(f"{path.name} has no {missing} chunk: the WAV file is cut "
                                 "short or damaged.")
            cid, size = chunk[:4], struct.unpack(endian + "I", chunk[4:])[0]
            if cid == b"fmt ":
                body = f.read(size)
                if len(body) < 16:
                    raise InputError(f"{path.name} has a 'fmt ' chunk of {len(body)} bytes (16 "
                                     "needed): the WAV file is cut short or damaged.")
                tag, channels, rate, _, align, bits = struct.unpack(endian + "HHIIHH", body[:16])
                info = {"tag": tag, "channels": channels, "rate": rate, "bits": bits,
                        "align": align}
                f.seek(size & 1, os.SEEK_CUR)
                continue
            elif cid == b"data":
                if "tag" not in info:
                    raise InputError(f"{path.name} has its 'data' chunk before the 'fmt ' "
                                     "chunk: the WAV file is damaged.")
                info["data_bytes"], info["data_offset"] = size, f.tell()
                info["file_bytes"] = os.fstat(f.fileno()).st_size
                return info
            f.seek(size + (size & 1), os.SEEK_CUR)


def _read_hdf5(path: Path, o: dict) -> Record:
    h5py = _optional("h5py", "hdf5", "HDF5 files")
    try:
        f = h5py.File(path, "r")
    except OSError as exc:
        raise InputError(f"{path.name} could not be opened as an HDF5 file ({exc}).") from exc
    with f:
        datasets = _hdf5_datasets(f)
        key = o["key"]
        if key is None:
            numeric = [d for d in datasets if f[d].dtype.kind in "biufc" and f[d].ndim in (1, 2)
                       and d != o["time_column"]]
            if len(numeric) != 1:
                raise InputError(f"{path.name} holds the datasets {datasets}; choose one with "
                                 "key='/path/to/dataset'.")
            key = numeric[0]
        if key not in f or not isinstance(f[key], h5py.Dataset):
            raise InputError(f"{path.name} has no dataset {key!r}; its datasets are "
                             f"{datasets}. Pass key= with one of those paths.")
        dset = f[key]
        label = f"{path.name}:{dset.name}"
        if o.get("lazy"):
            import dask.array as da

            reader = _H5Reader(path, dset.name, dset.shape, dset.dtype)
            arr, mapped = da.from_array(reader, chunks=_lazy_chunks(dset.shape, dset.chunks, o),
                                        name=f"specbench-hdf5-{path.name}-{dset.name}-{path.stat().st_mtime_ns}"), True
        else:
            arr, mapped = _hdf5_array(path, dset)
        rec = _array_record(arr, label, o, memmap=mapped)
        rec.fs, rec.fs_note = _hdf5_rate(dset, o["fs_attribute"], label)
        unit = _first_attr(dset, UNIT_ATTRIBUTES)
        if unit is not None:
            units = [unit] * rec.data.shape[0] if isinstance(unit, str) else list(unit)
            rec.units = units if len(units) == rec.data.shape[0] else None
        names = _first_attr(dset, CHANNEL_ATTRIBUTES)
        if names is not None and not isinstance(names, str) and o["channels"] is None:
            if len(names) == rec.data.shape[0]:
                rec.names = [str(n) for n in names]
        rec.rate_hint = "fs= (or store an 'fs' attribute on the dataset)"
        if o["time_column"]:
            tkey = o["time_column"]
            if tkey not in f:
                raise InputError(f"{path.name} has no time dataset {tkey!r}; its datasets "
                                 f"are {datasets}.")
            rec.time, rec.start, rec.t0 = time_axis(
                f[tkey][()], label=f"time dataset {tkey!r} of {path.name}", row=_index_row,
                unit=str(_first_attr(f[tkey], UNIT_ATTRIBUTES) or ""))
        if o.get("lazy"):
            rec.notes[:] = [n for n in rec.notes if n != "memory-mapped"] + ["read lazily as a dask array"]
        elif mapped:
            rec.notes.append("memory-mapped")
    return rec


def _read_zarr(path: Path, o: dict) -> Record:
    """A zarr store (array, or group with ``key=``), always as a lazy dask array."""
    _optional("zarr", "dask", "zarr stores")
    _optional("dask", "dask", "zarr stores")
    import dask.array as da
    import zarr

    try:
        node = zarr.open(str(path), mode="r")
    except Exception as exc:  # zarr raises several types for a folder that is not a store
        raise InputError(f"{path.name} could not be opened as a zarr store ({type(exc).__name__}: {exc}). "
                         "Check that the path is the store's folder.") from None
    key = o["key"]
    if not hasattr(node, "shape"):  # a group
        arrays = sorted(name for name, _ in node.arrays())
        if key is None:
            if len(arrays) != 1:
                raise InputError(f"{path.name} is a zarr group with the arrays {arrays}; choose one with key=.")
            key = arrays[0]
        if key not in arrays:
            raise InputError(f"{path.name} has no array {key!r}; its arrays are {arrays}. Pass key= with one.")
        node = node[key]
    label = f"{path.name}" + (f":{key}" if key else "")
    chunks = _lazy_chunks(node.shape, getattr(node, "chunks", None), o)
    arr = da.from_zarr(str(path), component=key, chunks=chunks)
    rec = _array_record(arr, label, o, memmap=True)
    rec.notes[:] = ["read lazily as a dask array"]
    attrs = dict(node.attrs)
    want = [o["fs_attribute"]] if o["fs_attribute"] else list(RATE_ATTRIBUTES) + list(INTERVAL_ATTRIBUTES)
    for name in want:
        if name in attrs:
            value = float(attrs[name])
            rec.fs = 1.0 / value if name in INTERVAL_ATTRIBUTES else value
            rec.fs_note = f"the attribute {name!r} of {label}"
            break
    unit = next((attrs[a] for a in UNIT_ATTRIBUTES if a in attrs), None)
    if isinstance(unit, str):
        rec.units = [unit] * rec.data.shape[0]
    rec.rate_hint = "fs= (or store an 'fs' attribute on the array)"
    return rec


class _H5Reader:
    """A picklable stand-in for an HDF5 dataset: each read opens the file (on whichever
    process runs the dask task: a worker of a cluster needs the same file system)."""

    def __init__(self, path: Path, key: str, shape: tuple, dtype: np.dtype) -> None:
        self.path, self.key, self.shape, self.dtype = str(path), key, tuple(shape), np.dtype(dtype)
        self.ndim = len(self.shape)

    def __getitem__(self, index):
        import h5py

        with h5py.File(self.path, "r") as f:
            return f[self.key][index]


def _lazy_chunks(shape: tuple, stored: tuple | None, o: dict) -> tuple:
    """dask chunks: whole channels, and along the samples about 2**21 samples, a multiple
    of the stored chunk length (no chunk read twice) and, when ``lazy`` is an estimator,
    of its segment step (so the engine's tasks line up with the chunks)."""
    axis = -1 if len(shape) == 1 else (0 if o["axis"] == 0 else 1)
    n = shape[axis]
    unit = 1
    if stored:
        unit = int(stored[axis])
    est = o.get("lazy")
    step = None
    if est is not None and not isinstance(est, bool) and hasattr(est, "segment_length"):
        seg = getattr(est, "segment_length", None) or 0
        nov = getattr(est, "noverlap", 0) or 0
        step = max(1, int(seg) - int(nov)) if seg else None
    if step:
        unit = unit * step // math.gcd(unit, step)
    length = max(unit, (1 << 21) // unit * unit)
    length = min(length, n)
    chunks = list(shape)
    chunks[axis] = length
    return tuple(chunks)


def _hdf5_datasets(f) -> list[str]:
    import h5py

    found: list[str] = []
    f.visititems(lambda name, obj: found.append("/" + name) if isinstance(obj, h5py.Dataset)
                 else None)
    return found


def _hdf5_array(path: Path, dset) -> tuple[np.ndarray, bool]:
    """A memory map when the dataset is stored contiguously and uncompressed."""
    offset = dset.id.get_offset() if dset.chunks is None and dset.compression is None else None
    if offset is not None and dset.dtype.kind in "iufc" and dset.size:
        return np.memmap(path, dtype=dset.dtype, mode="r", offset=offset, shape=dset.shape), True
    return dset[()], False


def _hdf5_rate(dset, attribute: str | None, label: str) -> tuple[float | None, str]:
    nodes = [dset]
    parent = dset.parent
    while True:
        nodes.append(parent)
        if parent.name == "/":
            break
        parent = parent.parent
    names = (attribute,) if attribute else RATE_ATTRIBUTES + INTERVAL_ATTRIBUTES
    for node in nodes:
        for name in names:
            if name in node.attrs:
                raw = np.asarray(node.attrs[name]).reshape(-1)
                where = f"the attribute {name!r} of {node.name} in {label.split(':')[0]}"
                try:
                    if raw.size == 0 or raw.dtype.kind in "USOb":
                        raise ValueError
                    value = float(raw[0])
                except (TypeError, ValueError):
                    shown = raw[0].decode(errors="replace") if raw.size and isinstance(raw[0], bytes) else (
                        str(raw[0]) if raw.size else "nothing")
                    unit = "seconds" if name in INTERVAL_ATTRIBUTES else "Hz"
                    raise InputError(
                        f"{where} holds {shown!r}, not a number of {unit}. Store the rate as a number "
                        "(e.g. 1000.0, in Hz), or pass fs= (and fs_attribute= to read another "
                        "attribute)."
                    ) from None
                rate = 1.0 / value if name in INTERVAL_ATTRIBUTES and value else value
                return rate, f"the attribute {name!r} of {node.name} in {label.split(':')[0]}"
    if attribute:
        raise InputError(f"{label} and its groups have no attribute {attribute!r}. Pass "
                         "fs= or name an existing attribute with fs_attribute=.")
    return None, ""


def _first_attr(node, names: Sequence[str]) -> Any:
    for name in names:
        if name in node.attrs:
            value = node.attrs[name]
            if isinstance(value, bytes):
                return value.decode()
            if isinstance(value, np.ndarray):
                return [v.decode() if isinstance(v, bytes) else str(v) for v in value.ravel()]
            return str(value)
    return None


def _read_raw(path: Path, o: dict) -> Record:
    if o["dtype"] is None:
        raise InputError(f"{path.name} is raw binary: pass dtype= (e.g. 'float32', '<i2'), "
                         "n_channels=, interleaved= and fs=.")
    try:
        dtype = np.dtype(o["dtype"])
    except TypeError as exc:
        raise InputError(f"dtype={o['dtype']!r} is not a NumPy dtype. Pass e.g. 'float32', "
                         "'<f8', '<i2' or '>i4'.") from exc
    if dtype.kind not in "iufc" or dtype.itemsize == 0:
        raise InputError(f"dtype={o['dtype']!r} ({dtype}) is not a numeric sample type. Pass "
                         "e.g. 'float32', '<f8', '<i2' or '>i4'.")
    n_ch = o["n_channels"]
    if not isinstance(n_ch, (int, np.integer)) or isinstance(n_ch, bool) or n_ch < 1:
        raise InputError(f"n_channels must be a positive whole number; got {n_ch!r}.")
    offset = o["offset"]
    if isinstance(offset, bool) or not isinstance(offset, (int, np.integer)) or offset < 0:
        raise InputError(f"offset must be a whole number of bytes >= 0 (the header to skip at the start "
                         f"of {path.name}); got {offset!r}.")
    size = path.stat().st_size - offset
    frame = dtype.itemsize * n_ch
    if size < 0 or size % frame:
        raise InputError(
            f"{path.name} has {size + offset} bytes; after offset={offset} that is "
            f"{size} bytes, not a whole number of {n_ch}-channel frames of {dtype} "
            f"({frame} bytes each). The dtype, n_channels or offset is wrong."
        )
    n = size // frame
    if n == 0:
        raise InputError(f"{path.name} holds no samples after offset={offset}.")
    if o["interleaved"]:
        data = np.memmap(path, dtype=dtype, mode="r", offset=offset, shape=(n, n_ch)).T
    else:
        data = np.memmap(path, dtype=dtype, mode="r", offset=offset, shape=(n_ch, n))
    _check_raw_head(data, path.name, dtype, o["on_gap"])
    names = [f"ch{i}" for i in range(n_ch)]
    pick = select_columns(names, o["channels"], path.name)
    layout = "interleaved" if o["interleaved"] else "one channel after another"
    return Record(_take_rows(data, pick), path.name, names=[names[i] for i in pick], scan=False,
                  notes=[f"raw {dtype} x {n_ch} channel{'s' if n_ch != 1 else ''} ({layout}), "
                         "memory-mapped"], where=lambda i: f"sample {i}")


def _check_raw_head(data: np.ndarray, name: str, dtype: np.dtype, on_gap: str) -> None:
    """Look at the first samples: a wrong dtype or byte order shows as absurd values."""
    if dtype.kind not in "fc":
        return
    head = np.asarray(data[:, :65536])
    finite = np.isfinite(head)
    huge = np.abs(np.where(finite, head, 0)) > 1e30
    if huge.any() or (not finite.all() and on_gap == "error"):
        what = "values beyond 1e30" if huge.any() else "NaN or inf values"
        raise InputError(
            f"The first {head.shape[1]} samples of {name}, read as {dtype} "
            f"({'little' if dtype.byteorder in '<=|' else 'big'}-endian), include {what}: "
            "the dtype, byte order (prefix '<' or '>'), n_channels or offset is probably "
            "wrong. If the file does hold non-finite samples, pass on_gap='fill'."
        )


def _optional(module: str, extra: str, what: str):
    try:
        return __import__(module)
    except ImportError:
        raise InputError(f"Reading {what} needs the optional package {module!r}. Install it "
                         f"with: pip install 'specbench[{extra}]'") from None


# -- the table ----------------------------------------------------------------------------
_Reader = Callable[[Path, dict], Record]
#: format -> (reader, options that apply to it besides the common ones)
FORMATS: dict[str, tuple[_Reader, frozenset[str]]] = {
    "csv": (_read_csv, frozenset({"time_column", "delimiter", "decimal", "comment", "skip_rows"})),
    "npy": (_read_npy, frozenset({"axis"})),
    "npz": (_read_npz, frozenset({"key", "axis", "time_column"})),
    "wav": (_read_wav, frozenset()),
    "hdf5": (_read_hdf5, frozenset({"key", "axis", "time_column", "fs_attribute", "lazy"})),
    "zarr": (_read_zarr, frozenset({"key", "axis", "fs_attribute", "lazy"})),
    "raw": (_read_raw, frozenset({"dtype", "n_channels", "interleaved", "offset"})),
}
EXTENSIONS = {".csv": "csv", ".tsv": "csv", ".txt": "csv", ".npy": "npy", ".npz": "npz",
              ".wav": "wav", ".h5": "hdf5", ".hdf5": "hdf5", ".hdf": "hdf5", ".bin": "raw",
              ".raw": "raw", ".zarr": "zarr"}
_COMMON = frozenset({"fs", "channels", "unit", "on_gap", "max_jitter"})
_DEFAULTS = {"fs": None, "time_column": None, "channels": None, "unit": None,
             "on_gap": "error", "max_jitter": DEFAULT_MAX_JITTER, "format": None, "key": None,
             "axis": -1, "delimiter": None, "decimal": None, "comment": None,
             "fs_attribute": None, "dtype": None, "n_channels": 1, "interleaved": True,
             "offset": 0, "skip_rows": 0, "lazy": False}


def _friendly_arguments(func):
    """Wrong arguments to sb.load are an InputError naming the nearest valid name, never a TypeError."""
    import difflib
    import functools
    import inspect

    signature = inspect.signature(func)
    names = [p for p in signature.parameters if p != "path"]

    @functools.wraps(func)
    def wrapper(*args, **kwargs):
        try:
            signature.bind(*args, **kwargs)
        except TypeError:
            if len(args) > 1:
                extra = ", ".join(repr(a) for a in args[1:4]) + (", ..." if len(args) > 4 else "")
                raise InputError(
                    f"sb.load takes the path as its only positional argument; got {len(args) - 1} more "
                    f"({extra}). Pass the others by name, e.g. sb.load(path, fs=1000.0)."
                ) from None
            unknown = [k for k in kwargs if k not in signature.parameters]
            if unknown:
                near = difflib.get_close_matches(unknown[0], names, n=1)
                hint = f" Did you mean {near[0]}=?" if near else ""
                raise InputError(f"sb.load has no argument {unknown[0]!r}.{hint} Its arguments are "
                                 f"{', '.join(names)}.") from None
            raise InputError("sb.load needs the path of the file to load: sb.load('run.csv').") from None
        return func(*args, **kwargs)

    return wrapper


@_friendly_arguments
def load(
    path: str | os.PathLike,
    *,
    fs: float | None = None,
    time_column: str | int | bool | None = None,
    channels: Sequence[str | int] | str | int | None = None,
    unit: str | Sequence[str] | None = None,
    on_gap: str = "error",
    max_jitter: float = DEFAULT_MAX_JITTER,
    format: str | None = None,
    key: str | None = None,
    axis: int = -1,
    delimiter: str | None = None,
    decimal: str | None = None,
    comment: str | None = None,
    skip_rows: int = 0,
    fs_attribute: str | None = None,
    dtype: Any = None,
    n_channels: int = 1,
    interleaved: bool = True,
    offset: int = 0,
    lazy: Any = False,
) -> Signal:
    """Load a recording from a file into a :class:`Signal`.

    The format follows the extension (``.csv .tsv .txt``, ``.npy``, ``.npz``, ``.wav``,
    ``.h5 .hdf5 .hdf``, ``.bin .raw``) or ``format=``.  Nothing is guessed silently:
    what was detected (delimiter, header, the time column, the rate and its jitter, the
    PCM scaling) is written into ``Signal.source``, and anything doubtful is an
    :class:`~specbench.InputError` that names the file, the place and the fix.

    Parameters
    ----------
    path : str or path-like
        The file.
    fs : float, optional
        Sample rate in Hz.  Required for raw binary, NPY/NPZ without a time array and
        text files without a time column.  With a time column it is checked against the
        timestamps (they must fit its grid within ``max_jitter``); for WAV and HDF5 it
        must agree with the rate stored in the file.
    time_column : str, int or False, optional
        Text files: the column of timestamps, by name (with or without its bracketed
        unit) or position.  By default a column named like ``t``, ``time``,
        ``timestamp`` or ``time_ms`` (any case; ``"Time [ms]"`` too) is used when the file
        has a header.  Timestamps are numbers in seconds (or the unit in the header:
        ``s ms us ns min h``) or ISO 8601 date-times.  ``False``: no time column.  NPZ:
        the name of the time array; HDF5: the path of a time dataset.
    channels : sequence of str or int, optional
        The channels to keep, by name or position (default all).  Unnamed channels are
        ``"ch0"``, ``"ch1"``, ...
    unit : str or sequence of str, optional
        Physical unit, shared or one per channel.  Default: from the header brackets
        (``"accel [m/s^2]"``), the HDF5 ``unit`` attribute, ``"FS"`` (full scale) for
        integer WAV, else ``""``.
    on_gap : {"error", "fill"}
        ``"error"`` (default): a gap in the timestamps or a non-finite cell is an error
        naming the largest gap or the first cells.  ``"fill"``: a gap becomes NaN samples at
        the missing positions of the sample grid (nothing is dropped or shifted) and
        non-finite cells are kept; ``source`` states how many.  Estimators then raise on
        the NaNs unless told to skip them (``sb.Welch(gaps="skip")``).
    max_jitter : float
        Largest accepted deviation of a timestamp from the fitted uniform grid, as a
        fraction of the sample interval (default 0.25; must be below 0.5).
    format : {"csv", "npy", "npz", "wav", "hdf5", "raw"}, optional
        Overrides the extension.
    key : str, optional
        NPZ: the array name; HDF5: the dataset path (``"/run1/accel"``).  Needed when the
        file holds several.
    axis : int
        NPY/NPZ/HDF5 2-D arrays: the axis of samples, ``-1`` (default, shape (channels,
        samples)) or ``0`` (shape (samples, channels)).  An array with more channels than
        samples is refused as probably transposed.
    delimiter, decimal, comment : str, optional
        Text files: override the detected delimiter (``","``, ``";"``, ``"\\t"``, ``" "``
        for runs of spaces), decimal mark (``"."`` or ``","``) and comment prefix.
        A file of one number per line written with a decimal comma (``0,125``) is read
        as one column; when its lines could also be two columns of integers (``12,5``)
        and nothing tells which, the load is refused: give ``decimal=","`` or
        ``delimiter=","``.
    skip_rows : int
        Text files: lines at the top not to read (metadata above the header), default 0.
        A line is taken for the header or units row only when no cell of it is a number.
    fs_attribute : str, optional
        HDF5: the attribute holding the rate in Hz.  By default the dataset and then its
        groups are searched for ``fs``, ``sample_rate``, ``sampling_rate``,
        ``sample_rate_hz``, ``samplerate``, ``sampling_frequency`` (Hz) or ``dt``,
        ``sample_interval``, ``sampling_interval`` (s).
    dtype : str or numpy.dtype
        Raw binary: the sample type with its byte order (``"<i2"``, ``"float32"``).
    n_channels : int
        Raw binary: the number of channels (default 1).
    interleaved : bool
        Raw binary: True (default) for frames of one sample per channel; False for one
        channel after another.
    offset : int
        Raw binary: bytes to skip at the start (a header).
    lazy : bool or estimator
        HDF5: open the dataset as a dask array read chunk by chunk when estimated
        (chunked and compressed datasets included), instead of reading it (or memory
        mapping it).  A zarr store (``.zarr`` folder, ``format="zarr"``) is always opened
        this way.  Chunks hold whole channels and about 2**21 samples, a multiple of the
        stored chunk length; pass the estimator (``lazy=sb.Welch(segment_length=4096)``)
        to make them a multiple of its segment step as well.  Needs the ``dask`` extra.

    Returns
    -------
    Signal
        ``data`` of shape (channels, samples).  NPY, raw binary and contiguous HDF5
        datasets are memory maps: opening costs no reading, and estimators stream them
        in blocks, so a file larger than memory can be estimated.  Memory-mapped data is
        not scanned for NaN at load time; the estimators check it as they stream.
        ``origin`` records the path and the keyword arguments given, so that
        ``sb.load(path, **origin["kwargs"])`` repeats the load.

    Notes
    -----
    Text files are parsed with ``pandas.read_csv`` when pandas is installed, else by a
    plain-Python reader; both read numbers exactly (round trip) and report bad lines by
    their line number.  Integer WAV samples are scaled to full scale: 8-bit unsigned as
    (x - 128)/128, 16-bit as x/32768, 24- and 32-bit as x/2**31 (float32 for up to 24
    bits, which is exact, float64 for 32 bits); float WAV data is kept as stored.

    Examples
    --------
    >>> sig = sb.load("run_042.csv")                      # doctest: +SKIP
    >>> sig = sb.load("stand.bin", dtype="<i2", n_channels=4, fs=51200)  # doctest: +SKIP
    """
    given = {k: v for k, v in locals().items() if k != "path"}
    if isinstance(channels, np.ndarray):
        given["channels"] = channels = channels.tolist()
    path = Path(path)
    zarr_store = format == "zarr" or (format is None and path.suffix.lower() == ".zarr")
    if not path.exists():
        what = "zarr store" if zarr_store else "file"
        raise InputError(f"No {what} {str(path)!r} (working directory {os.getcwd()!r}). Check "
                         "the path.")
    if path.is_dir() and not zarr_store:
        raise InputError(f"{str(path)!r} is a folder; pass the path of a file in it.")
    fmt = format if format is not None else EXTENSIONS.get(path.suffix.lower())
    if fmt not in FORMATS:
        known = ", ".join(sorted(EXTENSIONS))
        raise InputError(
            f"{path.name}: " + (f"format={format!r} is unknown" if format is not None else
                                f"the extension {path.suffix!r} is not one specbench reads")
            + f" ({known}). Pass format= with one of {sorted(FORMATS)}."
        )
    reader, options = FORMATS[fmt]
    stray = sorted(k for k, v in given.items()
                   if k not in options | _COMMON | {"format"} and not _is_default(k, v))
    if stray:
        raise InputError(f"{', '.join(stray)} do{'es' if len(stray) == 1 else ''} not apply "
                         f"to {fmt} files ({path.name}). Options for {fmt}: "
                         f"{sorted(options | _COMMON)}.")
    if not zarr_store and path.stat().st_size == 0:
        raise InputError(f"{path.name} is empty (0 bytes). Check that the export or copy "
                         "finished.")
    try:
        rec = reader(path, given)
    except PermissionError as exc:
        raise InputError(f"{path.name} cannot be read: permission denied ({str(path)!r}). Check the "
                         "file's permissions, or copy it to a folder you can read.") from exc
    kwargs = {k: _plain(v) for k, v in given.items() if not _is_default(k, v)}
    origin = {"kind": "load", "path": str(path), "kwargs": kwargs}
    return assemble(rec, fs=fs, unit=unit, on_gap=on_gap, max_jitter=max_jitter, origin=origin,
                    check_shape=fmt in ("npy", "npz", "hdf5"))


def _is_default(name: str, value: Any) -> bool:
    default = _DEFAULTS[name]
    if value is default:
        return True
    return default is not None and type(value) is type(default) and value == default


def _plain(value: Any) -> Any:
    """Keyword values as plain Python (for the code that repeats the load)."""
    if isinstance(value, np.dtype):
        return value.str
    if hasattr(value, "to_dict") and hasattr(value, "replace"):  # lazy=<estimator>: the chunking hint
        return True
    if isinstance(value, type) and issubclass(value, np.generic):
        return np.dtype(value).str
    if isinstance(value, (tuple, list)):
        return [_plain(v) for v in value]
    if isinstance(value, np.generic):
        return value.item()
    return value
