"""The noise-model analysis of the Workbench: the Allan deviation with its intervals on
log-log axes, the fitted terms as asymptotes and the model curve, the term table with
intervals and the filter's F, Q, H, R for the chosen step, and the model's PSD over the
PSD view.

The analysis' settings are one frozen object, :class:`NoiseSettings`: the fields of
:class:`~specbench.AllanDeviation` plus the fit's term choice (``terms``; None: chosen from
the deviation by :func:`~specbench.models._fit.rank_terms`), the filter step ``dt`` (None: one
sample interval) and the ``replicates`` of :func:`~specbench.fit_noise`.  Its controls are
generated from that constraint table like every other analysis'.  In the frozen cell and the
settings file it becomes ``sb.AllanDeviation(...)`` plus ``sb.fit_noise(...)`` and
``model.kalman(dt)`` (options ``terms``, ``dt``, ``replicates``, ``seed``, ``confidence`` as
``specbench estimate`` reads them).
"""

from __future__ import annotations

import html
import math
import warnings
from dataclasses import dataclass
from typing import Any, ClassVar

import bqplot as bq
import ipywidgets as W
import numpy as np

from .._errors import Cancelled, InputError, SpecbenchError, SpecbenchWarning
from ..estimators._base import Estimator
from ..estimators._params import Interval, Optional, Subset, param
from ..models import AllanDeviation, fit_noise
from ..models._fit import CAUTION, TERMS, NoiseFitError, rank_terms
from ._analysis import Analysis, register_analysis
from ._merit import Merit, fmt
from ._style import ASYMPTOTE, MODEL, gapped
from ._views import Overlay, Trace, _TraceView

__all__ = ["NoiseSettings", "NoiseResult", "NoiseAnalysis", "NoiseHost", "NoiseView"]

#: seed of the replicate records (fixed: the frozen cell repeats the fit bit for bit)
SEED = 0


def _allan_field(name: str) -> Any:
    spec = AllanDeviation.params()[name]
    return param(spec.default, spec.constraint, label=spec.label, help=spec.help, unit=spec.unit,
                 scale=spec.scale, group=spec.group, fix=spec.fix, relevant=spec.relevant)


@dataclass(frozen=True, kw_only=True, repr=False)
class NoiseSettings(Estimator, abstract=True):
    """The noise-model analysis' settings: an Allan deviation, the terms fitted to it, the filter step."""

    kind: ClassVar[str] = "NoiseSettings"
    title: ClassVar[str] = "Noise model"

    taus: Any = _allan_field("taus")
    overlapping: bool = _allan_field("overlapping")
    input: str = _allan_field("input")
    noise: str = _allan_field("noise")
    confidence: float = _allan_field("confidence")
    terms: Any = param(
        None,
        Optional(Subset(TERMS), "chosen from the deviation"),
        label="Terms",
        group="estimator",
        help="Noise terms fitted to the Allan variance: white (N), bias instability (B), random walk (K), "
             "Gauss-Markov (sigma, tau), quantization (Q). auto: the best supported set (Akaike).",
    )
    dt: Any = param(
        None,
        Optional(Interval(float, 0, None, closed="neither"), "one sample interval"),
        label="Filter step dt",
        unit="s",
        scale="log",
        group="estimator",
        help="Update interval of the Kalman filter the model is for: F, Q, H and R are given for this step.",
    )
    replicates: int = param(
        48,
        Interval(int, 0, 1000),
        label="Replicates",
        group="band",
        help="Records simulated from the fitted model for the covariance of the Allan variances in the "
             "term intervals (0 ignores it: intervals then cover too little; 1 is too few).",
    )

    def _check(self) -> None:
        if self.replicates == 1:
            self._fail("replicates", "0 or an integer in the range [2, 1000]",
                       "One record gives no covariance: use e.g. 48, or 0 to ignore it.")

    def allan(self) -> AllanDeviation:
        """The :class:`~specbench.AllanDeviation` these settings compute."""
        return AllanDeviation(**{k: getattr(self, k) for k in AllanDeviation.params()})

    @classmethod
    def from_allan(cls, est: AllanDeviation, **fit: Any) -> NoiseSettings:
        return cls(**{k: getattr(est, k) for k in AllanDeviation.params()}, **fit)


