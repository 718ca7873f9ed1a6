"""Smoke test of the browser environment: JupyterLab, the widget extensions, Chromium.

A generated notebook shows an ipywidgets slider, a label and a bqplot line. The test
checks that the line is drawn, that a keyboard change of the slider reaches the Python
kernel (the observer rewrites the label and the line) and that the page redraws.
If this test fails, every other browser test would fail for the same reason.
"""

from __future__ import annotations

import nbformat
import pytest

SOURCE = '''
import bqplot as bq
import ipywidgets as widgets
import numpy as np

x = np.linspace(0.0, 1.0, 400)
x_scale, y_scale = bq.LinearScale(), bq.LinearScale(min=-1.1, max=1.1)
line = bq.Lines(x=x, y=np.sin(2 * np.pi * 3 * x), scales={"x": x_scale, "y": y_scale})
figure = bq.Figure(
    marks=[line],
    axes=[bq.Axis(scale=x_scale, label="t (s)"),
          bq.Axis(scale=y_scale, orientation="vertical", label="value")],
    title="harness: sine of N cycles",
    layout=widgets.Layout(width="640px", height="320px"),
)
slider = widgets.IntSlider(value=3, min=1, max=10, description="cycles")
label = widgets.Label("kernel saw cycles=3")
slider.add_class("harness-slider")
label.add_class("harness-label")


def redraw(change):
    line.y = np.sin(2 * np.pi * change["new"] * x)
    label.value = f"kernel saw cycles={change['new']}"


slider.observe(redraw, names="value")
widgets.VBox([slider, label, figure])
'''


def harness_notebook():
    return nbformat.v4.new_notebook(
        cells=[
            nbformat.v4.new_markdown_cell("Browser harness smoke test (generated)."),
            nbformat.v4.new_code_cell(SOURCE.strip()),
        ],
        metadata={
            "kernelspec": {"name": "python3", "display_name": "Python 3", "language": "python"}
        },
    )


def line_path(lab) -> str:
    return lab.wait_for(".bqplot path.line").get_attribute("d") or ""


def test_slider_drives_bqplot_line_through_the_kernel(lab):
    lab.open(harness_notebook(), "harness.ipynb")
    lab.run_all()

    with lab.timed("first plot"):
        lab.page.wait_for_function(
            "() => (document.querySelector('.bqplot path.line')?.getAttribute('d') || '')"
            ".length > 100"
        )
    assert lab.page.locator(".bqplot .mainheading").text_content() == "harness: sine of N cycles"
    assert lab.stderr_outputs() == []
    before = line_path(lab)

    with lab.timed("slider to redraw"):
        handle = lab.wait_for(".harness-slider .noUi-handle")
        handle.focus()
        handle.press("ArrowRight")
        handle.press("ArrowRight")
        # The label is written by the Python observer: the change made the round trip.
        lab.page.locator(".harness-label", has_text="kernel saw cycles=5").wait_for()
        lab.page.wait_for_function(
            "(old) => { const d = document.querySelector('.bqplot path.line')"
            "?.getAttribute('d'); return d && d !== old; }",
            arg=before,
        )
    assert lab.page.locator(".harness-slider .widget-readout").inner_text().strip() == "5"
    after = line_path(lab)
    assert after != before and len(after) > 100

    shot = lab.screenshot(show=".bqplot")
    assert shot.stat().st_size > 10_000


@pytest.mark.parametrize("run", ["first", "second"])
def test_each_test_has_its_own_kernel_and_cleans_up(lab, run):
    """The open notebook is the server's only session: earlier tests shut theirs down."""
    lab.open(harness_notebook(), "harness.ipynb")
    paths = [session["path"] for session in lab.server.api("GET", "/api/sessions")]
    assert paths == [f"{lab.folder}/harness.ipynb"]
    kernels = lab.server.api("GET", "/api/kernels")
    assert len(kernels) == 1
