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
