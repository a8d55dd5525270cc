"""Project files (`.lagwise`): one versioned JSON document holding a whole analysis.

A project holds the diary's raw table (embedded, the default, or linked by a relative path
with the file's SHA-256), how the table becomes a diary (item columns, time settings,
missing-value codes, preparation steps), the model specification, the estimator settings,
the last results and free-text notes. The layout is documented in
resources/project-format.md.

Safety rules:
- saving is atomic: a temporary file is written beside the target, flushed, synced to disk
  and then moved over the target with `os.replace`; a failed save leaves the previous file
  byte-identical and raises ProjectError saying why; nothing is written that `open_project`
  would refuse;
- opening reads JSON only (nothing in a file is executed) and checks every field's type and
  size; a damaged, truncated, wrong-type or newer-version file raises ProjectError;
- older format versions are upgraded by the explicit functions in `UPGRADES`.
"""

from __future__ import annotations

import hashlib
import json
import os
import secrets
import stat
import sys
from dataclasses import dataclass, replace
from datetime import datetime, timezone
from pathlib import Path, PurePosixPath
from typing import Any, Callable, Iterable

import numpy as np
import pandas as pd

from lagwise.models.diary import Diary, TimeSettings
from lagwise.models.errors import LagwiseError, ProjectError
from lagwise.models.readers import read_table
from lagwise.models.results import FitResult
from lagwise.models.estimators import ESTIMATORS, MISSING, FitOptions
from lagwise.models.spec import IDENTIFICATIONS, INNOVATION_FORMS, ModelSpec, State
from lagwise.models.timegrid import diary_from_frame

FORMAT = "lagwise-project"
FORMAT_VERSION = 1
SUFFIX = ".lagwise"

# Bounds checked on opening (a file beyond them is refused as damaged).
MAX_FILE_BYTES = 256 * 2**20      # the whole file
MAX_DEPTH = 32                     # nesting of lists and objects
MAX_TEXT = 1_000_000               # characters of one text (the notes, a message)
MAX_NAME = 10_000                  # characters of a name, a key or a table cell
MAX_ROWS = 5_000_000               # rows of the embedded table
MAX_COLUMNS = 10_000               # columns of the embedded table
MAX_STATES = 200                   # states of a specification
MAX_ITEMS = MAX_COLUMNS            # items of a specification or of the diary
MAX_LIST = 100_000                 # entries of any other list
MAX_INTEGER = 2**63 - 1            # integers fit in 64 bits

