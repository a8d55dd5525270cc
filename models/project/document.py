"""The project document: what a `.lagwise` file holds, and where its data come from.

`Project` is the whole analysis (data, items, time settings, missing-value codes,
preparation steps, model, estimator settings, its runs and which is current, notes); `ProjectData` its raw
table, embedded or linked by path and SHA-256. The functions here make data sources
(`embed_file`, `embed_table`, `link_file`), read linked data with its SHA-256 checked
(`project_table`, `relink_data`) and rebuild the diary (`project_diary`). The errors raised
for linked data, a newer format version and the shared small helpers live here too.
"""

from __future__ import annotations

import hashlib
from dataclasses import dataclass, replace
from datetime import datetime, timezone
from pathlib import Path
from typing import Any

import pandas as pd

from lagwise.models.diary import Diary, TimeSettings
from lagwise.models.errors import FieldError, ProjectError
from lagwise.models.readers import read_table
from lagwise.models.bootstrap import Bootstrap
from lagwise.models.responses import ResponseChoice
from lagwise.models.results import FitResult
from lagwise.models.runs import Run, find_run
from lagwise.models.estimators import FitOptions
from lagwise.models.spec import ModelSpec
from lagwise.models.study import StudyChoice, person_rows
from lagwise.models.recipe import DiaryRecipe

FORMAT = "lagwise-project"
FORMAT_VERSION = 2
SUFFIX = ".lagwise"


class ProjectVersionTooNew(ProjectError):
    """The file was written by a newer Lagwise (a higher format version)."""


class LinkedDataMissing(ProjectError):
    """The linked data file is not where the project expects it.

    `project` is the opened project (everything but the data is usable); `expected` is the
    path looked for. Ask the user for the file and call `relink_data`.
    """

    def __init__(self, message: str, project: "Project", expected: Path) -> None:
        super().__init__(message)
        self.project = project
        self.expected = expected


class LinkedDataChanged(ProjectError):
    """The linked data file's SHA-256 differs from the one saved in the project.

    `project` is the opened project and `path` the changed file. To go on with the file as it
    is now, call `relink_data(project, path, accept_changes=True)`.
    """

    def __init__(self, message: str, project: "Project", path: Path) -> None:
        super().__init__(message)
        self.project = project
        self.path = path


@dataclass(frozen=True, eq=False)
class ProjectData:
    """The project's raw table and where it came from.

    file_name: the original file's name (no folder), shown to the user.
    sha256: SHA-256 (hex) of the original file's bytes; None when the table never had a file.
    table: the raw table as `models.readers.read_table` gives it; None for linked data that
        has not been read yet (see `project_table`).
    link: None for embedded data; for linked data the data file's absolute path (it is stored
        relative to the project file's folder).
    """

    file_name: str
    sha256: str | None
    table: pd.DataFrame | None
    link: Path | None = None

    @property
    def linked(self) -> bool:
        return self.link is not None


@dataclass(frozen=True, eq=False)
class Project:
    """Everything a saved analysis holds (see module docstring).

    items: the item columns (None: every numeric column that is not a time column).
    items, time, missing_codes, prompts_per_day, scales: how the table becomes a diary
        (`recipe`; scales: (item, (low, high)) pairs the user stated, models.scales).
    preparation: preparation steps as plain JSON values (models.preparation), in order.
    spec/options: the model and the estimator settings being edited.
    runs: every estimate kept (models.runs), oldest first; current_run: the name of the one
        shown (None: none). `result` and `bootstrap` are the current run's.
    responses: what the Responses tab shows for the current results (None: its defaults).
    result_current: False when the data, steps, model or settings changed after the results
        were estimated (the window then shows them as out of date).
    study: the person column of a table holding many people, the person whose diary the
        project shows, and the folder of its batch results (None: one person's table).
    created/modified: UTC ISO 8601 times, set by `save_project`.
    lagwise_version: the Lagwise version that last wrote the file.
    file: where the project was opened from or last saved to (not stored in the file).
    """

    data: ProjectData | None
    items: tuple[str, ...] | None = None
    time: TimeSettings = TimeSettings()
    missing_codes: tuple[str | float, ...] = ()
    prompts_per_day: int | None = None
    scales: tuple[tuple[str, tuple[float, float]], ...] = ()
    preparation: tuple[Any, ...] = ()
    spec: ModelSpec | None = None
    options: FitOptions = FitOptions()
    runs: tuple[Run, ...] = ()
    current_run: str | None = None
    result_current: bool = True
    responses: ResponseChoice | None = None
    notes: str = ""
    study: StudyChoice | None = None
    created: str = ""
    modified: str = ""
    lagwise_version: str = ""
    file: Path | None = None

    @property
    def run(self) -> Run | None:
        """The current run (None: none)."""
        return None if self.current_run is None else find_run(self.runs, self.current_run)

    @property
    def result(self) -> FitResult | None:
        """The current run's result."""
        run = self.run
        return None if run is None else run.result

    @property
    def bootstrap(self) -> Bootstrap | None:
        """The current run's bootstrap."""
        run = self.run
        return None if run is None else run.bootstrap

    @property
    def recipe(self) -> DiaryRecipe:
        """How the stored table becomes the diary (models.recipe)."""
        return DiaryRecipe(self.items, self.time, self.missing_codes, self.prompts_per_day,
                           self.scales)

    @classmethod
    def of_recipe(cls, data: ProjectData | None, recipe: DiaryRecipe, **fields) -> "Project":
        """A project of `data` read with `recipe` (other fields as keywords)."""
        return cls(data=data, items=recipe.items, time=recipe.time,
                   missing_codes=recipe.missing_codes, prompts_per_day=recipe.prompts_per_day,
                   scales=recipe.scales, **fields)

    @property
    def name(self) -> str:
        """The project's name for a window title ('untitled' before the first save)."""
        return self.file.stem if self.file is not None else "untitled"

