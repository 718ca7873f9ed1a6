"""The Workbench widget and its parts (ipywidgets + bqplot; install the ``lab`` extra).

Layout (one job per module):

- ``workbench`` — the :class:`Workbench` facade;
- ``_analysis`` — the named analyses (:class:`Analysis`, :func:`register_analysis`), pure Python;
- ``_session`` — the analysis state and its transactional update, pure Python;
- ``_controller`` — the event loop (events in, one synchronised draw and the status out),
  pure Python: it reaches the panels only through the methods it calls on them;
- ``_binding`` — controls generated for each analysis and bound to it;
- ``_scheduler`` — now / coalesced / background-thread computes, progress and cancel;
- ``_status`` — the status line's text (pure Python); ``_statusline`` — its widgets and the
  progress row; ``_pins`` — pins (pin / remove / clear) and the pin table;
- ``_export`` — ``bench.export`` (SVG / PNG) and its toolbar button;
- panels: ``_datastrip``, ``_controls`` (from the constraint tables), ``_viewhost`` (analysis
  views over ``_views``), ``_merit``, ``freeze_panel``; ``_reduce`` and ``_style``.

Stable CSS classes for browser tests
------------------------------------
``sb-workbench`` (the whole widget), ``sb-datastrip``, ``sb-overview`` (overview figure),
``sb-data-info``, ``sb-controls`` (the control column), ``sb-control`` and
``sb-control-<field>`` on every control (underscores as hyphens, e.g.
``sb-control-segment-length``, ``sb-control-acf-max-lag``, ``sb-control-method``,
``sb-control-channel``, ``sb-control-fs``, ``sb-control-span``), ``sb-invalid`` on a
control holding a failing setting and ``sb-control-message`` beside it, ``sb-psd`` and
``sb-acf`` (the two figures), ``sb-view-<analysis>``, ``sb-readout``, ``sb-status`` (plus
``sb-status-error`` / ``sb-status-note`` / ``sb-status-busy``), ``sb-progress``,
``sb-cancel``, ``sb-merit`` (with ``sb-merit-<key>`` cells), ``sb-pins``,
``sb-pin-button``, ``sb-pin-clear``, ``sb-pin-row``, ``sb-pin-remove``.
"""

from ._analysis import Analysis, CorrelationAnalysis, SpectrumAnalysis, register_analysis

__all__ = ["Workbench", "Analysis", "SpectrumAnalysis", "CorrelationAnalysis", "register_analysis"]


def __getattr__(name):
    if name == "Workbench":
        from . import (
            _cross_view,  # noqa: F401  (registers the cross-channel analysis)
            _noise_view,  # noqa: F401  (registers the noise-model analysis)
        )
        from .workbench import Workbench

        return Workbench
    raise AttributeError(name)
