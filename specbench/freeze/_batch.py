"""``specbench estimate``: frozen settings applied to a recording, for pipelines.

Registered in :data:`specbench.cli.COMMANDS` as ``"estimate": (add_arguments, run)``.

The recording is read with :func:`specbench.load` (with the reading options stored in
the settings file, when it was written from loaded data), the stored selection is applied
(sample rate, channel, span: :meth:`Selection.apply`, as in the workbench), and every
analysis of the settings file runs once on the whole selection: exactly the call
``estimator(signal)`` the API makes, so the numbers are the API's, bit for bit (the CSV
writes every float with 17 significant digits, which round-trips).

The main (first) analysis is written to ``--out``; every other analysis NAME to
``--acf-out`` (for ``acf``), ``--analysis-out NAME=PATH``, or by default beside ``--out``
as ``<out stem>.NAME<out suffix>``.  ``--only NAME,...`` runs a subset.

How an analysis kind is run and written is looked up in :data:`WRITERS` (estimator kind
-> :class:`AnalysisWriter`); the spectral and correlation kinds are registered here, and
a new analysis registers its own with :func:`register_writer` (the helpers
:func:`write_table` and :func:`write_arrays` write the CSV / NPZ layout).  A kind with no
writer is reported and skipped, never silently dropped.
"""

from __future__ import annotations

import argparse
import os
import sys
import threading
import time
from pathlib import Path
from typing import Any

import numpy as np

from .._errors import SpecbenchError
from ..estimators._engine import reporting_progress
from ._describe import now_iso, specbench_version
from ._settings import Settings, read_settings
from ._state import Selection, apply_steps
from ._writers import (  # noqa: F401  (AnalysisWriter, register_writer, write_table, ... are also read from here)
    _CORRELATION,
    _SPECTRUM,
    TEMP_SUFFIX,
    WRITERS,
    AnalysisWriter,
    BatchError,
    _atomic_write,
    _write_csv,
    _writer_for,
    register_writer,
    write_arrays,
    write_table,
)

__all__ = ["add_arguments", "run", "estimate_file", "LONG_INPUT", "AnalysisWriter", "WRITERS", "register_writer",
           "write_table", "write_arrays"]

#: inputs with more samples than this (all channels) get a running progress line
LONG_INPUT = 10_000_000

OUT_FORMATS = (".csv", ".npz")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("data", metavar="DATA", type=Path,
                        help="the recording (CSV/TSV, NPY/NPZ, WAV, HDF5, raw binary: anything sb.load reads)")
    parser.add_argument("--settings", "-s", required=True, type=Path, metavar="S.json",
                        help="settings file written by sb.save_settings or the workbench's Save settings")
    parser.add_argument("--out", "-o", required=True, type=Path, metavar="RESULT",
                        help="result file: .csv (metadata header, then freq_hz,value,lower,upper) or .npz")
    parser.add_argument("--acf-out", type=Path, metavar="ACF",
                        help="also write the autocorrelation of the settings file (.csv or .npz)")
    parser.add_argument("--analysis-out", action="append", default=[], metavar="NAME=PATH",
                        help="write the settings' analysis NAME there (default: beside --out, "
                             "as OUT_STEM.NAME.csv); may be repeated")
    parser.add_argument("--only", metavar="NAME[,NAME]",
                        help="run only these analyses of the settings file (default: every one)")
    parser.add_argument("--channel", metavar="NAME",
                        help="channel to analyse, in place of the settings' channel (default: the settings')")
    for flags, _key, options in LOADER_OPTIONS:
        parser.add_argument(*flags, **options)
    parser.add_argument("--overwrite", action="store_true",
                        help="replace result files that already exist (default: refuse; never an input file)")
    parser.add_argument("--quiet", "-q", action="store_true", help="no progress messages on stderr")
    parser.add_argument("--scheduler", metavar="ADDRESS",
                        help="run the estimates on this dask.distributed scheduler (tcp://host:8786): the "
                             "blocks are reduced on its workers (HDF5 and zarr inputs are read there: the "
                             "workers need the same paths); same numbers, bit for bit")


