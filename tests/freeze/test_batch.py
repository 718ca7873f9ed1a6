"""``specbench estimate``: the batch command gives the API's numbers, with clear errors."""

from __future__ import annotations

import argparse
import io
import json
import re
import subprocess
import sys
import time

import numpy as np
import pytest
from freeze_support import FS, make_state

import specbench as sb
from specbench.cli import main
from specbench.freeze import Selection, _batch, _writers, save_settings, save_state


def _read_csv(path):
    lines = path.read_text().splitlines()
    meta = [ln[2:] for ln in lines if ln.startswith("# ")]
    columns = next(ln for ln in lines if not ln.startswith("#")).split(",")
    table = np.loadtxt(path, delimiter=",", comments="#", skiprows=len(meta) + 1, ndmin=2)
    return meta, columns, table


def _assert_equal_columns(table, result, axis):
    """The file's columns are the API result's arrays, bit for bit (17 significant digits round-trip)."""
    assert np.array_equal(table[:, 0], axis)
    value = np.atleast_2d(result.value)
    for i in range(value.shape[0]):
        for j, part in enumerate(("value", "lower", "upper")):
            assert np.array_equal(table[:, 1 + 3 * i + j], np.atleast_2d(getattr(result, part))[i]), part


@pytest.fixture
def csv_file(tmp_path, record):
    path = tmp_path / "stand_run.csv"
    t = np.arange(record.shape[1]) / FS
    np.savetxt(path, np.column_stack([t, record.T]), fmt="%.17g", delimiter=",",
               header="time [s],shaker [m/s^2],frame [m/s^2]", comments="")
    return path


@pytest.fixture
def npy_file(tmp_path, record):
    path = tmp_path / "stand.npy"
    np.save(path, record)
    return path


def test_csv_input_gives_the_api_numbers(tmp_path, csv_file, capsys):
    est = sb.Welch(segment_length=2048, overlap=0.75, window=("kaiser", 8.6))
    settings = save_settings(est, tmp_path / "psd.json", Selection(channel="frame", span=(2.0, 20.0)))
    out = tmp_path / "psd.csv"
    assert main(["estimate", str(csv_file), "--settings", str(settings), "--out", str(out)]) == 0
    api = est(sb.load(csv_file).channel("frame").span(2.0, 20.0))
    meta, columns, table = _read_csv(out)
    assert columns == ["freq_hz", "value", "lower", "upper"]
    _assert_equal_columns(table, api, api.freq)
    text = "\n".join(meta)
    assert f"specbench {sb.__version__}" in text
    assert f"estimator: {est!r}" in text
    assert "fs_hz: 1000.0" in text and "confidence: 0.95" in text
    assert f"dof: {np.median(api.dof[1:-1]):.6g} per bin (DC and Nyquist of real data: half)" in text
    assert f"data_call: sb.load({str(csv_file)!r}).channel('frame').span(2.0, 20.0)" in text
    assert "data_source: stand_run.csv" in text
    err = capsys.readouterr().err
    assert "reading" in err and "estimating" in err and f"wrote {out}" in err


def test_memory_mapped_npy_all_channels_csv_and_npz(tmp_path, npy_file):
    est = sb.Multitaper(segment_length=1024, bandwidth=3.0)
    settings = save_settings(est, tmp_path / "mt.json", correlation=sb.Autocorrelation(max_lag=0.05))
    sig = sb.load(npy_file, fs=FS)
    assert isinstance(sig.data.base, np.memmap) or isinstance(sig.data, np.memmap)
    api, acf = est(sig), sb.Autocorrelation(max_lag=0.05)(sig)
    out_csv, out_npz, acf_csv = tmp_path / "mt.csv", tmp_path / "mt.npz", tmp_path / "acf.csv"
    assert main(["estimate", str(npy_file), "-s", str(settings), "-o", str(out_csv), "--fs", "1000",
                 "--acf-out", str(acf_csv), "-q"]) == 0
    _, columns, table = _read_csv(out_csv)
    assert columns == ["freq_hz", "ch0:value", "ch0:lower", "ch0:upper", "ch1:value", "ch1:lower", "ch1:upper"]
    _assert_equal_columns(table, api, api.freq)
    _, columns, table = _read_csv(acf_csv)
    assert columns[0] == "lag_s"
    _assert_equal_columns(table, acf, acf.lag)
    assert main(["estimate", str(npy_file), "-s", str(settings), "-o", str(out_npz), "--fs", "1000", "-q"]) == 0
    with np.load(out_npz, allow_pickle=False) as z:
        for name, ref in (("freq_hz", api.freq), ("value", api.value), ("lower", api.lower),
                          ("upper", api.upper), ("dof", api.dof)):
            assert np.array_equal(z[name], ref), name
        assert list(z["channels"]) == ["ch0", "ch1"]
        meta = json.loads(z["metadata"].item())
    assert meta["estimator"] == repr(est) and meta["fs_hz"] == 1000.0
    assert sb.estimator_from_dict(meta["estimator_dict"]) == est


