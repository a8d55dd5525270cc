"""The exact estimator (Kalman filter) against statsmodels, and its evaluation cost.

On diaries of 3 states x 3 items with days of 8 prompts:
- speed: `fit(..., FitOptions(estimator="exact"))` (window start, optimisation, standard
  errors, state scores) on T = 1,000 complete prompts against statsmodels' DynamicFactor
  fitting the one-factor model (one factor, AR(1), a constant per item) to the same data at
  its defaults (L-BFGS with at most 50 iterations; standard errors from the outer product of
  gradients, cheaper than the observed information Lagwise computes), both on one BLAS
  thread -> ratio statsmodels / Lagwise, with both log-likelihoods. statsmodels' DynamicFactor
  is the peer because it fits a dynamic factor model by the same Kalman-filter likelihood. The
  two are different models (three states restarting each day; one factor over one unbroken
  series), so the log-likelihoods are reported, not compared; what is checked is that
  Lagwise's filter at statsmodels' estimate gives statsmodels' log-likelihood (the same
  filter, like for like). statsmodels' fit takes about 20 s here, so its runs get no warm-up;
- evaluation cost: one log-likelihood and one gradient at T = 1,000, 10,000 and 100,000
  prompts (10% missed), the time per occasion and the growth exponent of the gradient time
  between the two largest diaries, log(t_b / t_a) / log(T_b / T_a) (1 = linear), for days of
  8 prompts and for the same diaries as one segment (row order: the states carry over every
  night, so the filter never restarts).
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass, replace

import numpy as np

from lagwise.models.bench.cases import (
    EXACT_CASE, EXACT_SIZES, Case, bench_diary, bench_model, best_time,
)
from lagwise.models.estimators import FitOptions
from lagwise.models.progress import Monitor, checkpoint


@dataclass(frozen=True)
class ExactSpeedResult:
    """Lagwise's exact fit against statsmodels' one-factor DynamicFactor on one diary."""

    case: Case
    lagwise_seconds: float
    lagwise_loglik: float
    lagwise_converged: bool
    lagwise_iterations: int
    peer_seconds: float
    peer_loglik: float
    peer_converged: bool
    peer_iterations: int
    peer_check: float      # |Lagwise's filter at statsmodels' estimate - statsmodels' llf|

    @property
    def ratio(self) -> float:
        return self.peer_seconds / self.lagwise_seconds


@dataclass(frozen=True)
class ExactEvaluation:
    """Best seconds of one exact log-likelihood and of one gradient on a diary of T prompts."""

    occasions: int
    loglik_seconds: float
    gradient_seconds: float
    loglik: float


def growth_exponent(evaluations: list[ExactEvaluation]) -> float | None:
    """log(t_b / t_a) / log(T_b / T_a) of the gradient time between the two largest diaries
    (1 = linear; at the smallest, fixed costs per call still weigh)."""
    if len(evaluations) < 2:
        return None
    first, last = evaluations[-2], evaluations[-1]
    return float(np.log(last.gradient_seconds / first.gradient_seconds)
                 / np.log(last.occasions / first.occasions))


def _one_factor_peer(values: np.ndarray):
    """statsmodels' DynamicFactor, one factor with AR(1) and a constant per item, fitted at its
    defaults; its standard errors are computed inside the timed run."""
    from statsmodels.tsa.statespace.dynamic_factor import DynamicFactor
    from threadpoolctl import threadpool_limits

    with threadpool_limits(limits=1, user_api="blas"), warnings.catch_warnings():
        warnings.simplefilter("ignore")   # its convergence warning is reported below instead
        model = DynamicFactor(values, k_factors=1, factor_order=1,
                              exog=np.ones((values.shape[0], 1)))
        result = model.fit(disp=False)
        result.bse
    return result


def measure_exact_speed(case: Case = EXACT_CASE, repeats: int = 3,
                        monitor: Monitor | None = None) -> ExactSpeedResult:
    """Time the Lagwise exact fit and statsmodels' one-factor DynamicFactor on one diary."""
    from lagwise.models.estimate import fit
    from lagwise.models.kalman import kalman_loglik

    spec, diary = bench_diary(case)
    checkpoint(monitor, 0.0, f"{case.label}: Lagwise exact")
    lag_s, res = best_time(lambda: fit(diary, spec, FitOptions(estimator="exact")), repeats)
    checkpoint(monitor, 0.2, f"{case.label}: statsmodels DynamicFactor (about 20 s a run)")
    peer_s, peer = best_time(lambda: _one_factor_peer(diary.values), repeats, warm_up=False)
    p = diary.values.shape[1]
    prm = np.asarray(peer.params)  # loadings, constants, unique variances, AR coefficient
    ours = kalman_loglik(diary.values, np.zeros(diary.n_occasions), prm[p:2 * p],
                         prm[:p].reshape(p, 1), prm[2 * p:3 * p], [prm[3 * p:].reshape(1, 1)],
                         np.eye(1))
    return ExactSpeedResult(
        case=case, lagwise_seconds=lag_s, lagwise_loglik=float(res.fit.loglik),
        lagwise_converged=bool(res.converged), lagwise_iterations=int(res.iterations),
        peer_seconds=peer_s, peer_loglik=float(peer.llf),
        peer_converged=bool(peer.mle_retvals.get("converged", False)),
        peer_iterations=int(peer.mle_retvals.get("iterations", -1)),
        peer_check=abs(ours - float(peer.llf)))


def measure_exact_evaluation(sizes: tuple[int, ...] = EXACT_SIZES, repeats: int = 3,
                             monitor: Monitor | None = None, one_segment: bool = False
                             ) -> list[ExactEvaluation]:
    """Best seconds of the exact log-likelihood and of its gradient at the true parameters, on
    diaries of 3 states x 3 items, days of 8 prompts, 10% missed, of each size; with
    `one_segment`, the same diaries as one segment (row order)."""
    from threadpoolctl import threadpool_limits

    from lagwise.models.exact import ExactObjective
    from lagwise.models.parameters import Matrices

    out = []
    for n, occasions in enumerate(sizes):
        checkpoint(monitor, n / len(sizes), f"Exact evaluation, T = {occasions:,}"
                   + (", one segment" if one_segment else ""))
        case = Case(EXACT_CASE.states, EXACT_CASE.items, occasions, EXACT_CASE.prompts)
        spec, diary = bench_diary(case, p_missed=0.1)
        if one_segment:
            diary = replace(diary, segment=np.zeros(diary.n_occasions, dtype=int))
        _, truth = bench_model(case.states, case.items)
        objective = ExactObjective(diary, spec, FitOptions(estimator="exact"))
        p = len(spec.items)
        theta = objective.layout.pack(Matrices(
            nu=truth["intercepts"], lam=truth["loadings"], theta=truth["unique"], d=np.zeros(p),
            lagged=np.array(truth["lagged"]), psi=truth["innovation"]))
        runs = max(repeats, 5)   # cheap, and the growth exponent needs steady minima
        with threadpool_limits(limits=1, user_api="blas"):  # as in every Lagwise fit
            ll_s, ll = best_time(lambda: objective.loglik(theta), runs)
            grad_s, _ = best_time(lambda: objective.loglik_and_gradient(theta), runs)
        out.append(ExactEvaluation(occasions=diary.n_occasions, loglik_seconds=ll_s,
                                   gradient_seconds=grad_s, loglik=float(ll)))
    return out
