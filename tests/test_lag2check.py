"""Checks of the lag-2 check (models.lag2check): score tests, their ingredients, Holm, and
the behaviour of the whole check on simulated diaries with known truth.

Sources beside each check:
- asymptotic equivalence of the score (modification index) and likelihood-ratio tests of
  one fixed parameter, and the expected parameter change as the one-step estimate of the
  freed parameter (Sorbom 1989; Saris, Satorra & Sorbom 1987), checked against an
  independent refit of the model with that one parameter free;
- analytic gradient against central finite differences of the log-likelihood (common
  practice);
- expected information of the normal model: at data whose sample means and covariances
  equal the model-implied ones, the observed information (negative Hessian) equals the
  expected information exactly, pattern by pattern (standard normal-theory result: the
  Hessian terms carrying S - Sigma and ybar - mu vanish);
- Holm (1979) adjusted p-values against statsmodels.stats.multitest.multipletests;
- simulations from models.simulate with known truth: a true lag-2 path is found, its
  power agrees with the noncentral chi-square power of the score test (Satorra & Saris 1985;
  Saris, Satorra & Sorbom 1987), and on lag-1 data the likelihood-ratio test and every
  single-path score test reject at about the nominal rate (chi-square means: standard
  results; Monte Carlo error from the replications themselves).
"""

from __future__ import annotations

from dataclasses import replace
from functools import lru_cache

import numpy as np
import pytest
from scipy.stats import binom, chi2, ncx2
from statsmodels.stats.multitest import multipletests

from lagwise.models.estimate import fit
from lagwise.models.solution import solve
from lagwise.models.lag2check import holm, lag2_check, lag2_version
from lagwise.models.objective import WindowObjective
from lagwise.models.parameters import Matrices
from lagwise.models.simulate import simulate_diary
from lagwise.models.estimators import FitOptions
from lagwise.models.spec import make_spec
from lagwise.models.windows import LagWindows, lag_windows

STATES = {"Tension": ["tense", "restless", "worried"], "Mood": ["cheerful", "content", "relaxed"]}
SPEC1 = make_spec(STATES, lags=1)
SPEC2 = SPEC1.with_lags(2)
LOADINGS = np.array([[1.0, 0.0], [0.8, 0.0], [0.9, 0.0], [0.0, 1.0], [0.0, 0.7], [0.0, 0.85]])
UNIQUE = np.full(6, 0.4)
B1 = np.array([[0.4, 0.1], [0.0, 0.3]])          # row: state at t, column: state at t-1
PSI = np.array([[1.0, 0.3], [0.3, 1.0]])
TRUE_PATH = ("lag2", "Tension", "Mood")           # Tension at t-2 -> Mood at t
DEPTH2 = FitOptions(depth=2)
PROMPTS = 10
# Window depth on which the check scores each kind of path: the independent refit of test (a)
# must use the same windows.
SCORED_ON = {"lag2": FitOptions(depth=2), "unique_autocorrelation": FitOptions(depth=1)}
STRONG = 0.5   # a lag-2 path this large is found in a 300-prompt diary (noncentrality ~ 35)


def _diary(seed: int, days: int, lag2: float = 0.0, autocorrelation=None, **kw):
    """A simulated diary (10 prompts a day) with a lag-2 path Tension -> Mood of size `lag2`."""
    b2 = np.zeros((2, 2))
    b2[1, 0] = lag2
    return simulate_diary(SPEC2, loadings=LOADINGS, intercepts=np.zeros(6), unique=UNIQUE,
                          lagged=[B1, b2], innovation=PSI, days=days, prompts_per_day=PROMPTS,
                          unique_autocorrelation=autocorrelation, seed=seed, **kw)


def _tests(check):
    return {(t.kind, t.from_, t.to): t for t in check.paths}


def _one_path_spec(kind: str, from_: str, to: str):
    """The lag-1 model with exactly one more parameter free (what a score test is about)."""
    if kind == "unique_autocorrelation":
        return replace(SPEC1, unique_autocorrelation=(to,))
    mask = np.zeros((2, 2), bool)
    names = SPEC1.state_names
    mask[names.index(to), names.index(from_)] = True
    return SPEC2.with_paths(2, mask)


