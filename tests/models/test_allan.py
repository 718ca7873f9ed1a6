"""sb.AllanDeviation against published values and allantools, gaps, streaming, errors, and
Monte Carlo coverage of its chi-square intervals."""

import numpy as np
import pytest

import specbench as sb
from specbench.models._allan import BLOCK, edf_nonoverlapping, edf_overlapping

allantools = pytest.importorskip("allantools")

# The nine-point fractional-frequency data set of NBS Monograph 140 (Allan, Hellwig,
# Kartaschoff et al., "Time and Frequency: Theory and Fundamentals", 1974, Annex 8.E),
# as used in Riley, NIST SP 1065 (2008) §12.1 (values from memory).
NBS9 = np.array([892, 809, 823, 798, 671, 644, 883, 903, 677], dtype=float)


def test_nbs_monograph_140_nine_point_data():
    r = sb.AllanDeviation()(NBS9, fs=1.0)
    # tau = 1: 91.22945 (Riley 2008, Table 31; memory); computed from the definition:
    # sqrt(sum of squared first differences / (2 * 8)) = sqrt(133165 / 16)
    assert r.tau[0] == 1.0
    assert r.value[0] == pytest.approx(np.sqrt(133165 / 16), rel=1e-14)
    assert r.value[0] == pytest.approx(91.22945, abs=5e-5)
    # tau = 2 (computed from the definition, overlapping: i = 0..5 with pair averages)
    avg2 = (NBS9[:-1] + NBS9[1:]) / 2
    d = avg2[2:] - avg2[:-2]
    assert r.value[1] == pytest.approx(np.sqrt(np.mean(d**2) / 2), rel=1e-13)
    nov = sb.AllanDeviation(overlapping=False)(NBS9, fs=1.0)
    assert nov.value[0] == pytest.approx(91.22945, abs=5e-5)
    t, a, _, n = allantools.adev(NBS9, rate=1.0, data_type="freq", taus=[1.0, 2.0, 4.0])
    assert np.allclose(nov.value[: t.size], a, rtol=1e-13)


@pytest.mark.parametrize("overlapping", [True, False])
@pytest.mark.parametrize("taus", ["octave", "decade"])
def test_agrees_with_allantools_on_random_data(overlapping, taus):
    # reference: allantools (general-purpose reference library), oadev / adev of frequency data
    rng = np.random.default_rng(3)
    n = 3 * BLOCK + 123  # several blocks: the block joins are exercised
    x = rng.standard_normal(n) + 0.02 * np.cumsum(rng.standard_normal(n)) + 5.0
    r = sb.AllanDeviation(taus=taus, overlapping=overlapping)(x, fs=50.0)
    fn = allantools.oadev if overlapping else allantools.adev
    t, a, _, cnt = fn(x, rate=50.0, data_type="freq", taus=r.tau)
    assert np.allclose(t, r.tau)
    assert np.allclose(r.value, a, rtol=1e-10)
    assert np.array_equal(r.clusters, cnt.astype(int))


def test_explicit_taus_angle_input_float32_and_channels():
    rng = np.random.default_rng(4)
    x = rng.standard_normal((2, 20_000))
    r = sb.AllanDeviation(taus=(0.01, 0.05, 1.0))(x, fs=100.0)
    assert np.allclose(r.tau, [0.01, 0.05, 1.0]) and r.value.shape == (2, 3)
    assert np.array_equal(r.channel(1).value, sb.AllanDeviation(taus=(0.01, 0.05, 1.0))(x[1], fs=100.0).value)
    # angle input: the same deviation from the integrated record (C_k = fs * angle_k)
    angle = np.concatenate([[0.0], np.cumsum(x[0])]) / 100.0
    ra = sb.AllanDeviation(taus=(0.01, 0.05, 1.0), input="angle")(angle, fs=100.0)
    assert np.allclose(ra.value, r.value[0], rtol=1e-9)
    r32 = sb.AllanDeviation()(x[0].astype(np.float32), fs=100.0)
    assert np.allclose(r32.value, sb.AllanDeviation()(x[0].astype(np.float32).astype(float), fs=100.0).value,
                       rtol=1e-12)


