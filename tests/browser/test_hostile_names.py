"""Hostile channel names and units in a real JupyterLab: shown as text, never run as HTML.

ipywidgets' HTML widgets render their value as HTML without sanitising it, so a unit such as
``<img src=x onerror=...>`` used to run script in the JupyterLab page (and script in the page
can drive the server). Every user string is escaped before it reaches an HTML widget; this
test loads a two-channel record whose names and unit are markup, runs the Workbench, pins an
estimate and freezes, and checks that no injected handler ran and no injected element exists.
"""

from __future__ import annotations

import nbformat

BENCH_CELL = """\
import numpy as np
import specbench as sb
rng = np.random.default_rng(1)
x = rng.standard_normal((2, 50_000))
x[1] += 0.5 * x[0]
names = ['<img src=x onerror="window.__sbPwned = 1">', "<script>window.__sbPwned = 2</script>b"]
unit = '<img src=y onerror="window.__sbPwned = 3">m/s^2'
sig = sb.Signal(x, fs=1000.0, channels=names, unit=unit)
bench = sb.Workbench(sig)
bench"""

PIN_AND_FREEZE = """\
bench.pin()
code = bench.code()
assert "__sbPwned" in code  # the names are in the code, as quoted strings
print("pinned and frozen")"""


def test_hostile_names_and_units_are_shown_as_text(lab):
    nb = nbformat.v4.new_notebook(cells=[nbformat.v4.new_code_cell(BENCH_CELL),
                                         nbformat.v4.new_code_cell(PIN_AND_FREEZE)])
    lab.open(nb)
    lab.run_all()
    page = lab.page
    page.wait_for_function(
        "() => /Welch/.test((document.querySelector('.sb-status') || {}).textContent || '')", timeout=60_000)
    page.get_by_text("pinned and frozen").first.wait_for(timeout=60_000)
    # move the mouse over the PSD so the readout (which shows the unit) renders
    figure = page.locator(".bqplot").first
    figure.scroll_into_view_if_needed()
    box = figure.bounding_box()
    page.mouse.move(box["x"] + box["width"] / 2, box["y"] + box["height"] / 2)
    page.wait_for_timeout(500)
    lab.screenshot("hostile")
    assert page.evaluate("() => window.__sbPwned === undefined"), "an injected handler ran"
    injected = page.evaluate(
        "() => document.querySelectorAll('.jp-OutputArea img[src=\"x\"], .jp-OutputArea img[src=\"y\"],"
        " .jp-OutputArea script').length")
    assert injected == 0, f"{injected} injected element(s) in the output area"
    # the names are there, as text a person can read
    text = page.locator(".jp-OutputArea").first.inner_text()
    assert "onerror" in text or page.locator("select option", has_text="onerror").count() > 0
    assert not lab.tracebacks()
