"""Where a review packet's image was blurred, drawn over the Canvas for the reviewer.

Part of our visual language (:mod:`app.ui.overlay` defines the rest): a blurred region is a
thin outline of light dots on a soft dark line, with no fill (the blur itself is in the image),
so it reads on any picture without hiding what the reviewer judges. A small caption above the
region's left edge names the sources that placed it (``labels``, ``maps``, ``detector``). A
region the labels had no part in (a head only the maps or the face detector saw, where the
labels may miss someone) draws its dots warmer and a little bolder, so those stand out in a
crowd.

The regions come from :class:`app.session.blurred.BlurredFrame`; this module only draws them.
"""

from __future__ import annotations

from collections.abc import Callable
from functools import lru_cache

from PySide6.QtCore import QPointF, QRectF, Qt
from PySide6.QtGui import QColor, QFont, QFontMetricsF, QPainter, QPainterPath, QPen, QTransform

from app.session.blurred import BlurredFrame, BlurredRegion

__all__ = ["paint_blurred"]

#: The dots of a region's outline, its shadow, and the dots of a region beyond the labels.
DOTS = QColor(245, 245, 245, 215)
SHADOW = QColor(20, 20, 20, 120)
BEYOND = QColor(255, 214, 140, 235)
#: The caption's text and its backing.
CAPTION_TEXT = QColor(245, 245, 245)
CAPTION_BACK = QColor(20, 20, 20, 150)
#: Smallest on-screen height (pixels) of a region that gets a caption: smaller ones would
#: bury the image under words when zoomed far out.
CAPTION_MIN_PX = 28.0

ToScreen = Callable[[float, float], QPointF]


def _path(region: BlurredRegion) -> QPainterPath:
    """The region's outline in image pixels: the union of its ellipses and polygons."""
    path = QPainterPath()
    path.setFillRule(Qt.FillRule.WindingFill)
    for cx, cy, ax, ay in region.ellipses:
        piece = QPainterPath()
        piece.addEllipse(QRectF(cx - ax, cy - ay, 2 * ax, 2 * ay))
        path = path.united(piece)
    for poly in region.polygons:
        if len(poly) >= 3:
            piece = QPainterPath()
            piece.moveTo(QPointF(*poly[0]))
            for x, y in poly[1:]:
                piece.lineTo(QPointF(x, y))
            piece.closeSubpath()
            path = path.united(piece)
    return path


@lru_cache(maxsize=8)
def _outlines(blurred: BlurredFrame) -> tuple[QPainterPath, ...]:
    """Each region's outline in image pixels, built once per frame's blur: uniting the
    shapes is the costly part of a paint, and a frame's regions never change while shown (a
    paint maps the outlines to the screen, :func:`paint_blurred`). Kept for the last few
    frames (``BlurredFrame`` is frozen, so equal records share their outlines)."""
    return tuple(_path(region) for region in blurred.regions)


def _transform(to_screen: ToScreen) -> QTransform:
    """The affine map ``to_screen`` is (the Canvas's scale and offset), read off three
    points."""
    o, u, v = to_screen(0.0, 0.0), to_screen(1.0, 0.0), to_screen(0.0, 1.0)
    return QTransform(u.x() - o.x(), u.y() - o.y(), v.x() - o.x(), v.y() - o.y(), o.x(), o.y())


def paint_blurred(painter: QPainter, blurred: BlurredFrame, to_screen: ToScreen,
                  font: QFont) -> None:
    """Outline every blurred region of ``blurred`` and caption it with its sources.

    ``to_screen`` maps image pixels to the painter's (screen) pixels, an affine map (the
    Canvas's zoom and offset); sizes are in screen pixels, independent of zoom, as everywhere
    in the overlay. The outlines are built in image pixels once per frame's blur
    (:func:`_outlines`) and only mapped to the screen here.
    """
    painter.save()
    painter.setRenderHint(QPainter.RenderHint.Antialiasing, True)
    painter.setBrush(Qt.BrushStyle.NoBrush)
    small = QFont(font)
    small.setPointSizeF(max(6.5, font.pointSizeF() * 0.8))
    metrics = QFontMetricsF(small)
    captions = []
    transform = _transform(to_screen)
    for region, outline in zip(blurred.regions, _outlines(blurred), strict=True):
        if outline.isEmpty():
            continue
        path = transform.map(outline)
        beyond = region.beyond_labels
        painter.setPen(QPen(SHADOW, 3.0))
        painter.drawPath(path)
        dots = QPen(BEYOND if beyond else DOTS, 2.0 if beyond else 1.4)
        dots.setStyle(Qt.PenStyle.DotLine)
        dots.setCapStyle(Qt.PenCapStyle.RoundCap)
        painter.setPen(dots)
        painter.drawPath(path)
        bounds = path.boundingRect()
        if bounds.height() >= CAPTION_MIN_PX and region.sources:
            captions.append((bounds, region.caption()))
    painter.setFont(small)
    for bounds, text in captions:
        width = metrics.horizontalAdvance(text) + 6
        height = metrics.height() + 2
        box = QRectF(bounds.left(), bounds.top() - height - 1, width, height)
        painter.setPen(Qt.PenStyle.NoPen)
        painter.setBrush(CAPTION_BACK)
        painter.drawRoundedRect(box, 3, 3)
        painter.setPen(CAPTION_TEXT)
        painter.drawText(box, Qt.AlignmentFlag.AlignCenter, text)
    painter.restore()
