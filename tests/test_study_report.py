"""The report of a study (a `lagwise batch` folder): HTML read back by the standard library's
parser, the PDF's text read by pypdf, the strip plot's SVG parsed as XML. The check values are
the batch's own estimates (simulated people with known truth, tests/batch_people.py); the
escaping and the p-value-free interval style follow common practice."""

from __future__ import annotations

import xml.etree.ElementTree as ET
from io import BytesIO

import numpy as np
import pytest
from pypdf import PdfReader

from batch_people import RECIPE, people_tables, person_table, stacked
from lagwise.desktop.cli import main
from lagwise.models.batch import run_batch
from lagwise.models.numbers import fmt
from lagwise.models.personfit import BatchSettings
from lagwise.models.reporting.strips import nice_ticks, strip_svg
from lagwise.models.reporting.study import path_estimates, study_html, study_input
from lagwise.models.study import study_from_frame
from test_report import SCRIPT, Page
from two_state_model import SPEC


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    """Four simulated people, one named like a script, and one with 5 prompts (not fitted)."""
    tables = people_tables(4)
    tables[SCRIPT] = tables.pop("P03")
    tables["short"] = person_table(7).head(5)    # 5 prompts: too few lag windows
    out = tmp_path_factory.mktemp("study")
    run_batch(study_from_frame(stacked(tables), RECIPE, "person"), BatchSettings(SPEC), out,
              jobs=1)
    return out


def test_the_study_report_holds_every_persons_estimates_escaped(folder):
    inp = study_input(folder, "test")
    text = study_html(inp)
    page = Page(text)
    words = " ".join(page.text)
    assert "script" not in page.tags and SCRIPT in words       # shown as text, never run
    assert "&lt;script&gt;" in text
    assert "not a multilevel model" in words
    short = next(o for o in inp.outcomes if o.person == "short")
    assert not short.fitted and short.reason.strip() in words      # why, in the engine's words
    for row in inp.across.rows:                                 # every lagged path, person by person
        if row.parameter.kind in ("inertia", "cross_lagged"):
            low, high = row.interval
            assert f"{fmt(row.parameter.estimate)} [{fmt(low)}, {fmt(high)}]" in " ".join(words.split())
    for share in inp.across.paths:
        assert f"{share.positive} of {share.people}" in words


def test_the_strip_plot_draws_one_dot_per_person_and_path_coloured_by_its_interval(folder):
    inp = study_input(folder, "test")
    rows = path_estimates(inp.across)
    svg = ET.fromstring(strip_svg(rows))
    ns = {"s": "http://www.w3.org/2000/svg"}
    dots = svg.findall(".//s:circle", ns)
    assert len(dots) == sum(len(people) for _label, people in rows) == \
        sum(p.people for p in inp.across.paths)
    teal = sum(d.get("fill") == "#1b7f79" for d in dots)
    orange = sum(d.get("fill") == "#b35900" for d in dots)
    assert teal == sum(p.positive for p in inp.across.paths)
    assert orange == sum(p.negative for p in inp.across.paths)


@pytest.mark.parametrize("low, high", [(-0.43, 0.71), (0.05, 0.93), (-3.0, 12.0), (-1e-3, 2e-3)])
def test_axis_ticks_are_round_and_cover_the_values(low, high):
    # common practice: steps of 1, 2 or 5 times a power of ten
    ticks = nice_ticks(low, high)
    step = ticks[1] - ticks[0]
    mantissa = step / 10 ** np.floor(np.log10(step))
    assert min(abs(mantissa - m) for m in (1, 2, 5, 10)) < 1e-9
    assert ticks[0] <= low and ticks[-1] >= high and 3 <= len(ticks) <= 8
    assert np.allclose(np.diff(ticks), step)


def test_lagwise_report_writes_a_study_report_from_a_batch_folder(folder, tmp_path, capsys):
    out = tmp_path / "study.pdf"
    assert main(["report", str(folder), "--out", str(out)]) == 0
    reader = PdfReader(BytesIO(out.read_bytes()))
    text = " ".join(" ".join(page.extract_text().split()) for page in reader.pages)
    assert "Lagwise study report" in text and "P00" in text and "short" in text
    assert main(["report", str(folder), "--run", "Run 1", "--out", str(tmp_path / "s.html")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "--run is for projects" in err[0]
    assert main(["report", str(tmp_path), "--out", str(tmp_path / "s.html")]) == 2
    assert "not a finished batch folder" in capsys.readouterr().err
