"""The window estimators checked against the outside world (semopy, statsmodels, scipy and textbook values).

Sources, beside each check:
- semopy (ModelMeans, normal ML) fitting the same first-copy-free window model on the same
  window rows, written independently in models/reference_sem.py;
- statsmodels' VAR (OLS with a constant, statsmodels.tsa.api.VAR) and OLS regressions;
- scipy.linalg.solve_discrete_lyapunov for the stationary latent covariance;
- the Holzinger and Swineford (1939) three-factor model: chi-square 85.3 on 24 df with
  N = 301 and its other fit indices, widely reproduced textbook values (from memory), and
  semopy's loadings;
- central finite differences of the log-likelihood for its analytic gradient (common practice).
Simulated diaries come from models/simulate.py with parameters chosen here (known truth).
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
import statsmodels.api as sm
from scipy.linalg import solve_discrete_lyapunov
from statsmodels.tsa.api import VAR

from lagwise.models import reference_sem
from lagwise.models.diary import Diary
from lagwise.models.estimate import fit
from lagwise.models.objective import WindowObjective
from lagwise.models.simulate import simulate_diary
from lagwise.models.estimators import FitOptions
from lagwise.models.spec import make_spec
from lagwise.models.windows import lag_windows

# two states with three items each; one item's loading is small so the states differ
LAM = np.array([[1.0, 0.0], [0.8, 0.0], [0.6, 0.0], [0.0, 1.0], [0.0, 1.2], [0.0, 0.7]])
NU = np.array([3.0, 2.5, 4.0, 1.0, 2.0, 3.5])
THETA = np.array([0.5, 0.4, 0.6, 0.3, 0.5, 0.45])
PSI = np.array([[1.0, 0.3], [0.3, 0.8]])
B1 = np.array([[0.5, 0.2], [-0.15, 0.35]])
B2 = np.array([[0.15, 0.0], [0.0, 0.1]])
STATES = {"mood": ["calm", "content", "cheerful"], "strain": ["tense", "worried", "restless"]}


def _diary(lags: int, days: int, prompts: int, seed: int, **kw):
    spec = make_spec(STATES, lags=lags)
    lagged = [B1, B2][:lags]
    return spec, simulate_diary(spec, loadings=LAM, intercepts=NU, unique=THETA, lagged=lagged,
                                innovation=PSI, days=days, prompts_per_day=prompts, seed=seed,
                                **kw)


# ----- 5a: first-copy-free against semopy on identical windows --------------------------
CASES_5A = [
    # (lags, depth, innovations, lag-2 mask)
    pytest.param(1, 1, "free", None, id="lag1-depth1"),
    pytest.param(1, 2, "independent", None, id="lag1-depth2-independent"),
    pytest.param(2, 2, "free", ((True, False), (False, True)), id="lag2-depth2-sparse"),
]


@pytest.mark.parametrize("lags,depth,innovations,mask2", CASES_5A)
def test_first_copy_free_matches_semopy(lags, depth, innovations, mask2):
    # semopy ModelMeans, normal ML, equality across copies by shared labels, latent intercepts
    # on the regressed copies as in the first-copy-free estimator (reference_sem, means="states").
    spec, diary = _diary(lags, days=40, prompts=10, seed=11 + depth + lags)
    spec = replace(spec, innovations=innovations)
    if mask2 is not None:
        spec = spec.with_paths(2, np.array(mask2))
    ours = fit(diary, spec, FitOptions(estimator="first-copy-free", depth=depth))
    ref = reference_sem.fit_windows(lag_windows(diary, depth), spec, means="states")
    assert ours.converged and ref.converged
    assert ours.n_windows == ref.n_rows
    assert np.max(np.abs(ours.loadings - ref.loadings)) < 1e-3
    for b_ours, b_ref in zip(ours.lagged, ref.lagged, strict=True):
        assert np.max(np.abs(b_ours - b_ref)) < 1e-3
    assert np.max(np.abs(ours.innovation - ref.innovation)) < 1e-3
    assert np.max(np.abs(ours.unique - ref.unique)) < 1e-3
    assert np.max(np.abs(ours.intercepts - ref.intercepts)) < 1e-3
    assert ours.fit.df == ref.df
    assert abs(ours.fit.chi2 - ref.chi2) < 0.01 * ref.chi2


# ----- 5b: single-item states are a VAR(1): OLS coefficients --------------------------------
VAR_B = np.array([[0.45, 0.2, 0.0], [-0.1, 0.3, 0.15], [0.0, 0.25, 0.4]])
VAR_PSI = np.array([[1.0, 0.3, 0.1], [0.3, 0.9, 0.2], [0.1, 0.2, 1.1]])
VAR_SPEC = make_spec({"calm": ["calm"], "tense": ["tense"], "tired": ["tired"]}, lags=1)


def _var_diary(days: int, prompts: int, seed: int) -> Diary:
    return simulate_diary(VAR_SPEC, loadings=np.eye(3), intercepts=np.array([4.0, 2.0, 3.0]),
                          unique=np.zeros(3), lagged=[VAR_B], innovation=VAR_PSI, days=days,
                          prompts_per_day=prompts, seed=seed)


def test_single_items_one_segment_equal_statsmodels_var():
    # statsmodels.tsa.api.VAR(1) with a constant (OLS) on one segment: its regression rows
    # are exactly the depth-1 windows.
    diary = _var_diary(days=1, prompts=300, seed=5)
    ours = fit(diary, VAR_SPEC, FitOptions(estimator="first-copy-free"))
    ols = VAR(diary.values).fit(1, trend="c")
    assert ours.converged
    assert np.max(np.abs(ours.lagged[0] - ols.coefs[0])) < 1e-5


def test_single_items_many_days_equal_statsmodels_ols():
    # statsmodels OLS of each item at t on all items at t-1 with a constant, over the same
    # window rows (no window spans a night).
    diary = _var_diary(days=30, prompts=10, seed=6)
    windows = lag_windows(diary, 1)
    x = sm.add_constant(windows.data[:, 3:])
    coefs = np.array([sm.OLS(windows.data[:, i], x).fit().params[1:] for i in range(3)])
    ours = fit(diary, VAR_SPEC, FitOptions(estimator="first-copy-free"))
    assert ours.converged
    assert np.max(np.abs(ours.lagged[0] - coefs)) < 1e-5


def test_reference_window_model_with_state_intercepts_is_ols():
    # The semopy reference itself: with a latent intercept on the newer copy, single-item
    # states have saturated means, so the ML lagged paths are statsmodels' OLS ones.
    diary = _var_diary(days=30, prompts=10, seed=6)
    windows = lag_windows(diary, 1)
    x = sm.add_constant(windows.data[:, 3:])
    coefs = np.array([sm.OLS(windows.data[:, i], x).fit().params[1:] for i in range(3)])
    ref = reference_sem.fit_windows(windows, VAR_SPEC, means="states")
    assert ref.converged and ref.df == 0
    assert np.max(np.abs(ref.lagged[0] - coefs)) < 1e-5


# ----- 5c: stationary latent covariance is the Lyapunov solution ---------------------------
def test_stationary_latent_covariance_lag1_is_scipy_lyapunov():
    # scipy.linalg.solve_discrete_lyapunov(B, Psi) solves Phi = B Phi B' + Psi.
    spec, diary = _diary(1, days=30, prompts=10, seed=21)
    res = fit(diary, spec, FitOptions(estimator="stationary"))
    expected = solve_discrete_lyapunov(res.lagged[0], res.innovation)
    assert np.allclose(res.latent_cov, expected, rtol=1e-8, atol=1e-10)


def test_stationary_latent_covariance_lag2_is_scipy_lyapunov_companion():
    # Companion form F = [[B1, B2], [I, 0]], Q = blockdiag(Psi, 0) (common practice);
    # Phi_0 is the top-left block of solve_discrete_lyapunov(F, Q).
    spec, diary = _diary(2, days=30, prompts=10, seed=22)
    res = fit(diary, spec, FitOptions(estimator="stationary"))
    k = spec.k
    f = np.zeros((2 * k, 2 * k))
    f[:k, :k], f[:k, k:], f[k:, :k] = res.lagged[0], res.lagged[1], np.eye(k)
    q = np.zeros((2 * k, 2 * k))
    q[:k, :k] = res.innovation
    expected = solve_discrete_lyapunov(f, q)[:k, :k]
    assert np.allclose(res.latent_cov, expected, rtol=1e-8, atol=1e-10)


# ----- 5d: depth 0 is the plain factor model (Holzinger-Swineford) -------------------------
def test_depth_zero_is_the_holzinger_swineford_factor_model():
    # Holzinger & Swineford (1939) data shipped with semopy; three-factor model
    # chi-square 85.3 on 24 df, N = 301 (widely reproduced textbook value, from memory);
    # loadings against semopy's covariance-only ML fit of the same model.
    frame = reference_sem.holzinger_swineford_data()
    states = reference_sem.HOLZINGER_STATES
    items = tuple(it for its in states.values() for it in its)
    n = len(frame)
    diary = Diary(items=items, values=frame[list(items)].to_numpy(dtype=float),
                  segment=np.zeros(n, dtype=int), day=np.zeros(n, dtype=int),
                  day_labels=("all",), prompt=np.arange(1, n + 1, dtype=float))
    spec = make_spec(states, lags=0)
    ours = fit(diary, spec, FitOptions(estimator="first-copy-free"))
    ref = reference_sem.fit_holzinger_swineford()
    assert ours.converged and ref.converged
    assert ours.n_windows == 301
    assert ours.fit.df == 24
    assert round(ours.fit.chi2, 1) == 85.3
    assert np.max(np.abs(ours.loadings - ref.loadings)) < 1e-3
    # the same textbook output's other indices (from memory): CFI 0.931, TLI 0.896,
    # RMSEA 0.092 with 90% interval 0.071-0.114, SRMR 0.065, AIC 7535.490, BIC 7646.703
    fi = ours.fit
    assert (round(fi.cfi, 3), round(fi.tli, 3), round(fi.rmsea, 3)) == (0.931, 0.896, 0.092)
    assert tuple(round(v, 3) for v in fi.rmsea_ci) == (0.071, 0.114)
    assert round(fi.srmr, 3) == 0.065
    assert (round(fi.aic, 1), round(fi.bic, 1)) == (7535.5, 7646.7)
    stationary = fit(diary, spec, FitOptions(estimator="stationary"))
    assert round(stationary.fit.chi2, 1) == 85.3
    assert np.max(np.abs(stationary.loadings - ref.loadings)) < 1e-3


def test_reference_holzinger_swineford_reproduces_the_textbook_fit():
    # The semopy reference on its own: chi-square 85.3 on 24 df (from memory, see above).
    ref = reference_sem.fit_holzinger_swineford()
    assert ref.n_rows == 301 and ref.df == 24
    assert round(ref.chi2, 1) == 85.3


# ----- 5f: analytic gradients against central differences ----------------------------------
GRADIENT_CASES = [
    pytest.param(lags, est, innov, id=f"lag{lags}-{est}-{innov}")
    for lags in (1, 2)
    for est in ("stationary", "first-copy-free")
    for innov in ("free", "independent", "partial")
]


def _trial_point(objective: WindowObjective, seed: int) -> np.ndarray:
    """Start values moved off any symmetric or zero pattern (variances scaled, others shifted)."""
    rng = np.random.default_rng(seed)
    theta = objective.start()
    for n, entry in enumerate(objective.layout.free_entries):
        if entry.is_variance:
            theta[n] *= np.exp(0.2 * rng.standard_normal())
        elif entry.block == "B":
            theta[n] += 0.05 * rng.standard_normal()
        elif entry.block in ("pcor", "d"):
            theta[n] = 0.2 * rng.uniform(-1, 1)
        else:
            theta[n] += 0.1 * max(abs(theta[n]), 0.5) * rng.standard_normal()
    return theta


def _check_gradient(objective: WindowObjective, theta: np.ndarray) -> float:
    """max |analytic - central difference| / max |analytic| (steps 1e-6 x parameter size)."""
    _, grad = objective.loglik_and_gradient(theta)
    numeric = np.empty_like(grad)
    for n in range(theta.size):
        h = 1e-6 * max(abs(theta[n]), 1.0)
        up, down = theta.copy(), theta.copy()
        up[n] += h
        down[n] -= h
        numeric[n] = (objective.loglik(up) - objective.loglik(down)) / (2 * h)
    return float(np.max(np.abs(grad - numeric)) / np.max(np.abs(grad)))


# three states (3, 3 and 2 items) for the gradient checks, so a partial-correlation zero
# leaves other partial correlations free
GRAD_STATES = {"mood": ["calm", "content", "cheerful"], "strain": ["tense", "worried", "restless"],
               "energy": ["alert", "tired"]}
GRAD_LAM = np.zeros((8, 3))
GRAD_LAM[:3, 0], GRAD_LAM[3:6, 1], GRAD_LAM[6:, 2] = [1.0, 0.8, 0.6], [1.0, 1.2, 0.7], [1.0, -0.9]
GRAD_B1 = np.array([[0.4, 0.1, 0.0], [-0.1, 0.3, 0.1], [0.0, 0.15, 0.35]])
GRAD_B2 = np.array([[0.1, 0.0, 0.0], [0.0, 0.1, 0.0], [0.05, 0.0, 0.1]])
GRAD_PSI = np.array([[1.0, 0.3, 0.1], [0.3, 0.8, 0.2], [0.1, 0.2, 0.9]])


@pytest.mark.parametrize("lags,estimator,innovations", GRADIENT_CASES)
def test_gradient_matches_central_differences_fiml_with_gaps(lags, estimator, innovations):
    # Full-information likelihood over missingness patterns: missed prompts and skipped items.
    zeros = (("mood", "energy"),) if innovations == "partial" else ()
    spec = make_spec(GRAD_STATES, lags=lags, innovations=innovations, partial_zeros=zeros)
    if lags == 2:
        spec = spec.with_paths(2, GRAD_B2 != 0)
    diary = simulate_diary(spec, loadings=GRAD_LAM, intercepts=np.linspace(1, 4, 8),
                           unique=np.full(8, 0.5), lagged=[GRAD_B1, GRAD_B2][:lags],
                           innovation=GRAD_PSI, days=12, prompts_per_day=8, p_missed=0.1,
                           p_item_skip=0.05, seed=31 + lags)
    options = FitOptions(estimator=estimator, missing="fiml")
    windows = lag_windows(diary, options.window_depth(spec))
    assert windows.n_partial > 0
    objective = WindowObjective(windows, spec, options)
    theta = _trial_point(objective, seed=lags)
    assert _check_gradient(objective, theta) < 1e-5


@pytest.mark.parametrize("estimator", ["stationary", "first-copy-free"])
def test_gradient_with_unique_autocorrelation_and_variance_identification(estimator):
    spec, diary = _diary(1, days=12, prompts=8, seed=41, p_missed=0.1, p_item_skip=0.05,
                         unique_autocorrelation={"calm": 0.3, "tense": 0.2})
    spec = replace(spec, identification="variance", unique_autocorrelation=("calm", "tense"))
    options = FitOptions(estimator=estimator, missing="fiml", depth=2)
    objective = WindowObjective(lag_windows(diary, 2), spec, options)
    theta = _trial_point(objective, seed=7)
    assert _check_gradient(objective, theta) < 1e-5
