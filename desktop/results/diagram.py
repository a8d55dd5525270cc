"""A path diagram of states: circles, arrows or lines between them, loops on a state.

Drawing only: every value, label and tooltip arrives ready in `Link`s built by the views.
States sit on a circle; an arrow between two states that have paths both ways is curved,
so the two never overlap. Colour and dash follow the sign, width the standardized size
(desktop/results/palette.py); a link that is not `firm` is drawn faint and beneath the firm ones.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

from PySide6.QtCore import QPointF, QRectF, Qt, Signal
from PySide6.QtGui import QBrush, QColor, QFont, QFontMetricsF, QPainter, QPainterPath, QPainterPathStroker, QPen, QPolygonF
from PySide6.QtWidgets import (QGraphicsEllipseItem, QGraphicsItem, QGraphicsPathItem, QGraphicsPolygonItem,
                               QGraphicsRectItem, QGraphicsScene, QGraphicsSimpleTextItem, QGraphicsTextItem,
                               QGraphicsView)

from lagwise.desktop.results.palette import LABEL_FILL, NEUTRAL, NODE_FILL, effect_pen, line_width, sign_color
from lagwise.desktop.style import INK, plain
from lagwise.models.results import Parameter

NODE_GAP = 250.0          # distance between neighbouring states on the circle
LABEL_POINT_SIZE = 11.0
LABEL_SPOTS = (0.5, 0.42, 0.58, 0.34, 0.66, 0.27, 0.73)  # fractions of a line's length
LEGEND_WIDTH = 210.0
MIN_TEXT_PX = 10.0        # smallest on-screen text size the view allows (common practice: about 10 px)


@dataclass(frozen=True)
class Node:
    """A state: its name, an optional second line, and its hover text."""

    name: str
    caption: str = ""
    tooltip: str = ""


@dataclass(frozen=True)
class Link:
    """A path between two states (a loop when source == target).

    value: the signed engine number that picks colour and dash; size: the standardized
    size that sets the width; label: the text on the line; firm: False draws it faint (the
    views set it from the engine's 95% interval).
    """

    source: str
    target: str
    value: float
    size: float | None
    label: str
    tooltip: str
    directed: bool = True
    parameter: Parameter | None = None
    firm: bool = True


class LinkItem(QGraphicsPathItem):
    """The drawn line of one Link; its arrowhead and label are child items."""

    def __init__(self, link: Link):
        super().__init__()
        self.link = link
        self.setPen(effect_pen(link.value, link.size, link.firm))
        self.setToolTip(plain(link.tooltip))
        self.setZValue(1 if link.firm else 0.5)
        self.label_item: QGraphicsRectItem | None = None

    def shape(self) -> QPainterPath:
        """A generous hover area (at least 12 px wide) around the line."""
        stroker = QPainterPathStroker()
        stroker.setWidth(max(12.0, self.pen().widthF() + 6.0))
        return stroker.createStroke(self.path())


def _unit(p: QPointF) -> QPointF:
    length = math.hypot(p.x(), p.y())
    return QPointF(0.0, -1.0) if length < 1e-9 else QPointF(p.x() / length, p.y() / length)


def _rotate(p: QPointF, degrees: float) -> QPointF:
    a = math.radians(degrees)
    return QPointF(p.x() * math.cos(a) - p.y() * math.sin(a), p.x() * math.sin(a) + p.y() * math.cos(a))


def _overlap(a: QRectF, b: QRectF) -> float:
    both = a.intersected(b)
    return 0.0 if both.isEmpty() else both.width() * both.height()


def layout(names: Sequence[str]) -> dict[str, QPointF]:
    """States evenly on a circle: an odd count with one on top, an even count level."""
    k = len(names)
    if k == 1:
        return {names[0]: QPointF(0.0, 0.0)}
    radius = NODE_GAP / (2.0 * math.sin(math.pi / k))
    start = -90.0 if k % 2 else -90.0 - 180.0 / k
    return {n: QPointF(radius * math.cos(math.radians(start + 360.0 * i / k)),
                       radius * math.sin(math.radians(start + 360.0 * i / k)))
            for i, n in enumerate(names)}


class DiagramScene(QGraphicsScene):
    """Scene holding one diagram; `draw` replaces its content and emits `redrawn`."""

    redrawn = Signal()

    def __init__(self, parent=None):
        super().__init__(parent)
        self.setBackgroundBrush(QBrush(QColor("white")))
        self._font = QFont()
        self._font.setPointSizeF(LABEL_POINT_SIZE)
        self._links: list[LinkItem] = []
        self._hints: list[QGraphicsItem] = []   # legend lines shown on screen only

    def link_items(self) -> list[LinkItem]:
        return list(self._links)

    def draw(self, nodes: Sequence[Node], links: Sequence[Link], title: str = "",
             legend: Sequence[str] = (), message: str = "",
             width_words: str = "width by standardized size:", faint_words: str = "",
             hint: str = "") -> None:
        """Draw states, links, a title above and a legend at the right; `message` notes absent
        links; `faint_words` (when given) explains the faint links in the legend; `hint` (how
        to use the diagram on screen) ends the legend in the window but not in pictures."""
        self.clear()
        self._links = []
        self._hints = []
        names = [n.name for n in nodes]
        positions = layout(names)
        radius = self._node_radius(nodes)
        centre = QPointF(sum(p.x() for p in positions.values()) / len(names),
                         sum(p.y() for p in positions.values()) / len(names)) if names else QPointF()
        pairs = {(l.source, l.target) for l in links}
        between = []
        for link in links:
            if link.source == link.target:
                self._add_loop(link, positions[link.source], radius, centre, len(names))
            else:
                curved = link.directed and (link.target, link.source) in pairs
                between.append(self._add_link(link, positions[link.source], positions[link.target],
                                              radius, curved))
        self._place_labels(between, [QRectF(p.x() - radius, p.y() - radius, 2 * radius, 2 * radius)
                                     for p in positions.values()])
        for node in nodes:
            self._add_node(node, positions[node.name], radius)
        body = self.itemsBoundingRect()
        if message:
            text = self._text(message, italic=True)
            text.setPos(body.center().x() - text.boundingRect().width() / 2, body.bottom() + 24)
            body = self.itemsBoundingRect()
        if title:
            text = self._text(title, bold=True, scale=1.1)
            text.setPos(body.center().x() - text.boundingRect().width() / 2,
                        body.top() - text.boundingRect().height() - 14)
        if legend:
            self._add_legend(legend, width_words, faint_words, self.itemsBoundingRect(), hint)
        self.setSceneRect(self.itemsBoundingRect().adjusted(-24, -20, 24, 20))
        self.redrawn.emit()

    # ----- pieces ------------------------------------------------------------------------
    def _node_radius(self, nodes: Sequence[Node]) -> float:
        bold = QFont(self._font)
        bold.setPointSizeF(LABEL_POINT_SIZE * 1.15)
        bold.setBold(True)
        widths = [QFontMetricsF(bold).horizontalAdvance(n.name) for n in nodes]
        widths += [QFontMetricsF(self._font).horizontalAdvance(n.caption) for n in nodes]
        return max(46.0, max(widths, default=0.0) / 2.0 + 16.0)

    def _text(self, text: str, bold: bool = False, italic: bool = False, scale: float = 1.0,
              color: str = INK) -> QGraphicsSimpleTextItem:
        item = QGraphicsSimpleTextItem(text)
        font = QFont(self._font)
        font.setPointSizeF(LABEL_POINT_SIZE * scale)
        font.setBold(bold)
        font.setItalic(italic)
        item.setFont(font)
        item.setBrush(QBrush(QColor(color)))
        self.addItem(item)
        return item

    def _add_node(self, node: Node, at: QPointF, radius: float) -> None:
        circle = QGraphicsEllipseItem(QRectF(-radius, -radius, 2 * radius, 2 * radius))
        circle.setPos(at)
        circle.setBrush(QBrush(QColor(NODE_FILL)))
        circle.setPen(QPen(QColor(INK), 1.6))
        circle.setZValue(2)
        circle.setToolTip(plain(node.tooltip or node.name))
        self.addItem(circle)
        name = self._text(node.name, bold=True, scale=1.15)
        name.setParentItem(circle)
        nr = name.boundingRect()
        if node.caption:
            caption = self._text(node.caption, color=NEUTRAL)
            caption.setParentItem(circle)
            cr = caption.boundingRect()
            total = nr.height() + cr.height()
            name.setPos(-nr.width() / 2, -total / 2)
            caption.setPos(-cr.width() / 2, -total / 2 + nr.height())
        else:
            name.setPos(-nr.width() / 2, -nr.height() / 2)

    def _place_labels(self, items: Sequence[LinkItem], nodes: Sequence[QRectF]) -> None:
        """Put each label on its line where it covers the fewest other labels and states.

        Strong paths choose first; each tries spots along its line from the middle outwards.
        """
        taken = [i.label_item.sceneBoundingRect() for i in self._links if i.label_item is not None]
        obstacles = [n.adjusted(8, 8, -8, -8) for n in nodes]
        for item in sorted(items, key=lambda i: -abs(i.link.size or 0.0)):
            box = self._add_label(item, QPointF())
            shape = box.rect()
            best, best_cost = QPointF(), math.inf
            for t in LABEL_SPOTS:
                at = item.path().pointAtPercent(t)
                rect = shape.translated(at)
                cost = sum(_overlap(rect, r) for r in taken) + sum(_overlap(rect, r) for r in obstacles)
                if cost < best_cost:
                    best, best_cost = at, cost
                if cost == 0.0:
                    break
            box.setPos(best)
            taken.append(shape.translated(best))

    def _add_label(self, item: LinkItem, at: QPointF, outward: QPointF | None = None) -> QGraphicsRectItem:
        """The value in a small box on the line (or, with `outward`, just beyond a loop)."""
        text = QGraphicsSimpleTextItem(item.link.label)
        text.setFont(self._font)
        text.setBrush(QBrush(QColor(INK if item.link.firm else NEUTRAL)))
        tr = text.boundingRect()
        box = QGraphicsRectItem(QRectF(-tr.width() / 2 - 4, -tr.height() / 2 - 1, tr.width() + 8, tr.height() + 2))
        box.setBrush(QBrush(QColor(LABEL_FILL)))
        box.setPen(QPen(sign_color(item.link.value, item.link.firm), 0.8))
        if outward is not None:
            reach = abs(outward.x()) * (tr.width() / 2 + 4) + abs(outward.y()) * (tr.height() / 2 + 1)
            at = at + outward * (reach + item.pen().widthF() / 2 + 3)
        box.setPos(at)
        box.setZValue(3)
        box.setToolTip(plain(item.link.tooltip))
        text.setParentItem(box)
        text.setPos(-tr.width() / 2, -tr.height() / 2)
        self.addItem(box)
        item.label_item = box
        return box

    def _add_head(self, item: LinkItem, tip: QPointF, direction: QPointF, length: float) -> None:
        normal = QPointF(-direction.y(), direction.x())
        base = tip - direction * length
        head = QGraphicsPolygonItem(QPolygonF([tip, base + normal * (length * 0.45),
                                               base - normal * (length * 0.45)]))
        color = item.pen().color()
        head.setBrush(QBrush(color))
        head.setPen(QPen(color, 1.0))
        head.setParentItem(item)

    def _add_link(self, link: Link, a: QPointF, b: QPointF, radius: float, curved: bool) -> LinkItem:
        """A straight (or, for paths both ways, curved) line from circle to circle; no label yet."""
        item = LinkItem(link)
        along = _unit(b - a)
        normal = QPointF(-along.y(), along.x())
        distance = math.hypot((b - a).x(), (b - a).y())
        middle = (a + b) / 2
        control = middle + normal * (0.24 * distance) if curved else middle
        start = a + _unit(control - a) * (radius + 3)
        tip = b + _unit(control - b) * (radius + 3)
        path = QPainterPath(start)
        end = tip
        if link.directed:
            head = 10.0 + 1.6 * line_width(link.size)
            direction = _unit(tip - control)
            end = tip - direction * (head * 0.85)
            self._add_head(item, tip, direction, head)
        path.quadTo(control, end)
        item.setPath(path)
        self.addItem(item)
        self._links.append(item)
        return item

    def _add_loop(self, link: Link, at: QPointF, radius: float, centre: QPointF, k: int) -> None:
        item = LinkItem(link)
        out = QPointF(0.0, -1.0) if k == 1 else _unit(at - centre)
        start = at + _rotate(out, -40) * (radius + 2)
        tip = at + _rotate(out, 40) * (radius + 3)
        c1 = at + _rotate(out, -26) * (radius * 2.5)
        c2 = at + _rotate(out, 26) * (radius * 2.5)
        head = 10.0 + 1.6 * line_width(link.size)
        direction = _unit(tip - c2)
        end = tip - direction * (head * 0.85)
        self._add_head(item, tip, direction, head)
        path = QPainterPath(start)
        path.cubicTo(c1, c2, end)
        item.setPath(path)
        self.addItem(item)
        self._links.append(item)
        apex = start * 0.125 + c1 * 0.375 + c2 * 0.375 + end * 0.125
        self._add_label(item, apex, outward=out)

    def render(self, painter, target=QRectF(), source=QRectF(),
               mode=Qt.AspectRatioMode.KeepAspectRatio) -> None:
        """The scene as a picture (exports, the report): without the on-screen hint."""
        for item in self._hints:
            item.hide()
        try:
            super().render(painter, target, source, mode)
        finally:
            for item in self._hints:
                item.show()

    def _add_legend(self, lines: Sequence[str], width_words: str, faint_words: str, body: QRectF,
                    hint: str = "") -> None:
        """A legend column right of the diagram: sign samples, width samples, the faint samples
        (with `faint_words`), then `lines` and the `hint`."""
        x = body.right() + 48
        y = 0.0
        column: list[QGraphicsItem] = []

        def sample(value: float, size: float, words: str, firm: bool = True) -> None:
            nonlocal y
            text = self._text(words)
            height = text.boundingRect().height()
            column.append(self._legend_line(x, y + height / 2, value, size, firm, length=44))
            text.setPos(x + 54, y)
            column.append(text)
            y += height + 6

        sample(0.3, 0.3, "positive (solid)")
        sample(-0.3, 0.3, "negative (dashed)")
        y += 8
        heading = self._text(width_words)
        heading.setPos(x, y)
        column.append(heading)
        y += heading.boundingRect().height() + 4
        for size in (0.1, 0.3, 0.5):
            sample(1.0, size, f"{size:.1f}")
        if faint_words:
            y += 8
            heading = self._text(faint_words)
            heading.setPos(x, y)
            column.append(heading)
            y += heading.boundingRect().height() + 4
            sample(0.3, 0.3, "positive", firm=False)
            sample(-0.3, 0.3, "negative", firm=False)
        y += 10
        for line in (*lines, hint) if hint else lines:
            text = QGraphicsTextItem()
            text.setFont(self._font)
            text.setDefaultTextColor(QColor(NEUTRAL))
            text.setTextWidth(LEGEND_WIDTH)
            text.setPlainText(line)
            text.setPos(x - 4, y)
            self.addItem(text)
            column.append(text)
            y += text.boundingRect().height() + 2
        if hint:
            self._hints.append(column[-1])
        shift = body.center().y() - y / 2
        for item in column:
            item.moveBy(0.0, shift)

    def _legend_line(self, x: float, y: float, value: float, size: float, firm: bool = True,
                     length: float = 52) -> QGraphicsPathItem:
        path = QPainterPath(QPointF(x, y))
        path.lineTo(x + length, y)
        item = QGraphicsPathItem(path)
        item.setPen(effect_pen(value, size, firm))
        self.addItem(item)
        return item


class DiagramView(QGraphicsView):
    """Shows a DiagramScene scaled to fit (never enlarged beyond 1.25x, never shrunk so far that
    its text is smaller than MIN_TEXT_PX on screen: then it scrolls)."""

    def __init__(self, scene: DiagramScene, parent=None):
        super().__init__(scene, parent)
        self.setRenderHint(QPainter.RenderHint.Antialiasing)
        self.setRenderHint(QPainter.RenderHint.TextAntialiasing)
        self.setFrameShape(QGraphicsView.Shape.StyledPanel)
        self.setBackgroundBrush(QBrush(QColor("white")))
        self.setMinimumSize(320, 220)   # leaves the table below room at 1280x800 (it scrolls)
        scene.redrawn.connect(self.fit)

    def fit(self) -> None:
        rect = self.scene().sceneRect()
        if rect.isEmpty():
            return
        view = self.viewport().rect()
        fitted = min(view.width() / rect.width(), view.height() / rect.height(), 1.25)
        smallest = MIN_TEXT_PX / (LABEL_POINT_SIZE * self.logicalDpiY() / 72.0)
        scale = max(fitted, smallest)
        policy = (Qt.ScrollBarPolicy.ScrollBarAsNeeded if fitted < smallest
                  else Qt.ScrollBarPolicy.ScrollBarAlwaysOff)
        self.setHorizontalScrollBarPolicy(policy)
        self.setVerticalScrollBarPolicy(policy)
        self.resetTransform()
        self.scale(scale, scale)
        self.centerOn(rect.center())

    def resizeEvent(self, event) -> None:
        super().resizeEvent(event)
        self.fit()

    def showEvent(self, event) -> None:
        super().showEvent(event)
        self.fit()
