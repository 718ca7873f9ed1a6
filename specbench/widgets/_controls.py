"""Controls generated from the estimators' constraint tables.

:func:`control_for` maps a :class:`~specbench.estimators.ParamSpec` to a control by its
constraint (the table, not the field name, decides):

============================================  ==============================================
constraint                                    control
============================================  ==============================================
``Interval(int)``, scale ``"log2"``           slider over powers of two + entry for any length
``Interval(float)``, both bounds finite       slider + entry
``Interval(float)``, scale ``"log"``          logarithmic slider + entry
other ``Interval``                            entry
``Options``                                   drop-down
``Boolean``                                   check box
``Subset``                                    a row of toggle buttons (at least one on)
``Optional(inner)``                           the inner control + an "auto" check box (None)
``Window``                                    window drop-down + parameter entries, shown only
                                              for windows that take parameters
============================================  ==============================================

Every control is a widget with a ``value`` trait holding the *field value* (what the
estimator receives), so code and tests drive it exactly as a user does:
``bench.controls["overlap"].value = 0.75``.  Entries never clamp: a value outside the
range reaches the estimator, whose message goes to the status line, and the control is
marked (:meth:`FieldControl.set_invalid`, CSS class ``sb-invalid``).
"""

from __future__ import annotations

import contextlib
import html
import math
from typing import Any

import ipywidgets as W
import traitlets

from ..estimators._params import Boolean, Interval, Optional, Options, ParamSpec, Subset
from ..estimators.windows import WINDOWS, Window, split_window
from ._session import Context

__all__ = [
    "Context",
    "FieldControl",
    "ChoiceControl",
    "BoolControl",
    "SubsetControl",
    "NumberControl",
    "PowerOfTwoControl",
    "OptionalControl",
    "WindowControl",
    "control_for",
]

LABEL_WIDTH = "112px"
ENTRY_WIDTH = "84px"
#: step of logarithmic sliders, in decades
LOG_STEP = 0.01


def _pow2_floor(n: float) -> int:
    return 1 << max(0, int(math.floor(math.log2(max(1.0, n)))))


def _pow2_ceil(n: float) -> int:
    return 1 << max(0, int(math.ceil(math.log2(max(1.0, n)))))


