"""Project files (.lagwise): round trips, refits without the data file, damaged files,
atomic saves, format versions, linked data, autosave recovery files and the command line.

Check values come from outside the project: SHA-256 digests from hashlib, times parsed by
datetime.fromisoformat, tables compared with pandas' own testing helpers, and estimates
compared with a fit of the original data file by models.estimate.fit.
"""

from __future__ import annotations

import hashlib
import json
import os
import re
import shutil
import subprocess
import sys
from dataclasses import replace
from datetime import datetime, timezone
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from full_disk import fill_disk

from lagwise.desktop.cli import main
from lagwise.models.diary import TimeSettings
from lagwise.models.errors import DataError, LagwiseError, ProjectError, SpecError
from lagwise.models.estimate import fit
from lagwise.models.preparation import Step, apply_steps, steps_to_json
from lagwise.models.project import (
    FORMAT_VERSION, MAX_DEPTH, LinkedDataChanged, LinkedDataMissing, Project,
    ProjectVersionTooNew, discard_recovery, embed_file, embed_table, file_sha256,
    find_recoveries, find_recovery, link_file, open_project, project_diary, project_table,
    recovery_path, relink_data, save_project, table_from_json, table_to_json, upgrade_0_to_1,
    with_estimate, write_recovery,
)
from lagwise.models.estimators import FitOptions
from lagwise.models.spec import make_spec
from lagwise.models.timegrid import diary_from_frame

DEMO = Path(__file__).resolve().parents[1] / "resources" / "demo" / "demo_diary.csv"
GRID = TimeSettings(mode="grid", day="day", prompt="prompt")
# The demo's three states, as resources/demo/README.md lists them.
DEMO_STATES = {"tension": ["tense", "restless", "worried"],
               "low mood": ["sad", "flat", "hopeless"],
               "energy": ["lively", "focused", "rested"]}
DEMO_SPEC = make_spec(DEMO_STATES)
STATE_ARGS = [arg for name, items in DEMO_STATES.items()
              for arg in ("--state", f"{name}={','.join(items)}")]
# Examples per damaged-document test (raise LAGWISE_DAMAGE_EXAMPLES for a longer search).
DAMAGE = settings(max_examples=int(os.environ.get("LAGWISE_DAMAGE_EXAMPLES", 60)),
                  deadline=None, suppress_health_check=[HealthCheck.too_slow])


@pytest.fixture(scope="module")
def demo(tmp_path_factory) -> tuple[Project, Path]:
    """The demo diary embedded in a project with its fitted result; and the CSV's path."""
    folder = tmp_path_factory.mktemp("demo")
    csv = folder / "demo_diary.csv"
    shutil.copy(DEMO, csv)
    project = Project(data=embed_file(csv), items=DEMO_SPEC.items, time=GRID,
                      missing_codes=("-99",), spec=DEMO_SPEC, options=FitOptions(),
                      notes="Weeks 1-6.\nFirst look at the dynamics.")
    result = fit(project_diary(project), DEMO_SPEC)
    return with_estimate(project, result), csv


@pytest.fixture(scope="module")
def base_text(demo, tmp_path_factory) -> str:
    """A valid project document (the demo project cut to its first 12 table rows)."""
    path = tmp_path_factory.mktemp("base") / "base.lagwise"
    save_project(demo[0], path)
    doc = json.loads(path.read_text(encoding="utf-8"))
    table = doc["data"]["table"]
    table["rows"] = table["rows"][:12]
    table["row_labels"]["values"] = table["row_labels"]["values"][:12]
    text = json.dumps(doc, indent=1)
    path.write_text(text, encoding="utf-8")
    open_project(path)  # the base itself is valid
    return text


@pytest.fixture(scope="module")
def scratch(tmp_path_factory) -> Path:
    """A file the damaged-document tests overwrite for every example."""
    return tmp_path_factory.mktemp("damaged") / "damaged.lagwise"


def refuse(scratch: Path, content: bytes | str) -> ProjectError:
    """Write `content`, open it, and return the ProjectError it must raise."""
    if isinstance(content, str):
        content = content.encode("utf-8")
    scratch.write_bytes(content)
    with pytest.raises(ProjectError) as caught:
        open_project(scratch)
    message = str(caught.value)
    assert message.startswith(str(scratch)) and "\n" not in message
    assert scratch.read_bytes() == content  # opening never changes the file
    return caught.value


# ------------------------------------------------------------------------ round trips