def _rate(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"--fs must be a sample rate in Hz, got {text!r}") from None
    if not np.isfinite(value) or value <= 0:
        raise argparse.ArgumentTypeError(f"--fs must be a positive sample rate in Hz, got {text!r}")
    return value


def _channels_arg(text: str) -> list:
    names = [c.strip() for c in text.split(",") if c.strip()]
    if not names:
        raise argparse.ArgumentTypeError(f"--channels takes names or positions separated by commas, got {text!r}")
    return [int(c) if c.isdigit() else c for c in names]


def _skip_arg(text: str) -> int:
    if not text.isdigit():
        raise argparse.ArgumentTypeError(f"--skip-rows takes a whole number of lines >= 0, got {text!r}")
    return int(text)


def _time_column_arg(text: str) -> Any:
    return int(text) if text.isdigit() else text


#: Reading options of ``specbench estimate``: (flags, sb.load keyword, argparse options).  Each one
#: given on the command line is passed to sb.load and replaces the settings file's value.  To add a
#: reading option, append a row; other options (not sb.load's) go to add_arguments directly.
LOADER_OPTIONS: list[tuple[tuple[str, ...], str, dict]] = [
    (("--fs",), "fs", dict(type=_rate, metavar="HZ",
                           help="sample rate in Hz, passed to sb.load; replaces any rate in the settings")),
    (("--time-column",), "time_column", dict(type=_time_column_arg, metavar="C",
                                             help="text files: the time column (name or position), passed to sb.load")),
    (("--on-gap",), "on_gap", dict(choices=("error", "fill"), metavar="error|fill",
                                   help="gaps and non-finite samples: 'error' (default) stops; 'fill' keeps "
                                        "them as NaN gaps (estimate with gaps='skip')")),
    (("--channels",), "channels", dict(type=_channels_arg, metavar="A,B",
                                       help="channels to read (names or positions, comma-separated), passed "
                                            "to sb.load")),
    (("--delimiter",), "delimiter", dict(metavar="D", help="text files: the delimiter (',', ';', 'tab', ' ')")),
    (("--decimal",), "decimal", dict(choices=(".", ","), metavar="MARK",
                                     help="text files: the decimal mark, '.' or ','")),
    (("--skip-rows",), "skip_rows", dict(type=_skip_arg, metavar="N",
                                         help="text files: lines of metadata above the header to skip")),
]


class _Progress:
    """Phase messages on stderr; on a terminal, a running clock while a long phase works.

    The phases are named as they start and finish, with their elapsed time; while an
    estimate streams over the record, the clock line also shows the blocks done of the
    current pass (``specbench.estimators._engine.reporting_progress``), so the fraction is
    the engine's own count, never a guess.
    """

    def __init__(self, stream: Any, quiet: bool) -> None:
        self.stream = stream
        self.quiet = quiet
        self.tty = bool(getattr(stream, "isatty", lambda: False)())

    def say(self, text: str) -> None:
        if not self.quiet:
            print(f"specbench estimate: {text}", file=self.stream, flush=True)

    def phase(self, text: str, long: bool = False) -> _Phase:
        return _Phase(self, text, long and self.tty and not self.quiet)


class _Phase:
    def __init__(self, progress: _Progress, text: str, ticking: bool) -> None:
        self.p, self.text, self.ticking = progress, text, ticking
        self.done = threading.Event()
        self.note = "done"
        self.blocks: tuple[int, int] | None = None
        self.passes = 0

    def blocks_done(self, done: int, total: int) -> None:
        """Engine callback: ``done`` of ``total`` blocks of the current pass."""
        if done == 1:
            self.passes += 1
        self.blocks = (done, total)

    def __enter__(self) -> _Phase:
        self.t0 = time.perf_counter()
        if self.p.quiet:
            return self
        if self.ticking:
            self.thread = threading.Thread(target=self._tick, daemon=True)
            self.thread.start()
        else:
            print(f"specbench estimate: {self.text} ...", file=self.p.stream, flush=True)
        return self

    def _tick(self) -> None:
        while not self.done.wait(0.5):
            elapsed = time.perf_counter() - self.t0
            where = ""
            if self.blocks is not None:
                done, total = self.blocks
                where = f", pass {self.passes}: {_bar(done / total)} {done}/{total} blocks"
            print(f"\rspecbench estimate: {self.text} ... {elapsed:5.1f} s{where}", end="",
                  file=self.p.stream, flush=True)

    def __exit__(self, exc_type, *rest) -> None:
        self.done.set()
        if self.p.quiet:
            return
        elapsed = time.perf_counter() - self.t0
        if self.ticking:
            self.thread.join()
            end = "failed" if exc_type else self.note
            print(f"\rspecbench estimate: {self.text} ... {end} ({elapsed:.1f} s)", file=self.p.stream, flush=True)
        elif exc_type is None:
            print(f"specbench estimate:   {self.note} ({elapsed:.1f} s)", file=self.p.stream, flush=True)


