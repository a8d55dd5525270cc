"""The result object every estimator returns, and its JSON form.

Standard errors come from the observed information of the window pseudo-likelihood; the
windows overlap, so they are approximate (they treat overlapping rows as independent).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from models.spec import FitOptions, ModelSpec

PARAMETER_KINDS: tuple[str, ...] = (
    "loading", "intercept", "unique", "unique_autocorrelation", "inertia", "cross_lagged",
    "lag2", "innovation", "partial_correlation",
)

CAUTION_IDIOGRAPHIC = (
    "These are one person's estimates from a limited number of prompts: they are uncertain, "
    "they describe this diary only, and they are not a diagnosis. Interpret them with clinical "
    "judgement and local practice.")
CAUTION_PSEUDO = (
    "Window fit figures (chi-square, RMSEA, CFI, TLI, SRMR, log-likelihood, AIC, BIC) treat "
    "overlapping lag windows as independent rows: they are pseudo-likelihood figures and only "
    "approximate; they are not the likelihood of the series.")
CAUTION_SE = (
    "Standard errors are approximate: overlapping windows are treated as independent.")


@dataclass(frozen=True)
class Parameter:
    """One row of the parameter table. `from_`/`to` follow the JSON direction rules."""

    kind: str
    from_: str
    to: str
    estimate: float
    se: float | None
    standardized: float | None
    free: bool
    lag: int = 0

    @property
    def z(self) -> float | None:
        return None if not self.se else self.estimate / self.se

    @property
    def p(self) -> float | None:
        from scipy.stats import norm
        z = self.z
        return None if z is None else float(2 * norm.sf(abs(z)))

    @property
    def ci(self) -> tuple[float, float] | None:
        if self.se is None:
            return None
        return (self.estimate - 1.959963984540054 * self.se, self.estimate + 1.959963984540054 * self.se)

    def to_json(self) -> dict:
        return {"kind": self.kind, "from": self.from_, "to": self.to, "estimate": self.estimate,
                "se": self.se, "standardized": self.standardized, "free": self.free, "lag": self.lag}


@dataclass(frozen=True)
class FitIndices:
    """Fit on the window covariance (usual SEM definitions); pseudo-likelihood figures."""

    chi2: float | None
    df: int
    p: float | None
    rmsea: float | None
    rmsea_ci: tuple[float, float] | None
    rmsea_pclose: float | None
    cfi: float | None
    tli: float | None
    srmr: float | None
    loglik: float
    aic: float
    bic: float
    n_free: int
    n_obs: int
    exact: bool = False  # True: loglik/AIC/BIC are the exact likelihood of the series

    def to_json(self) -> dict:
        return {"chi2": self.chi2, "df": self.df, "p": self.p, "rmsea": self.rmsea,
                "rmsea_ci": None if self.rmsea_ci is None else list(self.rmsea_ci),
                "rmsea_pclose": self.rmsea_pclose, "cfi": self.cfi, "tli": self.tli,
                "srmr": self.srmr, "loglik": self.loglik, "aic": self.aic, "bic": self.bic,
                "n_free": self.n_free, "n_obs": self.n_obs, "exact": self.exact}


@dataclass(frozen=True, eq=False)
class FitResult:
    """Estimates, standard errors, standardized solution, fit and flags of one fit.

    Matrices use the spec's item and state order: loadings (p, k), intercepts (p,),
    unique (p,), lagged: list of (k, k) per lag (row = state at t, column = state at t-l),
    innovation (k, k) = Psi, latent_cov (k, k) = stationary Phi_0 (or the implied
    covariance of the newest copy when not stationary), r_squared (p,).
    """

    spec: ModelSpec
    options: FitOptions
    estimator: str
    converged: bool
    message: str
    iterations: int
    seconds: float
    n_windows: int
    n_occasions: int
    parameters: tuple[Parameter, ...]
    fit: FitIndices
    loadings: np.ndarray
    intercepts: np.ndarray
    unique: np.ndarray
    lagged: tuple[np.ndarray, ...]
    innovation: np.ndarray
    latent_cov: np.ndarray
    r_squared: np.ndarray
    spectral_radius: float
    flags: tuple[str, ...] = ()
    cautions: tuple[str, ...] = (CAUTION_IDIOGRAPHIC, CAUTION_PSEUDO, CAUTION_SE)
    extras: dict = field(default_factory=dict)

    @property
    def items(self) -> tuple[str, ...]:
        return self.spec.items

    @property
    def states(self) -> tuple[str, ...]:
        return self.spec.state_names

    @property
    def stationary(self) -> bool:
        return self.spectral_radius < 1.0

    def table(self, kind: str | None = None) -> list[Parameter]:
        return [p for p in self.parameters if kind is None or p.kind == kind]

    def get(self, kind: str, from_: str, to: str) -> Parameter:
        for p in self.parameters:
            if p.kind == kind and p.from_ == from_ and p.to == to:
                return p
        raise KeyError((kind, from_, to))

    def innovation_correlation(self) -> np.ndarray:
        d = np.sqrt(np.clip(np.diag(self.innovation), 1e-300, None))
        return self.innovation / np.outer(d, d)

    def innovation_partial_correlation(self) -> np.ndarray:
        """Standardised negative inverse of Psi (published definition of partial correlation)."""
        k = np.linalg.pinv(self.innovation)
        d = np.sqrt(np.clip(np.diag(k), 1e-300, None))
        pc = -k / np.outer(d, d)
        np.fill_diagonal(pc, 1.0)
        return pc

    def to_json(self) -> dict:
        """The JSON contract of `lagwise fit --json`."""
        fit = self.fit.to_json()
        return {
            "estimator": self.estimator,
            "converged": self.converged,
            "message": self.message,
            "n_windows": self.n_windows,
            "n_occasions": self.n_occasions,
            "seconds": self.seconds,
            "iterations": self.iterations,
            "spectral_radius": self.spectral_radius,
            "flags": list(self.flags),
            "cautions": list(self.cautions),
            "parameters": [p.to_json() for p in self.parameters],
            "fit": fit,
            "r_squared": {it: float(r) for it, r in zip(self.items, self.r_squared)},
            "latent_cov": self.latent_cov.tolist(),
            "extras": self.extras,
        }
