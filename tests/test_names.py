"""Names from any source: control characters refused, other names kept whole in reports.

A name with a control character (Unicode category Cc: the C0 set, DEL and the C1 set of
ECMA-48, e.g. ESC, which starts a terminal command) or a bidirectional override (U+202E,
U+2066..U+2069) is refused wherever it enters: the model specification, the JSON readers of
project files and the item columns of a diary. Every other name is kept as it is, and the
text report's tables size their columns to the longest one (monospaced width: East Asian
wide characters take two columns, common practice).

Data: the bundled demo diary (simulated from known parameters) and its own model.
"""

from __future__ import annotations

import json
import unicodedata
from dataclasses import replace
from pathlib import Path

import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from lagwise.desktop.cli import main
from lagwise.models import names
from lagwise.models.errors import DataError, FieldError, LagwiseError, SpecError
from lagwise.models.estimate import fit
from lagwise.models.lag2check import lag2_check
from lagwise.models.numbers import fmt
from lagwise.models.recipe import DiaryRecipe, load_diary
from lagwise.models.diary import TimeSettings
from lagwise.models.report import format_lag2, format_responses, format_result
from lagwise.models.responses import impulse_responses
from lagwise.models.results import FitResult
from lagwise.models.spec import ModelSpec, State, make_spec
from lagwise.models.texttable import width

DEMO = Path(__file__).resolve().parents[1] / "resources" / "demo"
GRID = TimeSettings(mode="grid", day="day", prompt="prompt")
# Control characters of ECMA-48 (ESC, CSI, BEL, NUL, DEL, NEL) and Unicode's
# right-to-left override and isolate (common practice: what a terminal or text view acts on).
HOSTILE = ["calm\x1b[31m", "\x9b2J", "a\x07b", "x\x00", "del\x7f", "next\x85line", "tab\there",
           "line\nbreak", "evil\u202etxt", "iso\u2066late"]
# Printable names that must pass: accents, wide characters, emoji with a joiner, spaces.
FRIENDLY = ["café", "緊張と不安", "👩\u200d🔬 focus", "  padded  ", "<b>INJ</b><img src=x>",
            "a'quote\"", "x" * 60]


def _demo_spec() -> ModelSpec:
    return ModelSpec.from_json(json.loads((DEMO / "demo_truth.json").read_text("utf-8"))["spec"])


@pytest.fixture(scope="module")
def diary():
    return load_diary(DEMO / "demo_diary.csv", time=GRID)


@pytest.fixture(scope="module")
def result(diary):
    return fit(diary, _demo_spec())


def _renamed(spec: ModelSpec, new: dict[str, str]) -> ModelSpec:
    states = tuple(State(new.get(s.name, s.name), s.items, s.marker) for s in spec.states)
    return replace(spec, states=states)


def _replace_text(doc, old: str, new: str):
    """The JSON document with every text equal to `old` replaced by `new`."""
    if isinstance(doc, dict):
        return {k: _replace_text(v, old, new) for k, v in doc.items()}
    if isinstance(doc, list):
        return [_replace_text(v, old, new) for v in doc]
    return new if doc == old else doc


def _has_control(text: str) -> bool:
    return any(unicodedata.category(c) == "Cc" and c != "\n" for c in text)


# ----------------------------------------------------------------------------- the rule

@pytest.mark.parametrize("name", HOSTILE)
def test_hostile_characters_are_named_and_never_shown(name):
    char = names.unsafe_character(name)
    assert char is not None
    message = names.problem(name)
    assert f"U+{ord(char):04X}" in message and names.unsafe_character(message) is None


@pytest.mark.parametrize("name", FRIENDLY)
def test_printable_names_pass(name):
    assert names.unsafe_character(name) is None and names.problem(name) is None


def test_stored_texts_keep_line_breaks_and_tabs():
    assert names.unsafe_character("first line\n\tsecond\r\n", names.LINE_BREAKS) is None
    assert names.unsafe_character("note\x1b[2J", names.LINE_BREAKS) == "\x1b"


# ----------------------------------------------------------------------------- where names enter

