"""Saving what the window shows: pictures as PNG or SVG, tables as CSV.

Every view that shows numbers can export them and every picture can be saved
(DEVELOPERS.md, "Look"). A "picture" is any QWidget (pyqtgraph plots are QWidgets too),
a QGraphicsView or a QGraphicsScene. Tables are saved from their Qt item model exactly
as the user sees them (the display text of every cell, header row first); a table of results
ends with one comment line, "# Caution: ...", the fit's cautions (read the file with
`comment="#"` in pandas, or skip the last line); a picture of results carries the same
cautions as a caption band below it.
"""

from __future__ import annotations

import csv
import io
import re
from pathlib import Path

from PySide6.QtCore import (
    QAbstractItemModel, QBuffer, QIODevice, QModelIndex, QPoint, QRectF, QSize, Qt,
)
from PySide6.QtGui import QAction, QColor, QFont, QFontMetricsF, QGuiApplication, QImage, QPainter
from PySide6.QtSvg import QSvgGenerator
from PySide6.QtWidgets import QFileDialog, QGraphicsScene, QMenu, QMessageBox, QPushButton, QWidget

from lagwise.desktop.style import plain
from lagwise.models.atomic import write_output
from lagwise.models.errors import OutputError

Picture = QWidget | QGraphicsScene
DEFAULT_DPI = 96  # the usual logical resolution of a desktop screen (common practice)


def save_widget_png(target: Picture, path: str | Path, scale: float = 2.0,
                    caption: str = "") -> Path:
    """Render a widget, view or scene into a PNG file (`scale` x its size for sharp print),
    with `caption` (if any) wrapped in a band below it.

    The file is replaced in one step (models.atomic); a failure raises one OutputError line.
    """
    path = _in_folder(path)
    if isinstance(target, QGraphicsScene):
        image = _scene_image(target, scale)
    else:
        image = _widget_image(target, scale)
    if caption:
        image = _with_caption(image, scale, caption)
    buffer = QBuffer()
    buffer.open(QIODevice.OpenModeFlag.WriteOnly)
    if not image.save(buffer, "PNG"):
        raise OutputError(f"{path}: could not draw the picture; nothing was written")
    return write_output(path, bytes(buffer.data()), "the picture")


def save_scene_svg(target: Picture, path: str | Path, title: str = "Lagwise",
                   caption: str = "") -> Path:
    """Write a scene, view or widget as a vector SVG picture (replaced in one step), with
    `caption` (if any) wrapped in a band below it."""
    path = _in_folder(path)
    data = svg_bytes(target, title, caption)
    if data is None:
        raise OutputError(f"{path}: could not draw the picture; nothing was written")
    return write_output(path, data, "the picture")


def svg_bytes(target: Picture, title: str = "Lagwise", caption: str = "") -> bytes | None:
    """A scene, view or widget as SVG text (`caption`, if any, in a band below it); None
    when it cannot be drawn."""
    rect = _picture_rect(target)
    band = _caption_height(caption, rect.width()) if caption else 0.0
    buffer = QBuffer()
    buffer.open(QIODevice.OpenModeFlag.WriteOnly)
    generator = QSvgGenerator()
    generator.setOutputDevice(buffer)
    generator.setTitle(title)
    generator.setResolution(svg_resolution(target))
    generator.setSize(QSize(max(1, round(rect.width())), max(1, round(rect.height() + band))))
    generator.setViewBox(QRectF(0, 0, rect.width(), rect.height() + band))
    painter = QPainter()
    if not painter.begin(generator):
        return None
    try:
        painter.setRenderHint(QPainter.RenderHint.Antialiasing)
        if isinstance(target, QGraphicsScene):
            target.render(painter, QRectF(0, 0, rect.width(), rect.height()), rect)
        else:
            QWidget.render(target, painter, QPoint())
        if caption:
            _draw_caption(painter, QRectF(0, rect.height(), rect.width(), band), caption)
    finally:
        painter.end()
    return bytes(buffer.data())


def svg_resolution(target: Picture | None = None) -> int:
    """Dots per inch for an SVG: the logical DPI of the target's screen (96 without one).

    QSvgGenerator assumes 72 dpi unless told; a widget painted at the screen's logical DPI
    (text in points) would then come out shrunk by 72/96 in the picture.
    """
    screen = None
    if isinstance(target, QGraphicsScene) and target.views():
        target = target.views()[0]
    if isinstance(target, QWidget):
        screen = target.screen()
    if screen is None:
        screen = QGuiApplication.primaryScreen()
    if screen is None:
        return DEFAULT_DPI
    return max(1, round(screen.logicalDotsPerInch()))


