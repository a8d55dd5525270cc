"""Across the people of a batch: what their person-specific models have in common.

Every person has a model of their own, estimated from their diary alone. These summaries
count and describe those separate models; they are not a multilevel model (nothing is pooled
or shrunk toward the group, and no population effect is estimated). Only people whose fit
converged enter them.

- the person x parameter table: estimate, standard error, 95% interval (estimate +- 1.96 se,
  common practice) and the fit's warning codes;
- per lagged path, the share of people whose interval lies wholly above 0 and wholly below 0;
- per inertia, the median and the interquartile range (25th to 75th percentile, numpy's
  linear interpolation) over people;
- the people whose fit has warnings (models.advice).
"""

from __future__ import annotations

import csv
import io
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from lagwise.models.kinds import Kind
from lagwise.models.numbers import fmt
from lagwise.models.personfit import PersonOutcome
from lagwise.models.results import Parameter

NOT_MULTILEVEL = ("These are person-specific models, each estimated from one person's diary "
                  "alone; the summaries across people are counts and spreads of those "
                  "separate estimates, not a multilevel model.")
STUDY_CAUTIONS = (
    "Each person's model is estimated from one diary of a limited number of prompts: the "
    "estimates are uncertain, and an interval that includes 0 is not evidence of no effect.",
    "Counting people whose interval excludes 0 is a description of these separate models, not "
    "a test of an effect in a population.",
    "These results are not a diagnosis; interpret them with clinical judgement and local "
    "practice.",
)
CAUTION = " ".join((NOT_MULTILEVEL, *STUDY_CAUTIONS))   # every export across people repeats it
# the last line of the batch's CSV tables (pandas: read_csv(..., comment="#"))
CAUTION_LINE = "# " + CAUTION + "\n"
LAGGED = (Kind.INERTIA, Kind.CROSS_LAGGED, Kind.LAG2)


@dataclass(frozen=True)
class Row:
    """One person's estimate of one free parameter."""

    person: str
    parameter: Parameter
    flags: tuple[str, ...]

    @property
    def name(self) -> str:
        p = self.parameter
        return f"{p.kind} {p.from_}->{p.to}"

    @property
    def interval(self) -> tuple[float, float] | None:
        return self.parameter.ci


@dataclass(frozen=True)
class PathShare:
    """How many people's 95% interval of one lagged path lies above 0, below 0, of `people`."""

    kind: str
    from_: str
    to: str
    people: int
    positive: int
    negative: int

    def to_json(self) -> dict:
        n = self.people
        return {"kind": self.kind, "from": self.from_, "to": self.to, "people": n,
                "positive": self.positive, "negative": self.negative,
                "share_positive": self.positive / n if n else None,
                "share_negative": self.negative / n if n else None}


@dataclass(frozen=True)
class Spread:
    """Median and interquartile range of one state's inertia over people."""

    state: str
    people: int
    median: float
    q1: float
    q3: float

    def to_json(self) -> dict:
        return {"state": self.state, "people": self.people, "median": self.median,
                "q1": self.q1, "q3": self.q3, "iqr": self.q3 - self.q1}


@dataclass(frozen=True)
class Across:
    """The summaries across people of one batch (see the module docstring)."""

    people: tuple[str, ...]
    fitted: tuple[str, ...]
    rows: tuple[Row, ...]
    paths: tuple[PathShare, ...]
    inertias: tuple[Spread, ...]
    warned: tuple[tuple[str, tuple[str, ...]], ...]   # person, warning codes
    unfitted: tuple[tuple[str, str, str], ...]        # person, status, reason

    def to_json(self) -> dict:
        return {"format": "lagwise-batch-summary", "note": NOT_MULTILEVEL,
                "cautions": list(STUDY_CAUTIONS),
                "people": list(self.people), "fitted": list(self.fitted),
                "not_fitted": [{"person": p, "status": s, "reason": r}
                               for p, s, r in self.unfitted],
                "lagged_paths": [p.to_json() for p in self.paths],
                "inertia": [s.to_json() for s in self.inertias],
                "warnings": [{"person": p, "codes": list(c)} for p, c in self.warned]}


