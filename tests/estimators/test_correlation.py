"""Autocorrelation and cross-correlation against statsmodels and numpy."""

import numpy as np
import pytest

import specbench as sb
from specbench.estimators._engine import lagged_products


def statsmodels_example():
    # worked example computed with statsmodels.tsa.stattools.acf (Bartlett band, Box & Jenkins 1976)
    rng = np.random.default_rng(12345)
    e = rng.standard_normal(201)
    return e[1:] + 0.5 * e[:-1]


def test_acf_worked_example_values():
    # statsmodels.tsa.stattools.acf(x, nlags=5, alpha=0.05, fft=False) on the example
    # gives these values and band half-widths (Bartlett's formula, q = k - 1)
    ac = sb.Autocorrelation(max_lag=5, band="bartlett")(statsmodels_example(), fs=1.0)
    np.testing.assert_allclose(
        ac.value, [1, 0.406773, -0.025453, -0.030051, -0.028438, -0.025285], atol=5e-7
    )
    np.testing.assert_allclose(
        (ac.upper - ac.lower) / 2, [0, 0.138590, 0.159886, 0.159964, 0.160072, 0.160169], atol=5e-7
    )


def test_acf_equals_statsmodels_live():
    from statsmodels.tsa.stattools import acf

    x = np.random.default_rng(2).standard_normal(5000).cumsum() * 0.01
    x = x + np.random.default_rng(3).standard_normal(5000)
    for adjusted in (False, True):
        ref, conf = acf(x, nlags=300, alpha=0.01, fft=True, adjusted=adjusted, result_object=False)
        ac = sb.Autocorrelation(max_lag=300, band="bartlett", confidence=0.99, unbiased=adjusted)(x, fs=1.0)
        np.testing.assert_allclose(ac.value, ref, atol=1e-12)
        if not adjusted:
            np.testing.assert_allclose(ac.lower, conf[:, 0], atol=1e-12)
            np.testing.assert_allclose(ac.upper, conf[:, 1], atol=1e-12)


def test_white_band_is_z_over_sqrt_n_and_covers_white_noise():
    # band of a white process +- z/sqrt(N) (Box & Jenkins 1976; common practice)
    n = 4000
    x = np.random.default_rng(8).standard_normal((300, n))
    ac = sb.Autocorrelation(max_lag=0.2, band="white")(x, fs=100.0)
    assert ac.upper[0, 1] == pytest.approx(1.959964 * np.sqrt(n - 1) / n, rel=1e-6)
    assert ac.lag[-1] == pytest.approx(0.2)
    inside = (ac.value[:, 1:] >= ac.lower[:, 1:]) & (ac.value[:, 1:] <= ac.upper[:, 1:])
    assert inside.mean() == pytest.approx(0.95, abs=0.01)


def test_bartlett_band_covers_ma1_truth():
    # MA(1) x_t = e_t + 0.5 e_{t-1}: rho_1 = 0.4, rho_k = 0 beyond (Box & Jenkins 1976)
    rng = np.random.default_rng(4)
    e = rng.standard_normal((400, 2001))
    x = e[:, 1:] + 0.5 * e[:, :-1]
    ac = sb.Autocorrelation(max_lag=10, band="bartlett")(x, fs=1.0)
    truth = np.r_[1.0, 0.4, np.zeros(9)]
    hit = (ac.lower[:, 1:] <= truth[1:]) & (truth[1:] <= ac.upper[:, 1:])
    assert hit.mean() == pytest.approx(0.95, abs=0.015)


def test_gauss_markov_autocorrelation_decays_as_exp():
    # first-order Gauss-Markov: ACF sigma^2 exp(-|tau|/T), discrete phi = exp(-dt/T)
    # (Brown & Hwang, Introduction to Random Signals and Applied Kalman Filtering; memory)
    fs, tau_c, n = 100.0, 0.2, 400_000
    phi = np.exp(-1 / (fs * tau_c))
    rng = np.random.default_rng(6)
    w = rng.standard_normal(n) * np.sqrt(1 - phi**2)
    import scipy.signal

    x = scipy.signal.lfilter([1.0], [1.0, -phi], w)
    ac = sb.Autocorrelation(max_lag=1.0, normalize=False)(x, fs=fs)
    np.testing.assert_allclose(ac.value[:60], np.exp(-ac.lag[:60] / tau_c), atol=0.02)
    assert ac.unit == ""


