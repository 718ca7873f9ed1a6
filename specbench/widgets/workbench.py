"""The Workbench: a Signal bound to estimator controls, with live PSD and autocorrelation views.

Data flow
---------
A control change builds a new estimator from the controls (the estimators validate
their fields; a :class:`~specbench.SettingsError` goes to the status line and marks the
control), then the estimate is computed off the latest estimator and the marks of both
views, the figures of merit and the readouts are updated in one synchronised step.

- A change from the front end (a widget event handled inside the kernel's event loop)
  defers the compute by a few milliseconds, and changes arriving meanwhile are
  coalesced: the latest settings win.  A change made by code (in a notebook cell, a plain
  script, a test: no running loop) computes before it returns; so does setting
  :attr:`Workbench.estimator`, always.
- A setting that fails (a :class:`~specbench.SpecbenchError` while building or
  computing) leaves the last good estimate on screen, shows the message in the status
  line and marks the control.  Nothing raises into the front end; an unexpected error is
  logged (logger ``specbench.widgets``) and shown in one line.
- :attr:`Workbench.estimator` is always the estimator of the estimate on screen
  (``bench.spectrum.estimator == bench.estimator``); the controls may hold a setting
  that failed, and then :attr:`Workbench.status` says why.  When even the first
  estimate fails (a record shorter than the default segment, say), the workbench opens
  with the message and no estimate, and ``estimator`` is the one asked for.
- Data-preparation fields (the estimators' ``group="data"`` fields that both estimators
  have: ``detrend``) are shared: the data strip's control sets them on both estimators.
  Every other field belongs to one estimator and has its own control.
- A change of the PSD confidence level alone recomputes only the band, from the degrees
  of freedom of the estimate on screen (the same arithmetic as the estimator, so the
  result equals a fresh estimate bit for bit).
"""

from __future__ import annotations

import asyncio
import contextlib
import logging
import math
import re
import time
import types
import warnings
from collections import OrderedDict
from dataclasses import dataclass
from typing import Any

import ipywidgets as W

from .._errors import InputError, SettingsError, SpecbenchError, SpecbenchWarning
from ..estimators import Autocorrelation, SpectralEstimator, Welch, estimator_classes
from ..freeze._state import FreezeState, Selection
from ._controls import ChoiceControl, Context, FieldControl, OptionalControl, control_for
from ._datastrip import DataStrip
from ._merit import MeritPanel, duration, spectrum_merits
from ._pins import MAX_PINS, PIN_STYLES, Pin, PinBoard, auto_labels, settings_of
from ._style import gapped, style_sheet
from ._views import CorrelationView, SpectrumView

__all__ = ["Workbench"]

_log = logging.getLogger("specbench.widgets")
# no handler of our own: tracebacks go where the user's logging config sends them, and never
# into a cell's output through logging's last-resort handler
_log.addHandler(logging.NullHandler())

#: section titles of the control groups (the estimators' ParamSpec.group), in order
GROUPS = (
    ("window", "Window and segments"),
    ("band", "Averaging and band"),
    ("display", "Output"),
    ("estimator", "Other settings"),
)
#: delay before a deferred compute; changes arriving meanwhile are coalesced
COALESCE_SECONDS = 0.02
#: results kept for instant return to recent settings (small results only)
RESULT_CACHE = 24
RESULT_CACHE_MAX_BINS = 1 << 17

DATA_KEYS = ("channel", "fs", "span")
_FIELD_IN_MESSAGE = re.compile(r"The '?([A-Za-z_]\w*)'? (?:parameter )?of (\w+)")


@dataclass(frozen=True)
class _Selection:
    channel: str
    fs: float | None
    span: tuple[float, float] | None


def spectral_classes() -> list[type]:
    """The PSD estimator classes offered by the method menu (registered, with a title)."""
    return [c for c in estimator_classes().values()
            if isinstance(c, type) and issubclass(c, SpectralEstimator) and c.title]


def carry_over(old: SpectralEstimator, cls: type, base: SpectralEstimator | None = None) -> SpectralEstimator:
    """A ``cls`` estimator that keeps the choices made in ``old``.

    Starts from ``base`` (the last ``cls`` estimator used, or ``cls()``) and takes every
    field of ``old`` that was changed from ``old``'s default, or that is concrete where
    ``cls`` would be automatic (None), and that ``cls`` has and accepts (one by one, so one
    field ``cls`` refuses does not lose the others).  Other defaults of one method do not
    leak into another: Welch's Hann window does not replace the periodogram's rectangular
    one unless it was chosen.
    """
    start = base if isinstance(base, cls) else cls()
    wanted = {k: v for k, v in old.changed_fields().items() if k in cls.params()}
    # a concrete value also replaces an automatic (None) default of the new method: Welch's
    # segment length carries into multitaper, whose default tapers the whole record
    wanted.update({k: getattr(old, k) for k, p in cls.params().items()
                   if k in old.params() and k not in wanted and p.default is None
                   and getattr(start, k) is None and getattr(old, k) is not None})
    try:
        return start.replace(**wanted)
    except SettingsError:
        pass
    est = start
    for k, v in wanted.items():
        try:
            est = est.replace(**{k: v})
        except SettingsError:
            continue
    return est


