"""Checks of the exact (Kalman filter) likelihood and the state smoother.

(a) Lutkepohl (2005) data set e1 as shipped with statsmodels (quarterly investment, income,
    consumption; log-differences 1960Q2-1978Q4, 75 occasions): statsmodels' dynamic-factor
    test fixtures hold parameters and log-likelihoods produced there by an independent
    program (see statsmodels/tsa/statespace/tests/results/results_dynamic_factor.py);
    statsmodels' DynamicFactor (stationary initialisation, no demeaning) is a second,
    independent filter.
(b) Short series: the log-likelihood equals the log-density of all answers stacked into
    one normal vector with the block-Toeplitz covariance Cov(y_t, y_s) = Lambda Phi_{t-s}
    Lambda' (+ Theta when t = s, + d^|t-s| Theta for an autocorrelated unique part) within a
    segment and 0 across segments (common practice), by scipy.stats.multivariate_normal;
    filtered and smoothed states equal the Gaussian conditional moments (common practice).
(c) The analytic gradient equals centred numerical differences of the log-likelihood taken
    by statsmodels.tools.numdiff.approx_fprime (common practice).
"""

from __future__ import annotations

import numpy as np
import pytest
from scipy.linalg import solve_discrete_lyapunov
from scipy.stats import multivariate_normal
from statsmodels.tsa.statespace.dynamic_factor import DynamicFactor
from statsmodels.tsa.statespace.tests.results import results_dynamic_factor, results_varmax

from lagwise.models.errors import EstimationError
from lagwise.models.kalman import filter_plan, kalman_gradient, kalman_loglik, kalman_smooth


# --------------------------------------------------------------------------- (a) e1 data
def _e1() -> np.ndarray:
    """dln(investment, income, consumption), 1960Q2-1978Q4 (75 x 3), as statsmodels' tests build it."""
    raw = np.asarray(results_varmax.lutkepohl_data, dtype=float)  # 1960Q1-1982Q4
    return np.diff(np.log(raw), axis=0)[:75]


def test_e1_one_state_lag1_with_intercepts_matches_reference_loglik():
    # Fixture lutkepohl_dfm_exog1 (statsmodels' tests; produced by an independent program):
    # one factor, AR(1), a constant per series, diagonal unique variances, factor
    # innovation variance 1; reference log-likelihood 596.9781590009525.
    fx = results_dynamic_factor.lutkepohl_dfm_exog1
    prm = np.asarray(fx["params"])
    y = _e1()
    args = dict(intercepts=prm[3:6], loadings=prm[0:3].reshape(3, 1), unique=prm[6:9],
                lagged=[np.array([[prm[9]]])], innovation=np.eye(1))
    ll = kalman_loglik(y, np.zeros(75), **args)
    # Same tolerance as statsmodels' own check of this fixture (rtol 1e-6).
    assert ll == pytest.approx(fx["loglike"], rel=1e-6)
    assert ll == pytest.approx(596.978, abs=5e-4)
    # statsmodels' DynamicFactor at the same parameters (its parameter order:
    # loadings, constants, unique variances, factor AR coefficient).
    model = DynamicFactor(y, k_factors=1, factor_order=1, exog=np.ones((75, 1)))
    assert ll == pytest.approx(model.loglike(prm), rel=1e-10)


def test_e1_one_state_lag2_matches_reference_loglik():
    # Fixture lutkepohl_dfm (statsmodels' tests; independent program): one factor, AR(2),
    # no intercepts, data not demeaned; reference log-likelihood 594.0902026190786.
    fx = results_dynamic_factor.lutkepohl_dfm
    prm = np.asarray(fx["params"])
    y = _e1()
    ll = kalman_loglik(y, np.zeros(75), intercepts=np.zeros(3), loadings=prm[0:3].reshape(3, 1),
                       unique=prm[3:6], lagged=[np.array([[prm[6]]]), np.array([[prm[7]]])],
                       innovation=np.eye(1))
    assert ll == pytest.approx(fx["loglike"], rel=1e-6)
    assert ll == pytest.approx(DynamicFactor(y, k_factors=1, factor_order=2).loglike(prm), rel=1e-10)


