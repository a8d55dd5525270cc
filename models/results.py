"""The result object every estimator returns, and its JSON form.

Each parameter's `se` is the error shown: for the window estimators the robust (sandwich)
error by default, which allows for overlapping windows (models.robust), with the model-based
(inverse information) error beside it as `se_model`; for the exact estimator the inverse of
the observed information of the exact likelihood.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import partial

import numpy as np
from scipy.stats import norm

from lagwise.models import jsonread as jr
from lagwise.models.ctresults import ContinuousTime, continuous_json
from lagwise.models.errors import FieldError, SpecError
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
    "approximate; they are not the likelihood of the series. The calibrated test and the "
    "calibrated RMSEA, CFI and TLI allow for the overlap; the others lean towards good fit.")
CAUTION_SE = (
    "Standard errors are approximate: overlapping windows are treated as independent.")
CAUTION_ROBUST_SE = (
    "Standard errors are robust (sandwich): they allow for overlapping lag windows and for "
    "dependence within a day (or, with days joined, between neighbouring prompts); with a few "
    "hundred prompts they are still approximate. The calibrated fit test allows for the same.")
Z95 = float(norm.ppf(0.975))
SE_METHODS = ("robust", "model")


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
        return {name: getattr(self, name).tolist() for name in _SCORES}

    @classmethod
    def from_json(cls, doc: object, where: str = "") -> "StateScores":
        """Scores from `to_json` output: four tables of the same shape (null: NaN)."""
        fields = jr.read_fields(doc, where, tuple(jr.field(name, _table) for name in _SCORES))
        shapes = {name: value.shape for name, value in fields.items()}
        if len(set(shapes.values())) != 1:
            raise FieldError(where, f"should hold four tables of one shape, not {shapes}")
        return cls(**fields)


_SCORES = ("filtered", "filtered_sd", "smoothed", "smoothed_sd")
MAX_OCCASIONS = 5_000_000


def _table(value: object, where: str) -> np.ndarray:
    """A list of equally long rows of numbers (one row per occasion of the diary)."""
    rows = jr.array(value, where, MAX_OCCASIONS)
    width = len(jr.array(rows[0], f"{where}[0]")) if rows else 0
    out = np.empty((len(rows), width))
    for i, row in enumerate(rows):
        out[i] = jr.matrix(row, f"{where}[{i}]", (width,))
    return out


def _state_scores(value: object, where: str) -> StateScores | None:
    return None if value is None else StateScores.from_json(value, where)


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
    se_model: float | None = None   # model-based (inverse information) error, beside `se`

    @property
    def z(self) -> float | None:
        return None if not self.se else self.estimate / self.se

    @property
    def key(self) -> tuple[str, str, str]:
        return (self.kind, self.from_, self.to)

    @property
    def p(self) -> float | None:
        z = self.z
        # two-sided normal p = 2 (1 - Phi(|z|)) = erfc(|z| / sqrt 2) (common practice)
        return None if z is None else math.erfc(abs(z) / math.sqrt(2.0))

    @property
    def ci(self) -> tuple[float, float] | None:
        if self.se is None:
            return None
        return (self.estimate - Z95 * self.se, self.estimate + Z95 * self.se)

    def to_json(self) -> dict:
        return {"kind": self.kind, "from": self.from_, "to": self.to, "estimate": self.estimate,
                "se": self.se, "standardized": self.standardized, "free": self.free, "lag": self.lag,
                "se_model": self.se_model}

    @classmethod
    def from_json(cls, doc: object, where: str = "") -> "Parameter":
        """A row from `to_json` output; FieldError names a malformed field."""
        return cls(**jr.read_fields(doc, where, (
            jr.field("kind", _kind),
            jr.field("from", jr.text, name="from_"),
            jr.field("to", jr.text),
            jr.field("estimate", jr.number),
            jr.field("se", jr.number, null=True),
            jr.field("standardized", jr.number, null=True),
            jr.field("free", jr.boolean),
            jr.field("lag", jr.integer, 0, low=0, high=2),
            jr.field("se_model", jr.number, None, null=True),
        )))


@dataclass(frozen=True)
class ScaledFit:
    """The window fit test calibrated for overlapping windows (models.robust): chi2 on df is
    the mean-and-variance adjusted statistic (the calibrated test; df need not be whole),
    with RMSEA, CFI and TLI from the adjusted statistics of the model and the baseline;
    scaled_chi2 = T / scaling on the model's df is the scaled statistic (for reference: it
    rejects too often when the windows' eigenvalues are uneven)."""

    chi2: float
    df: float
    p: float
    scaling: float
    scaled_chi2: float
    scaled_p: float
    rmsea: float | None
    cfi: float | None
    tli: float | None

    def to_json(self) -> dict:
        return {f: getattr(self, f) for f in _SCALED_FIELDS}

    @classmethod
    def from_json(cls, doc: object, where: str = "") -> "ScaledFit":
        return cls(**jr.read_fields(doc, where, (
            jr.field("chi2", jr.number), jr.field("df", jr.number), jr.field("p", jr.number),
            jr.field("scaling", jr.number), jr.field("scaled_chi2", jr.number),
            jr.field("scaled_p", jr.number), jr.field("rmsea", jr.number, null=True),
            jr.field("cfi", jr.number, null=True), jr.field("tli", jr.number, null=True))))


