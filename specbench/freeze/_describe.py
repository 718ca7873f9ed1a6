"""Plain-text descriptions shared by the frozen code cells, the settings file and the batch output:
where the data came from, what part of it was analysed, and the figures of merit."""

from __future__ import annotations

import datetime as _dt
import math
from typing import Any

import numpy as np

__all__ = [
    "specbench_version",
    "now_iso",
    "py",
    "call",
    "origin_call",
    "source_text",
    "selection_text",
    "figures_of_merit",
    "wrap_comment",
    "one_line",
    "LINE_BREAKS",
    "LINE",
    "input_guard",
    "container_converter",
]

#: characters that end a line for Python's tokenizer, for editors or for ``str.splitlines``:
#: none of them may reach a generated comment (a comment must not end before its text does)
LINE_BREAKS = "\n\r\x0b\x0c\x1c\x1d\x1e\x85\u2028\u2029"


def one_line(text: Any) -> str:
    """``text`` as one line of printable characters: line breaks and other unprintable characters
    are written as their escapes (``\\n``, ``\\u2028``), so a user's string (a path, a channel name,
    a unit) can sit in a comment or a file header without ending it."""
    text = str(text)
    if text.isprintable():
        return text
    return "".join(c if c.isprintable() else c.encode("unicode_escape").decode("ascii") for c in text)


def specbench_version() -> str:
    """``specbench.__version__``."""
    from .._version import __version__

    return __version__


def now_iso(now: _dt.datetime | None = None) -> str:
    """Local time with its UTC offset, to the second (ISO 8601)."""
    now = now or _dt.datetime.now(_dt.timezone.utc).astimezone()
    return now.isoformat(timespec="seconds")


def py(value: Any) -> str:
    """Python source for a plain value (numbers keep every bit: ``repr`` of a float round-trips)."""
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, (list, tuple)):
        inner = ", ".join(py(v) for v in value)
        if isinstance(value, tuple):
            return f"({inner},)" if len(value) == 1 else f"({inner})"
        return f"[{inner}]"
    if isinstance(value, dict):
        return "{" + ", ".join(f"{py(k)}: {py(v)}" for k, v in value.items()) + "}"
    if isinstance(value, float) and not math.isfinite(value):
        return f"float({str(value)!r})"
    if value is None or isinstance(value, (bool, int, float, str)):
        return repr(value)
    # pathlib.Path and other objects with a faithful repr of their own
    return repr(value)


def call(func: str, *args: Any, **kwargs: Any) -> str:
    for k in kwargs:
        if not (isinstance(k, str) and k.isidentifier()):
            raise ValueError(f"{one_line(repr(k))} is not a keyword name; it cannot appear in generated code.")
    parts = [py(a) for a in args] + [f"{k}={py(v)}" for k, v in kwargs.items()]
    return f"{func}({', '.join(parts)})"


def origin_call(origin: dict | None, prefix: str = "sb.") -> str | None:
    """``sb.load("run.csv", time_column="t")`` / ``sb.demo("name")`` for a Signal origin."""
    if not origin:
        return None
    kwargs = dict(origin.get("kwargs") or {})
    kind = origin.get("kind")
    if kind == "load":
        return call(prefix + "load", str(origin["path"]), **kwargs)
    if kind == "demo":
        return call(prefix + "demo", origin["name"], **kwargs)
    return None


def _steps_call(steps: Any) -> str:
    out = ""
    for step in steps:
        kind, *args = step
        out += "." + call(kind, *args)
    return out


def source_text(signal: Any, data_name: str) -> str:
    """One line: where the workbench's data came from."""
    origin = getattr(signal, "origin", None)
    shape = _shape_text(signal)
    made = origin_call(origin)
    if made is not None:
        text = f"{made}{_steps_call(getattr(signal, 'selection', ()))}: {shape}"
    else:
        text = f"in-memory data `{data_name}`: {shape}"
    src = getattr(signal, "source", "")
    if src:
        text += f"; {src}"
    return text


def _shape_text(signal: Any) -> str:
    chans = list(signal.channels)
    names = ", ".join(repr(c) for c in chans[:6]) + (", ..." if len(chans) > 6 else "")
    unit = signal.unit if isinstance(signal.unit, str) else "/".join(signal.unit)
    unit_text = f", unit {unit!r}" if unit else ""
    return (
        f"{len(chans)} channel{'s' if len(chans) != 1 else ''} [{names}] x "
        f"{signal.n_samples:,} samples at {signal.fs:.9g} Hz{unit_text}"
    )


