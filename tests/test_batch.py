"""Batch estimation: a long file of simulated people gives, person by person, the fit of
that person's rows alone, whether the people run in one process, two, or on a Dask cluster;
an interrupted batch resumes with the missing people only; one person's failure is recorded
and the rest go on."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest

from batch_people import RECIPE, people_tables, person_table, stacked
from lagwise.models import personfit
from lagwise.models.across import NOT_MULTILEVEL
from lagwise.models import parallel
from lagwise.models.batch import run_batch
from lagwise.models.errors import Cancelled, DataError, LagwiseError, SpecError
from lagwise.models.bootstrap import bootstrap
from lagwise.models.estimate import fit
from lagwise.models.estimators import FitOptions
from lagwise.models.lag2check import lag2_check
from lagwise.models.personfit import FAILED, FITTED, BatchSettings
from lagwise.models.results import Z95
from lagwise.models.screening import screen_diary
from lagwise.models.study import study_from_frame
from two_state_model import SPEC

SETTINGS = BatchSettings(SPEC)


@pytest.fixture(scope="module")
def twelve(tmp_path_factory):
    """Twelve people, their study, and its batch on two local processes (folder, outcome)."""
    tables = people_tables(12)
    study = study_from_frame(stacked(tables), RECIPE, "person")
    folder = tmp_path_factory.mktemp("two-jobs")
    return tables, study, folder, run_batch(study, SETTINGS, folder, jobs=2)


def _estimates(document: dict) -> np.ndarray:
    return np.array([p["estimate"] for p in document["parameters"]])


def _by_person(outcome) -> dict[str, np.ndarray]:
    return {o.person: _estimates(o.document) for o in outcome.outcomes}


def test_each_person_gets_the_fit_of_their_own_rows(twelve):
    tables, _, folder, outcome = twelve
    assert [o.person for o in outcome.outcomes] == list(tables)
    assert all(o.status == FITTED for o in outcome.outcomes)
    for (name, table), got in zip(tables.items(), outcome.outcomes):
        alone = fit(RECIPE.diary(table), SPEC)     # the person's rows as a file of their own
        np.testing.assert_allclose(_estimates(got.document),
                                   [p.estimate for p in alone.parameters], rtol=0, atol=1e-8)
    lines = (folder / "people.jsonl").read_text().splitlines()
    assert [json.loads(line)["person"] for line in lines] == list(tables)


def test_one_job_two_jobs_and_a_dask_cluster_agree(twelve, tmp_path):
    from distributed import LocalCluster

    _, study, _, outcome = twelve
    two = _by_person(outcome)
    one = _by_person(run_batch(study, SETTINGS, tmp_path / "one", jobs=1))
    # one worker thread: BLAS threads are set per process, so fits must not overlap in one
    with LocalCluster(host="127.0.0.1", protocol="tcp://", processes=False, n_workers=1,
                      threads_per_worker=1, dashboard_address=None) as cluster:
        dask = _by_person(run_batch(study, SETTINGS, tmp_path / "dask",
                                    scheduler=cluster.scheduler_address))
    assert one.keys() == two.keys() == dask.keys()
    for person in one:
        np.testing.assert_array_equal(one[person], two[person])
        np.testing.assert_array_equal(one[person], dask[person])


class _StopAfter:
    """A monitor that asks to stop once `k` people have finished; counts what it is told."""

    def __init__(self, k: int | None = None):
        self.k, self.finished = k, []

    def report(self, fraction: float, message: str) -> None:
        if " people)" in message:
            self.finished.append(message.split(":")[0])

    def cancelled(self) -> bool:
        return self.k is not None and len(self.finished) >= self.k


def test_a_cancelled_batch_resumes_with_the_missing_people_only(tmp_path):
    tables = people_tables(6)
    study = study_from_frame(stacked(tables), RECIPE, "person")
    with pytest.raises(Cancelled):
        run_batch(study, SETTINGS, tmp_path, jobs=1, monitor=_StopAfter(2))
    kept = sorted(tmp_path.joinpath("people").iterdir())
    assert 2 <= len(kept) < len(tables)   # the person running when asked to stop may finish
    stamps = {p.name: p.stat().st_mtime_ns for p in kept}
    again = _StopAfter()
    outcome = run_batch(study, SETTINGS, tmp_path, jobs=1, monitor=again)
    assert len(outcome.reused) == len(kept)
    assert sorted(again.finished) == sorted(set(tables) - set(outcome.reused))
    assert {p.name: p.stat().st_mtime_ns for p in kept} == stamps   # not rewritten
    assert all(o.status == FITTED for o in outcome.outcomes)


def test_a_resume_refits_a_person_whose_data_changed_and_refuses_other_settings(tmp_path):
    tables = people_tables(3)
    run_batch(study_from_frame(stacked(tables), RECIPE, "person"), SETTINGS, tmp_path, jobs=1)
    tables["P01"] = person_table(999)
    changed = study_from_frame(stacked(tables), RECIPE, "person")
    outcome = run_batch(changed, SETTINGS, tmp_path, jobs=1)
    assert sorted(outcome.reused) == ["P00", "P02"]
    alone = fit(RECIPE.diary(tables["P01"]), SPEC)
    np.testing.assert_allclose(_estimates(outcome.outcomes[1].document),
                               [p.estimate for p in alone.parameters], rtol=0, atol=1e-8)
    other = BatchSettings(SPEC, FitOptions(max_iter=123))
    with pytest.raises(SpecError, match="another model or other settings"):
        run_batch(changed, other, tmp_path, jobs=1)


def test_a_person_with_five_prompts_fails_with_its_reason_and_the_rest_are_fitted(tmp_path):
    tables = people_tables(3)
    tables["short"] = tables["P00"].head(5)
    outcome = run_batch(study_from_frame(stacked(tables), RECIPE, "person"), SETTINGS,
                        tmp_path, jobs=2)
    status = {o.person: o.status for o in outcome.outcomes}
    assert status == {"P00": FITTED, "P01": FITTED, "P02": FITTED, "short": FAILED}
    short = outcome.outcomes[-1]
    assert "lag windows" in short.reason
    summary = json.loads((tmp_path / "summary.json").read_text())
    assert summary["not_fitted"] == [{"person": "short", "status": FAILED, "reason": short.reason}]
    assert summary["note"] == NOT_MULTILEVEL
    assert len((tmp_path / "people.jsonl").read_text().splitlines()) == 3


def test_a_numerical_failure_of_one_person_is_recorded_not_raised(tmp_path, monkeypatch):
    tables = people_tables(2)
    real_fit = personfit.fit

    def failing(diary, spec, options):
        if diary.source.endswith("P01"):
            raise np.linalg.LinAlgError("Singular matrix")
        return real_fit(diary, spec, options)

    monkeypatch.setattr(personfit, "fit", failing)   # jobs=1 runs in this process
    outcome = run_batch(study_from_frame(stacked(tables), RECIPE, "person"), SETTINGS,
                        tmp_path, jobs=1)
    assert [(o.status, o.reason) for o in outcome.outcomes] == [
        (FITTED, None), (FAILED, "Singular matrix")]


def test_the_tables_across_people_follow_the_estimates(twelve):
    _, _, tmp_path, outcome = twelve
    estimates = pd.read_csv(tmp_path / "estimates.csv", comment="#")   # the caution line
    docs = [json.loads(line) for line in (tmp_path / "people.jsonl").read_text().splitlines()]
    free = [(d["person"], p) for d in docs for p in d["parameters"] if p["free"]]
    assert len(estimates) == len(free)
    # 95% interval = estimate +- 1.959964 se (common practice)
    np.testing.assert_allclose(estimates["lower"], [p["estimate"] - Z95 * p["se"] for _, p in free])
    summary = json.loads((tmp_path / "summary.json").read_text())
    for path in summary["lagged_paths"]:
        rows = [p for _, p in free if (p["kind"], p["from"], p["to"]) ==
                (path["kind"], path["from"], path["to"])]
        assert path["positive"] == sum(p["estimate"] - 1.959964 * p["se"] > 0 for p in rows)
        assert path["negative"] == sum(p["estimate"] + 1.959964 * p["se"] < 0 for p in rows)
    for spread in summary["inertia"]:
        values = [p["estimate"] for _, p in free
                  if p["kind"] == "inertia" and p["to"] == spread["state"]]
        # the sample median and quartiles by pandas' own (linear) quantiles
        assert spread["median"] == pytest.approx(pd.Series(values).median())
        assert spread["iqr"] == pytest.approx(pd.Series(values).quantile(0.75)
                                              - pd.Series(values).quantile(0.25))
    assert {w["person"] for w in summary["warnings"]} == {o.person for o in outcome.outcomes
                                                          if o.warnings}


def test_a_long_file_splits_into_people_each_on_their_own_grid():
    tables = {"7": person_table(1, days=4), "8": person_table(2, days=6)}
    long = stacked(tables).assign(person=lambda t: t["person"].astype(float))
    study = study_from_frame(long, RECIPE.__class__.of(None, RECIPE.time), "person")
    assert [p.person for p in study.people] == ["7", "8"]        # 7.0 is person "7"
    assert [p.diary.n_days for p in study.people] == [4, 6]
    assert study.people[0].diary.items == SPEC.items             # the person column is no item
    for entry, table in zip(study.people, tables.values()):
        own = RECIPE.diary(table)                   # the person's rows as a file of their own
        assert entry.compliance == pytest.approx(len(table) / own.n_occasions)
        np.testing.assert_array_equal(entry.diary.values, own.values)
    first = study.people[0].screening(RECIPE)
    alone = screen_diary(RECIPE.diary(tables["7"]), RECIPE.item_scales(RECIPE.diary(tables["7"])))
    assert first.to_json() == alone.to_json()
    with pytest.raises(DataError, match="row 3 has no person"):
        study_from_frame(long.assign(person=lambda t: t["person"].where(t.index != 3)),
                         RECIPE, "person")
    with pytest.raises(DataError, match="no person column 'who'"):
        study_from_frame(long, RECIPE, "who")
    with pytest.raises(DataError, match="a name in the person column 'person' .*control"):
        study_from_frame(long.assign(person="Robin\x07"), RECIPE, "person")



def test_an_unreachable_scheduler_is_one_line(tmp_path, monkeypatch):
    monkeypatch.setattr(parallel, "CONNECT_TIMEOUT", "1s")
    study = study_from_frame(stacked(people_tables(1)), RECIPE, "person")
    with pytest.raises(LagwiseError, match="cannot reach the scheduler at tcp://127.0.0.1:9"):
        run_batch(study, SETTINGS, tmp_path, scheduler="tcp://127.0.0.1:9")


def test_the_bootstrap_and_lag2_check_per_person_are_those_of_the_person_alone(tmp_path):
    tables = people_tables(2)
    settings = BatchSettings(SPEC, bootstrap=4, seed=7, lag2_check=True)
    outcome = run_batch(study_from_frame(stacked(tables), RECIPE, "person"), settings,
                        tmp_path, jobs=1)
    for (name, table), got in zip(tables.items(), outcome.outcomes):
        diary = RECIPE.diary(table)
        alone = fit(diary, SPEC)
        check = lag2_check(diary, SPEC)
        boot = bootstrap(diary, SPEC, FitOptions(), alone, replicates=4, seed=7, jobs=1)
        assert got.document["lag2_check"]["lr"]["p"] == pytest.approx(check.lr_p, abs=1e-10)
        assert got.document["bootstrap"] == json.loads(json.dumps(boot.to_json()))
