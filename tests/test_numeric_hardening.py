"""Estimation on hard but plausible data: a plain one-line error (exit 2) naming the item or
state, or a result; never a traceback and never a floating-point warning on the terminal.

Data: the bundled demo diary (resources/demo, simulated from known parameters), altered in
each test the way a real diary can go wrong. The rescaling test checks an exact invariance
of the model under a change of an item's units (common practice, see models.conditioning).
"""

from __future__ import annotations

import warnings
from dataclasses import replace

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from lagwise.desktop.cli import main
from lagwise.models.diary import Diary, TimeSettings
from lagwise.models.errors import LagwiseError
from lagwise.models.estimate import fit
from lagwise.models.conditioning import pairwise_correlations
from lagwise.models.estimators import ESTIMATORS, FitOptions
from lagwise.models.recipe import load_diary
from lagwise.models.screening import screen_diary
from lagwise.models.spec import make_spec
from lagwise.models.windows import lag_windows
from lagwise.resources import demo_diary_path

ITEMS = ["tense", "restless", "worried", "sad", "flat", "hopeless", "lively", "focused", "rested"]
TWO_STATES = ["--state", "tension=tense,restless,worried", "--state", "mood=sad,flat,hopeless"]
GRID = ["--day", "day", "--prompt", "prompt"]


def demo_table() -> pd.DataFrame:
    return pd.read_csv(demo_diary_path())


def run_fit(tmp_path, capsys, table: pd.DataFrame, states=TWO_STATES, extra=()):
    """`lagwise fit` on `table`: exit code, stderr; fails on any warning raised meanwhile."""
    path = tmp_path / "diary.csv"
    table.to_csv(path, index=False)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        code = main(["fit", str(path), *GRID, *states, *extra])
    assert [str(w.message) for w in caught] == []
    err = capsys.readouterr().err
    assert "Traceback" not in err
    return code, err


def one_line(err: str) -> str:
    """The one error line (the diary's notes, printed before fitting, are not errors)."""
    lines = [line for line in err.splitlines()
             if line.strip() and not line.startswith("lagwise: note: ")]
    assert len(lines) == 1, err
    return lines[0]


@pytest.mark.parametrize("estimator", list(ESTIMATORS))
def test_a_duplicated_item_is_named_as_collinear(tmp_path, capsys, estimator):
    table = demo_table()
    table["tense2"] = table["tense"]
    code, err = run_fit(tmp_path, capsys, table,
                        ["--state", "t=tense,tense2,restless", "--state", "m=sad,flat,hopeless"],
                        ["--estimator", estimator])
    assert code == 2
    assert "items tense and tense2 are (nearly) collinear (correlation 1.000)" in one_line(err)


def test_an_item_that_is_minus_a_million_times_another_is_collinear(tmp_path, capsys):
    table = demo_table()
    table["restless"] = -1e6 * table["tense"]
    code, err = run_fit(tmp_path, capsys, table)
    assert code == 2 and "tense and restless" in one_line(err) and "-1.000" in err


def test_an_item_that_is_the_sum_of_two_others_is_named(tmp_path, capsys):
    table = demo_table()
    table["worried"] = table["tense"] + table["restless"]
    code, err = run_fit(tmp_path, capsys, table)
    assert code == 2
    assert "items tense, restless and worried are (nearly) linearly dependent" in one_line(err)


def test_fewer_windows_than_the_window_width(tmp_path, capsys):
    # the first 8 prompts: 6 items in windows of 2 prompts give 12 columns, so the data's
    # window covariance needs at least 13 complete windows (common practice)
    code, err = run_fit(tmp_path, capsys, demo_table().head(8))
    assert code == 2
    assert "Too few complete lag windows" in one_line(err) and "need at least 13" in err


@pytest.mark.parametrize("rows, words", [(16, "windows of 2 prompts: need at least 13"),
                                         (24, "windows of 3 prompts: need at least 19")])
def test_the_lag2_check_on_too_few_windows(tmp_path, capsys, rows, words):
    # 16 prompts: too few complete windows for the lag-1 fit itself; 24: enough for it, too
    # few for the lag-2 check's windows of 3 prompts (18 columns: at least 19 windows)
    code, err = run_fit(tmp_path, capsys, demo_table().head(rows), extra=["--lag2-check"])
    assert code == 2
    assert "Too few complete lag windows" in one_line(err) and words in err