@pytest.mark.parametrize("name", HOSTILE)
def test_spec_refuses_a_state_or_item_name_with_a_control_character(name):
    for spec in (make_spec({name: ["a", "b", "c"]}), make_spec({"calm": ["a", name, "c"]})):
        with pytest.raises(SpecError, match=f"U\\+{ord(names.unsafe_character(name)):04X}") as caught:
            spec.validate()
        assert names.unsafe_character(str(caught.value)) is None


@pytest.mark.parametrize("name", HOSTILE)
def test_spec_json_refuses_the_name_and_names_the_field(name):
    doc = make_spec({"calm": ["a", "b", "c"]}).to_json()
    doc["states"][0]["name"] = name
    with pytest.raises(FieldError) as caught:
        ModelSpec.from_json(doc, where="spec")
    assert caught.value.where == "spec.states[0].name"
    assert names.unsafe_character(str(caught.value)) is None


def test_diary_refuses_an_item_column_with_a_control_character():
    # a table as a spreadsheet reader may return it (a text file with ESC is refused earlier)
    table = pd.read_csv(DEMO / "demo_diary.csv").rename(columns={"tense": "tense\x1b[2J"})
    with pytest.raises(DataError, match="U\\+001B") as caught:
        DiaryRecipe(time=GRID).diary(table)
    assert "\x1b" not in str(caught.value)


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(name=st.text(min_size=1, max_size=24))
def test_any_name_round_trips_unchanged_or_is_refused_by_name(result, name):
    doc = _replace_text(result.to_json(), "tension", name)
    others = set(result.states) - {"tension"}
    try:
        back = FitResult.from_json(json.loads(json.dumps(doc)), where="results")
    except (FieldError, SpecError) as error:
        assert names.unsafe_character(name) is not None or not name.strip() or name in others
        assert not _has_control(str(error))
        if names.unsafe_character(name) is not None:
            assert isinstance(error, FieldError) and error.where.startswith("results.")
        return
    assert names.unsafe_character(name) is None
    assert back.states[0] == name
    assert ModelSpec.from_json(back.spec.to_json()) == back.spec
    report = format_result(back)
    assert sum(line.startswith(f"  {name}  ") for line in report.splitlines()) >= 3
    assert not _has_control(report)


# ----------------------------------------------------------------------------- the command line

@pytest.mark.parametrize("name", ["tension\x1b]0;owned\x07\x1b[2J", "\x9b31mred", "sp\u202eoof"])
def test_fit_of_a_shared_project_with_a_hostile_name_prints_no_control_character(
        tmp_path, capsys, name):
    project = tmp_path / "shared.lagwise"
    assert main(["fit", str(DEMO / "demo_diary.csv"), "--day", "day", "--prompt", "prompt",
                 "--state", "tension=tense,restless,worried", "--state", "mood=sad,flat",
                 "--save", str(project)]) == 0
    capsys.readouterr()
    text = project.read_text("utf-8").replace('"tension"', json.dumps(name))
    assert name.encode("unicode_escape").decode() != name  # the file holds it escaped
    project.write_text(text, encoding="utf-8")
    assert main(["fit", str(project)]) == 2
    out = capsys.readouterr()
    assert "U+" in out.err
    assert not _has_control(out.out + out.err) and "\u202e" not in out.out + out.err


