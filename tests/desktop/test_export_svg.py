"""SVG pictures keep the size the widget has on screen.

QSvgGenerator assumes 72 dots per inch unless told otherwise, while widgets are laid out at
the screen's logical resolution (96 on the usual desktop and offscreen): text set in points
then came out about a quarter smaller than the boxes around it. The checks use the standard
unit definitions (1 inch = 25.4 mm = 72 pt; SVG user units in the viewBox are the
widget's pixels).
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET

import pytest
from PySide6.QtGui import QFont, QGuiApplication
from PySide6.QtWidgets import QGraphicsScene, QGraphicsView, QLabel

from lagwise.desktop.export import DEFAULT_DPI, save_scene_svg, svg_resolution


def declared(path) -> tuple[float, float, list[float]]:
    """(width in mm, height in mm, viewBox numbers) of an SVG file."""
    root = ET.parse(path).getroot()
    width, height = root.get("width"), root.get("height")
    assert width.endswith("mm") and height.endswith("mm")
    return float(width[:-2]), float(height[:-2]), [float(v) for v in root.get("viewBox").split()]


def test_svg_declares_the_widgets_size_and_keeps_text_in_proportion(qtbot, lagwise_app, tmp_path):
    label = QLabel("Inertia of tension")
    font = QFont(label.font())
    font.setPointSizeF(12)
    label.setFont(font)
    qtbot.addWidget(label)
    label.resize(320, 90)
    label.show()
    qtbot.waitExposed(label)
    dpi = svg_resolution(label)
    assert dpi == round(label.screen().logicalDotsPerInch())
    path = save_scene_svg(label, tmp_path / "label.svg")
    width_mm, height_mm, box = declared(path)
    assert box == [0, 0, 320, 90]
    assert width_mm / 25.4 * dpi == pytest.approx(320, abs=0.01)
    assert height_mm / 25.4 * dpi == pytest.approx(90, abs=0.01)
    sizes = {float(s) for s in re.findall(r'<text[^>]*font-size="([0-9.]+)"', path.read_text())}
    assert sizes and all(s == pytest.approx(12 * dpi / 72, abs=0.01) for s in sizes)  # 12 pt


def test_scene_svg_uses_its_views_screen(qtbot, lagwise_app, tmp_path):
    scene = QGraphicsScene()
    scene.addRect(0, 0, 200, 100)
    primary = QGuiApplication.primaryScreen()                    # no view yet
    assert svg_resolution(scene) == (round(primary.logicalDotsPerInch()) if primary else DEFAULT_DPI)
    view = QGraphicsView(scene)
    qtbot.addWidget(view)
    view.show()
    qtbot.waitExposed(view)
    dpi = svg_resolution(scene)
    assert dpi == round(view.screen().logicalDotsPerInch())
    path = save_scene_svg(scene, tmp_path / "scene.svg")
    width_mm, height_mm, box = declared(path)
    rect = scene.itemsBoundingRect().adjusted(-10, -10, 10, 10)  # the picture's margin
    assert box[2:] == pytest.approx([rect.width(), rect.height()])
    assert width_mm / 25.4 * dpi == pytest.approx(round(rect.width()), abs=0.01)