class FieldControl(W.VBox):
    """Base of every control: a label row, optional extra rows, and a ``value`` trait.

    Subclasses build their editors, show a value in them (:meth:`_show`) and read a
    value from them (:meth:`_read`); the base class keeps ``value`` and the editors in
    step without feedback loops.
    """

    value = traitlets.Any(None, allow_none=True, help="The field value the estimator receives.")
    _unit_in_build = False

    def __init__(self, key: str, label: str, help: str = "", unit: str = "", *, show_label: bool = True,
                 value: Any = None) -> None:
        self.key = key
        self.label_text = label
        self.help = help
        self.unit = unit
        self.message: str | None = None
        self._quiet = 0
        self._label = W.HTML(label, layout=W.Layout(min_width=LABEL_WIDTH))
        self._label.add_class("sb-control-label")
        self._label.tooltip = help
        head = [self._label] if show_label else []
        head += self._build()
        if unit and show_label and not self._unit_in_build:
            head.append(_unit_label(unit))
        # the message of a refused setting, beside (below) the control that caused it
        self._note = W.HTML(layout=W.Layout(display="none"))
        self._note.add_class("sb-control-message")
        rows = [W.HBox(head, layout=W.Layout(align_items="center"))] + self._extra_rows() + [self._note]
        super().__init__(rows, layout=W.Layout(margin="1px 0"))
        self.add_class("sb-control")
        self.add_class(f"sb-control-{key.replace('_', '-')}")
        with self._silence():
            self.value = value
        self._show(value)

    # -- to implement -------------------------------------------------------------
    def _build(self) -> list[W.Widget]:
        raise NotImplementedError

    def _extra_rows(self) -> list[W.Widget]:
        return []

    def _show(self, value: Any) -> None:
        raise NotImplementedError

    def _read(self) -> Any:
        raise NotImplementedError

    def set_context(self, ctx: Context) -> None:
        """Adapt slider ranges to the analysed span (no value change)."""

    def _editors(self) -> list[W.Widget]:
        """The widgets a user edits (disabled together by an "auto" box)."""
        out = [getattr(self, n) for n in ("entry", "slider", "dropdown", "checkbox")]
        return [w for w in out if w is not None] + list(getattr(self, "param_entries", []))

    # -- plumbing -----------------------------------------------------------------
    @contextlib.contextmanager
    def _silence(self):
        self._quiet += 1
        try:
            yield
        finally:
            self._quiet -= 1

    def _listen(self, widget: W.Widget, name: str = "value") -> None:
        widget.observe(self._edited, names=name)

    def _edited(self, change) -> None:
        """An editor changed (user or code): derive the value, align the other editors."""
        if self._quiet:
            return
        value = self._read()
        with self._silence():
            self._show(value)
        self._set_from_editors(value)

    def _set_from_editors(self, value: Any) -> None:
        self._from_editors = True
        try:
            self.value = value
        finally:
            self._from_editors = False

    @traitlets.observe("value")
    def _value_set(self, change) -> None:
        if self._quiet or getattr(self, "_from_editors", False):
            return
        with self._silence():
            self._show(change["new"])

    def set_value_quietly(self, value: Any) -> None:
        """Show ``value`` in the editors without them echoing it back as an edit.

        Observers of ``value`` outside the control still run; the workbench guards its own
        while it applies an estimator.
        """
        with self._silence():
            self.value = value
            self._show(value)

    def set_invalid(self, message: str | None) -> None:
        """Mark the control (CSS class ``sb-invalid``) and show ``message`` beside it, or clear both."""
        if message == self.message:
            return
        self.message = message
        if message:
            self.add_class("sb-invalid")
            self._label.tooltip = f"{message}\n\n{self.help}".strip()
            self._note.value = f"<span class='sb-err'>{html.escape(message)}</span>"
            self._note.layout.display = None
        else:
            self.remove_class("sb-invalid")
            self._label.tooltip = self.help
            self._note.value = ""
            self._note.layout.display = "none"

    @property
    def invalid(self) -> bool:
        return "sb-invalid" in self._dom_classes

    def set_visible(self, visible: bool) -> None:
        self.layout.display = None if visible else "none"


def _unit_label(unit: str) -> W.HTML:
    return W.HTML(f"<span class='sb-muted'>&nbsp;{html.escape(unit)}</span>")


def _set_range(slider: W.Widget, lo: float, hi: float) -> None:
    """Set a slider's min and max in an order the slider's validation accepts."""
    if lo > slider.max:
        slider.max = hi
        slider.min = lo
    else:
        slider.min = lo
        slider.max = hi


def _assign(widget: W.Widget, **traits: Any) -> bool:
    """Set traits on an editor; False when the editor cannot show the value."""
    try:
        for k, v in traits.items():
            setattr(widget, k, v)
        return True
    except (traitlets.TraitError, TypeError, ValueError):
        return False


FieldControl.entry = FieldControl.slider = FieldControl.dropdown = FieldControl.checkbox = None


class ChoiceControl(FieldControl):
    """A drop-down of fixed choices; ``options`` are values or ``(label, value)`` pairs."""

    def __init__(self, key: str, label: str, options, help: str = "", unit: str = "", *, value: Any = None,
                 show_label: bool = True) -> None:
        self._options = list(options)
        super().__init__(key, label, help, unit, value=value, show_label=show_label)

    def _build(self):
        self.dropdown = W.Dropdown(options=self._options, layout=W.Layout(width="auto", flex="1 1 auto"))
        self._listen(self.dropdown)
        return [self.dropdown]

    def _values(self) -> list:
        return [o[1] if isinstance(o, tuple) else o for o in self._options]

    def _show(self, value):
        if value in self._values():
            _assign(self.dropdown, value=value)

    def _read(self):
        return self.dropdown.value

    def set_options(self, options) -> None:
        with self._silence():
            self._options = list(options)
            self.dropdown.options = self._options
            self._show(self.value)