def test_settings_from_the_workbench_state_read_a_new_file_the_same_way(tmp_path, csv_file, record):
    """The reading options (time column) and the selection travel in the settings file."""
    first = sb.load(csv_file, time_column="time")
    state = make_state(first, sb.Welch(segment_length=1024), sb.Autocorrelation(max_lag=0.1),
                       channel="shaker", span=(1.0, 11.0), fs=1024.0, compute=False)
    settings = save_state(state, tmp_path / "bench.json")
    second = tmp_path / "next_run.csv"
    t = np.arange(record.shape[1]) / FS
    np.savetxt(second, np.column_stack([t, record[::-1].T * 2.0]), fmt="%.17g", delimiter=",",
               header="time [s],shaker [m/s^2],frame [m/s^2]", comments="")
    out = tmp_path / "next.csv"
    assert main(["estimate", str(second), "-s", str(settings), "-o", str(out), "-q"]) == 0
    api = state.selection.apply(sb.load(second, time_column="time"))
    assert api.fs == 1024.0
    _, _, table = _read_csv(out)
    spec = state.estimator(api)
    _assert_equal_columns(table, spec, spec.freq)
    # --channel picks another channel than the settings'
    assert main(["estimate", str(second), "-s", str(settings), "-o", str(out), "-q", "--channel", "frame",
                 "--overwrite"]) == 0
    spec = state.estimator(Selection(channel="frame", span=(1.0, 11.0), fs=1024.0).apply(
        sb.load(second, time_column="time")))
    _, _, table = _read_csv(out)
    _assert_equal_columns(table, spec, spec.freq)


def test_long_input_shows_a_running_clock_on_a_terminal(tmp_path, npy_file, monkeypatch):
    """On a terminal a long phase shows its elapsed time; nothing claims a fraction done."""
    monkeypatch.setattr(_batch, "LONG_INPUT", 1000)

    class Tty(io.StringIO):
        def isatty(self):
            return True

    stream = Tty()
    settings = save_settings(sb.Welch(segment_length=4096), tmp_path / "w.json")
    ns = argparse.Namespace(data=npy_file, settings=settings, out=tmp_path / "w.csv", acf_out=None,
                            channel=None, fs=FS, time_column=None, quiet=False)
    monkeypatch.setattr(sb.Welch, "__call__", _slow(sb.Welch.__call__))
    _batch.estimate_file(ns, _batch._Progress(stream, quiet=False))
    text = stream.getvalue()
    assert "\rspecbench estimate: estimating Welch(segment_length=4096) on 2 x 24,000 samples ... " in text
    assert " s" in text and "frequencies (" in text and "%" not in text


def _slow(call):
    def wrapped(self, *a, **k):
        time.sleep(1.2)
        return call(self, *a, **k)

    return wrapped


# --------------------------------------------------------------------------- errors


