"""Fractional-octave bands against IEC 61260-1:2014 and unit integration against (2 pi f)^-2."""

import numpy as np
import pytest

import specbench as sb
from specbench.measure import iec_bands

G = 10 ** 0.3  # IEC 61260-1:2014 5.2, base-10 octave ratio


def test_iec_formula_odd_and_even_fractions():
    # IEC 61260-1:2014 eqs. (2)-(4) (from memory): f_m = 1000 G^(x/b) for odd b,
    # 1000 G^((2x+1)/(2b)) for even b; edges f_m G^(-+1/(2b))
    fm, lo, hi = iec_bands(3, np.array([0, 1, -1, 10]))
    assert fm == pytest.approx([1000, 1000 * G ** (1 / 3), 1000 * G ** (-1 / 3), 1000 * G ** (10 / 3)], rel=1e-14)
    assert lo == pytest.approx(fm * G ** (-1 / 6), rel=1e-14) and hi == pytest.approx(fm * G ** (1 / 6), rel=1e-14)
    fm6, lo6, hi6 = iec_bands(6, np.array([0, -1]))
    assert fm6 == pytest.approx([1000 * G ** (1 / 12), 1000 * G ** (-1 / 12)], rel=1e-14)
    assert hi6[1] == pytest.approx(lo6[0], rel=1e-14)  # contiguous bands
    fm1, _, _ = iec_bands(1, np.array([-3, 0, 3]))
    assert fm1 == pytest.approx([125.89254, 1000.0, 7943.2823], rel=1e-7)


# Nominal one-third-octave mid-band frequencies, 25 Hz .. 20 kHz (IEC 61260-1:2014 Annex E,
# from memory): the exact values round to these
NOMINAL_THIRDS = [25, 31.5, 40, 50, 63, 80, 100, 125, 160, 200, 250, 315, 400, 500, 630, 800, 1000, 1250,
                  1600, 2000, 2500, 3150, 4000, 5000, 6300, 8000, 10000, 12500, 16000, 20000]


def test_third_octave_centres_round_to_the_nominal_list():
    spec = sb.Welch(segment_length=1 << 14)(np.random.default_rng(0).standard_normal(1 << 17), fs=48000.0)
    bands = spec.octave_bands(3, f_min=25.0, f_max=20000.0)
    assert len(bands) == len(NOMINAL_THIRDS)
    for exact, nominal in zip(bands.center, NOMINAL_THIRDS):
        assert exact == pytest.approx(nominal, rel=0.03)
    assert not bands.partial.any()


@pytest.mark.parametrize("fraction", [1, 3, 6, 12, 24])
def test_band_powers_sum_to_total_power(fraction):
    rng = np.random.default_rng(fraction)
    spec = sb.Welch(segment_length=8192)(rng.standard_normal(1 << 17), fs=44100.0)
    bands = spec.octave_bands(fraction)
    total = spec.view("density")[0].sum() * spec.df
    assert bands.value.sum() + bands.below + bands.above == pytest.approx(total, rel=1e-12)
    assert bands.partial[-1] and not bands.partial[:-1].any()  # the band that straddles fs/2
    assert np.all(bands.lower < bands.value) and np.all(bands.value < bands.upper)
    # each band is a band_power over its edges (same dof)
    m = spec.band_power(bands.lower_edge[3], bands.upper_edge[3])
    assert bands.value[3] == pytest.approx(m.value) and bands.dof[3] == pytest.approx(m.dof)
    # the lowest reported band is at least one resolution wide
    assert bands.upper_edge[0] - bands.lower_edge[0] >= spec.resolution


@pytest.mark.slow
def test_octave_band_interval_coverage():
    rng = np.random.default_rng(8)
    fs = 8000.0
    spec = sb.Welch(segment_length=1024, detrend="none")(rng.standard_normal((1000, 16384)), fs=fs)
    bands = spec.octave_bands(3)
    truth = 2 * (np.minimum(bands.upper_edge, fs / 2) - bands.lower_edge) / fs
    cov = np.mean((bands.lower <= truth) & (truth <= bands.upper), axis=0)
    assert np.all((cov >= 0.925) & (cov <= 0.975)), cov


def test_integration_against_analytic_factor():
    fs = 2000.0
    sig = sb.Signal(np.random.default_rng(1).standard_normal(100_000), fs=fs, unit="m/s^2")
    acc = sb.Welch()(sig)
    vel = acc.integrate(1)
    disp = acc.integrate(2)
    f = acc.freq[1:]
    # velocity density = acceleration density / (2 pi f)^2; displacement: / (2 pi f)^4 (common practice)
    assert vel.value[..., 1:] == pytest.approx(acc.value[..., 1:] / (2 * np.pi * f) ** 2, rel=1e-13)
    assert disp.value[..., 1:] == pytest.approx(acc.value[..., 1:] / (2 * np.pi * f) ** 4, rel=1e-13)
    assert vel.upper[..., 1:] == pytest.approx(acc.upper[..., 1:] / (2 * np.pi * f) ** 2, rel=1e-13)
    assert np.array_equal(vel.dof, acc.dof)
    assert np.isnan(vel.value[..., 0]).all() and not np.isinf(vel.value).any()
    assert any("DC bin" in n for n in vel.info["notes"])
    assert acc.unit == "(m/s^2)^2/Hz" and vel.unit == "(m/s)^2/Hz" and disp.unit == "m^2/Hz"
    assert disp.differentiate(1).unit == "(m/s)^2/Hz"
    assert disp.differentiate(2).value[..., 1:] == pytest.approx(acc.value[..., 1:], rel=1e-12)
    # a velocity tone A sin(2 pi f t) -> displacement amplitude A / (2 pi f)
    t = np.arange(1 << 16) / fs
    v = sb.Signal(0.3 * np.sin(2 * np.pi * 50.3 * t) + 1e-4 * np.random.default_rng(2).standard_normal(t.size),
                  fs=fs, unit="m/s")
    tone = sb.Welch(segment_length=4096, window="blackmanharris")(v).integrate(1).tones()[0]
    assert tone.amplitude == pytest.approx(0.3 / np.sqrt(2) / (2 * np.pi * 50.3), rel=0.01)
    assert tone.unit == "m"
    # band measurements above DC work on the integrated density
    assert vel.band_rms(10, 100).value == pytest.approx(
        np.sqrt(np.sum(vel.value[..., (vel.freq > 10) & (vel.freq < 100)]) * vel.df), rel=0.05)
