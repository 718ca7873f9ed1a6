"""The Workbench's noise-model analysis: the deviation and the fit equal sb.AllanDeviation and
sb.fit_noise, the controls come from the constraint table, a fit that fails keeps the
deviation and says why, the model's PSD goes over the PSD view, and the frozen cell and the
settings file reproduce the deviation, the terms and Q, R bit for bit."""

import numpy as np
import pytest

import specbench as sb
from specbench.models._fit import simulate
from specbench.widgets import Workbench


@pytest.fixture(scope="module")
def imu():
    return sb.demo("imu-static", duration=900.0)


@pytest.fixture(scope="module")
def bench(imu):
    return Workbench(imu, channel="gyro_y")


def test_the_view_shows_the_deviation_the_terms_and_the_filter(imu, bench):
    r = bench.result("noise")
    ref = sb.AllanDeviation()(imu.channel("gyro_y"))
    assert np.array_equal(r.allan.value, ref.value[0]) and np.array_equal(r.allan.upper, ref.upper[0])
    # terms chosen from the deviation: the demo holds white noise and a Gauss-Markov bias
    # (its rate random walk is far too small for 15 minutes)
    assert r.auto and r.terms == ("white", "gauss_markov") and r.fit_error is None
    model = sb.fit_noise(ref, terms=r.terms, confidence=0.683, replicates=48, seed=0)
    assert r.model.params == model.params
    assert r.dt == 1 / imu.fs and np.array_equal(r.kalman.Q, model.kalman(1 / imu.fs).Q)
    host = bench.views["noise"]
    table = host.table.value
    for text in ("sb-term-table", "white noise", "Gauss-Markov", "sigma", "tau",
                 "68.3 % interval", "Filter step dt = 0.01 s", "temperature, vibration or aging"):
        assert text in table, text
    view = host.view
    assert view.model_line in view.figure.marks and set(view.asymptotes) == {"white", "gauss_markov"}
    assert list(view.labels.text) == ["N", "GM"]
    assert np.allclose(view.model_line.y ** 2, r.model.adev(view.model_line.x) ** 2)
    pts = bench.mark_points()
    assert pts["noise/current"] == r.allan.tau.size and pts["psd/overlay/noise_model"] <= 4000
    keys = {m.key for m in bench.analyses["noise"].merits(r, {})}
    assert {"noise_taus", "noise_chi2", "noise_terms", "noise_n", "noise_r"} <= keys
    assert "tau 1.28 s" in bench.read("noise", 1.3) and "model" in bench.read("noise", 1.3)


def test_the_model_psd_is_drawn_over_the_psd_view(imu, bench):
    psd = bench.views["psd"].view
    line = psd.overlay_lines["noise_model"]
    assert line in psd.figure.marks and psd.overlay_toggle.layout.display is None
    model = bench.result("noise").model
    assert np.allclose(line.y, model.psd(line.x), equal_nan=True)
    # the reference: scipy.signal.welch's one-sided density of the same channel agrees with the
    # model's one-sided PSD over the band the Allan deviation resolves (median ratio near 1)
    from scipy import signal as ss

    f, p = ss.welch(imu.channel("gyro_y").data[0], fs=imu.fs, nperseg=8192)
    band = (f > 0.02) & (f < 10)
    assert np.median(p[band] / model.psd(f[band])) == pytest.approx(1.0, abs=0.1)
    psd.overlay_toggle.value = False
    assert line not in psd.figure.marks
    psd.overlay_toggle.value = True


