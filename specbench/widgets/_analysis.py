"""Named analyses of the Workbench: what each one estimates, shows, pins and freezes.

Pure Python (no ipywidgets at import time): the views are made on demand by
:meth:`Analysis.make_view`, so the analysis state (:mod:`._session`) is testable headless.

An analysis is one class.  It declares

- ``name`` (the key in ``bench.analyses``, ``bench.result(name)``, the settings file and the
  frozen cell) and ``title`` (shown above its controls and its view);
- ``classes()``: the estimator classes it accepts, offered by a method menu when there are
  several (the first is the default); the controls of the current class are generated from
  its constraint table by :func:`._controls.control_for`;
- ``prefix``: the prefix of its control keys (``""`` for the main analysis, ``"acf_"``, ...);
- ``compute(est, selected, progress=, cancel=)``: the result on the selected data;
- ``shown(result)``: the part of the result its view draws (one channel);
- ``merits(shown, others)``: its figures of merit;
- ``make_view()``: an object with ``widget``, ``figure``, ``show(shown, pinned)``,
  ``holds()`` (widgets to hold in sync while drawing), ``controls()`` (display-only controls by
  key) and ``marks_points()``;
- ``freeze_lines(est, data_var)``: its lines in the specbench-form frozen cell (psd and acf
  are written by the freeze layer itself, ``None`` here);
- ``overlays(shown)``: model curves it draws over other analyses' views, ``{analysis name:
  [Overlay, ...]}`` (e.g. a fitted noise model's PSD over the ``psd`` view);
- ``settings_entry(est)``: the ``(estimator, options)`` its settings-file entry holds (default
  ``(est, None)``; options are the analysis' JSON choices that are not estimator fields;
  ``(None, None)`` leaves the analysis out, when it does not apply to the data; the plain
  numpy/scipy cell writes an analysis from these through
  ``freeze._scipy_form.register_plain_form``).

Register a new one with :func:`register_analysis` (or pass ``analyses=`` to the Workbench);
the Workbench then builds its controls, view, pins, status and frozen lines with no code of
its own for that analysis.  Fields of ``group="data"`` that several analyses share (same name,
same constraint: ``detrend``, ``gaps``) get one control in the data strip and one value.
"""

from __future__ import annotations

from typing import Any

from .._errors import SettingsError

__all__ = [
    "Analysis",
    "SpectrumAnalysis",
    "CorrelationAnalysis",
    "register_analysis",
    "registered_analyses",
    "spectral_classes",
    "carry_over",
]


def spectral_classes() -> list[type]:
    """The PSD estimator classes offered by the method menu (registered, with a title)."""
    from ..estimators import SpectralEstimator, estimator_classes

    return [c for c in estimator_classes().values()
            if isinstance(c, type) and issubclass(c, SpectralEstimator) and c.title]


def carry_over(old: Any, cls: type, base: Any = None) -> Any:
    """A ``cls`` estimator that keeps the choices made in ``old``.

    Starts from ``base`` (the last ``cls`` estimator used, or ``cls()``) and takes every
    field of ``old`` that was changed from ``old``'s default, or that is concrete where
    ``cls`` would be automatic (None), and that ``cls`` has and accepts (one by one, so one
    field ``cls`` refuses does not lose the others).  Other defaults of one method do not
    leak into another: Welch's Hann window does not replace the periodogram's rectangular
    one unless it was chosen.
    """
    start = base if isinstance(base, cls) else cls()
    wanted = {k: v for k, v in old.changed_fields().items() if k in cls.params()}
    # a concrete value also replaces an automatic (None) default of the new method: Welch's
    # segment length carries into multitaper, whose default tapers the whole record
    wanted.update({k: getattr(old, k) for k, p in cls.params().items()
                   if k in old.params() and k not in wanted and p.default is None
                   and getattr(start, k) is None and getattr(old, k) is not None})
    try:
        return start.replace(**wanted)
    except SettingsError:
        pass
    est = start
    for k, v in wanted.items():
        try:
            est = est.replace(**{k: v})
        except SettingsError:
            continue
    return est


