"""The timeline under the Canvas: the selected person's track, one cell per frame.

It draws what :class:`app.session.timeline.Timeline` says (a
:class:`~app.session.timeline.TrackStrip`) and reports clicks, the wheel and its width; it
keeps no state of its own beyond the strip it shows.

Its marks, our own:

- a cell filled with the person's Canvas colour: the track has someone in that frame; an
  empty cell crossed by a thin dotted line: it has no one there (a gap);
- a dark red dot at the top: open findings about them there (larger for two, three or more);
- a green bar along the bottom: the Ledger has an edit of them there in effect;
- a near-black frame round the cell: the frame shown;
- a blue line through the middle: a carried correction goes there, dashed while only
  proposed, solid once taken; a blue diamond marks the corrected frame it comes from, a blue
  upright bar the frame where it ends, a small hollow blue ring the first frame beyond,
  where the error is absent;
- a chevron at either end: more frames of the sequence lie that way (click it, or turn the
  wheel, to scroll).
"""

from __future__ import annotations

from PySide6.QtCore import QEvent, QPointF, QRectF, QSize, Qt, Signal
from PySide6.QtGui import QColor, QFont, QMouseEvent, QPainter, QPaintEvent, QPen, QPolygonF
from PySide6.QtWidgets import QSizePolicy, QToolTip, QWidget

from app.session.timeline import Cell, TrackStrip
from app.wording import count

#: Height of the strip (px).
HEIGHT = 30
#: Narrowest and widest cell (px).
MIN_CELL, MAX_CELL = 12, 26
#: Width of the caption on the left and of each scroll chevron (px).
CAPTION, CHEVRON = 112, 14

BACKGROUND = QColor("#f1f1ee")
GAP = QColor("#9a9a9a")
FINDING = QColor("#a3201a")
CORRECTED = QColor("#2f7d4f")
CURRENT = QColor("#141414")
CARRIED = QColor("#1f5fb4")
TEXT = QColor("#202020")


