"""Impulse responses (models.responses) checked against the outside world.

- statsmodels' VAR impulse responses (statsmodels.tsa.api.VAR, VARResults.irf): unit and
  orthogonal responses, their cumulative sums and their asymptotic standard errors. The
  cleanest like-for-like input: a real Lagwise fit of single-item states (the first-copy-free
  estimator, whose parameter list is that of a VAR) with statsmodels' OLS coefficients, its
  residual covariance and its coefficient covariance put in place of Lagwise's estimates
  (`with_var`). Both programs then work from the same matrices, so only the response
  computation is compared, not two estimators.
- percentile bands against numpy percentiles of statsmodels' own responses of bootstrap refits;
  band coverage in a small simulation with known truth;
- the half-life of an AR(1) (common practice) and identities of the engine's own solution.
"""

from __future__ import annotations

import json
from dataclasses import replace
from functools import cache
from pathlib import Path

import numpy as np
import pytest
from scipy.linalg import solve_discrete_lyapunov
from statsmodels.tools.numdiff import approx_fprime
from statsmodels.tsa.api import VAR
from statsmodels.tsa.vector_ar.var_model import ma_rep

from lagwise.desktop.cli import main
from lagwise.models import jsonread
from lagwise.models.errors import FieldError, SpecError
from lagwise.models.estimate import fit
from lagwise.models.estimators import FitOptions
from lagwise.models.kinds import Kind
from lagwise.models.parameters import ParameterLayout
from lagwise.models.report import format_responses
from lagwise.models.responses import VARIANTS, Responses, impulse_responses
from lagwise.models.results import FitResult
from lagwise.models.simulate import simulate_diary
from lagwise.models.spec import make_spec

B1 = np.array([[0.45, 0.2, 0.0], [-0.1, 0.3, 0.15], [0.0, 0.25, 0.4]])
B2 = np.array([[0.15, 0.0, 0.1], [0.0, -0.2, 0.0], [0.1, 0.0, 0.1]])
PSI = np.array([[1.0, 0.3, 0.1], [0.3, 0.9, 0.2], [0.1, 0.2, 1.1]])
NAMES = ("calm", "tense", "tired")
H = 8


def var_spec(lags: int, names=NAMES):
    return make_spec({n: [n] for n in names}, lags=lags)


@cache
def var_data(lags: int, prompts: int = 400, seed: int = 11) -> np.ndarray:
    spec = var_spec(lags)
    diary = simulate_diary(spec, loadings=np.eye(3), intercepts=np.array([4.0, 2.0, 3.0]),
                           unique=np.zeros(3), lagged=[B1, B2][:lags], innovation=PSI, days=1,
                           prompts_per_day=prompts, seed=seed)
    return diary


@cache
def template(lags: int) -> FitResult:
    """A real first-copy-free fit of single-item states (its parameter list is a VAR's)."""
    return fit(var_data(lags), var_spec(lags), FitOptions(estimator="first-copy-free"))


@cache
def statsmodels_var(lags: int):
    return VAR(var_data(lags).values).fit(lags, trend="c")


def _vech_index(i: int, j: int, k: int) -> int:
    """Position of (i, j), i >= j, in vech (lower triangle stacked column by column)."""
    return sum(k - c for c in range(j)) + (i - j)


