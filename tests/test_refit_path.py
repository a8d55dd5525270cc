"""The fast refit path that resampling uses: the same optimum, reached with less work.

Data: diaries simulated from the two-state model of tests/two_state_model.py (known truth,
never a check value here); the checks compare the engine with itself along a slower route
whose answer is the definition (plain EM steps to their fixed point; the precise optimiser
at the typical sizes).
"""

from __future__ import annotations

import numpy as np

from lagwise.models.estimate import fit
from lagwise.models.estimators import FitOptions
from lagwise.models.objective import WindowObjective
from lagwise.models.patterns import PatternData
from lagwise.models.simulate import simulate_diary
from two_state_model import SPEC, TRUE


def _diary(seed: int):
    return simulate_diary(SPEC, **TRUE, days=30, prompts_per_day=7, p_missed=0.2,
                          p_item_skip=0.05, seed=seed)


def test_accelerated_em_reaches_the_plain_em_fixed_point():
    # SQUAREM (Varadhan & Roland 2008) only extrapolates between EM steps: its answer is the
    # point plain EM steps (Dempster, Laird & Rubin 1977) settle on, in fewer steps.
    rows = WindowObjective.build(_diary(3), SPEC, FitOptions()).rows
    data = PatternData(rows)
    step = data._em_step()
    mu, sigma = data.col_mean.copy(), np.diag(data.col_var)
    plain_steps = 0
    for plain_steps in range(1, 5000):
        mu_new, sigma_new = step(mu, sigma)
        done = np.max(np.abs(sigma_new - sigma)) < 1e-12 and np.max(np.abs(mu_new - mu)) < 1e-12
        mu, sigma = mu_new, sigma_new
        if done:
            break
    counted = [0]

    def counting():
        inner = PatternData._em_step(data)

        def wrapped(m, s):
            counted[0] += 1
            return inner(m, s)
        return wrapped

    data._em_step = counting
    mu_fast, sigma_fast, ll_fast, ok = data.saturated()
    assert ok
    np.testing.assert_allclose(mu_fast, mu, atol=1e-7)
    np.testing.assert_allclose(sigma_fast, sigma, atol=1e-7)
    assert abs(ll_fast - data.loglik(mu, sigma, gradient=False)[0]) < 1e-8
    assert counted[0] < plain_steps


def test_refit_from_a_result_scales_by_its_errors_and_finds_the_same_optimum():
    # Started from a previous result the optimiser works in that result's standard errors;
    # the optimum is the one the precise optimiser finds at the typical sizes (started from
    # the same values given as a plain vector), within a thousandth of a standard error.
    first = fit(_diary(11), SPEC)
    se = np.array([p.se for p in first.free_parameters])
    values = np.array([p.estimate for p in first.free_parameters])
    for seed in (12, 13):
        other = _diary(seed)
        scaled = fit(other, SPEC, standard_errors=False, start=first)
        plain = fit(other, SPEC, standard_errors=False, start=values)
        assert scaled.converged and plain.converged
        a = np.array([p.estimate for p in scaled.free_parameters])
        b = np.array([p.estimate for p in plain.free_parameters])
        assert np.max(np.abs(a - b) / se) < 1e-3
        assert scaled.iterations < plain.iterations
