"""The report's tables in common journal style: numbers right-aligned with fixed decimals
through `models.numbers.fmt` (so they match the window's rounding), p-values without the
leading zero (".032", "< .001"), intervals as "[low, high]", a note under the table.

A `Table` is plain text cells; `table_html` writes it, `tsv` and `shown_table` serve the
window's "Copy table" (the table as shown, as tab-separated text and as HTML).
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from html import escape

from lagwise.models.bootstrap import Bootstrap
from lagwise.models.kinds import Kind
from lagwise.models.lag2check import Lag2Check
from lagwise.models.numbers import MISSING, fmt
from lagwise.models.responses import Responses
from lagwise.models.results import FitResult, Parameter

LAGGED = (Kind.INERTIA, Kind.CROSS_LAGGED, Kind.LAG2)
INNOVATIONS = (Kind.INNOVATION, Kind.PARTIAL_CORRELATION)
MEASUREMENT_PARTS = (Kind.INTERCEPT, Kind.UNIQUE, Kind.UNIQUE_AUTOCORRELATION, Kind.FIRST_COPY,
                     Kind.LATENT_INTERCEPT)


@dataclass(frozen=True)
class Table:
    """A titled table: `align` holds "l" (text) or "r" (numbers) per column."""

    title: str
    header: tuple[str, ...]
    rows: tuple[tuple[str, ...], ...]
    align: str
    note: str = ""


def p_value(p: float | None) -> str:
    """A p-value as journals print it: ".032", "< .001" (common practice)."""
    text = fmt(p, "p")
    return "< " + text[1:] if text.startswith("<") else text


def interval(low: float | None, high: float | None) -> str:
    return MISSING if low is None or high is None else f"[{fmt(low)}, {fmt(high)}]"


def _ci(p: Parameter) -> str:
    return MISSING if p.ci is None else interval(*p.ci)


def _numbers(p: Parameter) -> tuple[str, ...]:
    """Estimate (a fixed value marked), SE, 95% interval, p, standardized."""
    if not p.free:
        return (f"{fmt(p.estimate)} (fixed)", MISSING, MISSING, MISSING, fmt(p.standardized))
    return (fmt(p.estimate), fmt(p.se), _ci(p), p_value(p.p), fmt(p.standardized))


_NUMBER_HEAD = ("Estimate", "SE", "95% CI", "p", "Std.")
_NOTE = ("SE: standard error; 95% CI: estimate ± 1.96 SE; p: two-sided test of 0; Std.: the "
         "standardized solution (standard deviations of the states and items).")


def loading_table(result: FitResult) -> Table:
    items = result.items
    rows = tuple((p.from_, p.to, *_numbers(p), fmt(result.r_squared[items.index(p.to)]))
                 for p in result.table(Kind.LOADING))
    return Table("Loadings", ("State", "Item", *_NUMBER_HEAD, "R²"), rows, "llrrrrrr",
                 _NOTE + " R²: share of the item's variance explained by its state.")


def lagged_table(result: FitResult) -> Table:
    """One row per lagged path; the lag is a column of its own in a lag-2 model."""
    second = result.spec.lags > 1
    rows = tuple((p.from_, *((f"t-{p.lag or 1}",) if second else ()), p.to, Kind(p.kind).label,
                  *_numbers(p)) for p in result.parameters if p.kind in LAGGED)
    header = ("From", "Lag", "To") if second else ("From (t-1)", "To (t)")
    return Table("Carry-over (inertia) and cross-lagged effects", (*header, "Effect",
                 *_NUMBER_HEAD), rows, "l" * len(header) + "lrrrrr",
                 "From: the state at an earlier prompt; to: the state it predicts. " + _NOTE)


def innovation_table(result: FitResult) -> Table:
    rows = tuple((_pair(p), Kind(p.kind).label, *_numbers(p))
                 for p in result.parameters if p.kind in INNOVATIONS)
    return Table("Innovations", ("States", "Parameter", *_NUMBER_HEAD), rows, "llrrrrr",
                 "Innovations: the part of a state at a prompt that earlier prompts do not "
                 "predict. " + _NOTE)


def measurement_parts_table(result: FitResult) -> Table:
    rows = tuple((_pair(p), Kind(p.kind).label, *_numbers(p))
                 for p in result.parameters if p.kind in MEASUREMENT_PARTS)
    return Table("Item intercepts and unique parts", ("Item or state", "Parameter",
                 *_NUMBER_HEAD), rows, "llrrrrr", _NOTE)


def _pair(p: Parameter) -> str:
    return p.to if p.from_ == p.to or not p.from_ else f"{p.from_} with {p.to}"


def fit_table(result: FitResult) -> Table:
    f = result.fit
    rows: list[tuple[str, str]] = []
    s = f.scaled
    if s is not None:
        rows += [("Calibrated chi-square (mean-and-variance adjusted)",
                  f"{fmt(s.chi2, digits=2)} on {fmt(s.df, digits=1)} df, p {p_value(s.p)}"),
                 ("Calibrated RMSEA", fmt(s.rmsea)), ("Calibrated CFI", fmt(s.cfi)),
                 ("Calibrated TLI", fmt(s.tli))]
    unadjusted = " (unadjusted)" if s is not None else ""
    if f.chi2 is not None:
        rows.append((f"Chi-square{unadjusted}",
                     f"{fmt(f.chi2, digits=2)} on {f.df} df, p {p_value(f.p)}"))
    if f.rmsea is not None:
        ci = "" if f.rmsea_ci is None else " 90% CI " + interval(*f.rmsea_ci)
        rows.append((f"RMSEA{unadjusted}", fmt(f.rmsea) + ci))
    for name, value in (("CFI", f.cfi), ("TLI", f.tli)):
        if value is not None:
            rows.append((name + unadjusted, fmt(value)))
    if f.srmr is not None:
        rows.append(("SRMR", fmt(f.srmr)))
    rows += [("Log-likelihood", fmt(f.loglik, digits=2)), ("AIC", fmt(f.aic, digits=2)),
             ("BIC", fmt(f.bic, digits=2)), ("Free parameters", fmt(f.n_free, "int")),
             ("Spectral radius of the lagged paths", fmt(result.spectral_radius))]
    what = ("the exact likelihood of the series" if f.exact else
            "the window pseudo-likelihood (overlapping windows as independent rows)")
    return Table("Fit", ("Figure", "Value"), tuple(rows), "lr", f"Figures from {what}.")


def lag2_table(check: Lag2Check) -> Table:
    rows = tuple(("lag-2 path" if t.kind == Kind.LAG2 else "unique autocorrelation", t.from_,
                  t.to, fmt(t.score, digits=2), p_value(t.p), p_value(t.p_holm), fmt(t.epc),
                  fmt(t.std_epc)) for t in sorted(check.paths, key=lambda t: -t.score))
    return Table("Is lag 1 enough? (lag-2 check)", ("Test", "From", "To", "Score", "p",
                 "Holm p", "EPC", "Std. EPC"), rows, "lllrrrrr",
                 f"{check.verdict} Likelihood-ratio test: chi-square "
                 f"{fmt(check.lr_chi2, digits=2)} on {check.lr_df} df, p {p_value(check.lr_p)}. "
                 "Score tests of each fixed path, p adjusted by Holm's procedure; EPC: expected "
                 "change of the path if freed.")


def bootstrap_table(boot: Bootstrap) -> Table:
    how = ("whole days" if boot.block_length is None else
           f"stationary blocks of {fmt(boot.block_length, digits=1)} prompts on average")
    rows = tuple((Kind(s.kind).label, s.from_, s.to, fmt(s.estimate), fmt(s.same_sign),
                  interval(s.lower, s.upper), "yes" if s.excludes_zero else "no")
                 for s in boot.stability())
    note = (f"{fmt(boot.used, 'int')} of {fmt(boot.replicates, 'int')} replicates resampling "
            f"{how} (seed {boot.seed}). Same sign: share of replicates whose estimate has the "
            "sign of this diary's estimate.")
    if boot.warning:
        note += " " + boot.warning
    return Table("Stability of the lagged paths (bootstrap)", ("Path", "From", "To", "Estimate",
                 "Same sign", "95% percentile CI", "Excludes 0"), rows, "lllrrrl", note)


RESPONSE_PROMPTS = 3   # prompts after the rise shown in the report's table


def response_table(responses: Responses) -> Table:
    """Unit responses in the states' own units one to three prompts after a rise of 1, with
    their bands: one row per (rising state, responding state, prompts later)."""
    curve = responses.curve("unit")
    states = responses.states
    rows = []
    for j, shock in enumerate(states):
        for i, state in enumerate(states):
            for h in range(1, min(responses.horizon, RESPONSE_PROMPTS) + 1):
                band = (MISSING if curve.lower is None or curve.upper is None
                        else interval(curve.lower[h, i, j], curve.upper[h, i, j]))
                rows.append((shock, state, str(h), fmt(curve.estimate[h, i, j]), band))
    halves = ", ".join(f"{s} {'more than ' + str(responses.horizon) if h is None else h}"
                       for s, h in zip(states, responses.half_life))
    return Table("Impulse responses (a rise of 1, the states' own units)",
                 ("Rise in", "Response of", "Prompts later", "Response", "95% band"),
                 tuple(rows), "llrrr", " ".join(responses.notes)
                 + f" Half-lives in prompts: {halves}.")


def result_tables(result: FitResult) -> tuple[Table, ...]:
    """The estimate's tables, every parameter in one of them."""
    tables = (loading_table(result), lagged_table(result), innovation_table(result),
              measurement_parts_table(result), fit_table(result))
    return tuple(t for t in tables if t.rows)