def test_save_then_open_gives_identical_specification_data_and_results(demo, tmp_path):
    project, csv = demo
    path = tmp_path / "robin.lagwise"
    saved = save_project(project, path)
    opened = open_project(path)

    assert opened.spec == project.spec
    assert opened.options == project.options
    assert opened.result.to_json() == project.result.to_json()
    pd.testing.assert_frame_equal(opened.data.table, project.data.table)  # dtypes too
    assert (opened.items, opened.time, opened.missing_codes, opened.notes) == \
        (project.items, project.time, project.missing_codes, project.notes)
    before, after = project_diary(project), project_diary(opened)
    np.testing.assert_array_equal(after.values, before.values)
    np.testing.assert_array_equal(after.segment, before.segment)
    assert after.day_labels == before.day_labels

    # provenance: the original file's name and SHA-256 (hashlib), UTC ISO 8601 times
    assert opened.data.file_name == "demo_diary.csv"
    assert opened.data.sha256 == hashlib.sha256(csv.read_bytes()).hexdigest()
    created = datetime.fromisoformat(opened.created.replace("Z", "+00:00"))
    assert created.utcoffset() == timezone.utc.utcoffset(None)
    assert opened.created == saved.created and opened.modified == saved.modified
    assert opened.file == path.absolute() and opened.name == "robin"
    doc = json.loads(path.read_text(encoding="utf-8"))
    assert doc["format"] == "lagwise-project" and doc["format_version"] == FORMAT_VERSION

    again = save_project(opened, path)  # a later save keeps the creation time
    assert again.created == saved.created


def test_a_bootstrap_is_kept_with_its_results(demo, tmp_path):
    # The stored bootstrap reopens with the same replicate estimates, intervals and
    # stability (models.bootstrap recomputes them from the estimates and checks them).
    from dataclasses import replace
    from lagwise.models.bootstrap import bootstrap
    from lagwise.models.runs import update_run

    project, _ = demo
    boot = bootstrap(project_diary(project), project.spec, project.options, project.result,
                     replicates=6, seed=3, jobs=1)
    path = tmp_path / "with-bootstrap.lagwise"
    save_project(replace(project, runs=update_run(project.runs, "Run 1", bootstrap=boot)), path)
    opened = open_project(path)
    assert opened.bootstrap.to_json() == boot.to_json()
    np.testing.assert_array_equal(opened.bootstrap.estimates, boot.estimates)
    # a bootstrap of other parameters than the stored results' is refused
    doc = json.loads(path.read_text(encoding="utf-8"))
    boot_doc = doc["runs"][0]["bootstrap"]
    boot_doc["parameters"] = boot_doc["parameters"][::-1]
    path.write_text(json.dumps(doc), encoding="utf-8")
    with pytest.raises(ProjectError, match="bootstrap"):
        open_project(path)


def test_the_responses_choice_is_kept_with_its_results(demo, tmp_path):
    # What the Responses tab showed reopens as it was; an order of other states is refused.
    from dataclasses import replace
    from lagwise.models.responses import ResponseChoice

    project, _ = demo
    order = tuple(reversed(project.result.states))
    choice = ResponseChoice(horizon=7, order=order, form="orthogonal", cumulative=True,
                            standardized=False)
    path = tmp_path / "with-responses.lagwise"
    save_project(replace(project, responses=choice), path)
    assert open_project(path).responses == choice
    doc = json.loads(path.read_text(encoding="utf-8"))
    doc["responses"]["order"] = ["Somebody", *order[1:]]
    path.write_text(json.dumps(doc), encoding="utf-8")
    with pytest.raises(ProjectError, match="responses.order"):
        open_project(path)


def test_refit_of_a_reopened_project_without_the_data_file(demo, tmp_path):
    project, _ = demo
    csv = tmp_path / "demo_diary.csv"
    shutil.copy(DEMO, csv)
    path = tmp_path / "robin.lagwise"
    save_project(replace(project, data=embed_file(csv)), path)
    csv.unlink()

    opened = open_project(path)
    refit = fit(project_diary(opened), opened.spec, opened.options)
    original = {(p.kind, p.from_, p.to, p.lag): p.estimate for p in project.result.parameters}
    again = {(p.kind, p.from_, p.to, p.lag): p.estimate for p in refit.parameters}
    assert again.keys() == original.keys()
    np.testing.assert_allclose([again[key] for key in original], list(original.values()),
                               rtol=1e-10, atol=1e-12)
    np.testing.assert_allclose(refit.fit.loglik, project.result.fit.loglik, rtol=1e-12)