class BoolControl(FieldControl):
    def _build(self):
        self.checkbox = W.Checkbox(indent=False, layout=W.Layout(width="auto"))
        self._listen(self.checkbox)
        return [self.checkbox]

    def _show(self, value):
        if isinstance(value, bool):
            _assign(self.checkbox, value=value)

    def _read(self):
        return bool(self.checkbox.value)


class SubsetControl(FieldControl):
    """One toggle button per choice; the value is the tuple of the chosen ones, in the
    constraint's order.  Turning every button off gives ``()``, which the estimator refuses
    (its message then shows beside the control)."""

    def __init__(self, key: str, label: str, values, help: str = "", unit: str = "", *, value: Any = None,
                 show_label: bool = True) -> None:
        self._choices = tuple(values)
        super().__init__(key, label, help, unit, value=value, show_label=show_label)

    def _build(self):
        self.toggles = [W.ToggleButton(value=False, description=c.replace("_", " "), tooltip=c,
                                       layout=W.Layout(width="auto")) for c in self._choices]
        for t in self.toggles:
            self._listen(t)
        box = W.HBox(self.toggles, layout=W.Layout(flex_flow="row wrap", flex="1 1 auto"))
        box.add_class("sb-gap-small")
        box.add_class("sb-subset")
        return [box]

    def _editors(self) -> list[W.Widget]:
        return list(self.toggles)

    def _show(self, value):
        if isinstance(value, (tuple, list)):
            for c, t in zip(self._choices, self.toggles):
                _assign(t, value=c in value)

    def _read(self):
        return tuple(c for c, t in zip(self._choices, self.toggles) if t.value)


class NumberControl(FieldControl):
    """An entry, with a slider below when the range is known (linear or logarithmic)."""

    def __init__(self, key: str, spec: ParamSpec, inner: Interval, ctx: Context | None, *,
                 show_label: bool = True, value: Any = None) -> None:
        self.interval = inner
        self.scale = spec.scale
        self._ctx = ctx
        super().__init__(key, spec.label, spec.help, spec.unit, show_label=show_label, value=value)

    def _slider_range(self) -> tuple[float, float, float] | None:
        """(min, max, step) of the slider, on a grid that holds round values exactly."""
        iv = self.interval
        if self.scale == "log":
            lo, hi = iv.low, iv.high
            if self.unit == "s" and self._ctx is not None:
                lo = max(lo or 0.0, 1.0 / self._ctx.fs)
                hi = (self._ctx.n - 1) / self._ctx.fs if hi is None else hi
            if not lo or lo <= 0 or hi is None or hi <= lo:
                return None
            return math.log10(lo), math.log10(hi), LOG_STEP
        if iv.low is not None and iv.high is not None and iv.kind is float:
            step = 10.0 ** math.floor(math.log10((iv.high - iv.low) / 100))
            lo = math.ceil(round(iv.low / step, 9)) * step
            hi = math.floor(round(iv.high / step, 9)) * step
            if iv.closed in ("right", "neither") and lo <= iv.low:
                lo += step
            if iv.closed in ("left", "neither") and hi >= iv.high:
                hi -= step
            return round(lo, 12), round(hi, 12), step
        return None

    def _snap(self, value: float) -> float:
        """Where the slider puts ``value`` (its front end rounds to the step)."""
        s = self.slider
        if self.scale == "log":
            if value <= 0:
                return -math.inf
            return round((math.log10(value) - s.min) / s.step)
        return round((value - s.min) / s.step)

    def _build(self):
        entry_cls = W.IntText if self.interval.kind is int else W.FloatText
        self.entry = entry_cls(layout=W.Layout(width=ENTRY_WIDTH))
        self._listen(self.entry)
        rng = self._slider_range()
        self.slider = None
        if rng is not None:
            cls = W.FloatLogSlider if self.scale == "log" else W.FloatSlider
            kw = {"base": 10} if self.scale == "log" else {}
            self.slider = cls(min=rng[0], max=rng[1], step=rng[2], readout=False, layout=W.Layout(width="100%"),
                              **kw)
            self._listen(self.slider)
        return [W.HBox(layout=W.Layout(flex="1 1 auto")), self.entry]

    def _extra_rows(self):
        return [self.slider] if self.slider is not None else []

    def _show(self, value):
        if value is None or isinstance(value, bool) or not isinstance(value, (int, float)):
            return
        _assign(self.entry, value=value)
        _fit_entry(self.entry, value)
        s = self.slider
        if s is not None and s.min <= _slider_pos(self, value) <= s.max:
            k = self._snap(value)
            # put the slider exactly on its grid, so that its front end has nothing to round
            _assign(s, value=10 ** (s.min + k * s.step) if self.scale == "log" else round(s.min + k * s.step, 12))

    def _read(self):
        # whichever editor moved last is the truth; the entry is kept in step by _show
        return self._last_edited

    def _edited(self, change):
        if self._quiet:
            return
        v = change["new"]
        if change["owner"] is self.slider:
            current = self.value
            if isinstance(current, (int, float)) and not isinstance(current, bool) and (
                    self._snap(v) == self._snap(current)):
                return  # the slider only rounded the value it was shown: not an edit
            v = round(v, 12) if self.scale != "log" else float(f"{v:.4g}")
        if self.interval.kind is int:
            v = int(round(v))
        self._last_edited = v
        super()._edited(change)

    def set_context(self, ctx: Context) -> None:
        self._ctx = ctx
        if self.slider is None or self.scale != "log":
            return
        rng = self._slider_range()
        if rng is None:
            return
        with self._silence():
            _set_range(self.slider, rng[0], rng[1])
            self._show(self.value)


