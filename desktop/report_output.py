"""The report of an analysis (one run) or of a study (one model per person) as a file: HTML
with the pictures inline as SVG, or PDF.

The text comes from models.reporting (a `ReportInput` or a `StudyInput`); this module draws
the window's own diagram scenes offscreen (the lagged paths, the innovations; a study's strip
plot is SVG made in models.reporting.strips) and writes the file through
models.atomic.write_output. The PDF is Qt's own: the same HTML, laid out by a QTextDocument
on A4 or Letter pages, each page numbered, painted by QPdfWriter; the pictures are text
objects of the document that paint themselves with the page's painter, so they stay vector
graphics in the PDF; a table's header row repeats on each page and no row is split between
pages (`keep_rows_together`). `png_pages` paints the same pages into pictures.
`ReportExport` is the window's File ▸ Export report… (the input is gathered in a worker;
drawing and writing are quick).
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from pathlib import Path

from PySide6.QtCore import QBuffer, QByteArray, QIODevice, QMarginsF, QObject, QRectF, QSizeF, Qt
from PySide6.QtGui import (QColor, QImage, QPageLayout, QPageSize, QPainter, QPdfWriter,
                           QPyTextObject, QTextCharFormat, QTextCursor, QTextDocument, QTextFormat,
                           QTextTable, QTextTableCellFormat)
from PySide6.QtSvg import QSvgRenderer
from PySide6.QtWidgets import QFileDialog, QGraphicsScene, QMessageBox, QWidget

from lagwise.desktop.export import svg_bytes
from lagwise.desktop.results.dynamics_diagram import DynamicsDiagram
from lagwise.desktop.results.innovations import InnovationsPanel
from lagwise.desktop.style import plain
from lagwise.desktop.worker import Worker
from lagwise.models.atomic import write_output
from lagwise.models.errors import OutputError
from lagwise.models.lag2check import Lag2Check, lag1_version
from lagwise.models.reporting.html import Figure, report_html
from lagwise.models.reporting.source import ReportInput, report_input
from lagwise.models.reporting.study import StudyInput, strip_figure, study_html
from lagwise.models.results import FitResult

PAGE_SIZES = {"a4": QPageSize.PageSizeId.A4, "letter": QPageSize.PageSizeId.Letter}
SUFFIXES = (".html", ".pdf")
RESOLUTION = 300          # dots per inch of the PDF's layout and pictures
MARGIN_MM = 18.0
FOOTER_POINTS = 8.0       # the page number's size; the footer band is 2.5 lines of it


def report_suffix(path: str | Path) -> str:
    """".html" or ".pdf" (any case); OutputError naming the choices otherwise."""
    suffix = Path(path).suffix.lower()
    if suffix not in SUFFIXES:
        raise OutputError(f"{path}: a report is written as .html or .pdf, not "
                          f"'{suffix or 'no suffix'}'")
    return suffix


Source = ReportInput | StudyInput   # an analysis (one run) or a study (one model per person)


def write_report(inp: Source, path: str | Path, page_size: str = "a4") -> Path:
    """Write the report of `inp` to `path` (HTML or PDF by its suffix), replaced in one step."""
    if report_suffix(path) == ".html":
        data = (study_html(inp) if isinstance(inp, StudyInput) else
                report_html(inp, svg_figures(inp.result))).encode("utf-8")
    else:
        data, _ = pdf_bytes(inp, page_size)
    return write_output(path, data, "the report")


# ----- diagrams ------------------------------------------------------------------------------
def diagram_scenes(result: FitResult) -> list[tuple[str, QGraphicsScene, QObject]]:
    """(caption, scene, owner) of every diagram the Results tabs draw for `result`; keep the
    owner alive while the scene is used."""
    out = []
    for lag in range(1, result.spec.lags + 1):
        scene = DynamicsDiagram()
        scene.show_result(result, lag)
        words = "Lag-1 dynamics" if lag == 1 else "Lag-2 paths"
        out.append((f"{words}: standardized effects; faint paths have a 95% interval that "
                    "includes 0.", scene, scene))
    panel = InnovationsPanel()
    panel.show_result(result)
    out.append(("Innovation correlations; inside each circle the innovation variance.",
                panel.scene, panel))
    return out


def svg_figures(result: FitResult) -> list[Figure]:
    """The diagrams as inline SVG (vector) figures."""
    figures = []
    for caption, scene, _owner in diagram_scenes(result):
        data = svg_bytes(scene, title=caption)
        if data is not None:
            text = data.decode("utf-8")
            figures.append(Figure(caption, text[text.index("<svg"):]))
    return figures


@dataclass(frozen=True, eq=False)
class Drawing:
    """A picture of the report that paints itself with any painter (vector in a PDF): its
    caption, its own extent, how to paint it into a rectangle, and what keeps it alive."""

    caption: str
    source: QRectF
    paint: Callable[[QPainter, QRectF], None]
    owner: object = None


def scene_drawing(caption: str, scene: QGraphicsScene, owner: object) -> Drawing:
    source = scene.itemsBoundingRect().adjusted(-10, -10, 10, 10)
    return Drawing(caption, source, lambda painter, rect: scene.render(painter, rect, source),
                   owner)


def svg_drawing(caption: str, svg: str) -> Drawing:
    renderer = QSvgRenderer(QByteArray(svg.encode("utf-8")))
    return Drawing(caption, QRectF(renderer.viewBoxF()), renderer.render, renderer)


def drawings(inp: Source) -> list[Drawing]:
    """The pictures of a report: the result's diagrams, or the study's strip plot."""
    if isinstance(inp, StudyInput):
        figure = strip_figure(inp.across)
        return [] if figure is None else [svg_drawing(figure.caption, figure.markup)]
    return [scene_drawing(*entry) for entry in diagram_scenes(inp.result)]


SCENE_OBJECT = QTextFormat.ObjectTypes.UserObject + 1
SCENE_PROPERTY = QTextFormat.Property.UserProperty + 1   # which drawing a text object paints


class _DrawingObjects(QPyTextObject):
    """The pictures inside the report's text: each text object of type SCENE_OBJECT takes
    `width` writer pixels and paints its drawing wherever the page is painted."""

    def __init__(self, pictures: list[Drawing], width: float) -> None:
        super().__init__()
        self._pictures = pictures
        self._width = width

    def intrinsicSize(self, _doc, _pos, fmt) -> QSizeF:  # noqa: N802 (Qt's name)
        source = self._pictures[int(fmt.property(SCENE_PROPERTY))].source
        return QSizeF(self._width, self._width * source.height() / max(source.width(), 1.0))

    def drawObject(self, painter, rect, _doc, _pos, fmt) -> None:  # noqa: N802 (Qt's name)
        painter.save()
        painter.setRenderHint(QPainter.RenderHint.Antialiasing)
        painter.setRenderHint(QPainter.RenderHint.TextAntialiasing)
        self._pictures[int(fmt.property(SCENE_PROPERTY))].paint(painter, rect)
        painter.restore()


def _objects_for_pictures(document: QTextDocument) -> None:
    """Replace each placeholder picture `scene-N` of the laid-out HTML by text object N."""
    places = []
    block = document.begin()
    while block.isValid():
        it = block.begin()
        while not it.atEnd():
            fragment = it.fragment()
            fmt = fragment.charFormat()
            if fmt.isImageFormat() and fmt.toImageFormat().name().startswith("scene-"):
                places.append((fragment.position(), int(fmt.toImageFormat().name()[6:])))
            it += 1
        block = block.next()
    for position, n in places:
        cursor = QTextCursor(document)
        cursor.setPosition(position)
        cursor.setPosition(position + 1, QTextCursor.MoveMode.KeepAnchor)
        fmt = QTextCharFormat()
        fmt.setObjectType(SCENE_OBJECT)
        fmt.setProperty(SCENE_PROPERTY, n)
        cursor.insertText("\ufffc", fmt)


# ----- pages ---------------------------------------------------------------------------------
def tables(document: QTextDocument) -> list[QTextTable]:
    """The document's tables, in document order."""
    found, frames = [], list(reversed(document.rootFrame().childFrames()))
    while frames:
        frame = frames.pop()
        if isinstance(frame, QTextTable):
            found.append(frame)
        frames += reversed(frame.childFrames())
    return found


