"""sb.fit_noise and model.kalman: simulated records with known terms (intervals and their
Monte Carlo coverage), the imu-static demo, Van Loan against closed forms, a closed-loop
Kalman filter with the normalized innovation squared test, and bad input."""

import math

import numpy as np
import pytest
from scipy import signal, stats

import specbench as sb
from specbench.models import NoiseFitError, van_loan
from specbench.models._fit import simulate


def _closed_loop_record(n, q, r, seed):
    """A scalar random-walk state observed in white noise: x_{k+1} = x_k + w_k (var q),
    z_k = x_k + v_k (var r), fs = 1 Hz."""
    rng = np.random.default_rng(seed)
    x = np.cumsum(rng.standard_normal(n) * math.sqrt(q))
    return x + rng.standard_normal(n) * math.sqrt(r)


def _steady_state_innovations(z, f, q, h, r):
    """Innovations and their variance of the steady-state scalar Kalman filter."""
    assert f == 1.0 and h == 1.0
    p = (q + math.sqrt(q * q + 4 * q * r)) / 2  # predicted covariance: P^2 - qP - qr = 0
    s = p + r
    k = p / s
    # x_pred[k+1] = (1 - K) x_pred[k] + K z[k]
    pred = signal.lfilter([0.0, k], [1.0, -(1.0 - k)], z, zi=[(1 - k) * z[0]])[0]
    pred[0] = z[0]
    return z - pred, s


def test_closed_loop_q_r_and_normalized_innovation_squared():
    q, r = 0.01, 1.0
    z = _closed_loop_record(500_000, q, r, seed=21)
    model = sb.fit_noise(z, fs=1.0, terms=("white", "random_walk"), replicates=16)
    k = model.kalman(1.0)
    # truth: Q = K^2 dt = q, R = N^2 / dt = r (two-sided densities, IEEE Std 952-1997 Annex C)
    assert k.F.shape == (1, 1) and k.F[0, 0] == 1.0 and k.H[0, 0] == 1.0
    assert k.Q[0, 0] == pytest.approx(q, rel=0.03)
    assert k.R[0, 0] == pytest.approx(r, rel=0.03)
    # NIS test (Bar-Shalom, Li & Kirubarajan 2001, "Estimation with Applications to
    # Tracking and Navigation", §5.4.2): the time average of nu^2 / S over n steps times n
    # is chi-square(n); 95 % two-sided acceptance region. A fresh record (not the fitted one).
    fresh = _closed_loop_record(40_000, q, r, seed=22)
    nu, s = _steady_state_innovations(fresh, k.F[0, 0], k.Q[0, 0], k.H[0, 0], k.R[0, 0])
    nis = nu[1000:] ** 2 / s
    n = nis.size
    lo, hi = stats.chi2.ppf([0.025, 0.975], n) / n
    assert lo <= nis.mean() <= hi, (nis.mean(), lo, hi)
    # the test can fail: a filter with R four times too large is rejected
    nu2, s2 = _steady_state_innovations(fresh, 1.0, q, 1.0, 4 * r)
    assert not (lo <= np.mean(nu2[1000:] ** 2 / s2) <= hi)


def test_van_loan_against_closed_forms():
    # first-order Gauss-Markov: F = exp(-dt/T), Q = sigma^2 (1 - exp(-2 dt/T)); random walk:
    # Q = K^2 dt (Brown & Hwang, "Introduction to Random Signals and Applied Kalman
    # Filtering", 4th ed. 2012, ch. 3; memory)
    s2, t, k2, dt = 0.3**2, 12.0, 0.05**2, 0.7
    f, qd = van_loan(np.diag([-1 / t, 0.0]), np.diag([2 * s2 / t, k2]), dt)
    assert f == pytest.approx(np.diag([math.exp(-dt / t), 1.0]), rel=1e-12)
    assert qd == pytest.approx(np.diag([s2 * (1 - math.exp(-2 * dt / t)), k2 * dt]), rel=1e-10, abs=1e-16)
    # integrated random walk (double integrator driven by white noise of density q):
    # Q = q [[dt^3/3, dt^2/2], [dt^2/2, dt]] (common practice)
    f2, q2 = van_loan(np.array([[0.0, 1.0], [0.0, 0.0]]), np.diag([0.0, 2.0]), dt)
    assert f2 == pytest.approx(np.array([[1.0, dt], [0.0, 1.0]]))
    assert q2 == pytest.approx(2.0 * np.array([[dt**3 / 3, dt**2 / 2], [dt**2 / 2, dt]]), rel=1e-12)


