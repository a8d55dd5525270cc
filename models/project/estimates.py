"""A project's estimates as runs: the data fingerprint, and a new estimate made a run.

The fingerprint tells runs on different data or preparation apart: SHA-256 over one compact,
key-sorted JSON text of the stored table's digest (embedded data: SHA-256 of the table as the
project stores it; linked data: the file's SHA-256, which is checked whenever the file is
read), the recipe (items, time settings, missing codes, prompts per day, stated scales), the
preparation steps and, for a table of many people, the person shown (models.study).
"""

from __future__ import annotations

import hashlib
import json
from dataclasses import replace
from typing import Any, Sequence

from lagwise.models.project.document import Project, ProjectData, utc_now
from lagwise.models.project.table import table_to_json
from lagwise.models.recipe import DiaryRecipe
from lagwise.models.results import FitResult
from lagwise.models.runs import add_run, new_run
from lagwise.models.scales import scales_to_json


def table_digest(data: ProjectData | None) -> str | None:
    """SHA-256 (hex) of the stored table as JSON (linked data: the file's SHA-256; None for
    no data). Computed once per table by a caller that keeps it."""
    if data is None:
        return None
    if data.link is not None or data.table is None:
        return data.sha256
    text = json.dumps(table_to_json(data.table), sort_keys=True, separators=(",", ":"),
                      ensure_ascii=False, default=str)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def data_fingerprint(table: str | None, recipe: DiaryRecipe, preparation: Sequence[Any],
                     person: str | None = None) -> str:
    """SHA-256 (hex) of the table's digest (`table_digest`), the recipe, the preparation
    steps (JSON values) and the person whose rows the diary holds (None: the whole table)."""
    doc = {"table": table,
           "recipe": {"items": None if recipe.items is None else list(recipe.items),
                      "time": recipe.time.to_json(),
                      "missing_codes": list(recipe.missing_codes),
                      "prompts_per_day": recipe.prompts_per_day,
                      "scales": scales_to_json(dict(recipe.scales))},
           "preparation": list(preparation),
           **({} if person is None else {"person": person})}
    text = json.dumps(doc, sort_keys=True, separators=(",", ":"), ensure_ascii=False,
                      default=str)
    return hashlib.sha256(text.encode("utf-8")).hexdigest()


def project_fingerprint(project: Project) -> str:
    """The fingerprint of the project's data, recipe, preparation steps and person shown as
    they are now."""
    return data_fingerprint(table_digest(project.data), project.recipe, project.preparation,
                            None if project.study is None else project.study.person)


def with_estimate(project: Project, result: FitResult, name: str | None = None) -> Project:
    """The project with `result` kept as a new run (default name "Run N") made current."""
    run = new_run(project.runs, result, project_fingerprint(project), utc_now(),
                  project.preparation, name=name)
    return replace(project, runs=add_run(project.runs, run), current_run=run.name,
                   result_current=True)
