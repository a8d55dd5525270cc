"""Opening a project file: bounded bytes, strict JSON, upgrade, every field checked.

`open_project` reads the file (at most MAX_FILE_BYTES), parses it with
models.jsonread.parse (no code is ever executed, sizes are bounded), upgrades an older
format version (models.project.upgrade) and builds the Project. The project's own fields
are read here; the specification, estimator settings, time settings and results are read by
their own `from_json` with this document's path as `where` (the model without validation,
so unfinished work reopens). Any problem raises one ProjectError line naming the file and
the field; the file itself is never changed. `project_from_bytes` applies the same rules to
a document about to be saved.
"""

from __future__ import annotations

import json
import os
from dataclasses import replace
from pathlib import Path, PurePosixPath
from typing import Any

import pandas as pd

from lagwise.models import jsonread as jr
from lagwise.models.diary import Diary, TimeSettings
from lagwise.models.errors import FieldError, LagwiseError, ProjectError
from lagwise.models.project.document import (
    FORMAT_VERSION, Project, ProjectData, damage, project_diary, reason,
)
from lagwise.models.project.estimates import project_fingerprint
from lagwise.models.project.table import parse_table
from lagwise.models.project.upgrade import upgrade
from lagwise.models.responses import ResponseChoice
from lagwise.models.runs import Run
from lagwise.models.scales import scales_from_json
from lagwise.models.results import FitResult
from lagwise.models.estimators import FitOptions
from lagwise.models.spec import ModelSpec
from lagwise.models.study import StudyChoice

MAX_FILE_BYTES = 256 * 2**20      # the whole file

_TOP_KEYS = ("format", "format_version", "lagwise_version", "created", "modified", "data",
             "items", "time", "missing_codes", "preparation", "spec", "options", "runs",
             "current_run", "notes")


def open_project(path: str | Path) -> Project:
    """Read a project file (JSON only, every field checked); ProjectError when it is unusable.

    Linked data are not read here: `project_table`/`project_diary` read and check them.
    """
    project, _ = read_project(Path(path))
    return project


def load_project_diary(path: str | Path, prepared: bool = False) -> Diary:
    """The diary of a project file, for `lagwise inspect PROJECT.lagwise`: the answers as
    stored (with `prepared`, after the project's preparation steps)."""
    return project_diary(open_project(path), prepared=prepared)


def read_project(path: Path) -> tuple[Project, Path | None]:
    """The project in `path` (with `file` set) and, for an autosave, the file it belongs to."""
    label = str(path)
    raw = _read_bytes(path, label)
    project, recovery_of = project_from_bytes(raw, path.absolute().parent, label)
    return replace(project, file=path.absolute()), recovery_of


def project_from_bytes(raw: bytes, folder: Path, label: str) -> tuple[Project, Path | None]:
    """The project a file's bytes hold (linked data relative to `folder`); messages start
    with `label`."""
    doc = _parse(raw, label)
    if not isinstance(doc, dict):
        raise ProjectError(f"{label}: not a Lagwise project file (it holds {jr.kind(doc)}, "
                           "not a JSON object)")
    upgraded = doc.get("format_version") != FORMAT_VERSION
    doc = upgrade(doc, label)
    try:
        return _project(doc, folder, upgraded)
    except FieldError as problem:
        raise ProjectError(f"{label}: the project file is damaged: {damage(problem)}") from None


def _read_bytes(path: Path, label: str) -> bytes:
    if not path.exists():
        raise ProjectError(f"{label}: no such project file")
    if path.is_dir():
        raise ProjectError(f"{label}: is a folder, not a project file")
    try:
        size = path.stat().st_size
        if size > MAX_FILE_BYTES:
            raise ProjectError(f"{label}: the file is {size / 2**20:.0f} MB; a project file is "
                               f"at most {MAX_FILE_BYTES // 2**20} MB")
        with open(path, "rb") as handle:
            raw = handle.read(MAX_FILE_BYTES + 1)
    except OSError as error:
        raise ProjectError(f"{label}: cannot read the file ({reason(error)})") from error
    if len(raw) > MAX_FILE_BYTES:
        raise ProjectError(f"{label}: the file is larger than {MAX_FILE_BYTES // 2**20} MB")
    return raw