def test_table_cells_of_every_kind_survive_the_round_trip():
    stamps = pd.to_datetime(["2026-03-02 08:00", "2026-03-02 11:30", "2026-03-02 16:45",
                             "2026-03-03 09:15", "2026-03-03 13:00"])
    frame = pd.DataFrame({
        "when": stamps,
        "calm": [1.5, np.nan, 3.0, 4.25, 5.0],
        "tense": pd.array([1, 2, None, 4, 3], dtype="Int64"),
        "tired": np.array([1, "2", None, 3.5, "n/a"], dtype=object),
        "flag": [True, False, True, True, False],
        "note": ["a", None, "c", "d", "e"],
    }, index=pd.RangeIndex(2, 7, name="row"))
    text = json.dumps(table_to_json(frame), allow_nan=False)
    back = table_from_json(json.loads(text))
    kinds = [c["kind"] for c in json.loads(text)["columns"]]
    assert kinds == ["datetime", "number", "integer", "mixed", "boolean", "text"]
    assert list(back.index) == [2, 3, 4, 5, 6] and back.index.name == "row"
    pd.testing.assert_series_equal(back["calm"], frame["calm"])
    assert back["flag"].dtype == bool and back["tired"].tolist() == [1, "2", None, 3.5, "n/a"]

    settings_ = TimeSettings(mode="timestamp", time="when")
    before = diary_from_frame(frame, ["calm", "tense", "tired"], settings_)
    after = diary_from_frame(back, ["calm", "tense", "tired"], settings_)
    np.testing.assert_array_equal(after.values, before.values)
    np.testing.assert_array_equal(after.time, before.time)
    np.testing.assert_array_equal(after.segment, before.segment)


def test_an_infinite_cell_is_refused_by_the_diary_reader_before_and_after():
    frame = pd.DataFrame({"calm": [1.0, np.inf, 2.0], "tense": [1.0, 2.0, 3.0]})
    back = table_from_json(json.loads(json.dumps(table_to_json(frame), allow_nan=False)))
    for table in (frame, back):
        with pytest.raises(DataError, match="not a number"):
            diary_from_frame(table, ["calm", "tense"], TimeSettings())


@DAMAGE
@given(st.lists(st.one_of(st.none(), st.floats(allow_nan=False, allow_infinity=False),
                          st.integers(-10**6, 10**6).map(float)), min_size=1, max_size=30),
       st.lists(st.one_of(st.none(), st.text(max_size=12)), min_size=30, max_size=30),
       st.lists(st.integers(-2**62, 2**62), min_size=30, max_size=30))
def test_random_tables_round_trip(numbers, texts, integers):
    n = len(numbers)
    frame = pd.DataFrame({"x": numbers, "label": texts[:n], "count": integers[:n]})
    frame["x"] = frame["x"].astype(float)
    if all(t is None for t in texts[:n]):
        frame = frame.drop(columns="label")
    back = table_from_json(json.loads(json.dumps(table_to_json(frame), allow_nan=False)))
    pd.testing.assert_frame_equal(back, frame)


def test_preparation_steps_are_stored_as_given_and_applied(demo, tmp_path):
    project, _ = demo
    steps = (Step("detrend"), Step("standardize", ("tense", "sad")))
    prepared = replace(project, preparation=tuple(steps_to_json(steps)))
    path = tmp_path / "prepared.lagwise"
    save_project(prepared, path)
    opened = open_project(path)
    assert list(opened.preparation) == steps_to_json(steps)
    raw = project_diary(opened, prepared=False)
    expected = apply_steps(raw, steps)
    np.testing.assert_array_equal(project_diary(opened).values, expected.values)


def test_an_unfinished_model_can_be_saved_and_reopened(demo, tmp_path):
    project, _ = demo
    draft = make_spec({"tension": ["tense", "restless"], "new state": []})
    with pytest.raises(SpecError):
        draft.validate()  # not estimable yet ...
    path = tmp_path / "draft.lagwise"
    save_project(replace(project, spec=draft, runs=(), current_run=None), path)
    assert open_project(path).spec == draft  # ... but the work is kept
    save_project(replace(project, spec=None, data=None, runs=(), current_run=None), path)
    assert open_project(path).spec is None and open_project(path).data is None


