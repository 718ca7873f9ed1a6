"""``specbench estimate``: frozen settings applied to a recording, for pipelines.

Registered in :data:`specbench.cli.COMMANDS` as ``"estimate": (add_arguments, run)``.

The recording is read with :func:`specbench.load` (with the reading options stored in
the settings file, when it was written from loaded data), the stored selection is applied
(sample rate, channel, span: :meth:`Selection.apply`, as in the workbench), and the
settings' estimator runs once on the whole selection: exactly the call
``estimator(signal)`` the API makes, so the numbers are the API's, bit for bit (the CSV
writes every float with 17 significant digits, which round-trips).
"""

from __future__ import annotations

import argparse
import io
import json
import os
import sys
import tempfile
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

__all__ = ["add_arguments", "run", "estimate_file", "LONG_INPUT"]

#: inputs with more samples than this (all channels) get a running progress line
LONG_INPUT = 10_000_000

OUT_FORMATS = (".csv", ".npz")


class BatchError(Exception):
    """A problem the user can fix; the message says which and how (exit code 2)."""


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("data", metavar="DATA", type=Path,
                        help="the recording (CSV/TSV, NPY/NPZ, WAV, HDF5, raw binary: anything sb.load reads)")
    parser.add_argument("--settings", "-s", required=True, type=Path, metavar="S.json",
                        help="settings file written by sb.save_settings or the workbench's Save settings")
    parser.add_argument("--out", "-o", required=True, type=Path, metavar="RESULT",
                        help="result file: .csv (metadata header, then freq_hz,value,lower,upper) or .npz")
    parser.add_argument("--acf-out", type=Path, metavar="ACF",
                        help="also write the autocorrelation of the settings file (.csv or .npz)")
    parser.add_argument("--channel", metavar="NAME",
                        help="channel to analyse, in place of the settings' channel (default: the settings')")
    parser.add_argument("--fs", type=_rate, metavar="HZ",
                        help="sample rate in Hz, passed to sb.load; replaces any rate in the settings")
    parser.add_argument("--time-column", metavar="C",
                        help="text files: the time column (name or position), passed to sb.load")
    parser.add_argument("--quiet", "-q", action="store_true", help="no progress messages on stderr")


def _rate(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"--fs must be a sample rate in Hz, got {text!r}") from None
    if not np.isfinite(value) or value <= 0:
        raise argparse.ArgumentTypeError(f"--fs must be a positive sample rate in Hz, got {text!r}")
    return value


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
    if args.fs is not None:
        kwargs["fs"] = args.fs
        steps = [s for s in steps if s[0] != "with_fs"]
    if args.time_column is not None:
        tc = args.time_column
        kwargs["time_column"] = int(tc) if tc.isdigit() else tc
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


def estimate_file(args: argparse.Namespace, progress: _Progress) -> dict:
    """Read, select, estimate and write; returns a summary (used by the tests)."""
    import specbench as sb

    for out in (args.out, args.acf_out):
        if out is not None and out.suffix.lower() not in OUT_FORMATS:
            raise BatchError(f"cannot write {str(out)!r}: the result is written as .csv or .npz. "
                             f"Give a file name ending in {' or '.join(OUT_FORMATS)}.")
        if out is not None and not out.parent.exists():
            raise BatchError(f"cannot write {str(out)!r}: the folder {str(out.parent)!r} does not exist.")
    settings = read_settings(args.settings)
    est = settings.estimator
    if not isinstance(est, sb.estimators.SpectralEstimator):
        raise BatchError(
            f"the estimator in {str(args.settings)!r} is {est!r}; specbench estimate needs a spectral "
            "estimator (Welch, Periodogram, Multitaper, Correlogram)."
        )
    if args.acf_out is not None and settings.correlation is None:
        raise BatchError(f"--acf-out was given, but {str(args.settings)!r} holds no correlation estimator.")
    kwargs, steps = _load_options(settings, args)
    data = settings.data or {}
    if data.get("kind") == "demo" and data.get("steps"):
        progress.say(f"note: the settings were made on demo data cut with {data['steps']}; those cuts "
                     "belong to the demo and are not applied to DATA (the selection is).")
    load_call = "sb.load(" + ", ".join([repr(str(args.data))] + [f"{k}={v!r}" for k, v in kwargs.items()]) + ")"
    with progress.phase(f"reading {args.data}") as ph:
        sig = sb.load(args.data, **kwargs)
        root = sig
        sig = apply_steps(sig, steps)
        selection = _selection(settings, args)
        sig = selection.apply(sig)
        kind = "memory map" if isinstance(getattr(sig.data, "base", None), np.memmap) or isinstance(
            sig.data, np.memmap) else "in memory"
        ph.note = f"{root.n_channels} x {root.n_samples:,} samples at {root.fs:.9g} Hz ({kind})"
    total = sig.n_channels * sig.n_samples
    long = total > LONG_INPUT
    with progress.phase(f"estimating {est!r} on {sig.n_channels} x {sig.n_samples:,} samples", long) as ph, \
            reporting_progress(ph.blocks_done):
        spec = est(sig)
        ph.note = f"{spec.value.shape[-1]:,} frequencies"
    corr = None
    if args.acf_out is not None:
        with progress.phase(f"estimating {settings.correlation!r}", long) as ph, reporting_progress(ph.blocks_done):
            corr = settings.correlation(sig)
            ph.note = f"{corr.value.shape[-1]:,} lags"
    meta = _metadata(args, settings, load_call, steps, selection, sig, spec)
    with progress.phase(f"writing {args.out}") as ph:
        _write_spectrum(args.out, spec, meta)
    if corr is not None:
        with progress.phase(f"writing {args.acf_out}"):
            _write_correlation(args.acf_out, corr, _acf_metadata(meta, settings, corr))
    return {"spectrum": spec, "correlation": corr, "signal": sig, "metadata": meta}


