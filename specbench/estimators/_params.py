"""Declarative parameter constraints shared by every estimator.

Each estimator field is declared with :func:`param`, which attaches a :class:`Constraint`
and presentation metadata (label, unit, scale, help) to a dataclass field.  The same
table validates values at construction, generates the widget controls, and generates
invalid values for the conformance tests.  One error template is used everywhere::

    The 'overlap' parameter of Welch must be a float in the range [0, 1). Got 1.0 instead.
"""

from __future__ import annotations

import dataclasses
import math
import numbers
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, Literal

from .._errors import SettingsError

__all__ = [
    "Constraint",
    "Interval",
    "Options",
    "Subset",
    "Boolean",
    "Optional",
    "ParamSpec",
    "param",
    "settings_error",
    "parameter_entries",
]

Scale = Literal["linear", "log", "log2"]


def settings_error(owner: str, name: str, expected: str, value: Any, fix: str = "") -> SettingsError:
    """Build the one error message template used for every invalid field."""
    msg = f"The '{name}' parameter of {owner} must be {expected}. Got {value!r} instead."
    if fix:
        msg += f" {fix}"
    return SettingsError(msg, field=name, owner=owner)


class Constraint:
    """A rule a field value must satisfy.  Subclasses implement :meth:`check`."""

    def check(self, value: Any) -> Any:
        """Return the (normalised) value, or raise ``ValueError`` with nothing to add."""
        raise NotImplementedError

    def describe(self) -> str:
        raise NotImplementedError

    def doc_type(self) -> str:
        """The numpydoc type of the field (``int``, ``{'mean', 'median'}``, ...)."""
        return "object"

    def invalid_values(self) -> list[Any]:
        """Values that must be rejected (used by the conformance tests)."""
        return []


def _is_real(v: Any) -> bool:
    return isinstance(v, numbers.Real) and not isinstance(v, bool)


@dataclass(frozen=True)
class Interval(Constraint):
    """A number in an interval.  ``kind`` is ``int`` or ``float``; ``None`` bounds are open."""

    kind: type
    low: float | None
    high: float | None
    closed: Literal["both", "left", "right", "neither"] = "both"

    def _low_ok(self, v: float) -> bool:
        if self.low is None:
            return True
        return v >= self.low if self.closed in ("both", "left") else v > self.low

    def _high_ok(self, v: float) -> bool:
        if self.high is None:
            return True
        return v <= self.high if self.closed in ("both", "right") else v < self.high

    def check(self, value: Any) -> Any:
        if self.kind is int:
            if isinstance(value, bool) or not isinstance(value, numbers.Integral):
                if _is_real(value) and float(value).is_integer():
                    value = int(value)
                else:
                    raise ValueError
            value = int(value)
        else:
            if not _is_real(value):
                raise ValueError
            value = float(value)
            if not math.isfinite(value):
                raise ValueError
        if not (self._low_ok(value) and self._high_ok(value)):
            raise ValueError
        return value

    def describe(self) -> str:
        what = "an integer" if self.kind is int else "a float"
        if self.low is None and self.high is None:
            return what
        fmt = (lambda v: f"{int(v)}") if self.kind is int else (lambda v: f"{v:g}")
        lo = "-inf" if self.low is None else fmt(self.low)
        hi = "inf" if self.high is None else fmt(self.high)
        left = "[" if self.closed in ("both", "left") and self.low is not None else "("
        right = "]" if self.closed in ("both", "right") and self.high is not None else ")"
        return f"{what} in the range {left}{lo}, {hi}{right}"

    def doc_type(self) -> str:
        return "int" if self.kind is int else "float"

    def invalid_values(self) -> list[Any]:
        bad: list[Any] = ["text", None, float("nan")]
        if self.low is not None:
            bad.append(self.low - 1 if self.kind is int else self.low - 0.5)
            if self.closed in ("right", "neither"):
                bad.append(self.kind(self.low))
        if self.high is not None:
            bad.append(self.high + 1 if self.kind is int else self.high + 0.5)
            if self.closed in ("left", "neither"):
                bad.append(self.kind(self.high))
        if self.kind is int:
            bad.append(2.5)
        return bad