def with_var(base: FitResult, coefs: np.ndarray, sigma: np.ndarray,
             cov_coefs: np.ndarray | None = None, cov_vech: np.ndarray | None = None) -> FitResult:
    """`base` with statsmodels' VAR numbers in place of its lagged paths and innovations:
    coefs (p, k, k), sigma (k, k); cov_coefs: covariance of vec([A_1 ... A_p]) (statsmodels'
    order: column by column of the k x kp matrix), cov_vech: covariance of vech(sigma).
    Other free parameters keep their estimates and get no variance."""
    states = base.states
    k = len(states)
    place: dict[tuple[str, str, str], tuple[str, int]] = {}
    values = {}
    for lag in range(1, coefs.shape[0] + 1):
        for i in range(k):
            for j in range(k):
                kind = Kind.LAG2 if lag == 2 else (Kind.INERTIA if i == j else Kind.CROSS_LAGGED)
                key = (kind, states[j], states[i])
                place[key] = ("a", k * ((lag - 1) * k + j) + i)
                values[key] = coefs[lag - 1, i, j]
    for i in range(k):
        for j in range(i + 1):
            key = (Kind.INNOVATION, states[j], states[i])
            place[key] = ("s", _vech_index(i, j, k))
            values[key] = sigma[i, j]
    parameters = tuple(replace(p, estimate=float(values.get(p.key, p.estimate)))
                       for p in base.parameters)
    free = [p for p in parameters if p.free]
    cov = None
    if cov_coefs is not None:
        cov = np.zeros((len(free), len(free)))
        for a, p in enumerate(free):
            for b, r in enumerate(free):
                if p.key in place and r.key in place and place[p.key][0] == place[r.key][0]:
                    source = cov_coefs if place[p.key][0] == "a" else cov_vech
                    cov[a, b] = source[place[p.key][1], place[r.key][1]]
    return replace(base, parameters=parameters, lagged=tuple(np.array(c) for c in coefs),
                   innovation=np.array(sigma), covariance=cov)


def from_statsmodels(lags: int) -> tuple[FitResult, object]:
    """The template with statsmodels' OLS VAR and the covariances its IRAnalysis uses: cov_a
    for the coefficients and cov_sig / T for vech(sigma_u)."""
    res = statsmodels_var(lags)
    irf = res.irf(H)
    return with_var(template(lags), res.coefs, res.sigma_u, irf.cov_a, irf.cov_sig / irf.T), irf


# ----- statsmodels: the responses themselves -------------------------------------------------
@pytest.mark.parametrize("lags", [1, 2])
def test_unit_and_orthogonal_responses_equal_statsmodels_irf(lags):
    # statsmodels VARResults.irf(H): .irfs (MA coefficients Phi_h), .orth_irfs (Phi_h P,
    # P = Cholesky of sigma_u), .cum_effects, .orth_cum_effects. Lag 2 goes through the
    # companion form on our side.
    result, irf = from_statsmodels(lags)
    ours = impulse_responses(result, horizon=H)
    np.testing.assert_allclose(ours.unit, irf.irfs, atol=1e-6, rtol=0)
    np.testing.assert_allclose(ours.orthogonal, irf.orth_irfs, atol=1e-6, rtol=0)
    np.testing.assert_allclose(ours.curve("unit", cumulative=True).estimate, irf.cum_effects, atol=1e-6)
    np.testing.assert_allclose(ours.curve("orthogonal", cumulative=True).estimate,
                               irf.orth_cum_effects, atol=1e-6)
    assert np.array_equal(ours.unit[0], np.eye(3))


def test_the_order_of_the_states_equals_statsmodels_on_reordered_data():
    # statsmodels has no var_order (NotImplementedError): the same VAR fitted to the columns
    # in the chosen order gives the Cholesky responses of that order; mapped back here.
    order = ("tired", "calm", "tense")
    perm = [NAMES.index(s) for s in order]
    res = VAR(var_data(1).values[:, perm]).fit(1, trend="c")
    theirs = res.irf(H).orth_irfs
    result = with_var(template(1), statsmodels_var(1).coefs, statsmodels_var(1).sigma_u)
    ours = impulse_responses(result, horizon=H, order=order)
    assert ours.order == order and ours.states == NAMES
    np.testing.assert_allclose(ours.orthogonal[:, perm][:, :, perm], theirs, atol=1e-6)
    np.testing.assert_allclose(ours.unit, impulse_responses(result, horizon=H).unit, atol=0)
    assert any("order" in note for note in ours.notes)


