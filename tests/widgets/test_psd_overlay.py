"""Model curves of one analysis drawn over another's view (the PSD view's overlays): the
curve follows the "plot as" form, the toggle hides it, and the y range ignores it."""

import numpy as np
import pytest

import specbench as sb
from specbench.widgets import Analysis, Workbench
from specbench.widgets._analysis import CorrelationAnalysis, SpectrumAnalysis
from specbench.widgets._views import Overlay, SpectrumView


def _white(n=1 << 14, fs=100.0, seed=3):
    return sb.Signal(np.random.default_rng(seed).standard_normal(n), fs=fs, unit="V")


def _flat(level):
    return Overlay("flat", "flat model", lambda f, onesided: np.full(np.shape(f), level * (1 if onesided else 0.5)),
                   "#336699", "dash_dotted")


def test_overlay_follows_the_plot_form_and_the_toggle():
    sig = _white()
    spec = sb.Welch(segment_length=256)(sig).channel(0)
    view = SpectrumView()
    view.set_overlays([_flat(0.02)])
    view.show(spec)
    line = view.overlay_lines["flat"]
    assert line in view.figure.marks and view.overlay_toggle.layout.display is None
    assert np.allclose(line.y, 0.02) and np.array_equal(line.x, view.line.x)
    # the view's other forms: the same conversions Spectrum.view applies to the estimate
    view.plot_as.value = "asd"
    assert np.allclose(line.y, np.sqrt(0.02))
    view.plot_as.value = "db"
    assert np.allclose(line.y, 10 * np.log10(0.02))
    view.plot_as.value = "power"
    assert np.allclose(line.y, 0.02 * spec.resolution)
    view.plot_as.value = "density"
    # the y range follows the estimate, not the model: a model far above does not squash it
    ys = (view.ys.min, view.ys.max)
    view.set_overlays([_flat(1e6)])
    view.redraw()
    assert (view.ys.min, view.ys.max) == ys and np.allclose(line.y, 1e6)
    assert view.marks_points()["overlay/flat"] == line.y.size <= 4000
    view.overlay_toggle.value = False
    assert line not in view.figure.marks
    view.overlay_toggle.value = True
    view.set_overlays([])
    view.redraw()
    assert line not in view.figure.marks and view.overlay_toggle.layout.display == "none"


class _Level(Analysis):
    """A test analysis: the variance of the data, drawn as a flat one-sided density over the PSD."""

    name = "level"
    title = "Level"
    prefix = "level_"

    def classes(self):
        return [sb.Autocorrelation]

    def compute(self, est, selected, *, progress=None, cancel=None):
        return float(np.var(selected.data)) / selected.fs * 2

    def shown(self, result):
        return result

    def make_view(self):
        import ipywidgets as W

        class _Host:
            widget = W.HTML("level")
            figure = None

            def show(self, shown, pinned):
                self.value = shown

            def holds(self):
                return []

            def controls(self):
                return {}

            def marks_points(self):
                return {}

        return _Host()

    def overlays(self, shown):
        return {"psd": [Overlay("level", "white level", lambda f, one: np.full(np.shape(f), shown), "#336699")]}

    def freeze_lines(self, est, data_var):
        return []


def test_the_workbench_hands_overlays_to_the_view_they_name():
    sig = _white()
    wb = Workbench(sig, analyses=[SpectrumAnalysis(), CorrelationAnalysis(), _Level()])
    view = wb.views["psd"].view
    line = view.overlay_lines["level"]
    assert line in view.figure.marks
    assert np.allclose(line.y, 2 * np.var(sig.data) / sig.fs)
    # the two-sided estimate gets the two-sided curve from the same function
    assert wb.views["psd"].view.overlays[0].density(np.array([1.0]), False)[0] == pytest.approx(
        2 * np.var(sig.data) / sig.fs)
