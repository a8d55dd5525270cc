"""Saving a project: the document written as JSON, checked, then replaced atomically.

`save_project` sets the times and the Lagwise version, builds the JSON document (the
specification, settings and results through their own `to_json`, the table through
models.project.table), checks it with exactly the rules `open_project` applies, and only
then writes it with models.atomic.write_atomic. A failed save raises one ProjectError line and
leaves an existing file byte-identical. `write_project` is the same save for autosaves
(models.project.recovery), which add the `recovery_of` field.
"""

from __future__ import annotations

import json
import os
import secrets
from dataclasses import replace
from pathlib import Path
from typing import Any

from lagwise.models.atomic import failure_reason, write_atomic
from lagwise.models.errors import ProjectError
from lagwise.models.project.document import (
    FORMAT, FORMAT_VERSION, Project, ProjectData, lagwise_version, utc_now,
)
from lagwise.models.project.reader import project_from_bytes
from lagwise.models.project.table import table_to_json
from lagwise.models.scales import scales_to_json
from lagwise.models.study import StudyChoice


def save_project(project: Project, path: str | Path) -> Project:
    """Write `project` to `path` atomically; returns it with the new times and file.

    The document is checked with the same rules `open_project` applies before anything is
    written; any failure raises ProjectError and leaves an existing file byte-identical.
    """
    target = Path(path).absolute()
    return write_project(project, target, recovery_of=None)


def write_project(project: Project, target: Path, recovery_of: Path | None) -> Project:
    """`save_project` to the absolute path `target`; an autosave names in `recovery_of` the
    project file it belongs to (None: an untitled project or not an autosave)."""
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
        project_from_bytes(data, target.parent, "check")
    except ProjectError as error:
        problem = str(error).removeprefix("check: ")
        raise ProjectError(f"{target}: the project cannot be saved: it would not reopen "
                           f"({problem}); nothing was written") from None
    if target.is_dir():
        raise ProjectError(f"{target}: is a folder; choose a file name for the project")
    try:
        write_atomic(target, data)
    except OSError as error:
        kept = "the previous file is unchanged" if target.exists() else "nothing was written"
        raise ProjectError(f"{target}: could not save the project ({failure_reason(error)}); "
                           f"{kept}") from error
    return saved


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
        "time": {**project.time.to_json(), "prompts_per_day": project.prompts_per_day},
        "missing_codes": list(project.missing_codes),
        **({"scales": scales_to_json(dict(project.scales))} if project.scales else {}),
        "preparation": list(project.preparation),
        "spec": None if project.spec is None else project.spec.to_json(),
        "options": project.options.to_json(),
        "runs": [run.to_json() for run in project.runs],
        "current_run": project.current_run,
        "results_current": project.result_current,
        **({} if project.responses is None else {"responses": project.responses.to_json()}),
        "notes": project.notes,
        **({} if project.study is None else {"study": _study_document(project.study, folder)}),
    }


def _study_document(study: StudyChoice, folder: Path) -> dict:
    """The study, its batch folder relative to the project's folder (as linked data), so
    that a project moved together with its batch results still finds them."""
    doc = study.to_json()
    if study.batch_folder and Path(study.batch_folder).is_absolute():
        doc["batch_folder"] = _relative(Path(study.batch_folder), folder)
    return doc


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
