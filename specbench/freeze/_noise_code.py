"""Code cells of a noise-model analysis: the specbench form (reproduces the Allan deviation,
the fitted terms and the filter's Q and R bit for bit) and a plain numpy/scipy form of the Allan
deviation, its intervals, the term fit and F, Q, H, R (explicit cumulative sums; equal to
floating-point rounding, not bit for bit, since the streamed engine sums per block).  The plain
form also serves the Workbench's plain cell (registered with ``register_plain_form``)."""

from __future__ import annotations

from typing import Any

from ..models import AllanDeviation
from ..models._allan import NOISE_TYPES
from ._cross_form import _signal_lines
from ._describe import py, wrap_comment

__all__ = ["noise_code", "plain_fit_lines"]


def noise_code(signal: Any, estimator: AllanDeviation, *, terms: tuple | None = None, dt: float | None = None,
               channel: int = 0, confidence: float = 0.683, replicates: int = 48, seed: int = 0,
               style: str = "specbench", data_name: str = "data") -> str:
    """The code cell of a noise-model analysis of ``signal`` (a Signal): the Allan deviation
    with ``estimator``, the terms fitted (``terms``) and, with ``dt``, the filter's Q and R."""
    if style not in ("specbench", "scipy", "numpy"):
        raise ValueError(f"style must be 'specbench' or 'numpy'; got {style!r}")
    lines = ["import numpy as np", "import specbench as sb", ""] + _signal_lines(signal, data_name)
    if style == "specbench":
        lines += [f"allan = sb.{estimator!r}(signal)"]
        if terms:
            lines += [f"model = sb.fit_noise(allan, terms={py(tuple(terms))}, channel={channel!r}, "
                      f"confidence={confidence!r}, replicates={replicates!r}, seed={seed!r})"]
            if dt is not None:
                lines += [f"kalman = model.kalman(dt={float(dt)!r})",
                          "Q, R = kalman.Q, kalman.R   # per step; R = N^2 / dt (two-sided N, IEEE 952)"]
        lines += wrap_comment("A noise model from one static recording does not capture temperature, vibration "
                              "or aging effects: validate a filter tuned from it on the target system.")
        return "\n".join(lines) + "\n"
    if estimator.input != "rate" or not estimator.overlapping:
        lines += wrap_comment("The plain form below covers the overlapping Allan deviation of rate data only; "
                              "use the specbench form for these settings.")
    grid = estimator.taus
    lines += [
        "x = np.asarray(signal.data, dtype=float).reshape(-1, signal.n_samples)[" + repr(channel) + "]",
        "fs = signal.fs",
        "c = np.concatenate([[0.0], np.cumsum(x - x[:65536][np.isfinite(x[:65536])].mean())])  # C_k = sum_{j<k} y_j",
        "p = c.size",
    ]
    if grid == "octave":
        lines += ["m = 2 ** np.arange(int(np.log2((p - 1) // 2)) + 1)"]
    elif grid == "decade":
        lines += ["m = np.array([v * d for d in 10 ** np.arange(18) for v in (1, 2, 5) if v * d <= (p - 1) // 2])"]
    else:
        lines += [f"m = np.rint(np.array({py(tuple(grid))}) * fs).astype(int)"]
    lines += [
        "tau = m / fs",
        "# overlapping Allan variance: half the mean square difference of successive cluster averages",
        "avar = np.array([np.mean(((c[2 * k:] - 2 * c[k:p - k] + c[:p - 2 * k]) / k) ** 2) / 2 for k in m])",
        "adev = np.sqrt(avar)",
    ]
    if terms and estimator.input == "rate" and estimator.overlapping:
        lines += ["import scipy.signal", "import scipy.stats"]
        lines += wrap_comment("The deviation with its intervals, the fitted terms and the filter's matrices, "
                              "written out (the same algorithm as fit_noise and model.kalman of specbench):")
        lines += plain_fit_lines("noise_", estimator, tuple(terms), dt=float(dt) if dt is not None else 1 / signal.fs,
                                 confidence=confidence, replicates=replicates, seed=seed, x="x", fs="fs")
    else:
        lines += wrap_comment("No terms were chosen: only the deviation is written out here.")
    return "\n".join(lines) + "\n"


