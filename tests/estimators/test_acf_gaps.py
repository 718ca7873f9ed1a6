"""Autocorrelation(gaps='pairs'): lag products over the pairs of samples both present.

Checks: a direct numpy sum over present pairs (the definition, Parzen 1963, from memory),
equality with the gap-free estimate when nothing is missing, and Monte Carlo coverage of
the white and Bartlett bands (Bartlett 1946; Box & Jenkins 1976) with gaps.
"""

import numpy as np
import pytest

import specbench as sb


def _gappy(rng, n, holes):
    x = rng.standard_normal(n)
    for start in rng.integers(0, n - 60, holes):
        x[start : start + rng.integers(1, 60)] = np.nan
    return x


def _direct(x, m, unbiased=False):
    ok = np.isfinite(x)
    y = np.where(ok, x - x[ok].mean(), 0.0)
    k = np.arange(m + 1)
    s = np.array([np.sum(y[: len(y) - j] * y[j:]) for j in k])
    p = np.array([np.sum(ok[: len(ok) - j] & ok[j:]) for j in k], dtype=float)
    r = s / p if unbiased else s / p * (p[0] - k) / p[0]
    return r, p


@pytest.mark.parametrize("unbiased", [False, True])
def test_equals_a_direct_sum_over_present_pairs(unbiased):
    rng = np.random.default_rng(20261202)
    x = _gappy(rng, 6000, 12)
    est = sb.Autocorrelation(max_lag=25.0, gaps="pairs", normalize=False, unbiased=unbiased)
    ac = est(x, fs=1.0)
    r, p = _direct(x, 25, unbiased)
    np.testing.assert_allclose(np.ravel(ac.value), r, rtol=1e-10, atol=1e-13)
    np.testing.assert_array_equal(np.ravel(ac.info["pairs"]), p)
    assert ac.n == p[0]


def test_without_gaps_it_equals_the_gap_free_estimate():
    rng = np.random.default_rng(7)
    x = rng.standard_normal(4000)
    for band in ("white", "bartlett"):
        a = sb.Autocorrelation(max_lag=30.0, band=band)(x, fs=1.0)
        b = sb.Autocorrelation(max_lag=30.0, band=band, gaps="pairs")(x, fs=1.0)  # no NaN: usual path
        np.testing.assert_array_equal(a.value, b.value)
    # the gap formulas reduce to the usual ones when every pair is present
    x2 = x.copy()
    x2[-1] = np.nan
    c = sb.Autocorrelation(max_lag=30.0, band="bartlett", gaps="pairs")(x2, fs=1.0)
    d = sb.Autocorrelation(max_lag=30.0, band="bartlett")(x[:-1], fs=1.0)
    np.testing.assert_allclose(c.value, d.value, rtol=1e-9, atol=1e-12)
    np.testing.assert_allclose(c.upper - c.value, d.upper - d.value, rtol=1e-3)


@pytest.mark.slow
@pytest.mark.parametrize("unbiased", [False, True])
def test_white_band_covers_white_noise_with_gaps(unbiased):
    # nominal 0.95: lags 1..20 of white noise with about 10 % of the samples missing
    rng = np.random.default_rng(11 + unbiased)
    inside = []
    for _ in range(300):
        x = _gappy(rng, 3000, 10)
        ac = sb.Autocorrelation(max_lag=20.0, gaps="pairs", unbiased=unbiased)(x, fs=1.0)
        v, lo, hi = (np.ravel(a)[1:] for a in (ac.value, ac.lower, ac.upper))
        inside.append((lo <= v) & (v <= hi))  # the white band is where the estimate of white noise stays
    cover = np.mean(inside)
    # 6000 lag values, correlated only weakly: binomial sd about 0.003
    assert abs(cover - 0.95) < 0.012, cover


@pytest.mark.slow
def test_bartlett_band_covers_an_ma1_truth_with_gaps():
    # MA(1), theta = 0.5: rho_1 = 0.4, rho_k = 0 beyond (common practice); nominal 0.95
    rng = np.random.default_rng(5)
    # lag 1 is left out: Bartlett's band at lag 1 assumes white noise below it (q = k - 1, as
    # statsmodels), so it is conservative there by construction (0.99 here, gaps or not)
    truth = np.array([0, 0, 0, 0])
    hits = []
    for _ in range(300):
        e = rng.standard_normal(3001)
        x = e[1:] + 0.5 * e[:-1]
        for start in rng.integers(0, 2900, 8):
            x[start : start + rng.integers(1, 60)] = np.nan
        ac = sb.Autocorrelation(max_lag=5.0, band="bartlett", gaps="pairs")(x, fs=1.0)
        lo, hi = np.ravel(ac.lower)[2:], np.ravel(ac.upper)[2:]
        hits.append((lo <= truth) & (truth <= hi))
    cover = np.mean(hits, axis=0)
    assert np.all(np.abs(cover - 0.95) < 0.04), cover


def test_gaps_error_names_the_pairs_option():
    x = np.ones(1000) + np.random.default_rng(3).standard_normal(1000)
    x[10] = np.nan
    with pytest.raises(sb.InputError, match=r"Autocorrelation\(gaps='pairs'\)"):
        sb.Autocorrelation(max_lag=10.0)(x, fs=1.0)


def test_linear_detrend_with_gaps_is_refused():
    x = np.random.default_rng(4).standard_normal(1000)
    x[10] = np.nan
    with pytest.raises(sb.InputError, match="least-squares line through gaps is not supported"):
        sb.Autocorrelation(max_lag=10.0, gaps="pairs", detrend="linear")(x, fs=1.0)


def test_lags_without_any_pair_are_refused():
    x = np.random.default_rng(8).standard_normal(200)
    x[50:] = np.nan
    x[120:125] = 1.0
    with pytest.raises(sb.InputError, match="no pair of present samples"):
        sb.Autocorrelation(max_lag=100.0, gaps="pairs")(x, fs=1.0)


def test_the_workbench_opens_gappy_data_with_both_views_and_the_frozen_cell_runs(tmp_path):
    pytest.importorskip("ipywidgets")
    rng = np.random.default_rng(9)
    x = _gappy(rng, 40000, 20)
    sig = sb.Signal(x, fs=1000.0)
    x = sig
    bench = sb.Workbench(x)
    assert bench.spectrum is not None and bench.correlation is not None, bench.status
    assert bench.correlation_estimator.gaps == "pairs"
    assert "gaps" in bench.status
    ns = {"x": sig}  # the in-memory data name the frozen cell declares
    code = bench.code()
    exec(compile(code, "<frozen>", "exec"), ns)
    got = [v for v in ns.values() if isinstance(v, sb.Correlation)]
    assert got and np.array_equal(got[0].value, bench.correlation.value)
    plain = {"x": x.data}  # the plain form takes the array, as its INPUT line says
    plain_code = bench.code(style="scipy")
    # the noise model's plain form covers records without gaps: it says so instead of writing
    # lines that would raise on the very data they were made for
    assert "missing (NaN) samples" in plain_code
    exec(compile(plain_code, "<plain>", "exec"), plain)
    np.testing.assert_allclose(np.ravel(plain["psd"]), np.ravel(bench.spectrum.value), rtol=1e-10)
