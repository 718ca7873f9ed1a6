"""The analysis state of the Workbench: one data selection, named analyses, a transactional update.

Pure Python (no ipywidgets): the Workbench's controls propose candidates here, and
:meth:`Session.plan` / :meth:`Job.execute` / :meth:`Session.commit` compute and commit them.

State
-----
- ``sel``: the committed :class:`DataSelection` (what the results on screen were made on);
  ``next_sel`` the one the controls ask for (None: same).
- one :class:`Slot` per analysis: ``est`` (the estimator of the result on screen; until a
  first estimate succeeds, the one asked for), ``result`` / ``shown`` (full result and the part
  drawn), ``next`` (the candidate the controls ask for; None: same).
- ``errors``: why something was not applied, by group (``"data"``, an analysis name,
  ``"build:<name>"`` for a control value no estimator accepts, ``"internal"``, ``"code"``,
  ``"pins"``), each an :class:`Problem` with the control keys it marks.

The update
----------
build (the controls' values make candidates; a SettingsError becomes ``build:<name>``) →
:meth:`Session.plan` (which analyses need computing) → :meth:`Job.execute` (compute; may run
in a worker thread: it only reads the state) → :meth:`Session.commit` (on the owning thread:
each analysis takes its new result or keeps its last good one; a new data selection is taken
whole or not at all, so every view shows the same samples).
"""

from __future__ import annotations

import logging
import math
import time
import warnings
from collections import OrderedDict
from dataclasses import dataclass, field
from typing import Any

from .. import _errors
from .._errors import SpecbenchError, SpecbenchWarning
from ..freeze._state import Selection
from ._analysis import Analysis, carry_over


class _Cancelled(SpecbenchError):
    """A computation stopped on request (the engine's ``specbench.Cancelled`` when it has one)."""


#: what a cancelled computation raises
CANCELLED = getattr(_errors, "Cancelled", _Cancelled)

__all__ = ["check_selection", "describe", "gap_defaults", "DataSelection", "Problem", "Slot", "Session", "Job",
           "Attempt", "DATA_KEYS"]

_log = logging.getLogger("specbench.widgets")
_log.addHandler(logging.NullHandler())

DATA_KEYS = ("channel", "fs", "span")
#: results kept for instant return to recent settings (small results only)
RESULT_CACHE = 24
RESULT_CACHE_MAX_BINS = 1 << 17


@dataclass(frozen=True)
class Context:
    """What the controls' ranges depend on: the samples in the analysed span and the rate."""

    n: int
    fs: float


@dataclass(frozen=True)
class DataSelection:
    """Channel name, sample-rate override (None: the signal's) and span in seconds (None: whole)."""

    channel: str
    fs: float | None
    span: tuple[float, float] | None


@dataclass
class Problem:
    """Why something was not applied: the message and the control keys it marks."""

    message: str
    keys: list[str] = field(default_factory=list)


def describe(sel: DataSelection | None) -> str:
    """A data selection in words: ``channel 'x', 2 to 30 s at 20000 Hz``."""
    if sel is None:
        return "no data selection"
    span = "the whole record" if sel.span is None else f"{sel.span[0]:g} to {sel.span[1]:g} s"
    rate = "" if sel.fs is None else f" at {sel.fs:g} Hz"
    channel = "every channel" if sel.channel == "*" else f"channel {sel.channel!r}"
    return f"{channel}, {span}{rate}"


def _number(v: Any) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool)


def gap_defaults(signal: Any, wanted: dict[str, Any], analyses: list[Analysis]) -> str | None:
    """Analyses not given an estimator in code take the gap policy the data need (NaN-filled gaps).

    Fills ``wanted`` (analysis name -> estimator) in place; returns the note that says so, or None.
    """
    import numpy as np

    try:
        data = signal.data
        has_gaps = bool(np.issubdtype(data.dtype, np.floating) and np.isnan(data).any())
    except Exception:  # an unusual container: keep the defaults
        return None
    if not has_gaps:
        return None
    changed = []
    for a in analyses:
        if a.name in wanted:
            continue
        est = a.default_estimator()
        spec = type(est).params().get("gaps")
        if spec is None:
            continue
        for policy in ("skip", "pairs", "present"):
            try:
                wanted[a.name] = est.replace(gaps=policy)
                changed.append(f"{type(est).__name__}(gaps={policy!r})")
                break
            except SpecbenchError:
                continue
    if not changed:
        return None
    return ("The data has gaps (NaN samples, e.g. from sb.load(..., on_gap='fill')); the workbench "
            "opened with " + ", ".join(changed) + ", which leave them out.")