def test_a_project_that_would_not_reopen_is_not_written(demo, tmp_path):
    project, _ = demo
    path = tmp_path / "robin.lagwise"
    save_project(project, path)
    before = path.read_bytes()
    for bad in (replace(project, preparation=({"name": "sharpen"},)),
                replace(project, preparation=({"name": "detrend", "items": [np.float64]},)),
                replace(project, items=("tense", "no such column"))):
        with pytest.raises(ProjectError, match="cannot be saved"):
            save_project(bad, path)
        assert path.read_bytes() == before
    assert sorted(p.name for p in tmp_path.iterdir()) == ["robin.lagwise"]


# ------------------------------------------------------------------------ atomic saves

@pytest.mark.parametrize("step", ["replace", "fsync", "write"])
def test_an_interrupted_save_leaves_the_previous_file_byte_identical(demo, tmp_path,
                                                                     monkeypatch, step):
    project, _ = demo
    path = tmp_path / "robin.lagwise"
    save_project(project, path)
    before = path.read_bytes()

    def fail(*args, **kwargs):
        raise OSError(28, "No space left on device")

    if step == "write":
        fill_disk(monkeypatch)
    else:
        monkeypatch.setattr(os, step, fail)
    with pytest.raises(ProjectError) as caught:
        save_project(replace(project, notes="changed"), path)
    assert "No space left on device" in str(caught.value)
    assert "previous file is unchanged" in str(caught.value)
    monkeypatch.undo()
    assert path.read_bytes() == before
    assert [p.name for p in tmp_path.iterdir()] == ["robin.lagwise"]  # no temporary left


def test_a_save_into_a_missing_folder_says_why(demo, tmp_path):
    with pytest.raises(ProjectError, match="could not save .*nothing was written"):
        save_project(demo[0], tmp_path / "no such folder" / "robin.lagwise")


# ------------------------------------------------------------------------ damaged files

@DAMAGE
@given(st.data())
def test_truncated_files_give_a_project_error(base_text, scratch, data):
    raw = base_text.encode("utf-8")
    end = data.draw(st.integers(0, len(raw.rstrip()) - 2))
    refuse(scratch, raw[:end])


# Every field the format requires, by the object that holds it (resources/project-format.md).
REQUIRED = {
    (): ["format", "format_version", "lagwise_version", "created", "modified", "data",
         "items", "time", "missing_codes", "preparation", "spec", "options", "runs",
         "current_run", "notes"],
    ("data",): ["storage", "file_name", "sha256", "table"],
    ("data", "table"): ["columns", "row_labels", "rows"],
    ("data", "table", "columns", 0): ["name", "kind"],
    ("time",): ["mode", "day", "prompt", "time", "max_gap_minutes", "days_independent",
                "prompts_per_day"],
    ("spec",): ["states"],
    ("spec", "states", 0): ["name", "items"],
    ("options",): ["estimator", "missing"],
    ("runs", 0): ["name", "time", "fingerprint", "preparation", "results"],
    ("runs", 0, "results"): ["spec", "options", "estimator", "converged", "n_windows",
                             "n_occasions", "spectral_radius", "parameters", "fit", "matrices"],
    ("runs", 0, "results", "fit"): ["chi2", "df", "p", "rmsea", "cfi", "tli", "srmr", "loglik",
                                    "aic", "bic", "n_free", "n_obs"],
    ("runs", 0, "results", "matrices"): ["loadings", "intercepts", "unique", "lagged",
                                         "innovation", "latent_cov", "r_squared"],
}
REQUIRED_FIELDS = sorted(((path, key) for path, keys in REQUIRED.items() for key in keys),
                         key=str)


def _at(doc, path):
    for key in path:
        doc = doc[key]
    return doc


@DAMAGE
@given(st.sampled_from(REQUIRED_FIELDS))
def test_missing_keys_give_a_project_error(base_text, scratch, field):
    doc = json.loads(base_text)
    path, key = field
    del _at(doc, path)[key]
    refuse(scratch, json.dumps(doc))


JSON_VALUES = st.recursive(
    st.none() | st.booleans() | st.integers(-2**70, 2**70)
    | st.floats(allow_nan=False, allow_infinity=False) | st.text(max_size=20),
    lambda inner: st.lists(inner, max_size=4) | st.dictionaries(st.text(max_size=8), inner,
                                                                 max_size=4),
    max_leaves=12)