def test_e1_two_states_with_missing_values_matches_statsmodels_filter_and_smoother():
    # statsmodels' DynamicFactor (two factors, VAR(1), identity factor innovations) handles
    # NaN by dropping the missing rows of the measurement equation, as here.
    y = _e1().copy()
    y[[4, 5, 30], :] = np.nan
    y[[10, 11, 50], [0, 2, 1]] = np.nan
    lam = np.array([[0.010, 0.004], [0.006, -0.002], [0.005, 0.003]])
    nu = np.array([0.018, 0.020, 0.019])
    theta = np.array([0.0019, 0.00008, 0.00006])
    b = np.array([[0.3, 0.1], [-0.2, 0.4]])
    model = DynamicFactor(y, k_factors=2, factor_order=1, exog=np.ones((75, 1)))
    prm = np.r_[lam.ravel(), nu, theta, b.ravel()]  # loadings row by row, constants, sigma2, VAR
    ref = model.smooth(prm)
    args = dict(intercepts=nu, loadings=lam, unique=theta, lagged=[b], innovation=np.eye(2))
    assert kalman_loglik(y, np.zeros(75), **args) == pytest.approx(ref.llf, rel=1e-10)
    st = kalman_smooth(y, np.zeros(75), **args)
    assert np.allclose(st.filtered_mean, ref.filtered_state.T, atol=1e-10)
    assert np.allclose(st.smoothed_mean, ref.smoothed_state.T, atol=1e-10)
    assert np.allclose(st.smoothed_cov, ref.smoothed_state_cov.transpose(2, 0, 1), atol=1e-10)


# --------------------------------------------------------------------------- (b) dense
def _phis(lagged: list[np.ndarray], psi: np.ndarray, n: int) -> list[np.ndarray]:
    """Phi_h = Cov(eta_t, eta_{t-h}), h = 0..n-1: scipy's Lyapunov solution of the companion
    form for Phi_0 (and Phi_1 at lag 2), then Phi_h = sum_j B_j Phi_{h-j} (Yule-Walker)."""
    k = psi.shape[0]
    if not lagged:
        return [psi] + [np.zeros((k, k))] * (n - 1)
    q = len(lagged)
    comp = np.zeros((k * q, k * q))
    comp[:k] = np.hstack(lagged)
    comp[k:, :-k] = np.eye(k * (q - 1))
    noise = np.zeros_like(comp)
    noise[:k, :k] = psi
    full = solve_discrete_lyapunov(comp, noise)
    phis = [full[:k, j * k:(j + 1) * k] for j in range(q)]
    while len(phis) < n:
        h = len(phis)
        phis.append(sum(lagged[j] @ phis[h - 1 - j] for j in range(q)))
    return phis[:n]


def _dense(values, segment, nu, lam, theta, lagged, psi, d=None):
    """Stacked mean, covariance of (y, eta) over all occasions (block-Toeplitz in a segment)."""
    n, p = values.shape
    k = lam.shape[1]
    d = np.zeros(p) if d is None else d
    phis = _phis(lagged, psi, n)
    cyy = np.zeros((n * p, n * p))
    cee = np.zeros((n * k, n * k))
    for t in range(n):
        for s in range(n):
            if segment[t] != segment[s]:
                continue
            h = abs(t - s)
            phi = phis[h] if t >= s else phis[h].T  # Cov(eta_t, eta_s)
            cee[t * k:(t + 1) * k, s * k:(s + 1) * k] = phi
            cyy[t * p:(t + 1) * p, s * p:(s + 1) * p] = lam @ phi @ lam.T + np.diag(d ** h * theta)
    cey = cee @ np.kron(np.eye(n), lam.T)  # Cov(eta, y) = Cov(eta, eta) Lambda'
    return np.tile(nu, n), cyy, cee, cey