def _bar(fraction: float, width: int = 20) -> str:
    full = int(round(fraction * width))
    return "[" + "#" * full + "." * (width - full) + "]"


# --------------------------------------------------------------------------- the work


def _load_options(settings: Settings, args: argparse.Namespace) -> tuple[dict, list]:
    """sb.load keyword arguments and the steps to replay before the selection."""
    kwargs: dict[str, Any] = {}
    steps: list = []
    data = settings.data
    if data is not None and data.get("kind") == "load":
        kwargs.update(data.get("kwargs") or {})
        steps = [tuple(s) for s in data.get("steps", [])]
    for _flags, key, _options in LOADER_OPTIONS:
        value = getattr(args, key, None)
        if value is None:
            continue
        if key == "delimiter" and value in ("tab", "\\t"):
            value = "\t"
        kwargs[key] = value
        if key == "fs":
            steps = [s for s in steps if s[0] != "with_fs"]
    if args.channel is not None:
        steps = [s for s in steps if s[0] != "channel"]
    return kwargs, steps


def _selection(settings: Settings, args: argparse.Namespace) -> Selection:
    sel = settings.selection or Selection()
    return Selection(
        channel=args.channel if args.channel is not None else sel.channel,
        span=sel.span,
        fs=None if args.fs is not None else sel.fs,
    )


def _outputs(settings: Settings, args: argparse.Namespace) -> dict[str, Path]:
    """Analysis name -> output path, for the analyses to run (main one first)."""
    names = list(settings.analyses)
    only = getattr(args, "only", None)
    if only:
        wanted = [n.strip() for n in only.split(",") if n.strip()]
        unknown = [n for n in wanted if n not in names]
        if unknown or not wanted:
            raise BatchError(f"--only {only!r}: {str(args.settings)!r} holds the analyses {', '.join(names)}; "
                             "name some of those.")
        names = [n for n in names if n in wanted]
    given: dict[str, Path] = {}
    for item in getattr(args, "analysis_out", None) or []:
        name, sep, path = item.partition("=")
        if not sep or not name or not path:
            raise BatchError(f"--analysis-out {item!r}: write it as NAME=PATH, e.g. acf=run_043_acf.csv.")
        if name not in settings.analyses:
            raise BatchError(f"--analysis-out {item!r}: {str(args.settings)!r} has no analysis {name!r}; "
                             f"its analyses are {', '.join(settings.analyses)}.")
        given[name] = Path(path)
    if args.acf_out is not None:
        if "acf" not in settings.analyses or next(iter(settings.analyses)) == "acf":
            raise BatchError(f"--acf-out was given, but {str(args.settings)!r} holds no correlation estimator.")
        given["acf"] = args.acf_out
    main = next(iter(settings.analyses))
    out: dict[str, Path] = {}
    for name in names:
        if name == main:
            out[name] = given.get(name, args.out)
        else:
            out[name] = given.get(name, args.out.with_name(f"{args.out.stem}.{name}{args.out.suffix}"))
    return out