ERRORS = [
    (["--settings", "{missing}"], r"Settings file '.*missing.json': no such file"),
    (["--out", "{dir}/r.txt"], r"cannot write '.*r.txt': the result is written as .csv or .npz"),
    (["--out", "{dir}/none/r.csv"], r"the folder '.*none' does not exist"),
    (["--channel", "nope"], r"No channel named 'nope'; the channels are \['ch0', 'ch1'\]"),
    (["--fs", "0"], r"--fs must be a positive sample rate"),
    (["--settings", "{acf_settings}", "--acf-out", "{dir}/a.csv"], r"--acf-out was given, but .* holds no corr"),
    (["--only", "noise"], r"--only 'noise': .* holds the analyses psd; name some of those"),
    (["--analysis-out", "acf"], r"--analysis-out 'acf': write it as NAME=PATH"),
    (["--analysis-out", "noise={dir}/n.csv"], r"has no analysis 'noise'; its analyses are psd"),
    (["--acf-out", "{dir}/a.csv"], r"--acf-out was given, but .* holds no correlation estimator"),
    (["--settings", "{span_settings}"], r"The span 10 to 99 s reaches outside the record"),
    (["--fs", None], r"states no sample rate. Pass fs=<samples per second>. \(On the command line: --fs HZ.\)"),
]


@pytest.mark.parametrize("extra, pattern", ERRORS, ids=[e[1][:40] for e in ERRORS])
def test_errors_are_one_clear_line_with_exit_code_2(tmp_path, npy_file, capsys, extra, pattern):
    base = save_settings(sb.Welch(segment_length=512), tmp_path / "w.json")
    names = {
        "dir": str(tmp_path),
        "missing": str(tmp_path / "missing.json"),
        "acf_settings": str(save_settings(sb.Autocorrelation(), tmp_path / "acf.json")),
        "span_settings": str(save_settings(sb.Welch(), tmp_path / "span.json", {"span": [10.0, 99.0]})),
    }
    argv = {"DATA": str(npy_file), "--settings": str(base), "--out": str(tmp_path / "r.csv"), "--fs": "1000"}
    for key, value in zip(extra[::2], extra[1::2]):
        argv[key] = None if value is None else value.format(**names)
    args = ["estimate", argv.pop("DATA")] + [a for k, v in argv.items() if v is not None for a in (k, v)]
    with pytest.raises(SystemExit) if "--fs must" in pattern else _nullcontext():
        code = main(args)
        assert code == 2
    err = capsys.readouterr().err
    assert re.search(pattern, err), err
    assert "Traceback" not in err
    assert not (tmp_path / "r.csv").exists()  # nothing half-written


class _nullcontext:
    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False


def test_console_command_prints_no_traceback(tmp_path, npy_file):
    proc = subprocess.run(
        [sys.executable, "-m", "specbench.cli", "estimate", str(npy_file), "--settings",
         str(tmp_path / "nope.json"), "--out", str(tmp_path / "r.csv")],
        capture_output=True, text=True, timeout=120,
    )
    assert proc.returncode == 2
    assert proc.stderr.startswith("specbench estimate: Settings file") and "Traceback" not in proc.stderr
    assert proc.stdout == ""



def test_clock_line_shows_the_engines_block_count(monkeypatch):
    """The bar is the engine's own count of blocks done (reporting_progress), not a guess."""

    class Tty(io.StringIO):
        def isatty(self):
            return True

    stream = Tty()
    progress = _batch._Progress(stream, quiet=False)
    with progress.phase("estimating", long=True) as ph:
        ph.blocks_done(1, 10)
        ph.blocks_done(3, 10)
        time.sleep(0.7)
    assert "pass 1: [######..............] 3/10 blocks" in stream.getvalue()


# --------------------------------------------------------------------------- schema 2: every analysis