LAM2 = np.array([[1.0, 0.0], [0.7, 0.0], [0.0, 1.0]])
LAM1 = np.array([[1.0], [0.8], [1.3]])
NU = np.array([2.0, -1.0, 0.5])
THETA = np.array([0.6, 0.4, 0.5])
PSI2 = np.array([[1.0, 0.4], [0.4, 0.7]])
CASES = {
    "1 state, lag 1": (LAM1, [np.array([[0.6]])], np.array([[1.2]]), None),
    "1 state, lag 2": (LAM1, [np.array([[0.5]]), np.array([[0.3]])], np.array([[0.9]]), None),
    "2 states, lag 1": (LAM2, [np.array([[0.5, -0.3], [0.2, 0.4]])], PSI2, None),
    "2 states, lag 2": (LAM2, [np.array([[0.4, -0.2], [0.1, 0.3]]),
                               np.array([[0.2, 0.0], [-0.15, 0.25]])], PSI2, None),
    "2 states, lag 1, autocorrelated unique part": (
        LAM2, [np.array([[0.5, -0.3], [0.2, 0.4]])], PSI2, np.array([0.5, 0.0, -0.4])),
    "2 states, lag 0": (LAM2, [], PSI2, None),
}
LAYOUTS = {
    "complete, one segment": (np.zeros(5, int), []),
    "complete, two segments": (np.array([0, 0, 0, 1, 1]), []),
    "missing, one segment": (np.zeros(5, int), [(1, None), (3, 0), (3, 2), (4, 1)]),
    "missing, three segments": (np.array([0, 0, 1, 2, 2]), [(0, 1), (2, None), (4, 0)]),
}


def _data(layout: str) -> tuple[np.ndarray, np.ndarray]:
    segment, holes = LAYOUTS[layout]
    y = np.random.default_rng(7).normal(size=(5, 3)) * 1.5 + NU
    for t, i in holes:
        if i is None:
            y[t] = np.nan
        else:
            y[t, i] = np.nan
    return y, segment


@pytest.mark.parametrize("layout", list(LAYOUTS))
@pytest.mark.parametrize("case", list(CASES))
def test_loglik_equals_stacked_normal_density(case, layout):
    lam, lagged, psi, d = CASES[case]
    y, segment = _data(layout)
    mean, cov, _, _ = _dense(y, segment, NU, lam, THETA, lagged, psi, d)
    seen = ~np.isnan(y.ravel())
    expected = multivariate_normal(mean[seen], cov[np.ix_(seen, seen)]).logpdf(y.ravel()[seen])
    ll = kalman_loglik(y, segment, NU, lam, THETA, lagged, psi, unique_autocorrelation=d)
    assert ll == pytest.approx(expected, rel=1e-10, abs=1e-10)


@pytest.mark.parametrize("layout", ["missing, one segment", "missing, three segments"])
@pytest.mark.parametrize("case", ["2 states, lag 2", "2 states, lag 1, autocorrelated unique part"])
def test_filtered_and_smoothed_states_equal_gaussian_conditioning(case, layout):
    # E[eta_t | y_S] = C_{t,S} Sigma_SS^-1 (y_S - mu_S), Var = Phi_0 - C Sigma^-1 C'
    # (common practice); filtered: S = answers of the segment up to t; smoothed: whole segment.
    lam, lagged, psi, d = CASES[case]
    y, segment = _data(layout)
    n, p, k = 5, 3, lam.shape[1]
    mean, cov, cee, cey = _dense(y, segment, NU, lam, THETA, lagged, psi, d)
    st = kalman_smooth(y, segment, NU, lam, THETA, lagged, psi, unique_autocorrelation=d)
    flat = y.ravel()
    occ = np.repeat(np.arange(n), p)
    for t in range(n):
        for kind, upto in (("filtered", t), ("smoothed", n - 1)):
            use = ~np.isnan(flat) & (segment[occ] == segment[t]) & (occ <= upto)
            c = cey[t * k:(t + 1) * k][:, use]
            s = cov[np.ix_(use, use)]
            m = c @ np.linalg.solve(s, flat[use] - mean[use])
            v = cee[t * k:(t + 1) * k, t * k:(t + 1) * k] - c @ np.linalg.solve(s, c.T)
            got_m = getattr(st, f"{kind}_mean")[t]
            got_v = getattr(st, f"{kind}_cov")[t]
            assert np.allclose(got_m, m, atol=1e-10), (kind, t)
            assert np.allclose(got_v, v, atol=1e-10), (kind, t)


