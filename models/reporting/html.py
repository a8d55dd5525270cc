"""The report as one self-contained HTML document.

Sections: the question, the data, the methods, the warnings, the tables of the estimate, the
diagrams, the lag-2 check, bootstrap and impulse responses when present, the cautions, the
notes and the references. Every text a user wrote (file, item, state and run names, notes)
is escaped; the page holds no script and loads nothing (a Content-Security-Policy forbids
both). Diagrams arrive as ready markup (`Figure`, drawn by desktop/report_output.py).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from datetime import datetime, timezone
from html import escape

from lagwise.models.advice import all_clear
from lagwise.models.numbers import fmt
from lagwise.models.reporting.journal import (
    Table, bootstrap_table, lag2_table, response_table, result_tables, table_html,
)
from lagwise.models.reporting.methods import REFERENCES, methods_paragraph
from lagwise.models.reporting.source import ReportInput

POLICY = "default-src 'none'; style-src 'unsafe-inline'; img-src data:"
STYLE = """
body { font-family: 'Helvetica Neue', Arial, sans-serif; font-size: 10pt; color: #1f2a2e;
       max-width: 60em; margin: 2em auto; line-height: 1.4; }
h1 { font-size: 16pt; margin-bottom: 0.2em; } h2 { font-size: 12.5pt; margin-top: 1.4em; }
table { border-collapse: collapse; margin: 0.6em 0; font-size: 9pt; }
th, td { padding: 2px 8px; }
thead th { border-top: 1.5px solid #1f2a2e; border-bottom: 1px solid #1f2a2e; text-align: left; }
caption { text-align: left; font-weight: bold; padding-bottom: 4px; }
p.note, p.small { font-size: 8.5pt; color: #4a5358; }
figure { margin: 1em 0; } div.picture { line-height: 100%; }
svg { max-width: 100%; height: auto; }
"""


@dataclass(frozen=True)
class Figure:
    """A diagram: its caption (plain text, escaped here) and its markup (SVG or an image
    element made by the program itself, inserted as it is)."""

    caption: str
    markup: str


def report_html(inp: ReportInput, figures: Sequence[Figure] = (), when: str | None = None) -> str:
    """The whole report of `inp` as HTML text; `when` is the time it was made (default now)."""
    result = inp.result
    when = when or datetime.now(timezone.utc).strftime("%Y-%m-%d %H:%M UTC")
    title = f"Lagwise report: {inp.title}" + (_run_words(inp.run) if inp.run else "")
    body = [f"<h1>{escape(title)}</h1>",
            f'<p class="small">Made {escape(when)} by Lagwise {escape(inp.version)}.</p>',
            "<h2>Question</h2>", f"<p>{escape(question(inp))}</p>",
            "<h2>Data</h2>", *data_section(inp),
            "<h2>Methods</h2>"]
    paragraph, cited = methods_paragraph(inp)
    body.append(f"<p>{escape(paragraph)}</p>")
    body += ["<h2>Warnings</h2>", *warnings_section(inp), "<h2>Results</h2>"]
    body += [table_html(t) for t in result_tables(result)]
    for figure in figures:
        body.append(f'<figure><div class="picture">{figure.markup}</div>'
                    f'<p class="note">{escape(figure.caption)}</p></figure>')
    if inp.check is not None:
        body += ["<h2>Lag-2 check</h2>", table_html(lag2_table(inp.check))]
    if inp.bootstrap is not None:
        body += ["<h2>Bootstrap</h2>", table_html(bootstrap_table(inp.bootstrap))]
    if inp.responses is not None:
        body += ["<h2>Impulse responses</h2>", table_html(response_table(inp.responses))]
        body += [f"<p>{escape(s)}</p>" for s in inp.responses.sentences()]
    body += ["<h2>Cautions</h2>", *(f"<p>{escape(c)}</p>" for c in result.cautions)]
    if inp.notes.strip():
        body += ["<h2>Notes</h2>", *(f"<p>{escape(line)}</p>"
                                     for line in inp.notes.splitlines() if line.strip())]
    body += ["<h2>References</h2>", "<ul>",
             *(f"<li>{escape(REFERENCES[k])}</li>" for k in sorted(cited)), "</ul>"]
    return "\n".join([
        "<!DOCTYPE html>", '<html lang="en">', "<head>", '<meta charset="utf-8">',
        f'<meta http-equiv="Content-Security-Policy" content="{POLICY}">',
        f"<title>{escape(title)}</title>", f"<style>{STYLE}</style>", "</head>", "<body>",
        *body, "</body>", "</html>", ""])


def question(inp: ReportInput) -> str:
    """The analysis's question in one sentence."""
    states = list(inp.result.states)
    named = states[0] if len(states) == 1 else ", ".join(states[:-1]) + " and " + states[-1]
    return (f"How strongly does each of the states {named} carry over from one prompt to the "
            f"next (inertia), and which of them predict the others at the next prompt "
            f"(cross-lagged effects), in this diary of {inp.diary.days} days?")


def data_section(inp: ReportInput) -> list[str]:
    facts = inp.diary
    compliance = facts.compliance
    rows = [("File", facts.file_name or "(a table without a file)"),
            ("Fingerprint (SHA-256)", facts.sha256 or "none (no file)"),
            ("Days", fmt(facts.days, "int")), ("Segments", fmt(facts.segments, "int")),
            ("Prompts scheduled", fmt(facts.prompts, "int")),
            ("Prompts answered", fmt(facts.answered, "int")),
            ("Compliance", "—" if compliance is None else f"{100 * compliance:.1f}%"),
            ("Complete lag-1 windows", fmt(facts.complete_windows, "int")),
            ("Preparation", facts.preparation)]
    out = [table_html(Table("The diary", ("", ""), tuple(rows), "ll"))]
    reading = dict(facts.verdicts)
    items = tuple((name, f"{100 * share:.1f}%", reading.get(name, ""))
                  for name, share in facts.missing)
    out.append(table_html(Table("Items: missed answers and screening", ("Item", "Missing",
               "Stationarity (ADF and KPSS)"), items, "lrl")))
    if facts.findings:
        out += ["<p>Screening findings (rules of thumb):</p>", "<ul>",
                *(f"<li>{escape(f)}</li>" for f in facts.findings), "</ul>"]
    return out


OUT_OF_DATE = ("The data, the model or the estimator settings changed after this estimate: "
               "the report describes the estimate as it was made; estimate again to update it.")


def warnings_section(inp: ReportInput) -> list[str]:
    out = [] if inp.current else [f"<p><b>{escape(OUT_OF_DATE)}</b></p>"]
    if not inp.warnings:
        return out + [f"<p>{escape(all_clear(None))}</p>"]
    return out + ["<ul>", *(f"<li><b>{escape(a.title)}.</b> {escape(a.explanation)}</li>"
                            for a in inp.warnings), "</ul>"]


def _run_words(run: str) -> str:
    """" (Run 2)" for a default name, " (run baseline)" for a name of the user's own."""
    return f" ({run})" if run.startswith("Run ") else f" (run {run})"