def check_selection(signal: Any, channel: Any, fs: Any, span: Any) -> tuple[str, str] | None:
    """(control key, message) for a data-strip value that cannot be used, else None."""
    names = list(signal.channels)
    if channel not in names:
        return "channel", f"The channel {channel!r} is not in the record; choose one of {names}."
    if fs is not None and not (_number(fs) and math.isfinite(fs) and fs > 0):
        return "fs", (f"The sample rate must be a positive number of samples per second (Hz), or empty "
                      f"for the record's own {signal.fs:g} Hz; got {fs!r}.")
    if span is not None:
        ok = (isinstance(span, (tuple, list)) and len(span) == 2 and all(_number(v) and math.isfinite(v)
                                                                        for v in span))
        if not ok:
            return "span", (f"The span must be (start, stop) in seconds from the record start, or empty "
                            f"for the whole record; got {span!r}.")
        if span[0] >= span[1]:
            return "span", f"The span must start before it stops; got {tuple(span)!r}."
    return None



def internal_message(e: BaseException) -> str:
    return f"Internal error: {type(e).__name__}: {e}; please report."


class Slot:
    """The runtime state of one analysis."""

    def __init__(self, analysis: Analysis, est: Any) -> None:
        self.analysis = analysis
        self.name = analysis.name
        self.est = est
        self.next: Any = None
        self.result: Any = None
        self.shown: Any = None
        self.last_of: dict[type, Any] = {}
        #: fields carried over by a method switch -> the new method's own value
        self.carried: dict[str, Any] = {}
        #: (estimator, selection) of the last failed attempt: not retried until one changes
        self.failed: tuple | None = None
        #: the data selection ``result`` was made on (the session's, unless the analysis was
        #: deferred and still shows the previous selection: see :meth:`Session.stale`)
        self.sel: DataSelection | None = None

    @property
    def wanted(self) -> Any:
        return self.next if self.next is not None else self.est

    def __repr__(self) -> str:
        return f"<Slot {self.name}: {self.est!r}{'' if self.result is not None else ' (no result)'}>"


@dataclass
class Attempt:
    """The outcome of computing one analysis: (estimator, result) or an error."""

    est: Any
    result: Any = None
    error: BaseException | None = None
    message: str = ""
    cached: bool = False
    #: (control key, value) put back when a carried-over field was refused
    reverted: list[tuple[str, Any]] = field(default_factory=list)


