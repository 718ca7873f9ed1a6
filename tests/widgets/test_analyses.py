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


_CONTROLLER_HEADLESS = r'''
import contextlib, sys
sys.modules["ipywidgets"] = None; sys.modules["bqplot"] = None
import numpy as np, specbench as sb
from specbench import SettingsError
from specbench.widgets._analysis import CorrelationAnalysis, SpectrumAnalysis
from specbench.widgets._controller import Controller
from specbench.widgets._scheduler import Scheduler
from specbench.widgets._session import DataSelection, Session

class Held:  # a widget's hold_sync, as the draw step uses it
    def hold_sync(self):
        return contextlib.nullcontext()

class Value:
    def __init__(self, value): self.value = value
    def set_value_quietly(self, value): self.value = value

class Binding:  # the control binding: one "segment_length" field of the PSD analysis
    applying = 0
    methods = {}
    def __init__(self): self.fields, self.marked, self.contexts = {"segment_length": 1024}, [], []
    def owners(self, key): return ["psd"] if key == "segment_length" else []
    def build(self, name):
        n = self.fields["segment_length"]
        if n < 8:
            raise SettingsError("segment_length must be at least 8.", field="segment_length")
        return sb.Welch(segment_length=n)
    def relevance(self, name, est): pass
    def show(self, name, est): pass
    def controls(self): return {}
    def mark(self, data_controls): self.marked.append(sorted(data_controls))
    def set_quietly(self, key, value): self.fields[key] = value
    def set_context(self, ctx): self.contexts.append(ctx)
    def suggest(self): pass

class Host:
    def __init__(self): self.shown = []
    def holds(self): return [Held()]
    def controls(self): return {}
    def show(self, result, pinned): self.shown.append(result)

class Strip(Held):
    def __init__(self):
        self.channel, self.rate, self.span = Value("a"), Value(None), Value(None)
        self.trace = self.figure = Held()
        self.drawn = []
    def show(self, *args): self.drawn.append(args)

class Merit:
    widget = Held()
    def show(self, merits): self.merits = merits

class Line:
    def show(self, status, error): self.last = (status.text, error)
    def computing(self): pass

rng = np.random.default_rng(1)
sig = sb.Signal(np.vstack([rng.standard_normal(20_000), rng.standard_normal(20_000)]), fs=100.0, channels=["a", "b"])
ses = Session(sig, [SpectrumAnalysis(), CorrelationAnalysis()], {}, DataSelection("a", None, None))
binding, strip, hosts, line = Binding(), Strip(), {"psd": Host(), "acf": Host()}, Line()
ctl = Controller(ses, sig, binding=binding, strip=strip, hosts=hosts, merit=Merit(), statusline=line,
                 pins=lambda: [], panel=lambda: None)
ctl.scheduler = Scheduler(lambda *a: ctl.run(*a))
ctl.run(True)
assert ses.result("psd") is not None and hosts["psd"].shown[-1] is ses.slots["psd"].shown
assert len(strip.drawn) == 1 and binding.contexts[-1].n == 20_000 and not line.last[1]

binding.fields["segment_length"] = 512
ctl.on_field("segment_length")  # no running loop: computed before it returns
assert ses.slots["psd"].est == sb.Welch(segment_length=512) and len(strip.drawn) == 1  # no new selection

good = ses.result("psd")
binding.fields["segment_length"] = 4
ctl.on_field("segment_length")  # refused: the last good estimate stays, the error is on screen
assert ses.result("psd") is good and line.last[1] and "at least 8" in line.last[0], line.last
assert ses.errors["build:psd"].keys == ["segment_length"]  # the control to mark

strip.channel.value = "b"
ctl.on_selection("channel")
assert ses.sel.channel == "b" and len(strip.drawn) == 2
print("ok")
'''


def test_the_controller_runs_without_ipywidgets_driven_by_stand_ins():
    out = subprocess.run([sys.executable, "-c", _CONTROLLER_HEADLESS], capture_output=True, text=True, timeout=120)
    assert out.stdout.strip() == "ok", out.stderr
