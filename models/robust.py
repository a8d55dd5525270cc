"""Robust (sandwich) standard errors and a calibrated fit test for the window estimators.

The window estimators maximise a composite (pseudo-) likelihood: overlapping lag windows
enter as if they were independent rows, so the information identity fails and the usual
errors are too small. Composite-likelihood theory (Lindsay 1988; Varin, Reid & Firth 2011)
gives Cov(theta) = H^-1 J H^-1, with H the information of the window likelihood and J the
covariance of its total score. The score is a sum of per-window scores; windows of one
segment are dependent, segments are independent:
- days independent (each segment a day or part of one) and at least 20 segments:
  J = sum_c S_c S_c', S_c the summed scores of segment c (cluster-robust; Liang & Zeger
  1986; no small-sample correction);
- days joined (segments spanning nights), or fewer segments: J = sum over segments of n_s
  times the long-run covariance of the windows' scores in time order, by the Bartlett
  kernel with the automatic bandwidth of Newey & West (1994) (arch.covariance.kernel.Bartlett).

Per window, with a = S_o^-1 (y_o - mu_o) and K = S_o^-1 (both padded with zeros on the missing
entries), the score is d l / d mu = a and d l / d Sigma = (a a' - K) / 2 (element-wise,
symmetric); a parameter's score is its inner product with d mu / d theta and
d Sigma / d theta (models.implied.moment_jacobian): `Projection`.

Fit test. Against the saturated model (free window means and covariances, gamma = (mu,
vech Sigma)), T = 2 (l_sat - l_model) is asymptotically sum_j lambda_j chi2_1, lambda the
non-zero eigenvalues of U Gamma, U = H_s - H_s D K^-1 D' H_s, Gamma = H_s^-1 J_s H_s^-1
(D = d gamma / d theta, K = D' H_s D the model's information, H_s and J_s the saturated
model's information and score covariance) (Satorra & Bentler 1994; Varin et al. 2011,
section 4). Scaled: T / c on df, c = tr(U Gamma) / df; mean-and-variance adjusted: T d* /
tr(U Gamma) on d* = tr(U Gamma)^2 / tr((U Gamma)^2) degrees of freedom (Satterthwaite
1946). With cluster sums the traces are those of the clusters x clusters matrix
C = S H_s^-1 S' - (S D) K^-1 (S D)' (S: the segments' summed saturated scores), and
for complete windows H_s^-1 acts in closed form: g1' H_s^-1 g2 = (g1_mu' Sigma g2_mu +
2 tr(G1 Sigma G2 Sigma)) / n.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from arch.covariance.kernel import Bartlett as Bartlett

from lagwise.models.patterns import PatternData

MAX_PREWHITENING = 0.99   # spectral radius of the prewhitening autoregression at most


@dataclass(frozen=True)
class Projection:
    """A linear map from the element-wise window score (d mu, d Sigma) to q scores:
    score = mu @ d_mu + <sigma, d_Sigma>. The model's: the moment Jacobian; the saturated
    model's: `saturated_projection`."""

    mu: np.ndarray      # (q, w)
    sigma: np.ndarray   # (q, w, w)


def saturated_projection(width: int) -> Projection:
    """The saturated parameters gamma = (mu, vech Sigma): sigma_ab (a <= b) moves Sigma_ab
    and Sigma_ba together."""
    rows, cols = np.triu_indices(width)
    m = width + rows.size
    mu = np.zeros((m, width))
    mu[np.arange(width), np.arange(width)] = 1.0
    sigma = np.zeros((m, width, width))
    index = width + np.arange(rows.size)
    sigma[index, rows, cols] = 1.0
    sigma[index, cols, rows] = 1.0
    return Projection(mu, sigma)