def test_segments_in_any_order_add_up():
    # Segments are independent (common practice): the log-likelihood of a diary is the sum of
    # its segments' log-likelihoods, whatever their lengths and order.
    lam, lagged, psi, _ = CASES["2 states, lag 2"]
    y = np.random.default_rng(3).normal(size=(12, 3)) + NU
    y[5, 1] = np.nan
    segment = np.array([0, 0, 1, 1, 1, 1, 1, 2, 3, 3, 3, 3])
    parts = sum(kalman_loglik(y[segment == s], np.zeros(np.sum(segment == s)), NU, lam, THETA,
                              lagged, psi) for s in range(4))
    assert kalman_loglik(y, segment, NU, lam, THETA, lagged, psi) == pytest.approx(parts, rel=1e-12)


def test_nonstationary_paths_are_refused():
    y = np.zeros((4, 3))
    with pytest.raises(EstimationError, match="not stationary"):
        kalman_loglik(y, np.zeros(4), NU, LAM1, THETA, [np.array([[1.01]])], np.eye(1))


# --------------------------------------------------------------------------- gradient
def _flat_gradient_check(lam, lagged, psi, d, theta, y, segment):
    """Analytic gradient vs statsmodels' centred numerical differences (common practice),
    over nu, Lambda, Theta, d (modelled items), B_l and the lower triangle of Psi."""
    from statsmodels.tools.numdiff import approx_fprime

    p, k = lam.shape
    q = len(lagged)
    ac = np.flatnonzero(d != 0)
    tril = np.tril_indices(k)

    def unpack(x):
        parts = np.split(x, np.cumsum([p, p * k, p, ac.size, q * k * k]))
        dd = np.zeros(p)
        dd[ac] = parts[3]
        s = np.zeros((k, k))
        s[tril] = parts[5]
        s = s + np.tril(s, -1).T
        return parts[0], parts[1].reshape(p, k), parts[2], dd, list(parts[4].reshape(q, k, k)), s

    def loglik(x):
        nu, lm, th, dd, bs, ps = unpack(x)
        return kalman_loglik(y, segment, nu, lm, th, bs, ps, unique_autocorrelation=dd)

    x0 = np.r_[NU, lam.ravel(), theta, d[ac], np.ravel(lagged), psi[tril]]
    g = kalman_gradient(y, segment, NU, lam, theta, lagged, psi, unique_autocorrelation=d)
    g_psi = (g.innovation + g.innovation.T)[tril] - np.where(tril[0] == tril[1], g.innovation[tril], 0)
    analytic = np.r_[g.intercepts, g.loadings.ravel(), g.unique, g.unique_autocorrelation[ac],
                     g.lagged.ravel(), g_psi]
    numeric = approx_fprime(x0, loglik, epsilon=1e-6, centered=True)
    assert g.loglik == pytest.approx(loglik(x0), rel=1e-12)
    assert np.allclose(analytic, numeric, rtol=1e-5, atol=1e-5 * np.abs(numeric).max())


