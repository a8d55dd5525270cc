"""Is lag 1 enough? Lag-2 misfit tests on depth-2 windows.

1. Likelihood-ratio test: the chosen lag-1 model against the same model with every lag-2
   path free, both fitted on the same depth-2 windows: LR = 2 (loglik_2 - loglik_1) on
   df = number of added paths.
2. Score tests (modification indices; Sorbom 1989; Saris, Satorra & Sorbom 1987) at the
   lag-1 estimates for each fixed lag-2 path and for a lag-1 autocorrelation of each item's
   unique part (the latter on depth-1 windows: in depth-2 windows each pair of consecutive
   occasions enters twice and its score test over-rejects): with g the gradient and I the
   expected information of the extended model at the restricted estimate, for a fixed parameter j and the free set f
       MI_j = g_j^2 / c_j,  EPC_j = g_j / c_j,  c_j = I_jj - I_jf I_ff^-1 I_fj,
   referred to chi-square(1); Holm (1979) adjusted p-values beside the raw ones.
All statistics use the window pseudo-likelihood (overlapping windows): they are approximate.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from functools import partial

import numpy as np
from scipy.stats import chi2 as chi2_dist

from lagwise.models import jsonread as jr
from lagwise.models.blas import one_blas_thread
from lagwise.models.diary import Diary
from lagwise.models.errors import SpecError
from lagwise.models.estimators import FitOptions
from lagwise.models.kinds import Kind
from lagwise.models.numbers import p_phrase
from lagwise.models.objective import WindowObjective
from lagwise.models.optimise import interior
from lagwise.models.progress import Monitor, checkpoint, scaled
from lagwise.models.results import FitResult, _finite
from lagwise.models.solution import solve
from lagwise.models.spec import ModelSpec, full_mask
from lagwise.models.windows import lag_windows

ALPHA = 0.05
CAUTION_LAG2 = (
    "The lag-2 tests use the window pseudo-likelihood (overlapping windows treated as "
    "independent), so their p-values are approximate. Each path is a separate test: with many "
    "paths some small p-values arise by chance, which is why Holm-adjusted p-values are shown.")


@dataclass(frozen=True)
class PathTest:
    """Score test of one fixed parameter of the lag-1 model."""

    kind: Kind       # Kind.LAG2 or Kind.UNIQUE_AUTOCORRELATION
    from_: str
    to: str
    score: float
    p: float
    p_holm: float
    epc: float       # expected parameter change
    std_epc: float   # standardized expected change

    def to_json(self) -> dict:
        return {"kind": self.kind, "from": self.from_, "to": self.to, "score": self.score,
                "p": self.p, "p_holm": self.p_holm, "epc": self.epc, "std_epc": self.std_epc}

    @classmethod
    def from_json(cls, doc: object, where: str = "") -> "PathTest":
        """A test written by `to_json`; FieldError names a malformed field."""
        fields = jr.read_fields(doc, where, (
            jr.field("kind", jr.choice, choices=(str(Kind.LAG2), str(Kind.UNIQUE_AUTOCORRELATION))),
            jr.field("from", jr.text, name="from_"), jr.field("to", jr.text),
            *(jr.field(key, jr.number) for key in ("score", "p", "p_holm", "epc", "std_epc"))),
            closed=True)
        return cls(**{**fields, "kind": Kind(fields["kind"])})


@dataclass(frozen=True, eq=False)
class Lag2Check:
    lr_chi2: float
    lr_df: int
    lr_p: float
    paths: tuple[PathTest, ...]
    restricted: FitResult
    extended: FitResult
    verdict: str
    indicated: tuple[PathTest, ...]
    cautions: tuple[str, ...] = (CAUTION_LAG2,)

    def to_json(self) -> dict:
        return {"lr": {"chi2": self.lr_chi2, "df": self.lr_df, "p": self.lr_p},
                "paths": [p.to_json() for p in self.paths], "verdict": self.verdict,
                "indicated": [p.to_json() for p in self.indicated], "cautions": list(self.cautions)}

    def to_stored_json(self) -> dict:
        """`to_json` with the two fitted models (as a project keeps the check)."""
        return _finite({**self.to_json(), "restricted": self.restricted.to_json(),
                        "extended": self.extended.to_json()})

    @classmethod
    def from_json(cls, doc: object, where: str = "") -> "Lag2Check":
        """A check written by `to_stored_json`; FieldError names a malformed field."""
        fields = jr.read_fields(doc, where, (
            jr.field("lr", jr.obj, required=("chi2", "df", "p")),
            jr.field("paths", jr.tuple_of, item=PathTest.from_json),
            jr.field("verdict", jr.text, limit=jr.MAX_TEXT),
            jr.field("indicated", jr.tuple_of, item=PathTest.from_json),
            jr.field("cautions", jr.tuple_of, item=partial(jr.text, limit=jr.MAX_TEXT)),
            jr.field("restricted", FitResult.from_json),
            jr.field("extended", FitResult.from_json)), closed=True)
        lr, at = fields.pop("lr"), jr.at(where, "lr")
        return cls(lr_chi2=jr.number(lr["chi2"], jr.at(at, "chi2")),
                   lr_df=jr.integer(lr["df"], jr.at(at, "df"), low=0),
                   lr_p=jr.number(lr["p"], jr.at(at, "p")), **fields)


def lag1_version(spec: ModelSpec) -> ModelSpec:
    """The lag-1 model of `spec` (its lag-1 paths, no lag-2 paths)."""
    return replace(spec, lags=1, paths=(tuple(tuple(r) for r in spec.path_mask(1)),))


def lag2_version(spec: ModelSpec) -> ModelSpec:
    """The lag-1 model with every lag-2 path free."""
    base = lag1_version(spec)
    return replace(base, lags=2, paths=(base.paths[0], full_mask(spec.k)))


def holm(pvalues: np.ndarray) -> np.ndarray:
    """Holm (1979) step-down adjusted p-values."""
    m = pvalues.size
    order = np.argsort(pvalues)
    adjusted = np.empty(m)
    running = 0.0
    for rank, idx in enumerate(order):
        running = max(running, min(1.0, (m - rank) * pvalues[idx]))
        adjusted[idx] = running
    return adjusted


def lag2_check(diary: Diary, spec: ModelSpec, options: FitOptions = FitOptions(),
               monitor: Monitor | None = None) -> Lag2Check:
    """Fit the lag-1 and lag-2 models on depth-2 windows and test each lag-2 path. The
    tests need windows: with an estimator that uses none, the stationary windows are used."""
    if spec.lags == 0:
        raise SpecError("The lag-2 check needs a model with lagged paths (lag order 1).")
    window_options = options if options.method.uses_windows else options.for_estimator("stationary")
    opts = replace(window_options, depth=max(2, window_options.depth or 2))
    restricted_spec, extended_spec = lag1_version(spec), lag2_version(spec)
    notes = restricted_spec.validate(diary.items)
    with one_blas_thread():
        windows = lag_windows(diary.select(restricted_spec.items), opts.depth)
        checkpoint(monitor, 0.0, "Fitting the lag-1 model on depth-2 windows")
        obj_r = WindowObjective(windows, restricted_spec, opts)
        restricted = solve(obj_r, notes, scaled(monitor, 0.0, 0.4))
        checkpoint(monitor, 0.4, "Fitting the model with lag-2 paths")
        extended = solve(WindowObjective(windows, extended_spec, opts), notes, scaled(monitor, 0.4, 0.75))
        checkpoint(monitor, 0.75, "Score tests")
        lag2_tests = _score_tests(obj_r, restricted, windows, opts, Kind.LAG2)
        # a lag-1 feature is tested on lag-1 windows: in depth-2 windows every lag-1 pair of
        # occasions enters twice (blocks (0,1) and (1,2)) and its score test over-rejects
        checkpoint(monitor, 0.85, "Score tests of the unique autocorrelations (lag-1 windows)")
        windows1 = lag_windows(diary.select(restricted_spec.items), 1)
        opts1 = replace(opts, depth=1)
        obj_r1 = WindowObjective(windows1, restricted_spec, opts1)
        restricted1 = solve(obj_r1, notes, scaled(monitor, 0.85, 0.95))
        raw = lag2_tests + _score_tests(obj_r1, restricted1, windows1, opts1,
                                        Kind.UNIQUE_AUTOCORRELATION)
    p_holm = holm(np.array([t.p for t in raw])) if raw else np.array([])
    tests = tuple(replace(t, p_holm=float(ph)) for t, ph in zip(raw, p_holm))
    lr = max(2.0 * (extended.fit.loglik - restricted.fit.loglik), 0.0)
    df = extended.fit.n_free - restricted.fit.n_free
    lr_p = float(chi2_dist.sf(lr, df))
    indicated = tuple(sorted((t for t in tests if t.p_holm < ALPHA), key=lambda t: -t.score))
    verdict = _verdict(lr_p, indicated)
    checkpoint(monitor, 1.0, "Done")
    return Lag2Check(lr_chi2=float(lr), lr_df=int(df), lr_p=lr_p, paths=tests, restricted=restricted,
                     extended=extended, verdict=verdict, indicated=indicated)


def adopt(spec: ModelSpec, kind: str, from_: str, to: str) -> ModelSpec:
    """`spec` with one tested path added: a lag-2 path makes the model lag 2 (keeping any
    lag-2 paths it had) and frees state `from_` at t-2 -> state `to` at t; a unique
    autocorrelation adds item `to` to `spec.unique_autocorrelation`."""
    if kind == Kind.UNIQUE_AUTOCORRELATION:
        if to in spec.unique_autocorrelation:
            return spec
        return replace(spec, unique_autocorrelation=spec.unique_autocorrelation + (to,))
    names = spec.state_names
    wider = spec if spec.lags == 2 else spec.with_lags(2)
    mask = wider.path_mask(2).copy()
    mask[names.index(to), names.index(from_)] = True
    return wider.with_paths(2, mask)


def in_model(spec: ModelSpec, test: PathTest) -> bool:
    """True when the tested path is already free in `spec`."""
    if test.kind == Kind.UNIQUE_AUTOCORRELATION:
        return test.to in spec.unique_autocorrelation
    names = spec.state_names
    if spec.lags < 2 or test.from_ not in names or test.to not in names:
        return False
    return bool(spec.path_mask(2)[names.index(test.to), names.index(test.from_)])


def _verdict(lr_p: float, indicated: tuple[PathTest, ...]) -> str:
    if not indicated and lr_p >= ALPHA:
        return ("No sign that lag 2 is needed: the lag-1 model is not significantly worse than the "
                f"model with lag-2 paths ({p_phrase(lr_p)}), and no single path stands out after the "
                "Holm adjustment.")
    if not indicated:
        return (f"Lag 2 may be needed overall (likelihood-ratio {p_phrase(lr_p)}), but no single path "
                "stands out after the Holm adjustment.")
    top = indicated[0]
    where = (f"{top.from_} at t-2 to {top.to}" if top.kind == Kind.LAG2
             else f"an autocorrelated unique part of '{top.to}'")
    return (f"Lag 2 indicated, mainly for {where} (score {top.score:.1f}, Holm "
            f"{p_phrase(top.p_holm)}; likelihood-ratio {p_phrase(lr_p)}).")


def _score_tests(obj_r: WindowObjective, restricted: FitResult, windows, options: FitOptions,
                 kind: Kind) -> tuple[PathTest, ...]:
    """Score tests of every fixed parameter of `kind` (lag-2 paths or unique
    autocorrelations) at the restricted estimate (p_holm left at p: adjusted by the caller
    over all tests)."""
    spec = obj_r.spec
    if kind == Kind.LAG2:
        full_spec = lag2_version(spec)
    else:
        extra_items = tuple(it for it in spec.items if it not in spec.unique_autocorrelation)
        full_spec = replace(spec, unique_autocorrelation=spec.unique_autocorrelation + extra_items)
    obj_f = WindowObjective(windows, full_spec, options)
    theta = obj_f.layout.theta_from({p.key: p.estimate for p in restricted.parameters}, default=0.0)
    free_before = {e.key for e in obj_r.layout.free_entries}
    tested = np.array([e.key not in free_before for e in obj_f.layout.free_entries])
    _, grad = obj_f.loglik_and_gradient(theta)
    info = obj_f.expected_information(theta)
    keep = ~tested & interior(obj_f, theta)
    f_idx, t_idx = np.flatnonzero(keep), np.flatnonzero(tested)
    i_ff_inv = np.linalg.pinv(info[np.ix_(f_idx, f_idx)])
    sd_eta = np.sqrt(np.diag(restricted.latent_cov))
    states = spec.state_names
    rows = []
    for j in t_idx:
        c = info[j, j] - info[j, f_idx] @ i_ff_inv @ info[f_idx, j]
        e = obj_f.layout.free_entries[j]
        score, epc = (0.0, 0.0) if c <= 0 else (grad[j] ** 2 / c, grad[j] / c)
        std = epc * sd_eta[states.index(e.from_)] / sd_eta[states.index(e.to)] if e.kind == Kind.LAG2 else epc
        p = float(chi2_dist.sf(score, 1))
        rows.append(PathTest(kind=e.kind, from_=e.from_, to=e.to, score=float(score), p=p, p_holm=p,
                             epc=float(epc), std_epc=float(std)))
    return tuple(rows)
