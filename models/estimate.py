"""Estimate a dynamic factor model: `fit(diary, spec, options) -> FitResult`.

The items are checked first and, when their scales are extreme or far apart, rescaled
exactly (models.conditioning). The estimator named in `options` (models.estimators) builds
its objective — the window pseudo-likelihood (models.objective) or the exact Kalman-filter
likelihood (models.exact) — and models.solution turns its maximum into the result: L-BFGS-B
on scaled parameters, Newton steps with the observed information (forward differences of the
analytic gradient), which also gives the approximate standard errors Cov = (-d2 loglik)^-1.
The result is in the items' original units.
"""

from __future__ import annotations

from dataclasses import replace

from lagwise.models.blas import one_blas_thread
from lagwise.models.conditioning import Rescaling, check_items, numerical_failures
from lagwise.models.diary import Diary
from lagwise.models.estimators import FitOptions
from lagwise.models.progress import Monitor
from lagwise.models.results import FitResult
from lagwise.models.solution import Start, solve
from lagwise.models.spec import ModelSpec


def fit(diary: Diary, spec: ModelSpec, options: FitOptions = FitOptions(),
        monitor: Monitor | None = None, *, standard_errors: bool = True,
        start: Start = None) -> FitResult:
    """Estimate `spec` on `diary`. Raises DataError for items that cannot be modelled
    (constant, collinear, beyond floating point), SpecError for a model that cannot be
    estimated, EstimationError when no estimate can be produced, Cancelled.

    A refit (bootstrap, study planning, many people) can skip the standard errors
    (standard_errors=False: no information for errors, no fit test: log-likelihood, AIC and
    BIC only) and start from a previous result or named estimates (`start`;
    models.solution.start_vector).
    """
    notes = spec.validate(diary.items)
    data = diary.select(spec.items)
    rescaling = Rescaling.of(check_items(data.values, spec), spec)
    if not rescaling.identity:
        data = replace(data, values=data.values / rescaling.factors)
        start = rescaling.internal_start(start, options.method.free_first_copies)
    with one_blas_thread():
        with numerical_failures(data.values, spec):
            objective = options.method.build(data, spec, options, monitor)
        result = solve(objective, notes, monitor, standard_errors=standard_errors, start=start)
    return result if rescaling.identity else rescaling.restore(result, objective.answers_per_item())
