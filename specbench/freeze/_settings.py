"""Settings files: the chosen estimators and data selection as versioned, human-readable JSON.

Layout (schema 1)::

    {
      "specbench_settings": 1,
      "specbench_version": "0.1.0",
      "created": "2025-06-01T14:03:12+02:00",
      "estimator": {"kind": "Welch", "schema": 1, "fields": {...every field...}},
      "correlation": {"kind": "Autocorrelation", "schema": 1, "fields": {...}},   (optional)
      "selection": {"fs": null, "channel": "y", "span": [10.0, 70.0]},            (or null)
      "data": {"kind": "load", "path": "run_042.csv", "kwargs": {...},             (optional)
               "steps": [["channel", "y"]]}
    }

``selection`` holds the workbench's choices on top of its data (applied as
:meth:`Selection.apply`: sample rate, then channel, then span); ``data`` records where the
data came from (the ``sb.load`` / ``sb.demo`` call and any steps already applied to it),
so that the batch command can read a new file of the same layout the same way.

Reading is strict: a missing or unreadable file, a file that is not specbench settings,
a newer schema, an unknown key, estimator kind or field, or a value of the wrong type
raises :class:`SettingsError` naming the file, the problem and the fix.  Nothing is
returned half-built.
"""

from __future__ import annotations

import json
import math
import os
import tempfile
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from .._errors import SettingsError
from ..estimators import Estimator, estimator_from_dict
from ._describe import now_iso, specbench_version
from ._state import FreezeState, Selection

__all__ = ["SETTINGS_SCHEMA", "Settings", "save_settings", "load_settings", "read_settings", "save_state"]

#: version of the settings-file layout; readers accept 1..SETTINGS_SCHEMA
SETTINGS_SCHEMA = 1

_TOP_KEYS = ("specbench_settings", "specbench_version", "created", "estimator", "correlation", "selection", "data")
_CORRELATION_KINDS = ("Autocorrelation", "CrossCorrelation")


@dataclass(frozen=True)
class Settings:
    """The content of a settings file.

    Attributes
    ----------
    estimator : Estimator
        The main estimator: a spectral one (Welch, ...) as the workbench writes it.
    correlation : Autocorrelation, CrossCorrelation or None
        The correlation estimator, when the file has one.
    selection : Selection or None
        Channel, span and sample rate chosen on top of the data.
    data : dict or None
        Where the data came from: ``{"kind": "load", "path", "kwargs", "steps"}`` or a demo.
    version : str
        specbench version that wrote the file.
    created : str
        ISO time stamp of the file.
    schema : int
        Settings-file schema of the file.
    path : Path
        The file read.
    """

    estimator: Any
    correlation: Any
    selection: Selection | None
    data: dict | None
    version: str
    created: str
    schema: int
    path: Path

    def apply(self, signal: Any) -> Any:
        """The file's selection applied to ``signal`` (the signal itself when there is none)."""
        return self.selection.apply(signal) if self.selection is not None else signal


# --------------------------------------------------------------------------- writing


def _jsonable(value: Any, where: str) -> Any:
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, (list, tuple)):
        return [_jsonable(v, where) for v in value]
    if isinstance(value, dict):
        return {str(k): _jsonable(v, f"{where}.{k}") for k, v in value.items()}
    if isinstance(value, os.PathLike):
        return os.fspath(value)
    if isinstance(value, float) and not math.isfinite(value):
        raise SettingsError(f"{where} is {value!r}; a settings file holds finite numbers only.")
    if value is None or isinstance(value, (bool, int, float, str)):
        return value
    raise SettingsError(
        f"{where} is a {type(value).__name__} ({value!r}), which a JSON settings file cannot hold. "
        "Use plain numbers, strings, lists or None."
    )