def _json_type(value) -> str:
    if value is None:
        return "null"
    if isinstance(value, bool):
        return "bool"
    return {int: "int", float: "float", str: "str", list: "list", dict: "dict"}[type(value)]


# Fields of the format and the JSON types each accepts (resources/project-format.md).
TYPED_FIELDS = {
    ("format_version",): {"int"}, ("lagwise_version",): {"str"}, ("created",): {"str"},
    ("modified",): {"str"}, ("data",): {"dict", "null"}, ("items",): {"list", "null"},
    ("time",): {"dict"}, ("missing_codes",): {"list"}, ("preparation",): {"list"},
    ("spec",): {"dict", "null"}, ("options",): {"dict"}, ("runs",): {"list"},
    ("current_run",): {"str", "null"}, ("runs", 0): {"dict"}, ("runs", 0, "name"): {"str"},
    ("runs", 0, "time"): {"str"}, ("runs", 0, "fingerprint"): {"str"},
    ("runs", 0, "note"): {"str"}, ("runs", 0, "results"): {"dict"},
    ("notes",): {"str"}, ("data", "file_name"): {"str"}, ("data", "sha256"): {"str", "null"},
    ("data", "table"): {"dict"}, ("data", "table", "rows"): {"list"},
    ("data", "table", "rows", 0): {"list"}, ("data", "table", "rows", 0, 1): {"int", "null"},
    ("data", "table", "rows", 0, 2): {"int", "float", "null"},
    ("data", "table", "columns"): {"list"}, ("time", "mode"): {"str"},
    ("time", "days_independent"): {"bool"}, ("time", "prompts_per_day"): {"int", "null"},
    ("time", "max_gap_minutes"): {"int", "float", "null"}, ("items", 0): {"str"},
    ("spec", "states"): {"list"}, ("spec", "lags"): {"int"}, ("spec", "states", 0, "name"): {"str"},
    ("options", "estimator"): {"str"}, ("options", "depth"): {"int", "null"},
    ("runs", 0, "results", "parameters"): {"list"},
    ("runs", 0, "results", "converged"): {"bool"},
    ("runs", 0, "results", "parameters", 0, "estimate"): {"int", "float"},
    ("runs", 0, "results", "matrices", "loadings"): {"list"},
    ("runs", 0, "results", "fit", "df"): {"int"},
}


@DAMAGE
@given(st.data())
def test_wrong_types_give_a_project_error(base_text, scratch, data):
    doc = json.loads(base_text)
    path = data.draw(st.sampled_from(sorted(TYPED_FIELDS, key=str)))
    value = data.draw(JSON_VALUES.filter(lambda v: _json_type(v) not in TYPED_FIELDS[path]))
    _at(doc, path[:-1])[path[-1]] = value
    refuse(scratch, json.dumps(doc))


def _all_paths(doc, prefix=()):
    yield prefix
    children = doc.items() if isinstance(doc, dict) else enumerate(doc) if isinstance(doc, list) \
        else ()
    for key, child in children:
        yield from _all_paths(child, prefix + (key,))


@DAMAGE
@given(st.data())
def test_any_random_change_gives_a_project_or_a_project_error(base_text, scratch, tmp_path_factory,
                                                               data):
    doc = json.loads(base_text)
    paths = [p for p in _all_paths(doc) if p]
    path = data.draw(st.sampled_from(paths))
    _at(doc, path[:-1])[path[-1]] = data.draw(JSON_VALUES)
    scratch.write_text(json.dumps(doc), encoding="utf-8")
    try:
        project = open_project(scratch)
    except ProjectError:
        return
    again = tmp_path_factory.getbasetemp() / "again.lagwise"  # what opens, saves and reopens
    save_project(project, again)
    open_project(again)
    try:  # and its diary is built, or refused with a readable message
        project_diary(project)
    except LagwiseError:
        pass


HUGE = ["1e400", "-1e999", "9" * 30, "-" + "9" * 25, "9" * 5000, "Infinity", "-Infinity", "NaN"]
NUMBER_FIELDS = [r'"format_version": \d+', r'"max_iter": \d+', r'"n_windows": \d+',
                 r'"df": \d+', r'"days_independent": true', r'\[\s*"2026-03-02",\s*1,\s*48\.0']


@DAMAGE
@given(st.sampled_from(NUMBER_FIELDS), st.sampled_from(HUGE))
def test_huge_numbers_give_a_project_error(base_text, scratch, field, literal):
    def swap(match):
        text = match.group(0)
        if text.startswith("["):
            return text[: text.rindex("48.0")] + literal
        return text.split(":")[0] + ": " + literal
    damaged, count = re.subn(field, swap, base_text, count=1)
    assert count == 1
    refuse(scratch, damaged)