# ============================================================================ data sources

def embed_file(path: str | Path) -> ProjectData:
    """Embedded data: the raw table of a diary file, with the file's name and SHA-256."""
    path = Path(path)
    table = read_table(path)
    return ProjectData(file_name=path.name, sha256=file_sha256(path), table=table)


def embed_table(table: pd.DataFrame, source: str | Path | None = None) -> ProjectData:
    """Embedded data from a table already read from `source` (its SHA-256 when it still exists)."""
    name = Path(source).name if source else "table"
    digest = None
    if source and Path(source).is_file():
        digest = file_sha256(source)
    return ProjectData(file_name=name, sha256=digest, table=table)


def link_file(path: str | Path, table: pd.DataFrame | None = None) -> ProjectData:
    """Linked data: the file is not copied into the project, only its path and SHA-256."""
    path = Path(path).absolute()
    if not path.is_file():
        raise ProjectError(f"{path}: no such data file to link")
    return ProjectData(file_name=path.name, sha256=file_sha256(path), table=table, link=path)


def file_sha256(path: str | Path) -> str:
    """SHA-256 of a file's bytes, as 64 hex digits."""
    digest = hashlib.sha256()
    try:
        with open(path, "rb") as handle:
            for block in iter(lambda: handle.read(2**20), b""):
                digest.update(block)
    except OSError as error:
        raise ProjectError(f"{path}: cannot read the file ({reason(error)})") from error
    return digest.hexdigest()


def project_table(project: Project) -> pd.DataFrame:
    """The raw table: the embedded one, or the linked file read after checking its SHA-256.

    Raises LinkedDataMissing / LinkedDataChanged (with the project attached) for linked data
    that moved or changed, ProjectError when the project has no data.
    """
    data = project.data
    if data is None:
        raise ProjectError(f"{project_label(project)}: the project holds no data yet")
    if data.table is not None:
        return data.table
    link = data.link
    if link is None or not link.is_file():
        raise LinkedDataMissing(
            f"{project_label(project)}: the linked data file {link} is missing (moved, "
            "renamed or deleted); locate it to go on", project, link)
    if data.sha256 is not None and file_sha256(link) != data.sha256:
        raise LinkedDataChanged(
            f"{project_label(project)}: the linked data file {link} has changed since the "
            "project was saved (its SHA-256 differs); the saved results may not match it",
            project, link)
    return read_table(link)


def relink_data(project: Project, path: str | Path, accept_changes: bool = False) -> Project:
    """The project with its linked data at `path` (read now).

    Unless `accept_changes`, a file whose SHA-256 differs from the saved one raises
    LinkedDataChanged; with it, the new SHA-256 is kept.
    """
    path = Path(path).absolute()
    if not path.is_file():
        raise LinkedDataMissing(f"{path}: no such data file", project, path)
    digest = file_sha256(path)
    old = project.data.sha256 if project.data is not None else None
    if old is not None and digest != old and not accept_changes:
        raise LinkedDataChanged(
            f"{path}: this file differs from the one the project was saved with "
            "(its SHA-256 differs)", project, path)
    data = ProjectData(file_name=path.name, sha256=digest, table=read_table(path), link=path)
    return replace(project, data=data)


def project_diary(project: Project, table: pd.DataFrame | None = None,
                  prepared: bool = True) -> Diary:
    """The project's diary rebuilt from its raw table (models.timegrid.diary_from_frame),
    with its preparation steps applied (unless `prepared` is False)."""
    if table is None:
        table = project_table(project)
    data = project.data
    source = data.file_name if data is not None else "table"
    if data is not None and data.link is not None:
        source = str(data.link)
    elif project.file is not None:
        source = f"{source} (in {project.file.name})"
    if project.study is not None:
        choice = project.study
        table = person_rows(table, choice.person_column, choice.person, source)
        source = f"{source}, {choice.person_column} {choice.person}"
    diary = project.recipe.diary(table, source=source)
    if prepared and project.preparation:
        from lagwise.models.preparation import apply_steps, steps_from_json  # loads statistics modules

        diary = apply_steps(diary, steps_from_json(list(project.preparation)))
    return diary


def is_project_file(path: str | Path) -> bool:
    """True when the name ends with `.lagwise` (any case)."""
    return Path(path).suffix.lower() == SUFFIX


# ============================================================================ small helpers

def utc_now() -> str:
    """The current time in UTC, ISO 8601 to the second ('2026-03-02T10:15:00Z')."""
    return datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")


def lagwise_version() -> str:
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("lagwise")
    except PackageNotFoundError:
        return "unknown"


def project_label(project: Project) -> str:
    return str(project.file) if project.file is not None else "the project"


def reason(error: OSError) -> str:
    return error.strerror or str(error) or type(error).__name__


def damage(problem: FieldError) -> str:
    """A bad field in the words of the project's messages ("field 'time.mode' should ...")."""
    if problem.where:
        return f"field '{problem.where}' {problem.problem}"
    return f"the document {problem.problem}"