def _fit_entry(entry: W.Widget, value: float) -> None:
    """Widen a number entry so that every digit of ``value`` shows (1/fs reads 0.0001953125).

    The front end writes the shortest repr of the number, as Python does; about 7.6 px per
    character at JupyterLab's code font size, plus the input's padding and spin buttons.
    """
    chars = len(repr(float(value))) if isinstance(value, float) else len(str(value))
    wanted = max(int(ENTRY_WIDTH[:-2]), math.ceil(7.6 * chars + 28))
    width = f"{wanted}px"
    if entry.layout.width != width:
        entry.layout.width = width


def _slider_pos(ctrl: NumberControl, value: float) -> float:
    if ctrl.scale == "log":
        return math.log10(value) if value > 0 else -math.inf
    return value


class PowerOfTwoControl(FieldControl):
    """Powers of two on a slider, any length in the entry (``scale="log2"`` integers)."""

    def __init__(self, key: str, spec: ParamSpec, inner: Interval, ctx: Context | None, *,
                 show_label: bool = True, value: Any = None) -> None:
        self.interval = inner
        self._ctx = ctx
        super().__init__(key, spec.label, spec.help, spec.unit, show_label=show_label, value=value)

    def _powers(self) -> list[int]:
        low = _pow2_ceil(max(1, self.interval.low or 1))
        top = self._ctx.n if self._ctx is not None else 1 << 20
        if self.interval.high is not None:
            top = min(top, self.interval.high)
        high = max(low, _pow2_floor(top))
        out, v = [], low
        while v <= high:
            out.append(v)
            v <<= 1
        return out

    def _build(self):
        self.entry = W.IntText(layout=W.Layout(width=ENTRY_WIDTH))
        self._listen(self.entry)
        self.slider = W.SelectionSlider(options=self._options(), readout=False, layout=W.Layout(width="100%"))
        self._listen(self.slider)
        return [W.HBox(layout=W.Layout(flex="1 1 auto")), self.entry]

    def _options(self):
        return [(f"{p:,}", p) for p in self._powers()]

    def _extra_rows(self):
        return [self.slider]

    def _show(self, value):
        if value is None or isinstance(value, bool) or not isinstance(value, (int, float)):
            return
        if float(value).is_integer():
            _assign(self.entry, value=int(value))
        values = [o[1] for o in self.slider.options]
        if value in values:
            _assign(self.slider, value=int(value))

    def _read(self):
        return self._last_edited

    def _edited(self, change):
        if self._quiet:
            return
        self._last_edited = int(change["new"])
        super()._edited(change)

    def set_context(self, ctx: Context) -> None:
        self._ctx = ctx
        opts = self._options()
        if list(self.slider.options) == opts:
            return
        with self._silence():
            self.slider.options = opts
            self._show(self.value)


