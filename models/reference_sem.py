"""Independent reference fits with semopy, for checks and the speed benchmark.

The `first-copy-free` window model written as an ordinary SEM on the window columns
(column block j = occasion t-j, models/windows.py):
    y_{t-j} = nu + Lambda eta_{t-j} + eps_{t-j},   Var(eps) = Theta (diagonal)   j = 0..L
    eta_{t-j} = B_1 eta_{t-j-1} + ... + B_q eta_{t-j-q} + zeta,   Cov(zeta) = Psi   j = 0..L-q
with the states of the oldest q copies (j = L-q+1..L) given a free covariance matrix.
Equality across copies is imposed the usual way, by giving the copies' parameters one
shared label (loadings, intercepts, unique variances, lagged paths, innovation variances
and covariances). Marker loadings are written `1*` without a label: semopy takes a
labelled loading as free, and a state with no fixed loading leaves it unidentified (semopy
warns "No fixed loadings" and, tried on the Holzinger-Swineford model, its fit had not
finished after two minutes).

Mean structure (`means`):
- "items" (Lagwise's window model): item intercepts nu shared across copies (`y ~ nu*1`,
  one label), latent means 0;
- "states": as "items", plus a free latent intercept c (k values, one label per state) in
  the regression of every newer copy, so E eta_{t-j} = c + B_1 E eta_{t-j-1} + ...; the
  oldest copies keep latent mean 0. With single-item states the means are then saturated;
- "free": no mean structure (every window column's mean left free).
"items" and "states" use semopy's ModelMeans, fitted by normal maximum likelihood on the
raw rows (obj "ML", which semopy evaluates as full-information ML); the chi-square is the
likelihood-ratio statistic against the saturated model (free means and covariances):
    chi2 = F_model - N (log|S| + P),   F = sum_rows (y - mu)' Sigma^-1 (y - mu) + N log|Sigma|,
S the covariance of the rows with divisor N, P the number of window columns, and
df = P (P + 3) / 2 - free parameters. "free" uses semopy's covariance-only Model (obj "MLW":
F = log|Sigma| + tr(S Sigma^-1) - log|S| - P, chi2 = N F, df = P (P + 1) / 2 - free
parameters).
semopy runs with BLAS limited to one thread by default, as the Lagwise estimator does: at
these matrix sizes threads only add overhead on a shared machine.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np
import pandas as pd
from threadpoolctl import threadpool_limits

from lagwise.models.spec import ModelSpec
from lagwise.models.windows import LagWindows


@dataclass(frozen=True)
class ReferenceFit:
    """A semopy fit in Lagwise's matrix layout (spec item and state order).

    loadings (p, k); intercepts (p,) or None without a mean structure; state_intercepts
    (k,) the latent intercept c of mean structure "states", else None; unique (p,);
    lagged: q matrices (k, k), row = state at t, column = state at t-l; innovation Psi
    (k, k); oldest_cov (k q, k q): covariance of the oldest q copies' states, block a =
    copy L-q+1+a (for lags 0: Psi). chi2/df: likelihood-ratio test against the saturated
    model; objective: semopy's minimised objective; n_rows: window rows used.
    """

    loadings: np.ndarray
    intercepts: np.ndarray | None
    state_intercepts: np.ndarray | None
    unique: np.ndarray
    lagged: tuple[np.ndarray, ...]
    innovation: np.ndarray
    oldest_cov: np.ndarray
    chi2: float
    df: int
    n_rows: int
    n_free: int
    objective: float
    converged: bool
    iterations: int
    seconds: float


def _item_var(i: int, j: int) -> str:
    return f"y{i}_{j}"


def _state_var(s: int, j: int) -> str:
    return f"f{s}_{j}"


def check_supported(spec: ModelSpec) -> None:
    """Raise ValueError for model features semopy's linear equality labels cannot express."""
    if spec.identification != "marker":
        raise ValueError("the semopy reference supports marker identification only")
    if spec.innovations == "partial" and spec.partial_zeros:
        raise ValueError("partial-correlation zeros are not linear constraints on Psi")
    if spec.reliability:
        raise ValueError("the semopy reference does not fix unique variances by reliability")
    if spec.unique_autocorrelation:
        raise ValueError("the semopy reference has no autocorrelated unique parts")


MEAN_STRUCTURES: tuple[str, ...] = ("items", "states", "free")


