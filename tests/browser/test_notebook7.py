"""The quickstart also runs in Notebook 7 (the `notebook` package's document-oriented front end).

Notebook 7 is served by the same Jupyter server as JupyterLab (its server extension loads
when the package is installed) under ``/notebooks/<path>``; it has no status bar, so the
kernel is idle when the toolbar's execution indicator says so.
"""

from __future__ import annotations

import json
import os
import re

import pytest
from test_workbench_e2e import EXAMPLES, drawn

KERNEL_TIMEOUT = 90_000  # ms: first kernel start and imports on a cold machine


def unavailable(reason: str):
    if os.environ.get("CI", "").strip().lower() not in ("", "0", "false", "no"):
        pytest.fail(f"{reason}. CI is set, so the browser tests must run.", pytrace=False)
    pytest.skip(reason)


def test_the_quickstart_runs_in_notebook_7(lab):
    try:
        import notebook  # noqa: F401
    except ImportError:
        unavailable('Notebook 7 is not installed (pip install "notebook>=7", in the test extra)')
    path = lab.add_notebook(EXAMPLES / "quickstart.ipynb")
    page = lab.page
    page.goto(f"{lab.server.url}/notebooks/{path}?token={lab.server.token}")
    page.locator(".jp-Notebook").first.wait_for(timeout=KERNEL_TIMEOUT)
    assert "/notebooks/" in page.url  # Notebook 7, not JupyterLab
    assert page.locator("#jp-main-statusbar").count() == 0 or not page.locator("#jp-main-statusbar").is_visible()
    idle = "() => document.querySelector('.jp-Notebook-ExecutionIndicator')?.dataset.status === 'idle'"
    page.wait_for_function(idle, timeout=KERNEL_TIMEOUT)
    # the indicator says idle while the kernel's connection is still being set up, and a Run All
    # issued then is dropped: run again until the first code cell shows an execution count
    ran = "() => /\\[\\d+\\]/.test(document.querySelector('.jp-CodeCell .jp-InputArea-prompt')?.textContent || '')"
    for _attempt in range(8):
        dialog = page.locator(".jp-Dialog")
        if dialog.count():
            raise AssertionError(f"Notebook 7 shows a dialog: {dialog.first.inner_text()!r}")
        page.locator(".lm-MenuBar-item", has_text=re.compile(r"^Run$")).click()
        page.locator('li[data-command="runmenu:run-all"]').click()
        try:
            page.wait_for_function(ran, timeout=10_000)
            break
        except Exception:
            page.keyboard.press("Escape")
    else:
        raise AssertionError("Notebook 7 did not run the cells")
    page.locator(".sb-workbench .sb-psd path.area").first.wait_for(timeout=KERNEL_TIMEOUT)
    # every code cell of the quickstart has run (bench.freeze() adds one below, not executed)
    code_cells = sum(1 for c in json.loads((EXAMPLES / "quickstart.ipynb").read_text())["cells"]
                     if c["cell_type"] == "code")
    done = ("(n) => [...document.querySelectorAll('.jp-CodeCell .jp-InputArea-prompt')]"
            ".filter(p => /\\[\\d+\\]/.test(p.textContent)).length >= n")
    page.wait_for_function(done, arg=code_cells, timeout=KERNEL_TIMEOUT)
    page.wait_for_function(idle, timeout=KERNEL_TIMEOUT)
    assert lab.tracebacks() == []
    for view in ("psd", "acf"):
        d = drawn(lab, view)
        assert len(d.line["line"]) > 200 and len(d.band["area"]) > 200
        assert len(d.pins) == 2, f"{view}: the quickstart pins two estimates"
    lab.screenshot("notebook7-views", show=".sb-workbench .sb-psd")