# ---------------------------------------------------------------- plain form of the fit
#: the plain numpy/scipy Allan deviation, its chi-square intervals (Howe-Allan-Barnes edf for the
#: noise type identified from the local slope) and the term fit (IRLS + NNLS on the Allan variance,
#: Gauss-Markov time by a profile of the gamma deviance, sandwich covariance with the Allan
#: variances' covariance from records simulated from the fitted model, Satterthwaite chi-square
#: intervals, Student's t on log T), then F, Q, H, R for the
#: step by Van Loan's matrix exponential.  The same algorithm as sb.AllanDeviation / sb.fit_noise /
#: model.kalman, written out; it agrees to floating-point rounding (the cumulative sums are taken
#: in one pass here, per block there).
_PLAIN_FIT = '''
def PREFIXallan_fit(rate, fs):
    import scipy.linalg
    import scipy.optimize

    rate = np.asarray(rate, dtype=float)
    if not np.all(np.isfinite(rate)):
        raise ValueError("NaN or inf samples: this plain form covers records without gaps.")
    p = rate.size + 1  # cumulative-sum points of rate data

    def cluster_sizes(p):
        mmax = (p - 1) // 2
        GRID

    def avar_of(rate, m):
        c = np.concatenate([[0.0], np.cumsum(rate - rate[:65536].mean())])  # C_k = sum_{j<k} (y_j - offset)
        q = c.size
        return np.array([np.mean(((c[2 * k:] - 2 * c[k:q - k] + c[:q - 2 * k]) / k) ** 2) / 2 for k in m])

    def edf(alpha, n, m):  # Howe, Allan & Barnes (1981), Riley NIST SP 1065 (2008) Table 5
        if alpha == 2:
            return (n + 1) * (n - 2 * m) / (2 * (n - m))
        if alpha == 0:
            return (3 * (n - 1) / (2 * m) - 2 * (n - 2) / n) * 4 * m * m / (4 * m * m + 5)
        if alpha == -1:
            return 2 * (n - 2) ** 2 / (2.3 * n - 4.9) if m == 1 else 5 * n * n / (4 * m * (n + 3 * m))
        return (n - 2) / m * ((n - 1) ** 2 - 3 * m * (n - 1) + 4 * m * m) / (n - 3) ** 2  # alpha = -2

    def identify(m, av):  # power-law exponent from the local log-log slope (IEEE Std 952-1997 Annex C)
        if m.size < 2:
            return np.zeros(m.size, dtype=int)
        slope = np.gradient(np.log(np.maximum(av, 1e-300)), np.log(m.astype(float)))
        if m.size >= 3:
            padded = np.concatenate([slope[:1], slope, slope[-1:]])
            slope = (padded[:-2] + padded[1:-1] + padded[2:]) / 3.0
        alpha = np.clip(np.rint(-slope - 1.0), -2, 2).astype(int)
        alpha[alpha == 1] = 2
        lead = 0
        while lead < alpha.size and alpha[lead] == 2:
            lead += 1
        alpha[lead:][alpha[lead:] == 2] = 0  # phase-like noise only at the shortest averaging times
        return alpha

    m = cluster_sizes(p)
    tau = m / fs
    avar = avar_of(rate, m)
    alpha = ALPHA
    counts = p - 2 * m
    dof = np.array([edf(int(a), float(p), int(k)) if p > 3 else 1.0 for a, k in zip(alpha, m)])
    dof = np.minimum(np.maximum(dof, 0.5), counts)
    conf = CONF
    adev = np.sqrt(avar)
    lower = np.sqrt(avar * dof / scipy.stats.chi2.ppf((1 + conf) / 2, dof))
    upper = np.sqrt(avar * dof / scipy.stats.chi2.ppf((1 - conf) / 2, dof))

    # -- the term fit: weighted least squares on the Allan variance, var = 2 avar^2 / dof
    names = TERMS
    bi = 2.0 * np.log(2.0) / np.pi

    def basis(name, t, t_gm=None):
        if name == "white":
            return 1.0 / t
        if name == "bias_instability":
            return np.full_like(t, bi, dtype=float)
        if name == "random_walk":
            return t / 3.0
        if name == "quantization":
            return 3.0 / t ** 2
        r = t / t_gm  # first-order Gauss-Markov, per unit sigma^2
        small = r < 1e-3
        out = np.empty_like(t, dtype=float)
        rr = r[~small]
        out[~small] = (2 * t_gm / t[~small]) * (1 - (3 - 4 * np.exp(-rr) + np.exp(-2 * rr)) / (2 * rr))
        out[small] = 2 * r[small] / 3 - r[small] ** 2 / 2
        return out

    def solve(t_gm, iterations=6):
        a = np.column_stack([basis(n, tau, t_gm) for n in names])
        model = avar.copy()
        theta = np.zeros(len(names))
        for _ in range(iterations):
            w = dof / (2.0 * np.maximum(model, 1e-300) ** 2)
            sw = np.sqrt(w)
            scale = np.max(np.abs(a * sw[:, None]), axis=0)
            scale[scale == 0] = 1.0
            theta = scipy.optimize.nnls(a * sw[:, None] / scale, avar * sw)[0] / scale
            new = a @ theta
            if np.all(new > 0):
                model = new
        w = dof / (2.0 * np.maximum(model, 1e-300) ** 2)
        return theta, w, float(np.sum(w * (avar - a @ theta) ** 2))

    def deviance(t_gm):  # gamma deviance: -2 log-likelihood of avar_i ~ model_i chi2_dof / dof, + const
        mod = np.maximum(np.column_stack([basis(n, tau, t_gm) for n in names]) @ solve(t_gm)[0], 1e-300)
        r = (avar - mod) / mod
        return float(np.sum(dof * (r - np.log1p(r))))

    t_gm = None
    if "gauss_markov" in names:  # correlation time: a profile search of the deviance
        grid = np.exp(np.linspace(np.log(tau[0] / 3), np.log(tau[-1] * 3), 49))
        best = min((deviance(t), t) for t in grid)[1]
        res = scipy.optimize.minimize_scalar(lambda lt: deviance(np.exp(lt)), method="bounded",
                                             bounds=(np.log(best) - 0.2, np.log(best) + 0.2),
                                             options={"xatol": 1e-6})
        t_gm = float(np.exp(res.x))
    theta, w, chi2 = solve(t_gm)
    cols = [basis(n, tau, t_gm) for n in names]
    if t_gm is not None:
        h = 1e-4
        d = (basis("gauss_markov", tau, t_gm * np.exp(h)) - basis("gauss_markov", tau, t_gm * np.exp(-h))) / (2 * h)
        cols.append(theta[names.index("gauss_markov")] * d)
    jac = np.column_stack(cols)
    bread = np.linalg.inv(jac.T @ (w[:, None] * jac))
    cov = bread

    def simulate(params, n, reps, rng):  # records of the fitted model (the same draws as specbench's)
        y = np.zeros((reps, n))
        for name, th in params.items():
            if name == "white":
                y += np.sqrt(th * fs) * rng.standard_normal((reps, n))
            elif name == "random_walk":
                y += np.cumsum(np.sqrt(th / fs) * rng.standard_normal((reps, n)), axis=-1)
            elif name == "quantization":
                y += np.diff(np.sqrt(th) * rng.standard_normal((reps, n + 1)), axis=-1) * fs
            elif name == "gauss_markov":
                s2, t = th
                phi = np.exp(-1.0 / (fs * t))
                drive = np.sqrt(s2 * (1 - phi ** 2)) * rng.standard_normal((reps, n))
                drive[:, 0] = np.sqrt(s2) * rng.standard_normal(reps)
                y += scipy.signal.lfilter([1.0], [1.0, -phi], drive, axis=-1)
            elif name == "bias_instability":
                f = np.fft.rfftfreq(n, 1.0 / fs)
                spec = np.zeros_like(f)
                spec[1:] = th / (np.pi * f[1:])
                amp = np.sqrt(spec * fs * n / 2.0)
                z = rng.standard_normal((reps, f.size)) + 1j * rng.standard_normal((reps, f.size))
                y += np.fft.irfft(amp * z / np.sqrt(2.0), n=n, axis=-1)
        return y

    replicates, seed = REPLICATES, SEED
    if replicates:  # sandwich covariance, the Allan variances' covariance from records of the model
        params = {n: (theta[i], t_gm) if n == "gauss_markov" else theta[i] for i, n in enumerate(names)}
        rng = np.random.default_rng(seed)
        chunk = max(1, 4_000_000 // rate.size)
        rows = []
        for a in range(0, replicates, chunk):
            sims = simulate(params, rate.size, min(chunk, replicates - a), rng)
            rows += [avar_of(s, m) for s in sims]
        wj = w[:, None] * jac
        cov = bread @ (wj.T @ np.atleast_2d(np.cov(np.array(rows), rowvar=False)) @ wj) @ bread
    sd = np.sqrt(np.abs(np.diag(cov)))
    terms = {}
    for i, n in enumerate(names):  # chi-square intervals, Satterthwaite's nu = 2 theta^2 / var(theta)
        nu = 2.0 * (theta[i] / sd[i]) ** 2
        lo = theta[i] * nu / scipy.stats.chi2.ppf((1 + conf) / 2, nu)
        hi = theta[i] * nu / scipy.stats.chi2.ppf((1 - conf) / 2, nu)
        terms[n] = (np.sqrt(theta[i]), np.sqrt(lo), np.sqrt(hi))  # N, B, K, Q or sigma: value, lower, upper
    if t_gm is not None:
        # Student's t for replicates - 1 dof: var(log T) is a sample variance over the replicates
        z = scipy.stats.t.ppf((1 + conf) / 2, replicates - 1) if replicates else scipy.stats.norm.ppf((1 + conf) / 2)
        terms["gauss_markov tau"] = (t_gm, t_gm * np.exp(-z * sd[-1]), t_gm * np.exp(z * sd[-1]))

    # -- the filter for step dt: Van Loan (1978) discretisation of the Gauss-Markov / random-walk states
    dt = DT
    th = dict(zip(names, theta))
    diag_a, diag_q = [], []
    if "gauss_markov" in th:
        diag_a.append(-1.0 / t_gm)
        diag_q.append(2.0 * th["gauss_markov"] / t_gm)
    if "random_walk" in th:
        diag_a.append(0.0)
        diag_q.append(th["random_walk"])
    k = len(diag_a)
    big = np.zeros((2 * k, 2 * k))
    big[:k, :k] = -np.diag(diag_a)
    big[:k, k:] = np.diag(diag_q)
    big[k:, k:] = np.diag(diag_a).T
    e = scipy.linalg.expm(big * dt) if k else np.zeros((0, 0))
    F = e[k:, k:].T
    Q = F @ e[:k, k:]
    Q = 0.5 * (Q + Q.T)
    H = np.ones((1, k))
    R = np.array([[th.get("white", 0.0) / dt + 2.0 * th.get("quantization", 0.0) / dt ** 2]])
    return dict(tau=tau, adev=adev, lower=lower, upper=upper, dof=dof, terms=terms, F=F, Q=Q, H=H, R=R)
'''