def test_controls_come_from_the_constraint_table_and_a_failing_fit_keeps_the_deviation(imu):
    wb = Workbench(imu.channel("gyro_z"))
    c = wb.controls
    for key in ("noise_taus", "noise_overlapping", "noise_input", "noise_confidence", "noise_terms", "noise_dt",
                "noise_replicates"):
        assert key in c, key
    c["noise_terms"].value = ("white",)
    r = wb.result("noise")
    assert r.terms == ("white",) and not r.auto and r.model.chi2_per_dof > 3  # a term is missing
    assert c["noise_terms"].inner.value == ("white",)
    c["noise_dt"].value = 0.25
    assert wb.result("noise").kalman.dt == 0.25
    good = wb.result("noise")
    # a term the record cannot resolve: the deviation stays, the message is in the view and the status
    c["noise_terms"].value = ("white", "gauss_markov", "random_walk")
    r = wb.result("noise")
    assert r.model is None and "'random_walk' is not identifiable" in r.fit_error
    assert "No noise model" in wb.views["noise"].table.value and "not identifiable" in wb.views["noise"].table.value
    assert "Not applied" not in wb.status  # the deviation is on screen; the view says why there is no model
    assert np.array_equal(r.allan.value, good.allan.value)
    assert "No noise model: The term 'random_walk'" in wb.code()
    # a setting the estimator refuses marks its control and keeps the last result
    c["noise_terms"].value = ("white",)
    before = wb.result("noise")
    c["noise_replicates"].value = -1
    assert wb.result("noise") is before and c["noise_replicates"].invalid


def test_frozen_cell_reproduces_deviation_terms_q_and_r_bit_for_bit(imu, bench):
    bench.controls["noise_dt"].value = 0.05
    r = bench.result("noise")
    code = bench.code()
    assert "noise_filter = noise_model.kalman(dt=0.05)" in code and code.rstrip().endswith(
        "validate a filter tuned from it on the target system.")
    ns: dict = {}
    exec(compile(code, "<frozen>", "exec"), ns)
    assert np.array_equal(ns["allan"].value, r.allan.value) and np.array_equal(ns["allan"].lower, r.allan.lower)
    assert ns["noise_model"].params == r.model.params
    for name, t in r.model.terms.items():
        assert repr(ns["noise_model"].terms[name]) == repr(t)
    assert np.array_equal(ns["Q"], r.kalman.Q) and np.array_equal(ns["R"], r.kalman.R)
    assert np.array_equal(ns["noise_filter"].F, r.kalman.F)


def test_settings_file_and_the_batch_command_give_the_same_terms(tmp_path):
    from specbench.cli import main

    x = simulate({"white": 1.0, "random_walk": 1e-2}, 1 << 15, 10.0, 1, np.random.default_rng(4))[0]
    wb = Workbench(sb.Signal(x, fs=10.0), data_name="gyro")
    wb.controls["noise_replicates"].value = 16
    wb.controls["noise_dt"].value = 0.1
    r = wb.result("noise")
    assert r.terms == ("white", "random_walk")
    settings = tmp_path / "bench.json"
    wb.freeze(settings)
    read = sb.read_settings(settings)
    assert read.analyses["noise"] == sb.AllanDeviation()
    assert read.options["noise"] == {"replicates": 16, "seed": 0, "confidence": 0.683,
                                     "terms": ["white", "random_walk"], "dt": 0.1}
    np.save(tmp_path / "gyro.npy", x)
    noise_csv = tmp_path / "noise.csv"
    assert main(["estimate", str(tmp_path / "gyro.npy"), "-s", str(settings), "-o", str(tmp_path / "psd.csv"),
                 "--analysis-out", f"noise={noise_csv}", "--fs", "10", "-q"]) == 0
    text = noise_csv.read_text()
    assert "# terms:" in text and "tau_s,adev,lower,upper,dof,clusters" in text
    import ast

    terms = ast.literal_eval(next(ln for ln in text.splitlines() if ln.startswith("# terms:")).split(":", 1)[1])
    got = next(iter(terms.values()))
    assert got["random_walk"]["K"] == [r.model.terms["random_walk"].value, r.model.terms["random_walk"].lower,
                                       r.model.terms["random_walk"].upper]
    assert got["kalman"]["R"] == r.kalman.R.tolist() and got["kalman"]["Q"] == r.kalman.Q.tolist()


def test_set_estimator_takes_the_public_allan_deviation(imu, bench):
    bench.set_estimator("noise", sb.AllanDeviation(taus="decade"))
    r = bench.result("noise")
    assert np.array_equal(r.allan.tau, sb.AllanDeviation(taus="decade")(imu.channel("gyro_y")).tau)
    assert "noise_estimator = sb.AllanDeviation(taus='decade')" in bench.code()
