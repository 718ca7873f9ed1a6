"""Every estimator's numpydoc Parameters section against its constraint table.

The docstrings are parsed with numpydoc's own parser (numpydoc.docscrape, the reference
implementation of the numpydoc docstring standard); each field of ``cls.params()`` must be
documented, with the type the constraint gives, ``default <repr>`` equal to the table's
default, and the constraint in words (``Allowed: ...``).  ``tools/param_docs.py`` writes the
entries from the tables.
"""

from __future__ import annotations

import ast
import inspect
import subprocess
import sys
from dataclasses import dataclass
from pathlib import Path

import numpydoc.docscrape as numpydoc  # in the test extra: the reference parser of the standard
import pytest

import specbench  # noqa: F401  (registers every estimator)
from specbench.estimators._base import Estimator, estimator_classes
from specbench.estimators._params import Interval, Options, param

ROOT = Path(__file__).resolve().parents[2]


def problems(cls: type) -> list[str]:
    """What is missing or wrong in ``cls``'s Parameters section (empty: it matches the table)."""
    doc = numpydoc.NumpyDocString(inspect.getdoc(cls) or "")
    documented = {p.name: p for p in doc["Parameters"]}
    out = []
    for name, spec in cls.params().items():
        entry = documented.get(name)
        if entry is None:
            out.append(f"{cls.__name__}.{name}: not documented")
            continue
        kind, sep, default = entry.type.rpartition(", default ")
        if not sep:
            out.append(f"{cls.__name__}.{name}: no 'default' in its type line {entry.type!r}")
            continue
        if kind != spec.constraint.doc_type():
            out.append(f"{cls.__name__}.{name}: type {kind!r}, the constraint says {spec.constraint.doc_type()!r}")
        try:
            value = ast.literal_eval(default)
        except (ValueError, SyntaxError):
            out.append(f"{cls.__name__}.{name}: default {default!r} is not a Python literal")
        else:
            if value != spec.default or type(value) is not type(spec.default):
                out.append(f"{cls.__name__}.{name}: documented default {value!r}, the table has {spec.default!r}")
        text = " ".join(" ".join(entry.desc).split())
        allowed = f"Allowed: {spec.constraint.describe()}."
        if allowed not in text:
            out.append(f"{cls.__name__}.{name}: the description lacks {allowed!r}")
        if not text.replace(allowed, "").strip():
            out.append(f"{cls.__name__}.{name}: no description besides the constraint")
    for name in documented:
        if name not in cls.params():
            out.append(f"{cls.__name__}.{name}: documented but not a field")
    return out


@pytest.mark.parametrize("cls", list(estimator_classes().values()), ids=lambda c: c.__name__)
def test_the_parameters_section_matches_the_constraint_table(cls):
    assert problems(cls) == []


def test_every_public_estimator_is_checked():
    names = set(estimator_classes())
    for expected in ("Welch", "Periodogram", "Multitaper", "Correlogram", "Autocorrelation", "CrossCorrelation",
                     "CrossSpectrum", "Covariance", "AllanDeviation"):
        assert expected in names


@dataclass(frozen=True, kw_only=True, repr=False)
class _Documented(Estimator, abstract=True):
    """A toy estimator whose docstring is wrong on purpose.

    Parameters
    ----------
    level : float, default 2.0
        A level.
        Allowed: a float in the range [0, 1].
    """

    level: float = param(0.5, Interval(float, 0.0, 1.0), label="Level", help="A level.")
    mode: str = param("a", Options(("a", "b")), label="Mode", help="A mode.")


def test_the_check_fails_on_a_missing_field_and_a_wrong_default():
    found = problems(_Documented)
    assert "_Documented.mode: not documented" in found
    assert "_Documented.level: documented default 2.0, the table has 0.5" in found


def test_the_generator_leaves_the_sources_as_they_are():
    """``tools/param_docs.py --check``: the committed docstrings are what the generator writes."""
    run = subprocess.run([sys.executable, str(ROOT / "tools" / "param_docs.py"), "--check"], capture_output=True,
                         text=True, cwd=ROOT, timeout=120)
    assert run.returncode == 0, run.stdout + run.stderr
