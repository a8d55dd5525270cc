"""The report of a study: one model per person (a `lagwise batch` folder), as one HTML page.

What the people have in common is described, not pooled: the share of people whose interval of
each lagged path lies above or below 0, the spread of each inertia, every person's estimates
with their intervals (a strip plot per path and a table), who was not fitted and why, whose
fit has warnings, and the cautions. The page holds no script and loads nothing.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from datetime import datetime, timezone
from html import escape
from pathlib import Path

from lagwise.models.across import LAGGED, NOT_MULTILEVEL, STUDY_CAUTIONS, Across, across_people
from lagwise.models.batchfiles import read_batch
from lagwise.models.estimators import ESTIMATORS
from lagwise.models.kinds import parameter_words
from lagwise.models.numbers import fmt
from lagwise.models.personfit import PersonOutcome
from lagwise.models.reporting.html import POLICY, STYLE, Figure
from lagwise.models.reporting.journal import Table, interval, table_html
from lagwise.models.reporting.strips import strip_svg

@dataclass(frozen=True, eq=False)
class StudyInput:
    """Everything a study report shows: the summaries across people and every outcome."""

    name: str
    across: Across
    outcomes: tuple[PersonOutcome, ...]
    version: str

    @property
    def title(self) -> str:
        return f"Lagwise study report: {self.name}"


def study_input(folder: str | Path, version: str) -> StudyInput:
    """The study report's input from a finished batch folder (DataError when it is not one)."""
    outcomes = read_batch(folder)
    return StudyInput(Path(folder).name, across_people(outcomes), outcomes, version)


def path_estimates(across: Across) -> list[tuple[str, list[tuple[float, float | None,
                                                                  float | None]]]]:
    """(path label, [(estimate, lower, upper) per fitted person]) for every lagged path, in
    the order of `across.paths` (the strip plot's rows)."""
    out = []
    for share in across.paths:
        people = []
        for row in across.rows:
            p = row.parameter
            if (p.kind, p.from_, p.to) == (share.kind, share.from_, share.to):
                low, high = row.interval or (None, None)
                people.append((p.estimate, low, high))
        out.append((parameter_words(share.kind, share.from_, share.to), people))
    return out


def strip_figure(across: Across) -> Figure | None:
    """The strip plot of every lagged path over people (None when no one was fitted)."""
    rows = path_estimates(across)
    if not rows:
        return None
    return Figure("Each dot is one person's estimate with its 95% interval: teal, the interval "
                  "lies above 0; orange (dashed), below 0; grey, it includes 0.",
                  strip_svg(rows, "Lagged paths over people"))


