"""Degrees of freedom against published forms, and Monte Carlo coverage of every band."""

import zlib

import numpy as np
import pytest
import scipy.signal
from scipy import stats

import specbench as sb
from specbench.estimators._dof import _median_indep_dof, welch_dof
from specbench.estimators.windows import get_window


@pytest.mark.parametrize("nb", [2, 3, 10, 57, 400])
def test_hann_50_closed_form(nb):
    # Percival & Walden (1993) eq. (292b) for Hann at 50 % overlap: 36 N_B^2 / (19 N_B - 1)
    # (memory); computed from the periodic window, so agreement is to O(1/n) of the window
    w = get_window("hann", 4096)
    assert welch_dof(w, 2048, nb) == pytest.approx(36 * nb**2 / (19 * nb - 1), rel=1e-6)


@pytest.mark.parametrize("nb", [2, 5, 100])
def test_boxcar_50_closed_form(nb):
    # Percival & Walden (1993) eq. (292b) for boxcar at 50 %: 4 N_B^2 / (3 N_B - 1) (memory)
    w = get_window("boxcar", 1000)
    assert welch_dof(w, 500, nb) == pytest.approx(4 * nb**2 / (3 * nb - 1), rel=1e-12)


def test_no_overlap_gives_two_per_segment():
    # independent segments: nu = 2 N_B (Bendat & Piersol, Random Data; memory)
    assert welch_dof(get_window("hann", 256), 256, 37) == pytest.approx(74.0)


def test_gapped_segments_count_only_their_own_overlaps():
    w = get_window("hann", 256)
    mask = np.array([1, 1, 0, 1, 1, 1, 0, 0, 1], dtype=bool)
    rho1 = (np.dot(w[:128], w[128:]) / np.dot(w, w)) ** 2
    pairs = 1 + 2  # adjacent used pairs: (0,1), (3,4), (4,5)
    n = mask.sum()
    assert welch_dof(w, 128, mask) == pytest.approx(2 * n**2 / (n + 2 * pairs * rho1))


def test_median_of_independent_exponentials_moments():
    # exponential order statistics (Renyi representation; common practice), checked by
    # simulation: nu = 2 E^2 / Var of the median of n Exp(1)
    rng = np.random.default_rng(3)
    for n in (1, 2, 5, 8):
        med = np.median(rng.exponential(size=(200_000, n)), axis=1)
        assert _median_indep_dof(n) == pytest.approx(2 * med.mean() ** 2 / med.var(), rel=0.02)


def _white(r, n, seed):
    return np.random.default_rng(seed).standard_normal((r, n))


COVERAGE_CASES = [
    ("welch-hann-50", sb.Welch(segment_length=256), 8192),
    ("welch-hann-75", sb.Welch(segment_length=256, overlap=0.75), 8192),
    ("welch-hann-90", sb.Welch(segment_length=256, overlap=0.9), 8192),
    ("welch-boxcar-0", sb.Welch(segment_length=256, window="boxcar", overlap=0.0), 8192),
    ("welch-bh-67", sb.Welch(segment_length=128, window="blackmanharris", overlap=0.67), 4096),
    ("welch-few-segments", sb.Welch(segment_length=1024), 3072),
    ("welch-median-50", sb.Welch(segment_length=256, average="median"), 8192),
    ("welch-median-0", sb.Welch(segment_length=256, average="median", overlap=0.0), 4096),
    ("welch-90-conf", sb.Welch(segment_length=256, confidence=0.9), 8192),
    ("periodogram", sb.Periodogram(window="hann"), 1024),
    ("multitaper", sb.Multitaper(bandwidth=3.0, adaptive=False), 1024),
    ("multitaper-adaptive", sb.Multitaper(bandwidth=4.0), 1024),
    ("multitaper-segments", sb.Multitaper(bandwidth=2.0, segment_length=256), 2048),
    ("correlogram-parzen", sb.Correlogram(max_lag=64), 4096),
    ("correlogram-bartlett", sb.Correlogram(max_lag=32, lag_window="bartlett"), 4096),
]


@pytest.mark.parametrize("name, est, n", COVERAGE_CASES, ids=[c[0] for c in COVERAGE_CASES])
def test_band_covers_truth_at_nominal_rate(name, est, n):
    """Monte Carlo coverage: 400 records of unit white noise, true one-sided PSD 2/fs."""
    r = 400
    spec = est(_white(r, n, seed=zlib.crc32(name.encode())), fs=1.0)
    inner = slice(2, -2)
    hit = (spec.lower[:, inner] <= 2.0) & (2.0 <= spec.upper[:, inner])
    coverage = hit.mean()
    # binomial standard error of about 0.002 over >= 1e4 quasi-independent trials
    assert coverage == pytest.approx(est.confidence, abs=0.012), coverage
    # and the dof itself: nu = 2 E^2 / Var across records, bin by bin (averaged)
    v = spec.value[:, inner]
    nu_hat = np.mean(2 * v.mean(axis=0) ** 2 / v.var(axis=0))
    nu = np.mean(np.broadcast_to(spec.dof, spec.value.shape)[:, inner])
    assert nu_hat == pytest.approx(nu, rel=0.12)


