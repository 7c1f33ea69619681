"""Procedural pictures of the rehearsal: the hall, then the dancers as shaded 3D figures.

Every body part is a small mesh built from the pose: limbs are capsules, the trunk and the
skirt are lofted through elliptical cross-sections, the head is an ellipsoid whose facets are
coloured as face, hair or headscarf by their direction in the head's frame, with small discs
for eyes, brows and mouth. Facets are lit by three lights (warm lamps, cool window light, floor
bounce) plus ambient (Lambert shading with a little wrap-around, darker at grazing angles so
outlines read) and z-buffered into a facet-index image at twice the output resolution, the
depth of every subpixel taken from the facet's plane. Colours, owners and depths are then
looked up from the facet index, so the picture, the per-figure masks and the depth image
always agree. The colour image is averaged down to the output size.

All colours are RGB floats in [0, 1] until the final conversion to an 8-bit BGR image.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass

import cv2
import numpy as np
from numpy.typing import ArrayLike

from app.demo.camera import Camera
from app.demo.poses import HEAD_AXES, BodyPose, P

#: Supersampling factor of the figure and hall rendering.
SCALE = 2

# Lights: direction towards the light (world, z up) and RGB intensity. Warm lamps above and in
# front on the left, cool dusk light from the windows behind on the right, a warm bounce from
# the floor, and warm ambient.
_LIGHTS = (
    (np.array([-0.35, -0.55, 0.75]), np.array([1.00, 0.80, 0.58]) * 0.95),
    (np.array([0.55, 0.75, 0.35]), np.array([0.34, 0.42, 0.62]) * 0.55),
    (np.array([0.0, 0.0, -1.0]), np.array([0.30, 0.19, 0.10]) * 0.45),
)
_AMBIENT = np.array([0.26, 0.21, 0.17])

# The hall (metres): back wall, side walls and ceiling; the floor is z = 0.
_BACK_WALL_Y = 6.0
_SIDE_WALL_X = 6.5
_CEILING_Z = 4.2
_BOARD = 0.11
_WINDOWS_BACK = (-4.4, -1.5, 1.5, 4.4)
_WINDOWS_LEFT = (-3.5, -0.5, 2.5)
_SCONCES = (-3.0, 0.0, 3.0)
_LAMPS = ((-2.5, -0.5), (2.5, -0.5), (0.0, 3.0), (0.0, -3.0))


@dataclass(frozen=True)
class Costume:
    """How one dancer looks. Colours are RGB in [0, 1].

    Attributes
    ----------
    dress
        ``"skirt"`` (blouse, laced bodice, full skirt with apron) or ``"trousers"`` (shirt,
        open vest, sash, trousers into boots).
    hair_style
        ``"short"``, ``"bun"``, ``"braid"`` or ``"scarf"`` (a kerchief over the hair).
    """

    dress: str
    hair_style: str
    skin: tuple[float, float, float]
    hair: tuple[float, float, float]
    shirt: tuple[float, float, float]
    vest: tuple[float, float, float]
    lower: tuple[float, float, float]
    accent: tuple[float, float, float]
    apron: tuple[float, float, float]
    legs: tuple[float, float, float]
    shoes: tuple[float, float, float]
    scarf: tuple[float, float, float]


_SKIN = ((0.87, 0.68, 0.55), (0.80, 0.60, 0.47), (0.66, 0.47, 0.35), (0.92, 0.76, 0.64),
         (0.52, 0.36, 0.26))
_HAIR = ((0.20, 0.13, 0.08), (0.08, 0.07, 0.06), (0.42, 0.24, 0.12), (0.74, 0.58, 0.34),
         (0.58, 0.56, 0.53))
_WHITE = ((0.94, 0.92, 0.87), (0.96, 0.95, 0.92), (0.92, 0.88, 0.78))
_SKIRTS = ((0.68, 0.09, 0.10), (0.12, 0.18, 0.45), (0.13, 0.36, 0.22), (0.10, 0.10, 0.12),
           (0.55, 0.20, 0.40))
_BODICES = ((0.08, 0.08, 0.10), (0.45, 0.06, 0.08), (0.10, 0.26, 0.16), (0.14, 0.14, 0.30))
_VESTS = ((0.08, 0.08, 0.10), (0.42, 0.07, 0.08), (0.12, 0.18, 0.38), (0.30, 0.20, 0.12))
_TROUSERS = ((0.07, 0.07, 0.09), (0.10, 0.12, 0.25), (0.88, 0.86, 0.80), (0.25, 0.22, 0.20))
_ACCENTS = ((0.80, 0.10, 0.10), (0.10, 0.45, 0.25), (0.85, 0.62, 0.12), (0.15, 0.25, 0.65),
            (0.75, 0.30, 0.10))
_APRONS = ((0.94, 0.92, 0.87), (0.08, 0.08, 0.10), (0.85, 0.70, 0.35))
_SCARVES = ((0.75, 0.12, 0.12), (0.90, 0.80, 0.30), (0.12, 0.30, 0.55), (0.94, 0.92, 0.87))


def random_costume(rng: np.random.Generator, dress: str) -> Costume:
    """Draw a costume from our palettes (all invented) for a ``"skirt"`` or ``"trousers"`` dress.

    Examples
    --------
    >>> random_costume(np.random.default_rng(1), "skirt").dress
    'skirt'
    """
    def pick(options: tuple) -> tuple[float, float, float]:
        r, g, b = options[int(rng.integers(len(options)))]
        return float(r), float(g), float(b)

    if dress == "skirt":
        style = ("bun", "braid", "scarf", "scarf", "short")[int(rng.integers(5))]
        return Costume(
            dress, style, pick(_SKIN), pick(_HAIR), pick(_WHITE), pick(_BODICES), pick(_SKIRTS),
            pick(_ACCENTS), pick(_APRONS), pick(((0.93, 0.92, 0.88), (0.10, 0.09, 0.10))),
            pick(((0.06, 0.05, 0.05), (0.25, 0.12, 0.06))), pick(_SCARVES))
    return Costume(
        dress, "short", pick(_SKIN), pick(_HAIR), pick(_WHITE), pick(_VESTS), pick(_TROUSERS),
        pick(_ACCENTS), pick(_APRONS), (0.05, 0.05, 0.05), (0.05, 0.05, 0.05), pick(_SCARVES))


@dataclass
class Rendered:
    """One rendered frame.

    Attributes
    ----------
    image
        ``(h, w, 3)`` uint8, BGR (OpenCV's order).
    owner
        ``(h, w)`` int16: which figure (index into the poses) a pixel shows, -1 for the hall.
    depth
        ``(h, w)`` float32: camera depth in metres of the surface a pixel shows (inf for the
        hall).
    """

    image: np.ndarray
    owner: np.ndarray
    depth: np.ndarray


def _unit(v: np.ndarray) -> np.ndarray:
    return v / np.maximum(np.linalg.norm(v, axis=-1, keepdims=True), 1e-12)


class _Mesh:
    """Facets (quads) of all figures in a frame, with their colour and owner."""

    def __init__(self) -> None:
        self.quads: list[np.ndarray] = []
        self.albedo: list[np.ndarray] = []
        self.owner: list[np.ndarray] = []
        self.two_sided: list[np.ndarray] = []

    def add(self, quads: np.ndarray, albedo: ArrayLike, owner: int,
            two_sided: bool = False) -> None:
        n = len(quads)
        self.quads.append(quads.reshape(n, 4, 3))
        self.albedo.append(np.broadcast_to(np.asarray(albedo, dtype=float), (n, 3)))
        self.owner.append(np.full(n, owner, dtype=np.int32))
        self.two_sided.append(np.full(n, two_sided))

    def arrays(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        return (np.concatenate(self.quads), np.concatenate(self.albedo),
                np.concatenate(self.owner), np.concatenate(self.two_sided))


def _quads(rings: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Quads between consecutive rings of an ``(M, n, 3)`` vertex grid.

    Returns the quads ``(F, 4, 3)`` and, per facet, the ring row (0..M-2) and the column (0..n-1).
    """
    m, n = rings.shape[:2]
    k = np.arange(n)
    k1 = (k + 1) % n
    q = np.stack([rings[:-1][:, k], rings[:-1][:, k1], rings[1:][:, k1], rings[1:][:, k]],
                 axis=2)
    rows, cols = np.meshgrid(np.arange(m - 1), k, indexing="ij")
    return q.reshape(-1, 4, 3), rows.ravel(), cols.ravel()


def _loft(centres: np.ndarray, ax_a: np.ndarray, ax_b: np.ndarray, ra: np.ndarray,
          rb: np.ndarray, n: int) -> np.ndarray:
    """``(M, n, 3)`` rings ``c + ra cos(phi) a + rb sin(phi) b``; ``phi = 0`` lies along ``a``."""
    phi = 2 * np.pi * np.arange(n) / n
    return (centres[:, None, :]
            + (ra[:, None] * np.cos(phi))[..., None] * ax_a[:, None, :]
            + (rb[:, None] * np.sin(phi))[..., None] * ax_b[:, None, :])


def _capsule(a: np.ndarray, b: np.ndarray, ra: float, rb: float, ref: np.ndarray,
             n: int = 12, caps: int = 3, flat: float = 1.0, segments: int = 3
             ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """A tapered capsule from ``a`` to ``b``: quads, axial position of each facet (0 at ``a``,
    1 at ``b``) and its angle from ``ref`` (radians)."""
    axis = b - a
    length = max(float(np.linalg.norm(axis)), 1e-6)
    t = axis / length
    u = ref - np.dot(ref, t) * t
    if np.linalg.norm(u) < 1e-6:
        u = np.cross(t, [0.0, 0.0, 1.0]) if abs(t[2]) < 0.9 else np.cross(t, [1.0, 0.0, 0.0])
    u = _unit(u)
    v = np.cross(t, u)
    alpha_a = np.linspace(-np.pi / 2, 0, caps + 1)
    alpha_b = np.linspace(0, np.pi / 2, caps + 1)
    # Short facets along the shaft keep the far-to-near drawing order right.
    mid = np.linspace(0, 1, segments + 1)[1:-1]
    centres = np.concatenate([a + np.outer(ra * np.sin(alpha_a), t), a + np.outer(mid, axis),
                              b + np.outer(rb * np.sin(alpha_b), t)])
    radii = np.concatenate([ra * np.cos(alpha_a), ra + (rb - ra) * mid, rb * np.cos(alpha_b)])
    m = len(centres)
    rings = _loft(centres, np.tile(u, (m, 1)), np.tile(v, (m, 1)), radii, radii * flat, n)
    quads, rows, cols = _quads(rings)
    pos = np.clip((centres - a) @ t / length, 0, 1)
    axial = 0.5 * (pos[rows] + pos[rows + 1])
    angle = 2 * np.pi * (cols + 0.5) / n
    return quads, axial, angle


def _ellipsoid(centre: np.ndarray, frame: np.ndarray, axes: np.ndarray, lat: int = 12,
               lon: int = 20) -> tuple[np.ndarray, np.ndarray]:
    """Quads of an ellipsoid in ``frame`` (columns right, forward, up) and each facet's
    outward direction in that frame (unit sphere coordinates)."""
    theta = np.linspace(-np.pi / 2, np.pi / 2, lat + 1)
    right, fwd, up = frame.T
    centres = centre + np.outer(axes[2] * np.sin(theta), up)
    r = np.cos(theta)
    rings = _loft(centres, np.tile(right, (lat + 1, 1)), np.tile(fwd, (lat + 1, 1)),
                  axes[0] * r, axes[1] * r, lon)
    quads, rows, cols = _quads(rings)
    th = 0.5 * (theta[rows] + theta[rows + 1])
    ph = 2 * np.pi * (cols + 0.5) / lon
    local = np.stack([np.cos(th) * np.cos(ph), np.cos(th) * np.sin(ph), np.sin(th)], axis=1)
    return quads, local


def _head(mesh: _Mesh, pose: BodyPose, look: Costume, who: int) -> None:
    h = pose.stature
    axes = np.array(HEAD_AXES) * h
    quads, d = _ellipsoid(pose.points[P["head"]], pose.head, axes, lat=16, lon=28)
    _, fwd, up = d.T
    colour = np.tile(np.asarray(look.skin), (len(d), 1))
    if look.hair_style == "short":
        hair = (up > 0.38) | ((fwd < -0.15) & (up > -0.45)) | ((fwd < 0.3) & (up > 0.1))
    else:
        hair = (up > 0.3) | ((fwd < 0.15) & (up > -0.7)) | ((fwd < 0.4) & (up > 0.0))
    colour[hair] = look.hair
    if look.hair_style == "scarf":
        scarf = (up > 0.42) | ((fwd < 0.3) & (up > -0.55))
        colour[scarf] = look.scarf
    mesh.add(quads, colour, who)
    # The nose sticks out of the ellipsoid so a profile reads as a profile.
    root = pose.points[P["head"]] + h * 0.045 * pose.head[:, 1]
    q, _, _ = _capsule(root, pose.points[P["nose"]], 0.011 * h, 0.008 * h, pose.head[:, 2], n=8,
                       caps=2)
    mesh.add(q, look.skin, who)
    # Eyes, brows and mouth: small discs laid on the face.
    dark = (0.10, 0.07, 0.06)
    for sign in (-1.0, 1.0):
        mesh.add(_decal(pose, (sign * 0.36, 0.9, 0.10), 0.0075, 0.0065), dark, who)
        mesh.add(_decal(pose, (sign * 0.36, 0.88, 0.32), 0.013, 0.0032),
                 np.asarray(look.hair) * 0.7, who)
    mesh.add(_decal(pose, (0.0, 0.9, -0.48), 0.016, 0.0045),
             np.asarray(look.skin) * np.array([0.62, 0.36, 0.34]), who)
    head = pose.points[P["head"]]
    if look.hair_style == "bun":
        centre = head + h * (-0.055 * pose.head[:, 1] + 0.035 * pose.head[:, 2])
        q, _ = _ellipsoid(centre, pose.head, np.array([0.03, 0.026, 0.026]) * h, 6, 10)
        mesh.add(q, look.hair, who)
    elif look.hair_style == "braid":
        top = head + h * (-0.05 * pose.head[:, 1] - 0.02 * pose.head[:, 2])
        low = pose.points[P["neck"]] + h * (-0.065 * pose.chest[:, 1] - 0.11 * pose.chest[:, 2])
        q, _, _ = _capsule(top, low, 0.016 * h, 0.01 * h, pose.chest[:, 0], n=8, caps=2)
        mesh.add(q, look.hair, who)
    elif look.hair_style == "scarf":
        top = head + h * (-0.05 * pose.head[:, 1] - 0.045 * pose.head[:, 2])
        low = top + h * (-0.03 * pose.chest[:, 1] - 0.07 * pose.chest[:, 2])
        q, _, _ = _capsule(top, low, 0.02 * h, 0.012 * h, pose.chest[:, 0], n=8, caps=2,
                           flat=0.5)
        mesh.add(q, look.scarf, who)


def _decal(pose: BodyPose, direction: tuple[float, float, float], rx: float, ry: float,
           n: int = 8) -> np.ndarray:
    """Quads of a small elliptical disc on the head's surface in ``direction`` (head frame),
    lifted a little off the surface so that it is drawn after the face behind it."""
    h = pose.stature
    axes = np.array(HEAD_AXES) * h
    d = np.asarray(direction, dtype=float)
    d = d / np.linalg.norm(d)
    local = d / np.sqrt(np.sum((d / axes) ** 2))
    normal = _unit(pose.head @ (local / axes**2))
    centre = pose.points[P["head"]] + pose.head @ local + normal * (0.003 * h)
    u = _unit(np.cross(pose.head[:, 2], normal))
    v = np.cross(normal, u)
    ang = 2 * np.pi * np.arange(n) / n
    rim = centre + (rx * h * np.cos(ang))[:, None] * u + (ry * h * np.sin(ang))[:, None] * v
    k = np.arange(0, n, 2)
    return np.stack([np.tile(centre, (len(k), 1)), rim[k], rim[(k + 1) % n], rim[(k + 2) % n]],
                    axis=1)


def _frame_axes(frame_a: np.ndarray, frame_b: np.ndarray, w: float,
                axis: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Ring axes blended between two body frames, made perpendicular to ``axis``."""
    right = (1 - w) * frame_a[:, 0] + w * frame_b[:, 0]
    right = _unit(right - np.dot(right, axis) * axis)
    return right, np.cross(axis, right)


def _trunk(mesh: _Mesh, pose: BodyPose, look: Costume, who: int) -> None:
    h, g = pose.stature, pose.girth
    pts = pose.points
    pel, ch = pose.pelvis, pose.chest
    neck = pts[P["neck"]]
    bust = 0.008 if look.dress == "skirt" else 0.0
    # (centre, blend towards the chest frame, half width, half depth), in units of stature.
    spec = [
        (pts[P["pelvis"]] - pel[:, 2] * 0.10 * h, 0.0, 0.045, 0.035),
        (pts[P["pelvis"]] - pel[:, 2] * 0.07 * h, 0.0, 0.085, 0.062),
        (pts[P["pelvis"]] + pel[:, 2] * 0.01 * h, 0.0, 0.100, 0.070),
        (pts[P["waist"]], 0.5, 0.080, 0.060),
        (pts[P["chest"]], 1.0, 0.092, 0.068 + bust),
        (neck - ch[:, 2] * 0.05 * h, 1.0, 0.106, 0.062),
        (neck - ch[:, 2] * 0.018 * h, 1.0, 0.112, 0.054),
        (neck + ch[:, 2] * 0.006 * h, 1.0, 0.060, 0.044),
        (neck + ch[:, 2] * 0.02 * h, 1.0, 0.032, 0.030),
    ]
    centres = np.array([s[0] for s in spec])
    axis = _unit(neck - pts[P["pelvis"]])
    ax_a, ax_b = [], []
    for _, w, _, _ in spec:
        a, b = _frame_axes(pel, ch, w, axis)
        ax_a.append(a)
        ax_b.append(b)
    ra = np.array([s[2] for s in spec]) * h * g
    rb = np.array([s[3] for s in spec]) * h * g
    n = 20
    rings = _loft(centres, np.array(ax_a), np.array(ax_b), ra, rb, n)
    quads, rows, cols = _quads(rings)
    angle = 2 * np.pi * (cols + 0.5) / n
    front = np.abs(np.angle(np.exp(1j * (angle - np.pi / 2))))  # 0 at the front
    colour = np.tile(np.asarray(look.shirt), (len(quads), 1))
    if look.dress == "skirt":
        bodice = (rows >= 2) & (rows <= 4)
        colour[bodice] = look.vest
        lacing = bodice & (front < 0.2) & (rows >= 3)
        colour[lacing] = look.accent
        colour[rows <= 1] = look.lower
    else:
        vest = (rows >= 2) & (rows <= 6) & (front > 0.45)
        colour[vest] = look.vest
        colour[rows <= 2] = look.lower
        colour[(rows == 2) | ((rows == 3) & (front > 0.3))] = look.accent
    mesh.add(quads, colour, who)
    # The neck.
    q, _, _ = _capsule(neck - ch[:, 2] * 0.01 * h, pts[P["head"]] - pose.head[:, 2] * 0.03 * h,
                       0.03 * h * g, 0.028 * h, ch[:, 1], n=10, caps=2)
    mesh.add(q, look.skin, who)
    if look.dress == "trousers":
        # The ends of the sash hang at the left hip.
        top = pts[P["left_hip"]] - pel[:, 0] * 0.04 * h + pel[:, 2] * 0.06 * h
        q, _, _ = _capsule(top, top - pel[:, 2] * 0.12 * h + pel[:, 1] * 0.01 * h,
                           0.016 * h, 0.014 * h, pel[:, 1], n=8, caps=1, flat=0.35)
        mesh.add(q, look.accent, who)


def _arms(mesh: _Mesh, pose: BodyPose, look: Costume, who: int) -> None:
    h, g = pose.stature, pose.girth
    pts = pose.points
    puff = 1.15 if look.dress == "skirt" else 1.05
    for side in ("left", "right"):
        sh, el, wr, hand = (pts[P[f"{side}_{j}"]] for j in ("shoulder", "elbow", "wrist", "hand"))
        q, axial, _ = _capsule(sh, el, 0.033 * h * g * puff, 0.025 * h * g, pose.chest[:, 1])
        colour = np.tile(np.asarray(look.shirt), (len(q), 1))
        if look.dress == "skirt":
            colour[(axial > 0.3) & (axial < 0.4)] = look.accent
        mesh.add(q, colour, who)
        q, axial, _ = _capsule(el, wr, 0.025 * h * g, 0.019 * h * g, pose.chest[:, 1])
        colour = np.tile(np.asarray(look.shirt), (len(q), 1))
        if look.dress == "skirt":
            colour[(axial > 0.72) & (axial < 0.86)] = look.accent
        else:
            colour[axial > 0.82] = np.asarray(look.shirt) * 0.92
        mesh.add(q, colour, who)
        q, _, _ = _capsule(wr, hand, 0.02 * h, 0.015 * h, pose.chest[:, 1], n=10, caps=2,
                           flat=0.6)
        mesh.add(q, look.skin, who)


def _legs(mesh: _Mesh, pose: BodyPose, look: Costume, who: int) -> None:
    h, g = pose.stature, pose.girth
    pts = pose.points
    loose = 1.12 if look.dress == "trousers" else 1.0
    # Thighs under a skirt are drawn slimmer so that they stay inside it.
    thigh = 1.12 if look.dress == "trousers" else 0.85
    for side in ("left", "right"):
        hip, kn, an = (pts[P[f"{side}_{j}"]] for j in ("hip", "knee", "ankle"))
        fwd = pose.pelvis[:, 1]
        q, _, _ = _capsule(hip, kn, 0.056 * h * g * thigh, 0.036 * h * g * loose, fwd)
        mesh.add(q, look.lower if look.dress == "trousers" else look.legs, who)
        q, axial, _ = _capsule(kn, an, 0.036 * h * g * loose, 0.022 * h * g * loose, fwd)
        colour = np.tile(np.asarray(look.lower if look.dress == "trousers" else look.legs),
                         (len(q), 1))
        if look.dress == "trousers":
            colour[axial > 0.45] = look.shoes
        mesh.add(q, colour, who)
        heel, toe = pts[P[f"{side}_heel"]], pts[P[f"{side}_toe"]]
        along = _unit(toe - heel)
        q, _, _ = _capsule(heel + along * 0.022 * h, toe - along * 0.016 * h, 0.022 * h,
                           0.016 * h, pose.pelvis[:, 2], n=10, caps=2, flat=0.75)
        mesh.add(q, look.shoes, who)


def _skirt(mesh: _Mesh, pose: BodyPose, look: Costume, who: int) -> None:
    h, g = pose.stature, pose.girth
    pts = pose.points
    pel = pose.pelvis
    n, rows = 40, 6
    phi = 2 * np.pi * (np.arange(n)) / n
    right, fwd = pel[:, 0], pel[:, 1]
    dirs = np.cos(phi)[:, None] * right + np.sin(phi)[:, None] * fwd
    dirs[:, 2] = 0.0
    dirs = _unit(dirs)
    top_c = pts[P["waist"]] - pel[:, 2] * 0.01 * h
    top = top_c + g * h * (0.088 * np.cos(phi)[:, None] * right
                           + 0.07 * np.sin(phi)[:, None] * fwd)
    hem_z = 0.20 * h
    centre = np.array([top_c[0], top_c[1], hem_z])
    pleats = 1 + 0.05 * np.cos(12 * phi)
    r_hem = 0.24 * h * g * pleats
    hem = centre + r_hem[:, None] * dirs
    # Drape over the legs: push the hem out until the cone from the waist to the hem passes
    # outside every sampled leg point in its direction, and lift it where a raised knee
    # carries it.
    waist_r = 0.085 * h * g
    span = top_c[2] - hem_z
    push = np.zeros(n)
    for side in ("left", "right"):
        hip, knee, ankle = (pts[P[f"{side}_{j}"]] for j in ("hip", "knee", "ankle"))
        for q in ((3 * hip + knee) / 4, (hip + knee) / 2, knee, (2 * knee + ankle) / 3,
                  (knee + 2 * ankle) / 3, ankle):
            depth = (top_c[2] - q[2]) / span
            if depth < 0.12:
                continue
            off = q[:2] - centre[:2]
            reach = dirs[:, :2] @ off + 0.06 * h
            weight = np.clip(dirs[:, :2] @ _unit(off), 0, 1) ** 2
            need = waist_r + (reach - waist_r) / min(depth, 1.0) - r_hem
            push = np.maximum(push, need * weight)
        lift = np.maximum(knee[2] - 0.06 * h - hem_z, 0)
        hem[:, 2] += lift * np.clip(dirs[:, :2] @ _unit(knee[:2] - centre[:2]), 0, 1) ** 4
    hem[:, :2] += np.clip(push, 0, 0.15 * h)[:, None] * dirs[:, :2]
    s = np.linspace(0, 1, rows + 1)
    bell = s ** 0.5
    rings = top[None] + (hem - top)[None] * s[:, None, None]
    # A fuller skirt bulges out above the hem.
    rings[:, :, :2] += (bell - s)[:, None, None] * (hem - top)[None, :, :2]
    # Rings run from the hem up so that the facet normals point outwards.
    quads, r, c = _quads(rings[::-1])
    r = rows - 1 - r
    colour = np.tile(np.asarray(look.lower), (len(quads), 1))
    facet_phi = 2 * np.pi * (c + 0.5) / n
    front = np.abs(np.angle(np.exp(1j * (facet_phi - np.pi / 2))))
    apron = (front < 0.75) & (r < rows - 1)
    colour[apron] = look.apron
    colour[r == rows - 1] = look.accent
    colour[(r == rows - 2) & apron] = look.accent
    mesh.add(quads, colour, who, two_sided=True)


def _shade(quads: np.ndarray, albedo: np.ndarray, two_sided: np.ndarray,
           eye: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Lambert shading with wrap-around, darker at grazing angles; back-face culling.

    Returns the shaded colours and a mask of the facets to draw.
    """
    centroid = quads.mean(axis=1)
    normal = _unit(np.cross(quads[:, 2] - quads[:, 0], quads[:, 3] - quads[:, 1]))
    view = _unit(eye - centroid)
    facing = np.einsum("ij,ij->i", normal, view)
    keep = (facing > 0) | two_sided
    inside = facing <= 0
    normal = np.where(inside[:, None], -normal, normal)
    light = np.tile(_AMBIENT, (len(quads), 1))
    for direction, colour in _LIGHTS:
        d = direction / np.linalg.norm(direction)
        lam = np.clip((normal @ d + 0.25) / 1.25, 0, None)
        light = light + lam[:, None] * colour
    grazing = np.abs(np.einsum("ij,ij->i", normal, view))
    rim = 0.55 + 0.45 * np.clip(grazing / 0.4, 0, 1)
    shade = albedo * light * rim[:, None]
    shade[inside] *= 0.45
    return np.clip(shade, 0, 1), keep


@dataclass
class Facets:
    """Every figure's facets in a frame, shaded and in drawing order (far first).

    Attributes
    ----------
    polygons
        ``(F, 4, 2)`` int32 corners in fixed point (4 fractional bits) at :data:`SCALE`.
    colour
        ``(F, 3)`` RGB.
    owner
        ``(F,)`` index of the figure.
    depth
        ``(F,)`` camera depth of the facet's centre, metres (the drawing order).
    normal, offset
        ``(F, 3)`` and ``(F,)``: the facet's plane ``normal . X = offset`` in camera
        coordinates, for exact per-pixel depth.
    near, far
        ``(F,)`` the smallest and largest depth of the facet's corners.
    """

    polygons: np.ndarray
    colour: np.ndarray
    owner: np.ndarray
    depth: np.ndarray
    normal: np.ndarray
    offset: np.ndarray
    near: np.ndarray
    far: np.ndarray


@dataclass(frozen=True)
class Prop:
    """A rigid thing drawn with the figures: a folder a figure holds, a riser or a bench.

    Attributes
    ----------
    quads
        ``(F, 4, 3)`` world corners, metres.
    colour
        RGB in [0, 1].
    owner
        The figure that holds it (its pixels count as that figure's), or -1 for the room (its
        pixels show the room, but it still hides what lies behind it).
    """

    quads: np.ndarray
    colour: tuple[float, float, float]
    owner: int = -1


def figures(camera: Camera, poses: list[BodyPose], costumes: list[Costume],
            props: Sequence[Prop] = ()) -> Facets:
    """Build, light and sort the facets of every figure and prop (see :class:`Facets`)."""
    mesh = _Mesh()
    for who, (pose, look) in enumerate(zip(poses, costumes)):
        _legs(mesh, pose, look, who)
        if look.dress == "skirt":
            _skirt(mesh, pose, look, who)
        _trunk(mesh, pose, look, who)
        _arms(mesh, pose, look, who)
        _head(mesh, pose, look, who)
    for prop in props:
        mesh.add(prop.quads, prop.colour, prop.owner, two_sided=True)
    quads, albedo, owner, two_sided = mesh.arrays()
    colour, keep = _shade(quads, albedo, two_sided, camera.centre)
    quads, colour, owner = quads[keep], colour[keep], owner[keep]
    cam = camera.to_camera(quads)
    depth = cam[:, :, 2].mean(axis=1)
    order = np.argsort(-depth, kind="stable")
    cam = cam[order]
    normal = _unit(np.cross(cam[:, 2] - cam[:, 0], cam[:, 3] - cam[:, 1]))
    offset = np.einsum("ij,ij->i", normal, cam.mean(axis=1))
    uv = camera.project(quads[order]) * SCALE + (SCALE - 1) / 2
    return Facets(np.round(uv * 16).astype(np.int32), colour[order], owner[order], depth[order],
                  normal, offset, cam[:, :, 2].min(axis=1), cam[:, :, 2].max(axis=1))


def hall(camera: Camera) -> np.ndarray:
    """The empty hall seen by ``camera``: ``(h*SCALE, w*SCALE, 3)`` float32 RGB.

    The floor of wooden boards runs away from the camera, so its seams meet at a vanishing
    point; the walls have dark wood panelling below and warm plaster above, tall windows onto
    a dusk sky, curtains and wall lamps.
    """
    d = camera.rays(SCALE).astype(np.float32)
    c = camera.centre.astype(np.float32)
    big = np.float32(1e9)
    with np.errstate(divide="ignore", invalid="ignore"):
        t_floor = np.where(d[..., 2] < 0, -c[2] / d[..., 2], big)
        t_ceil = np.where(d[..., 2] > 0, (_CEILING_Z - c[2]) / d[..., 2], big)
        t_back = np.where(d[..., 1] > 0, (_BACK_WALL_Y - c[1]) / d[..., 1], big)
        t_left = np.where(d[..., 0] < 0, (-_SIDE_WALL_X - c[0]) / d[..., 0], big)
        t_right = np.where(d[..., 0] > 0, (_SIDE_WALL_X - c[0]) / d[..., 0], big)
    ts = np.stack([t_floor, t_ceil, t_back, t_left, t_right])
    surface = np.argmin(ts, axis=0)
    t = np.min(ts, axis=0)
    p = c + t[..., None] * d
    img = np.zeros(d.shape, np.float32)

    floor = surface == 0
    img[floor] = _floor(p[floor], d[floor], t[floor])
    img[surface == 1] = np.array([0.22, 0.15, 0.10]) * (
        0.8 + 0.2 * (np.sin(p[surface == 1][:, 1] * 2.0) > 0.9))[:, None]
    back = surface == 2
    img[back] = _wall(p[back][:, 0], p[back][:, 2], _WINDOWS_BACK, sconces=True)
    left = surface == 3
    img[left] = _wall(p[left][:, 1], p[left][:, 2], _WINDOWS_LEFT, sconces=False) * 0.85
    right = surface == 4
    img[right] = _wall(p[right][:, 1], p[right][:, 2], (), sconces=False, door=(1.8, 3.0)) * 0.8
    # Soft vignette.
    rows, cols = d.shape[0], d.shape[1]
    yy = np.linspace(-1, 1, rows, dtype=np.float32)[:, None]
    xx = np.linspace(-1, 1, cols, dtype=np.float32)[None, :]
    img *= (1 - 0.22 * (xx**2 * 0.7 + yy**2))[..., None]
    return np.clip(img, 0, 1)


def _hash(*ints: np.ndarray) -> np.ndarray:
    """Deterministic pseudo-random values in [0, 1) from integer arrays (a small integer hash)."""
    h = np.zeros(np.broadcast(*ints).shape, dtype=np.uint32)
    for k, v in enumerate(ints):
        h ^= (np.asarray(v).astype(np.int64) * (2654435761 + 40503 * k)).astype(np.uint32)
        h = (h ^ (h >> np.uint32(15))) * np.uint32(2246822519)
        h ^= h >> np.uint32(13)
    return (h & np.uint32(0xFFFFFF)).astype(np.float32) / np.float32(2**24)


def _floor(p: np.ndarray, d: np.ndarray, t: np.ndarray) -> np.ndarray:
    x, y = p[:, 0], p[:, 1]
    board = np.floor(x / _BOARD).astype(np.int64)
    plank_len = 2.2
    offset = _hash(board) * plank_len
    plank = np.floor((y + offset) / plank_len).astype(np.int64)
    tone = 0.82 + 0.3 * _hash(board, plank)
    hue = _hash(plank, board + 7)
    base = np.stack([0.60 + 0.06 * hue, 0.39 + 0.03 * hue, 0.21 - 0.02 * hue], axis=1)
    grain = 1 + 0.07 * np.sin(y * 37 + 11 * _hash(board, plank + 3) + 2 * np.sin(y * 5 + x * 3))
    col = base * (tone * grain)[:, None]
    fade = np.clip(1.6 - t / 7.0, 0.25, 1.0)
    seam = np.minimum(np.mod(x / _BOARD, 1.0), 1 - np.mod(x / _BOARD, 1.0)) < 0.06
    end = np.mod((y + offset) / plank_len, 1.0) < 0.006
    col *= (1 - 0.45 * fade * (seam | end))[:, None]
    pool = np.zeros(len(p), np.float32)
    for lx, ly in _LAMPS:
        pool += np.exp(-((x - lx) ** 2 + (y - ly) ** 2) / (2 * 2.6**2))
    light = 0.42 + 0.55 * pool + 0.1 * np.clip(1 - np.abs(x) / _SIDE_WALL_X, 0, 1)
    col *= np.stack([light * 1.05, light, light * 0.9], axis=1)
    # The varnish mirrors the back windows faintly.
    with np.errstate(divide="ignore", invalid="ignore"):
        tr = np.where(d[:, 1] > 0, (_BACK_WALL_Y - y) / d[:, 1], 1e9)
    rx = x + tr * d[:, 0]
    rz = -tr * d[:, 2]
    glint = np.zeros(len(p), np.float32)
    for wx in _WINDOWS_BACK:
        glint += ((np.abs(rx - wx) < 0.5) & (rz > 1.4) & (rz < 3.2)).astype(np.float32)
    col += (glint * 0.12 * np.clip(1 - t / 14, 0, 1))[:, None] * np.array([0.9, 0.6, 0.5])
    return col


def _wall(s: np.ndarray, z: np.ndarray, windows: tuple[float, ...], sconces: bool,
          door: tuple[float, float] | None = None) -> np.ndarray:
    """Colour of wall points at horizontal position ``s`` and height ``z`` (metres)."""
    plaster = np.array([0.80, 0.68, 0.52], np.float32)
    col = np.tile(plaster, (len(s), 1))
    light = 0.55 + 0.25 * np.clip(1 - z / 4, 0, 1)
    panel = z < 1.1
    wood = np.array([0.36, 0.21, 0.11], np.float32) * (
        0.9 + 0.2 * (np.mod(s / 0.6, 1.0) < 0.05))[:, None]
    col[panel] = wood[panel]
    col[(z >= 1.1) & (z < 1.16)] = (0.50, 0.32, 0.17)
    col[z < 0.12] = (0.22, 0.13, 0.07)
    for wx in windows:
        inside = (np.abs(s - wx) < 0.55) & (z > 1.4) & (z < 3.3)
        frame = (np.abs(s - wx) < 0.62) & (z > 1.33) & (z < 3.37) & ~inside
        k = np.clip((z - 1.4) / 1.9, 0, 1)
        sky = (np.array([0.82, 0.50, 0.36])[None] * (1 - k)[:, None]
               + np.array([0.16, 0.20, 0.42])[None] * k[:, None])
        bars = (np.abs(s - wx) < 0.025) | (np.abs(z - 2.0) < 0.025) | (np.abs(z - 2.7) < 0.025)
        col[inside] = sky[inside]
        col[inside & bars] = (0.78, 0.74, 0.66)
        col[frame] = (0.85, 0.80, 0.70)
        for side in (-1, 1):
            centre = wx + side * 0.78
            curtain = (np.abs(s - centre) < 0.2) & (z > 1.2) & (z < 3.55)
            folds = 0.75 + 0.25 * np.sin((s - centre) * 55)
            col[curtain] = (np.array([0.48, 0.09, 0.08])[None] * folds[curtain][:, None])
        light = np.where(inside, 1.0, light)
    if door is not None:
        d0, d1 = door
        in_door = (s > d0) & (s < d1) & (z < 2.25)
        col[in_door] = (0.30, 0.18, 0.09)
        col[in_door & ((np.abs(s - d0) < 0.06) | (np.abs(s - d1) < 0.06) | (z > 2.18))] = (
            0.45, 0.30, 0.16)
    if sconces:
        for sx in _SCONCES:
            r2 = (s - sx) ** 2 + (z - 2.5) ** 2
            light = light + 0.55 * np.exp(-r2 / (2 * 0.8**2)) * (z > 1.16)
            lamp = r2 < 0.012
            col[lamp] = (1.0, 0.93, 0.75)
            light = np.where(lamp, 1.0, light)
    return col * np.stack([light * 1.05, light, light * 0.88], axis=1)


def _shadows(camera: Camera, poses: list[BodyPose], shape: tuple[int, int]) -> np.ndarray:
    """Soft contact shadows on the floor under every dancer, ``(h, w)`` float32 in [0, 1]."""
    mask = np.zeros(shape, np.float32)
    ring = np.linspace(0, 2 * np.pi, 24, endpoint=False)
    circle = np.stack([np.cos(ring), np.sin(ring), np.zeros_like(ring)], axis=1)
    spots: list[tuple[np.ndarray, float, float]] = []
    for pose in poses:
        spots.append((pose.points[P["pelvis"]], 0.22 * pose.stature, 0.5))
        for side in ("left", "right"):
            foot = 0.5 * (pose.points[P[f"{side}_heel"]] + pose.points[P[f"{side}_toe"]])
            spots.append((foot, 0.07 * pose.stature, 0.8 * float(np.exp(-foot[2] * 6))))
    # Weakest first, so where spots overlap the strongest shows (their maximum).
    for centre, radius, strength in sorted(spots, key=lambda spot: spot[2]):
        ground = np.array([centre[0], centre[1], 0.0]) + radius * circle
        uv = camera.project(ground) * SCALE + (SCALE - 1) / 2
        cv2.fillConvexPoly(mask, np.round(uv * 16).astype(np.int32), float(strength),
                           cv2.LINE_8, 4)
    return cv2.GaussianBlur(mask, (0, 0), 4.0 * SCALE)


def _rasterise(camera: Camera, facets: Facets, shape: tuple[int, int]
               ) -> tuple[np.ndarray, np.ndarray]:
    """Z-buffer the facets: which facet each (sub)pixel shows, and its depth there.

    Returns ``(index, depth)``: ``(h, w)`` int32 (-1 where no facet) and float32 (inf there).

    Notes
    -----
    A (sub)pixel ``(X, Y)`` at :data:`SCALE` has the ray ``r = ((u - cx) / f, (v - cy) / f, 1)``
    in camera coordinates, with ``u = (X + 0.5) / SCALE - 0.5`` and likewise ``v``; it meets
    the facet's plane ``n . P = c`` at depth ``z = c / (n . r)``, which is linear in X and Y in
    the denominator. The depth is kept within the facet's corner depths (a facet seen edge-on
    would otherwise give wild values). A facet wins a pixel its polygon covers when it is
    nearer than what is there.
    """
    h, w = shape
    index = np.full(shape, -1, np.int32)
    zbuf = np.full(shape, np.inf, np.float32)
    cx, cy = camera.principal_point
    f = camera.focal
    n = facets.normal
    a = n[:, 0] / (SCALE * f)
    b = n[:, 1] / (SCALE * f)
    c = n[:, 2] + n[:, 0] * (0.5 / SCALE - 0.5 - cx) / f + n[:, 1] * (0.5 / SCALE - 0.5 - cy) / f
    lo = np.floor(facets.polygons.min(axis=1) / 16).astype(np.int64)
    hi = np.ceil(facets.polygons.max(axis=1) / 16).astype(np.int64)
    x0 = np.clip(lo[:, 0], 0, w)
    y0 = np.clip(lo[:, 1], 0, h)
    x1 = np.clip(hi[:, 0] + 1, 0, w)
    y1 = np.clip(hi[:, 1] + 1, 0, h)
    cols = np.arange(w, dtype=np.float64)
    rows = np.arange(h, dtype=np.float64)[:, None]
    polygons = facets.polygons - (np.stack([x0, y0], axis=1) * 16).astype(np.int32)[:, None]
    with np.errstate(divide="ignore", invalid="ignore"):
        for i in np.flatnonzero((x1 > x0) & (y1 > y0)):
            r0, r1, c0, c1 = y0[i], y1[i], x0[i], x1[i]
            cover = np.zeros((r1 - r0, c1 - c0), np.uint8)
            cv2.fillConvexPoly(cover, polygons[i], 1, cv2.LINE_8, 4)
            z = facets.offset[i] / (a[i] * cols[c0:c1] + b[i] * rows[r0:r1] + c[i])
            z = np.clip(z, facets.near[i], facets.far[i])
            here = zbuf[r0:r1, c0:c1]
            # NaN (a ray inside the plane through the camera) never wins.
            win = (cover > 0) & (z < here)
            here[win] = z[win]
            index[r0:r1, c0:c1][win] = i
    return index, zbuf


def render(camera: Camera, poses: list[BodyPose], costumes: list[Costume],
           background: np.ndarray, props: Sequence[Prop] = ()) -> Rendered:
    """Draw the dancers (and any props) over the hall.

    Parameters
    ----------
    camera
        The camera of :func:`hall`.
    poses, costumes
        One per figure; the figure's index is its owner value.
    background
        The hall from :func:`hall` (not modified).
    props
        Rigid things drawn with the figures (:class:`Prop`), none by default.

    Returns
    -------
    Rendered
        The picture, the owner image and the depth image at the camera's size.
    """
    shape = background.shape[:2]
    img = background * (1 - 0.55 * _shadows(camera, poses, shape))[..., None]
    facets = figures(camera, poses, costumes, props)
    index, z = _rasterise(camera, facets, shape)
    hit = index >= 0
    shown = index[hit]
    img[hit] = facets.colour[shown]
    who = np.full(shape, -1, np.int32)
    who[hit] = facets.owner[shown]
    # A thin dark line where one figure passes in front of another or of the hall, and where
    # a part of a figure passes well in front of another part of it, so overlaps read.
    edge = np.zeros(shape, bool)
    for dy, dx in ((0, 1), (1, 0)):
        a = (slice(0, shape[0] - dy), slice(0, shape[1] - dx))
        b = (slice(dy, shape[0]), slice(dx, shape[1]))
        with np.errstate(invalid="ignore"):
            gap = np.abs(z[a] - z[b])
        jump = (who[a] != who[b]) | (np.nan_to_num(gap, nan=0.0) > 0.08)
        # Darken the nearer side of the jump only.
        edge[a] |= jump & (z[a] <= z[b]) & (who[a] >= 0)
        edge[b] |= jump & (z[b] < z[a]) & (who[b] >= 0)
    img[edge] *= 0.55
    h, w = camera.size[1], camera.size[0]
    small = cv2.resize(img, (w, h), interpolation=cv2.INTER_AREA)
    bgr = np.clip(small[..., ::-1] * 255 + 0.5, 0, 255).astype(np.uint8)
    centre = SCALE // 2
    return Rendered(bgr, who[centre::SCALE, centre::SCALE].astype(np.int16),
                    z[centre::SCALE, centre::SCALE])