def _parse(raw: bytes, label: str) -> Any:
    """The JSON value of the file; ProjectError for anything that is not bounded JSON."""
    if not raw.strip():
        raise ProjectError(f"{label}: the file is empty; it is not a Lagwise project")
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise ProjectError(f"{label}: not a Lagwise project file (it is not UTF-8 text)") from None
    try:
        return jr.parse(text)
    except json.JSONDecodeError as error:
        if error.pos >= len(text.rstrip()) or error.msg.startswith("Unterminated string"):
            raise ProjectError(
                f"{label}: the project file is incomplete (it stops in the middle, at line "
                f"{text.rstrip().count(chr(10)) + 1}); it may have been cut short while "
                "copying or saving") from None
        raise ProjectError(f"{label}: not a Lagwise project file (not valid JSON: {error.msg}, "
                           f"line {error.lineno}, column {error.colno})") from None
    except FieldError as problem:
        raise ProjectError(f"{label}: the project file is damaged: {damage(problem)}") from None
    except RecursionError:
        raise ProjectError(f"{label}: the project file is damaged: its lists and objects "
                           "nest too deeply") from None
    except ValueError as error:  # e.g. an integer with too many digits for Python
        raise ProjectError(f"{label}: the project file is damaged: {error}") from None


# ---------------------------------------------------------------------------- fields

def _runs(value: object, fingerprint: str | None) -> tuple[Run, ...]:
    """The stored runs (names unique). A run converted from an older format has no
    fingerprint (models.project.upgrade): it gets `fingerprint`, the project's own."""
    entries = jr.array(value, "runs")
    if fingerprint is not None:
        entries = [{**doc, "fingerprint": fingerprint}
                   if isinstance(doc, dict) and "fingerprint" not in doc else doc
                   for doc in entries]
    runs = tuple(Run.from_json(doc, f"runs[{i}]") for i, doc in enumerate(entries))
    seen: set[str] = set()
    for i, run in enumerate(runs):
        if run.name in seen:
            raise FieldError(f"runs[{i}].name", f"repeats the name '{run.name}'")
        seen.add(run.name)
    return runs


def _current(value: object, runs: tuple[Run, ...]) -> str | None:
    name = jr.name(value, "current_run", null=True)
    if name is not None and name not in {run.name for run in runs}:
        raise FieldError("current_run", "should name one of the runs")
    return name


def _responses(value: object, result: FitResult | None) -> ResponseChoice | None:
    """What the Responses tab showed for the stored results (its order: their states)."""
    if value is None:
        return None
    if result is None:
        raise FieldError("responses", "belongs to results, but the project has none")
    return ResponseChoice.from_json(value, "responses", states=result.states)


