"""The Canvas: the frame's image with every person drawn, pan and zoom, selection and dragging.

Why a plain ``QWidget`` with its own transform rather than a ``QGraphicsView`` scene: the
overlay is drawn in *screen* pixels (a joint is about 5 px across at any zoom) by the one
painter function that the headless render also uses. A scene would scale every item with the
view, so each of the hundreds of joints and limbs of a crowded frame would need to ignore the
view transform and the drawing would live in item classes instead of that shared function.
Here one transform (a scale and an offset, image pixels to widget pixels) feeds
:func:`app.ui.overlay.paint_overlay`, and hit testing is one vectorised nearest-point query.

The Canvas never edits: it emits :attr:`Canvas.editRequested` with an edit object and the main
window applies it through the store.

Two more things it shows:

- *Ignore regions*, always drawn (hatched, by the overlay painter). In *region mode* the mouse
  works on them instead of on joints: drag draws a rectangle, clicks place the corners of a
  polygon (Return or a double click closes it, Backspace takes back a corner, Esc cancels),
  a click inside a region selects it, dragging one of its corners reshapes it and dragging
  inside it moves it (one edit on release), Del deletes it.
- On a *disputed* frame, the marks where ours and the reviewer's version differ, and on request
  the reviewer's version itself in place of ours (read-only: nothing is edited while it shows).
  Which version shows, both versions' people, the marks and the reviewer's name are the view's
  (:class:`app.session.view.View`); the Canvas only draws them.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from types import SimpleNamespace
from typing import Any

import numpy as np
from PySide6.QtCore import QEvent, QPointF, QRect, QRectF, QSizeF, Qt, Signal
from PySide6.QtGui import (
    QColor,
    QFont,
    QImage,
    QKeyEvent,
    QMouseEvent,
    QPainter,
    QPaintEvent,
    QResizeEvent,
    QTransform,
    QWheelEvent,
)
from PySide6.QtWidgets import QWidget

from app.model.edits import AddRegion, DeleteRegion, MoveJoint, ReshapeRegion
from app.model.labels import Frame, Person
from app.model.naming import Names
from app.model.skeleton import Skeleton
from app.session.blurred import BlurredFrame
from app.session.owners import OwnerRanking
from app.session.selection import Selection
from app.session.view import Marks, View
from app.session.walk import Stop
from app.ui import regions as geometry
from app.ui.blurred import paint_blurred
from app.ui.callouts import WalkCard, paint_owner_list, paint_preview, paint_walk_card, stop_points
from app.ui.images import Decoded, qimage_view, shrink
from app.ui.overlay import OverlayLayout, OverlayStyle, paint_overlay

BACKGROUND = QColor("#262626")
PLACEHOLDER = QColor("#3a3a3a")


@dataclass
class _Drag:
    person_id: int
    joint: int
    press: QPointF
    start_xy: tuple[float, float]
    xy: tuple[float, float]
    moved: bool = False
    #: Everybody else's tag where it was when the drag began (screen pixels), and the view
    #: (scale, origin, size) those places hold for: the tags stay put while the joint moves.
    held_tags: dict[int, QRectF] | None = None
    held_view: tuple[float, ...] = ()


@dataclass
class _RegionDrag:
    """A press in region mode: ``kind`` is ``press`` (a click, or a rectangle once it moves),
    ``rect``, ``corner`` (reshaping), ``move`` or ``point`` (a polygon corner)."""

    kind: str
    press: QPointF
    start: tuple[float, float]
    now: tuple[float, float]
    region_id: int | None = None
    polygons: geometry.Polygons = ()
    corner: tuple[int, int] = (0, 0)
    moved: bool = False


class _OverlayLayer:
    """The overlay of the frame on screen, painted once into a transparent image and copied
    onto the Canvas while nothing it shows changes (people, selection, hover, zoom, size,
    style): a repaint for any other reason (an exposed window, the picture refined, the
    status of a neighbour) then costs one copy instead of painting every person again.

    While a joint of the selected person is dragged, what lies under that person (everybody
    else, the regions) is painted once into a second image, ``_under``; each move then copies
    the repainted rectangle from it and paints only the dragged person and the tags over it
    (``paint_overlay``'s ``part``)."""

    def __init__(self) -> None:
        self._key: tuple[Any, ...] | None = None
        self._image: QImage | None = None
        self._layout: OverlayLayout | None = None
        self._under: QImage | None = None
        self._under_key: tuple[Any, ...] | None = None

    def paint(self, p: QPainter, canvas: Canvas, people: list[Any], dirty: QRect | None = None,
              moving: int | None = None,
              held_tags: dict[int, QRectF] | None = None) -> OverlayLayout:
        """Copy the layer onto ``p``, painting it again first if what it shows changed.

        While person ``moving`` is dragged and only the rectangle ``dirty`` is repainted, only
        that rectangle of the layer is painted again (clipped), when nothing but that
        person changed; should a tag of anybody else have moved, or theirs have left the
        rectangle, the whole layer is painted again and the Canvas updated whole.
        ``held_tags`` (everybody else's tag during a drag) keeps those tags where they are,
        so only the dragged person's tag is placed again (``paint_overlay``)."""
        assert canvas.frame is not None
        style = canvas.style()
        t = canvas.transform()
        dpr = canvas.devicePixelRatioF()
        key = (canvas.frame.id, canvas.width(), canvas.height(), dpr,
               (t.m11(), t.m22(), t.dx(), t.dy()), repr(style), id(canvas.skeleton),
               tuple((q.id, np.asarray(q.keypoints).tobytes()) for q in people))
        if moving is None:
            self._under = self._under_key = None  # no drag: free what lay under the last one
        if key != self._key or self._image is None or self._layout is None:
            layout = None
            if dirty is not None and moving is not None and style.focus is None \
                    and self._only_moved(key, moving):
                layout = self._paint_part(canvas, people, t, style, QRectF(dirty), moving,
                                          held_tags)
                if layout is None:
                    canvas.update()  # the layer is painted whole below; show all of it
            if layout is None:
                image = QImage(round(canvas.width() * dpr), round(canvas.height() * dpr),
                               QImage.Format.Format_ARGB32_Premultiplied)
                image.setDevicePixelRatio(dpr)
                image.fill(Qt.GlobalColor.transparent)
                painter = QPainter(image)
                layout = paint_overlay(painter, people, canvas.skeleton, t, style,
                                       (canvas.frame.width, canvas.frame.height),
                                       held_tags=held_tags)
                painter.end()
                self._image = image
            self._layout, self._key = layout, key
        assert self._image is not None and self._layout is not None
        p.drawImage(QPointF(0, 0), self._image)
        return self._layout

    def _only_moved(self, key: tuple[Any, ...], moving: int) -> bool:
        """Whether ``key`` differs from the layer's only in person ``moving``'s joints."""
        old = self._key
        if old is None or self._image is None or old[:-1] != key[:-1] \
                or len(old[-1]) != len(key[-1]):
            return False
        return all(a == b or (a[0] == b[0] == moving) for a, b in zip(old[-1], key[-1]))

    def _paint_part(self, canvas: Canvas, people: list[Any], t: QTransform,
                    style: OverlayStyle, dirty: QRectF, moving: int,
                    held_tags: dict[int, QRectF] | None = None) -> OverlayLayout | None:
        """Paint the layer again within ``dirty`` only; None if more than that changed."""
        assert self._image is not None and self._layout is not None and canvas.frame
        before = self._layout.tags
        under = self._under_layer(canvas, people, t, style, moving) \
            if style.selected_person == moving and style.focus is None else None
        painter = QPainter(self._image)
        painter.setClipRect(dirty)
        painter.setCompositionMode(QPainter.CompositionMode.CompositionMode_Source)
        if under is None:
            painter.fillRect(dirty, Qt.GlobalColor.transparent)
        else:
            painter.drawImage(dirty, under, _device_rect(dirty, under.devicePixelRatio()))
        painter.setCompositionMode(QPainter.CompositionMode.CompositionMode_SourceOver)
        layout = paint_overlay(painter, people, canvas.skeleton, t, style,
                               (canvas.frame.width, canvas.frame.height), within=dirty,
                               held_tags=held_tags, part="whole" if under is None else "over")
        painter.end()
        after = layout.tags
        if set(before) != set(after) or any(after[k] != r for k, r in before.items()
                                            if k != moving):
            return None  # the tag layout moved somebody else's tag
        if moving in after and not (dirty.contains(after[moving])
                                    and dirty.contains(before[moving])):
            return None
        return layout

    def _under_layer(self, canvas: Canvas, people: list[Any], t: QTransform,
                     style: OverlayStyle, moving: int) -> QImage:
        """What lies under person ``moving`` (``paint_overlay(part="under")``), painted once
        while nothing but that person changes."""
        assert self._image is not None and canvas.frame is not None
        assert self._key is not None
        key = (*self._key[:-1], moving, tuple(e for e in self._key[-1] if e[0] != moving))
        if key != self._under_key or self._under is None:
            image = QImage(self._image.size(), QImage.Format.Format_ARGB32_Premultiplied)
            image.setDevicePixelRatio(self._image.devicePixelRatio())
            image.fill(Qt.GlobalColor.transparent)
            painter = QPainter(image)
            paint_overlay(painter, people, canvas.skeleton, t, style,
                          (canvas.frame.width, canvas.frame.height), part="under")
            painter.end()
            self._under, self._under_key = image, key
        return self._under


def _device_rect(rect: QRectF, dpr: float) -> QRectF:
    """``rect`` (logical pixels) in the device pixels of an image of that pixel ratio."""
    return QRectF(rect.x() * dpr, rect.y() * dpr, rect.width() * dpr, rect.height() * dpr)


class Canvas(QWidget):
    """The central image view. See the module docstring for the design.

    Signals
    -------
    selectionChanged()
        The selected joints or person changed.
    editRequested(object)
        The user asked for an edit (a :class:`~app.model.edits.Edit`).
    personPicked(int)
        In pick mode (merging), the person clicked.
    viewChanged()
        Zoom or pan changed.
    framePainted(int)
        A frame's image has been painted for the first time.
    regionChanged()
        The selected region, region mode, or the region being drawn changed.
    ownerChosen(int)
        A row of the owner list beside the selected joint was clicked: give it to that person.
    """

    selectionChanged = Signal()
    editRequested = Signal(object)
    personPicked = Signal(int)
    viewChanged = Signal()
    framePainted = Signal(int)
    regionChanged = Signal()
    ownerChosen = Signal(int)

    #: How near (screen pixels) a click must be to a joint to hit it.
    HIT_RADIUS = 9.0
    #: How near to a limb, to hit its person.
    LIMB_HIT = 4.0
    #: How far the mouse must move before a press on a joint becomes a drag.
    DRAG_START = 3.0
    #: While a joint is dragged, repaint only the dragged person's old and new places (off:
    #: the whole Canvas, as the benchmark's baseline does).
    PARTIAL_DRAG = True
    MIN_SCALE, MAX_SCALE = 0.02, 40.0

    def __init__(self, skeleton: Skeleton, parent: QWidget | None = None):
        super().__init__(parent)
        self.skeleton = skeleton
        self.setObjectName("Canvas")
        self.setFocusPolicy(Qt.FocusPolicy.StrongFocus)
        self.setMouseTracking(True)
        self.setAttribute(Qt.WidgetAttribute.WA_OpaquePaintEvent, True)
        self.setMinimumSize(200, 150)

        self.frame: Frame | None = None
        #: The people shown, their flags and colours, the modes and a disputed frame's two
        #: versions (Qt-free, app/session/view.py; the window shares its session's through
        #: :meth:`use_view`).
        self.view = View()
        self.read_only = False
        #: Reviewing a packet: where its image of the frame was blurred, and whether to
        #: outline it (:mod:`app.ui.blurred`).
        self.blurred: BlurredFrame | None = None
        self.message = ""  # shown instead of the image when it cannot be shown
        self._draft: list[tuple[float, float]] = []
        self._region_drag: _RegionDrag | None = None
        self._double_clicked = False
        self._overlay = _OverlayLayer()
        self._decoded: Decoded | None = None
        # A quick shrunk copy for a zoom the decoder did not prepare: (for which decoded
        # image, at which scale, pixels, image).
        self._scaled: tuple[Decoded, float, Any, QImage] | None = None
        self._scale = 1.0
        self._ox = 0.0
        self._oy = 0.0
        self._fit_mode = True

        #: The selection (the window shares its session's, app/session/selection.py).
        self.selection = Selection()
        self._hover: tuple[int, int | None] | None = None
        self._drag: _Drag | None = None
        #: The rectangle the last move of a drag asked to repaint (widget pixels).
        self.drag_dirty: QRect | None = None
        self._pan: QPointF | None = None
        self._pan_moved = False
        self._layout: OverlayLayout | None = None
        self._hit_pts = np.zeros((0, 2))
        self._hit_pid = np.zeros(0, int)
        self._hit_joint = np.zeros(0, int)
        self._hit_labelled = np.zeros(0, bool)
        self._seg = np.zeros((0, 4))
        self._seg_pid = np.zeros(0, int)
        self._pointer: QPointF | None = None
        #: The frame id whose image was last painted (None while only a placeholder shows),
        #: and when (``time.perf_counter``) it was first painted.
        self.painted_frame: int | None = None
        self.painted_at = 0.0
        #: The walk's stop shown beside its people, with the fix previewed.
        self.walk_card: WalkCard | None = None
        #: The ranked owners of the selected joint, listed beside it, and the rows' rectangles.
        self.owners: OwnerRanking | None = None
        self.owner_rows: list[tuple[QRectF, int]] = []
        self._listen(self.view)

    # ------------------------------------------------------------------ the view's state

    def use_view(self, view: View) -> None:
        """Show this view's people, modes and dispute (the window's session's)."""
        self.view = view
        self._listen(view)

    def _listen(self, view: View) -> None:
        self._region_mode_was = view.region_mode

        def people() -> None:
            if view is self.view:
                self._people_shown()

        def modes() -> None:
            if view is self.view:
                self._modes_changed()

        view.events.connect("mode", modes)
        view.events.connect("people", people)
        view.events.connect("dispute", self.update)

    @property
    def people(self) -> list[Any]:
        """The people shown, in tag order (the view's)."""
        return self.view.people

    @property
    def flags(self) -> dict[int, frozenset[int]]:
        """Person id -> flagged joints (the view's)."""
        return self.view.flags

    @property
    def colours(self) -> dict[int, int]:
        """Person id -> palette index (the view's)."""
        return self.view.colours

    @property
    def region_mode(self) -> bool:
        """Whether the mouse works on ignore regions (the view's mode)."""
        return self.view.region_mode

    @property
    def focus_mode(self) -> bool:
        """Whether the selected person is shown in full and the others dimmed (the view's)."""
        return self.view.focus

    @focus_mode.setter
    def focus_mode(self, on: bool) -> None:
        self.view.set_focus(on)

    @property
    def show_unlabeled(self) -> bool:
        """Whether joints not labelled are drawn (and can be clicked); the view's."""
        return self.view.show_unlabeled

    @show_unlabeled.setter
    def show_unlabeled(self, on: bool) -> None:
        self.view.set_shown("unlabeled", on)

    @property
    def show_tags(self) -> bool:
        """Whether the people's tags are drawn (the view's)."""
        return self.view.show_tags

    @show_tags.setter
    def show_tags(self, on: bool) -> None:
        self.view.set_shown("tags", on)

    @property
    def show_blurred(self) -> bool:
        """Whether a review packet's blurred regions are outlined (the view's)."""
        return self.view.show_blurred

    @show_blurred.setter
    def show_blurred(self, on: bool) -> None:
        self.view.set_shown("blurred", on)

    # ------------------------------------------------------------------ content

    def set_frame(self, frame: Frame, people: list[Person] | None = None,
                  flags: dict[int, frozenset[int]] | None = None,
                  decoded: Decoded | None = None) -> None:
        """Show another frame: no selection, the image if already decoded, and its people
        (given here, or already in the view: the window's session opens the frame first,
        :meth:`app.session.session.Session.open_frame`)."""
        keep_view = self.frame is not None and (self.frame.width, self.frame.height) == \
            (frame.width, frame.height) and not self._fit_mode
        self.frame = frame
        self._decoded = None
        self._overlay = _OverlayLayer()  # a frame shown anew is painted anew
        self.painted_frame = None
        self.message = ""
        self.selection.select_person(None)
        self._hover = None
        self._drag = None
        self.view.set_pick(None)
        self.walk_card = None
        self.owners = None
        self.owner_rows = []
        self.regions = []
        self._region = None
        self._draft = []
        self._region_drag = None
        self.blurred = None
        if people is not None:
            self.view.open(people, flags or {})  # no dispute until the window reads it
        if decoded is not None:
            self.set_image(decoded)
        if not keep_view:
            self.fit()
        self.update()
        self.selectionChanged.emit()

    def _people_shown(self) -> None:
        """The view shows other people (ours, or the reviewer's version when asked): new hit
        tests, and keep what is still selectable."""
        self._hit_test_arrays()
        ids = {p.id for p in self.people}
        changed = self.selection.keep_only(ids)
        if self._hover is not None and self._hover[0] not in ids:
            self._hover = None
        self._drag = None
        self.update()
        if changed:
            self.selectionChanged.emit()

    def set_image(self, decoded: Decoded | None, message: str = "") -> None:
        """The decoded image of the current frame (None with a message when unreadable)."""
        self._decoded = decoded
        self.message = message
        self.update()

    @property
    def has_image(self) -> bool:
        return self._decoded is not None

    # ------------------------------------------------------------------ disputes

    @property
    def showing_theirs(self) -> bool:
        """Whether the reviewer's version is the one shown (the view's)."""
        return self.view.showing_theirs

    @property
    def has_theirs(self) -> bool:
        """Whether the frame has a reviewer's version to show (the view's)."""
        return self.view.has_theirs

    @property
    def theirs_name(self) -> str:
        """Who reviewed the disputed frame, as a sentence names them (the view's)."""
        return self.view.reviewer

    @property
    def ours(self) -> list[Person]:
        """Our people of the frame (what :attr:`people` holds unless the reviewer's version
        is shown; the view's)."""
        return list(self.view.ours)

    @property
    def marks(self) -> Marks:
        """The difference marks as drawn now, on whichever version is shown (the view's)."""
        return self.view.marks

    def show_theirs(self, on: bool) -> bool:
        """Show the reviewer's version (or ours again); False when there is none."""
        return self.view.show_theirs(on)

    @property
    def editable(self) -> bool:
        """Whether gestures may turn into edits (not read-only, ours shown)."""
        return not self.read_only and not self.showing_theirs

    # ------------------------------------------------------------------ ignore regions

    @property
    def regions(self) -> list[tuple[int, geometry.Polygons]]:
        """The frame's ignore regions ``(id, polygons)`` (the view's)."""
        return self.view.regions

    @regions.setter
    def regions(self, regions: list[tuple[int, geometry.Polygons]]) -> None:
        self.view.regions = list(regions)

    @property
    def _region(self) -> int | None:
        """The region selected in region mode (the view's)."""
        return self.view.selected_region

    @_region.setter
    def _region(self, region_id: int | None) -> None:
        self.view.selected_region = region_id

    def set_regions(self, regions: list[tuple[int, geometry.Polygons]]) -> None:
        """The frame's ignore regions (after any change); keeps the selection if it is still
        there (:meth:`app.session.view.View.set_regions`)."""
        if self.view.set_regions(regions):
            self.regionChanged.emit()
        self._region_drag = None
        self.update()

    @property
    def selected_region(self) -> int | None:
        return self._region

    @property
    def drafting(self) -> bool:
        """Whether a polygon is being drawn."""
        return bool(self._draft)

    def select_region(self, region_id: int | None) -> None:
        self._region = region_id
        self.update()
        self.regionChanged.emit()

    def set_region_mode(self, on: bool) -> None:
        """Enter or leave region mode (the view's rule: entering shows ours and leaves a
        pick; :meth:`app.session.view.View.set_region_mode`)."""
        self.view.set_region_mode(on)

    def _modes_changed(self) -> None:
        """The view's modes changed: entering region mode drops the selected joints, leaving
        it the selected region; either drops a polygon being drawn and a drag. The cursor is
        a cross while a click places a corner or picks a person."""
        on = self.view.region_mode
        if on != self._region_mode_was:
            self._region_mode_was = on
            self._draft = []
            self._region_drag = None
            self._drag = None
            if on:
                self.selection.joints = []
                self._hover = None
                self.selectionChanged.emit()
            else:
                self._region = None
            self.regionChanged.emit()
        cross = on or self.view.pick is not None
        self.setCursor(Qt.CursorShape.CrossCursor if cross else Qt.CursorShape.ArrowCursor)
        self.update()

    def region_escape(self) -> None:
        """Esc in region mode: cancel the polygon, else drop the selection, else leave."""
        if self._draft:
            self._draft = []
            self.update()
            self.regionChanged.emit()
        elif self._region is not None:
            self.select_region(None)
        else:
            self.set_region_mode(False)

    def close_polygon(self) -> bool:
        """Finish the polygon being drawn (three corners or more): asks for the edit."""
        corners = geometry.tidy_polygon(self._draft)
        if not corners or self.frame is None:
            return False
        self._draft = []
        self.update()
        self.regionChanged.emit()
        if self.editable:
            self.editRequested.emit(AddRegion(self.frame.id, (corners,)))
        return True

    def delete_selected_region(self) -> bool:
        if self._region is None or self.frame is None or not self.editable:
            return False
        self.editRequested.emit(DeleteRegion(self.frame.id, self._region))
        return True

    def _region_polygons(self, region_id: int | None) -> geometry.Polygons:
        return next((polys for rid, polys in self.regions if rid == region_id), ())

    def _bounds(self) -> tuple[float, float, float, float]:
        assert self.frame is not None
        return (-0.5, -0.5, self.frame.width - 0.5, self.frame.height - 0.5)

    def _hit_test_arrays(self) -> None:
        """Hit-testing arrays for all people shown at once: placed joints, labelled limbs."""
        k = self.skeleton.num_joints
        n = len(self.people)
        kp = np.stack([p.keypoints for p in self.people]) if n else np.zeros((0, k, 3))
        pid = np.repeat(np.array([p.id for p in self.people], dtype=np.int64), k)
        placed = np.isfinite(kp[..., :2]).all(axis=2)
        flat = placed.ravel()
        self._hit_pts = kp[..., :2].reshape(-1, 2)[flat]
        self._hit_pid = pid[flat]
        self._hit_joint = np.tile(np.arange(k), n)[flat]
        self._hit_labelled = (kp[..., 2] > 0).ravel()[flat]
        limbs = self.skeleton.limb_array
        if len(limbs) and n:
            a, b = limbs[:, 0], limbs[:, 1]
            lab = placed & (kp[..., 2] > 0)
            on = lab[:, a] & lab[:, b]
            seg = np.concatenate([kp[:, a, :2], kp[:, b, :2]], axis=2)
            self._seg = seg[on]
            self._seg_pid = np.repeat(pid[::k], len(limbs)).reshape(n, -1)[on]
        else:
            self._seg = np.zeros((0, 4))
            self._seg_pid = np.zeros(0, int)

    def person(self, person_id: int) -> Person | None:
        return self.view.person(person_id)

    def number_of(self, person_id: int) -> int | None:
        """The tag number of a person in this frame (1-based)."""
        return self.view.number_of(person_id)

    # ------------------------------------------------------------------ selection

    @property
    def selected_joints(self) -> list[tuple[int, int]]:
        return list(self.selection.joints)

    @property
    def selected_joint(self) -> tuple[int, int] | None:
        """The joint selected last (the one single-joint actions work on)."""
        return self.selection.joint

    @property
    def selected_person(self) -> int | None:
        return self.selection.person

    def select_joint(self, person_id: int, joint: int, add: bool = False) -> None:
        self.selection.select_joint(person_id, joint, add)
        self.update()
        self.selectionChanged.emit()

    def select_joints(self, pairs: list[tuple[int, int]]) -> None:
        """Select these joints at once (one selection change); the person of the last."""
        if not pairs:
            return
        self.selection.select_joints(pairs)
        self.update()
        self.selectionChanged.emit()

    def select_person(self, person_id: int | None) -> None:
        self.selection.select_person(person_id)
        self.update()
        self.selectionChanged.emit()

    def selection_moved(self) -> None:
        """The session moved the selection (an intent, after its edit): show it."""
        self.update()
        self.selectionChanged.emit()

    def clear_selection(self) -> None:
        self.view.set_pick(None)
        self.select_person(None)

    def cycle_joint(self, step: int) -> bool:
        """Select the next (``step`` 1) or previous (-1) joint of the selected person, placed
        or not; returns False when no person is selected."""
        nxt = self.selection.cycled(step, self.skeleton.num_joints)
        if nxt is None:
            return False
        self.select_joint(*nxt)
        return True

    def set_pick_mode(self, mode: str | None) -> None:
        """``"merge"``: the next click on a person emits :attr:`personPicked`."""
        self.view.set_pick(mode)

    @property
    def pick_mode(self) -> str | None:
        return self.view.pick

    # ------------------------------------------------------------------ view

    def transform(self) -> QTransform:
        """Image pixels (label coordinates) to widget pixels."""
        return QTransform(self._scale, 0, 0, self._scale, self._ox, self._oy)

    @property
    def scale(self) -> float:
        return self._scale

    def image_to_screen(self, x: float, y: float) -> QPointF:
        return QPointF(self._scale * x + self._ox, self._scale * y + self._oy)

    def screen_to_image(self, pos: QPointF) -> tuple[float, float]:
        return ((pos.x() - self._ox) / self._scale, (pos.y() - self._oy) / self._scale)

    def fit(self) -> None:
        """Fit the whole image into the Canvas (and keep fitting on resize)."""
        self._fit_mode = True
        if self.frame is None or self.frame.width <= 0 or self.frame.height <= 0:
            return
        w, h = self.frame.width, self.frame.height
        margin = 8
        avail_w = max(1, self.width() - 2 * margin)
        avail_h = max(1, self.height() - 2 * margin)
        self._scale = min(avail_w / w, avail_h / h)
        self._ox = self.width() / 2 - self._scale * (w - 1) / 2
        self._oy = self.height() / 2 - self._scale * (h - 1) / 2
        self.update()
        self.viewChanged.emit()

    def actual_size(self) -> None:
        """One image pixel per screen pixel, keeping the centre of the Canvas in place."""
        self.zoom_at(1.0 / self._scale, QPointF(self.width() / 2, self.height() / 2))

    def zoom_at(self, factor: float, pos: QPointF) -> None:
        """Zoom by ``factor`` keeping the image point under ``pos`` where it is."""
        new = float(np.clip(self._scale * factor, self.MIN_SCALE, self.MAX_SCALE))
        x, y = self.screen_to_image(pos)
        self._scale = new
        self._ox = pos.x() - new * x
        self._oy = pos.y() - new * y
        self._fit_mode = False
        self.update()
        self.viewChanged.emit()

    def zoom_in(self) -> None:
        self.zoom_at(1.25, self._zoom_anchor())

    def zoom_out(self) -> None:
        self.zoom_at(0.8, self._zoom_anchor())

    def _zoom_anchor(self) -> QPointF:
        if self.selection.joints:
            p, j = self.selection.joints[-1]
            person = self.person(p)
            if person is not None and np.isfinite(person.keypoints[j, :2]).all():
                return self.image_to_screen(*person.keypoints[j, :2])
        return QPointF(self.width() / 2, self.height() / 2)

    def ensure_visible(self, x: float, y: float, margin: float = 40.0) -> None:
        """Centre the view on image point ``(x, y)`` if it is not well inside the Canvas."""
        pos = self.image_to_screen(x, y)
        inside = QRectF(self.rect()).adjusted(margin, margin, -margin, -margin)
        if not inside.contains(pos):
            self.centre_on(x, y)
            self.viewChanged.emit()

    def show_stop(self, stop: Stop | None, where: str = "") -> None:
        """Show a stop of the walk: its sentence beside its people and its fix previewed;
        centre on it when it is not well inside the view, and zoom out when it does not fit
        (in when it would be too small to correct)."""
        self.walk_card = None if stop is None else WalkCard(stop, where)
        if stop is not None:
            pts = stop_points(stop, self.people)
            if len(pts):
                self._frame_points(pts)
        self.update()

    def _frame_points(self, pts: np.ndarray) -> None:
        lo, hi = pts.min(axis=0), pts.max(axis=0)
        size = np.maximum(hi - lo, 1.0)
        margin = 60.0
        view = np.array([max(self.width() - 2 * margin, 50), max(self.height() - 2 * margin, 50)])
        fits = float(np.min(view / size))
        inside = QRectF(self.rect()).adjusted(margin, margin, -margin, -margin)
        visible = inside.contains(self.image_to_screen(*lo)) and \
            inside.contains(self.image_to_screen(*hi))
        scale = self._scale
        if scale > fits:
            scale = fits
        elif float(np.max(size)) * scale < 0.15 * float(np.min(view)):
            scale = min(fits, 0.3 * float(np.min(view)) / float(np.max(size)), 4.0)
        if visible and scale == self._scale:
            return
        self._scale = float(np.clip(scale, self.MIN_SCALE, self.MAX_SCALE))
        self.centre_on(*((lo + hi) / 2))
        self.viewChanged.emit()

    def set_owners(self, ranking: OwnerRanking | None) -> None:
        """The ranked owners of the selected joint (None: no list)."""
        self.owners = ranking
        self.owner_rows = []
        self.update()

    def owner_row_at(self, pos: QPointF) -> int | None:
        """The person of the owner-list row under ``pos``, if any."""
        return next((pid for rect, pid in self.owner_rows if rect.contains(pos)), None)

    def centre_on(self, x: float, y: float) -> None:
        self._ox = self.width() / 2 - self._scale * x
        self._oy = self.height() / 2 - self._scale * y
        self._fit_mode = False
        self.update()

    # ------------------------------------------------------------------ hit testing

    def joint_at(self, pos: QPointF) -> tuple[int, int] | None:
        """The shown joint nearest to ``pos`` within :attr:`HIT_RADIUS` screen pixels."""
        if not len(self._hit_pts):
            return None
        pts = self._hit_pts * self._scale + (self._ox, self._oy)
        d = np.hypot(pts[:, 0] - pos.x(), pts[:, 1] - pos.y())
        if not self.show_unlabeled:
            d = np.where(self._hit_labelled, d, np.inf)
        i = int(np.argmin(d))
        if d[i] > self.HIT_RADIUS:
            return None
        return int(self._hit_pid[i]), int(self._hit_joint[i])

    def person_at(self, pos: QPointF) -> int | None:
        """The person whose joint, tag or limb is under ``pos``."""
        hit = self.joint_at(pos)
        if hit is not None:
            return hit[0]
        if self._layout is not None:
            for pid, rect in self._layout.tags.items():
                if rect.contains(pos):
                    return pid
        if len(self._seg):
            seg = self._seg * self._scale + (self._ox, self._oy, self._ox, self._oy)
            a, b = seg[:, :2], seg[:, 2:]
            ab = b - a
            ap = np.array([pos.x(), pos.y()]) - a
            t = np.clip((ap * ab).sum(1) / np.maximum((ab * ab).sum(1), 1e-9), 0, 1)
            d = np.hypot(*(ap - t[:, None] * ab).T)
            i = int(np.argmin(d))
            if d[i] <= self.LIMB_HIT:
                return int(self._seg_pid[i])
        return None

    # ------------------------------------------------------------------ painting

    def style(self) -> OverlayStyle:
        focus = self.selection.person if self.focus_mode else None
        regions = self.regions
        draft: tuple[tuple[float, float], ...] = ()
        closed = False
        d = self._region_drag
        if d is not None and d.moved and d.kind in ("corner", "move"):
            shape = self._dragged_shape(d)
            regions = [(rid, shape if rid == d.region_id else polys) for rid, polys in regions]
        elif d is not None and d.kind == "rect":
            flat = geometry.rectangle(*d.start, *d.now)
            draft, closed = tuple(zip(flat[::2], flat[1::2])), True
        elif self._draft:
            draft = tuple(self._draft)
            pointer = self.pointer_image_position()
            if pointer is not None and self.region_mode:
                draft += (pointer,)
        return OverlayStyle(
            show_unlabeled=self.show_unlabeled, show_tags=self.show_tags, focus=focus,
            flags=self.flags, selected_person=self.selection.person,
            selected_joints=frozenset(self.selection.joints), hover=self._hover,
            colours=self.colours,
            regions=tuple(regions), selected_region=self._region, region_draft=draft,
            region_draft_closed=closed, differences=self.marks,
        )

    def _dragged_shape(self, d: _RegionDrag) -> geometry.Polygons:
        if d.kind == "corner":
            return geometry.with_corner(d.polygons, *d.corner, *d.now)
        return geometry.moved(d.polygons, d.now[0] - d.start[0], d.now[1] - d.start[1],
                              self._bounds())

    def paintEvent(self, event: QPaintEvent) -> None:
        p = QPainter(self)
        p.fillRect(self.rect(), BACKGROUND)
        if self.frame is not None:
            self._paint_image(p)
            people: list[Any] = self.people
            moving = None
            held = None
            d = self._drag
            if d is not None and d.moved:
                people = self._with_drag(people, d)
                moving = d.person_id
                if d.held_view == self._view_key():
                    held = d.held_tags
            dirty = event.rect() if event.rect() != self.rect() else None
            self._layout = self._overlay.paint(p, self, people, dirty, moving, held)
            if self.show_blurred and self.blurred is not None and not self.showing_theirs:
                paint_blurred(p, self.blurred, self.image_to_screen, self.font())
            self._paint_callouts(p)
            if self.showing_theirs:
                self._paint_banner(p)
            if self._decoded is not None and self.painted_frame != self.frame.id:
                self.painted_frame = self.frame.id
                self.painted_at = time.perf_counter()
                self.framePainted.emit(self.frame.id)
        p.end()

    def _paint_callouts(self, p: QPainter) -> None:
        """The walk's card with its fix previewed, and the owner list beside the joint."""
        card = None
        about: list[QPointF] = []
        names = Names.of_frame(self.skeleton, [q.id for q in self.people])
        if self.walk_card is not None and not self.showing_theirs:
            stop = self.walk_card.stop
            if stop.fix is not None:
                paint_preview(p, stop.fix.preview, self.people, self.skeleton, self.colours,
                              self.image_to_screen)
            pts = stop_points(stop, self.people)
            if len(pts):
                a, b = self.image_to_screen(*pts.min(axis=0)), \
                    self.image_to_screen(*pts.max(axis=0))
                box = QRectF(a, b).adjusted(-8, -8, 8, 8)
            else:
                box = QRectF(self.width() / 2 - 1, 40.0, 2.0, 2.0)
            about = [self.image_to_screen(*q) for q in pts]
            card = paint_walk_card(p, self.walk_card, box, QRectF(self.rect()), self.font(),
                                   about)
        self.owner_rows = []
        joint = self.selected_joint
        if self.owners is not None and joint is not None and len(self.selection.joints) == 1:
            person = self.person(joint[0])
            if person is not None and np.isfinite(person.keypoints[joint[1], :2]).all():
                at = self.image_to_screen(*person.keypoints[joint[1], :2])
                self.owner_rows = paint_owner_list(p, self.owners, names, self.colours, at,
                                                    QRectF(self.rect()), self.font(), card,
                                                    self._connector_points() + about)

    def _connector_points(self) -> list[QPointF]:
        """Screen points along each dispute connector (both ends and between), which the owner
        list should leave visible."""
        out = []
        for (pid, j), there in self.marks.items():
            person = self.person(pid)
            if person is None or not np.isfinite(person.keypoints[j, :2]).all():
                continue
            a = self.image_to_screen(*person.keypoints[j, :2])
            b = self.image_to_screen(*there[:2])
            out += [a + (b - a) * (k / 4) for k in range(5)]
        return out

    def _paint_banner(self, p: QPainter) -> None:
        """Say plainly that the reviewer's version is on screen, not ours."""
        font = QFont(self.font())
        font.setBold(True)
        p.setFont(font)
        who = self.theirs_name or "the reviewer"
        text = f"{who}\u2019s version (read-only) \u2014 B shows mine"
        rect = p.fontMetrics().boundingRect(text).adjusted(-10, -5, 10, 5)
        rect.moveTopLeft(self.rect().topLeft() + QPointF(10, 10).toPoint())
        p.setRenderHint(QPainter.RenderHint.Antialiasing, True)
        p.setPen(QColor("#141414"))
        p.setBrush(QColor("#f2c14e"))
        p.drawRoundedRect(QRectF(rect), 4, 4)
        p.drawText(rect, Qt.AlignmentFlag.AlignCenter, text)

    def _paint_placeholder_text(self, p: QPainter, image: QRectF) -> None:
        """Why no image shows, in one line where it hides nothing: in the margin below the
        image when there is room, else along the Canvas's bottom edge, under the people
        (they are painted after it)."""
        metrics = p.fontMetrics()
        text = metrics.elidedText(self.message or "loading image\u2026",
                                  Qt.TextElideMode.ElideMiddle, max(self.width() - 32, 40))
        h = metrics.height() + 6
        y = image.bottom() + 4 if image.bottom() + 4 + h <= self.height() else self.height() - h - 2
        x = max(image.left(), 8.0)
        box = QRectF(x, y, metrics.horizontalAdvance(text) + 14, h)
        p.save()
        p.setRenderHint(QPainter.RenderHint.Antialiasing, True)
        p.setPen(Qt.PenStyle.NoPen)
        p.setBrush(QColor(20, 20, 20, 170))
        p.drawRoundedRect(box, 4, 4)
        p.setPen(QColor("#d0d0d0"))
        p.drawText(box, Qt.AlignmentFlag.AlignCenter, text)
        p.restore()

    def _paint_image(self, p: QPainter) -> None:
        assert self.frame is not None
        s = self._scale
        w, h = self.frame.width, self.frame.height
        top_left = QPointF(self._ox - 0.5 * s, self._oy - 0.5 * s)
        target = QRectF(top_left, QSizeF(w * s, h * s))
        if self._decoded is None:
            p.fillRect(target, PLACEHOLDER)
            self._paint_placeholder_text(p, target)
            return
        if s < 0.999:
            # Zoomed out: draw a copy shrunk once per zoom level rather than rescaling on every
            # paint. The decoding thread already made one by area averaging (so costume
            # patterns do not alias) for the zoom it was told; at another zoom a quick
            # bilinear copy is made here.
            d = self._decoded
            if d.scaled_image is not None and abs(d.scale - s) < 1e-9:
                p.drawImage(top_left, d.scaled_image)
                return
            if s * d.reduction >= 0.999:  # a reduced decode, until the whole one comes
                p.drawImage(target, d.image)
                return
            if self._scaled is None or self._scaled[0] is not d or self._scaled[1] != s:
                small = shrink(d.pixels, s * d.reduction, fast=True)
                self._scaled = (d, s, small, qimage_view(small))
            p.drawImage(top_left, self._scaled[3])
        else:
            # Zoomed in: nearest neighbour, so the annotator sees the real pixels.
            p.drawImage(target, self._decoded.image)

    def _view_key(self) -> tuple[float, ...]:
        """The zoom, origin and size the screen places of tags hold for."""
        return (self._scale, self._ox, self._oy, float(self.width()), float(self.height()))

    def _drag_bounds(self, d: _Drag) -> QRectF:
        """Where the dragged person is drawn now, on screen: their joints (the dragged one
        where the drag has it), the tag above them, rings and halos around them, and the
        lines to the other version's joints on a disputed frame. Its first paint of a drag
        covers where the person was (then the whole person is in both)."""
        person = self.person(d.person_id)
        if person is None:
            return QRectF(self.rect())
        kp = person.keypoints[:, :2].copy()
        kp[d.joint] = d.xy if d.moved else d.start_xy
        pts = [kp[np.isfinite(kp).all(axis=1)]]
        pts += [np.array([there[:2]]) for (pid, _), there in self.marks.items()
                if pid == d.person_id and there is not None]
        screen = np.concatenate(pts) * self._scale + (self._ox, self._oy)
        if not len(screen):
            return QRectF(self.rect())
        style = self.style()
        margin = 4 * style.joint_radius + 2 * style.limb_width + 4
        tag = 3 * (style.tag_font_px + 8)  # the tag's places above and beside the person
        (x0, y0), (x1, y1) = screen.min(axis=0), screen.max(axis=0)
        rect = QRectF(x0 - margin - tag, y0 - margin - tag, x1 - x0 + 2 * (margin + tag),
                      y1 - y0 + 2 * margin + tag)
        if self._layout is not None and d.person_id in self._layout.tags:
            rect = rect.united(self._layout.tags[d.person_id].adjusted(-2, -2, 2, 2))
        return rect

    @staticmethod
    def _with_drag(people: list[Person], drag: _Drag) -> list[Any]:
        out: list[Any] = []
        for person in people:
            if person.id != drag.person_id:
                out.append(person)
                continue
            kp = person.keypoints.copy()
            kp[drag.joint, :2] = drag.xy
            if kp[drag.joint, 2] <= 0:
                kp[drag.joint, 2] = 2
            out.append(SimpleNamespace(id=person.id, keypoints=kp))
        return out

    # ------------------------------------------------------------------ mouse

    def mousePressEvent(self, event: QMouseEvent) -> None:
        pos = event.position()
        self._pointer = pos
        self._double_clicked = False
        button = event.button()
        self.setFocus(Qt.FocusReason.MouseFocusReason)
        if button in (Qt.MouseButton.MiddleButton, Qt.MouseButton.RightButton):
            self._start_pan(pos)
            return
        if button != Qt.MouseButton.LeftButton or self.frame is None:
            return
        if self.region_mode:
            self._region_press(pos)
            return
        chosen = self.owner_row_at(pos)
        if chosen is not None and self.view.pick is None:
            self.ownerChosen.emit(chosen)
            return
        if self.view.pick is not None:
            pid = self.person_at(pos)
            if pid is not None:
                self.view.set_pick(None)
                self.setCursor(Qt.CursorShape.ArrowCursor)
                self.personPicked.emit(pid)
            return
        hit = self.joint_at(pos)
        add = bool(event.modifiers() & Qt.KeyboardModifier.ControlModifier)
        if hit is not None:
            if add:
                self.select_joint(*hit, add=True)
                return
            if hit not in self.selection.joints or len(self.selection.joints) == 1:
                self.select_joint(*hit)
            person = self.person(hit[0])
            if person is not None and self.editable:
                xy = (float(person.keypoints[hit[1], 0]), float(person.keypoints[hit[1], 1]))
                self._drag = _Drag(hit[0], hit[1], pos, xy, xy)
            return
        pid = self.person_at(pos)
        if pid is not None:
            if not add:
                self.select_person(pid)
            return
        self._start_pan(pos)

    def _start_pan(self, pos: QPointF) -> None:
        self._pan = pos
        self._pan_moved = False
        self.setCursor(Qt.CursorShape.ClosedHandCursor)

    def mouseMoveEvent(self, event: QMouseEvent) -> None:
        pos = event.position()
        self._pointer = pos
        if self.region_mode and self._pan is None:
            self._region_move(pos)
            return
        if self._drag is not None:
            d = self._drag
            if not d.moved and (pos - d.press).manhattanLength() < self.DRAG_START:
                return
            # Where the joint goes: its start plus the mouse travel, so grabbing a joint
            # off-centre does not make it jump.
            x0, y0 = d.start_xy
            dx = (pos.x() - d.press.x()) / self._scale
            dy = (pos.y() - d.press.y()) / self._scale
            before = self._drag_bounds(d) if d.moved else None
            if not d.moved and self._layout is not None:
                # The other tags keep their places while this joint moves.
                d.held_tags = {pid: QRectF(r) for pid, r in self._layout.tags.items()
                               if pid != d.person_id}
                d.held_view = self._view_key()
            d.moved = True
            d.xy = self._clamp(x0 + dx, y0 + dy)
            after = self._drag_bounds(d)
            # Only the dragged person's old and new places are painted again.
            self.drag_dirty = (after if before is None else before.united(after)).toAlignedRect()
            self.update(self.drag_dirty if self.PARTIAL_DRAG else self.rect())
            return
        if self._pan is not None:
            delta = pos - self._pan
            if delta.manhattanLength() > 0:
                self._pan = pos
                self._pan_moved = True
                self._ox += delta.x()
                self._oy += delta.y()
                self._fit_mode = False
                self.update()
                self.viewChanged.emit()
            return
        hit = self.joint_at(pos)
        hover = (hit[0], hit[1]) if hit is not None else None
        if hover != self._hover:
            self._hover = hover
            if self.view.pick is None:
                self.setCursor(Qt.CursorShape.PointingHandCursor if hover
                               else Qt.CursorShape.ArrowCursor)
            self.setToolTip(self._describe(hover) if hover else "")
            self.update()

    def mouseReleaseEvent(self, event: QMouseEvent) -> None:
        if self._region_drag is not None:
            self._region_release(event.position())
            return
        if self._double_clicked:
            self._double_clicked = False
            return
        if self._drag is not None:
            d, self._drag = self._drag, None
            if d.moved and self.frame is not None:
                x, y = d.xy
                self.editRequested.emit(MoveJoint(self.frame.id, d.person_id, d.joint,
                                                  round(x, 2), round(y, 2)))
            self.update()
            return
        if self._pan is not None:
            self._pan = None
            self.setCursor(Qt.CursorShape.CrossCursor if self.view.pick
                           else Qt.CursorShape.ArrowCursor)
            if not self._pan_moved and event.button() == Qt.MouseButton.LeftButton \
                    and self.view.pick is None and not self.region_mode and not (
                    event.modifiers() & Qt.KeyboardModifier.ControlModifier):
                self.select_person(None)

    def mouseDoubleClickEvent(self, event: QMouseEvent) -> None:
        if self.region_mode and event.button() == Qt.MouseButton.LeftButton:
            # The double click's spot is the last corner (the first click of the pair has
            # usually placed it already; the repeat is dropped); the release that ends the
            # double click places none.
            self._region_drag = None
            self._double_clicked = True
            if self._draft:
                self._draft.append(self._clamp(*self.screen_to_image(event.position())))
                self.close_polygon()
            return
        super().mouseDoubleClickEvent(event)

    # ------------------------------------------------------------------ region gestures

    def _region_press(self, pos: QPointF) -> None:
        xy = self._clamp(*self.screen_to_image(pos))
        if self._draft:
            self._region_drag = _RegionDrag("point", pos, xy, xy)
            return
        polys = self._region_polygons(self._region)
        if polys and self.editable:
            to_screen = np.array([self._scale, self._ox, self._oy])
            corner = geometry.nearest_corner(polys, np.array([pos.x(), pos.y()]),
                                             self.HIT_RADIUS, to_screen)
            if corner is not None:
                n, i = corner
                at = (polys[n][2 * i], polys[n][2 * i + 1])
                self._region_drag = _RegionDrag("corner", pos, at, at, self._region, polys,
                                                corner)
                return
            if geometry.region_at([(self._region, polys)], *xy) is not None:
                self._region_drag = _RegionDrag("move", pos, xy, xy, self._region, polys)
                return
        self._region_drag = _RegionDrag("press", pos, xy, xy)

    def _region_move(self, pos: QPointF) -> None:
        d = self._region_drag
        if d is None:
            if self._draft:
                self.update()  # the edge being drawn follows the pointer
            return
        if not d.moved and (pos - d.press).manhattanLength() < self.DRAG_START:
            return
        d.moved = True
        if d.kind == "press":
            d.kind = "rect" if self.editable else "none"
        if d.kind == "corner":
            # The corner follows the mouse travel, so grabbing it off-centre does not jump.
            d.now = self._clamp(d.start[0] + (pos.x() - d.press.x()) / self._scale,
                                d.start[1] + (pos.y() - d.press.y()) / self._scale)
        else:
            d.now = self._clamp(*self.screen_to_image(pos))
        self.update()

    def _region_release(self, pos: QPointF) -> None:
        d, self._region_drag = self._region_drag, None
        assert d is not None
        if self._double_clicked:
            self._double_clicked = False
            return
        if self.frame is None:
            return
        fid = self.frame.id
        if d.kind == "point":
            self._draft.append(d.now if d.moved else d.start)
            self.regionChanged.emit()
        elif d.kind == "rect":
            corners = geometry.rectangle(*d.start, *d.now)
            w, h = corners[2] - corners[0], corners[5] - corners[1]
            if min(w, h) * self._scale >= self.DRAG_START:
                self.editRequested.emit(AddRegion(fid, (corners,)))
        elif d.kind in ("corner", "move") and d.moved and d.region_id is not None:
            self.editRequested.emit(ReshapeRegion(fid, d.region_id, self._dragged_shape(d)))
        elif d.kind in ("press", "move") and not d.moved:
            rid = geometry.region_at(self.regions, *d.start)
            if rid is not None:
                self.select_region(rid)
            elif self.editable:
                self._region = None
                self._draft = [d.start]
                self.regionChanged.emit()
            else:
                self.select_region(None)
        self.update()

    def wheelEvent(self, event: QWheelEvent) -> None:
        steps = event.angleDelta().y() / 120.0
        if steps:
            self.zoom_at(1.2 ** steps, event.position())

    def leaveEvent(self, event: Any) -> None:
        self._pointer = None
        if self._hover is not None:
            self._hover = None
            self.update()

    def resizeEvent(self, event: QResizeEvent) -> None:
        if self._fit_mode:
            self.fit()
        super().resizeEvent(event)

    def _describe(self, hit: tuple[int, int]) -> str:
        """Whose joint this is, for the hover tip."""
        pid, j = hit
        person = self.person(pid)
        if person is None:
            return ""
        word = {0: "unlabelled", 1: "occluded", 2: "visible"}[int(person.keypoints[j, 2])]
        names = Names.of_frame(self.skeleton, [p.id for p in self.people])
        return f"{names.whose(pid, j)} (#{pid}), {word}"

    # ------------------------------------------------------------------ keys

    _REGION_KEYS = frozenset({Qt.Key.Key_Delete, Qt.Key.Key_Backspace, Qt.Key.Key_Escape,
                              Qt.Key.Key_Return, Qt.Key.Key_Enter})

    def event(self, event: QEvent) -> bool:
        # In region mode Del, Backspace and Esc work on the regions here rather than reaching
        # the window's shortcuts for joints (accepting the override turns the shortcut off).
        if event.type() == QEvent.Type.ShortcutOverride and self.region_mode \
                and isinstance(event, QKeyEvent) and event.key() in self._REGION_KEYS \
                and event.modifiers() == Qt.KeyboardModifier.NoModifier:
            event.accept()
            return True
        return super().event(event)

    def keyPressEvent(self, event: QKeyEvent) -> None:
        key = event.key()
        if self.region_mode and key in self._REGION_KEYS \
                and event.modifiers() == Qt.KeyboardModifier.NoModifier:
            if key in (Qt.Key.Key_Return, Qt.Key.Key_Enter):
                self.close_polygon()
            elif key == Qt.Key.Key_Backspace and self._draft:
                self._draft.pop()
                self.update()
                self.regionChanged.emit()
            elif key == Qt.Key.Key_Delete:
                self.delete_selected_region()
            elif key == Qt.Key.Key_Escape:
                self.region_escape()
            event.accept()
            return
        arrows = {Qt.Key.Key_Left: (-1, 0), Qt.Key.Key_Right: (1, 0),
                  Qt.Key.Key_Up: (0, -1), Qt.Key.Key_Down: (0, 1)}
        if key in arrows and self.frame is not None:
            step = 10.0 if event.modifiers() & Qt.KeyboardModifier.ShiftModifier else 1.0
            hit = self.selected_joint
            person = self.person(hit[0]) if hit else None
            if hit and person is not None and self.editable and not self.region_mode \
                    and np.isfinite(person.keypoints[hit[1], :2]).all():
                dx, dy = arrows[key]
                x, y = self._clamp(person.keypoints[hit[1], 0] + dx * step,
                                   person.keypoints[hit[1], 1] + dy * step)
                self.editRequested.emit(MoveJoint(self.frame.id, hit[0], hit[1], x, y))
            event.accept()
            return
        super().keyPressEvent(event)

    def focusNextPrevChild(self, next: bool) -> bool:
        # Tab and Shift+Tab walk the joints of the selected person instead of the focus chain.
        if self.hasFocus() and self.cycle_joint(1 if next else -1):
            return True
        return super().focusNextPrevChild(next)

    def _clamp(self, x: float, y: float) -> tuple[float, float]:
        if self.frame is None:
            return float(x), float(y)
        return (float(np.clip(x, -0.5, self.frame.width - 0.5)),
                float(np.clip(y, -0.5, self.frame.height - 0.5)))

    def pointer_image_position(self) -> tuple[float, float] | None:
        """Where the mouse pointer was last seen over the Canvas, in image pixels."""
        if self._pointer is None or self.frame is None:
            return None
        return self._clamp(*self.screen_to_image(self._pointer))