def test_kalman_states_repr_and_caution():
    rng = np.random.default_rng(5)
    x = simulate({"white": 1.0, "gauss_markov": (0.04, 50.0)}, 1 << 15, 1.0, 1, rng)[0]
    m = sb.fit_noise(x, fs=1.0, terms=("white", "gauss_markov"))
    k = m.kalman(0.5)
    sig2, t = m.params["gauss_markov"]
    assert k.states == ("gauss_markov",)
    assert k.F[0, 0] == pytest.approx(math.exp(-0.5 / t), rel=1e-12)
    assert k.Q[0, 0] == pytest.approx(sig2 * (1 - math.exp(-1.0 / t)), rel=1e-10)
    assert k.R[0, 0] == pytest.approx(m.params["white"] / 0.5, rel=1e-12)
    text = repr(k)
    for phrase in ("two-sided", "per-step", "temperature, vibration or aging", "validated on the target system",
                   "safety-related applications follow their own codes"):
        assert phrase in text
    assert "safety-related" in repr(m)
    with pytest.raises(sb.SpecbenchError, match=r"filter step dt must be a positive.*got 0"):
        m.kalman(0)
    with pytest.raises(sb.SpecbenchError, match=r"got nan"):
        m.kalman(float("nan"))
    with pytest.raises(sb.SpecbenchError, match=r"got -1"):
        m.kalman(-1)


def test_model_psd_matches_welch_one_sided():
    # reference: scipy.signal.welch (one-sided density) of a simulated record of the model
    rng = np.random.default_rng(6)
    fs = 10.0
    params = {"white": 0.01, "gauss_markov": (0.2, 2.0), "random_walk": 1e-6}
    x = simulate(params, 1 << 19, fs, 1, rng)[0]
    m = sb.fit_noise(x, fs=fs, terms=("white", "gauss_markov"), replicates=8)
    f, p = signal.welch(x, fs=fs, nperseg=4096)
    band = (f > 0.05) & (f < 4.0)
    ratio = p[band] / m.psd(f[band])
    assert np.median(ratio) == pytest.approx(1.0, abs=0.05)
    assert m.psd([1.0], sides="twosided")[0] == pytest.approx(m.psd([1.0])[0] / 2)


def test_model_curves_and_asymptotes():
    rng = np.random.default_rng(7)
    x = simulate({"white": 1.0, "random_walk": 1e-4}, 1 << 16, 1.0, 1, rng)[0]
    m = sb.fit_noise(x, fs=1.0, terms=("white", "random_walk"))
    tau = m.allan.tau
    assert np.allclose(m.adev(tau) ** 2, m.asymptote("white", tau) ** 2 + m.asymptote("random_walk", tau) ** 2)
    # IEEE Std 952-1997 Annex C: N read at tau = 1 s on the -1/2 line, K at tau = 3 s on the +1/2 line
    assert m.asymptote("white", [1.0])[0] == pytest.approx(m.terms["white"].value)
    assert m.asymptote("random_walk", [3.0])[0] == pytest.approx(m.terms["random_walk"].value)
    assert 0.3 < m.chi2_per_dof < 3


def test_imu_static_demo_true_terms_within_their_intervals():
    sig = sb.demo("imu-static")
    params = sig.truth.extras["parameters"]
    for ch, name in enumerate(sig.channels):
        arw, sigma_b, tau_b, rrw, _ = params[name]
        # 99 % intervals: nine parameters are checked at once (with 95 % each, all nine
        # would hold in only ~63 % of recordings; with 99 %, ~91 %)
        m = sb.fit_noise(sig, terms=("white", "gauss_markov"), channel=ch, confidence=0.99, replicates=24)
        w, g = m.terms["white"], m.terms["gauss_markov"]
        assert w.lower <= arw <= w.upper, (name, w)
        assert g.sigma.lower <= sigma_b <= g.sigma.upper, (name, g)
        assert g.tau.lower <= tau_b <= g.tau.upper, (name, g)
    # the demo's rate random walk is far too small for one hour: not identifiable, and
    # the message names the record length it would need
    with pytest.raises(NoiseFitError, match=r"'random_walk' is not identifiable.*record of at least ~[0-9.e+]+ s"):
        sb.fit_noise(sig, terms=("white", "gauss_markov", "random_walk"), replicates=8)


