"""The bootstrap of a fit: how stable is each estimate if the diary had been a little different?

`bootstrap(diary, spec, options, result)` draws resampled diaries (models.resampling: whole
days when the days are independent, else the stationary block bootstrap of Politis & Romano
1994), refits the model to each with the fast refit path (`fit(..., standard_errors=False,
start=result)`) and keeps the free parameters of every converged refit. Replicates run in
joblib worker processes (loky) or on a Dask cluster, through models.parallel, in batches
that each carry one copy of the inputs; replicate i draws with its own generator from
`numpy.random.SeedSequence(seed).spawn(replicates)[i]`, so the answer depends on the seed
only, never on the number of workers or the order in which batches finish. Refits that
fail or do not converge are counted and left out.

From the estimates (Efron & Tibshirani 1993, "An Introduction to the Bootstrap"):
- the percentile interval (Efron 1979; E&T ch. 13): the alpha/2 and 1 - alpha/2 quantiles of
  the replicates (linear interpolation between order statistics, numpy's default, as arch);
- the bias-corrected (BC) interval (Efron 1981; E&T ch. 14 with acceleration 0): the
  quantiles Phi(2 z0 + z_alpha/2) and Phi(2 z0 + z_1-alpha/2), z0 = Phi^-1(share of
  replicates below the estimate); undefined when that share is 0 or 1;
- per lagged path (inertia, cross-lagged, lag-2) its stability: the share of replicates with
  the estimate's sign, and whether the percentile interval excludes 0.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import partial

import joblib
import numpy as np
from scipy.stats import norm

from lagwise.models import jsonread as jr
from lagwise.models.diary import Diary
from lagwise.models.errors import EstimationError, FieldError, LagwiseError
from lagwise.models.estimate import fit
from lagwise.models.estimators import FitOptions
from lagwise.models.kinds import PATH_KINDS, Kind
from lagwise.models.parallel import run_tasks
from lagwise.models.progress import Monitor, checkpoint
from lagwise.models.resampling import METHODS, Resampler, resampler
from lagwise.models.results import FitResult, Parameter, _finite
from lagwise.models.spec import ModelSpec

LEVEL = 0.95          # the level of the intervals in `to_json`
MAX_BATCH = 10        # replicates per batch at most (progress and cancelling between batches)
MAX_REPLICATES = 100_000


@dataclass(frozen=True)
class Interval:
    """A bootstrap interval of one free parameter (None where it is undefined)."""

    kind: Kind
    from_: str
    to: str
    lag: int
    estimate: float
    lower: float | None
    upper: float | None

    def to_json(self) -> dict:
        return {"kind": str(self.kind), "from": self.from_, "to": self.to,
                "lower": self.lower, "upper": self.upper}


@dataclass(frozen=True)
class PathStability:
    """One lagged path: the share of replicates with the estimate's sign, its percentile
    interval and whether that interval excludes 0."""

    kind: Kind
    from_: str
    to: str
    lag: int
    estimate: float
    same_sign: float
    lower: float | None
    upper: float | None
    excludes_zero: bool

    def to_json(self) -> dict:
        return {"kind": str(self.kind), "from": self.from_, "to": self.to,
                "same_sign": self.same_sign, "excludes_zero": self.excludes_zero}


@dataclass(frozen=True, eq=False)
class Bootstrap:
    """The bootstrap of one fit: `estimates` (converged replicates x free parameters, in the
    order of `parameters`, the result's `free_parameters`), `failed` replicates left out."""

    parameters: tuple[Parameter, ...]
    replicates: int
    estimates: np.ndarray
    failed: int
    seed: int
    method: str
    block_length: float | None = None

    @property
    def used(self) -> int:
        """The replicates whose estimates are kept."""
        return int(self.estimates.shape[0])

    @property
    def warning(self) -> str | None:
        if not self.failed:
            return None
        return (f"{self.failed} of {self.replicates} bootstrap replicates failed or did not "
                f"converge; they are left out of the intervals.")

    def percentile(self, level: float = LEVEL) -> tuple[Interval, ...]:
        """Percentile interval of every free parameter at `level`."""
        alpha = (1.0 - level) / 2.0
        bounds = np.quantile(self.estimates, [alpha, 1.0 - alpha], axis=0)
        return tuple(_interval(p, lo, hi) for p, lo, hi in zip(self.parameters, *bounds))

    def bias_corrected(self, level: float = LEVEL) -> tuple[Interval, ...]:
        """Bias-corrected (BC) interval of every free parameter at `level`."""
        alpha = (1.0 - level) / 2.0
        out = []
        for j, p in enumerate(self.parameters):
            column = self.estimates[:, j]
            below = float(np.mean(column < p.estimate))
            if not 0.0 < below < 1.0:
                out.append(_interval(p, None, None))
                continue
            z0 = float(norm.ppf(below))
            shares = norm.cdf([2 * z0 + norm.ppf(alpha), 2 * z0 + norm.ppf(1.0 - alpha)])
            out.append(_interval(p, *np.quantile(column, shares)))
        return tuple(out)

    def intervals(self, method: str = "percentile", level: float = LEVEL) -> tuple[Interval, ...]:
        """`percentile` or `bias_corrected` intervals by name."""
        if method not in INTERVALS:
            raise ValueError(f"unknown interval {method!r}; one of {', '.join(INTERVALS)}")
        return getattr(self, method)(level)

    def interval(self, kind: str, from_: str, to: str, method: str = "percentile",
                 level: float = LEVEL) -> Interval:
        """The interval of one free parameter, named as in the parameter table."""
        for found in self.intervals(method, level):
            if (found.kind, found.from_, found.to) == (kind, from_, to):
                return found
        raise KeyError((kind, from_, to))

    def stability(self, level: float = LEVEL) -> tuple[PathStability, ...]:
        """Every free lagged path (inertia, cross-lagged, lag-2; the drift in continuous time)
        in parameter order."""
        out = []
        for j, interval in enumerate(self.percentile(level)):
            if interval.kind not in PATH_KINDS:
                continue
            sign = np.sign(interval.estimate)
            same = float(np.mean(np.sign(self.estimates[:, j]) == sign))
            excludes = (interval.lower is not None and interval.upper is not None
                        and (interval.lower > 0 or interval.upper < 0))
            out.append(PathStability(interval.kind, interval.from_, interval.to, interval.lag,
                                     interval.estimate, same, interval.lower, interval.upper,
                                     bool(excludes)))
        return tuple(out)

    # ----- JSON -----------------------------------------------------------------------
    def to_json(self) -> dict:
        """The bootstrap as JSON: settings, the intervals at LEVEL, the stability of the
        lagged paths, the estimated parameters and every kept replicate's estimates."""
        return _finite({
            "replicates": self.replicates, "failed": self.failed, "seed": self.seed,
            "method": self.method, "block_length": self.block_length, "level": LEVEL,
            "parameters": [{"kind": str(p.kind), "from": p.from_, "to": p.to, "lag": p.lag,
                            "estimate": p.estimate} for p in self.parameters],
            "intervals": {name: [i.to_json() for i in self.intervals(name)] for name in INTERVALS},
            "stability": [s.to_json() for s in self.stability()],
            "estimates": self.estimates.tolist(),
        })

    @classmethod
    def from_json(cls, doc: object, where: str = "") -> "Bootstrap":
        """Rebuild a bootstrap written by `to_json`; FieldError names a malformed field. The
        intervals and stability are recomputed from the estimates and must match the stored
        ones."""
        fields = jr.read_fields(doc, where, (
            jr.field("replicates", jr.integer, low=1, high=MAX_REPLICATES),
            jr.field("failed", jr.integer, low=0, high=MAX_REPLICATES),
            jr.field("seed", jr.integer, low=0),
            jr.field("method", jr.choice, choices=METHODS),
            jr.field("block_length", _block_length),
            jr.field("level", _level),
            jr.field("parameters", jr.tuple_of, item=_parameter),
            jr.field("intervals", jr.obj, closed=False),
            jr.field("stability", jr.array),
            jr.field("estimates", jr.array),
        ), closed=True)
        level, intervals, stability = (fields.pop(k) for k in ("level", "intervals", "stability"))
        if (fields["method"] == "days") != (fields["block_length"] is None):
            raise FieldError(jr.at(where, "block_length"),
                             "should be null for days and a length for stationary blocks")
        used = fields["replicates"] - fields["failed"]
        if used < 1:
            raise FieldError(jr.at(where, "failed"), "should leave at least one replicate")
        fields["estimates"] = jr.matrix(fields["estimates"], jr.at(where, "estimates"),
                                        (used, len(fields["parameters"])))
        if not np.isfinite(fields["estimates"]).all():
            raise FieldError(jr.at(where, "estimates"), "should hold numbers only")
        made = cls(**fields)
        _same_rows(intervals, where, made, level)
        _same_stability(stability, jr.at(where, "stability"), made.stability(level))
        return made


INTERVALS = ("percentile", "bias_corrected")


def _interval(p: Parameter, lower, upper) -> Interval:
    return Interval(Kind(p.kind), p.from_, p.to, p.lag, p.estimate,
                    None if lower is None else float(lower), None if upper is None else float(upper))


# ----- running ----------------------------------------------------------------------------
@dataclass(frozen=True)
class _Work:
    """What every batch needs (pickled once per batch)."""

    diary: Diary
    spec: ModelSpec
    options: FitOptions
    start: FitResult
    plan: Resampler


def bootstrap(diary: Diary, spec: ModelSpec, options: FitOptions, result: FitResult,
              replicates: int = 500, seed: int = 0, jobs: int | None = None,
              monitor: Monitor | None = None, scheduler: str | None = None) -> Bootstrap:
    """Bootstrap `result` (the fit of `spec` to `diary` with `options`): `replicates`
    resampled diaries refitted in `jobs` worker processes (None: every core), or on the
    Dask cluster at `scheduler` (models.parallel). Reports progress to `monitor` as batches
    finish; Cancelled stops the workers and returns nothing. Raises EstimationError when the
    diary cannot be resampled or no replicate converged, ValueError for jobs < 1,
    LagwiseError when the scheduler cannot be reached."""
    if not 1 <= replicates <= MAX_REPLICATES:
        raise EstimationError(f"Ask for 1 to {MAX_REPLICATES} bootstrap replicates, not {replicates}.")
    if result.spec != spec:
        raise ValueError("the result is not a fit of this model")
    checkpoint(monitor, 0.0, "Bootstrap: choosing how to resample")
    diary = diary.select(spec.items)
    plan = resampler(diary)
    work = _Work(diary, spec, options, result, plan)
    seeds = np.random.SeedSequence(seed).spawn(replicates)
    size = batch_size(replicates, joblib.cpu_count() if jobs is None else jobs)
    tasks = [(work, range(a, min(a + size, replicates)), seeds[a:a + size])
             for a in range(0, replicates, size)]
    n_free = len(result.free_parameters)
    estimates, kept = np.full((replicates, n_free), np.nan), np.zeros(replicates, bool)
    checkpoint(monitor, 0.0, f"Bootstrap: 0 of {replicates} replicates")
    done = 0
    outputs = run_tasks(_run_batch, tasks, jobs=jobs, scheduler=scheduler)
    try:
        for batch in outputs:
            for i, values in batch:
                if values is not None:
                    estimates[i], kept[i] = values, True
            done += len(batch)
            checkpoint(monitor, done / replicates, f"Bootstrap: {done} of {replicates} replicates")
    finally:
        outputs.close()          # the batches still queued or running are cancelled
    if not kept.any():
        raise EstimationError("No bootstrap replicate converged: the model cannot be refitted "
                              "to resampled diaries.")
    return Bootstrap(parameters=result.free_parameters, replicates=replicates,
                     estimates=estimates[kept], failed=int((~kept).sum()), seed=int(seed),
                     method=plan.method, block_length=plan.block_length)


def batch_size(replicates: int, workers: int) -> int:
    """Replicates per batch: about eight batches per worker, at most MAX_BATCH."""
    return max(1, min(MAX_BATCH, math.ceil(replicates / (8 * max(workers, 1)))))


def _run_batch(work: _Work, indices, seeds) -> list[tuple[int, np.ndarray | None]]:
    """Refit one batch of replicates (in a worker process): (replicate, estimates or None)."""
    out = []
    for i, seed in zip(indices, seeds):
        resampled = work.plan.draw(work.diary, np.random.default_rng(seed))
        try:
            refit = fit(resampled, work.spec, work.options, standard_errors=False, start=work.start)
        except (LagwiseError, np.linalg.LinAlgError, ValueError, FloatingPointError):
            out.append((i, None))
            continue
        values = np.array([p.estimate for p in refit.free_parameters])
        out.append((i, values if refit.converged and np.isfinite(values).all() else None))
    return out


# ----- reading JSON -----------------------------------------------------------------------
def _block_length(value: object, where: str) -> float | None:
    length = jr.number(value, where, null=True)
    if length is not None and not length >= 1.0:
        raise FieldError(where, "should be 1 or more")
    return length


def _level(value: object, where: str) -> float:
    level = jr.number(value, where)
    if not 0.0 < level < 1.0:
        raise FieldError(where, "should lie between 0 and 1")
    return level


def _parameter(value: object, where: str) -> Parameter:
    fields = jr.read_fields(value, where, (
        jr.field("kind", jr.choice, choices=[str(k) for k in Kind]),
        jr.field("from", jr.text, name="from_"),
        jr.field("to", jr.text),
        jr.field("lag", jr.integer, low=0, high=2),
        jr.field("estimate", jr.number),
    ), closed=True)
    return Parameter(kind=Kind(fields.pop("kind")), se=None, standardized=None, free=True, **fields)


def _bound(value: object, where: str) -> float | None:
    return jr.number(value, where, null=True)


def _same_rows(doc: object, where: str, made: Bootstrap, level: float) -> None:
    """The stored intervals name the parameters in order and agree with the estimates."""
    where = jr.at(where, "intervals")
    stored = jr.read_fields(doc, where, tuple(
        jr.field(name, jr.tuple_of, item=partial(jr.read_fields, fields=(
            jr.field("kind", jr.text), jr.field("from", jr.text, name="from_"),
            jr.field("to", jr.text), jr.field("lower", _bound), jr.field("upper", _bound),
        ), closed=True)) for name in INTERVALS), closed=True)
    for name in INTERVALS:
        _agree(stored[name], made.intervals(name, level), jr.at(where, name), ("lower", "upper"))


def _same_stability(doc: list, where: str, paths: tuple[PathStability, ...]) -> None:
    stored = jr.tuple_of(doc, where, partial(jr.read_fields, fields=(
        jr.field("kind", jr.text), jr.field("from", jr.text, name="from_"), jr.field("to", jr.text),
        jr.field("same_sign", jr.number), jr.field("excludes_zero", jr.boolean),
    ), closed=True))
    _agree(stored, paths, where, ("same_sign", "excludes_zero"))


def _agree(stored: tuple[dict, ...], made: tuple, where: str, numbers: tuple[str, ...]) -> None:
    if len(stored) != len(made):
        raise FieldError(where, f"should hold {len(made)} entries, one per parameter")
    for n, (row, want) in enumerate(zip(stored, made)):
        if (row["kind"], row["from_"], row["to"]) != (str(want.kind), want.from_, want.to):
            raise FieldError(f"{where}[{n}]", "does not name the parameter in that place")
        for key in numbers:
            got, expected = row[key], getattr(want, key)
            if (got is None) != (expected is None) or (
                    got is not None and not math.isclose(float(got), float(expected),
                                                         rel_tol=1e-9, abs_tol=1e-12)):
                raise FieldError(f"{where}[{n}].{key}", "does not match the estimates")
