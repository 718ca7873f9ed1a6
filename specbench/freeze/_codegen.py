"""Frozen code cells: the workbench's settings as a self-contained, readable cell.

Two forms:

- ``style="specbench"``: ``import specbench as sb``, the data line (the ``sb.load`` /
  ``sb.demo`` call or the in-memory variable, then the channel, span and sample-rate
  choices through the same :class:`Signal` methods the workbench used), the estimator
  constructors showing only non-default fields (``repr`` of the estimator, which keeps
  every bit of a float), and ``spectrum = ...``, ``correlation = ...``.  Run on the same
  data it gives the workbench's numbers bit for bit: the estimation core is deterministic.
- ``style="scipy"``: numpy and scipy only (see :mod:`specbench.freeze._scipy_form`).
"""

from __future__ import annotations

import ast
import builtins
import datetime as _dt
import keyword
from os import PathLike
from typing import Any

from .._errors import SettingsError
from ._describe import (
    LINE,
    LINE_BREAKS,
    call,
    container_converter,
    figures_of_merit,
    input_guard,
    now_iso,
    origin_call,
    selection_text,
    source_text,
    specbench_version,
    wrap_comment,
)
from ._scipy_form import scipy_body
from ._state import FreezeState

__all__ = ["STYLES", "code_cell", "check_data_name"]

STYLES = ("specbench", "scipy")


def check_data_name(name: Any) -> str:
    """Return ``name`` if it can name the in-memory data in a frozen cell, else raise SettingsError."""
    if not isinstance(name, str) or not name.isidentifier() or keyword.iskeyword(name):
        raise SettingsError(
            f"data_name must be a Python variable name such as 'x' or 'run_042'; got {name!r}. "
            "It names the in-memory data in the frozen code cell."
        )
    if hasattr(builtins, name) or name in ("np", "sb", "scipy"):
        raise SettingsError(
            f"data_name {name!r} would hide a builtin or a module the frozen cell imports. "
            "Choose another variable name, for example 'x' or 'data'."
        )
    return name


def code_cell(
    state: FreezeState,
    style: str = "specbench",
    *,
    settings_path: str | PathLike | None = None,
    now: _dt.datetime | None = None,
) -> str:
    """The frozen code cell for a workbench state.

    Parameters
    ----------
    state : FreezeState
        The workbench's data, choices and estimators (``bench.freeze_state()``).
    style : {"specbench", "scipy"}
        ``"specbench"``: reproduces ``bench.spectrum`` / ``bench.correlation`` bit for bit.
        ``"scipy"``: numpy/scipy only; agrees to floating-point precision, or says in the
        cell where a method has no faithful plain form.
    settings_path : path, optional
        A settings file written alongside; the header names it.
    now : datetime, optional
        Time stamp of the header (default: now).

    Returns
    -------
    str
        Python source, ending with a newline.
    """
    if style not in STYLES:
        raise SettingsError(f"style must be one of {', '.join(map(repr, STYLES))}; got {style!r}.")
    check_data_name(state.data_name)
    header = _header(state, style, settings_path, now)
    if style == "specbench":
        body = _specbench_body(state)
    else:
        body = scipy_body(state)
    code = "\n".join(header) + "\n" + body
    _check_names(code, state.data_name)
    return code


# --------------------------------------------------------------------------- header


def _header(state: FreezeState, style: str, settings_path: Any, now: _dt.datetime | None) -> list[str]:
    form = "specbench form" if style == "specbench" else "plain numpy/scipy form (no specbench needed)"
    lines = [f"# Frozen spectral estimate, {form}.", f"# specbench {specbench_version()}, frozen {now_iso(now)}."]
    lines += wrap_comment(f"Data: {source_text(state.signal, state.data_name)}.")
    lines += wrap_comment(f"Analysed: {selection_text(state)}.")
    spec = state.spectrum
    if spec is None:
        lines.append("# Figures of merit: no estimate had been computed at freeze time.")
    elif getattr(spec, "estimator", None) != state.estimator:
        lines.append("# Figures of merit: not shown; the last estimate was made with other settings.")
    else:
        lines += wrap_comment("At freeze time: " + ", ".join(figures_of_merit(spec)) + ".")
    if settings_path is not None:
        lines += wrap_comment(f"Settings file: {str(settings_path)} (sb.load_settings reads it).")
    if style == "specbench":
        lines.append("# Run on the same data, it gives the workbench's numbers bit for bit.")
    else:
        lines += wrap_comment(
            "On the same data it agrees with specbench to floating-point precision "
            "(the sums run in another order), not bit for bit."
        )
    return lines


# --------------------------------------------------------------------------- specbench form


