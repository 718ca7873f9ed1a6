"""``freeze()``: the code into a new cell below (IPython's set_next_input), the settings into a file."""

from __future__ import annotations

import numpy as np
import pytest
from freeze_support import make_state, run_cell

import specbench as sb
from specbench.freeze import FrozenCode, _freeze, code_cell, freeze, read_settings


class FakeShell:
    def __init__(self):
        self.calls = []

    def set_next_input(self, text, replace=False):
        self.calls.append((text, replace))


def test_inserts_below_returns_the_code_and_writes_settings(tmp_path, signal, monkeypatch):
    shell = FakeShell()
    monkeypatch.setattr(_freeze, "_shell", lambda: shell)
    state = make_state(signal, sb.Welch(segment_length=1024), sb.Autocorrelation(max_lag=0.1), channel="frame")
    path = tmp_path / "frozen.json"
    code = freeze(state, path)
    assert isinstance(code, FrozenCode) and isinstance(code, str)
    assert shell.calls == [(str(code), False)]  # a new cell below, not replacing the current one
    assert code.inserted and code.settings_path == path
    assert f"Settings file: {path}" in code.replace("\n#   ", " ")
    settings = read_settings(path)
    assert settings.estimator == state.estimator and settings.correlation == state.correlation_estimator
    assert settings.selection == state.selection
    ns = run_cell(code, x=signal)
    assert np.array_equal(ns["spectrum"].value, state.spectrum.value)
    # the same code as code_cell, up to the time stamp
    strip = lambda c: [ln for ln in c.splitlines() if "frozen 2" not in ln]  # noqa: E731
    assert strip(code) == strip(code_cell(state, settings_path=path))


def test_scipy_style_and_no_insert(signal, monkeypatch):
    shell = FakeShell()
    monkeypatch.setattr(_freeze, "_shell", lambda: shell)
    state = make_state(signal, sb.Periodogram(), channel="shaker")
    code = freeze(state, style="scipy", insert=False)
    assert shell.calls == [] and not code.inserted and code.settings_path is None
    assert "scipy.signal.periodogram(" in code


def test_outside_ipython_nothing_is_inserted(signal, monkeypatch):
    monkeypatch.setattr(_freeze, "_shell", lambda: None)
    code = freeze(make_state(signal, sb.Welch(), compute=False))
    assert not code.inserted and "psd_estimator = sb.Welch()" in code


def test_a_failing_settings_file_inserts_nothing(tmp_path, signal, monkeypatch):
    shell = FakeShell()
    monkeypatch.setattr(_freeze, "_shell", lambda: shell)
    with pytest.raises(sb.SettingsError, match="does not exist. Create it first"):
        freeze(make_state(signal, sb.Welch(), compute=False), tmp_path / "no" / "s.json")
    assert shell.calls == []


def test_real_ipython_shell_receives_the_next_input(signal):
    """IPython's own shell: set_next_input from an executed cell (rl_next_input in a terminal shell)."""
    pytest.importorskip("IPython")
    from IPython.core.interactiveshell import InteractiveShell

    shell = InteractiveShell.instance()
    try:
        shell.user_ns.update(state=make_state(signal, sb.Welch(segment_length=512), compute=False),
                             freeze=freeze)
        result = shell.run_cell("code = freeze(state)", store_history=False)
        assert result.success
        code = shell.user_ns["code"]
        assert shell.rl_next_input == code and code.inserted
    finally:
        InteractiveShell.clear_instance()


def test_pretty_repr_shows_the_code_not_a_quoted_string(signal):
    pretty = pytest.importorskip("IPython.lib.pretty")
    code = FrozenCode("import specbench as sb\n", inserted=True)
    text = pretty.pretty(code)
    assert text == "# inserted as a new cell below\nimport specbench as sb\n"
