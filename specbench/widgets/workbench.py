"""The Workbench: a Signal bound to named analyses (PSD, autocorrelation, ...) with live views.

A thin facade over its parts, one job each:

- :mod:`._analysis` — what each named analysis estimates, shows, pins and freezes;
- :mod:`._session` — the analysis state and the transactional update (pure Python);
- :mod:`._controller` — the event loop: control events and code requests in, one
  synchronised draw and the status line out (pure Python; it holds no widget);
- :mod:`._binding` — the controls generated for each analysis, read and written;
- :mod:`._scheduler` — when an update computes (now, coalesced, or in a worker thread);
- :mod:`._status` — the status line's text, :mod:`._statusline` — its widgets and the progress
  row; :mod:`._pins` — pins and the pin table; the panels (data strip, views, figures of
  merit, freeze panel) in their own modules.

Behaviour
---------
- A control change builds a candidate estimator (a :class:`~specbench.SettingsError` marks
  the control named by the error's ``field`` and shows the message beside it and in the
  status line), then the analyses that need it compute and commit in one synchronised draw.
- A change made by code (a cell, a script, a test) computes before it returns; so does
  setting :attr:`Workbench.estimator`.  A front-end change is coalesced; a long one runs in
  a worker thread with a progress bar and a Cancel button.
- When a change needs both quick analyses and slow ones (the noise model of a long record
  re-fits on every new data selection), the quick ones (the main analysis always among them)
  commit first, the new data selection with them, and the slow ones follow in the worker
  thread.  Until they do, their views say which earlier selection they show, are dimmed,
  and stay out of overlays, figures of merit, pins and the frozen cell.  The first estimate
  of a workbench built in a kernel is staged the same way; :meth:`Workbench.flush` waits.
- A failing setting leaves the last good estimate on screen; nothing raises into the front
  end.  :attr:`Workbench.estimator` is always the estimator of the estimate on screen.
- Data-preparation fields (``group="data"``: ``detrend``, ``gaps``) have one control in the
  data strip, shared by every analysis whose estimator has the same field.
"""

from __future__ import annotations

import logging
import types
from typing import Any

import ipywidgets as W

from .._errors import InputError, SettingsError, SpecbenchError
from ..freeze._state import FreezeState
from ._analysis import Analysis, carry_over, registered_analyses, spectral_classes
from ._binding import ControlBinding, section
from ._controller import Controller
from ._datastrip import DataStrip
from ._export import export_control as _export_control
from ._merit import MeritPanel
from ._pins import Pin, Pins
from ._scheduler import COALESCE_SECONDS, Scheduler
from ._session import Context, DataSelection, Session, gap_defaults
from ._statusline import StatusLine
from ._style import gapped, style_sheet
from ._viewhost import HostContext

__all__ = ["Workbench", "spectral_classes", "carry_over", "COALESCE_SECONDS"]