def test_explosive_dynamics_name_the_state(tmp_path, capsys):
    # a state with inertia 1.3 (explosive: values reach about 1e28 over the demo's prompts)
    rng = np.random.default_rng(7)
    table = demo_table()
    eta = np.zeros(len(table))
    for t in range(1, eta.size):
        eta[t] = 1.3 * eta[t - 1] + rng.normal()
    assert np.abs(eta).max() > 1e25
    for loading, item in zip((1.0, 1.2, 0.8), ("tense", "restless", "worried")):
        table[item] = loading * eta + rng.normal(size=eta.size)
    code, err = run_fit(tmp_path, capsys, table)
    assert code == 2 and "state tension looks non-stationary" in one_line(err)


def test_values_beyond_floating_point_ask_for_rescaling(tmp_path, capsys):
    table = demo_table()
    table[ITEMS] = table[ITEMS] * 1e300
    code, err = run_fit(tmp_path, capsys, table)
    assert code == 2 and "item 'tense' has values far too large" in one_line(err)
    assert "rescale" in err


@pytest.mark.parametrize("change, words", [
    (lambda column: column * 0.0 + 3.0, "item 'restless' does not vary"),
    (lambda column: column * 1e-300, "item 'restless' has values far too small"),
])
def test_constant_or_vanishing_items_are_named_before_estimating(tmp_path, capsys, change, words):
    table = demo_table()
    table["restless"] = change(table["restless"])
    code, err = run_fit(tmp_path, capsys, table)
    assert code == 2 and words in one_line(err)
    path = tmp_path / "diary.csv"
    diary = load_diary(path, time=TimeSettings(mode="grid", day="day", prompt="prompt"),
                       items=ITEMS)
    assert any(words.replace("item", "Item") in w for w in screen_diary(diary).readiness.warnings)


@pytest.fixture(scope="module")
def demo():
    return load_diary(demo_diary_path(), time=TimeSettings(mode="grid", day="day", prompt="prompt"),
                      items=ITEMS)


SPEC = make_spec({"tension": ["tense", "restless", "worried"], "mood": ["sad", "flat", "hopeless"],
                  "energy": ["lively", "focused", "rested"]})


@pytest.mark.parametrize("item", ["restless", "tense"])
def test_an_item_in_other_units_changes_only_what_its_units_touch(demo, item):
    # y -> 1e4 y for one item is a change of units: its loading and intercept scale by 1e4,
    # its unique variance by 1e8; lagged paths do not change unless the item is its state's
    # marker, whose state then is in 1e4 times smaller units (paths into it x1e4, out of it
    # /1e4, its innovation variance x1e8); standardized values, chi-square and RMSEA do not
    # change and the log-likelihood falls by log(1e4) per answer counted (the Jacobian of
    # the change of variables). Common practice; before the internal rescaling this fit did
    # not converge.
    values = demo.values.copy()
    j = ITEMS.index(item)
    values[:, j] *= 1e4
    base, scaled = fit(demo, SPEC), fit(replace(demo, values=values), SPEC)
    assert base.converged and scaled.converged
    marker = 1e4 if item == "tense" else 1.0
    expected = {("loading", "tension", item): 1e4 / marker, ("intercept", item, item): 1e4,
                ("unique", item, item): 1e8, ("inertia", "tension", "tension"): 1.0,
                ("cross_lagged", "mood", "tension"): marker,
                ("cross_lagged", "tension", "mood"): 1 / marker,
                ("cross_lagged", "energy", "mood"): 1.0,
                ("innovation", "tension", "tension"): marker ** 2,
                ("innovation", "tension", "mood"): marker}
    for key, factor in expected.items():
        a, b = base.get(*key), scaled.get(*key)
        assert b.estimate == pytest.approx(factor * a.estimate, rel=1e-5), key
        assert b.standardized == pytest.approx(a.standardized, abs=1e-6), key
        if a.se is not None:
            assert b.se == pytest.approx(factor * a.se, rel=1e-5), key
    windows = lag_windows(demo.select(ITEMS), 1).data
    counted = int((~np.isnan(windows[:, [j, j + len(ITEMS)]])).sum())
    assert scaled.fit.loglik == pytest.approx(base.fit.loglik - counted * np.log(1e4), abs=1e-6)
    assert scaled.fit.chi2 == pytest.approx(base.fit.chi2, rel=1e-6)
    assert scaled.fit.rmsea == pytest.approx(base.fit.rmsea, abs=1e-8)


