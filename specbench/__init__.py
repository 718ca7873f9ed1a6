"""specbench: interactive spectral estimation with honest confidence bands.

>>> import specbench as sb
>>> sig = sb.demo("test-stand")                          # doctest: +SKIP
>>> spec = sb.Welch(segment_length=4096)(sig)            # doctest: +SKIP
"""

from ._errors import InputError, SettingsError, SpecbenchError, SpecbenchWarning
from .estimators import (
    Autocorrelation,
    Correlation,
    Correlogram,
    CrossCorrelation,
    Estimator,
    Multitaper,
    Periodogram,
    Spectrum,
    Welch,
    estimator_from_dict,
    window_info,
)

__version__ = "0.1.0"

__all__ = [
    "Autocorrelation",
    "Correlation",
    "Correlogram",
    "CrossCorrelation",
    "Estimator",
    "InputError",
    "Multitaper",
    "Periodogram",
    "SettingsError",
    "SpecbenchError",
    "SpecbenchWarning",
    "Spectrum",
    "Welch",
    "__version__",
    "estimator_from_dict",
    "window_info",
]

try:  # the data layer (Signal, load, demo) registers converters for pandas/xarray
    from .data import Signal, demo, demos, load  # noqa: F401

    __all__ += ["Signal", "demo", "demos", "load"]
except ImportError:  # pragma: no cover - only while the data layer is being written
    pass

try:  # the Workbench needs the lab extra (ipywidgets, bqplot); specbench imports without it
    from .widgets import Workbench  # noqa: F401

    __all__ += ["Workbench"]
except ImportError as _missing:  # pragma: no cover - only without the lab extra
    if getattr(_missing, "name", None) not in ("ipywidgets", "bqplot", "traitlets"):
        raise
