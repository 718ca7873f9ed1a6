"""The workbench's Freeze panel: the frozen code in a read-only box, copy and save actions.

The panel never inserts a notebook cell: IPython's ``set_next_input`` misfires from a
widget callback (nothing is inserted and the code leaks into the next executed cell).
It shows the code, copies it to the clipboard and writes the settings file; inserting a
cell is what ``bench.freeze()`` does, run in a cell.

Stable CSS classes for browser tests: ``sb-freeze-panel`` (the panel), ``sb-freeze-button``
(the Freeze button), ``sb-freeze-style`` (the style toggle), ``sb-freeze-code`` (the code
box; the code is the text of its ``pre.sb-freeze-code-text``), ``sb-copy`` (the copy
widget) holding ``button.sb-copy-button``, ``sb-copy-result`` (Copied / Copy failed),
``sb-save-settings`` (the row with ``sb-settings-path`` and ``sb-save-button``),
``sb-save-result`` and ``sb-freeze-message`` (errors of the Freeze button).
"""

from __future__ import annotations

import datetime as _dt
import html
import logging
from collections.abc import Callable
from pathlib import Path
from typing import Any

import ipywidgets as W
import traitlets

from .._errors import SpecbenchError
from ..freeze import code_cell, save_state
from ..freeze._describe import now_iso
from ..freeze._state import FreezeState

__all__ = ["FreezePanel", "CopyButton", "COPY_FAILED"]

_log = logging.getLogger(__name__)

COPIED = "Copied to the clipboard."
COPY_FAILED = "Copy failed: select the text and press Ctrl+C."

_COPY_ESM = r"""
function copyWithSelection(text) {
  // Fallback for browsers without the asynchronous clipboard (no secure context):
  // a hidden, read-only textarea selected and copied with execCommand.
  const area = document.createElement("textarea");
  area.value = text;
  area.setAttribute("readonly", "");
  area.style.position = "fixed";
  area.style.top = "-1000px";
  area.style.opacity = "0";
  document.body.appendChild(area);
  const focused = document.activeElement;
  area.select();
  let ok = false;
  try {
    ok = document.execCommand("copy");
  } catch (err) {
    ok = false;
  }
  document.body.removeChild(area);
  if (focused && focused.focus) {
    focused.focus();
  }
  return ok;
}

function render({ model, el }) {
  const button = document.createElement("button");
  button.type = "button";
  button.className = "sb-copy-button jupyter-widgets jupyter-button widget-button";
  button.title = "Copy the frozen code to the clipboard";
  const reset = () => {
    button.textContent = model.get("label");
    button.disabled = !model.get("text");
  };
  model.on("change:label", reset);
  model.on("change:text", reset);
  reset();

  const report = (ok, how) => {
    model.set("result", ok ? "copied" : "failed");
    model.set("method", how);
    model.set("attempts", model.get("attempts") + 1);
    model.save_changes();
    button.textContent = ok ? "Copied" : "Copy failed";
    setTimeout(reset, 2000);
  };

  button.addEventListener("click", async () => {
    const text = model.get("text");
    if (window.isSecureContext && navigator.clipboard && navigator.clipboard.writeText) {
      try {
        await navigator.clipboard.writeText(text);
        report(true, "clipboard");
        return;
      } catch (err) {
        // permission refused or no focus: try the selection fallback below
      }
    }
    report(copyWithSelection(text), "execCommand");
  });
  el.appendChild(button);
}

export default { render };
"""

try:
    import anywidget
except ImportError:  # pragma: no cover - anywidget comes with the lab extra
    anywidget = None


if anywidget is not None:

    class CopyButton(anywidget.AnyWidget):
        """A button that copies ``text`` to the browser's clipboard and reports the outcome.

        ``navigator.clipboard.writeText`` in a secure context (https, localhost), else a
        hidden textarea with ``document.execCommand("copy")``.  After each click the front
        end sets ``result`` (``"copied"`` or ``"failed"``), ``method`` (``"clipboard"`` or
        ``"execCommand"``) and increments ``attempts`` (observe ``attempts``: ``result`` may
        not change between two clicks).
        """

        _esm = _COPY_ESM
        text = traitlets.Unicode("", help="Text copied by a click").tag(sync=True)
        label = traitlets.Unicode("Copy", help="Button label").tag(sync=True)
        result = traitlets.Unicode("", help="'copied' or 'failed' after a click").tag(sync=True)
        method = traitlets.Unicode("", help="'clipboard' or 'execCommand'").tag(sync=True)
        attempts = traitlets.Int(0, help="Clicks reported by the front end").tag(sync=True)