@DAMAGE
@given(st.sampled_from(['"extras": {', '"preparation": [', '"notes": ', '"reliability": {']),
       st.integers(MAX_DEPTH, 50_000))
def test_deep_nesting_gives_a_project_error(base_text, scratch, where, depth):
    nested = "[" * depth + "]" * depth
    at = base_text.index(where) + len(where)
    if where.endswith(("{", "[")):
        entry = (f'"deep": {nested}' if where.endswith("{") else nested)
        separator = "" if base_text[at:].lstrip()[0] in "]}" else ", "
        damaged = base_text[:at] + entry + separator + base_text[at:]
    else:
        damaged = re.sub(r'"notes": "[^"]*"', lambda m: '"notes": ' + nested, base_text, count=1)
    assert damaged != base_text
    error = refuse(scratch, damaged)
    assert "nest" in str(error) or "should be text" in str(error)


@DAMAGE
@given(JSON_VALUES)
def test_random_json_gives_a_project_error(scratch, value):
    refuse(scratch, json.dumps(value))


@DAMAGE
@given(st.dictionaries(st.sampled_from(["data", "items", "time", "spec", "notes", "results"]),
                       JSON_VALUES))
def test_random_documents_with_the_right_header_give_a_project_error(scratch, fields):
    refuse(scratch, json.dumps({"format": "lagwise-project", "format_version": 1, **fields}))


@DAMAGE
@given(st.binary(max_size=400))
def test_random_bytes_give_a_project_error(scratch, raw):
    refuse(scratch, raw)


def test_damage_messages_name_the_problem(base_text, scratch):
    doc = json.loads(base_text)
    doc["time"]["days_independent"] = "yes"
    error = refuse(scratch, json.dumps(doc))
    assert "'time.days_independent' should be true or false, not text" in str(error)
    assert "incomplete" in str(refuse(scratch, base_text[:-40]))
    assert "not valid JSON" in str(refuse(scratch, base_text.replace(":", ";", 1)))
    assert "twice" in str(refuse(scratch, base_text.replace('{', '{"notes": "", ', 1)))
    assert "not a Lagwise project" in str(refuse(scratch, json.dumps({"format": "other"})))


def test_a_bad_field_inside_a_value_is_named_with_its_path_in_the_project(base_text, scratch):
    # the values read themselves (from_json) with the project's prefix for where they sit
    doc = json.loads(base_text)
    doc["runs"][0]["results"]["parameters"][3]["se"] = "0.1"
    assert "field 'runs[0].results.parameters[3].se' should be a number, not text" in \
        str(refuse(scratch, json.dumps(doc)))
    doc = json.loads(base_text)
    doc["spec"]["states"][1]["items"][0] = 5
    assert "field 'spec.states[1].items[0]' should be text, not a number" in \
        str(refuse(scratch, json.dumps(doc)))
    doc = json.loads(base_text)
    doc["time"]["max_gap_minutes"] = -1
    assert "field 'time.max_gap_minutes' should be more than 0" in \
        str(refuse(scratch, json.dumps(doc)))


def test_a_newer_format_version_gets_a_clear_message(base_text, scratch):
    doc = json.loads(base_text)
    doc["format_version"] = FORMAT_VERSION + 1
    doc["something_new"] = {"a": 1}
    error = refuse(scratch, json.dumps(doc))
    assert isinstance(error, ProjectVersionTooNew)
    assert "newer Lagwise" in str(error) and f"version {FORMAT_VERSION + 1}" in str(error)


# ------------------------------------------------------------------------ older versions

def _as_version_1(doc: dict) -> dict:
    """The version-1 layout of resources/project-format.md (the current run as "results",
    its bootstrap as "bootstrap"), written from a version-2 document."""
    old = {key: value for key, value in doc.items() if key not in ("runs", "current_run")}
    current = next((run for run in doc["runs"] if run["name"] == doc["current_run"]), None)
    old.update(format_version=1, results=None if current is None else current["results"])
    if current is not None and "bootstrap" in current:
        old["bootstrap"] = current["bootstrap"]
    return old


