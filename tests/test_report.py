"""The report's text (models.reporting) and `lagwise report`.

Check values come from the outside world: the HTML is read back by the standard library's
parser, the p-value style and the escaping follow common practice, the methods paragraph is
compared with the settings the fit was given, the references with the guide's list.
"""

from __future__ import annotations

import re
from dataclasses import replace
from html.parser import HTMLParser
from pathlib import Path

import pytest

from lagwise.desktop.cli import main
from lagwise.models.diary import TimeSettings
from lagwise.models.errors import ProjectError
from lagwise.models.estimate import fit
from lagwise.models.estimators import FitOptions
from lagwise.models.project import Project, embed_file, embed_table, save_project
from lagwise.models.project.estimates import with_estimate
from lagwise.models.runs import update_run
from lagwise.models.readers import read_table
from lagwise.models.recipe import load_diary
from lagwise.models.reporting.html import report_html
from lagwise.models.reporting.journal import p_value, shown_table, table_html, tsv
from lagwise.models.reporting.methods import REFERENCES, methods_paragraph
from lagwise.models.reporting.source import report_input
from lagwise.models.spec import make_spec
from lagwise.resources import demo_diary_path, guide_html

TIME = TimeSettings(mode="grid", day="day", prompt="prompt")
STATES = {"tension": ["tense", "restless", "worried"], "low mood": ["sad", "flat", "hopeless"],
          "energy": ["lively", "focused", "rested"]}
SCRIPT = "<script>alert(1)</script>"


class Page(HTMLParser):
    """The elements, attributes and text of an HTML document (standard library parser)."""

    def __init__(self, text: str) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[str] = []
        self.attributes: list[tuple[str, str | None]] = []
        self.text: list[str] = []
        self.feed(text)
        self.close()

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        self.attributes += attrs

    def handle_data(self, data):
        self.text.append(data)


def project_of(options: FitOptions = FitOptions(), rename: dict[str, str] | None = None) -> Project:
    """The demo diary (items optionally renamed) with its model fitted under `options`."""
    rename = rename or {}
    table = read_table(demo_diary_path()).rename(columns=rename)
    data = embed_table(table) if rename else embed_file(demo_diary_path())
    states = {s: [rename.get(i, i) for i in items] for s, items in STATES.items()}
    spec = make_spec(states, lags=1)
    diary = load_diary(demo_diary_path(), time=TIME)
    if rename:
        diary = replace(diary, items=tuple(rename.get(i, i) for i in diary.items))
    result = fit(diary, spec, options)
    return with_estimate(Project(data=data, time=TIME, spec=spec, options=options,
                                 notes=f"Seen on {SCRIPT} day"), result)


@pytest.fixture(scope="module")
def demo_project() -> Project:
    return project_of()


def test_p_values_are_written_in_journal_style():
    # common practice (APA style): no leading zero, three decimals, "< .001" below .001
    assert p_value(0.0321) == ".032"
    assert p_value(0.0004) == "< .001"
    assert p_value(0.5) == ".500"
    assert p_value(None) == "—"


def test_the_report_parses_as_html_and_holds_no_script_and_loads_nothing(demo_project):
    text = report_html(report_input(demo_project))
    page = Page(text)
    assert page.tags[:3] == ["html", "head", "meta"]
    assert "script" not in page.tags and "link" not in page.tags
    for name, value in page.attributes:
        assert not (name in ("src", "href") and value and re.match(r"\s*(https?|file):", value))
    policy = dict(a for a in page.attributes if a[0] in ("http-equiv", "content"))
    assert "Content-Security-Policy" in text and "default-src 'none'" in text, policy
    assert "http://" not in text and "https://" not in text   # no diagram: nothing at all


def test_user_text_is_escaped(tmp_path):
    project = project_of(rename={"tense": SCRIPT})
    text = report_html(report_input(project))
    page = Page(text)
    assert "script" not in page.tags
    assert SCRIPT not in text
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in text
    shown = "".join(page.text)
    assert SCRIPT in shown                     # the reader sees the name as written
    assert f"Seen on {SCRIPT} day" in shown


