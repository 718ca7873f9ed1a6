"""Adapters from the PSD and autocorrelation views (:mod:`._views`) to the analysis view protocol.

A view host has ``widget`` (the box laid out in the Workbench), ``figure``,
``show(shown, pinned)`` (``pinned``: ``[(shown result, colour, dash)]``), ``holds()`` (the
widgets held in sync while drawing), ``controls()`` (display-only controls by key, never part
of an estimator), ``marks_points()`` and ``read(x)``.
"""

from __future__ import annotations

from typing import Any

import ipywidgets as W

from ._views import CorrelationView, SpectrumView

__all__ = ["TraceHost", "SpectrumHost", "CorrelationHost"]


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

    def controls(self):
        return {"plot_as": self.view.plot_as, "freq_axis": self.view.freq_axis}


class CorrelationHost(TraceHost):
    view_class = CorrelationView
