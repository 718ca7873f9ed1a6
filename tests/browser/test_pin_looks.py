"""Eight pins in a real JupyterLab: every pin line has its dash and every pin its own marker shape.

bqplot draws a Scatter's markers as ``path.dot`` elements (their ``d`` is the marker's shape)
and a Lines mark as ``path.line`` with the dash as a ``stroke-dasharray`` style. The test pins
eight estimates, then reads the PSD figure's SVG: eight marker shapes, all different, and the
pin lines' dash patterns, and takes a screenshot to look at.
"""

from __future__ import annotations

import nbformat

BENCH_CELL = """\
import numpy as np
import specbench as sb
rng = np.random.default_rng(3)
sig = sb.Signal(rng.standard_normal(40_000), fs=1000.0, unit="V")
bench = sb.Workbench(sig)
for i in range(8):
    bench.estimator = bench.estimator.replace(segment_length=[128, 256, 512, 1024, 2048, 4096, 8192, 16384][i])
    bench.pin()
bench.estimator = bench.estimator.replace(segment_length=1024, window="hamming")
print("eight pins")
bench"""

SHAPES = """() => {
  const fig = document.querySelector('.sb-psd');
  const dots = [...fig.querySelectorAll('path.dot')].map(p => p.getAttribute('d'));
  const lines = [...fig.querySelectorAll('path.line')].map(p => getComputedStyle(p).strokeDasharray);
  return {dots, lines};
}"""


def test_eight_pins_look_different_in_the_browser(lab):
    nb = nbformat.v4.new_notebook(cells=[nbformat.v4.new_code_cell(BENCH_CELL)])
    lab.open(nb)
    lab.run_all()
    page = lab.page
    page.get_by_text("eight pins").first.wait_for(timeout=60_000)
    page.wait_for_function("() => document.querySelectorAll('.sb-psd path.dot').length >= 64", timeout=60_000)
    got = page.evaluate(SHAPES)
    shapes = set(got["dots"])
    assert len(got["dots"]) == 64 and len(shapes) == 8, shapes  # 8 markers on each of 8 pins, 8 shapes
    dashes = [d for d in got["lines"] if d and d != "none"]
    assert len(set(dashes)) == 3 and len(dashes) >= 8, got["lines"]  # dashed, dotted, dash-dotted pins
    lab.screenshot("psd", show=".sb-psd")
    lab.screenshot("pin-table", show=".sb-pins")
    assert not lab.tracebacks()