class Job:
    """One planned update: what to compute, on which selected signal."""

    def __init__(self, session: Session, sel: DataSelection, signal: Any, todo: list[tuple[Slot, Any]],
                 changed: set[str]) -> None:
        self.session = session
        self.sel = sel
        self.signal = signal
        self.todo = todo
        self.changed = changed
        self.attempts: dict[str, Attempt] = {}
        self.notes: list[str] = []
        self.seconds = 0.0
        self.cancelled = False
        #: the record at the selection's rate and span for analyses of every channel (made here,
        #: on the owning thread, so that ``execute`` only reads)
        self.signals = {slot.name: session.select(sel, slot.analysis.channels)
                        for slot, _ in todo if slot.analysis.channels != "one"}

    def signal_for(self, slot: Slot) -> Any:
        """The selected signal ``slot``'s analysis computes on (one channel, or all)."""
        return self.signals.get(slot.name, self.signal)

    def costs(self) -> dict[str, float]:
        """The cost model's expected seconds of each analysis (0 when its result is cached)."""
        out = {}
        for slot, est in self.todo:
            cached = self.session.cached(slot, est, self.sel) is not None
            out[slot.name] = 0.0 if cached else slot.analysis.expected_seconds(est, self.signal_for(slot))
        return out

    def expected_seconds(self) -> float:
        """The cost model's expected time of the analyses that are not cached."""
        return sum(self.costs().values())

    def split(self, limit: float, costs: dict[str, float] | None = None) -> Job | None:
        """The quick part of this job, to compute and commit first, or None.

        The quick part holds the main analysis and every analysis expected to take no longer
        than ``limit`` seconds, when together they are expected within ``limit`` and at least
        one slower analysis is left over.  Committed alone it takes the new data selection; the
        slower analyses left out keep their last result, marked stale (:meth:`Session.stale`),
        until a job of their own replaces it.  ``costs``: :meth:`costs`, when already known.
        """
        costs = self.costs() if costs is None else costs
        main = self.session.main.name
        quick = [(slot, est) for slot, est in self.todo if slot.name == main or costs[slot.name] <= limit]
        if not quick or len(quick) == len(self.todo) or sum(costs[s.name] for s, _ in quick) > limit:
            return None
        return Job(self.session, self.sel, self.signal, quick, self.changed)

    def first(self, limit: float, cap: float, costs: dict[str, float] | None = None) -> Job | None:
        """The main analysis with the others that fit beside it in ``limit`` seconds, to draw
        first, or None.

        For an update too long to feel immediate (a long record: every view recomputing after
        a change of the data selection or of a shared field such as the detrend): the view
        of the main analysis draws as soon as it is computed and the others follow.  None
        when the main analysis is not in this job, is expected above ``cap`` (it would block
        the event loop: the job goes to the worker whole), or nothing would be left over.
        Committed, it takes the new data selection as :meth:`split` does.
        """
        costs = self.costs() if costs is None else costs
        main = self.session.main.name
        if main not in costs or costs[main] > cap:
            return None
        budget = limit - costs[main]
        quick = []
        for slot, est in self.todo:
            if slot.name == main:
                quick.append((slot, est))
            elif costs[slot.name] <= budget:
                quick.append((slot, est))
                budget -= costs[slot.name]
        if len(quick) == len(self.todo):
            return None
        return Job(self.session, self.sel, self.signal, quick, self.changed)

    def execute(self, progress: Any = None, cancel: Any = None) -> None:
        """Compute every analysis of the job (safe in a worker thread: reads the session only).

        ``progress(fraction)`` gets the overall fraction over the analyses; a
        :class:`specbench.Cancelled` raised by the engine stops the job (``cancelled``).
        """
        t0 = time.perf_counter()
        n = len(self.todo)
        for i, (slot, est) in enumerate(self.todo):
            part = None
            if progress is not None:
                def part(f, i=i):
                    progress((i + min(max(float(f), 0.0), 1.0)) / n)
            a = self._attempt(slot, est, part, cancel)
            if self.cancelled:
                break
            # a field carried over by a method switch that this data refuses goes back
            while a.error is not None and getattr(a.error, "field", None) in slot.carried:
                name = a.error.field
                own = slot.carried.pop(name)
                self.notes.append(f"{name}={getattr(a.est, name)!r} was not carried over to "
                                  f"{type(a.est).__name__}: {a.message}")
                reverted = a.reverted + [(self.session.key_of(slot, name), own)]
                a = self._attempt(slot, a.est.replace(**{name: own}), part, cancel)
                a.reverted = reverted
                if self.cancelled:
                    break
            self.attempts[slot.name] = a
            if self.cancelled:
                break
        self.seconds = time.perf_counter() - t0

    def _attempt(self, slot: Slot, est: Any, progress: Any, cancel: Any) -> Attempt:
        s = self.session
        hit = s.cached(slot, est, self.sel)
        if hit is not None:
            return Attempt(est, hit, cached=True)
        if self.sel == s.sel:
            fast = slot.analysis.rebanded(est, slot.est, slot.result)
            if fast is not None:
                return Attempt(est, fast)
        try:
            with warnings.catch_warnings(record=True) as caught:
                warnings.simplefilter("always")
                result = slot.analysis.compute(est, self.signal_for(slot), progress=progress, cancel=cancel)
        except CANCELLED as e:
            self.cancelled = True
            return Attempt(est, error=e, message=str(e))
        except SpecbenchError as e:
            return Attempt(est, error=e, message=str(e))
        except Exception as e:
            _log.exception("Workbench: unexpected error computing %r", est)
            return Attempt(est, error=e, message=internal_message(e))
        for w in caught:
            if issubclass(w.category, SpecbenchWarning):
                self.notes.append(str(w.message))
            else:
                _log.warning("%s: %s", w.category.__name__, w.message)
        return Attempt(est, result)


