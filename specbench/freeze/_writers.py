"""How ``specbench estimate`` writes each kind of analysis: the writer table and the house file layouts.

The bottom of the batch side of freeze/: :mod:`._batch` (the command) reads the table, and the
modules of other analyses (:mod:`._cross_form`, :mod:`._noise_form`, imported by the package)
add their kinds with :func:`register_writer`; neither imports the other.
"""

from __future__ import annotations

import io
import json
import os
import tempfile
from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from ._describe import one_line

__all__ = ["AnalysisWriter", "BatchError", "WRITERS", "register_writer", "write_table", "write_arrays", "TEMP_SUFFIX"]


class BatchError(Exception):
    """A problem the user can fix; the message says which and how (exit code 2)."""


@dataclass(frozen=True)
class AnalysisWriter:
    """How ``specbench estimate`` runs one kind of analysis and writes its result.

    Attributes
    ----------
    write : callable ``(path, result, metadata) -> None``
        Writes the result to ``path`` (``.csv`` or ``.npz``, by its suffix), with the
        metadata dict in the header (see :func:`write_table` / :func:`write_arrays`).
    run : callable ``(estimator, signal, options) -> result``, optional
        Computes the result; default ``estimator(signal)``.  ``options`` is the analysis'
        ``options`` object of the settings file (``{}`` when none).
    describe : callable ``(result) -> str``, optional
        Short note for the progress line, e.g. ``"4,097 frequencies"``.
    metadata : callable ``(result) -> dict``, optional
        Entries for the file's metadata (estimator, unit, confidence, ...); ``estimator``
        and ``estimator_dict`` are added when it does not set them.
    channels : {"one", "all"}
        ``"one"``: the analysis gets the selection (its channel, when it names one);
        ``"all"``: every channel at the selection's rate and span (cross-channel analyses,
        like the Workbench's ``channels = "all"``).
    """

    write: Callable[[Path, Any, dict], None]
    run: Callable[[Any, Any, dict], Any] | None = None
    describe: Callable[[Any], str] | None = None
    metadata: Callable[[Any], dict] | None = None
    channels: str = "one"


#: estimator kind -> how ``specbench estimate`` runs and writes it (spectral kinds fall back to
#: the spectrum writer); register new kinds with :func:`register_writer`
WRITERS: dict[str, AnalysisWriter] = {}


def register_writer(kind: str, writer: AnalysisWriter) -> None:
    """Teach ``specbench estimate`` an analysis kind (an estimator's ``kind``, e.g. ``"CrossSpectrum"``)."""
    if not isinstance(writer, AnalysisWriter):
        raise TypeError(f"writer must be an AnalysisWriter; got {type(writer).__name__}")
    WRITERS[kind] = writer


def _writer_for(est: Any) -> AnalysisWriter | None:
    from ..estimators import SpectralEstimator

    if est.kind in WRITERS:
        return WRITERS[est.kind]
    if isinstance(est, SpectralEstimator):
        return _SPECTRUM
    return None


TEMP_SUFFIX = ".specbench-partial"


def _umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def _atomic_write(path: Path, write) -> None:
    """Write through a temporary file next to the target, then rename it over the target.

    A symlink is followed (its target is replaced, the link stays); the file gets the mode of
    the file it replaces, or 0666 less the umask for a new file (as ``open`` would give); on
    failure or a signal (SIGTERM is turned into an exception by :func:`run`) the temporary file
    is removed.  Errors name the output, never the temporary file."""
    target = Path(os.path.realpath(path))
    try:
        mode = (os.stat(target).st_mode & 0o7777) if target.exists() else (0o666 & ~_umask())
        fd, tmp = tempfile.mkstemp(prefix=f".{target.name}.", suffix=TEMP_SUFFIX, dir=target.parent)
    except OSError as e:
        raise BatchError(f"cannot write {str(path)!r}: {e.strerror or e} (in the folder "
                         f"{str(target.parent)!r}). Check its permissions and free space.") from None
    try:
        with os.fdopen(fd, "wb") as f:
            write(f)
        os.chmod(tmp, mode)
        os.replace(tmp, target)
    except OSError as e:
        _remove(tmp)
        raise BatchError(f"cannot write {str(path)!r}: {e.strerror or e}. Check the folder's "
                         "permissions and free space.") from None
    except BaseException:
        _remove(tmp)
        raise


def _remove(tmp: str) -> None:
    try:
        os.unlink(tmp)
    except FileNotFoundError:
        pass


def _spectrum_metadata(spec: Any) -> dict:
    return {
        "estimator": repr(spec.estimator),
        "estimator_dict": spec.estimator.to_dict(),
        "samples_used": int(spec.samples_used),
        "scaling": spec.scaling,
        "onesided": bool(spec.onesided),
        "unit": spec.unit if isinstance(spec.unit, str) else list(spec.unit),
        "confidence": spec.confidence,
        "dof": _dof_summary(spec),
        "resolution_hz": float(spec.resolution),
        "segments": int(spec.segments),
    }


def _correlation_metadata(corr: Any) -> dict:
    return {"estimator": repr(corr.estimator), "estimator_dict": corr.estimator.to_dict(), "unit": corr.unit,
            "band": corr.band, "confidence": corr.confidence, "max_lag_samples": int(corr.info["max_lag_samples"])}


