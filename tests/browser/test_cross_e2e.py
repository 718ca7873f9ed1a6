"""The cross view end to end in a real JupyterLab: coherence with its significance level
and band, phase and gain with their bands, the delay readout, and a pair change."""

from __future__ import annotations

import re

import nbformat

CELL = """\
import specbench as sb

bench = sb.Workbench(sb.demo("delay-pair", duration=30))
bench"""


def test_cross_view_draws_and_follows_the_pair(lab):
    nb = nbformat.v4.new_notebook(cells=[nbformat.v4.new_code_cell(CELL)])
    lab.open(nb, "cross.ipynb")
    lab.run_all()
    lab.wait_for(".sb-view-cross .sb-cross-coherence path.area")
    for css in ("sb-cross-coherence", "sb-cross-phase", "sb-cross-gain"):
        d = lab.page.locator(f".sb-view-cross .{css} path.line").first.get_attribute("d") or ""
        assert d.count("L") > 100, css  # the estimate is drawn (hundreds of bins)
    readout = lab.page.locator(".sb-view-cross .sb-readout").first.inner_text()
    assert re.search(r"delay 2[45]\.\d+ ms", readout), readout
    assert "interval" in readout
    lab.screenshot("0-cross-pair-and-delay", show=".sb-view-cross .sb-cross-pair")
    lab.screenshot("1-cross-view", show=".sb-view-cross")
    lab.screenshot("2-cross-gain", show=".sb-view-cross .sb-cross-gain")
    # swap the pair: y becomes x, the delay changes sign
    menus = lab.page.locator(".sb-view-cross select")
    menus.nth(0).select_option("downstream")
    menus.nth(1).select_option("upstream")
    lab.page.locator(".sb-view-cross .sb-readout", has_text=re.compile(r"delay -2[45]")).first.wait_for()
    lab.screenshot("3-cross-swapped", show=".sb-view-cross")
    assert not lab.tracebacks()