@pytest.mark.parametrize("case", list(CASES))
def test_gradient_matches_numerical_differences(case):
    lam, lagged, psi, d = CASES[case]
    d = np.zeros(3) if d is None else d
    y = np.random.default_rng(5).normal(size=(14, 3)) * 1.5 + NU
    y[2] = np.nan
    y[[5, 9, 9], [1, 0, 2]] = np.nan
    segment = np.repeat([0, 1, 2], [6, 5, 3])
    _flat_gradient_check(lam, lagged, psi, d, THETA, y, segment)


def test_gradient_with_an_item_measured_without_error():
    # A single-item state: its unique variance fixed at 0 (exact item); the filter must stay
    # positive definite and the gradient exact.
    lam = np.array([[1.0, 0.0], [0.7, 0.0], [0.0, 1.0]])
    theta = np.array([0.6, 0.4, 0.0])
    lagged = [np.array([[0.4, -0.2], [0.1, 0.3]]), np.array([[0.2, 0.0], [-0.15, 0.25]])]
    y = np.random.default_rng(6).normal(size=(12, 3)) + NU
    y[4, 0] = np.nan
    _flat_gradient_check(lam, lagged, PSI2, np.zeros(3), theta, y, np.repeat([0, 1], 6))
    # and the log-likelihood still equals the stacked normal density (common practice)
    mean, cov, _, _ = _dense(y, np.repeat([0, 1], 6), NU, lam, theta, lagged, PSI2)
    seen = ~np.isnan(y.ravel())
    expected = multivariate_normal(mean[seen], cov[np.ix_(seen, seen)]).logpdf(y.ravel()[seen])
    got = kalman_loglik(y, np.repeat([0, 1], 6), NU, lam, theta, lagged, PSI2)
    assert got == pytest.approx(expected, rel=1e-9)


# --------------------------------------------------------------------------- shared nodes
# Many days share the covariance recursion (the same answered items at the same positions);
# a long joined series reaches a steady state that is reused once it repeats bit for bit.
# Both shortcuts must leave every number unchanged: checked against statsmodels'
# DynamicFactor (an independent filter and smoother) run day by day and on the joined series.
LAM_SM = np.array([[1.0, 0.0], [0.8, 0.3], [0.0, 1.1]])
NU_SM = np.array([1.0, -0.5, 2.0])
THETA_SM = np.array([0.5, 0.4, 0.6])
B_SM = np.array([[0.5, 0.2], [-0.1, 0.4]])
ARGS_SM = dict(intercepts=NU_SM, loadings=LAM_SM, unique=THETA_SM, lagged=[B_SM],
               innovation=np.eye(2))


def _days(n_days: int, prompts: int, seed: int) -> np.ndarray:
    """Days of `prompts` occasions: most complete, some with missed prompts or skipped items."""
    rng = np.random.default_rng(seed)
    y = rng.normal(size=(n_days * prompts, 3)) * 1.3 + NU_SM
    y[rng.random(y.shape[0]) < 0.1] = np.nan
    y[rng.random(y.shape) < 0.05] = np.nan
    y[:3 * prompts] = rng.normal(size=(3 * prompts, 3)) + NU_SM   # three complete days
    return y


def _statsmodels(y: np.ndarray):
    # DynamicFactor: two factors, VAR(1), identity factor innovations, a constant per item;
    # parameters: loadings row by row, constants, unique variances, VAR coefficients.
    model = DynamicFactor(y, k_factors=2, factor_order=1, exog=np.ones((y.shape[0], 1)))
    return model.smooth(np.r_[LAM_SM.ravel(), NU_SM, THETA_SM, B_SM.ravel()])


def test_days_sharing_covariances_match_statsmodels_day_by_day():
    prompts = 6
    y = _days(12, prompts, seed=11)
    segment = np.repeat(np.arange(12), prompts)
    st = kalman_smooth(y, segment, **ARGS_SM)
    total = 0.0
    for d in range(12):
        day = segment == d
        ref = _statsmodels(y[day])
        total += ref.llf
        assert np.allclose(st.filtered_mean[day], ref.filtered_state.T, atol=1e-10)
        assert np.allclose(st.smoothed_mean[day], ref.smoothed_state.T, atol=1e-10)
        assert np.allclose(st.smoothed_cov[day], ref.smoothed_state_cov.transpose(2, 0, 1),
                           atol=1e-10)
    assert st.loglik == pytest.approx(total, rel=1e-10)
    plan = filter_plan(y, segment)
    assert plan.n_nodes < y.shape[0]          # the complete days share their nodes
    assert kalman_loglik(y, segment, plan=plan, **ARGS_SM) == pytest.approx(total, rel=1e-10)


