"""A project of many people keeps its study: the person column, the person shown and the
batch folder (format version 2), and rebuilds the shown person's diary from the whole table.

The people are simulated (tests/batch_people.py); check values are the engine's own split of
the table (models.study.study_from_frame) and models.preparation run directly.
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from batch_people import RECIPE, people_tables, stacked
from lagwise.models.errors import DataError, ProjectError
from lagwise.models.preparation import Step, apply_steps
from lagwise.models.project import (
    Project, embed_table, open_project, project_diary, project_fingerprint, save_project,
)
from lagwise.models.study import StudyChoice, person_rows, study_from_frame, with_steps

TABLE = stacked(people_tables(3, days=4))


def _same_diary(a, b) -> bool:
    return a.items == b.items and np.array_equal(a.values, b.values, equal_nan=True) and \
        np.array_equal(a.day, b.day) and np.array_equal(a.prompt, b.prompt)


def _project(choice: StudyChoice | None) -> Project:
    return Project.of_recipe(embed_table(TABLE), RECIPE, study=choice)


def test_a_study_project_round_trips_and_shows_its_person(tmp_path):
    choice = StudyChoice("person", "P01", str(tmp_path / "people"))
    save_project(_project(choice), tmp_path / "s.lagwise")
    opened = open_project(tmp_path / "s.lagwise")
    assert opened.study == choice
    study = study_from_frame(TABLE, RECIPE, "person")
    assert _same_diary(project_diary(opened), study.people[1].diary)


def test_the_batch_folder_moves_with_the_project(tmp_path):
    # stored relative to the project's folder (as linked data): a project moved together
    # with its batch results still finds them
    first = tmp_path / "study"
    (first / "results").mkdir(parents=True)
    save_project(_project(StudyChoice("person", "P01", str(first / "results" / "people"))),
                 first / "s.lagwise")
    assert json.loads((first / "s.lagwise").read_text())["study"]["batch_folder"] == \
        "results/people"
    moved = tmp_path / "moved"
    first.rename(moved)
    assert open_project(moved / "s.lagwise").study.batch_folder == \
        str(moved / "results" / "people")


def test_a_version_1_file_opens_as_one_person(tmp_path):
    path = tmp_path / "one.lagwise"
    one = stacked({"P00": people_tables(1, days=4)["P00"]}).drop(columns="person")
    save_project(Project.of_recipe(embed_table(one), RECIPE), path)
    doc = json.loads(path.read_text())
    assert "study" not in doc
    del doc["runs"], doc["current_run"]   # the version-1 layout: one "results"
    path.write_text(json.dumps({**doc, "format_version": 1, "results": None}))
    opened = open_project(path)
    assert opened.study is None
    assert _same_diary(project_diary(opened), RECIPE.diary(one))


def test_a_study_naming_a_missing_column_is_refused(tmp_path):
    path = tmp_path / "s.lagwise"
    save_project(_project(StudyChoice("person", "P00")), path)
    doc = json.loads(path.read_text())
    doc["study"]["person_column"] = "participant"
    path.write_text(json.dumps(doc))
    with pytest.raises(ProjectError, match="study.person_column"):
        open_project(path)


def test_person_rows_are_one_persons_rows():
    rows = person_rows(TABLE, "person", "P02")
    assert "person" not in rows.columns
    assert len(rows) == (TABLE["person"] == "P02").sum()
    with pytest.raises(DataError, match="no rows of person P09"):
        person_rows(TABLE, "person", "P09")


def test_preparation_steps_reach_every_person():
    study = study_from_frame(TABLE, RECIPE, "person")
    steps = (Step("detrend"),)
    prepared = with_steps(study, steps)
    for before, after in zip(study.people, prepared.people):
        assert _same_diary(after.diary, apply_steps(before.diary, steps))
        assert not _same_diary(after.diary, before.diary)


def test_each_person_has_a_fingerprint_of_their_own():
    # a run estimated from one person's rows is not current for another person's
    one, two = (project_fingerprint(_project(StudyChoice("person", p))) for p in ("P00", "P01"))
    assert one != two
    assert project_fingerprint(_project(StudyChoice("person", "P00", "elsewhere"))) == one