_SCALED_FIELDS = ("chi2", "df", "p", "scaling", "scaled_chi2", "scaled_p", "rmsea", "cfi", "tli")


def _scaled(value: object, where: str) -> ScaledFit | None:
    return None if value is None else ScaledFit.from_json(value, where)


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
    scaled: ScaledFit | None = None   # the calibrated test (window estimators)

    def to_json(self) -> dict:
        return {"chi2": self.chi2, "df": self.df, "p": self.p, "rmsea": self.rmsea,
                "rmsea_ci": None if self.rmsea_ci is None else list(self.rmsea_ci),
                "rmsea_pclose": self.rmsea_pclose, "cfi": self.cfi, "tli": self.tli,
                "srmr": self.srmr, "loglik": self.loglik, "aic": self.aic, "bic": self.bic,
                "n_free": self.n_free, "n_obs": self.n_obs, "exact": self.exact,
                "scaled": None if self.scaled is None else self.scaled.to_json()}

    @classmethod
    def from_json(cls, doc: object, where: str = "") -> "FitIndices":
        """Fit figures from `to_json` output; FieldError names a malformed field."""
        return cls(**jr.read_fields(doc, where, (
            jr.field("chi2", jr.number, null=True),
            jr.field("df", jr.integer),
            jr.field("p", jr.number, null=True),
            jr.field("rmsea", jr.number, null=True),
            jr.field("rmsea_ci", _interval, None),
            jr.field("rmsea_pclose", jr.number, None, null=True),
            jr.field("cfi", jr.number, null=True),
            jr.field("tli", jr.number, null=True),
            jr.field("srmr", jr.number, null=True),
            jr.field("loglik", jr.number_or_nan),
            jr.field("aic", jr.number_or_nan),
            jr.field("bic", jr.number_or_nan),
            jr.field("n_free", jr.integer),
            jr.field("n_obs", jr.integer),
            jr.field("exact", jr.boolean, False),
            jr.field("scaled", _scaled, None),
        )))


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
    covariance: np.ndarray | None = None     # of the free parameters (order of free_parameters)
    se_method: str = "model"                 # what `se` is: "robust" (sandwich) or "model"
    optimiser_message: str = ""              # the optimiser's own words; `message` says it plainly
    continuous: ContinuousTime | None = None  # continuous-time estimator: its time settings

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
            if self.continuous is not None:
                out["continuous"] = self.continuous.to_json()
        return out

    @property
    def free_parameters(self) -> tuple[Parameter, ...]:
        """The free parameters, in the order of `covariance`'s rows."""
        return tuple(p for p in self.parameters if p.free)

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
            "optimiser_message": self.optimiser_message,
            "n_windows": self.n_windows,
            "n_occasions": self.n_occasions,
            "seconds": self.seconds,
            "iterations": self.iterations,
            "spectral_radius": self.spectral_radius,
            "flags": [str(f) for f in self.flags],
            "flag_codes": [str(f.code) for f in self.flags],
            "cautions": list(self.cautions),
            "parameters": [p.to_json() for p in self.parameters],
            "se_method": self.se_method,
            "covariance": None if self.covariance is None else self.covariance.tolist(),
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
            **({} if self.continuous is None else continuous_json(self)),
        })

    @classmethod
    def from_json(cls, doc: object, where: str = "") -> "FitResult":
        """Rebuild a result written by `to_json`. A malformed document raises FieldError (a
        ValueError) naming the field (`where`: the document's own path, e.g. "results")."""
        fields = jr.read_fields(doc, where, (
            jr.field("spec", _estimated_spec),
            jr.field("options", FitOptions.from_json),
            jr.field("estimator", jr.text),
            jr.field("converged", jr.boolean),
            jr.field("message", jr.text, "", limit=jr.MAX_TEXT),
            jr.field("optimiser_message", jr.text, "", limit=jr.MAX_TEXT),
            jr.field("iterations", jr.integer, 0, low=0),
            jr.field("seconds", jr.number, 0.0),
            jr.field("n_windows", jr.integer, low=0),
            jr.field("n_occasions", jr.integer, low=0),
            jr.field("spectral_radius", jr.number_or_nan),
            jr.field("flags", jr.tuple_of, [], item=_long_text),
            jr.field("flag_codes", _flag_codes, None),
            jr.field("cautions", jr.tuple_of, [], item=_long_text),
            jr.field("parameters", jr.tuple_of, item=Parameter.from_json),
            jr.field("se_method", jr.choice, "model", choices=SE_METHODS),
            jr.field("covariance", jr.array, None, null=True),   # read below: one row per free parameter
            jr.field("fit", FitIndices.from_json),
            jr.field("matrices", jr.obj, closed=False),  # read below: shapes follow the spec
            jr.field("extras", jr.obj, {}, closed=False),
        ))
        fields["cautions"] = fields["cautions"] or (CAUTION_IDIOGRAPHIC, CAUTION_PSEUDO, CAUTION_SE)
        fields["flags"] = _flags(fields["flags"], fields.pop("flag_codes"), jr.at(where, "flag_codes"))
        fields.update(jr.read_fields(fields.pop("extras"), jr.at(where, "extras"), (
            jr.field("notes", jr.tuple_of, [], item=_long_text),
            jr.field("newton_steps", jr.integer, 0, low=0),
            jr.field("depth", jr.integer, None, low=0, high=50, null=True),
            jr.field("state_scores", _state_scores, None),
            jr.field("start_loglik_windows", jr.number, None, null=True),
            jr.field("continuous", ContinuousTime.from_json, None),
        )))
        n_free = sum(q.free for q in fields["parameters"])
        if fields["covariance"] is not None:
            fields["covariance"] = jr.matrix(fields["covariance"], jr.at(where, "covariance"),
                                             (n_free, n_free))
        p, k = len(fields["spec"].items), fields["spec"].k
        square = partial(jr.matrix, shape=(k, k))
        fields.update(jr.read_fields(fields.pop("matrices"), jr.at(where, "matrices"), (
            jr.field("loadings", jr.matrix, shape=(p, k)),
            jr.field("intercepts", jr.matrix, shape=(p,)),
            jr.field("unique", jr.matrix, shape=(p,)),
            jr.field("lagged", jr.tuple_of, item=square, limit=2),
            jr.field("innovation", square),
            jr.field("latent_cov", square),
            jr.field("r_squared", jr.matrix, shape=(p,)),
        )))
        return cls(**fields)