class OptionalControl(FieldControl):
    """The inner control plus an "auto" box: ticked means ``None`` (``none_means``)."""

    _unit_in_build = True

    def __init__(self, key: str, spec: ParamSpec, inner: FieldControl, *, value: Any = None) -> None:
        self.inner = inner
        self.none_means = spec.constraint.none_means
        super().__init__(key, spec.label, spec.help, spec.unit, value=value)

    def _build(self):
        self.auto = W.Checkbox(description=f"auto: {self.none_means}", indent=False,
                               layout=W.Layout(width="auto", margin="0 0 0 " + LABEL_WIDTH))
        self.auto.tooltip = f"Leave the field at None: {self.none_means}."
        self._listen(self.auto)
        self.inner.observe(self._inner_changed, names="value")
        # the inner control's own editors sit on this control's rows
        head = self.inner.children[0].children
        self._inner_rows = list(self.inner.children[1:])
        unit = [_unit_label(self.unit)] if self.unit else []
        return [*head, *unit]

    def _extra_rows(self):
        return [self.auto, *self._inner_rows]

    def _inner_changed(self, change):
        if self._quiet or self.inner._quiet:
            return
        if self.auto.value and all(w.disabled for w in self.inner._editors()):
            # a disabled editor is not edited by a person: this is the front end settling the
            # value it was given (a slider snapping to its step) while "auto" is ticked
            return
        with self._silence():
            self.auto.value = False
            self._enable(True)
        self._set_from_editors(change["new"])

    def _enable(self, on: bool) -> None:
        for w in self.inner._editors():
            w.disabled = not on

    def _show(self, value):
        is_auto = value is None
        _assign(self.auto, value=is_auto)
        self._enable(not is_auto)
        if not is_auto:
            self.inner.set_value_quietly(value)

    def _read(self):
        return None if self.auto.value else self.inner.value

    def suggest(self, value: Any) -> None:
        """Preset the inner editors (while auto) with the value auto resolved to."""
        if self.value is None and value is not None:
            self.inner.set_value_quietly(value)

    def set_context(self, ctx: Context) -> None:
        self.inner.set_context(ctx)


