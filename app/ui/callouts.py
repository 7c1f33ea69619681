"""What the Canvas says beside the people: the walk's finding with its fix previewed, and the
ranked owners of the selected joint. Drawn over the overlay (:mod:`app.ui.overlay`), in screen
pixels like it.

The fix preview speaks our visual language:

- where a joint would go: a *ghost* (a white ring with a dot in the receiving person's colour)
  at the new place, reached from the joint's present place by a dotted white arrow on a dark
  line; a joint that stays put but changes hands gets the ghost ring around it;
- a joint that would become unlabelled: a white cross, outlined dark, over the joint;
- a joint that would become occluded: a dashed white ring around it;
- a person who would be deleted (or merged away): a white diagonal cross over their box;
- a person who would be added: their joints as small ghosts joined by dotted limbs.

The finding's sentence sits in a card beside the box of what it is about, never in a tooltip.
A card of several fixes (a person's, :func:`app.session.walk.person_cards`) says why (its
first finding's sentence) and lists the fixes one a line: a filled square and bright text for
a fix taken, a hollow square and dim struck-through text for one left out, an accent bar at
the left edge for the fix under focus;
the ranked owners sit in a small list beside the selected joint, one row per person (tag
colour, tag number, fit, one reason), each row a click target.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np
from PySide6.QtCore import QLineF, QPointF, QRectF, Qt
from PySide6.QtGui import QColor, QFont, QFontMetrics, QPainter, QPen, QPolygonF

from app.analysis.triage.findings import FixPreview
from app.model.labels import Person
from app.model.naming import Names
from app.model.skeleton import Skeleton
from app.session.owners import OwnerRanking
from app.session.walk import Stop, card_lines, card_why, group_action
from app.ui.overlay import OUTLINE, palette_colour
from app.wording import count

CARD = QColor(24, 24, 28, 228)
CARD_TEXT = QColor("#f4f4f4")
CARD_DIM = QColor("#b8b8b8")
ACCENT = QColor("#f2c14e")
GHOST = QColor("#ffffff")
#: Widest a card gets before its text wraps (screen pixels).
CARD_WIDTH = 380
#: The owner list's last line: what its numbers mean.
FIT_NOTE = ("fit 0-1: how well the joint would attach (the model's field, or limb lengths); "
            "click to give")
#: How wide the owner list is (screen pixels): the reasons wrap below their rows.
OWNER_WIDTH = 250
#: How many candidates the owner list shows (the rest have no chance worth a look).
OWNER_ROWS = 3


@dataclass(frozen=True)
class WalkCard:
    """A stop of the walk as the Canvas shows it: the stop and where it is in its frame's
    list (``"2 of 5"``)."""

    stop: Stop
    where: str = ""


def stop_points(stop: Stop, people: Sequence[Person]) -> np.ndarray:
    """``(N, 2)`` image points a stop is about: its joints (the whole person when it names
    none), and where its fix would put joints. Empty when nothing is placed."""
    by_id = {p.id: p for p in people}
    about: list[tuple[int, tuple[int, ...]]] = []
    for f in stop.findings:
        about += [(pid, f.joints if pid == f.person_id else ()) for pid in f.people]
    if not stop.findings and stop.person_id is not None:
        about.append((stop.person_id, stop.joints))
    pts: list[np.ndarray] = []
    for pid, joints in about:
        person = by_id.get(pid)
        if person is None:
            continue
        kp = person.keypoints
        sel = kp[list(joints)] if joints else kp
        pts.append(sel[(sel[:, 2] > 0) & np.isfinite(sel[:, :2]).all(axis=1), :2])
    fix = stop.fix
    if fix is not None:
        placed = np.array([[x, y] for _, _, x, y, _ in fix.preview.placed], dtype=float)
        pts.append(placed.reshape(-1, 2))
        for kp in fix.preview.created:
            made = np.array([[x, y] for x, y, v in kp if v > 0], dtype=float).reshape(-1, 2)
            pts.append(made[np.isfinite(made).all(axis=1)])
    return np.concatenate(pts) if pts else np.zeros((0, 2))


def paint_preview(painter: QPainter, preview: FixPreview, people: Sequence[Person],
                  skeleton: Skeleton, colours: Mapping[int, int],
                  to_screen: Callable[[float, float], QPointF]) -> None:
    """Draw what a fix would do (see the module docstring). ``to_screen(x, y)`` maps image
    pixels to a screen ``QPointF``."""
    by_id = {p.id: p for p in people}
    painter.save()
    painter.setRenderHint(QPainter.RenderHint.Antialiasing, True)
    owner_of: dict[int, list[tuple[int, np.ndarray]]] = {}
    for p in people:
        for j in range(len(p.keypoints)):
            owner_of.setdefault(j, []).append((p.id, p.keypoints[j]))
    for pid, j, x, y, _v in preview.placed:
        to = to_screen(x, y)
        here = by_id.get(pid)
        start = None
        if here is not None and here.keypoints[j, 2] > 0 and \
                np.isfinite(here.keypoints[j, :2]).all():
            start = here.keypoints[j, :2]
        else:  # the joint comes from someone else: the nearest of their joints of this kind
            near = [kp[:2] for other, kp in owner_of.get(j, ()) if other != pid and kp[2] > 0
                    and np.isfinite(kp[:2]).all()]
            if near:
                d = [float(np.hypot(*(np.asarray(n) - (x, y)))) for n in near]
                start = near[int(np.argmin(d))]
        if start is not None:
            fro = to_screen(*start)
            if QLineF(fro, to).length() > 6:
                _arrow(painter, fro, to)
        _ghost(painter, to, palette_colour(colours.get(pid, 0)))
    for pid, j in preview.unlabeled:
        person = by_id.get(pid)
        if person is not None and np.isfinite(person.keypoints[j, :2]).all():
            _cross(painter, to_screen(*person.keypoints[j, :2]), 7.0)
    for pid, j in preview.occluded:
        person = by_id.get(pid)
        if person is not None and np.isfinite(person.keypoints[j, :2]).all():
            c = to_screen(*person.keypoints[j, :2])
            pen = QPen(GHOST, 2.0, Qt.PenStyle.DashLine)
            painter.setPen(pen)
            painter.setBrush(Qt.BrushStyle.NoBrush)
            painter.drawEllipse(c, 10.0, 10.0)
    for pid in preview.deleted:
        person = by_id.get(pid)
        if person is None:
            continue
        kp = person.keypoints
        ok = (kp[:, 2] > 0) & np.isfinite(kp[:, :2]).all(axis=1)
        if not ok.any():
            continue
        pts = [to_screen(*xy) for xy in kp[ok, :2]]
        xs, ys = [p.x() for p in pts], [p.y() for p in pts]
        box = QRectF(QPointF(min(xs), min(ys)), QPointF(max(xs), max(ys))).adjusted(-6, -6,
                                                                                    6, 6)
        for line in (QLineF(box.topLeft(), box.bottomRight()),
                     QLineF(box.topRight(), box.bottomLeft())):
            painter.setPen(QPen(QColor(OUTLINE), 5.0, Qt.PenStyle.SolidLine,
                                Qt.PenCapStyle.RoundCap))
            painter.drawLine(line)
            painter.setPen(QPen(GHOST, 2.5, Qt.PenStyle.SolidLine, Qt.PenCapStyle.RoundCap))
            painter.drawLine(line)
    for kp in preview.created:
        arr = np.array(kp, dtype=float).reshape(-1, 3)
        ok = (arr[:, 2] > 0) & np.isfinite(arr[:, :2]).all(axis=1)
        painter.setPen(QPen(GHOST, 1.5, Qt.PenStyle.DotLine))
        for a, b in skeleton.limbs:
            if ok[a] and ok[b]:
                painter.drawLine(to_screen(*arr[a, :2]), to_screen(*arr[b, :2]))
        for xy in arr[ok, :2]:
            _ghost(painter, to_screen(*xy), ACCENT, 4.0)
    painter.restore()


def _ghost(painter: QPainter, c: QPointF, colour: QColor, r: float = 7.0) -> None:
    painter.setBrush(Qt.BrushStyle.NoBrush)
    painter.setPen(QPen(QColor(OUTLINE), 4.0))
    painter.drawEllipse(c, r, r)
    painter.setPen(QPen(GHOST, 2.0))
    painter.drawEllipse(c, r, r)
    painter.setPen(QPen(QColor(OUTLINE), 1.0))
    painter.setBrush(colour)
    painter.drawEllipse(c, 2.5, 2.5)


def _cross(painter: QPainter, c: QPointF, r: float) -> None:
    for d in ((r, r), (r, -r)):
        line = QLineF(c - QPointF(*d), c + QPointF(*d))
        painter.setPen(QPen(QColor(OUTLINE), 5.0, Qt.PenStyle.SolidLine, Qt.PenCapStyle.RoundCap))
        painter.drawLine(line)
        painter.setPen(QPen(GHOST, 2.5, Qt.PenStyle.SolidLine, Qt.PenCapStyle.RoundCap))
        painter.drawLine(line)


def _arrow(painter: QPainter, a: QPointF, b: QPointF) -> None:
    line = QLineF(a, b)
    line.setLength(max(line.length() - 8.0, 0.0))
    painter.setPen(QPen(QColor(OUTLINE), 4.0, Qt.PenStyle.SolidLine, Qt.PenCapStyle.RoundCap))
    painter.drawLine(line)
    painter.setPen(QPen(GHOST, 2.0, Qt.PenStyle.DotLine, Qt.PenCapStyle.RoundCap))
    painter.drawLine(line)
    tip = line.p2()
    back = QLineF(tip, line.p1())
    back.setLength(8.0)
    left, right = QLineF(back), QLineF(back)
    left.setAngle(back.angle() + 28)
    right.setAngle(back.angle() - 28)
    painter.setPen(QPen(QColor(OUTLINE), 1.0))
    painter.setBrush(GHOST)
    painter.drawPolygon(QPolygonF([tip, left.p2(), right.p2()]))


def _font(base: QFont, px: int, bold: bool = False) -> QFont:
    f = QFont(base)
    f.setPixelSize(px)
    f.setBold(bold)
    return f


def _place(box: QRectF, size: tuple[float, float], bounds: QRectF, below: bool) -> QRectF:
    """A card of ``size`` beside ``box``: to its right, else its left, above (or below) its
    middle, kept inside ``bounds``."""
    w, h = size
    x = box.right() + 14 if box.right() + 14 + w <= bounds.right() - 4 else box.left() - 14 - w
    y = box.top() - h - 10 if not below else box.bottom() + 10
    if not below and y < bounds.top() + 4:
        y = box.bottom() + 10
    x = min(max(x, bounds.left() + 4), bounds.right() - w - 4)
    y = min(max(y, bounds.top() + 4), bounds.bottom() - h - 4)
    return QRectF(x, y, w, h)


def _beside(box: QRectF, size: tuple[float, float], bounds: QRectF) -> list[QRectF]:
    """The places a card of ``size`` can go beside ``box``, in order of preference: where
    :func:`_place` puts it below, then right and left, below and above, all inside ``bounds``."""
    w, h = size
    out = [_place(box, size, bounds, below=True)]
    for below in (True, False):
        for x in (box.right() + 14, box.left() - 14 - w):
            y = box.bottom() + 10 if below else box.top() - 10 - h
            x = min(max(x, bounds.left() + 4), bounds.right() - w - 4)
            y = min(max(y, bounds.top() + 4), bounds.bottom() - h - 4)
            out.append(QRectF(x, y, w, h))
    return out


def _corners(size: tuple[float, float], bounds: QRectF) -> list[QRectF]:
    """A card of ``size`` in each corner of ``bounds``: top left, top right, bottom left,
    bottom right."""
    w, h = size
    left, right = bounds.left() + 4, bounds.right() - w - 4
    top, bottom = bounds.top() + 4, bounds.bottom() - h - 4
    return [QRectF(x, y, w, h) for y in (top, bottom) for x in (left, right)]


def card_places(box: QRectF, size: tuple[float, float], bounds: QRectF) -> list[QRectF]:
    """Where the walk's card may go, in order of preference: above (else below) ``box`` to
    its side (:func:`_place`), then beside it (:func:`_beside`), then the view's corners. When
    the people concerned fill the view, a place beside them covers them; a corner may not."""
    return [_place(box, size, bounds, below=False), *_beside(box, size, bounds),
            *_corners(size, bounds)]


def least_covering(options: Sequence[QRectF], keep_clear: Sequence[QPointF],
                   avoid: QRectF | None = None) -> QRectF:
    """The first of ``options`` that covers the fewest ``keep_clear`` points, never one that
    overlaps ``avoid`` (the walk's card) while another does not."""
    def cost(r: QRectF) -> tuple[bool, int]:
        return (avoid is not None and r.intersects(avoid),
                sum(r.contains(q) for q in keep_clear))
    return min(options, key=cost)


def paint_walk_card(painter: QPainter, card: WalkCard, box: QRectF, bounds: QRectF,
                    base: QFont, keep_clear: Sequence[QPointF] = ()) -> QRectF:
    """The finding's sentence and what the keys do, in a card beside ``box`` (screen
    pixels), at the first of :func:`card_places` that covers the fewest ``keep_clear``
    points (the joints the stop is about and where its fix would put them, so the preview
    stays in sight). Returns where the card went."""
    stop = card.stop
    fix = stop.fix
    where = f" {card.where}" if card.where else ""
    head = ("Findings" if len(stop.findings) > 1 else "Finding" if stop.findings
            else "Triage") + where
    lines = card_lines(stop)
    body = stop.text
    if lines:
        # A card of several fixes: why (its first finding's sentence, and the notes riding
        # on it), then the fixes one a line, each taken or left out.
        body = card_why(stop)
        head = f"{count(len(stop.parts), 'fix', 'fixes')} together" + where
        n = len(stop.taken)
        tail = (f"Y takes {count(n, 'fix', 'fixes')} (one undo step) \u00b7 E next fix \u00b7 "
                "D leaves it out \u00b7 I not a problem \u00b7 W skips")
    elif fix is not None:
        # A frame's hidden-joint and invented-spot fixes are one stop of several; a
        # person's stop has one fix, with notes that propose none.
        several = stop.finding is None and len(stop.findings) > 1
        sure = [f.confidence for f in stop.findings if f.fix is not None]
        conf = f" (each at least {min(sure):.0%} sure)" if several else \
            f" ({sure[0]:.0%} sure)" if sure else ""
        summary = group_action(fix) if several else fix.summary
        tail = f"Fix{conf}: {summary}.  Y accepts \u00b7 I not a problem \u00b7 W skips"
    elif stop.findings:
        tail = "No fix proposed: correct it by hand.  I not a problem \u00b7 W next"
    else:
        tail = "W next \u00b7 Shift+W back"
    f_head, f_body = _font(base, 11, True), _font(base, 12)
    m_head, m_body = QFontMetrics(f_head), QFontMetrics(f_body)
    flags = int(Qt.TextFlag.TextWordWrap)
    inner = CARD_WIDTH - 16
    r_text = m_body.boundingRect(0, 0, inner, 1000, flags, body)
    r_tail = m_head.boundingRect(0, 0, inner, 1000, flags, tail)
    rows = [(m_body.boundingRect(0, 0, inner - 18, 1000, flags, t), t, off, at)
            for t, off, at in lines]
    width = max([r_text.width(), r_tail.width(), m_head.horizontalAdvance(head),
                 *(r.width() + 18 for r, *_ in rows)]) + 16
    height = (m_head.height() + r_text.height() + r_tail.height() + 20
              + sum(r.height() + 3 for r, *_ in rows) + (4 if rows else 0))
    rect = least_covering(card_places(box, (width, height), bounds), keep_clear)
    painter.save()
    painter.setRenderHint(QPainter.RenderHint.Antialiasing, True)
    painter.setPen(QPen(ACCENT, 1.5))
    painter.setBrush(CARD)
    painter.drawRoundedRect(rect, 5, 5)
    painter.setPen(QPen(ACCENT, 1.0, Qt.PenStyle.DotLine))
    painter.drawLine(_nearest_edge(rect, box.center()), box.center())
    y = rect.top() + 6
    painter.setFont(f_head)
    painter.setPen(ACCENT)
    painter.drawText(QRectF(rect.left() + 8, y, inner, m_head.height()), 0, head)
    y += m_head.height() + 3
    painter.setFont(f_body)
    painter.setPen(CARD_TEXT)
    painter.drawText(QRectF(rect.left() + 8, y, inner, r_text.height()), flags, body)
    y += r_text.height() + 5
    if rows:
        y += 2
    for r, t, off, at in rows:
        # Taken: a filled mark and bright text; left out: a hollow mark, dim struck text;
        # under focus: the accent's bar at the left edge.
        mark = QPointF(rect.left() + 14, y + m_body.height() / 2)
        painter.setPen(QPen(ACCENT if not off else CARD_DIM, 1.5))
        painter.setBrush(Qt.BrushStyle.NoBrush if off else ACCENT)
        painter.drawRect(QRectF(mark - QPointF(3.5, 3.5), mark + QPointF(3.5, 3.5)))
        if at:
            painter.setPen(QPen(ACCENT, 3.0))
            painter.drawLine(QPointF(rect.left() + 3, y), QPointF(rect.left() + 3,
                                                                  y + r.height()))
        font = QFont(f_body)
        font.setStrikeOut(off)
        font.setBold(at)
        painter.setFont(font)
        painter.setPen(CARD_DIM if off else CARD_TEXT)
        painter.drawText(QRectF(rect.left() + 26, y, inner - 18, r.height()), flags, t)
        y += r.height() + 3
    if rows:
        y += 4
    painter.setFont(f_head)
    painter.setPen(CARD_DIM)
    painter.drawText(QRectF(rect.left() + 8, y, inner, r_tail.height()), flags, tail)
    painter.restore()
    return rect


def _nearest_edge(rect: QRectF, p: QPointF) -> QPointF:
    return QPointF(min(max(p.x(), rect.left()), rect.right()),
                   min(max(p.y(), rect.top()), rect.bottom()))


def paint_owner_list(painter: QPainter, ranking: OwnerRanking, names: Names,
                     colours: Mapping[int, int], joint_at: QPointF, bounds: QRectF,
                     base: QFont, avoid: QRectF | None = None,
                     keep_clear: Sequence[QPointF] = ()) -> list[tuple[QRectF, int]]:
    """The ranked owners of the selected joint in a small list beside it: the verdict, the
    owner's row, then the best candidates, each on two lines (tag colour, ``person N``, fit;
    below it, dimmer, its reason), at most :data:`OWNER_WIDTH` pixels wide. The list goes on
    the side of the joint that covers the fewest ``keep_clear`` points (e.g. along a
    dispute's connectors) and not over ``avoid``. Returns each candidate row's rectangle
    with its person id (click targets)."""
    rows = ([ranking.owner] if ranking.owner is not None else []) + \
        list(ranking.candidates[:OWNER_ROWS])
    f_head, f_row, f_why = _font(base, 11, True), _font(base, 11), _font(base, 10)
    m_head, m_row, m_why = QFontMetrics(f_head), QFontMetrics(f_row), QFontMetrics(f_why)
    flags = int(Qt.TextFlag.TextWordWrap)
    inner = OWNER_WIDTH - 16
    lines = []
    for c in rows:
        who = names.person(c.person_id) + (" (owner)" if c.is_owner else "")
        why = _two_lines(m_why, c.reason, inner - 20)
        lines.append((c, who, f"fit {c.score:.2f}", why,
                      m_why.boundingRect(0, 0, inner - 20, 1000, flags, why).height()))
    fit_w = m_row.horizontalAdvance("fit 0.00")
    r_head = m_head.boundingRect(0, 0, inner, 1000, flags, ranking.verdict)
    r_foot = m_why.boundingRect(0, 0, inner, 1000, flags, FIT_NOTE)
    row_h = m_row.height() + 2
    height = r_head.height() + 8 + sum(row_h + h + 4 for *_, h in lines) + r_foot.height() + 8
    width = OWNER_WIDTH
    anchor = QRectF(joint_at - QPointF(8, 8), joint_at + QPointF(8, 8))
    rect = least_covering(_beside(anchor, (width, height), bounds), keep_clear, avoid)
    if avoid is not None and rect.intersects(avoid):
        rect.moveTop(min(avoid.bottom() + 6, bounds.bottom() - height - 4))
    painter.save()
    painter.setRenderHint(QPainter.RenderHint.Antialiasing, True)
    painter.setPen(QPen(QColor("#9a9a9a"), 1.0))
    painter.setBrush(CARD)
    painter.drawRoundedRect(rect, 5, 5)
    painter.setFont(f_head)
    painter.setPen(ACCENT if ranking.better else CARD_TEXT)
    painter.drawText(QRectF(rect.left() + 8, rect.top() + 4, inner, r_head.height()), flags,
                     ranking.verdict)
    y = rect.top() + r_head.height() + 8
    targets = []
    for c, who, fit, why, why_h in lines:
        row = QRectF(rect.left() + 4, y, width - 8, row_h + why_h + 2)
        if not c.is_owner:
            targets.append((row, c.person_id))
        painter.setPen(QPen(QColor(OUTLINE), 1.0))
        painter.setBrush(palette_colour(colours.get(c.person_id, c.number - 1)))
        painter.drawEllipse(QPointF(row.left() + 10, y + row_h / 2), 5, 5)
        painter.setFont(f_row)
        painter.setPen(CARD_DIM if c.is_owner else CARD_TEXT)
        x = row.left() + 20
        centred = int(Qt.AlignmentFlag.AlignVCenter)
        painter.drawText(QRectF(x, y, inner - 20 - fit_w - 6, row_h), centred,
                         m_row.elidedText(who, Qt.TextElideMode.ElideRight,
                                          int(inner - 26 - fit_w)))
        painter.drawText(QRectF(row.right() - fit_w - 6, y, fit_w, row_h),
                         centred | int(Qt.AlignmentFlag.AlignRight), fit)
        painter.setFont(f_why)
        painter.setPen(CARD_DIM)
        painter.drawText(QRectF(x, y + row_h, inner - 20, why_h), flags, why)
        y += row_h + why_h + 4
    painter.setFont(f_why)
    painter.setPen(CARD_DIM)
    painter.drawText(QRectF(rect.left() + 8, y + 2, inner, r_foot.height()), flags, FIT_NOTE)
    painter.restore()
    return targets


def _two_lines(metrics: QFontMetrics, text: str, width: int) -> str:
    """``text`` cut to what two lines of ``width`` pixels hold, ending in an ellipsis when
    cut (the word-wrapped draw then shows at most two lines)."""
    if metrics.horizontalAdvance(text) <= 2 * width - metrics.averageCharWidth() * 4:
        return text
    return metrics.elidedText(text, Qt.TextElideMode.ElideRight, int(2 * width * 0.9))