def _as_selection(selection: Any) -> Selection | None:
    if selection is None or isinstance(selection, Selection):
        return None if selection is None or selection.empty else selection
    if isinstance(selection, FreezeState):
        return _as_selection(selection.selection)
    if isinstance(selection, dict):
        return _selection_from_dict(selection, "selection")
    raise SettingsError(
        f"selection must be None, a Selection or a dict with 'channel', 'span', 'fs'; got "
        f"{type(selection).__name__}."
    )


def _selection_to_dict(sel: Selection | None) -> dict | None:
    if sel is None:
        return None
    return {"fs": sel.fs, "channel": sel.channel, "span": list(sel.span) if sel.span is not None else None}


def save_settings(
    estimator: Estimator,
    path: str | os.PathLike,
    selection: Selection | dict | None = None,
    *,
    correlation: Estimator | None = None,
    data: dict | None = None,
) -> Path:
    """Write ``estimator`` (and optionally the data selection) to a JSON settings file.

    Parameters
    ----------
    estimator : Estimator
        The estimator, e.g. ``sb.Welch(segment_length=4096)`` (any specbench estimator).
    path : str or path
        File to write (conventionally ``*.json``); replaced atomically, never left half-written.
    selection : Selection or dict, optional
        ``{"channel": name, "span": [start_s, stop_s], "fs": hz}`` (entries may be None):
        what part of the data the estimate is for.
    correlation : Autocorrelation or CrossCorrelation, optional
        The correlation estimator to store with it.
    data : dict, optional
        Where the data came from (a Signal's ``origin``, plus ``"steps"``: its ``selection``).

    Returns
    -------
    Path
        The file written.

    Examples
    --------
    >>> import specbench as sb, tempfile, os
    >>> path = os.path.join(tempfile.mkdtemp(), "psd.json")
    >>> _ = sb.save_settings(sb.Welch(segment_length=4096), path)
    >>> sb.load_settings(path)
    Welch(segment_length=4096)
    """
    if not isinstance(estimator, Estimator):
        raise SettingsError(
            f"save_settings stores a specbench estimator such as sb.Welch(...); got "
            f"{type(estimator).__name__}."
        )
    if correlation is not None and (
        not isinstance(correlation, Estimator) or correlation.kind not in _CORRELATION_KINDS
    ):
        raise SettingsError(
            f"correlation must be an Autocorrelation or CrossCorrelation estimator; got "
            f"{type(correlation).__name__}."
        )
    doc: dict[str, Any] = {
        "specbench_settings": SETTINGS_SCHEMA,
        "specbench_version": specbench_version(),
        "created": now_iso(),
        "estimator": estimator.to_dict(),
    }
    if correlation is not None:
        doc["correlation"] = correlation.to_dict()
    doc["selection"] = _selection_to_dict(_as_selection(selection))
    if data is not None:
        doc["data"] = data
    doc = _jsonable(doc, "settings")
    text = json.dumps(doc, indent=2, allow_nan=False) + "\n"
    path = Path(path)
    if path.is_dir():
        raise SettingsError(f"{str(path)!r} is a folder; give a file name such as {str(path / 'settings.json')!r}.")
    folder = path.parent
    if not folder.is_dir():
        raise SettingsError(f"Cannot write {str(path)!r}: the folder {str(folder)!r} does not exist. Create it first.")
    try:
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=".tmp", dir=folder)
        with os.fdopen(fd, "w", encoding="utf-8") as f:
            f.write(text)
        os.replace(tmp, path)
    except OSError as e:
        raise SettingsError(f"Cannot write the settings file {str(path)!r}: {e.strerror or e}.") from None
    return path


def save_state(state: FreezeState, path: str | os.PathLike) -> Path:
    """Write the settings of a workbench state (estimators, selection, data origin)."""
    signal = state.signal
    origin = getattr(signal, "origin", None)
    data = None
    if origin:
        data = dict(origin)
        data["steps"] = [list(step) for step in getattr(signal, "selection", ())]
    return save_settings(
        state.estimator, path, state.selection, correlation=state.correlation_estimator, data=data
    )


# --------------------------------------------------------------------------- reading


