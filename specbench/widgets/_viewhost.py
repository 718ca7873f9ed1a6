"""Adapters from the PSD and autocorrelation views (:mod:`._views`) to the analysis view protocol.

A view host has ``widget`` (the box laid out in the Workbench), ``figure``,
``show(shown, pinned)`` (``pinned``: ``[(shown result, colour, dash)]``), ``holds()`` (the
widgets held in sync while drawing), ``controls()`` (display-only controls by key, never part
of an estimator), ``marks_points()`` and ``read(x)``; optionally ``set_overlays(overlays)``
(model curves of other analyses, :meth:`Analysis.overlays`, set before each ``show``),
``panels()`` (``[(title, widget)]`` laid out under the figures of merit) and ``bind(context)``
(a :class:`HostContext`: the selected record, the analysis's estimator on screen, and a way
to propose another one, computed like a control change).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import ipywidgets as W

from ._views import CorrelationView, SpectrumView

__all__ = ["TraceHost", "SpectrumHost", "CorrelationHost", "DisplayOption", "HostContext"]


@dataclass(frozen=True)
class HostContext:
    """What the Workbench gives a view that needs more than its result (see ``bind``)."""

    #: callable() -> the selected Signal (channel, rate, span)
    selected: Any
    #: callable() -> the analysis's estimator on screen
    estimator: Any
    #: callable(estimator): show it in the controls and compute it (a refusal goes to the status line)
    apply: Any


class DisplayOption:
    """A view's display option (a drop-down or toggle) as a control: a value outside its
    options is refused with a message on the control, never a raw trait error."""

    def __init__(self, key: str, widget: Any, label: str) -> None:
        self.key = key
        self.widget = widget
        self.label = label
        self.message: str | None = None
        self.on_problem: Any = None  # set by the workbench: callable(key, message or None)

    def _values(self) -> list:
        return [o[1] if isinstance(o, tuple) else o for o in self.widget.options]

    @property
    def value(self) -> Any:
        return self.widget.value

    @value.setter
    def value(self, value: Any) -> None:
        values = self._values()
        if value not in values:
            msg = f"The {self.label} must be one of {values}; got {value!r}."
            if self.on_problem is not None:
                self.on_problem(self.key, msg)
            return
        self.widget.value = value
        if self.on_problem is not None:
            self.on_problem(self.key, None)

    def observe(self, *args: Any, **kwargs: Any) -> None:
        self.widget.observe(*args, **kwargs)

    def set_invalid(self, message: str | None) -> None:
        self.message = message
        if message:
            self.widget.add_class("sb-invalid")
        else:
            self.widget.remove_class("sb-invalid")
        self.widget.tooltip = message or getattr(self, "_tooltip", self.widget.tooltip)

    @property
    def invalid(self) -> bool:
        return self.message is not None


class TraceHost:
    view_class: type = SpectrumView

    def __init__(self, analysis: Any) -> None:
        self.analysis = analysis
        self.view = self.view_class()
        self.figure = self.view.figure
        self.widget = W.VBox([self.view.header, self.view.figure, self.view.footer],
                             layout=W.Layout(flex="1 1 0", min_width="250px"))
        self.widget.add_class(f"sb-view-{analysis.name}")

    def show(self, shown: Any, pinned: list[tuple[Any, str, str]]) -> None:
        if shown is not None:
            self.view.show(shown, [p for p in pinned if p[0] is not None])

    def holds(self) -> list:
        v = self.view
        return [v.figure, v.band, v.line, v.ax_y, v.xs, v.ys, *v.pin_lines]

    def controls(self) -> dict[str, Any]:
        return {}

    def marks_points(self) -> dict[str, int]:
        return self.view.marks_points()

    def read(self, x: float) -> str:
        return self.view.read_at(x)


class SpectrumHost(TraceHost):
    view_class = SpectrumView

    def __init__(self, analysis: Any) -> None:
        super().__init__(analysis)
        self._options = {"plot_as": DisplayOption("plot_as", self.view.plot_as, "plot option"),
                         "freq_axis": DisplayOption("freq_axis", self.view.freq_axis, "frequency axis")}
        for o in self._options.values():
            o._tooltip = o.widget.tooltip

        from ._measure import MeasureState
        from ._measure_view import AdvisePanel, MeasureLayer, MeasurePanel

        state = getattr(analysis, "measure", None)
        self.measure = state if isinstance(state, MeasureState) else MeasureState()
        self.layer = MeasureLayer(self.view, self.measure, on_band=self._band)
        self.table = MeasurePanel(self.view, self.measure, self._remeasure)
        self.advise = AdvisePanel()
        self.widget.children = [*self.widget.children, self.table.readout, self.table.controls]

    def controls(self):
        return dict(self._options)

    def show(self, shown: Any, pinned: list[tuple[Any, str, str]]) -> None:
        if shown is not None:
            self._read(shown)
        super().show(shown, pinned)
        self.table.show(self.view.result)

    def _read(self, spec: Any) -> None:
        try:
            self.measure.read(spec)
        except Exception as e:  # a reading never breaks the view of the estimate
            self.table.message = f"no measurements ({type(e).__name__}: {e})"

    def _band(self, f1: float, f2: float) -> None:
        self.table.set_band(f1, f2)

    def _remeasure(self) -> None:
        """The user changed a cursor: read again and redraw the layer and the table."""
        spec = self.view.result
        if spec is None:
            return
        self._read(spec)
        self.view.redraw()
        self.table.show(spec)

    def panels(self) -> list:
        return [("Measurements", self.table.widget), ("Advise settings", self.advise.widget)]

    def bind(self, context: HostContext) -> None:
        self.advise.get_selected = context.selected
        self.advise.get_estimator = context.estimator
        self.advise.apply = context.apply

    def holds(self) -> list:
        return super().holds() + list(self.view.overlay_lines.values()) + self.layer.holds()

    def set_overlays(self, overlays: list) -> None:
        """Model curves of other analyses over the PSD (:class:`._views.Overlay`)."""
        self.view.set_overlays(overlays)


class CorrelationHost(TraceHost):
    view_class = CorrelationView