@pytest.mark.parametrize("n, m", [(1000, 10), (70_000, 5), (70_000, 3000), (200_000, 40_000), (5000, 4999)])
def test_blocked_lagged_products_equal_numpy_correlate(n, m):
    rng = np.random.default_rng(n + m)
    x, y = rng.standard_normal((2, n))
    got = lagged_products(x[None], y[None], m)[0]
    ref = np.correlate(y, x, mode="full")[n - 1 : n + m]  # sum_t x[t] y[t+k], k >= 0
    np.testing.assert_allclose(got, ref, rtol=1e-9, atol=1e-9 * np.abs(ref).max())


def test_cross_correlation_finds_known_delay():
    fs, d = 1000.0, 37
    rng = np.random.default_rng(10)
    src = rng.standard_normal(50_000)
    x = src[d:] + 0.3 * rng.standard_normal(50_000 - d)
    y = src[:-d].copy()  # y[t] = src[t] = x[t - d] (without noise): y is x delayed by d
    xc = sb.CrossCorrelation(max_lag=0.1)(x, y, fs=fs)
    assert xc.peak_lag() == pytest.approx(d / fs)  # positive lag: the second lags the first
    assert sb.CrossCorrelation(max_lag=0.1)(y, x, fs=fs).peak_lag() == pytest.approx(-d / fs)
    assert xc.value.max() == pytest.approx(1 / np.sqrt(1 + 0.09), abs=0.02)
    both = np.stack([x, y])
    assert sb.CrossCorrelation(max_lag=0.1)(both, fs=fs).peak_lag() == pytest.approx(d / fs)


def test_cross_correlation_equals_numpy_and_statsmodels():
    from statsmodels.tsa.stattools import ccf

    rng = np.random.default_rng(12)
    x, y = rng.standard_normal((2, 3000))
    y = y + 0.5 * np.roll(x, 4)
    xc = sb.CrossCorrelation(max_lag=20 / 1.0)(x, y, fs=1.0)
    # statsmodels ccf(y, x)[k] = corr(y_{t+k}, x_t), adjusted=False: our positive lags
    ref = ccf(y, x, adjusted=False, fft=False)[:21]
    np.testing.assert_allclose(xc.value[20:], ref, atol=1e-10)
    ref_neg = ccf(x, y, adjusted=False, fft=False)[:21]
    np.testing.assert_allclose(xc.value[:21][::-1], ref_neg, atol=1e-10)


def test_cross_band_bartlett_under_independence():
    # two independent AR(1) series: Bartlett (1955) / Box & Jenkins (1976) eq. (11.1.7)
    # var r_xy(k) ~ (1/N) sum_j rho_xx(j) rho_yy(j); coverage of zero at the nominal rate
    import scipy.signal

    rng = np.random.default_rng(13)
    hits = []
    for _ in range(150):
        a = scipy.signal.lfilter([1], [1, -0.8], rng.standard_normal(3000))
        b = scipy.signal.lfilter([1], [1, -0.8], rng.standard_normal(3000))
        xc = sb.CrossCorrelation(max_lag=30, band="bartlett")(a, b, fs=1.0)
        hits.append((xc.lower <= xc.value) & (xc.value <= xc.upper))
    assert np.mean(hits) == pytest.approx(0.95, abs=0.02)
    xw = sb.CrossCorrelation(max_lag=30, band="white")(a, b, fs=1.0)
    assert xw.upper[0] < xc.upper[0]  # the white band is too narrow for coloured series


def test_correlation_errors_name_the_fix():
    x = np.zeros(100)
    with pytest.raises(sb.InputError, match=r"max_lag of Autocorrelation is 2 s \(200 samples\).*only 100"):
        sb.Autocorrelation(max_lag=2.0)(x, fs=100.0)
    with pytest.raises(sb.InputError, match="less than one sample"):
        sb.Autocorrelation(max_lag=0.001)(x, fs=100.0)
    with pytest.raises(sb.InputError, match=r"say which two to use with pair="):
        sb.CrossCorrelation()(np.zeros((3, 100)), fs=1.0)
    with pytest.raises(sb.InputError, match="equal length"):
        sb.CrossCorrelation()(np.zeros(100), np.zeros(90), fs=1.0)
    bad = np.ones(100)
    bad[7] = np.nan
    with pytest.raises(sb.InputError, match="1 non-finite sample .* first at sample 7"):
        sb.Autocorrelation()(bad, fs=1.0)
