"""The immutable estimator base class: validation, replace, repr, dict round trip."""

from __future__ import annotations

import dataclasses
import functools
import inspect
from typing import Any, ClassVar

from .._errors import SettingsError
from ._params import ParamSpec, settings_error

__all__ = ["Estimator", "estimator_from_dict", "estimator_classes", "SCHEMA_VERSION"]

#: version of the dict / settings-file layout of an estimator
SCHEMA_VERSION = 1

_REGISTRY: dict[str, type[Estimator]] = {}


class ArgumentError(SettingsError, TypeError):
    """A positional or unknown argument to an estimator (a SettingsError, and a TypeError
    as Python's own would be)."""


@dataclasses.dataclass(frozen=True, kw_only=True, repr=False)
class Estimator:
    """Base of all estimators: frozen dataclass whose fields are its settings.

    Subclasses declare fields with :func:`~specbench.estimators._params.param`; every
    field is validated once, at construction, against its constraint, and cross-field
    rules are checked in :meth:`_check`.  Instances never change: use :meth:`replace`.
    """

    #: short kind name used in dicts and settings files (defaults to the class name)
    kind: ClassVar[str] = ""
    #: one line for menus
    title: ClassVar[str] = ""

    def __init_subclass__(cls, abstract: bool = False, **kwargs: Any) -> None:
        super().__init_subclass__(**kwargs)
        call = cls.__dict__.get("__call__")
        if call is not None and not getattr(call, "_tracked", False):
            cls.__call__ = _tracked_call(call)
        if abstract:
            return
        if "kind" not in cls.__dict__ or not cls.__dict__["kind"]:
            cls.kind = cls.__name__
        _REGISTRY[cls.kind] = cls

    def __new__(cls, *args: Any, **kwargs: Any) -> Estimator:
        # a clear message instead of the dataclass's TypeError for a positional or unknown argument
        names = [f.name for f in dataclasses.fields(cls)] if dataclasses.is_dataclass(cls) else list(kwargs)
        if args:
            first = names[0] if names else "name"
            raise ArgumentError(
                f"{cls.__name__} takes its settings by name only; got {len(args)} positional "
                f"argument(s) ({', '.join(repr(a) for a in args[:3])}). Write each setting by name, e.g. "
                f"{cls.__name__}({first}=...). Its parameters are: {', '.join(names)}.",
                owner=cls.__name__,
            )
        unknown = [k for k in kwargs if k not in names]
        if unknown:
            import difflib

            k = unknown[0]
            near = difflib.get_close_matches(k, names, n=1, cutoff=0.6)
            hint = f" Did you mean {near[0]!r}?" if near else ""
            raise ArgumentError(
                f"{cls.__name__} has no parameter {k!r}.{hint} Its parameters are: {', '.join(names)}.",
                field=near[0] if near else None, owner=cls.__name__,
            )
        return super().__new__(cls)

    def __post_init__(self) -> None:
        owner = type(self).__name__
        for spec in self.params().values():
            value = getattr(self, spec.name)
            try:
                checked = spec.constraint.check(value)
            except ValueError as e:
                raise settings_error(
                    owner, spec.name, spec.constraint.describe(), value, str(e) or spec.fix
                ) from None
            object.__setattr__(self, spec.name, checked)
        self._check()

    def _check(self) -> None:
        """Cross-field rules; raise :class:`SettingsError` via :meth:`_fail`."""

    def _fail(self, name: str, expected: str, fix: str = "") -> None:
        raise settings_error(type(self).__name__, name, expected, getattr(self, name), fix)

    # ---------------------------------------------------------------- cost
    def expected_seconds(self, n_samples: int, n_channels: int = 1, dtype: Any = "float64") -> float:
        """Expected wall time in seconds of ``self(x)`` on ``n_channels x n_samples`` data.

        A model of the estimator's work (FFT sizes and counts, passes over memory, taper
        construction) times the speed of this machine, measured once per process on a
        small FFT (a few ms).  Checked against measured times by
        ``tests/benchmarks/bench_cost.py`` (target: within a factor 2).
        """
        from ._cost import expected_seconds

        return expected_seconds(self, int(n_samples), int(n_channels), dtype)

    # ---------------------------------------------------------------- metadata
    @classmethod
    def params(cls) -> dict[str, ParamSpec]:
        """Field name -> :class:`ParamSpec`, in declaration order."""
        cached = cls.__dict__.get("_params_cache")
        if cached is not None:
            return cached
        out = {}
        for f in dataclasses.fields(cls):
            if "spec" not in f.metadata:
                continue
            out[f.name] = ParamSpec(name=f.name, default=f.default, **f.metadata["spec"])
        cls._params_cache = out
        return out

    # ---------------------------------------------------------------- value semantics
    def replace(self, **changes: Any) -> Estimator:
        """A new estimator with ``changes`` applied; this one is unchanged."""
        unknown = set(changes) - set(self.params())
        if unknown:
            raise SettingsError(
                f"{type(self).__name__} has no parameter {', '.join(sorted(map(repr, unknown)))}. "
                f"Its parameters are: {', '.join(self.params())}."
            )
        return dataclasses.replace(self, **changes)

    def changed_fields(self) -> dict[str, Any]:
        """Fields whose value differs from the default."""
        return {
            name: getattr(self, name)
            for name, spec in self.params().items()
            if getattr(self, name) != spec.default
        }

    def __repr__(self) -> str:
        args = ", ".join(f"{k}={v!r}" for k, v in self.changed_fields().items())
        return f"{type(self).__name__}({args})"

    def to_dict(self) -> dict[str, Any]:
        """Plain, JSON-ready description: ``{"kind": ..., "fields": {...all fields...}}``."""
        return {
            "kind": self.kind,
            "schema": SCHEMA_VERSION,
            "fields": {name: _jsonable(getattr(self, name)) for name in self.params()},
        }