def study_html(inp: StudyInput, figures: Sequence[Figure] | None = None,
               when: str | None = None) -> str:
    """The study report as HTML text; `figures` default to the strip plot (inline SVG)."""
    when = when or datetime.now(timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    across, outcomes, title = inp.across, inp.outcomes, inp.title
    if figures is None:
        figure = strip_figure(across)
        figures = [] if figure is None else [figure]
    first = next((o.document for o in outcomes if o.fitted and o.document), None)
    body = [f"<h1>{escape(title)}</h1>",
            f'<p class="small">Made {escape(when)} by Lagwise {escape(inp.version)}.</p>',
            "<h2>Question</h2>", f"<p>{escape(question(across, first))}</p>",
            f"<p>{escape(NOT_MULTILEVEL)}</p>",
            "<h2>Methods</h2>", f"<p>{escape(methods(across, first))}</p>",
            "<h2>People</h2>", table_html(people_table(outcomes))]
    if across.paths:
        body += ["<h2>Lagged paths across people</h2>", table_html(shares_table(across))]
        body += [f'<figure><div class="picture">{f.markup}</div>'
                 f'<p class="note">{escape(f.caption)}</p></figure>' for f in figures]
        body.append(table_html(person_path_table(across)))
    if across.inertias:
        body += ["<h2>Inertia across people</h2>", table_html(inertia_table(across))]
    body += ["<h2>Cautions</h2>", *(f"<p>{escape(c)}</p>" for c in STUDY_CAUTIONS)]
    if first is not None:
        body += [f"<p>{escape(c)}</p>" for c in first.get("cautions", ())]
    return "\n".join([
        "<!DOCTYPE html>", '<html lang="en">', "<head>", '<meta charset="utf-8">',
        f'<meta http-equiv="Content-Security-Policy" content="{POLICY}">',
        f"<title>{escape(title)}</title>", f"<style>{STYLE}</style>", "</head>", "<body>",
        *body, "</body>", "</html>", ""])


def question(across: Across, document: dict | None) -> str:
    states = [s["name"] for s in document["spec"]["states"]] if document else []
    named = ", ".join(states[:-1]) + " and " + states[-1] if len(states) > 1 else \
        (states[0] if states else "the states")
    return (f"For each of the {len(across.people)} people of this study separately: how "
            f"strongly does each of {named} carry over from one prompt to the next (inertia), "
            f"and which of them predict the others at the next prompt (cross-lagged effects)?")


def methods(across: Across, document: dict | None) -> str:
    if document is None:
        return "No person could be fitted, so no model is described."
    entry = ESTIMATORS.get(document.get("estimator", ""))
    label = entry.label if entry is not None else str(document.get("estimator", ""))
    spec = document["spec"]
    others = "" if len(across.fitted) == len(across.people) else \
        "; the others are listed with the reason"
    items = sum(len(s["items"]) for s in spec["states"])
    return (f"The same dynamic factor model ({len(spec['states'])} states measured by {items} "
            f"items, lag order {spec.get('lags', 1)}) was estimated separately for each person "
            f"from that person's diary alone, with the estimator '{label}'. "
            f"{len(across.fitted)} of {len(across.people)} people were fitted"
            f"{others}. 95% intervals are estimate ± 1.96 standard errors "
            "(common practice). The summaries count and describe the separate estimates; "
            "nothing is pooled across people.")


def people_table(outcomes: Sequence[PersonOutcome]) -> Table:
    rows = []
    for o in outcomes:
        answered = "—" if o.compliance is None else f"{100 * o.compliance:.1f}%"
        said = ("; ".join(dict.fromkeys(t for _c, t in o.warnings)) if o.fitted
                else (o.reason or "").strip())
        rows.append((o.person, o.status, answered, said or "none"))
    return Table("Every person", ("Person", "Status", "Prompts answered",
                                  "Warnings, or why not fitted"), tuple(rows), "llrl")


def shares_table(across: Across) -> Table:
    def share(part: int, whole: int) -> str:
        return f"{part} of {whole} ({100 * part / whole:.0f}%)" if whole else "—"

    rows = tuple((parameter_words(p.kind, p.from_, p.to), fmt(p.people, "int"),
                  share(p.positive, p.people), share(p.negative, p.people))
                 for p in across.paths)
    return Table("People whose 95% interval lies above or below 0",
                 ("Path", "People", "Above 0", "Below 0"), rows, "lrrr")


def inertia_table(across: Across) -> Table:
    rows = tuple((s.state, fmt(s.people, "int"), fmt(s.median), fmt(s.q1), fmt(s.q3),
                  fmt(s.q3 - s.q1)) for s in across.inertias)
    return Table("Inertia over people", ("State", "People", "Median", "25th percentile",
                                         "75th percentile", "Interquartile range"), rows,
                 "lrrrrr")


def person_path_table(across: Across) -> Table:
    """Every fitted person's estimate and 95% interval of every lagged path, person by person
    (the person named on their first row)."""
    order = {(p.kind, p.from_, p.to): n for n, p in enumerate(across.paths)}
    rows, last = [], None
    for row in sorted((r for r in across.rows if r.parameter.kind in LAGGED),
                      key=lambda r: (across.fitted.index(r.person), order[r.parameter.key])):
        p = row.parameter
        low, high = row.interval or (None, None)
        rows.append(("" if row.person == last else row.person,
                     parameter_words(p.kind, p.from_, p.to), fmt(p.estimate), interval(low, high)))
        last = row.person
    return Table("Lagged paths, person by person", ("Person", "Path", "Estimate", "95% CI"),
                 tuple(rows), "llrr")
