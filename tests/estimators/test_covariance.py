"""sb.Covariance: equality with numpy.cov / pandas, and Monte Carlo coverage of its
autocorrelation-aware intervals (Bartlett 1946) against a naive interval."""

import numpy as np
import pytest
import scipy.signal as ss

import specbench as sb


def _ar1_pair(rng, records, n, phi, rho):
    """Two AR(1) channels (coefficient phi) whose innovations correlate by rho."""
    e = rng.standard_normal((records, 2, n + 400))
    e[:, 1] = rho * e[:, 0] + np.sqrt(1 - rho**2) * e[:, 1]
    y = ss.lfilter([1.0], [1.0, -phi], e, axis=-1)[..., 400:]
    var = 1 / (1 - phi**2)
    return y, np.array([[var, rho * var], [rho * var, var]])


def test_matrix_equals_numpy_cov_and_white_effective_samples_near_n():
    # Outside reference: numpy.cov (ddof=1).
    rng = np.random.default_rng(1)
    x = rng.standard_normal((3, 20_000)) + np.array([[1.0], [-2.0], [5.0]])
    x[2] += 0.5 * x[0]
    c = sb.Covariance()(x, fs=10.0)
    np.testing.assert_allclose(c.matrix, np.cov(x), rtol=1e-12)
    np.testing.assert_allclose(c.correlation, np.corrcoef(x), rtol=1e-12)
    np.testing.assert_allclose(c.mean, x.mean(axis=1), rtol=1e-12)
    # white channels: N_eff ~ N (Bartlett's sum reduces to its lag-0 term)
    assert np.all(np.abs(np.diag(c.effective_samples) / 20_000 - 1) < 0.1)
    assert np.all(c.lower <= c.matrix) and np.all(c.matrix <= c.upper)
    assert "3 channels" in repr(c)


def test_float32_and_signal_input():
    rng = np.random.default_rng(2)
    x = rng.standard_normal((2, 5000)).astype(np.float32)
    sig = sb.Signal(x, fs=100.0, channels=["a", "b"], unit="g")
    c = sb.Covariance()(sig)
    np.testing.assert_allclose(c.matrix, np.cov(x.astype(np.float64)), rtol=1e-10)
    assert c.channels == ("a", "b") and c.unit == "g^2"


def test_gaps_use_pairs_present_like_pandas():
    # Outside reference: pandas.DataFrame.cov (pairwise complete observations).
    pd = pytest.importorskip("pandas")
    rng = np.random.default_rng(3)
    x = rng.standard_normal((3, 6000))
    x[0, 100:300] = np.nan
    x[1, 250:900] = np.nan
    c = sb.Covariance(gaps="pairs")(x, fs=1.0)
    np.testing.assert_allclose(c.matrix, pd.DataFrame(x.T).cov().to_numpy(), rtol=1e-12)
    assert c.samples[0, 1] == 6000 - 200 - 650 + 50
    with pytest.raises(sb.InputError, match=r"non-finite sample.*Covariance"):
        sb.Covariance()(x, fs=1.0)


@pytest.mark.slow
def test_intervals_cover_at_nominal_for_strongly_autocorrelated_channels():
    # Monte Carlo over 300 records of two AR(1) channels (phi = 0.95: N_eff ~ N (1 - phi^2)
    # / (1 + phi^2), Bartlett 1946) with correlation 0.6.  The interval from the effective
    # samples covers at nominal; the naive one (var (s_ii s_jj + s_ij^2) / N, white-noise
    # formula, Anderson 2003 "An Introduction to Multivariate Statistical Analysis" sec. 3.3,
    # from memory) covers far less.
    rng = np.random.default_rng(4)
    n, phi = 4000, 0.95
    y, true = _ar1_pair(rng, 300, n, phi, 0.6)
    est = sb.Covariance(confidence=0.9)
    hits, naive, rhits, neff = [], [], [], []
    for rec in y:
        c = est(rec, fs=1.0)
        hits.append((c.lower <= true) & (true <= c.upper))
        rhits.append(c.correlation_lower[0, 1] <= 0.6 <= c.correlation_upper[0, 1])
        d = np.diag(c.matrix)
        sd = np.sqrt((np.outer(d, d) + c.matrix**2) / n)
        naive.append(np.abs(c.matrix - true) <= 1.645 * sd)
        neff.append(c.effective_samples[0, 0])
    rate = np.mean(hits, axis=0)
    assert np.all(np.abs(rate - 0.9) < 0.045), rate
    assert np.mean(rhits) == pytest.approx(0.9, abs=0.045)
    assert np.all(np.mean(naive, axis=0) < 0.5)
    assert np.median(neff) == pytest.approx(n * (1 - phi**2) / (1 + phi**2), rel=0.15)


def test_fixed_max_lag_and_settings():
    rng = np.random.default_rng(5)
    y, _ = _ar1_pair(rng, 1, 5000, 0.8, 0.3)
    auto = sb.Covariance()(y[0], fs=1.0)
    fixed = sb.Covariance(max_lag=60.0)(y[0], fs=1.0)
    # both near the AR(1) value N (1 - phi^2) / (1 + phi^2) for the variance
    for c in (auto, fixed):
        assert c.effective_samples[0, 0] == pytest.approx(5000 * 0.36 / 1.64, rel=0.3)
    assert repr(sb.Covariance(max_lag=60.0)) == "Covariance(max_lag=60.0)"
    with pytest.raises(sb.InputError, match="real data only"):
        sb.Covariance()(np.ones((2, 100)) * 1j, fs=1.0)
