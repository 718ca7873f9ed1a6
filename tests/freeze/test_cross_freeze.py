"""Frozen cells and batch output of the cross-channel analyses."""

import ast

import numpy as np
import pytest

import specbench as sb
from specbench.freeze._cross_form import cross_code

FIELDS = ("freq", "coherence", "threshold", "coherence_lower", "coherence_upper", "phase", "phase_lower",
          "phase_upper", "gain", "gain_lower", "gain_upper")


def _reference(res):
    return dict(freq=res.freq, coherence=res.coherence, threshold=res.coherence_threshold,
                coherence_lower=res.coherence_lower, coherence_upper=res.coherence_upper, phase=res.phase,
                phase_lower=res.phase_lower, phase_upper=res.phase_upper, gain=res.gain,
                gain_lower=res.gain_lower, gain_upper=res.gain_upper)


def test_specbench_form_reproduces_the_delay_pair_demo_bit_for_bit():
    sig = sb.demo("delay-pair", duration=30.0)
    xs = sb.CrossSpectrum(segment_length=2048, overlap=0.75)
    res = xs(sig, pair=("upstream", "downstream"))
    code = cross_code(sig, xs, pair=("upstream", "downstream"), band=(1.0, 150.0))
    assert "sb.demo('delay-pair', duration=30.0)" in code
    assert "sb.CrossSpectrum(segment_length=2048, overlap=0.75)" in code
    ns: dict = {}
    exec(compile(code, "<frozen>", "exec"), ns)
    for k, v in _reference(res).items():
        assert np.array_equal(ns[k], v, equal_nan=True), k
    d = res.delay(band=(1.0, 150.0))
    assert ns["delay"] == d


@pytest.mark.parametrize("kw", [dict(), dict(window=("kaiser", 8.0), overlap=0.6, detrend="linear", nfft=1024),
                                dict(segment_length=333, detrend="none", confidence=0.9, scaling="spectrum")])
def test_scipy_form_agrees_to_floating_point_precision(kw):
    # The plain form uses scipy.signal.csd / welch / coherence plus explicit band lines.
    rng = np.random.default_rng(3)
    x = rng.standard_normal((3, 40_000))
    x[2] = np.convolve(x[0], [0.2, 0.5, 0.2], mode="same") + 0.5 * x[2]
    data = x
    sig = sb.Signal(data, fs=512.0, channels=["a", "b", "c"], unit="V")
    xs = sb.CrossSpectrum(**{"segment_length": 512, **kw})
    res = xs(sig, pair=("a", "c"))
    code = cross_code(sig, xs, pair=("a", "c"), style="scipy")
    assert "scipy.signal.csd(x, y, **kw)" in code and "threshold = 1.0 - (1.0 - confidence)" in code
    ns = {"data": data}
    exec(compile(code, "<frozen>", "exec"), ns)
    ref = _reference(res)
    for k in FIELDS:
        a, b = ns[k][1:-1], ref[k][1:-1]  # DC: 0/0 after detrending in both
        np.testing.assert_allclose(a, b, rtol=1e-8, atol=1e-12, err_msg=k)
    specbench_form = cross_code(sig, xs, pair=("a", "c"))
    ns2 = {"data": data}
    exec(compile(specbench_form, "<frozen>", "exec"), ns2)
    assert np.array_equal(ns2["coherence"], res.coherence, equal_nan=True)


def test_scipy_form_says_when_there_is_none():
    sig = sb.demo("delay-pair", duration=10.0)
    code = cross_code(sig, sb.CrossSpectrum(gaps="skip"), style="scipy")
    assert "No plain scipy form" in code