def window_model_description(spec: ModelSpec, depth: int, means: str = "items") -> str:
    """semopy model text of the first-copy-free window model of `spec` on `depth`-windows.

    Item i of copy j is the column `y{i}_{j}`, state s of copy j the latent `f{s}_{j}`.
    """
    check_supported(spec)
    if means not in MEAN_STRUCTURES:
        raise ValueError(f"mean structure must be one of {MEAN_STRUCTURES}, not {means!r}")
    q, k, items = spec.lags, spec.k, spec.items
    if depth < q:
        raise ValueError(f"window depth {depth} is below the lag order {q}")
    load_mask = spec.loading_mask()
    single = [len(s.items) == 1 for s in spec.states]
    fixed_zero_unique = {items.index(s.items[0]) for s, one in zip(spec.states, single)
                         if one and sum(s.items[0] in t.items for t in spec.states) == 1}
    newer = range(depth - q + 1) if q > 0 else range(depth + 1)
    oldest = range(depth - q + 1, depth + 1) if q > 0 else range(0)
    lines: list[str] = []
    for j in range(depth + 1):
        for s, state in enumerate(spec.states):
            marker = items.index(state.marker_item)
            terms = [f"1*{_item_var(marker, j)}"]
            terms += [f"lam_{i}_{s}*{_item_var(i, j)}" for i in range(len(items))
                      if load_mask[i, s] and i != marker]
            lines.append(f"{_state_var(s, j)} =~ " + " + ".join(terms))
        for i in range(len(items)):
            theta = "0" if i in fixed_zero_unique else f"theta_{i}"
            lines.append(f"{_item_var(i, j)} ~~ {theta}*{_item_var(i, j)}")
            if means != "free":
                lines.append(f"{_item_var(i, j)} ~ nu_{i}*1")
    for j in newer:
        for s in range(k):
            terms = [f"b{l}_{s}_{r}*{_state_var(r, j + l)}" for l in range(1, q + 1)
                     for r in range(k) if spec.path_mask(l)[s, r]]
            if means == "states":
                terms.append(f"c_{s}*1")
            if terms:
                lines.append(f"{_state_var(s, j)} ~ " + " + ".join(terms))
        for s in range(k):
            for r in range(s, k):
                free = s == r or spec.innovations != "independent"
                label = f"psi_{s}_{r}" if free else "0"
                lines.append(f"{_state_var(s, j)} ~~ {label}*{_state_var(r, j)}")
    if q == 0:  # copies are independent: semopy would free covariances of exogenous states
        for j in range(depth + 1):
            for jj in range(j + 1, depth + 1):
                for s in range(k):
                    for r in range(k):
                        lines.append(f"{_state_var(s, j)} ~~ 0*{_state_var(r, jj)}")
    old = [(s, j) for j in oldest for s in range(k)]
    for a, (s, j) in enumerate(old):
        for (r, jj) in old[a:]:
            lines.append(f"{_state_var(s, j)} ~~ {_state_var(r, jj)}")
    if means == "states":  # semopy's automatic start values fail for latent intercepts
        lines.append("START(0) " + " ".join(f"c_{s}" for s in range(k)))
    return "\n".join(lines)


def window_frame(windows: LagWindows) -> pd.DataFrame:
    """The complete window rows as a data frame with the column names of the description."""
    p = len(windows.items)
    cols = [_item_var(i, j) for j in range(windows.depth + 1) for i in range(p)]
    return pd.DataFrame(windows.data[windows.complete], columns=cols)


def fit_windows(windows: LagWindows, spec: ModelSpec, *, means: str = "items",
                precise: bool = True, report: bool = False, statistics: bool = True,
                single_thread: bool = True) -> ReferenceFit:
    """Fit the first-copy-free model with semopy on the complete rows of `windows`.

    `windows.items` must be `spec.items` (same order); `means` is one of MEAN_STRUCTURES
    (module docstring). precise=True tightens the optimiser (SLSQP ftol 1e-12) for use as
    a check value; False keeps semopy's defaults (benchmark). report=True also computes
    what a user asks semopy for after a fit: the parameter table with standard errors
    (semopy.inspect) and, unless statistics=False, the fit statistics (semopy.calc_stats).
    single_thread=False leaves BLAS at its default threads. `seconds` is semopy's own time
    inside the BLAS limit: model built from its text, data loaded, optimised (and the
    report); writing the text and the data frame here, and setting the limit, are not in it.
    """
    import semopy

    if tuple(windows.items) != tuple(spec.items):
        raise ValueError("the windows' items must be the model's items, in the same order")
    desc = window_model_description(spec, windows.depth, means=means)
    frame = window_frame(windows)
    kwargs = {"options": {"ftol": 1e-12, "maxiter": 20000}} if precise else {}
    with threadpool_limits(limits=1 if single_thread else None, user_api="blas"):
        start = time.perf_counter()
        if means != "free":
            model = semopy.ModelMeans(desc)
            res = model.fit(frame, obj="ML", **kwargs)
        else:
            model = semopy.Model(desc)
            res = model.fit(frame, obj="MLW", **kwargs)
        if report:
            model.inspect()
            if statistics:
                semopy.calc_stats(model)
        seconds = time.perf_counter() - start
    return _collect(model, res, spec, windows.depth, frame.to_numpy(), means, seconds)


