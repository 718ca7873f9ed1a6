"""Frozen cells built from hostile user strings run without running any of them.

Channel names, units, file paths and the settings path reach the generated code only through
``repr`` (string literals that cannot be closed from inside) or through comments in which every
line break is escaped (``\\n``, ``\\r``, ``\\u2028``...): Python's tokenizer ends a comment at
``\\n`` or ``\\r``, and editors also break lines at ``\\x0b``, ``\\x0c``, ``\\x1c``-``\\x1e``,
``\\x85``, ``\\u2028`` and ``\\u2029`` (the separators of ``str.splitlines``; Python documentation,
"str.splitlines").  Each test executes the cell and checks that the payload did not run.
"""

from __future__ import annotations

import builtins

import numpy as np
import pytest
from freeze_support import FS, make_state, run_cell

import specbench as sb
from specbench.freeze import code_cell
from specbench.freeze._describe import LINE_BREAKS, one_line, wrap_comment

BREAKS = ["\n", "\r", "\r\n", "\x0b", "\x0c", "\x1c", "\x1d", "\x1e", "\x85", "\u2028", "\u2029"]


def payload(brk: str) -> str:
    """A string that, pasted raw after ``#`` or inside a literal, would run ``PWNED = 1``."""
    return f"x{brk}__import__('builtins').__setattr__('PWNED',1){brk}#"


HOSTILE = [payload(b) for b in BREAKS] + [
    "a'); __import__('builtins').PWNED = 1; ('",
    'a"); __import__("builtins").PWNED = 1; ("',
    "a\\'); __import__('builtins').PWNED = 1 #",
    "{__import__('builtins').__setattr__('PWNED', 1)}",  # would run inside an f-string
    "\"\"\"; __import__('builtins').PWNED = 1; \"\"\"",
]


@pytest.fixture(autouse=True)
def _no_pwned():
    if hasattr(builtins, "PWNED"):
        del builtins.PWNED
    yield
    assert not hasattr(builtins, "PWNED"), "a hostile user string ran as code in a frozen cell"


def _record(seed: int = 5) -> np.ndarray:
    return np.random.default_rng(seed).standard_normal((2, 4096))


def _check(code: str, **names) -> dict:
    assert not any(c in code for c in LINE_BREAKS if c != "\n")
    for line in code.splitlines():
        assert line == line.strip("\r")
    ns = run_cell(code, **names)
    assert "PWNED" not in ns
    return ns


@pytest.mark.parametrize("text", HOSTILE, ids=range(len(HOSTILE)))
def test_in_memory_hostile_channel_names_and_units_both_styles(text, tmp_path):
    x = _record()
    sig = sb.Signal(x, fs=FS, channels=[text, "b" + text], unit=[text, "m/s^2"])
    state = make_state(sig, sb.Welch(segment_length=256), channel=text)
    ns = _check(code_cell(state, "specbench", settings_path=tmp_path / text), x=sig)
    np.testing.assert_array_equal(ns["spectrum"].value, state.spectrum.value)
    ns = _check(code_cell(state, "scipy", settings_path=str(tmp_path / text)), x=x)
    assert "PWNED" not in ns


@pytest.mark.parametrize("brk", ["\n", "\r", "\u2028", "\x85"])
def test_hostile_file_path_both_styles(brk, tmp_path, monkeypatch):
    folder = tmp_path / payload(brk).replace("/", "_")
    folder.mkdir()
    path = folder / f"run{brk}__import__('builtins').__setattr__('PWNED',1){brk}.npy"
    np.save(path, _record())
    sig = sb.load(str(path), fs=FS)
    state = make_state(sig, sb.Multitaper(), span=(0.5, 3.5))
    ns = _check(code_cell(state, "specbench", settings_path=str(path) + ".json"))
    np.testing.assert_array_equal(ns["spectrum"].value, state.spectrum.value)
    _check(code_cell(state, "scipy", settings_path=path), x=sig.data)


def test_one_line_escapes_every_line_separator():
    for brk in BREAKS:
        text = one_line(f"a{brk}b")
        assert len(text.splitlines()) == 1 and text.isprintable(), repr(brk)
    assert one_line("plain text, µ²") == "plain text, µ²"
    lines = wrap_comment("Data: " + payload("\n") * 5)
    assert all(line.startswith("#") for line in lines)
    assert all(len(line.splitlines()) == 1 for line in lines)
