"""The status line's widgets: the line under the views, and the progress bar with its Cancel button.

The text comes from :mod:`._status` (pure Python); this module only puts it on screen.
While a background computation runs (see :mod:`._scheduler`), the line says what is being
computed and the progress row shows the fraction done, the time left and a Cancel button;
a problem of the session still takes the line over.

CSS classes: ``sb-status`` (with ``sb-status-error`` / ``sb-status-note`` / ``sb-status-busy``),
``sb-progress``, ``sb-progress-bar``, ``sb-progress-text``, ``sb-cancel``.
"""

from __future__ import annotations

import html
from collections.abc import Callable

import ipywidgets as W

from ._merit import duration
from ._status import Status, busy_status
from ._style import gapped

__all__ = ["StatusLine"]


class StatusLine:
    """The status line and the progress row; ``on_cancel()`` is the Cancel button's action."""

    def __init__(self, on_cancel: Callable[[], None]) -> None:
        self.line = W.HTML()
        self.line.add_class("sb-status")
        self.bar = W.FloatProgress(value=0.0, min=0.0, max=1.0, layout=W.Layout(width="240px"))
        self.bar.add_class("sb-progress-bar")
        self.text = W.HTML()
        self.text.add_class("sb-progress-text")
        self.cancel_button = W.Button(description="Cancel", icon="stop", tooltip="Stop this computation; the "
                                      "last good estimate stays on screen.", layout=W.Layout(width="100px"))
        self.cancel_button.add_class("sb-cancel")
        self.cancel_button.on_click(lambda _: on_cancel())
        self.progress = gapped(W.HBox([self.bar, self.text, self.cancel_button],
                                      layout=W.Layout(align_items="center", display="none")), "small")
        self.progress.add_class("sb-progress")
        #: what the line says while a background computation runs (None: none runs)
        self.busy: Status | None = None

    def current(self, status: Status, problems: bool) -> Status:
        """What the line shows: the busy text while computing, unless there are problems."""
        return self.busy if self.busy is not None and not problems else status

    def show(self, status: Status, problems: bool) -> None:
        self._put(self.current(status, problems))

    def _put(self, status: Status) -> None:
        self.line.value = status.html
        self._set_class(status.kind)

    def _set_class(self, kind: str) -> None:
        for k in ("error", "note", "busy"):
            self.line.remove_class(f"sb-status-{k}")
        if kind != "ok":
            self.line.add_class(f"sb-status-{kind}")

    def computing(self) -> None:
        """A deferred update is pending after a slow one: say so at once."""
        self.line.value = "<span class='sb-muted'>computing…</span>"
        self._set_class("busy")

    def show_busy(self, names: str, fraction: float, expected: float, left: float | None) -> None:
        """A background computation of ``names`` is ``fraction`` done; ``left`` seconds to go (or None)."""
        text = f"Computing {names}: {100 * fraction:.0f} %"
        if left is not None:
            text += f", about {duration(left)} left"
        if fraction == 0.0:
            text += f" (expected {duration(expected)})"
        self.bar.value = min(max(fraction, 0.0), 1.0)
        self.text.value = f"<span class='sb-muted'>{html.escape(text)}</span>"
        self.progress.layout.display = None
        self.busy = busy_status(names, expected)
        self._put(self.busy)

    def hide_busy(self) -> None:
        self.busy = None
        self.progress.layout.display = "none"