def test_every_analysis_runs_and_lands_beside_out(tmp_path, npy_file, capsys):
    analyses = {"psd": sb.Welch(segment_length=1024), "acf": sb.Autocorrelation(max_lag=0.05)}
    sig = sb.load(npy_file, fs=FS).channel("ch1")
    settings = save_settings(analyses, tmp_path / "two.json", {"channel": "ch1"}, fingerprint=sig)
    out = tmp_path / "run.csv"
    assert main(["estimate", str(npy_file), "-s", str(settings), "-o", str(out), "--fs", "1000"]) == 0
    psd, acf = analyses["psd"](sig), analyses["acf"](sig)
    meta, columns, table = _read_csv(out)
    _assert_equal_columns(table, psd, psd.freq)
    assert "analysis: psd" in meta
    meta, columns, table = _read_csv(tmp_path / "run.acf.csv")
    assert columns[0] == "lag_s" and "analysis: acf" in meta
    _assert_equal_columns(table, acf, acf.lag)
    err = capsys.readouterr().err
    fp = sb.fingerprint(sig)
    assert f"data fingerprint: matches the data the settings were chosen on ({fp.describe()})." in err
    assert f"wrote {out} (psd), {tmp_path / 'run.acf.csv'} (acf)" in err
    # --only picks one analysis; --analysis-out names its file
    named = tmp_path / "just_acf.npz"
    assert main(["estimate", str(npy_file), "-s", str(settings), "-o", str(tmp_path / "x.csv"), "--fs", "1000",
                 "--only", "acf", "--analysis-out", f"acf={named}", "-q"]) == 0
    assert named.exists() and not (tmp_path / "x.csv").exists()
    with np.load(named) as z:
        assert np.array_equal(z["value"], acf.value)


def test_a_new_run_is_reported_as_differing(tmp_path, npy_file, record, capsys):
    sig = sb.load(npy_file, fs=FS)
    settings = save_settings(sb.Welch(segment_length=512), tmp_path / "w.json", fingerprint=sig)
    other = tmp_path / "next.npy"
    np.save(other, record[:, :20000] * 1.5)
    assert main(["estimate", str(other), "-s", str(settings), "-o", str(tmp_path / "n.csv"), "--fs", "1000"]) == 0
    err = capsys.readouterr().err
    assert ("data fingerprint: differs from the data the settings were chosen on: length 20,000 samples, "
            "made on 24,000; span 0 to 20 s, made on 0 to 24 s; content (the samples differ) "
            "(expected for a new run).") in err
    meta, _, _ = _read_csv(tmp_path / "n.csv")
    assert any(m.startswith("fingerprint: differs from the data") for m in meta)
    # a file without a fingerprint says so
    bare = save_settings(sb.Welch(segment_length=512), tmp_path / "bare.json")
    assert main(["estimate", str(other), "-s", str(bare), "-o", str(tmp_path / "b.csv"), "--fs", "1000"]) == 0
    assert "data fingerprint: the settings record none" in capsys.readouterr().err


def test_a_correlation_only_file_writes_the_correlation(tmp_path, npy_file):
    settings = save_settings(sb.Autocorrelation(max_lag=0.02), tmp_path / "acf.json")
    out = tmp_path / "acf.csv"
    assert main(["estimate", str(npy_file), "-s", str(settings), "-o", str(out), "--fs", "1000", "-q"]) == 0
    acf = sb.Autocorrelation(max_lag=0.02)(sb.load(npy_file, fs=FS))
    _, columns, table = _read_csv(out)
    assert columns[0] == "lag_s"
    _assert_equal_columns(table, acf, acf.lag)


def test_the_writer_hook(tmp_path, npy_file, monkeypatch, capsys):
    """A new analysis kind registers how it is run and written; a kind without one is reported."""
    writers = dict(_writers.WRITERS)  # the writer table lives in _writers (_batch reads it)
    monkeypatch.setattr(_writers, "WRITERS", writers)

    def run(est, sig, options):
        return np.atleast_2d(est(sig).value)[:, : options["keep"]]

    def write(path, result, meta):
        _batch.write_table(path, meta, "index", np.arange(result.shape[1]),
                           {f"ch{i}": row for i, row in enumerate(result)})

    _batch.register_writer("CrossCorrelation", _batch.AnalysisWriter(
        write=write, run=run, describe=lambda r: f"{r.shape[1]} values", metadata=lambda r: {"rows": r.shape[0]}))
    del writers["Autocorrelation"]
    settings = save_settings({"psd": sb.Welch(segment_length=512), "lags": sb.CrossCorrelation(max_lag=0.01),
                              "acf": sb.Autocorrelation()}, tmp_path / "hook.json", options={"lags": {"keep": 5}})
    out = tmp_path / "h.csv"
    assert main(["estimate", str(npy_file), "-s", str(settings), "-o", str(out), "--fs", "1000"]) == 0
    meta, columns, table = _read_csv(tmp_path / "h.lags.csv")
    assert columns == ["index", "ch0"] and table.shape == (5, 2)
    assert "rows: 1" in meta and "options: {'keep': 5}" in meta and "analysis: lags" in meta
    assert np.array_equal(table[:, 1], sb.CrossCorrelation(max_lag=0.01)(sb.load(npy_file, fs=FS)).value[:5])
    err = capsys.readouterr().err
    assert "skipped the analysis 'acf': Autocorrelation has no writer in specbench estimate" in err
    assert not (tmp_path / "h.acf.csv").exists()


