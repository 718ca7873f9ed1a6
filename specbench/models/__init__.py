"""Noise models for Kalman filter tuning: Allan deviation, fitted noise terms, discrete Q and R."""

from ._allan import AllanDeviation, AllanResult

__all__ = ["AllanDeviation", "AllanResult"]