def _specbench_body(state: FreezeState) -> str:
    sig = "sig" if state.data_name != "sig" else "signal"
    out = ["import specbench as sb", ""]
    if origin_call(getattr(state.signal, "origin", None)) is None:
        signal = state.signal
        out += input_guard(state.data_name, f"the data given to the workbench, a specbench Signal or an array "
                                            f"of {signal.n_channels} channel{'s' if signal.n_channels != 1 else ''}"
                                            f" x {signal.n_samples:,} samples at {signal.fs:.9g} Hz",
                           f"{state.data_name} = sb.load('run.csv')")
    out += data_lines(state, sig)
    out += fingerprint_lines(state, sig)
    out.append(_constructor("psd_estimator", state.estimator))
    acf = state.correlation_estimator
    if acf is not None:
        out.append(_constructor("acf_estimator", acf))
    out.append("")
    out.append(f"spectrum = psd_estimator({sig})")
    if acf is not None:
        out.append(f"correlation = acf_estimator({sig})")
    for lines in getattr(state, "code_lines", {}).values():  # the workbench's other named analyses
        out += [line.replace("{sig}", sig) for line in lines]
    return "\n".join(out) + "\n"


def fingerprint_lines(state: FreezeState, var: str) -> list[str]:
    """``made_on = sb.Fingerprint(...)`` of the analysed samples and the ``sb.check_data`` call."""
    from ._fingerprint import fingerprint

    fp = fingerprint(state.analysed_signal())
    out = wrap_comment(
        "The data this cell was frozen on: sb.check_data warns (sb.SpecbenchWarning) when "
        f"`{var}` differs in length, rate, channel, span or content. Reusing the cell on new "
        "runs on purpose? Set check=False."
    )
    out.append("made_on = sb.Fingerprint(")
    for name in ("samples", "fs", "channels", "span", "content"):
        out.append(f"    {name}={getattr(fp, name)!r},")
    out.append(")")
    out.append(f"sb.check_data({var}, made_on, check=True)")
    return out


def _constructor(var: str, est: Any) -> str:
    """``var = sb.Welch(...)``: the estimator's repr (non-default fields only), wrapped when long."""
    line = f"{var} = sb.{est!r}"
    if len(line) <= LINE:
        return line
    name = type(est).__name__
    args = [f"{k}={v!r}" for k, v in est.changed_fields().items()]
    return f"{var} = sb.{name}(\n" + "".join(f"    {a},\n" for a in args) + ")"


def data_lines(state: FreezeState, var: str) -> list[str]:
    """Lines that bind ``var`` to exactly the samples the workbench analysed."""
    signal = state.signal
    made = origin_call(getattr(signal, "origin", None))
    steps = [*map(tuple, getattr(signal, "selection", ()))] if made is not None else []
    steps += state.selection.steps()
    chain = "".join("." + call(kind, *args) for kind, *args in steps)
    if made is not None:
        first = f"{var} = {made}"
    else:
        kwargs: dict[str, Any] = {"fs": signal.fs}
        if tuple(signal.channels) != tuple(f"ch{i}" for i in range(signal.n_channels)):
            kwargs["channels"] = list(signal.channels)
        if signal.unit:
            kwargs["unit"] = signal.unit if isinstance(signal.unit, str) else list(signal.unit)
        name = state.data_name
        built = call("sb.Signal", _Name(name), **kwargs)
        converter = container_converter(signal)
        if converter is not None:  # the workbench converted a pandas / xarray object with defaults
            built = f"sb.Signal.{converter}({name})"
        first = f"{var} = {name} if isinstance({name}, sb.Signal) else {built}"
        if len(first) > LINE:
            args = built[len("sb.Signal(") : -1]
            first = f"{var} = {name} if isinstance({name}, sb.Signal) else sb.Signal(\n    {args}\n)"
    if not chain:
        return [first]
    if len(first) + len(chain) <= LINE and made is not None:
        return [first + chain]
    return [first, f"{var} = {var}{chain}"]


class _Name(str):
    """A bare variable name inside a generated call."""

    def __repr__(self) -> str:
        return str(self)


# --------------------------------------------------------------------------- checks


def _check_names(code: str, data_name: str) -> None:
    """The cell must compile, must hold no line break other than ``\\n`` (user strings reach it
    only through ``repr`` or :func:`one_line`), and must not assign the user's data variable."""
    odd = sorted({c for c in code if c in LINE_BREAKS and c != "\n"})
    if odd:  # pragma: no cover - a generator bug: a user string reached the cell unescaped
        raise RuntimeError(f"the frozen cell holds the line break(s) {odd!r}; a user string was not escaped")
    tree = ast.parse(code, "<frozen>")
    assigned = {
        node.id for node in ast.walk(tree) if isinstance(node, ast.Name) and isinstance(node.ctx, ast.Store)
    }
    if data_name in assigned:
        raise SettingsError(
            f"data_name {data_name!r} is a name the frozen cell assigns itself; choose another "
            "variable name for the data, for example 'x' or 'data'."
        )