class TrackTimeline(QWidget):
    """The strip: ``cellChosen(frame id, person id or -1)`` on a click on a cell,
    ``scrollRequested(cells)`` on the wheel or a chevron, ``resized()`` when the number of
    cells that fit may have changed."""

    cellChosen = Signal(int, int)
    scrollRequested = Signal(int)
    resized = Signal()

    def __init__(self, parent: QWidget | None = None):
        super().__init__(parent)
        self.setObjectName("TrackTimeline")
        self.setFixedHeight(HEIGHT)
        self.setSizePolicy(QSizePolicy.Policy.Expanding, QSizePolicy.Policy.Fixed)
        self.setMouseTracking(True)
        self.strip: TrackStrip | None = None
        self.colour = QColor("#56b4e9")
        self.hint = ""
        self._cell_w = float(MAX_CELL)

    # ------------------------------------------------------------------ state

    def show_strip(self, strip: TrackStrip | None, colour: QColor | None = None,
                   hint: str = "") -> None:
        """Show a strip in the person's colour; without one, the ``hint`` line."""
        self.strip = strip
        if colour is not None:
            self.colour = QColor(colour)
        self.hint = hint
        self.setToolTip("" if strip is None else strip.text)
        self.update()

    def cells_that_fit(self) -> int:
        """How many cells of the narrowest width fit beside the caption and chevrons."""
        room = self.width() - CAPTION - 2 * CHEVRON
        return max(1, room // MIN_CELL)

    def sizeHint(self) -> QSize:
        return QSize(600, HEIGHT)

    # ------------------------------------------------------------------ geometry

    def _cells_left(self) -> float:
        return float(CAPTION + CHEVRON)

    def cell_rect(self, n: int) -> QRectF:
        """Where the ``n``-th cell in view is drawn."""
        return QRectF(self._cells_left() + n * self._cell_w, 3.0, self._cell_w, HEIGHT - 6.0)

    def _layout(self) -> None:
        if self.strip is None or not self.strip.cells:
            return
        room = self.width() - CAPTION - 2 * CHEVRON
        self._cell_w = max(float(MIN_CELL), min(float(MAX_CELL), room / len(self.strip.cells)))

    def cell_at(self, x: float) -> Cell | None:
        """The cell under ``x``, if any."""
        if self.strip is None:
            return None
        self._layout()
        n = int((x - self._cells_left()) // self._cell_w)
        if x < self._cells_left() or not 0 <= n < len(self.strip.cells):
            return None
        return self.strip.cells[n]

    # ------------------------------------------------------------------ events

    def resizeEvent(self, event: object) -> None:
        super().resizeEvent(event)  # type: ignore[arg-type]
        self.resized.emit()

    def mousePressEvent(self, event: QMouseEvent) -> None:
        if event.button() != Qt.MouseButton.LeftButton or self.strip is None:
            return
        x = event.position().x()
        cell = self.cell_at(x)
        if cell is not None:
            self.cellChosen.emit(cell.frame_id, -1 if cell.person_id is None else cell.person_id)
            return
        half = max(1, len(self.strip.cells) // 2)
        end = self._cells_left() + len(self.strip.cells) * self._cell_w
        if CAPTION <= x < self._cells_left() and self.strip.more_before():
            self.scrollRequested.emit(-half)
        elif end <= x < end + CHEVRON and self.strip.more_after():
            self.scrollRequested.emit(half)

    def wheelEvent(self, event: object) -> None:
        delta = event.angleDelta()  # type: ignore[attr-defined]
        step = delta.y() or delta.x()
        if step and self.strip is not None:
            self.scrollRequested.emit(-3 if step > 0 else 3)

    def event(self, event: QEvent) -> bool:
        if event.type() == QEvent.Type.ToolTip and self.strip is not None:
            cell = self.cell_at(event.pos().x())  # type: ignore[attr-defined]
            text = cell.describe(self.strip.length) if cell is not None else self.strip.text
            QToolTip.showText(event.globalPos(), text, self)  # type: ignore[attr-defined]
            return True
        return super().event(event)

    # ------------------------------------------------------------------ painting

    def paintEvent(self, event: QPaintEvent) -> None:
        p = QPainter(self)
        p.setRenderHint(QPainter.RenderHint.Antialiasing)
        p.fillRect(self.rect(), BACKGROUND)
        p.setPen(QPen(QColor("#b8b8b4"), 1))
        p.drawLine(0, 0, self.width(), 0)
        font = QFont(self.font())
        p.setFont(font)
        p.setPen(TEXT)
        caption = QRectF(8, 0, CAPTION - 10, HEIGHT)
        strip = self.strip
        if strip is None:
            p.drawText(QRectF(8, 0, self.width() - 16, HEIGHT),
                        Qt.AlignmentFlag.AlignVCenter | Qt.AlignmentFlag.AlignLeft, self.hint)
            p.end()
            return
        self._layout()
        here = strip.current
        where = f"{here.place}/{strip.length}" if here is not None else \
            count(strip.length, "frame")
        p.drawText(caption, Qt.AlignmentFlag.AlignVCenter | Qt.AlignmentFlag.AlignLeft,
                   f"track {strip.track} \u00b7 {where}")
        self._chevrons(p, strip)
        origin = next((n for n, c in enumerate(strip.cells) if c.batch == "origin"), None)
        for n, cell in enumerate(strip.cells):
            self._cell(p, n, cell, strip, origin)
        p.end()

    def _chevrons(self, p: QPainter, strip: TrackStrip) -> None:
        p.setPen(QPen(TEXT, 1.6))
        mid = HEIGHT / 2
        if strip.more_before():
            x = CAPTION + CHEVRON / 2
            p.drawPolyline(QPolygonF([QPointF(x + 3, mid - 5), QPointF(x - 2, mid),
                                      QPointF(x + 3, mid + 5)]))
        if strip.more_after():
            x = self._cells_left() + len(strip.cells) * self._cell_w + CHEVRON / 2
            p.drawPolyline(QPolygonF([QPointF(x - 3, mid - 5), QPointF(x + 2, mid),
                                      QPointF(x - 3, mid + 5)]))

    def _cell(self, p: QPainter, n: int, cell: Cell, strip: TrackStrip,
              origin: int | None) -> None:
        r = self.cell_rect(n).adjusted(1, 0, -1, 0)
        mid = r.center().y()
        if cell.present:
            fill = QColor(self.colour)
            fill.setAlpha(150)
            p.fillRect(r, fill)
        else:
            pen = QPen(GAP, 1, Qt.PenStyle.DotLine)
            p.setPen(pen)
            p.drawLine(QPointF(r.left(), mid), QPointF(r.right(), mid))
        if cell.corrected:
            p.fillRect(QRectF(r.left(), r.bottom() - 4, r.width(), 4), CORRECTED)
        if cell.findings:
            radius = 2.5 + min(cell.findings, 3) * 0.8
            p.setPen(QPen(QColor("white"), 1))
            p.setBrush(FINDING)
            p.drawEllipse(QPointF(r.center().x(), r.top() + radius + 1), radius, radius)
            p.setBrush(Qt.BrushStyle.NoBrush)
        if cell.batch:
            self._batch(p, r, cell.batch, strip, n, origin)
        if cell.current:
            p.setPen(QPen(CURRENT, 2))
            p.setBrush(Qt.BrushStyle.NoBrush)
            p.drawRect(r.adjusted(0.5, -1.5, -0.5, 1.5))

    def _batch(self, p: QPainter, r: QRectF, role: str, strip: TrackStrip, n: int,
               origin: int | None) -> None:
        mid, cx = r.center().y() + 2, r.center().x()
        line = QPen(CARRIED, 2.5, Qt.PenStyle.SolidLine if strip.taken else
                    Qt.PenStyle.DashLine)
        line.setCapStyle(Qt.PenCapStyle.FlatCap)
        forward = origin is None or n > origin
        if role in ("carried", "last"):
            p.setPen(line)
            if role == "carried":
                p.drawLine(QPointF(r.left() - 1, mid), QPointF(r.right() + 1, mid))
            else:
                # the line comes from the origin's side and stops at an upright bar
                p.drawLine(QPointF(r.left() - 1 if forward else cx, mid),
                           QPointF(cx if forward else r.right() + 1, mid))
                p.setPen(QPen(CARRIED, 2.5))
                p.drawLine(QPointF(cx, mid - 6), QPointF(cx, mid + 6))
        elif role == "origin":
            # the line leaves the corrected frame towards each side the batch goes
            p.setPen(line)
            cells = strip.cells
            if n > 0 and cells[n - 1].batch in ("carried", "last"):
                p.drawLine(QPointF(r.left() - 1, mid), QPointF(cx, mid))
            if n + 1 < len(cells) and cells[n + 1].batch in ("carried", "last"):
                p.drawLine(QPointF(cx, mid), QPointF(r.right() + 1, mid))
            p.setPen(QPen(QColor("white"), 1))
            p.setBrush(CARRIED)
            p.drawPolygon(QPolygonF([QPointF(cx, mid - 5), QPointF(cx + 5, mid),
                                     QPointF(cx, mid + 5), QPointF(cx - 5, mid)]))
            p.setBrush(Qt.BrushStyle.NoBrush)
        elif role == "stop":
            p.setPen(QPen(CARRIED, 1.5))
            p.setBrush(Qt.BrushStyle.NoBrush)
            p.drawEllipse(QPointF(cx, mid), 3.0, 3.0)
