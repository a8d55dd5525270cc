"""Simulate a diary from known parameters, and the stationary state covariance.

The model (models.spec):
    y_t   = nu + Lambda eta_t + eps_t,        Var(eps_t) = Theta (diagonal)
    eta_t = B_1 eta_{t-1} + ... + B_q eta_{t-q} + zeta_t,   zeta_t ~ N(0, Psi)
With an autocorrelated unique part, eps_t = d eps_{t-1} + u_t, Var(u_t) = Theta (1 - d^2),
so Theta stays the stationary unique variance and Cov(eps_t, eps_{t-h}) = d^h Theta.

Lag order 2 is written in companion form: x_t = (eta_t, eta_{t-1}),
    x_t = A x_{t-1} + (zeta_t, 0),   A = [[B_1, B_2], [I, 0]],
and the stationary covariance of x solves the discrete Lyapunov equation
    Sigma_x = A Sigma_x A' + blockdiag(Psi, 0)
(common practice); its top-left block is Phi_0 and its top-right block Phi_1.
Each day is its own segment and starts from this stationary distribution.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from datetime import date, timedelta

import numpy as np

from lagwise.models.diary import Diary
from lagwise.models.drift import discrete_system, stationary_covariance
from lagwise.models.errors import SpecError
from lagwise.models.lyapunov import companion_covariance
from lagwise.models.spec import ModelSpec


def autocorrelation_vector(spec: ModelSpec,
                           values: Mapping[str, float] | Sequence[float] | np.ndarray | None
                           ) -> np.ndarray:
    """(p,) lag-1 autocorrelations d of the unique parts, in the order of `spec.items`.

    `values` is None (no autocorrelation), a mapping item -> d, or a sequence aligned with
    `spec.items`.
    """
    items = spec.items
    d = np.zeros(len(items))
    if values is None:
        return d
    if isinstance(values, Mapping):
        for item, v in values.items():
            if item not in items:
                raise SpecError(f"Unique autocorrelation given for '{item}', which no state uses.")
            d[items.index(item)] = float(v)
    else:
        d[:] = np.asarray(values, dtype=float)
    if np.any(np.abs(d) >= 1.0):
        raise SpecError("A unique autocorrelation must lie strictly between -1 and 1.")
    return d


def simulate_diary(spec: ModelSpec, *, loadings: np.ndarray, intercepts: np.ndarray,
                   unique: np.ndarray, lagged: Sequence[np.ndarray], innovation: np.ndarray,
                   days: int, prompts_per_day: int, p_missed: float = 0.0,
                   p_item_skip: float = 0.0,
                   unique_autocorrelation: Mapping[str, float] | Sequence[float] | None = None,
                   seed: int | np.random.Generator | None = None,
                   start: date | None = None) -> Diary:
    """Draw a diary of `days` x `prompts_per_day` occasions from the model above.

    loadings (p, k), intercepts (p,), unique (p,) diagonal of Theta, lagged: q matrices
    (k, k) with q = spec.lags (empty for lags 0), innovation Psi (k, k). Each day is a
    segment whose first state is drawn from the stationary distribution. A prompt is missed
    (whole occasion NaN) with probability `p_missed`; each item of an answered prompt is
    skipped with probability `p_item_skip`. Day labels are ISO dates counted from `start`
    when it is given, else "day 1", "day 2", ...
    """
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    lam = np.atleast_2d(np.asarray(loadings, dtype=float))
    p, k = lam.shape
    nu = np.asarray(intercepts, dtype=float).reshape(p)
    theta = np.asarray(unique, dtype=float).reshape(p)
    psi = np.atleast_2d(np.asarray(innovation, dtype=float))
    blocks = [np.atleast_2d(np.asarray(b, dtype=float)) for b in lagged]
    if len(spec.items) != p or spec.k != k:
        raise SpecError(f"Loadings are {p} x {k}, the model has {len(spec.items)} items "
                        f"and {spec.k} states.")
    if len(blocks) != spec.lags:
        raise SpecError(f"The model has lag order {spec.lags} but {len(blocks)} lagged matrices "
                        f"were given.")
    if days < 1 or prompts_per_day < 1:
        raise ValueError("days and prompts_per_day must be at least 1")
    d = autocorrelation_vector(spec, unique_autocorrelation)

    n_days, n_b, q = int(days), int(prompts_per_day), len(blocks)
    eta = np.empty((n_days, n_b, k))
    if q == 0:
        eta[:] = rng.multivariate_normal(np.zeros(k), psi, size=(n_days, n_b))
    else:
        sigma_x = companion_covariance(blocks, psi)
        x = rng.multivariate_normal(np.zeros(k * q), sigma_x, size=n_days, method="eigh")
        eta[:, 0] = x[:, :k]
        chol_psi = _psd_factor(psi)
        history = [x[:, j * k:(j + 1) * k] for j in range(q)]  # eta_{t-1}, ..., eta_{t-q}
        for b in range(1, n_b):
            new = rng.standard_normal((n_days, k)) @ chol_psi.T
            for j in range(q):
                new = new + history[j] @ blocks[j].T
            eta[:, b] = new
            history = [new] + history[:-1]

    sd = np.sqrt(theta)
    eps = np.empty((n_days, n_b, p))
    eps[:, 0] = rng.standard_normal((n_days, p)) * sd
    sd_u = sd * np.sqrt(1.0 - d ** 2)
    for b in range(1, n_b):
        eps[:, b] = d * eps[:, b - 1] + rng.standard_normal((n_days, p)) * sd_u

    y = nu + eta @ lam.T + eps
    y = y.reshape(n_days * n_b, p)
    missed = rng.random(n_days * n_b) < p_missed
    skipped = rng.random((n_days * n_b, p)) < p_item_skip
    y[skipped] = np.nan
    y[missed] = np.nan

    day = np.repeat(np.arange(n_days), n_b)
    if start is None:
        labels = tuple(f"day {i + 1}" for i in range(n_days))
    else:
        labels = tuple((start + timedelta(days=i)).isoformat() for i in range(n_days))
    return Diary(items=spec.items, values=y, segment=day.copy(), day=day, day_labels=labels,
                 prompt=np.tile(np.arange(1, n_b + 1, dtype=float), n_days), time=None,
                 source="simulated")


def _psd_factor(m: np.ndarray) -> np.ndarray:
    """A factor F with F F' = m for a positive semi-definite m."""
    w, v = np.linalg.eigh((m + m.T) / 2.0)
    return v * np.sqrt(np.clip(w, 0.0, None))


