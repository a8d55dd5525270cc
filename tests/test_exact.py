"""The exact (Kalman filter) estimator: checks against the window estimator and the dense
likelihood. The filter itself is checked against statsmodels and the dense normal density in
tests/test_kalman.py."""

from __future__ import annotations

import numpy as np
import pytest
from scipy.stats import multivariate_normal
from two_state_model import SPEC, TRUE

from lagwise.models.estimate import fit
from lagwise.models.exact import ExactObjective, _join_days, window_estimate
from lagwise.models.simulate import simulate_diary
from lagwise.models.estimators import FitOptions


def test_exact_and_window_estimates_agree_on_long_complete_series():
    # Both estimators are consistent for the same stationary model (README, "The model in one paragraph"):
    # on a long complete diary their estimates differ by much less than the true effects.
    diary = simulate_diary(SPEC, days=150, prompts_per_day=10, seed=3, **TRUE)
    window = fit(diary, SPEC)
    exact = fit(diary, SPEC, FitOptions(estimator="exact"))
    assert exact.converged and exact.fit.exact and exact.fit.chi2 is None
    np.testing.assert_allclose(exact.lagged[0], window.lagged[0], atol=0.03)
    np.testing.assert_allclose(exact.loadings, window.loadings, atol=0.03)
    np.testing.assert_allclose(exact.lagged[0], TRUE["lagged"][0], atol=0.08)
    # the exact maximum is at least the exact likelihood at the window estimate
    objective = ExactObjective(diary, SPEC, FitOptions(estimator="exact"))
    start = {(p.kind, p.from_, p.to): p.estimate for p in window.parameters}
    theta_w = np.array([start[(e.kind, e.from_, e.to)] for e in objective.layout.free_entries])
    assert exact.fit.loglik >= objective.loglik(theta_w) - 1e-6
    assert exact.fit.bic == pytest.approx(-2 * exact.fit.loglik + exact.fit.n_free * np.log(exact.fit.n_obs))


def test_start_values_are_the_stationary_window_estimate():
    # models.exact: the exact fit starts from the window estimate (its optimum only;
    # the window fit's final Newton steps move it by less than the tolerance below).
    diary = simulate_diary(SPEC, days=40, prompts_per_day=8, p_missed=0.1, seed=5, **TRUE)
    options = FitOptions(estimator="exact")
    objective = ExactObjective(diary, SPEC, options)
    named, start_loglik = window_estimate(diary, SPEC, options, None)
    theta0 = objective.layout.theta_from(named)
    window = fit(diary, SPEC)
    estimate = {(p.kind, p.from_, p.to): p.estimate for p in window.parameters}
    expected = [estimate[(e.kind, e.from_, e.to)] for e in objective.layout.free_entries]
    np.testing.assert_allclose(theta0, expected, rtol=1e-3, atol=1e-4)
    assert start_loglik == pytest.approx(window.fit.loglik, rel=1e-7)


def test_night_gap_joins_days_with_missed_prompts():
    values = np.arange(12.0).reshape(6, 2)
    segment = np.array([0, 0, 0, 1, 1, 2])
    joined, seg = _join_days(values, segment, 2)
    assert joined.shape == (10, 2) and np.all(seg == 0)
    assert np.isnan(joined[3:5]).all() and np.isnan(joined[7:9]).all()
    np.testing.assert_array_equal(joined[[0, 1, 2, 5, 6, 9]], values)


