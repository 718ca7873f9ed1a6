"""Settings files: the chosen analyses and data selection as versioned, human-readable JSON.

Layout (schema 2, written since specbench 0.1 round two)::

    {
      "specbench_settings": 2,
      "specbench_version": "0.1.0",
      "created": "2025-06-01T14:03:12+02:00",
      "analyses": {                                   (one or more, in order; the first is the main one)
        "psd": {"kind": "Welch", "schema": 1, "fields": {...every field...}},
        "acf": {"kind": "Autocorrelation", "schema": 1, "fields": {...}},
        "noise": {"kind": "AllanDeviation", "schema": 1, "fields": {...},
                  "options": {...}}                   (optional: the analysis' own extra choices)
      },
      "selection": {"fs": null, "channel": "y", "span": [10.0, 70.0]},            (or null)
      "data": {"kind": "load", "path": "run_042.csv", "kwargs": {...},             (optional)
               "steps": [["channel", "y"]]},
      "fingerprint": {"samples": 60000, "fs": 1000.0, "channels": ["y"],           (optional)
                      "span": [10.0, 70.0], "content": "blake2b-128:..."}
    }

Analysis names are short lower-case identifiers (``[a-z][a-z0-9_]*``, at most 32
characters).  The names in use: ``psd`` (a spectral estimator), ``acf`` (the correlation
estimator), ``cross`` (cross-channel analysis), ``noise`` (noise model); an entry is an
estimator's :meth:`~specbench.Estimator.to_dict` plus, optionally, ``options``: a JSON
object of choices that are not estimator fields (e.g. the terms of a noise fit), read back
untouched into :attr:`Settings.options`.

Schema 1 (still read) had ``estimator`` and an optional ``correlation`` in place of
``analyses``; they are read as the analyses ``psd`` (or the estimator's default name, see
:func:`analysis_name`) and ``acf``.

``selection`` holds the workbench's choices on top of its data (applied as
:meth:`Selection.apply`: sample rate, then channel, then span); ``data`` records where the
data came from (the ``sb.load`` / ``sb.demo`` call and any steps already applied to it),
so that the batch command can read a new file of the same layout the same way;
``fingerprint`` identifies the samples the settings were chosen on
(:class:`~specbench.Fingerprint`), so ``specbench estimate`` can say whether it runs on
the same data.

Reading is strict: a missing or unreadable file, a file that is not specbench settings,
a newer schema, an unknown key, analysis name, estimator kind or field, or a value of the
wrong type raises :class:`SettingsError` naming the file, the problem and the fix.
Nothing is returned half-built.
"""

from __future__ import annotations

import json
import math
import os
import re
import tempfile
from collections.abc import Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from .._errors import SettingsError
from ..estimators import Estimator, estimator_from_dict
from ._describe import now_iso, specbench_version
from ._fingerprint import Fingerprint
from ._state import FreezeState, Selection

__all__ = ["SETTINGS_SCHEMA", "Settings", "analysis_name", "save_settings", "load_settings", "read_settings",
           "save_state"]

#: version of the settings-file layout; readers accept 1..SETTINGS_SCHEMA
SETTINGS_SCHEMA = 2

_TOP_KEYS = {
    1: ("specbench_settings", "specbench_version", "created", "estimator", "correlation", "selection", "data"),
    2: ("specbench_settings", "specbench_version", "created", "analyses", "selection", "data", "fingerprint"),
}
_CORRELATION_KINDS = ("Autocorrelation", "CrossCorrelation")
_NAME = re.compile(r"[a-z][a-z0-9_]{0,31}\Z")
_ENTRY_KEYS = ("kind", "schema", "fields", "options")


def analysis_name(estimator: Estimator) -> str:
    """The analysis name an estimator is stored under when none is given.

    ``"psd"`` for a spectral estimator, ``"acf"`` for Autocorrelation and CrossCorrelation
    (the correlation slot), otherwise the lower-cased kind (``"crossspectrum"``, ...).
    """
    from ..estimators import SpectralEstimator

    if isinstance(estimator, SpectralEstimator):
        return "psd"
    if estimator.kind in _CORRELATION_KINDS:
        return "acf"
    return re.sub(r"[^a-z0-9_]", "", estimator.kind.lower())[:32] or "analysis"


