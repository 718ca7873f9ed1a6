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
from ._batch import AnalysisWriter, register_writer, write_table
from ._describe import origin_call, py

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
    est = estimator
    if est.gaps == "skip":
        lines = head + [
            "# No plain scipy form: CrossSpectrum(gaps='skip') leaves out the segments that touch",
            "# non-finite samples, which scipy.signal.csd cannot do. Use the specbench form.",
        ]
        return "\n".join(lines) + "\n"
    a, b = (chans.index(n) for n in names)
    nperseg = est.segment_length
    noverlap = est.noverlap
    nfft = est.nfft or nperseg
    detrend = "False" if est.detrend == "none" else repr(est.detrend)
    lines = head + [
        "# plain numpy/scipy form: agrees with specbench to floating-point precision",
        "import numpy as np",
        "import scipy.signal",
        "from scipy import stats",
        "import specbench as sb  # only to read the data",
        "",
    ]
    lines += _signal_lines(signal, data_name)
    lines += [
        f"x, y = signal.data[{a}], signal.data[{b}]  # {names[0]!r} -> {names[1]!r}",
        f"fs = {float(signal.fs)!r}",
        f"confidence = {est.confidence!r}",
        f"window = scipy.signal.get_window({py(est.window)}, {nperseg})",
        f"kw = dict(fs=fs, window=window, nperseg={nperseg}, noverlap={noverlap}, nfft={nfft}, "
        f"detrend={detrend}, scaling={est.scaling!r})",
        "freq, csd = scipy.signal.csd(x, y, **kw)          # complex one-sided G_xy = conj(X) Y",
        "_, gxx = scipy.signal.welch(x, **kw)",
        "_, gyy = scipy.signal.welch(y, **kw)",
        "_, coherence = scipy.signal.coherence(x, y, **{k: v for k, v in kw.items() if k != 'scaling'})",
        "",
        "# n_d: overlap-corrected number of independent segments, K^2 / (K + 2 sum_d (K - d) rho(d)),",
        "# rho(d) = (sum_t w_t w_(t + d step))^2 / (sum_t w_t^2)^2 (Percival & Walden 1993 eq. (292b))",
        f"step = {nperseg - noverlap}",
        f"K = (x.size - {nperseg}) // step + 1",
        "total, d = float(K), 1",
        "while d * step < window.size and d < K:",
        "    rho = (np.dot(window[: window.size - d * step], window[d * step:]) / np.dot(window, window)) ** 2",
        "    total += 2.0 * rho * (K - d)",
        "    d += 1",
        "nd = np.full(freq.size, K * K / total)",
        "nd[0] *= 0.5  # DC (and Nyquist, for an even FFT length) of real data: half",
    ]
    if nfft % 2 == 0:
        lines.append("nd[-1] *= 0.5")
    lines += [
        "",
        "# Carter (1987): zero true coherence exceeds the threshold with probability 1 - confidence",
        "threshold = 1.0 - (1.0 - confidence) ** (1.0 / (nd - 1.0))",
        "# coherence band: Fisher z of |gamma|, bias and variance 1/(2(n_d - 1)) (Enochson & Goodman 1965)",
        "z = stats.norm.ppf(0.5 + confidence / 2)",
        "zh = np.arctanh(np.sqrt(np.clip(coherence, 0.0, 1.0 - 1e-16))) - 1.0 / (2.0 * (nd - 1.0))",
        "sd = 1.0 / np.sqrt(2.0 * (nd - 1.0))",
        "coherence_lower = np.tanh(np.maximum(zh - z * sd, 0.0)) ** 2",
        "coherence_upper = np.maximum(np.tanh(np.maximum(zh + z * sd, 0.0)) ** 2, coherence_lower)",
        "# phase and H1 gain: normalised random error sqrt(1 - g^2) / (|g| sqrt(2 (n_d - 1)))",
        "# (Bendat & Piersol 2010 Table 9.6), Student t quantile with 2 n_d - 2 degrees of freedom;",
        "# where the coherence is not significant the phase is unknown (+-pi) and the gain is bounded",
        "# by |gamma| sqrt(G_yy / G_xx) at the upper coherence",
        "transfer = csd / gxx",
        "gain, phase = np.abs(transfer), np.angle(csd)",
        "eps = np.sqrt(np.clip(1.0 - coherence, 0.0, None)) / (np.sqrt(coherence) * np.sqrt(2.0 * (nd - 1.0)))",
        "t = stats.t.ppf(0.5 + confidence / 2, np.maximum(2.0 * nd - 2.0, 1.0))",
        "significant = coherence > threshold",
        "half = np.where(significant, np.minimum(t * eps, np.pi), np.pi)",
        "phase_lower, phase_upper = phase - half, phase + half",
        "gain_lower = np.where(significant, gain * np.exp(-t * eps), 0.0)",
        "gain_bound = np.maximum(np.sqrt(coherence_upper * gyy / gxx), gain)  # |H1| = |gamma| sqrt(G_yy / G_xx)",
        "gain_upper = np.where(significant, gain * np.exp(t * eps), gain_bound)",
    ]
    if band is not None:
        lines += ["# the phase-slope delay (result.delay) has no scipy counterpart: use the specbench form"]
    return "\n".join(lines) + "\n"


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
    describe=lambda r: f"{r[0].freq.size:,} frequencies" + (f", delay {r[1].value:.6g} s" if r[1] else "")))
register_writer("Covariance", AnalysisWriter(
    write=_write_covariance, metadata=lambda c: dict(channels=list(c.channels), confidence=c.confidence),
    describe=lambda c: f"{len(c.channels)} x {len(c.channels)} matrix"))
_ = Covariance