@dataclass(frozen=True, eq=False)
class NoiseResult:
    """What the noise view shows: the deviation of one channel and the model fitted to it.

    ``model`` / ``kalman`` are None when the fit failed (``fit_error`` says why); ``terms`` are
    the terms fitted (chosen automatically when ``auto``), ``dt`` the filter step used.
    """

    allan: Any
    model: Any
    kalman: Any
    terms: tuple
    auto: bool
    dt: float
    fit_error: str | None
    settings: NoiseSettings

    @property
    def tau(self) -> np.ndarray:
        return self.allan.tau


def _rate_psd(model: Any, angle: bool):
    """The density the PSD view's estimate has: the model's (rate) PSD, or the angle's for angle input."""
    def density(freq, onesided):
        f = np.asarray(freq, dtype=float)
        d = model.psd(f, sides="onesided" if onesided else "twosided")
        if angle:  # the angle's density is the rate's over (2 pi f)^2
            with np.errstate(divide="ignore", invalid="ignore"):
                d = d / (2 * np.pi * f) ** 2
        return d
    return density


SYMBOLS = {"white": "N", "bias_instability": "B", "random_walk": "K", "quantization": "Q", "gauss_markov": "GM"}
NAMES = {"white": "white noise", "bias_instability": "bias instability", "random_walk": "rate random walk",
         "quantization": "quantization", "gauss_markov": "Gauss-Markov"}
#: what each parameter is, for the table's tooltips
MEANING = {"white": "N: angle random walk, read at tau = 1 s on the -1/2 slope",
           "bias_instability": "B: the flat floor is 0.664 B", "random_walk": "K: read at tau = 3 s on the +1/2 slope",
           "quantization": "Q: read at tau = sqrt(3) s on the -1 slope",
           "gauss_markov": "first-order Gauss-Markov: standard deviation sigma and correlation time tau"}


#: area in px^2 of the Allan deviation's points (about 8 px across; bqplot's ``marker_size``)
ADEV_POINT_SIZE = 50