def plain_fit_lines(prefix: str, estimator: AllanDeviation, terms: tuple, *, dt: float, confidence: float,
                    replicates: int, seed: int, x: str, fs: str) -> list[str]:
    """The plain numpy/scipy lines of the deviation, the term fit and F, Q, H, R (see _PLAIN_FIT);
    every name assigned starts with ``prefix``.  Overlapping deviation of rate data only."""
    grid = estimator.taus
    if grid == "octave":
        g = "return 2 ** np.arange(int(np.floor(np.log2(mmax))) + 1)"
    elif grid == "decade":
        g = ("return np.array([v * d for d in 10 ** np.arange(19, dtype=np.int64) for v in (1, 2, 5) "
             "if v * d <= mmax])")
    else:
        g = f"return np.rint(np.array({py(tuple(grid))}) * fs).astype(np.int64)"
    alpha = ("identify(m, avar)" if estimator.noise == "auto"
             else f"np.full(m.size, {NOISE_TYPES[estimator.noise]})")
    body = (_PLAIN_FIT.replace("PREFIX", prefix).replace("GRID", g).replace("ALPHA", alpha)
            .replace("CONF", repr(float(estimator.confidence))).replace("TERMS", repr(list(terms)))
            .replace("REPLICATES", repr(int(replicates))).replace("SEED", repr(int(seed)))
            .replace("DT", repr(float(dt))))
    if float(confidence) != float(estimator.confidence):
        raise ValueError("the plain form uses the deviation's confidence for the terms too")
    lines = body.strip("\n").split("\n")
    lines += [f"{prefix}result = {prefix}allan_fit({x}, {fs})",
              f"{prefix}Q, {prefix}R = {prefix}result['Q'], {prefix}result['R']  # per filter step; R = N^2 / dt"]
    return lines


