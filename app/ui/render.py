"""A frame at full resolution with the overlay the Canvas draws, without any window.

Used by ``posewright render``. It needs only a ``QGuiApplication`` (the offscreen platform is
enough) and draws with :func:`app.ui.overlay.paint_overlay`, the Canvas's own painter, at one
image pixel per device pixel.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from typing import Any

import numpy as np
from PySide6.QtGui import QGuiApplication, QImage, QPainter, QTransform
from PySide6.QtWidgets import QApplication

from app.errors import NotFound
from app.formats.images import read_image
from app.model.labels import Frame
from app.model.skeleton import Skeleton
from app.store.project import Project
from app.ui.images import qimage_view, to_display
from app.ui.overlay import OverlayStyle, flags_from_reasons, paint_overlay


def gui_application() -> QGuiApplication:
    """The running Qt application, or a new headless one (offscreen unless told otherwise).

    A new one is a widgets application even though rendering needs none: Qt allows one
    application object per process, and a later window (the app, a test) needs widgets.
    """
    app = QGuiApplication.instance()
    if app is None:
        os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
        app = QApplication(["posewright"])
    return app  # type: ignore[return-value]


def render_overlay(bgr: np.ndarray, people: Sequence[Any], skeleton: Skeleton,
                   style: OverlayStyle | None = None) -> QImage:
    """Draw ``people`` over a ``(H, W, 3)`` BGR image at full resolution.

    Parameters
    ----------
    bgr
        The image as OpenCV decodes it.
    people
        Objects with ``id`` and ``keypoints`` ``(K, 3)``, in tag order.
    skeleton
        Joint sides and limbs.
    style
        As on the Canvas (focus, flags, toggles).

    Returns
    -------
    QImage
        ``Format_RGB32``, the size of the input.

    Notes
    -----
    Integer label coordinates are pixel centres, so label ``(x, y)`` is drawn at device
    ``(x + 0.5, y + 0.5)``: the centre of pixel ``(x, y)``.

    Examples
    --------
    >>> from app.model.labels import Person
    >>> from app.model.skeleton import coco_body
    >>> _ = gui_application()
    >>> p = Person.blank(1, 17); p.keypoints[0] = (8, 8, 2)
    >>> img = render_overlay(np.zeros((16, 16, 3), np.uint8), [p], coco_body())
    >>> img.width(), img.pixelColor(8, 8).name()
    (16, '#e69f00')
    """
    pixels = to_display(np.ascontiguousarray(bgr))
    image = qimage_view(pixels).copy()  # own the memory; the array goes away
    painter = QPainter(image)
    paint_overlay(painter, people, skeleton, QTransform.fromTranslate(0.5, 0.5), style,
                  (image.width(), image.height()))
    painter.end()
    return image


def render_frame_image(project: Project, frame: Frame, focus: int | None = None) -> QImage:
    """The frame's image with its people drawn as the Canvas draws them (flags and ignore
    regions included).

    ``focus`` is a person id of the frame; everyone else is dimmed.
    """
    bgr = read_image(project.image_path(frame))
    people = project.people(frame.id)
    if focus is not None and focus not in {p.id for p in people}:
        listing = ", ".join(f"#{p.id} (tag {n + 1})" for n, p in enumerate(people)) or "none"
        raise NotFound(f"frame {frame.id} has no person {focus}; its people are: {listing}")
    triage = project.triage(frame.id)
    regions = tuple((rid, tuple(tuple(p) for p in polys))
                    for rid, polys, _ in project.regions(frame.id))
    style = OverlayStyle(focus=focus, flags=flags_from_reasons(triage[1] if triage else None,
                                                                grouping=frame.grouping),
                         regions=regions)
    return render_overlay(bgr, people, project.skeleton, style)