class NoiseView(_TraceView):
    """Allan deviation (points and band), pins, the model curve and one asymptote per term."""

    css = "sb-noise-adev"
    x_label = "Averaging time tau (s)"

    def __init__(self) -> None:
        super().__init__("Allan deviation", height="380px")
        # one point per averaging time, larger than the pins' markers (MARKER_SIZE) so that the
        # estimate's points read at a glance on both themes (at 14 px^2 they were specks on dark)
        self.line.marker = "circle"
        self.line.marker_size = ADEV_POINT_SIZE
        self.model_line = bq.Lines(x=np.zeros(0), y=np.zeros(0), scales={"x": self.xs, "y": self.ys},
                                   colors=[MODEL], stroke_width=2.0, enable_hover=False, apply_clip=True)
        self.asymptotes: dict[str, bq.Lines] = {}
        self.labels = bq.Label(x=np.zeros(0), y=np.zeros(0), text=[], scales={"x": self.xs, "y": self.ys},
                               colors=[ASYMPTOTE], default_size=12, align="start", apply_clip=True,
                               enable_move=False)

    def _make_scales(self):
        # a finite range before the first result (a workbench built in a kernel draws the views
        # before the noise fit ends; a log scale with no data and no range draws NaN ticks)
        return bq.LogScale(min=0.01, max=100.0), bq.LogScale(min=1e-4, max=1.0)

    def _xlog(self) -> bool:
        return True

    def _ylog(self) -> bool:
        return True

    def _trace(self, result, lo, hi) -> Trace:
        ad = result.allan
        v, a, b = (np.asarray(q, dtype=float) for q in (ad.value, ad.lower, ad.upper))
        ok = (v > 0) & np.isfinite(v)
        x = np.asarray(ad.tau, dtype=float)
        y, a, b = np.where(ok, v, np.nan), np.where(a > 0, a, np.nan), np.where(b > 0, b, np.nan)
        finite = [q[np.isfinite(q)] for q in (y, a, b)]
        vals = np.concatenate(finite) if finite else np.zeros(0)
        yr = (float(vals.min()), float(vals.max())) if vals.size else None
        unit = ad.unit if isinstance(ad.unit, str) else (ad.unit[0] if ad.unit else "")
        return Trace(x, y, a, b, unit, yr, int(x.size))

    def _y_label(self, tr: Trace) -> str:
        return f"Allan deviation ({tr.unit})" if tr.unit else "Allan deviation"

    def _extra_marks(self, cur: Trace) -> list:
        r = self.result
        if r is None or r.model is None:
            return []
        for name in r.model.params:
            if name not in self.asymptotes:
                self.asymptotes[name] = bq.Lines(x=np.zeros(0), y=np.zeros(0), scales={"x": self.xs, "y": self.ys},
                                                 colors=[ASYMPTOTE], line_style="dashed", stroke_width=1.2,
                                                 enable_hover=False, apply_clip=True)
        return [*(self.asymptotes[n] for n in r.model.params), self.labels, self.model_line]

    def _draw_extra(self, cur: Trace, marks: list) -> None:
        r = self.result
        if r is None or r.model is None or not marks:
            return
        tau = r.allan.tau
        grid = np.geomspace(tau[0], tau[-1], 96)
        self.model_line.x, self.model_line.y = grid, r.model.adev(grid)
        xs, ys, texts = [], [], []
        yr = cur.yrange or (float(np.nanmin(cur.y)), float(np.nanmax(cur.y)))
        for name in r.model.params:
            m = self.asymptotes[name]
            y = r.model.asymptote(name, grid)
            m.x, m.y = grid, y
            m.scales = {"x": self.xs, "y": self.ys}
            # the label sits where the term is largest relative to the model (where it dominates)
            share = np.where(np.isfinite(y), y / np.maximum(r.model.adev(grid), 1e-300), 0)
            i = int(np.argmax(share))
            i = min(max(i, 4), grid.size - 12)
            yi = float(np.clip(y[i], yr[0], yr[1]))
            xs.append(float(grid[i]))
            ys.append(yi * 1.12)
            texts.append(SYMBOLS[name])
        self.labels.x, self.labels.y, self.labels.text = np.array(xs), np.array(ys), texts
        self.labels.scales = {"x": self.xs, "y": self.ys}
        self.model_line.scales = {"x": self.xs, "y": self.ys}

    def _readout_text(self, x: float) -> str:
        r = self.result
        ad = r.allan
        i = int(np.argmin(np.abs(np.log(ad.tau) - math.log(max(x, 1e-300)))))
        unit = ad.unit if isinstance(ad.unit, str) else (ad.unit[0] if ad.unit else "")
        u = f" {html.escape(unit)}" if unit else ""
        model = ""
        if r.model is not None:
            model = f" &nbsp; <span class='sb-muted'>model</span> {fmt(float(r.model.adev([ad.tau[i]])[0]))}{u}"
        return (f"<b>tau {fmt(ad.tau[i])} s</b> ({int(ad.m[i])} samples) &nbsp; {fmt(ad.value[i])}{u} &nbsp; "
                f"<span class='sb-muted'>{ad.confidence * 100:g} % interval</span> [{fmt(ad.lower[i])}, "
                f"{fmt(ad.upper[i])}] &nbsp; <span class='sb-muted'>dof</span> {fmt(float(ad.dof[i]), 3)}, "
                f"<span class='sb-muted'>{int(ad.clusters[i])} differences, {html.escape(str(ad.noise[i]))}"
                f"</span>{model}")


def term_rows(model: Any) -> list[tuple[str, str, str, str, str]]:
    """(term, parameter, value, interval, unit) rows of a fitted model."""
    rows = []
    for name, t in model.terms.items():
        if name == "gauss_markov":
            rows.append((NAMES[name], "sigma", fmt(t.sigma.value), f"{fmt(t.sigma.lower)} to {fmt(t.sigma.upper)}",
                         t.unit))
            rows.append(("", "tau", fmt(t.tau.value), f"{fmt(t.tau.lower)} to {fmt(t.tau.upper)}", "s"))
        else:
            rows.append((NAMES[name], t.symbol, fmt(t.value), f"{fmt(t.lower)} to {fmt(t.upper)}", t.unit))
    return rows


def _matrix(a: np.ndarray) -> str:
    if a.size == 0:
        return "[]"
    return "[" + "; ".join(", ".join(fmt(float(v), 4) for v in row) for row in np.atleast_2d(a)) + "]"