class Analysis:
    """One named analysis of the Workbench (subclass it; see the module docstring)."""

    #: key in ``bench.analyses`` / ``bench.result`` / the settings file
    name: str = ""
    #: heading of its controls and view
    title: str = ""
    #: prefix of its control keys (``bench.controls[prefix + field]``)
    prefix: str = ""
    #: the label of its method menu (shown only when ``classes()`` has more than one)
    method_label: str = "Method"
    #: the main analysis gives the status line its estimator (the first registered is main)
    main: bool = False
    #: ``"one"``: ``compute`` gets the channel chosen in the data strip; ``"all"``: every
    #: channel of the record (same rate and span), e.g. for cross-channel analyses
    channels: str = "one"

    def classes(self) -> list[type]:
        """The estimator classes this analysis accepts; the first is the default."""
        raise NotImplementedError

    def default_estimator(self) -> Any:
        return self.classes()[0]()

    def check(self, est: Any) -> Any:
        """``est`` if this analysis accepts it, else a SettingsError naming the fix."""
        if isinstance(est, type):
            raise SettingsError(f"Pass an estimator object, such as sb.{est.__name__}(); got the class itself.",
                                field=self.method_key(), owner=None)
        names = ", ".join(f"sb.{c.__name__}" for c in self.classes())
        if type(est) not in self.classes():
            raise SettingsError(
                f"The {self.title or self.name} analysis takes {names}; got {type(est).__name__}.",
                field=self.method_key(),
            )
        return est

    def method_key(self) -> str:
        return f"{self.prefix}method" if self.prefix else "method"

    # -- computing ---------------------------------------------------------------
    def compute(self, est: Any, selected: Any, *, progress: Any = None, cancel: Any = None) -> Any:
        """The result of ``est`` on the selected signal (a full-resolution result)."""
        kwargs = {}
        if progress is not None:
            kwargs["progress"] = progress
        if cancel is not None:
            kwargs["cancel"] = cancel
        return est(selected, **kwargs) if kwargs else est(selected)

    def expected_seconds(self, est: Any, selected: Any) -> float:
        """Expected compute time (0 when the estimator offers no model)."""
        f = getattr(est, "expected_seconds", None)
        if f is None:
            return 0.0
        try:
            return float(f(selected.n_samples, selected.n_channels, str(getattr(selected, "dtype", "float64"))))
        except Exception:  # a cost model must never stop an estimate
            return 0.0

    def rebanded(self, est: Any, on_screen_est: Any, on_screen: Any) -> Any:
        """A cheap result for ``est`` from the one on screen (e.g. a new confidence level), or None."""
        return None

    def shown(self, result: Any) -> Any:
        """The part of ``result`` the view draws (its first channel)."""
        return result.channel(0) if hasattr(result, "channel") else result

    def result_size(self, result: Any) -> int:
        """Number of bins / lags of a result, to keep small ones in the result cache."""
        for name in ("freq", "lag", "tau"):
            v = getattr(result, name, None)
            if v is not None:
                return int(getattr(v, "size", 0))
        return 1 << 30

    def suggestions(self, est: Any, result: Any) -> dict[str, Any]:
        """Field -> value an automatic (None) field resolved to (preset in the control)."""
        return {}

    # -- screen ------------------------------------------------------------------
    def merits(self, shown: Any, others: dict[str, Any]) -> list:
        """Figures of merit (:class:`._merit.Merit`) of the shown result."""
        return []

    def make_view(self) -> Any:
        raise NotImplementedError

    def pin_text(self, est: Any, shown: Any) -> str:
        """One line of the pin table for this analysis."""
        return repr(est)

    def overlays(self, shown: Any) -> dict[str, list]:
        """Model curves drawn over other analyses' views: ``{name: [Overlay, ...]}``."""
        return {}

    # -- freezing ----------------------------------------------------------------
    def freeze_lines(self, est: Any, data_var: str) -> list[str] | None:
        """Lines of the specbench-form frozen cell (None: the freeze layer writes them)."""
        var = f"{self.name}_estimator"
        return [f"{var} = sb.{est!r}", f"{self.name} = {var}({data_var})"]

    def settings_entry(self, est: Any) -> tuple[Any, dict | None]:
        """``(estimator, options)`` of this analysis in a settings file."""
        return est, None

    def __repr__(self) -> str:
        return f"<{type(self).__name__} {self.name!r}>"


