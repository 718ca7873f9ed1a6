"""Adapters from the PSD and autocorrelation views (:mod:`._views`) to the analysis view protocol.

A view host has ``widget`` (the box laid out in the Workbench), ``figure``,
``show(shown, pinned)`` (``pinned``: ``[(shown result, colour, dash)]``), ``holds()`` (the
widgets held in sync while drawing), ``controls()`` (display-only controls by key, never part
of an estimator), ``marks_points()`` and ``read(x)``; optionally ``set_overlays(overlays)``
(model curves of other analyses, :meth:`Analysis.overlays`, set before each ``show``).
"""

from __future__ import annotations

from typing import Any

import ipywidgets as W

from ._views import CorrelationView, SpectrumView

__all__ = ["TraceHost", "SpectrumHost", "CorrelationHost", "DisplayOption"]


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

    def controls(self):
        return dict(self._options)

    def holds(self) -> list:
        return super().holds() + list(self.view.overlay_lines.values())

    def set_overlays(self, overlays: list) -> None:
        """Model curves of other analyses over the PSD (:class:`._views.Overlay`)."""
        self.view.set_overlays(overlays)


class CorrelationHost(TraceHost):
    view_class = CorrelationView