def test_joined_days_reach_a_reused_steady_state_and_match_statsmodels():
    # Days joined by nights of 4 missed prompts: one segment of 100 occasions. Complete days
    # repeat the same covariances once the recursion has converged.
    prompts, night = 6, 4
    days = _days(10, prompts, seed=12)
    days[prompts * 5:] = np.random.default_rng(4).normal(size=(prompts * 5, 3)) + NU_SM
    y = np.vstack([np.vstack([days[d * prompts:(d + 1) * prompts], np.full((night, 3), np.nan)])
                   for d in range(10)])[:-night]
    segment = np.zeros(y.shape[0], int)
    ref = _statsmodels(y)
    st = kalman_smooth(y, segment, **ARGS_SM)
    assert st.loglik == pytest.approx(ref.llf, rel=1e-10)
    assert np.allclose(st.smoothed_mean, ref.smoothed_state.T, atol=1e-10)
    assert np.allclose(st.smoothed_cov, ref.smoothed_state_cov.transpose(2, 0, 1), atol=1e-10)
    # the steady state was found and reused: at least the last two complete day-and-night
    # cycles add no new covariances
    from lagwise.models.filtercov import covariances
    from lagwise.models.kalman import _system
    cov = covariances(filter_plan(y, segment), _system(LAM_SM, THETA_SM, [B_SM], np.eye(2), None))
    assert cov.size <= y.shape[0] - 2 * (prompts + night)


def test_gradient_with_shared_and_reused_covariances():
    # Both shortcuts inside the gradient: days sharing nodes, and a joined series whose
    # complete tail repeats its covariances (numerical differences, common practice).
    lam, lagged, psi, _ = CASES["2 states, lag 2"]
    rng = np.random.default_rng(21)
    y = rng.normal(size=(60, 3)) * 1.4 + NU
    y[[3, 10, 17, 24]] = np.nan
    y[[5, 12, 30], [0, 2, 1]] = np.nan
    _flat_gradient_check(lam, lagged, psi, np.zeros(3), THETA, y, np.repeat(np.arange(10), 6))
    joined = np.vstack([y[:30], np.full((5, 3), np.nan), rng.normal(size=(45, 3)) + NU])
    _flat_gradient_check(lam, lagged, psi, np.zeros(3), THETA, joined, np.zeros(80, int))
    from lagwise.models.filtercov import covariances
    from lagwise.models.kalman import _system   # the reuse did happen here
    sys = _system(lam, THETA, lagged, psi, None)
    assert covariances(filter_plan(joined, np.zeros(80)), sys).size < 70


