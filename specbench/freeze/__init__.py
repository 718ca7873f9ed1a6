"""Freeze: chosen settings as a reproducible code cell and a versioned settings file.

- :func:`code_cell` writes the cell (``style="specbench"``: bit-for-bit reproduction;
  ``style="scipy"``: plain numpy/scipy, agreeing to floating-point precision).
- :func:`freeze` inserts it below the executing notebook cell and writes the settings.
- :func:`save_settings` / :func:`load_settings` / :func:`read_settings`: JSON files.
- ``specbench estimate DATA --settings S.json --out result.csv`` runs them in a pipeline.
"""

# the forms of further analyses register their batch writers and plain-code forms
from . import _cross_form, _noise_code, _noise_form  # noqa: E402, F401
from ._codegen import STYLES, check_data_name, code_cell
from ._fingerprint import Fingerprint, check_data, fingerprint
from ._freeze import FrozenCode, freeze
from ._settings import SETTINGS_SCHEMA, Settings, analysis_name, load_settings, read_settings, save_settings, save_state
from ._state import FreezeState, Selection, apply_steps

__all__ = [
    "Fingerprint",
    "FreezeState",
    "FrozenCode",
    "SETTINGS_SCHEMA",
    "STYLES",
    "Selection",
    "Settings",
    "analysis_name",
    "apply_steps",
    "check_data",
    "check_data_name",
    "code_cell",
    "fingerprint",
    "freeze",
    "load_settings",
    "read_settings",
    "save_settings",
    "save_state",
]
