"""Named runs and the comparison of runs (models/runs.py, models/compare.py, project format 2).

Check values: the likelihood-ratio test's statistic, degrees of freedom and p-value come
from the standard formulas (LR = 2 x difference in log-likelihood, df = difference in free
parameters; common practice; for window estimators scaled by the difference test of Satorra
& Bentler 2001) with scipy.stats.chi2 as the reference distribution; the fits
are of diaries simulated from a model with known parameters (tests/two_state_model.py) and
the log-likelihoods compared are the engine's own fits of them. SHA-256 digests and times
are checked with hashlib and datetime.
"""

from __future__ import annotations

import json
from dataclasses import replace
from datetime import datetime

import numpy as np
import pandas as pd
import pytest
from scipy.stats import chi2

from two_state_model import SPEC, TRUE
from lagwise.models.bootstrap import bootstrap
from lagwise.models.compare import compare
from lagwise.models.diary import TimeSettings
from lagwise.models.errors import ProjectError
from lagwise.models.estimate import fit
from lagwise.models.estimators import FitOptions
from lagwise.models.lag2check import lag2_check
from lagwise.models.numbers import fmt
from lagwise.models.preparation import Step, steps_to_json
from lagwise.models.project import (
    FORMAT_VERSION, Project, embed_table, open_project, project_diary, project_fingerprint,
    save_project, with_estimate,
)
from lagwise.models.recipe import DiaryRecipe
from lagwise.models.runs import (
    annotate_run, delete_run, find_run, free_name, next_name, rename_run, update_run,
)
from lagwise.models.simulate import simulate_diary

GRID = TimeSettings(mode="grid", day="day", prompt="prompt")
# the cross-lagged path calm (t-1) -> drive (t), free in SPEC, fixed at 0 in the smaller model
NESTED = SPEC.with_paths(1, np.array([[True, True], [False, True]]))


def _simulated_project(seed: int = 3) -> Project:
    """A project embedding a diary simulated from tests/two_state_model.py (40 days x 6)."""
    diary = simulate_diary(SPEC, **TRUE, days=40, prompts_per_day=6, p_missed=0.2, seed=seed)
    frame = pd.DataFrame({"day": diary.day + 1, "prompt": diary.prompt.astype(int),
                          **{item: diary.values[:, i] for i, item in enumerate(diary.items)}})
    return Project.of_recipe(embed_table(frame), DiaryRecipe(SPEC.items, GRID), spec=SPEC)


def _two_runs(options: FitOptions = FitOptions()) -> Project:
    """The simulated project with the full model (Run 1) and the nested one (Run 2)."""
    project = _simulated_project()
    diary = project_diary(project)
    project = with_estimate(project, fit(diary, SPEC, options))
    return with_estimate(project, fit(diary, NESTED, options))


@pytest.fixture(scope="module")
def two_runs() -> Project:
    return _two_runs()


# ------------------------------------------------------------------------ saving and opening

def test_a_project_with_two_runs_round_trips_through_save_and_open(two_runs, tmp_path):
    project = two_runs
    diary = project_diary(project)
    first = project.runs[0]
    check = lag2_check(diary, first.spec, first.options)
    boot = bootstrap(diary, first.spec, first.options, first.result, replicates=4, seed=5, jobs=1)
    runs = update_run(project.runs, "Run 1", lag2=check, bootstrap=boot)
    runs = annotate_run(rename_run(runs, "Run 1", "full model"), "full model",
                        "All lagged paths free.\nFirst look.")
    project = replace(project, runs=runs, current_run="full model")
    path = tmp_path / "two-runs.lagwise"
    save_project(project, path)
    opened = open_project(path)

    assert [r.name for r in opened.runs] == ["full model", "Run 2"]
    assert opened.current_run == "full model" and opened.result is opened.runs[0].result
    for before, after in zip(project.runs, opened.runs):
        assert after.to_json() == before.to_json()   # every field, as written
        assert (after.name, after.time, after.fingerprint, after.preparation, after.note) == \
            (before.name, before.time, before.fingerprint, before.preparation, before.note)
        assert after.spec == before.spec and after.options == before.options
        assert datetime.fromisoformat(after.time.replace("Z", "+00:00")).utcoffset().seconds == 0
    stored = opened.runs[0]
    assert stored.note == "All lagged paths free.\nFirst look."
    assert stored.lag2.lr_chi2 == check.lr_chi2 and stored.lag2.verdict == check.verdict
    assert stored.lag2.restricted.to_json() == check.restricted.to_json()
    np.testing.assert_array_equal(stored.bootstrap.estimates, boot.estimates)
    assert opened.bootstrap is stored.bootstrap and opened.runs[1].bootstrap is None
    # the fingerprint is the one the reopened project's data, recipe and steps give
    assert stored.fingerprint == project_fingerprint(opened)
    doc = json.loads(path.read_text(encoding="utf-8"))
    assert doc["format_version"] == FORMAT_VERSION == 2
    assert doc["current_run"] == "full model" and len(doc["runs"]) == 2


