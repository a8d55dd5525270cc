"""The look of the results pictures in the real window: faint paths, colours, readable text.

The bundled demo is estimated in the window. A lagged path whose 95% interval (estimate ±
1.96 SE, the usual normal interval; recomputed here with scipy's quantile) includes 0 must
be drawn faint (thinnest line, lighter, same hue and dash), every other path at the width of
its standardized size; "Show all paths alike" draws them all alike. Colours are checked with
standard formulas: hue from the RGB -> HSV conversion of Python's colorsys, contrast as the
WCAG 2 ratio of relative luminances (at least 4.5:1 for normal text, common practice).
"""

from __future__ import annotations

import colorsys

import pytest
from PySide6.QtCore import Qt
from PySide6.QtGui import QColor
from PySide6.QtWidgets import QGraphicsSimpleTextItem, QGraphicsTextItem, QStyle
from scipy.stats import norm

from window_helpers import open_window, settle

from lagwise.desktop.mainwindow import PAGES
from lagwise.desktop.results.dynamics_diagram import FAINT_WORDS
from lagwise.desktop.results.palette import MIN_WIDTH, line_width, tint
from lagwise.desktop.style import NEGATIVE, PAPER, POSITIVE

TIMEOUT_MS = 120_000
Z95 = norm.ppf(0.975)        # two-sided 95% normal quantile
MIN_TEXT_PX = 10.0           # smallest comfortable on-screen text, about 7.5 pt (common practice)


def hsv(color: QColor) -> tuple[float, float, float]:
    """Hue in degrees, saturation and value of an opaque colour (colorsys)."""
    h, s, v = colorsys.rgb_to_hsv(color.redF(), color.greenF(), color.blueF())
    return 360.0 * h, s, v


def luminance(color: QColor) -> float:
    """WCAG 2 relative luminance (sRGB channels linearised)."""
    def linear(c: float) -> float:
        return c / 12.92 if c <= 0.04045 else ((c + 0.055) / 1.055) ** 2.4
    return 0.2126 * linear(color.redF()) + 0.7152 * linear(color.greenF()) + 0.0722 * linear(color.blueF())


def contrast(a: QColor, b: QColor) -> float:
    """WCAG 2 contrast ratio (L1 + 0.05) / (L2 + 0.05)."""
    high, low = sorted((luminance(a), luminance(b)), reverse=True)
    return (high + 0.05) / (low + 0.05)


def hue_gap(a: float, b: float) -> float:
    return abs((a - b + 180.0) % 360.0 - 180.0)


@pytest.fixture
def window(qtbot, lagwise_app, tmp_path, monkeypatch):
    """The window at 1280x800 with the demo estimated, on the Dynamics tab of Results."""
    monkeypatch.setenv("LAGWISE_DATA_DIR", str(tmp_path / "data"))
    win = open_window(qtbot, 1280, 800)
    win._open_demo_now()
    win.estimate_action.trigger()
    qtbot.waitUntil(lambda: not win.worker.busy and win.session.result is not None, timeout=TIMEOUT_MS)
    settle(qtbot)
    win.show_page(PAGES.index("Results"))
    win.results.tabs.setCurrentWidget(win.results.dynamics)
    settle(qtbot)
    yield win
    win.worker.wait()
    win.session.mark_saved(None)
    settle(qtbot)


def test_negative_colour_is_amber_and_readable_on_white():
    hue, saturation, _ = hsv(QColor(NEGATIVE))
    assert 25.0 <= hue <= 35.0 and saturation > 0.5
    assert contrast(QColor(NEGATIVE), QColor(PAPER)) >= 4.5
    assert contrast(QColor(POSITIVE), QColor(PAPER)) >= 4.5


def test_tint_scale_runs_orange_to_teal_through_neutral_grey():
    assert hsv(tint(0.0))[1] < 0.03                       # the midpoint is a neutral grey
    for value in (-1.0, -0.6, -0.2):
        h, s, _ = hsv(tint(value))
        assert hue_gap(h, hsv(QColor(NEGATIVE))[0]) < 2.0 and s > 0.05   # no drift to pink or red
    for value in (0.2, 0.6, 1.0):
        h, s, _ = hsv(tint(value))
        assert hue_gap(h, hsv(QColor(POSITIVE))[0]) < 2.0 and s > 0.05   # no drift to green
    # stronger values are more coloured, and the text on them stays readable
    assert hsv(tint(-0.2))[1] < hsv(tint(-0.6))[1] < hsv(tint(-1.0))[1]
    assert all(contrast(tint(v), QColor("#1f2a30")) >= 4.5 for v in (-1.0, 1.0))