def _collect(model, res, spec: ModelSpec, depth: int, data: np.ndarray, means: str,
             seconds: float) -> ReferenceFit:
    q, k, p = spec.lags, spec.k, len(spec.items)
    obs, inner = model.names_lambda
    lam_m, beta_m = model.mx_lambda, model.mx_beta
    psi_m, theta_m = model.mx_psi, model.mx_theta

    def o(i: int, j: int) -> int:
        return obs.index(_item_var(i, j))

    def f(s: int, j: int) -> int:
        return inner.index(_state_var(s, j))

    loadings = np.array([[lam_m[o(i, 0), f(s, 0)] for s in range(k)] for i in range(p)])
    unique = np.array([theta_m[o(i, 0), o(i, 0)] for i in range(p)])
    lagged = tuple(np.array([[beta_m[f(s, 0), f(r, l)] for r in range(k)] for s in range(k)])
                   for l in range(1, q + 1))
    innovation = np.array([[psi_m[f(s, 0), f(r, 0)] for r in range(k)] for s in range(k)])
    old = [(s, j) for j in range(depth - q + 1, depth + 1) for s in range(k)] if q else \
        [(s, 0) for s in range(k)]
    oldest_cov = np.array([[psi_m[f(*a), f(*b)] for b in old] for a in old])
    intercepts = c = None
    n_rows, n_cols = data.shape
    n_free = len(model.param_vals)
    if means != "free":
        gamma2, (g_rows, g_cols) = model.mx_gamma2, model.names_gamma2
        one = g_cols.index("1")
        intercepts = np.array([gamma2[g_rows.index(_item_var(i, 0)), one] for i in range(p)])
        if means == "states":
            gamma1, (c_rows, c_cols) = model.mx_gamma1, model.names_gamma1
            c = np.array([gamma1[c_rows.index(_state_var(s, 0)), c_cols.index("1")]
                          for s in range(k)])
        centred = data - data.mean(axis=0)
        _, logdet_s = np.linalg.slogdet(centred.T @ centred / n_rows)
        chi2 = float(res.fun - n_rows * (logdet_s + n_cols))
        df = n_cols * (n_cols + 3) // 2 - n_free
    else:
        chi2 = float(n_rows * res.fun)
        df = n_cols * (n_cols + 1) // 2 - n_free
    return ReferenceFit(loadings=loadings, intercepts=intercepts, state_intercepts=c,
                        unique=unique, lagged=lagged,
                        innovation=innovation, oldest_cov=oldest_cov, chi2=chi2, df=df,
                        n_rows=n_rows, n_free=n_free, objective=float(res.fun),
                        converged=bool(res.success), iterations=int(res.n_it),
                        seconds=seconds)


# ----- the plain factor model on the Holzinger-Swineford data ----------------------------

HOLZINGER_STATES: dict[str, list[str]] = {
    "visual": ["x1", "x2", "x3"],
    "textual": ["x4", "x5", "x6"],
    "speed": ["x7", "x8", "x9"],
}


def holzinger_swineford_data() -> pd.DataFrame:
    """The Holzinger and Swineford (1939) test scores shipped with semopy (301 children)."""
    from semopy.examples import holzinger39

    return holzinger39.get_data()


def fit_holzinger_swineford() -> ReferenceFit:
    """The three-factor model (visual x1-x3, textual x4-x6, speed x7-x9) fitted by semopy.

    Covariance-only normal ML (obj "MLW"; semopy's chi-square N F with N = 301), the usual
    textbook fit of this model. Marker loadings (x1, x4, x7) are 1.
    """
    import semopy

    desc = "\n".join(f"{name} =~ " + " + ".join(items)
                     for name, items in HOLZINGER_STATES.items())
    items = [it for its in HOLZINGER_STATES.values() for it in its]
    frame = holzinger_swineford_data()[items]
    model = semopy.Model(desc)
    start = time.perf_counter()
    with threadpool_limits(limits=1, user_api="blas"):
        res = model.fit(frame, obj="MLW", options={"ftol": 1e-12, "maxiter": 20000})
    seconds = time.perf_counter() - start
    obs, inner = model.names_lambda
    states = list(HOLZINGER_STATES)
    loadings = np.array([[model.mx_lambda[obs.index(it), inner.index(s)] for s in states]
                         for it in items])
    unique = np.array([model.mx_theta[obs.index(it), obs.index(it)] for it in items])
    phi = np.array([[model.mx_psi[inner.index(a), inner.index(b)] for b in states]
                    for a in states])
    n_rows, n_cols = frame.shape
    n_free = len(model.param_vals)
    return ReferenceFit(loadings=loadings, intercepts=None, state_intercepts=None,
                        unique=unique, lagged=(),
                        innovation=phi, oldest_cov=phi, chi2=float(n_rows * res.fun),
                        df=n_cols * (n_cols + 1) // 2 - n_free, n_rows=n_rows, n_free=n_free,
                        objective=float(res.fun), converged=bool(res.success),
                        iterations=int(res.n_it), seconds=seconds)