def test_the_update_in_the_states_dimension_changes_only_the_rounding(monkeypatch):
    # Woodbury's identity: the update through K = I + G' D G (states' dimension) equals the
    # update through F = Zb P Zb' + H (items' dimension) (common practice); with a unique
    # variance below the noise floor the filter keeps the items' dimension and still equals
    # the stacked normal density.
    from lagwise.models import filtercov

    calls = []
    original = filtercov.states_update
    monkeypatch.setattr(filtercov, "states_update",
                        lambda *a: calls.append(1) or original(*a))
    y = _days(20, 6, seed=13)
    segment = np.repeat(np.arange(20), 6)
    got = kalman_gradient(y, segment, **ARGS_SM)
    assert calls
    monkeypatch.setattr(filtercov, "NOISE_FLOOR", np.inf)     # every update in the items' dimension
    plain = kalman_gradient(y, segment, **ARGS_SM)
    assert got.loglik == pytest.approx(plain.loglik, rel=1e-12)
    for name in ("intercepts", "loadings", "unique", "lagged", "innovation"):
        a, b = getattr(got, name), getattr(plain, name)
        assert np.allclose(a, b, rtol=1e-10, atol=1e-10 * np.abs(b).max()), name
    monkeypatch.undo()
    monkeypatch.setattr(filtercov, "states_update",
                        lambda *a: calls.append(2) or original(*a))
    lam, lagged, psi, _ = CASES["2 states, lag 2"]
    theta = np.array([0.6, 1e-9, 0.5])                       # nearly without error
    y, seg = _data("missing, three segments")
    mean, cov, _, _ = _dense(y, seg, NU, lam, theta, lagged, psi)
    seen = ~np.isnan(y.ravel())
    expected = multivariate_normal(mean[seen], cov[np.ix_(seen, seen)]).logpdf(y.ravel()[seen])
    assert kalman_loglik(y, seg, NU, lam, theta, lagged, psi) == pytest.approx(expected, rel=1e-9)
    assert 2 not in calls


def test_a_plan_built_for_other_data_is_refused():
    y = np.random.default_rng(2).normal(size=(8, 3))
    plan = filter_plan(y, np.zeros(8))
    y[2, 1] = np.nan
    with pytest.raises(EstimationError, match="other data"):
        kalman_loglik(y, np.zeros(8), NU, LAM1, THETA, [np.array([[0.5]])], np.eye(1), plan=plan)


# --------------------------------------------------------------------------- long segments
# A long segment (a diary in row order, or days joined by nights) is a chain of history nodes,
# and its means run in pieces side by side; long segments of different lengths share the
# pieces' steps. Checked against statsmodels' DynamicFactor (an independent filter and
# smoother) segment by segment, and against the same filter with neither chains nor pieces
# (the history nodes made a position at a time, the means an occasion at a time).
def _long(lengths: list[int], seed: int, skipped: float = 0.02) -> tuple[np.ndarray, np.ndarray]:
    """Segments of the given lengths, 10% missed prompts and some skipped items."""
    rng = np.random.default_rng(seed)
    n = sum(lengths)
    y = rng.normal(size=(n, 3)) * 1.3 + NU_SM
    y[rng.random(n) < 0.1] = np.nan
    y[rng.random((n, 3)) < skipped] = np.nan
    return y, np.repeat(np.arange(len(lengths)), lengths)


@pytest.mark.parametrize("lengths", [[1200], [500, 200, 130, 65, 64, 8, 2]])
def test_long_segments_match_statsmodels_segment_by_segment(lengths):
    y, segment = _long(lengths, seed=31)
    st = kalman_smooth(y, segment, **ARGS_SM)
    total = 0.0
    for s in range(len(lengths)):
        part = segment == s
        ref = _statsmodels(y[part])
        total += ref.llf
        assert np.allclose(st.filtered_mean[part], ref.filtered_state.T, atol=1e-10)
        assert np.allclose(st.smoothed_mean[part], ref.smoothed_state.T, atol=1e-10)
        assert np.allclose(st.smoothed_cov[part], ref.smoothed_state_cov.transpose(2, 0, 1),
                           atol=1e-10)
    assert st.loglik == pytest.approx(total, rel=1e-12)
    assert kalman_gradient(y, segment, **ARGS_SM).loglik == pytest.approx(total, rel=1e-12)


def test_a_long_segment_with_missed_prompts_reuses_its_covariances():
    # missed prompts only: after each one the covariances settle, bit for bit, on those of
    # the complete stretch, so the 3,000 occasions share a few hundred filter nodes
    from lagwise.models.filtercov import covariances
    from lagwise.models.kalman import _system
    y, segment = _long([3000], seed=32, skipped=0.0)
    sys = _system(LAM_SM, THETA_SM, [B_SM], np.eye(2), None)
    assert covariances(filter_plan(y, segment), sys).size < 3000 // 5