def estimate_file(args: argparse.Namespace, progress: _Progress) -> dict:
    """Read, select, run every analysis and write; returns a summary (used by the tests).

    The summary has ``"results"`` (name -> result), ``"paths"`` (name -> file written),
    ``"skipped"`` (name -> reason), ``"signal"``, ``"metadata"`` (of the main analysis),
    ``"fingerprint"`` (report line) and, for the old callers, ``"spectrum"`` and ``"correlation"``.
    """
    from ..data import load

    settings = read_settings(args.settings)
    outputs = _outputs(settings, args)
    _guard_outputs(args, outputs, progress)
    for out in {args.out, *outputs.values()}:
        if out.suffix.lower() not in OUT_FORMATS:
            raise BatchError(f"cannot write {str(out)!r}: the result is written as .csv or .npz. "
                             f"Give a file name ending in {' or '.join(OUT_FORMATS)}.")
        if not out.parent.exists():
            raise BatchError(f"cannot write {str(out)!r}: the folder {str(out.parent)!r} does not exist.")
    runnable: dict[str, AnalysisWriter] = {}
    skipped: dict[str, str] = {}
    for name in outputs:
        writer = _writer_for(settings.analyses[name])
        if writer is None:
            skipped[name] = (f"{settings.analyses[name].kind} has no writer in specbench estimate "
                             f"(known: spectral estimators, {', '.join(sorted(WRITERS))})")
        else:
            runnable[name] = writer
    if not runnable:
        raise BatchError(
            f"{str(args.settings)!r} holds no analysis specbench estimate can run: "
            + "; ".join(f"{n}: {why}" for n, why in skipped.items()) + "."
        )
    kwargs, steps = _load_options(settings, args)
    data = settings.data or {}
    if data.get("kind") == "demo" and data.get("steps"):
        progress.say(f"note: the settings were made on demo data cut with {data['steps']}; those cuts "
                     "belong to the demo and are not applied to DATA (the selection is).")
    load_call = "sb.load(" + ", ".join([repr(str(args.data))] + [f"{k}={v!r}" for k, v in kwargs.items()]) + ")"
    with progress.phase(f"reading {args.data}") as ph:
        sig = load(args.data, **kwargs)
        root = sig
        sig = apply_steps(sig, steps)
        selection = _selection(settings, args)
        sig = selection.apply(sig)
        kind = "memory map" if isinstance(getattr(sig.data, "base", None), np.memmap) or isinstance(
            sig.data, np.memmap) else "in memory"
        ph.note = f"{root.n_channels} x {root.n_samples:,} samples at {root.fs:.9g} Hz ({kind})"
        every = sig  # every channel at the selection's rate and span, for cross-channel analyses
        if selection.channel is not None and any(w.channels == "all" for w in runnable.values()):
            every = Selection(span=selection.span, fs=selection.fs).apply(apply_steps(root, steps))
    fp_line = _fingerprint_report(settings, sig)
    progress.say(fp_line)
    if getattr(args, "scheduler", None):
        sig = _on_cluster(sig)
        every = sig if every is sig else _on_cluster(every)
    for name, why in skipped.items():
        progress.say(f"skipped the analysis {name!r}: {why}.")
    total = sig.n_channels * sig.n_samples
    long = total > LONG_INPUT
    base = _base_metadata(args, settings, load_call, steps, selection, sig, fp_line)
    results: dict[str, Any] = {}
    metas: dict[str, dict] = {}
    for name, writer in runnable.items():
        est = settings.analyses[name]
        own = every if writer.channels == "all" else sig
        with progress.phase(f"estimating {est!r} on {own.n_channels} x {own.n_samples:,} samples", long) as ph, \
                reporting_progress(ph.blocks_done):
            opts = settings.options.get(name, {})
            result = writer.run(est, own, opts) if writer.run is not None else est(own)
            if writer.describe is not None:
                ph.note = writer.describe(result)
        meta = dict(base)
        meta["analysis"] = name
        extra = writer.metadata(result) if writer.metadata is not None else {}
        meta.setdefault("estimator", repr(est))
        meta.setdefault("estimator_dict", est.to_dict())
        meta.update(extra)
        if settings.options.get(name):
            meta["options"] = settings.options[name]
        results[name], metas[name] = result, meta
    for name in runnable:
        with progress.phase(f"writing {outputs[name]}"):
            runnable[name].write(outputs[name], results[name], metas[name])
    main = next(iter(results))
    return {
        "results": results,
        "paths": {n: outputs[n] for n in results},
        "skipped": skipped,
        "signal": sig,
        "metadata": metas[main],
        "fingerprint": fp_line,
        "spectrum": results.get("psd", results[main]),
        "correlation": results.get("acf") if main != "acf" else None,
    }