@dataclass(frozen=True)
class Settings:
    """The content of a settings file.

    Attributes
    ----------
    analyses : dict of str to Estimator
        Every analysis of the file by name (``"psd"``, ``"acf"``, ``"cross"``, ``"noise"``,
        ...), in file order; the first is the main one.
    options : dict of str to dict
        Extra choices of an analysis that are not estimator fields (``{}`` when none), by name.
    estimator : Estimator
        The main (first) analysis: a spectral one (Welch, ...) as the workbench writes it.
    correlation : Autocorrelation, CrossCorrelation or None
        The ``"acf"`` analysis, when the file has one besides the main one.
    selection : Selection or None
        Channel, span and sample rate chosen on top of the data.
    data : dict or None
        Where the data came from: ``{"kind": "load", "path", "kwargs", "steps"}`` or a demo.
    fingerprint : Fingerprint or None
        The samples the settings were chosen on (schema 2 files written from a workbench).
    version : str
        specbench version that wrote the file.
    created : str
        ISO time stamp of the file.
    schema : int
        Settings-file schema of the file (1 or 2).
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
    analyses: dict = field(default_factory=dict)
    options: dict = field(default_factory=dict)
    fingerprint: Fingerprint | None = None

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


def _named_analyses(estimator: Any, correlation: Any, analyses: Any) -> dict[str, Estimator]:
    """The analyses to write, by name, in order (main first), with every name and type checked."""
    out: dict[str, Estimator] = {}

    def add(name: Any, est: Any, where: str) -> None:
        if not isinstance(name, str) or not _NAME.match(name):
            raise SettingsError(
                f"{where}: the analysis name {name!r} is not a short lower-case identifier; use names "
                "such as 'psd', 'acf', 'cross' or 'noise' (letters, digits, '_', at most 32)."
            )
        if not isinstance(est, Estimator):
            raise SettingsError(
                f"{where}: save_settings stores a specbench estimator such as sb.Welch(...) for each analysis; "
                f"the analysis {name!r} is a {type(est).__name__} ({est!r})."
            )
        if name in out:
            raise SettingsError(f"{where}: two analyses are named {name!r}; give each analysis its own name.")
        out[name] = est

    if isinstance(estimator, Mapping):
        if analyses is not None:
            raise SettingsError("Give the named analyses once: as the first argument or as analyses=, not both.")
        if not estimator:
            raise SettingsError("save_settings needs at least one analysis; got an empty mapping.")
        for name, est in estimator.items():
            add(name, est, "save_settings")
    else:
        if not isinstance(estimator, Estimator):
            raise SettingsError(
                f"save_settings stores a specbench estimator such as sb.Welch(...) (or a mapping of named "
                f"analyses, e.g. {{'psd': sb.Welch(), 'acf': sb.Autocorrelation()}}); got "
                f"{type(estimator).__name__}."
            )
        name = analysis_name(estimator)
        if name == "acf" and correlation is not None:  # both correlation estimators: the main one by kind
            name = estimator.kind.lower()
        add(name, estimator, "save_settings")
    if correlation is not None:
        if not isinstance(correlation, Estimator) or correlation.kind not in _CORRELATION_KINDS:
            raise SettingsError(
                f"correlation must be an Autocorrelation or CrossCorrelation estimator; got "
                f"{type(correlation).__name__}."
            )
        add("acf", correlation, "correlation=")
    if analyses is not None:
        if not isinstance(analyses, Mapping):
            raise SettingsError(
                f"analyses must be a mapping of names to estimators, e.g. {{'acf': sb.Autocorrelation()}}; got "
                f"{type(analyses).__name__}."
            )
        for name, est in analyses.items():
            add(name, est, "analyses=")
    return out


def save_settings(
    estimator: Estimator | Mapping[str, Estimator],
    path: str | os.PathLike,
    selection: Selection | dict | None = None,
    *,
    correlation: Estimator | None = None,
    data: dict | None = None,
    analyses: Mapping[str, Estimator] | None = None,
    options: Mapping[str, dict] | None = None,
    fingerprint: Any = None,
) -> Path:
    """Write ``estimator`` (and optionally more analyses and the data selection) to a JSON settings file.

    Parameters
    ----------
    estimator : Estimator or mapping of str to Estimator
        The main estimator, e.g. ``sb.Welch(segment_length=4096)`` (any specbench estimator;
        stored under :func:`analysis_name`, ``"psd"`` for a spectral one), or every analysis
        by name: ``{"psd": sb.Welch(), "acf": sb.Autocorrelation()}`` (the first is the main one).
    path : str or path
        File to write (conventionally ``*.json``); replaced atomically, never left half-written.
    selection : Selection or dict, optional
        ``{"channel": name, "span": [start_s, stop_s], "fs": hz}`` (entries may be None):
        what part of the data the estimate is for.
    correlation : Autocorrelation or CrossCorrelation, optional
        The correlation estimator to store with it (the analysis ``"acf"``).
    data : dict, optional
        Where the data came from (a Signal's ``origin``, plus ``"steps"``: its ``selection``).
    analyses : mapping of str to Estimator, optional
        Further named analyses, stored after the main one (e.g. ``{"noise": sb.AllanDeviation()}``).
    options : mapping of str to dict, optional
        Extra JSON choices of an analysis, by analysis name (e.g. the terms of a noise fit).
    fingerprint : Fingerprint or Signal, optional
        The data the settings were chosen on (a Signal is fingerprinted with :func:`sb.fingerprint`).

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
    >>> _ = sb.save_settings({"psd": sb.Welch(), "acf": sb.Autocorrelation(max_lag=0.5)}, path)
    >>> sb.read_settings(path).analyses
    {'psd': Welch(), 'acf': Autocorrelation(max_lag=0.5)}
    """
    named = _named_analyses(estimator, correlation, analyses)
    entries: dict[str, Any] = {name: est.to_dict() for name, est in named.items()}
    if options is not None:
        if not isinstance(options, Mapping):
            raise SettingsError(f"options must be a mapping of analysis names to dicts; got {type(options).__name__}.")
        for name, opts in options.items():
            if name not in named:
                raise SettingsError(
                    f"options are given for the analysis {name!r}, which is not stored; the analyses are "
                    f"{', '.join(map(repr, named))}."
                )
            if not isinstance(opts, Mapping):
                raise SettingsError(f"options[{name!r}] must be a dict of JSON values; got {type(opts).__name__}.")
            if opts:
                entries[name]["options"] = dict(opts)
    doc: dict[str, Any] = {
        "specbench_settings": SETTINGS_SCHEMA,
        "specbench_version": specbench_version(),
        "created": now_iso(),
        "analyses": entries,
    }
    doc["selection"] = _selection_to_dict(_as_selection(selection))
    if data is not None:
        doc["data"] = data
    if fingerprint is not None:
        if not isinstance(fingerprint, Fingerprint):
            from ._fingerprint import fingerprint as take

            fingerprint = take(fingerprint)
        doc["fingerprint"] = fingerprint.to_dict()
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


def save_state(state: FreezeState, path: str | os.PathLike, *, fingerprint: Any = True) -> Path:
    """Write the settings of a workbench state (analyses, selection, data origin, fingerprint).

    ``fingerprint=True`` records the fingerprint of the analysed samples; pass a
    :class:`Fingerprint` already taken, or False for none.
    """
    signal = state.signal
    origin = getattr(signal, "origin", None)
    data = None
    if origin:
        data = dict(origin)
        data["steps"] = [list(step) for step in getattr(signal, "selection", ())]
    if fingerprint is True:
        fingerprint = state.analysed_signal()
    elif fingerprint is False:
        fingerprint = None
    extra = getattr(state, "analyses", None)  # named analyses beyond psd/acf, when the state has them
    return save_settings(
        state.estimator, path, state.selection, correlation=state.correlation_estimator, data=data,
        analyses=extra or None, options=getattr(state, "options", None) or None, fingerprint=fingerprint,
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


def _check_load_kwargs(kwargs: dict) -> None:
    """Every key of data.kwargs must be an sb.load argument (checked when the file is read)."""
    import difflib
    import inspect

    from ..data import load

    known = [p for p in inspect.signature(load).parameters if p != "path"]
    for key in kwargs:
        if key not in known:
            near = difflib.get_close_matches(str(key), known, n=1)
            hint = f" Did you mean {near[0]!r}?" if near else ""
            raise SettingsError(
                f"data.kwargs holds {key!r}, which is not an sb.load argument.{hint} The arguments "
                f"are {', '.join(known)}; correct or remove it in the settings file."
            )


def _data_from_dict(d: Any) -> dict | None:
    if d is None:
        return None
    if not isinstance(d, dict) or d.get("kind") not in ("load", "demo"):
        raise SettingsError(f"data must be an object with kind 'load' or 'demo' (or be left out); got {d!r}.")
    if d["kind"] == "load" and not isinstance(d.get("path"), str):
        raise SettingsError(f"data.path must be the file name the data was loaded from; got {d.get('path')!r}.")
    if not isinstance(d.get("kwargs", {}), dict):
        raise SettingsError(f"data.kwargs must be an object of sb.load arguments; got {d.get('kwargs')!r}.")
    if d["kind"] == "load":
        _check_load_kwargs(d.get("kwargs") or {})
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


def _estimator(path: Path, entry: Any, where: str) -> Estimator:
    try:
        return estimator_from_dict(entry)
    except SettingsError as e:
        raise _fail(path, f"in {where}: {e}") from None
    except TypeError as e:  # e.g. a field name that is not a string
        raise _fail(path, f"in {where}: {e}.", _REWRITE) from None


def _analyses_v1(path: Path, doc: dict) -> tuple[dict, dict]:
    """Schema 1: ``estimator`` and an optional ``correlation``."""
    if "estimator" not in doc:
        raise _fail(path, "it has no 'estimator' entry.", _REWRITE)
    estimator = _estimator(path, doc["estimator"], "'estimator'")
    name = analysis_name(estimator)
    if name == "acf" and doc.get("correlation") is not None:
        name = estimator.kind.lower()
    analyses = {name: estimator}
    if doc.get("correlation") is not None:
        correlation = _estimator(path, doc["correlation"], "'correlation'")
        if correlation.kind not in _CORRELATION_KINDS:
            raise _fail(
                path, f"'correlation' is a {correlation.kind}; it must be an Autocorrelation or CrossCorrelation."
            )
        analyses["acf"] = correlation
    return analyses, {}


def _analyses_v2(path: Path, doc: dict) -> tuple[dict, dict]:
    """Schema 2: ``analyses``, a non-empty object of named estimator entries."""
    entries = doc.get("analyses")
    if not isinstance(entries, dict) or not entries:
        raise _fail(
            path,
            f"'analyses' must be a non-empty object of named analyses, e.g. {{\"psd\": {{\"kind\": \"Welch\", ...}}}}; "
            f"got {entries!r}." if "analyses" in doc else "it has no 'analyses' entry.",
            _REWRITE,
        )
    analyses: dict[str, Estimator] = {}
    options: dict[str, dict] = {}
    for name, entry in entries.items():
        where = f"'analyses.{name}'"
        if not _NAME.match(name):
            raise _fail(path, f"the analysis name {name!r} is not a short lower-case identifier "
                              "(letters, digits, '_', at most 32, e.g. 'psd').", "Rename it.")
        if not isinstance(entry, dict):
            raise _fail(path, f"{where} must be an estimator entry with 'kind' and 'fields'; got {entry!r}.",
                        _REWRITE)
        unknown = set(entry) - set(_ENTRY_KEYS)
        if unknown:
            raise _fail(path, f"{where} has unknown entr{'ies' if len(unknown) > 1 else 'y'} "
                              f"{', '.join(sorted(map(repr, unknown)))}; an analysis has "
                              f"{', '.join(map(repr, _ENTRY_KEYS))}.", _REWRITE)
        opts = entry.get("options", {})
        if not isinstance(opts, dict):
            raise _fail(path, f"{where}.options must be an object; got {opts!r}.", _REWRITE)
        analyses[name] = _estimator(path, {k: v for k, v in entry.items() if k != "options"}, where)
        options[name] = opts
    return analyses, options


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
    keys = _TOP_KEYS[schema]
    unknown = set(doc) - set(keys)
    if unknown:
        raise _fail(
            path,
            f"unknown entr{'ies' if len(unknown) > 1 else 'y'} {', '.join(sorted(map(repr, unknown)))}; "
            f"schema {schema} has {', '.join(map(repr, keys))}.",
            "Remove them, or " + _REWRITE[0].lower() + _REWRITE[1:],
        )
    if schema == 1:
        analyses, options = _analyses_v1(path, doc)
    else:
        analyses, options = _analyses_v2(path, doc)
    main_name = next(iter(analyses))
    estimator = analyses[main_name]
    correlation = analyses.get("acf") if main_name != "acf" else None
    fingerprint = None
    if doc.get("fingerprint") is not None:
        try:
            fingerprint = Fingerprint.from_dict(doc["fingerprint"])
        except SettingsError as e:
            raise _fail(path, str(e), "Fix that entry, remove it, or " + _REWRITE[0].lower() + _REWRITE[1:]) \
                from None
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
        analyses=analyses,
        options=options,
        fingerprint=fingerprint,
    )


def load_settings(path: str | os.PathLike) -> Estimator:
    """The estimator stored in a settings file (see :func:`read_settings` for the rest)."""
    return read_settings(path).estimator