else:  # pragma: no cover
    CopyButton = None


_PRE_STYLE = (
    "margin:0;padding:6px 8px;max-height:26em;overflow:auto;white-space:pre;"
    "font-family:var(--jp-code-font-family,monospace);font-size:var(--jp-code-font-size,12px);"
    "background:var(--jp-layout-color2);border:1px solid var(--jp-border-color2);"
    "user-select:text;-webkit-user-select:text;"
)


class FreezePanel(W.VBox):
    """Freeze the workbench's settings: code box, style toggle, copy and save.

    Parameters
    ----------
    get_state : callable
        Returns the current :class:`~specbench.freeze.FreezeState` (``bench.freeze_state``).
    path : str
        Initial file name of the settings file.

    Attributes
    ----------
    code : str
        The code in the box ("" before the first Freeze).
    state : FreezeState or None
        The state frozen by the last Freeze (or Save).
    frozen_at : datetime or None
        Time stamp written in the code's header.
    """

    def __init__(self, get_state: Callable[[], FreezeState], *, path: str = "specbench-settings.json") -> None:
        super().__init__()
        self._get_state = get_state
        self.state: FreezeState | None = None
        self.frozen_at: _dt.datetime | None = None
        self._settings_path: Path | None = None
        self.code = ""

        self.freeze_button = W.Button(description="Freeze", tooltip="Write the code for the settings on screen")
        self.freeze_button.add_class("sb-freeze-button")
        self.freeze_button.on_click(lambda _: self.refresh())
        self.style_toggle = W.ToggleButtons(
            options=[("specbench", "specbench"), ("plain scipy", "scipy")],
            value="specbench",
            tooltips=["Bit-for-bit reproduction with specbench", "numpy/scipy only, to floating-point precision"],
            style={"button_width": "92px"},
        )
        self.style_toggle.add_class("sb-freeze-style")
        self.style_toggle.observe(lambda ch: self._render(), names="value")

        self.code_box = W.HTML(self._pre(""))
        self.code_box.add_class("sb-freeze-code")
        self.code_box.layout = W.Layout(width="100%")
        self.message = W.HTML("")
        self.message.add_class("sb-freeze-message")

        self.copy_result = W.HTML("")
        self.copy_result.add_class("sb-copy-result")
        if CopyButton is not None:
            self.copy_button = CopyButton()
            self.copy_button.add_class("sb-copy")
            self.copy_button.observe(self._copied, names="attempts")
            copy_row = [self.copy_button, self.copy_result]
        else:  # pragma: no cover
            self.copy_button = None
            self.copy_result.value = "Select the text and press Ctrl+C to copy."
            copy_row = [self.copy_result]

        self.path_text = W.Text(value=path, placeholder="settings.json", layout=W.Layout(width="260px"))
        self.path_text.add_class("sb-settings-path")
        self.save_button = W.Button(description="Save settings", tooltip="Write the settings on screen as JSON")
        self.save_button.add_class("sb-save-button")
        self.save_button.on_click(lambda _: self.save())
        self.save_result = W.HTML("")
        self.save_result.add_class("sb-save-result")
        save_row = W.HBox([self.path_text, self.save_button, self.save_result],
                          layout=W.Layout(align_items="center", flex_flow="row wrap"))
        save_row.add_class("sb-save-settings")

        hint = W.HTML(
            "<span class='sb-muted'>To insert the code as a new cell below, run "
            "<code>bench.freeze()</code> in a cell.</span>"
        )
        top = W.HBox([self.freeze_button, self.style_toggle, *copy_row],
                     layout=W.Layout(align_items="center", flex_flow="row wrap"))
        for w in (self.freeze_button, self.style_toggle, self.path_text, self.save_button):
            w.layout.margin = "2px 8px 2px 0"
        self.children = [top, self.message, self.code_box, save_row, hint]
        self.add_class("sb-freeze-panel")

    # ------------------------------------------------------------------ actions
    def refresh(self) -> None:
        """Freeze the settings on screen now (what the Freeze button does)."""
        try:
            state = self._get_state()
        except Exception as e:  # the panel shows the problem, never a traceback
            self._fail("Could not read the settings on screen", e)
            return
        self.state, self._settings_path = state, None
        self.frozen_at = _dt.datetime.now(_dt.timezone.utc).astimezone()
        self._render()

    def save(self) -> None:
        """Write the settings on screen to the file named in the path box (the Save button)."""
        raw = self.path_text.value.strip()
        if not raw:
            self._say(self.save_result, "Give a file name first, for example settings.json.", error=True)
            return
        path = Path(raw).expanduser()
        try:
            state = self._get_state()
            existed = path.exists()
            written = save_state(state, path)
        except SpecbenchError as e:
            self._say(self.save_result, str(e), error=True)
            return
        except Exception as e:  # never a traceback in the panel
            _log.debug("saving settings failed", exc_info=True)
            self._say(self.save_result, f"Could not save the settings: {type(e).__name__}: {e}", error=True)
            return
        self.state, self.frozen_at = state, _dt.datetime.now(_dt.timezone.utc).astimezone()
        self._settings_path = written
        self._render()
        verb = "Replaced" if existed else "Saved"
        self._say(self.save_result, f"{verb} {written.resolve()} ({state.estimator!r}).")

    # ------------------------------------------------------------------ display
    def _render(self) -> None:
        if self.state is None:
            return
        try:
            code = code_cell(self.state, style=self.style_toggle.value, settings_path=self._settings_path,
                             now=self.frozen_at)
        except Exception as e:
            self._fail("Could not write the code", e)
            return
        self.code = code
        self.code_box.value = self._pre(code)
        if self.copy_button is not None:
            self.copy_button.text = code
        self.copy_result.value = ""
        self.mark_stale()

    @staticmethod
    def _settings_key(state: FreezeState) -> tuple:
        """What the code depends on, to tell when it is out of date."""
        return (state.channel, state.span, state.fs_override, state.estimator, state.correlation_estimator,
                tuple(getattr(state, "analyses", {}).items()))

    @property
    def stale(self) -> bool:
        """True when the code shown was written for other settings than those on screen."""
        if self.state is None:
            return False
        try:
            return self._settings_key(self._get_state()) != self._settings_key(self.state)
        except Exception:  # the panel never raises into the workbench
            return False

    def mark_stale(self) -> None:
        """Say in the panel when its code is out of date (the workbench calls this after each update)."""
        if self.state is None:
            return
        if self.stale:
            self._say(self.message, f"Out of date: this code is for the settings frozen {now_iso(self.frozen_at)} "
                      f"({self.state.estimator!r}); the settings on screen have changed since. Press Freeze "
                      "to write the code for them.", error=True)
            self.add_class("sb-freeze-stale")
        else:
            self._say(self.message, f"Frozen {now_iso(self.frozen_at)}: {self.state.estimator!r}.", muted=True)
            self.remove_class("sb-freeze-stale")

    def _copied(self, change: Any) -> None:
        ok = self.copy_button.result == "copied"
        self._say(self.copy_result, COPIED if ok else COPY_FAILED, error=not ok)

    def _fail(self, what: str, e: Exception) -> None:
        text = str(e) if isinstance(e, SpecbenchError) else f"{type(e).__name__}: {e}"
        _log.debug("%s", what, exc_info=True)
        self._say(self.message, f"{what}: {text}", error=True)

    @staticmethod
    def _say(target: W.HTML, text: str, *, error: bool = False, muted: bool = False) -> None:
        cls = "sb-err" if error else ("sb-muted" if muted else "sb-ok")
        colour = {"sb-err": "var(--jp-error-color1)", "sb-muted": "var(--jp-ui-font-color2)",
                  "sb-ok": "var(--jp-success-color1)"}[cls]
        target.value = f"<span class='{cls}' style='color:{colour}'>{html.escape(text)}</span>"

    @staticmethod
    def _pre(code: str) -> str:
        if not code:
            body = "Press Freeze to write the code for the settings on screen."
        else:
            body = html.escape(code)
        return f"<pre class='sb-freeze-code-text' style='{_PRE_STYLE}'>{body}</pre>"
