"""The continuous-time estimator against the exact estimator on the same irregular diary.

The diary: `bench_model`'s measurement part, and as dynamics the drift A = logm(B) per hour
and the diffusion W = -(A S + S A') that give its lag-1 paths B and innovations over one hour
(S their stationary covariance); days of `case.prompts` prompts at random times between 8:00
and 22:00, 10% missed. Both fits are complete (start values, optimisation, standard errors)
on one BLAS thread; the exact estimator treats the prompts as equally spaced, the
continuous-time one uses their times. Ratio = continuous-time seconds / exact seconds, with
the target CONTINUOUS_TARGET (cases.py).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy.linalg import logm

from lagwise.models.bench.cases import Case, bench_model, best_time
from lagwise.models.estimators import FitOptions
from lagwise.models.lyapunov import solve_lyapunov


@dataclass(frozen=True)
class ContinuousSpeedResult:
    case: Case
    seconds: float
    converged: bool
    distinct_intervals: int
    exact_seconds: float
    exact_converged: bool

    @property
    def ratio(self) -> float:
        return self.seconds / self.exact_seconds


def continuous_diary(case: Case, seed: int = 1):
    """The model of `bench_model` and an irregular diary of `case` (module docstring)."""
    from lagwise.models.simulate import simulate_continuous

    spec, truth = bench_model(case.states, case.items)
    b = truth["lagged"][0]
    a = np.real(logm(b))
    s = solve_lyapunov(b, truth["innovation"])
    rng = np.random.default_rng(seed)
    hours = [np.sort(rng.uniform(8.0, 22.0, case.prompts)) for _ in range(case.days)]
    diary = simulate_continuous(spec, loadings=truth["loadings"], intercepts=truth["intercepts"],
                                unique=truth["unique"], drift=a, diffusion=-(a @ s + s @ a.T),
                                hours=hours, p_missed=0.1, seed=rng)
    return spec, diary


def measure_continuous_speed(case: Case, repeats: int = 1) -> ContinuousSpeedResult:
    from lagwise.models.estimate import fit

    spec, diary = continuous_diary(case)
    ct_seconds, ct = best_time(lambda: fit(diary, spec, FitOptions(estimator="continuous-time")),
                               repeats)
    ex_seconds, ex = best_time(lambda: fit(diary, spec, FitOptions(estimator="exact")), repeats)
    steps = np.diff((diary.time - diary.time[0]) / np.timedelta64(1, "m"))
    distinct = int(np.unique(steps[np.diff(diary.segment) == 0]).size)
    return ContinuousSpeedResult(case, ct_seconds, ct.converged, distinct, ex_seconds,
                                 ex.converged)