@pytest.mark.parametrize("options, said, unsaid", [
    (FitOptions(missing="fiml"), "full-information maximum likelihood", "complete windows only"),
    (FitOptions(missing="listwise"), "complete windows only", "full-information maximum"),
])
def test_the_methods_paragraph_names_the_settings_used(options, said, unsaid):
    paragraph, cited = methods_paragraph(report_input(project_of(options)))
    assert said in paragraph and unsaid not in paragraph
    assert "stacked lag windows of 2 consecutive prompts" in paragraph
    assert ("little" in cited) == (options.missing == "fiml")
    assert "Kalman" not in paragraph


def test_the_methods_paragraph_of_the_exact_estimator_names_the_kalman_filter():
    paragraph, cited = methods_paragraph(report_input(project_of(FitOptions(estimator="exact"))))
    assert "Kalman filter" in paragraph and "stacked lag windows" not in paragraph
    assert {"kalman", "durbin", "akaike", "schwarz"} <= set(cited)
    assert "RMSEA" not in paragraph        # no windows: no window fit figures


def test_every_reference_is_one_of_the_guides():
    guide = " ".join(guide_html().split())
    for entry in REFERENCES.values():
        assert f"<li>{entry}</li>" in guide, entry


def test_the_report_shows_the_data_and_the_warnings(demo_project):
    inp = report_input(demo_project)
    text = " ".join(Page(report_html(inp)).text)
    facts = inp.diary
    assert facts.sha256 in text and "demo_diary.csv" in text
    # the demo diary: 42 days of 6 prompts, 50 of them missed (resources/demo/README.md)
    assert facts.days == 42 and facts.prompts == 42 * 6 and facts.answered == 42 * 6 - 50
    assert f"{100 * (42 * 6 - 50) / (42 * 6):.1f}%" in text
    for advice in inp.warnings:
        assert advice.explanation in text
    for caution in demo_project.result.cautions:
        assert caution in text


def test_an_unknown_run_is_refused_by_name(demo_project):
    with pytest.raises(ProjectError, match="no run named 'first try'"):
        report_input(demo_project, "first try")


def test_a_named_run_is_reported_with_its_own_estimates(demo_project):
    # two runs of the same diary: the one named is reported, not the current one
    spec = make_spec(STATES, lags=1, innovations="independent")
    second = fit(load_diary(demo_diary_path(), time=TIME), spec, FitOptions())
    project = with_estimate(demo_project, second, name="independent innovations")
    first = demo_project.run.name
    assert project.current_run == "independent innovations"
    inp = report_input(project, first)
    assert inp.run == first and inp.result is demo_project.result and inp.current
    assert report_input(project).result is second
    text = " ".join(Page(report_html(inp, [])).text)
    assert f"({first})" in text and first.startswith("Run ")      # not "(run Run 1)"
    named = " ".join(Page(report_html(report_input(project), [])).text)
    assert "(run independent innovations)" in named


def test_copied_tables_are_tab_separated_and_html():
    rows = [["From", "Estimate"], ["a\tb", "0.206"], ["c", "—"]]
    assert tsv(rows) == "From\tEstimate\na b\t0.206\nc\t—\n"
    html = table_html(shown_table(rows))
    assert html.count('text-align: right') == 2 and "<th>From</th>" in html


# ----- the command line ---------------------------------------------------------------------
@pytest.fixture(scope="module")
def saved(tmp_path_factory, demo_project) -> Path:
    path = tmp_path_factory.mktemp("report") / "robin.lagwise"
    save_project(demo_project, path)
    return path


