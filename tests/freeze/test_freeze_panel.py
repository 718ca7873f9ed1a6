"""The Freeze panel, headless (no front end): build it, click, read the model state."""

from __future__ import annotations

import html
import json
import re

import pytest
from freeze_support import make_state

import specbench as sb
from specbench.freeze import code_cell, read_settings

W = pytest.importorskip("ipywidgets")
pytest.importorskip("anywidget")

from specbench.widgets.freeze_panel import COPY_FAILED, CopyButton, FreezePanel  # noqa: E402


class Bench:
    """Stands in for the Workbench: the panel only needs get_state."""

    def __init__(self, state):
        self.state = state
        self.fail = None

    def freeze_state(self):
        if self.fail is not None:
            raise self.fail
        return self.state


def _box_text(panel):
    m = re.fullmatch(r"<pre class='sb-freeze-code-text' style='[^']*'>(.*)</pre>", panel.code_box.value, re.S)
    assert m, panel.code_box.value
    return html.unescape(m.group(1))


@pytest.fixture
def bench(signal):
    return Bench(make_state(signal, sb.Welch(segment_length=1024), sb.Autocorrelation(max_lag=0.1), channel="frame"))


def test_layout_and_css_classes(bench):
    panel = FreezePanel(bench.freeze_state)
    assert isinstance(panel, W.Widget)
    assert "sb-freeze-panel" in panel._dom_classes
    assert "sb-freeze-button" in panel.freeze_button._dom_classes
    assert "sb-freeze-code" in panel.code_box._dom_classes
    assert "sb-copy" in panel.copy_button._dom_classes and isinstance(panel.copy_button, CopyButton)
    assert "button.className = \"sb-copy-button" in CopyButton._esm
    assert "sb-copy-result" in panel.copy_result._dom_classes
    rows = [c for c in panel.children if "sb-save-settings" in getattr(c, "_dom_classes", ())]
    assert len(rows) == 1 and panel.save_button in rows[0].children
    assert panel.code == "" and "Press Freeze" in panel.code_box.value
    assert panel.copy_button.text == ""  # the copy button is disabled until there is code


def test_freeze_button_shows_code_cell_output_in_both_styles(bench, signal):
    panel = FreezePanel(bench.freeze_state)
    panel.freeze_button.click()
    expected = code_cell(bench.state, "specbench", now=panel.frozen_at)
    assert panel.code == expected == _box_text(panel) == panel.copy_button.text
    panel.style_toggle.value = "scipy"
    expected = code_cell(bench.state, "scipy", now=panel.frozen_at)
    assert panel.code == expected == _box_text(panel) == panel.copy_button.text
    # a later Freeze picks up the settings on screen now
    bench.state = make_state(signal, sb.Multitaper(segment_length=512), channel="shaker")
    panel.freeze_button.click()
    assert "scipy.signal.windows.dpss(" in _box_text(panel)
    assert "Multitaper(segment_length=512)" in panel.message.value


def test_copy_result_is_shown_for_success_and_failure(bench):
    panel = FreezePanel(bench.freeze_state)
    panel.freeze_button.click()
    # what the front end sends after a click
    panel.copy_button.set_state({"result": "copied", "method": "clipboard", "attempts": 1})
    assert "Copied" in panel.copy_result.value and "sb-err" not in panel.copy_result.value
    panel.copy_button.set_state({"result": "failed", "method": "execCommand", "attempts": 2})
    assert html.escape(COPY_FAILED) in panel.copy_result.value and "sb-err" in panel.copy_result.value
    panel.copy_button.set_state({"result": "failed", "attempts": 3})  # same result again still shows
    assert "select the text and press Ctrl+C" in panel.copy_result.value
    panel.freeze_button.click()
    assert panel.copy_result.value == ""  # a new code clears the old result


def test_save_settings_writes_the_file_and_says_so(bench, tmp_path):
    panel = FreezePanel(bench.freeze_state)
    path = tmp_path / "bench.json"
    panel.path_text.value = str(path)
    panel.save_button.click()
    assert f"Saved {path.resolve()}" in html.unescape(panel.save_result.value)
    s = read_settings(path)
    assert s.estimator == bench.state.estimator and s.selection == bench.state.selection
    assert f"Settings file: {path}" in _box_text(panel).replace("\n#   ", " ")
    panel.save_button.click()
    assert "Replaced" in panel.save_result.value
    assert json.loads(path.read_text())["analyses"]["psd"]["kind"] == "Welch"


@pytest.mark.parametrize("value, pattern", [
    ("", "Give a file name first"),
    ("{tmp}/missing/s.json", "the folder .* does not exist. Create it first"),
    ("{tmp}", "is a folder; give a file name"),
])
def test_save_errors_are_shown_never_raised(bench, tmp_path, value, pattern):
    panel = FreezePanel(bench.freeze_state)
    panel.path_text.value = value.format(tmp=tmp_path)
    panel.save_button.click()  # must not raise
    text = html.unescape(panel.save_result.value)
    assert re.search(pattern, text) and "sb-err" in text and "Traceback" not in text


def test_a_failing_state_keeps_the_last_code(bench):
    panel = FreezePanel(bench.freeze_state)
    panel.freeze_button.click()
    good = panel.code
    bench.fail = sb.InputError("The span 3 to 2 s holds no sample.")
    panel.freeze_button.click()
    assert panel.code == good and _box_text(panel) == good
    assert "Could not read the settings on screen: The span 3 to 2 s holds no sample." in html.unescape(
        panel.message.value)
    bench.fail = RuntimeError("boom")
    panel.save_button.click()
    assert "Could not save the settings: RuntimeError: boom" in html.unescape(panel.save_result.value)


def test_bad_data_name_is_a_message(bench):
    import dataclasses

    bench.state = dataclasses.replace(bench.state, data_name="psd_estimator")
    panel = FreezePanel(bench.freeze_state)
    panel.freeze_button.click()
    assert "Could not write the code" in panel.message.value and panel.code == ""