def simulate_continuous(spec: ModelSpec, *, loadings: np.ndarray, intercepts: np.ndarray,
                        unique: np.ndarray, drift: np.ndarray, diffusion: np.ndarray,
                        hours: Sequence[np.ndarray], p_missed: float = 0.0,
                        seed: int | np.random.Generator | None = None) -> Diary:
    """Draw a timestamped diary from the continuous-time model d eta = A eta dt + G dW
    (models.drift): day d has prompts at `hours[d]` (increasing, hours after midnight), each
    day starts from the stationary distribution and steps exactly by B(D), Q(D). A prompt is
    missed (whole occasion NaN) with probability `p_missed`."""
    rng = seed if isinstance(seed, np.random.Generator) else np.random.default_rng(seed)
    lam = np.asarray(loadings, dtype=float)
    a, w = np.asarray(drift, dtype=float), np.asarray(diffusion, dtype=float)
    k = a.shape[0]
    rows, days, stamps = [], [], []
    for d, day_hours in enumerate(hours):
        h = np.asarray(day_hours, dtype=float)
        b, q = discrete_system(a, w, np.diff(h))
        eta = rng.multivariate_normal(np.zeros(k), stationary_covariance(a, w))
        for n in range(h.size):
            if n:
                eta = b[n - 1] @ eta + _psd_factor(q[n - 1]) @ rng.standard_normal(k)
            rows.append(eta)
        days += [d] * h.size
        stamps += list(np.datetime64("2026-01-05") + np.timedelta64(d, "D")
                       + np.round(h * 3.6e12).astype("timedelta64[ns]"))
    eta = np.array(rows)
    y = intercepts + eta @ lam.T + rng.standard_normal((eta.shape[0], lam.shape[0])) * np.sqrt(unique)
    y[rng.random(y.shape[0]) < p_missed] = np.nan
    day = np.array(days)
    return Diary(items=spec.items, values=y, segment=day.copy(), day=day,
                 day_labels=tuple(f"day {i + 1}" for i in range(len(hours))),
                 prompt=np.full(day.size, np.nan), time=np.array(stamps, dtype="datetime64[ns]"),
                 source="simulated")