def _fail(path: Path, problem: str, fix: str = "") -> SettingsError:
    msg = f"Settings file {str(path)!r}: {problem}"
    if fix:
        msg += f" {fix}"
    return SettingsError(msg)


_REWRITE = "Write it again with sb.save_settings(estimator, path) or the workbench's Save settings."


def _no_duplicates(pairs: list[tuple[str, Any]]) -> dict:
    out: dict[str, Any] = {}
    for k, v in pairs:
        if k in out:
            raise ValueError(f"the key {k!r} appears twice in one object")
        out[k] = v
    return out


def _number(value: Any) -> bool:
    return isinstance(value, (int, float)) and not isinstance(value, bool) and math.isfinite(value)


def _selection_from_dict(d: Any, where: str) -> Selection | None:
    if d is None:
        return None
    if not isinstance(d, dict):
        raise SettingsError(f"{where} must be an object with 'channel', 'span' and 'fs' (or null); got {d!r}.")
    unknown = set(d) - {"channel", "span", "fs"}
    if unknown:
        raise SettingsError(
            f"{where} has unknown entr{'ies' if len(unknown) > 1 else 'y'} "
            f"{', '.join(sorted(map(repr, unknown)))}; it may hold 'channel', 'span' and 'fs'."
        )
    channel = d.get("channel")
    if channel is not None and not isinstance(channel, str):
        raise SettingsError(f"{where}.channel must be a channel name (a string) or null; got {channel!r}.")
    span = d.get("span")
    if span is not None:
        if not (isinstance(span, (list, tuple)) and len(span) == 2 and all(map(_number, span))):
            raise SettingsError(
                f"{where}.span must be [start_s, stop_s], two finite numbers of seconds, or null; got {span!r}."
            )
        if not span[0] < span[1]:
            raise SettingsError(f"{where}.span must have start_s < stop_s; got {span!r}.")
    fs = d.get("fs")
    if fs is not None and not (_number(fs) and fs > 0):
        raise SettingsError(f"{where}.fs must be a positive sample rate in Hz or null; got {fs!r}.")
    sel = Selection(channel=channel, span=tuple(span) if span is not None else None, fs=fs)
    return None if sel.empty else sel


def _data_from_dict(d: Any) -> dict | None:
    if d is None:
        return None
    if not isinstance(d, dict) or d.get("kind") not in ("load", "demo"):
        raise SettingsError(f"data must be an object with kind 'load' or 'demo' (or be left out); got {d!r}.")
    if d["kind"] == "load" and not isinstance(d.get("path"), str):
        raise SettingsError(f"data.path must be the file name the data was loaded from; got {d.get('path')!r}.")
    if not isinstance(d.get("kwargs", {}), dict):
        raise SettingsError(f"data.kwargs must be an object of sb.load arguments; got {d.get('kwargs')!r}.")
    steps = d.get("steps", [])
    ok_steps = isinstance(steps, list) and all(
        isinstance(s, list) and s and (
            (s[0] == "channel" and len(s) == 2 and isinstance(s[1], (str, int)) and not isinstance(s[1], bool))
            or (s[0] == "span" and len(s) == 3 and all(map(_number, s[1:])))
            or (s[0] == "with_fs" and len(s) == 2 and _number(s[1]) and s[1] > 0)
        )
        for s in steps
    )
    if not ok_steps:
        raise SettingsError(
            "data.steps must be a list of [\"channel\", name], [\"span\", start_s, stop_s] or "
            f"[\"with_fs\", hz] steps; got {steps!r}."
        )
    return d


