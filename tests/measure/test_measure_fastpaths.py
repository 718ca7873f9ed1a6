"""The vectorised paths of the measurements agree with the per-band reference forms.

``band_core_many`` (all octave bands in one pass) against ``band_core`` (one band at a time,
the form the Monte Carlo coverage tests check), and the tone detector's sliced search against a
plain per-bin restatement of its rule (common practice: a fast path is tested against the
slow one it replaces).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

import specbench as sb
from specbench.measure._bands import band_core, band_core_many

FS = 4800.0


def _record(channels: int = 1) -> np.ndarray:
    rng = np.random.default_rng(11)
    t = np.arange(40_000) / FS
    x = rng.standard_normal((channels, t.size)) + 0.5 * np.sin(2 * np.pi * 123.45 * t)
    return x[0] if channels == 1 else x


ESTIMATORS = [
    sb.Periodogram(),
    sb.Periodogram(window="hann"),
    sb.Welch(segment_length=1000, window="blackmanharris", overlap=0.75),
    sb.Multitaper(segment_length=40_000),  # adaptive: dof differ from bin to bin
    sb.Multitaper(segment_length=4096, adaptive=False),
    sb.Correlogram(max_lag=200),
]


@pytest.mark.parametrize("est", ESTIMATORS, ids=repr)
@pytest.mark.parametrize("channels", [1, 2])
def test_many_bands_equal_one_band_at_a_time(est, channels):
    spec = est(_record(channels), fs=FS)
    df = spec.df
    # partial end bins, one-bin bands, bands touching DC and Nyquist, the whole axis
    f1 = np.array([0.0, 0.3 * df, 10.2 * df, 100.0, 1000.0, FS / 2 - 10 * df, 0.0, 5 * df, 7.5 * df])
    f2 = np.array([0.7 * df, 1.4 * df, 11.9 * df, 200.0, 1000.0 + 3 * df, FS / 2, FS / 2, 6.2 * df, 9 * df])
    p_many, nu_many = band_core_many(spec, f1, f2)
    for j in range(f1.size):
        p, nu, _ = band_core(spec, float(f1[j]), float(f2[j]))
        np.testing.assert_allclose(p_many[..., j], p, rtol=1e-12)
        np.testing.assert_allclose(nu_many[..., j], nu, rtol=1e-10)


@pytest.mark.parametrize("est", ESTIMATORS, ids=repr)
def test_tone_threshold_is_the_median_over_the_searched_bins(est):
    """The reported threshold equals the median of the per-bin rule on the full arrays."""
    spec = est(_record(), fs=FS)
    found = spec.tones(max_count=5)
    assert found and abs(found[0].freq - 123.45) < 3 * spec.df
    from specbench.measure import structure_of

    lobe = structure_of(spec).lobe_half_width()
    nf = spec.freq.size
    search = np.arange(max(1, lobe), nf - max(1, lobe))
    nu = np.broadcast_to(spec.dof, spec.freq.shape)[search]
    fac = stats.chi2.isf(found.false_alarm / search.size, nu) / nu
    # adaptive multitaper: the detector interpolates the factor on a 512-point dof grid (1e-4)
    assert found.threshold_db == pytest.approx(10 * np.log10(np.median(fac)), abs=1e-3)


def test_tones_code_line_names_every_option():
    spec = sb.Welch(segment_length=1024)(_record(), fs=FS)
    q = spec.tones(max_count=3, false_alarm=0.05, f1=50.0, f2=500.0)
    assert q.code == "spec.tones(max_count=3, false_alarm=0.05, f1=50.0, f2=500.0)"
    again = eval(q.code, {"spec": spec})  # the code line reproduces the result
    assert [t.freq for t in again] == [t.freq for t in q]