def _plain_analysis_lines(state: Any, name: str, est: AllanDeviation, options: dict) -> list[str]:
    """The Workbench plain cell's lines of a noise-model analysis (its options: terms, dt, ...)."""
    import numpy as np

    from ._scipy_form import numpy_selection

    fs, row, cols, analysed = numpy_selection(state)
    p = f"{name}_"
    lines = [""] + wrap_comment(f"Noise model (analysis {name!r}, {est!r}); names start with {p}")
    terms = options.get("terms")
    if not terms or est.input != "rate" or not est.overlapping:
        return lines + wrap_comment("No plain form written for these settings (it covers the overlapping "
                                    "deviation of rate data with the fitted terms); use the specbench form.")
    samples = np.asarray(np.atleast_2d(analysed.data)[0])
    missing = int(samples.size - np.count_nonzero(np.isfinite(samples)))
    if missing:  # the specbench form leaves out the clusters that touch a gap; this form has no gaps
        return lines + wrap_comment(f"No plain form written: the selection has {missing:,} missing (NaN) samples, "
                                    "and the plain form covers records without gaps; use the specbench form.")
    sel = f"[{row if row is not None else 0}" + ("" if cols is None else f", {cols[0]}:{cols[1]}") + "]"
    lines.append(f"{p}x = np.atleast_2d({state.data_name}){sel}")
    lines += plain_fit_lines(p, est, tuple(terms), dt=float(options.get("dt", 1 / fs)),
                             confidence=options.get("confidence", est.confidence),
                             replicates=options.get("replicates", 48), seed=options.get("seed", 0),
                             x=f"{p}x", fs="fs")
    return lines


def _register() -> None:
    from ._scipy_form import register_plain_form

    register_plain_form(AllanDeviation, _plain_analysis_lines)


_register()