def test_innovation_matrices_use_the_tint_scale(window):
    panel = window.results.innovations
    for model in (panel.correlation, panel.partial):
        for i in range(model.rowCount()):
            for j in range(model.columnCount()):
                if i == j:
                    continue
                brush = model.data(model.index(i, j), Qt.ItemDataRole.BackgroundRole)
                assert brush.color().alphaF() == 1.0   # opaque: no blend that turns orange pink
                assert brush.color() == tint(model.value(i, j))


def _expected_firm(p) -> bool:
    low, high = p.estimate - Z95 * p.se, p.estimate + Z95 * p.se
    return not low <= 0.0 <= high


def test_paths_whose_interval_includes_zero_are_faint(qtbot, window):
    panel = window.results.dynamics
    items = panel.scene.link_items()
    firm = {i.link.parameter.key: _expected_firm(i.link.parameter) for i in items}
    assert set(firm.values()) == {True, False}   # the demo has both kinds: the check can fail
    for item in items:
        p, pen = item.link.parameter, item.pen()
        full = QColor(POSITIVE if p.estimate >= 0 else NEGATIVE)
        assert (pen.style() == Qt.PenStyle.SolidLine) == (p.estimate >= 0)
        assert hue_gap(hsv(pen.color())[0], hsv(full)[0]) < 2.0
        if firm[p.key]:
            assert pen.color() == full and pen.widthF() == pytest.approx(line_width(p.standardized))
        else:
            assert pen.widthF() == pytest.approx(MIN_WIDTH)
            assert luminance(pen.color()) > luminance(full) + 0.1   # clearly lighter
    texts = [t.text() for t in panel.scene.items() if isinstance(t, QGraphicsSimpleTextItem)]
    assert FAINT_WORDS in texts

    panel.alike_box.setChecked(True)
    settle(qtbot)
    for item in panel.scene.link_items():
        p = item.link.parameter
        assert item.pen().color() == QColor(POSITIVE if p.estimate >= 0 else NEGATIVE)
        assert item.pen().widthF() == pytest.approx(line_width(p.standardized))
    assert FAINT_WORDS not in [t.text() for t in panel.scene.items() if isinstance(t, QGraphicsSimpleTextItem)]


def _smallest_text_px(view) -> float:
    scene = view.scene()
    sizes = [t.font().pointSizeF() for t in scene.items()
             if isinstance(t, (QGraphicsSimpleTextItem, QGraphicsTextItem))]
    return min(sizes) * view.logicalDpiY() / 72.0 * view.transform().m11()


def test_diagram_text_stays_readable_at_1280(qtbot, window, artifacts):
    results = window.results
    for panel in (results.dynamics, results.innovations):
        results.tabs.setCurrentWidget(panel)
        settle(qtbot)
        window.grab().save(str(artifacts / f"diagram-look-{panel.name}-1280x800.png"))
        assert _smallest_text_px(panel.diagram_view) >= MIN_TEXT_PX - 0.01


def test_export_button_leaves_room_for_its_menu_arrow(window):
    button = window.results.dynamics.export_button
    style = button.style()
    text = button.fontMetrics().horizontalAdvance(button.text())
    arrow = style.pixelMetric(QStyle.PixelMetric.PM_MenuButtonIndicator, None, button)
    margins = 2 * style.pixelMetric(QStyle.PixelMetric.PM_ButtonMargin, None, button)
    assert button.menu() is not None
    assert button.width() >= text + arrow + margins


def test_the_hover_hint_is_on_screen_but_not_in_pictures(lagwise_app, qtbot):
    # a picture (export, report) cannot be hovered: the hint belongs to the window only
    from lagwise.desktop.export import svg_bytes
    from lagwise.desktop.results.dynamics_diagram import DynamicsDiagram
    from results_fixture import demo_result

    scene = DynamicsDiagram()
    scene.show_result(demo_result())
    on_screen = [i.toPlainText() for i in scene.items() if hasattr(i, "toPlainText")]
    assert any(t.startswith("Hover over a path") for t in on_screen)
    picture = svg_bytes(scene).decode("utf-8")
    assert "Hover" not in picture and "Arrows: the state at t-1" in picture
    assert all(item.isVisible() for item in scene.items())   # shown again after the picture
