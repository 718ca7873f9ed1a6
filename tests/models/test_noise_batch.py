"""`specbench estimate` with a settings file (schema 2) holding a noise-model analysis:
the deviation table and the fitted terms (and Q, R for a step) are written, equal to the
library's results bit for bit."""

import ast

import numpy as np

import specbench as sb
from specbench.models._fit import simulate


def test_batch_writes_deviation_table_and_fitted_terms(tmp_path):
    from specbench.cli import main

    x = simulate({"white": 1.0, "random_walk": 1e-2}, 1 << 15, 10.0, 1, np.random.default_rng(3))[0]
    data_path = tmp_path / "gyro.npy"
    np.save(data_path, x)
    ad = sb.AllanDeviation(taus="octave")
    settings = tmp_path / "noise.json"
    sb.save_settings({"noise": ad}, settings,
                     options={"noise": {"terms": ["white", "random_walk"], "dt": 0.1, "replicates": 16}})
    out = tmp_path / "noise.csv"
    assert main(["estimate", str(data_path), "-s", str(settings), "-o", str(out), "--fs", "10", "-q"]) == 0
    text = out.read_text()
    header = [ln for ln in text.splitlines() if ln.startswith("#")]
    cols = text.splitlines()[len(header)].split(",")
    assert cols == ["tau_s", "adev", "lower", "upper", "dof", "clusters"]
    table = np.loadtxt(out, delimiter=",", comments="#", skiprows=len(header) + 1)
    ref = ad(x, fs=10.0)
    np.testing.assert_array_equal(table[:, 0], ref.tau)
    np.testing.assert_array_equal(table[:, 1], ref.value)  # 17 digits round-trip
    np.testing.assert_array_equal(table[:, 2], ref.lower)
    terms_line = next(ln for ln in header if ln.startswith("# terms:"))
    terms = ast.literal_eval(terms_line.split(":", 1)[1].strip())
    model = sb.fit_noise(ref, terms=("white", "random_walk"), replicates=16)
    got = next(iter(terms.values()))
    assert got["white"]["N"] == [model.terms["white"].value, model.terms["white"].lower, model.terms["white"].upper]
    assert got["random_walk"]["K"][0] == model.terms["random_walk"].value
    k = model.kalman(0.1)
    assert got["kalman"]["Q"] == k.Q.tolist() and got["kalman"]["R"] == k.R.tolist()
    assert any("validated on the target system" in ln for ln in header)


def test_batch_refuses_unknown_noise_options(tmp_path, capsys):
    from specbench.cli import main

    x = np.random.default_rng(4).standard_normal(5000)
    np.save(tmp_path / "d.npy", x)
    sb.save_settings({"noise": sb.AllanDeviation()}, tmp_path / "s.json", options={"noise": {"term": ["white"]}})
    rc = main(["estimate", str(tmp_path / "d.npy"), "-s", str(tmp_path / "s.json"), "-o", str(tmp_path / "o.csv"),
               "--fs", "1", "-q"])
    assert rc != 0
    assert "known options are" in capsys.readouterr().err
