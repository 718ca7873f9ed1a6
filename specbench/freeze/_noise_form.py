"""`specbench estimate` for a noise-model analysis (an AllanDeviation in a settings file).

The analysis' options (all optional)::

    {"terms": ["white", "gauss_markov"],   # fit these terms (sb.fit_noise)
     "channel": 0,                         # which channel to fit (default: every channel)
     "dt": 0.01,                           # filter step: also write F, Q, H, R
     "confidence": 0.683, "replicates": 48, "seed": 0}

The CSV holds the deviation table (tau_s, adev, lower, upper, dof, clusters per channel);
the fitted terms (value, lower, upper per parameter), the fit's chi-square per dof, and Q and
R for the step go into the metadata header (``# terms: {...}``).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np

from ..models import CAUTION, fit_noise
from ._writers import AnalysisWriter, register_writer, write_table

__all__: list[str] = []

_OPTIONS = ("terms", "channel", "dt", "confidence", "replicates", "seed")


def _run(est: Any, sig: Any, options: dict) -> tuple:
    from .._errors import SettingsError

    unknown = set(options) - set(_OPTIONS)
    if unknown:
        raise SettingsError(
            f"The noise-model options hold {sorted(unknown)}; known options are {list(_OPTIONS)}.")
    ad = est(sig)
    fits = {}
    terms = options.get("terms")
    if terms:
        chans = [options["channel"]] if "channel" in options else list(range(1 if ad.value.ndim == 1
                                                                         else ad.value.shape[0]))
        for ch in chans:
            m = fit_noise(ad, terms=tuple(terms), channel=ch, confidence=options.get("confidence", 0.683),
                          replicates=options.get("replicates", 48), seed=options.get("seed", 0))
            entry: dict[str, Any] = {"chi2_per_dof": m.chi2_per_dof, "confidence": m.confidence}
            for name, t in m.terms.items():
                if name == "gauss_markov":
                    entry[name] = {"sigma": [t.sigma.value, t.sigma.lower, t.sigma.upper],
                                   "tau_s": [t.tau.value, t.tau.lower, t.tau.upper], "unit": t.unit}
                else:
                    entry[name] = {t.symbol: [t.value, t.lower, t.upper], "unit": t.unit}
            if "dt" in options:
                k = m.kalman(options["dt"])
                entry["kalman"] = {"dt": k.dt, "states": list(k.states), "F": k.F.tolist(), "Q": k.Q.tolist(),
                                   "H": k.H.tolist(), "R": k.R.tolist()}
            name = ad.channels[ch] if ad.channels and isinstance(ch, int) else ch
            fits[str(name)] = entry
    return ad, fits


def _write(path: Path, result: tuple, meta: dict) -> None:
    ad, fits = result
    value = np.atleast_2d(ad.value)
    names = list(ad.channels) if ad.channels else [str(i) for i in range(value.shape[0])]
    cols: dict[str, Any] = {}
    one = value.shape[0] == 1
    for i, nm in enumerate(names[: value.shape[0]]):
        sfx = "" if one else f"[{nm}]"
        for key in ("value", "lower", "upper", "dof", "clusters"):
            arr = np.atleast_2d(getattr(ad, key))[i]
            cols[("adev" if key == "value" else key) + sfx] = arr
    meta = dict(meta)
    if fits:
        meta["terms"] = fits
        meta["caution"] = CAUTION
    write_table(path, meta, "tau_s", ad.tau, cols)


def _meta(result: tuple) -> dict:
    ad, _ = result
    return dict(unit=ad.unit, confidence=ad.confidence, overlapping=ad.estimator.overlapping,
                input=ad.estimator.input, samples=ad.n)


register_writer("AllanDeviation", AnalysisWriter(
    write=_write, run=_run, metadata=_meta,
    describe=lambda r: f"{r[0].tau.size} averaging times" + (f", terms fitted for {len(r[1])} channel(s)"
                                                             if r[1] else "")))