def _fingerprint_report(settings: Settings, sig: Any) -> str:
    """One line: does DATA (as selected) match the samples the settings were chosen on?"""
    from ._fingerprint import fingerprint

    if settings.fingerprint is None:
        return "data fingerprint: the settings record none (written without one); not compared."
    now = fingerprint(sig)
    diffs = now.differences(settings.fingerprint)
    if not diffs:
        return f"data fingerprint: matches the data the settings were chosen on ({now.describe()})."
    return ("data fingerprint: differs from the data the settings were chosen on: " + "; ".join(diffs)
            + " (expected for a new run).")


def _base_metadata(args, settings, load_call, steps, selection, sig, fp_line) -> dict:
    chosen = "".join(f".{k}({', '.join(map(repr, a))})" for k, *a in list(steps) + selection.steps())
    return {
        "specbench_version": specbench_version(),
        "created": now_iso(),
        "data": str(args.data),
        "data_call": load_call + chosen,
        "data_source": getattr(sig, "source", ""),
        "settings": str(args.settings),
        "settings_written_by": settings.version,
        "fs_hz": sig.fs,
        "channels": list(sig.channels) if sig.channels else None,
        "samples": int(sig.n_samples),
        "fingerprint": fp_line.split(": ", 1)[1],
    }


#: temporary files are named ``.<output name>.<random>`` + this, next to the output
def _same_file(a: Path, b: Path) -> bool:
    """``a`` and ``b`` name one file: the same resolved path, or (both existing) one inode."""
    if os.path.realpath(a) == os.path.realpath(b):
        return True
    try:
        return os.path.samefile(a, b)
    except OSError:
        return False


def _guard_outputs(args: argparse.Namespace, outputs: dict[str, Path], progress: Any) -> None:
    """Refuse any write that could destroy data: an output that is an input (also through a
    symlink or a hard link), two outputs on one file, an existing file without --overwrite.
    Reports temporary files left next to an output by a killed run."""
    inputs = {"the recording DATA": args.data, "the settings file": args.settings}
    seen: dict[str, Path] = {}
    for name, out in outputs.items():
        for what, inp in inputs.items():
            if _same_file(out, inp):
                raise BatchError(f"refusing to write the {name!r} result to {str(out)!r}: that is {what} "
                                 f"({str(inp)!r}), which would be destroyed. Choose another output file name.")
        for other, path in seen.items():
            if _same_file(out, path):
                raise BatchError(f"the analyses {other!r} and {name!r} would both be written to {str(out)!r}; "
                                 "the second would replace the first. Give each its own file (--out, --acf-out, "
                                 "--analysis-out NAME=PATH).")
        seen[name] = out
        if out.is_dir():
            raise BatchError(f"cannot write {str(out)!r}: it is a folder. Give a file name ending in .csv or .npz.")
        if (out.exists() or out.is_symlink()) and not getattr(args, "overwrite", False):
            raise BatchError(f"{str(out)!r} already exists; specbench estimate does not replace files unless "
                             "told to. Pass --overwrite to replace it, or choose another output name.")
        folder = Path(os.path.realpath(out)).parent
        if folder.is_dir():
            target = Path(os.path.realpath(out)).name
            for left in sorted(folder.glob(f".{target}.*{TEMP_SUFFIX}")):
                progress.say(f"note: {str(left)!r} is a partial file left by an interrupted run (killed before "
                             f"it could clean up); it is not a result. Delete it.")


_FLAGS = {"fs=": "--fs HZ", "time_column=": "--time-column C", "on_gap=": "--on-gap fill",
          "channels=": "--channels A,B", "skip_rows=": "--skip-rows N", "delimiter=": "--delimiter D",
          "decimal=": "--decimal MARK"}


