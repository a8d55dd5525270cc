"""Named runs: every estimate a project keeps, and the pure functions that edit the list.

A `Run` is one estimate with its name ("Run 1", "Run 2", ... unless renamed; unique in its
project), when it was made (UTC), the fingerprint of the data it used (SHA-256 over the
stored table, the recipe and the preparation steps: models.project.estimates), the
preparation steps, the result (which holds the specification and estimator settings it was
estimated with), the lag-2 check and the bootstrap of that result when they were run, and a
free-text note. Lists of runs are tuples; every function returns a new tuple and refuses a
bad name or an unknown run with one ProjectError line.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from typing import Any

from lagwise.models import jsonread as jr
from lagwise.models import names
from lagwise.models.bootstrap import Bootstrap
from lagwise.models.errors import FieldError, ProjectError
from lagwise.models.estimators import FitOptions
from lagwise.models.lag2check import Lag2Check, lag1_version
from lagwise.models.results import FitResult
from lagwise.models.spec import ModelSpec

MAX_RUN_NAME = 200     # characters of a run's name


@dataclass(frozen=True, eq=False)
class Run:
    """One estimate kept in a project (see the module docstring).

    time: UTC ISO 8601 to the second; fingerprint: 64 hex digits; preparation: the steps as
    plain JSON values (models.preparation), in order.
    """

    name: str
    time: str
    fingerprint: str
    preparation: tuple[Any, ...]
    result: FitResult
    lag2: Lag2Check | None = None
    bootstrap: Bootstrap | None = None
    note: str = ""

    @property
    def spec(self) -> ModelSpec:
        return self.result.spec

    @property
    def options(self) -> FitOptions:
        return self.result.options

    def to_json(self) -> dict:
        return {"name": self.name, "time": self.time, "fingerprint": self.fingerprint,
                "preparation": list(self.preparation), "results": self.result.to_json(),
                **({} if self.lag2 is None else {"lag2_check": self.lag2.to_stored_json()}),
                **({} if self.bootstrap is None else {"bootstrap": self.bootstrap.to_json()}),
                "note": self.note}

    @classmethod
    def from_json(cls, doc: object, where: str = "") -> "Run":
        """A run written by `to_json`; FieldError names a malformed field. The bootstrap's
        parameters must be the result's free parameters, and the lag-2 check must test the
        result's lag-1 model."""
        fields = jr.read_fields(doc, where, (
            jr.field("name", _name),
            jr.field("time", jr.timestamp),
            jr.field("fingerprint", jr.sha256),
            jr.field("preparation", jr.array),
            jr.field("results", FitResult.from_json, name="result"),
            jr.field("lag2_check", _optional(Lag2Check.from_json), None, name="lag2"),
            jr.field("bootstrap", _optional(Bootstrap.from_json), None),
            jr.field("note", jr.text, "", limit=jr.MAX_TEXT),
        ), closed=True)
        fields["preparation"] = tuple(fields["preparation"])
        run = cls(**fields)
        boot = run.bootstrap
        if boot is not None and [(p.kind, p.from_, p.to) for p in boot.parameters] != [
                (p.kind, p.from_, p.to) for p in run.result.free_parameters]:
            raise FieldError(jr.at(where, "bootstrap.parameters"),
                             "should be the free parameters of the run's results")
        if run.lag2 is not None and not tests_result(run.lag2, run.result):
            raise FieldError(jr.at(where, "lag2_check"),
                             "should test the lag-1 model of the run's results")
        return run


def tests_result(check: Lag2Check, result: FitResult) -> bool:
    """True when the lag-2 check tested the lag-1 model of `result` (as models.advice asks)."""
    return result.spec.lags > 0 and check.restricted.spec == lag1_version(result.spec)


# ============================================================================ editing

def next_name(runs: tuple[Run, ...], first: int = 0) -> str:
    """The first free default name "Run N", N counting up from one more than the number of
    runs (or from `first`, when higher: a session never gives a deleted run's name again)."""
    taken = {run.name for run in runs}
    number = max(len(runs) + 1, first)
    while f"Run {number}" in taken:
        number += 1
    return f"Run {number}"


def free_name(runs: tuple[Run, ...], wanted: str) -> str:
    """`wanted`, or when another run has it, "wanted (2)", "wanted (3)", ..."""
    taken = {run.name for run in runs}
    name, number = wanted, 1
    while name in taken:
        number += 1
        name = f"{wanted} ({number})"
    return name


def checked_name(name: str, runs: tuple[Run, ...], renaming: str | None = None) -> str:
    """`name` without surrounding spaces; ProjectError when it is empty, too long, holds a
    control character (models.names) or is already another run's name."""
    name = name.strip()
    if not name:
        raise ProjectError("A run needs a name; the name is empty.")
    if len(name) > MAX_RUN_NAME:
        raise ProjectError(f"A run's name may have at most {MAX_RUN_NAME} characters.")
    refused = names.problem(name)
    if refused:
        raise ProjectError(f"The run's name {refused}.")
    if name != renaming and any(run.name == name for run in runs):
        raise ProjectError(f"There is already a run named '{name}'; choose another name.")
    return name


def new_run(runs: tuple[Run, ...], result: FitResult, fingerprint: str, time: str,
            preparation: tuple[Any, ...] = (), name: str | None = None) -> Run:
    """A run of `result` made at `time` (UTC ISO 8601; default name: `next_name`)."""
    return Run(name=checked_name(next_name(runs) if name is None else name, runs),
               time=jr.timestamp(time, "time"),
               fingerprint=jr.sha256(fingerprint, "fingerprint"),
               preparation=tuple(preparation), result=result)


def add_run(runs: tuple[Run, ...], run: Run) -> tuple[Run, ...]:
    """`runs` with `run` at the end; its name must be new."""
    checked_name(run.name, runs)
    return runs + (run,)


def find_run(runs: tuple[Run, ...], name: str) -> Run:
    for run in runs:
        if run.name == name:
            return run
    raise ProjectError(f"There is no run named '{names.shown(name)}'.")


def update_run(runs: tuple[Run, ...], name: str, /, **changes: Any) -> tuple[Run, ...]:
    """`runs` with the run `name` changed (e.g. `bootstrap=`, `lag2=`); names are checked."""
    old = find_run(runs, name)
    if "name" in changes:
        changes["name"] = checked_name(changes["name"], runs, renaming=name)
    return tuple(replace(run, **changes) if run is old else run for run in runs)


def rename_run(runs: tuple[Run, ...], name: str, new_name: str) -> tuple[Run, ...]:
    return update_run(runs, name, name=new_name)


def annotate_run(runs: tuple[Run, ...], name: str, note: str) -> tuple[Run, ...]:
    """The run's note replaced; characters a stored text may not hold are left out."""
    return update_run(runs, name, note=names.without_unsafe(note))


def delete_run(runs: tuple[Run, ...], name: str) -> tuple[Run, ...]:
    old = find_run(runs, name)
    return tuple(run for run in runs if run is not old)


# ============================================================================ field readers

def _name(value: object, where: str) -> str:
    text = jr.name(value, where)
    if not text.strip() or text != text.strip() or len(text) > MAX_RUN_NAME:
        raise FieldError(where, f"should be a run's name (1 to {MAX_RUN_NAME} characters, "
                                "no spaces around it)")
    return text


def _optional(reader):
    def read(value: object, where: str):
        return None if value is None else reader(value, where)
    return read