def row_extent(document: QTextDocument, table: QTextTable, row: int) -> tuple[float, float]:
    """(top, bottom) of a table row's text in the paged document's coordinates."""
    layout = document.documentLayout()
    cells = [table.cellAt(row, c) for c in range(table.columns())]
    return (min(layout.blockBoundingRect(c.firstCursorPosition().block()).top() for c in cells),
            max(layout.blockBoundingRect(c.lastCursorPosition().block()).bottom() for c in cells))


def keep_rows_together(document: QTextDocument) -> None:
    """Move every table row that would start on one page and end on the next wholly to the
    next page (below the repeated header): Qt's layout breaks a row between its lines, but
    carries a row over whole once its top padding grows; the smallest growth that does (8,
    16, 32, ... pixels, under a millimetre to start with) is kept. One pass in document
    order over the tables that cross a page (a change moves only what follows it; a row
    taller than a page stays split)."""
    height = document.pageSize().height()
    layout = document.documentLayout()
    for table in tables(document):
        frame = layout.frameBoundingRect(table)
        if frame.top() // height == (frame.bottom() - 1.0) // height:
            continue
        for row in range(table.format().headerRowCount(), table.rows()):
            if not _straddles(document, table, row, height):
                continue
            cells = [table.cellAt(row, c) for c in range(table.columns())]
            base = [cell.format().toTableCellFormat() for cell in cells]
            extra = 8.0
            while extra < height:
                edit = QTextCursor(document)
                edit.beginEditBlock()            # one layout for the whole row
                for cell, fmt in zip(cells, base):
                    grown = QTextTableCellFormat(fmt)
                    grown.setTopPadding(fmt.topPadding() + extra)
                    cell.setFormat(grown)
                edit.endEditBlock()
                if not _straddles(document, table, row, height):
                    break
                extra *= 2.0


