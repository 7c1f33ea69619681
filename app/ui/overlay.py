"""The overlay painter: one function draws every person of a frame for the Canvas and for the
headless ``render`` command alike, so what is exported is what was seen.

Our visual language (defined here; DEVELOPERS.md, "Conventions", sums it up):

- *Colour says who.* Each person takes a colour of the Okabe and Ito (2008) colour-blind-safe
  qualitative palette, black left out because black draws every outline. With more than seven
  people colours repeat, as far apart as possible (:func:`assign_colours`), and the number tag
  tells people apart.
- *Shape says which side.* Left joints are filled discs, right joints rings, centre joints
  diamonds; every glyph has a thin dark outline so it reads on light and dark images.
- *Line style says how sure.* Occluded joints (``v = 1``) are see-through with a dashed edge and
  their limbs are dashed; unlabeled joints (``v = 0``) are not drawn unless asked for, and then
  as small hollow crosses where their position is remembered.
- Triage flags draw a halo (a translucent ring) around the joint; a flag on the whole person
  rings the number tag. Focus mode dims everyone but one person, and the image a little.
- *Ignore regions* (parts of a frame left out of training) lie under everything else: a light
  grey wash crossed by a two-tone diagonal hatch (a light line with a dark shadow, so it reads
  on any image) inside a thin light edge; the selected region has a white edge and square
  handles at its corners.
- *Differences* of a disputed frame (ours against a reviewer's version): a white square frame
  around the joint as shown, and a connector of white dashes on a dark line to a small hollow
  square in the person's colour where the other version has it.

Every size is in screen (device) pixels, independent of zoom, so the overlay stays readable
when zoomed far out and does not swamp the image when zoomed in. Limbs of all people are drawn
before any joint, so no joint hides under a limb, and limbs stop at the glyphs' edges.

Only QtGui is used: the headless render runs under a bare ``QGuiApplication``.
"""

from __future__ import annotations

import warnings
from collections import OrderedDict
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any, Protocol

import numpy as np
from PySide6.QtCore import QLineF, QPointF, QRectF, Qt
from PySide6.QtGui import (
    QBrush,
    QColor,
    QFont,
    QFontMetrics,
    QImage,
    QPainter,
    QPen,
    QPolygonF,
    QTransform,
)

from app.model.skeleton import Side, Skeleton
from app.session.view import WHOLE_PERSON as _WHOLE_PERSON
from app.session.view import assign_colours as _assign_colours

#: The eight colours of Okabe and Ito (2008), in the paper's order: black, orange, sky blue,
#: bluish green, yellow, blue, vermillion, reddish purple.
#:
#: Okabe, M. and Ito, K. (2008). "Color Universal Design (CUD): How to make figures and
#: presentations that are friendly to colorblind people." J*Fly, published online.
OKABE_ITO: tuple[str, ...] = (
    "#000000", "#E69F00", "#56B4E9", "#009E73", "#F0E442", "#0072B2", "#D55E00", "#CC79A7",
)

#: Person colours: the palette without black, which is kept for outlines.
PERSON_COLOURS: tuple[str, ...] = OKABE_ITO[1:]

#: The joint index that stands for "the whole person" in :attr:`OverlayStyle.flags`
#: (defined with the view's flags, :data:`app.session.view.WHOLE_PERSON`).
WHOLE_PERSON = _WHOLE_PERSON

#: A person flagged at this many joints or more is flagged as a whole (ring on the tag).
WHOLE_BODY_JOINTS = 8

#: The colour of triage halos: translucent warm white.
HALO = QColor(255, 246, 214, 150)
HALO_RIM = QColor(20, 20, 20, 120)

#: Triage reasons at least this strong draw a halo (the level at which triage flags a person).
FLAG_WEIGHT = 0.5

#: The dark outline around every glyph, limb and tag (near-black, so it stays visible on black).
OUTLINE = "#141414"


class _PersonLike(Protocol):
    id: int
    keypoints: np.ndarray


def palette_colour(index: int) -> QColor:
    """Colour ``index`` of :data:`PERSON_COLOURS` (indices wrap around).

    Examples
    --------
    >>> palette_colour(0).name(), palette_colour(7).name()
    ('#e69f00', '#e69f00')
    """
    return QColor(PERSON_COLOURS[int(index) % len(PERSON_COLOURS)])


def assign_colours(people: Sequence[_PersonLike],
                   keep: Mapping[int, int] | None = None) -> dict[int, int]:
    """Palette indices into :data:`PERSON_COLOURS` that set people close together apart
    (:func:`app.session.view.assign_colours`, the session's rule, with this palette's size).

    Examples
    --------
    >>> from app.model.labels import Person
    >>> far, near = Person.blank(1, 17), Person.blank(2, 17)
    >>> far.keypoints[0] = (0, 0, 2); near.keypoints[0] = (5, 5, 2)
    >>> assign_colours([far, near])
    {1: 0, 2: 1}
    """
    return _assign_colours(people, keep, len(PERSON_COLOURS))


def relative_luminance(colour: QColor) -> float:
    """Relative luminance of an sRGB colour.

    Parameters
    ----------
    colour
        An opaque colour.

    Returns
    -------
    float
        In [0, 1]; 0 for black, 1 for white.

    Notes
    -----
    Each channel c in [0, 1] is linearised as ``c / 12.92`` if ``c <= 0.04045`` else
    ``((c + 0.055) / 1.055) ** 2.4``; then ``L = 0.2126 R + 0.7152 G + 0.0722 B``.

    References
    ----------
    W3C, Web Content Accessibility Guidelines (WCAG) 2.1, definition of "relative luminance".

    Examples
    --------
    >>> round(relative_luminance(QColor("#ffffff")), 3), relative_luminance(QColor("#000000"))
    (1.0, 0.0)
    """
    rgb = np.array([colour.redF(), colour.greenF(), colour.blueF()])
    lin = np.where(rgb <= 0.04045, rgb / 12.92, ((rgb + 0.055) / 1.055) ** 2.4)
    return float(lin @ np.array([0.2126, 0.7152, 0.0722]))


def text_colour_on(colour: QColor) -> QColor:
    """Black or white, whichever contrasts more with ``colour`` (WCAG 2.1 contrast ratio).

    Notes
    -----
    Contrast ratio ``(L1 + 0.05) / (L2 + 0.05)`` with ``L1`` the lighter luminance.

    References
    ----------
    W3C, Web Content Accessibility Guidelines (WCAG) 2.1, definition of "contrast ratio".

    Examples
    --------
    >>> text_colour_on(QColor("#F0E442")).name(), text_colour_on(QColor("#0072B2")).name()
    ('#000000', '#ffffff')
    """
    lum = relative_luminance(colour)
    with_black = (lum + 0.05) / 0.05
    with_white = 1.05 / (lum + 0.05)
    return QColor("#000000") if with_black >= with_white else QColor("#ffffff")


