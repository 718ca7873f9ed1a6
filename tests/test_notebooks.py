"""Every shipped example notebook runs top to bottom in a fresh kernel without an error.

Each notebook runs in a temporary copy of the examples folder (the notebooks may read
files beside them), with Jupyter and IPython configuration isolated so that a user's
kernelspecs or startup files cannot change the result.
"""

from __future__ import annotations

import shutil
import sys
from pathlib import Path

import pytest

#: the notebooks as people open them (specbench/examples/ holds byte-identical copies: test_make_notebooks)
EXAMPLES = Path(__file__).resolve().parents[1] / "example_notebooks"
NOTEBOOKS = sorted(EXAMPLES.glob("*.ipynb")) if EXAMPLES.is_dir() else []

#: Seconds one cell may take (the demo data are small; this only stops a hung kernel).
CELL_TIMEOUT = 300

if NOTEBOOKS:
    CASES = [pytest.param(path, id=path.stem) for path in NOTEBOOKS]
else:
    CASES = [
        pytest.param(
            None,
            id="no-notebooks",
            marks=pytest.mark.skip(reason=f"no example notebooks in {EXAMPLES} yet"),
        )
    ]


@pytest.mark.parametrize("notebook", CASES)
def test_example_notebook_runs(notebook, tmp_path, monkeypatch):
    nbformat = pytest.importorskip("nbformat")
    nbclient = pytest.importorskip("nbclient")
    jupyter_client = pytest.importorskip("jupyter_client")

    for name in ("JUPYTER_CONFIG_DIR", "JUPYTER_DATA_DIR", "JUPYTER_RUNTIME_DIR", "IPYTHONDIR"):
        monkeypatch.setenv(name, str(tmp_path / name.lower()))
    monkeypatch.delenv("JUPYTER_PATH", raising=False)
    work = tmp_path / "examples"
    shutil.copytree(EXAMPLES, work, ignore=shutil.ignore_patterns(".ipynb_checkpoints"))
    copy = work / notebook.name

    nb = nbformat.read(copy, as_version=4)
    kernel = jupyter_client.KernelManager(kernel_name="python3")
    # The kernel must run the interpreter under test (the one with this specbench installed).
    assert kernel.format_kernel_cmd()[0] == sys.executable
    client = nbclient.NotebookClient(
        nb, km=kernel, timeout=CELL_TIMEOUT, resources={"metadata": {"path": str(work)}}
    )
    # nbclient raises CellExecutionError, with the cell and its traceback, on any error.
    client.execute()

    code_cells = [cell for cell in nb.cells if cell.cell_type == "code" and cell.source.strip()]
    assert code_cells, f"{notebook.name} has no code cell to run"
    assert all(cell.execution_count for cell in code_cells)