def _guarded(fn):
    """Observers never raise: errors go to the status line and the log."""

    def wrapper(self, *args, **kwargs):
        try:
            return fn(self, *args, **kwargs)
        except SpecbenchError as e:
            self._errors["internal"] = str(e)
            self._show_status()
        except Exception as e:
            _log.exception("Workbench: unexpected error")
            self._errors["internal"] = f"Internal error: {type(e).__name__}: {e}; please report."
            self._show_status()

    wrapper.__name__ = fn.__name__
    wrapper.__doc__ = fn.__doc__
    return wrapper


def _executing_a_cell() -> bool:
    """True while a kernel runs a cell: a control changed by code, not by a front-end event.

    ipykernel records the request it is handling; a widget event from the browser is a
    ``comm_msg``, code in a cell an ``execute_request``.
    """
    try:
        from IPython import get_ipython
    except ImportError:
        return False
    kernel = getattr(get_ipython(), "kernel", None)
    if kernel is None or not hasattr(kernel, "get_parent"):
        return False
    try:
        parent = kernel.get_parent("shell") or {}
    except Exception:  # an older or unusual kernel: treat the change as an event
        return False
    return parent.get("header", {}).get("msg_type") == "execute_request"


def _running_loop() -> asyncio.AbstractEventLoop | None:
    try:
        return asyncio.get_running_loop()
    except RuntimeError:
        return None


def _as_signal(obj: Any):
    from ..data import Signal

    if isinstance(obj, Signal):
        return obj
    mod = type(obj).__module__.split(".")[0]
    if mod == "pandas":
        from ..data import from_pandas

        return from_pandas(obj)
    if mod == "xarray":
        from ..data import from_xarray

        return from_xarray(obj)
    raise InputError(
        f"The Workbench needs a Signal; got {type(obj).__name__}. Wrap an array as "
        "sb.Signal(array, fs=...), or load a file with sb.load(path)."
    )


