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


def upgrade_1_to_2(doc: dict) -> dict:
    """Format version 1 -> 2.

    Version 1 kept one estimate, "results" (with its "bootstrap"); version 2 keeps every
    estimate as a named run in "runs" and names the current one in "current_run". Stored
    results become the run "Run 1", made when the file was last saved, with the project's
    preparation steps and an empty note; its data fingerprint is left out here and filled
    in on opening from the project's own data, recipe and steps (models.project.estimates).
    Version 2 may also hold a "study" (the person column of a table of many people, the
    person shown, the batch folder; models.study); a version-1 file is one person's table
    and gets none.
    """
    new = dict(doc)
    new["format_version"] = 2
    results = new.pop("results", None)
    boot = new.pop("bootstrap", None)
    new["runs"], new["current_run"] = [], None
    if results is not None:
        run = {"name": "Run 1", "time": new.get("modified"),
               "preparation": new.get("preparation", []), "results": results, "note": ""}
        if boot is not None:
            run["bootstrap"] = boot
        new["runs"], new["current_run"] = [run], "Run 1"
    return new


UPGRADES: dict[int, Callable[[dict], dict]] = {0: upgrade_0_to_1, 1: upgrade_1_to_2}

# Before estimators checked their settings, version-1 files could keep a setting the chosen
# estimator ignored (a window depth or listwise handling with the exact estimator, a night
# gap with a lag-window estimator); opening drops it, as the estimator did.
IGNORED_SETTINGS = {"exact": {"depth": None, "missing": "fiml"},
                    "stationary": {"night_gap": None}, "first-copy-free": {"night_gap": None}}


def drop_ignored_settings(doc: dict) -> dict:
    """The document with IGNORED_SETTINGS reset in its estimator settings and its runs'
    results'."""
    def clean(options: object) -> object:
        if not isinstance(options, dict):
            return options
        name = options.get("estimator")
        reset = IGNORED_SETTINGS.get(name, {}) if isinstance(name, str) else {}
        return {**options, **{key: value for key, value in reset.items() if key in options}}

    def clean_results(results: object) -> object:
        if isinstance(results, dict) and "options" in results:
            return {**results, "options": clean(results["options"])}
        return results

    new = dict(doc)
    if "options" in new:
        new["options"] = clean(new["options"])
    if isinstance(new.get("runs"), list):
        new["runs"] = [{**run, "results": clean_results(run["results"])}
                       if isinstance(run, dict) and "results" in run else run
                       for run in new["runs"]]
    return new


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
    return drop_ignored_settings(doc)
