"""Frozen code and batch output of the cross-channel analyses (CrossSpectrum, Covariance).

:func:`cross_code` writes a cross-spectral analysis as a code cell:

- ``style="specbench"``: the estimator's repr called on the same signal and pair, so it
  reproduces the result bit for bit;
- ``style="scipy"``: ``scipy.signal.csd`` / ``coherence`` / ``welch`` for the estimates
  (equal to specbench's to floating-point precision) and explicit lines for the
  overlap-corrected number of independent segments, Carter's (1987) coherence threshold,
  the Fisher-z coherence band and the phase and gain bands.

The module also teaches ``specbench estimate`` the kinds ``CrossSpectrum`` (options
``{"pair": [a, b], "band": [f1, f2]}``) and ``Covariance``.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from ..estimators import Covariance, CrossSpectrum
from ..estimators.cross import GAIN_CIRCLE_RATIO
from ._describe import one_line, origin_call, py, wrap_comment
from ._scipy_form import register_plain_form
from ._writers import AnalysisWriter, register_writer, write_table

__all__ = ["cross_code"]


def _signal_lines(signal: Any, data_name: str) -> list[str]:
    made = origin_call(getattr(signal, "origin", None))
    steps = getattr(signal, "selection", ()) or ()
    if made is not None:
        tail = "".join(f".{k}({', '.join(py(a) for a in args)})" for k, *args in steps)
        return [f"signal = {made}{tail}"]
    chans = list(signal.channels)
    return [
        f"# INPUT: define `{data_name}` before running this cell: an array with samples on the last axis",
        f"# ({len(chans)} channels {chans} x {signal.n_samples:,} samples at {signal.fs!r} Hz).",
        f"signal = sb.Signal({data_name}, fs={signal.fs!r}, channels={py(chans)}, unit={py(signal.unit)})",
    ]


def cross_code(signal: Any, estimator: CrossSpectrum, *, pair: tuple | None = None,
               band: tuple | None = None, style: str = "specbench", data_name: str = "data") -> str:
    """The code cell of a cross-spectral analysis of ``signal`` (a Signal) and ``pair``.

    ``band`` adds the phase-slope delay over that band (specbench form).  The plain form
    names channels by row index and computes the estimates with ``scipy.signal``.
    """
    if not isinstance(estimator, CrossSpectrum):
        raise TypeError(f"cross_code writes CrossSpectrum analyses; got {type(estimator).__name__}")
    chans = list(signal.channels)
    if pair is None:
        if len(chans) != 2:
            raise ValueError(f"name the pair: the signal has {len(chans)} channels {chans}")
        pair = (chans[0], chans[1])
    names = tuple(chans[p] if not isinstance(p, str) else p for p in pair)
    head = [f"# Cross-spectral analysis {names[0]} -> {names[1]} ({estimator.title})"]
    if style == "specbench":
        lines = head + ["# specbench form: reproduces the analysis bit for bit", "import specbench as sb", ""]
        lines += _signal_lines(signal, data_name)
        lines += [
            f"cross = sb.{estimator!r}",
            f"result = cross(signal, pair={py(names)})",
            "freq, coherence, threshold = result.freq, result.coherence, result.coherence_threshold",
            "coherence_lower, coherence_upper = result.coherence_lower, result.coherence_upper",
            "phase, phase_lower, phase_upper = result.phase, result.phase_lower, result.phase_upper",
            "gain, gain_lower, gain_upper = result.gain, result.gain_lower, result.gain_upper",
        ]
        if band is not None:
            lines += [f"delay = result.delay(band={py(tuple(float(b) for b in band))})", "print(delay)"]
        return "\n".join(lines) + "\n"
    if style != "scipy":
        raise ValueError(f"style must be 'specbench' or 'scipy'; got {style!r}")
    a, b = (chans.index(n) for n in names)
    lines = head + [
        "# plain numpy/scipy form: agrees with specbench to floating-point precision",
        "import numpy as np",
        "import scipy.signal",
        "import scipy.stats",
        "import specbench as sb  # only to read the data",
        "",
    ]
    if estimator.gaps == "skip":
        return "\n".join(head + plain_cross_lines(estimator, "", "")) + "\n"
    lines += _signal_lines(signal, data_name)
    lines += [f"x, y = signal.data[{a}], signal.data[{b}]  # {names[0]!r} -> {names[1]!r}",
              f"fs = {float(signal.fs)!r}"]
    lines += plain_cross_lines(estimator, "x", "y")
    if band is not None:
        lines += ["# the phase-slope delay (result.delay) has no scipy counterpart: use the specbench form"]
    return "\n".join(lines) + "\n"


def plain_cross_lines(est: CrossSpectrum, x: str, y: str, *, fs: str = "fs", prefix: str = "") -> list[str]:
    """numpy/scipy lines of a cross-spectral estimate of the 1-D arrays named ``x`` and ``y``
    sampled at ``fs`` (a variable name).

    They assign ``{prefix}freq``, ``csd``, ``coherence``, ``threshold``, the coherence, phase
    and gain bands (``coherence_lower`` ... ``gain_upper``) and ``nd``, every name (helpers
    included) starting with ``prefix``, so the lines can sit in a cell beside other analyses.
    ``gaps="skip"`` has no plain form: the lines then say so.
    """
    if est.gaps == "skip":
        return [
            "# No plain scipy form: CrossSpectrum(gaps='skip') leaves out the segments that touch",
            "# non-finite samples, which scipy.signal.csd cannot do. Use the specbench form.",
        ]
    nperseg = est.segment_length
    noverlap = est.noverlap
    nfft = est.nfft or nperseg
    detrend = "False" if est.detrend == "none" else repr(est.detrend)
    p = prefix
    lines = [
        f"{p}confidence = {est.confidence!r}",
        f"{p}window = scipy.signal.get_window({py(est.window)}, {nperseg})",
        f"{p}kw = dict(fs={fs}, window={p}window, nperseg={nperseg}, noverlap={noverlap}, nfft={nfft},",
        f"{' ' * len(p)}          detrend={detrend}, scaling={est.scaling!r})",
        f"{p}freq, {p}csd = scipy.signal.csd({x}, {y}, **{p}kw)  # complex one-sided G_xy = conj(X) Y",
        f"_, {p}gxx = scipy.signal.welch({x}, **{p}kw)",
        f"_, {p}gyy = scipy.signal.welch({y}, **{p}kw)",
        f"{p}kw_coherence = {{k: v for k, v in {p}kw.items() if k != 'scaling'}}",
        f"_, {p}coherence = scipy.signal.coherence({x}, {y}, **{p}kw_coherence)",
        "",
        "# n_d: overlap-corrected number of independent segments, K^2 / (K + 2 sum_d (K - d) rho(d)),",
        "# rho(d) = (sum_t w_t w_(t + d step))^2 / (sum_t w_t^2)^2 (Percival & Walden 1993 eq. (292b))",
        f"{p}step = {nperseg - noverlap}",
        f"{p}K = ({x}.size - {nperseg}) // {p}step + 1",
        f"{p}total, {p}d = float({p}K), 1",
        f"while {p}d * {p}step < {p}window.size and {p}d < {p}K:",
        f"    {p}rho = np.dot({p}window[: {p}window.size - {p}d * {p}step], {p}window[{p}d * {p}step:])",
        f"    {p}rho = ({p}rho / np.dot({p}window, {p}window)) ** 2",
        f"    {p}total += 2.0 * {p}rho * ({p}K - {p}d)",
        f"    {p}d += 1",
        f"{p}nd = np.full({p}freq.size, {p}K * {p}K / {p}total)",
        f"{p}nd[0] *= 0.5  # DC (and Nyquist, for an even FFT length) of real data: half",
    ]
    if nfft % 2 == 0:
        lines.append(f"{p}nd[-1] *= 0.5")
    lines += [
        "",
        "# Carter (1987): zero true coherence exceeds the threshold with probability 1 - confidence",
        f"{p}threshold = 1.0 - (1.0 - {p}confidence) ** (1.0 / ({p}nd - 1.0))",
        "# coherence band: Fisher z of |gamma|, bias and variance 1/(2(n_d - 1)) (Enochson & Goodman 1965)",
        f"{p}z = scipy.stats.norm.ppf(0.5 + {p}confidence / 2)",
        f"{p}zh = np.arctanh(np.sqrt(np.clip({p}coherence, 0.0, 1.0 - 1e-16))) - 1.0 / (2.0 * ({p}nd - 1.0))",
        f"{p}sd = 1.0 / np.sqrt(2.0 * ({p}nd - 1.0))",
        f"{p}coherence_lower = np.tanh(np.maximum({p}zh - {p}z * {p}sd, 0.0)) ** 2",
        f"{p}coherence_upper = np.tanh(np.maximum({p}zh + {p}z * {p}sd, 0.0)) ** 2",
        f"{p}coherence_upper = np.maximum({p}coherence_upper, {p}coherence_lower)",
        "# phase and H1 gain: normalised random error sqrt(1 - g^2) / (|g| sqrt(2 (n_d - 1)))",
        "# (Bendat & Piersol 2010 Table 9.6), Student t quantile with 2 n_d - 2 degrees of freedom;",
        "# where the coherence is not significant the phase is unknown (+-pi)",
        f"{p}transfer = {p}csd / {p}gxx",
        f"{p}gain, {p}phase = np.abs({p}transfer), np.angle({p}csd)",
        f"{p}eps = np.sqrt(np.clip(1.0 - {p}coherence, 0.0, None) / (2.0 * ({p}nd - 1.0)))",
        f"{p}eps = {p}eps / np.sqrt({p}coherence)",
        f"{p}t = scipy.stats.t.ppf(0.5 + {p}confidence / 2, np.maximum(2.0 * {p}nd - 2.0, 1.0))",
        f"{p}significant = {p}coherence > {p}threshold",
        f"{p}half = np.where({p}significant, np.minimum({p}t * {p}eps, np.pi), np.pi)",
        f"{p}phase_lower, {p}phase_upper = {p}phase - {p}half, {p}phase + {p}half",
        "# gain: |H1| exp(+-t eps), or where Goodman's (1965) confidence circle of H1, radius^2 =",
        "# F_(2, 2 n_d - 2) (1 - g^2) G_yy / ((n_d - 1) G_xx), reaches 0.35 |H1| (low coherence), the",
        "# circle's gain range |H1| +- radius",
        f"{p}fq = scipy.stats.f.ppf({p}confidence, 2.0, np.maximum(2.0 * {p}nd - 2.0, 1.0))",
        f"{p}radius = np.sqrt({p}fq / ({p}nd - 1.0) * np.clip(1.0 - {p}coherence, 0.0, None) * {p}gyy / {p}gxx)",
        f"{p}wide = ~({p}radius < {GAIN_CIRCLE_RATIO!r} * {p}gain)",
        f"{p}gain_lower = np.where({p}wide, np.maximum({p}gain - {p}radius, 0.0), {p}gain * np.exp(-{p}t * {p}eps))",
        f"{p}gain_upper = np.where({p}wide, {p}gain + {p}radius, {p}gain * np.exp({p}t * {p}eps))",
    ]
    return lines


def _plain_analysis_lines(state: Any, name: str, est: CrossSpectrum, options: dict) -> list[str]:
    """The cross analysis of a workbench in its plain cell: the pair's rows of the data, at the
    workbench's rate and span (every channel: the data strip's channel choice does not apply)."""
    from dataclasses import replace

    from ._scipy_form import numpy_selection

    chans = list(state.signal.channels)
    if len(chans) < 2:  # the view says it needs two channels; nothing to reproduce
        return []
    pair = options.get("pair") or chans[:2]
    a, b = (chans.index(c) if isinstance(c, str) else int(c) for c in pair)
    _, _, cols, _ = numpy_selection(replace(state, channel=None))
    cut = "" if cols is None else f", {cols[0]}:{cols[1]}"
    p = f"{name}_"
    lines = [""] + wrap_comment(
        f"Cross spectrum {chans[a]} -> {chans[b]} (analysis {name!r}, {est!r}): rows {a} and {b} of "
        f"`{state.data_name}`, every channel at the same rate and span; names start with {p}"
    )
    if est.gaps == "skip":
        return lines + plain_cross_lines(est, "", "", prefix=p)
    lines += [
        f"{p}x = np.atleast_2d({state.data_name})[{a}{cut}]  # {one_line(chans[a])}",
        f"{p}y = np.atleast_2d({state.data_name})[{b}{cut}]  # {one_line(chans[b])}",
        f"if not (np.all(np.isfinite({p}x)) and np.all(np.isfinite({p}y))):",
        f'    raise ValueError("NaN or inf samples: {type(est).__name__}(gaps=\'error\') does not estimate '
        'through them.")',
    ]
    lines += plain_cross_lines(est, f"{p}x", f"{p}y", prefix=p)
    band = options.get("band")
    if band is not None:
        lines += wrap_comment(f"The phase-slope delay ({name}.delay(band={py(tuple(float(v) for v in band))})) "
                              "has no scipy counterpart: use the specbench form.")
    return lines


# ---------------------------------------------------------------- specbench estimate


def _run_cross(est: CrossSpectrum, sig: Any, options: dict) -> Any:
    pair = options.get("pair")
    res = est(sig, pair=tuple(pair) if pair is not None else None)
    if res.is_matrix:
        raise ValueError(
            f"the cross analysis needs a pair: the data has {len(res.channels)} channels; put "
            '"options": {"pair": [a, b]} into the settings file.'
        )
    band = options.get("band")
    delay = res.delay(band=tuple(band)) if band is not None else None
    return res, delay


def _write_cross(path, result: Any, meta: dict) -> None:
    res, delay = result
    meta = dict(meta)
    if delay is not None:
        meta["delay"] = dict(value_s=delay.value, stderr_s=delay.stderr, lower_s=delay.lower,
                             upper_s=delay.upper, confidence=delay.confidence, band_hz=list(delay.band),
                             method=delay.method)
    cols = {
        "csd_real": res.csd.real, "csd_imag": res.csd.imag, "psd_x": res.psd[0], "psd_y": res.psd[1],
        "coherence": res.coherence, "coherence_lower": res.coherence_lower,
        "coherence_upper": res.coherence_upper, "coherence_threshold": res.coherence_threshold,
        "phase_rad": res.phase, "phase_lower_rad": res.phase_lower, "phase_upper_rad": res.phase_upper,
        "gain": res.gain, "gain_lower": res.gain_lower, "gain_upper": res.gain_upper,
    }
    write_table(path, meta, "freq_hz", res.freq, cols)


def _cross_meta(result: Any) -> dict:
    res, _ = result
    return dict(channels=list(res.channels), unit=res.unit, gain_unit=res.gain_unit, confidence=res.confidence,
                segments=res.segments, independent_segments=res.independent_segments,
                resolution_hz=res.resolution)


def _write_covariance(path, cov: Any, meta: dict) -> None:
    c = len(cov.channels)
    rows = [f"{cov.channels[i]}|{cov.channels[j]}" for i in range(c) for j in range(c)]
    iu = (np.repeat(np.arange(c), c), np.tile(np.arange(c), c))
    meta = dict(meta, rows=rows)
    cols = {k: getattr(cov, k)[iu] for k in ("matrix", "lower", "upper", "correlation", "correlation_lower",
                                             "correlation_upper", "effective_samples")}
    write_table(path, meta, "entry", np.arange(c * c), cols)


register_writer("CrossSpectrum", AnalysisWriter(
    write=_write_cross, run=_run_cross, metadata=_cross_meta,
    describe=lambda r: f"{r[0].freq.size:,} frequencies" + (f", delay {r[1].value:.6g} s" if r[1] else ""),
    channels="all"))
register_plain_form(CrossSpectrum, _plain_analysis_lines)
register_writer("Covariance", AnalysisWriter(
    write=_write_covariance, metadata=lambda c: dict(channels=list(c.channels), confidence=c.confidence),
    describe=lambda c: f"{len(c.channels)} x {len(c.channels)} matrix", channels="all"))
_ = Covariance