@pytest.mark.parametrize("form", [{"identification": "variance"}, {"innovations": "partial"}])
def test_every_parameter_follows_the_change_of_units(demo, form):
    # tense (the marker of tension) in 1e4 times larger units, first-copy-free windows: under
    # variance identification only tense's own loading, intercept and unique variance
    # change; under marker identification tension is in 1e4 times larger units too, so each
    # parameter scales by 1e4 per tension at its "to" end and 1/1e4 per tension at its
    # "from" end of a loading or path, by 1e4 per tension in a (co)variance (common practice)
    spec = make_spec({"tension": ["tense", "restless", "worried"],
                      "mood": ["sad", "flat", "hopeless"]}, **form)
    values = demo.values.copy()
    values[:, 0] *= 1e4
    options = FitOptions(estimator="first-copy-free")
    base, scaled = fit(demo, spec, options), fit(replace(demo, values=values), spec, options)
    assert base.converged and scaled.converged
    marker = 1e4 if spec.identification == "marker" else 1.0

    def units(name: str) -> float:
        return marker if name.split("@")[0] == "tension" else 1.0

    def factor(kind, from_, to) -> float:
        own = 1e4 if to == "tense" else 1.0
        return {"loading": own / units(from_), "intercept": own, "unique": own ** 2,
                "inertia": 1.0, "cross_lagged": units(to) / units(from_),
                "innovation": units(from_) * units(to), "first_copy": units(from_) * units(to),
                "latent_intercept": units(to)}.get(kind, 1.0)

    for a, b in zip(base.free_parameters, scaled.free_parameters):
        f = factor(*a.key)
        assert b.estimate == pytest.approx(f * a.estimate, abs=1e-3 * f * a.se), a.key
        assert b.se == pytest.approx(f * a.se, rel=1e-4), a.key


def test_the_exact_estimator_reports_in_original_units(demo):
    # the same invariance for the exact likelihood, with its state scores in the state's units
    values = demo.values.copy()
    values[:, ITEMS.index("tense")] *= 1e4
    options = FitOptions(estimator="exact")
    spec = make_spec({"tension": ["tense", "restless", "worried"]})
    base, scaled = fit(demo, spec, options), fit(replace(demo, values=values), spec, options)
    assert scaled.converged
    # the marker in 1e4 times larger units: the state too, so the other loadings / 1e4
    np.testing.assert_allclose(scaled.loadings, base.loadings * [[1.0], [1e-4], [1e-4]], rtol=1e-6)
    np.testing.assert_allclose(scaled.innovation, base.innovation * 1e8, rtol=1e-6)
    expected = base.state_scores.smoothed * 1e4
    np.testing.assert_allclose(scaled.state_scores.smoothed, expected,
                               atol=1e-6 * float(np.nanmax(np.abs(expected))))
    n_tense = int((~np.isnan(values[:, 0])).sum())
    assert scaled.fit.loglik == pytest.approx(base.fit.loglik - n_tense * np.log(1e4), abs=1e-6)


# ----------------------------------------------------------------------- random small diaries

@st.composite
def small_diaries(draw):
    """A short diary of 2-4 items with some of: few rows, a constant or nearly constant
    column, a duplicated column, huge or tiny scales, answers 0/1 only, many missed answers,
    a column with two answers."""
    n = draw(st.integers(3, 60))
    p = draw(st.integers(2, 4))
    rng = np.random.default_rng(draw(st.integers(0, 2 ** 32 - 1)))
    values = rng.normal(size=(n, p)).cumsum(axis=0) * 0.3 + rng.normal(size=(n, p))
    for j in range(p):
        trouble = draw(st.sampled_from(["none", "none", "constant", "near-constant", "duplicate",
                                        "scale", "missing", "binary", "two answers"]))
        if trouble == "constant":
            values[:, j] = 4.0
        elif trouble == "near-constant":
            values[:, j] = 4.0 + 1e-12 * values[:, j]
        elif trouble == "binary":
            values[:, j] = values[:, j] > 0
        elif trouble == "two answers":
            values[2:, j] = np.nan
        elif trouble == "duplicate" and j > 0:
            values[:, j] = values[:, 0]
        elif trouble == "scale":
            values[:, j] *= 10.0 ** draw(st.sampled_from([-300, -60, -8, 8, 60, 300]))
        elif trouble == "missing":
            values[rng.random(n) < 0.7, j] = np.nan
    per_day = draw(st.integers(2, 8))
    day = np.arange(n) // per_day
    items = tuple(f"item{j}" for j in range(p))
    diary = Diary(items=items, values=values, segment=day, day=day,
                  day_labels=tuple(str(d) for d in range(day.max() + 1)),
                  prompt=(np.arange(n) % per_day + 1).astype(float))
    split = draw(st.integers(0, p - 1))   # 0: one state; else two (maybe of one item)
    states = {"a": list(items[:split]), "b": list(items[split:])} if split else {"s": list(items)}
    return diary, make_spec(states)