def _dof_summary(spec: Any) -> str:
    dof = np.broadcast_to(spec.dof, spec.value.shape)
    inner = dof[..., 1:-1] if dof.shape[-1] > 2 else dof
    lo, hi = float(np.min(inner)), float(np.max(inner))
    text = f"{lo:.6g}" if lo == hi else f"{lo:.6g} to {hi:.6g}"
    return text + " per bin (DC and Nyquist of real data: half)"


def _metadata(args, settings, load_call, steps, selection, sig, spec) -> dict:
    chosen = "".join(f".{k}({', '.join(map(repr, a))})" for k, *a in list(steps) + selection.steps())
    return {
        "specbench_version": specbench_version(),
        "created": now_iso(),
        "data": str(args.data),
        "data_call": load_call + chosen,
        "data_source": getattr(sig, "source", ""),
        "settings": str(args.settings),
        "settings_written_by": settings.version,
        "estimator": repr(spec.estimator),
        "estimator_dict": spec.estimator.to_dict(),
        "fs_hz": spec.fs,
        "channels": list(spec.channels) if spec.channels else None,
        "samples": int(sig.n_samples),
        "samples_used": int(spec.samples_used),
        "scaling": spec.scaling,
        "onesided": bool(spec.onesided),
        "unit": spec.unit if isinstance(spec.unit, str) else list(spec.unit),
        "confidence": spec.confidence,
        "dof": _dof_summary(spec),
        "resolution_hz": float(spec.resolution),
        "segments": int(spec.segments),
    }


def _acf_metadata(meta: dict, settings: Settings, corr: Any) -> dict:
    out = {k: v for k, v in meta.items() if k not in ("estimator", "estimator_dict", "scaling", "onesided",
                                                     "unit", "dof", "resolution_hz", "segments", "samples_used")}
    out.update(estimator=repr(corr.estimator), estimator_dict=corr.estimator.to_dict(), unit=corr.unit,
               band=corr.band, confidence=corr.confidence, max_lag_samples=int(corr.info["max_lag_samples"]))
    return out


def _atomic_write(path: Path, write) -> None:
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=path.parent)
    try:
        with os.fdopen(fd, "wb") as f:
            write(f)
        os.replace(tmp, path)
    except BaseException:
        if os.path.exists(tmp):
            os.unlink(tmp)
        raise


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
        out.append(f"{key}: {value}")
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


_FLAGS = {"fs=": "--fs HZ", "time_column=": "--time-column C"}


def _command_line_hints(message: str) -> str:
    """The library's messages say ``fs=...``; on the command line that is an option."""
    hints = [flag for arg, flag in _FLAGS.items() if arg in message]
    if hints:
        message += f" (On the command line: {' or '.join(hints)}.)"
    return message


def run(args: argparse.Namespace) -> int:
    """Estimate the PSD of a recording with frozen settings, for pipelines.

    Reads DATA with sb.load (using the reading options stored in the settings file when
    it was written from a loaded file), applies the settings' data selection (sample
    rate, channel, span), runs the settings' estimator once on the whole selection, and
    writes frequency, value, lower and upper (per channel) to a .csv file with a metadata
    header of '#' lines, or to a .npz file with the arrays and a 'metadata' JSON string.
    The numbers are those of the Python API, bit for bit.

    Example:
      specbench estimate run_043.csv --settings psd.json --out run_043_psd.csv

    Exit codes: 0 written; 2 the input, the settings or the output is unusable (the
    message on stderr says which and how to fix it).
    """
    progress = _Progress(sys.stderr, args.quiet)
    try:
        estimate_file(args, progress)
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
    progress.say(f"wrote {args.out}" + (f" and {args.acf_out}" if args.acf_out is not None else ""))
    return 0
