"""Robust standard errors and the calibrated window fit test (models.robust).

Outside references: statsmodels' OLS with cluster-robust errors (a VAR(1) of single-item
states, clustered by day) and arch's Bartlett kernel. Simulations with known truth (the
two-state model of tests/two_state_model.py, simulated by models.simulate): coverage of 95%
intervals, the size of the adjusted test, and a near-unit-root diary against the exact
estimator. The full studies carry @pytest.mark.slow; their smaller siblings run by default.
"""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from arch.covariance.kernel import Bartlett
from joblib import Parallel, delayed
from two_state_model import SPEC, TRUE

from lagwise.models.estimate import fit
from lagwise.models.estimators import FitOptions
from lagwise.models.kinds import Kind
from lagwise.models.parameters import Matrices, ParameterLayout
from lagwise.models.robust import long_run
from lagwise.models.simulate import simulate_diary
from lagwise.models.spec import make_spec
from lagwise.models.windows import lag_windows

VAR_SPEC = make_spec({"calm": ["calm"], "tense": ["tense"], "tired": ["tired"]}, lags=1)
VAR_B = np.array([[0.4, 0.1, 0.0], [-0.1, 0.3, 0.15], [0.05, 0.0, 0.5]])
VAR_PSI = np.array([[1.0, 0.3, 0.1], [0.3, 0.8, 0.2], [0.1, 0.2, 0.9]])


def test_robust_errors_of_a_var_on_days_equal_statsmodels_cluster_robust_ols():
    # Single-item states without measurement error: the first-copy-free window likelihood
    # is the OLS VAR(1) with a constant (tests/test_external_checks.py), so its sandwich with
    # day clusters is statsmodels' cluster-robust OLS covariance, equation by equation
    # (cov_type="cluster", no small-sample correction).
    diary = simulate_diary(VAR_SPEC, loadings=np.eye(3), intercepts=np.array([4.0, 2.0, 3.0]),
                           unique=np.zeros(3), lagged=[VAR_B], innovation=VAR_PSI, days=40,
                           prompts_per_day=8, seed=6)
    windows = lag_windows(diary, 1)
    ours = fit(diary, VAR_SPEC, FitOptions(estimator="first-copy-free"))
    assert ours.converged and ours.se_method == "robust"
    x = sm.add_constant(windows.data[:, 3:])
    names = VAR_SPEC.state_names
    for i, to in enumerate(names):
        ols = sm.OLS(windows.data[:, i], x).fit(
            cov_type="cluster", cov_kwds={"groups": windows.segment, "use_correction": False,
                                          "df_correction": False})
        for j, fr in enumerate(names):
            p = ours.get(Kind.INERTIA if i == j else Kind.CROSS_LAGGED, fr, to)
            assert p.estimate == pytest.approx(ols.params[j + 1], abs=1e-5)
            assert p.se == pytest.approx(ols.bse[j + 1], rel=1e-3)


def test_long_run_covariance_is_arch_bartlett_after_prewhitening():
    # Andrews & Monahan (1992): VAR(1) prewhitening, Bartlett on the residuals (arch's
    # automatic bandwidth), recoloured by (I - Phi)^-1.
    rng = np.random.default_rng(3)
    e = rng.standard_normal((800, 2))
    x = np.zeros_like(e)
    for t in range(1, len(e)):
        x[t] = 0.5 * x[t - 1] + e[t]
    phi = np.linalg.lstsq(x[:-1], x[1:], rcond=None)[0].T
    inv = np.linalg.inv(np.eye(2) - phi)
    expected = inv @ np.asarray(Bartlett(x[1:] - x[:-1] @ phi.T, center=False).cov.long_run) @ inv.T
    np.testing.assert_allclose(long_run(x), expected, rtol=1e-12)
    # an AR(1) of 0.5 with unit innovations has long-run variance 1 / (1 - 0.5)^2 = 4
    assert np.diag(long_run(x)) == pytest.approx([4.0, 4.0], rel=0.3)


# ----- simulations with known truth ----------------------------------------------------------
def _truth() -> dict:
    layout = ParameterLayout(SPEC)
    m = Matrices(nu=TRUE["intercepts"], lam=TRUE["loadings"], theta=TRUE["unique"],
                 d=np.zeros(6), lagged=np.array(TRUE["lagged"]), psi=TRUE["innovation"])
    return {e.key: v for e, v in zip(layout.free_entries, layout.pack(m))}


def _replicate(seed: int, estimator: str, days: int, prompts: int, missed: float):
    diary = simulate_diary(SPEC, days=days, prompts_per_day=prompts, p_missed=missed, seed=seed,
                           **TRUE)
    r = fit(diary, SPEC, FitOptions(estimator=estimator))
    rows = [(p.kind, p.key, p.estimate, p.se, p.se_model) for p in r.free_parameters]
    return r.converged, rows, None if r.fit.scaled is None else r.fit.scaled.p