# --------------------------------------------------------------------------- never lose data


def _small_run(tmp_path, n=20_000, seed=21):
    """An invented recording (white noise) and Welch + autocorrelation settings."""
    x = np.random.default_rng(seed).standard_normal(n)
    data = tmp_path / "rec.npy"
    np.save(data, x)
    settings = save_settings(sb.Welch(segment_length=256), tmp_path / "s.json",
                             correlation=sb.Autocorrelation(max_lag=0.05))
    return data, settings


def _estimate(*argv):
    return main(["estimate", *map(str, argv), "-q", "--fs", "1000"])


def test_output_that_is_the_input_is_refused(tmp_path, capsys):
    data, settings = _small_run(tmp_path)
    before = data.read_bytes()
    link = tmp_path / "alias.npy"
    link.symlink_to(data)
    hard = tmp_path / "hard.npy"
    hard.hardlink_to(data)
    for out in (data, tmp_path / "." / "rec.npy", link, hard):
        capsys.readouterr()
        assert _estimate(data, "-s", settings, "-o", out, "--overwrite") == 2
        err = capsys.readouterr().err
        assert re.search(r"refusing to write the 'psd' result to .*: that is the recording DATA .*which "
                         r"would be destroyed\. Choose another output file name", err), err
    # a CSV recording named as the output, through the path, a symlink and a hard link
    csv_in = tmp_path / "rec.csv"
    np.savetxt(csv_in, np.random.default_rng(2).standard_normal(5000))
    csv_bytes = csv_in.read_bytes()
    (tmp_path / "alias.csv").symlink_to(csv_in)
    (tmp_path / "hard.csv").hardlink_to(csv_in)
    for out in (csv_in, tmp_path / "sub" / ".." / "rec.csv", tmp_path / "alias.csv", tmp_path / "hard.csv"):
        (tmp_path / "sub").mkdir(exist_ok=True)
        assert _estimate(csv_in, "-s", settings, "-o", out, "--overwrite") == 2
        assert "that is the recording DATA" in capsys.readouterr().err
    assert data.read_bytes() == before and csv_in.read_bytes() == csv_bytes


def test_settings_file_as_output_is_refused(tmp_path, capsys):
    data, _ = _small_run(tmp_path)
    settings = save_settings(sb.Welch(segment_length=256), tmp_path / "s.csv.json")
    alias = tmp_path / "settings_alias.csv"
    alias.symlink_to(settings)
    text = settings.read_text()
    assert _estimate(data, "-s", settings, "-o", alias, "--overwrite") == 2
    assert re.search(r"that is the settings file .*which would be destroyed", capsys.readouterr().err)
    assert settings.read_text() == text


def test_two_outputs_on_one_file_are_refused(tmp_path, capsys):
    data, settings = _small_run(tmp_path)
    out = tmp_path / "r.csv"
    assert _estimate(data, "-s", settings, "-o", out, "--acf-out", tmp_path / "." / "r.csv") == 2
    assert re.search(r"the analyses 'psd' and 'acf' would both be written to .*r\.csv'; the second would "
                     r"replace the first\. Give each its own file", capsys.readouterr().err)
    assert not out.exists()


def test_existing_output_needs_overwrite(tmp_path, capsys):
    data, settings = _small_run(tmp_path)
    out = tmp_path / "r.csv"
    out.write_text("precious\n")
    assert _estimate(data, "-s", settings, "-o", out) == 2
    assert re.search(r"r\.csv' already exists; specbench estimate does not replace files unless told to\. "
                     r"Pass --overwrite", capsys.readouterr().err)
    assert out.read_text() == "precious\n"
    assert _estimate(data, "-s", settings, "-o", out, "--overwrite") == 0
    assert out.read_text().startswith("# specbench estimate")