def _dof_summary(spec: Any) -> str:
    dof = np.broadcast_to(spec.dof, spec.value.shape)
    inner = dof[..., 1:-1] if dof.shape[-1] > 2 else dof
    lo, hi = float(np.min(inner)), float(np.max(inner))
    text = f"{lo:.6g}" if lo == hi else f"{lo:.6g} to {hi:.6g}"
    return text + " per bin (DC and Nyquist of real data: half)"


def _columns(names: list[str], parts: tuple[str, ...]) -> list[str]:
    if len(names) == 1:
        return list(parts)
    return [f"{n}:{p}" for n in names for p in parts]


def _table(axis: np.ndarray, result: Any) -> np.ndarray:
    value = np.atleast_2d(result.value)
    cols = [axis]
    for i in range(value.shape[0]):
        for part in ("value", "lower", "upper"):
            cols.append(np.atleast_2d(getattr(result, part))[i])
    return np.column_stack(cols)


def _write_csv(path: Path, header: list[str], first: str, names: list[str], table: np.ndarray) -> None:
    import csv

    line = io.StringIO()
    csv.writer(line, lineterminator="\n").writerow([first] + _columns(names, ("value", "lower", "upper")))

    def write(f) -> None:
        f.write("".join(f"# {h}\n" for h in header).encode("utf-8"))
        f.write(line.getvalue().encode("utf-8"))
        np.savetxt(f, table, fmt="%.17g", delimiter=",")

    _atomic_write(path, write)


def _names(result: Any) -> list[str]:
    n = np.atleast_2d(result.value).shape[0]
    return list(result.channels) if result.channels else [f"ch{i}" for i in range(n)]


def _header(meta: dict) -> list[str]:
    out = [f"specbench estimate, specbench {meta['specbench_version']}, {meta['created']}"]
    for key, value in meta.items():
        if key in ("specbench_version", "created", "estimator_dict"):
            continue
        out.append(one_line(f"{key}: {value}"))  # a path or name with a line break stays on its line
    return out


def _write_spectrum(path: Path, spec: Any, meta: dict) -> None:
    names = _names(spec)
    if path.suffix.lower() == ".csv":
        _write_csv(path, _header(meta), "freq_hz", names, _table(spec.freq, spec))
    else:
        _write_npz(path, meta, freq_hz=spec.freq, value=spec.value, lower=spec.lower, upper=spec.upper,
                   dof=np.asarray(spec.dof), channels=np.array(names))


def _write_correlation(path: Path, corr: Any, meta: dict) -> None:
    names = _names(corr)
    if path.suffix.lower() == ".csv":
        _write_csv(path, _header(meta), "lag_s", names, _table(corr.lag, corr))
    else:
        _write_npz(path, meta, lag_s=corr.lag, value=corr.value, lower=corr.lower, upper=corr.upper,
                   channels=np.array(names))


def _write_npz(path: Path, meta: dict, **arrays: np.ndarray) -> None:
    text = json.dumps(meta, indent=1)
    _atomic_write(path, lambda f: np.savez(f, metadata=np.array(text), **arrays))


def write_table(path: Path, meta: dict, axis_name: str, axis: Any, columns: dict[str, Any]) -> None:
    """Write a table the way ``specbench estimate`` writes its results, for an analysis' writer.

    ``.csv``: the metadata as ``# key: value`` lines, a header row ``axis_name,<column names>``,
    then one row per axis value, floats with 17 significant digits (round-trips).  ``.npz``:
    the arrays by name (``axis_name`` and each column) and ``metadata`` as a JSON string.
    Columns must have the axis' length.  The file is replaced atomically.
    """
    axis = np.asarray(axis)
    cols = {k: np.asarray(v) for k, v in columns.items()}
    for k, v in cols.items():
        if v.shape != axis.shape:
            raise ValueError(f"column {k!r} has shape {v.shape}; the axis {axis_name!r} has {axis.shape}")
    if path.suffix.lower() == ".csv":
        import csv

        line = io.StringIO()
        csv.writer(line, lineterminator="\n").writerow([axis_name, *cols])
        table = np.column_stack([axis, *cols.values()])

        def write(f) -> None:
            f.write("".join(f"# {h}\n" for h in _header(meta)).encode("utf-8"))
            f.write(line.getvalue().encode("utf-8"))
            np.savetxt(f, table, fmt="%.17g", delimiter=",")

        _atomic_write(path, write)
    else:
        _write_npz(path, meta, **{axis_name: axis}, **cols)


def write_arrays(path: Path, meta: dict, **arrays: Any) -> None:
    """Write arrays of any shape with the metadata to an ``.npz`` file (atomically)."""
    _write_npz(path, meta, **{k: np.asarray(v) for k, v in arrays.items()})


_SPECTRUM = AnalysisWriter(write=_write_spectrum, describe=lambda r: f"{r.value.shape[-1]:,} frequencies",
                           metadata=_spectrum_metadata)
_CORRELATION = AnalysisWriter(write=_write_correlation, describe=lambda r: f"{r.value.shape[-1]:,} lags",
                              metadata=_correlation_metadata)
for _kind in ("Welch", "Periodogram", "Multitaper", "Correlogram"):
    register_writer(_kind, _SPECTRUM)
for _kind in ("Autocorrelation", "CrossCorrelation"):
    register_writer(_kind, _CORRELATION)
