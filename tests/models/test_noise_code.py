"""Frozen cells of a noise-model analysis: the specbench form reproduces the deviation, the
fitted terms and Q, R bit for bit; the plain-numpy form the deviation to rounding."""

import numpy as np

import specbench as sb
from specbench.freeze._noise_code import noise_code


def test_specbench_form_reproduces_bit_for_bit_and_ends_with_q_and_r():
    sig = sb.demo("imu-static", duration=600.0)
    est = sb.AllanDeviation(taus="octave")
    code = noise_code(sig, est, terms=("white", "gauss_markov"), dt=0.01, replicates=8)
    assert "Q, R = kalman.Q, kalman.R" in code
    ns = {}
    exec(compile(code, "<cell>", "exec"), ns)
    ref = est(sig)
    np.testing.assert_array_equal(ns["allan"].value, ref.value)
    model = sb.fit_noise(ref, terms=("white", "gauss_markov"), replicates=8)
    for name in ("white", "gauss_markov"):
        assert ns["model"].terms[name] == model.terms[name]
    k = model.kalman(0.01)
    np.testing.assert_array_equal(ns["Q"], k.Q)
    np.testing.assert_array_equal(ns["R"], k.R)


def test_numpy_form_matches_to_rounding():
    sig = sb.demo("imu-static", duration=120.0)
    for taus in ("octave", "decade", (0.01, 0.5, 2.0)):
        est = sb.AllanDeviation(taus=taus)
        code = noise_code(sig, est, style="numpy")
        assert "sb." not in code.split("signal =", 1)[1].split("\n", 1)[1]  # plain numpy after the input
        ns = {}
        exec(compile(code, "<cell>", "exec"), ns)
        ref = est(sig).channel(0)
        np.testing.assert_allclose(ns["tau"], ref.tau)
        np.testing.assert_allclose(ns["adev"], ref.value, rtol=1e-9)


def _check_plain_fit(ns, ref, model, k):
    r = ns["noise_result"]
    np.testing.assert_allclose(r["tau"], ref.tau)
    for key, want in (("adev", ref.value), ("lower", ref.lower), ("upper", ref.upper), ("dof", ref.dof)):
        np.testing.assert_allclose(r[key], want, rtol=1e-9, err_msg=key)
    for name, t in model.terms.items():
        got = r["terms"][name]
        if name == "gauss_markov":
            np.testing.assert_allclose(got, (t.sigma.value, t.sigma.lower, t.sigma.upper), rtol=1e-5)
            # the correlation time to 1e-4: the deviance is flat in log T (on the imu-static
            # record 5e-10 between T = 33.93019 and 33.93048 s) while its slope weighs the Allan
            # variances by their dof (up to ~1e5), so the plain form's rounding (1e-10 relative in
            # the variances) moves the minimum by ~1e-5 relative (measured 1.2e-5 with numpy
            # 2.4.6 / scipy 1.17.1), four orders below the interval's width (22.8 .. 50.5 s)
            np.testing.assert_allclose(r["terms"]["gauss_markov tau"], (t.tau.value, t.tau.lower, t.tau.upper),
                                       rtol=1e-4)
        else:
            np.testing.assert_allclose(got, (t.value, t.lower, t.upper), rtol=1e-5, err_msg=name)
    for key in ("F", "Q", "H", "R"):
        np.testing.assert_allclose(r[key], getattr(k, key), rtol=1e-5, err_msg=key)


def test_numpy_form_of_the_fit_agrees_with_fit_noise_and_kalman():
    """The written-out fit (deviation intervals, IRLS/NNLS terms, sandwich with the simulated
    replicates, Satterthwaite intervals, Van Loan F and Q) against the library, to rounding:
    1e-9 for the deviation, 1e-5 for the terms (the Gauss-Markov time's bounded search stops at
    xatol 1e-6 in log T, so rounding in the residuals moves it by about that much)."""
    from specbench.models._fit import simulate

    cases = [
        (sb.demo("imu-static", duration=600.0), ("white", "gauss_markov"), 0.01, 8),
        (sb.Signal(simulate({"white": 1.0, "random_walk": 1e-4}, 1 << 15, 1.0, 1, np.random.default_rng(9))[0],
                   fs=1.0), ("white", "random_walk"), 0.5, 12),
        (sb.Signal(simulate({"white": 1.0, "quantization": 1.0}, 1 << 15, 1.0, 1,
                            np.random.default_rng(10))[0], fs=1.0), ("quantization", "white"), 1.0, 6),
    ]
    for sig, terms, dt, reps in cases:
        est = sb.AllanDeviation()
        code = noise_code(sig, est, terms=terms, dt=dt, replicates=reps, style="numpy")
        plain = code.split("signal =", 1)[1].split("\n", 1)[1]
        code_only = "\n".join(ln.split("#")[0] for ln in plain.splitlines())
        assert "sb." not in code_only and "specbench" not in code_only  # plain numpy/scipy after the input
        ns = {"data": sig.data}  # the cell's input, for the in-memory records
        exec(compile(code, "<cell>", "exec"), ns)
        ref = est(sig).channel(0)
        model = sb.fit_noise(ref, terms=terms, replicates=reps)
        _check_plain_fit(ns, ref, model, model.kalman(dt))
        assert np.array_equal(ns["noise_Q"], ns["noise_result"]["Q"])


def test_workbench_plain_cell_writes_the_noise_fit():
    from specbench.widgets import Workbench

    sig = sb.demo("imu-static", duration=600.0)
    wb = Workbench(sig, channel="gyro_z")
    wb.controls["noise_replicates"].value = 8
    r = wb.result("noise")
    code = wb.code(style="scipy")
    assert "def noise_allan_fit(rate, fs):" in code and "import specbench" not in code
    ns = {"x": sig.data}
    exec(compile(code, "<cell>", "exec"), ns)
    _check_plain_fit(ns, r.allan, r.model, r.kalman)