def save_picture(target: Picture, path: str | Path, caption: str = "") -> Path:
    """Save as SVG when the file name ends in .svg, otherwise as PNG (`caption` below it)."""
    if Path(path).suffix.lower() == ".svg":
        return save_scene_svg(target, path, caption=caption)
    return save_widget_png(target, path, caption=caption)


def table_rows(model: QAbstractItemModel) -> list[list[str]]:
    """The header row and every row of a table model as display text."""
    columns = model.columnCount(QModelIndex())
    header = [_text(model.headerData(c, Qt.Orientation.Horizontal, Qt.ItemDataRole.DisplayRole))
              for c in range(columns)]
    rows = [header]
    for r in range(model.rowCount(QModelIndex())):
        rows.append([_text(model.data(model.index(r, c), Qt.ItemDataRole.DisplayRole))
                     for c in range(columns)])
    return rows


def save_table_csv(model: QAbstractItemModel, path: str | Path, caution: str = "") -> Path:
    """Write a table model (as displayed, header first) to a UTF-8 CSV file, every cell made
    inert for spreadsheets (`inert_cell`), then `caution` (if any) as one unquoted line
    starting with "#", which CSV readers with a comment character skip; replaced in one step
    (models.atomic)."""
    path = _in_folder(path)
    text = io.StringIO()
    csv.writer(text).writerows([[inert_cell(cell) for cell in row] for row in table_rows(model)])
    if caution:
        text.write("# " + " ".join(caution.split()) + "\r\n")
    return write_output(path, text.getvalue(), "the table")


def inert_cell(text: str) -> str:
    """`text` with a leading apostrophe when a spreadsheet would run it as a formula.

    Spreadsheets treat a cell beginning with =, +, -, @ (or a tab or carriage return before
    one) as a formula; the usual defence is a leading apostrophe, which they show as text
    (common practice for CSV export). A plain number such as -0.25 stays a number.
    """
    if text[:1] in _FORMULA_STARTS and not _NUMBER.fullmatch(text):
        return "'" + text
    return text


def export_menu(parent: QWidget, picture: Picture | None = None,
                table_model: QAbstractItemModel | None = None, name: str = "lagwise",
                caution: str = "") -> QMenu:
    """A menu with "Save picture as PNG/SVG" and "Save numbers as CSV" actions.

    Attach it to a tool button or a context menu; `name` is the suggested file name;
    `caution` (if any) is the pictures' caption and the tables' last line.
    """
    menu = QMenu("Export", parent)
    if picture is not None:
        png = QAction("Save picture as PNG…", menu)
        png.triggered.connect(lambda: ask_and_save(parent, picture, name, "png", caution))
        svg = QAction("Save picture as SVG…", menu)
        svg.triggered.connect(lambda: ask_and_save(parent, picture, name, "svg", caution))
        menu.addAction(png)
        menu.addAction(svg)
    if table_model is not None:
        table = QAction("Save numbers as CSV…", menu)
        table.triggered.connect(lambda: ask_and_save(parent, table_model, name, "csv", caution))
        menu.addAction(table)
    return menu


def menu_button(text: str = "Export", tip: str = "") -> QPushButton:
    """A push button that opens its (initially empty) menu on click; unlike a tool button's
    corner mark, its menu arrow has room of its own beside the text."""
    button = QPushButton(text)
    button.setToolTip(tip)
    button.setMenu(QMenu(button))
    return button


# ----- helpers -----------------------------------------------------------------------
_FORMULA_STARTS = ("=", "+", "-", "@", "\t", "\r")
_NUMBER = re.compile(r"[+-]?(\d+\.?\d*|\.\d+)([eE][+-]?\d+)?")
_FILTERS = {"png": "PNG picture (*.png)", "svg": "SVG picture (*.svg)", "csv": "CSV table (*.csv)"}