def _saved_doc(project: Project, tmp_path) -> dict:
    path = tmp_path / "base.lagwise"
    save_project(project, path)
    return json.loads(path.read_text(encoding="utf-8"))


def _refused(doc: dict, tmp_path) -> str:
    path = tmp_path / "damaged.lagwise"
    path.write_text(json.dumps(doc), encoding="utf-8")
    with pytest.raises(ProjectError) as caught:
        open_project(path)
    assert "\n" not in str(caught.value)
    return str(caught.value)


def test_damaged_runs_are_refused_naming_the_field(two_runs, tmp_path):
    doc = _saved_doc(two_runs, tmp_path)
    assert "current_run" in _refused({**doc, "current_run": "Run 9"}, tmp_path)
    twice = [doc["runs"][0], {**doc["runs"][1], "name": "Run 1"}]
    assert "runs[1].name" in _refused({**doc, "runs": twice}, tmp_path)
    bad = [{**doc["runs"][0], "fingerprint": "abc"}, doc["runs"][1]]
    assert "runs[0].fingerprint" in _refused({**doc, "runs": bad}, tmp_path)
    escape = [{**doc["runs"][0], "name": "Run\x1b[31m 1"}, doc["runs"][1]]
    assert "runs[0].name" in _refused({**doc, "runs": escape}, tmp_path)
    # a lag-2 check kept with a run must test that run's lag-1 model
    diary = project_diary(two_runs)
    other = lag2_check(diary, NESTED)
    wrong = [doc["runs"][0], {**doc["runs"][1], "lag2_check": other.to_stored_json()}]
    wrong[1]["lag2_check"]["restricted"] = doc["runs"][0]["results"]
    assert "runs[1].lag2_check" in _refused({**doc, "runs": wrong}, tmp_path)


def test_a_version_1_file_opens_with_its_result_as_run_1(two_runs, tmp_path):
    # the version-1 layout of resources/project-format.md: one "results" and its "bootstrap"
    project = replace(two_runs, runs=two_runs.runs[:1], current_run="Run 1")
    boot = bootstrap(project_diary(project), SPEC, FitOptions(), project.result, replicates=4,
                     seed=2, jobs=1)
    doc = _saved_doc(replace(project, runs=update_run(project.runs, "Run 1", bootstrap=boot)),
                     tmp_path)
    run = doc.pop("runs")[0]
    doc.pop("current_run")
    doc.update(format_version=1, results=run["results"], bootstrap=run["bootstrap"])
    path = tmp_path / "version-1.lagwise"
    path.write_text(json.dumps(doc), encoding="utf-8")

    opened = open_project(path)
    assert [r.name for r in opened.runs] == ["Run 1"] and opened.current_run == "Run 1"
    assert opened.result.to_json() == project.result.to_json()
    assert opened.bootstrap.to_json() == boot.to_json()
    assert opened.runs[0].time == doc["modified"] and opened.runs[0].note == ""
    assert opened.runs[0].fingerprint == project_fingerprint(opened)
    # saved again, it is a version-2 file with the same run
    again = tmp_path / "again.lagwise"
    save_project(opened, again)
    assert open_project(again).runs[0].to_json() == opened.runs[0].to_json()


def test_a_version_1_file_without_results_opens_with_no_runs(two_runs, tmp_path):
    doc = _saved_doc(replace(two_runs, runs=(), current_run=None), tmp_path)
    doc.pop("runs"), doc.pop("current_run")
    doc.update(format_version=1, results=None)
    path = tmp_path / "no-results.lagwise"
    path.write_text(json.dumps(doc), encoding="utf-8")
    opened = open_project(path)
    assert opened.runs == () and opened.result is None


# ------------------------------------------------------------------------ names

def test_default_names_count_up_and_skip_taken_ones(two_runs):
    assert [r.name for r in two_runs.runs] == ["Run 1", "Run 2"]
    assert next_name(two_runs.runs) == "Run 3"
    assert next_name(rename_run(two_runs.runs, "Run 1", "Run 3")) == "Run 4"
    assert next_name(two_runs.runs, first=7) == "Run 7"
    assert free_name(two_runs.runs, "Run 2") == "Run 2 (2)"
    assert free_name(two_runs.runs, "Run 5") == "Run 5"


@pytest.mark.parametrize("name, words", [
    ("", "empty"), ("   ", "empty"), ("Run 1", "already a run named"),
    ("tab\there", "U+0009"), ("bell\x07", "U+0007"), ("a\u202eb", "U+202E"),
    ("x" * 201, "at most 200")])
def test_a_bad_run_name_is_refused_in_one_line(two_runs, name, words):
    with pytest.raises(ProjectError) as caught:
        rename_run(two_runs.runs, "Run 2", name)
    assert words in str(caught.value) and "\n" not in str(caught.value)