def _as_version_0(doc: dict) -> dict:
    """The version-0 layout of resources/project-format.md, written from a version-2 document."""
    doc = _as_version_1(doc)
    old = {key: value for key, value in doc.items()
           if key not in ("spec", "options", "created", "modified", "notes", "preparation")}
    old.update(format_version=0, model=doc["spec"], estimation=doc["options"],
               saved=doc["modified"])
    return old


def test_upgrade_0_to_1_moves_renamed_fields_and_adds_new_ones():
    old = {"format": "lagwise-project", "format_version": 0, "saved": "2025-11-03T09:00:00Z",
           "model": {"states": []}, "estimation": {"estimator": "stationary", "missing": "fiml"},
           "data": None}
    assert upgrade_0_to_1(old) == {
        "format": "lagwise-project", "format_version": 1, "created": "2025-11-03T09:00:00Z",
        "modified": "2025-11-03T09:00:00Z", "spec": {"states": []},
        "options": {"estimator": "stationary", "missing": "fiml"}, "data": None, "notes": "",
        "preparation": []}
    assert old["format_version"] == 0 and "model" in old  # the input is left as it was


def test_a_version_0_file_opens_as_the_same_project(demo, tmp_path):
    project, _ = demo
    path = tmp_path / "robin.lagwise"
    save_project(project, path)
    doc = json.loads(path.read_text(encoding="utf-8"))
    old_path = tmp_path / "robin-v0.lagwise"
    old_path.write_text(json.dumps(_as_version_0(doc)), encoding="utf-8")
    old, new = open_project(old_path), open_project(path)
    assert old.spec == new.spec and old.options == new.options
    assert old.result.to_json() == new.result.to_json()
    pd.testing.assert_frame_equal(old.data.table, new.data.table)
    assert old.notes == "" and old.preparation == () and old.created == doc["modified"]


# ------------------------------------------------------------------------ linked data

def test_linked_data_moved_or_changed_is_detected(demo, tmp_path):
    project, _ = demo
    (tmp_path / "data").mkdir()
    (tmp_path / "projects").mkdir()
    csv = tmp_path / "data" / "demo_diary.csv"
    shutil.copy(DEMO, csv)
    path = tmp_path / "projects" / "robin.lagwise"
    save_project(replace(project, data=link_file(csv)), path)
    doc = json.loads(path.read_text(encoding="utf-8"))
    assert doc["data"] == {"storage": "linked", "file_name": "demo_diary.csv",
                           "sha256": hashlib.sha256(csv.read_bytes()).hexdigest(),
                           "path": "../data/demo_diary.csv"}
    expected = project_diary(project).values
    np.testing.assert_array_equal(project_diary(open_project(path)).values, expected)

    moved = tmp_path / "elsewhere.csv"
    csv.rename(moved)
    with pytest.raises(LinkedDataMissing) as missing:
        project_diary(open_project(path))
    assert missing.value.expected == csv and missing.value.project.spec == project.spec
    relinked = relink_data(missing.value.project, moved)
    np.testing.assert_array_equal(project_diary(relinked).values, expected)
    save_project(relinked, path)
    assert json.loads(path.read_text(encoding="utf-8"))["data"]["path"] == "../elsewhere.csv"

    moved.write_text(moved.read_text(encoding="utf-8").replace("48,52,53", "49,52,53", 1),
                     encoding="utf-8")
    with pytest.raises(LinkedDataChanged) as changed:
        project_table(open_project(path))
    assert changed.value.path == moved
    with pytest.raises(LinkedDataChanged):
        relink_data(changed.value.project, moved)
    accepted = relink_data(changed.value.project, moved, accept_changes=True)
    assert accepted.data.sha256 == hashlib.sha256(moved.read_bytes()).hexdigest()
    assert project_diary(accepted).values[0, 0] == 49.0


def test_embedding_a_table_read_earlier_keeps_its_files_digest(tmp_path):
    csv = tmp_path / "demo_diary.csv"
    shutil.copy(DEMO, csv)
    data = embed_table(pd.read_csv(csv), csv)
    assert data.sha256 == hashlib.sha256(csv.read_bytes()).hexdigest() == file_sha256(csv)
    assert embed_table(pd.read_csv(csv)).sha256 is None


# ------------------------------------------------------------------------ recovery files

