"""The Workbench's event loop: control events and code requests in, one synchronised draw out.

Pure Python (no ipywidgets at import time).  The :class:`Controller` holds no widget of its
own: it reads and writes the panels it is given through the few methods it calls on them
(``binding.build/show/mark/...``, ``host.show``, ``strip.show``, ``merit.show``,
``statusline.show/...``, ``hold_sync``), so a test can drive it with plain stand-ins.

The flow, one job per step:

1. an event (a control, the data strip, a view proposing an estimator, a cell setting an
   estimator) proposes candidates to the :class:`~._session.Session` and remembers which
   control changed;
2. :meth:`Controller.request` asks the :class:`~._scheduler.Scheduler` for a run (now when
   driven from code, coalesced from the front end);
3. :meth:`Controller.run` plans a job, computes it here or in a worker thread (long jobs, with
   progress and Cancel), commits it to the session all or nothing, and
4. :meth:`Controller.draw` puts every analysis on screen in one ``hold_sync`` block, then
   :meth:`Controller.show_status` marks failing controls and writes the status line.

Nothing here raises into the front end: an unexpected error becomes the status line's message
and the last good estimate stays on screen.
"""

from __future__ import annotations

import contextlib
import logging
import math
import time
from collections.abc import Callable
from typing import Any

from .._errors import InputError, SettingsError, SpecbenchError
from ._scheduler import BACKGROUND_SECONDS, running_loop
from ._session import Context, DataSelection, Problem, Session, check_selection, describe, internal_message
from ._status import guarded, status_of

_log = logging.getLogger("specbench.widgets")

#: an update from the front end expected longer than this draws the main view first (the
#: others follow at once): the view a control belongs to answers without waiting for the rest
FIRST_VIEW_SECONDS = 0.1


def set_stale(host: Any, what: str | None) -> None:
    """Mark ``host``'s view as showing an earlier data selection (``what`` describes it), or not."""
    if hasattr(host, "set_stale"):
        host.set_stale(what)
        return
    widget = getattr(host, "widget", None)
    if widget is not None and hasattr(widget, "add_class"):
        (widget.add_class if what else widget.remove_class)("sb-stale")


def _guarded(fn):
    """Observers never raise: errors go to the status line and the log."""

    def wrapper(self, *args, **kwargs):
        return guarded(self.session, self.show_status)(fn)(self, *args, **kwargs)

    wrapper.__name__ = fn.__name__
    wrapper.__doc__ = fn.__doc__
    return wrapper


