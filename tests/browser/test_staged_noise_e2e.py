"""A new data selection in a real JupyterLab: the PSD and autocorrelation take it at once, the
noise model (48 replicate records re-fitted) follows in the background, its view marked with
the selection it still shows until then, with the progress row and Cancel button meanwhile."""

from __future__ import annotations

import nbformat

CELL = """\
import numpy as np
import specbench as sb

rng = np.random.default_rng(3)
x = rng.standard_normal((2, 1_000_000))
x[1] = 0.5 * x[0] + 2.0 * x[1]
bench = sb.Workbench(sb.Signal(x, fs=1000.0, channels=["left", "right"], unit="m/s^2"))
bench"""


def test_a_channel_change_shows_the_psd_first_and_the_noise_model_follows(lab):
    lab.page.set_viewport_size({"width": 1400, "height": 1000})
    nb = nbformat.v4.new_notebook(cells=[nbformat.v4.new_code_cell(CELL)])
    lab.open(nb, "staged.ipynb")
    lab.run_all()
    lab.wait_for(".sb-view-noise .sb-term-table", timeout=180_000)
    lab.page.locator(".sb-datastrip select").first.select_option("right")
    # the noise view says which selection it still shows, while the progress row runs
    note = lab.wait_for(".sb-view-noise .sb-stale-note", timeout=60_000)
    assert "of channel 'left', the whole record, an earlier data selection" in note.inner_text()
    assert lab.page.locator(".sb-progress .sb-cancel").first.is_visible()
    lab.screenshot("0-noise-stale-while-refitting", show=".sb-view-noise")
    lab.screenshot("1-progress-row", show=".sb-progress")
    # done: the note goes, the table is of the new channel
    lab.wait_for(".sb-view-noise .sb-stale-note", timeout=180_000, state="detached")
    lab.screenshot("2-noise-of-the-new-channel", show=".sb-view-noise")
    assert not lab.tracebacks()
