"""Study planning (models.plan): simulated power against independent checks.

For single-item states without measurement error the model is a VAR(1), and the power of a
lagged path can be found without Lagwise: diaries drawn here with numpy (each day starting
from the stationary distribution, scipy's Lyapunov solver), OLS per equation on the
within-day pairs with statsmodels and the Wald test of each coefficient. For long diaries it
also follows from the VAR's asymptotic covariance Var(vec B) = Psi kron Gamma0^-1 / n
(Luetkepohl 2005, New Introduction to Multiple Time Series Analysis, ch. 3), n the expected
number of answered within-day pairs.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
import statsmodels.api as sm
from scipy.linalg import solve_discrete_lyapunov
from scipy.stats import norm

from lagwise.models import plantruth
from lagwise.models.design import Design, simulate
from lagwise.models.errors import FieldError, SpecError
from lagwise.models.kinds import Kind
from lagwise.models.plan import run_plan

B = np.array([[0.3, 0.0], [0.15, 0.3]])        # row: state at t, column: state at t-1
R_INNOV = 0.2
MODEL = {"states": [{"name": "a", "items": ["a1"]}, {"name": "b", "items": ["b1"]}],
         "inertia": 0.3, "cross_lagged": [{"from": "a", "to": "b", "effect": 0.15}],
         "innovation_correlation": R_INNOV}
PSI = np.array([[1.0, R_INNOV], [R_INNOV, 1.0]])
CHECKED = [(Kind.INERTIA, "a", "a", (0, 0)), (Kind.CROSS_LAGGED, "a", "b", (1, 0))]


def ols_power(days: int, prompts: int, answered: float, reps: int, seed: int) -> dict:
    """Share of diaries whose OLS Wald test (normal reference) rejects b = 0, per path."""
    rng = np.random.default_rng(seed)
    gamma0 = solve_discrete_lyapunov(B, PSI)
    chol = np.linalg.cholesky(PSI)
    hits = {place: 0 for *_, place in CHECKED}
    for _ in range(reps):
        y = np.empty((days, prompts, 2))
        y[:, 0] = rng.multivariate_normal(np.zeros(2), gamma0, size=days)
        for t in range(1, prompts):
            y[:, t] = y[:, t - 1] @ B.T + rng.standard_normal((days, 2)) @ chol.T
        seen = rng.random((days, prompts)) < answered
        pair = seen[:, 1:] & seen[:, :-1]
        now, before = y[:, 1:][pair], y[:, :-1][pair]
        x = sm.add_constant(before)
        for row, col in hits:
            res = sm.OLS(now[:, row], x).fit(use_t=False)
            hits[(row, col)] += res.pvalues[1 + col] < 0.05
    return {place: n / reps for place, n in hits.items()}


def normal_se(days: int, prompts: int, answered: float) -> dict:
    """Standard error of b_ij from Var(b_ij) = Psi_ii (Gamma0^-1)_jj / n."""
    gamma0 = solve_discrete_lyapunov(B, PSI)
    n = days * (prompts - 1) * answered ** 2
    return {(i, j): math.sqrt(PSI[i, i] * np.linalg.inv(gamma0)[j, j] / n)
            for *_, (i, j) in CHECKED}


def _path(summary, kind, fr, to):
    return next(p for p in summary.paths if (p.kind, p.from_, p.to) == (kind, fr, to))


def _agrees(plan, days, reps_ols, seed):
    design = next(s for s in plan.designs if s.design.days == days)
    other = ols_power(days, 6, 0.75, reps_ols, seed)
    for kind, fr, to, place in CHECKED:
        p = _path(design, kind, fr, to)
        assert p.truth == pytest.approx(B[place])
        mcse = math.hypot(p.power_se, math.sqrt(other[place] * (1 - other[place]) / reps_ols))
        assert abs(p.power - other[place]) <= 3 * mcse, (kind, days, p.power, other[place])


def test_the_truth_of_a_typed_in_var1_is_the_var():
    truth = plantruth.from_json(MODEL)
    np.testing.assert_allclose(truth.lagged[0], B)
    np.testing.assert_allclose(truth.innovation, PSI)
    assert not truth.unique.any() and truth.spec.reliability == ()


def test_power_of_a_var1_agrees_with_ols_on_within_day_pairs():
    truth = plantruth.from_json(MODEL)
    plan = run_plan(truth, [Design(40, 6, 0.75)], replications=60, seed=3, jobs=2)
    assert plan.complete and plan.designs[0].converged >= 57
    _agrees(plan, 40, 1000, seed=11)


@pytest.mark.slow
def test_power_agrees_with_ols_and_with_the_large_sample_approximation():
    truth = plantruth.from_json(MODEL)
    plan = run_plan(truth, [Design(40, 6, 0.75), Design(200, 6, 0.75)], replications=400,
                    seed=5, jobs=2)
    _agrees(plan, 40, 4000, seed=12)
    _agrees(plan, 200, 2000, seed=13)
    se = normal_se(200, 6, 0.75)
    long = plan.designs[1]
    for kind, fr, to, place in CHECKED:
        p = _path(long, kind, fr, to)
        z = abs(B[place]) / se[place]
        power = norm.cdf(z - 1.96) + norm.cdf(-z - 1.96)     # the Wald test's power
        # binomial Monte Carlo error around the approximation (common practice)
        assert abs(p.power - power) <= 3 * math.sqrt(power * (1 - power) / 400) + 1e-9
        assert abs(p.sd - se[place]) <= 3 * p.sd_se, (kind, p.sd, se[place])


def test_one_and_two_workers_and_a_dask_cluster_give_the_same_plan():
    truth = plantruth.from_json(MODEL)
    designs = [Design(8, 5, 0.8), Design(12, 5, 0.8, "late")]
    one = run_plan(truth, designs, replications=6, seed=9, jobs=1)
    two = run_plan(truth, designs, replications=6, seed=9, jobs=2)
    assert one.to_json() == two.to_json()
    assert run_plan(truth, designs, replications=6, seed=10, jobs=1).to_json() != one.to_json()
    from distributed import LocalCluster

    # one worker thread: BLAS threads are set per process, so fits must not overlap in one
    with LocalCluster(host="127.0.0.1", protocol="tcp://", processes=False, n_workers=1,
                      threads_per_worker=1, dashboard_address=None) as cluster:
        dask = run_plan(truth, designs, replications=6, seed=9,
                        scheduler=cluster.scheduler_address)
    assert dask.to_json() == one.to_json()


class _StopAfter:
    """A monitor that asks to stop once `n` progress reports have come."""

    def __init__(self, n: int) -> None:
        self.n, self.seen = n, 0

    def report(self, fraction: float, message: str) -> None:
        self.seen += 1

    def cancelled(self) -> bool:
        return self.seen >= self.n


def test_a_cancelled_plan_returns_what_it_has_with_its_monte_carlo_error():
    truth = plantruth.from_json(MODEL)
    plan = run_plan(truth, [Design(10, 5)], replications=40, seed=1, jobs=1,
                    monitor=_StopAfter(3))
    assert not plan.complete
    done = plan.designs[0]
    assert 0 < done.replications < 40
    p = done.paths[0]
    # common practice: the Monte Carlo error of a share s over n diaries is sqrt(s(1-s)/n)
    assert p.power_se == pytest.approx(math.sqrt(p.power * (1 - p.power) / done.converged))


def test_late_pattern_misses_the_asked_share_more_often_late():
    design = Design(400, 6, 0.8, "late")
    shares = design.missed_shares()
    assert shares.mean() == pytest.approx(0.2) and np.all(np.diff(shares) > 0)
    diary = simulate(plantruth.from_json(MODEL), design, np.random.default_rng(4))
    missed = np.isnan(diary.values[:, 0]).reshape(400, 6).mean(axis=0)
    # binomial standard error of each prompt's share over 400 days (common practice)
    assert np.all(np.abs(missed - shares) <= 4 * np.sqrt(shares * (1 - shares) / 400))


def test_reliability_sets_the_unique_variance_of_an_item():
    model = {"states": [{"name": "a", "items": ["a1", "a2"]}], "inertia": 0.5,
             "reliability": {"a2": 0.6}, "loadings": {"a2": 0.8}}
    truth = plantruth.from_json(model)
    phi = 1.0 / (1.0 - 0.25)          # stationary variance of an AR(1), common practice
    lam = truth.loadings[:, 0]
    share = lam ** 2 * phi / (lam ** 2 * phi + truth.unique)
    np.testing.assert_allclose(share, [0.7, 0.6])


@pytest.mark.parametrize("model, words", [
    ({**MODEL, "cross_lagged": [{"from": "a", "to": "c", "effect": 0.1}]}, "the state 'c'"),
    ({**MODEL, "inertia": 1.0}, "not stationary"),
    ({**MODEL, "innovation_correlation": 1.5}, "not a valid correlation"),
    ({**MODEL, "inertias": 0.2}, "inertias"),
    ({**MODEL, "reliability": 1.5}, "not in"),
])
def test_a_wrong_model_is_one_plain_line(model, words):
    with pytest.raises(FieldError, match=words) as caught:
        plantruth.from_json(model)
    assert "\n" not in str(caught.value)


def test_a_wrong_design_is_one_plain_line():
    with pytest.raises(SpecError, match="pattern"):
        Design(20, 6, 0.75, "evening")
    with pytest.raises(SpecError, match="share of prompts answered"):
        Design(20, 6, 1.5)
    with pytest.raises(SpecError, match="night"):
        Design(20, 6, night_gap=3)      # the stationary estimator never joins days


def test_the_night_rule_carries_the_states_over_the_night_gap():
    truth = plantruth.from_json({"states": [{"name": "a", "items": ["a1"]}], "inertia": 0.6})
    rng = np.random.default_rng(8)
    joined = simulate(truth, Design(3000, 4, 1.0, estimator="exact", night_gap=1), rng)
    apart = simulate(truth, Design(3000, 4, 1.0), rng)
    for diary, expected in ((joined, 0.6 ** 2), (apart, 0.0)):
        y = diary.values[:, 0].reshape(3000, 4)
        r = np.corrcoef(y[:-1, -1], y[1:, 0])[0, 1]
        # an AR(1) correlates phi^h over h steps (common practice): the last prompt and the
        # next day's first are 2 steps apart over a night of 1 missed prompt; the sampling
        # error of r is about 1 / sqrt(n)
        assert abs(r - expected) <= 4 / math.sqrt(3000), (expected, r)


def test_days_for_80_percent_power_interpolate_linearly_between_designs():
    from lagwise.models.planresults import Plan, summarise

    truth = plantruth.from_json(MODEL)
    designs = [Design(20, 6), Design(40, 6), Design(60, 6)]
    plan = summarise(truth, designs, 0, [], seed=0, complete=True)

    def with_power(values):
        rows = [replace(s, paths=(replace(s.paths[0], power=v),) + s.paths[1:])
                for s, v in zip(plan.designs, values)]
        return Plan(tuple(rows), 0, 0, True)

    # linear interpolation between (40, 0.7) and (60, 0.9) reaches 0.8 halfway (common practice)
    assert with_power([0.5, 0.7, 0.9]).days_needed(0) == pytest.approx(50.0)
    assert with_power([0.85, 0.9, 0.95]).days_needed(0) == 20.0
    assert with_power([0.1, 0.2, 0.3]).days_needed(0) is None
    assert "already the shortest design (20 days)" in with_power([0.85, 0.9, 0.95]).sentences()[0]