# ----- statsmodels: asymptotic standard errors ----------------------------------------------
@pytest.mark.parametrize("lags", [1, 2])
def test_delta_method_standard_errors_equal_statsmodels_stderr(lags):
    # statsmodels IRAnalysis.stderr / cum_effect_stderr (Lutkepohl 2005, 3.7.5 and 3.7.8):
    # analytic derivatives G_i, H with cov_a = kron((Z'Z)^-1, sigma_u) (sigma_u with the
    # T - kp - 1 divisor) and cov_sig / T = 2 D+ (sigma_u x sigma_u) D+' / T for vech(sigma_u).
    # Our delta method gets exactly that covariance through FitResult.covariance, so any
    # difference is the derivative alone (central differences against the analytic form).
    result, irf = from_statsmodels(lags)
    ours = impulse_responses(result, horizon=H)
    checks = [("unit", False, irf.stderr(orth=False)), ("orthogonal", False, irf.stderr(orth=True)),
              ("unit", True, irf.cum_effect_stderr(orth=False)),
              ("orthogonal", True, irf.cum_effect_stderr(orth=True))]
    for form, cumulative, theirs in checks:
        se = ours.curve(form, cumulative=cumulative).se
        np.testing.assert_allclose(se, theirs, rtol=1e-6, atol=1e-9, err_msg=f"{form} {cumulative}")
    band = ours.curve("unit")
    np.testing.assert_allclose(band.upper - band.estimate, 1.959963984540054 * band.se, rtol=1e-12)
    assert ours.interval == "delta"


def test_percentile_bands_equal_percentiles_of_statsmodels_refits():
    # Bootstrap replicates: statsmodels VAR refitted to series simulated from the fitted VAR
    # (numpy normal draws). Our percentile bands from the replicates' parameter vectors equal
    # numpy's percentiles of statsmodels' own ma_rep / orth_ma_rep of the same refits.
    res = statsmodels_var(1)
    base = with_var(template(1), res.coefs, res.sigma_u)
    free = [p.key for p in base.free_parameters]
    rng = np.random.default_rng(3)
    rows, units, orths = [], [], []
    for _ in range(60):
        series = simulate_var(res.coefs, res.sigma_u, 300, rng)
        refit = VAR(series).fit(1, trend="c")
        replicate = with_var(base, refit.coefs, refit.sigma_u)
        estimates = {p.key: p.estimate for p in replicate.free_parameters}
        rows.append([estimates[key] for key in free])
        units.append(refit.ma_rep(H))
        orths.append(refit.orth_ma_rep(H))

    class Replicates:
        estimates = np.array(rows)

    ours = impulse_responses(base, horizon=H, bootstrap=Replicates(), level=0.9)
    assert ours.interval == "percentile" and ours.replicates == 60
    for form, theirs in (("unit", units), ("orthogonal", orths)):
        low, high = np.percentile(np.array(theirs), [5, 95], axis=0)
        np.testing.assert_allclose(ours.curve(form).lower, low, atol=1e-8)
        np.testing.assert_allclose(ours.curve(form).upper, high, atol=1e-8)
    with pytest.raises(SpecError):
        class Wrong:
            estimates = np.zeros((3, 2))
        impulse_responses(base, bootstrap=Wrong())


def simulate_var(coefs: np.ndarray, sigma: np.ndarray, n: int, rng, burn: int = 100) -> np.ndarray:
    k = sigma.shape[0]
    q = coefs.shape[0]
    shocks = rng.multivariate_normal(np.zeros(k), sigma, size=n + burn)
    y = np.zeros((n + burn, k))
    for t in range(n + burn):
        y[t] = shocks[t] + sum(coefs[l] @ y[t - l - 1] for l in range(q) if t - l - 1 >= 0)
    return y[burn:]


