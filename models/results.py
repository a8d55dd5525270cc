"""The result object every estimator returns, and its JSON form.

Standard errors come from the observed information of the window pseudo-likelihood; the
windows overlap, so they are approximate (they treat overlapping rows as independent).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.stats import norm

from lagwise.models.estimators import FitOptions
from lagwise.models.flags import Flag, FlagCode
from lagwise.models.kinds import Kind
from lagwise.models.spec import ModelSpec

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
Z95 = float(norm.ppf(0.975))


@dataclass(frozen=True, eq=False)
class StateScores:
    """Each state's score at every occasion of the diary (exact estimator): filtered
    (given the answers up to the occasion) and smoothed (given the whole segment, Rauch-Tung-
    Striebel), with standard deviations. Arrays (occasions, states); deviations from each
    state's mean 0."""

    filtered: np.ndarray
    filtered_sd: np.ndarray
    smoothed: np.ndarray
    smoothed_sd: np.ndarray

    def band(self, which: str = "smoothed", level: float = 0.95) -> tuple[np.ndarray, np.ndarray]:
        """Pointwise normal interval score -+ z sd at `level` for "filtered" or "smoothed"."""
        z = float(norm.ppf(0.5 + level / 2))
        mean, sd = getattr(self, which), getattr(self, f"{which}_sd")
        return mean - z * sd, mean + z * sd

    def to_json(self) -> dict:
        return {name: getattr(self, name).tolist()
                for name in ("filtered", "filtered_sd", "smoothed", "smoothed_sd")}

    @classmethod
    def from_json(cls, doc: dict) -> "StateScores":
        return cls(**{name: np.array([[np.nan if v is None else v for v in row] for row in doc[name]],
                                     dtype=float).reshape(len(doc[name]), -1)
                      for name in ("filtered", "filtered_sd", "smoothed", "smoothed_sd")})


