"""Bad input to the measurements: a SpecbenchError naming the value and the fix."""

import numpy as np
import pytest

import specbench as sb

FS = 1000.0


@pytest.fixture(scope="module")
def spec():
    return sb.Welch(segment_length=256)(np.random.default_rng(0).standard_normal(20_000), fs=FS)


def test_f1_not_below_f2(spec):
    with pytest.raises(sb.SpecbenchError, match=r"f1 = 200 Hz is not below f2 = 100 Hz.*\(100, 200\)"):
        spec.band_power(200, 100)


def test_band_outside_spectrum(spec):
    with pytest.raises(sb.SpecbenchError, match=r"outside the spectrum, which covers 0\.\.500 Hz.*f2 <= 500"):
        spec.band_rms(400, 600)
    with pytest.raises(sb.SpecbenchError, match=r"outside"):
        spec.band_power(-5, 10)


def test_band_narrower_than_a_bin(spec):
    with pytest.raises(sb.SpecbenchError, match=r"narrower than one bin \(3.90625 Hz\).*at least 3.90625 Hz"):
        spec.band_power(100, 101)


def test_not_a_number(spec):
    with pytest.raises(sb.SpecbenchError, match=r"f2 must be a finite frequency"):
        spec.band_power(1, float("nan"))


def test_octave_bands_below_resolution(spec):
    with pytest.raises(sb.SpecbenchError, match=r"narrower than the resolution.*lowest band that can be measured"):
        spec.octave_bands(3, f_min=1.0)
    with pytest.raises(sb.SpecbenchError, match=r"fraction must be one of \(1, 3, 6, 12, 24\)"):
        spec.octave_bands(5)


def test_no_octave_band_fits():
    tiny = sb.Welch(segment_length=8)(np.random.default_rng(0).standard_normal(64), fs=10.0)
    with pytest.raises(sb.SpecbenchError, match=r"no 1/24-octave band fits"):
        tiny.octave_bands(24)


def test_integration_of_non_density_refused():
    s = sb.Welch(scaling="spectrum")(np.random.default_rng(0).standard_normal(5000), fs=FS)
    with pytest.raises(sb.SpecbenchError, match=r"scaling='spectrum'.*scaling='density'"):
        s.integrate(1)
    with pytest.raises(sb.SpecbenchError, match=r"order must be an integer"):
        sb.Welch()(np.zeros(5000) + 1.0 * np.arange(5000) % 7, fs=FS).integrate(0)


def test_band_touching_undefined_dc_after_integration(spec):
    with pytest.raises(sb.SpecbenchError, match=r"non-finite density \(at 0 Hz.*Start the band above"):
        spec.integrate(1).band_power(0, 50)


def test_noise_floor_needs_bins(spec):
    with pytest.raises(sb.SpecbenchError, match=r"holds 3 bin\(s\).*at least 8"):
        spec.noise_floor(100, 112)


def test_tones_bad_count(spec):
    with pytest.raises(sb.SpecbenchError, match=r"max_count must be a positive integer"):
        spec.tones(max_count=0)


def test_unsupported_estimator_result():
    from specbench.measure import structure_of

    class Fake:
        estimator = object()
        info = {}

    with pytest.raises(sb.SpecbenchError, match=r"Welch, Periodogram, Multitaper or Correlogram"):
        structure_of(Fake())