def ask_and_save(parent: QWidget, target, name: str, kind: str, caution: str = "") -> None:
    """Ask for a file name (suggested `name`.`kind`), then save `target` as PNG, SVG or CSV
    (`caution` as the picture's caption or the table's last line); a failure is shown in a
    message box and nothing is written."""
    path, _ = QFileDialog.getSaveFileName(parent, "Save as", f"{name}.{kind}", _FILTERS[kind])
    if not path:
        return
    if not path.lower().endswith("." + kind):
        path += "." + kind
    try:
        if kind == "csv":
            save_table_csv(target, path, caution)
        else:
            save_picture(target, path, caution)
    except OutputError as exc:
        QMessageBox.warning(parent, "Could not save", plain(str(exc)))


def _in_folder(path: str | Path) -> Path:
    """`path`, its folder created when missing (one OutputError line when it cannot be)."""
    path = Path(path)
    try:
        path.parent.mkdir(parents=True, exist_ok=True)
    except OSError as error:
        raise OutputError(f"{path.parent}: cannot create the folder "
                          f"({error.strerror or error}); nothing was written") from error
    return path


def _picture_rect(target: Picture) -> QRectF:
    if isinstance(target, QGraphicsScene):
        return target.itemsBoundingRect().adjusted(-10, -10, 10, 10)
    size = target.size()
    return QRectF(0, 0, size.width(), size.height())


def _widget_image(widget: QWidget, scale: float) -> QImage:
    """Paint the widget (on screen or not) into an image `scale` times its size."""
    widget.ensurePolished()
    size = widget.size()
    image = QImage(max(1, round(size.width() * scale)), max(1, round(size.height() * scale)),
                   QImage.Format.Format_ARGB32_Premultiplied)
    image.setDevicePixelRatio(scale)
    image.fill(QColor("white"))
    painter = QPainter(image)
    painter.setRenderHint(QPainter.RenderHint.Antialiasing)
    QWidget.render(widget, painter, QPoint())  # the widget as shown, not only a view's scene
    painter.end()
    return image


def _scene_image(scene: QGraphicsScene, scale: float) -> QImage:
    rect = _picture_rect(scene)
    image = QImage(max(1, round(rect.width() * scale)), max(1, round(rect.height() * scale)),
                   QImage.Format.Format_ARGB32_Premultiplied)
    image.fill(QColor("white"))
    painter = QPainter(image)
    painter.setRenderHint(QPainter.RenderHint.Antialiasing)
    scene.render(painter, QRectF(0, 0, image.width(), image.height()), rect)
    painter.end()
    return image


CAPTION_PAD = 8.0          # logical pixels around the caption text
CAPTION_POINTS = 8.5      # the caption's font size
CAPTION_INK = "#4a5358"   # the muted text colour of notes


def _caption_font() -> QFont:
    font = QFont()
    font.setPointSizeF(CAPTION_POINTS)
    return font


def _caption_height(caption: str, width: float) -> float:
    """The height of the band that holds `caption` wrapped to `width` (logical pixels)."""
    box = QFontMetricsF(_caption_font()).boundingRect(
        QRectF(0, 0, max(width - 2 * CAPTION_PAD, 40.0), 1e6),
        int(Qt.TextFlag.TextWordWrap), caption)
    return box.height() + 2 * CAPTION_PAD


def _draw_caption(painter: QPainter, band: QRectF, caption: str) -> None:
    painter.fillRect(band, QColor("white"))
    painter.setFont(_caption_font())
    painter.setPen(QColor(CAPTION_INK))
    painter.drawText(band.adjusted(CAPTION_PAD, CAPTION_PAD, -CAPTION_PAD, -CAPTION_PAD),
                     int(Qt.TextFlag.TextWordWrap), caption)


def _with_caption(image: QImage, scale: float, caption: str) -> QImage:
    """`image` (made at `scale`) with a band below it holding `caption`."""
    width = image.width() / scale
    band = _caption_height(caption, width)
    out = QImage(image.width(), round(image.height() + band * scale),
                 QImage.Format.Format_ARGB32_Premultiplied)
    out.fill(QColor("white"))
    painter = QPainter(out)
    painter.setRenderHint(QPainter.RenderHint.Antialiasing)
    painter.drawImage(0, 0, image)
    painter.scale(scale, scale)
    _draw_caption(painter, QRectF(0, image.height() / scale, width, band), caption)
    painter.end()
    return out


def _text(value) -> str:
    return "" if value is None else str(value)
