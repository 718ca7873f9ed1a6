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


def _jackknife(values, stat, groups=20):
    """Delete-a-group jackknife over records (rows): bias-corrected statistic and its standard
    error (Efron & Tibshirani, An Introduction to the Bootstrap, 1993, ch. 11; memory).  The
    groups are whole records, so the correlation between neighbouring bins is accounted for."""
    g = np.arange(values.shape[0]) % groups
    full = stat(values)
    parts = np.array([stat(values[g != i]) for i in range(groups)])
    se = np.sqrt((groups - 1) / groups * np.sum((parts - parts.mean()) ** 2))
    return groups * full - (groups - 1) * parts.mean(), se


def _dof_hat(v):
    """Variance-implied dof pooled over bins: nu = 2 / mean(Var / E^2) (chi-square moments)."""
    return 2.0 / np.mean(v.var(axis=0, ddof=1) / v.mean(axis=0) ** 2)


def _pw_292b(window, step, nseg):
    """Percival & Walden (1993) eq. (292b) written out (memory): nu = 2 N_B / (1 + 2 sum_{m=1}^{N_B-1}
    (1 - m/N_B) |sum_t h_t h_{t+m step}|^2) with sum h^2 = 1."""
    h = window / np.sqrt(np.sum(window**2))
    s = sum((1 - m / nseg) * np.dot(h[: h.size - m * step], h[m * step :]) ** 2
            for m in range(1, nseg) if m * step < h.size)
    return 2 * nseg / (1 + 2 * s)


def _segments(n, seg, overlap):
    return (n - seg) // (seg - int(np.floor(overlap * seg))) + 1


def _hann_50(n, seg):  # P&W (1993) eq. (292b) closed form for Hann at 50 %: 36 N^2 / (19 N - 1)
    nb = _segments(n, seg, 0.5)
    return 36 * nb**2 / (19 * nb - 1)


def _general(window, seg, overlap):
    def nominal(n):
        w = scipy.signal.get_window(window, seg, fftbins=True)
        return _pw_292b(w, seg - int(np.floor(overlap * seg)), _segments(n, seg, overlap))
    return nominal


def _lag_window_dof(lag_window, m):  # 2 N / sum_{|k|<=M} w_k^2, P&W (1993) sec. 6.7 (memory)
    w = scipy.signal.get_window(lag_window, 2 * m + 1, fftbins=False)
    return lambda n: 2 * n / np.sum(w**2)