def test_created_files_follow_the_umask_and_replaced_files_keep_their_mode(tmp_path):
    import os
    import stat

    data, settings = _small_run(tmp_path)
    old = os.umask(0o027)
    try:
        assert _estimate(data, "-s", settings, "-o", tmp_path / "a.csv") == 0
    finally:
        os.umask(old)
    assert stat.S_IMODE((tmp_path / "a.csv").stat().st_mode) == 0o640
    assert stat.S_IMODE((tmp_path / "a.acf.csv").stat().st_mode) == 0o640
    (tmp_path / "a.csv").chmod(0o604)
    assert _estimate(data, "-s", settings, "-o", tmp_path / "a.csv", "--overwrite") == 0
    assert stat.S_IMODE((tmp_path / "a.csv").stat().st_mode) == 0o604


def test_a_symlinked_output_writes_its_target(tmp_path):
    data, settings = _small_run(tmp_path)
    (tmp_path / "results").mkdir()
    target = tmp_path / "results" / "psd.csv"
    target.write_text("old\n")
    link = tmp_path / "latest.csv"
    link.symlink_to(target)
    assert _estimate(data, "-s", settings, "-o", link, "--acf-out", tmp_path / "acf.csv", "--overwrite") == 0
    assert link.is_symlink() and link.resolve() == target.resolve()
    assert target.read_text().startswith("# specbench estimate")


def test_unwritable_folder_names_the_output_not_a_temporary_file(tmp_path, capsys):
    import os

    if os.geteuid() == 0:
        folder = tmp_path / "not_a_folder"
        folder.write_text("x")  # root ignores permissions: use a path under a file instead
        out = folder / "r.csv"
        assert _estimate(*_small_run(tmp_path)[:1], "-s", _small_run(tmp_path)[1], "-o", out) == 2
        err = capsys.readouterr().err
        assert re.search(r"cannot write '.*not_a_folder/r\.csv'", err) and _batch.TEMP_SUFFIX not in err
        return
    data, settings = _small_run(tmp_path)
    ro = tmp_path / "ro"
    ro.mkdir()
    ro.chmod(0o500)
    try:
        assert _estimate(data, "-s", settings, "-o", ro / "r.csv") == 2
    finally:
        ro.chmod(0o700)
    err = capsys.readouterr().err
    assert re.search(r"cannot write '.*ro/r\.csv': Permission denied", err) and _batch.TEMP_SUFFIX not in err


def test_failed_write_leaves_no_temporary_file(tmp_path):
    def boom(f):
        f.write(b"partial")
        raise KeyboardInterrupt

    with pytest.raises(KeyboardInterrupt):
        _batch._atomic_write(tmp_path / "r.csv", boom)
    assert list(tmp_path.iterdir()) == []