@pytest.mark.slow
@pytest.mark.parametrize("case", ["white+random_walk", "white+gauss_markov"])
def test_fitted_term_interval_coverage_monte_carlo(case):
    """Coverage of the 68.3 % term intervals over simulated records (1000 per case; 2000 for
    white + Gauss-Markov, whose tau interval was the short one), each term within 3 binomial
    standard errors of nominal, sqrt(0.683 * 0.317 / records): 0.044 for 1000, 0.031 for 2000.

    Measured 2026-12-03 (32 replicates each), white + Gauss-Markov (T = 30 s, 2^14 samples,
    2000 records): N 0.669, sigma 0.677, tau 0.688. The earlier tau interval (T from the
    weighted sum of squares, the Allan variances' variances from the estimator's dof, normal
    quantile) covered tau 0.630 and sigma 0.651 on the same 2000 records (measured the same
    day): this test fails on it. White + random walk (1000 records): N 0.667, K 0.664."""
    rng = np.random.default_rng({"white+random_walk": 31, "white+gauss_markov": 32}[case])
    if case == "white+random_walk":
        params, truth = {"white": 1.0, "random_walk": 1e-4}, {"white": 1.0, "random_walk": 1e-2}
        records = 1000
    else:
        params, truth = {"white": 1.0, "gauss_markov": (0.04, 30.0)}, {"white": 1.0, "sigma": 0.2, "tau": 30.0}
        records = 2000
    n, block = 1 << 14, 500
    hits = {k: [] for k in truth}
    for start in range(0, records, block):  # blocks of records: bounded memory
        ad = sb.AllanDeviation()(simulate(params, n, 1.0, block, rng), fs=1.0)
        for i in range(block):
            m = sb.fit_noise(ad, terms=tuple(params), channel=i, replicates=32, seed=start + i)
            for k, v in truth.items():
                t = getattr(m.terms["gauss_markov"], k) if k in ("sigma", "tau") else m.terms[k]
                hits[k].append(t.lower <= v <= t.upper)
    se = math.sqrt(0.683 * 0.317 / records)
    report = {k: float(np.mean(v)) for k, v in hits.items()}
    print(case, f"coverage over {records} records (nominal 0.683, 3 binomial se {3 * se:.3f}):", report)
    for k, cover in report.items():
        assert abs(cover - 0.683) < 3 * se, (case, k, cover, report)


def test_bad_input_names_value_and_fix():
    rng = np.random.default_rng(8)
    rate = rng.standard_normal(50_000)
    angle = np.cumsum(rate)  # an angle record passed as rate
    with pytest.raises(sb.InputError,
                       match=r"rises as tau\^\+0\.\d+ from the shortest.*assumes RATE samples.*input='angle'"):
        sb.fit_noise(angle, fs=1.0, terms=("white",))
    m = sb.fit_noise(angle, fs=1.0, terms=("white",), estimator=sb.AllanDeviation(input="angle"))
    assert m.terms["white"].value == pytest.approx(1.0, rel=0.02)
    with pytest.raises(NoiseFitError, match=r"terms must be distinct names.*'gyro'"):
        sb.fit_noise(rate, fs=1.0, terms=("white", "gyro"))
    with pytest.raises(NoiseFitError, match=r"need at least 5 averaging times"):
        sb.fit_noise(rate[:10], fs=1.0, terms=("white", "random_walk", "gauss_markov"))
    with pytest.raises(NoiseFitError, match=r"'random_walk' is not identifiable.*record of at least"):
        sb.fit_noise(rate[:4096], fs=1.0, terms=("white", "random_walk"))
    nan = rate.copy()
    nan[:] = np.nan
    with pytest.raises(sb.SpecbenchError, match="touches a gap"):
        sb.fit_noise(nan, fs=1.0)