def test_gradient_on_a_long_segment_matches_numerical_differences():
    lam, lagged, psi, d = CASES["2 states, lag 1, autocorrelated unique part"]
    rng = np.random.default_rng(34)
    y = rng.normal(size=(400, 3)) * 1.4 + NU
    y[rng.random(400) < 0.1] = np.nan
    y[rng.random((400, 3)) < 0.03] = np.nan
    _flat_gradient_check(lam, lagged, psi, d, THETA, y, np.zeros(400, int))


def test_chains_and_pieces_change_only_the_rounding(monkeypatch):
    from lagwise.models import filterplan

    y, segment = _long([2500, 900, 70] + [6] * 16, seed=33)
    d = np.array([0.3, 0.0, -0.2])
    plan = filter_plan(y, segment)
    assert plan.forward.tails and plan.n_nodes > plan.levels[-1][1]    # pieces and chains
    got = kalman_gradient(y, segment, unique_autocorrelation=d, plan=plan, **ARGS_SM)
    monkeypatch.setattr(filterplan, "_SIDE_BY_SIDE", 1)    # every position made side by side
    monkeypatch.setattr(filterplan, "_PIECE", 10 ** 9)     # no segment cut into pieces
    plan = filter_plan(y, segment)
    assert not plan.forward.tails and plan.n_nodes == plan.levels[-1][1]
    plain = kalman_gradient(y, segment, unique_autocorrelation=d, plan=plan, **ARGS_SM)
    assert got.loglik == pytest.approx(plain.loglik, rel=1e-12)
    for name in ("intercepts", "loadings", "unique", "unique_autocorrelation", "lagged",
                 "innovation"):
        a, b = getattr(got, name), getattr(plain, name)
        assert np.allclose(a, b, rtol=1e-12, atol=1e-12 * np.abs(b).max()), name


def test_mean_recursion_in_pieces_equals_the_plain_loop():
    # x_t = M_t x_t-1 + g_t within each segment, forwards and backwards, against a plain loop
    # over the occasions; segments just shorter and longer than the pieces (64 here)
    from lagwise.models.kalman import _recursion
    rng = np.random.default_rng(35)
    lengths = [1000, 200, 129, 128, 65, 64, 63, 2, 1]
    segment = np.repeat(rng.permutation(len(lengths)), lengths)
    n = segment.size
    plan = filter_plan(np.zeros((n, 1)), segment)
    mats = rng.normal(size=(7, 4, 4)) * 0.3
    node = rng.integers(0, 7, n)
    g = rng.normal(size=(n, 4))
    forward, backward = g.copy(), g.copy()
    _recursion(plan.forward, mats, node, forward)
    _recursion(plan.backward, mats.transpose(0, 2, 1), np.append(node[1:], 0), backward)
    plain_f, plain_b = g.copy(), g.copy()
    for t in range(1, n):
        if segment[t] == segment[t - 1]:
            plain_f[t] += mats[node[t]] @ plain_f[t - 1]
    for t in range(n - 2, -1, -1):
        if segment[t] == segment[t + 1]:
            plain_b[t] += mats[node[t + 1]].T @ plain_b[t + 1]
    assert plan.forward.tails and plan.forward.links
    assert np.allclose(forward, plain_f, rtol=1e-13, atol=1e-13)
    assert np.allclose(backward, plain_b, rtol=1e-13, atol=1e-13)


def test_answer_patterns_match_numpys_unique_rows():
    from lagwise.models.filterplan import _unique_rows
    observed = np.random.default_rng(36).random((500, 7)) > 0.3
    observed[::9] = False
    patterns, index = _unique_rows(observed)
    ref, ref_index = np.unique(observed, axis=0, return_inverse=True)   # numpy's own
    assert np.array_equal(patterns, ref)
    assert np.array_equal(index, ref_index.reshape(-1))
