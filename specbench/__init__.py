"""specbench: interactive spectral estimation with honest confidence bands.

>>> import specbench as sb
>>> sig = sb.demo("test-stand")                          # doctest: +SKIP
>>> spec = sb.Welch(segment_length=4096)(sig)            # doctest: +SKIP
"""

from ._errors import Cancelled, ComputeError, InputError, SettingsError, SpecbenchError, SpecbenchWarning
from ._version import __version__  # noqa: E402
from .estimators import (
    Autocorrelation,
    CancelToken,
    Correlation,
    Correlogram,
    Covariance,
    CovarianceMatrix,
    CrossCorrelation,
    CrossSpectrum,
    CrossSpectrumResult,
    Delay,
    Estimator,
    Multitaper,
    Periodogram,
    Spectrum,
    Welch,
    estimator_from_dict,
    window_info,
)

__all__ = [
    "Autocorrelation",
    "Cancelled",
    "CancelToken",
    "ComputeError",
    "Correlation",
    "Correlogram",
    "Covariance",
    "CovarianceMatrix",
    "CrossCorrelation",
    "CrossSpectrum",
    "CrossSpectrumResult",
    "Delay",
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

from .data import Signal, demo, demos, load  # noqa: E402  (registers the pandas/xarray converters)
from .freeze import (  # noqa: E402
    Fingerprint,
    Settings,
    check_data,
    fingerprint,
    load_settings,
    read_settings,
    save_settings,
)
from .measure import MeasurementError, advise  # noqa: E402

__all__ += ["MeasurementError", "advise"]

from .models import AllanDeviation, AllanResult, DiscreteModel, NoiseFitError, NoiseModel, fit_noise  # noqa: E402

__all__ += ["AllanDeviation", "AllanResult", "DiscreteModel", "NoiseFitError", "NoiseModel", "fit_noise"]

__all__ += ["Signal", "demo", "demos", "load", "Workbench", "Settings", "load_settings", "read_settings",
            "save_settings"]
__all__ += ["Fingerprint", "check_data", "fingerprint"]


def __getattr__(name: str):
    """``sb.Workbench`` is imported on first use: it needs the ``lab`` extra (ipywidgets,
    bqplot, which pulls pandas), and a plain ``import specbench`` must stay light."""
    if name == "Workbench":
        try:
            from .widgets import Workbench
        except ImportError as e:
            raise ImportError(
                f"sb.Workbench needs JupyterLab widgets ({e.name} is missing). "
                'Install them with: pip install "specbench[lab]"'
            ) from e
        globals()["Workbench"] = Workbench
        return Workbench
    raise AttributeError(f"module 'specbench' has no attribute {name!r}")