def test_delta_method_bands_cover_the_true_responses():
    # Simulation with known truth (a 2-state VAR(1)): 95% delta-method bands of OLS fits
    # (statsmodels) hold the true unit and orthogonal responses (statsmodels' ma_rep of the
    # true coefficients) about 95% of the time, pooled over h = 1..3 and all pairs.
    truth_b = np.array([[[0.5, 0.2], [-0.15, 0.3]]])
    truth_psi = np.array([[1.0, 0.4], [0.4, 0.8]])
    true_unit = ma_rep(truth_b, 3)
    true_orth = true_unit @ np.linalg.cholesky(truth_psi)
    spec = var_spec(1, ("calm", "tense"))
    diary = simulate_diary(spec, loadings=np.eye(2), intercepts=np.zeros(2), unique=np.zeros(2),
                           lagged=list(truth_b), innovation=truth_psi, days=1, prompts_per_day=200,
                           seed=8)
    base = fit(diary, spec, FitOptions(estimator="first-copy-free"))
    rng = np.random.default_rng(12)
    hits = {"unit": [], "orthogonal": []}
    for _ in range(150):
        res = VAR(simulate_var(truth_b, truth_psi, 300, rng)).fit(1, trend="c")
        irf = res.irf(3)
        ours = impulse_responses(with_var(base, res.coefs, res.sigma_u, irf.cov_a, irf.cov_sig / irf.T),
                                 horizon=3)
        for form, truth in (("unit", true_unit), ("orthogonal", true_orth)):
            c = ours.curve(form)
            hits[form].append(((c.lower[1:] <= truth[1:]) & (truth[1:] <= c.upper[1:])).ravel())
    for form, found in hits.items():
        coverage = float(np.mean(found))
        assert 0.92 <= coverage <= 0.975, (form, coverage)


# ----- common practice and the engine's own solution -----------------------------------------
@cache
def ar1_template() -> FitResult:
    spec = make_spec({"mood": ["mood"]})
    diary = simulate_diary(spec, loadings=np.eye(1), intercepts=np.zeros(1), unique=np.zeros(1),
                           lagged=[np.array([[0.5]])], innovation=np.eye(1), days=1,
                           prompts_per_day=150, seed=4)
    return fit(diary, spec, FitOptions(estimator="first-copy-free"))


@pytest.mark.parametrize("r", [0.05, 0.3, 0.5, 0.6, 0.7071, 0.8, 0.9, 0.93])
def test_half_life_of_an_ar1_is_the_first_h_with_r_to_the_h_below_one_half(r):
    # Common practice: the half-life of an AR(1) with inertia r in (0, 1) is the smallest h
    # with r^h < 1/2 (None here when beyond the horizon).
    result = with_var(ar1_template(), np.array([[[r]]]), np.eye(1))
    expected = next((h for h in range(1, 11) if r ** h < 0.5), None)
    ours = impulse_responses(result, horizon=10)
    assert ours.half_life == (expected,)
    assert ours.oscillates == (False,)
    np.testing.assert_allclose(ours.unit[:, 0, 0], r ** np.arange(11), rtol=1e-12)
    words = ours.sentence("mood")
    assert ("has not halved within 10 prompts" in words) == (expected is None)


def test_a_negative_inertia_swings_and_says_so():
    ours = impulse_responses(with_var(ar1_template(), np.array([[[-0.6]]]), np.eye(1)), horizon=6)
    assert ours.half_life == (2,) and ours.oscillates == (True,)   # 0.6 > 1/2, 0.36 < 1/2
    assert "swings between rises and falls" in ours.sentence(0)


def test_standardized_responses_follow_the_engines_standardized_solution():
    # Identities: the standardized unit response one prompt later is the standardized lagged
    # path (lag-1 model); the stationary SD solves the Lyapunov equation (scipy); the h = 1
    # unit response and its SE are the lagged path and its SE.
    result = template(1)
    ours = impulse_responses(result, horizon=5)
    sd = np.sqrt(np.diag(solve_discrete_lyapunov(result.lagged[0], result.innovation)))
    np.testing.assert_allclose(ours.state_sd, sd, rtol=1e-9)
    std = ours.curve("unit", standardized=True)
    se = ours.curve("unit").se
    for p in result.free_parameters:
        if p.kind in (Kind.INERTIA, Kind.CROSS_LAGGED):
            i, j = NAMES.index(p.to), NAMES.index(p.from_)
            assert std.estimate[1, i, j] == pytest.approx(p.standardized, rel=1e-9)
            assert ours.unit[1, i, j] == pytest.approx(p.estimate, rel=1e-12)
            assert se[1, i, j] == pytest.approx(p.se, rel=1e-6)
    orth = ours.curve("orthogonal", standardized=True).estimate
    np.testing.assert_allclose(orth, ours.orthogonal / sd[None, :, None], rtol=1e-12)