@dataclass(frozen=True, eq=False)
class WindowScores:
    """Per-window score ingredients at given moments (mu, Sigma) of the windows in `data`."""

    data: PatternData
    a: np.ndarray          # (n, w): S_o^-1 (y_o - mu_o), zero on missing entries
    inverse: np.ndarray    # (G, w, w): S_o^-1 per pattern, zero on missing rows and columns
    _sums: dict = field(default_factory=dict, repr=False)

    @classmethod
    def at(cls, data: PatternData, mu: np.ndarray, sigma: np.ndarray) -> "WindowScores":
        inverse = np.where(data.obs_outer, np.linalg.inv(data.padded(sigma)), 0.0)
        e = np.where(data.observed[data.row_pattern], data.filled - mu, 0.0)
        a = np.empty_like(e)
        for g in range(data.n_patterns):
            rows = data.row_pattern == g
            a[rows] = e[rows] @ inverse[g]
        return cls(data, a, inverse)

    def rows(self, p: Projection) -> np.ndarray:
        """(n, q) scores of every window."""
        half = 0.5 * np.einsum("qab,gab->gq", p.sigma, self.inverse)[self.data.row_pattern]
        out = self.a @ p.mu.T - half
        w = self.a.shape[1]
        flat = p.sigma.transpose(1, 0, 2).reshape(w, -1)     # (w, q w)
        for lo in range(0, self.a.shape[0], 512):
            a = self.a[lo:lo + 512]
            out[lo:lo + 512] += 0.5 * np.einsum("rqb,rb->rq", (a @ flat).reshape(len(a), -1, w), a)
        return out

    def cluster_sums(self, clusters: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Element-wise scores summed within each cluster: (C, w) and (C, w, w), computed
        once per cluster labelling."""
        key = clusters.tobytes()
        if key not in self._sums:
            self._sums[key] = self._sums_of(clusters)
        return self._sums[key]

    def _sums_of(self, clusters: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        labels, index = np.unique(clusters, return_inverse=True)
        c, w = labels.size, self.a.shape[1]
        mu = np.zeros((c, w))
        np.add.at(mu, index, self.a)
        counts = np.zeros((c, self.data.n_patterns))
        np.add.at(counts, (index, self.data.row_pattern), 1.0)
        sigma = -0.5 * np.einsum("cg,gab->cab", counts, self.inverse)
        order = np.argsort(index, kind="stable")
        bounds = np.searchsorted(index[order], np.arange(c + 1))
        for j in range(c):
            block = self.a[order[bounds[j]:bounds[j + 1]]]
            sigma[j] += 0.5 * block.T @ block
        return mu, sigma


def project(mu: np.ndarray, sigma: np.ndarray, p: Projection) -> np.ndarray:
    """(C, q): element-wise score sums mapped by `p`."""
    return mu @ p.mu.T + sigma.reshape(len(sigma), -1) @ p.sigma.reshape(len(p.sigma), -1).T


def kernel_covariance(rows: np.ndarray, segment: np.ndarray, order: np.ndarray) -> np.ndarray:
    """sum over segments of n_s x the long-run covariance of the rows in time order
    (`long_run`); a segment too short for it (fewer than 3 rows per score, at least 30) adds
    the outer product of its summed rows, as a cluster."""
    q = rows.shape[1]
    total = np.zeros((q, q))
    for s in np.unique(segment):
        x = rows[order[segment[order] == s]]
        if len(x) < max(3 * q, 30):
            summed = x.sum(axis=0)
            total += np.outer(summed, summed)
        else:
            total += len(x) * long_run(x)
    return 0.5 * (total + total.T)


def long_run(x: np.ndarray) -> np.ndarray:
    """Long-run covariance of the rows of x (time order): VAR(1) prewhitening (Andrews &
    Monahan 1992; the autoregression shrunk to spectral radius MAX_PREWHITENING at most), the Bartlett
    kernel with the automatic Newey-West (1994) bandwidth on the residuals (arch), recoloured:
    (I - Phi)^-1 Omega_e (I - Phi)^-T."""
    phi = np.linalg.lstsq(x[:-1], x[1:], rcond=None)[0].T
    radius = float(np.max(np.abs(np.linalg.eigvals(phi))))
    if radius > MAX_PREWHITENING:
        phi = phi * MAX_PREWHITENING / radius
    e = x[1:] - x[:-1] @ phi.T
    inv = np.linalg.inv(np.eye(len(phi)) - phi)
    return inv @ np.asarray(Bartlett(e, center=False).cov.long_run) @ inv.T


def sandwich(bread: np.ndarray, j: np.ndarray) -> np.ndarray:
    """H^-1 J H^-1 with `bread` = H^-1 over the parameters it covers (NaN rows and columns,
    for parameters at a bound or not identified, stay NaN)."""
    ok = np.isfinite(np.diag(bread))
    out = np.full(bread.shape, np.nan)
    b = bread[np.ix_(ok, ok)]
    out[np.ix_(ok, ok)] = b @ j[np.ix_(ok, ok)] @ b
    return out


# ----- the calibrated fit test ----------------------------------------------------------------
@dataclass(frozen=True)
class Traces:
    """tr(U Gamma) and tr((U Gamma)^2) of a model against the saturated model."""

    first: float
    second: float


def saturated_information(data: PatternData, sigma: np.ndarray) -> np.ndarray:
    """H_s of gamma = (mu, vech Sigma) at Sigma, summed over missingness patterns:
    mu block n_g S_o^-1; Sigma block n_g m_p m_q (K_ac K_bd + K_ad K_bc) / 4 for p = (a, b),
    q = (c, d), m = 2 off the diagonal (normal-theory information of each pattern)."""
    w = data.width
    rows, cols = np.triu_indices(w)
    mult = np.where(rows == cols, 1.0, 2.0)
    inverse = np.where(data.obs_outer, np.linalg.inv(data.padded(sigma)), 0.0)
    out = np.zeros((w + rows.size, w + rows.size))
    for n, k in zip(data.counts, inverse):
        out[:w, :w] += n * k
        out[w:, w:] += n * 0.25 * (k[np.ix_(rows, rows)] * k[np.ix_(cols, cols)]
                                   + k[np.ix_(rows, cols)] * k[np.ix_(cols, rows)])
    out[w:, w:] *= np.outer(mult, mult)
    return out


def baseline_projection(width: int) -> Projection:
    """The independence baseline's parameters: free means and variances."""
    mu = np.zeros((2 * width, width))
    mu[np.arange(width), np.arange(width)] = 1.0
    sigma = np.zeros((2 * width, width, width))
    sigma[width + np.arange(width), np.arange(width), np.arange(width)] = 1.0
    return Projection(mu, sigma)


def baseline_information(data: PatternData, sigma: np.ndarray) -> np.ndarray:
    """D_b' H_s D_b of the independence baseline (free means and variances): mean block
    n_g S_o^-1, variance block n_g K_ab^2 / 2 (K = S_o^-1 padded)."""
    w = data.width
    inverse = np.where(data.obs_outer, np.linalg.inv(data.padded(sigma)), 0.0)
    out = np.zeros((2 * w, 2 * w))
    for n, k in zip(data.counts, inverse):
        out[:w, :w] += n * k
        out[w:, w:] += 0.5 * n * k * k
    return out


def fit_test_traces(scores: WindowScores, sigma: np.ndarray, segment: np.ndarray,
                    joined: bool, order: np.ndarray,
                    models: list[tuple[Projection, np.ndarray | None, np.ndarray | None]]
                    ) -> list[Traces]:
    """tr(U Gamma), tr((U Gamma)^2) of each model against the saturated model, with the
    window scores `scores` taken at the moments whose covariance is `sigma`. Each model is
    (D, K, summed): its projection, its information D' H_s D (None: computed here) and its
    cluster sums of scores (None: computed here); with clusters, the scores' sums
    `scores.sums(segment)` may be passed in through `sums` of the first call."""
    data = scores.data
    if joined:
        j_s = kernel_covariance(scores.rows(saturated_projection(data.width)), segment, order)
        h_s = saturated_information(data, sigma)
        gamma = np.linalg.solve(h_s, j_s).T                      # J_s H_s^-1
        out = []
        for model, information, _ in models:
            d = _in_saturated_terms(model, data.width)
            h_d = h_s @ d
            k = d.T @ h_d if information is None else information
            u_gamma = gamma - h_d @ np.linalg.pinv(k, hermitian=True) @ (d.T @ gamma)
            out.append(Traces(float(np.trace(u_gamma)), float(np.sum(u_gamma * u_gamma.T))))
        return out
    mu_sums, sigma_sums = scores.cluster_sums(segment)
    h_s = None
    if data.complete:           # H_s^-1 in closed form
        chol = np.linalg.cholesky(sigma)
        z_mu = mu_sums @ chol
        z_sigma = (chol.T @ sigma_sums @ chol).reshape(len(mu_sums), -1)
        inner = (z_mu @ z_mu.T + 2.0 * z_sigma @ z_sigma.T) / data.n_rows
    else:
        h_s = saturated_information(data, sigma)
        sat = project(mu_sums, sigma_sums, saturated_projection(data.width))
        inner = sat @ np.linalg.solve(h_s, sat.T)
    out = []
    for model, information, summed in models:
        if information is None:
            h_s = saturated_information(data, sigma) if h_s is None else h_s
            d = _in_saturated_terms(model, data.width)
            information = d.T @ h_s @ d
        summed = project(mu_sums, sigma_sums, model) if summed is None else summed
        c = inner - summed @ np.linalg.pinv(information, hermitian=True) @ summed.T
        small = len(c) / (len(c) - 1.0) if len(c) > 1 else 1.0    # G / (G - 1) for J_s
        out.append(Traces(small * float(np.trace(c)), small ** 2 * _square_trace(c)))
    return out


def _square_trace(c: np.ndarray) -> float:
    """tr((U Gamma)^2) from the clusters x clusters matrix C: its off-diagonal part only,
    scaled by G / (G - 1). The plug-in sum of all C_cd^2 is biased upwards by the squared
    diagonal terms (each cluster's score paired with itself), which makes the adjusted test
    far too cautious with a few dozen clusters; the off-diagonal pairs are unbiased, and
    with clusters alike they hold (G - 1) / G of the total."""
    g = len(c)
    if g < 2:
        return float(np.sum(c * c))
    off = float(np.sum(c * c) - np.sum(np.diag(c) ** 2))
    return off * g / (g - 1)


def _in_saturated_terms(model: Projection, width: int) -> np.ndarray:
    """D = d gamma / d theta (M, q) of a projection: the mean rows, then vech Sigma."""
    rows, cols = np.triu_indices(width)
    return np.vstack([model.mu.T, model.sigma[:, rows, cols].T])
