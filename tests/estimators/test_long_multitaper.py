"""Multitaper on long records: exact DPSS tapers in O(N) and interpolated chi-square bands.

References: the tapers are checked against ``scipy.signal.windows.dpss`` (bisection and
inverse iteration on the tridiagonal matrix of Percival & Walden 1993, section 8.3), the
band factors against ``scipy.stats.chi2.ppf``.
"""

import numpy as np
import pytest
import scipy.fft
from scipy import stats
from scipy.signal.windows import dpss

import specbench as sb
from specbench.estimators import _dof, spectral
from specbench.estimators._dpss import dpss_tapers, half_tapers


@pytest.mark.parametrize("n, nw, k", [(1 << 18, 4.0, 7), (300_001, 2.5, 4)])
def test_fast_dpss_equals_scipy(n, nw, k):
    ref, ref_ratios = dpss(n, nw, Kmax=k, sym=True, norm=2, return_ratios=True)
    got, ratios = dpss_tapers(n, nw, k)
    # both are eigenvectors of the commuting tridiagonal matrix (P&W 1993 eq. (378)) to a
    # residual of ~1e-15 of its norm; its top eigenvalues are only ~1e-9 apart relative to
    # that norm, so two solvers agree to about 1e-7 of the peak, not to machine precision
    assert np.abs(got - ref).max() < 1e-7 * np.abs(ref).max()
    t = np.arange(n)
    d = ((n - 1 - 2 * t) / 2) ** 2 * np.cos(2 * np.pi * nw / n)
    e = t[1:] * (n - t[1:]) / 2
    for v in got:
        tv = d * v
        tv[:-1] += e * v[1:]
        tv[1:] += e * v[:-1]
        assert np.linalg.norm(tv - (v @ tv) * v) < 1e-14 * np.abs(d).max()
    assert np.abs(got @ got.T - np.eye(k)).max() < 1e-13
    # concentrations come from the 65536-sample problem: stated tolerance 1e-8
    np.testing.assert_allclose(ratios, ref_ratios, rtol=1e-8)
    t = half_tapers(n, nw, k)
    np.testing.assert_allclose(t.sums(), got.sum(axis=1), atol=1e-9 * np.sqrt(n))
    x = np.random.default_rng(0).standard_normal(n)
    buf = np.empty(n)
    for j in range(k):
        np.testing.assert_array_equal(t.apply(j, x, buf), x * t.full()[j])


def test_whole_record_multitaper_matches_a_plain_scipy_reference():
    n, nw, k = 1 << 18, 3.0, 5
    x = np.random.default_rng(1).standard_normal(n) + 0.3
    spec = sb.Multitaper(bandwidth=nw, adaptive=False)(x, fs=2.0)
    # plain numpy/scipy: mean of |FFT(h_k (x - mean))|^2 / fs, one-sided doubling
    h = dpss(n, nw, Kmax=k, sym=True, norm=2)
    p = np.mean(np.abs(scipy.fft.rfft(h * (x - x.mean()), axis=-1)) ** 2, axis=0) / 2.0
    p[1:-1] *= 2
    np.testing.assert_allclose(spec.value, p, rtol=1e-7, atol=1e-12 * p.max())
    # the adaptive estimate stays between the smallest and largest eigenspectrum
    ad = sb.Multitaper(bandwidth=nw)(x, fs=2.0)
    assert np.all(np.isfinite(ad.value)) and np.all(ad.dof[1:-1] > 0) and np.all(ad.dof[1:-1] <= 2 * k + 1e-9)


def test_interpolated_band_factors_match_chi_square_quantiles():
    rng = np.random.default_rng(2)
    dof = np.concatenate([rng.uniform(2, 14, 40_000), [2.0, 14.0]])
    assert dof.size > _dof.INTERPOLATE_ABOVE
    lo, hi = _dof.band_factors(dof, 0.9)
    np.testing.assert_allclose(lo, dof / stats.chi2.ppf(0.95, dof), rtol=1e-11)
    np.testing.assert_allclose(hi, dof / stats.chi2.ppf(0.05, dof), rtol=1e-11)


def test_long_tapers_are_cached_and_cost_estimate_knows_it():
    est = sb.Multitaper(bandwidth=2.0)
    n = spectral.FAST_DPSS_MIN + 2
    cold = est.expected_seconds(n)
    est(np.random.default_rng(3).standard_normal(n), fs=1.0)
    assert est.expected_seconds(n) < cold