class Session:
    """Signal, data selection and named analyses, with the transactional update."""

    def __init__(self, signal: Any, analyses: list[Analysis], estimators: dict[str, Any],
                 selection: DataSelection) -> None:
        self.signal = signal
        self.slots: OrderedDict[str, Slot] = OrderedDict()
        for a in analyses:
            if a.name in self.slots:
                raise SpecbenchError(f"Two analyses are named {a.name!r}; give each its own name.")
            est = estimators.get(a.name)
            est = a.default_estimator() if est is None else a.check(est)
            self.slots[a.name] = Slot(a, est)
        self.main = next((s for s in self.slots.values() if s.analysis.main), next(iter(self.slots.values())))
        self.sel: DataSelection | None = None
        self.next_sel: DataSelection | None = selection
        self.errors: dict[str, Problem] = {}
        self.notes: list[str] = []
        self.last_seconds = float("nan")
        self._selected: OrderedDict = OrderedDict()
        self._results: OrderedDict = OrderedDict()
        # shared data-preparation fields start from the main analysis's values
        shared = self.shared_fields()
        for slot in self.slots.values():
            if slot is not self.main:
                params = type(slot.est).params()
                own = {k: getattr(self.main.est, k) for k, p in shared.items()
                       if k in params and params[k].constraint.describe() == p.constraint.describe()}
                if own:
                    slot.est = slot.est.replace(**own)
        self.select(selection)  # a span or rate given in code that cannot apply raises here

    # ------------------------------------------------------------------ fields and keys
    def shared_fields(self, classes: dict[str, type] | None = None) -> dict[str, Any]:
        """Data-preparation fields of the main analysis (``group="data"``): field -> ParamSpec.

        They have one control (keyed by the field name) and one value, given to every
        analysis whose estimator has the same field with the same constraint.
        """
        main_cls = (classes or {}).get(self.main.name) or type(self.main.wanted)
        return {k: p for k, p in main_cls.params().items() if p.group == "data"}

    def shares(self, slot: Slot, name: str, cls: type | None = None) -> bool:
        """True when ``slot``'s field ``name`` takes the shared data-strip value."""
        shared = self.shared_fields()
        if name not in shared:
            return False
        if slot is self.main:
            return True
        p = (cls or type(slot.wanted)).params().get(name)
        return p is not None and p.constraint.describe() == shared[name].constraint.describe()

    def key_of(self, slot: Slot, name: str) -> str:
        """The control key of ``slot``'s field ``name``."""
        return name if self.shares(slot, name) else slot.analysis.prefix + name

    def error_keys(self, slot: Slot | None, error: BaseException | None, fallback: list[str]) -> list[str]:
        """Control keys a failing setting marks: the field the error names, else ``fallback``."""
        name = getattr(error, "field", None)
        owner = getattr(error, "owner", None)
        if name in DATA_KEYS:
            return [name]
        if name and slot is not None:
            if name in ("method", f"{slot.analysis.prefix}method"):
                return [slot.analysis.method_key()]
            if owner is None or owner == type(slot.wanted).__name__ or name in type(slot.wanted).params():
                return [self.key_of(slot, name)]
        return list(fallback)

    # ------------------------------------------------------------------ data
    def select(self, sel: DataSelection, channels: str = "one") -> Any:
        """The selected signal (rate, channel, span in the freeze layer's one order), cached.

        ``channels="all"``: every channel of the record at that rate and span.
        """
        key = (sel, channels)
        cached = self._selected.get(key)
        if cached is not None:
            return cached
        channel = sel.channel if self.signal.n_channels > 1 and channels == "one" else None
        sig = Selection(channel=channel, span=sel.span, fs=sel.fs).apply(self.signal)
        self._selected[key] = sig
        while len(self._selected) > 8:
            self._selected.popitem(last=False)
        return sig

    @staticmethod
    def depends(slot: Slot, sel: DataSelection | None) -> DataSelection | None:
        """The part of ``sel`` that ``slot``'s result depends on: an analysis of every channel
        (``channels="all"``) does not depend on the channel chosen for the others."""
        if sel is None or slot.analysis.channels == "one":
            return sel
        return DataSelection("*", sel.fs, sel.span)

    def stale(self, slot: Slot) -> bool:
        """True when ``slot`` shows a result of an earlier data selection (a deferred analysis
        still computing, cancelled, or failing on the new selection)."""
        return (slot.result is not None and self.sel is not None
                and self.depends(slot, slot.sel) != self.depends(slot, self.sel))

    def current(self, slot: Slot) -> bool:
        """True when ``slot`` has a result of the data selection on screen."""
        return slot.result is not None and not self.stale(slot)

    def cached(self, slot: Slot, est: Any, sel: DataSelection) -> Any:
        return self._results.get((slot.name, est, self.depends(slot, sel)))

    def _keep(self, slot: Slot, est: Any, sel: DataSelection, result: Any) -> None:
        key = (slot.name, est, self.depends(slot, sel))
        if key in self._results:
            self._results.move_to_end(key)
            return
        if slot.analysis.result_size(result) <= RESULT_CACHE_MAX_BINS:
            self._results[key] = result
            while len(self._results) > RESULT_CACHE:
                self._results.popitem(last=False)

    # ------------------------------------------------------------------ candidates
    def propose(self, name: str, est: Any) -> None:
        """The controls of analysis ``name`` ask for ``est`` (already built and validated)."""
        slot = self.slots[name]
        slot.next = est
        self.errors.pop(f"build:{name}", None)

    def refuse(self, name: str, error: BaseException, keys: list[str]) -> None:
        """The controls of ``name`` hold a value no estimator accepts."""
        slot = self.slots[name]
        self.errors[f"build:{name}"] = Problem(str(error), self.error_keys(slot, error, keys))

    def propose_selection(self, sel: DataSelection) -> None:
        self.next_sel = sel

    def switch_method(self, name: str, cls: type) -> Any:
        """The candidate of ``name`` becomes a ``cls`` estimator carrying the choices made."""
        slot = self.slots[name]
        current = slot.wanted
        slot.last_of[type(current)] = current
        base = slot.last_of.get(cls) or cls()
        est = carry_over(current, cls, base)
        shared = {k: getattr(current, k) for k in self.shared_fields({name: cls} if slot is self.main else None)
                  if k in cls.params() and k in current.params()}
        if shared:
            try:
                est = est.replace(**shared)
            except SpecbenchError:
                pass
        slot.carried = {k: getattr(base, k) for k in cls.params()
                        if k in current.params() and getattr(est, k) == getattr(current, k) != getattr(base, k)}
        self.errors.pop(f"build:{name}", None)
        slot.next = est
        return est

    def pending(self) -> bool:
        sel = self.next_sel or self.sel
        return sel != self.sel or any(s.wanted != s.est or (s.result is None and s.failed != (s.wanted, sel))
                                      or (self.stale(s) and s.failed != (s.wanted, sel))
                                      for s in self.slots.values())

    # ------------------------------------------------------------------ the update
    def plan(self, changed: set[str] | None = None) -> Job | None:
        """What the candidates need computed, or None (then the errors are already settled)."""
        changed = set(changed or ())
        sel = self.next_sel or self.sel
        self.errors.pop("code", None)
        self.errors.pop("internal", None)
        sel_changed = sel != self.sel
        # an analysis recomputes when its estimator or the part of the selection it depends
        # on changes (a channel change leaves an analysis of every channel as it is), and a
        # stale one (left showing an earlier selection) until it succeeds or fails on this one
        todo = [(s, s.wanted) for s in self.slots.values()
                if (s.result is not None and self.depends(s, sel) != self.depends(s, s.sel)
                    and s.failed != (s.wanted, sel))
                or s.wanted != s.est or (s.result is None and s.failed != (s.wanted, sel))]
        if not todo:
            # the controls ask for what is on screen: earlier failures no longer apply
            if sel_changed and self.sel is not None:  # a selection no analysis depends on
                self.sel = sel
            self.next_sel = None
            for s in self.slots.values():
                s.next = None
                if s.result is not None:  # a failure that still applies (nothing changed) stays
                    self.errors.pop(s.name, None)
            self.errors.pop("data", None)
            self.notes = []
            return None
        try:
            sig = self.select(sel)
            job = Job(self, sel, sig, todo, changed)
        except SpecbenchError as e:
            keys = [k for k in DATA_KEYS if k in changed] or ["span"]
            self.errors["data"] = Problem(str(e), self.error_keys(None, e, keys) if
                                          getattr(e, "field", None) in DATA_KEYS else keys)
            return None
        return job

    def commit(self, job: Job) -> bool:
        """Take the job's results (see the module docstring); True when the screen changes."""
        if job.cancelled:
            return False
        self.notes = list(job.notes)
        sel_changed = job.sel != self.sel
        failed = [(self.slots[n], a) for n, a in job.attempts.items() if a.error is not None]
        sel_keys = [k for k in DATA_KEYS if k in job.changed] or ["span"]
        if sel_changed and self.sel is not None and failed:
            slot, a = failed[0]
            keys = sel_keys + [k for k in self.error_keys(slot, a.error, []) if k not in sel_keys]
            self.errors["data"] = Problem("The new data selection was not applied: " + a.message, keys)
            return False
        self.errors.pop("data", None)
        if sel_changed:
            self.sel = job.sel
            self.next_sel = None
        updated = sel_changed
        for name, a in job.attempts.items():
            slot = self.slots[name]
            if a.reverted:
                slot.next = a.est
            if a.error is not None:
                slot.failed = (a.est, job.sel)
                fallback = [k for k in job.changed if self._owns(slot, k)] or self._default_keys(slot)
                self.errors[name] = Problem(a.message, self.error_keys(slot, a.error, fallback))
                continue
            slot.failed = None
            slot.est, slot.result, slot.shown = a.est, a.result, slot.analysis.shown(a.result)
            slot.sel = job.sel
            slot.next = None
            slot.carried = {}
            self.errors.pop(name, None)
            self._keep(slot, a.est, job.sel, a.result)
            updated = True
        self.last_seconds = job.seconds
        return updated

    def _owns(self, slot: Slot, key: str) -> bool:
        prefix = slot.analysis.prefix
        if key == slot.analysis.method_key():
            return True
        if prefix:
            return key.startswith(prefix) or (key in type(slot.wanted).params() and self.shares(slot, key))
        others = [s.analysis.prefix for s in self.slots.values() if s.analysis.prefix]
        return not any(key.startswith(p) for p in others) and key not in DATA_KEYS

    def _default_keys(self, slot: Slot) -> list[str]:
        if slot is self.main:
            return [slot.analysis.method_key()]
        params = list(type(slot.wanted).params())
        return [self.key_of(slot, params[0])] if params else []

    def run(self, changed: set[str] | None = None) -> bool:
        """Plan, execute and commit in the calling thread."""
        job = self.plan(changed)
        if job is None:
            return False
        job.execute()
        return self.commit(job)

    # ------------------------------------------------------------------ reading
    def result(self, name: str) -> Any:
        if name not in self.slots:
            raise SpecbenchError(f"No analysis named {name!r}; the analyses are {list(self.slots)}.")
        return self.slots[name].result

    @property
    def any_result(self) -> bool:
        return any(s.result is not None for s in self.slots.values())