#: (name, estimator, samples, records, nominal dof from a published form or None = as reported)
COVERAGE_CASES = [
    ("welch-hann-50", sb.Welch(segment_length=256), 8192, 400, lambda n: _hann_50(n, 256)),
    # boxcar at 50 %: 4 N^2 / (3 N - 1), P&W (1993) eq. (292b) closed form (memory)
    ("welch-boxcar-50", sb.Welch(segment_length=256, window="boxcar"), 8192, 400,
     lambda n: 4 * _segments(n, 256, 0.5) ** 2 / (3 * _segments(n, 256, 0.5) - 1)),
    ("welch-hann-75", sb.Welch(segment_length=256, overlap=0.75), 8192, 400, _general("hann", 256, 0.75)),
    ("welch-hann-90", sb.Welch(segment_length=256, overlap=0.9), 8192, 400, _general("hann", 256, 0.9)),
    # independent segments: 2 per segment (Bendat & Piersol, Random Data; memory)
    ("welch-boxcar-0", sb.Welch(segment_length=256, window="boxcar", overlap=0.0), 8192, 400,
     lambda n: 2.0 * (n // 256)),
    ("welch-bh-67", sb.Welch(segment_length=128, window="blackmanharris", overlap=0.67), 4096, 1600,
     _general("blackmanharris", 128, 0.67)),
    ("welch-few-segments", sb.Welch(segment_length=1024), 3072, 400, lambda n: _hann_50(n, 1024)),
    # median: our method (no published closed form), checked here by its variance and coverage
    ("welch-median-50", sb.Welch(segment_length=256, average="median"), 8192, 400, None),
    ("welch-median-0", sb.Welch(segment_length=256, average="median", overlap=0.0), 4096, 400, None),
    ("welch-90-conf", sb.Welch(segment_length=256, confidence=0.9), 8192, 400, lambda n: _hann_50(n, 256)),
    # a periodogram bin is chi-square with 2 dof (P&W 1993 ch. 6; memory)
    ("periodogram", sb.Periodogram(window="hann"), 1024, 400, lambda n: 2.0),
    # K equally weighted tapers: 2K (Thomson 1982; memory)
    ("multitaper", sb.Multitaper(bandwidth=3.0, adaptive=False), 1024, 800, lambda n: 10.0),
    # adaptive weights: the dof of the weights as used, frequency- and record-dependent
    ("multitaper-adaptive", sb.Multitaper(bandwidth=4.0), 1024, 800, None),
    ("multitaper-segments", sb.Multitaper(bandwidth=2.0, segment_length=256), 2048, 800, None),
    ("correlogram-parzen", sb.Correlogram(max_lag=64), 4096, 800, _lag_window_dof("parzen", 64)),
    ("correlogram-bartlett", sb.Correlogram(max_lag=32, lag_window="bartlett"), 4096, 1600,
     _lag_window_dof("bartlett", 32)),
]


@pytest.mark.slow
@pytest.mark.parametrize("name, est, n, r, nominal", COVERAGE_CASES, ids=[c[0] for c in COVERAGE_CASES])
def test_band_covers_truth_at_nominal_rate(name, est, n, r, nominal):
    """Monte Carlo over ``r`` records of unit white noise (true one-sided PSD 2/fs), away from
    the ends: the variance-implied dof equals the published nominal within 4 jackknife standard
    errors, the standard error is small enough that a 5 % dof error lies >= 4 of them away, and
    the coverage equals the confidence level within 4 standard errors."""
    spec = est(_white(r, n, seed=zlib.crc32(name.encode())), fs=1.0)
    inner = slice(8, -8)  # clear of DC and Nyquist by more than any window's W here
    reported = np.broadcast_to(spec.dof, spec.value.shape)[:, inner]
    if nominal is None:
        nu = float(reported.mean())
    else:
        nu = float(nominal(n))
        np.testing.assert_allclose(reported, nu, rtol=1e-9)
    nu_hat, se = _jackknife(spec.value[:, inner], _dof_hat)
    assert se < 0.0125 * nu, (se, nu)  # resolving power: a 5 % error is >= 4 SE
    assert abs(nu_hat - nu) < 4 * se, (nu_hat, nu, se)
    hit = (spec.lower[:, inner] <= 2.0) & (2.0 <= spec.upper[:, inner])
    coverage, cse = _jackknife(hit, np.mean)
    assert abs(coverage - est.confidence) < max(4 * cse, 0.003), (coverage, cse)


@pytest.mark.slow
@pytest.mark.parametrize("adaptive", [False, True])
def test_multitaper_dof_fall_to_k_at_the_ends_and_cover(adaptive):
    """Within W of DC and Nyquist the tapers' spectral windows overlap their mirror images and
    the dof fall from 2K to K (Percival & Walden 1993, ch. 7): Monte Carlo of 4000 white records,
    bin by bin, against the reported dof, and the coverage there."""
    r, seg, nw = 4000, 256, 4.0
    est = sb.Multitaper(bandwidth=nw, adaptive=adaptive, detrend="none")
    spec = est(_white(r, seg, seed=31 + adaptive), fs=1.0)
    k = est.n_tapers
    w_bins = int(nw)  # W = NW / seg cycles per sample = 4 bins here
    dof = np.broadcast_to(spec.dof, spec.value.shape).mean(axis=0)
    if not adaptive:
        assert dof[0] == pytest.approx(k) and dof[-1] == pytest.approx(k)
        np.testing.assert_allclose(dof[w_bins:-w_bins], 2 * k)
    assert np.all(dof[1:w_bins] < 0.9 * 2 * k)  # really reduced inside W
    ends = list(range(0, w_bins + 2)) + list(range(-w_bins - 2, 0))
    for b in ends:
        nu_hat, se = _jackknife(spec.value[:, [b]], _dof_hat)
        assert abs(nu_hat - dof[b]) < 4 * se + 0.01 * dof[b], (b, nu_hat, dof[b], se)
    truth = np.full(spec.freq.size, 2.0)
    truth[[0, -1]] = 1.0  # one-sided: DC and Nyquist are not doubled
    near = list(range(0, w_bins)) + list(range(-w_bins, 0))
    hit = (spec.lower[:, near] <= truth[near]) & (truth[near] <= spec.upper[:, near])
    coverage, cse = _jackknife(hit, np.mean)
    assert abs(coverage - 0.95) < max(4 * cse, 0.004), (coverage, cse)


@pytest.mark.slow
def test_adaptive_dof_are_those_of_the_weights_used():
    """Adaptive weights d_k^2 give the estimate sum d_k^2 S_k / sum d_k^2, whose dof are
    2 (sum d_k^2)^2 / sum d_k^4 (Percival & Walden 1993 eq. (370a)).  With few well-concentrated
    tapers (NW = 2, K = 4: lambda_3 = 0.72) counting the eigenvalue again would lower the dof by
    3.5 %; the variance of 2000 white records resolves 1 %."""
    r, n = 2000, 512
    est = sb.Multitaper(bandwidth=2.0, tapers=4)
    spec = est(_white(r, n, seed=41), fs=1.0)
    inner = slice(8, -8)
    nu = float(spec.dof[:, inner].mean())
    nu_hat, se = _jackknife(spec.value[:, inner], _dof_hat)
    assert se < 0.01 * nu
    assert abs(nu_hat - nu) < 4 * se, (nu_hat, nu, se)
    # for white noise the converged weights are close to d_k^2 = lambda_k (b_k = 1), so the
    # dof are close to 2 (sum lambda)^2 / sum lambda^2 (Thomson 1982 eq. (5.4); memory)
    lam = scipy.signal.windows.dpss(n, 2.0, Kmax=4, return_ratios=True)[1]
    assert nu == pytest.approx(2 * lam.sum() ** 2 / np.sum(lam**2), rel=0.02)


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