def test_gaps_leave_out_touching_clusters():
    rng = np.random.default_rng(5)
    x = rng.standard_normal(10_000)
    g = x.copy()
    g[4000:4010] = np.nan
    r = sb.AllanDeviation(taus=(1.0, 8.0, 64.0))(g, fs=1.0)
    full = sb.AllanDeviation(taus=(1.0, 8.0, 64.0))(x, fs=1.0)
    # a term at cluster size m uses samples i .. i+2m-1: it touches the gap for i in
    # [4000 - 2m + 1, 4009]: 2m + 9 terms are left out (brute force below)
    for k, m in enumerate((1, 8, 64)):
        assert r.clusters[k] == full.clusters[k] - (2 * m + 9)
        c = np.concatenate([[0.0], np.cumsum(np.nan_to_num(x * np.isfinite(g)))])
        i = np.arange(x.size + 1 - 2 * m)
        ok = np.array([np.all(np.isfinite(g[j : j + 2 * m])) for j in i])
        d = (c[i + 2 * m] - 2 * c[i + m] + c[i])[ok] / m
        assert r.value[k] == pytest.approx(np.sqrt(np.mean(d**2) / 2), rel=1e-9)
    assert np.all(r.dof < full.dof) and r.info["gaps"] == 10


@pytest.mark.parametrize("overlapping", [True, False])
def test_whole_record_and_block_cache_paths_give_the_same_bits(monkeypatch, overlapping):
    """A record of no more blocks than the cache holds keeps its cumulative sums end to end;
    a longer one rebuilds blocks from checkpoints and copies the spans that straddle them.
    The two paths must agree bit for bit, gaps included (a gap across a block join)."""
    from specbench.models import _allan

    rng = np.random.default_rng(8)
    n = 9 * BLOCK + 321
    x = rng.standard_normal((2, n)) + 0.01 * np.cumsum(rng.standard_normal((2, n)), axis=-1)
    x[0, 3 * BLOCK - 5 : 3 * BLOCK + 7] = np.nan
    x[1, 5 * BLOCK + 11] = np.inf
    est = sb.AllanDeviation(taus=(0.1, 3.2, 100.0, 1000.0, 7000.0), overlapping=overlapping)
    whole = est(x, fs=10.0)
    init = _allan._Cumulative.__init__
    seen = []

    def blocks_only(self, *a, **k):
        init(self, *a, **k)
        seen.append(self.full is not None)
        self.full = None  # force the block cache

    monkeypatch.setattr(_allan._Cumulative, "__init__", blocks_only)
    cached = est(x, fs=10.0)
    assert seen and all(seen)  # the first run did take the whole-record path
    assert np.array_equal(whole.value, cached.value, equal_nan=True)
    assert np.array_equal(whole.clusters, cached.clusters)
    assert np.array_equal(whole.info["gaps"], cached.info["gaps"])


