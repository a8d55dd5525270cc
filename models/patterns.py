"""Window rows grouped by missingness pattern, and the normal log-likelihood over them.

Full-information maximum likelihood (Arbuckle 1996; Finkbeiner 1979): each row contributes
the normal log-density of its observed entries. Rows sharing a pattern are summarised once
by their count n_g, mean ybar_g and ML covariance S_g, so after this step the cost does not
depend on the number of rows:
    loglik = -1/2 sum_g n_g [ p_g log 2 pi + log|Sigma_oo| + tr(Sigma_oo^-1 (S_g + e e')) ],
    e = ybar_g - mu_o;  d/dSigma_oo = n_g/2 (Sigma_oo^-1 (S_g + e e') Sigma_oo^-1 - Sigma_oo^-1),
    d/dmu_o = n_g Sigma_oo^-1 e.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.linalg import LinAlgError, cho_factor, cho_solve

from models.implied import NotAdmissible

LOG2PI = float(np.log(2.0 * np.pi))


@dataclass(frozen=True, eq=False)
class Pattern:
    observed: np.ndarray  # column indices
    n: int
    mean: np.ndarray
    cov: np.ndarray       # ML (divisor n)


class PatternData:
    """Sufficient statistics of window rows per missingness pattern."""

    def __init__(self, data: np.ndarray):
        data = np.asarray(data, dtype=float)
        mask = ~np.isnan(data)
        keep = mask.any(axis=1)
        data, mask = data[keep], mask[keep]
        self.n_rows, self.width = data.shape
        self.patterns: list[Pattern] = []
        if self.n_rows == 0:
            return
        uniq, inverse = np.unique(mask, axis=0, return_inverse=True)
        inverse = inverse.reshape(-1)
        order = np.argsort(inverse, kind="stable")
        bounds = np.searchsorted(inverse[order], np.arange(len(uniq) + 1))
        for g in range(len(uniq)):
            rows = data[order[bounds[g]:bounds[g + 1]]][:, uniq[g]]
            mean = rows.mean(axis=0)
            dev = rows - mean
            self.patterns.append(Pattern(np.flatnonzero(uniq[g]), rows.shape[0], mean,
                                         dev.T @ dev / rows.shape[0]))
        # per-column observed values' count, mean and ML variance (independence baseline)
        n_col = mask.sum(axis=0)
        filled = np.where(mask, data, 0.0)
        self.col_n = n_col
        self.col_mean = filled.sum(axis=0) / np.maximum(n_col, 1)
        self.col_var = (np.where(mask, (data - self.col_mean) ** 2, 0.0).sum(axis=0)
                        / np.maximum(n_col, 1))

    @property
    def n_observed_values(self) -> int:
        return int(sum(pt.n * pt.observed.size for pt in self.patterns))

    def loglik(self, mu: np.ndarray, sigma: np.ndarray, gradient: bool = True
               ) -> tuple[float, np.ndarray | None, np.ndarray | None]:
        """Log-likelihood and (optionally) its gradients w.r.t. Sigma (as in tr(G dSigma)) and mu."""
        total = 0.0
        g_sigma = np.zeros_like(sigma) if gradient else None
        g_mu = np.zeros_like(mu) if gradient else None
        for pt in self.patterns:
            o = pt.observed
            so = sigma[np.ix_(o, o)]
            try:
                fac = cho_factor(so, lower=True, check_finite=False)
            except LinAlgError:
                raise NotAdmissible("window covariance not positive definite") from None
            if not np.all(np.diag(fac[0]) > 0):
                raise NotAdmissible("window covariance not positive definite")
            inv = cho_solve(fac, np.eye(o.size), check_finite=False)
            logdet = 2.0 * np.sum(np.log(np.diag(fac[0])))
            e = pt.mean - mu[o]
            mg = pt.cov + np.outer(e, e)
            total += -0.5 * pt.n * (o.size * LOG2PI + logdet + np.sum(inv * mg))
            if gradient:
                a = inv @ mg @ inv
                g_sigma[np.ix_(o, o)] += 0.5 * pt.n * (a - inv)
                g_mu[o] += pt.n * (inv @ e)
        return total, g_sigma, g_mu

    def saturated(self, tol: float = 1e-10, max_iter: int = 5000) -> tuple[np.ndarray, np.ndarray, float, bool]:
        """Unrestricted mean and covariance by ML (EM algorithm for missing data; Dempster,
        Laird & Rubin 1977; closed form when complete). Returns mu, Sigma, loglik, converged."""
        w = self.width
        if len(self.patterns) == 1 and self.patterns[0].observed.size == w:
            pt = self.patterns[0]
            ll, _, _ = self.loglik(pt.mean, pt.cov, gradient=False)
            return pt.mean.copy(), pt.cov.copy(), ll, True
        mu = self.col_mean.copy()
        sigma = np.diag(np.maximum(self.col_var, 1e-8))
        ll_old = -np.inf
        for _ in range(max_iter):
            s1 = np.zeros(w)
            s2 = np.zeros((w, w))
            for pt in self.patterns:
                o = pt.observed
                mis = np.setdiff1d(np.arange(w), o)
                t_oo = pt.cov + np.outer(pt.mean, pt.mean)
                if mis.size == 0:
                    s1 += pt.n * pt.mean
                    s2 += pt.n * t_oo
                    continue
                b = np.linalg.solve(sigma[np.ix_(o, o)], sigma[np.ix_(o, mis)]).T
                a = mu[mis] - b @ mu[o]
                c = sigma[np.ix_(mis, mis)] - b @ sigma[np.ix_(o, mis)]
                xm = a + b @ pt.mean
                s1[o] += pt.n * pt.mean
                s1[mis] += pt.n * xm
                s2[np.ix_(o, o)] += pt.n * t_oo
                cross = pt.n * (np.outer(a, pt.mean) + b @ t_oo)
                s2[np.ix_(mis, o)] += cross
                s2[np.ix_(o, mis)] += cross.T
                s2[np.ix_(mis, mis)] += pt.n * (np.outer(a, a) + np.outer(a, b @ pt.mean)
                                                + np.outer(b @ pt.mean, a) + b @ t_oo @ b.T + c)
            mu = s1 / self.n_rows
            sigma = s2 / self.n_rows - np.outer(mu, mu)
            sigma = 0.5 * (sigma + sigma.T)
            ll, _, _ = self.loglik(mu, sigma, gradient=False)
            if abs(ll - ll_old) <= tol * max(1.0, abs(ll)):
                return mu, sigma, ll, True
            ll_old = ll
        return mu, sigma, ll_old, False

    def independence_loglik(self) -> float:
        """Log-likelihood of the independence baseline (free means and variances, zero
        covariances); under independence the full-information likelihood factorises by column."""
        v = np.maximum(self.col_var, 1e-300)
        return float(np.sum(-0.5 * self.col_n * (LOG2PI + np.log(v) + 1.0)))