# ----- (a) score test against the likelihood ratio of an actual refit -----------------------
def test_score_and_epc_agree_with_refit_freeing_each_path():
    # Sorbom (1989); Saris, Satorra & Sorbom (1987): for one fixed parameter the score
    # statistic and the likelihood-ratio statistic of freeing it are asymptotically
    # equivalent, and the expected parameter change approximates the estimate after freeing.
    # Small true effects: lag-2 Tension -> Mood 0.1 and an autocorrelated unique part of
    # 'content' (0.15); every other tested parameter is truly 0. Each of the 10 tests is
    # compared with an independent refit on the same lag windows.
    diary = _diary(seed=0, days=40, lag2=0.1, autocorrelation={"content": 0.15})
    check = lag2_check(diary, SPEC1)
    restricted = {kind: fit(diary, SPEC1, options) for kind, options in SCORED_ON.items()}
    # the restricted model of the check is the lag-1 model on depth-2 windows
    assert restricted["lag2"].fit.loglik == pytest.approx(check.restricted.fit.loglik, abs=1e-6)
    tests = _tests(check)
    assert len(tests) == 4 + 6
    for key, t in tests.items():
        freed = fit(diary, _one_path_spec(*key), SCORED_ON[key[0]])
        assert freed.converged, key
        lr = 2.0 * (freed.fit.loglik - restricted[key[0]].fit.loglik)
        # close agreement: within 12% of the larger statistic (plus 0.05 for values near 0);
        # a wrong information matrix or gradient scale would miss by a factor, not by percent
        assert abs(t.score - lr) <= 0.12 * max(t.score, lr) + 0.05, (key, t.score, lr)
        estimate = freed.get(*key)
        # the EPC is one scoring step from 0, so its error is of second order in the size of
        # the change: within 10% of the refitted estimate plus a tenth of its standard error
        assert abs(t.epc - estimate.estimate) <= 0.1 * abs(estimate.estimate) + 0.1 * estimate.se, \
            (key, t.epc, estimate.estimate, estimate.se)
        assert t.p == pytest.approx(chi2.sf(t.score, 1))     # referred to chi-square(1)
    # the LR test of the check: all lag-2 paths free on the same windows (refit here)
    extended = fit(diary, lag2_version(SPEC1), DEPTH2)
    lr_all = 2.0 * (extended.fit.loglik - restricted["lag2"].fit.loglik)
    assert check.lr_chi2 == pytest.approx(lr_all, abs=1e-4)
    assert check.lr_df == 4
    assert check.lr_p == pytest.approx(chi2.sf(check.lr_chi2, 4))
    # Holm over all the tests together (statsmodels, independent implementation)
    raw = np.array([t.p for t in check.paths])
    assert np.allclose([t.p_holm for t in check.paths], multipletests(raw, method="holm")[1])


def test_standardized_epc_uses_the_state_standard_deviations():
    # Standardized expected change of a lag-2 path: EPC x sd(state at t-2) / sd(state at t),
    # the usual standardization of a regression path (common practice), with the state
    # standard deviations of the lag-1 fit.
    check = lag2_check(_diary(seed=3, days=30, lag2=0.1), SPEC1)
    sd = np.sqrt(np.diag(check.restricted.latent_cov))
    names = SPEC1.state_names
    for t in check.paths:
        if t.kind == "lag2":
            ratio = sd[names.index(t.from_)] / sd[names.index(t.to)]
            assert t.std_epc == pytest.approx(t.epc * ratio, rel=1e-9)


# ----- (b) gradient and expected information -----------------------------------------------
def _full_objective(windows: LagWindows) -> WindowObjective:
    """Every tested parameter free: all lag-2 paths and every item's unique autocorrelation."""
    spec = replace(lag2_version(SPEC1), unique_autocorrelation=SPEC1.items)
    return WindowObjective(windows, spec, DEPTH2)


def _restricted_point(obj: WindowObjective, result) -> np.ndarray:
    """The lag-1 estimate in the full parameter vector (tested parameters at 0)."""
    values = {(p.kind, p.from_, p.to): p.estimate for p in result.parameters}
    return np.array([values.get((e.kind, e.from_, e.to), 0.0) for e in obj.layout.free_entries])


def test_gradient_matches_finite_differences_of_the_loglik():
    # Central differences of WindowObjective.loglik (common practice), at the point where the
    # score tests evaluate it: the lag-1 estimate, with missed prompts and skipped items so
    # that several missingness patterns enter.
    diary = _diary(seed=5, days=25, lag2=0.1, p_missed=0.1, p_item_skip=0.05)
    result = fit(diary, SPEC1, DEPTH2)
    obj = _full_objective(lag_windows(diary, 2))
    assert obj.data.n_patterns > 3
    theta = _restricted_point(obj, result)
    _, grad = obj.loglik_and_gradient(theta)
    numeric = np.empty_like(theta)
    for i in range(theta.size):
        h = 1e-5 * max(abs(theta[i]), 0.1)
        e = np.zeros_like(theta)
        e[i] = h
        numeric[i] = (obj.loglik(theta + e) - obj.loglik(theta - e)) / (2 * h)
    # at the lag-1 estimate the free lag-1 parameters have gradient ~0, the tested ones not
    tested = np.array([e.kind in ("lag2", "unique_autocorrelation") for e in obj.layout.free_entries])
    assert np.max(np.abs(grad[tested])) > 1.0
    assert np.allclose(grad, numeric, rtol=1e-5, atol=1e-4 * obj.n_rows ** 0.5), np.abs(grad - numeric).max()