@pytest.mark.parametrize("argv, words", [
    (["--out", "r.txt"], "a report is written as .html or .pdf, not '.txt'"),
    (["--run", "first", "--out", "r.html"], "no run named 'first'"),
])
def test_lagwise_report_refuses_in_one_line(saved, tmp_path, monkeypatch, capsys, argv, words):
    monkeypatch.chdir(tmp_path)
    assert main(["report", str(saved), *argv]) == 2
    err = capsys.readouterr().err
    assert words in err and err.count("\n") == 1 and not list(tmp_path.iterdir())


def test_lagwise_report_refuses_a_damaged_project_in_one_line(saved, tmp_path, capsys):
    damaged = tmp_path / "damaged.lagwise"
    damaged.write_bytes(saved.read_bytes()[: len(saved.read_bytes()) // 2])   # cut short
    assert main(["report", str(damaged), "--out", str(tmp_path / "r.html")]) == 2
    err = capsys.readouterr().err
    assert err.startswith("lagwise: ") and err.count("\n") == 1
    assert not (tmp_path / "r.html").exists()


def test_lagwise_report_writes_html(saved, tmp_path, capsys):
    out = tmp_path / "robin.html"
    assert main(["report", str(saved), "--out", str(out)]) == 0
    page = Page(out.read_text(encoding="utf-8"))
    assert "svg" in page.tags and "script" not in page.tags


def test_the_readme_report_line_runs(tmp_path, monkeypatch, capsys):
    from test_readme_commands import readme_commands

    monkeypatch.chdir(tmp_path)
    commands = readme_commands()
    chosen = [c for c in commands if c[:2] == ["lagwise", "demo"]][:1]
    chosen += [c for c in commands if c[:2] == ["lagwise", "fit"] and "--save" in c][:1]
    chosen += [c for c in commands if c[:2] == ["lagwise", "report"]]
    assert [c[1] for c in chosen] == ["demo", "fit", "report"]
    for argv in chosen:
        assert main(argv[1:]) == 0, " ".join(argv)
    out = Path(chosen[-1][chosen[-1].index("--out") + 1])
    page = Page(out.read_text(encoding="utf-8"))
    assert "svg" in page.tags and "script" not in page.tags
    assert "Lag-2 check" in page.text   # the fit line's --lag2-check is saved with its run


def test_the_guide_explains_the_report():
    guide = " ".join(guide_html().split())
    section = guide.split('<a name="report"></a>')[1].split("<a name=")[0]
    assert "Export report" in section and "lagwise report PROJECT.lagwise" in section
    assert "Copy table" in section and "Ctrl+Shift+C" in section


def test_an_estimate_older_than_its_model_is_said_to_be(demo_project):
    from lagwise.models.reporting.html import OUT_OF_DATE

    assert OUT_OF_DATE not in report_html(report_input(demo_project))
    stale = replace(demo_project, result_current=False)
    assert OUT_OF_DATE in " ".join(Page(report_html(report_input(stale))).text)


def test_the_lag2_check_and_the_bootstrap_are_reported_when_present(demo_project):
    from lagwise.models.bootstrap import bootstrap
    from lagwise.models.lag2check import lag2_check

    result = demo_project.result
    diary = load_diary(demo_diary_path(), time=TIME)
    check = lag2_check(diary, result.spec, result.options)
    boot = bootstrap(diary, result.spec, result.options, result, replicates=10, seed=1, jobs=1)
    plain = " ".join(Page(report_html(report_input(demo_project))).text)
    assert "Lag-2 check" not in plain and "bootstrap" not in plain.lower()
    with_boot = replace(demo_project, runs=update_run(demo_project.runs, demo_project.current_run,
                                                      bootstrap=boot))
    inp = report_input(with_boot, check=check)
    text = " ".join(Page(report_html(inp)).text)
    assert check.verdict in text and "Holm's procedure (Holm, 1979)" in text
    assert REFERENCES["holm"] in text and REFERENCES["efron"] in text
    assert f"{boot.used} of 10 replicates" in text
    for path in boot.stability():        # every lagged path's stability row
        assert f"{path.same_sign:.3f}" in text