def _straddles(document: QTextDocument, table: QTextTable, row: int, height: float) -> bool:
    """The row starts on one page and ends on another, though it would fit on one."""
    top, bottom = row_extent(document, table, row)
    return top // height != (bottom - 1.0) // height and bottom - top < 0.9 * height


class Pages:
    """The report laid out on pages of `page_size` for a QPdfWriter writing into memory."""

    def __init__(self, inp: Source, page_size: str = "a4") -> None:
        if page_size not in PAGE_SIZES:
            raise OutputError(f"unknown page size '{page_size}' (choose {' or '.join(PAGE_SIZES)})")
        self.buffer = QBuffer()
        self.buffer.open(QIODevice.OpenModeFlag.WriteOnly)
        self.writer = QPdfWriter(self.buffer)
        self.writer.setResolution(RESOLUTION)
        self.writer.setTitle(inp.title if isinstance(inp, StudyInput) else
                             f"Lagwise report: {inp.title}")
        self.writer.setCreator("Lagwise")
        self.writer.setPageLayout(QPageLayout(
            QPageSize(PAGE_SIZES[page_size]), QPageLayout.Orientation.Portrait,
            QMarginsF(MARGIN_MM, MARGIN_MM, MARGIN_MM, MARGIN_MM), QPageLayout.Unit.Millimeter))
        layout = self.writer.pageLayout()
        self.full = QRectF(layout.fullRectPixels(RESOLUTION))
        self.paint = QRectF(layout.paintRectPixels(RESOLUTION))
        self.footer = 2.5 * FOOTER_POINTS * RESOLUTION / 72    # writer pixels (72 points an inch)
        self.document = QTextDocument()
        self.document.documentLayout().setPaintDevice(self.writer)
        self._pictures = drawings(inp)   # kept alive with the pages
        self._objects = _DrawingObjects(self._pictures, round(self.paint.width() * 0.8))
        self.document.documentLayout().registerHandler(SCENE_OBJECT, self._objects)
        figures = [Figure(d.caption, f'<img src="scene-{n}">')
                   for n, d in enumerate(self._pictures)]
        self.document.setHtml(study_html(inp, figures) if isinstance(inp, StudyInput) else
                              report_html(inp, figures))
        _objects_for_pictures(self.document)
        self.document.setPageSize(QSizeF(self.paint.width(), self.paint.height() - self.footer))
        keep_rows_together(self.document)

    @property
    def count(self) -> int:
        return self.document.pageCount()

    def draw(self, painter: QPainter, page: int) -> None:
        """Page `page` (from 0) in the writer's pixels, the paper's corner at (0, 0)."""
        height = self.document.pageSize().height()
        painter.save()
        painter.translate(self.paint.left(), self.paint.top() - page * height)
        self.document.drawContents(painter, QRectF(0, page * height, self.paint.width(), height))
        painter.restore()
        font = painter.font()
        font.setPixelSize(round(FOOTER_POINTS * RESOLUTION / 72))
        painter.setFont(font)
        painter.setPen(QColor("#4a5358"))
        painter.drawText(QRectF(self.paint.left(), self.paint.bottom() - self.footer * 0.6,
                                self.paint.width(), self.footer * 0.6),
                         int(Qt.AlignmentFlag.AlignCenter), f"{page + 1} / {self.count}")

    def pdf(self) -> bytes:
        painter = QPainter()
        if not painter.begin(self.writer):
            raise OutputError("could not start the PDF; nothing was written")
        for page in range(self.count):
            if page:
                self.writer.newPage()
            self.draw(painter, page)
        painter.end()
        return bytes(self.buffer.data())


