"""The Results page speaks with one voice: one warnings strip and one caution line on every tab.

The window is driven as a user drives it (the bundled demo, Estimate, the Results tabs, the
Export button, the lag-2 check's Run button). Every warning and caution compared is the
engine's (models.advice over a real fit); the demo's shortness is known from its own counts:
95 complete lag windows for 36 free parameters, fewer than the estimators' rule of about 5
per parameter (models.objective.MIN_WINDOWS_PER_PARAMETER, common practice).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from PySide6.QtCore import QRect, Qt
from PySide6.QtGui import QTextDocument
from PySide6.QtWidgets import QAbstractItemView, QFileDialog, QLabel

from lagwise.desktop.app import load_demo
from lagwise.desktop.mainwindow import PAGES, MainWindow
from lagwise.desktop.results.warnings_strip import count_words
from lagwise.models.advice import AdviceCode, all_clear, data_readiness, fit_warnings
from lagwise.models.numbers import fmt
from lagwise.models.objective import MIN_WINDOWS_PER_PARAMETER
from lagwise.models.simulate import simulate_diary
from lagwise.models.spec import make_spec
from lagwise.models.windows import lag_windows
from window_helpers import import_file, open_window, settle

TIMEOUT_MS = 120_000


def estimate(qtbot, window: MainWindow) -> None:
    window.estimate_action.trigger()
    qtbot.waitUntil(lambda: not window.worker.busy and window.session.result is not None,
                    timeout=TIMEOUT_MS)
    settle(qtbot)
    window.show_page(PAGES.index("Results"))
    settle(qtbot)


@pytest.fixture
def demo_window(qtbot, lagwise_app):
    win = open_window(qtbot, 1280, 800)
    load_demo(win.session)
    settle(qtbot)
    estimate(qtbot, win)
    yield win
    win.worker.wait()
    win.session.mark_saved(None)  # nothing to ask when the test closes it
    settle(qtbot)


def engine_warnings(window: MainWindow):
    result = window.session.result
    return fit_warnings(result, data_readiness(window.session.diary, result),
                        window.results.lag2.check)


def plain(rich: str) -> str:
    """The words of a rich-text label as the reader sees them."""
    document = QTextDocument()
    document.setHtml(rich)
    return " ".join(document.toPlainText().split())


def visible_texts(widget) -> str:
    return " ".join(label.text() for label in widget.findChildren(QLabel) if label.isVisible())


def inside(widget, window) -> bool:
    top_left = widget.mapTo(window, widget.rect().topLeft())
    return window.rect().contains(QRect(top_left, widget.size()))


# ----- one warnings strip, on every tab ---------------------------------------------------------
def test_the_demo_is_short_for_its_model_by_its_own_counts(demo_window):
    result = demo_window.session.result
    complete = lag_windows(demo_window.session.diary.select(result.items), 1).n_complete
    assert complete / result.fit.n_free < MIN_WINDOWS_PER_PARAMETER   # 95 / 36 in the demo


def test_strip_shows_the_readiness_warning_on_every_tab_and_the_fit_tab_never_says_none(demo_window):
    results = demo_window.results
    warnings = engine_warnings(demo_window)
    assert AdviceCode.DATA_READINESS in [w.code for w in warnings]
    strip = results.warnings
    assert strip.warnings == warnings
    for index in range(results.tabs.count()):
        results.tabs.setCurrentIndex(index)
        assert strip.isVisible() and inside(strip, demo_window), results.tabs.tabText(index)
        shown = strip.line.text()           # as drawn (possibly shortened at the right)
        assert shown.startswith(f"⚠ {count_words(len(warnings))}: ")
        assert strip.full_text().startswith(f"⚠ {len(warnings)} warning")
        for w in warnings:
            assert w.title in strip.full_text()
    results.tabs.setCurrentWidget(results.fit)
    assert "no warnings" not in visible_texts(demo_window).lower()


def test_each_warning_opens_to_its_explanation(qtbot, demo_window):
    strip = demo_window.results.warnings
    collapsed = strip.height()
    assert collapsed <= 2 * strip.line.fontMetrics().height() + 12   # one line when closed
    assert not strip.expanded
    qtbot.mouseClick(strip.toggle, Qt.MouseButton.LeftButton)
    settle(qtbot)
    assert strip.expanded
    text = plain(strip.details.text())
    for w in engine_warnings(demo_window):
        assert f"{w.title}. {' '.join(w.explanation.split())}" in text
    qtbot.mouseClick(strip.toggle, Qt.MouseButton.LeftButton)
    settle(qtbot, 50)
    assert not strip.expanded and strip.height() == collapsed


def test_the_lag2_checks_verdict_joins_the_strip(qtbot, lagwise_app, tmp_path, monkeypatch):
    # Known truth: the diary is simulated with a lag-2 path (tension at t-2 -> mood, 0.5), so
    # the lag-2 check of the lag-1 model indicates lag 2.
    monkeypatch.setenv("LAGWISE_DATA_DIR", str(tmp_path / "data"))
    spec = make_spec({"Tension": ["tense", "restless", "worried"],
                      "Mood": ["cheerful", "content", "relaxed"]}, lags=1)
    b2 = np.zeros((2, 2))
    b2[1, 0] = 0.5
    diary = simulate_diary(
        spec.with_lags(2), loadings=np.array([[1, 0], [.8, 0], [.9, 0], [0, 1], [0, .7], [0, .85]]),
        intercepts=np.zeros(6), unique=np.full(6, 0.4),
        lagged=[np.array([[0.4, 0.1], [0.0, 0.3]]), b2],
        innovation=np.array([[1.0, 0.3], [0.3, 1.0]]), days=30, prompts_per_day=10, seed=21)
    frame = pd.DataFrame({"day": diary.day + 1, "prompt": diary.prompt.astype(int)})
    for j, item in enumerate(diary.items):
        frame[item] = diary.values[:, j]
    path = tmp_path / "lag2.csv"
    frame.to_csv(path, index=False)
    window = open_window(qtbot, 1280, 800)
    import_file(qtbot, window, path)
    window.session.edit_spec(spec, "Build the model")
    estimate(qtbot, window)
    strip = window.results.warnings
    ready = data_readiness(window.session.diary, window.session.result)
    # every prompt answered: 30 days x 9 complete lag windows = 270 for the model's 23 free
    # parameters, above the rule of about 5 per parameter (common practice); stationary truth
    assert ready.complete_windows == 270 and window.session.result.fit.n_free == 23
    assert strip.warnings == engine_warnings(window) == ()
    assert strip.full_text() == all_clear(ready) and not strip.toggle.isVisible()
    before = len(strip.warnings)
    lag2 = window.results.lag2
    qtbot.mouseClick(lag2.run_button, Qt.MouseButton.LeftButton)
    qtbot.waitUntil(lambda: not window.worker.busy and lag2.check is not None, timeout=TIMEOUT_MS)
    settle(qtbot)
    shown = window.results.warnings.warnings
    assert lag2.check.indicated and AdviceCode.LAG2_INDICATED in [w.code for w in shown]
    assert shown == engine_warnings(window) and len(shown) > before
    window.results.tabs.setCurrentWidget(window.results.measurement)
    assert "The lag-2 check: lag 1 may not be enough" in window.results.warnings.full_text()
    window.worker.wait()
    window.session.mark_saved(None)
    settle(qtbot)


# ----- one caution line, on every tab and in every exported table --------------------------------
def test_caution_line_is_visible_on_every_tab(qtbot, demo_window):
    results = demo_window.results
    cautions = demo_window.session.result.cautions
    line = results.caution
    for index in range(results.tabs.count()):
        results.tabs.setCurrentIndex(index)
        assert line.isVisible() and inside(line, demo_window), results.tabs.tabText(index)
        shown = line.line.text().rstrip("…")
        assert shown.startswith("Caution: " + cautions[0][:40])
    qtbot.mouseClick(line.toggle, Qt.MouseButton.LeftButton)
    settle(qtbot)
    text = plain(line.details.text())
    for caution in cautions:
        assert " ".join(caution.split()) in text


@pytest.mark.parametrize("tab", ["fit", "measurement", "parameters"])
def test_exported_csv_ends_with_the_caution(qtbot, demo_window, tmp_path, monkeypatch, tab):
    panel = getattr(demo_window.results, tab)
    label, model = next(iter(panel.tables().items()))
    target = tmp_path / f"{tab}.csv"
    monkeypatch.setattr(QFileDialog, "getSaveFileName", lambda *a, **k: (str(target), ""))
    panel._ask(model, "csv", label)               # what the Export menu's action runs
    lines = target.read_text(encoding="utf-8").splitlines()
    cautions = demo_window.session.result.cautions
    assert lines[-1] == "# Caution: " + " ".join(" ".join(c.split()) for c in cautions)
    table = pd.read_csv(target, comment="#", dtype=str, keep_default_na=False)
    assert len(table) == model.rowCount()          # the comment line is skipped by readers


def test_exported_pictures_carry_the_caution_below_them(qtbot, demo_window, tmp_path, monkeypatch):
    # The PNG grows by a caption band that holds dark text; the SVG holds the caution's words.
    from PySide6.QtGui import QImage
    from lagwise.desktop.export import save_widget_png

    panel = demo_window.results.dynamics
    label, picture = next(iter(panel.pictures().items()))
    bare = tmp_path / "bare.png"
    save_widget_png(picture, bare)
    for kind in ("png", "svg"):
        target = tmp_path / f"dynamics.{kind}"
        monkeypatch.setattr(QFileDialog, "getSaveFileName", lambda *a, t=target, **k: (str(t), ""))
        panel._ask(picture, kind, label)              # what the Export menu's action runs
    plain_image, captioned = QImage(str(bare)), QImage(str(tmp_path / "dynamics.png"))
    assert captioned.width() == plain_image.width() and captioned.height() > plain_image.height()
    band = [captioned.pixelColor(x, y).lightness()
            for y in range(plain_image.height(), captioned.height(), 2)
            for x in range(0, captioned.width(), 4)]
    assert min(band) < 128                           # text was drawn in the band
    svg = (tmp_path / "dynamics.svg").read_text(encoding="utf-8")
    first_words = " ".join(demo_window.session.result.cautions[0].split()[:3])
    assert first_words.replace("'", "&apos;") in svg or first_words in svg


# ----- the exact estimator's Fit tab ----------------------------------------------------------
def test_exact_fit_tab_shows_only_what_applies(qtbot, lagwise_app):
    window = open_window(qtbot, 1280, 800)
    load_demo(window.session)
    window.session.edit_options(window.session.options.for_estimator("exact"), "Exact")
    estimate(qtbot, window)
    result = window.session.result
    assert result.fit.exact
    fit = window.results.fit
    window.results.tabs.setCurrentWidget(fit)
    model = fit.figures
    shown = {model.data(model.index(r, 0)): model.data(model.index(r, 1))
             for r in range(model.rowCount())}
    for gone in ("Degrees of freedom (df)", "Chi-square", "RMSEA", "CFI", "TLI", "SRMR",
                 "Lag windows", "p (chi-square)"):
        assert gone not in shown
    assert shown["Log-likelihood"] == fmt(result.fit.loglik)
    assert shown["AIC"] == fmt(result.fit.aic) and shown["BIC"] == fmt(result.fit.bic)
    assert shown["Answered prompts"] == fmt(result.n_windows, "int")
    assert shown["Prompts (occasions)"] == fmt(result.n_occasions, "int")
    assert "—" not in shown.values()
    assert fit.not_applicable.isVisible()
    assert "do not apply to the exact likelihood" in fit.not_applicable.text()
    assert "Estimator: exact;" not in window.result_note.text()
    assert result.options.method.short in window.result_note.text()
    window.worker.wait()
    window.session.mark_saved(None)
    settle(qtbot)


# ----- nothing clipped at the usual screen sizes -------------------------------------------------
@pytest.mark.parametrize("size", [(1280, 800), (1920, 1080)])
def test_every_tab_renders_unclipped(qtbot, demo_window, artifacts, size):
    demo_window.resize(*size)
    settle(qtbot, 20)
    results = demo_window.results
    for index in range(results.tabs.count()):
        results.tabs.setCurrentIndex(index)
        settle(qtbot, 20)
        name = results.tabs.tabText(index).lower().replace(" ", "-")
        assert demo_window.grab().save(str(artifacts / f"results-strip-{name}-{size[0]}x{size[1]}.png"))
        page = results.tabs.currentWidget()
        for label in page.findChildren(QLabel):
            if label.isVisible() and label.wordWrap() and label.text():
                assert label.height() >= label.heightForWidth(label.width()) - 2, (name, label.text()[:40])
        for view in page.findChildren(QAbstractItemView):
            if view.isVisible() and view.model() is not None and view.model().rowCount():
                rows = min(view.model().rowCount(), 3)
                assert view.viewport().height() >= rows * view.sizeHintForRow(0), name
        for strip in (results.warnings, results.caution):
            assert inside(strip, demo_window)
            assert strip.height() <= 2 * strip.line.fontMetrics().height() + 12