@cache
def partial_fit() -> FitResult:
    spec = var_spec(2, NAMES)
    spec = replace(spec, innovations="partial", partial_zeros=(("calm", "tired"),))
    spec = spec.with_paths(2, np.eye(3, dtype=bool))
    return fit(var_data(2), spec)


def test_delta_method_through_the_partial_correlation_form_and_lag_2():
    # The Jacobian goes through ParameterLayout.unpack, Psi = D R^-1 D included. Checked with
    # statsmodels' own numerical derivative (statsmodels.tools.numdiff.approx_fprime) of the
    # orthogonal impact Theta_0 = Cholesky(Psi(theta)); and Phi_1 = B_1 (identity), so the
    # SE of the h = 1 unit responses is the lagged path's SE.
    result = partial_fit()
    ours = impulse_responses(result, horizon=4)
    layout = ParameterLayout(result.spec)
    free = result.free_parameters
    theta = layout.theta_from({p.key: p.estimate for p in free})
    jac = approx_fprime(theta, lambda t: np.linalg.cholesky(layout.unpack(t).psi).ravel(), centered=True)
    expected = np.sqrt(np.einsum("ij,jk,ik->i", jac, result.covariance, jac)).reshape(3, 3)
    np.testing.assert_allclose(ours.curve("orthogonal").se[0], expected, rtol=1e-4, atol=1e-8)
    se = ours.curve("unit").se
    for p in free:
        if p.kind in (Kind.INERTIA, Kind.CROSS_LAGGED):
            assert se[1, NAMES.index(p.to), NAMES.index(p.from_)] == pytest.approx(p.se, rel=1e-6)
    np.testing.assert_allclose(ours.unit[2], result.lagged[0] @ result.lagged[0] + result.lagged[1],
                               atol=1e-12)


def test_independent_innovations_and_no_covariance():
    spec = replace(var_spec(1), innovations="independent")
    result = fit(var_data(1), spec)
    ours = impulse_responses(result, horizon=3)
    np.testing.assert_allclose(ours.orthogonal, ours.unit * np.sqrt(np.diag(result.innovation)),
                               atol=1e-12)
    assert np.all(np.isfinite(ours.curve("orthogonal").se))
    bare = impulse_responses(replace(result, covariance=None), horizon=3)
    assert bare.interval == "none" and bare.curve("unit").lower is None
    assert any(note.startswith("No bands") for note in bare.notes)


def test_not_stationary_paths_give_no_standardized_responses():
    result = with_var(template(1), np.array([[[1.05, 0, 0], [0, 0.2, 0], [0, 0, 0.2]]]), PSI)
    ours = impulse_responses(result, horizon=4)
    assert not ours.standardized_available
    assert np.all(np.isnan(ours.curve("unit", standardized=True).estimate))
    assert any("not stationary" in note for note in ours.notes)
    assert "SD" not in ours.sentence(0, standardized=True)


def test_bad_requests_are_refused_in_one_line():
    result = template(1)
    for bad in (0, 201, 2.5):
        with pytest.raises(SpecError):
            impulse_responses(result, horizon=bad)
    with pytest.raises(SpecError):
        impulse_responses(result, order=("calm", "calm", "tired"))


