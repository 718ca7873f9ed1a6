"""Noise models for Kalman filter tuning: Allan deviation, fitted noise terms, discrete Q and R."""

from ._allan import AllanDeviation, AllanResult

__all__ = ["AllanDeviation", "AllanResult"]
from ._fit import CAUTION, Estimate, NoiseFitError, NoiseModel, Term, fit_noise  # noqa: E402
from ._kalman import DiscreteModel, van_loan  # noqa: E402

__all__ += ["CAUTION", "DiscreteModel", "Estimate", "NoiseFitError", "NoiseModel", "Term", "fit_noise", "van_loan"]