class WindowControl(FieldControl):
    """Window name drop-down, and entries for the parameters of windows that take them."""

    def __init__(self, key: str, spec: ParamSpec, *, value: Any = None) -> None:
        self._params: dict[str, tuple] = {
            name: kind.default_spec_params for name, kind in WINDOWS.items() if kind.params
        }
        super().__init__(key, spec.label, spec.help, spec.unit, value=value)

    def _menu(self, extra: str | None = None):
        opts = [(kind.label, name) for name, kind in WINDOWS.items() if kind.interactive]
        if extra and extra not in [v for _, v in opts]:
            opts.append((WINDOWS[extra].label + " (set in code)", extra) if extra in WINDOWS else (extra, extra))
        return opts

    def _build(self):
        self.dropdown = W.Dropdown(options=self._menu(), layout=W.Layout(width="auto", flex="1 1 auto"))
        self._listen(self.dropdown)
        self.param_box = W.VBox(layout=W.Layout(margin="0 0 0 " + LABEL_WIDTH))
        self.param_entries: list[W.Widget] = []
        return [self.dropdown]

    def _extra_rows(self):
        return [self.param_box]

    def _layout_params(self, name: str) -> None:
        kind = WINDOWS.get(name)
        if kind is None or not kind.params or name == "general_cosine":
            self.param_entries = []
            self.param_box.children = []
            return
        if [getattr(e, "_sb_param", None) for e in self.param_entries] == [(name, p.name) for p in kind.params]:
            return
        entries = []
        for p in kind.params:
            cls = W.IntText if isinstance(p.constraint, Interval) and p.constraint.kind is int else W.FloatText
            e = cls(description=p.name, layout=W.Layout(width="170px"), style={"description_width": "48px"})
            e.tooltip = p.help + (f" ({p.unit})" if p.unit else "")
            e._sb_param = (name, p.name)
            e.observe(self._edited, names="value")
            entries.append(e)
        self.param_entries = entries
        rows = []
        for e, p in zip(entries, kind.params):
            rows.append(W.HBox([e, W.HTML(f"<span class='sb-muted'>{html.escape(p.unit)}</span>")] if p.unit else [e]))
        self.param_box.children = rows

    def _show(self, value):
        parts = split_window(value)
        if parts is None:
            return
        name, args = parts
        if name not in [v for _, v in self.dropdown.options]:
            self.dropdown.options = self._menu(extra=name)
        _assign(self.dropdown, value=name)
        self._layout_params(name)
        kind = WINDOWS.get(name)
        if kind is not None and kind.params and name != "general_cosine":
            shown = list(self._params.get(name, kind.default_spec_params))
            for i, a in enumerate(args[: len(kind.params)]):
                shown[i] = a
            if args:
                self._params[name] = tuple(shown)
            for e, v in zip(self.param_entries, shown):
                _assign(e, value=v)

    def _read(self):
        name = self.dropdown.value
        kind = WINDOWS.get(name)
        if kind is None or not kind.params or name == "general_cosine":
            current = self.value
            if name == "general_cosine" and isinstance(current, tuple) and current[0] == name:
                return current
            return name
        if self.param_entries and [e._sb_param[0] for e in self.param_entries] == [name] * len(kind.params):
            params = tuple(e.value for e in self.param_entries)
        else:
            params = self._params.get(name, kind.default_spec_params)
        self._params[name] = params
        return (name, *params)

    def _edited(self, change):
        if self._quiet:
            return
        if change["owner"] is self.dropdown:
            with self._silence():
                self._layout_params(change["new"])
                for e, v in zip(self.param_entries, self._params.get(change["new"], ())):
                    _assign(e, value=v)
        super()._edited(change)


def control_for(key: str, spec: ParamSpec, ctx: Context | None, value: Any = None,
                *, show_label: bool = True) -> FieldControl:
    """The control for one estimator field, chosen by its constraint."""
    c = spec.constraint
    if isinstance(c, Optional):
        inner_spec = ParamSpec(spec.name, None, c.inner, spec.label, spec.help, spec.unit, spec.scale, spec.group)
        inner = control_for(key, inner_spec, ctx, value=None, show_label=False)
        return OptionalControl(key, spec, inner, value=value)
    if isinstance(c, Window):
        return WindowControl(key, spec, value=value)
    if isinstance(c, Options):
        return ChoiceControl(key, spec.label, c.values, spec.help, spec.unit, value=value, show_label=show_label)
    if isinstance(c, Boolean):
        return BoolControl(key, spec.label, spec.help, spec.unit, value=value, show_label=show_label)
    if isinstance(c, Subset):
        return SubsetControl(key, spec.label, c.values, spec.help, spec.unit, value=value, show_label=show_label)
    if isinstance(c, Interval):
        if c.kind is int and spec.scale == "log2":
            return PowerOfTwoControl(key, spec, c, ctx, value=value, show_label=show_label)
        return NumberControl(key, spec, c, ctx, value=value, show_label=show_label)
    raise TypeError(
        f"No control is known for the constraint {type(c).__name__} of the field {spec.name!r}; "
        "add one to specbench.widgets._controls.control_for."
    )
