"""The items before estimation: checks that name the item behind a numerical failure, and an
exact internal rescaling of items whose scales are extreme or far apart.

Checks (a DataError naming the item or state): the single-item checks of models.itemcheck (no
variation, or only in its last digits; values too large or too small for floating-point
moments), a state whose items keep growing (explosive dynamics), and items that are (nearly)
collinear.
Rescaling: when item standard deviations differ by more than SPREAD or leave SAFE, every
item is divided by the power of two nearest its standard deviation, and the estimates are
carried back exactly (a power of two multiplies without rounding). The model is invariant
under such a change of units (common practice): with
y_i = c_i y'_i and, under marker identification, states in their marker item's units
(eta_j = s_j eta'_j), loadings scale by c_i / s_j, intercepts by c_i, unique variances by
c_i^2, lagged paths by s_to / s_from, innovation (co)variances by s_a s_b; correlations,
standardized values and fit tests do not change, and the log-likelihood moves by
-sum log c_i over the answers it counts. `numerical_failures` turns what still fails inside
estimation into one EstimationError naming the likely cause.
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, replace

import numpy as np

from lagwise.models.errors import DataError, EstimationError
from lagwise.models.implied import NotAdmissible
from lagwise.models.itemcheck import answered_moments, item_problem, item_scales, problem_columns
from lagwise.models.kinds import PATH_KINDS, Kind
from lagwise.models.numbers import fmt
from lagwise.models.results import FitResult, Parameter, StateScores
from lagwise.models.spec import ModelSpec

SAFE = (1e-3, 1e4)       # item SDs inside and ...
SPREAD = 1e3             # ... within this ratio of each other: estimated as they are
COLLINEAR = 0.9999       # |correlation| of two items at least this: (nearly) collinear
GROWTH = 100.0           # prompt-to-prompt changes this many times larger late than early
DEPENDENT = 1e-8         # smallest eigenvalue share of the item correlation matrix: dependent


def check_items(values: np.ndarray, spec: ModelSpec) -> np.ndarray:
    """The standard deviations of the model's items (the columns of `values`); DataError for
    an item with a problem (`item_problem`), for a state whose items keep growing, or for
    (nearly) collinear items."""
    bad = np.flatnonzero(problem_columns(values))
    if bad.size:
        raise DataError(item_problem(spec.items[bad[0]], values[:, bad[0]]))
    sd = item_scales(values)[1]
    with np.errstate(all="ignore"):
        growing = _growing_states(values / sd, spec)
        if growing:
            raise DataError(f"state {', '.join(growing)} looks non-stationary: its items keep "
                            "growing over the diary (explosive dynamics); remove the trend or "
                            "model a shorter stretch")
        check_collinear(values / sd, spec.items)
    return sd


def check_collinear(values: np.ndarray, items: tuple[str, ...]) -> None:
    """DataError for two items with |correlation| >= COLLINEAR (over prompts where both were
    answered) or a set of items whose correlation matrix is (nearly) singular."""
    p = len(items)
    seen = ~np.isnan(values)
    r = pairwise_correlations(values)
    close = np.argwhere(np.tril(np.abs(r) >= COLLINEAR, -1))
    if close.size:
        a, b = close[0]
        raise DataError(f"items {items[b]} and {items[a]} are (nearly) collinear "
                        f"(correlation {fmt(r[a, b])}): drop one, or combine them into one score")
    complete = values[seen.all(axis=1)]
    if p < 3 or complete.shape[0] <= p:
        return
    corr = np.corrcoef(complete, rowvar=False)
    if not np.all(np.isfinite(corr)):
        return
    w, v = np.linalg.eigh(corr)
    if w[0] < DEPENDENT * w[-1]:
        named = [items[i] for i in np.flatnonzero(np.abs(v[:, 0]) > 0.1)]
        raise DataError(f"items {', '.join(named[:-1])} and {named[-1]} are (nearly) linearly "
                        "dependent (one is almost a weighted sum of the others): drop one of them")


def pairwise_correlations(values: np.ndarray) -> np.ndarray:
    """Correlations of the columns, each pair over the rows where both are answered (NaN for
    pairs with fewer than 3 such rows or no variation there)."""
    seen = ~np.isnan(values)
    m = seen.astype(float)
    x = np.where(seen, values - answered_moments(values)[0], 0.0)   # centred: no cancellation
    n = m.T @ m
    with np.errstate(all="ignore"):
        mean = (x.T @ m) / n                       # [a, b]: mean of a where b is answered too
        cov = (x.T @ x) / n - mean * mean.T
        var = (x.T ** 2 @ m) / n - mean ** 2       # [a, b]: variance of a where b is answered
        r = cov / np.sqrt(var * var.T)
    return np.where((n >= 3) & (var > 0) & (var.T > 0), r, np.nan)


@dataclass(frozen=True)
class Rescaling:
    """Items divided by `factors` (powers of two) for estimation; `state_factors` the units
    the states then have (their marker item's factor under marker identification, else 1)."""

    spec: ModelSpec
    factors: np.ndarray
    state_factors: np.ndarray

    @classmethod
    def of(cls, sd: np.ndarray, spec: ModelSpec) -> "Rescaling":
        """Powers of two nearest the SDs when they are extreme or far apart; else ones."""
        needed = sd.max() > SPREAD * sd.min() or sd.min() < SAFE[0] or sd.max() > SAFE[1]
        factors = 2.0 ** np.round(np.log2(sd)) if needed else np.ones(sd.size)
        marker = spec.identification == "marker"
        states = np.array([factors[spec.items.index(s.marker_item)] if marker else 1.0
                           for s in spec.states])
        return cls(spec, factors, states)

    @property
    def identity(self) -> bool:
        return bool(np.all(self.factors == 1.0))

    def _factor(self, kind: str, from_: str, to: str) -> float:
        """Original value / internal value of one parameter (see the module docstring); 1 for
        names outside this model (a start may name more)."""
        items = dict(zip(self.spec.items, self.factors))
        states = dict(zip(self.spec.state_names, self.state_factors))

        def item(name: str) -> float:
            return float(items.get(name, 1.0))

        def unit(name: str) -> float:   # a state, or a window copy of one ("mood@t-1")
            return float(states.get(name.split("@")[0], 1.0))

        if kind == Kind.LOADING:
            return item(to) / unit(from_)
        if kind == Kind.INTERCEPT:
            return item(to)
        if kind == Kind.UNIQUE:
            return item(to) ** 2
        if kind in PATH_KINDS:
            return unit(to) / unit(from_)
        if kind in (Kind.INNOVATION, Kind.FIRST_COPY, Kind.DIFFUSION):
            return unit(from_) * unit(to)
        if kind == Kind.LATENT_INTERCEPT:
            return unit(to)
        return 1.0   # correlations

    def internal_start(self, start, free_first_copies: bool):
        """A start given in original units (a result, named estimates or a free-parameter
        vector; models.solution.Start) in internal units."""
        if start is None:
            return None
        if isinstance(start, np.ndarray):
            free = [e for e in self.spec.parameters(free_first_copies) if e.free]
            return start / np.array([self._factor(*e.key) for e in free])
        if isinstance(start, FitResult):   # kept a result: its errors scale the optimiser
            return replace(start, parameters=tuple(self._internal(p) for p in start.parameters))
        return {key: value / self._factor(*key) for key, value in start.items()}

    def _internal(self, p: Parameter) -> Parameter:
        f = self._factor(*p.key)
        return replace(p, estimate=p.estimate / f, se=None if p.se is None else p.se / f)

    def restore(self, result: FitResult, answers: np.ndarray) -> FitResult:
        """`result` of the rescaled items in the original units; `answers` per item: how
        often the likelihood counted an answer of it (for the log-likelihood's shift)."""
        c, s = self.factors, self.state_factors
        params = []
        free = []
        for p in result.parameters:
            f = self._factor(*p.key)
            if p.free:
                free.append(f)
            params.append(replace(p, estimate=p.estimate * f,
                                  se=None if p.se is None else p.se * f,
                                  se_model=None if p.se_model is None else p.se_model * f))
        shift = -float(np.sum(answers * np.log(c)))
        fit = replace(result.fit, loglik=result.fit.loglik + shift,
                      aic=result.fit.aic - 2 * shift, bic=result.fit.bic - 2 * shift)
        f = np.array(free)
        scores = result.state_scores
        if scores is not None:
            scores = StateScores(filtered=scores.filtered * s, filtered_sd=scores.filtered_sd * s,
                                 smoothed=scores.smoothed * s, smoothed_sd=scores.smoothed_sd * s)
        return replace(
            result, parameters=tuple(params), fit=fit,
            loadings=result.loadings * c[:, None] / s[None, :], intercepts=result.intercepts * c,
            unique=result.unique * c ** 2,
            lagged=tuple(b * s[:, None] / s[None, :] for b in result.lagged),
            innovation=result.innovation * np.outer(s, s), latent_cov=result.latent_cov * np.outer(s, s),
            covariance=None if result.covariance is None else result.covariance * np.outer(f, f),
            state_scores=scores, start_loglik_windows=None)


@contextmanager
def numerical_failures(values: np.ndarray, spec: ModelSpec) -> Iterator[None]:
    """Floating-point trouble inside estimation as one EstimationError naming its likely
    cause; numpy's floating-point warnings are silenced (the failures they foretell are
    caught here, and non-finite results are judged by the caller)."""
    with np.errstate(all="ignore"):
        try:
            yield
        except (np.linalg.LinAlgError, NotAdmissible, FloatingPointError, OverflowError,
                ZeroDivisionError) as error:
            raise EstimationError(explain(values, spec, str(error))) from None
        except ValueError as error:
            if "finite" not in str(error) and "NaN" not in str(error):
                raise
            raise EstimationError(explain(values, spec, str(error))) from None


def explain(values: np.ndarray, spec: ModelSpec, what: str) -> str:
    """One line: the failure and its likely cause, naming the item or state involved."""
    head = f"Estimation failed numerically ({what.rstrip('.').lower()})"
    x = values / np.maximum(item_scales(values)[1], 1e-300)
    growing = _growing_states(x, spec)
    if growing:
        return (f"{head}: state {', '.join(growing)} looks non-stationary (its items keep "
                "growing over the diary); remove the trend or model a shorter stretch")
    r = np.abs(np.tril(np.nan_to_num(pairwise_correlations(x)), -1))
    a, b = np.unravel_index(np.argmax(r), r.shape)
    if r[a, b] >= 0.99:
        return (f"{head}: items {spec.items[b]} and {spec.items[a]} are nearly collinear "
                f"(correlation {fmt(r[a, b])}); drop one or combine them")
    return (f"{head}: the model may be too large for the data; free fewer paths, use fewer "
            "states or try the other estimator")


def _growing_states(x: np.ndarray, spec: ModelSpec) -> list[str]:
    """States whose items' mean absolute change from one answered prompt to the next is over
    GROWTH times larger in the last third of the diary than in the first third."""
    out = []
    for state in spec.states:
        part = x[:, [spec.items.index(it) for it in state.items]]
        rows = part[~np.isnan(part).all(axis=1)]
        third = rows.shape[0] // 3
        if third < 2:
            continue
        change = np.abs(np.diff(rows, axis=0))
        early, late = _mean_answered(change[:third]), _mean_answered(change[-third:])
        if early > 0 and late > GROWTH * early:
            out.append(state.name)
    return out


def _mean_answered(x: np.ndarray) -> float:
    """Mean of the non-missing entries (0 when there are none)."""
    x = x[~np.isnan(x)]
    return float(x.mean()) if x.size else 0.0