def test_sigterm_removes_the_partial_file_and_sigkill_leftover_is_named(tmp_path):
    import os
    import signal

    data, settings = _small_run(tmp_path, n=400_000)
    out = tmp_path / "r.csv"
    # SIGTERM while writing: the handler unwinds and the partial file is removed
    code = (
        "import os, signal, sys, time\n"
        "from specbench.freeze import _batch\n"
        "from specbench.cli import main\n"
        "real = _batch._write_csv\n"
        "def slow(*a, **k):\n"
        "    real(*a, **k)\n"
        "_batch._SPECTRUM = _batch.AnalysisWriter(write=lambda p, r, m: _batch._atomic_write(p, lambda f: "
        "(f.write(b'partial'), f.flush(), print('WRITING', flush=True), time.sleep(30))),)\n"
        "_batch.register_writer('Welch', _batch._SPECTRUM)\n"
        f"sys.exit(main(['estimate', {str(data)!r}, '-s', {str(settings)!r}, '-o', {str(out)!r}, '--fs', '1000', "
        "'-q', '--only', 'psd']))\n"
    )
    proc = subprocess.Popen([sys.executable, "-c", code], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True, env={**os.environ})
    assert proc.stdout.readline().strip() == "WRITING"
    partial = [p for p in tmp_path.iterdir() if p.name.endswith(_batch.TEMP_SUFFIX)]
    assert len(partial) == 1 and partial[0].name.startswith(".r.csv.")
    proc.send_signal(signal.SIGTERM)
    _, err = proc.communicate(timeout=30)
    assert proc.returncode == 128 + signal.SIGTERM
    assert "stopped by signal 15; no result was written and the partial files were removed" in err
    assert not any(p.name.endswith(_batch.TEMP_SUFFIX) for p in tmp_path.iterdir()) and not out.exists()
    # SIGKILL cannot be caught: the next run names the leftover
    proc = subprocess.Popen([sys.executable, "-c", code], stdout=subprocess.PIPE, stderr=subprocess.PIPE,
                            text=True)
    assert proc.stdout.readline().strip() == "WRITING"
    proc.kill()
    proc.communicate(timeout=30)
    (left,) = [p for p in tmp_path.iterdir() if p.name.endswith(_batch.TEMP_SUFFIX)]
    again = ("import sys; from specbench.cli import main; "
             f"sys.exit(main(['estimate', {str(data)!r}, '-s', {str(settings)!r}, '-o', {str(out)!r}, "
             "'--fs', '1000', '--only', 'psd']))")
    run = subprocess.run([sys.executable, "-c", again], capture_output=True, text=True, timeout=120)
    assert run.returncode == 0, run.stderr
    assert f"note: {str(left)!r} is a partial file left by an interrupted run" in run.stderr


def test_unknown_loader_keyword_in_settings_is_one_clear_line(tmp_path, capsys):
    data, settings = _small_run(tmp_path)
    doc = json.loads(settings.read_text())
    doc["data"] = {"kind": "load", "path": "rec.npy", "kwargs": {"fs": 1000.0, "on_gaps": "fill"}, "steps": []}
    settings.write_text(json.dumps(doc))
    with pytest.raises(sb.SpecbenchError, match=r"data.kwargs holds 'on_gaps', which is not an sb.load "
                                                r"argument\. Did you mean 'on_gap'\?"):
        sb.read_settings(settings)
    assert main(["estimate", str(data), "-s", str(settings), "-o", str(tmp_path / "r.csv"), "-q"]) == 2
    err = capsys.readouterr().err
    assert "Traceback" not in err and len(err.strip().splitlines()) == 1 and "Did you mean 'on_gap'" in err


def test_loader_options_on_the_command_line(tmp_path, capsys):
    rows = []
    for i in range(3000):
        b = "" if i == 50 else f"{np.cos(i / 5):.6f}"
        rows.append(f"{i / 100:.2f};{np.sin(i / 7):.6f};{b}\n".replace(".", ","))
    text = "Logger: bench 2\n" + "time [s];a [g];b [g]\n" + "".join(rows)
    path = tmp_path / "log.csv"
    path.write_text(text)
    settings = save_settings(sb.Welch(segment_length=256, gaps="skip"), tmp_path / "s.json")
    out = tmp_path / "r.csv"
    assert main(["estimate", str(path), "-s", str(settings), "-o", str(out), "-q"]) == 2
    assert "--skip-rows N" in capsys.readouterr().err
    assert main(["estimate", str(path), "-s", str(settings), "-o", str(out), "-q", "--skip-rows", "1"]) == 2
    assert "(On the command line: --on-gap fill" in capsys.readouterr().err
    assert main(["estimate", str(path), "-s", str(settings), "-o", str(out), "-q", "--skip-rows", "1",
                 "--on-gap", "fill", "--channels", "b", "--delimiter", ";", "--decimal", ","]) == 0
    api = sb.Welch(segment_length=256, gaps="skip")(sb.load(path, skip_rows=1, on_gap="fill", channels=["b"],
                                                            delimiter=";", decimal=","))
    _, columns, table = _read_csv(out)
    _assert_equal_columns(table, api, api.freq)
    parser = argparse.ArgumentParser()
    _batch.add_arguments(parser)
    assert {"fs", "time_column", "on_gap", "channels", "delimiter", "decimal", "skip_rows"} <= {
        key for _, key, _ in _batch.LOADER_OPTIONS}
