"""The refit path (`fit(..., standard_errors=False, start=previous)`) against a full fit.

Resampling, study planning and many people fit one model to many diaries of one design; a
refit skips the observed information and the Newton polish it serves, runs the precise
optimiser, and starts from a previous result. Measured on each speed diary with the default
(stationary) estimator: the diary is fitted once in full (estimates and standard errors);
from that first fit's estimates, R parametric-bootstrap diaries of the same design (days,
prompts per day, complete answers) are simulated (models.simulate.simulate_diary, seeds
1..R); each is fitted (a) in full, `fit(diary_r, spec, options)`, and (b) as a refit,
`fit(diary_r, spec, options, standard_errors=False, start=first_fit)`, one after the other.
Reported: the median seconds of (a) and of (b), the speed-up (a) / (b), and the largest
|refit estimate - full estimate| / full standard error over the free parameters and the
replicates. Both find the same maximum, so that difference must be tiny; the speed-up is a
fact to report, not a target.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from lagwise.models.bench.cases import Case, bench_diary, timed
from lagwise.models.estimators import FitOptions
from lagwise.models.progress import Monitor, checkpoint


@dataclass(frozen=True)
class RefitResult:
    case: Case
    replicates: int
    full_seconds: float             # median over the replicates
    refit_seconds: float            # median over the replicates
    max_difference_se: float        # max |refit - full| / full standard error
    converged: bool                 # every full fit and every refit converged

    @property
    def speedup(self) -> float:
        return self.full_seconds / self.refit_seconds


def largest_difference_in_se(full, refit) -> float:
    """max over the free parameters with a standard error of |refit - full| / full se."""
    refit_estimates = {p.key: p.estimate for p in refit.parameters}
    return max((abs(refit_estimates[p.key] - p.estimate) / p.se
                for p in full.parameters if p.free and p.se), default=float("inf"))


def measure_refit(case: Case, replicates: int = 5, monitor: Monitor | None = None
                  ) -> RefitResult:
    """Median seconds of a full fit and of a refit over `replicates` parametric-bootstrap
    diaries of `case`, and how far the refit's estimates are from the full fit's."""
    from lagwise.models.estimate import fit
    from lagwise.models.simulate import simulate_diary

    options = FitOptions()
    spec, diary = bench_diary(case)
    checkpoint(monitor, 0.0, f"{case.label}: first fit")
    first = fit(diary, spec, options)
    estimates = {"loadings": first.loadings, "intercepts": first.intercepts,
                 "unique": first.unique, "lagged": first.lagged,
                 "innovation": first.innovation}
    full_s, refit_s, worst, converged = [], [], 0.0, bool(first.converged)
    for r in range(1, replicates + 1):
        checkpoint(monitor, r / (replicates + 1), f"{case.label}: replicate {r} of {replicates}")
        diary_r = simulate_diary(spec, days=case.days, prompts_per_day=case.prompts, seed=r,
                                 **estimates)
        sec_a, full = timed(lambda: fit(diary_r, spec, options))()
        sec_b, refit = timed(lambda: fit(diary_r, spec, options, standard_errors=False,
                                         start=first))()
        full_s.append(sec_a)
        refit_s.append(sec_b)
        worst = max(worst, largest_difference_in_se(full, refit))
        converged = converged and bool(full.converged) and bool(refit.converged)
    return RefitResult(case=case, replicates=replicates, full_seconds=float(np.median(full_s)),
                       refit_seconds=float(np.median(refit_s)), max_difference_se=float(worst),
                       converged=converged)