# ----- JSON ------------------------------------------------------------------------------------
def test_json_round_trip_is_strict_and_keeps_the_convention():
    result = partial_fit()
    ours = impulse_responses(result, horizon=6, order=("tired", "tense", "calm"))
    doc = json.loads(json.dumps(ours.to_json(), allow_nan=False))
    for key in ("horizon", "order", "unit", "orthogonal", "unit_lower", "unit_upper",
                "orthogonal_lower", "orthogonal_upper", "half_life"):
        assert key in doc
    # unit[h][i][j]: state i, h prompts after a shock to state j (own units)
    assert doc["unit"][1][1][0] == pytest.approx(result.lagged[0][1, 0])
    back = Responses.from_json(jsonread.parse(json.dumps(doc)), "responses")
    assert (back.states, back.order, back.horizon, back.half_life, back.oscillates) == (
        ours.states, ours.order, ours.horizon, ours.half_life, ours.oscillates)
    for name in VARIANTS:
        for part in ("estimate", "se", "lower", "upper"):
            np.testing.assert_array_equal(getattr(back.curves[name], part), getattr(ours.curves[name], part))
    assert back.sentences() == ours.sentences() and back.notes == ours.notes
    for broken, where in ((dict(doc, extra=1), "responses"),
                          (dict(doc, unit=doc["unit"][:-1]), "responses.unit"),
                          (dict(doc, order=["calm", "calm", "tense"]), "responses.order"),
                          (dict(doc, half_life=[1, 2]), "responses.half_life")):
        with pytest.raises(FieldError) as error:
            Responses.from_json(broken, "responses")
        assert error.value.where.startswith(where)


# ----- the command line ------------------------------------------------------------------------
DEMO = Path(__file__).resolve().parents[1] / "resources" / "demo" / "demo_diary.csv"
DEMO_ARGS = ["--day", "day", "--prompt", "prompt", "--state", "tension=tense,restless,worried",
             "--state", "low mood=sad,flat,hopeless"]


def test_lagwise_fit_writes_and_prints_the_responses(tmp_path, capsys):
    out = tmp_path / "fit.json"
    assert main(["fit", str(DEMO), *DEMO_ARGS, "--horizon", "4", "--json", str(out)]) == 0
    text = capsys.readouterr().out
    doc = jsonread.parse(out.read_text())
    result = FitResult.from_json(doc)
    expected = impulse_responses(result, horizon=4)
    assert doc["responses"] == json.loads(json.dumps(expected.to_json()))
    assert format_responses(expected) in text
    for sentence in expected.sentences():
        assert sentence in text
    shown = Responses.from_json(doc["responses"], "responses")
    assert shown.horizon == 4 and shown.interval == "delta"


def test_a_saved_project_is_refitted_with_a_horizon(tmp_path):
    project = tmp_path / "p.lagwise"
    assert main(["fit", str(DEMO), *DEMO_ARGS, "--save", str(project)]) == 0
    out = tmp_path / "refit.json"
    assert main(["fit", str(project), "--horizon", "3", "--json", str(out)]) == 0
    doc = jsonread.parse(out.read_text())
    assert doc["responses"]["horizon"] == 3 and len(doc["responses"]["unit"]) == 4


def test_lagwise_fit_refuses_a_bad_horizon_in_one_line(tmp_path, capsys):
    assert main(["fit", str(DEMO), *DEMO_ARGS, "--horizon", "0"]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("lagwise:") and "horizon" in err and "\n" not in err


def test_a_shorter_horizon_reuses_the_longer_one_exactly():
    result, _ = from_statsmodels(2)
    long = impulse_responses(result, horizon=12)
    short = impulse_responses(result, horizon=5)
    fresh = impulse_responses(replace(result), horizon=5)   # another result: computed anew
    for name in VARIANTS:
        np.testing.assert_array_equal(short.curves[name].se, long.curves[name].se[:6])
        np.testing.assert_allclose(fresh.curves[name].se, short.curves[name].se, rtol=1e-9, atol=1e-12)


def test_a_model_without_lags_responds_only_at_once():
    result = fit(var_data(1), var_spec(0))
    ours = impulse_responses(result, horizon=3)
    np.testing.assert_array_equal(ours.unit[1:], 0.0)
    np.testing.assert_allclose(ours.orthogonal[0], np.linalg.cholesky(result.innovation), atol=1e-12)
    assert ours.half_life == (1, 1, 1)
    np.testing.assert_allclose(ours.state_sd, np.sqrt(np.diag(result.innovation)), rtol=1e-12)
