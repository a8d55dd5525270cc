"""The built-in guide: shipped with the package, a section for every page, estimator, warning
and fit figure, every cited method in the reference list, and opened at the right section by
F1 and by the "?" beside each title."""

from __future__ import annotations

import re
import tomllib
from fnmatch import fnmatch
from pathlib import Path

import pytest
from PySide6.QtCore import QPoint, Qt
from PySide6.QtWidgets import QToolButton

from lagwise.desktop.guide import RESULTS_SECTIONS
from lagwise.desktop.mainwindow import PAGE_SECTIONS, PAGES, MainWindow
from lagwise.models.estimators import ESTIMATORS
from lagwise.models.flags import FlagCode
from lagwise.resources import guide_html
from results_fixture import demo_result
from window_helpers import settle

ROOT = Path(__file__).resolve().parents[2]
GUIDE = guide_html()
TEXT = " ".join(GUIDE.split())          # one line: citations may break across lines
ANCHORS = set(re.findall(r'<a name="([^"]+)"></a>', GUIDE))
BODY, REFERENCES = TEXT.split('<a name="references">')
FIT_FIGURES = ("chi-square", "rmsea", "cfi", "tli", "srmr", "loglik", "aic", "spectral-radius")


def test_the_guide_ships_with_the_package():
    data = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
    patterns = data["tool"]["setuptools"]["package-data"]["lagwise.resources"]
    assert any(fnmatch("guide.html", pattern) for pattern in patterns)
    assert (ROOT / "resources" / "guide.html").read_text(encoding="utf-8") == GUIDE


def test_the_guide_explains_every_page_estimator_warning_and_fit_figure():
    wanted = {*PAGE_SECTIONS, *RESULTS_SECTIONS.values(), "model", "references",
              *(f"estimator-{name}" for name in ESTIMATORS),
              *(f"warning-{code}" for code in FlagCode if code != FlagCode.UNKNOWN),
              *(f"fit-{figure}" for figure in FIT_FIGURES)}
    assert wanted - ANCHORS == set()
    links = set(re.findall(r'<a href="#([^"]+)">', GUIDE))
    assert links and links <= ANCHORS


def test_every_cited_method_is_in_the_reference_list():
    # citations read "Author, 1985", "Author and Author, 1994" or "Author, Author and Author, 1992"
    cited = set(re.findall(r"([A-Z][a-zü]+)(?:(?:, | and )[A-Z][a-zü]+)*, (\d{4})\b", BODY))
    assert len(cited) > 20
    entries = re.findall(r"<li>(.*?)</li>", REFERENCES)
    for author, year in cited:
        assert any(e.startswith(author) and f"({year})" in e for e in entries), (author, year)
    for entry in entries:        # author, (year), title
        assert re.match(r"[A-Z][^()]+ \(\d{4}\)\. [A-Z].+\.$", entry), entry


def test_the_guide_is_plain_and_safe():
    lowered = GUIDE.lower()
    for tag in ("<script", "<img", "<iframe", "<object", "<link", "<style", "http:", "https:",
                "file:", "javascript:"):
        assert tag not in lowered


@pytest.fixture
def window(lagwise_app, qtbot):
    win = MainWindow()
    qtbot.addWidget(win)
    win.resize(1280, 800)
    win.show()
    qtbot.waitExposed(win)
    return win


def top_line(win: MainWindow) -> str:
    """The first line of text visible in the guide."""
    browser = win.guide.browser
    return browser.cursorForPosition(QPoint(4, 4)).block().text()


def test_help_menu_has_the_guide_on_f1(window, qtbot):
    assert window.guide_action.shortcut().toString() == "F1"
    help_menu = next(a.menu() for a in window.menuBar().actions() if a.text() == "&Help")
    assert window.guide_action in help_menu.actions()
    window.show_page(PAGES.index("States"))
    settle(qtbot)
    qtbot.keyClick(window, Qt.Key.Key_F1)
    settle(qtbot)
    assert window.guide is not None and window.guide.isVisible()
    assert window.guide.section == "states"
    assert top_line(window) == "States page"


def test_each_page_title_has_a_button_opening_its_section(window, qtbot):
    for name, page in zip(PAGES, window.pages()):
        buttons = [b for b in page.findChildren(QToolButton, "guideButton")
                   if b.parentWidget() is page or b.accessibleName() == f"Guide to the {name} page"]
        button = next(b for b in buttons if b.accessibleName() == f"Guide to the {name} page")
        window.show_page(PAGES.index(name))
        settle(qtbot)
        assert button.isVisible()
        qtbot.mouseClick(button, Qt.MouseButton.LeftButton)
        settle(qtbot)
        assert window.guide.section == PAGE_SECTIONS[PAGES.index(name)]
        assert top_line(window) == f"{name} page"


def test_f1_on_a_results_tab_opens_that_tabs_section(window, qtbot):
    from lagwise.desktop.app import load_demo

    load_demo(window.session)
    window.session.set_result(demo_result(), window.session.snapshot())
    settle(qtbot)
    window.show_page(PAGES.index("Results"))
    window.results.tabs.setCurrentWidget(window.results.parameters)
    settle(qtbot)
    qtbot.keyClick(window, Qt.Key.Key_F1)
    settle(qtbot)
    assert window.guide.section == "results-parameters"
    assert top_line(window) == "Parameters"
    button = window.results.innovations.findChild(QToolButton, "guideButton")
    window.results.tabs.setCurrentWidget(window.results.innovations)
    settle(qtbot)
    qtbot.mouseClick(button, Qt.MouseButton.LeftButton)
    settle(qtbot)
    assert window.guide.section == "results-innovations" and top_line(window) == "Innovations"