class Workbench(W.VBox):
    """Interactive PSD and autocorrelation of a Signal, with controls for every setting.

    Parameters
    ----------
    signal : Signal (or pandas / xarray object)
        The recording; samples on the last axis.
    estimator : SpectralEstimator, optional
        Initial PSD estimator (default ``sb.Welch()``).
    correlation_estimator : Autocorrelation, optional
        Initial autocorrelation estimator (default ``sb.Autocorrelation()``); its
        ``detrend`` follows the PSD estimator's.
    data_name : str
        Name the frozen code cell uses for in-memory data.
    channel : str or int, optional
        Channel analysed first (default the first).
    span : (float, float), optional
        Analysis span in seconds from the record start (default the whole record).
    fs : float, optional
        Sample rate overriding the signal's.

    Attributes
    ----------
    estimator, correlation_estimator
        The estimators of the estimates on screen (get and set).
    spectrum, correlation
        Full-resolution results on screen (``estimator(selected signal)``).
    pins : tuple of Pin
    status : str
        The status line (plain text).
    controls : mapping
        Control widget by name: ``"channel"``, ``"fs"``, ``"span"``, ``"method"``, the
        fields of the current PSD estimator, ``"acf_<field>"`` for the autocorrelation
        fields, ``"plot_as"`` and ``"freq_axis"``.  Each has a ``value``.
    figures : dict
        The bqplot Figures: ``"overview"``, ``"psd"``, ``"acf"``.

    Notes
    -----
    CSS classes (stable selectors): ``sb-workbench``, ``sb-datastrip``, ``sb-overview``,
    ``sb-controls``, ``sb-control`` and ``sb-control-<field>`` (underscores as hyphens),
    ``sb-invalid`` on a control holding a failing setting, ``sb-psd``, ``sb-acf``,
    ``sb-readout``, ``sb-status`` (with ``sb-status-error`` / ``sb-status-note``),
    ``sb-merit``, ``sb-pins``, ``sb-pin-button``, ``sb-pin-clear``, ``sb-pin-row``,
    ``sb-pin-remove``.
    """

    def __init__(self, signal: Any, estimator: SpectralEstimator | None = None, *,
                 correlation_estimator: Autocorrelation | None = None, data_name: str = "x",
                 channel: str | int | None = None, span: tuple[float, float] | None = None,
                 fs: float | None = None) -> None:
        super().__init__()
        self._signal = _as_signal(signal)
        if not isinstance(data_name, str) or not data_name.isidentifier():
            raise SettingsError(f"data_name must be a Python identifier; got {data_name!r}.")
        self._data_name = data_name
        est = Welch() if estimator is None else self._check_spectral(estimator)
        corr = Autocorrelation() if correlation_estimator is None else self._check_corr(correlation_estimator)
        self._shared = self._shared_names(type(est))
        corr = corr.replace(**{k: getattr(est, k) for k in self._shared})
        # committed state (what is on screen; until a first estimate succeeds, the estimators
        # asked for) and candidates (_next_*: what the controls ask for)
        self._est: SpectralEstimator = est
        self._corr_est: Autocorrelation = corr
        self._spectrum = self._correlation = None
        self._spectrum1 = self._correlation1 = None
        names = self._signal.channels
        ch = names[0] if channel is None else self._signal.channel(channel).channels[0]
        self._sel: _Selection | None = None
        self._next_sel = _Selection(ch, fs, None if span is None else tuple(float(s) for s in span))
        self._next_est, self._next_corr = est, corr
        self._selected_cache: OrderedDict = OrderedDict()
        self._select(self._next_sel)  # a span or rate given in code that cannot apply raises here
        self._changed: set[str] = set()
        self._errors: dict[str, str] = {}
        self._notes: list[str] = []
        self._status_text = ""
        self._applying = 0
        self._handle: asyncio.TimerHandle | None = None
        self._pins: list[Pin] = []
        self._results: OrderedDict = OrderedDict()
        self._last_update = math.nan
        self._last_of: dict[type, SpectralEstimator] = {}
        self._carried: dict[str, Any] = {}  # fields carried over by a method switch -> own value
        self._slow = False

        # panels
        self._strip = DataStrip(self._signal)
        self._strip.on_brush = self._brushed
        self._psd = SpectrumView()
        self._acf = CorrelationView()
        self._merit = MeritPanel()
        self._board = PinBoard(self._pin_from_ui, self._remove_from_ui, self._clear_from_ui)
        self._status = W.HTML()
        self._status.add_class("sb-status")

        # controls
        self._control_cache: dict[tuple, FieldControl] = {}
        self._cls = type(est)
        self._method = ChoiceControl("method", "Method", [(c.title, c.kind) for c in spectral_classes()],
                                     "The PSD estimator.", value=self._cls.kind)
        self._method.observe(lambda ch: self._on_method(), names="value")
        self._spec_ctrls: dict[str, FieldControl] = {}
        self._acf_ctrls: dict[str, FieldControl] = {}
        for name, spec in Autocorrelation.params().items():
            if name in self._shared:
                continue
            c = control_for(f"acf_{name}", spec, None, value=getattr(corr, name))
            c.observe(lambda ch, n=name: self._on_acf(n), names="value")
            self._acf_ctrls[f"acf_{name}"] = c
        for key, c in (("channel", self._strip.channel), ("fs", self._strip.rate), ("span", self._strip.span)):
            c.observe(lambda ch, k=key: self._on_selection(k), names="value")
        self._applying += 1
        try:
            self._strip.channel.set_value_quietly(ch)
            self._strip.rate.set_value_quietly(fs)
            self._strip.span.set_value_quietly(self._next_sel.span)
        finally:
            self._applying -= 1
        # controls above the views, one column per group, wrapping on narrow screens: the two
        # views keep the full width side by side
        self._controls_box = W.HBox(layout=W.Layout(width="100%", flex_flow="row wrap", align_items="flex-start"))
        self._controls_box.add_class("sb-controls")
        self._use_class(self._cls)
        self._apply_to_controls(est, corr)

        psd_box = W.VBox([self._psd.header, self._psd.figure, self._psd.footer],
                         layout=W.Layout(flex="1 1 0", min_width="250px"))
        acf_box = W.VBox([self._acf.header, self._acf.figure, self._acf.footer],
                         layout=W.Layout(flex="1 1 0", min_width="250px"))
        views = gapped(W.HBox([psd_box, acf_box], layout=W.Layout(width="100%", flex_flow="row wrap")), "medium")
        main = gapped(W.VBox([gapped(self._controls_box, "wide"), views, self._status,
                              self._section("Figures of merit"), self._merit.widget,
                              self._section("Pins"), self._board.widget],
                             layout=W.Layout(width="100%")), "small")
        children = [style_sheet(), self._strip.widget, main]
        panel = self._freeze_panel()
        if panel is not None:
            children += [self._section("Freeze"), panel]
        self.children = children
        self.add_class("sb-workbench")
        self._run()

    # ------------------------------------------------------------------ construction helpers
    @staticmethod
    def _check_spectral(est: Any) -> SpectralEstimator:
        if isinstance(est, type):
            raise SettingsError(f"Pass an estimator object, such as sb.{est.__name__}(); got the class itself.")
        if not isinstance(est, SpectralEstimator):
            raise SettingsError(
                f"The estimator of a Workbench must be a PSD estimator such as sb.Welch(...); got "
                f"{type(est).__name__}. Set the autocorrelation with correlation_estimator=."
            )
        if type(est) not in spectral_classes():
            raise SettingsError(f"{type(est).__name__} is not offered by the Workbench's method menu.")
        return est

    @staticmethod
    def _check_corr(est: Any) -> Autocorrelation:
        if not isinstance(est, Autocorrelation):
            raise SettingsError(
                f"correlation_estimator must be an sb.Autocorrelation(...); got {type(est).__name__}."
            )
        return est

    @staticmethod
    def _shared_names(cls: type) -> set[str]:
        """Data-preparation fields both estimators have (set once, for both views)."""
        a, b = cls.params(), Autocorrelation.params()
        return {k for k in a if k in b and a[k].group == "data" and b[k].group == "data"
                and a[k].constraint.describe() == b[k].constraint.describe()}

    @staticmethod
    def _section(title: str) -> W.HTML:
        h = W.HTML(f"<div class='sb-section-title'>{title}</div>")
        return h

    def _freeze_panel(self):
        try:
            from .freeze_panel import FreezePanel
        except ImportError:
            return None
        try:
            panel = FreezePanel(get_state=self.freeze_state)
        except Exception:  # the workbench must open even if the freeze panel cannot
            _log.exception("The freeze panel could not be built")
            return None
        return panel if isinstance(panel, W.Widget) else getattr(panel, "widget", None)

    def _context(self) -> Context:
        sel = self._next_sel or self._sel
        try:
            sig = self._select(sel)
            return Context(sig.n_samples, sig.fs)
        except SpecbenchError:
            return Context(self._signal.n_samples, self._signal.fs)

    def _control(self, name: str, spec) -> FieldControl:
        key = (name, type(spec.constraint).__name__, spec.constraint.describe(), spec.scale, spec.unit,
               spec.label, spec.help)
        c = self._control_cache.get(key)
        if c is None:
            c = control_for(name, spec, self._context(), value=spec.default)
            c.observe(lambda ch, n=name: self._on_field(n), names="value")
            self._control_cache[key] = c
        return c

    def _use_class(self, cls: type) -> None:
        """Make ``cls`` the method: its controls, laid out by group."""
        self._cls = cls
        self._shared = self._shared_names(cls)
        self._spec_ctrls = {name: self._control(name, spec) for name, spec in cls.params().items()}
        columns: list[list[W.Widget]] = []
        grouped: dict[str, list[FieldControl]] = {}
        data_fields = []
        for name, spec in cls.params().items():
            if spec.group == "data":
                data_fields.append(self._spec_ctrls[name])
            else:
                grouped.setdefault(spec.group, []).append(self._spec_ctrls[name])
        known = [g for g, _ in GROUPS]
        for group, title in GROUPS + tuple((g, g.capitalize()) for g in grouped if g not in known):
            if group in grouped:
                columns.append([self._section(title), *grouped[group]])
        columns[0].insert(0, self._method)
        columns.append([self._section("Autocorrelation"), *self._acf_ctrls.values()])
        self._controls_box.children = [
            W.VBox(col, layout=W.Layout(min_width="210px", max_width="320px", flex="1 1 220px")) for col in columns
        ]
        self._strip.fields_box.children = data_fields

    def _apply_to_controls(self, est: SpectralEstimator, corr: Autocorrelation) -> None:
        """Show ``est`` and ``corr`` in the controls, without triggering computes."""
        self._applying += 1
        try:
            if type(est) is not self._cls:
                self._use_class(type(est))
            self._method.set_value_quietly(type(est).kind)
            for name, c in self._spec_ctrls.items():
                c.set_value_quietly(getattr(est, name))
                c.set_invalid(None)
            for key, c in self._acf_ctrls.items():
                c.set_value_quietly(getattr(corr, key[4:]))
                c.set_invalid(None)
            self._method.set_invalid(None)
            self._update_relevance(est)
        finally:
            self._applying -= 1

    def _update_relevance(self, est: SpectralEstimator) -> None:
        for name, spec in type(est).params().items():
            if spec.relevant is not None:
                try:
                    on = bool(spec.relevant(est))
                except Exception:  # a faulty rule must not hide a control for good
                    _log.exception("relevant() of %s failed", name)
                    on = True
                self._spec_ctrls[name].set_visible(on)

    # ------------------------------------------------------------------ control events
    def _all_controls(self) -> dict[str, FieldControl]:
        out: dict[str, Any] = {
            "channel": self._strip.channel, "fs": self._strip.rate, "span": self._strip.span,
            "method": self._method,
        }
        out.update(self._spec_ctrls)
        out.update(self._acf_ctrls)
        out["plot_as"] = self._psd.plot_as
        out["freq_axis"] = self._psd.freq_axis
        return out

    def _build_spectral(self) -> SpectralEstimator:
        return self._cls(**{n: c.value for n, c in self._spec_ctrls.items()})

    def _build_corr(self) -> Autocorrelation:
        fields = {k[4:]: c.value for k, c in self._acf_ctrls.items()}
        fields.update({k: self._spec_ctrls[k].value for k in self._shared})
        return Autocorrelation(**fields)

    @_guarded
    def _on_field(self, name: str) -> None:
        if self._applying:
            return
        self._changed.add(name)
        try:
            est = self._build_spectral()
        except SettingsError as e:
            self._fail("build-psd", str(e), [name])
            return
        self._clear_marks(self._spec_ctrls)
        self._errors.pop("build-psd", None)
        self._next_est = est
        if name in self._shared:
            self._rebuild_corr(name)
        self._update_relevance(est)
        self._request()

    def _rebuild_corr(self, key: str) -> None:
        try:
            self._next_corr = self._build_corr()
        except SettingsError as e:
            self._fail("build-acf", str(e), [key])
            return
        self._clear_marks(self._acf_ctrls)
        self._errors.pop("build-acf", None)

    @_guarded
    def _on_acf(self, name: str) -> None:
        if self._applying:
            return
        key = f"acf_{name}"
        self._changed.add(key)
        self._rebuild_corr(key)
        self._request()

    @_guarded
    def _on_method(self) -> None:
        if self._applying:
            return
        kind = self._method.value
        cls = next(c for c in spectral_classes() if c.kind == kind)
        current = self._next_est or self._est
        self._last_of[type(current)] = current
        base = self._last_of.get(cls) or cls()
        est = carry_over(current, cls, base)
        self._carried = {k: getattr(base, k) for k in cls.params()
                         if k in current.params() and getattr(est, k) == getattr(current, k) != getattr(base, k)}
        self._changed.add("method")
        self._apply_to_controls(est, self._next_corr or self._corr_est)
        self._errors.pop("build-psd", None)
        self._next_est = est
        self._rebuild_corr("method")
        self._request()

    @_guarded
    def _on_selection(self, key: str) -> None:
        if self._applying:
            return
        self._changed.add(key)
        base = self._next_sel or self._sel
        span = self._strip.span.value
        fs = self._strip.rate.value
        if key == "fs" and span is not None:
            # the span follows the samples: rescale it to the new rate
            old = base.fs or self._signal.fs
            new = fs or self._signal.fs
            if isinstance(new, (int, float)) and new > 0 and math.isfinite(new) and new != old:
                span = (span[0] * old / new, span[1] * old / new)
                self._applying += 1
                try:
                    self._strip.span.set_value_quietly(span)
                finally:
                    self._applying -= 1
        self._next_sel = _Selection(self._strip.channel.value, fs, span)
        self._request()

    def _brushed(self, span) -> None:
        self._strip.span.value = span

    def _fail(self, group: str, message: str, keys: list[str]) -> None:
        """Record why ``group`` failed and mark the control it names (or those just changed)."""
        self._errors[group] = message
        controls = self._all_controls()
        named = self._field_in(message)
        for k in ([named] if named in controls else []) or keys:
            c = controls.get(k)
            if isinstance(c, FieldControl):
                c.set_invalid(message)
        self._show_status()

    def _field_in(self, message: str) -> str | None:
        m = _FIELD_IN_MESSAGE.search(message)
        if m is None:
            return None
        field, owner = m.groups()
        if owner == "Autocorrelation" and field not in self._shared:
            return f"acf_{field}"
        return field

    @staticmethod
    def _clear_marks(controls: dict[str, FieldControl]) -> None:
        for c in controls.values():
            if c.invalid:
                c.set_invalid(None)

    # ------------------------------------------------------------------ compute
    def _request(self) -> None:
        loop = _running_loop()
        if loop is None or _executing_a_cell():
            self._run()
            return
        if self._handle is None:
            self._handle = loop.call_later(COALESCE_SECONDS, self._run_deferred)
            if self._slow:
                self._status.value = "<span class='sb-muted'>computing…</span>"
                self._set_status_class("busy")

    def _run_deferred(self) -> None:
        self._handle = None
        try:
            self._run()
        except Exception as e:  # never let an error escape into the event loop
            _log.exception("Workbench: unexpected error")
            self._errors["internal"] = f"Internal error: {type(e).__name__}: {e}; please report."
            self._show_status()

    def flush(self) -> None:
        """Compute a deferred update now (for code that drives controls inside a kernel)."""
        if self._handle is not None:
            self._handle.cancel()
            self._handle = None
            self._run()

    def _select(self, sel: _Selection):
        cached = self._selected_cache.get(sel)
        if cached is not None:
            return cached
        # the freeze layer's Selection is the one order of steps (rate, channel, span) that the
        # frozen code repeats, so the workbench analyses exactly the samples the code will
        channel = sel.channel if self._signal.n_channels > 1 else None
        sig = Selection(channel=channel, span=sel.span, fs=sel.fs).apply(self._signal)
        self._selected_cache[sel] = sig
        while len(self._selected_cache) > 8:
            self._selected_cache.popitem(last=False)
        return sig

    def _estimate(self, est, sig, sel: _Selection):
        key = (est, sel)
        hit = self._results.get(key)
        if hit is not None:
            self._results.move_to_end(key)
            return hit
        fast = self._rebanded(est, sel)
        if fast is not None:
            return fast
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            result = est(sig)
        for w in caught:
            if issubclass(w.category, SpecbenchWarning):
                self._notes.append(str(w.message))
            else:
                _log.warning("%s: %s", w.category.__name__, w.message)
        size = getattr(result, "freq", None)
        size = (size if size is not None else result.lag).size
        if size <= RESULT_CACHE_MAX_BINS:
            self._results[key] = result
            while len(self._results) > RESULT_CACHE:
                self._results.popitem(last=False)
        return result

    def _rebanded(self, est, sel: _Selection):
        """The spectrum on screen with the band at a new confidence, when only that changed."""
        spec = self._spectrum
        if (spec is None or sel != self._sel or not isinstance(est, SpectralEstimator)
                or self._est is None or est.confidence == self._est.confidence
                or est != self._est.replace(confidence=est.confidence)):
            return None
        t0 = time.perf_counter()
        spec = spec.with_confidence(est.confidence)
        spec.info["compute_seconds"] = time.perf_counter() - t0
        return spec

    def _attempt(self, est, sig, sel):
        """``(result, None)`` or ``(None, message)``; unexpected errors are logged."""
        try:
            return self._estimate(est, sig, sel), None
        except SpecbenchError as e:
            return None, str(e)
        except Exception as e:
            _log.exception("Workbench: unexpected error computing %r", est)
            return None, f"Internal error: {type(e).__name__}: {e}; please report."

    def _run(self) -> None:
        """Compute what the pending settings need and put it on screen; never raises."""
        t0 = time.perf_counter()
        sel = self._next_sel or self._sel
        est = self._next_est or self._est
        corr = self._next_corr or self._corr_est
        changed, self._changed = self._changed, set()
        self._notes = []
        self._errors.pop("code", None)
        self._errors.pop("internal", None)
        sel_changed = sel != self._sel
        need_psd = sel_changed or est != self._est or self._spectrum is None
        need_acf = sel_changed or corr != self._corr_est or self._correlation is None
        if not (need_psd or need_acf):
            # the controls ask for what is on screen: earlier failures no longer apply
            self._next_sel = self._next_est = self._next_corr = None
            for group in ("psd", "acf", "data"):
                self._errors.pop(group, None)
            self._clear_marks({k: self._all_controls()[k] for k in DATA_KEYS})
            if "build-psd" not in self._errors:
                self._clear_marks(self._spec_ctrls)
            if "build-acf" not in self._errors:
                self._clear_marks(self._acf_ctrls)
            self._show_status()
            return
        sel_keys = [k for k in changed if k in ("channel", "fs", "span")] or ["span"]
        try:
            sig = self._select(sel)
        except SpecbenchError as e:
            self._fail("data", str(e), sel_keys)
            return
        spec = corr_res = None
        psd_err = acf_err = None
        if need_psd:
            spec, psd_err = self._attempt(est, sig, sel)
            # a field carried over by a method switch that this data refuses goes back
            while psd_err and self._field_in(psd_err) in self._carried:
                name = self._field_in(psd_err)
                own = self._carried.pop(name)
                self._notes.append(f"{name}={getattr(est, name)!r} was not carried over to "
                                   f"{type(est).__name__}: {psd_err}")
                est = est.replace(**{name: own})
                self._applying += 1
                try:
                    self._spec_ctrls[name].set_value_quietly(own)
                finally:
                    self._applying -= 1
                spec, psd_err = self._attempt(est, sig, sel)
            self._carried = {}
        if need_acf:
            corr_res, acf_err = self._attempt(corr, sig, sel)
        if sel_changed and self._sel is not None and (psd_err or acf_err):
            # a new selection is taken whole or not at all: both views show the same data
            msg = psd_err or acf_err
            self._fail("data", "The new data selection was not applied: " + msg, sel_keys)
            for k in sel_keys:  # the change that failed, besides the field the message names
                self._all_controls()[k].set_invalid(msg)
            return
        self._errors.pop("data", None)
        if sel_changed:
            self._sel, self._next_sel = sel, None
            for k in ("channel", "fs", "span"):
                self._all_controls()[k].set_invalid(None)
            ctx = Context(sig.n_samples, sig.fs)
            for c in [*self._control_cache.values(), *self._acf_ctrls.values()]:
                c.set_context(ctx)
        if psd_err:
            self._fail("psd", psd_err, [k for k in changed if not k.startswith("acf_")] or ["method"])
        elif spec is not None:
            self._est, self._spectrum, self._spectrum1 = est, spec, spec.channel(0)
            self._next_est = None
            self._errors.pop("psd", None)
            if "build-psd" not in self._errors:
                self._clear_marks(self._spec_ctrls)
                self._method.set_invalid(None)
        if acf_err:
            self._fail("acf", acf_err, [k for k in changed if k.startswith("acf_") or k in self._shared]
                       or ["acf_max_lag"])
        elif corr_res is not None:
            self._corr_est, self._correlation, self._correlation1 = corr, corr_res, corr_res.channel(0)
            self._next_corr = None
            self._errors.pop("acf", None)
            if "build-acf" not in self._errors:
                self._clear_marks(self._acf_ctrls)
        if spec is None and corr_res is None and not sel_changed:
            self._show_status()
            return
        self._suggest()
        self._draw(data=sel_changed)
        self._last_update = time.perf_counter() - t0
        self._slow = self._last_update > 0.25
        self._show_status()

    def _suggest(self) -> None:
        """Preset "auto" controls with what auto resolved to, so unticking starts there."""
        info = self._spectrum.info if self._spectrum is not None else {}
        alias = {"segment_length": "nperseg"}
        for name, c in self._spec_ctrls.items():
            if isinstance(c, OptionalControl) and c.value is None:
                v = info.get(name, info.get(alias.get(name, ""), None))
                if v is None:
                    v = getattr(self._est, f"n_{name}", None)
                if isinstance(v, (int, float)):
                    c.suggest(v)
        if self._correlation is not None:
            c = self._acf_ctrls.get("acf_max_lag")
            if isinstance(c, OptionalControl):
                c.suggest(float(self._correlation.lag[-1]))

    def _draw(self, data: bool) -> None:
        """Update every mark, the readouts and the figures of merit in one synchronised step."""
        pins_psd = [(p._spectrum1, p.color, p.line_style) for p in self._pins]
        pins_acf = [(p._correlation1, p.color, p.line_style) for p in self._pins]
        holds = []
        for view in (self._psd, self._acf):
            holds += [view.figure, view.band, view.line, view.ax_y, view.xs, view.ys, *view.pin_lines]
        holds += [self._merit.widget, self._strip.trace, self._strip.figure]
        with contextlib.ExitStack() as stack:
            for w in holds:
                stack.enter_context(w.hold_sync())
            if self._spectrum1 is not None:
                self._psd.show(self._spectrum1, pins_psd)
            if self._correlation1 is not None:
                self._acf.show(self._correlation1, pins_acf)
            if self._spectrum1 is not None:
                self._merit.show(spectrum_merits(self._spectrum1, self._correlation1))
            if data:
                sel = self._sel
                sig = self._select(sel)
                index = self._signal.channels.index(sel.channel)
                unit = self._signal.units()[index]
                self._strip.show(index, sig.fs, unit, sel.span, sig.n_samples)

    # ------------------------------------------------------------------ status
    def _set_status_class(self, kind: str) -> None:
        for k in ("error", "note", "busy"):
            self._status.remove_class(f"sb-status-{k}")
        if kind != "ok":
            self._status.add_class(f"sb-status-{kind}")

    def _show_status(self) -> None:
        import html

        if self._errors:
            msgs = list(dict.fromkeys(self._errors.values()))
            kept = " The last good estimate stays on screen." if self._spectrum is not None else ""
            self._status_text = "Not applied: " + " | ".join(msgs) + kept
            self._status.value = ("<span class='sb-err'>Not applied:</span> "
                                  + " <br>".join(html.escape(m) for m in msgs)
                                  + (f" <span class='sb-muted'>{kept.strip()}</span>" if kept else ""))
            self._set_status_class("error")
            return
        if self._spectrum is None:
            self._status_text = ""
            self._status.value = ""
            return
        sig_n = self._spectrum.samples_used
        text = f"{self._est!r} on {sig_n:,} samples · update {duration(self._last_update)}"
        if self._notes:
            self._status_text = "Note: " + " | ".join(self._notes) + " — " + text
            self._status.value = ("<span class='sb-note'>Note:</span> " + html.escape(" | ".join(self._notes))
                                  + f" <span class='sb-muted'>{html.escape(text)}</span>")
            self._set_status_class("note")
        else:
            self._status_text = text
            self._status.value = f"<span class='sb-muted'>{html.escape(text)}</span>"
            self._set_status_class("ok")

    # ------------------------------------------------------------------ pins
    def _free_style(self) -> tuple[str, str]:
        used = {(p.color, p.line_style) for p in self._pins}
        return next(s for s in PIN_STYLES if s not in used)

    def _relabel(self) -> None:
        auto = auto_labels([p.settings for p in self._pins], [p.estimator for p in self._pins])
        for p, label in zip(self._pins, auto):
            if not p.user_label:
                p.label = label

    def _redraw_pins(self) -> None:
        self._board.show(self._pins)
        self._draw(data=False)

    def pin(self, label: str | None = None) -> Pin:
        """Pin the estimate on screen (both views); ``label`` defaults to what sets it apart.

        Raises :class:`~specbench.SpecbenchError` (and says so in the status line) when
        eight pins are already on screen or there is no estimate to pin.
        """
        if self._spectrum is None or self._correlation is None:
            raise SpecbenchError("There is no estimate on screen to pin yet; fix the setting the status "
                                 "line names first.")
        if len(self._pins) >= MAX_PINS:
            msg = (f"{MAX_PINS} pins are on screen, the most the views can tell apart. Remove one "
                   "(× in the pin table) or all of them before pinning another.")
            self._errors["pins"] = msg
            self._show_status()
            raise SpecbenchError(msg)
        self._errors.pop("pins", None)
        color, dash = self._free_style()
        sel = self._sel
        fs = self._spectrum.fs
        p = Pin(
            label=label or "", estimator=self._est, correlation_estimator=self._corr_est,
            spectrum=self._spectrum, correlation=self._correlation, channel=sel.channel, span=sel.span,
            fs=fs, color=color, line_style=dash, user_label=bool(label),
            settings=settings_of(self._est, self._corr_est, sel.channel, sel.span, fs, self._shared),
        )
        p._spectrum1, p._correlation1 = self._spectrum1, self._correlation1
        self._pins.append(p)
        self._relabel()
        self._redraw_pins()
        self._show_status()
        return p

    def remove_pin(self, which: int | str | Pin) -> None:
        """Remove one pin, by position, label or the Pin itself."""
        if isinstance(which, Pin):
            idx = next((i for i, p in enumerate(self._pins) if p is which), None)
        elif isinstance(which, str):
            idx = next((i for i, p in enumerate(self._pins) if p.label == which), None)
        else:
            idx = int(which) if -len(self._pins) <= int(which) < len(self._pins) else None
        if idx is None:
            raise SpecbenchError(f"No pin {which!r}; the pins are {[p.label for p in self._pins]}.")
        del self._pins[idx]
        self._errors.pop("pins", None)
        self._relabel()
        self._redraw_pins()
        self._show_status()

    def clear_pins(self) -> None:
        """Remove every pin."""
        self._pins.clear()
        self._errors.pop("pins", None)
        self._redraw_pins()
        self._show_status()

    @_guarded
    def _pin_from_ui(self) -> None:
        with contextlib.suppress(SpecbenchError):  # the message is in the status line
            self.pin()

    @_guarded
    def _remove_from_ui(self, i: int) -> None:
        self.remove_pin(i)

    @_guarded
    def _clear_from_ui(self) -> None:
        self.clear_pins()

    # ------------------------------------------------------------------ public surface
    @property
    def signal(self):
        """The Signal the workbench was given (before channel, span and rate choices)."""
        return self._signal

    @property
    def data_name(self) -> str:
        return self._data_name

    @property
    def selected(self):
        """The Signal analysed: the chosen channel, rate and span (a view of the record)."""
        return self._select(self._sel)

    @property
    def estimator(self) -> SpectralEstimator:
        """The PSD estimator of the estimate on screen; set it to recompute (synchronously)."""
        return self._est

    @estimator.setter
    def estimator(self, est: SpectralEstimator) -> None:
        est = self._check_spectral(est)
        corr = self._corr_est.replace(**{k: getattr(est, k) for k in self._shared_names(type(est))})
        self._set_from_code(est, corr)

    @property
    def correlation_estimator(self) -> Autocorrelation:
        """The autocorrelation estimator on screen; set it to recompute (synchronously)."""
        return self._corr_est

    @correlation_estimator.setter
    def correlation_estimator(self, corr: Autocorrelation) -> None:
        corr = self._check_corr(corr)
        est = self._est.replace(**{k: getattr(corr, k) for k in self._shared})
        self._set_from_code(est, corr)

    def _set_from_code(self, est, corr) -> None:
        """Apply estimators given in code, all or nothing, before returning.

        A failing estimate leaves everything as it was (the controls included), says why
        in the status line and raises the error to the caller.
        """
        if self._handle is not None:
            self._handle.cancel()
            self._handle = None
        before = (self._est, self._corr_est)
        self._apply_to_controls(est, corr)
        for k in ("build-psd", "build-acf"):
            self._errors.pop(k, None)
        self._next_est, self._next_corr = est, corr
        self._run()
        if (self._est, self._corr_est) != (est, corr):
            msg = next((self._errors[k] for k in ("psd", "acf", "data", "internal") if k in self._errors),
                       "The estimator could not be applied.")
            for k in ("psd", "acf"):
                self._errors.pop(k, None)
            self._errors["code"] = msg
            self._apply_to_controls(*before)
            self._next_est = self._next_corr = None
            self._show_status()
            raise InputError(msg)

    @property
    def channel(self) -> str | None:
        """The channel analysed (None for a one-channel signal, as the freeze state has it)."""
        return self._sel.channel if self._signal.n_channels > 1 else None

    @property
    def span(self) -> tuple[float, float] | None:
        """The analysis span in seconds from the record start (None: whole record)."""
        return self._sel.span

    @property
    def fs_override(self) -> float | None:
        """The sample rate set in place of the signal's (None: the signal's own)."""
        return self._sel.fs

    @property
    def spectrum(self):
        """The full-resolution Spectrum on screen (``estimator(selected)``)."""
        return self._spectrum

    @property
    def correlation(self):
        """The full-resolution Correlation on screen (``correlation_estimator(selected)``)."""
        return self._correlation

    @property
    def pins(self) -> tuple[Pin, ...]:
        return tuple(self._pins)

    @property
    def status(self) -> str:
        """The status line as plain text: the last update, a note, or why a setting failed."""
        return self._status_text

    @property
    def controls(self) -> types.MappingProxyType:
        """Control widgets by name (read-only mapping); set a control's ``value`` to drive it."""
        return types.MappingProxyType(self._all_controls())

    @property
    def figures(self) -> dict:
        """The bqplot Figures: ``{"overview", "psd", "acf"}``."""
        return {"overview": self._strip.figure, "psd": self._psd.figure, "acf": self._acf.figure}

    @property
    def merits(self) -> dict:
        """The figures of merit on screen, by key (``resolution``, ``dof``, ``band_db``, ...)."""
        return self._merit.as_dict()

    def read(self, view: str, x: float) -> str:
        """The readout text of ``view`` ("psd" or "acf") at ``x`` (Hz or s), as the read tool gives it."""
        return {"psd": self._psd, "acf": self._acf}[view].read_at(x)

    def mark_points(self) -> dict[str, int]:
        """Points held by every mark on screen (band rows counted), by ``view/mark``."""
        out = {f"psd/{k}": v for k, v in self._psd.marks_points().items()}
        out.update({f"acf/{k}": v for k, v in self._acf.marks_points().items()})
        out["overview/trace"] = self._strip.marks_points()
        return out

    # ------------------------------------------------------------------ freeze
    def freeze_state(self):
        """Everything the frozen code cell depends on (:class:`specbench.freeze.FreezeState`)."""
        return FreezeState(
            signal=self._signal, data_name=self._data_name, channel=self.channel, span=self.span,
            fs_override=self.fs_override, estimator=self._est, correlation_estimator=self._corr_est,
            spectrum=self._spectrum, correlation=self._correlation,
        )

    def code(self, style: str = "specbench") -> str:
        """A code cell reproducing the estimates on screen (``style="specbench"`` or ``"scipy"``)."""
        from ..freeze import code_cell

        return code_cell(self.freeze_state(), style=style)

    def freeze(self, path: Any = None, *, style: str = "specbench") -> str:
        """Freeze the settings on screen: a code cell inserted below (and a settings file at ``path``).

        Run it in a cell, not from a widget callback (see :func:`specbench.freeze.freeze`).
        """
        from ..freeze import freeze

        return freeze(self.freeze_state(), path=path, style=style)

    def __repr__(self) -> str:
        sel = self._sel or self._next_sel
        return (f"<Workbench {self._est!r} · {self._corr_est!r} on channel {sel.channel!r}"
                f"{'' if sel.span is None else f', span {sel.span}'}; {len(self._pins)} pin(s)>")

