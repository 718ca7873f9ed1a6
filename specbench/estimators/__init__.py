"""Estimation core: windows, spectral and correlation estimators, bands (numpy/scipy only)."""

from ._base import Estimator, estimator_classes, estimator_from_dict
from ._engine import CancelToken
from ._params import ParamSpec
from ._results import Correlation, Spectrum
from .correlation import Autocorrelation, CrossCorrelation
from .covariance import Covariance, CovarianceMatrix
from .cross import CrossSpectrum, CrossSpectrumResult, Delay
from .spectral import Correlogram, Multitaper, Periodogram, SpectralEstimator, Welch
from .windows import WINDOWS, WindowInfo, get_window, window_info

__all__ = [
    "Autocorrelation",
    "CancelToken",
    "Correlation",
    "Correlogram",
    "Covariance",
    "CovarianceMatrix",
    "CrossCorrelation",
    "CrossSpectrum",
    "CrossSpectrumResult",
    "Delay",
    "Estimator",
    "Multitaper",
    "ParamSpec",
    "Periodogram",
    "SpectralEstimator",
    "Spectrum",
    "WINDOWS",
    "Welch",
    "WindowInfo",
    "estimator_classes",
    "estimator_from_dict",
    "get_window",
    "window_info",
]
