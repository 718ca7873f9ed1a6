"""The settings advisor: it meets its targets on real estimates and resolves what the defaults cannot."""

import numpy as np
import pytest

import specbench as sb

FS = 1000.0


def _two_tones(n=200_000, f1=100.0, f2=100.8, seed=0):
    t = np.arange(n) / FS
    rng = np.random.default_rng(seed)
    x = np.sin(2 * np.pi * f1 * t) + np.sin(2 * np.pi * f2 * t + 1.0) + 0.1 * rng.standard_normal(n)
    return sb.Signal(x, fs=FS, unit="V")


def _dip_db(spec, f1, f2):
    """Depth of the valley between two peaks, dB below the smaller peak (common practice for 'resolved')."""
    d = spec.view("density")[0].ravel()
    f = spec.freq
    near = lambda fc: int(np.argmax(np.where(abs(f - fc) < 0.25, d, -np.inf)))  # noqa: E731
    k1, k2 = near(f1), near(f2)
    valley = d[min(k1, k2): max(k1, k2) + 1].min()
    return 10 * np.log10(min(d[k1], d[k2]) / valley)


def test_advisor_resolves_two_tones_the_defaults_cannot():
    sig = _two_tones()
    default = sb.Welch()(sig)
    assert _dip_db(default, 100.0, 100.8) < 3.0  # 1.46 Hz resolution: one lump
    advice = sb.advise(sig, resolution=0.3, band_db=2.5, sidelobe_db=-50)
    best = advice[0]
    spec = best.estimator(sig)
    assert _dip_db(spec, 100.0, 100.8) >= 3.0
    # the advisor's figures are those of the real estimate, and the targets are met
    assert spec.resolution == pytest.approx(best.figures["resolution_hz"], rel=0.02)
    assert spec.resolution <= 0.3
    assert spec.band_db() == pytest.approx(best.figures["band_db"], rel=0.03)
    assert spec.band_db() <= 2.5
    info = sb.window_info(spec.estimator.window, spec.estimator.segment_length) if hasattr(
        spec.estimator, "window") else None
    if info is not None:
        assert info.highest_sidelobe_db <= -50
    assert "most margin" in best.reason
    assert all(c.figures["band_db"] <= 2.5 and c.figures["resolution_hz"] <= 0.3 for c in advice)


def test_figures_agree_with_estimates_for_each_family():
    sig = _two_tones(n=60_000)
    advice = sb.advise(sig, resolution=2.0, top=400)
    seen = set()
    for c in advice:
        kind = type(c.estimator).__name__
        if kind in seen:
            continue
        seen.add(kind)
        spec = c.estimator(sig)
        assert spec.resolution == pytest.approx(c.figures["resolution_hz"], rel=0.02), c
        if kind != "Multitaper" or not c.estimator.adaptive:
            assert spec.band_db() == pytest.approx(c.figures["band_db"], rel=0.03), c
    assert {"Welch", "Multitaper", "Correlogram"} <= seen


def test_ranking_rules_single_targets():
    sig = _two_tones(n=100_000)
    by_res = sb.advise(sig, resolution=1.0)
    bands = [c.figures["band_db"] for c in by_res]
    assert bands == sorted(bands)
    by_band = sb.advise(sig, band_db=1.0)
    res = [c.figures["resolution_hz"] for c in by_band]
    assert res == sorted(res)
    assert all(b <= 1.0 for b in (c.figures["band_db"] for c in by_band))


def test_impossible_resolution_names_best_attainable():
    sig = _two_tones(n=10_000)
    with pytest.raises(sb.SpecbenchError, match=r"finer than this record allows.*at best 0\.1 Hz.*"
                                                 r"record at least 100,000 samples"):
        sb.advise(sig, resolution=0.01)
    with pytest.raises(sb.SpecbenchError, match=r"no setting meets all the targets.*Closest"):
        sb.advise(sig, resolution=0.2, band_db=0.5)
    with pytest.raises(sb.SpecbenchError, match=r"give a resolution"):
        sb.advise(sig)
    with pytest.raises(sb.SpecbenchError, match=r"sidelobe_db must be a negative level"):
        sb.advise(sig, resolution=1.0, sidelobe_db=60)


def test_progress_and_charts():
    sig = _two_tones(n=50_000)
    seen = []
    advice = sb.advise(sig, resolution=1.0, band_db=3.0, progress=seen.append)
    assert seen[-1] == 1.0 and seen == sorted(seen) and len(seen) > 3
    svg = advice.svg()
    assert svg.startswith("<svg") and "resolution (Hz)" in svg and "#1" in svg
    pytest.importorskip("bqplot")
    fig = advice.chart()
    assert fig.marks[1].x.size == len(advice)
    assert fig.axes[0].label == "resolution (Hz)" and fig.axes[1].label == "band width (dB)"
    assert "advise" not in repr(advice[0].estimator)
    assert advice[0].code.startswith("est = sb.")