def _command_line_hints(message: str) -> str:
    """The library's messages say ``fs=...``; on the command line that is an option."""
    hints = [flag for arg, flag in _FLAGS.items() if arg in message]
    if hints:
        message += f" (On the command line: {' or '.join(hints)}.)"
    return message


class _Terminated(BaseException):
    """SIGTERM during specbench estimate: unwinds so that partial files are removed."""


def _on_sigterm(signum, frame) -> None:
    raise _Terminated(signum)


def _catch_sigterm() -> Any:
    import signal

    try:
        return signal.signal(signal.SIGTERM, _on_sigterm)
    except ValueError:  # not the main thread (run from a test or an embedding program)
        return None


def _restore_sigterm(previous: Any) -> None:
    import signal

    if previous is not None:
        signal.signal(signal.SIGTERM, previous)
#: seconds to wait for a dask scheduler to answer before giving up
SCHEDULER_TIMEOUT = 5


def _connect(address: str):
    """A dask.distributed Client on ``address``, or a BatchError within a few seconds."""
    try:
        from distributed import Client
    except ImportError:
        raise BatchError("--scheduler needs dask.distributed. "
                         "Install it with: pip install 'specbench[dask]'.") from None
    try:
        return Client(address, timeout=SCHEDULER_TIMEOUT, set_as_default=True)
    except (OSError, TimeoutError, ValueError, TypeError) as e:
        raise BatchError(
            f"--scheduler {address!r}: no dask scheduler answered within {SCHEDULER_TIMEOUT} s "
            f"({type(e).__name__}: {e}). Check the address and port (e.g. tcp://10.0.0.5:8786), or start a "
            "scheduler with: dask scheduler"
        ) from None


class MappedSamples:
    """A memory-mapped array described by its file: path, byte offset, dtype, shape, strides.

    A NumPy view of a memory map (a selection of channels and span, a transposed
    interleaved file) is described without reading it; pickled to a dask worker, it opens
    the file there (read-only, once per process) and returns the samples of the block it
    is asked for, so ``specbench estimate --scheduler`` reads each block where its task
    runs.  The workers must see the file at the same path (a shared or local disk).
    """

    _open: dict = {}

    def __init__(self, path: str, offset: int, dtype: str, shape: tuple, strides: tuple, stamp: tuple) -> None:
        self.path, self.offset, self.dtype = path, int(offset), np.dtype(dtype)
        self.shape, self.strides, self.stamp = tuple(shape), tuple(strides), stamp
        self.ndim = len(self.shape)

    @classmethod
    def of(cls, a: Any) -> MappedSamples | None:
        """The description of ``a`` if it is a view of a file's memory map, else None."""
        import mmap

        if not isinstance(a, np.ndarray) or any(st < 0 for st in a.strides) or a.size == 0:
            return None
        root = a
        while isinstance(root, np.ndarray) and not isinstance(root.base, mmap.mmap):
            root = root.base
        if not isinstance(root, np.memmap) or not getattr(root, "filename", None):
            return None
        start = a.__array_interface__["data"][0] - root.__array_interface__["data"][0]
        span = sum((n - 1) * st for n, st in zip(a.shape, a.strides)) + a.itemsize
        if start < 0 or start + span > root.nbytes:
            return None
        path = os.fspath(root.filename)
        st = os.stat(path)
        return cls(path, root.offset + start, a.dtype.str, a.shape, a.strides, (st.st_size, st.st_mtime_ns))

    def token(self) -> str:
        import hashlib

        key = repr((self.path, self.offset, self.dtype.str, self.shape, self.strides, self.stamp))
        return hashlib.blake2b(key.encode(), digest_size=12).hexdigest()

    def __dask_tokenize__(self):
        return self.token()

    def _view(self) -> np.ndarray:
        key = (self.path, self.stamp)
        whole = MappedSamples._open.get(key)
        if whole is None:
            try:
                st = os.stat(self.path)
            except OSError as e:
                raise BatchError(f"a dask worker cannot open {self.path!r} ({e.strerror}): the workers read the "
                                 "memory-mapped input themselves, so it must be at the same path on every "
                                 "worker (a shared or local disk).") from e
            if (st.st_size, st.st_mtime_ns) != self.stamp:
                raise BatchError(f"{self.path!r} changed while it was being estimated (size or modification "
                                 "time differs from when it was opened); run the estimate again on the "
                                 "finished file.")
            whole = MappedSamples._open[key] = np.memmap(self.path, dtype=np.uint8, mode="r")
        return np.ndarray(self.shape, dtype=self.dtype, buffer=whole, offset=self.offset, strides=self.strides)

    def __getitem__(self, key: Any) -> np.ndarray:
        return np.array(self._view()[key])