@dataclass(frozen=True)
class OverlayStyle:
    """How the overlay looks; every length in screen pixels.

    ``flags`` maps a person id to the joints triage flagged (``WHOLE_PERSON`` flags the
    person as a whole); ``focus`` is the person id focus mode keeps bright;
    ``selected_joints`` holds ``(person_id, joint)`` pairs; ``hover`` is
    ``(person_id, joint or None)``.
    """

    joint_radius: float = 5.0
    limb_width: float = 2.5
    outline: float = 1.0
    show_unlabeled: bool = False
    show_tags: bool = True
    focus: int | None = None
    dim_others: float = 0.25
    dim_image: float = 0.35
    flags: Mapping[int, frozenset[int]] = field(default_factory=dict)
    selected_person: int | None = None
    selected_joints: frozenset[tuple[int, int]] = frozenset()
    hover: tuple[int, int | None] | None = None
    tag_font_px: int = 11
    colours: Mapping[int, int] | None = None  # person id -> palette index; None: assign
    #: Ignore regions ``(region id, polygons)``, each polygon flat ``(x0, y0, x1, y1, ...)``
    #: in image pixels.
    regions: tuple[tuple[int, tuple[tuple[float, ...], ...]], ...] = ()
    selected_region: int | None = None
    #: The corners of a region being drawn (image pixels), closed when it is a rectangle.
    region_draft: tuple[tuple[float, float], ...] = ()
    region_draft_closed: bool = False
    #: ``(person id, joint)`` -> where the other version has that joint (image pixels), or
    #: None when it is not labelled there: the differences of a disputed frame.
    differences: Mapping[tuple[int, int], tuple[float, float] | None] = field(
        default_factory=dict)


@dataclass(frozen=True)
class OverlayLayout:
    """What the painter placed: each person's tag number, palette index and tag rectangle
    (screen pixels)."""

    numbers: dict[int, int]
    colours: dict[int, int]
    tags: dict[int, QRectF]


def map_points(transform: QTransform, xy: np.ndarray) -> np.ndarray:
    """Map ``(N, 2)`` image points through an affine ``transform`` to screen points.

    Examples
    --------
    >>> t = QTransform.fromScale(2, 2) * QTransform.fromTranslate(10, 0)
    >>> map_points(t, np.array([[1.0, 1.0]]))
    array([[12.,  2.]])
    """
    xy = np.asarray(xy, dtype=np.float64).reshape(-1, 2)
    x, y = xy[:, 0], xy[:, 1]
    sx = transform.m11() * x + transform.m21() * y + transform.dx()
    sy = transform.m12() * x + transform.m22() * y + transform.dy()
    return np.column_stack([sx, sy])


def layout_tags(anchors: np.ndarray, sizes: np.ndarray, gap: float,
                obstacles: np.ndarray | None = None,
                taken: np.ndarray | None = None) -> np.ndarray:
    """Place one tag above each anchor, moving tags aside so that they do not overlap.

    Parameters
    ----------
    anchors
        ``(N, 2)`` screen points the tags belong to (the top of each person).
    sizes
        ``(N, 2)`` tag width and height.
    gap
        Distance between an anchor and the bottom of its tag in the preferred place.
    obstacles
        ``(P, 2)`` points a tag should rather not cover (the joints), or None.
    taken
        ``(M, 4)`` boxes ``x0, y0, x1, y1`` of tags already placed, which stay where they are
        (the other people's tags while one person is dragged), or None.

    Returns
    -------
    numpy.ndarray
        ``(N, 2)`` tag centres.

    Notes
    -----
    Greedy, top to bottom: each tag tries a fixed list of places around its anchor (above,
    above-left, above-right, left, right, higher up, below) and takes the first that overlaps
    no tag placed before it; among places that all overlap, the one covering the least tag area,
    then the fewest obstacle points. Common practice for label placement, no source.

    Examples
    --------
    >>> c = layout_tags(np.array([[50.0, 50.0], [52.0, 50.0]]), np.full((2, 2), 10.0), 4.0)
    >>> bool(abs(c[0, 0] - c[1, 0]) >= 10 or abs(c[0, 1] - c[1, 1]) >= 10)
    True
    >>> layout_tags(np.array([[50.0, 50.0]]), np.full((1, 2), 10.0), 4.0)  # above its anchor
    array([[50., 41.]])
    >>> layout_tags(np.array([[50.0, 50.0]]), np.full((1, 2), 10.0), 4.0,
    ...             taken=np.array([[45.0, 36.0, 55.0, 46.0]]))  # that place taken: higher
    array([[50., 29.]])
    """
    anchors = np.asarray(anchors, dtype=np.float64).reshape(-1, 2)
    sizes = np.asarray(sizes, dtype=np.float64).reshape(-1, 2)
    n = len(anchors)
    out = np.zeros((n, 2))
    if n == 0:
        return out
    pts = np.zeros((0, 2)) if obstacles is None else np.asarray(obstacles, float).reshape(-1, 2)
    w, h = sizes[:, 0:1], sizes[:, 1:2]
    up = gap + h / 2
    side = gap + w / 2
    zero = np.zeros_like(w)
    # Candidate offsets of each tag's centre from its anchor, in order of preference: (N, 12).
    dx = np.hstack([zero, -side, side, -side - 2, side + 2, zero, -side, side,
                    -w - side, w + side, zero, zero])
    dy = np.hstack([-up, -up, -up, zero, zero, -up - h - 2, -up - h - 2, -up - h - 2,
                    -up, -up, up, -up - 2 * h - 4])
    cx = anchors[:, 0:1] + dx
    cy = anchors[:, 1:2] + dy
    boxes = np.stack([cx - w / 2, cy - h / 2, cx + w / 2, cy + h / 2], axis=2)  # (N, 12, 4)
    covered = _points_in_boxes(pts, boxes)
    preference = np.arange(boxes.shape[1]) * 1e-3
    fixed = np.zeros((0, 4)) if taken is None else np.asarray(taken, float).reshape(-1, 4)
    placed = np.zeros((len(fixed) + n, 4))  # x0, y0, x1, y1 of the tags placed so far
    placed[:len(fixed)] = fixed
    for m, i in enumerate(np.argsort(anchors[:, 1], kind="stable"), start=len(fixed)):
        b = boxes[i]
        if m:
            q = placed[:m]
            ox = np.minimum(b[:, None, 2], q[None, :, 2]) - np.maximum(b[:, None, 0], q[None, :, 0])
            oy = np.minimum(b[:, None, 3], q[None, :, 3]) - np.maximum(b[:, None, 1], q[None, :, 1])
            overlap = (np.clip(ox + 2, 0, None) * np.clip(oy + 2, 0, None)).sum(axis=1)
        else:
            overlap = np.zeros(len(b))
        free = overlap == 0
        if free.any():
            # Among free places, prefer covering no joint, then the order of preference.
            cost = np.where(free, covered[i], np.inf) + preference
        else:
            cost = overlap * 1e3 + covered[i] + preference
        best = int(np.argmin(cost))
        out[i] = (cx[i, best], cy[i, best])
        placed[m] = b[best]
    return out


