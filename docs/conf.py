"""Sphinx configuration of the specbench API reference (built from the docstrings).

Build: ``sphinx-build -W -b html docs docs/_build/html`` (warnings are errors; the test
``tests/test_docs_build.py`` builds a copy of this folder the same way).
"""

import os
import sys

sys.path.insert(0, os.path.abspath(".."))

from specbench import __version__  # noqa: E402

project = "specbench"
author = "the specbench authors"
copyright = "the specbench authors"  # noqa: A001  (the name Sphinx reads)
version = release = __version__

extensions = ["sphinx.ext.autodoc", "sphinx.ext.autosummary", "numpydoc"]
templates_path = ["_templates"]
exclude_patterns = ["_build"]

autosummary_generate = True  # one page per object, under api/generated/ (not committed)
autosummary_imported_members = True
autodoc_typehints = "none"  # the numpydoc sections carry the types
autodoc_member_order = "bysource"
numpydoc_show_class_members = False  # the class template lists the members
numpydoc_xref_param_type = False
numpydoc_validation_checks: set = set()

html_theme = "alabaster"
html_title = f"specbench {version} API reference"
html_static_path: list = []


def _class_signature(app, what, name, obj, options, signature, return_annotation):
    """The constructor's keywords as ``inspect.signature`` gives them (the estimators define
    ``__new__(*args, **kwargs)``, which autodoc would show instead), without annotations."""
    if what != "class":
        return None
    import inspect

    try:
        sig = inspect.signature(obj)
    except (TypeError, ValueError):
        return None
    empty = inspect.Parameter.empty
    sig = sig.replace(parameters=[p.replace(annotation=empty) for p in sig.parameters.values()],
                      return_annotation=inspect.Signature.empty)
    return str(sig), None


def setup(app):
    app.connect("autodoc-process-signature", _class_signature)
