"""Older project format versions, brought up to the current one step by step.

`UPGRADES[v]` turns a version-v document into a version-(v+1) document (returning a new dict
and leaving its input as it was); `upgrade` checks the header and applies them in turn.
A document newer than FORMAT_VERSION raises ProjectVersionTooNew. To change the format: raise
FORMAT_VERSION, add `upgrade_N_to_N1` here and in UPGRADES, and describe both versions in
resources/project-format.md.
"""

from __future__ import annotations

from typing import Callable

from lagwise.models.errors import ProjectError
from lagwise.models.project.document import (
    FORMAT, FORMAT_VERSION, ProjectVersionTooNew, lagwise_version,
)


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