TABLE_KINDS = ("integer", "number", "boolean", "datetime", "text", "mixed")
TIME_MODES = ("grid", "timestamp", "order")


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
    time, missing_codes, prompts_per_day: how the table becomes a diary
        (models.timegrid.diary_from_frame).
    preparation: preparation steps as plain JSON values (models.preparation), in order.
    spec/options/result: the model, the estimator settings and the last results (None: none).
    result_current: False when the data, steps, model or settings changed after the results
        were estimated (the window then shows them as out of date).
    created/modified: UTC ISO 8601 times, set by `save_project`.
    lagwise_version: the Lagwise version that last wrote the file.
    file: where the project was opened from or last saved to (not stored in the file).
    """

    data: ProjectData | None
    items: tuple[str, ...] | None = None
    time: TimeSettings = TimeSettings()
    missing_codes: tuple[str | float, ...] = ()
    prompts_per_day: int | None = None
    preparation: tuple[Any, ...] = ()
    spec: ModelSpec | None = None
    options: FitOptions = FitOptions()
    result: FitResult | None = None
    result_current: bool = True
    notes: str = ""
    created: str = ""
    modified: str = ""
    lagwise_version: str = ""
    file: Path | None = None

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
        raise ProjectError(f"{path}: cannot read the file ({_reason(error)})") from error
    return digest.hexdigest()


def project_table(project: Project) -> pd.DataFrame:
    """The raw table: the embedded one, or the linked file read after checking its SHA-256.

    Raises LinkedDataMissing / LinkedDataChanged (with the project attached) for linked data
    that moved or changed, ProjectError when the project has no data.
    """
    data = project.data
    if data is None:
        raise ProjectError(f"{_label(project)}: the project holds no data yet")
    if data.table is not None:
        return data.table
    link = data.link
    if link is None or not link.is_file():
        raise LinkedDataMissing(
            f"{_label(project)}: the linked data file {link} is missing (moved, renamed or "
            "deleted); locate it to go on", project, link)
    if data.sha256 is not None and file_sha256(link) != data.sha256:
        raise LinkedDataChanged(
            f"{_label(project)}: the linked data file {link} has changed since the project "
            "was saved (its SHA-256 differs); the saved results may not match it",
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
    diary = diary_from_frame(table, project.items, project.time, project.missing_codes,
                             source=source, prompts_per_day=project.prompts_per_day)
    if prepared and project.preparation:
        from lagwise.models.preparation import apply_steps, steps_from_json  # loads statistics modules

        diary = apply_steps(diary, steps_from_json(list(project.preparation)))
    return diary


def load_project_diary(path: str | Path, prepared: bool = False) -> Diary:
    """The diary of a project file, for `lagwise inspect PROJECT.lagwise`: the answers as
    stored (with `prepared`, after the project's preparation steps)."""
    return project_diary(open_project(path), prepared=prepared)


def is_project_file(path: str | Path) -> bool:
    """True when the name ends with `.lagwise` (any case)."""
    return Path(path).suffix.lower() == SUFFIX


# ============================================================================ save

def save_project(project: Project, path: str | Path) -> Project:
    """Write `project` to `path` atomically; returns it with the new times and file.

    The document is checked with the same rules `open_project` applies before anything is
    written; any failure raises ProjectError and leaves an existing file byte-identical.
    """
    target = Path(path).absolute()
    return _save(project, target, recovery_of=None)


def _save(project: Project, target: Path, recovery_of: Path | None) -> Project:
    now = utc_now()
    saved = replace(project, created=project.created or now, modified=now,
                    lagwise_version=lagwise_version(), file=target)
    doc = _document(saved, target.parent)
    if recovery_of is not None:
        doc["recovery_of"] = str(recovery_of)
    try:
        data = _dump(doc).encode("utf-8")
    except (TypeError, ValueError) as error:  # a value that JSON cannot hold
        raise ProjectError(f"{target}: the project cannot be saved: a value cannot be written "
                           f"as JSON ({error}); nothing was written") from None
    try:  # never write a file that open_project would refuse
        _read_document(_parse(data, "check"), target.parent, "check")
    except ProjectError as error:
        problem = str(error).removeprefix("check: ")
        raise ProjectError(f"{target}: the project cannot be saved: it would not reopen "
                           f"({problem}); nothing was written") from None
    _write_atomic(target, data)
    return saved


def _write_atomic(target: Path, data: bytes) -> None:
    """Write beside the target, flush, fsync, then os.replace; clean up on failure."""
    if target.is_dir():
        raise ProjectError(f"{target}: is a folder; choose a file name for the project")
    temporary = target.with_name(f".{target.name}.{secrets.token_hex(4)}.tmp")
    try:
        flags = os.O_WRONLY | os.O_CREAT | os.O_EXCL | getattr(os, "O_BINARY", 0)
        handle = os.open(temporary, flags, 0o666)
        with os.fdopen(handle, "wb") as out:
            out.write(data)
            out.flush()
            os.fsync(out.fileno())
        if target.exists():
            os.chmod(temporary, stat.S_IMODE(target.stat().st_mode))
        os.replace(temporary, target)
    except BaseException as error:
        try:
            temporary.unlink(missing_ok=True)
        except OSError:
            pass
        if isinstance(error, OSError):
            kept = "the previous file is unchanged" if target.exists() else "nothing was written"
            raise ProjectError(f"{target}: could not save the project ({_reason(error)}); "
                               f"{kept}") from error
        raise
    _sync_folder(target.parent)


def _sync_folder(folder: Path) -> None:
    """Make the rename durable where the system allows syncing a folder (not Windows)."""
    if sys.platform.startswith("win"):
        return
    try:
        handle = os.open(folder, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(handle)
    except OSError:
        pass
    finally:
        os.close(handle)


def _dump(doc: dict) -> str:
    """Indented JSON, with the table written one column and one row per line (readable, and
    small in version control)."""
    table = (doc.get("data") or {}).get("table")
    if not table:
        return _json(doc, indent=2) + "\n"
    token = secrets.token_hex(8)
    blocks: dict[str, str] = {}

    def later(name: str, text: str) -> str:
        marker = f"@{name}-{token}@"
        blocks[_json(marker)] = text
        return marker

    def lines(values: list) -> str:
        body = ",\n".join(" " * 8 + _json(v) for v in values)
        return "[\n" + body + "\n" + " " * 6 + "]" if values else "[]"

    labels = table["row_labels"]
    shell_table = dict(
        table, columns=later("columns", lines(table["columns"])),
        row_labels=None if labels is None else dict(
            labels, values=later("labels", _json(labels["values"]))),
        rows=later("rows", lines(table["rows"])))
    text = _json(dict(doc, data=dict(doc["data"], table=shell_table)), indent=2)
    for marker, block in blocks.items():
        text = text.replace(marker, block, 1)
    return text + "\n"


def _json(value: Any, indent: int | None = None) -> str:
    return json.dumps(value, indent=indent, ensure_ascii=False, allow_nan=False)


def _document(project: Project, folder: Path) -> dict:
    """The JSON document of a project (format version FORMAT_VERSION)."""
    return {
        "format": FORMAT,
        "format_version": FORMAT_VERSION,
        "lagwise_version": project.lagwise_version,
        "created": project.created,
        "modified": project.modified,
        "data": None if project.data is None else _data_document(project.data, folder),
        "items": None if project.items is None else list(project.items),
        "time": {
            "mode": project.time.mode, "day": project.time.day, "prompt": project.time.prompt,
            "time": project.time.time, "max_gap_minutes": project.time.max_gap_minutes,
            "days_independent": project.time.days_independent,
            "prompts_per_day": project.prompts_per_day,
        },
        "missing_codes": list(project.missing_codes),
        "preparation": list(project.preparation),
        "spec": None if project.spec is None else project.spec.to_json(),
        "options": project.options.to_json(),
        "results": None if project.result is None else project.result.to_json(),
        "results_current": project.result_current,
        "notes": project.notes,
    }


def _data_document(data: ProjectData, folder: Path) -> dict:
    if data.link is not None:
        return {"storage": "linked", "file_name": data.file_name, "sha256": data.sha256,
                "path": _relative(data.link, folder)}
    if data.table is None:
        raise ProjectError("embedded data without a table")
    return {"storage": "embedded", "file_name": data.file_name, "sha256": data.sha256,
            "table": table_to_json(data.table)}


def _relative(path: Path, folder: Path) -> str:
    """`path` relative to `folder` with forward slashes (absolute when on another drive)."""
    try:
        return Path(os.path.relpath(path, folder)).as_posix()
    except ValueError:  # Windows: another drive
        return path.as_posix()


# ---------------------------------------------------------------------------- the table

def table_to_json(frame: pd.DataFrame) -> dict:
    """A raw table as {"columns": [{"name", "kind"}], "row_labels", "rows"} (see the format doc)."""
    columns, cells = [], []
    for position in range(frame.shape[1]):
        kind, values = _column_to_json(frame.iloc[:, position])
        columns.append({"name": str(frame.columns[position]), "kind": kind})
        cells.append(values)
    labels = None
    if pd.api.types.is_integer_dtype(frame.index.dtype):
        name = frame.index.name if isinstance(frame.index.name, str) else None
        labels = {"name": name, "values": [int(v) for v in frame.index]}
    rows = [list(row) for row in zip(*cells)] if cells else []
    return {"columns": columns, "row_labels": labels, "rows": rows}


def _column_to_json(series: pd.Series) -> tuple[str, list]:
    dtype = series.dtype
    missing = series.isna().to_numpy()
    if dtype == object:
        return "mixed", [_cell_to_json(v) for v in series.to_numpy(dtype=object)]
    if pd.api.types.is_bool_dtype(dtype):
        return "boolean", [None if m else bool(v) for v, m in zip(series.to_numpy(object), missing)]
    if pd.api.types.is_integer_dtype(dtype):
        return "integer", [None if m else int(v) for v, m in zip(series.to_numpy(object), missing)]
    if pd.api.types.is_float_dtype(dtype):
        values = series.to_numpy(dtype=float, na_value=np.nan)
        if np.isinf(values).any():  # kept as text so the diary reader still refuses them
            return "mixed", [_cell_to_json(v) for v in values]
        return "number", [None if m else float(v) for v, m in zip(values, np.isnan(values))]
    if pd.api.types.is_datetime64_any_dtype(dtype):
        stamps = pd.DatetimeIndex(series)
        if stamps.tz is not None:  # wall-clock times, as models.readers.time_cells reads them
            stamps = stamps.tz_localize(None)
        return "datetime", [None if pd.isna(v) else v.isoformat() for v in stamps]
    if pd.api.types.is_string_dtype(dtype):
        return "text", [None if m else str(v) for v, m in zip(series.to_numpy(object), missing)]
    return "mixed", [_cell_to_json(v) for v in series.to_numpy(dtype=object)]


def _cell_to_json(cell: object) -> object:
    """A cell of a mixed column as a JSON value (dates as ISO 8601 text)."""
    if cell is None or isinstance(cell, str):
        return cell
    if isinstance(cell, (bool, np.bool_)):
        return bool(cell)
    if isinstance(cell, (int, np.integer)):
        return int(cell) if abs(int(cell)) <= MAX_INTEGER else str(cell)
    if isinstance(cell, (float, np.floating)):
        if np.isnan(cell):
            return None
        return float(cell) if np.isfinite(cell) else str(float(cell))
    try:
        if pd.isna(cell):
            return None
    except (TypeError, ValueError):
        pass
    if hasattr(cell, "isoformat"):
        return cell.isoformat()
    return str(cell)


def table_from_json(doc: object, where: str = "table") -> pd.DataFrame:
    """The table written by `table_to_json` (raises ProjectError for anything else)."""
    try:
        return _table(doc, where)
    except _Invalid as problem:
        raise ProjectError(str(problem)) from None


def _table(doc: object, where: str) -> pd.DataFrame:
    doc = _object(doc, where, ("columns", "row_labels", "rows"))
    columns = _list(doc["columns"], f"{where}.columns", MAX_COLUMNS)
    names, kinds = [], []
    for i, entry in enumerate(columns):
        at = f"{where}.columns[{i}]"
        entry = _object(entry, at, ("name", "kind"))
        names.append(_text(entry["name"], f"{at}.name"))
        kinds.append(_choice(entry["kind"], f"{at}.kind", TABLE_KINDS))
    if len(set(names)) != len(names):
        raise _Invalid(f"{where}.columns", "names a column twice")
    rows = _list(doc["rows"], f"{where}.rows", MAX_ROWS)
    width = len(names)
    for r, row in enumerate(rows):
        if not isinstance(row, list) or len(row) != width:
            raise _Invalid(f"{where}.rows[{r}]", f"should be a list of {width} cells")
    series = {}
    for c, (name, kind) in enumerate(zip(names, kinds)):
        cells = [row[c] for row in rows]
        series[name] = _column_from_json(cells, kind, f"{where}.rows[*][{c}]")
    frame = pd.DataFrame(series, columns=names) if names else pd.DataFrame(index=range(len(rows)))
    labels = doc["row_labels"]
    if labels is not None:
        labels = _object(labels, f"{where}.row_labels", ("name", "values"))
        name = _text(labels["name"], f"{where}.row_labels.name", null=True)
        values = _list(labels["values"], f"{where}.row_labels.values", MAX_ROWS)
        if len(values) != len(rows):
            raise _Invalid(f"{where}.row_labels.values", f"should hold {len(rows)} row numbers")
        for i, value in enumerate(values):
            _integer(value, f"{where}.row_labels.values[{i}]")
        frame.index = pd.Index(np.array(values, dtype=np.int64), name=name)
    return frame


_CELL_TYPES: dict[str, tuple[type, ...]] = {
    "integer": (int,), "number": (int, float), "boolean": (bool,), "datetime": (str,),
    "text": (str,), "mixed": (str, int, float, bool),
}


def _column_from_json(cells: list, kind: str, where: str) -> pd.Series:
    allowed = _CELL_TYPES[kind]
    for cell in cells:
        if cell is None:
            continue
        if not isinstance(cell, allowed) or (isinstance(cell, bool) and bool not in allowed):
            raise _Invalid(where, f"should hold {kind} cells, not {_kind(cell)}")
        if isinstance(cell, str) and len(cell) > MAX_NAME:
            raise _Invalid(where, f"holds a cell longer than {MAX_NAME} characters")
    has_missing = any(cell is None for cell in cells)
    if kind == "integer":
        if has_missing:
            return pd.Series([np.nan if c is None else float(c) for c in cells], dtype=float)
        return pd.Series(cells, dtype=np.int64)
    if kind == "number":
        return pd.Series([np.nan if c is None else float(c) for c in cells], dtype=float)
    if kind == "boolean":
        return pd.Series(cells, dtype=object if has_missing else bool)
    if kind == "datetime":
        try:
            return pd.Series(pd.to_datetime(pd.Series(cells, dtype=object), format="ISO8601"))
        except (ValueError, TypeError, OverflowError) as error:
            raise _Invalid(where, f"holds a cell that is not an ISO 8601 time ({error})") from None
    if kind == "text" and any(isinstance(c, str) for c in cells):
        return pd.Series(cells)  # the string type pandas gives text columns of a data file
    return pd.Series(cells, dtype=object)


# ============================================================================ open

def open_project(path: str | Path) -> Project:
    """Read a project file (JSON only, every field checked); ProjectError when it is unusable.

    Linked data are not read here: `project_table`/`project_diary` read and check them.
    """
    project, _ = _open(Path(path))
    return project


def _open(path: Path) -> tuple[Project, Path | None]:
    label = str(path)
    raw = _read_bytes(path, label)
    doc = _parse(raw, label)
    project, recovery_of = _read_document(doc, path.absolute().parent, label)
    return replace(project, file=path.absolute()), recovery_of


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
        raise ProjectError(f"{label}: cannot read the file ({_reason(error)})") from error
    if len(raw) > MAX_FILE_BYTES:
        raise ProjectError(f"{label}: the file is larger than {MAX_FILE_BYTES // 2**20} MB")
    return raw


class _Invalid(Exception):
    """A field of the document that breaks the format (turned into ProjectError)."""

    def __init__(self, where: str, problem: str) -> None:
        super().__init__(f"field '{where}' {problem}" if where else f"the document {problem}")


def _reject_constant(name: str) -> None:
    raise _Invalid("", f"holds {name}, which is not a number JSON allows")


def _bounded_int(text: str) -> int:
    if len(text.lstrip("-")) > 19 or abs(int(text)) > MAX_INTEGER:
        raise _Invalid("", f"holds a number too large to use ({text[:30]}...)")
    return int(text)


def _finite_float(text: str) -> float:
    value = float(text)
    if not np.isfinite(value):
        raise _Invalid("", f"holds a number too large to use ({text[:30]})")
    return value


def _unique_keys(pairs: list[tuple[str, Any]]) -> dict:
    out = {}
    for key, value in pairs:
        if key in out:
            raise _Invalid("", f"names the field '{key[:60]}' twice in one object")
        out[key] = value
    return out


_PARSE_HOOKS: dict[str, Callable] = {
    "parse_int": _bounded_int, "parse_float": _finite_float,
    "parse_constant": _reject_constant, "object_pairs_hook": _unique_keys,
}


def _parse(raw: bytes, label: str) -> Any:
    """The JSON value of the file; ProjectError for anything that is not bounded JSON."""
    if not raw.strip():
        raise ProjectError(f"{label}: the file is empty; it is not a Lagwise project")
    try:
        text = raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise ProjectError(f"{label}: not a Lagwise project file (it is not UTF-8 text)") from None
    try:
        doc = json.loads(text, **_PARSE_HOOKS)
    except json.JSONDecodeError as error:
        if error.pos >= len(text.rstrip()) or error.msg.startswith("Unterminated string"):
            raise ProjectError(
                f"{label}: the project file is incomplete (it stops in the middle, at line "
                f"{text.rstrip().count(chr(10)) + 1}); it may have been cut short while "
                "copying or saving") from None
        raise ProjectError(f"{label}: not a Lagwise project file (not valid JSON: {error.msg}, "
                           f"line {error.lineno}, column {error.colno})") from None
    except _Invalid as problem:
        raise ProjectError(f"{label}: the project file is damaged: {problem}") from None
    except RecursionError:
        raise ProjectError(f"{label}: the project file is damaged: its lists and objects "
                           "nest too deeply") from None
    except ValueError as error:  # e.g. an integer with too many digits for Python
        raise ProjectError(f"{label}: the project file is damaged: {error}") from None
    try:
        _check_tree(doc)
    except _Invalid as problem:
        raise ProjectError(f"{label}: the project file is damaged: {problem}") from None
    return doc


def _check_tree(doc: Any) -> None:
    """Depth of nesting and length of every text and key within bounds (iterative)."""
    stack = [(doc, 0)]
    while stack:
        value, depth = stack.pop()
        if isinstance(value, (list, dict)):
            if depth >= MAX_DEPTH:
                raise _Invalid("", f"nests lists and objects more than {MAX_DEPTH} levels deep")
            children = value.values() if isinstance(value, dict) else value
            if isinstance(value, dict):
                for key in value:
                    if len(key) > MAX_NAME:
                        raise _Invalid("", f"has a field name longer than {MAX_NAME} characters")
            stack.extend((child, depth + 1) for child in children)
        elif isinstance(value, str) and len(value) > MAX_TEXT:
            raise _Invalid("", f"has a text longer than {MAX_TEXT} characters")


# ---------------------------------------------------------------------------- versions

def upgrade_0_to_1(doc: dict) -> dict:
    """Format version 0 -> 1.

    Version 0 kept the specification under "model" and the estimator settings under
    "estimation", had one "saved" time instead of "created" and "modified", and had neither
    "notes" nor "preparation". Everything else is the same.
    """
    new = dict(doc)
    new["format_version"] = 1
    for old, key in (("model", "spec"), ("estimation", "options")):
        if old in new:
            new[key] = new.pop(old)
    if "saved" in new:
        saved = new.pop("saved")
        new["created"] = saved
        new["modified"] = saved
    new.setdefault("notes", "")
    new.setdefault("preparation", [])
    return new


UPGRADES: dict[int, Callable[[dict], dict]] = {0: upgrade_0_to_1}


def upgrade(doc: dict, label: str = "project") -> dict:
    """Bring a document of any older format version up to FORMAT_VERSION, one step at a time."""
    if doc.get("format") != FORMAT:
        raise ProjectError(f"{label}: not a Lagwise project file "
                           f"(it has no \"format\": \"{FORMAT}\" field)")
    version = doc.get("format_version")
    if not isinstance(version, int) or isinstance(version, bool) or version < 0:
        raise ProjectError(f"{label}: the project file is damaged: field 'format_version' "
                           "should be a whole number 0 or more")
    if version > FORMAT_VERSION:
        raise ProjectVersionTooNew(
            f"{label}: was saved by a newer Lagwise (project format version {version}; "
            f"Lagwise {lagwise_version()} reads versions up to {FORMAT_VERSION}); "
            "update Lagwise to open it")
    while version < FORMAT_VERSION:
        doc = UPGRADES[version](doc)
        version += 1
    return doc


# ---------------------------------------------------------------------------- fields

_TOP_KEYS = ("format", "format_version", "lagwise_version", "created", "modified", "data",
             "items", "time", "missing_codes", "preparation", "spec", "options", "results",
             "notes")


def _read_document(doc: Any, folder: Path, label: str) -> tuple[Project, Path | None]:
    if not isinstance(doc, dict):
        raise ProjectError(f"{label}: not a Lagwise project file (it holds {_kind(doc)}, "
                           "not a JSON object)")
    doc = upgrade(doc, label)
    try:
        return _project(doc, folder)
    except _Invalid as problem:
        raise ProjectError(f"{label}: the project file is damaged: {problem}") from None


def _project(doc: dict, folder: Path) -> tuple[Project, Path | None]:
    doc = _object(doc, "", _TOP_KEYS, optional=("recovery_of", "results_current"))
    time, per_day = _time(doc["time"])
    items = doc["items"]
    if items is not None:
        items = tuple(_text(v, f"items[{i}]")
                      for i, v in enumerate(_list(items, "items", MAX_ITEMS)))
    codes = tuple(_code(v, f"missing_codes[{i}]")
                  for i, v in enumerate(_list(doc["missing_codes"], "missing_codes", MAX_LIST)))
    preparation = _list(doc["preparation"], "preparation", MAX_LIST)
    if preparation:
        from lagwise.models.preparation import steps_from_json  # loads statistics modules

        try:
            steps_from_json(preparation)
        except (LagwiseError, TypeError, ValueError, AttributeError, KeyError) as error:
            raise _Invalid("preparation", f"is not a list of preparation steps ({error})") from None
    data = None if doc["data"] is None else _data(doc["data"], folder)
    if data is not None and data.table is not None:
        _check_roles(data.table, items, time)
    recovery_of = doc.get("recovery_of")
    if recovery_of is not None:
        recovery_of = Path(_text(recovery_of, "recovery_of", MAX_TEXT))
    project = Project(
        data=data, items=items, time=time, missing_codes=codes, prompts_per_day=per_day,
        preparation=tuple(preparation), spec=_spec(doc["spec"], "spec"),
        options=_options(doc["options"], "options"), result=_results(doc["results"]),
        result_current=_boolean(doc.get("results_current", True), "results_current"),
        notes=_text(doc["notes"], "notes", MAX_TEXT),
        created=_timestamp(doc["created"], "created"),
        modified=_timestamp(doc["modified"], "modified"),
        lagwise_version=_text(doc["lagwise_version"], "lagwise_version", 200),
    )
    return project, recovery_of


def _time(value: Any) -> tuple[TimeSettings, int | None]:
    doc = _object(value, "time", ("mode", "day", "prompt", "time", "max_gap_minutes",
                                  "days_independent", "prompts_per_day"))
    gap = doc["max_gap_minutes"]
    if gap is not None:
        gap = _number(gap, "time.max_gap_minutes")
        if not 0 < gap <= 1e8:
            raise _Invalid("time.max_gap_minutes", "should be more than 0 and at most 1e8 minutes")
    per_day = doc["prompts_per_day"]
    if per_day is not None:
        per_day = _integer(per_day, "time.prompts_per_day", 1, 10_000)
    settings = TimeSettings(
        mode=_choice(doc["mode"], "time.mode", TIME_MODES),  # type: ignore[arg-type]
        day=_text(doc["day"], "time.day", null=True),
        prompt=_text(doc["prompt"], "time.prompt", null=True),
        time=_text(doc["time"], "time.time", null=True),
        max_gap_minutes=gap,
        days_independent=_boolean(doc["days_independent"], "time.days_independent"),
    )
    return settings, per_day


def _data(value: Any, folder: Path) -> ProjectData:
    storage = _choice(_object(value, "data", ("storage",), optional=("file_name", "sha256",
                                                                     "table", "path"))["storage"],
                      "data.storage", ("embedded", "linked"))
    if storage == "embedded":
        doc = _object(value, "data", ("storage", "file_name", "sha256", "table"))
        digest = _sha(doc["sha256"], "data.sha256", null=True)
        table = _table(doc["table"], "data.table")
        return ProjectData(_text(doc["file_name"], "data.file_name"), digest, table)
    doc = _object(value, "data", ("storage", "file_name", "sha256", "path"))
    stored = _text(doc["path"], "data.path", MAX_TEXT)
    if not stored.strip() or "\x00" in stored:
        raise _Invalid("data.path", "is not a file path")
    link = Path(stored)
    if not link.is_absolute():
        link = folder.joinpath(*PurePosixPath(stored).parts)
    return ProjectData(_text(doc["file_name"], "data.file_name"),
                       _sha(doc["sha256"], "data.sha256"), None, Path(os.path.normpath(link)))


def _check_roles(table: pd.DataFrame, items: tuple[str, ...] | None, time: TimeSettings) -> None:
    columns = set(table.columns)
    roles = [("items", name) for name in items or ()] + [("time", c) for c in time.columns()]
    for where, name in roles:
        if name not in columns:
            raise _Invalid(where, f"names the column '{name}', which the embedded table lacks")


def _spec(value: Any, where: str) -> ModelSpec | None:
    """A specification as ModelSpec.to_json writes it (read without ModelSpec.validate, so an
    unfinished model can be saved and reopened; estimation validates it)."""
    if value is None:
        return None
    doc = _object(value, where, ("states",), optional=None)
    states = []
    for i, entry in enumerate(_list(doc["states"], f"{where}.states", MAX_STATES)):
        at = f"{where}.states[{i}]"
        entry = _object(entry, at, ("name", "items"), optional=None)
        items = tuple(_text(v, f"{at}.items[{j}]")
                      for j, v in enumerate(_list(entry["items"], f"{at}.items", MAX_ITEMS)))
        states.append(State(_text(entry["name"], f"{at}.name"), items,
                            _text(entry.get("marker"), f"{at}.marker", null=True)))
    k = len(states)
    lags = _integer(doc.get("lags", 1), f"{where}.lags", 0, 2)
    paths = doc.get("paths")
    if paths is not None:
        masks = _list(paths, f"{where}.paths", 2)
        if len(masks) != lags:
            raise _Invalid(f"{where}.paths", f"should hold {lags} path mask(s)")
        paths = tuple(_mask(m, f"{where}.paths[{l}]", k) for l, m in enumerate(masks))
    zeros = []
    pairs = _list(doc.get("partial_zeros", []), f"{where}.partial_zeros", MAX_LIST)
    for i, pair in enumerate(pairs):
        pair = _list(pair, f"{where}.partial_zeros[{i}]", 2)
        if len(pair) != 2:
            raise _Invalid(f"{where}.partial_zeros[{i}]", "should name two states")
        zeros.append(tuple(_text(v, f"{where}.partial_zeros[{i}]") for v in pair))
    reliability = _object(doc.get("reliability", {}), f"{where}.reliability", (), optional=None)
    return ModelSpec(
        states=tuple(states), lags=lags, paths=paths,
        identification=_choice(doc.get("identification", "marker"), f"{where}.identification",
                               IDENTIFICATIONS),  # type: ignore[arg-type]
        innovations=_choice(doc.get("innovations", "free"), f"{where}.innovations",
                            INNOVATION_FORMS),  # type: ignore[arg-type]
        partial_zeros=tuple(zeros),  # type: ignore[arg-type]
        reliability=tuple((name, _number(v, f"{where}.reliability.{name}"))
                          for name, v in reliability.items()),
        unique_autocorrelation=tuple(
            _text(v, f"{where}.unique_autocorrelation[{i}]") for i, v in
            enumerate(_list(doc.get("unique_autocorrelation", []),
                            f"{where}.unique_autocorrelation", MAX_ITEMS))),
    )


def _mask(value: Any, where: str, k: int) -> tuple[tuple[bool, ...], ...]:
    rows = _list(value, where, k)
    if len(rows) != k:
        raise _Invalid(where, f"should be {k} x {k} (one row per state)")
    out = []
    for i, row in enumerate(rows):
        row = _list(row, f"{where}[{i}]", k)
        if len(row) != k:
            raise _Invalid(f"{where}[{i}]", f"should hold {k} true/false values")
        out.append(tuple(_boolean(v, f"{where}[{i}]") for v in row))
    return tuple(out)


def _options(value: Any, where: str) -> FitOptions:
    doc = _object(value, where, ("estimator", "missing"), optional=None)
    _choice(doc["estimator"], f"{where}.estimator", ESTIMATORS)
    _choice(doc["missing"], f"{where}.missing", MISSING)
    if doc.get("depth") is not None:
        _integer(doc["depth"], f"{where}.depth", 0, 50)
    if "max_iter" in doc:
        _integer(doc["max_iter"], f"{where}.max_iter", 1, 10_000_000)
    return _engine(FitOptions.from_json, doc, where)


def _results(value: Any) -> FitResult | None:
    """The last results, as FitResult.to_json writes them (shapes checked before rebuilding)."""
    if value is None:
        return None
    where = "results"
    doc = _object(value, where, ("spec", "options", "estimator", "converged", "n_windows",
                                 "n_occasions", "spectral_radius", "parameters", "fit",
                                 "matrices"), optional=None)
    spec = _spec(doc["spec"], f"{where}.spec")
    if spec is None:
        raise _Invalid(f"{where}.spec", "should be an object, not null")
    _options(doc["options"], f"{where}.options")
    p, k = len(spec.items), spec.k
    _text(doc["estimator"], f"{where}.estimator")
    _boolean(doc["converged"], f"{where}.converged")
    for key in ("n_windows", "n_occasions"):
        _integer(doc[key], f"{where}.{key}", 0)
    for key in ("iterations",):
        if key in doc:
            _integer(doc[key], f"{where}.{key}", 0)
    for key in ("spectral_radius", "seconds"):
        if key in doc:
            _number(doc[key], f"{where}.{key}")
    if "message" in doc:
        _text(doc["message"], f"{where}.message", MAX_TEXT)
    for key in ("flags", "cautions"):
        for i, v in enumerate(_list(doc.get(key, []), f"{where}.{key}", MAX_LIST)):
            _text(v, f"{where}.{key}[{i}]", MAX_TEXT)
    if "extras" in doc:
        _object(doc["extras"], f"{where}.extras", (), optional=None)
    for i, entry in enumerate(_list(doc["parameters"], f"{where}.parameters", MAX_LIST)):
        at = f"{where}.parameters[{i}]"
        entry = _object(entry, at, ("kind", "from", "to", "estimate", "se", "standardized",
                                    "free"), optional=None)
        for key in ("kind", "from", "to"):
            _text(entry[key], f"{at}.{key}")
        _number(entry["estimate"], f"{at}.estimate")
        _number(entry["se"], f"{at}.se", null=True)
        _number(entry["standardized"], f"{at}.standardized", null=True)
        _boolean(entry["free"], f"{at}.free")
        if "lag" in entry:
            _integer(entry["lag"], f"{at}.lag", 0, 2)
    _fit_indices(doc["fit"], f"{where}.fit")
    m = _object(doc["matrices"], f"{where}.matrices",
                ("loadings", "intercepts", "unique", "lagged", "innovation", "latent_cov",
                 "r_squared"), optional=None)
    _matrix(m["loadings"], f"{where}.matrices.loadings", (p, k))
    for key in ("intercepts", "unique", "r_squared"):
        _matrix(m[key], f"{where}.matrices.{key}", (p,))
    for key in ("innovation", "latent_cov"):
        _matrix(m[key], f"{where}.matrices.{key}", (k, k))
    for l, b in enumerate(_list(m["lagged"], f"{where}.matrices.lagged", 2)):
        _matrix(b, f"{where}.matrices.lagged[{l}]", (k, k))
    return _engine(FitResult.from_json, doc, where)


def _fit_indices(value: Any, where: str) -> None:
    doc = _object(value, where, ("chi2", "df", "p", "rmsea", "cfi", "tli", "srmr", "loglik",
                                 "aic", "bic", "n_free", "n_obs"), optional=None)
    for key in ("chi2", "p", "rmsea", "cfi", "tli", "srmr", "rmsea_pclose"):
        if key in doc:
            _number(doc[key], f"{where}.{key}", null=True)
    for key in ("loglik", "aic", "bic"):
        _number(doc[key], f"{where}.{key}")
    for key in ("df", "n_free", "n_obs"):
        _integer(doc[key], f"{where}.{key}")
    if doc.get("rmsea_ci") is not None:
        _matrix(doc["rmsea_ci"], f"{where}.rmsea_ci", (2,))
    if "exact" in doc:
        _boolean(doc["exact"], f"{where}.exact")


def _matrix(value: Any, where: str, shape: tuple[int, ...]) -> None:
    """A nested list of numbers (null for not available) of the given shape."""
    if len(shape) == 1:
        cells = _list(value, where, MAX_LIST)
        if len(cells) != shape[0]:
            raise _Invalid(where, f"should hold {shape[0]} numbers")
        for i, v in enumerate(cells):
            _number(v, f"{where}[{i}]", null=True)
        return
    rows = _list(value, where, MAX_LIST)
    if len(rows) != shape[0]:
        raise _Invalid(where, f"should have {shape[0]} rows")
    for i, row in enumerate(rows):
        _matrix(row, f"{where}[{i}]", shape[1:])


def _engine(reader: Callable[[dict], Any], doc: dict, where: str) -> Any:
    """Call an engine's from_json on a checked document; its complaints become _Invalid."""
    try:
        return reader(doc)
    except (LagwiseError, ValueError, TypeError, KeyError, IndexError, AttributeError,
            OverflowError) as error:
        raise _Invalid(where, f"cannot be read ({error})") from None


# ---------------------------------------------------------------------------- primitives

def _kind(value: Any) -> str:
    if value is None:
        return "null"
    if isinstance(value, bool):
        return "true/false"
    if isinstance(value, (int, float)):
        return "a number"
    if isinstance(value, str):
        return "text"
    if isinstance(value, list):
        return "a list"
    if isinstance(value, dict):
        return "an object"
    return type(value).__name__


def _object(value: Any, where: str, required: Iterable[str],
            optional: Iterable[str] | None = ()) -> dict:
    """A JSON object with the `required` keys; with `optional` not None, no other keys."""
    if not isinstance(value, dict):
        raise _Invalid(where, f"should be an object, not {_kind(value)}")
    required = tuple(required)
    missing = [key for key in required if key not in value]
    if missing:
        raise _Invalid(where, f"lacks the field '{missing[0]}'")
    if optional is not None:
        known = set(required) | set(optional)
        unknown = [key for key in value if key not in known]
        if unknown:
            raise _Invalid(where, f"has an unknown field '{unknown[0][:60]}'")
    return value


def _list(value: Any, where: str, limit: int) -> list:
    if not isinstance(value, list):
        raise _Invalid(where, f"should be a list, not {_kind(value)}")
    if len(value) > limit:
        raise _Invalid(where, f"holds {len(value)} entries; at most {limit} are allowed")
    return value


def _text(value: Any, where: str, limit: int = MAX_NAME, null: bool = False) -> Any:
    if value is None and null:
        return None
    if not isinstance(value, str):
        raise _Invalid(where, f"should be text, not {_kind(value)}")
    if len(value) > limit:
        raise _Invalid(where, f"is longer than {limit} characters")
    return value


def _integer(value: Any, where: str, low: int = -MAX_INTEGER, high: int = MAX_INTEGER) -> int:
    if not isinstance(value, int) or isinstance(value, bool):
        raise _Invalid(where, f"should be a whole number, not {_kind(value)}")
    if not low <= value <= high:
        raise _Invalid(where, f"should lie between {low} and {high}, not {value}")
    return value


def _number(value: Any, where: str, null: bool = False) -> Any:
    if value is None and null:
        return None
    if not isinstance(value, (int, float)) or isinstance(value, bool):
        raise _Invalid(where, f"should be a number, not {_kind(value)}")
    if not np.isfinite(float(value)):
        raise _Invalid(where, "should be a finite number")
    return float(value)


def _boolean(value: Any, where: str) -> bool:
    if not isinstance(value, bool):
        raise _Invalid(where, f"should be true or false, not {_kind(value)}")
    return value


def _choice(value: Any, where: str, choices: Iterable[str]) -> str:
    choices = tuple(choices)
    if not isinstance(value, str) or value not in choices:
        shown = repr(value[:40]) if isinstance(value, str) else _kind(value)
        raise _Invalid(where, f"should be one of {', '.join(choices)}, not {shown}")
    return value


def _code(value: Any, where: str) -> str | float:
    if isinstance(value, str):
        return _text(value, where)
    return _number(value, where)


def _sha(value: Any, where: str, null: bool = False) -> str | None:
    if value is None and null:
        return None
    text = _text(value, where)
    if len(text) != 64 or any(c not in "0123456789abcdef" for c in text):
        raise _Invalid(where, "should be a SHA-256 digest (64 lower-case hex digits)")
    return text


def _timestamp(value: Any, where: str) -> str:
    text = _text(value, where, 100)
    try:
        moment = datetime.fromisoformat(text.replace("Z", "+00:00"))
    except ValueError:
        raise _Invalid(where, f"should be an ISO 8601 time, not {text[:40]!r}") from None
    if moment.tzinfo is None:
        raise _Invalid(where, "should be an ISO 8601 time with its UTC offset")
    return text


# ============================================================================ recovery files

@dataclass(frozen=True, eq=False)
class Recovery:
    """An autosaved copy found after a crash.

    path: the recovery file; recovery_of: the project file it belongs to (None: untitled);
    project: its content, with `file` set to `recovery_of`; modified: when it was written.
    """

    path: Path
    recovery_of: Path | None
    project: Project

    @property
    def modified(self) -> str:
        return self.project.modified


def recovery_dir(base: str | Path | None = None) -> Path:
    """Where autosaves go: `base`, else $LAGWISE_DATA_DIR/recovery, else the user data folder
    (Windows: %LOCALAPPDATA%/Lagwise, macOS: ~/Library/Application Support/Lagwise, other:
    $XDG_DATA_HOME/lagwise or ~/.local/share/lagwise) + /recovery."""
    if base is not None:
        return Path(base)
    override = os.environ.get("LAGWISE_DATA_DIR")
    if override:
        return Path(override) / "recovery"
    home = Path.home()
    if sys.platform.startswith("win"):
        root = Path(os.environ.get("LOCALAPPDATA") or home / "AppData" / "Local") / "Lagwise"
    elif sys.platform == "darwin":
        root = home / "Library" / "Application Support" / "Lagwise"
    else:
        root = Path(os.environ.get("XDG_DATA_HOME") or home / ".local" / "share") / "lagwise"
    return root / "recovery"


def recovery_path(project_file: str | Path | None, base: str | Path | None = None) -> Path:
    """The autosave file of a project: named after the project and a hash of its absolute path;
    an untitled project's autosave is named after this process."""
    folder = recovery_dir(base)
    if project_file is None:
        return folder / f"untitled-{os.getpid()}{SUFFIX}"
    absolute = Path(project_file).absolute()
    tag = hashlib.sha256(str(absolute).encode("utf-8")).hexdigest()[:12]
    return folder / f"{absolute.stem}-{tag}{SUFFIX}"


def write_recovery(project: Project, base: str | Path | None = None) -> Path:
    """Autosave `project` (atomically) to its recovery file; returns that file's path.

    The recovery file belongs to `project.file` (None: an untitled project).
    """
    target = recovery_path(project.file, base)
    try:
        target.parent.mkdir(parents=True, exist_ok=True)
    except OSError as error:
        raise ProjectError(f"{target.parent}: cannot create the folder for autosaves "
                           f"({_reason(error)})") from error
    _save(project, target, recovery_of=project.file)
    return target


def find_recovery(project_file: str | Path | None, base: str | Path | None = None
                  ) -> Recovery | None:
    """The readable autosave of `project_file` (None: of this process's untitled project)."""
    path = recovery_path(project_file, base)
    return _recovery(path) if path.is_file() else None


def find_recoveries(base: str | Path | None = None) -> list[Recovery]:
    """Every readable autosave in the recovery folder, newest first (offer them at start-up).

    Unreadable files are left alone and not listed.
    """
    folder = recovery_dir(base)
    if not folder.is_dir():
        return []
    found = [_recovery(path) for path in sorted(folder.glob(f"*{SUFFIX}"))]
    return sorted((r for r in found if r is not None), key=lambda r: r.modified, reverse=True)


def discard_recovery(path: str | Path) -> None:
    """Delete a recovery file (after a save, a restore, or when the user declines it)."""
    try:
        Path(path).unlink(missing_ok=True)
    except OSError as error:
        raise ProjectError(f"{path}: cannot delete the autosave ({_reason(error)})") from error


def _recovery(path: Path) -> Recovery | None:
    try:
        project, recovery_of = _open(path)
    except ProjectError:
        return None
    return Recovery(path=path, recovery_of=recovery_of, project=replace(project, file=recovery_of))


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


def _label(project: Project) -> str:
    return str(project.file) if project.file is not None else "the project"


def _reason(error: OSError) -> str:
    return error.strerror or str(error) or type(error).__name__