def across_people(outcomes: Sequence[PersonOutcome]) -> Across:
    """The summaries of `outcomes` (one per person, in study order)."""
    fitted = [o for o in outcomes if o.fitted]
    rows = tuple(Row(o.person, p, tuple(o.document.get("flag_codes", ())))
                 for o in fitted for p in _free_parameters(o.document))
    return Across(
        people=tuple(o.person for o in outcomes),
        fitted=tuple(o.person for o in fitted),
        rows=rows, paths=_path_shares(rows), inertias=_inertias(rows),
        warned=tuple((o.person, tuple(dict.fromkeys(c for c, _ in o.warnings)))
                     for o in fitted if o.warnings),
        unfitted=tuple((o.person, o.status, o.reason or "") for o in outcomes
                       if not o.fitted))


def estimates_csv(across: Across) -> str:
    """The long table: person, parameter, estimate, se, lower, upper (full precision); the
    last line is CAUTION_LINE."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(("person", "parameter", "estimate", "se", "lower", "upper"))
    for row in across.rows:
        lower, upper = row.interval or ("", "")
        se = "" if row.parameter.se is None else row.parameter.se
        writer.writerow((row.person, row.name, row.parameter.estimate, se, lower, upper))
    return out.getvalue() + CAUTION_LINE


def estimates_wide_csv(across: Across) -> str:
    """The wide table: one row per fitted person; for each free parameter (in the order the
    people's fits list them) its estimate, lower and upper 95% limit (full precision); the
    last line is CAUTION_LINE."""
    names = list(dict.fromkeys(row.name for row in across.rows))
    cells: dict[str, dict[str, Row]] = {}
    for row in across.rows:
        cells.setdefault(row.person, {})[row.name] = row
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(("person", *(f"{name} {part}" for name in names
                                 for part in ("estimate", "lower", "upper"))))
    for person in across.fitted:
        line = [person]
        for name in names:
            row = cells.get(person, {}).get(name)
            lower, upper = (row.interval or ("", "")) if row is not None else ("", "")
            line += ["" if row is None else row.parameter.estimate, lower, upper]
        writer.writerow(line)
    return out.getvalue() + CAUTION_LINE


def format_across(across: Across) -> str:
    """The summaries in words, for the command line."""
    n = len(across.fitted)
    lines = [f"{n} of {len(across.people)} people fitted.", NOT_MULTILEVEL]
    if across.paths:
        lines += ["", "Lagged paths: share of people whose 95% interval excludes 0"]
        for p in across.paths:
            lines.append(f"  {p.kind} {p.from_} -> {p.to}: above 0 {p.positive} of {p.people}, "
                         f"below 0 {p.negative} of {p.people}")
    if across.inertias:
        lines += ["", "Inertia over people: median (interquartile range)"]
        for s in across.inertias:
            lines.append(f"  {s.state}: {fmt(s.median)} ({fmt(s.q1)} to {fmt(s.q3)}), "
                         f"{s.people} people")
    if across.warned:
        lines += ["", "People whose fit has warnings:"]
        lines += [f"  {person}: {', '.join(codes)}" for person, codes in across.warned]
    return "\n".join(lines)


def _free_parameters(document: dict) -> list[Parameter]:
    return [p for p in (Parameter.from_json(d) for d in document["parameters"]) if p.free]


def _path_shares(rows: tuple[Row, ...]) -> tuple[PathShare, ...]:
    groups: dict[tuple[str, str, str], list[Row]] = {}
    for row in rows:
        if row.parameter.kind in LAGGED:
            groups.setdefault(row.parameter.key, []).append(row)
    out = []
    for (kind, from_, to), members in groups.items():
        intervals = [r.interval for r in members if r.interval is not None]
        out.append(PathShare(kind, from_, to, len(intervals),
                             sum(lo > 0 for lo, _ in intervals),
                             sum(hi < 0 for _, hi in intervals)))
    return tuple(out)


def _inertias(rows: tuple[Row, ...]) -> tuple[Spread, ...]:
    values: dict[str, list[float]] = {}
    for row in rows:
        if row.parameter.kind == Kind.INERTIA:
            values.setdefault(row.parameter.to, []).append(row.parameter.estimate)
    out = []
    for state, estimates in values.items():
        q1, median, q3 = np.percentile(estimates, [25, 50, 75])
        out.append(Spread(state, len(estimates), float(median), float(q1), float(q3)))
    return tuple(out)
