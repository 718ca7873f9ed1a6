"""Named analyses: the state machine headless (no ipywidgets), and a new analysis added as one class."""

import subprocess
import sys

import numpy as np
import pytest
from widget_support import FS, assert_same_spectrum

import specbench as sb
from specbench.widgets import Analysis
from specbench.widgets._analysis import CorrelationAnalysis, SpectrumAnalysis
from specbench.widgets._session import DataSelection, Session


def _sig(n=20_000, seed=5):
    rng = np.random.default_rng(seed)
    return sb.Signal(np.vstack([rng.standard_normal(n), rng.standard_normal(n)]), fs=FS, channels=["a", "b"])


def test_the_session_imports_and_runs_without_ipywidgets():
    code = (
        "import sys; sys.modules['ipywidgets'] = None; sys.modules['bqplot'] = None\n"
        "import numpy as np, specbench as sb\n"
        "from specbench.widgets._session import Session, DataSelection\n"
        "from specbench.widgets._analysis import SpectrumAnalysis, CorrelationAnalysis\n"
        "s = sb.Signal(np.random.default_rng(0).standard_normal(5000), fs=100.0)\n"
        "ses = Session(s, [SpectrumAnalysis(), CorrelationAnalysis()], {}, DataSelection(s.channels[0], None, None))\n"
        "assert ses.run() and ses.result('psd') is not None and ses.result('acf') is not None\n"
        "print('ok')\n"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert out.stdout.strip() == "ok", out.stderr


class TestSession:
    def make(self):
        s = _sig()
        return s, Session(s, [SpectrumAnalysis(), CorrelationAnalysis()], {}, DataSelection("a", None, None))

    def test_build_compute_commit(self):
        s, ses = self.make()
        assert ses.run()
        assert_same_spectrum(ses.result("psd"), sb.Welch()(s.channel("a")))
        ses.propose("psd", sb.Welch(segment_length=512))
        assert ses.pending() and ses.run()
        assert ses.slots["psd"].est == sb.Welch(segment_length=512) and not ses.errors

    def test_a_failing_setting_keeps_the_last_good_result_and_names_its_control(self):
        s, ses = self.make()
        ses.run()
        good = ses.result("psd")
        ses.propose("psd", sb.Welch(segment_length=1 << 16))  # longer than the record
        ses.run({"segment_length"})
        assert ses.result("psd") is good and ses.slots["psd"].est == sb.Welch()
        assert ses.errors["psd"].keys == ["segment_length"]  # from the error's .field
        assert ses.result("acf") is not None and "acf" not in ses.errors

    def test_a_new_selection_is_taken_whole_or_not_at_all(self):
        s, ses = self.make()
        ses.propose("psd", sb.Welch(segment_length=8192))
        ses.run()
        ses.propose_selection(DataSelection("b", None, (0.0, 5.0)))  # 5000 samples < 8192
        assert not ses.run({"span"})
        assert ses.sel == DataSelection("a", None, None)
        assert ses.errors["data"].keys[:1] == ["span"] and "segment_length" in ses.errors["data"].keys

    def test_a_job_computes_off_the_state_and_commits_later(self):
        s, ses = self.make()
        ses.run()
        ses.propose("acf", sb.Autocorrelation(max_lag=0.5))
        job = ses.plan({"acf_max_lag"})
        assert [slot.name for slot, _ in job.todo] == ["acf"]
        job.execute()
        assert ses.slots["acf"].est == sb.Autocorrelation()  # nothing committed yet
        assert ses.commit(job) and ses.slots["acf"].est == sb.Autocorrelation(max_lag=0.5)

    def test_a_cancelled_job_commits_nothing(self):
        s, ses = self.make()
        ses.run()
        before = ses.result("psd")
        ses.propose("psd", sb.Welch(segment_length=256))
        job = ses.plan()
        job.execute()
        job.cancelled = True
        assert not ses.commit(job) and ses.result("psd") is before

    def test_unknown_analysis(self):
        _, ses = self.make()
        with pytest.raises(sb.SpecbenchError, match="analyses are"):
            ses.result("nope")


class RawAnalysis(Analysis):
    """A second PSD: the plain periodogram of the same selection (the protocol's example)."""

    name = "raw"
    title = "Periodogram"
    prefix = "raw_"

    def classes(self):
        return [sb.Periodogram]

    def make_view(self):
        from specbench.widgets._viewhost import SpectrumHost

        return SpectrumHost(self)


def test_an_analysis_is_one_class(sig):
    bench = sb.Workbench(sig, analyses=[SpectrumAnalysis(), CorrelationAnalysis(), RawAnalysis()])
    assert list(bench.analyses) == ["psd", "acf", "raw"]
    assert_same_spectrum(bench.result("raw"), sb.Periodogram()(bench.selected))
    assert "raw_window" in bench.controls and "raw_detrend" not in bench.controls  # detrend is shared
    bench.controls["detrend"].value = "linear"  # the shared field reaches every analysis
    assert bench.result("raw").estimator.detrend == "linear" == bench.estimator.detrend
    assert bench.correlation_estimator.detrend == "linear"
    bench.controls["raw_window"].value = "hamming"
    assert bench.result("raw").estimator.window == "hamming"
    assert_same_spectrum(bench.result("raw"), bench.result("raw").estimator(bench.selected))
    bench.controls["raw_nfft"].value = 16  # shorter than the data: refused, marked beside the control
    assert bench.controls["raw_nfft"].invalid and "nfft of Periodogram" in bench.status
    assert "nfft of Periodogram" in bench.controls["raw_nfft"]._note.value
    assert bench.result("raw").estimator.nfft is None
    bench.controls["raw_nfft"].value = None
    p = bench.pin()
    assert set(p.results) == {"psd", "acf", "raw"}
    assert set(bench.figures) == {"overview", "psd", "acf", "raw"}
    code = bench.code()
    assert "raw = raw_estimator(sig)" in code and "sb.Periodogram(" in code
    ns = {"x": sig}
    exec(code, ns)
    assert_same_spectrum(ns["raw"], bench.result("raw"))
    bench.set_estimator("raw", sb.Periodogram(window="blackman"))
    assert bench.controls["raw_window"].value == "blackman"
    with pytest.raises(sb.SettingsError, match="takes sb.Periodogram"):
        bench.set_estimator("raw", sb.Welch())


class AllChannelsAnalysis(RawAnalysis):
    """An analysis of every channel: compute() gets the record at the strip's rate and span."""

    name = "every"
    prefix = "every_"
    channels = "all"

    def shown(self, result):
        return result.channel(1)


def test_an_analysis_of_every_channel(sig):
    bench = sb.Workbench(sig, analyses=[SpectrumAnalysis(), AllChannelsAnalysis()], span=(1.0, 9.0))
    full = bench.result("every")
    assert full.value.shape[0] == 2
    ref = sb.Periodogram()(sig.span(1.0, 9.0))
    np.testing.assert_array_equal(full.value, ref.value)
    assert bench.selected.n_channels == 1  # the other analyses still see the chosen channel


def test_an_analysis_that_fails_is_not_recomputed_until_its_settings_or_data_change():
    s = sb.Signal(np.random.default_rng(0).standard_normal(500), fs=100.0)
    ses = Session(s, [SpectrumAnalysis(), CorrelationAnalysis()], {}, DataSelection(s.channels[0], None, None))
    ses.run()
    assert ses.result("psd") is None and "psd" in ses.errors  # 1024 > 500 samples
    ses.propose("acf", sb.Autocorrelation(max_lag=1.0))
    job = ses.plan({"acf_max_lag"})
    assert [slot.name for slot, _ in job.todo] == ["acf"]  # the failed PSD is not retried
    job.execute()
    ses.commit(job)
    assert "psd" in ses.errors  # and its message stays
    assert ses.plan() is None and "psd" in ses.errors
    ses.propose("psd", sb.Welch(segment_length=128))
    assert ses.run() and ses.result("psd") is not None and "psd" not in ses.errors
