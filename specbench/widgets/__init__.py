"""The Workbench widget and its panels (ipywidgets + bqplot; install the ``lab`` extra).

Panels, one module each: the data strip (``_datastrip``), the controls generated from the
estimators' constraint tables (``_controls``), the PSD and autocorrelation views
(``_views``), the figures of merit (``_merit``), the pins (``_pins``), the display
reductions (``_reduce``) and the style sheet (``_style``).

Stable CSS classes for browser tests
------------------------------------
``sb-workbench`` (the whole widget), ``sb-datastrip``, ``sb-overview`` (overview figure),
``sb-data-info``, ``sb-controls`` (the control column), ``sb-control`` and
``sb-control-<field>`` on every control (underscores as hyphens, e.g.
``sb-control-segment-length``, ``sb-control-acf-max-lag``, ``sb-control-method``,
``sb-control-channel``, ``sb-control-fs``, ``sb-control-span``), ``sb-invalid`` on a
control holding a failing setting, ``sb-psd`` and ``sb-acf`` (the two figures),
``sb-readout``, ``sb-status`` (plus ``sb-status-error`` / ``sb-status-note`` /
``sb-status-busy``), ``sb-merit`` (with ``sb-merit-<key>`` cells), ``sb-pins``,
``sb-pin-button``, ``sb-pin-clear``, ``sb-pin-row``, ``sb-pin-remove``.
"""

from .workbench import Workbench

__all__ = ["Workbench"]