def _exact_moment_rows(mu: np.ndarray, sigma: np.ndarray, n: int, rng) -> np.ndarray:
    """n rows whose sample mean is mu and ML sample covariance (divisor n) is sigma, exactly."""
    z = rng.standard_normal((n, mu.size))
    z -= z.mean(axis=0)
    z = z @ np.linalg.inv(np.linalg.cholesky(z.T @ z / n)).T
    return mu + z @ np.linalg.cholesky(sigma).T


def test_expected_information_equals_observed_information_at_model_moments():
    # Normal theory: -d2 loglik = n [1/2 tr(S^-1 dS_i S^-1 dS_j) + dmu_i' S^-1 dmu_j] + terms in
    # (sample cov - Sigma) and (sample mean - mu); with each missingness pattern's sample
    # moments equal to the implied moments of its observed entries those terms vanish, so the
    # observed information (central differences of the gradient, checked above) must equal
    # expected_information. Two patterns: complete windows and windows missing occasion t-2.
    diary = _diary(seed=7, days=30, lag2=0.1)
    result = fit(diary, SPEC1, DEPTH2)
    base = _full_objective(lag_windows(diary, 2))
    theta = _restricted_point(base, result)
    theta[[n for n, e in enumerate(base.layout.free_entries) if e.kind == "lag2"]] = 0.08
    theta[[n for n, e in enumerate(base.layout.free_entries) if e.kind == "unique_autocorrelation"]] = 0.1
    imp = base.implied(theta)
    rng = np.random.default_rng(11)
    p = len(SPEC1.items)
    complete = _exact_moment_rows(imp.mu, imp.sigma, 150, rng)
    partial = np.full((90, 3 * p), np.nan)
    partial[:, :2 * p] = _exact_moment_rows(imp.mu[:2 * p], imp.sigma[:2 * p, :2 * p], 90, rng)
    rows = np.vstack([complete, partial])
    obj = _full_objective(LagWindows(depth=2, items=SPEC1.items, data=rows, occasion=np.arange(len(rows))))
    assert obj.data.n_patterns == 2
    info = obj.expected_information(theta)
    m = theta.size
    observed = np.empty((m, m))
    for i in range(m):
        h = 1e-5 * max(abs(theta[i]), 0.1)
        e = np.zeros(m)
        e[i] = h
        observed[:, i] = -(obj.loglik_and_gradient(theta + e)[1] - obj.loglik_and_gradient(theta - e)[1]) / (2 * h)
    observed = 0.5 * (observed + observed.T)
    scale = np.sqrt(np.outer(np.diag(info), np.diag(info)))
    assert np.all(np.diag(info) > 0)
    assert np.max(np.abs(info - observed) / scale) < 1e-5


# ----- (c) Holm -----------------------------------------------------------------------------
@pytest.mark.parametrize("pvalues", [
    [0.01, 0.04, 0.03, 0.005, 0.5, 0.2],
    [0.02, 0.02, 0.02, 0.9],                         # ties
    [1e-6, 0.3, 0.3, 0.0125, 0.04, 0.011, 0.999],
    [0.7],
])
def test_holm_matches_statsmodels(pvalues):
    # statsmodels.stats.multitest.multipletests(method="holm") (independent implementation).
    p = np.array(pvalues)
    assert np.allclose(holm(p), multipletests(p, method="holm")[1], rtol=0, atol=1e-15)


def test_holm_matches_statsmodels_on_random_pvalues():
    # statsmodels.stats.multitest.multipletests(method="holm").
    rng = np.random.default_rng(3)
    for size in (2, 10, 45):
        p = rng.uniform(0, 0.2, size) ** 2
        assert np.allclose(holm(p), multipletests(p, method="holm")[1], rtol=0, atol=1e-15)


