"""Run the docstring examples of the public modules (they print checkable numbers)."""

import doctest
import importlib

import pytest

MODULES = [
    "specbench.estimators.spectral",
    "specbench.estimators.windows",
    "specbench.estimators.correlation",
    "specbench.estimators.cross",
    "specbench.measure._bands",
    "specbench.measure._tones",
]


@pytest.mark.parametrize("name", MODULES)
def test_docstring_examples(name):
    module = importlib.import_module(name)
    result = doctest.testmod(module, optionflags=doctest.ELLIPSIS | doctest.NORMALIZE_WHITESPACE)
    assert result.attempted > 0 or name.endswith("correlation")
    assert result.failed == 0