def table_html(r: NoiseResult) -> str:
    """The term table, the fit's quality and the filter matrices, as HTML (user text escaped)."""
    e = html.escape
    if r.model is None:
        return (f"<div class='sb-noise-fit-error'><span class='sb-err'>No noise model:</span> {e(r.fit_error or '')}"
                "</div><div class='sb-muted'>The deviation is shown; choose other terms or a longer record.</div>")
    m, k = r.model, r.kalman
    pct = f"{m.confidence * 100:g} %"
    tips = "; ".join(MEANING[n] for n in m.terms)
    head = (f"<table class='sb-term-table' title='{e(tips)}'><thead><tr><th>term</th><th>param.</th><th>value</th>"
            f"<th>{e(pct)} interval</th><th>unit</th></tr></thead><tbody>")
    body = "".join(f"<tr><td>{e(a)}</td><td class='sb-num'>{e(b)}</td><td class='sb-num'>{e(c)}</td>"
                   f"<td class='sb-num'>{e(d)}</td><td class='sb-unit'>{e(u)}</td></tr>"
                   for a, b, c, d, u in term_rows(m))
    how = "chosen from the deviation (Akaike)" if r.auto else "as chosen"
    quality = (f"<div class='sb-noise-quality'><span class='sb-muted'>terms {e(how)}; fit</span> "
               f"chi-square per dof {fmt(m.chi2_per_dof, 3)} ({m.fit_dof} dof) <span class='sb-muted'>over "
               f"{m.allan.tau.size} averaging times; N, K, Q with the two-sided density (IEEE 952)</span></div>")
    states = ", ".join(k.states) if k.states else "none (white measurement noise only)"
    left = f" <span class='sb-muted'>left out of F and Q: {e(', '.join(k.left_out))}</span>" if k.left_out else ""
    filt = (f"<div class='sb-noise-filter'><b>Filter step dt = {fmt(k.dt)} s</b> "
            f"<span class='sb-muted'>states</span> {e(states)}{left}<br>"
            f"F = {_matrix(k.F)} &nbsp; Q = {_matrix(k.Q)} &nbsp; H = {_matrix(k.H)} &nbsp; "
            f"R = {_matrix(k.R)} <span class='sb-muted'>(per step; R = N^2 / dt)</span></div>")
    caution = f"<div class='sb-noise-caution sb-muted'>{e(CAUTION)}</div>"
    return head + body + "</tbody></table>" + quality + filt + caution


class NoiseHost:
    """The noise view: the deviation plot beside the term table."""

    def __init__(self, analysis: NoiseAnalysis) -> None:
        self.analysis = analysis
        self.view = NoiseView()
        self.figure = self.view.figure
        self.table = W.HTML("<span class='sb-muted'>No noise model on screen yet (it is fitted after the other "
                            "views; the status line says how far it is).</span>",
                            layout=W.Layout(flex="1 1 500px", min_width="min(100%, 500px)"))
        self.table.add_class("sb-noise-table")
        plot = W.VBox([self.view.header, self.view.figure, self.view.footer],
                      layout=W.Layout(flex="3 1 480px", min_width="250px"))
        self.title = title = W.HTML(self._TITLE)
        row = gapped(W.HBox([plot, self.table], layout=W.Layout(flex_flow="row wrap", width="100%",
                                                                 align_items="flex-start")), "wide")
        # a row of its own below the other views: the plot and the table need the width
        self.widget = W.VBox([title, row], layout=W.Layout(flex="1 1 100%", width="100%", min_width="250px"))
        self.widget.add_class("sb-view-noise")

    _TITLE = "<span class='sb-view-title'>Noise model</span>"

    def set_stale(self, what: str | None) -> None:
        """Say that the view shows an earlier data selection (``what``), or clear it."""
        if what:
            self.widget.add_class("sb-stale")
            self.title.value = (self._TITLE + " <span class='sb-stale-note'>of " + html.escape(what)
                                + ", an earlier data selection</span>")
        else:
            self.widget.remove_class("sb-stale")
            self.title.value = self._TITLE

    def show(self, shown: Any, pinned: list) -> None:
        if shown is None:
            return
        self.view.show(shown, [p for p in pinned if p[0] is not None])
        self.table.value = table_html(shown)

    def holds(self) -> list:
        v = self.view
        return [v.figure, v.band, v.line, v.ax_y, v.xs, v.ys, *v.pin_lines, v.model_line, v.labels,
                *v.asymptotes.values(), self.table]

    def controls(self) -> dict[str, Any]:
        return {}

    def marks_points(self) -> dict[str, int]:
        out = self.view.marks_points()
        out["model"] = int(np.asarray(self.view.model_line.y).size)
        return out

    def read(self, x: float) -> str:
        return self.view.read_at(x)