# ----- (d) simulations with known truth --------------------------------------------------------
def test_strong_lag2_path_is_found():
    # Known truth: Tension at t-2 -> Mood at t = 0.5 in a 300-prompt diary (its standard error
    # there is about 0.085, so the path stands about 6 standard errors out). The check must
    # point at that path first and the likelihood-ratio test must reject.
    check = lag2_check(_diary(seed=21, days=30, lag2=STRONG), SPEC1)
    assert check.lr_p < 0.01
    top = check.indicated[0]
    assert (top.kind, top.from_, top.to) == TRUE_PATH
    assert top.epc > 0
    assert "Tension at t-2 to Mood" in check.verdict


def test_strong_unique_autocorrelation_is_found():
    # Known truth: lag-1 states, and the unique part of 'restless' autocorrelated (d = 0.5).
    check = lag2_check(_diary(seed=22, days=30, autocorrelation={"restless": STRONG}), SPEC1)
    top = check.indicated[0]
    assert (top.kind, top.to) == ("unique_autocorrelation", "restless")
    assert top.epc > 0
    assert "restless" in check.verdict


@lru_cache(maxsize=None)
def _null_study(replications: int, days: int, seed0: int):
    """Lag-1 data: per replication the LR statistic, its p-value, whether any path was
    indicated (Holm), and the score statistics of the lag-2 paths and of the unique
    autocorrelations (replications x paths)."""
    lr, p, any_path, lag2, unique = [], [], [], [], []
    for r in range(replications):
        check = lag2_check(_diary(seed=seed0 + r, days=days), SPEC1)
        assert check.restricted.converged and check.extended.converged
        lr.append(check.lr_chi2)
        p.append(check.lr_p)
        any_path.append(bool(check.indicated))
        lag2.append([t.score for t in check.paths if t.kind == "lag2"])
        unique.append([t.score for t in check.paths if t.kind == "unique_autocorrelation"])
    return np.array(lr), np.array(p), np.array(any_path), np.array(lag2), np.array(unique)


def _upper_count(n: int, rate: float, tail: float = 0.01) -> int:
    """Largest rejection count not in the upper `tail` of Binomial(n, rate)."""
    return int(binom.isf(tail, n, rate))


def _mean_within(values: np.ndarray, expected: float, k: float = 3.5) -> bool:
    """Monte Carlo mean of independent replications within k standard errors of `expected`."""
    se = values.std(ddof=1) / np.sqrt(values.size)
    return abs(values.mean() - expected) <= k * se


SMALL = dict(replications=40, days=20, seed0=100)


def test_lag1_data_likelihood_ratio_test_small_version():
    # Monte Carlo with known truth (lag-1 data, 200-prompt diaries), 40 replications.
    # (1) Rejections at alpha = .05: with 40 runs a rate can only be bounded from above
    # (a correct 5% test gives 0 rejections with probability 0.95^40 = 13%). The bound is the
    # 99% point of Binomial(40, 0.09), the upper end of the acceptable 0.02-0.09 band; a test
    # rejecting 35% of the time fails it with probability > 0.95.
    n = SMALL["replications"]
    limit = _upper_count(n, 0.09)
    assert binom.sf(limit, n, 0.35) > 0.95
    lr, p, _, _, _ = _null_study(**SMALL)
    assert np.sum(p < 0.05) <= limit
    # (2) Sharper, and two-sided: a chi-square(4) statistic has mean 4 (standard result), so
    # the Monte Carlo mean must lie within 3.5 of its standard errors of 4.
    assert _mean_within(lr, 4.0), (lr.mean(), lr.std(ddof=1))


def test_lag1_data_score_tests_are_calibrated_small_version():
    # Monte Carlo with known truth (as above): on lag-1 data every tested parameter is truly
    # 0, so each score statistic is chi-square(1) with mean 1 (standard result). Per
    # replication the mean over the paths of one kind; across the 40 independent
    # replications that mean must lie within 3.5 Monte Carlo standard errors of 1.
    _, _, any_path, lag2, unique = _null_study(**SMALL)
    assert _mean_within(lag2.mean(axis=1), 1.0), lag2.mean()
    assert _mean_within(unique.mean(axis=1), 1.0), unique.mean()
    # Holm keeps the false alarms of a whole check rare: same binomial bound as above
    assert np.sum(any_path) <= _upper_count(SMALL["replications"], 0.09)