def check_fit_or_plain_error(diary: Diary, spec, estimator: str) -> None:
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            spacing = {"prompt_spacing": 1.0} if estimator == "continuous-time" else {}
            fit(diary, spec, FitOptions(estimator=estimator, max_iter=200, **spacing))
        except LagwiseError as error:
            assert "\n" not in str(error)
    assert [str(w.message) for w in caught if issubclass(w.category, RuntimeWarning)] == []


def test_a_start_whose_lag_1_path_has_no_real_logarithm_gives_no_warning():
    # found by the slow property test: two identical items, seven prompts over four days;
    # the window estimate's inertia had no accurate real logarithm (scipy warned "logm
    # result may be inaccurate"), and the continuous-time start must fall back quietly
    values = np.full((7, 2), np.nan)
    values[1], values[5] = 0.24252849, -2.27993692
    day = np.array([0, 0, 1, 1, 2, 2, 3])
    diary = Diary(items=("item0", "item1"), values=values, segment=day.copy(), day=day,
                  day_labels=("0", "1", "2", "3"), prompt=np.array([1., 2., 1., 2., 1., 2., 1.]))
    check_fit_or_plain_error(diary, make_spec({"s": ["item0", "item1"]}), "continuous-time")


@pytest.mark.parametrize("estimator", list(ESTIMATORS))
@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(case=small_diaries())
def test_random_small_diaries_give_a_result_or_a_plain_error(estimator, case):
    check_fit_or_plain_error(*case, estimator)


@pytest.mark.slow
@pytest.mark.parametrize("estimator", list(ESTIMATORS))
@settings(max_examples=300, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(case=small_diaries())
def test_many_random_small_diaries_give_a_result_or_a_plain_error(estimator, case):
    check_fit_or_plain_error(*case, estimator)


def test_a_refit_of_rescaled_items_starts_from_the_result_in_original_units(demo):
    # the refit path (bootstrap): same data, started at its own optimum -> the same optimum
    values = demo.values.copy()
    values[:, ITEMS.index("restless")] *= 1e4
    diary = replace(demo, values=values)
    full = fit(diary, SPEC)
    refit = fit(diary, SPEC, standard_errors=False, start=full)
    assert refit.converged
    for a, b in zip(full.free_parameters, refit.free_parameters):
        assert b.estimate == pytest.approx(a.estimate, abs=1e-3 * a.se), a.key


def test_pairwise_correlations_match_pandas():
    # each pair over the prompts where both items were answered: pandas' pairwise-complete
    # correlation is the reference
    rng = np.random.default_rng(3)
    values = rng.normal(size=(300, 5)) @ rng.normal(size=(5, 5)) + 50.0
    values[rng.random(values.shape) < 0.4] = np.nan
    expected = pd.DataFrame(values).corr().to_numpy()
    np.testing.assert_allclose(pairwise_correlations(values), expected, rtol=0, atol=1e-12)


def test_a_state_named_like_its_only_item_keeps_the_units_apart(demo):
    # variance identification: the state "tense" keeps variance-one units while its item
    # "tense" moves to 1e4 times larger units (loading x1e4, innovation unchanged; common
    # practice)
    spec = make_spec({"tense": ["tense"], "mood": ["sad", "flat", "hopeless"]},
                     identification="variance")
    values = demo.values.copy()
    values[:, 0] *= 1e4
    base, scaled = fit(demo, spec), fit(replace(demo, values=values), spec)
    assert base.converged and scaled.converged
    for key, factor in {("loading", "tense", "tense"): 1e4, ("intercept", "tense", "tense"): 1e4,
                        ("inertia", "tense", "tense"): 1.0, ("innovation", "tense", "mood"): 1.0,
                        ("cross_lagged", "mood", "tense"): 1.0}.items():
        a, b = base.get(*key), scaled.get(*key)
        assert b.estimate == pytest.approx(factor * a.estimate, abs=1e-3 * factor * a.se), key
