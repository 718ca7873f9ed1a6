"""The API reference builds with Sphinx + numpydoc, warnings as errors, and holds every estimator's page.

``sphinx-build -W -b html docs <tmp>``: any docutils or autodoc warning (a broken citation, a
malformed section, an object that does not import) fails the build.  The pages autosummary
generates go to ``docs/api/generated/`` (git-ignored); the HTML to a temporary folder.
"""

from __future__ import annotations

import html
import os
import re
import subprocess
import sys
import time
from pathlib import Path

import pytest

from specbench.estimators._base import estimator_classes

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    pytest.importorskip("sphinx")  # in the test extra (with numpydoc)
    pytest.importorskip("numpydoc")
    out = tmp_path_factory.mktemp("docs") / "html"
    env = dict(os.environ, PYTHONPATH=os.pathsep.join([str(ROOT), os.environ.get("PYTHONPATH", "")]))
    t0 = time.perf_counter()
    run = subprocess.run([sys.executable, "-m", "sphinx", "-W", "--keep-going", "-q", "-b", "html",
                          "-d", str(out.parent / "doctrees"), str(ROOT / "docs"), str(out)],
                         capture_output=True, text=True, cwd=ROOT, env=env, timeout=300)
    seconds = time.perf_counter() - t0
    assert run.returncode == 0, f"sphinx-build -W failed:\n{run.stdout}\n{run.stderr}"
    print(f"docs built in {seconds:.1f} s")
    return out


def _text(path: Path) -> str:
    return html.unescape(re.sub(r"<[^>]+>", "", path.read_text(encoding="utf-8")))


def test_every_estimator_has_its_page_with_every_parameter(built):
    for name, cls in estimator_classes().items():
        page = built / "api" / "generated" / f"{cls.__module__.split('.')[0]}.{cls.__name__}.html"
        assert page.exists(), f"no API page for {name} (add it to docs/api/estimators.rst)"
        text = _text(page)
        for field, spec in cls.params().items():
            assert field in text and f"default {spec.default!r}".replace("'", "") in text.replace("‘", "").replace(
                "’", ""), (name, field)
        assert "Allowed:" in text


def test_the_index_links_the_api_pages(built):
    index = (built / "index.html").read_text(encoding="utf-8")
    for page in ("estimators", "results", "data", "freeze", "measure", "models", "workbench", "errors"):
        assert f"api/{page}.html" in index
    assert "specbench.Welch" in (built / "api" / "estimators.html").read_text(encoding="utf-8")