_long_text = partial(jr.text, limit=jr.MAX_TEXT)


def _kind(value: object, where: str) -> Kind:
    return Kind(jr.choice(value, where, [str(k) for k in Kind]))


def _flag_code(value: object, where: str) -> FlagCode:
    return FlagCode(jr.choice(value, where, [str(c) for c in FlagCode]))


def _flag_codes(value: object, where: str) -> tuple[FlagCode, ...] | None:
    """The flags' codes; None for a file written before flags had codes."""
    return None if value is None else jr.tuple_of(value, where, _flag_code)


def _flags(texts: tuple[str, ...], codes: tuple[FlagCode, ...] | None, where: str) -> tuple[Flag, ...]:
    """Flags from their texts and codes (files written before flags had codes: none)."""
    codes = (FlagCode.UNKNOWN,) * len(texts) if codes is None else codes
    if len(codes) != len(texts):
        raise FieldError(where, f"should hold one code per flag ({len(texts)})")
    return tuple(Flag(code, text) for code, text in zip(codes, texts))


def _estimated_spec(value: object, where: str) -> ModelSpec:
    """The model a result was estimated with (so one that passes ModelSpec.validate)."""
    spec = ModelSpec.from_json(value, where, validate=False)
    try:
        spec.validate()
    except SpecError as error:
        raise FieldError(where, f"is not a model that can be estimated ({error})") from None
    return spec


def _interval(value: object, where: str) -> tuple[float, float] | None:
    return None if value is None else tuple(float(v) for v in jr.matrix(value, where, (2,)))


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
