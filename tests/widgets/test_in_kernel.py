"""The Workbench in a real IPython kernel (nbclient, no browser).

In a kernel every cell runs inside the event loop; a control changed by code in a cell
must still apply before the next line of that cell, as in a plain script.
"""

import pytest

nbformat = pytest.importorskip("nbformat")
nbclient = pytest.importorskip("nbclient")

CELLS = [
    """\
import specbench as sb
bench = sb.Workbench(sb.demo("white-noise"))
bench""",
    """\
import asyncio
asyncio.get_running_loop()  # the kernel runs cells inside its event loop
bench.controls["segment_length"].value = 2048
assert bench.estimator.segment_length == 2048, bench.status
assert bench.spectrum.estimator == bench.estimator
bench.controls["overlap"].value = 1.5
assert "Not applied" in bench.status and bench.controls["overlap"].invalid
print("OK")""",
]


def test_control_changes_from_a_cell_apply_at_once():
    nb = nbformat.v4.new_notebook()
    nb.cells = [nbformat.v4.new_code_cell(c) for c in CELLS]
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    client = nbclient.NotebookClient(nb, timeout=120, kernel_name="python3")
    client.execute()
    out = nb.cells[1].outputs
    assert [o.get("text") for o in out if o.get("output_type") == "stream"] == ["OK\n"], out
    # the widget was displayed (its state saved) and nothing went to stderr
    assert any("application/vnd.jupyter.widget-view+json" in o.get("data", {}) for o in nb.cells[0].outputs)
    assert not [o for c in nb.cells for o in c.outputs if o.get("name") == "stderr"]