@pytest.mark.parametrize(
    "est",
    [sb.Welch(segment_length=256), sb.Welch(segment_length=256, average="median"), sb.Multitaper(bandwidth=4.0),
     sb.Multitaper(bandwidth=3.0, segment_length=512)],
    ids=repr,
)
def test_band_covers_coloured_truth(est):
    """AR(1) x_t = 0.7 x_(t-1) + e_t: true one-sided PSD 2 / |1 - 0.7 e^(-i 2 pi f)|^2 at fs = 1
    (Percival & Walden 1993, AR(1) spectrum; from memory)."""
    phi, r, n = 0.7, 300, 4096
    e = np.random.default_rng(17).standard_normal((r, n + 200))
    x = scipy.signal.lfilter([1.0], [1.0, -phi], e, axis=-1)[:, 200:]
    spec = est(x, fs=1.0)
    truth = 2.0 / np.abs(1 - phi * np.exp(-2j * np.pi * spec.freq)) ** 2
    inner = slice(3, -3)
    hit = (spec.lower[:, inner] <= truth[inner]) & (truth[inner] <= spec.upper[:, inner])
    assert hit.mean() == pytest.approx(0.95, abs=0.015), hit.mean()


def test_edge_bins_carry_half_the_dof_and_are_covered():
    """DC and Nyquist of real data are chi-square with half the dof (common practice)."""
    r, n = 4000, 2048
    est = sb.Welch(segment_length=256, detrend="none")
    spec = est(_white(r, n, seed=11), fs=1.0)
    assert spec.dof[0] == pytest.approx(spec.dof[5] / 2)
    assert spec.dof[-1] == pytest.approx(spec.dof[5] / 2)
    # one-sided convention: DC and Nyquist are not doubled, their true level is 1/fs
    for k in (0, -1):
        hit = (spec.lower[:, k] <= 1.0) & (1.0 <= spec.upper[:, k])
        assert hit.mean() == pytest.approx(0.95, abs=0.015)


def test_chi_square_interval_formula():
    # [nu S / chi2_nu(1 - a/2), nu S / chi2_nu(a/2)], Percival & Walden ch. 6 (memory)
    x = _white(1, 4096, seed=5)[0]
    spec = sb.Welch(segment_length=512, overlap=0.0, confidence=0.8)(x, fs=1.0)
    nu = 16.0
    assert spec.dof[3] == pytest.approx(nu)
    np.testing.assert_allclose(spec.lower[3], nu * spec.value[3] / stats.chi2.ppf(0.9, nu))
    np.testing.assert_allclose(spec.upper[3], nu * spec.value[3] / stats.chi2.ppf(0.1, nu))


def test_normalized_random_error_one_over_sqrt_nd():
    # Bendat & Piersol, Random Data: normalised random error 1/sqrt(n_d) for n_d
    # independent averages (memory); band width follows from nu = 2 n_d
    x = _white(300, 64 * 256, seed=9)
    spec = sb.Welch(segment_length=256, overlap=0.0, window="boxcar")(x, fs=1.0)
    v = spec.value[:, 5:-5]
    assert np.mean(v.std(axis=0) / v.mean(axis=0)) == pytest.approx(1 / np.sqrt(64), rel=0.05)


def test_gaps_skip_uses_only_clean_segments():
    x = _white(1, 8192, seed=21)[0]
    dirty = x.copy()
    dirty[1000:1010] = np.nan
    dirty[5000] = np.inf
    est = sb.Welch(segment_length=512, gaps="skip")
    spec = est(dirty, fs=1.0)
    step = 256
    starts = np.arange((8192 - 512) // step + 1) * step
    clean = [s for s in starts if np.all(np.isfinite(dirty[s : s + 512]))]
    assert spec.segments == len(clean) and spec.info["segments_skipped"] == len(starts) - len(clean)
    # reference: scipy.signal.welch on each clean segment alone, averaged
    import scipy.signal

    ref = np.mean([scipy.signal.welch(dirty[s : s + 512], fs=1.0, nperseg=512)[1] for s in clean], axis=0)
    np.testing.assert_allclose(spec.value, ref, rtol=1e-10)
    mask = np.isin(starts, clean)
    assert spec.dof[3] == pytest.approx(welch_dof(get_window("hann", 512), step, mask))
    # default: an error naming the count and the first positions
    with pytest.raises(sb.InputError, match=r"11 non-finite samples .* first at sample 1000, sample 1001"):
        sb.Welch(segment_length=512)(dirty, fs=1.0)
