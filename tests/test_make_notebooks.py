"""The committed example notebooks are exactly what tools/make_notebooks.py writes.

They live at the top of the repository in example_notebooks/ (opened by people and by
Binder) and, byte for byte the same, in specbench/examples/ (shipped for `specbench demo`).

So the notebooks carry no outputs, execution counts or local metadata, and an edit made
in JupyterLab instead of the generator is caught (fix: edit the cells in
tools/make_notebooks.py and run ``python tools/make_notebooks.py``).
"""

from __future__ import annotations

import importlib.util
import json
from pathlib import Path

import pytest

REPO = Path(__file__).resolve().parents[1]
EXAMPLES = REPO / "example_notebooks"
PACKAGED = REPO / "specbench" / "examples"
GENERATOR = REPO / "tools" / "make_notebooks.py"

pytest.importorskip("nbformat")


def _generator():
    spec = importlib.util.spec_from_file_location("make_notebooks", GENERATOR)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


make_notebooks = _generator()


def test_the_generator_writes_the_three_example_notebooks():
    assert sorted(make_notebooks.NOTEBOOKS) == ["batch_pipeline.ipynb", "quickstart.ipynb", "your_own_data.ipynb"]
    assert make_notebooks.EXAMPLES == EXAMPLES and make_notebooks.PACKAGED == PACKAGED
    assert sorted(path.name for path in EXAMPLES.glob("*.ipynb")) == sorted(make_notebooks.NOTEBOOKS)
    assert sorted(path.name for path in PACKAGED.glob("*.ipynb")) == sorted(make_notebooks.NOTEBOOKS)


@pytest.mark.parametrize("name", sorted(make_notebooks.NOTEBOOKS))
def test_the_packaged_copy_equals_the_top_level_notebook(name):
    assert (PACKAGED / name).read_bytes() == (EXAMPLES / name).read_bytes(), (
        f"specbench/examples/{name} differs from example_notebooks/{name}; run python tools/make_notebooks.py"
    )


@pytest.mark.parametrize("name", sorted(make_notebooks.NOTEBOOKS))
def test_committed_notebook_is_the_generator_output(name):
    committed = (EXAMPLES / name).read_text(encoding="utf-8")
    assert committed == make_notebooks.render(name), (
        f"example_notebooks/{name} differs from tools/make_notebooks.py; edit the cells there "
        f"and run: python tools/make_notebooks.py"
    )


@pytest.mark.parametrize("name", sorted(make_notebooks.NOTEBOOKS))
def test_committed_notebook_has_no_outputs_and_a_kernel(name):
    nb = json.loads((EXAMPLES / name).read_text(encoding="utf-8"))
    assert nb["metadata"]["kernelspec"]["name"] == "python3"  # JupyterLab opens it without asking
    for cell in nb["cells"]:
        assert "attachments" not in cell
        if cell["cell_type"] == "code":
            assert cell["outputs"] == [] and cell["execution_count"] is None, cell["id"]
    assert (EXAMPLES / name).stat().st_size < 20_000


def test_check_mode_reports_a_stale_notebook(tmp_path, monkeypatch, capsys):
    monkeypatch.setattr(make_notebooks, "EXAMPLES", tmp_path)
    monkeypatch.setattr(make_notebooks, "PACKAGED", tmp_path / "pkg")
    assert make_notebooks.main([]) == 0  # writes all three into both empty folders
    assert sorted(p.name for p in (tmp_path / "pkg").glob("*.ipynb")) == sorted(make_notebooks.NOTEBOOKS)
    assert make_notebooks.main(["--check"]) == 0
    packaged = tmp_path / "pkg" / "batch_pipeline.ipynb"
    packaged.write_text(packaged.read_text(encoding="utf-8") + " ", encoding="utf-8")
    assert make_notebooks.main(["--check"]) == 1
    assert "pkg/batch_pipeline.ipynb differs from tools/make_notebooks.py" in capsys.readouterr().out
    assert make_notebooks.main([]) == 0 and make_notebooks.main(["--check"]) == 0
    edited = tmp_path / "quickstart.ipynb"
    edited.write_text(edited.read_text(encoding="utf-8").replace("quick start", "quick-start"), encoding="utf-8")
    (tmp_path / "stray.ipynb").write_text("{}", encoding="utf-8")
    capsys.readouterr()
    assert make_notebooks.main(["--check"]) == 1
    out = capsys.readouterr().out
    assert "quickstart.ipynb differs from tools/make_notebooks.py" in out
    assert "stray.ipynb is not written by tools/make_notebooks.py" in out
