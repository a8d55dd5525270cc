"""Stationary latent covariances of a vector autoregression (companion form).

For eta_t = B_1 eta_{t-1} + ... + B_q eta_{t-q} + zeta_t, zeta_t ~ N(0, Psi), the companion
state s_t = (eta_t, ..., eta_{t-q+1}) follows s_t = F s_{t-1} + (zeta_t, 0, ...). Its
stationary covariance solves the discrete Lyapunov equation P = F P F' + Q (Lutkepohl 2005,
section 2.1.4); the latent lag-h autocovariances are Phi_h = [F^h P]_{11}.
"""

from __future__ import annotations

import numpy as np

from lagwise.models.errors import EstimationError


def companion(lagged: list[np.ndarray] | tuple[np.ndarray, ...]) -> np.ndarray:
    """F = [[B_1 ... B_q], [I 0 ... 0], ...] of size qk x qk."""
    q = len(lagged)
    k = lagged[0].shape[0]
    f = np.zeros((q * k, q * k))
    f[:k, :] = np.hstack(lagged)
    if q > 1:
        f[k:, :-k] = np.eye((q - 1) * k)
    return f


def spectral_radius(lagged: list[np.ndarray] | tuple[np.ndarray, ...]) -> float:
    """Largest modulus of the companion eigenvalues (< 1 means stationary)."""
    if not lagged:
        return 0.0
    return float(np.max(np.abs(np.linalg.eigvals(companion(lagged)))))


def solve_lyapunov(a: np.ndarray, q: np.ndarray) -> np.ndarray:
    """X solving X = A X A' + Q, by vec(X) = (I - A kron A)^-1 vec(Q) (Kronecker form)."""
    n = a.shape[0]
    x = np.linalg.solve(np.eye(n * n) - np.kron(a, a), q.reshape(-1))
    x = x.reshape(n, n)
    return 0.5 * (x + x.T)


def companion_covariance(lagged: list[np.ndarray] | tuple[np.ndarray, ...], innovation: np.ndarray) -> np.ndarray:
    """Stationary covariance P of the companion state (qk x qk): block (a, b) is
    Phi_{b-a} = Cov(eta_{t-a}, eta_{t-b}); Psi for lag order 0. Raises EstimationError when
    the paths are not stationary (spectral radius 1 or more: no stationary distribution)."""
    lagged = [np.atleast_2d(np.asarray(b, dtype=float)) for b in lagged]
    innovation = np.atleast_2d(np.asarray(innovation, dtype=float))
    k = innovation.shape[0]
    q = len(lagged)
    if q == 0:
        return innovation.copy()
    radius = spectral_radius(lagged)
    if not np.isfinite(radius) or radius >= 1.0:
        raise EstimationError(
            f"The lagged paths are not stationary (spectral radius {radius:.3f}, must be below 1).")
    big_q = np.zeros((q * k, q * k))
    big_q[:k, :k] = innovation
    return solve_lyapunov(companion(lagged), big_q)


def stationary_covariance(lagged: list[np.ndarray] | tuple[np.ndarray, ...], innovation: np.ndarray) -> np.ndarray:
    """Phi_0, the stationary covariance of the states (k x k)."""
    k = np.atleast_2d(innovation).shape[0]
    return companion_covariance(lagged, innovation)[:k, :k]