def selection_text(state: Any) -> str:
    """One line: what part of the data was analysed."""
    parts = []
    if state.fs_override is not None:
        parts.append(f"sample rate set to {state.fs_override:.9g} Hz")
    if state.channel is not None:
        parts.append(f"channel {state.channel!r}")
    if state.span is not None:
        parts.append(f"{state.span[0]:.9g} s to {state.span[1]:.9g} s")
    sig = state.analysed_signal()
    what = ", ".join(parts) if parts else "the whole record"
    return f"{what}: {sig.n_channels} x {sig.n_samples:,} samples at {sig.fs:.9g} Hz"


def _g(x: float, digits: int = 4) -> str:
    return f"{x:.{digits}g}"


def _interior_dof(spec: Any) -> float:
    dof = np.broadcast_to(spec.dof, spec.value.shape)
    inner = dof[..., 1:-1] if dof.shape[-1] > 2 else dof
    return float(np.median(inner))


def figures_of_merit(spec: Any) -> list[str]:
    """Short phrases with the figures of merit of a :class:`Spectrum`."""
    info = spec.info or {}
    items = [f"resolution {_g(spec.resolution)} Hz"]
    if "enbw_bins" in info:
        items[-1] += f" (ENBW {info['enbw_bins']:.3f} bins)"
    if "tapers" in info:
        items.append(f"{info['tapers']} tapers, 2W = {_g(info['bandwidth_hz'])} Hz")
    if "max_lag" in info:
        items.append(f"max lag {info['max_lag']} samples, {info['lag_window']} lag window")
    items.append(f"{spec.segments} segment{'s' if spec.segments != 1 else ''}")
    if info.get("segments_skipped"):
        items.append(f"{info['segments_skipped']} segments skipped at gaps")
    items.append(f"{_g(_interior_dof(spec))} dof per bin")
    items.append(f"{100 * spec.confidence:.6g} % band {spec.band_db():.3g} dB wide")
    ratio = np.atleast_1d(spec.parseval_ratio())
    if ratio.size == 1:
        items.append(f"Parseval ratio {float(ratio[0]):.4f}")
    else:
        names = spec.channels or tuple(f"ch{i}" for i in range(ratio.size))
        items.append("Parseval ratio " + ", ".join(f"{float(r):.4f} ({n})" for r, n in zip(ratio, names)))
    return items


def wrap_comment(text: str, width: int = 88, indent: str = "#   ") -> list[str]:
    """``# text`` wrapped to ``width`` columns; continuation lines start with ``indent``.

    Line breaks and other unprintable characters in ``text`` are escaped (:func:`one_line`):
    the comment cannot end early and let the rest of a user's string run as code."""
    words = one_line(text).split(" ")
    lines: list[str] = []
    cur = "# "
    for w in words:
        if len(cur) + len(w) > width and cur.strip() not in ("#", indent.strip()):
            lines.append(cur.rstrip())
            cur = indent
        cur += w + " "
    lines.append(cur.rstrip())
    return lines


#: longest line the generator writes before it splits a statement
LINE = 88


def input_guard(name: str, what: str, example: str = "") -> list[str]:
    """Lines that stop the cell with a clear message when its input variable ``name`` is not defined."""
    example = example or f"{name} = np.load('run.npy')"
    message = (f"This frozen cell needs its input `{name}`: {what}. Define {name} before running the cell, "
               f"e.g. {example}.")
    chunks, line = [], ""
    for word in message.split(" "):
        if line and len(line) + len(word) + 1 > LINE - 12:
            chunks.append(line + " ")
            line = word
        else:
            line = f"{line} {word}" if line else word
    chunks.append(line)
    out = ["try:", f"    {name}", "except NameError:", "    raise RuntimeError("]
    out += [f"        {chunk!r}" for chunk in chunks]
    out += ["    ) from None"]
    return out


def container_converter(signal: Any) -> str | None:
    """``"from_pandas"`` / ``"from_xarray"`` when an in-memory signal was made from such an object."""
    source = getattr(signal, "source", "") or ""
    if source.startswith(("the DataFrame", "the Series")):
        return "from_pandas"
    if source.startswith("the DataArray"):
        return "from_xarray"
    return None
