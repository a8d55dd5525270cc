"""Window rows grouped by missingness pattern, and the normal log-likelihood over them.

Full-information maximum likelihood (Finkbeiner 1979; Arbuckle 1996): each row contributes
the normal log-density of its observed entries. Rows sharing a pattern are summarised once
by their count n_g, mean ybar_g and ML covariance S_g, so after this step the cost does not
depend on the number of rows:
    loglik = -1/2 sum_g n_g [ p_g log 2 pi + log|Sigma_oo| + tr(Sigma_oo^-1 (S_g + e e')) ],
    e = ybar_g - mu_o;  d/dSigma_oo = n_g/2 (Sigma_oo^-1 (S_g + e e') Sigma_oo^-1 - Sigma_oo^-1),
    d/dmu_o = n_g Sigma_oo^-1 e.
All patterns are handled in one batch: a pattern's covariance is padded to full width with
the identity on its missing rows and columns, which leaves its determinant, inverse block
and trace unchanged and keeps the missing part out of the gradient.
"""

from __future__ import annotations

from collections import OrderedDict
from functools import cached_property
from hashlib import blake2b

import numpy as np
from scipy.linalg import lapack

from lagwise.models.implied import NotAdmissible

LOG2PI = float(np.log(2.0 * np.pi))


def pattern_data(rows: np.ndarray) -> "PatternData":
    """PatternData of `rows`, shared by every objective built on the same rows (the last
    PATTERN_CACHE distinct ones), so a refit of the same windows skips the grouping and the
    saturated model."""
    rows = np.ascontiguousarray(rows, dtype=float)
    key = blake2b(rows.tobytes() + repr(rows.shape).encode(), digest_size=16).digest()
    data = _CACHE.pop(key, None) or PatternData(rows)
    _CACHE[key] = data
    while len(_CACHE) > PATTERN_CACHE:
        _CACHE.popitem(last=False)
    return data


PATTERN_CACHE = 4
_CACHE: "OrderedDict[bytes, PatternData]" = OrderedDict()