def test_exact_loglik_equals_dense_density_of_each_day():
    # Days restart from the stationary distribution, so the exact likelihood is the sum over
    # days of the normal log-density with the block-Toeplitz covariance (common practice).
    diary = simulate_diary(SPEC, days=4, prompts_per_day=4, p_missed=0.2, seed=8, **TRUE)
    objective = ExactObjective(diary, SPEC, FitOptions(estimator="exact"))
    from lagwise.models.parameters import Matrices
    m = Matrices(nu=TRUE["intercepts"], lam=TRUE["loadings"], theta=TRUE["unique"], d=np.zeros(6),
                 lagged=np.array(TRUE["lagged"]), psi=TRUE["innovation"])
    theta = objective.layout.pack(m)
    from lagwise.models.lyapunov import stationary_covariance
    phi = [stationary_covariance(TRUE["lagged"], TRUE["innovation"])]
    for _ in range(3):
        phi.append(TRUE["lagged"][0] @ phi[-1])
    lam = TRUE["loadings"]
    total = 0.0
    for d in range(4):
        y = diary.values[diary.segment == d]
        big = np.zeros((24, 24))
        for a in range(4):
            for b in range(4):
                h = a - b
                blk = lam @ (phi[h] if h >= 0 else phi[-h].T) @ lam.T + (np.diag(TRUE["unique"]) if h == 0 else 0)
                big[a * 6:(a + 1) * 6, b * 6:(b + 1) * 6] = blk
        vec = y.reshape(-1)
        obs = ~np.isnan(vec)
        if obs.any():
            total += multivariate_normal.logpdf(vec[obs], np.tile(TRUE["intercepts"], 4)[obs], big[np.ix_(obs, obs)])
    assert objective.loglik(theta) == pytest.approx(total, rel=1e-10)


def test_e1_exact_fit_against_the_published_reference():
    # Lutkepohl (2005) data set e1 as shipped with statsmodels (dln investment, income,
    # consumption, 1960Q2-1978Q4): one state, lag 1, intercepts, innovation variance 1.
    # Reference: statsmodels' test fixture lutkepohl_dfm_exog1 (produced there by an
    # independent program): log-likelihood 596.978 at the parameters below.
    # That point is a local maximum with every unique variance positive. Lagwise's
    # estimator, whose unique variances may reach 0, finds a higher maximum on the boundary
    # (consumption's unique variance 0; it flags it as a Heywood estimate); statsmodels'
    # own evaluation of the likelihood at Lagwise's estimate confirms the higher value.
    from statsmodels.tsa.statespace.dynamic_factor import DynamicFactor
    from statsmodels.tsa.statespace.tests.results import (
        results_dynamic_factor,
        results_varmax,
    )

    from lagwise.models.diary import Diary
    from lagwise.models.spec import ModelSpec, State

    raw = np.asarray(results_varmax.lutkepohl_data, dtype=float)
    y = np.diff(np.log(raw), axis=0)[:75]
    diary = Diary(items=("inv", "inc", "cons"), values=y, segment=np.zeros(75, int),
                  day=np.zeros(75, int), day_labels=("all",), prompt=np.arange(1.0, 76.0))
    spec = ModelSpec(states=(State("growth", ("inv", "inc", "cons")),), lags=1,
                     identification="variance")
    fx = results_dynamic_factor.lutkepohl_dfm_exog1
    ref = np.asarray(fx["params"])
    objective = ExactObjective(diary, spec, FitOptions(estimator="exact"))
    # the fixture's parameter order (loadings, intercepts, unique, AR) is Lagwise's order too
    theta_ref = ref
    assert [e.kind for e in objective.layout.free_entries] == (
        ["loading"] * 3 + ["intercept"] * 3 + ["unique"] * 3 + ["inertia"])
    ll_ref, grad = objective.loglik_and_gradient(theta_ref)
    assert ll_ref == pytest.approx(596.978, abs=1e-3)
    # a local maximum of Lagwise's likelihood too: the gradient (scaled by each parameter's
    # size) vanishes there up to the fixture's printed precision
    assert np.max(np.abs(grad * np.abs(theta_ref))) < 5e-3
    result = fit(diary, spec, FitOptions(estimator="exact"))
    assert result.converged and result.fit.loglik >= fx["loglike"] - 1e-6
    model = DynamicFactor(y, k_factors=1, factor_order=1, exog=np.ones((75, 1)))
    ours = np.r_[result.loadings[:, 0], result.intercepts, result.unique, result.lagged[0][0, 0]]
    assert model.loglike(ours) == pytest.approx(result.fit.loglik, rel=1e-10)
    assert any("Heywood" in f for f in result.flags)
