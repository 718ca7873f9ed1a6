"""A long computation in a real JupyterLab: progress bar, expected time, Cancel (headless Chromium).

A whole-record multitaper of 2,000,000 samples takes several seconds; ticking "auto" on the
segment length starts it from the front end, so it runs in the worker thread while the
kernel keeps handling widget messages: the progress bar moves and the Cancel button stops
it, leaving the last good estimate on screen.
"""

from __future__ import annotations

import nbformat

BENCH_CELL = """\
import numpy as np
import specbench as sb
x = sb.Signal(np.random.default_rng(3).standard_normal(2_000_000), fs=1000.0, channels=["x"], unit="V")
bench = sb.Workbench(x, sb.Multitaper(segment_length=4096))
bench"""


def test_progress_and_cancel(lab):
    nb = nbformat.v4.new_notebook(cells=[nbformat.v4.new_code_cell(BENCH_CELL)])
    lab.open(nb)
    lab.run_all()
    page = lab.page
    page.wait_for_function(
        "() => /Multitaper/.test((document.querySelector('.sb-status') || {}).textContent || '')", timeout=60_000)
    before = page.locator(".sb-merit-resolution .sb-merit-value").text_content()
    auto = page.locator(".sb-control-segment-length input[type=checkbox]").first
    auto.scroll_into_view_if_needed()
    auto.check()
    progress = page.locator(".sb-progress")
    progress.wait_for(state="visible", timeout=20_000)
    text = page.locator(".sb-progress-text").text_content()
    assert "Computing" in text and "expected" in text, text
    page.wait_for_function(  # the engine's block counter moves the bar
        "() => /[1-9][0-9]* %/.test(document.querySelector('.sb-progress-text').textContent)", timeout=30_000)
    lab.screenshot("progress", show=".sb-progress")
    page.locator(".sb-cancel").click()
    page.wait_for_function(
        "() => /cancelled/.test(document.querySelector('.sb-status').textContent)", timeout=30_000)
    status = page.locator(".sb-status").text_content()
    assert "last good estimate stays on screen" in status, status
    assert not progress.is_visible()
    assert page.locator(".sb-merit-resolution .sb-merit-value").text_content() == before
    lab.screenshot("cancelled", show=".sb-status")
    assert not lab.tracebacks()
