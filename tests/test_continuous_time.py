"""The continuous-time estimator: Van Loan's integral against numerical integration, the
Kalman likelihood against the discrete exact estimator and against the dense normal density,
the gradient against central differences, and recovery of a known model by simulation (the
coverage of the 95% intervals of every parameter kind)."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
from scipy.integrate import quad_vec
from scipy.linalg import expm, expm_frechet, logm
from scipy.stats import multivariate_normal
from two_state_model import SPEC, TRUE

from lagwise.models.ctobjective import SCALE_PROBES, ContinuousObjective, probed_diagonal
from lagwise.models.ctresults import effects_by_interval
from lagwise.models.drift import (discrete_adjoint, discrete_system, expm_stack,
                                  stationary_adjoint, stationary_covariance)
from lagwise.models.errors import SpecError
from lagwise.models.estimate import fit
from lagwise.models.estimators import FitOptions
from lagwise.models.flags import FlagCode
from lagwise.models.implied import NotAdmissible
from lagwise.models.intervals import prompt_intervals
from lagwise.models.kalman import kalman_loglik
from lagwise.models.kinds import Kind
from lagwise.models.lyapunov import solve_lyapunov
from lagwise.models.parallel import run_tasks
from lagwise.models.results import FitResult
from lagwise.models.simulate import simulate_continuous, simulate_diary

DRIFT = np.array([[-0.6, 0.2], [-0.3, -0.9]])      # per hour; eigenvalues -0.75 +- 0.17i
DIFFUSION = np.array([[1.0, 0.3], [0.3, 0.8]])
MEASUREMENT = dict(loadings=TRUE["loadings"], intercepts=TRUE["intercepts"], unique=TRUE["unique"])
CT = FitOptions(estimator="continuous-time")


def _hours(days: int, prompts: int, seed: int) -> list[np.ndarray]:
    """Random prompt times between 8:00 and 22:00 (a usual signal-contingent schedule)."""
    rng = np.random.default_rng(seed)
    return [np.sort(rng.uniform(8.0, 22.0, prompts)) for _ in range(days)]


def _diary(days=60, prompts=8, seed=4, p_missed=0.1):
    return simulate_continuous(SPEC, **MEASUREMENT, drift=DRIFT, diffusion=DIFFUSION,
                               hours=_hours(days, prompts, seed), p_missed=p_missed, seed=seed)


def _theta(objective: ContinuousObjective, drift: np.ndarray, diffusion: np.ndarray) -> np.ndarray:
    states = SPEC.state_names
    named = {}
    for i, to in enumerate(states):
        for j, fr in enumerate(states):
            named[(Kind.DRIFT, fr, to)] = drift[i, j]
            named[(Kind.DIFFUSION, fr, to)] = diffusion[i, j]
    for e in objective.layout.free_entries:
        if e.kind == Kind.LOADING:
            named[e.key] = TRUE["loadings"][e.index]
        elif e.kind in (Kind.INTERCEPT, Kind.UNIQUE):
            named[e.key] = TRUE["intercepts" if e.kind == Kind.INTERCEPT else "unique"][e.index[0]]
    return objective.layout.theta_from(named)


# ----- the drift mathematics -----------------------------------------------------------------
def test_stacked_exponential_matches_scipy():
    # matrices of norms from 0 to about 100 (up to 5 squarings), against scipy's expm
    rng = np.random.default_rng(1)
    x = rng.normal(size=(60, 6, 6)) * np.geomspace(1e-3, 20.0, 60)[:, None, None]
    x[0] = 0.0
    expected = np.array([expm(m) for m in x])
    scale = np.maximum(np.abs(expected).max(axis=(1, 2), keepdims=True), 1.0)
    np.testing.assert_allclose(expm_stack(x) / scale, expected / scale, rtol=0, atol=1e-12)
    for top in (0.01, 0.2, 0.9, 2.0):   # stacks served by the Pade orders 3, 5, 7 and 9
        small = x / np.abs(x).sum(axis=1).max() * top
        np.testing.assert_allclose(expm_stack(small), [expm(m) for m in small], rtol=0, atol=1e-14)


def test_van_loan_matches_numerical_integration():
    # Q(D) = int_0^D expm(As) W expm(A's) ds by scipy.integrate.quad_vec; B(D) = scipy's expm
    intervals = np.array([0.1, 1.0, 3.7])
    b, q = discrete_system(DRIFT, DIFFUSION, intervals)
    for d, bd, qd in zip(intervals, b, q):
        integral = quad_vec(lambda s: expm(DRIFT * s) @ DIFFUSION @ expm(DRIFT.T * s), 0.0, d,
                            epsabs=1e-13, epsrel=1e-12)[0]
        np.testing.assert_allclose(qd, integral, atol=1e-12)
        np.testing.assert_allclose(bd, expm(DRIFT * d), atol=1e-13)
    # a long interval reaches the stationary covariance, which solves A S + S A' + W = 0
    s = stationary_covariance(DRIFT, DIFFUSION)
    np.testing.assert_allclose(DRIFT @ s + s @ DRIFT.T + DIFFUSION, 0.0, atol=1e-13)
    np.testing.assert_allclose(discrete_system(DRIFT, DIFFUSION, np.array([80.0]))[1][0], s,
                               atol=1e-12)


def test_adjoints_match_scipy_frechet_derivative_and_central_differences():
    rng = np.random.default_rng(0)
    intervals = np.array([0.4, 2.0])
    b_bar, q_bar = rng.normal(size=(2, 2, 2)), rng.normal(size=(2, 2, 2))
    a_bar, w_bar = discrete_adjoint(DRIFT, DIFFUSION, intervals, b_bar, q_bar)
    # forward: dB = L(AD, D dA) by scipy.linalg.expm_frechet; Q by central differences
    h = 1e-6
    for i in range(2):
        for j in range(2):
            e = np.zeros((2, 2))
            e[i, j] = 1.0
            db = [expm_frechet(DRIFT * d, e * d, compute_expm=False) for d in intervals]
            dq = (discrete_system(DRIFT + h * e, DIFFUSION, intervals)[1]
                  - discrete_system(DRIFT - h * e, DIFFUSION, intervals)[1]) / (2 * h)
            assert a_bar[i, j] == pytest.approx(np.sum(b_bar * db) + np.sum(q_bar * dq), abs=1e-7)
            dw = (discrete_system(DRIFT, DIFFUSION + h * e, intervals)[1]
                  - discrete_system(DRIFT, DIFFUSION - h * e, intervals)[1]) / (2 * h)
            assert w_bar[i, j] == pytest.approx(np.sum(q_bar * dw), abs=1e-7)
    s = stationary_covariance(DRIFT, DIFFUSION)
    s_bar = rng.normal(size=(2, 2))
    a_bar, w_bar = stationary_adjoint(DRIFT, s, s_bar)
    e = np.zeros((2, 2))
    e[0, 1] = h
    da = (stationary_covariance(DRIFT + e, DIFFUSION) - stationary_covariance(DRIFT - e, DIFFUSION))
    assert a_bar[0, 1] == pytest.approx(np.sum(s_bar * da) / (2 * h), abs=1e-7)


# ----- the likelihood ------------------------------------------------------------------------
def test_equal_unit_intervals_give_the_discrete_exact_likelihood():
    # with every interval 1, B = expm(A) and Q(1) = Psi when A = logm(B) and W = -(A S + S A'),
    # S the discrete stationary covariance (S = B S B' + Psi, and Q(1) = S - B S B')
    diary = simulate_diary(SPEC, days=12, prompts_per_day=7, p_missed=0.2, p_item_skip=0.1,
                           seed=8, **TRUE)
    b, psi = TRUE["lagged"][0], TRUE["innovation"]
    a = np.real(logm(b))
    s = solve_lyapunov(b, psi)
    objective = ContinuousObjective(diary, SPEC, FitOptions(estimator="continuous-time",
                                                            prompt_spacing=1.0))
    theta = _theta(objective, a, -(a @ s + s @ a.T))
    discrete = kalman_loglik(diary.values, diary.segment, TRUE["intercepts"], TRUE["loadings"],
                             TRUE["unique"], [b], psi)
    assert objective.loglik(theta) == pytest.approx(discrete, abs=1e-8)


@pytest.mark.parametrize("night, days, prompts", [("restart", 4, 6), ("carry", 4, 6),
                                                  ("restart", 18, 3)])
def test_irregular_intervals_match_the_dense_normal_density(night, days, prompts):
    # the whole series as one normal vector: Cov(eta_t, eta_s) = expm(A (t - s)) S for t >= s
    # within a segment (independent segments when nights restart), y = nu + Lambda eta + e;
    # four days run a node at a time, 18 days a position at a time (every interval its own)
    diary = _diary(days=days, prompts=prompts, seed=11, p_missed=0.25)
    diary.values[np.random.default_rng(2).random(diary.values.shape) < 0.1] = np.nan
    objective = ContinuousObjective(diary, SPEC, FitOptions(estimator="continuous-time",
                                                            night=night))
    theta = _theta(objective, DRIFT, DIFFUSION)
    hours = (diary.time - diary.time[0]) / np.timedelta64(1, "h")
    segment = diary.segment if night == "restart" else np.zeros(diary.n_occasions)
    s = stationary_covariance(DRIFT, DIFFUSION)
    lam = TRUE["loadings"]
    n, p = diary.values.shape
    cov = np.zeros((n * p, n * p))
    for t in range(n):
        for u in range(t + 1):
            if segment[t] == segment[u]:
                block = lam @ expm(DRIFT * (hours[t] - hours[u])) @ s @ lam.T
                cov[t * p:(t + 1) * p, u * p:(u + 1) * p] = block
                cov[u * p:(u + 1) * p, t * p:(t + 1) * p] = block.T
    cov += np.diag(np.tile(TRUE["unique"], n))
    y = diary.values.reshape(-1)
    seen = ~np.isnan(y)
    mean = np.tile(TRUE["intercepts"], n)
    dense = multivariate_normal(mean[seen], cov[np.ix_(seen, seen)]).logpdf(y[seen])
    assert objective.loglik(theta) == pytest.approx(dense, abs=1e-8)


@pytest.mark.parametrize("days, prompts", [(10, 7), (20, 4)])
def test_gradient_matches_central_differences(days, prompts):
    diary = _diary(days=days, prompts=prompts, seed=5, p_missed=0.15)
    objective = ContinuousObjective(diary, SPEC, FitOptions(estimator="continuous-time",
                                                            interval_unit="minutes"))
    theta = _theta(objective, DRIFT / 60.0, DIFFUSION / 60.0) * 1.05
    _, grad = objective.loglik_and_gradient(theta)
    sizes = np.maximum(np.abs(theta), 1e-3)
    numeric = np.array([(objective.loglik(theta + 1e-6 * sz * e) - objective.loglik(theta - 1e-6 * sz * e))
                        / (2e-6 * sz) for e, sz in zip(np.eye(theta.size), sizes)])
    np.testing.assert_allclose(grad, numeric, rtol=1e-5, atol=1e-4)


def test_probed_diagonal_recovers_the_hessian_diagonal():
    # the Hessian of -x'Hx/2 is -H: exact from any number of +-1 probes when H is diagonal
    # (r_i^2 = 1), unbiased otherwise (the mean of many probes approaches the diagonal)
    rng = np.random.default_rng(2)
    steps = np.geomspace(1e-4, 1e-1, 6)
    diagonal = np.diag(rng.uniform(1.0, 50.0, 6))
    np.testing.assert_allclose(probed_diagonal(lambda x: -diagonal @ x, np.ones(6), steps),
                               -np.diag(diagonal), rtol=1e-10)
    g = rng.normal(size=(6, 6))
    dense = g @ g.T + 10.0 * np.eye(6)
    estimate = probed_diagonal(lambda x: -dense @ x, np.ones(6), np.full(6, 1e-3), probes=4000)
    np.testing.assert_allclose(estimate, -np.diag(dense), rtol=0.03)


def test_the_optimiser_scale_takes_a_few_gradients_not_one_per_parameter():
    diary = _diary(days=10, prompts=7, seed=5)
    objective = ContinuousObjective(diary, SPEC, CT)
    theta = _theta(objective, DRIFT, DIFFUSION)
    calls = []
    gradient = objective.loglik_and_gradient
    objective.loglik_and_gradient = lambda x: calls.append(1) or gradient(x)
    scale = objective.optimiser_scale(theta, np.maximum(np.abs(theta), 0.1))
    assert theta.size > SCALE_PROBES + 1 and len(calls) == SCALE_PROBES + 1
    assert np.all(np.isfinite(scale)) and np.all(scale > 0)


def test_unstable_drift_is_outside_the_model_and_flagged():
    diary = _diary(days=5, prompts=6, seed=1)
    objective = ContinuousObjective(diary, SPEC, CT)
    theta = _theta(objective, np.array([[0.1, 0.0], [0.0, -0.5]]), DIFFUSION)
    with pytest.raises(NotAdmissible):
        objective.loglik(theta)
    sigma0 = np.eye(len(SPEC.items))
    _, flags = objective.figures(theta, -1.0, sigma0, None)
    assert [f.code for f in flags] == [FlagCode.DRIFT_NOT_STABLE]
    _, flags = objective.figures(_theta(objective, DRIFT, DIFFUSION), -1.0, sigma0, None)
    assert flags == []


# ----- the diary's intervals -----------------------------------------------------------------
def test_intervals_come_from_the_times_or_a_stated_spacing():
    diary = _diary(days=3, prompts=5, seed=2)
    hours = (diary.time - diary.time[0]) / np.timedelta64(1, "h")
    iv = prompt_intervals(diary, "minutes")
    later = np.r_[False, diary.segment[1:] == diary.segment[:-1]]
    np.testing.assert_allclose(iv.interval[later], np.diff(hours)[later[1:]] * 60.0)
    assert np.isnan(iv.interval[~later]).all()
    carried = prompt_intervals(diary, "hours", "carry")
    np.testing.assert_allclose(carried.interval[1:], np.diff(hours))   # nights included
    grid = simulate_diary(SPEC, days=2, prompts_per_day=4, seed=1, **TRUE)
    assert np.nanmax(prompt_intervals(grid, "hours", spacing=1.5).interval) == 1.5
    with pytest.raises(SpecError, match="prompt-spacing"):
        prompt_intervals(grid)
    with pytest.raises(SpecError, match="time of each prompt"):
        prompt_intervals(grid, night="carry", spacing=1.0)
    with pytest.raises(SpecError, match="lag order"):
        ContinuousObjective(diary, SPEC.with_lags(2), CT)


# ----- estimation ----------------------------------------------------------------------------
def test_a_fit_recovers_the_drift_and_reports_effects_over_intervals():
    diary = _diary(days=60, prompts=8, seed=4)
    result = fit(diary, SPEC, CT)
    assert result.converged and result.fit.exact
    states = list(SPEC.state_names)
    for p in result.table(Kind.DRIFT):   # each estimate within 3.5 standard errors of the truth
        truth = DRIFT[states.index(p.to), states.index(p.from_)]
        assert abs(p.estimate - truth) < 3.5 * p.se
    effects = effects_by_interval(result)
    np.testing.assert_allclose(effects.values[0], np.eye(2), atol=1e-14)   # B(0) = I exactly
    np.testing.assert_allclose(effects.lower[0], effects.upper[0])
    assert effects.intervals[-1] == 8.0
    median = result.continuous.median_interval
    drift = np.array([[result.get(Kind.DRIFT, fr, to).estimate for fr in states] for to in states])
    np.testing.assert_allclose(result.lagged[0], expm(drift * median), atol=1e-12)
    # delta-method band: the standard error of B_ij(D) from central differences of expm
    d = effects.intervals[12]
    free = [p for p in result.free_parameters]
    rows = [n for n, p in enumerate(free) if p.kind == Kind.DRIFT]
    jac = []
    for n in rows:
        e = np.zeros((2, 2))
        e[states.index(free[n].to), states.index(free[n].from_)] = 1e-6
        jac.append(((expm((drift + e) * d) - expm((drift - e) * d)) / 2e-6).ravel())
    jac = np.array(jac)
    se = np.sqrt(np.einsum("ri,rs,si->i", jac, result.covariance[np.ix_(rows, rows)], jac))
    np.testing.assert_allclose((effects.upper[12] - effects.values[12]).ravel(), 1.959963984540054 * se,
                               rtol=1e-6)
    again = FitResult.from_json(result.to_json())
    assert again.continuous == result.continuous


def _coverage(seed: int) -> dict[str, list[bool]]:
    """Per parameter kind: whether each 95% Wald interval of one simulated diary's fit (60
    days of 8 random prompts) holds the true value."""
    result = fit(_diary(days=60, prompts=8, seed=seed), SPEC, CT)
    assert result.converged
    states, items = list(SPEC.state_names), list(SPEC.items)
    truth = {Kind.DRIFT: lambda p: DRIFT[states.index(p.to), states.index(p.from_)],
             Kind.DIFFUSION: lambda p: DIFFUSION[states.index(p.to), states.index(p.from_)],
             Kind.LOADING: lambda p: TRUE["loadings"][items.index(p.to), states.index(p.from_)],
             Kind.INTERCEPT: lambda p: TRUE["intercepts"][items.index(p.to)],
             Kind.UNIQUE: lambda p: TRUE["unique"][items.index(p.to)]}
    out: dict[str, list[bool]] = {}
    for p in result.free_parameters:
        out.setdefault(str(p.kind), []).append(
            bool(abs(p.estimate - truth[p.kind](p)) <= 1.959963984540054 * p.se))
    return out


def _coverage_study(seeds: range) -> dict[str, np.ndarray]:
    pooled: dict[str, list[bool]] = {}
    for one in run_tasks(_coverage, [(seed,) for seed in seeds]):
        for kind, hits in one.items():
            pooled.setdefault(kind, []).extend(hits)
    return {kind: np.array(hits) for kind, hits in pooled.items()}


def test_coverage_of_every_parameter_kind_small_version():
    # 24 diaries: the 95% intervals of all free parameters together cover the truth in
    # 90-99% of cases (errors 30% too small would cover about 85%)
    covered = _coverage_study(range(100, 124))
    assert set(covered) == {"drift", "diffusion", "loading", "intercept", "unique"}
    assert 0.90 <= np.concatenate(list(covered.values())).mean() <= 0.99


@pytest.mark.slow
def test_coverage_of_every_parameter_kind_by_simulation():
    # 200 diaries: the 95% Wald intervals of each kind (drift, diffusion, loadings,
    # intercepts, unique variances) cover the truth in 93-97% of cases
    covered = _coverage_study(range(100, 300))
    print("\ncoverage over 200 diaries: " + ", ".join(
        f"{kind} {hits.mean():.3f} ({hits.size})" for kind, hits in covered.items()))
    for kind, hits in covered.items():
        assert 0.93 <= hits.mean() <= 0.97, kind


def test_items_on_far_apart_scales_give_the_same_drift_in_their_own_units():
    # the marker item of "calm" times 2^14: calm's unit grows by 2^14, so the drift from drive
    # to calm grows by 2^14 and from calm to drive shrinks by it (a change of units, common
    # practice); the auto-effects do not change
    diary = _diary(days=30, prompts=8, seed=6)
    plain = fit(diary, SPEC, CT)
    values = diary.values.copy()
    values[:, 0] *= 2.0 ** 14
    scaled = fit(replace(diary, values=values), SPEC, CT)
    factor = {("calm", "calm"): 1.0, ("drive", "drive"): 1.0, ("drive", "calm"): 2.0 ** 14,
              ("calm", "drive"): 2.0 ** -14}
    for p in plain.table(Kind.DRIFT):
        q = scaled.get(Kind.DRIFT, p.from_, p.to)
        assert q.estimate == pytest.approx(p.estimate * factor[(p.from_, p.to)],
                                           abs=1e-3 * p.se * factor[(p.from_, p.to)])


def test_the_bootstrap_judges_the_stability_of_the_drift():
    from lagwise.models.bootstrap import bootstrap
    diary = _diary(days=20, prompts=8, seed=7)
    result = fit(diary, SPEC, CT)
    boot = bootstrap(diary, SPEC, CT, result, replicates=3, seed=1, jobs=1)
    assert [(s.from_, s.to) for s in boot.stability()] == [
        (p.from_, p.to) for p in result.table(Kind.DRIFT) if p.free]