class Controller:
    """Turns events into session updates and draws; see the module docstring.

    Parameters
    ----------
    session : Session
        The analysis state.
    signal : Signal
        The whole record (the data strip shows the selected part of it).
    binding, strip, hosts, merit, statusline
        The control binding, the data strip, the view host of each analysis (by name), the
        figures-of-merit panel and the status line.
    pins : callable
        Returns the pins on screen (each with ``shown``, ``color``, ``line_style``).
    panel : callable
        Returns the freeze panel (or None); told when the estimate on screen changes.
    gap_note : str or None
        A note shown with the first estimate (how gaps in the record are handled).
    """

    def __init__(self, session: Session, signal: Any, *, binding: Any, strip: Any, hosts: dict[str, Any],
                 merit: Any, statusline: Any, pins: Callable[[], list], panel: Callable[[], Any],
                 gap_note: str | None = None) -> None:
        self.session = session
        self.signal = signal
        self.binding = binding
        self.strip = strip
        self.hosts = hosts
        self.merit = merit
        self.statusline = statusline
        self._pins = pins
        self._panel = panel
        self.gap_note = gap_note
        self.scheduler: Any = None  # set by the owner: a Scheduler calling self.run
        self.changed: set[str] = set()  # the controls changed since the last run
        self.last_update = math.nan  # seconds the last committed update took
        self.slow = False  # the last update was long enough to say "computing…" while waiting
        self._expected = 0.0
        self._started = 0.0
        #: per view, what it last drew: its result, its pins and the results overlaid on it
        #: (a view whose inputs are the same objects is not redrawn)
        self._drawn: dict[str, tuple] = {}

    # ------------------------------------------------------------------ what it marks
    def data_controls(self) -> dict[str, Any]:
        """The controls outside the binding (data strip, view options), for marking."""
        out = {"channel": self.strip.channel, "fs": self.strip.rate, "span": self.strip.span}
        for host in self.hosts.values():
            out.update(host.controls())
        return out

    def all_controls(self) -> dict[str, Any]:
        out: dict[str, Any] = dict(self.data_controls())
        out.update(self.binding.controls())
        return out

    def view_problem(self, key: str, message: str | None) -> None:
        """A view option refused a value (``message``) or accepted one again (None)."""
        if message is None:
            self.session.errors.pop(f"view:{key}", None)
        else:
            self.session.errors[f"view:{key}"] = Problem(message, [key])
        self.show_status()

    # ------------------------------------------------------------------ control events
    def _propose(self, name: str, key: str) -> None:
        try:
            est = self.binding.build(name)
        except SettingsError as e:
            self.session.refuse(name, e, [key])
            return
        self.session.propose(name, est)
        self.binding.relevance(name, est)

    @_guarded
    def on_field(self, key: str) -> None:
        """The control ``key`` of one or more analyses changed."""
        self.changed.add(key)
        for name in self.binding.owners(key):
            self._propose(name, key)
        self.request()

    @_guarded
    def on_method(self, name: str) -> None:
        """The method menu of analysis ``name`` changed: its controls follow the new method's table."""
        if self.binding.applying:
            return
        slot = self.session.slots[name]
        menu = self.binding.methods[name]
        cls = next((c for c in slot.analysis.classes() if c.kind == menu.value), None)
        self.changed.add(menu.key)
        if cls is None:
            kinds = [c.kind for c in slot.analysis.classes()]
            self.session.errors[f"build:{name}"] = Problem(
                f"Unknown method {menu.value!r} for the {slot.analysis.title or name} analysis; "
                f"choose one of {kinds}.", [menu.key])
            self.show_status()
            return
        est = self.session.switch_method(name, cls)
        self.binding.show(name, est)
        # the shared fields now follow the new method's table: the others rebuild from the strip
        for other in self.session.slots:
            if other != name:
                self._propose(other, menu.key)
        self.request()

    @_guarded
    def on_selection(self, key: str) -> None:
        """The channel, rate or span of the data strip changed."""
        if self.binding.applying:
            return
        self.changed.add(key)
        s = self.session
        base = s.next_sel or s.sel
        span = self.strip.span.value
        fs = self.strip.rate.value
        channel = self.strip.channel.value
        problem = check_selection(self.signal, channel, fs, span)
        if problem is not None:
            s.errors["data"] = Problem(problem[1], [problem[0]])
            self.show_status()
            return
        if key == "fs" and span is not None and base is not None:
            # the span follows the samples: rescale it to the new rate
            old = base.fs or self.signal.fs
            new = fs or self.signal.fs
            if new != old:
                span = (span[0] * old / new, span[1] * old / new)
                self.binding.applying += 1
                try:
                    self.strip.span.set_value_quietly(span)
                finally:
                    self.binding.applying -= 1
        s.errors.pop("data", None)
        s.propose_selection(DataSelection(channel, None if fs is None else float(fs),
                                          None if span is None else (float(span[0]), float(span[1]))))
        self.request()

    @_guarded
    def apply_from_ui(self, name: str, est: Any) -> None:
        """A view proposes an estimator (e.g. an advised setting): shown in the controls and computed
        like a control change (coalesced, in the background when long); a refusal goes to the status."""
        s = self.session
        try:
            wanted = self.wanted_with(name, est)
        except SpecbenchError as e:
            s.errors[f"build:{name}"] = Problem(str(e))
            self.show_status()
            return
        for n in s.slots:
            s.errors.pop(f"build:{n}", None)
        for n, e in wanted.items():
            self.binding.show(n, e)
            s.propose(n, e)
        self.changed.add(self.binding.methods[name].key if name in self.binding.methods else "method")
        self.request()

    def wanted_with(self, name: str, est: Any) -> dict[str, Any]:
        """Every analysis's estimator once ``name`` takes ``est`` (the shared data fields follow)."""
        s = self.session
        slot = s.slots.get(name)
        if slot is None:
            raise SpecbenchError(f"No analysis named {name!r}; the analyses are {list(s.slots)}.")
        est = slot.analysis.check(est)
        wanted = {n: x.est for n, x in s.slots.items()}  # the others as on screen, with the shared fields
        wanted[name] = est
        shared = s.shared_fields({name: type(est)} if slot is s.main else None)
        values = {k: getattr(est, k) for k in shared if k in type(est).params() and s.shares(slot, k, type(est))}
        for n, x in s.slots.items():
            if n != name:
                own = {k: v for k, v in values.items() if s.shares(x, k)}
                if own:
                    wanted[n] = wanted[n].replace(**own)
        return wanted

    def set_from_code(self, wanted: dict[str, Any]) -> None:
        """Apply estimators given in code, all or nothing, before returning.

        A failing estimate leaves everything as it was (the controls included), says why
        in the status line and raises the error to the caller.
        """
        s = self.session
        self.scheduler.settle()
        before = {n: x.est for n, x in s.slots.items()}
        for n in s.slots:
            s.errors.pop(f"build:{n}", None)
        for n, est in wanted.items():
            self.binding.show(n, est)
            s.propose(n, est)
        self.run(True)
        if any(s.slots[n].est != est for n, est in wanted.items()):
            msg = next((p.message for k, p in s.errors.items() if k in (*wanted, "data", "internal")),
                       "The estimator could not be applied.")
            for n in wanted:
                s.errors.pop(n, None)
            s.errors["code"] = Problem(msg)
            for n, est in before.items():
                self.binding.show(n, est)
                s.slots[n].next = None
            self.binding.mark(self.data_controls())
            self.show_status()
            raise InputError(msg)

    # ------------------------------------------------------------------ compute
    def request(self) -> None:
        """Ask for a run (the scheduler decides when); say "computing…" if the last one was slow."""
        self.scheduler.request()
        if self.scheduler.pending() and self.slow:
            self.statusline.computing()

    def run(self, sync: bool = False, stage: bool = False) -> None:
        """Compute what the pending settings need and put it on screen; never raises.

        ``stage``: with ``sync``, still leave slow analyses to the background when an event
        loop runs (the workbench's first estimate in a kernel: the quick views are on screen
        when the cell returns, the slow ones follow with a progress bar).
        """
        try:
            self._update(sync, stage)
        except Exception as e:  # never let an error escape into the event loop
            _log.exception("Workbench: unexpected error")
            self.session.errors["internal"] = Problem(internal_message(e))
            self.show_status()

    def _update(self, sync: bool, stage: bool = False) -> None:
        t0 = time.perf_counter()
        changed, self.changed = self.changed, set()
        job = self.session.plan(changed)
        if job is None:
            self.show_status()
            return
        background = self.scheduler.background_allowed() if not sync else stage and running_loop() is not None
        if background:
            costs = job.costs()  # the cost model once per stage: it prices every analysis
            expected = sum(costs.values())
            staged = False
            for _ in range(3):  # at most: the main view, the other quick ones, the slow rest
                quick = job.split(BACKGROUND_SECONDS, costs) if expected > BACKGROUND_SECONDS else None
                if expected > FIRST_VIEW_SECONDS:
                    quick = (quick or job).first(FIRST_VIEW_SECONDS, BACKGROUND_SECONDS, costs) or quick
                if quick is None:
                    break
                # the quick analyses (the main one first) take the change at once, a new data
                # selection included; the others follow (in the background when slow, their
                # views marked as showing the previous selection until then)
                quick.execute()
                self._finish(quick, t0)
                staged = True
                if quick.sel != self.session.sel:  # the new selection was refused: nothing follows
                    return
                job = self.session.plan(changed)
                if job is None:
                    return
                t0 = time.perf_counter()
                costs = job.costs()
                expected = sum(costs.values())
            # with ``sync`` (the first estimate) only the slow part of a split goes to the
            # worker: the main analysis is on screen when the constructor returns
            if expected > BACKGROUND_SECONDS and (staged or not sync):
                self._expected = expected
                self._started = t0
                self._show_busy(job, 0.0)
                self.scheduler.start(job, lambda f, job=job: self._show_busy(job, f),
                                     lambda job, rerun: self._finished(job, rerun, changed))
                return
        job.execute()
        self._finish(job, t0)

    def _finished(self, job, rerun: bool, changed: set[str]) -> None:
        """A background job ended (on the event-loop thread)."""
        try:
            self.statusline.hide_busy()
            if job.cancelled:
                self.changed |= changed
                if rerun:
                    self.run()
                    return
                self.session.notes = ["The computation was cancelled; "
                                      + ("the last good estimate stays on screen."
                                         if self.session.any_result else "nothing is on screen yet.")]
                self.session.notes += self.stale_notes(again=True)
                self.show_status()
                return
            self._finish(job, self._started)
            if rerun:
                self.run()
        except Exception as e:
            _log.exception("Workbench: unexpected error")
            self.session.errors["internal"] = Problem(internal_message(e))
            self.show_status()

    def _finish(self, job, t0: float) -> None:
        s = self.session
        sel_before = s.sel
        updated = s.commit(job)
        for a in job.attempts.values():
            for key, value in a.reverted:
                self.binding.set_quietly(key, value)
        if s.sel != sel_before:
            self.binding.set_context(Context(job.signal.n_samples, job.signal.fs))
        if self.gap_note:
            s.notes.insert(0, self.gap_note)
            if s.main.result is not None:
                self.gap_note = None
        if s.main.result is not None:
            s.errors.pop("nopin", None)
        s.notes += self.stale_notes()
        if updated:
            self.binding.suggest()
            self.draw(data=s.sel != sel_before or sel_before is None)
            self.last_update = time.perf_counter() - t0
            self.slow = self.last_update > 0.25
        self.show_status()

    def stale_notes(self, again: bool = False) -> list[str]:
        """A note for each view that shows a result of an earlier data selection."""
        s = self.session
        out = []
        for slot in s.slots.values():
            if s.stale(slot):
                out.append(f"{slot.analysis.title or slot.name} on screen is of {describe(slot.sel)}, "
                           "not of the selection above" + ("; it is recomputed with the next change."
                                                           if again else "."))
        return out

    def _show_busy(self, job, fraction: float) -> None:
        names = ", ".join(slot.analysis.title or slot.name for slot, _ in job.todo)
        self.statusline.show_busy(names, fraction, self._expected, self.scheduler.remaining(self._expected))

    # ------------------------------------------------------------------ draw
    def draw(self, data: bool) -> None:
        """Update every mark, the readouts and the figures of merit in one synchronised step;
        ``data``: the selection changed, so the data strip redraws too."""
        s = self.session
        holds = []
        for host in self.hosts.values():
            holds += host.holds()
        holds += [self.merit.widget, self.strip.trace, self.strip.figure]
        shown = {name: slot.shown for name, slot in s.slots.items() if slot.shown is not None}
        # what other analyses may combine with (overlays, figures of merit): the views of the
        # selection on screen only, not a stale one still showing an earlier selection
        current = {name: v for name, v in shown.items() if not s.stale(s.slots[name])}
        with contextlib.ExitStack() as stack:
            for w in holds:
                stack.enter_context(w.hold_sync())
            overlays: dict[str, list] = {}
            sources: dict[str, list] = {}  # the results each view's overlays come from
            for slot in s.slots.values():
                if slot.name in current:
                    for target, items in slot.analysis.overlays(slot.shown).items():
                        overlays.setdefault(target, []).extend(items)
                        sources.setdefault(target, []).append(slot.shown)
            pins = list(self._pins())
            for name, host in self.hosts.items():
                pinned = [(p.shown.get(name), p.color, p.line_style) for p in pins]
                drawn = (shown.get(name), tuple(pinned), tuple(sources.get(name, ())))
                if not _same(drawn, self._drawn.get(name)):
                    self._drawn.pop(name, None)
                    if hasattr(host, "set_overlays"):
                        host.set_overlays(overlays.get(name, []))
                    host.show(shown.get(name), pinned)
                    self._drawn[name] = drawn
                slot = s.slots[name]
                set_stale(host, describe(slot.sel) if s.stale(slot) else None)
            merits = []
            for slot in s.slots.values():
                if slot.name in current:
                    merits += slot.analysis.merits(slot.shown, current)
            if merits:
                self.merit.show(merits)
            if data and s.sel is not None:
                sel = s.sel
                sig = s.select(sel)
                index = self.signal.channels.index(sel.channel)
                unit = self.signal.units()[index]
                self.strip.show(index, sig.fs, unit, sel.span, sig.n_samples)
        panel = self._panel()
        if panel is not None and hasattr(panel, "mark_stale"):
            with contextlib.suppress(Exception):
                panel.mark_stale()

    # ------------------------------------------------------------------ status
    def status(self):
        """What the status line says now (:class:`._status.Status`)."""
        return status_of(self.session, self.last_update)

    def show_status(self) -> None:
        self.binding.mark(self.data_controls())
        self.statusline.show(self.status(), bool(self.session.errors))


def _same(a: Any, b: Any) -> bool:
    """The same inputs of a view: results compared by identity (a new estimate is a new
    object), colours and line styles by value."""
    if isinstance(a, tuple) and isinstance(b, tuple):
        return len(a) == len(b) and all(_same(x, y) for x, y in zip(a, b))
    if isinstance(a, (str, int, float)) or a is None:
        return type(a) is type(b) and a == b
    return a is b