class PatternData:
    """Sufficient statistics of window rows per missingness pattern (padded arrays)."""

    def __init__(self, data: np.ndarray):
        data = np.asarray(data, dtype=float)
        mask = ~np.isnan(data)
        keep = mask.any(axis=1)
        data, mask = data[keep], mask[keep]
        self.n_rows, self.width = data.shape
        w = self.width
        uniq, inverse = (np.unique(mask, axis=0, return_inverse=True) if self.n_rows
                         else (np.zeros((0, w), bool), np.zeros(0, int)))
        inverse = np.asarray(inverse).reshape(-1)
        g = uniq.shape[0]
        self.observed = uniq                                   # (G, w) bool
        self.counts = np.bincount(inverse, minlength=g).astype(float)  # (G,)
        filled = np.where(mask, data, 0.0)
        sums = np.zeros((g, w))
        np.add.at(sums, inverse, filled)
        self.means = sums / self.counts[:, None]               # zero where missing
        self.covs = np.zeros((g, w, w))
        dev = np.where(mask, filled - self.means[inverse], 0.0)
        order = np.argsort(inverse, kind="stable")
        bounds = np.searchsorted(inverse[order], np.arange(g + 1))
        for k in range(g):
            rows = dev[order[bounds[k]:bounds[k + 1]]]
            self.covs[k] = rows.T @ rows / self.counts[k]
        self.kept = keep                                       # rows of `data` with an answer
        self.filled = filled                                   # (n, w) the answers, 0 where missing
        self.row_pattern = inverse                             # (n,) pattern of each row
        self.obs_outer = self.observed[:, :, None] & self.observed[:, None, :]
        # every row answered in full: one pattern, no padding needed
        self.complete = g == 1 and bool(self.observed.all())
        self._lower = np.tri(w, dtype=bool)
        self.n_obs_per_pattern = self.observed.sum(axis=1)
        # per-column observed values' count, mean and ML variance (independence baseline)
        self.col_n = mask.sum(axis=0)
        self.col_mean = filled.sum(axis=0) / np.maximum(self.col_n, 1)
        self.col_var = (np.where(mask, (data - self.col_mean) ** 2, 0.0).sum(axis=0)
                        / np.maximum(self.col_n, 1))

    @property
    def n_patterns(self) -> int:
        return int(self.counts.size)

    def padded(self, sigma: np.ndarray) -> np.ndarray:
        """Each pattern's covariance at full width, the identity on its missing rows and columns."""
        eye = np.eye(self.width, dtype=bool)
        return np.where(self.obs_outer, sigma[None], np.where(eye, 1.0, 0.0)[None])

    def loglik(self, mu: np.ndarray, sigma: np.ndarray, gradient: bool = True
               ) -> tuple[float, np.ndarray | None, np.ndarray | None]:
        """Log-likelihood and (optionally) its gradients w.r.t. Sigma (as in tr(G dSigma)) and mu."""
        if self.complete:
            return self._complete_loglik(mu, sigma, gradient)
        padded = self.padded(sigma)
        try:
            chol = np.linalg.cholesky(padded)
        except np.linalg.LinAlgError:
            raise NotAdmissible("window covariance not positive definite") from None
        diag = np.diagonal(chol, axis1=1, axis2=2)
        if not np.all(np.isfinite(diag)) or np.any(diag <= 0):
            raise NotAdmissible("window covariance not positive definite")
        logdet = 2.0 * np.log(diag).sum(axis=1)
        inv = np.linalg.inv(padded)
        e = np.where(self.observed, self.means - mu[None], 0.0)
        mg = self.covs + e[:, :, None] * e[:, None, :]
        trace = np.einsum("gij,gij->g", inv, mg)
        n = self.counts
        total = float(-0.5 * np.sum(n * (self.n_obs_per_pattern * LOG2PI + logdet + trace)))
        if not gradient:
            return total, None, None
        a = inv @ mg @ inv
        g_sigma = np.einsum("g,gij->ij", 0.5 * n, np.where(self.obs_outer, a - inv, 0.0))
        g_mu = np.einsum("g,gi->i", n, np.where(self.observed, np.einsum("gij,gj->gi", inv, e), 0.0))
        return total, g_sigma, g_mu

    def _complete_loglik(self, mu: np.ndarray, sigma: np.ndarray, gradient: bool
                         ) -> tuple[float, np.ndarray | None, np.ndarray | None]:
        """`loglik` for one complete pattern (the same formulas without padding)."""
        chol, info = lapack.dpotrf(sigma, lower=1)
        logdet = 2.0 * float(np.log(np.diagonal(chol)).sum()) if info == 0 else np.nan
        if not np.isfinite(logdet):    # not positive definite (or not finite)
            raise NotAdmissible("window covariance not positive definite")
        inv, _ = lapack.dpotri(chol, lower=1)      # the lower triangle of Sigma^-1
        inv = np.where(self._lower, inv, inv.T)
        e = self.means[0] - mu
        mg = self.covs[0] + e[:, None] * e[None, :]
        n = self.counts[0]
        total = float(-0.5 * n * (self.width * LOG2PI + logdet + np.vdot(inv, mg)))
        if not gradient:
            return total, None, None
        return total, 0.5 * n * (inv @ mg @ inv - inv), n * (inv @ e)

    @cached_property
    def saturated_model(self) -> tuple[np.ndarray, np.ndarray, float, bool]:
        """`saturated()` at its defaults, computed once: it depends on the data alone, so
        refits of the same windows with other models reuse it."""
        return self.saturated()

    def saturated(self, tol: float = 1e-10, max_iter: int = 20000) -> tuple[np.ndarray, np.ndarray, float, bool]:
        """Unrestricted mean and covariance by ML: closed form when complete, else the EM
        algorithm (Dempster, Laird & Rubin 1977) with E[x_m | x_o] = mu_m + B (x_o - mu_o),
        B = -K_mm^-1 K_mo and Cov(x_m | x_o) = K_mm^-1, K = Sigma^-1, accelerated by SQUAREM
        (Varadhan & Roland 2008, scheme S3 with the step length kept at -1 or beyond): two EM
        steps, an extrapolation, one more EM step, kept only when the covariance stays
        positive definite and the log-likelihood has not fallen. Converged when one plain EM
        step changes no mean or covariance by more than `tol` (in the variables' standard
        deviations); `max_iter` counts EM steps. Returns mu, Sigma, loglik, converged."""
        if self.n_patterns == 1 and self.observed[0].all():
            ll, _, _ = self.loglik(self.means[0], self.covs[0], gradient=False)
            return self.means[0].copy(), self.covs[0].copy(), ll, True
        step = self._em_step()
        mu = self.col_mean.copy()
        sigma = np.diag(np.maximum(self.col_var, 1e-8))
        ll, steps = -np.inf, 0
        while steps < max_iter:
            mu1, sigma1 = step(mu, sigma)
            mu2, sigma2 = step(mu1, sigma1)
            steps += 2
            if _em_change(mu, sigma, mu1, sigma1) <= tol:
                mu, sigma = mu1, sigma1
                return mu, sigma, self.loglik(mu, sigma, gradient=False)[0], True
            if _em_change(mu1, sigma1, mu2, sigma2) <= tol:
                return mu2, sigma2, self.loglik(mu2, sigma2, gradient=False)[0], True
            r_mu, r_sigma = mu1 - mu, sigma1 - sigma
            v_mu, v_sigma = mu2 - 2 * mu1 + mu, sigma2 - 2 * sigma1 + sigma
            v_norm = np.sqrt(np.sum(v_mu ** 2) + np.sum(v_sigma ** 2))
            alpha = min(-np.sqrt(np.sum(r_mu ** 2) + np.sum(r_sigma ** 2)) / max(v_norm, 1e-300), -1.0)
            jump = (mu - 2 * alpha * r_mu + alpha ** 2 * v_mu,
                    sigma - 2 * alpha * r_sigma + alpha ** 2 * v_sigma)
            mu, sigma = mu2, sigma2
            try:
                mu_x, sigma_x = step(*jump)
                steps += 1
                ll_x = self.loglik(mu_x, sigma_x, gradient=False)[0]
            except (np.linalg.LinAlgError, NotAdmissible):
                continue
            if np.isfinite(ll_x) and ll_x >= ll:
                mu, sigma, ll = mu_x, sigma_x, ll_x
        ll, _, _ = self.loglik(mu, sigma, gradient=False)
        return mu, sigma, ll, False

    def _em_step(self):
        """One EM step (mu, Sigma) -> (mu, Sigma) over these patterns (see `saturated`)."""
        w = self.width
        missing = ~self.observed
        mis_outer = missing[:, :, None] & missing[:, None, :]
        mis_obs = missing[:, :, None] & self.observed[:, None, :]
        second = self.covs + self.means[:, :, None] * self.means[:, None, :]  # zero off oo
        n = self.counts
        eye = np.eye(w)

        def step(mu: np.ndarray, sigma: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
            k_full = np.linalg.inv(sigma)
            c_cond = np.where(mis_outer, np.linalg.inv(np.where(mis_outer, k_full[None], eye[None])), 0.0)
            b = -c_cond @ np.where(mis_obs, k_full[None], 0.0)          # (G, w, w): obs -> mis
            a = np.where(missing, mu[None] - np.einsum("gij,j->gi", b, mu), 0.0)
            p_map = eye[None] + b
            xbar = a + np.einsum("gij,gj->gi", p_map, self.means)
            s1 = np.einsum("g,gi->i", n, xbar)
            px = np.einsum("gij,gj->gi", p_map, self.means)
            s2 = np.einsum("g,gij->ij", n, a[:, :, None] * a[:, None, :] + a[:, :, None] * px[:, None, :]
                           + px[:, :, None] * a[:, None, :] + p_map @ second @ p_map.transpose(0, 2, 1)
                           + c_cond)
            mu_new = s1 / self.n_rows
            sigma_new = s2 / self.n_rows - np.outer(mu_new, mu_new)
            return mu_new, 0.5 * (sigma_new + sigma_new.T)

        return step

    def independence_loglik(self) -> float:
        """Log-likelihood of the independence baseline (free means and variances, zero
        covariances); under independence the full-information likelihood factorises by column."""
        v = np.maximum(self.col_var, 1e-300)
        return float(np.sum(-0.5 * self.col_n * (LOG2PI + np.log(v) + 1.0)))


def _em_change(mu: np.ndarray, sigma: np.ndarray, mu_new: np.ndarray, sigma_new: np.ndarray) -> float:
    """The largest change of a mean or covariance in one EM step, in the new standard deviations."""
    scale = np.sqrt(np.diag(sigma_new))
    return float(max(np.max(np.abs(mu_new - mu) / scale),
                     np.max(np.abs(sigma_new - sigma) / np.outer(scale, scale))))