def test_streamed_engine_reads_memory_maps_with_bounded_memory(tmp_path):
    """Peak memory grows with log2 of the record (the cache of cumulative-sum blocks),
    not with the record."""
    import tracemalloc

    peaks = []
    for blocks in (16, 64):
        n = blocks * BLOCK
        path = tmp_path / f"rate{blocks}.npy"
        mm = np.lib.format.open_memmap(path, mode="w+", dtype=np.float32, shape=(n,))
        rng = np.random.default_rng(6)
        for a in range(0, n, 1 << 20):
            mm[a : a + (1 << 20)] = rng.standard_normal(min(1 << 20, n - a))
        mm.flush()
        del mm
        data = np.load(path, mmap_mode="r")
        tracemalloc.start()
        r = sb.AllanDeviation()(data, fs=1.0)
        peaks.append(tracemalloc.get_traced_memory()[1])
        tracemalloc.stop()
        assert r.value[0] == pytest.approx(1.0, rel=0.01)
    # the bound of the design: a cache of (6 + 4 L) float64 blocks and ~10 block
    # temporaries, L = number of cluster sizes >= a block (benchmark: 1e8 samples)
    for blocks, peak in zip((16, 64), peaks):
        large = int(np.log2(blocks // 2)) + 1
        assert peak < (16 + 4 * large) * BLOCK * 8, (blocks, peak)


def test_bad_input_names_value_and_fix():
    x = np.random.default_rng(7).standard_normal(1000)
    with pytest.raises(sb.SpecbenchError, match=r"averaging time 800 s needs a record of at least 2 tau = 1600 s"):
        sb.AllanDeviation(taus=(1.0, 800.0))(x, fs=1.0)
    with pytest.raises(sb.SpecbenchError, match=r"shorter than the sample interval 0.01 s"):
        sb.AllanDeviation(taus=(0.001,))(x, fs=100.0)
    with pytest.raises(sb.SpecbenchError, match="map to the same cluster size"):
        sb.AllanDeviation(taus=(1.0, 1.001))(x, fs=10.0)
    with pytest.raises(sb.SettingsError, match=r"'taus' parameter of AllanDeviation must be one of 'octave'"):
        sb.AllanDeviation(taus=(2.0, 1.0))
    nan = np.full(100, np.nan)
    with pytest.raises(sb.SpecbenchError, match="touches a gap"):
        sb.AllanDeviation()(nan, fs=1.0)
    with pytest.raises(sb.SpecbenchError, match="at least 3"):
        sb.AllanDeviation()(x[:2], fs=1.0)


def test_edf_formulas():
    # Riley, NIST SP 1065 (2008) Table 5 (Howe, Allan & Barnes 1981; memory): white FM,
    # m = 1: edf = (3 (N-1)/2 - 2 (N-2)/N) 4/9  ~ 2N/3 for large N
    assert edf_overlapping(0, 10_001, 1) == pytest.approx((15000 - 2 * 9999 / 10001) * 4 / 9)
    # non-overlapping white FM: successive differences correlate by -1/2 (exact), so
    # edf = M^2 / (M + 2 (M-1) / 4)
    assert edf_nonoverlapping(0, 100) == pytest.approx(100**2 / (100 + 0.5 * 99), rel=1e-3)
    # random-walk rate: correlation of successive differences +1/4 (continuous limit)
    assert edf_nonoverlapping(-2, 100) == pytest.approx(100**2 / (100 + 2 * 99 / 16), rel=1e-3)


def _flicker(rng, shape):
    n = shape[-1]
    f = np.fft.rfftfreq(2 * n)
    w = np.fft.rfft(rng.standard_normal(shape[:-1] + (2 * n,)), axis=-1)
    w[..., 1:] /= np.sqrt(f[1:])
    w[..., 0] = 0
    return np.fft.irfft(w, axis=-1)[..., :n]


@pytest.mark.slow
@pytest.mark.parametrize("overlapping", [True, False])
@pytest.mark.parametrize("kind", ["white", "random_walk", "bias_instability"])
def test_interval_coverage_monte_carlo(kind, overlapping):
    """Coverage of the 68.3 % and 90 % intervals over 300 records, truth from 20x longer
    averaging (the mean over records of the variance estimate is unbiased)."""
    rng = np.random.default_rng({"white": 11, "random_walk": 12, "bias_instability": 13}[kind])
    n, reps = 2048, 300
    if kind == "white":
        x = rng.standard_normal((reps, n))
    elif kind == "random_walk":
        x = np.cumsum(rng.standard_normal((reps, n)), axis=-1)
    else:
        x = _flicker(rng, (reps, n))
    taus = (1.0, 4.0, 16.0, 64.0, 256.0)
    out = {}
    for conf in (0.683, 0.9):
        r = sb.AllanDeviation(taus=taus, overlapping=overlapping, noise=kind, confidence=conf)(x, fs=1.0)
        true = np.sqrt(np.mean(r.variance, axis=0))
        covered = (r.lower <= true) & (true <= r.upper)
        out[conf] = covered.mean(axis=0)
        # each tau: within 4 binomial standard errors of nominal (300 records)
        se = np.sqrt(conf * (1 - conf) / reps)
        assert np.all(np.abs(out[conf] - conf) < 4 * se + 0.02), (kind, overlapping, conf, out[conf])
