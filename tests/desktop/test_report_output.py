"""The report as files (desktop/report_output.py), File ▸ Export report… and Copy table.

The HTML is read back by the standard library's parser, the PDF by pypdf; the numbers the
report must hold are read off the window's own Parameters table (what the user sees). The
pages are also painted to PNG pictures in test-artifacts/report/ for a person to look at.
"""

from __future__ import annotations

import re
from html.parser import HTMLParser
from io import BytesIO

import pytest
from pypdf import PdfReader
from PySide6.QtGui import QGuiApplication

from lagwise.desktop.export import table_rows
from lagwise.desktop.mainwindow import MainWindow
from lagwise.desktop.report_output import (
    PAGE_SIZES, Pages, diagram_scenes, pdf_bytes, png_pages, svg_figures, write_report,
)
from lagwise.desktop.results import ResultsView
from lagwise.desktop.results.widgets import COPY_SHORTCUT
from lagwise.models.errors import OutputError
from lagwise.models.project import Project, embed_file
from lagwise.models.project.estimates import with_estimate
from lagwise.models.reporting.html import report_html
from lagwise.models.reporting.source import report_input
from lagwise.models.responses import ResponseChoice
from results_fixture import DEMO, demo_diary, demo_result, demo_variant
from window_helpers import settle

NUMBER = re.compile(r"-?\d*\.\d+")
SCRIPT = "<script>alert(1)</script>"


class Page(HTMLParser):
    def __init__(self, text: str) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[str] = []
        self.links: list[str] = []
        self.text: list[str] = []
        self.feed(text)
        self.close()

    def handle_starttag(self, tag, attrs):
        self.tags.append(tag)
        self.links += [v or "" for name, v in attrs if name in ("src", "href", "xlink:href")]

    def handle_data(self, data):
        self.text.append(data)


def project(result) -> Project:
    return with_estimate(Project(data=embed_file(DEMO / "demo_diary.csv"),
                                 time=demo_diary_time(), spec=result.spec,
                                 responses=ResponseChoice()), result)


def demo_diary_time():
    from lagwise.models.diary import TimeSettings

    return TimeSettings(mode="grid", day="day", prompt="prompt")


@pytest.fixture(scope="module")
def demo_input():
    return report_input(project(demo_result()))


def shown_numbers(lagwise_app, result) -> list[str]:
    """Every number in the Parameters tab's cells, as the window writes it."""
    view = ResultsView()
    view.show_result(result)
    rows = table_rows(view.parameters.tables()["parameters as shown"])
    header, body = rows[0], rows[1:]
    columns = [header.index(h) for h in ("Value", "± SE", "95% range", "p", "In SD units")]
    numbers = [n for row in body for c in columns for n in NUMBER.findall(row[c])]
    view.deleteLater()
    return numbers


def test_the_html_report_holds_every_number_of_the_parameters_tab(lagwise_app, demo_input):
    text = report_html(demo_input, svg_figures(demo_input.result))
    page = Page(text)
    assert "script" not in page.tags
    assert page.tags.count("svg") == len(diagram_scenes(demo_input.result)) == 2
    assert [link for link in page.links if not link.startswith("data:")] == []  # loads nothing
    report = set(NUMBER.findall(" ".join(page.text)))
    shown = shown_numbers(lagwise_app, demo_input.result)
    assert len(shown) > 100
    assert [n for n in shown if n not in report] == []


def test_a_lag_2_model_has_a_diagram_per_lag_and_every_number(lagwise_app):
    result = demo_variant()
    inp = report_input(project(result))
    text = report_html(inp, svg_figures(result))
    assert Page(text).tags.count("svg") == 3        # lag 1, lag 2, innovations
    report = set(NUMBER.findall(" ".join(Page(text).text)))
    assert [n for n in shown_numbers(lagwise_app, result) if n not in report] == []


def test_names_in_the_diagrams_are_escaped(lagwise_app):
    from dataclasses import replace

    from lagwise.models.estimate import fit

    diary = demo_diary()
    diary = replace(diary, items=tuple(SCRIPT if i == "tense" else i for i in diary.items))
    spec = demo_result().spec
    states = tuple(replace(s, name=SCRIPT if s.name == "tension" else s.name,
                           items=tuple(SCRIPT if i == "tense" else i for i in s.items),
                           marker=SCRIPT if s.marker == "tense" else s.marker)
                   for s in spec.states)
    result = fit(diary, replace(spec, states=states))
    text = "".join(f.markup for f in svg_figures(result))
    assert SCRIPT not in text and "&lt;script&gt;" in text
    assert "script" not in Page(text).tags


def test_the_pdf_has_its_pages_and_the_tables_numbers(lagwise_app, demo_input):
    data, count = pdf_bytes(demo_input, "a4")
    reader = PdfReader(BytesIO(data))
    assert len(reader.pages) == count == Pages(demo_input, "a4").count
    assert count > 3
    text = " ".join(page.extract_text() for page in reader.pages)
    result = demo_input.result
    for p in result.parameters:
        assert f"{p.estimate:.3f}".replace("-0.000", "0.000") in text, p
    # A4 is 210 x 297 mm, Letter 8.5 x 11 in (ISO 216; ANSI): 595 x 842 and 612 x 792 points
    box = reader.pages[0].mediabox
    assert (round(float(box.width)), round(float(box.height))) == (595, 842)
    letter = PdfReader(BytesIO(pdf_bytes(demo_input, "letter")[0])).pages[0].mediabox
    assert (round(float(letter.width)), round(float(letter.height))) == (612, 792)