def test_recovery_files_are_written_found_and_discarded(demo, tmp_path, monkeypatch):
    monkeypatch.setenv("LAGWISE_DATA_DIR", str(tmp_path / "user data"))
    project, _ = demo
    named = save_project(project, tmp_path / "robin.lagwise")
    saved_bytes = named.file.read_bytes()
    edited = replace(named, notes="edited, not saved yet")
    written = write_recovery(edited)
    assert written == recovery_path(named.file)
    assert written.parent == tmp_path / "user data" / "recovery"
    untitled = write_recovery(replace(project, file=None))

    found = find_recovery(named.file)
    assert found.path == written and found.recovery_of == named.file
    assert found.project.file == named.file and found.project.notes == "edited, not saved yet"
    assert named.file.read_bytes() == saved_bytes  # autosaves never touch the project file
    (written.parent / "garbage.lagwise").write_text("{", encoding="utf-8")
    listed = find_recoveries()
    assert {r.path for r in listed} == {written, untitled}
    assert next(r for r in listed if r.path == untitled).recovery_of is None

    discard_recovery(written)
    assert find_recovery(named.file) is None and not written.exists()
    assert open_project(named.file).notes == project.notes  # the project itself is untouched


# ------------------------------------------------------------------------ command line

def run_main(capsys, *argv: str) -> tuple[int, str, str]:
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_cli_fit_save_then_refit_the_project_gives_the_same_estimates(tmp_path, capsys):
    csv = tmp_path / "demo_diary.csv"
    shutil.copy(DEMO, csv)
    project, first, second = tmp_path / "robin.lagwise", tmp_path / "a.json", tmp_path / "b.json"
    code, out, err = run_main(capsys, "fit", csv, "--day", "day", "--prompt", "prompt",
                              *STATE_ARGS, "--save", project, "--json", first)
    assert code == 0, err
    assert f"Project saved to {project}" in out
    csv.unlink()  # the project embeds the data
    code, out, err = run_main(capsys, "fit", project, "--json", second)
    assert code == 0, err
    a, b = (json.loads(p.read_text(encoding="utf-8")) for p in (first, second))
    assert [(p["kind"], p["from"], p["to"]) for p in a["parameters"]] == \
        [(p["kind"], p["from"], p["to"]) for p in b["parameters"]]
    np.testing.assert_allclose([p["estimate"] for p in b["parameters"]],
                               [p["estimate"] for p in a["parameters"]], rtol=1e-10)
    assert a["spec"] == b["spec"] and a["options"] == b["options"]
    stored = open_project(project).result.to_json()
    assert stored["parameters"] == a["parameters"]


def test_cli_refit_refuses_options_the_project_already_holds(demo, tmp_path, capsys):
    path = tmp_path / "robin.lagwise"
    save_project(demo[0], path)
    code, _, err = run_main(capsys, "fit", path, "--lags", "2", "--day", "day")
    assert code == 2
    assert err == f"lagwise: {path} holds its own data settings, model and estimator " \
                  "settings; leave out --day, --lags\n"
    code, _, err = run_main(capsys, "fit", path, "--save", tmp_path / "robin.json")
    assert code == 2 and "ends in .lagwise" in err


def test_cli_inspect_reads_a_project(demo, tmp_path, capsys):
    project, csv = demo
    path = tmp_path / "robin.lagwise"
    save_project(project, path)
    code, out, err = run_main(capsys, "inspect", path, "--json", "-")
    assert code == 0, err
    code, out_csv, err = run_main(capsys, "inspect", csv, "--day", "day", "--prompt", "prompt",
                                  "--items", ",".join(DEMO_SPEC.items), "--json", "-")
    assert code == 0, err
    from_project, from_csv = json.loads(out), json.loads(out_csv)
    assert from_project.pop("source") == "demo_diary.csv (in robin.lagwise)"
    from_csv.pop("source")
    assert from_project == from_csv


def test_cli_fit_of_a_broken_project_exits_2_with_one_line(tmp_path):
    # The installed entry point, in a fresh process: exit 2, one line, no traceback.
    broken = tmp_path / "broken.lagwise"
    broken.write_bytes(b'{"format": "lagwise-project", "format_version": 1, "data": {"sto')
    command = shutil.which("lagwise", path=str(Path(sys.executable).parent))
    assert command is not None, "the lagwise command is not installed beside this Python"
    done = subprocess.run([command, "fit", str(broken)], capture_output=True, text=True,
                          timeout=120)
    assert done.returncode == 2
    assert done.stdout == ""
    assert done.stderr == (f"lagwise: {broken}: the project file is incomplete (it stops in "
                           "the middle, at line 1); it may have been cut short while copying "
                           "or saving\n")
