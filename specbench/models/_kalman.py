"""Discrete-time filter model (F, Q, H, R) from a fitted noise model.

Continuous model of the sensor's slowly varying error (the filter's states)::

    dx/dt = A x + w(t),   E[w(t) w(s)'] = Qc delta(t - s)      (Qc: two-sided density)
    gauss_markov:  dx_g/dt = -x_g / T + w_g,   Qc_g = 2 sigma^2 / T
    random_walk:   dx_r/dt = w_r,              Qc_r = K^2

and the measurement of the rate over one filter step ``dt``::

    z_k = H x_k + v_k,   H = [1, ..., 1],   R = N^2 / dt  (+ 2 Q^2 / dt^2 with quantization)

``N^2 / dt`` is the variance of white rate noise of two-sided density ``N^2`` averaged over
``dt`` (for ``dt = 1/fs``: the per-sample variance ``N^2 fs``).  F and Q are the exact
discretisation of the continuous model by the matrix exponential of Van Loan (1978),
"Computing integrals involving the matrix exponential", IEEE Trans. Automatic Control
23(3), 395-404: with ``M = [[-A, Qc], [0, A']] dt`` and ``expm(M) = [[., E12], [0, E22]]``,
``F = E22'`` and ``Q = F E12``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np
from scipy import linalg

from .._errors import InputError

if TYPE_CHECKING:  # the fitted model uses this module, never the other way round
    from ._fit import NoiseModel

#: the caution every noise model and discrete model carries (README's safety note)
CAUTION = (
    "Caution: a noise model from one static recording does not capture temperature, vibration or "
    "aging effects. A filter tuned from it must be validated on the target system (for example by "
    "innovation consistency tests), and safety-related applications follow their own codes and "
    "qualified practice."
)

__all__ = ["DiscreteModel", "discrete_model", "van_loan"]

CONVENTION = (
    "Convention: N, K and Q of the model are defined with the two-sided power spectral density of the "
    "rate (IEEE Std 952-1997); the continuous driving-noise densities Qc are two-sided; Q is the "
    "per-step covariance of the discrete process noise; R is the per-step variance of the rate "
    "measurement averaged over dt (R = N^2 / dt, unit^2, not per root hertz)."
)


def van_loan(a: np.ndarray, qc: np.ndarray, dt: float) -> tuple[np.ndarray, np.ndarray]:
    """``F = expm(A dt)`` and ``Q = int_0^dt expm(A s) Qc expm(A s)' ds`` (Van Loan 1978)."""
    n = a.shape[0]
    if n == 0:
        return np.zeros((0, 0)), np.zeros((0, 0))
    m = np.zeros((2 * n, 2 * n))
    m[:n, :n] = -a
    m[:n, n:] = qc
    m[n:, n:] = a.T
    e = linalg.expm(m * dt)
    f = e[n:, n:].T
    q = f @ e[:n, n:]
    return f, 0.5 * (q + q.T)


@dataclass(frozen=True)
class DiscreteModel:
    """``x_{k+1} = F x_k + w_k`` (cov Q), ``z_k = H x_k + v_k`` (var R), for step ``dt``.

    ``states`` names the state of each row (the noise terms with a finite state model:
    ``gauss_markov``, ``random_walk``).  ``left_out`` names fitted terms with no
    finite-dimensional state model (``bias_instability``: flicker noise) that are NOT in
    F and Q; cover them with a Gauss-Markov term if the filter needs them.
    """

    F: np.ndarray
    Q: np.ndarray
    H: np.ndarray
    R: np.ndarray
    dt: float
    states: tuple[str, ...]
    left_out: tuple[str, ...]
    unit: str
    convention: str = CONVENTION

    def __repr__(self) -> str:
        def mat(a: np.ndarray) -> str:
            return np.array2string(a, precision=6, separator=", ") if a.size else "[] (no states)"

        left = (f"\nLeft out (no finite state model): {', '.join(self.left_out)}." if self.left_out else "")
        return (f"<DiscreteModel for a filter step dt = {self.dt:g} s, states {list(self.states)}, unit {self.unit}\n"
                f"F = {mat(self.F)}\nQ = {mat(self.Q)}\nH = {mat(self.H)}\nR = {mat(self.R)}\n"
                f"{self.convention}{left}\n{CAUTION}>")


def discrete_model(model: NoiseModel, dt: float) -> DiscreteModel:
    """The :class:`DiscreteModel` of ``model`` for the filter step ``dt`` (s)."""
    try:
        dtv = float(dt)
    except (TypeError, ValueError):
        raise InputError(f"The filter step dt must be a positive number of seconds; got {dt!r}.") from None
    if not math.isfinite(dtv) or dtv <= 0:
        raise InputError(
            f"The filter step dt must be a positive, finite number of seconds; got {dt!r}. "
            f"Pass the filter's update interval, e.g. dt={1 / model.fs:g} (one sample at {model.fs:g} Hz).")
    states, diag_a, diag_q = [], [], []
    p = model.params
    if "gauss_markov" in p:
        s2, t = p["gauss_markov"]
        states.append("gauss_markov")
        diag_a.append(-1.0 / t)
        diag_q.append(2.0 * s2 / t)
    if "random_walk" in p:
        states.append("random_walk")
        diag_a.append(0.0)
        diag_q.append(p["random_walk"])
    a = np.diag(diag_a) if states else np.zeros((0, 0))
    qc = np.diag(diag_q) if states else np.zeros((0, 0))
    f, q = van_loan(a, qc, dtv)
    h = np.ones((1, len(states)))
    r = p.get("white", 0.0) / dtv + 2.0 * p.get("quantization", 0.0) / dtv**2
    left = tuple(n for n in p if n == "bias_instability")
    return DiscreteModel(F=f, Q=q, H=h, R=np.array([[r]]), dt=dtv, states=tuple(states), left_out=left,
                         unit=model.unit)