def _points_in_boxes(pts: np.ndarray, boxes: np.ndarray, cell: float = 4.0) -> np.ndarray:
    """How many of ``pts`` ``(P, 2)`` fall in each box of ``boxes`` ``(..., 4)``, counted on a
    grid of ``cell`` pixels (a summed-area table: four lookups per box).

    Examples
    --------
    >>> pts = np.array([[10.0, 10.0], [11.0, 12.0], [50.0, 50.0]])
    >>> _points_in_boxes(pts, np.array([[0.0, 0.0, 20.0, 20.0], [40.0, 40.0, 60.0, 60.0]]))
    array([2, 1])
    """
    shape = boxes.shape[:-1]
    if not len(pts):
        return np.zeros(shape, dtype=np.int64)
    lo = np.minimum(pts.min(axis=0), boxes[..., :2].reshape(-1, 2).min(axis=0)) - cell
    hi = np.maximum(pts.max(axis=0), boxes[..., 2:].reshape(-1, 2).max(axis=0)) + cell
    nx, ny = (np.ceil((hi - lo) / cell).astype(int) + 1).tolist()
    gx = ((pts[:, 0] - lo[0]) // cell).astype(int)
    gy = ((pts[:, 1] - lo[1]) // cell).astype(int)
    grid = np.bincount(gy * nx + gx, minlength=nx * ny).reshape(ny, nx)
    table = np.zeros((ny + 1, nx + 1), dtype=np.int64)
    table[1:, 1:] = grid.cumsum(axis=0).cumsum(axis=1)
    x0 = ((boxes[..., 0] - lo[0]) // cell).astype(int)
    y0 = ((boxes[..., 1] - lo[1]) // cell).astype(int)
    x1 = ((boxes[..., 2] - lo[0]) // cell).astype(int) + 1
    y1 = ((boxes[..., 3] - lo[1]) // cell).astype(int) + 1
    return table[y1, x1] - table[y0, x1] - table[y1, x0] + table[y0, x0]


def tag_anchor(points: np.ndarray, labelled: np.ndarray) -> np.ndarray | None:
    """The screen point a person's tag hangs from: the top of their labelled joints, at the
    horizontal centre of the topmost few (the head, for an upright person).

    Examples
    --------
    >>> tag_anchor(np.array([[10.0, 5.0], [30.0, 50.0]]), np.array([True, True]))
    array([10.,  5.])
    """
    if not labelled.any():
        return None
    pts = points[labelled]
    top = pts[:, 1].min()
    near_top = pts[pts[:, 1] <= top + 12]
    return np.array([near_top[:, 0].mean(), top])


def paint_overlay(painter: QPainter, people: Sequence[_PersonLike], skeleton: Skeleton,
                  transform: QTransform, style: OverlayStyle | None = None,
                  image_size: tuple[int, int] | None = None,
                  within: QRectF | None = None,
                  held_tags: Mapping[int, QRectF] | None = None,
                  part: str = "whole") -> OverlayLayout:
    """Draw every person of a frame onto ``painter``.

    Parameters
    ----------
    painter
        An active painter on the Canvas or on a full-resolution image.
    people
        The frame's people (objects with ``id`` and ``keypoints`` ``(K, 3)`` x, y, v in image
        pixels), in the order that numbers their tags 1, 2, ...
    skeleton
        Joint sides and limbs.
    transform
        Image pixels to device pixels (scale and translation). With the convention that
        integer coordinates are pixel centres, a 1:1 render uses a translation of (0.5, 0.5).
    style
        Sizes, toggles, focus, flags, selection, hover and colours.
    image_size
        ``(width, height)`` of the image, for dimming it in focus mode.
    within
        Where the painter is clipped to (screen pixels), when only part is painted again:
        the people drawn wholly outside it are left out (their tags are still placed, so
        that every tag lands where a whole paint puts it).
    held_tags
        Person id -> tag rectangle (screen pixels) of tags that stay where they are: while a
        joint is dragged, everybody else's tag keeps its place and only the dragged person's
        tag is placed again, around them (:func:`layout_tags` with ``taken``), so a move
        neither lays out every tag again nor makes other tags jump. None: every tag placed.
    part
        ``"whole"``: everything. ``"under"``: what lies under the person drawn last (the
        focused, else the selected person): the veil, the regions and everybody else, no
        tags. ``"over"``: the rest, that person, the difference marks and the tags. Painting
        ``"under"`` then ``"over"`` is painting ``"whole"``, so while that person's joint is
        dragged the Canvas keeps ``"under"`` in a layer and paints only ``"over"`` per move.

    Returns
    -------
    OverlayLayout
        Tag numbers, colours and where the tags landed, for hit testing.

    Notes
    -----
    Layers, bottom to top: the image veil (focus mode), ignore regions, triage halos, limbs
    of everyone, joints, selection and hover rings, difference marks, number tags. Dimmed
    people (focus mode) are painted first with all their layers, then the others; the focused
    or selected person comes last.
    Joint glyphs are drawn antialiased once per colour and kind and then copied (snapped to
    the device pixel that holds the joint, so within half a pixel of it); the geometry of all
    people is computed as whole arrays.

    Examples
    --------
    >>> from PySide6.QtGui import QImage
    >>> from app.ui.render import gui_application
    >>> _ = gui_application()              # fonts need a (headless) Qt application
    >>> from app.model.skeleton import coco_body
    >>> from app.model.labels import Person
    >>> p = Person.blank(7, 17); p.keypoints[5] = (20, 20, 2)
    >>> img = QImage(40, 40, QImage.Format.Format_RGB32); img.fill(QColor("#808080"))
    >>> qp = QPainter(img)
    >>> layout = paint_overlay(qp, [p], coco_body(), QTransform.fromTranslate(0.5, 0.5))
    >>> qp.end()
    True
    >>> layout.numbers, layout.colours, img.pixelColor(20, 20).name()
    ({7: 1}, {7: 0}, '#e69f00')
    """
    style = style or OverlayStyle()
    people = list(people)
    numbers = {p.id: n + 1 for n, p in enumerate(people)}
    colours = dict(style.colours) if style.colours is not None else {}
    if any(p.id not in colours for p in people):
        colours = assign_colours(people, colours)
    geo = _geometry(people, skeleton, transform, style)

    painter.save()
    painter.setWorldTransform(QTransform())
    painter.setRenderHint(QPainter.RenderHint.Antialiasing, True)
    painter.setRenderHint(QPainter.RenderHint.TextAntialiasing, True)
    under, over = part in ("whole", "under"), part in ("whole", "over")
    if under and style.focus is not None and image_size is not None and style.dim_image > 0:
        w, h = image_size
        veil = transform.mapRect(QRectF(-0.5, -0.5, float(w), float(h)))
        painter.fillRect(veil, QColor(0, 0, 0, round(255 * style.dim_image)))
    if under and (style.regions or style.region_draft):
        _paint_regions(painter, transform, style)

    top = style.focus if style.focus is not None else style.selected_person
    shown = range(len(people)) if within is None else _people_within(geo, within, style)
    rest = [i for i in shown if people[i].id != top] if under else []
    first = [i for i in shown if people[i].id == top] if over else []
    dimmed = style.dim_others if style.focus is not None else 1.0
    dpr = painter.device().devicePixelRatioF() if painter.device() is not None else 1.0
    for group, opacity in ((rest, dimmed), (first, 1.0)):
        if not group:
            continue
        painter.setOpacity(opacity)
        for i in group:
            _paint_halos(painter, geo, i, people[i].id, style, dpr)
        for i in group:
            _paint_limbs(painter, geo, i, palette_colour(colours[people[i].id]),
                         people[i].id == style.selected_person, style)
        for i in group:
            _paint_joints(painter, geo, i, colours[people[i].id], style, dpr)
        for i in group:
            _paint_marks(painter, geo, i, people[i].id, style)
    painter.setOpacity(1.0)
    if over and style.differences:
        _paint_differences(painter, geo, people, colours, transform, style)

    tags: dict[int, QRectF] = {}
    if over and style.show_tags and people:
        tags = _paint_tags(painter, geo, people, numbers, colours, transform, style, dpr,
                           within, held_tags)
    painter.restore()
    return OverlayLayout(numbers, colours, tags)


def _people_within(geo: _Geometry, within: QRectF, style: OverlayStyle) -> list[int]:
    """The people some of whose drawing (joints, limbs, rings, halos) reaches into ``within``."""
    pad = 4 * style.joint_radius + 2 * style.limb_width + 4
    pts = np.where(geo.placed[..., None], geo.pts, np.nan)
    with np.errstate(invalid="ignore"), warnings.catch_warnings():
        warnings.simplefilter("ignore", RuntimeWarning)  # a person with no joint placed
        lo, hi = np.nanmin(pts, axis=1) - pad, np.nanmax(pts, axis=1) + pad
    near = (lo[:, 0] <= within.right()) & (hi[:, 0] >= within.left()) \
        & (lo[:, 1] <= within.bottom()) & (hi[:, 1] >= within.top())
    return np.flatnonzero(near).tolist()


class _Geometry:
    """Screen geometry of all people at once: points, what is placed and labelled, and the
    limb segments (cut back to the glyph edges), solid and dashed."""

    def __init__(self, people: list[_PersonLike], skeleton: Skeleton, transform: QTransform,
                 style: OverlayStyle):
        k = skeleton.num_joints
        n = len(people)
        kp = np.stack([p.keypoints for p in people]) if n else np.zeros((0, k, 3))
        self.pts = map_points(transform, kp[..., :2].reshape(-1, 2)).reshape(n, k, 2)
        self.v = kp[..., 2]
        self.placed = np.isfinite(self.pts).all(axis=2)
        self.labelled = self.placed & (self.v > 0)
        self.kind = np.array([_KIND[s] for s in skeleton.sides], dtype=np.int8)
        limbs = skeleton.limb_array
        a, b = limbs[:, 0], limbs[:, 1]
        on = self.labelled[:, a] & self.labelled[:, b]
        unsure = on & ((self.v[:, a] == 1) | (self.v[:, b] == 1))
        with np.errstate(invalid="ignore", divide="ignore"):
            p0, p1 = self.pts[:, a], self.pts[:, b]
            d = p1 - p0
            length = np.hypot(d[..., 0], d[..., 1])
            u = d / np.maximum(length, 1e-9)[..., None]
            cut = style.joint_radius
            # Limbs stop at the edge of their joints' glyphs, so a ring's hole shows the image
            # and never a limb end (which would make a right joint look like a left one).
            self.ends = np.concatenate([p0 + u * cut, p1 - u * cut], axis=-1)
            on &= length > 2 * cut + 1
        self.sure = on & ~unsure
        self.unsure = on & unsure
        self._lines: dict[tuple[int, bool], list[QLineF]] = {}

    def lines(self, i: int, dashed: bool) -> list[QLineF]:
        """Person ``i``'s solid (or dashed) limbs as line objects, made once."""
        key = (i, dashed)
        got = self._lines.get(key)
        if got is None:
            mask = self.unsure[i] if dashed else self.sure[i]
            got = self._lines[key] = [QLineF(*e) for e in self.ends[i][mask].tolist()]
        return got

    def anchors(self) -> tuple[np.ndarray, np.ndarray]:
        """Where each person's tag hangs (see :func:`tag_anchor`), for all people at once,
        and which people have one."""
        y = np.where(self.labelled, self.pts[..., 1], np.inf)
        top = y.min(axis=1)
        has = np.isfinite(top)
        near = self.labelled & (self.pts[..., 1] <= top[:, None] + 12)
        count = np.maximum(near.sum(axis=1), 1)
        x = np.where(near, self.pts[..., 0], 0).sum(axis=1) / count
        return np.column_stack([x, np.where(has, top, 0)]), has


_KIND = {Side.LEFT: 0, Side.RIGHT: 1, Side.CENTRE: 2}

_GEOMETRY: OrderedDict[tuple[Any, ...], tuple[_Geometry, list[Any]]] = OrderedDict()


def _geometry(people: list[_PersonLike], skeleton: Skeleton, transform: QTransform,
              style: OverlayStyle) -> _Geometry:
    """:class:`_Geometry`, remembered while the people and the view stay the same (repaints
    for hover, selection or exposure then skip the arithmetic and the line lists)."""
    key = (tuple((p.id, id(p.keypoints)) for p in people), id(skeleton),
           transform.m11(), transform.m12(), transform.m21(), transform.m22(),
           transform.dx(), transform.dy(), style.joint_radius)
    hit = _GEOMETRY.get(key)
    if hit is not None:
        _GEOMETRY.move_to_end(key)
        return hit[0]
    geo = _Geometry(people, skeleton, transform, style)
    # The arrays are kept with the entry so that their ids cannot be reused meanwhile.
    _GEOMETRY[key] = (geo, [p.keypoints for p in people])
    if len(_GEOMETRY) > 4:
        _GEOMETRY.popitem(last=False)
    return geo

_PENS: dict[tuple[Any, ...], QPen] = {}


def _pen(colour: QColor | str, width: float, cap: Qt.PenCapStyle = Qt.PenCapStyle.FlatCap,
         dash: Sequence[float] | None = None) -> QPen:
    """A pen, made once per look (making pens costs more than drawing with them)."""
    c = QColor(colour)
    key = (c.rgba(), float(width), cap, None if dash is None else tuple(dash))
    pen = _PENS.get(key)
    if pen is None:
        pen = QPen(c, width)
        pen.setCapStyle(cap)
        pen.setJoinStyle(Qt.PenJoinStyle.RoundJoin)
        if dash is not None:
            pen.setDashPattern(list(dash))
        if len(_PENS) > 512:
            _PENS.clear()
        _PENS[key] = pen
    return pen


# Dash pattern of occluded limbs in screen pixels: dash, gap.
_DASH_PX = (5.0, 3.5)


def _paint_limbs(painter: QPainter, geo: _Geometry, i: int, colour: QColor, selected: bool,
                 style: OverlayStyle) -> None:
    # The dark outline is drawn without antialiasing: a crisp, fully dark edge reads better
    # on busy images than a soft grey one, and costs a fifth as much to draw; the coloured
    # line on top is antialiased.
    width = style.limb_width + (1.0 if selected else 0.0)
    out_w = round(width + 2 * style.outline + 0.5)
    sure, unsure = geo.sure[i], geo.unsure[i]
    aa = QPainter.RenderHint.Antialiasing
    if sure.any():
        lines = geo.lines(i, False)
        painter.setRenderHint(aa, False)
        painter.setPen(_pen(OUTLINE, out_w))
        painter.drawLines(lines)
        painter.setRenderHint(aa, True)
        painter.setPen(_pen(colour, width))
        painter.drawLines(lines)
    if unsure.any():
        lines = geo.lines(i, True)
        # Qt dash patterns are in units of the pen width; scale so both pens dash alike.
        painter.setRenderHint(aa, False)
        painter.setPen(_pen(OUTLINE, out_w, dash=[d / out_w for d in _DASH_PX]))
        painter.drawLines(lines)
        painter.setRenderHint(aa, True)
        painter.setPen(_pen(colour, width, dash=[d / width for d in _DASH_PX]))
        painter.drawLines(lines)


def _paint_halos(painter: QPainter, geo: _Geometry, i: int, pid: int, style: OverlayStyle,
                 dpr: float) -> None:
    flagged = style.flags.get(pid)
    if not flagged:
        return
    image, half = _halo(style, dpr)
    k = geo.pts.shape[1]
    for j in sorted(flagged):
        if 0 <= j < k and geo.placed[i, j] and (geo.labelled[i, j] or style.show_unlabeled):
            dx, dy = np.floor(geo.pts[i, j] * dpr)
            painter.drawImage(QPointF((dx - half) / dpr, (dy - half) / dpr), image)


def _halo(style: OverlayStyle, dpr: float) -> tuple[QImage, int]:
    """The triage halo, drawn once: a soft, wide, see-through ring with a faint dark rim
    outside -- a glow that reads on light and dark images alike, larger and softer than the
    crisp white selection ring."""
    key = ("halo", style.joint_radius, dpr)
    hit = _SPRITES.get(key)
    if hit is not None:
        return hit
    r = style.joint_radius + 6.0
    half = int(np.ceil((r + 5.0) * dpr))
    image = QImage(2 * half + 1, 2 * half + 1, QImage.Format.Format_ARGB32_Premultiplied)
    image.fill(0)
    p = QPainter(image)
    p.setRenderHint(QPainter.RenderHint.Antialiasing, True)
    p.scale(dpr, dpr)
    c = QPointF((half + 0.5) / dpr, (half + 0.5) / dpr)
    p.setBrush(Qt.BrushStyle.NoBrush)
    p.setPen(_pen(HALO, 5.0))
    p.drawEllipse(c, r, r)
    p.setPen(_pen(HALO_RIM, 1.0))
    p.drawEllipse(c, r + 3.0, r + 3.0)
    p.end()
    image.setDevicePixelRatio(dpr)
    _SPRITES[key] = (image, half)
    return image, half


_SPRITES: dict[tuple[Any, ...], tuple[QImage, int]] = {}


def _glyph(colour_index: int, kind: int, occluded: bool, style: OverlayStyle,
           dpr: float) -> tuple[QImage, int]:
    """A joint glyph drawn once, antialiased, and the device pixel that is its centre."""
    key = (colour_index, kind, occluded, style.joint_radius, style.outline, dpr)
    hit = _SPRITES.get(key)
    if hit is not None:
        return hit
    r = style.joint_radius
    half = int(np.ceil((1.3 * r + 2 * style.outline + 1) * dpr))
    size = 2 * half + 1
    image = QImage(size, size, QImage.Format.Format_ARGB32_Premultiplied)
    image.fill(0)
    p = QPainter(image)
    p.setRenderHint(QPainter.RenderHint.Antialiasing, True)
    p.scale(dpr, dpr)
    _draw_glyph(p, QPointF((half + 0.5) / dpr, (half + 0.5) / dpr), kind, occluded,
                palette_colour(colour_index), style)
    p.end()
    image.setDevicePixelRatio(dpr)
    if len(_SPRITES) > 1024:
        _SPRITES.clear()
    _SPRITES[key] = (image, half)
    return image, half


def _draw_glyph(painter: QPainter, c: QPointF, kind: int, occluded: bool, colour: QColor,
                style: OverlayStyle) -> None:
    r = style.joint_radius
    ring_w = max(2.0, 0.4 * r)
    faint = QColor(colour)
    faint.setAlphaF(0.35)
    if kind == _KIND[Side.RIGHT]:
        # The ring's centre line sits on the disc's radius: its hole (about 3 px) keeps a
        # ring from reading as a disc at this size.
        painter.setBrush(Qt.BrushStyle.NoBrush)
        painter.setPen(_pen(OUTLINE, ring_w + 2 * style.outline))
        painter.drawEllipse(c, r, r)
        dash = [2.2 / ring_w, 1.6 / ring_w] if occluded else None
        painter.setPen(_pen(colour, ring_w, dash=dash))
        painter.drawEllipse(c, r, r)
        return
    x, y = c.x(), c.y()
    diamond = r * 1.3
    shape = None if kind == _KIND[Side.LEFT] else QPolygonF([
        QPointF(x, y - diamond), QPointF(x + diamond, y),
        QPointF(x, y + diamond), QPointF(x - diamond, y)])
    painter.setBrush(faint if occluded else colour)
    painter.setPen(_pen(OUTLINE, style.outline))
    if shape is None:
        painter.drawEllipse(c, r, r)
    else:
        painter.drawPolygon(shape)
    if occluded:
        # See-through inside, the edge dashed in the full colour (so the colour still says
        # who), on the solid dark edge (so the dashes read on any image).
        edge_w = 2.0
        painter.setBrush(Qt.BrushStyle.NoBrush)
        painter.setPen(_pen(colour, edge_w, dash=[2.2 / edge_w, 1.6 / edge_w]))
        inner = r - style.outline / 2 - edge_w / 2
        if shape is None:
            painter.drawEllipse(c, inner, inner)
        else:
            k = diamond - 1.4 * (style.outline / 2 + edge_w / 2)
            painter.drawPolygon(QPolygonF([QPointF(x, y - k), QPointF(x + k, y),
                                           QPointF(x, y + k), QPointF(x - k, y)]))


def _paint_joints(painter: QPainter, geo: _Geometry, i: int, colour_index: int,
                  style: OverlayStyle, dpr: float) -> None:
    idx = np.flatnonzero(geo.labelled[i])
    if len(idx):
        # Snap each glyph's centre pixel onto the device pixel that holds the joint.
        dev = np.floor(geo.pts[i, idx] * dpr).astype(np.int64)
        code = geo.kind[idx] * 2 + (geo.v[i, idx] == 1)
        sprites: dict[int, tuple[QImage, int]] = {}
        for c in np.unique(code).tolist():
            sprites[c] = _glyph(colour_index, c // 2, bool(c % 2), style, dpr)
        draw = painter.drawImage
        if dpr == 1.0:
            for (dx, dy), c in zip(dev.tolist(), code.tolist()):
                image, half = sprites[c]
                draw(dx - half, dy - half, image)
        else:
            for (dx, dy), c in zip(dev.tolist(), code.tolist()):
                image, half = sprites[c]
                draw(QPointF((dx - half) / dpr, (dy - half) / dpr), image)
    if style.show_unlabeled:
        hidden = np.flatnonzero(geo.placed[i] & (geo.v[i] <= 0))
        if len(hidden):
            colour = palette_colour(colour_index)
            k = 0.8 * style.joint_radius
            crosses = []
            for x, y in geo.pts[i, hidden].tolist():
                crosses += [QLineF(x - k, y - k, x + k, y + k), QLineF(x - k, y + k, x + k, y - k)]
            painter.setPen(_pen(OUTLINE, 3.2, Qt.PenCapStyle.RoundCap))
            painter.drawLines(crosses)
            painter.setPen(_pen(colour, 1.4, Qt.PenCapStyle.RoundCap))
            painter.drawLines(crosses)


def _paint_marks(painter: QPainter, geo: _Geometry, i: int, pid: int,
                 style: OverlayStyle) -> None:
    """Selection and hover rings."""
    r = style.joint_radius
    k = geo.pts.shape[1]
    painter.setBrush(Qt.BrushStyle.NoBrush)
    for p, j in style.selected_joints:
        if p == pid and 0 <= j < k and geo.placed[i, j]:
            c = QPointF(*geo.pts[i, j])
            painter.setPen(_pen("#ffffff", 2.0))
            painter.drawEllipse(c, r + 3.5, r + 3.5)
            painter.setPen(_pen(OUTLINE, 1.0))
            painter.drawEllipse(c, r + 5.0, r + 5.0)
    if style.hover is not None and style.hover[0] == pid and style.hover[1] is not None:
        j = style.hover[1]
        if 0 <= j < k and geo.placed[i, j]:
            painter.setPen(_pen(QColor(255, 255, 255, 200), 1.5))
            painter.drawEllipse(QPointF(*geo.pts[i, j]), r + 2.5, r + 2.5)


#: Ignore regions: the edge (light), its shadow (dark) and the wash inside.
REGION_EDGE = QColor(236, 236, 236, 230)
REGION_SHADOW = QColor(20, 20, 20, 170)
REGION_WASH = QColor(210, 210, 210, 56)
#: Spacing of the hatch lines (screen pixels).
HATCH_PX = 9


def _hatch_brush() -> QBrush:
    """The two-tone diagonal hatch, one tile drawn once: a light line with a dark shadow
    beside it, rising to the right, every :data:`HATCH_PX` pixels."""
    key = ("hatch", HATCH_PX)
    hit = _SPRITES.get(key)
    if hit is None:
        s = HATCH_PX
        tile = QImage(s, s, QImage.Format.Format_ARGB32_Premultiplied)
        tile.fill(REGION_WASH)
        p = QPainter(tile)
        p.setRenderHint(QPainter.RenderHint.Antialiasing, True)
        # Each line is drawn at three offsets so it runs on seamlessly across tiles.
        for dx in (-s, 0, s):
            p.setPen(_pen(REGION_SHADOW, 1.2))
            p.drawLine(QLineF(dx + 1.0, s + 1.0, dx + s + 1.0, 1.0))
            p.setPen(_pen(REGION_EDGE, 1.2))
            p.drawLine(QLineF(dx, s, dx + s, 0.0))
        p.end()
        hit = _SPRITES[key] = (tile, 0)
    return QBrush(hit[0])


def _paint_regions(painter: QPainter, transform: QTransform, style: OverlayStyle) -> None:
    """Ignore regions under everything else, and the one being drawn."""
    painter.setBrushOrigin(transform.map(QPointF(0.0, 0.0)))
    hatch = _hatch_brush()
    handles: list[QPointF] = []
    for rid, polygons in style.regions:
        selected = rid == style.selected_region
        for poly in polygons:
            pts = map_points(transform, np.asarray(poly, dtype=np.float64))
            shape = QPolygonF([QPointF(x, y) for x, y in pts.tolist()])
            painter.setPen(Qt.PenStyle.NoPen)
            painter.setBrush(hatch)
            painter.drawPolygon(shape, Qt.FillRule.OddEvenFill)
            painter.setBrush(Qt.BrushStyle.NoBrush)
            painter.setPen(_pen(REGION_SHADOW, 3.4 if selected else 3.0))
            painter.drawPolygon(shape)
            painter.setPen(_pen("#ffffff" if selected else REGION_EDGE,
                                2.0 if selected else 1.2))
            painter.drawPolygon(shape)
            if selected:
                handles.extend(shape)
    if style.region_draft:
        pts = map_points(transform, np.asarray(style.region_draft, dtype=np.float64))
        shape = QPolygonF([QPointF(x, y) for x, y in pts.tolist()])
        if style.region_draft_closed:
            painter.setPen(Qt.PenStyle.NoPen)
            painter.setBrush(hatch)
            painter.drawPolygon(shape)
        painter.setBrush(Qt.BrushStyle.NoBrush)
        dash = [d / 1.6 for d in _DASH_PX]
        for pen in (_pen(REGION_SHADOW, 3.4), _pen("#ffffff", 1.6, dash=dash)):
            painter.setPen(pen)
            if style.region_draft_closed:
                painter.drawPolygon(shape)
            else:
                painter.drawPolyline(shape)
        if not style.region_draft_closed:
            handles.extend(shape)
    half = 3.5
    painter.setPen(_pen(OUTLINE, 1.0))
    painter.setBrush(QColor("#ffffff"))
    for c in handles:
        painter.drawRect(QRectF(c.x() - half, c.y() - half, 2 * half, 2 * half))
    painter.setBrushOrigin(QPointF(0.0, 0.0))


def _paint_differences(painter: QPainter, geo: _Geometry, people: list[_PersonLike],
                       colours: Mapping[int, int], transform: QTransform,
                       style: OverlayStyle) -> None:
    """Mark where ours and the other version differ: a white square frame around the joint as
    shown, a connector of white dashes, and a small hollow square in the person's colour where
    the other version has the joint."""
    row = {p.id: i for i, p in enumerate(people)}
    r = style.joint_radius
    frame_half = r + 4.0
    ghost_half = 0.8 * r
    painter.setBrush(Qt.BrushStyle.NoBrush)
    for (pid, j), other in style.differences.items():
        colour = palette_colour(colours.get(pid, 0))
        i = row.get(pid)
        here = None
        if i is not None and 0 <= j < geo.pts.shape[1] and geo.placed[i, j] and (
                geo.labelled[i, j] or style.show_unlabeled):
            here = geo.pts[i, j]
        there = None
        if other is not None and np.isfinite(other).all():
            there = map_points(transform, np.asarray(other, dtype=np.float64))[0]
        if here is not None and there is not None:
            d = there - here
            length = float(np.hypot(*d))
            if length > frame_half + ghost_half + 2:
                u = d / length
                # White dashes on a dark line: unlike any limb (limbs are solid or dashed in
                # the person's colour), so a connector never reads as part of a skeleton.
                line = QLineF(*(here + u * frame_half), *(there - u * ghost_half))
                painter.setPen(_pen(OUTLINE, 3.6))
                painter.drawLine(line)
                painter.setPen(_pen("#ffffff", 1.8, dash=[3.0 / 1.8, 3.0 / 1.8]))
                painter.drawLine(line)
        if there is not None:
            box = QRectF(there[0] - ghost_half, there[1] - ghost_half, 2 * ghost_half,
                         2 * ghost_half)
            painter.setPen(_pen(OUTLINE, 4.0))
            painter.drawRect(box)
            painter.setPen(_pen(colour, 2.0))
            painter.drawRect(box)
        if here is not None:
            box = QRectF(here[0] - frame_half, here[1] - frame_half, 2 * frame_half,
                         2 * frame_half)
            painter.setPen(_pen(OUTLINE, 3.4))
            painter.drawRect(box)
            painter.setPen(_pen("#ffffff", 1.6))
            painter.drawRect(box)


_TAG_LAYOUTS: OrderedDict[bytes, np.ndarray] = OrderedDict()


def _cached_layout(anchors: np.ndarray, sizes: np.ndarray, gap: float, obstacles: np.ndarray,
                   origin: np.ndarray) -> np.ndarray:
    """:func:`layout_tags`, remembered: the layout does not change when the view pans, so it
    is keyed on positions relative to the transform's origin."""
    rel_a = np.round(anchors - origin, 2)
    rel_o = np.round(obstacles - origin, 2)
    key = b"".join([rel_a.tobytes(), sizes.tobytes(), rel_o.tobytes(),
                    np.float64(gap).tobytes()])
    hit = _TAG_LAYOUTS.get(key)
    if hit is None:
        hit = layout_tags(rel_a, sizes, gap, rel_o)
        _TAG_LAYOUTS[key] = hit
        if len(_TAG_LAYOUTS) > 16:
            _TAG_LAYOUTS.popitem(last=False)
    else:
        _TAG_LAYOUTS.move_to_end(key)
    return hit + origin


_HELD: list[Any] = [None, None]  # the held tags last seen and their arrays


def _held_layout(ids: list[int], anchors: np.ndarray, sizes: np.ndarray, gap: float,
                 obstacles: np.ndarray, held: Mapping[int, QRectF]) -> np.ndarray:
    """Tag centres with the tags in ``held`` kept where they are and the others placed
    around them, among the joints near them (the obstacles farther away than any place a
    tag tries cannot count)."""
    if _HELD[0] is not held:  # the same held tags on every move of a drag: read them once
        boxes = {pid: (r.left(), r.top(), r.right(), r.bottom()) for pid, r in held.items()}
        _HELD[:] = [held, boxes]
    boxes = _HELD[1]
    kept = np.array([pid in boxes for pid in ids], dtype=bool)
    taken = np.array([boxes[pid] for pid in ids if pid in boxes], dtype=float).reshape(-1, 4)
    centres = np.zeros((len(ids), 2))
    centres[kept] = (taken[:, :2] + taken[:, 2:]) / 2
    if not kept.all():
        a, size = anchors[~kept], sizes[~kept]
        reach = np.column_stack([2 * size[:, 0] + gap + 8, 3 * size[:, 1] + gap + 8])
        near = (np.abs(obstacles[:, None, :] - a[None]) <= reach[None]).all(axis=2).any(axis=1)
        centres[~kept] = layout_tags(a, size, gap, obstacles[near], taken)
    return centres


def _paint_tags(painter: QPainter, geo: _Geometry, people: list[_PersonLike],
                numbers: dict[int, int], colours: dict[int, int], transform: QTransform,
                style: OverlayStyle, dpr: float, within: QRectF | None = None,
                held: Mapping[int, QRectF] | None = None) -> dict[int, QRectF]:
    metrics = _tag_metrics(style.tag_font_px)
    h = metrics.height() + 2
    all_anchors, has = geo.anchors()
    with_anchor = [(int(i), all_anchors[i]) for i in np.flatnonzero(has)]
    if not with_anchor:
        return {}
    anchors = all_anchors[has]
    sizes = np.array([(max(_advance(metrics, str(numbers[people[i].id])) + 8, h), h)
                      for i, _ in with_anchor], dtype=float)
    obstacles = geo.pts[geo.labelled]
    gap = style.joint_radius + 4
    origin = np.array([transform.dx(), transform.dy()])
    if held is None:
        centres = _cached_layout(anchors, sizes, gap, obstacles, origin)
    else:
        centres = _held_layout([people[i].id for i, _ in with_anchor], anchors, sizes, gap,
                               obstacles, held)
    rects: dict[int, QRectF] = {}
    if within is not None:
        # Which tags may reach into ``within`` (the exact test below decides), as arrays.
        lo = np.minimum(centres - sizes / 2, anchors) - 5
        hi = np.maximum(centres + sizes / 2, anchors + 1) + 5
        maybe = ((lo[:, 0] <= within.right()) & (hi[:, 0] >= within.left())
                 & (lo[:, 1] <= within.bottom()) & (hi[:, 1] >= within.top())).tolist()
    else:
        maybe = [True] * len(with_anchor)
    for (i, anchor), (cx, cy), (w, hh), near in zip(with_anchor, centres.tolist(),
                                                    sizes.tolist(), maybe):
        pid = people[i].id
        rect = QRectF(cx - w / 2, cy - hh / 2, w, hh)
        rects[pid] = rect
        if not near:
            continue  # placed, but drawn wholly outside the part painted again
        if within is not None and not within.intersects(
                rect.united(QRectF(float(anchor[0]), float(anchor[1]), 1.0, 1.0))
                .adjusted(-4, -4, 4, 4)):
            continue  # placed, but drawn wholly outside the part painted again
        dimmed = style.focus is not None and pid != style.focus
        painter.setOpacity(style.dim_others if dimmed else 1.0)
        default_cy = anchor[1] - gap - hh / 2
        if abs(cx - anchor[0]) > w or abs(cy - default_cy) > hh:
            # Displaced tag: a thin leader line says whose it is.
            leader = QLineF(cx, cy, float(anchor[0]), float(anchor[1]))
            painter.setPen(_pen(OUTLINE, 2.2))
            painter.drawLine(leader)
            painter.setPen(_pen(palette_colour(colours[pid]), 1.0))
            painter.drawLine(leader)
        selected = pid == style.selected_person or pid == style.focus
        flagged = WHOLE_PERSON in style.flags.get(pid, ())
        image, margin = _tag(str(numbers[pid]), colours[pid], int(w), int(hh), selected,
                             flagged, style.tag_font_px, dpr)
        x0 = np.floor((cx - w / 2) * dpr) / dpr - margin
        y0 = np.floor((cy - hh / 2) * dpr) / dpr - margin
        painter.drawImage(QPointF(x0, y0), image)
    painter.setOpacity(1.0)
    return rects


_METRICS: dict[int, QFontMetrics] = {}
_ADVANCES: dict[tuple[int, str], int] = {}


def _advance(metrics: QFontMetrics, text: str) -> int:
    key = (id(metrics), text)
    got = _ADVANCES.get(key)
    if got is None:
        got = _ADVANCES[key] = metrics.horizontalAdvance(text)
    return got


def _tag_font(px: int) -> QFont:
    font = QFont()
    font.setPixelSize(px)
    font.setBold(True)
    return font


def _tag_metrics(px: int) -> QFontMetrics:
    hit = _METRICS.get(px)
    if hit is None:
        hit = _METRICS[px] = QFontMetrics(_tag_font(px))
    return hit


def _tag(text: str, colour_index: int, w: int, h: int, selected: bool, flagged: bool,
         font_px: int, dpr: float) -> tuple[QImage, int]:
    """A number tag drawn once: rounded box in the person's colour, the number in black or
    white (whichever reads better), a white edge when selected, a halo when the whole person
    is flagged."""
    key = ("tag", text, colour_index, w, h, selected, flagged, font_px, dpr)
    hit = _SPRITES.get(key)
    if hit is not None:
        return hit
    margin = 7
    image = QImage(int(np.ceil((w + 2 * margin) * dpr)), int(np.ceil((h + 2 * margin) * dpr)),
                   QImage.Format.Format_ARGB32_Premultiplied)
    image.fill(0)
    p = QPainter(image)
    p.setRenderHint(QPainter.RenderHint.Antialiasing, True)
    p.setRenderHint(QPainter.RenderHint.TextAntialiasing, True)
    p.scale(dpr, dpr)
    rect = QRectF(margin, margin, w, h)
    colour = palette_colour(colour_index)
    if flagged:
        p.setBrush(Qt.BrushStyle.NoBrush)
        p.setPen(_pen(HALO, 5.0))
        p.drawRoundedRect(rect.adjusted(-3, -3, 3, 3), 5, 5)
        p.setPen(_pen(HALO_RIM, 1.0))
        p.drawRoundedRect(rect.adjusted(-6, -6, 6, 6), 7, 7)
    p.setPen(_pen("#ffffff" if selected else OUTLINE, 2.0 if selected else 1.0))
    p.setBrush(colour)
    p.drawRoundedRect(rect.adjusted(0.5, 0.5, -0.5, -0.5), 3, 3)
    p.setFont(_tag_font(font_px))
    p.setPen(text_colour_on(colour))
    p.drawText(rect, Qt.AlignmentFlag.AlignCenter, text)
    p.end()
    image.setDevicePixelRatio(dpr)
    if len(_SPRITES) > 1024:
        _SPRITES.clear()
    _SPRITES[key] = (image, margin)
    return image, margin


def flags_from_reasons(reasons: Sequence[Mapping[str, Any]] | None,
                       min_weight: float = FLAG_WEIGHT,
                       grouping: str | None = None) -> dict[int, frozenset[int]]:
    """Which joints of which people to halo, from the triage reasons of one frame.

    Parameters
    ----------
    reasons
        Triage reasons as stored: dicts with ``person``, ``joints``, ``weight`` and, from the
        triage that flags people (:func:`app.analysis.triage.stored_suspicion`), ``evidence``.
    min_weight
        Within a flagged person, reasons weaker than this draw no halo on their joints, so
        that the halos point at the few places worth a look.
    grouping
        How the frame's auto-labels were grouped (:attr:`app.model.labels.Frame.grouping`):
        triage weighed the reasons by that grouping's weights
        (:func:`app.analysis.triage.weight_set`), and flags by its prior and threshold.

    Returns
    -------
    dict
        Person id to flagged joints. A person is flagged exactly when triage flags them (their
        suspicion reaches the weight set's ``flag_at``, :data:`app.analysis.triage.FLAG_AT`
        for labels grouped alone); their halos go on the joints of
        their strong reasons, or, when none is strong on its own (several weak signs together)
        or the reason names no joint, on the whole person (the joint ``WHOLE_PERSON``, -1), as
        does a person flagged at ``WHOLE_BODY_JOINTS`` joints or more. Reasons stored without
        ``evidence`` (older triage) flag by weight alone. Frame-level reasons draw nothing.

    Examples
    --------
    >>> flags_from_reasons([{"kind": "long limb", "person": 4, "joints": [7, 9], "weight": 1},
    ...                     {"kind": "weak", "person": 4, "joints": [3], "weight": 0.2},
    ...                     {"kind": "duplicate", "person": 5, "joints": []},
    ...                     {"kind": "crowd", "person": None}])
    {4: frozenset({9, 7}), 5: frozenset({-1})}
    >>> flags_from_reasons([{"kind": "off-ground", "person": 3, "joints": [15], "weight": 0.4,
    ...                      "evidence": 2.8}, {"kind": "tangled", "person": 3, "joints": [9],
    ...                      "weight": 0.3, "evidence": 1.2}])
    {3: frozenset({-1})}
    """
    from app.analysis.triage import stored_suspicion, weight_set

    reasons = [r for r in reasons or () if r.get("person") is not None]
    if reasons and all("evidence" in r for r in reasons):
        flag_at = weight_set(grouping).flag_at
        flagged = {p for p, s in stored_suspicion(reasons, grouping).items() if s >= flag_at}
    else:
        flagged = {int(r["person"]) for r in reasons
                   if r.get("weight") is None or float(r["weight"]) >= min_weight}
    out: dict[int, set[int]] = {int(p): set() for p in flagged}
    for r in reasons:
        pid = int(r["person"])
        weight = r.get("weight")
        if pid not in out or (weight is not None and float(weight) < min_weight):
            continue
        joints = [int(j) for j in (r.get("joints") or ())]
        out[pid].update(joints or [WHOLE_PERSON])
    for joints in out.values():
        if not joints or len(joints - {WHOLE_PERSON}) >= WHOLE_BODY_JOINTS:
            # Wrong nearly everywhere, or by several weak signs at once: one ring on the tag
            # says it better than a halo on every joint, which would hide the body.
            joints.clear()
            joints.add(WHOLE_PERSON)
    return {p: frozenset(j) for p, j in out.items()}