_log = logging.getLogger("specbench.widgets")
# no handler of our own: tracebacks go where the user's logging config sends them, and never
# into a cell's output through logging's last-resort handler
_log.addHandler(logging.NullHandler())


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
    """Interactive named analyses (PSD, autocorrelation, ...) of a Signal, with controls for every setting.

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
    analyses : list of Analysis, optional
        The named analyses (default: every registered one, see
        :func:`specbench.widgets.register_analysis`; ``psd`` and ``acf`` first).
    estimators : dict, optional
        Initial estimator of other analyses, by name.

    Attributes
    ----------
    estimator, correlation_estimator
        The estimators of the estimates on screen (get and set).
    spectrum, correlation
        Full-resolution results on screen (``estimator(selected signal)``).
    analyses : dict
        Analysis name -> :class:`~specbench.widgets.Analysis`; :meth:`result` gives each result.
    pins : tuple of Pin
    status : str
        The status line (plain text).
    controls : mapping
        Control widget by name: ``"channel"``, ``"fs"``, ``"span"``, ``"method"``, the
        fields of the current PSD estimator, ``"acf_<field>"`` for the autocorrelation
        fields (``"<prefix><field>"`` for other analyses), the view options ``"plot_as"``
        and ``"freq_axis"``.  Each has a ``value``.
    figures : dict
        The bqplot Figures: ``"overview"``, ``"psd"``, ``"acf"`` and one per other analysis.

    Notes
    -----
    CSS classes (stable selectors): ``sb-workbench``, ``sb-datastrip``, ``sb-overview``,
    ``sb-controls``, ``sb-control`` and ``sb-control-<field>`` (underscores as hyphens),
    ``sb-invalid`` on a control holding a failing setting and ``sb-control-message`` (the
    message beside it), ``sb-psd``, ``sb-acf``, ``sb-view-<analysis>``, ``sb-readout``,
    ``sb-status`` (with ``sb-status-error`` / ``sb-status-note`` / ``sb-status-busy``),
    ``sb-progress`` (``sb-progress-bar``, ``sb-progress-text``, ``sb-cancel``), ``sb-merit``,
    ``sb-pins``, ``sb-pin-button``, ``sb-pin-clear``, ``sb-pin-row``, ``sb-pin-remove``.
    """

    def __init__(self, signal: Any, estimator: Any = None, *, correlation_estimator: Any = None,
                 data_name: str = "x", channel: str | int | None = None,
                 span: tuple[float, float] | None = None, fs: float | None = None,
                 analyses: list[Analysis] | None = None, estimators: dict[str, Any] | None = None) -> None:
        super().__init__()
        self._signal = _as_signal(signal)
        if not isinstance(data_name, str) or not data_name.isidentifier():
            raise SettingsError(f"data_name must be a Python identifier; got {data_name!r}.")
        self._data_name = data_name
        if analyses is None:
            analyses = [cls() for cls in registered_analyses()]
        analyses = [a() if isinstance(a, type) else a for a in analyses]
        if not analyses or not all(isinstance(a, Analysis) for a in analyses):
            raise SettingsError("analyses must be a non-empty list of specbench.widgets.Analysis objects.")
        for a in analyses:  # analyses that write their own data lines name the in-memory data
            if hasattr(a, "data_name"):
                a.data_name = data_name
        wanted = dict(estimators or {})
        if estimator is not None:
            wanted["psd"] = estimator
        if correlation_estimator is not None:
            wanted["acf"] = correlation_estimator
        unknown = set(wanted) - {a.name for a in analyses}
        if unknown:
            raise SettingsError(f"No analysis named {sorted(unknown)}; the analyses are {[a.name for a in analyses]}.")
        ch = self._channel_name(channel)
        sel = DataSelection(ch, fs, None if span is None else tuple(float(s) for s in span))
        gap_note = gap_defaults(self._signal, wanted, analyses)
        self._session = Session(self._signal, analyses, wanted, sel)

        # panels; their events go to the controller (made below, once every panel exists)
        self._strip = DataStrip(self._signal)
        self._strip.on_brush = lambda span: setattr(self._strip.span, "value", span)  # as if typed
        self._hosts = {name: slot.analysis.make_view() for name, slot in self._session.slots.items()}
        self._merit = MeritPanel()
        self._pins = Pins(self._session, lambda: self._ctl.draw(data=False), lambda: self._ctl.show_status())
        self._statusline = StatusLine(self.cancel)
        for name, host in self._hosts.items():
            for option in host.controls().values():
                if hasattr(option, "on_problem"):
                    option.on_problem = lambda key, message: self._ctl.view_problem(key, message)
            if hasattr(host, "bind"):  # views that read the record or propose an estimator
                host.bind(HostContext(selected=lambda: self.selected, estimator=lambda n=name: self.estimator_of(n),
                                      apply=lambda est, n=name: self._ctl.apply_from_ui(n, est)))
        self._binding = ControlBinding(self._session, lambda key: self._ctl.on_field(key),
                                       lambda name: self._ctl.on_method(name), self._context)
        self._binding.strip_box = self._strip.fields_box
        self._panel = self._freeze_panel()
        self._ctl = Controller(self._session, self._signal, binding=self._binding, strip=self._strip,
                               hosts=self._hosts, merit=self._merit, statusline=self._statusline,
                               pins=lambda: self._pins.items, panel=lambda: self._panel, gap_note=gap_note)
        self._scheduler = self._ctl.scheduler = Scheduler(lambda *a: self._ctl.run(*a))

        # controls, set to the starting state without events
        for key, c in (("channel", self._strip.channel), ("fs", self._strip.rate), ("span", self._strip.span)):
            c.observe(lambda ch, k=key: self._ctl.on_selection(k), names="value")
        self._binding.applying += 1
        try:
            self._strip.channel.set_value_quietly(ch)
            self._strip.rate.set_value_quietly(fs)
            self._strip.span.set_value_quietly(sel.span)
        finally:
            self._binding.applying -= 1
        for name, slot in self._session.slots.items():
            self._binding.cls[name] = type(slot.est)
        self._binding._rebuild()
        for name, slot in self._session.slots.items():
            self._binding.show(name, slot.est)

        views = gapped(W.HBox([h.widget for h in self._hosts.values()],
                              layout=W.Layout(width="100%", flex_flow="row wrap")), "medium")
        main = gapped(W.VBox([gapped(self._binding.box, "wide"), views,
                              self._statusline.progress, self._statusline.line,
                              section("Figures of merit"), self._merit.widget,
                              *[w for h in self._hosts.values() if hasattr(h, "panels")
                                for title, panel in h.panels() for w in (section(title), panel)],
                              section("Pins"), self._pins.board.widget,
                              section("Picture"), _export_control(self)],
                             layout=W.Layout(width="100%")), "small")
        children = [style_sheet(), self._strip.widget, main]
        if self._panel is not None:
            children += [section("Freeze"), self._panel]
        self.children = children
        self.add_class("sb-workbench")
        # in a kernel, slow analyses (a noise model of a long record) follow in the background
        self._ctl.run(True, stage=True)

    # ------------------------------------------------------------------ construction helpers
    def _channel_name(self, channel: Any) -> str:
        names = list(self._signal.channels)
        if channel is None:
            return names[0]
        if isinstance(channel, bool) or not isinstance(channel, (str, int)):
            raise SettingsError(f"channel must be a channel name or index; got {channel!r}. "
                                f"The channels are {names}.", field="channel")
        return self._signal.channel(channel).channels[0]

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
        s = self._session
        sel = s.next_sel or s.sel
        try:
            sig = s.select(sel)
            return Context(sig.n_samples, sig.fs)
        except SpecbenchError:
            return Context(self._signal.n_samples, self._signal.fs)

    # ------------------------------------------------------------------ compute
    def flush(self) -> None:
        """Compute a deferred update now (for code that drives controls inside a kernel)."""
        self._scheduler.flush()

    @property
    def busy(self) -> bool:
        """True while a computation runs in the background."""
        return self._scheduler.busy

    def cancel(self) -> bool:
        """Stop the computation running in the background (True when one was running).

        The last good estimate stays on screen and the status line says so.
        """
        return self._scheduler.cancel()

    @property
    def progress(self) -> float | None:
        """Fraction done of the background computation (None when none runs)."""
        return self._scheduler.progress if self._scheduler.busy else None

    # ------------------------------------------------------------------ pins
    def pin(self, label: str | None = None) -> Pin:
        """Pin the estimates on screen (every view); ``label`` defaults to what sets it apart.

        Raises :class:`~specbench.SpecbenchError` (and says so in the status line) when
        eight pins are already on screen or there is no estimate to pin.
        """
        return self._pins.pin(label)

    def remove_pin(self, which: int | str | Pin) -> None:
        """Remove one pin, by position, label or the Pin itself."""
        self._pins.remove(which)

    def clear_pins(self) -> None:
        """Remove every pin."""
        self._pins.clear()

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
        return self._session.select(self._session.sel or self._session.next_sel)

    @property
    def analyses(self) -> types.MappingProxyType:
        """Analysis name -> :class:`~specbench.widgets.Analysis` (read-only mapping, in order)."""
        return types.MappingProxyType({n: s.analysis for n, s in self._session.slots.items()})

    def result(self, name: str) -> Any:
        """The full-resolution result of analysis ``name`` on screen (None before a first estimate)."""
        return self._session.result(name)

    def estimator_of(self, name: str) -> Any:
        """The estimator of analysis ``name`` on screen."""
        self._session.result(name)  # names the analyses when ``name`` is unknown
        return self._session.slots[name].est

    def set_estimator(self, name: str, est: Any) -> None:
        """Set the estimator of analysis ``name`` and recompute before returning (all or nothing)."""
        self._ctl.set_from_code(self._ctl.wanted_with(name, est))

    @property
    def estimator(self) -> Any:
        """The PSD (main) estimator of the estimate on screen; set it to recompute (synchronously)."""
        return self._session.main.est

    @estimator.setter
    def estimator(self, est: Any) -> None:
        self.set_estimator(self._session.main.name, est)

    @property
    def correlation_estimator(self) -> Any:
        """The autocorrelation estimator on screen; set it to recompute (synchronously)."""
        slot = self._session.slots.get("acf")
        return None if slot is None else slot.est

    @correlation_estimator.setter
    def correlation_estimator(self, corr: Any) -> None:
        if "acf" not in self._session.slots:
            raise SpecbenchError("This workbench has no autocorrelation analysis.")
        self.set_estimator("acf", corr)

    @property
    def channel(self) -> str | None:
        """The channel analysed (None for a one-channel signal, as the freeze state has it)."""
        sel = self._session.sel or self._session.next_sel
        return sel.channel if self._signal.n_channels > 1 else None

    @property
    def span(self) -> tuple[float, float] | None:
        """The analysis span in seconds from the record start (None: whole record)."""
        return (self._session.sel or self._session.next_sel).span

    @property
    def fs_override(self) -> float | None:
        """The sample rate set in place of the signal's (None: the signal's own)."""
        return (self._session.sel or self._session.next_sel).fs

    @property
    def spectrum(self):
        """The full-resolution Spectrum on screen (``estimator(selected)``)."""
        slot = self._session.slots.get("psd")
        return None if slot is None else slot.result

    @property
    def correlation(self):
        """The full-resolution Correlation on screen (``correlation_estimator(selected)``)."""
        slot = self._session.slots.get("acf")
        return None if slot is None else slot.result

    @property
    def pins(self) -> tuple[Pin, ...]:
        return tuple(self._pins.items)

    @property
    def status(self) -> str:
        """The status line as plain text: the last update, a note, or why a setting failed."""
        return self._statusline.current(self._ctl.status(), bool(self._session.errors)).text

    @property
    def controls(self) -> types.MappingProxyType:
        """Control widgets by name (read-only mapping); set a control's ``value`` to drive it."""
        return types.MappingProxyType(self._ctl.all_controls())

    @property
    def figures(self) -> dict:
        """The bqplot Figures: ``{"overview", "psd", "acf", ...}`` (one per analysis)."""
        out = {"overview": self._strip.figure}
        out.update({name: host.figure for name, host in self._hosts.items()})
        return out

    @property
    def views(self) -> dict:
        """The view of each analysis, by name."""
        return dict(self._hosts)

    @property
    def merits(self) -> dict:
        """The figures of merit on screen, by key (``resolution``, ``dof``, ``band_db``, ...)."""
        return self._merit.as_dict()

    @property
    def _psd(self):
        return self._hosts["psd"].view

    @property
    def _acf(self):
        return self._hosts["acf"].view

    def read(self, view: str, x: float) -> str:
        """The readout text of ``view`` (an analysis name, e.g. "psd" or "acf") at ``x`` (Hz or s)."""
        return self._hosts[view].read(x)

    def mark_points(self) -> dict[str, int]:
        """Points held by every mark on screen (band rows counted), by ``view/mark``."""
        out = {}
        for name, host in self._hosts.items():
            out.update({f"{name}/{k}": v for k, v in host.marks_points().items()})
        out["overview/trace"] = self._strip.marks_points()
        return out

    # ------------------------------------------------------------------ freeze
    def freeze_state(self):
        """Everything the frozen code cell depends on (:class:`specbench.freeze.FreezeState`)."""
        s = self._session
        extra, options = {}, {}
        for n, x in s.slots.items():
            if n not in ("psd", "acf"):
                if s.stale(x):  # still showing an earlier data selection: frozen once it is current
                    continue
                est, opts = x.analysis.settings_entry(x.est)
                if est is None:  # the analysis does not apply to this data (e.g. cross on one channel)
                    continue
                extra[n] = est
                if opts:
                    options[n] = opts
        lines = {}
        for n, x in s.slots.items():  # psd / acf: lines after the freeze layer's own (e.g. measurements)
            if s.current(x) or n in extra:
                got = x.analysis.freeze_lines(x.est, "{sig}")
                if got:
                    lines[n] = got
        return FreezeState(
            signal=self._signal, data_name=self._data_name, channel=self.channel, span=self.span,
            fs_override=self.fs_override, estimator=self.estimator, correlation_estimator=self.correlation_estimator,
            spectrum=self.spectrum, correlation=self.correlation, analyses=extra, options=options,
            code_lines=lines,
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

    def export(self, path: Any, *, theme: str = "light", scale: float = 2.0):
        """Write the views as shown (traces, bands, pins' legend, axis labels, a caption of the
        settings) to ``path``: ``.svg``, or ``.png`` (needs resvg-py: ``pip install "specbench[export]"``).

        ``theme`` is ``"light"`` or ``"dark"`` (JupyterLab's theme colours); ``scale`` the PNG's
        pixels per SVG unit. Returns the path written. The widget's "Export picture" button does
        the same.
        """
        from ._export import export_bench

        return export_bench(self, path, theme=theme, scale=scale)

    def __repr__(self) -> str:
        s = self._session
        sel = s.sel or s.next_sel
        ests = " · ".join(repr(x.est) for x in s.slots.values())
        return (f"<Workbench {ests} on channel {sel.channel!r}"
                f"{'' if sel.span is None else f', span {sel.span}'}; {len(self._pins.items)} pin(s)>")
