"""Engine contracts and invariances: every parameter listed, equivalent parameterisations give
the same likelihood, the saturated model is a maximum, fit-index formulas, cancellation.

Data here are simulated from known parameters (models.simulate); no invented number is a
check value: each check is an identity of the model or a standard formula, named beside it.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
import pytest
from scipy.stats import chi2 as chi2_dist
from scipy.stats import ncx2
from two_state_model import SPEC, TRUE

from lagwise.models.errors import Cancelled, SpecError
from lagwise.models.estimate import fit
from lagwise.models.fitindices import rmsea_interval
from lagwise.models.lyapunov import companion_covariance, solve_lyapunov
from lagwise.models.patterns import PatternData
from lagwise.models.results import FitResult
from lagwise.models.simulate import simulate_diary
from lagwise.models.spec import make_spec


@pytest.fixture(scope="module")
def diary():
    return simulate_diary(SPEC, days=50, prompts_per_day=8, p_missed=0.15, p_item_skip=0.03,
                          seed=11, **TRUE)


@pytest.fixture(scope="module")
def base_fit(diary):
    return fit(diary, SPEC)


def test_every_parameter_is_listed_fixed_ones_without_se(base_fit):
    kinds = [p.kind for p in base_fit.parameters]
    # 6 loadings (2 markers fixed), 6 intercepts, 6 unique, 2 inertias, 2 cross-lagged, 3 innovations:
    # 4 + 6 + 6 + 4 + 3 = 23 free
    assert kinds.count("loading") == 6 and kinds.count("intercept") == 6
    assert kinds.count("unique") == 6 and kinds.count("inertia") == 2
    assert kinds.count("cross_lagged") == 2 and kinds.count("innovation") == 3
    markers = [p for p in base_fit.table("loading") if not p.free]
    assert {(p.from_, p.to) for p in markers} == {("calm", "c1"), ("drive", "d1")}
    assert all(p.se is None and p.estimate == 1.0 for p in markers)
    assert all(p.se is not None and p.se > 0 for p in base_fit.parameters if p.free)
    assert base_fit.converged and base_fit.fit.n_free == 23


def test_cross_lagged_direction_rule(base_fit):
    # from = the state at t-1, to = the state at t: B[to, from]
    p = base_fit.get("cross_lagged", "drive", "calm")
    assert p.estimate == pytest.approx(base_fit.lagged[0][0, 1])


def test_json_round_trip(base_fit):
    doc = base_fit.to_json()
    again = FitResult.from_json(doc)
    assert again.to_json() == doc
    assert set(doc["fit"]) >= {"chi2", "df", "p", "rmsea", "cfi", "tli", "srmr", "loglik", "aic", "bic"}
    assert {"kind", "from", "to", "estimate", "se", "standardized"} <= set(doc["parameters"][0])


def test_identifications_are_equivalent(diary, base_fit):
    # Marker loading 1 and innovation variance 1 are two scalings of one model: the maximum
    # of the likelihood is the same (common practice: identification does not change fit).
    other = fit(diary, replace(SPEC, identification="variance"))
    assert other.fit.loglik == pytest.approx(base_fit.fit.loglik, abs=1e-4)
    np.testing.assert_allclose(other.r_squared, base_fit.r_squared, atol=1e-4)


def test_partial_correlation_form_is_a_reparameterisation(diary, base_fit):
    # Psi from partial correlations (standardised negative inverse, no zeros) spans the same
    # set of covariance matrices as free covariances: same maximum (common practice).
    other = fit(diary, replace(SPEC, innovations="partial"))
    assert other.fit.loglik == pytest.approx(base_fit.fit.loglik, abs=1e-4)
    np.testing.assert_allclose(other.innovation, base_fit.innovation, rtol=1e-3, atol=1e-4)
    pc = other.get("partial_correlation", "calm", "drive").estimate
    k_inv = np.linalg.inv(base_fit.innovation)
    assert pc == pytest.approx(-k_inv[0, 1] / np.sqrt(k_inv[0, 0] * k_inv[1, 1]), abs=1e-3)


def test_independent_innovations_nested_in_free(diary, base_fit):
    other = fit(diary, replace(SPEC, innovations="independent"))
    assert other.fit.loglik <= base_fit.fit.loglik + 1e-6
    assert other.innovation[0, 1] == 0.0
    assert other.fit.df == base_fit.fit.df + 1


def test_stationary_latent_covariance_is_lyapunov(base_fit):
    # Phi_0 = B Phi_0 B' + Psi (discrete Lyapunov equation)
    b, psi = base_fit.lagged[0], base_fit.innovation
    np.testing.assert_allclose(base_fit.latent_cov, b @ base_fit.latent_cov @ b.T + psi, atol=1e-8)


def test_companion_covariance_lag2_satisfies_yule_walker():
    # Lutkepohl (2005), eq. 2.1.37: Gamma_0 = B1 Gamma_1' + B2 Gamma_2' + Psi, Gamma_h = [F^h P]_11
    b1, b2 = np.array([[0.4, 0.1], [0.0, 0.3]]), np.array([[0.2, 0.0], [0.1, -0.1]])
    psi = np.array([[1.0, 0.2], [0.2, 0.5]])
    p = companion_covariance([b1, b2], psi)
    f = np.block([[b1, b2], [np.eye(2), np.zeros((2, 2))]])
    g1 = (f @ p)[:2, :2]
    g2 = (f @ f @ p)[:2, :2]
    np.testing.assert_allclose(p[:2, :2], b1 @ g1.T + b2 @ g2.T + psi, atol=1e-10)


def test_kronecker_lyapunov_matches_scipy():
    from scipy.linalg import solve_discrete_lyapunov
    rng = np.random.default_rng(2)
    a = 0.3 * rng.normal(size=(4, 4))
    q = np.cov(rng.normal(size=(4, 20)))
    np.testing.assert_allclose(solve_lyapunov(a, q), solve_discrete_lyapunov(a, q), atol=1e-10)


def test_saturated_em_is_a_maximum(diary):
    # The EM solution is a stationary point of the full-information likelihood (Dempster,
    # Laird & Rubin 1977): its gradient vanishes, and perturbations lower the likelihood.
    from lagwise.models.windows import lag_windows
    data = PatternData(lag_windows(diary, 1).data)
    mu, sigma, ll, ok = data.saturated()
    assert ok and data.n_patterns > 3
    ll2, g_sigma, g_mu = data.loglik(mu, sigma)
    assert ll2 == pytest.approx(ll)
    assert np.max(np.abs(g_mu)) < 1e-3 and np.max(np.abs(g_sigma)) < 1e-3
    rng = np.random.default_rng(0)
    for _ in range(5):
        e = rng.normal(size=sigma.shape) * 1e-3
        assert data.loglik(mu, sigma + e @ e.T + 1e-4 * np.eye(len(mu)), gradient=False)[0] < ll


def test_complete_data_saturated_is_sample_moments():
    # With no missing values the ML mean and covariance are the sample mean and the
    # divisor-n covariance (common practice).
    rng = np.random.default_rng(5)
    x = rng.normal(size=(200, 4))
    mu, sigma, _, _ = PatternData(x).saturated()
    np.testing.assert_allclose(mu, x.mean(0))
    np.testing.assert_allclose(sigma, np.cov(x.T, bias=True), atol=1e-12)


def test_fit_index_formulas(base_fit):
    f = base_fit.fit
    n = f.n_obs
    # RMSEA = sqrt(max(chi2 - df, 0) / (df N)); chi-square p from the chi-square law
    assert f.rmsea == pytest.approx(np.sqrt(max(f.chi2 - f.df, 0) / (f.df * n)))
    assert f.p == pytest.approx(chi2_dist.sf(f.chi2, f.df))
    assert f.aic == pytest.approx(-2 * f.loglik + 2 * f.n_free)
    assert f.bic == pytest.approx(-2 * f.loglik + f.n_free * np.log(n))


def test_rmsea_interval_inverts_noncentral_chi_square():
    # Browne & Cudeck (1993): the bounds are the noncentrality values at which the observed
    # chi-square is the 95th and 5th percentile.
    chi2, df, n = 180.0, 120, 400
    lo, hi = rmsea_interval(chi2, df, n)
    assert ncx2.cdf(chi2, df, lo ** 2 * df * n) == pytest.approx(0.95, abs=1e-6)
    assert ncx2.cdf(chi2, df, hi ** 2 * df * n) == pytest.approx(0.05, abs=1e-6)


def test_too_many_parameters_is_a_spec_error(diary):
    # six states on all six items: 30 free loadings + 6 unique + 6 intercepts + 36 paths
    # + 21 innovations = 99 parameters > 12 * 15 / 2 = 90 moments of a depth-1 window
    items = list(diary.items)
    spec = make_spec({f"s{i}": items[i:] + items[:i] for i in range(6)}, lags=1)
    with pytest.raises(SpecError, match="moments"):
        fit(diary, spec)


def test_unknown_item_is_a_spec_error(diary):
    with pytest.raises(SpecError, match="unknown item"):
        fit(diary, make_spec({"a": ["c1", "nope", "c3"]}))


def test_cancel_stops_the_fit(diary):
    class Stop:
        calls = 0

        def report(self, fraction, message):
            pass

        def cancelled(self):
            Stop.calls += 1
            return Stop.calls > 3

    with pytest.raises(Cancelled):
        fit(diary, SPEC, monitor=Stop())