def _on_cluster(sig: Any) -> Any:
    """The selection's samples as a dask array, so that the engines send the blocks to the
    workers (a lazily opened HDF5/zarr input already is one)."""
    from ..data import Signal
    from ..estimators._engine import TASK_SAMPLES, is_lazy

    if is_lazy(sig.data):
        return sig
    import dask.array as da

    mapped = MappedSamples.of(sig.data)
    if mapped is not None:  # the workers open the file themselves: the client reads no samples
        lazy = da.from_array(mapped, chunks=(sig.n_channels, TASK_SAMPLES), asarray=True, lock=False,
                             fancy=False, name=f"specbench-mapped-{mapped.token()}",
                             meta=np.empty((0,) * mapped.ndim, dtype=mapped.dtype))
    else:
        lazy = da.from_array(np.asarray(sig.data), chunks=(sig.n_channels, TASK_SAMPLES))
    return Signal(lazy, sig.fs, channels=sig.channels, unit=sig.unit, t0=sig.t0, source=sig.source,
                  origin=sig._origin, selection=sig._selection, truth=sig._truth, start=sig._start)


def run(args: argparse.Namespace) -> int:
    """Estimate the PSD (and every other analysis) of a recording with frozen settings, for pipelines.

    Reads DATA with sb.load (using the reading options stored in the settings file when
    it was written from a loaded file), applies the settings' data selection (sample
    rate, channel, span), runs each analysis of the settings file once on the whole
    selection, and writes, for the PSD, frequency, value, lower and upper (per channel)
    to a .csv file with a metadata header of '#' lines, or to a .npz file with the arrays
    and a 'metadata' JSON string. The main analysis goes to --out, the others beside it
    (OUT_STEM.NAME.csv, or --acf-out / --analysis-out NAME=PATH; --only NAME picks some).
    It reports whether DATA matches the data fingerprint the settings recorded.
    The numbers are those of the Python API, bit for bit.

    Example:
      specbench estimate run_043.csv --settings psd.json --out run_043_psd.csv

    Exit codes: 0 written; 2 the input, the settings or the output is unusable (the
    message on stderr says which and how to fix it).
    """
    progress = _Progress(sys.stderr, args.quiet)
    previous = _catch_sigterm()
    client = None
    try:
        if getattr(args, "scheduler", None):
            client = _connect(args.scheduler)
            progress.say(f"dask scheduler {args.scheduler}: {len(client.scheduler_info().get('workers', {}))} workers")
        summary = estimate_file(args, progress)
    except _Terminated as e:
        print(f"specbench estimate: stopped by signal {e.args[0]}; no result was written and the "
              "partial files were removed.", file=sys.stderr)
        return 128 + int(e.args[0])
    except (SpecbenchError, BatchError) as e:
        print(f"specbench estimate: {_command_line_hints(str(e))}", file=sys.stderr)
        return 2
    except MemoryError:
        print("specbench estimate: out of memory. Estimate a shorter span, or save the data as .npy "
              "(memory-mapped, streamed in blocks).", file=sys.stderr)
        return 2
    except OSError as e:
        print(f"specbench estimate: {e.filename or ''}: {e.strerror or e}", file=sys.stderr)
        return 2
    finally:
        _restore_sigterm(previous)
        if client is not None:
            client.close()
    progress.say("wrote " + ", ".join(f"{p} ({n})" for n, p in summary["paths"].items()))
    return 0