@dataclass(frozen=True)
class Parameter:
    """One row of the parameter table. `from_`/`to` follow the JSON direction rules."""

    kind: Kind
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
    def key(self) -> tuple[str, str, str]:
        return (self.kind, self.from_, self.to)

    @property
    def p(self) -> float | None:
        z = self.z
        return None if z is None else float(2 * norm.sf(abs(z)))

    @property
    def ci(self) -> tuple[float, float] | None:
        if self.se is None:
            return None
        return (self.estimate - Z95 * self.se, self.estimate + Z95 * self.se)

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
    flags: tuple[Flag, ...] = ()
    cautions: tuple[str, ...] = (CAUTION_IDIOGRAPHIC, CAUTION_PSEUDO, CAUTION_SE)
    notes: tuple[str, ...] = ()
    newton_steps: int = 0
    depth: int | None = None                 # window estimators: the window depth used
    state_scores: StateScores | None = None  # exact estimator
    start_loglik_windows: float | None = None  # exact estimator: its start's window loglik

    @property
    def items(self) -> tuple[str, ...]:
        return self.spec.items

    @property
    def states(self) -> tuple[str, ...]:
        return self.spec.state_names

    @property
    def data_used(self) -> str:
        """What the estimate used, in words: lag windows, or answered prompts (exact)."""
        unit = "answered prompts" if self.fit.exact else "lag windows"
        return f"{self.n_windows} {unit}"

    @property
    def stationary(self) -> bool:
        return self.spectral_radius < 1.0

    def flagged(self, code: FlagCode) -> bool:
        return any(f.code == code for f in self.flags)

    @property
    def extras(self) -> dict:
        """The JSON's "extras" block: how the estimate was reached (from the typed fields)."""
        method = self.options.method
        out: dict = {"notes": list(self.notes), "newton_steps": self.newton_steps}
        if method.uses_windows:
            out.update(depth=self.depth, missing=self.options.missing)
        else:
            out.update(missing="filter", night_gap=self.options.night_gap)
            if self.state_scores is not None:
                out["state_scores"] = self.state_scores.to_json()
            if self.start_loglik_windows is not None:
                out["start_loglik_windows"] = self.start_loglik_windows
        return out

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
        """The JSON contract of `lagwise fit --json` (plus what `from_json` needs to rebuild
        the result). Non-finite numbers become null."""
        fit = self.fit.to_json()
        return _finite({
            "format": "lagwise-result",
            "spec": self.spec.to_json(),
            "options": self.options.to_json(),
            "estimator": self.estimator,
            "converged": self.converged,
            "message": self.message,
            "n_windows": self.n_windows,
            "n_occasions": self.n_occasions,
            "seconds": self.seconds,
            "iterations": self.iterations,
            "spectral_radius": self.spectral_radius,
            "flags": [str(f) for f in self.flags],
            "flag_codes": [str(f.code) for f in self.flags],
            "cautions": list(self.cautions),
            "parameters": [p.to_json() for p in self.parameters],
            "fit": fit,
            "r_squared": {it: float(r) for it, r in zip(self.items, self.r_squared)},
            "latent_cov": self.latent_cov.tolist(),
            "matrices": {
                "loadings": self.loadings.tolist(), "intercepts": self.intercepts.tolist(),
                "unique": self.unique.tolist(), "lagged": [b.tolist() for b in self.lagged],
                "innovation": self.innovation.tolist(), "latent_cov": self.latent_cov.tolist(),
                "r_squared": self.r_squared.tolist(),
            },
            "extras": self.extras,
        })

    @classmethod
    def from_json(cls, doc: dict) -> "FitResult":
        """Rebuild a result written by `to_json`; malformed documents raise ValueError."""
        try:
            spec = ModelSpec.from_json(doc["spec"])
            extras = dict(doc.get("extras", {}))
            m = doc["matrices"]
            f = doc["fit"]

            def arr(x, shape):
                a = np.array([np.nan if v is None else v for v in np.ravel(np.array(x, dtype=object))],
                             dtype=float)
                return a.reshape(shape)

            p, k = len(spec.items), spec.k
            fit = FitIndices(
                chi2=_opt(f["chi2"]), df=int(f["df"]), p=_opt(f["p"]), rmsea=_opt(f["rmsea"]),
                rmsea_ci=None if f.get("rmsea_ci") is None else (float(f["rmsea_ci"][0]), float(f["rmsea_ci"][1])),
                rmsea_pclose=_opt(f.get("rmsea_pclose")), cfi=_opt(f["cfi"]), tli=_opt(f["tli"]),
                srmr=_opt(f["srmr"]), loglik=_nan(f["loglik"]), aic=_nan(f["aic"]), bic=_nan(f["bic"]),
                n_free=int(f["n_free"]), n_obs=int(f["n_obs"]), exact=bool(f.get("exact", False)))
            params = tuple(
                Parameter(kind=Kind(q["kind"]), from_=str(q["from"]), to=str(q["to"]),
                          estimate=float(q["estimate"]), se=_opt(q["se"]), standardized=_opt(q["standardized"]),
                          free=bool(q["free"]), lag=int(q.get("lag", 0)))
                for q in doc["parameters"])
            return cls(
                spec=spec, options=FitOptions.from_json(doc["options"]), estimator=str(doc["estimator"]),
                converged=bool(doc["converged"]), message=str(doc.get("message", "")),
                iterations=int(doc.get("iterations", 0)), seconds=float(doc.get("seconds", 0.0)),
                n_windows=int(doc["n_windows"]), n_occasions=int(doc["n_occasions"]), parameters=params,
                fit=fit, loadings=arr(m["loadings"], (p, k)), intercepts=arr(m["intercepts"], (p,)),
                unique=arr(m["unique"], (p,)),
                lagged=tuple(arr(b, (k, k)) for b in m["lagged"]),
                innovation=arr(m["innovation"], (k, k)), latent_cov=arr(m["latent_cov"], (k, k)),
                r_squared=arr(m["r_squared"], (p,)), spectral_radius=_nan(doc["spectral_radius"]),
                flags=_flags(doc),
                cautions=tuple(str(x) for x in doc.get("cautions", [])) or (CAUTION_IDIOGRAPHIC, CAUTION_PSEUDO, CAUTION_SE),
                notes=tuple(str(x) for x in extras.get("notes", [])),
                newton_steps=int(extras.get("newton_steps", 0)),
                depth=None if extras.get("depth") is None else int(extras["depth"]),
                state_scores=(None if extras.get("state_scores") is None
                              else StateScores.from_json(extras["state_scores"])),
                start_loglik_windows=_opt(extras.get("start_loglik_windows")),
            )
        except (KeyError, TypeError, ValueError, IndexError, AttributeError) as exc:
            raise ValueError(f"the stored result is malformed ({exc.__class__.__name__}: {exc})") from None


def _flags(doc: dict) -> tuple[Flag, ...]:
    texts = [str(x) for x in doc.get("flags", [])]
    codes = [str(x) for x in doc.get("flag_codes", [""] * len(texts))]
    if len(codes) != len(texts):
        raise ValueError("flags and flag_codes differ in length")
    return tuple(Flag(code, text) for code, text in zip(codes, texts))


def _opt(value) -> float | None:
    return None if value is None else float(value)


def _nan(value) -> float:
    """A number that `to_json` may have written as null (non-finite)."""
    return float("nan") if value is None else float(value)


def _finite(obj):
    """Replace NaN/inf by None and numpy scalars by Python numbers, recursively."""
    if isinstance(obj, dict):
        return {k: _finite(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_finite(v) for v in obj]
    if isinstance(obj, (np.floating, float)):
        return float(obj) if np.isfinite(obj) else None
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, np.bool_):
        return bool(obj)
    return obj