class SpectrumAnalysis(Analysis):
    """The power spectral density (every registered SpectralEstimator with a title)."""

    name = "psd"
    title = "Power spectral density"
    prefix = ""
    main = True

    def __init__(self) -> None:
        from ._measure import MeasureState

        #: the band cursor, tones and harmonic cursors of the view, and their last readings
        self.measure = MeasureState()

    def classes(self) -> list[type]:
        return spectral_classes()

    def default_estimator(self) -> Any:
        from ..estimators import Welch

        return Welch()

    def check(self, est: Any) -> Any:
        from ..estimators import SpectralEstimator

        if not isinstance(est, type) and not isinstance(est, SpectralEstimator):
            raise SettingsError(
                f"The estimator of a Workbench must be a PSD estimator such as sb.Welch(...); got "
                f"{type(est).__name__}. Set the autocorrelation with correlation_estimator=.",
                field="method",
            )
        if not isinstance(est, type) and type(est) not in self.classes():
            raise SettingsError(f"{type(est).__name__} is not offered by the Workbench's method menu.",
                                field="method")
        return super().check(est)

    def rebanded(self, est, on_screen_est, on_screen):
        import time

        from ..estimators import SpectralEstimator

        if (on_screen is None or not isinstance(est, SpectralEstimator) or on_screen_est is None
                or type(est) is not type(on_screen_est)
                or est.confidence == on_screen_est.confidence
                or est != on_screen_est.replace(confidence=est.confidence)):
            return None
        t0 = time.perf_counter()
        spec = on_screen.with_confidence(est.confidence)
        spec.info["compute_seconds"] = time.perf_counter() - t0
        return spec

    def suggestions(self, est, result):
        info = result.info if result is not None else {}
        alias = {"segment_length": "nperseg"}
        out = {}
        for name in type(est).params():
            v = info.get(name, info.get(alias.get(name, ""), None))
            if v is None:
                v = getattr(est, f"n_{name}", None)
            if isinstance(v, (int, float)) and not isinstance(v, bool):
                out[name] = v
        return out

    def merits(self, shown, others):
        from ._merit import spectrum_merits

        return spectrum_merits(shown, others.get("acf"))

    def make_view(self):
        from ._viewhost import SpectrumHost

        return SpectrumHost(self)

    def pin_text(self, est, shown):
        return repr(est)

    def freeze_lines(self, est, data_var):
        """The readings of the measurements table, on the cell's ``spectrum`` (the freeze layer
        writes the estimator and ``spectrum = psd_estimator(...)`` itself)."""
        return self.measure.code_lines("spectrum") or None


class CorrelationAnalysis(Analysis):
    """The autocorrelation (sb.Autocorrelation)."""

    name = "acf"
    title = "Autocorrelation"
    prefix = "acf_"
    method_label = "Autocorrelation method"

    def classes(self) -> list[type]:
        from ..estimators import Autocorrelation

        return [Autocorrelation]

    def check(self, est):
        from ..estimators import Autocorrelation

        if not isinstance(est, Autocorrelation):
            raise SettingsError(
                f"correlation_estimator must be an sb.Autocorrelation(...); got {type(est).__name__}.",
                field="acf_method",
            )
        return est

    def suggestions(self, est, result):
        if result is None:
            return {}
        return {"max_lag": float(result.lag[-1])}

    def make_view(self):
        from ._viewhost import CorrelationHost

        return CorrelationHost(self)

    def freeze_lines(self, est, data_var):
        return None


_REGISTRY: dict[str, type[Analysis]] = {}


def register_analysis(cls: type[Analysis]) -> type[Analysis]:
    """Add an analysis class to every new Workbench (usable as a class decorator).

    The analyses open in registration order: psd, acf, then the others.
    """
    if not (isinstance(cls, type) and issubclass(cls, Analysis)) or not cls.name:
        raise SettingsError(f"register_analysis takes an Analysis subclass with a name; got {cls!r}.")
    if not cls.name.isidentifier():
        raise SettingsError(f"An analysis name must be a Python identifier; got {cls.name!r}.")
    _REGISTRY[cls.name] = cls
    return cls


def registered_analyses() -> list[type[Analysis]]:
    return list(_REGISTRY.values())


register_analysis(SpectrumAnalysis)
register_analysis(CorrelationAnalysis)
