"""The control binding: controls generated for each analysis's estimator, read and written.

Owns no state of the analyses (that is :class:`._session.Session`): it builds the controls
of the current estimator class of every analysis (:func:`._controls.control_for`, cached so
that switching methods back and forth keeps them), the method menus, the shared
data-preparation controls of the data strip, shows estimators in the controls without
echo, builds candidate estimators from them, and marks the controls the session's problems
name (from the errors' ``.field`` / ``.owner``, never from the message text).
"""

from __future__ import annotations

import logging
from collections.abc import Callable
from typing import Any

import ipywidgets as W

from ._controls import ChoiceControl, Context, FieldControl, OptionalControl, control_for
from ._session import DATA_KEYS, Session, Slot

__all__ = ["ControlBinding", "GROUPS"]

_log = logging.getLogger("specbench.widgets")

#: section titles of the main analysis's control groups (the estimators' ParamSpec.group), in order
GROUPS = (
    ("window", "Window and segments"),
    ("band", "Averaging and band"),
    ("display", "Output"),
    ("estimator", "Other settings"),
)


def section(title: str) -> W.HTML:
    import html

    return W.HTML(f"<div class='sb-section-title'>{html.escape(title)}</div>")


class ControlBinding:
    """Controls of every analysis of a session, keyed as ``bench.controls`` has them."""

    def __init__(self, session: Session, on_change: Callable[[str], None], on_method: Callable[[str], None],
                 context: Callable[[], Context]) -> None:
        self.session = session
        self._on_change = on_change
        self._context = context
        self._cache: dict[tuple, FieldControl] = {}
        self.applying = 0
        self.cls: dict[str, type] = {}
        #: analysis name -> {control key: control} of its own (non-shared) fields
        self.fields: dict[str, dict[str, FieldControl]] = {}
        #: shared data-preparation controls (data strip), by field name
        self.shared: dict[str, FieldControl] = {}
        self.methods: dict[str, ChoiceControl] = {}
        for name, slot in session.slots.items():
            classes = slot.analysis.classes()
            if len(classes) > 1:
                key = slot.analysis.method_key()
                c = ChoiceControl(key, slot.analysis.method_label, [(k.title or k.__name__, k.kind) for k in classes],
                                  f"The estimator of the {slot.analysis.title or name} analysis.",
                                  value=type(slot.est).kind)
                c.observe(lambda ch, n=name: on_method(n), names="value")
                self.methods[name] = c
        self.box = W.HBox(layout=W.Layout(width="100%", flex_flow="row wrap", align_items="flex-start"))
        self.box.add_class("sb-controls")
        self.strip_box: W.Box | None = None  # set by the workbench: where shared controls go

    # ------------------------------------------------------------------ building
    def _control(self, key: str, spec) -> FieldControl:
        ckey = (key, type(spec.constraint).__name__, spec.constraint.describe(), spec.scale, spec.unit,
                spec.label, spec.help)
        c = self._cache.get(ckey)
        if c is None:
            c = control_for(key, spec, self._context(), value=spec.default)
            c.observe(lambda ch, k=key: self._changed(k), names="value")
            self._cache[ckey] = c
        return c

    def _changed(self, key: str) -> None:
        if not self.applying:
            self._on_change(key)

    def use(self, name: str, cls: type) -> None:
        """Make ``cls`` the estimator class of analysis ``name``: its controls, laid out."""
        self.cls[name] = cls
        self._rebuild()

    def _rebuild(self) -> None:
        s = self.session
        shared_specs = s.shared_fields(self.cls)
        self.shared = {k: self._control(k, p) for k, p in shared_specs.items()}
        columns: list[list[W.Widget]] = []
        for name, slot in s.slots.items():
            cls = self.cls.get(name) or type(slot.wanted)
            self.cls[name] = cls
            own = {}
            for field, spec in cls.params().items():
                if field in shared_specs and (slot is s.main or self._same(spec, shared_specs[field])):
                    continue
                key = slot.analysis.prefix + field
                own[key] = self._control(key, spec)
            self.fields[name] = own
            method = [self.methods[name]] if name in self.methods else []
            if slot is s.main:
                grouped: dict[str, list[FieldControl]] = {}
                for key, c in own.items():
                    group = cls.params()[key[len(slot.analysis.prefix):]].group
                    grouped.setdefault(group, []).append(c)
                known = [g for g, _ in GROUPS]
                mine = []
                for group, title in GROUPS + tuple((g, g.capitalize()) for g in grouped if g not in known):
                    if group in grouped:
                        mine.append([section(title), *grouped[group]])
                if not mine:
                    mine = [[section(slot.analysis.title)]]
                mine[0][1:1] = method
                columns += mine
            else:
                columns.append([section(slot.analysis.title or name), *method, *own.values()])
        self.box.children = [W.VBox(col, layout=W.Layout(min_width="210px", max_width="320px", flex="1 1 220px"))
                             for col in columns]
        if self.strip_box is not None:
            self.strip_box.children = list(self.shared.values())

    @staticmethod
    def _same(a, b) -> bool:
        return a.constraint.describe() == b.constraint.describe()

    # ------------------------------------------------------------------ keys
    def owners(self, key: str) -> list[str]:
        """The analyses a control key sets (a shared field sets every analysis that has it)."""
        if key in self.shared:
            return [n for n, slot in self.session.slots.items()
                    if key in self.cls[n].params() and self.session.shares(slot, key, self.cls[n])]
        return [n for n, own in self.fields.items() if key in own]

    def key_of(self, slot: Slot, field: str) -> str:
        if field in self.shared and self.session.shares(slot, field, self.cls[slot.name]):
            return field
        return slot.analysis.prefix + field

    def controls(self) -> dict[str, FieldControl]:
        out: dict[str, FieldControl] = {}
        for name in self.session.slots:
            if name in self.methods:
                out[self.methods[name].key] = self.methods[name]
            out.update(self.fields.get(name, {}))
        out.update(self.shared)
        return out

    # ------------------------------------------------------------------ reading and writing
    def build(self, name: str) -> Any:
        """The estimator the controls of ``name`` ask for (raises the estimator's SettingsError)."""
        slot = self.session.slots[name]
        cls = self.cls[name]
        values = {f: self.controls()[self.key_of(slot, f)].value for f in cls.params()}
        return cls(**values)

    def show(self, name: str, est: Any) -> None:
        """Show ``est`` in the controls of ``name`` (its class's), without triggering computes."""
        self.applying += 1
        try:
            if self.cls.get(name) is not type(est):
                self.use(name, type(est))
            slot = self.session.slots[name]
            if name in self.methods:
                self.methods[name].set_value_quietly(type(est).kind)
            controls = self.controls()
            for f in type(est).params():
                controls[self.key_of(slot, f)].set_value_quietly(getattr(est, f))
            self.relevance(name, est)
        finally:
            self.applying -= 1

    def set_quietly(self, key: str, value: Any) -> None:
        self.applying += 1
        try:
            self.controls()[key].set_value_quietly(value)
        finally:
            self.applying -= 1

    def relevance(self, name: str, est: Any) -> None:
        """Hide the controls of fields that do not apply to ``est`` (``ParamSpec.relevant``)."""
        slot = self.session.slots[name]
        controls = self.controls()
        for f, spec in type(est).params().items():
            if spec.relevant is None:
                continue
            try:
                on = bool(spec.relevant(est))
            except Exception:  # a faulty rule must not hide a control for good
                _log.exception("relevant() of %s failed", f)
                on = True
            c = controls.get(self.key_of(slot, f))
            if c is not None:
                c.set_visible(on)

    def suggest(self) -> None:
        """Preset "auto" controls with what auto resolved to, so unticking starts there."""
        controls = self.controls()
        for slot in self.session.slots.values():
            if slot.result is None:
                continue
            for f, v in slot.analysis.suggestions(slot.est, slot.result).items():
                c = controls.get(self.key_of(slot, f))
                if isinstance(c, OptionalControl) and c.value is None:
                    c.suggest(v)

    def set_context(self, ctx: Context) -> None:
        for c in self._cache.values():
            c.set_context(ctx)

    def mark(self, data_controls: dict[str, FieldControl]) -> None:
        """Mark every control a problem names with its message; clear the others."""
        marks: dict[str, str] = {}
        for problem in self.session.errors.values():
            for k in problem.keys:
                marks.setdefault(k, problem.message)
        everything = {**self.controls(), **data_controls}
        for key, c in everything.items():
            c.set_invalid(marks.get(key))
        for c in self._cache.values():  # controls of other methods, kept for a switch back
            if c not in everything.values():
                c.set_invalid(None)


DATA_CONTROL_KEYS = DATA_KEYS
