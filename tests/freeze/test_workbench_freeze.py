"""The real Workbench and the freeze layer: bench.code() cells reproduce bench.spectrum / bench.correlation."""

from __future__ import annotations

import numpy as np
import pytest
from freeze_support import assert_close, run_cell

import specbench as sb
from specbench.freeze import _freeze, read_settings

pytest.importorskip("ipywidgets")
pytest.importorskip("bqplot")


@pytest.fixture
def bench():
    sig = sb.demo("test-stand", duration=20.0)
    bench = sb.Workbench(sig)
    bench.controls["channel"].value = "free_end"
    bench.controls["span"].value = (1.0, 15.0)
    return bench


@pytest.mark.parametrize("est", [
    sb.Welch(segment_length=2048, overlap=0.75, window=("kaiser", 8.6)),
    sb.Periodogram(window="hann"),
    sb.Multitaper(segment_length=1024),
    sb.Correlogram(max_lag=200),
], ids=repr)
@pytest.mark.parametrize("fs", [None, 5000.0])
def test_bench_code_reproduces_the_estimates_on_screen(bench, est, fs):
    if fs is not None:
        bench.controls["fs"].value = fs
    bench.estimator = est
    assert bench.estimator == est and bench.spectrum.estimator == est
    ns = run_cell(bench.code("specbench"), x=bench.signal)
    for part in ("freq", "value", "lower", "upper", "dof"):
        assert np.array_equal(getattr(ns["spectrum"], part), getattr(bench.spectrum, part)), part
    for part in ("lag", "value", "lower", "upper"):
        assert np.array_equal(getattr(ns["correlation"], part), getattr(bench.correlation, part)), part
    ns = run_cell(bench.code("scipy"), x=bench.signal.data)
    for name, part in (("freq", "freq"), ("psd", "value"), ("lower", "lower"), ("upper", "upper"), ("dof", "dof")):
        assert_close(ns[name], getattr(bench.spectrum, part), what=name)
    for name, part in (("lag", "lag"), ("acf", "value"), ("acf_lower", "lower"), ("acf_upper", "upper")):
        assert_close(ns[name], getattr(bench.correlation, part), what=name)


def test_bench_freeze_inserts_and_saves(bench, tmp_path, monkeypatch):
    calls = []

    class Shell:
        def set_next_input(self, text, replace=False):
            calls.append((text, replace))

    monkeypatch.setattr(_freeze, "_shell", lambda: Shell())
    bench.estimator = sb.Welch(segment_length=1024)
    code = bench.freeze(tmp_path / "bench.json")
    assert calls == [(str(code), False)]
    s = read_settings(tmp_path / "bench.json")
    assert s.estimator == bench.estimator and s.correlation == bench.correlation_estimator
    assert s.selection.channel == "free_end" and s.selection.span == bench.span
    assert s.data == {"kind": "demo", "name": "test-stand", "kwargs": {"duration": 20.0}, "steps": []}