def test_rename_annotate_delete_and_find(two_runs):
    runs = rename_run(two_runs.runs, "Run 2", "  without calm -> drive ")
    assert [r.name for r in runs] == ["Run 1", "without calm -> drive"]
    assert [r.name for r in rename_run(runs, "Run 1", "Run 1")] == [r.name for r in runs]
    runs = annotate_run(runs, "Run 1", "note\x1b with an escape")
    assert find_run(runs, "Run 1").note == "note with an escape"
    assert [r.name for r in delete_run(runs, "Run 1")] == ["without calm -> drive"]
    with pytest.raises(ProjectError, match="no run named"):
        delete_run(runs, "Run 7")


# ------------------------------------------------------------------------ compare

def test_likelihood_ratio_of_a_nested_pair(two_runs):
    full, nested = (r.result for r in two_runs.runs)
    comparison = compare(two_runs.runs)
    (test,) = comparison.tests
    assert (test.smaller, test.larger) == ("Run 2", "Run 1")
    assert test.lr == pytest.approx(2 * (full.fit.loglik - nested.fit.loglik), rel=1e-12)
    assert test.df == full.fit.n_free - nested.fit.n_free == 1
    # window pseudo-likelihood: scaled by the Satorra-Bentler (2001) difference test,
    # c_d = (d0 c0 - d1 c1) / (d0 - d1) from the two runs' calibrated fit tests
    d0, d1 = nested.fit.df, full.fit.df
    c_d = (d0 * nested.fit.scaled.scaling - d1 * full.fit.scaled.scaling) / (d0 - d1)
    assert test.scaling == pytest.approx(c_d, rel=1e-12) and test.scaling > 0
    assert test.p == pytest.approx(chi2.sf(test.lr / c_d, test.df), rel=1e-12)
    assert not test.exact and "Satorra-Bentler" in test.sentence
    assert fmt(test.lr / c_d) in test.sentence and "approximate" not in test.sentence
    # without a calibrated test in one run the LR stays unscaled, its p marked approximate
    bare = replace(two_runs.runs[1], result=replace(nested, fit=replace(nested.fit, scaled=None)))
    (plain,) = compare((two_runs.runs[0], bare)).tests
    assert plain.scaling is None and plain.p == chi2.sf(plain.lr, plain.df)
    assert "approximate" in plain.sentence


def test_likelihood_ratio_with_the_exact_estimator_is_not_called_approximate():
    project = _two_runs(FitOptions(estimator="exact"))
    full, nested = (r.result for r in project.runs)
    (test,) = compare(project.runs).tests
    assert test.lr == pytest.approx(2 * (full.fit.loglik - nested.fit.loglik), rel=1e-12)
    assert test.p == chi2.sf(test.lr, test.df) and test.df == 1
    assert test.exact and "approximate" not in test.sentence
    # the exact likelihood has no calibrated window test: no such rows
    assert not any(row.label.startswith("Calibrated") for row in compare(project.runs).figures)


def test_compare_lines_up_every_parameter_with_its_difference(two_runs):
    full, nested = (r.result for r in two_runs.runs)
    comparison = compare(two_runs.runs)
    assert comparison.comparable == (True, True) and comparison.notes == ()
    assert len(comparison.parameters) == len(full.parameters)
    by_label = {row.label: row for row in comparison.parameters}
    cross = by_label["calm (t-1) → drive"]
    assert cross.values[0] == full.get("cross_lagged", "calm", "drive").estimate
    assert cross.values[1] == nested.get("cross_lagged", "calm", "drive").estimate
    assert cross.differences[0] == cross.values[1] - cross.values[0]
    loglik = next(row for row in comparison.figures if row.label == "Log-likelihood")
    assert loglik.values == (full.fit.loglik, nested.fit.loglik)
    assert len(comparison.header()) == len(comparison.table()[0]) == 5
    # the calibrated test first, as on the Fit tab
    first = comparison.figures[0]
    assert first.label == "Calibrated chi-square"
    assert first.values == (full.fit.scaled.chi2, nested.fit.scaled.chi2)


def test_runs_on_other_preparation_or_other_data_are_not_comparable(two_runs):
    detrended = replace(two_runs, preparation=tuple(steps_to_json([Step("detrend")])))
    other = with_estimate(detrended, fit(project_diary(detrended), NESTED))
    assert project_fingerprint(detrended) != two_runs.runs[0].fingerprint
    comparison = compare(other.runs[::2])
    assert comparison.comparable == (True, False) and comparison.tests == ()
    assert "not comparable" in comparison.notes[0]
    # other data: a diary drawn with another seed
    fresh = _simulated_project(seed=4)
    third = with_estimate(fresh, fit(project_diary(fresh), NESTED)).runs[0]
    assert compare((two_runs.runs[0], third)).tests == ()


def test_runs_of_the_same_model_or_other_estimators_get_no_test(two_runs):
    same = with_estimate(two_runs, fit(project_diary(two_runs), NESTED))
    assert compare(same.runs[1:]).tests == ()       # equal free parameters: not nested
    exact = with_estimate(two_runs, fit(project_diary(two_runs), NESTED,
                                        FitOptions(estimator="exact")))
    assert compare((exact.runs[0], exact.runs[2])).tests == ()


def test_compare_needs_two_runs(two_runs):
    with pytest.raises(ProjectError, match="at least two"):
        compare(two_runs.runs[:1])