@dataclass(frozen=True)
class Options(Constraint):
    """One of a fixed set of strings."""

    values: tuple[str, ...]

    def check(self, value: Any) -> Any:
        if isinstance(value, str) and value in self.values:
            return value
        raise ValueError

    def describe(self) -> str:
        return "one of " + ", ".join(repr(v) for v in self.values)

    def doc_type(self) -> str:
        return "{" + ", ".join(repr(v) for v in self.values) + "}"

    def invalid_values(self) -> list[Any]:
        return ["no-such-option", 3, None]


@dataclass(frozen=True)
class Subset(Constraint):
    """A non-empty tuple of distinct strings from a fixed set, kept in the set's order
    (a list is accepted and becomes that tuple)."""

    values: tuple[str, ...]

    def check(self, value: Any) -> Any:
        if isinstance(value, (list, tuple)) and value and all(isinstance(v, str) for v in value):
            if len(set(value)) == len(value) and all(v in self.values for v in value):
                return tuple(v for v in self.values if v in value)
        raise ValueError

    def describe(self) -> str:
        return "a non-empty tuple of distinct names from " + ", ".join(repr(v) for v in self.values)

    def invalid_values(self) -> list[Any]:
        return [(), ("no-such-option",), (self.values[0], self.values[0]), self.values[0], None]


@dataclass(frozen=True)
class Boolean(Constraint):
    """``True`` or ``False`` (not 0/1, not strings)."""

    def check(self, value: Any) -> Any:
        if isinstance(value, bool):
            return value
        raise ValueError

    def describe(self) -> str:
        return "True or False"

    def doc_type(self) -> str:
        return "bool"

    def invalid_values(self) -> list[Any]:
        return ["yes", 2, None]


@dataclass(frozen=True)
class Optional(Constraint):
    """``None`` (meaning ``none_means``) or a value satisfying ``inner``."""

    inner: Constraint
    none_means: str = "automatic"

    def check(self, value: Any) -> Any:
        if value is None:
            return None
        return self.inner.check(value)

    def describe(self) -> str:
        return f"None ({self.none_means}) or {self.inner.describe()}"

    def doc_type(self) -> str:
        return f"{self.inner.doc_type()} or None"

    def invalid_values(self) -> list[Any]:
        return [v for v in self.inner.invalid_values() if v is not None]


@dataclass(frozen=True)
class ParamSpec:
    """Everything known about one estimator field; the widget builds controls from it."""

    name: str
    default: Any
    constraint: Constraint
    label: str
    help: str
    unit: str = ""
    scale: Scale = "linear"
    group: str = "estimator"
    fix: str = ""
    #: ``relevant(estimator) -> bool``: whether the control applies to the current settings
    relevant: Callable[[Any], bool] | None = None


def param(
    default: Any,
    constraint: Constraint,
    *,
    label: str,
    help: str,
    unit: str = "",
    scale: Scale = "linear",
    group: str = "estimator",
    fix: str = "",
    relevant: Callable[[Any], bool] | None = None,
) -> Any:
    """Declare a dataclass field with its constraint and presentation metadata."""
    meta = {
        "spec": dict(
            constraint=constraint,
            label=label,
            help=help,
            unit=unit,
            scale=scale,
            group=group,
            fix=fix,
            relevant=relevant,
        )
    }
    return dataclasses.field(default=default, metadata=meta)


def parameter_entries(cls: Any) -> list[tuple[str, str, str]]:
    """``(name, type line, allowed text)`` of every field of ``cls``'s constraint table, in order.

    The numpydoc Parameters section of every estimator's docstring holds one entry per field:
    ``name : <type>, default <repr>``, its description, and a last paragraph
    ``Allowed: <the constraint>``.  ``tools/param_docs.py`` writes these entries from the table
    and ``tests/estimators/test_param_docs.py`` checks them against it.
    """
    return [(name, f"{spec.constraint.doc_type()}, default {spec.default!r}", f"Allowed: {spec.constraint.describe()}.")
            for name, spec in cls.params().items()]
