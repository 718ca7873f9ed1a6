"""``freeze``: the code cell into the notebook, the settings into a file."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Any

from ._codegen import code_cell
from ._settings import save_state
from ._state import FreezeState

__all__ = ["FrozenCode", "freeze"]


class FrozenCode(str):
    """The frozen code (a ``str``), shown as the code itself rather than a quoted string.

    Attributes
    ----------
    settings_path : Path or None
        The settings file written with it.
    inserted : bool
        Whether the code was put into a new notebook cell below.
    """

    settings_path: Path | None
    inserted: bool

    def __new__(cls, code: str, settings_path: Path | None = None, inserted: bool = False) -> FrozenCode:
        obj = super().__new__(cls, code)
        obj.settings_path = settings_path
        obj.inserted = inserted
        return obj

    def _repr_pretty_(self, p: Any, cycle: bool) -> None:
        notes = []
        if self.inserted:
            notes.append("inserted as a new cell below")
        if self.settings_path is not None:
            notes.append(f"settings written to {self.settings_path}")
        if notes:
            p.text("# " + "; ".join(notes) + "\n")
        p.text(str(self))


def _shell() -> Any:
    """The running IPython shell, or None outside IPython."""
    try:
        from IPython import get_ipython
    except ImportError:
        return None
    return get_ipython()


def freeze(
    state: FreezeState,
    path: str | os.PathLike | None = None,
    *,
    style: str = "specbench",
    insert: bool = True,
) -> FrozenCode:
    """Freeze a workbench state: code cell below, settings file when ``path`` is given.

    Call it from an executed cell (``bench.freeze()``): it inserts the code as a new cell
    below with IPython's ``set_next_input``.  Never call it from a widget callback (a
    button's ``on_click``): JupyterLab then inserts nothing and the code leaks into the
    next executed cell.  The widget's Freeze control uses :func:`code_cell` instead.

    Parameters
    ----------
    state : FreezeState
    path : str or path, optional
        Write the settings file (JSON, :func:`save_settings`) there, before the cell.
    style : {"specbench", "scipy"}
        The form of the code (see :func:`code_cell`).
    insert : bool
        Insert the cell when running in IPython (default True).

    Returns
    -------
    FrozenCode
        The code (a ``str``).
    """
    written = save_state(state, path) if path is not None else None
    code = code_cell(state, style=style, settings_path=written)
    inserted = False
    if insert:
        shell = _shell()
        if shell is not None and hasattr(shell, "set_next_input"):
            shell.set_next_input(code, replace=False)
            inserted = True
    return FrozenCode(code, settings_path=written, inserted=inserted)