def pdf_bytes(inp: Source, page_size: str = "a4") -> tuple[bytes, int]:
    """The PDF report and its number of pages."""
    pages = Pages(inp, page_size)
    return pages.pdf(), pages.count


def png_pages(inp: Source, folder: str | Path, page_size: str = "a4",
              dpi: int = 100) -> list[Path]:
    """The PDF's pages painted into PNG pictures `page-1.png`, ... in `folder`."""
    pages = Pages(inp, page_size)
    scale = dpi / RESOLUTION
    out = []
    for page in range(pages.count):
        image = QImage(round(pages.full.width() * scale), round(pages.full.height() * scale),
                       QImage.Format.Format_ARGB32_Premultiplied)
        image.fill(QColor("white"))
        painter = QPainter(image)
        painter.setRenderHint(QPainter.RenderHint.Antialiasing)
        painter.scale(scale, scale)
        pages.draw(painter, page)
        painter.end()
        buffer = QBuffer()
        buffer.open(QIODevice.OpenModeFlag.WriteOnly)
        image.save(buffer, "PNG")
        out.append(write_output(Path(folder) / f"page-{page + 1}.png", bytes(buffer.data()),
                                "the page"))
    return out


# ----- the window's command ------------------------------------------------------------------
FILTERS = {"HTML report (*.html)": ("html", "a4"), "PDF report, A4 (*.pdf)": ("pdf", "a4"),
           "PDF report, Letter (*.pdf)": ("pdf", "letter")}


class ReportExport(QObject):
    """File ▸ Export report…: asks for a file (HTML, or PDF on A4 or Letter), gathers the
    report's input in a worker of its own, then draws and writes it."""

    def __init__(self, window: QWidget, session, lag2_check) -> None:
        super().__init__(window)
        self._window, self._session, self._lag2_check = window, session, lag2_check
        self.worker = Worker(self)
        self.worker.done.connect(self._gathered)
        self.worker.error.connect(self._failed)
        self._target: tuple[Path, str] | None = None

    def ask(self) -> None:
        suggested = f"{self._session.name}-report.html"
        path, chosen = QFileDialog.getSaveFileName(self._window, "Export report", suggested,
                                                   ";;".join(FILTERS))
        if not path:
            return
        kind, page_size = FILTERS.get(chosen, ("html", "a4"))
        if Path(path).suffix.lower() not in SUFFIXES:
            path += "." + kind
        self.start(path, page_size)

    def start(self, path: str | Path, page_size: str = "a4") -> None:
        """Write the report of the shown result to `path` (HTML or PDF by its suffix)."""
        result = self._session.result
        if result is None:
            QMessageBox.information(self._window, "Estimate first", "The report describes an "
                                    "estimate: press Estimate (Ctrl+E) first.")
            return
        check: Lag2Check | None = self._lag2_check()
        if check is not None and check.restricted.spec != lag1_version(result.spec):
            check = None                  # a check of another model
        self._target = (Path(path), page_size)
        self.worker.start(report_input, self._session.to_project(), check=check, job="report")

    def _gathered(self, inp: ReportInput) -> None:
        path, page_size = self._target
        try:
            write_report(inp, path, page_size)
        except OutputError as exc:
            QMessageBox.warning(self._window, "Could not write the report", plain(str(exc)))
            return
        self._window.statusBar().showMessage(f"Report written to {path}.", 15000)

    def _failed(self, message: str, *_details) -> None:
        QMessageBox.warning(self._window, "Could not make the report", plain(message))