def read_settings(path: str | os.PathLike) -> Settings:
    """Read a settings file written by :func:`save_settings` (or the workbench).

    Raises
    ------
    SettingsError
        The file is missing or unreadable, not JSON (the message gives line and column),
        not a specbench settings file, of a newer schema, or holds an unknown key,
        estimator kind or field, or a value of the wrong type.
    """
    path = Path(path)
    try:
        text = path.read_text(encoding="utf-8")
    except FileNotFoundError:
        raise _fail(path, "no such file.", "Check the path, or write one with sb.save_settings(estimator, path).") \
            from None
    except IsADirectoryError:
        raise _fail(path, "is a folder, not a file.", "Give the path of the .json settings file.") from None
    except UnicodeDecodeError:
        raise _fail(path, "is not a text file (not UTF-8).", "Give the path of a .json settings file.") from None
    except OSError as e:
        raise _fail(path, f"cannot be read ({e.strerror or e}).") from None
    try:
        doc = json.loads(text, object_pairs_hook=_no_duplicates)
    except json.JSONDecodeError as e:
        raise _fail(path, f"is not valid JSON: {e.msg} at line {e.lineno}, column {e.colno}.",
                    "Fix the file at that place, or " + _REWRITE[0].lower() + _REWRITE[1:]) from None
    except ValueError as e:
        raise _fail(path, f"is not valid settings JSON: {e}.", "Remove the repeated key.") from None
    if not isinstance(doc, dict) or "specbench_settings" not in doc:
        raise _fail(
            path,
            "is not a specbench settings file (it has no 'specbench_settings' entry).",
            "Give a file written by sb.save_settings or the workbench's Save settings.",
        )
    schema = doc["specbench_settings"]
    if not isinstance(schema, int) or isinstance(schema, bool) or schema < 1:
        raise _fail(path, f"'specbench_settings' must be a schema number (1, 2, ...); got {schema!r}.", _REWRITE)
    version = doc.get("specbench_version", "unknown")
    if schema > SETTINGS_SCHEMA:
        raise _fail(
            path,
            f"it uses settings schema {schema} (written by specbench {version}); this specbench "
            f"{specbench_version()} reads schema 1 to {SETTINGS_SCHEMA}.",
            "Upgrade specbench (pip install -U specbench) to read it.",
        )
    unknown = set(doc) - set(_TOP_KEYS)
    if unknown:
        raise _fail(
            path,
            f"unknown entr{'ies' if len(unknown) > 1 else 'y'} {', '.join(sorted(map(repr, unknown)))}; "
            f"schema {schema} has {', '.join(map(repr, _TOP_KEYS))}.",
            "Remove them, or " + _REWRITE[0].lower() + _REWRITE[1:],
        )
    if "estimator" not in doc:
        raise _fail(path, "it has no 'estimator' entry.", _REWRITE)
    try:
        estimator = estimator_from_dict(doc["estimator"])
    except SettingsError as e:
        raise _fail(path, f"in 'estimator': {e}") from None
    except TypeError as e:  # e.g. a field name that is not a string
        raise _fail(path, f"in 'estimator': {e}.", _REWRITE) from None
    correlation = None
    if doc.get("correlation") is not None:
        try:
            correlation = estimator_from_dict(doc["correlation"])
        except SettingsError as e:
            raise _fail(path, f"in 'correlation': {e}") from None
        except TypeError as e:
            raise _fail(path, f"in 'correlation': {e}.", _REWRITE) from None
        if correlation.kind not in _CORRELATION_KINDS:
            raise _fail(
                path, f"'correlation' is a {correlation.kind}; it must be an Autocorrelation or CrossCorrelation."
            )
    try:
        selection = _selection_from_dict(doc.get("selection"), "selection")
        data = _data_from_dict(doc.get("data"))
    except SettingsError as e:
        raise _fail(path, str(e), "Fix that entry, or " + _REWRITE[0].lower() + _REWRITE[1:]) from None
    created = doc.get("created", "")
    if not isinstance(created, str) or not isinstance(version, str):
        raise _fail(path, "'created' and 'specbench_version' must be strings.", _REWRITE)
    return Settings(
        estimator=estimator,
        correlation=correlation,
        selection=selection,
        data=data,
        version=version,
        created=created,
        schema=schema,
        path=path,
    )


def load_settings(path: str | os.PathLike) -> Estimator:
    """The estimator stored in a settings file (see :func:`read_settings` for the rest)."""
    return read_settings(path).estimator