def _study(reps: int, estimator: str, days: int, prompts: int, missed: float, seed0: int = 0,
           pool_paths: bool = False):
    """Coverage of 95% intervals per kind (robust and model-based; with `pool_paths` the
    inertias and cross-lagged effects as one kind, "lagged paths") and the adjusted test's
    rejection rate at .05."""
    truth = _truth()
    runs = Parallel(n_jobs=2)(delayed(_replicate)(seed0 + s, estimator, days, prompts, missed)
                              for s in range(reps))
    runs = [r for r in runs if r[0]]
    cover: dict[str, list[tuple[bool, bool]]] = {}
    for _, rows, _ in runs:
        for kind, key, est, se, se_model in rows:
            if key in truth and se is not None:
                err = abs(est - truth[key])
                if pool_paths and kind in (Kind.INERTIA, Kind.CROSS_LAGGED):
                    kind = "lagged paths"
                cover.setdefault(kind, []).append((err <= 1.96 * se, err <= 1.96 * se_model))
    coverage = {k: np.mean(v, axis=0) for k, v in cover.items()}
    rejected = np.mean([p < 0.05 for _, _, p in runs if p is not None])
    return coverage, rejected, len(runs)


def test_robust_intervals_cover_better_than_model_ones_small_study():
    # The smaller sibling of the slow study: 40 diaries of 50 days x 10 prompts, a quarter
    # of the prompts missed. Model-based errors of loadings, intercepts and unique variances
    # are 15-25% too small for windows (they cover about 0.8-0.85); the robust ones must
    # cover close to 0.95 pooled over all parameters.
    coverage, rejected, n = _study(40, "stationary", 50, 10, 0.25, seed0=100)
    assert n >= 38
    for kind in (Kind.LOADING, Kind.INTERCEPT, Kind.UNIQUE):
        assert coverage[kind][0] > coverage[kind][1] + 0.04, (kind, coverage[kind])
    pooled = np.mean([c[0] for c in coverage.values()])
    assert 0.91 <= pooled <= 0.98, coverage
    assert rejected <= 0.15


@pytest.mark.slow
@pytest.mark.parametrize("estimator", ["stationary", "first-copy-free"])
def test_robust_coverage_of_every_parameter_kind(estimator):
    # 500 diaries of 60 days x 10 prompts, a quarter missed; per kind of parameter (lagged
    # paths: inertias and cross-lagged effects together) 1,000-3,000 intervals, so the Monte
    # Carlo SE of a coverage of 0.95 is 0.004-0.007 (blocks of 200 diaries varied by 0.02
    # for a single kind of 400 intervals).
    coverage, _, n = _study(500, estimator, 60, 10, 0.25, seed0=1000, pool_paths=True)
    print(f"\n{estimator} robust coverage ({n} diaries): "
          + ", ".join(f"{k} {c[0]:.3f} (model {c[1]:.3f})" for k, c in coverage.items()))
    for kind, (robust, _) in coverage.items():
        assert 0.93 <= robust <= 0.97, (kind, robust)


@pytest.mark.slow
@pytest.mark.parametrize("days, prompts, missed", [(20, 10, 0.25), (100, 10, 0.0), (1, 1000, 0.0)])
def test_adjusted_test_holds_its_size_under_the_true_model(days, prompts, missed):
    # The three designs where the unadjusted window chi-square rejected 0% of true models:
    # the mean-and-variance adjusted test must reject 3-8% at .05 (200 diaries each).
    _, rejected, n = _study(200, "stationary", days, prompts, missed, seed0=5000 + days)
    print(f"\nadjusted test, {days} x {prompts}, {missed:.0%} missed: rejects {rejected:.3f} of {n}")
    assert 0.03 <= rejected <= 0.08


def _near_unit_root(seed: int) -> tuple[float, float, float]:
    spec = make_spec({"calm": ["c1", "c2", "c3"], "drive": ["d1", "d2", "d3"]}, lags=1)
    truth = dict(TRUE, lagged=[np.array([[0.99, 0.0], [0.0, 0.99]])])
    diary = simulate_diary(spec, days=1, prompts_per_day=3000, seed=seed, **truth)
    window = fit(diary, spec).get(Kind.INERTIA, "calm", "calm")
    exact = fit(diary, spec, FitOptions(estimator="exact")).get(Kind.INERTIA, "calm", "calm")
    return window.se, window.se_model, exact.se


def test_near_unit_root_robust_error_is_not_the_tiny_model_one():
    # Two states with inertia 0.99 in one segment of 3,000 prompts: the model-based window
    # error was about 6.5 times too small; the robust one must be several times larger.
    robust, model, exact = _near_unit_root(0)
    assert robust > 2.0 * model and robust > 0.5 * exact


@pytest.mark.slow
def test_near_unit_root_robust_error_is_close_to_the_exact_estimators():
    # 12 such diaries: the robust window error within 30% of the exact estimator's (median).
    ratios = [r / e for r, _, e in Parallel(n_jobs=2)(delayed(_near_unit_root)(s) for s in range(12))]
    print(f"\nrobust / exact errors, inertia 0.99: {np.round(ratios, 2)}")
    assert 0.7 <= float(np.median(ratios)) <= 1.3
