"""Noise terms fitted to the Allan variance, with intervals, and the model's curves.

The Allan variance of a sum of independent noises is the sum of their Allan variances
(IEEE Std 952-1997 Annex C, "IEEE Standard Specification Format Guide and Test Procedure
for Single-Axis Interferometric Fiber Optic Gyros"; relations from memory)::

    white (angle random walk N, unit/sqrt(Hz)):   N^2 / tau
    bias instability B (unit):                    (2 ln 2 / pi) B^2   (flat at 0.664 B)
    rate random walk K (unit sqrt(Hz)):           K^2 tau / 3
    quantization Q (unit s):                      3 Q^2 / tau^2
    first-order Gauss-Markov (sigma, T):          (2 sigma^2 T / tau) [1 - T/(2 tau) (3 - 4 e^{-tau/T} + e^{-2 tau/T})]

(the Gauss-Markov relation is common practice; memory).  N, K and Q are defined with
the TWO-SIDED power spectral density of the rate (IEEE 952): white S(f) = N^2.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from scipy import optimize, stats

from .._errors import InputError, SpecbenchError
from ._allan import AllanDeviation, AllanResult
from ._kalman import CAUTION, discrete_model

__all__ = ["fit_noise", "rank_terms", "NoiseModel", "Term", "Estimate", "NoiseFitError", "TERMS", "CAUTION",
           "CANDIDATES"]

TERMS = ("white", "bias_instability", "random_walk", "gauss_markov", "quantization")
_BI = 2.0 * math.log(2.0) / math.pi

class NoiseFitError(SpecbenchError, ValueError):
    """A requested noise term cannot be identified or separated from the record."""


@dataclass(frozen=True)
class Estimate:
    """A fitted quantity with its interval (at the fit's confidence)."""

    value: float
    lower: float
    upper: float
    stderr: float
    unit: str = ""

    def __repr__(self) -> str:
        u = f" {self.unit}" if self.unit else ""
        return f"{self.value:.5g} [{self.lower:.4g}, {self.upper:.4g}]{u}"


@dataclass(frozen=True)
class Term:
    """One fitted noise term: ``value`` (N, B, K or Q; sigma for Gauss-Markov) with its interval.

    For ``gauss_markov`` the attributes ``sigma`` and ``tau`` are the two parameters.
    """

    name: str
    value: float
    lower: float
    upper: float
    stderr: float
    unit: str
    symbol: str
    sigma: Estimate | None = None
    tau: Estimate | None = None

    def __repr__(self) -> str:
        if self.name == "gauss_markov":
            return f"<Term gauss_markov: sigma = {self.sigma!r}, tau = {self.tau!r}>"
        return f"<Term {self.name}: {self.symbol} = {self.value:.5g} [{self.lower:.4g}, {self.upper:.4g}] {self.unit}>"


def _gm_basis(tau: np.ndarray, t: float) -> np.ndarray:
    r = tau / t
    with np.errstate(over="ignore"):
        small = r < 1e-3
        out = np.empty_like(tau, dtype=float)
        rr = r[~small]
        out[~small] = (2 * t / tau[~small]) * (1 - (3 - 4 * np.exp(-rr) + np.exp(-2 * rr)) / (2 * rr))
        # series for tau << T (r = tau / T): (2 / r) (r^2 / 3 - r^3 / 4 + ...) per unit sigma^2
        rs = r[small]
        out[small] = 2 * rs / 3 - rs**2 / 2
    return out


def _basis(name: str, tau: np.ndarray, t_gm: float | None = None) -> np.ndarray:
    if name == "white":
        return 1.0 / tau
    if name == "bias_instability":
        return np.full_like(tau, _BI, dtype=float)
    if name == "random_walk":
        return tau / 3.0
    if name == "quantization":
        return 3.0 / tau**2
    if name == "gauss_markov":
        return _gm_basis(tau, float(t_gm))
    raise KeyError(name)


def _units(unit: str) -> dict[str, str]:
    u = unit or "unit"
    return {"white": f"{u}/sqrt(Hz)", "bias_instability": u, "random_walk": f"{u}*sqrt(Hz)",
            "quantization": f"{u}*s", "gauss_markov": u}


_SYMBOL = {"white": "N", "bias_instability": "B", "random_walk": "K", "quantization": "Q", "gauss_markov": "sigma"}


@dataclass(frozen=True)
class NoiseModel:
    """Noise terms fitted to an Allan variance; curves and the discrete filter model.

    Attributes
    ----------
    terms : dict name -> :class:`Term`
    allan : the :class:`~specbench.models.AllanResult` fitted
    chi2_per_dof : residual quality: weighted sum of squared residuals of the Allan
        variance divided by (averaging times - parameters); near 1 when the model and the
        dof describe the estimate, much larger when a term is missing
    fit_dof : averaging times minus parameters
    confidence : of every term's interval
    fs : sample rate of the recording (for the quantization term's PSD)
    unit : rate unit
    """

    terms: dict
    allan: AllanResult
    chi2_per_dof: float
    fit_dof: int
    confidence: float
    fs: float
    unit: str
    params: dict = field(default_factory=dict)
    covariance: np.ndarray | None = None
    info: dict = field(default_factory=dict)

    # ---------------------------------------------------------------- curves
    def avar(self, tau: Any) -> np.ndarray:
        """Model Allan variance at averaging times ``tau`` (s)."""
        tau = np.asarray(tau, dtype=float)
        out = np.zeros_like(tau)
        for name, theta in self.params.items():
            if name == "gauss_markov":
                out = out + theta[0] * _basis(name, tau, theta[1])
            else:
                out = out + theta * _basis(name, tau)
        return out

    def adev(self, tau: Any) -> np.ndarray:
        """Model Allan deviation at averaging times ``tau`` (s)."""
        return np.sqrt(self.avar(tau))

    def asymptote(self, name: str, tau: Any) -> np.ndarray:
        """Allan deviation of one term alone (the straight lines of the log-log plot)."""
        tau = np.asarray(tau, dtype=float)
        theta = self.params[name]
        if name == "gauss_markov":
            return np.sqrt(theta[0] * _basis(name, tau, theta[1]))
        return np.sqrt(theta * _basis(name, tau))

    def psd(self, freq: Any, sides: str = "onesided") -> np.ndarray:
        """Model power spectral density of the rate, unit^2/Hz, at ``freq`` (Hz).

        ``sides="onesided"`` (default, specbench's convention: integrates to the variance
        over 0..fs/2) is twice the two-sided density that defines N, K and Q (IEEE 952):
        white ``N^2``, bias instability ``B^2 / (2 pi |f|)``, random walk ``K^2 / (2 pi f)^2``,
        quantization ``4 Q^2 fs sin^2(pi f / fs)``, Gauss-Markov ``2 sigma^2 T / (1 + (2 pi f T)^2)``.
        The 1/f and 1/f^2 terms are infinite at 0 Hz.
        """
        if sides not in ("onesided", "twosided"):
            raise InputError(f"sides must be 'onesided' or 'twosided'; got {sides!r}.")
        f = np.abs(np.asarray(freq, dtype=float))
        out = np.zeros_like(f)
        with np.errstate(divide="ignore"):
            for name, theta in self.params.items():
                if name == "white":
                    out = out + theta
                elif name == "bias_instability":
                    out = out + theta / (2 * np.pi * f)
                elif name == "random_walk":
                    out = out + theta / (2 * np.pi * f) ** 2
                elif name == "quantization":
                    out = out + 4 * theta * self.fs * np.sin(np.pi * f / self.fs) ** 2
                elif name == "gauss_markov":
                    s2, t = theta
                    out = out + 2 * s2 * t / (1 + (2 * np.pi * f * t) ** 2)
        return 2 * out if sides == "onesided" else out

    def kalman(self, dt: float):
        """Discrete model for a filter step ``dt`` (s): see :class:`DiscreteModel`."""
        return discrete_model(self, dt)

    # ---------------------------------------------------------------- text
    def table(self) -> str:
        pct = f"{self.confidence * 100:g} %"
        lines = [f"{'term':<18} {'parameter':<10} {'value':>12} {'lower':>12} {'upper':>12}  unit  ({pct})"]
        for name, t in self.terms.items():
            if name == "gauss_markov":
                lines.append(f"{name:<18} {'sigma':<10} {t.sigma.value:12.5g} {t.sigma.lower:12.5g} "
                             f"{t.sigma.upper:12.5g}  {t.unit}")
                lines.append(f"{'':<18} {'tau':<10} {t.tau.value:12.5g} {t.tau.lower:12.5g} {t.tau.upper:12.5g}  s")
            else:
                lines.append(f"{name:<18} {t.symbol:<10} {t.value:12.5g} {t.lower:12.5g} {t.upper:12.5g}  {t.unit}")
        return "\n".join(lines)

    def __repr__(self) -> str:
        return (f"<NoiseModel fitted to the Allan variance at {self.allan.tau.size} averaging times "
                f"({self.allan.tau[0]:.4g} .. {self.allan.tau[-1]:.4g} s); chi-square per dof "
                f"{self.chi2_per_dof:.3g} ({self.fit_dof} dof); N, K, Q defined with the two-sided "
                f"density (IEEE 952)\n{self.table()}\n{CAUTION}>")


# ------------------------------------------------------------------------------ fit
def _solve(avar: np.ndarray, tau: np.ndarray, dof: np.ndarray, names: list[str], t_gm: float | None,
           iterations: int = 6) -> tuple[np.ndarray, np.ndarray, float]:
    """Iteratively reweighted non-negative least squares on the Allan variance with
    var(avar_i) = 2 model_i^2 / dof_i (chi-square).  Returns (theta, weights, chi2)."""
    a = np.column_stack([_basis(n, tau, t_gm) for n in names])
    model = avar.copy()
    theta = np.zeros(len(names))
    for _ in range(iterations):
        w = dof / (2.0 * np.maximum(model, 1e-300) ** 2)
        sw = np.sqrt(w)
        scale = np.max(np.abs(a * sw[:, None]), axis=0)
        scale[scale == 0] = 1.0
        theta_s, _ = optimize.nnls(a * sw[:, None] / scale, avar * sw)
        theta = theta_s / scale
        new = a @ theta
        if np.all(new > 0):
            model = new
    w = dof / (2.0 * np.maximum(model, 1e-300) ** 2)
    chi2 = float(np.sum(w * (avar - a @ theta) ** 2))
    return theta, w, chi2


def _deviance(avar: np.ndarray, tau: np.ndarray, dof: np.ndarray, names: list[str], t_gm: float) -> float:
    """Gamma deviance of the Allan variances about the model fitted with correlation time ``t_gm``
    (theta from :func:`_solve`): ``sum nu [r - ln(1 + r)]``, ``r = (avar - m) / m``, minus twice the
    log-likelihood up to a constant when each estimate is ``m chi2_nu / nu``, a gamma variate of
    shape nu / 2 (McCullagh & Nelder 1989, "Generalized Linear Models", 2nd ed., section 8.3)."""
    theta = _solve(avar, tau, dof, names, t_gm)[0]
    m = np.maximum(np.column_stack([_basis(n, tau, t_gm) for n in names]) @ theta, 1e-300)
    r = (avar - m) / m
    return float(np.sum(dof * (r - np.log1p(r))))


def fit_noise(
    sig_or_adev: Any,
    terms: tuple[str, ...] = ("white", "bias_instability", "random_walk"),
    *,
    fs: float | None = None,
    channel: int | str = 0,
    estimator: AllanDeviation | None = None,
    confidence: float = 0.683,
    check_input: bool = True,
    replicates: int = 48,
    seed: int = 0,
) -> NoiseModel:
    """Fit named noise terms to the Allan variance of a recording of RATE data.

    Parameters
    ----------
    sig_or_adev : a Signal / array (with ``fs``) of rate samples, or an
        :class:`AllanResult` (from :class:`AllanDeviation`)
    terms : any of ``"white"`` (angle random walk N), ``"bias_instability"`` (B),
        ``"random_walk"`` (rate random walk K), ``"gauss_markov"`` (sigma, tau),
        ``"quantization"`` (Q)
    estimator : the :class:`AllanDeviation` used on data (default octave, overlapping)
    confidence : of the terms' intervals (default 0.683, one standard error)
    check_input : refuse data whose Allan deviation rises as tau^(+1/2) from the shortest
        averaging time (what angle data passed as rate looks like)

    The fit is weighted least squares on the Allan variance with ``var = 2 sigma^4 / dof``
    (the chi-square variance of each estimate), iterated with the model's values in the
    weights, non-negative: the iteratively reweighted scoring of the gamma likelihood each
    estimate has when it is ``model chi2_dof / dof`` (Wedderburn 1974, "Quasi-likelihood
    functions, generalized linear models, and the Gauss-Newton method", Biometrika 61(3),
    439-447).  The Gauss-Markov correlation time T maximises that likelihood too: a profile
    search of the gamma deviance over log T (McCullagh & Nelder 1989, "Generalized Linear
    Models", 2nd ed., section 8.3).  (Minimising the weighted sum of squares over T instead,
    with the model in the weights, favours a larger model and put T +3 % high in geometric
    mean over 1000 simulated records; the deviance, -2 %.)

    Each term's standard error comes from the sandwich covariance ``B J' W S W J B``
    (``B = (J' W J)^-1``, J the Jacobian in (theta..., log T); White 1982, "Maximum likelihood
    estimation of misspecified models", Econometrica 50(1), 1-25, from memory), with ``S`` the
    covariance of the Allan variance estimates taken whole from ``replicates`` records
    simulated from the fitted model (same length, rate and estimator; seeded by ``seed``, so
    the fit repeats bit for bit).  Both parts of S matter: the estimates at neighbouring
    averaging times are correlated (they share the data), and near T the equivalent dof of
    the power-law noise types overstate the real ones (by 9-21 % at tau = 32..256 s for
    T = 30 s, measured over 2000 records), which had made the interval of T cover 0.63
    instead of 0.683.  The interval of a variance-like parameter theta (N^2, B^2, K^2, Q^2,
    sigma^2) is chi-square with Satterthwaite's effective dof ``nu = 2 theta^2 / var(theta)``
    (Satterthwaite 1946, "An approximate distribution of estimates of variance components",
    Biometrics Bulletin 2(6), 110-114); that of T is ``log T +- t sd(log T)`` with t the
    Student quantile for ``replicates - 1`` dof, since ``var(log T)`` is then a sample
    variance over the replicates ("Student" 1908, "The probable error of a mean",
    Biometrika 6(1), 1-25).  ``replicates=0`` ignores the correlation and uses the dof of the
    estimator (normal quantile; intervals then cover too little); ``replicates=1`` is
    refused.  A term is identified when its theta exceeds 1.645 standard errors (t for
    ``replicates - 1`` dof with replicates): a one-sided 5 % test.  Coverage is checked by
    Monte Carlo in tests/models/test_fit.py.
    """
    if isinstance(terms, str):
        terms = (terms,)
    terms = tuple(terms)
    bad = [t for t in terms if t not in TERMS]
    if bad or not terms or len(set(terms)) != len(terms):
        raise NoiseFitError(
            f"terms must be distinct names from {', '.join(map(repr, TERMS))}; got {terms!r}. "
            "For example terms=('white', 'bias_instability', 'random_walk').")
    if isinstance(replicates, bool) or not isinstance(replicates, (int, np.integer)) or replicates < 0 \
            or replicates == 1:
        raise NoiseFitError(
            f"replicates must be 0 or an integer of at least 2; got {replicates!r}. The covariance of the Allan "
            "variances is estimated from the replicate records (use e.g. 48), or ignored with 0.")
    if not (0 < float(confidence) < 1):
        raise NoiseFitError(f"confidence must be in (0, 1); got {confidence!r}. Use e.g. 0.683 or 0.95.")
    if isinstance(sig_or_adev, AllanResult):
        ad = sig_or_adev
    else:
        est = estimator if estimator is not None else AllanDeviation()
        if not isinstance(est, AllanDeviation):
            raise NoiseFitError(f"estimator must be an sb.AllanDeviation; got {est!r}.")
        ad = est(sig_or_adev, fs=fs)
    ad = ad.channel(channel)
    unit = ad.unit if isinstance(ad.unit, str) else (ad.unit[0] if ad.unit else "")
    tau, avar, dof = ad.tau, ad.variance, ad.dof.astype(float)
    ok = np.isfinite(avar) & (avar > 0)
    tau, avar, dof = tau[ok], avar[ok], dof[ok]
    if check_input and ad.estimator.input == "rate" and tau.size >= 3:
        slope = np.log(avar[2] / avar[0]) / np.log(tau[2] / tau[0])
        if slope > 0.7:
            raise InputError(
                f"The Allan deviation rises as tau^{slope / 2:+.2f} from the shortest averaging time "
                f"({tau[0]:g} s): that is what an angle (integrated rate, or phase) record looks like when it "
                "is read as rate. fit_noise assumes RATE samples (deg/s, m/s^2). If the data is an angle, pass "
                "estimator=sb.AllanDeviation(input='angle'); if it really is a rate dominated by a random walk "
                "at every averaging time, pass check_input=False.", field="input", owner="AllanDeviation")
    npar = len(terms) + (1 if "gauss_markov" in terms else 0)
    if tau.size < npar + 1:
        raise NoiseFitError(
            f"{len(terms)} terms ({npar} parameters) need at least {npar + 1} averaging times; the Allan "
            f"deviation has {tau.size} ({tau[0]:g} .. {tau[-1]:g} s). Use a longer record, denser averaging "
            "times (taus='decade' or explicit), or fewer terms.")
    names = list(terms)
    t_gm = None
    if "gauss_markov" in names:
        grid = np.exp(np.linspace(np.log(tau[0] / 3), np.log(tau[-1] * 3), 49))
        best = min((_deviance(avar, tau, dof, names, t), t) for t in grid)[1]
        res = optimize.minimize_scalar(lambda lt: _deviance(avar, tau, dof, names, math.exp(lt)),
                                       bounds=(math.log(best) - 0.2, math.log(best) + 0.2), method="bounded",
                                       options={"xatol": 1e-6})
        t_gm = float(math.exp(res.x))
    theta, w, chi2 = _solve(avar, tau, dof, names, t_gm)
    # Jacobian of the model avar with respect to the parameters (theta..., log T)
    cols = [_basis(n, tau, t_gm) for n in names]
    if t_gm is not None:
        gi = names.index("gauss_markov")
        h = 1e-4
        d = (_basis("gauss_markov", tau, t_gm * math.exp(h))
             - _basis("gauss_markov", tau, t_gm * math.exp(-h))) / (2 * h)
        cols.append(theta[gi] * d)
    jac = np.column_stack(cols)
    info_m = jac.T @ (w[:, None] * jac)
    fit_dof = int(tau.size - npar)
    try:
        bread = np.linalg.inv(info_m)
    except np.linalg.LinAlgError:
        bread = np.full(info_m.shape, np.inf)
    cov = bread
    corr_avar = None
    if replicates and np.all(np.isfinite(bread)):
        params0 = {n: (theta[i], t_gm) if n == "gauss_markov" else theta[i] for i, n in enumerate(names)}
        s_mat = _replicate_covariance(params0, ad, ok, int(replicates), int(seed))
        sd_avar = np.sqrt(np.diag(s_mat))
        with np.errstate(invalid="ignore", divide="ignore"):
            corr_avar = np.nan_to_num(s_mat / np.outer(sd_avar, sd_avar))
        wj = w[:, None] * jac
        cov = bread @ (wj.T @ s_mat @ wj) @ bread
    sd = np.sqrt(np.abs(np.diag(cov)))
    with np.errstate(invalid="ignore", divide="ignore"):
        corr = cov / np.outer(sd, sd)
    labels = names + (["gauss_markov tau"] if t_gm is not None else [])
    model_now = jac[:, : len(names)] @ theta
    # -- separation: two parameters the data cannot tell apart
    for i in range(len(labels)):
        for j in range(i + 1, len(labels)):
            if not np.isfinite(corr[i, j]) or abs(corr[i, j]) > 0.985:
                raise NoiseFitError(
                    f"The terms {labels[i]!r} and {labels[j]!r} cannot be separated from this record: their "
                    f"fitted values are correlated {corr[i, j]:+.3f} over the averaging times "
                    f"{tau[0]:g} .. {tau[-1]:g} s. Drop one of them (terms=...), or use a record whose averaging "
                    "times reach where each dominates.")
    # -- identifiability: each term must be resolved from zero: a one-sided test at the
    # 5 % level that its variance-like parameter is positive (theta > 1.645 stderr; Student's
    # t for replicates - 1 dof when the stderr comes from the replicates)
    q95 = float(stats.t.ppf(0.95, replicates - 1)) if corr_avar is not None else 1.645
    for i, name in enumerate(names):
        th, s = theta[i], sd[i]
        if th > 0 and q95 * s < th:
            continue
        up = max(th + 2 * s, 1e-300)
        others = model_now - theta[i] * cols[i]
        raise NoiseFitError(_not_identified(name, th, s, up, tau, others, t_gm, ad, q95))
    if t_gm is not None and not (tau[0] <= t_gm <= tau[-1]):
        raise NoiseFitError(
            f"The Gauss-Markov correlation time fitted, {t_gm:.4g} s, lies outside the averaging times "
            f"{tau[0]:g} .. {tau[-1]:g} s, so it cannot be told from a white or random-walk term. A record "
            f"of at least 10 x tau = {10 * t_gm:.4g} s (and samples faster than tau / 10) is needed, or drop "
            "'gauss_markov'.")
    # quantile of the interval on log T: Student's t when var(log T) comes from the replicates
    z = float(stats.t.ppf((1 + confidence) / 2, replicates - 1) if corr_avar is not None
              else stats.norm.ppf((1 + confidence) / 2))
    units = _units(unit)
    out_terms: dict[str, Term] = {}
    params: dict[str, Any] = {}
    for i, name in enumerate(names):
        th, s = float(theta[i]), float(sd[i])
        rel = s / th  # relative stderr of theta (a variance-like parameter)
        # chi-square interval with Satterthwaite's effective dof nu = 2 theta^2 / var(theta):
        # theta is a weighted sum of Allan variances (each scaled chi-square), and at the long
        # averaging times that carry K or the Gauss-Markov sigma those have few dof, so its
        # distribution is skewed; a normal interval on log(theta) misses more often below
        # than above (measured: tests/models/test_fit.py coverage case)
        nu = 2.0 / rel**2 if rel > 0 else math.inf
        if math.isfinite(nu):
            lo = th * nu / float(stats.chi2.ppf((1 + confidence) / 2, nu))
            hi = th * nu / float(stats.chi2.ppf((1 - confidence) / 2, nu))
        else:
            lo = hi = th
        val = math.sqrt(th)
        se = 0.5 * val * rel
        if name == "gauss_markov":
            lt = float(sd[-1])
            sig = Estimate(val, math.sqrt(lo), math.sqrt(hi), se, units[name])
            tt = Estimate(t_gm, t_gm * math.exp(-z * lt), t_gm * math.exp(z * lt), t_gm * lt, "s")
            out_terms[name] = Term(name, val, sig.lower, sig.upper, se, units[name], "sigma", sigma=sig, tau=tt)
            params[name] = (th, t_gm)
        else:
            out_terms[name] = Term(name, val, math.sqrt(lo), math.sqrt(hi), se, units[name], _SYMBOL[name])
            params[name] = th
    return NoiseModel(
        terms=out_terms, allan=ad, chi2_per_dof=chi2 / max(1, fit_dof), fit_dof=fit_dof,
        confidence=float(confidence), fs=ad.fs, unit=unit, params=params, covariance=cov,
        info={"correlation": corr, "labels": labels, "avar_correlation": corr_avar, "replicates": replicates,
              "seed": seed},
    )


#: term sets :func:`rank_terms` tries, simplest first
CANDIDATES = (
    ("white",),
    ("white", "random_walk"),
    ("white", "bias_instability"),
    ("white", "gauss_markov"),
    ("white", "bias_instability", "random_walk"),
    ("white", "gauss_markov", "random_walk"),
)


def rank_terms(allan: AllanResult, candidates: Any = CANDIDATES, *, channel: int | str = 0) -> list[tuple]:
    """Term sets the Allan deviation supports, best first.

    Each candidate is fitted without the between-tau correlation (``replicates=0``: fast);
    the ones whose every term is identified and separable are ranked by Akaike's criterion
    on the fit's weighted residuals, ``chi2 + 2 p`` (p parameters; Akaike 1974, "A new look
    at the statistical model identification", IEEE Trans. Automatic Control 19(6)).  A set
    ranked here can still be refused by the full fit (its intervals are wider): try them in
    order.  Raises :class:`NoiseFitError` when no candidate fits.
    """
    scored = []
    reasons = []
    for terms in candidates:
        try:
            m = fit_noise(allan, terms=tuple(terms), channel=channel, replicates=0, check_input=False)
        except NoiseFitError as e:
            reasons.append(f"{'+'.join(terms)}: {e}")
            continue
        npar = len(terms) + (1 if "gauss_markov" in terms else 0)
        scored.append((m.chi2_per_dof * m.fit_dof + 2 * npar, len(scored), tuple(terms)))
    if not scored:
        raise NoiseFitError("No term set can be fitted to this Allan deviation: " + " ".join(reasons[:1])
                            + " Record longer, or choose the terms yourself.")
    return [t for _, _, t in sorted(scored)]


def _not_identified(name: str, th: float, s: float, up: float, tau: np.ndarray, others: np.ndarray,
                    t_gm: float | None, ad: AllanResult, q95: float = 1.645) -> str:
    record = ad.n / ad.fs
    head = (f"The term {name!r} is not identifiable from this record: fitted {_SYMBOL[name]}^2 = {th:.3g} with "
            f"standard error {s:.3g} (not resolved from zero: theta < {q95:.4g} standard errors) over averaging "
            f"times {tau[0]:g} .. {tau[-1]:g} s of a {record:g} s record.")
    # the averaging time where the term, at its upper bound, would reach the rest of the model
    rest = float(np.interp(0.0, [0.0], [others[-1]])) if others.size else 0.0
    if name == "random_walk":
        # K^2 tau / 3 = rest at tau*: the rest falls as 1/tau (white) or stays flat; use the last points
        lo_tau, lo_rest = tau[-1], max(others[-1], 1e-300)
        slope = np.log(others[-1] / others[-2]) / np.log(tau[-1] / tau[-2]) if others.size > 1 and others[-2] > 0 else 0
        # rest(tau) ~ lo_rest (tau / lo_tau)^slope ; term(tau) = up tau / 3
        level = th if th > 0 else up
        tstar = (3 * lo_rest * lo_tau ** (-slope) / level) ** (1.0 / (1.0 - slope)) if slope < 1 else np.inf
        # averaging times well beyond the crossover, with a few dof there: ~10 tau*, and in
        # any case several times this record (this one did not resolve it)
        need = max(10 * tstar, 4 * record)
        return (head + " A rate random walk of the fitted size would dominate only beyond "
                f"tau ~ {tstar:.3g} s; "
                f"a record of at least ~{need:.3g} s ({need * ad.fs:.3g} samples at {ad.fs:g} Hz) is needed to "
                "see it. Record longer, or drop 'random_walk' from terms.")
    if name in ("white", "quantization"):
        return (head + f" It would show at the shortest averaging times (below {tau[0]:g} s): record at a higher "
                "sample rate, or drop it from terms.")
    if name == "bias_instability":
        return (head + " The flat floor is hidden by the other terms at every averaging time; a longer record "
                "(for the averaging times near the floor) is needed, or drop 'bias_instability'.")
    del rest
    return (head + f" No averaging time of this record is dominated by it (correlation time fitted: {t_gm:.3g} s). "
            "Drop 'gauss_markov', or record at least 10 times the correlation time you expect, sampled "
            "faster than a tenth of it.")


def simulate(params: dict, n: int, fs: float, reps: int, rng: np.random.Generator) -> np.ndarray:
    """``reps`` rate records of ``n`` samples from noise terms ``params`` (name -> theta,
    gauss_markov -> (sigma^2, T)), exact for the sampled white, random-walk, Gauss-Markov and
    quantization terms; bias instability as 1/f noise shaped in the frequency domain."""
    from scipy import signal as _signal

    x = np.zeros((reps, n))
    z = np.empty((reps, n))  # the draws, scaled in place (the same values as a * rng.standard_normal(...))
    for name, th in params.items():
        if name == "white":
            rng.standard_normal(out=z)
            z *= math.sqrt(th * fs)
            x += z
        elif name == "random_walk":
            rng.standard_normal(out=z)
            z *= math.sqrt(th / fs)
            x += np.cumsum(z, axis=-1, out=z)
        elif name == "quantization":
            e = math.sqrt(th) * rng.standard_normal((reps, n + 1))
            x += np.diff(e, axis=-1) * fs
        elif name == "gauss_markov":
            s2, t = th
            phi = math.exp(-1.0 / (fs * t))
            rng.standard_normal(out=z)
            z *= math.sqrt(s2 * (1 - phi**2))
            z[:, 0] = math.sqrt(s2) * rng.standard_normal(reps)
            x += _signal.lfilter([1.0], [1.0, -phi], z, axis=-1)
        elif name == "bias_instability":
            f = np.fft.rfftfreq(n, 1.0 / fs)
            spec = np.zeros_like(f)
            spec[1:] = th / (math.pi * f[1:])  # one-sided B^2 / (pi f)
            amp = np.sqrt(spec * fs * n / 2.0)
            z = rng.standard_normal((reps, f.size)) + 1j * rng.standard_normal((reps, f.size))
            x += np.fft.irfft(amp * z / math.sqrt(2.0), n=n, axis=-1)
    return x


def _replicate_covariance(params: dict, ad: AllanResult, keep: np.ndarray, reps: int, seed: int) -> np.ndarray:
    """Covariance matrix of the Allan variance estimates over averaging times, from ``reps``
    records simulated from the fitted model with the estimator of ``ad``."""
    rng = np.random.default_rng(seed)
    est = ad.estimator.replace(taus=tuple(float(t) for t in ad.tau), input="rate", noise="auto")
    n = int(ad.n if ad.estimator.input == "rate" else ad.n - 1)
    chunk = max(1, int(4_000_000 // max(1, n)))
    rows = []
    for a in range(0, reps, chunk):
        sim = simulate(params, n, ad.fs, min(chunk, reps - a), rng)
        r = est(sim, fs=ad.fs)
        rows.append(np.atleast_2d(r.variance)[:, keep])
    v = np.concatenate(rows)
    return np.atleast_2d(np.cov(v, rowvar=False))