def _project(doc: dict, folder: Path, upgraded: bool = False) -> tuple[Project, Path | None]:
    """The project of a current-version document (`upgraded`: converted from an older one)."""
    doc = jr.obj(doc, "", _TOP_KEYS, ("recovery_of", "results_current", "responses", "scales",
                                      "study"))
    time, per_day = _time(doc["time"])
    items = doc["items"]
    if items is not None:
        items = jr.tuple_of(items, "items", jr.text, jr.MAX_ITEMS)
    codes = jr.tuple_of(doc["missing_codes"], "missing_codes", _code)
    preparation = jr.array(doc["preparation"], "preparation")
    if preparation:
        from lagwise.models.preparation import steps_from_json  # loads statistics modules

        try:
            steps_from_json(preparation)
        except (LagwiseError, TypeError, ValueError, AttributeError, KeyError) as error:
            raise FieldError("preparation",
                             f"is not a list of preparation steps ({error})") from None
    data = None if doc["data"] is None else _data(doc["data"], folder)
    study = None if doc.get("study") is None else _study(doc["study"], folder)
    if data is not None and data.table is not None:
        _check_roles(data.table, items, time)
        if study is not None and study.person_column not in set(data.table.columns):
            raise FieldError("study.person_column", f"names the column '{study.person_column}', "
                             "which the embedded table lacks")
    recovery_of = doc.get("recovery_of")
    if recovery_of is not None:
        recovery_of = Path(jr.text(recovery_of, "recovery_of", jr.MAX_TEXT))
    spec = doc["spec"]
    scales = tuple(scales_from_json(doc.get("scales", {})).items())
    project = Project(
        data=data, items=items, time=time, missing_codes=codes, prompts_per_day=per_day,
        scales=scales, preparation=tuple(preparation), study=study)
    runs = _runs(doc["runs"], project_fingerprint(project) if upgraded and doc["runs"] else None)
    current = _current(doc["current_run"], runs)
    result = None if current is None else next(r.result for r in runs if r.name == current)
    project = replace(
        project,
        spec=None if spec is None else ModelSpec.from_json(spec, "spec", validate=False),
        options=FitOptions.from_json(doc["options"], "options"),
        runs=runs, current_run=current,
        result_current=jr.boolean(doc.get("results_current", True), "results_current"),
        responses=_responses(doc.get("responses"), result),
        notes=jr.text(doc["notes"], "notes", jr.MAX_TEXT),
        created=jr.timestamp(doc["created"], "created"),
        modified=jr.timestamp(doc["modified"], "modified"),
        lagwise_version=jr.text(doc["lagwise_version"], "lagwise_version", 200),
    )
    return project, recovery_of


def _time(value: Any) -> tuple[TimeSettings, int | None]:
    """The time settings and, beside them in the same object, the prompts per day."""
    settings = TimeSettings.from_json(value, "time", others=("prompts_per_day",))
    doc = jr.obj(value, "time", ("prompts_per_day",), closed=False)
    return settings, jr.integer(doc["prompts_per_day"], "time.prompts_per_day", 1, 10_000,
                                null=True)


def _study(value: Any, folder: Path) -> StudyChoice:
    """The study, a relative batch folder taken from the project's folder."""
    study = StudyChoice.from_json(value, "study")
    stored = study.batch_folder
    if stored and not Path(stored).is_absolute():
        where = folder.joinpath(*PurePosixPath(stored).parts)
        study = replace(study, batch_folder=os.path.normpath(where))
    return study


def _data(value: Any, folder: Path) -> ProjectData:
    storage = jr.choice(jr.obj(value, "data", ("storage",),
                               ("file_name", "sha256", "table", "path"))["storage"],
                        "data.storage", ("embedded", "linked"))
    if storage == "embedded":
        doc = jr.obj(value, "data", ("storage", "file_name", "sha256", "table"))
        digest = jr.sha256(doc["sha256"], "data.sha256", null=True)
        table = parse_table(doc["table"], "data.table")
        return ProjectData(jr.text(doc["file_name"], "data.file_name"), digest, table)
    doc = jr.obj(value, "data", ("storage", "file_name", "sha256", "path"))
    stored = jr.text(doc["path"], "data.path", jr.MAX_TEXT)
    if not stored.strip() or "\x00" in stored:
        raise FieldError("data.path", "is not a file path")
    link = Path(stored)
    if not link.is_absolute():
        link = folder.joinpath(*PurePosixPath(stored).parts)
    return ProjectData(jr.text(doc["file_name"], "data.file_name"),
                       jr.sha256(doc["sha256"], "data.sha256"), None, Path(os.path.normpath(link)))


def _check_roles(table: pd.DataFrame, items: tuple[str, ...] | None, time: TimeSettings) -> None:
    columns = set(table.columns)
    roles = [("items", name) for name in items or ()] + [("time", c) for c in time.columns()]
    for where, name in roles:
        if name not in columns:
            raise FieldError(where, f"names the column '{name}', which the embedded table lacks")


def _code(value: Any, where: str) -> str | float:
    if isinstance(value, str):
        return jr.text(value, where)
    return jr.number(value, where)