def _gap_free_taus(allan: AllanDeviation, selected: Any) -> tuple | None:
    """The averaging times of ``allan``'s grid that fit in the longest gap-free run of the
    selected channel (None when the grid is explicit or no averaging time fits)."""
    if not isinstance(allan.taus, str):
        return None
    x = np.asarray(selected.data, dtype=float).reshape(-1)
    ok = np.isfinite(x)
    if ok.all():
        return None
    edges = np.flatnonzero(np.diff(np.concatenate([[0], ok.astype(np.int8), [0]])))
    longest = int(np.max(edges[1::2] - edges[::2])) if edges.size else 0
    points = x.size + 1 if allan.input == "rate" else x.size
    ms = allan.cluster_sizes(points, selected.fs)
    keep = ms[ms <= max(0, longest - (0 if allan.input == "rate" else 1)) // 2]
    if not allan.overlapping:
        keep = keep[keep <= longest // 3]  # aligned clusters: room for a pair inside the run
    return tuple(float(m / selected.fs) for m in keep) or None


def _fit(ad: Any, est: NoiseSettings) -> tuple[Any, tuple, str | None]:
    """(model, terms, error): the chosen terms, or the best-ranked set the full fit accepts."""
    if est.terms is not None:
        order = [tuple(est.terms)]
    else:
        try:
            order = rank_terms(ad)
        except NoiseFitError as e:
            return None, (), str(e)
    error = None
    for terms in order:
        try:
            return (fit_noise(ad, terms=terms, confidence=est.confidence, replicates=est.replicates, seed=SEED),
                    terms, None)
        except Cancelled:
            raise
        except SpecbenchError as e:  # not identifiable, not separable, or not rate-like data
            error = error or str(e)
            if not isinstance(e, NoiseFitError):
                break
    return None, order[0], error


@register_analysis
class NoiseAnalysis(Analysis):
    """Allan deviation, fitted noise terms and the Kalman filter's matrices (sb.AllanDeviation + sb.fit_noise)."""

    name = "noise"
    title = "Noise model"
    prefix = "noise_"
    method_label = "Noise method"

    def classes(self) -> list[type]:
        return [NoiseSettings]

    def check(self, est: Any) -> Any:
        if isinstance(est, AllanDeviation):  # the public estimator: the fit's choices at their defaults
            return NoiseSettings.from_allan(est)
        if not isinstance(est, NoiseSettings):
            raise SpecbenchError(
                f"The noise-model analysis takes an sb.AllanDeviation(...) (or its NoiseSettings); got "
                f"{type(est).__name__}.")
        return est

    def compute(self, est: NoiseSettings, selected: Any, *, progress: Any = None, cancel: Any = None) -> Any:
        from ..estimators._engine import tracking

        share = 1.0 / (1.0 + max(0, est.replicates))
        kwargs = {}
        if progress is not None:
            kwargs["progress"] = lambda f: progress(share * f)
        if cancel is not None:
            kwargs["cancel"] = cancel
        allan = est.allan()
        try:
            ad = allan(selected, **kwargs).channel(0)
        except InputError as e:
            shorter = _gap_free_taus(allan, selected) if getattr(e, "field", None) == "taus" else None
            if shorter is None:
                raise
            # gaps: the averaging times whose every difference touches a gap are left out, and
            # the frozen cell names the ones kept
            allan = allan.replace(taus=shorter)
            ad = allan(selected, **kwargs).channel(0)
            warnings.warn(f"Noise model: averaging times above {shorter[-1]:g} s are left out: every "
                          "difference there touches a gap.", SpecbenchWarning, stacklevel=2)
        dt = float(est.dt) if est.dt is not None else 1.0 / ad.fs
        with tracking(None, cancel):  # the replicates stop at the next block on a cancel
            model, terms, error = _fit(ad, est)
        if error is not None:
            # the deviation is good; the fit's message goes to the view's table (the status line
            # stays with the analyses that failed: many records are not a sensor at rest)
            return NoiseResult(ad, None, None, tuple(terms), est.terms is None, dt, error, est)
        return NoiseResult(ad, model, model.kalman(dt), tuple(terms), est.terms is None, dt, None, est)

    def expected_seconds(self, est: Any, selected: Any) -> float:
        one = super().expected_seconds(est.allan(), selected) / max(1, selected.n_channels)
        return one * (1 + est.replicates) * 1.5

    def shown(self, result: Any) -> Any:
        # called when a result is committed (on the owning thread): what the frozen cell and the
        # settings file describe
        self.last = result
        return result

    def result_size(self, result: Any) -> int:
        return int(result.allan.tau.size)

    def suggestions(self, est: Any, result: Any) -> dict[str, Any]:
        if result is None:
            return {}
        out: dict[str, Any] = {"dt": result.dt}
        if result.terms:
            out["terms"] = result.terms
        return out

    def merits(self, shown: Any, others: dict) -> list:
        if shown is None:
            return []
        ad = shown.allan
        out = [Merit("noise_taus", "averaging times", f"{ad.tau.size} ({fmt(ad.tau[0])} to {fmt(ad.tau[-1])} s)",
                     "Averaging times of the Allan deviation (cluster size / sample rate).", float(ad.tau.size)),
               Merit("noise_dof", "dof at longest tau", fmt(float(ad.dof[-1]), 3),
                     "Equivalent degrees of freedom of the deviation at the longest averaging time (few dof: "
                     "a wide interval).", float(ad.dof[-1]))]
        m = shown.model
        if m is None:
            out.append(Merit("noise_fit", "fit", "failed", shown.fit_error or ""))
            return out
        out += [Merit("noise_chi2", "fit chi-square / dof", fmt(m.chi2_per_dof, 3),
                      "Weighted residuals of the fit per degree of freedom: near 1 when the terms and the dof "
                      "describe the deviation, much larger when a term is missing.", m.chi2_per_dof),
                Merit("noise_terms", "terms", " + ".join(SYMBOLS[t] for t in m.terms),
                      "Fitted terms: N white, B bias instability, K rate random walk, GM Gauss-Markov, Q "
                      "quantization.")]
        if "white" in m.terms:
            t = m.terms["white"]
            out.append(Merit("noise_n", "N", f"{fmt(t.value)} {t.unit}",
                             "Angle random walk: the white term's two-sided density, read at tau = 1 s.", t.value))
        k = shown.kalman
        out.append(Merit("noise_r", "R per step", f"{fmt(float(k.R[0, 0]))} at dt {fmt(k.dt)} s",
                         "Measurement noise variance of the rate averaged over one filter step (N^2 / dt).",
                         float(k.R[0, 0])))
        return out

    def make_view(self) -> NoiseHost:
        return NoiseHost(self)

    def overlays(self, shown: Any) -> dict[str, list]:
        if shown is None or shown.model is None:
            return {}
        angle = shown.settings.input == "angle"
        return {"psd": [Overlay("noise_model", "noise model", _rate_psd(shown.model, angle), MODEL, "solid")]}

    def pin_text(self, est: Any, shown: Any) -> str:
        terms = f", terms {'+'.join(shown.terms)}" if shown is not None and shown.terms else ""
        return f"{est.allan()!r}{terms}"

    def settings_entry(self, est: Any) -> tuple[Any, dict | None]:
        opts: dict[str, Any] = {"replicates": est.replicates, "seed": SEED, "confidence": est.confidence}
        slot_terms = est.terms
        if slot_terms is None and self.last is not None and self.last.settings == est:
            slot_terms = self.last.terms if self.last.model is not None else None
        if slot_terms:
            opts["terms"] = list(slot_terms)
        if est.dt is not None:
            opts["dt"] = float(est.dt)
        elif self.last is not None and self.last.settings == est:
            opts["dt"] = self.last.dt
        used = self.last.allan.estimator if self.last is not None and self.last.settings == est else est.allan()
        return used, opts

    last: NoiseResult | None = None

    def freeze_lines(self, est: Any, data_var: str) -> list[str] | None:
        from ..freeze._describe import py, wrap_comment

        r = self.last
        used = r.allan.estimator if r is not None and r.settings == est else est.allan()
        lines = [f"noise_estimator = sb.{used!r}", f"allan = noise_estimator({data_var}).channel(0)"]
        if r is None or r.settings != est:
            return lines + wrap_comment("No noise model was on screen for these settings at freeze time.")
        if r.model is None:
            return lines + wrap_comment(f"No noise model: {r.fit_error}")
        how = "chosen from the deviation in the workbench" if r.auto else "as chosen in the workbench"
        lines += wrap_comment(f"The terms, {how}; seed and replicates make the intervals repeat bit for bit.")
        lines += ["noise_model = sb.fit_noise(",
                  f"    allan, terms={py(tuple(r.terms))}, confidence={est.confidence!r},",
                  f"    replicates={est.replicates!r}, seed={SEED!r},",
                  ")",
                  f"noise_filter = noise_model.kalman(dt={float(r.dt)!r})",
                  "Q, R = noise_filter.Q, noise_filter.R  # per filter step; R = N^2 / dt (two-sided N, IEEE 952)"]
        lines += wrap_comment("A noise model from one static recording does not capture temperature, vibration or "
                              "aging effects: validate a filter tuned from it on the target system.")
        return lines
