"""The status line: plain text (``bench.status``) and its escaped HTML, from the session state.

Pure Python.  Every user string (messages naming channels, units, files) is escaped with
:func:`html.escape` before it reaches the HTML widget.  :func:`guarded` wraps the handlers of
front-end events so that they never raise: an error becomes a problem of the session, shown
in the status line.
"""

from __future__ import annotations

import functools
import html
import logging
from collections.abc import Callable
from dataclasses import dataclass

from .._errors import SpecbenchError

__all__ = ["Status", "status_of", "busy_status", "guarded"]

_log = logging.getLogger("specbench.widgets")

#: order in which the problems are listed
_ORDER = ("code", "internal", "data", "pins", "nopin")


@dataclass(frozen=True)
class Status:
    text: str
    html: str
    kind: str  # "ok", "error", "note", "busy"


def _muted(text: str) -> str:
    return f"<span class='sb-muted'>{html.escape(text)}</span>"


def status_of(session, update_seconds: float) -> Status:
    """The status line for the session's problems, notes and the estimate on screen."""
    if session.errors:
        keys = sorted(session.errors, key=lambda k: (_ORDER.index(k) if k in _ORDER else len(_ORDER), k))
        msgs = list(dict.fromkeys(session.errors[k].message for k in keys))
        on_screen = [s for s in session.slots.values() if s.result is not None]
        if not on_screen:
            kept = " Nothing is on screen yet: no setting has given an estimate."
        elif len(on_screen) == len(session.slots):
            kept = " The last good estimate stays on screen."
        else:
            kept = (" On screen: " + ", ".join(s.analysis.title or s.name for s in on_screen)
                    + " (last good estimate).")
        text = "Not applied: " + " | ".join(msgs) + kept
        body = ("<span class='sb-err'>Not applied:</span> " + " <br>".join(html.escape(m) for m in msgs)
                + " " + _muted(kept.strip()))
        return Status(text, body, "error")
    from ._merit import duration

    main = session.main
    if main.result is None:
        return Status("", "", "ok")
    used = getattr(main.result, "samples_used", None)
    on = f" on {used:,} samples" if isinstance(used, int) else ""
    text = f"{main.est!r}{on} · update {duration(update_seconds)}"
    if session.notes:
        note = " | ".join(session.notes)
        return Status(f"Note: {note} — {text}",
                      f"<span class='sb-note'>Note:</span> {html.escape(note)} {_muted(text)}", "note")
    return Status(text, _muted(text), "ok")


def busy_status(what: str, expected: float | None) -> Status:
    from ._merit import duration

    text = f"computing {what}…"
    if expected is not None and expected > 0:
        text += f" (expected about {duration(expected)})"
    return Status(text, _muted(text), "busy")


def guarded(session, report: Callable[[], None]) -> Callable[[Callable], Callable]:
    """A decorator for front-end handlers: errors go to the status line (``report()``) and the log."""
    from ._session import Problem, internal_message

    def decorate(fn: Callable) -> Callable:
        @functools.wraps(fn)
        def wrapper(*args, **kwargs):
            try:
                return fn(*args, **kwargs)
            except SpecbenchError as e:
                session.errors["internal"] = Problem(str(e))
                report()
            except Exception as e:
                _log.exception("Workbench: unexpected error")
                session.errors["internal"] = Problem(internal_message(e))
                report()

        return wrapper

    return decorate