# ----- any header + rows as text -------------------------------------------------------------
def tsv(rows: list[list[str]]) -> str:
    """Tab-separated lines (tabs and line breaks inside a cell become spaces)."""
    return "".join("\t".join(" ".join(str(c).split()) for c in row) + "\n" for row in rows)


def table_html(table: Table) -> str:
    """A journal-style HTML table: caption, header, right-aligned numbers, the note below;
    every cell escaped."""
    head = "".join(f"<th>{escape(h)}</th>" for h in table.header)
    head = f"<thead><tr>{head}</tr></thead>" if any(table.header) else ""
    rows = []
    for n, row in enumerate(table.rows):
        rule = " border-bottom: 1.5px solid #1f2a2e;" if n == len(table.rows) - 1 else ""
        cells = "".join(
            f'<td style="text-align: right; white-space: nowrap;{rule}">{escape(c)}</td>'
            if a == "r" else f'<td style="{rule.strip()}">{escape(c)}</td>'
            for c, a in zip(row, table.align))
        rows.append(f"<tr>{cells}</tr>")
    caption = f"<caption>{escape(table.title)}</caption>" if table.title else ""
    out = f'<table width="100%">{caption}{head}<tbody>{"".join(rows)}</tbody></table>'
    if table.note:
        out += f'\n<p class="note">{escape(table.note)}</p>'
    return out


def shown_table(rows: list[list[str]]) -> Table:
    """A Table of display text (header row first): a column whose cells all read as numbers
    is right-aligned."""
    header, body = tuple(rows[0]) if rows else (), [tuple(r) for r in rows[1:]]
    align = "".join("r" if any(r[c] for r in body) and all(_looks_numeric(r[c]) for r in body
                                                            if r[c]) else "l"
                    for c in range(len(header)))
    return Table("", header, tuple(body), align)


_NUMERIC = re.compile(r"(< ?)?[-+]?(\d+\.?\d*|\.\d+)( \(fixed\))?|\[[-\d., ]+\]|" + MISSING)


def _looks_numeric(text: str) -> bool:
    return bool(_NUMERIC.fullmatch(text.strip()))