@pytest.mark.slow  # about 2 s a fit; the hostile names above are its fast sibling
@settings(max_examples=12, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(name=st.text(min_size=1, max_size=12))
def test_fit_output_never_holds_a_control_character_whatever_the_name(capsys, name):
    code = main(["fit", str(DEMO / "demo_diary.csv"), "--day", "day", "--prompt", "prompt",
                 f"--state={name}=tense,restless,worried", "--state=mood=sad,flat,hopeless"])
    out = capsys.readouterr()
    assert code in (0, 2)
    assert not _has_control(out.out + out.err)
    if code == 0:  # the command line strips white space (which includes \x1c-\x1f) from names
        assert names.unsafe_character(name.strip()) is None


# ----------------------------------------------------------------------------- report columns

LONG = {"tension": "tension over the whole afternoon", "low mood": "緊張と不安の状態"}


def _column_edges(line: str, cells: list[str], start: int) -> list[tuple[int, int]]:
    """(first, last + 1) display column of each cell, found one after the other."""
    edges, at = [], start
    for cell in cells:
        found = line.index(cell, at)
        edges.append((width(line[:found]), width(line[:found + len(cell)])))
        at = found + len(cell)
    return edges


def _assert_aligned(lines: list[str], rows: list[list[str]], align: str) -> None:
    """Each left-aligned column starts, each right-aligned one ends, where its header does."""
    header = _column_edges(lines[0], rows[0], 0)
    for line, cells in zip(lines[1:], rows[1:]):
        for (first, last), (h_first, h_last), a in zip(_column_edges(line, cells, 0), header, align):
            assert (first if a == "<" else last) == (h_first if a == "<" else h_last), line


def test_report_tables_keep_long_and_wide_names_whole_and_aligned(diary):
    result = fit(diary, _renamed(_demo_spec(), LONG))
    report = format_result(result).splitlines()
    for kind_title in ("Loadings (state -> item)", "Inertia (state at t-1 -> same state at t)"):
        top = report.index(kind_title) + 1
        params = [p for p in result.table() if p.kind.title == kind_title]
        lines = report[top:top + 1 + len(params)]
        rows = [["from", "to", "estimate"]] + [[p.from_, p.to] for p in params]
        _assert_aligned(lines, [r[:2] for r in rows], "<<")
        assert {p.from_ for p in params} >= set(LONG.values()) & set(result.states)
    responses = impulse_responses(result, horizon=3)
    curve, j = responses.curve("unit"), responses.states.index(LONG["tension"])
    lines = format_responses(responses).splitlines()
    top = lines.index(f"  after a rise of 1 in {LONG['tension']}") + 1
    rows = [["prompts", *responses.states]] + [
        [str(h)] + [f"{fmt(curve.estimate[h, i, j])} [{fmt(curve.lower[h, i, j])}, "
                    f"{fmt(curve.upper[h, i, j])}]" for i in range(len(responses.states))]
        for h in (1, 2, 3)]
    _assert_aligned(lines[top:top + 4], rows, ">" + "<" * len(responses.states))


def test_lag2_table_keeps_long_names_whole_and_aligned(diary):
    check = lag2_check(diary, _renamed(_demo_spec(), LONG))
    lines = format_lag2(check).splitlines()[3:4 + len(check.paths)]
    tests = sorted(check.paths, key=lambda t: -t.score)
    _assert_aligned(lines, [["test", "from", "to"]] + [
        ["lag-2 path" if t.kind.name == "LAG2" else "unique autocorrelation", t.from_, t.to]
        for t in tests], "<<<")
    assert any(LONG["tension"] in line for line in lines[1:])


def test_error_messages_quote_names_safely():
    with pytest.raises(LagwiseError) as caught:
        make_spec({"calm": ["a", "b"]}, reliability=(("x\x1b[1m", 0.5),)).validate()
    assert "\\x1b[1m" in str(caught.value) and "\x1b" not in str(caught.value)


def test_command_line_errors_show_control_characters_as_codes(capsys):
    code = main(["fit", str(DEMO / "demo_diary.csv"), "--day", "day", "--prompt", "prompt",
                 "--state", "tension=tense\x1b[2J,restless,worried"])
    out = capsys.readouterr()
    assert code == 2 and "\\x1b[2J" in out.err
    assert not _has_control(out.out + out.err)


def test_summary_item_table_aligns_wide_names():
    from lagwise.models.summary import diary_summary, format_summary

    table = pd.read_csv(DEMO / "demo_diary.csv").rename(columns={"tense": LONG["low mood"]})
    diary = DiaryRecipe(time=GRID).diary(table)
    lines = format_summary(diary_summary(diary)).splitlines()
    top = next(i for i, line in enumerate(lines) if line.startswith("  item "))
    rows = [["item", "answered"]] + [[name, str(diary_summary(diary)["items"][name]["answered"])]
                                     for name in diary.items]
    _assert_aligned(lines[top:top + 1 + len(diary.items)], rows, "<>")