def test_the_pages_are_painted_to_pictures(lagwise_app, demo_input, artifacts):
    folder = artifacts / "report"
    folder.mkdir(parents=True, exist_ok=True)
    for old in folder.glob("page-*.png"):
        old.unlink()
    pages = png_pages(demo_input, folder, "a4", dpi=100)
    assert len(pages) == Pages(demo_input, "a4").count
    from PySide6.QtGui import QImage

    first = QImage(str(pages[0]))
    # A4 is 210 x 297 mm (ISO 216): 826.8 x 1169.3 pixels at 100 dpi, to a pixel
    assert abs(first.width() - 826.8) < 1 and abs(first.height() - 1169.3) < 1


@pytest.mark.parametrize("size", list(PAGE_SIZES))
def test_no_table_row_is_split_between_pages(lagwise_app, demo_input, size):
    # every line of every body row lies on one page (Qt alone broke rows between lines)
    from PySide6.QtGui import QTextTable

    document = Pages(demo_input, size).document
    height = document.pageSize().height()
    layout = document.documentLayout()
    frames, rows = [document.rootFrame()], 0
    while frames:
        frame = frames.pop()
        frames += frame.childFrames()
        if not isinstance(frame, QTextTable):
            continue
        for r in range(frame.format().headerRowCount(), frame.rows()):
            pages = set()
            for c in range(frame.columns()):
                block = frame.cellAt(r, c).firstCursorPosition().block()
                last = frame.cellAt(r, c).lastCursorPosition().block()
                while block.isValid():
                    top = layout.blockBoundingRect(block).top()
                    for i in range(block.layout().lineCount()):
                        line = block.layout().lineAt(i)
                        pages.add((top + line.y() + line.height() / 2) // height)
                    if block == last:
                        break
                    block = block.next()
            assert len(pages) == 1, (r, pages)
            rows += 1
    assert rows > 40


def test_write_report_chooses_by_suffix(lagwise_app, demo_input, tmp_path):
    html = write_report(demo_input, tmp_path / "r.HTML")
    assert html.read_text(encoding="utf-8").startswith("<!DOCTYPE html>")
    pdf = write_report(demo_input, tmp_path / "r.pdf", "letter")
    assert pdf.read_bytes().startswith(b"%PDF-")
    with pytest.raises(OutputError, match="written as .html or .pdf"):
        write_report(demo_input, tmp_path / "r.docx")
    with pytest.raises(OutputError, match="choose a4 or letter"):
        write_report(demo_input, tmp_path / "r.pdf", "a3")
    assert sorted(PAGE_SIZES) == ["a4", "letter"]


# ----- the window -----------------------------------------------------------------------------
@pytest.fixture
def estimated(lagwise_app, qtbot, session):
    window = MainWindow(session)
    qtbot.addWidget(window)
    window.resize(1280, 800)
    window.show()
    qtbot.waitExposed(window)
    settle(qtbot)
    assert window.estimate()
    qtbot.waitUntil(lambda: not window.worker.busy and session.result is not None,
                    timeout=120_000)
    settle(qtbot)
    return window


def test_export_report_writes_the_shown_result(qtbot, estimated, tmp_path):
    assert estimated.report_action in estimated.file_menu.actions()
    assert estimated.report_action.isEnabled()
    target = tmp_path / "report.pdf"
    estimated.report_export.start(target, "letter")
    qtbot.waitUntil(target.exists, timeout=60_000)
    reader = PdfReader(target)
    loading = estimated.session.result.table("loading")[1]
    assert f"{loading.estimate:.3f}" in " ".join(p.extract_text() for p in reader.pages)
    assert "Report written" in estimated.statusBar().currentMessage()


def test_copy_table_puts_text_and_html_on_the_clipboard(qtbot, estimated):
    panel = estimated.results.parameters
    copy = next(a for a in panel.table.actions() if a.text() == "Copy table")
    assert copy.shortcut().toString() == COPY_SHORTCUT
    copy.trigger()
    mime = QGuiApplication.clipboard().mimeData()
    shown = table_rows(panel.proxy)
    lines = mime.text().splitlines()
    assert [line.split("\t") for line in lines] == shown
    assert mime.hasHtml()
    page = Page(mime.html())
    cells = [t for t in page.text if t.strip()]
    assert [c for row in shown for c in row if c] == cells
    QGuiApplication.clipboard().clear()
    panel._fill_export_menu()                                  # the Export menu copies too
    menu = panel.export_button.menu()
    next(a for a in menu.actions() if a.text() == "Copy parameters as shown").trigger()
    assert QGuiApplication.clipboard().mimeData().text().splitlines() == lines