def _tracked_call(call: Any) -> Any:
    """Give an estimator's ``__call__`` the keyword arguments ``progress=`` and ``cancel=``."""

    @functools.wraps(call)
    def __call__(self: Estimator, *args: Any, progress: Any = None, cancel: Any = None, **kwargs: Any) -> Any:
        if progress is None and cancel is None:
            return call(self, *args, **kwargs)
        from ._engine import tracking

        with tracking(progress, cancel):
            return call(self, *args, **kwargs)

    try:
        sig = inspect.signature(call)
        extra = [inspect.Parameter(n, inspect.Parameter.KEYWORD_ONLY, default=None) for n in ("progress", "cancel")]
        params = [p for p in sig.parameters.values() if p.kind != inspect.Parameter.VAR_KEYWORD]
        __call__.__signature__ = sig.replace(parameters=params + extra)  # type: ignore[attr-defined]
    except (TypeError, ValueError):  # pragma: no cover - exotic callables
        pass
    __call__._tracked = True  # type: ignore[attr-defined]
    __call__.__doc__ = (call.__doc__ or "").rstrip() + """

        progress : callable, optional
            ``progress(fraction)`` is called from the calling thread after each block of
            work, with the fraction done (nondecreasing; 1.0 when the result is ready).
            It may raise :class:`specbench.Cancelled` to stop the computation.
        cancel : specbench.CancelToken, optional
            ``cancel.cancel()`` (from any thread) stops the computation at the next block:
            :class:`specbench.Cancelled` is raised and no partial result is returned.
        """
    return __call__


def _jsonable(v: Any) -> Any:
    if isinstance(v, tuple):
        return [_jsonable(x) for x in v]
    return v


def estimator_classes() -> dict[str, type[Estimator]]:
    """Kind name -> estimator class, for every registered estimator."""
    return dict(_REGISTRY)


def estimator_from_dict(d: Any) -> Estimator:
    """Rebuild an estimator from :meth:`Estimator.to_dict` output.

    Raises :class:`SettingsError` for an unknown kind, an unknown or mistyped field, or a
    newer schema; never returns a partial object.
    """
    if not isinstance(d, dict) or "kind" not in d or "fields" not in d:
        raise SettingsError(
            "An estimator description must be a mapping with 'kind' and 'fields' "
            f"(as written by est.to_dict()). Got {type(d).__name__} with keys "
            f"{sorted(d) if isinstance(d, dict) else '-'}."
        )
    schema = d.get("schema", SCHEMA_VERSION)
    if not isinstance(schema, int) or schema > SCHEMA_VERSION or schema < 1:
        raise SettingsError(
            f"The estimator description has schema {schema!r}; this specbench reads schema "
            f"1 to {SCHEMA_VERSION}. Upgrade specbench to read it."
        )
    kind = d["kind"]
    cls = _REGISTRY.get(kind)
    if cls is None:
        raise SettingsError(
            f"Unknown estimator kind {kind!r}. Known kinds: {', '.join(sorted(_REGISTRY))}."
        )
    fields = d["fields"]
    if not isinstance(fields, dict):
        raise SettingsError(f"The 'fields' of a {kind} description must be a mapping; got {fields!r}.")
    unknown = set(fields) - set(cls.params())
    if unknown:
        raise SettingsError(
            f"{kind} has no parameter {', '.join(sorted(map(repr, unknown)))}. "
            f"Its parameters are: {', '.join(cls.params())}."
        )
    return cls(**fields)