@pytest.mark.slow
def test_lag1_data_rejection_rate_200_replications():
    # Monte Carlo with known truth: on lag-1 data (300 prompts) the likelihood-ratio test at
    # alpha = .05 rejects between 2% and 9% of 200 replications (the accepted band for a test sized .05); so does
    # the score test of each single path, and Holm keeps the share of checks that indicate
    # any path at all within the same band.
    lr, p, any_path, lag2, unique = _null_study(200, days=30, seed0=1000)
    rate = float(np.mean(p < 0.05))
    crit = chi2.isf(0.05, 1)
    lag2_rate, unique_rate = float(np.mean(lag2 > crit)), float(np.mean(unique > crit))
    print(f"\nlag-1 data, T=300, 200 replications: LR rejection rate {rate:.3f}, mean LR "
          f"{lr.mean():.2f} (df 4); single-path score tests reject: lag-2 paths {lag2_rate:.3f}, "
          f"unique autocorrelations {unique_rate:.3f}; any path indicated (Holm) "
          f"{np.mean(any_path):.3f}")
    assert 0.02 <= rate <= 0.09
    assert 0.02 <= lag2_rate <= 0.09
    assert 0.02 <= unique_rate <= 0.09
    assert np.mean(any_path) <= 0.09


def _power_study(replications: int, days: int, lag2: float, seed0: int):
    """Shares of diaries where the true path is named first (Holm), the LR test rejects, and
    the single-path score test of the true path rejects at .05."""
    found, lr_reject, score_reject = [], [], []
    for r in range(replications):
        check = lag2_check(_diary(seed=seed0 + r, days=days, lag2=lag2), SPEC1)
        top = check.indicated[0] if check.indicated else None
        found.append(top is not None and (top.kind, top.from_, top.to) == TRUE_PATH)
        lr_reject.append(check.lr_p < 0.05)
        score_reject.append(_tests(check)[TRUE_PATH].p < 0.05)
    return float(np.mean(found)), float(np.mean(lr_reject)), float(np.mean(score_reject))


def _asymptotic_power(days: int, lag2: float) -> float:
    """Power of the score test of the true path at alpha = .05 from the noncentral
    chi-square(1, lambda) (Saris, Satorra & Sorbom 1987); lambda is the likelihood-ratio
    statistic of the lag-1 model against the model with the true path, both fitted to window
    rows that reproduce the true model's window moments exactly, as many rows as the design
    has lag windows (Satorra & Saris 1985)."""
    true_spec = _one_path_spec(*TRUE_PATH)
    rng = np.random.default_rng(0)
    n_rows = days * (PROMPTS - 2)

    def windows(rows: np.ndarray) -> LagWindows:
        return LagWindows(depth=2, items=SPEC1.items, data=rows, occasion=np.arange(len(rows)))

    layout_only = WindowObjective(windows(rng.standard_normal((50, 18))), true_spec, DEPTH2)
    b2 = np.zeros((2, 2))
    b2[1, 0] = lag2
    truth = Matrices(nu=np.zeros(6), lam=LOADINGS, theta=UNIQUE, d=np.zeros(6),
                     lagged=np.array([B1, b2]), psi=PSI)
    imp = layout_only.implied(layout_only.layout.pack(truth))
    rows = _exact_moment_rows(imp.mu, imp.sigma, n_rows, rng)
    null = solve(WindowObjective(windows(rows), SPEC1, DEPTH2), [])
    alt = solve(WindowObjective(windows(rows), true_spec, DEPTH2), [])
    noncentrality = 2.0 * (alt.fit.loglik - null.fit.loglik)
    return float(ncx2.sf(chi2.isf(0.05, 1), 1, noncentrality))


@pytest.mark.slow
def test_power_at_300_and_600_prompts():
    # Monte Carlo with known truth: lag-2 path Tension -> Mood of 0.15 (a small effect), 100
    # replications at 300 and at 600 prompts. Checked: (1) the single-path score test's
    # power agrees with its asymptotic power (see _asymptotic_power) within 3 Monte Carlo
    # standard errors plus 0.05 for the finite-sample gap; (2) doubling the diary raises the
    # share of checks that name the true path first.
    reps, effect = 100, 0.15
    rows = {}
    for days, seed0 in ((30, 5000), (60, 7000)):
        rows[days * PROMPTS] = _power_study(reps, days, effect, seed0) + (_asymptotic_power(days, effect),)
    print(f"\npower, lag-2 path {effect}, {reps} replications each: " + "; ".join(
        f"T={t}: named first (Holm) {f:.2f}, LR test {lr:.2f}, score test of the path {sc:.2f} "
        f"(asymptotic {th:.2f})" for t, (f, lr, sc, th) in rows.items()))
    for found, lr, score, theory in rows.values():
        se = np.sqrt(theory * (1 - theory) / reps)
        assert abs(score - theory) <= 3 * se + 0.05, (score, theory)
    assert rows[600][0] > rows[300][0]
    assert rows[600][1] > rows[300][1]