def test_batch_writes_cross_and_covariance(tmp_path):
    # `specbench estimate` with a settings file (schema 2) holding a cross and a covariance analysis
    from specbench.cli import main

    sig = sb.demo("delay-pair", duration=20.0)
    data_path = tmp_path / "duct.npy"
    np.save(data_path, sig.data)
    xs = sb.CrossSpectrum(segment_length=2048)
    settings = tmp_path / "s.json"
    sb.save_settings({"cross": xs, "cov": sb.Covariance()}, settings,
                     options={"cross": {"pair": [0, 1], "band": [1.0, 150.0]}})
    out = tmp_path / "cross.csv"
    assert main(["estimate", str(data_path), "-s", str(settings), "-o", str(out), "--fs", str(sig.fs), "-q"]) == 0
    ref = xs(sig.data[0], sig.data[1], fs=sig.fs)
    text = out.read_text()
    header = [ln for ln in text.splitlines() if ln.startswith("#")]
    delay = ast.literal_eval(next(ln for ln in header if ln.startswith("# delay:")).split(":", 1)[1].strip())
    assert delay["value_s"] == pytest.approx(0.025, abs=1e-4) and delay["lower_s"] < delay["upper_s"]
    cols = text.splitlines()[len(header)].split(",")
    assert cols[:2] == ["freq_hz", "csd_real"] and "coherence_threshold" in cols and "gain_upper" in cols
    table = np.loadtxt(out, delimiter=",", comments="#", skiprows=len(header) + 1)
    np.testing.assert_array_equal(table[:, cols.index("coherence")], ref.coherence)  # 17 digits round-trip
    np.testing.assert_array_equal(table[:, cols.index("phase_upper_rad")], ref.phase_upper)
    cov_files = list(tmp_path.glob("cross.cov.*"))
    assert cov_files, list(tmp_path.iterdir())


def test_batch_runs_the_workbench_cross_analysis_on_every_channel(tmp_path):
    # Settings written from a Workbench whose data strip analyses one channel: the cross analysis
    # still gets every channel (the Workbench's channels="all"), with its pair and delay band.
    from specbench.cli import main
    from specbench.freeze import save_state
    from specbench.widgets import Workbench

    rng = np.random.default_rng(31)
    x = rng.standard_normal(30_000)
    record = np.vstack([x, np.roll(x, 7) + 0.3 * rng.standard_normal(x.size), rng.standard_normal(x.size)])
    path = tmp_path / "rig.csv"
    np.savetxt(path, np.column_stack([np.arange(x.size) / 500.0, record.T]), fmt="%.17g", delimiter=",",
               header="time [s],drive [V],response [V],spare [V]", comments="")
    sig = sb.load(path, time_column="time")
    wb = Workbench(sig, estimators={"cross": sb.CrossSpectrum(segment_length=1024)})
    wb.controls["span"].value = (4.0, 56.0)
    host = wb.views["cross"]
    host.x_menu.value, host.y_menu.value = "drive", "response"
    assert wb.channel == "drive"  # the data strip's channel: one channel for the PSD
    settings = save_state(wb.freeze_state(), tmp_path / "rig.json")
    out = tmp_path / "rig_out.csv"
    assert main(["estimate", str(path), "-s", str(settings), "-o", str(out), "-q"]) == 0
    cross_out = next(p for p in tmp_path.iterdir() if p.name.startswith("rig_out.cross"))
    text = cross_out.read_text()
    header = [ln for ln in text.splitlines() if ln.startswith("#")]
    cols = text.splitlines()[len(header)].split(",")
    table = np.loadtxt(cross_out, delimiter=",", comments="#", skiprows=len(header) + 1)
    shown = host._shown
    assert shown.channels == ("drive", "response")
    np.testing.assert_array_equal(table[:, cols.index("coherence")], shown.coherence)
    np.testing.assert_array_equal(table[:, cols.index("gain_upper")], shown.gain_upper)
    delay = ast.literal_eval(next(ln for ln in header if ln.startswith("# delay:")).split(":", 1)[1].strip())
    assert delay["value_s"] == pytest.approx(7 / 500.0, abs=0.05 / 500.0)
