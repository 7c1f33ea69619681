"""Geometry of ignore regions for the Canvas: which region is under a point, which corner is
near it, and regions moved or reshaped.

A region is ``(region id, polygons)``; each polygon is flat ``(x0, y0, x1, y1, ...)`` in image
pixels, as :class:`app.model.edits.AddRegion` takes it. Everything here is plain numpy; the
Canvas turns mouse gestures into these shapes and the shapes into edits.
"""

from __future__ import annotations

from collections.abc import Sequence

import numpy as np

Polygons = tuple[tuple[float, ...], ...]
Regions = Sequence[tuple[int, Polygons]]

__all__ = ["Polygons", "contains", "moved", "nearest_corner", "rectangle", "region_at",
           "tidy_polygon", "with_corner"]


def rectangle(x0: float, y0: float, x1: float, y1: float) -> tuple[float, ...]:
    """The four corners of the axis-aligned rectangle spanned by two points, clockwise from
    the top left (y down), rounded to 1/100 pixel.

    Examples
    --------
    >>> rectangle(30, 40, 10, 20)
    (10.0, 20.0, 30.0, 20.0, 30.0, 40.0, 10.0, 40.0)
    """
    left, right = sorted((float(x0), float(x1)))
    top, bottom = sorted((float(y0), float(y1)))
    corners = [left, top, right, top, right, bottom, left, bottom]
    return tuple(round(v, 2) for v in corners)


def contains(polygon: Sequence[float], x: float, y: float) -> bool:
    """Whether the point ``(x, y)`` lies inside a polygon (flat ``x0, y0, x1, y1, ...``).

    Parameters
    ----------
    polygon
        At least three corners; the last connects back to the first.
    x, y
        The point, in the polygon's coordinates.

    Returns
    -------
    bool
        True inside (even-odd rule, so a polygon that crosses itself has holes where it
        overlaps itself, as a painter fills it with the even-odd rule).

    Notes
    -----
    Crossing-number test: count the edges ``(p, q)`` with ``(p_y > y) != (q_y > y)`` whose
    crossing with the horizontal line through the point, at
    ``x_c = p_x + (y - p_y) (q_x - p_x) / (q_y - p_y)``, lies right of it (``x < x_c``); the
    point is inside when the count is odd. All edges at once, as arrays.

    References
    ----------
    Shimrat, M. (1962). "Algorithm 112: Position of point relative to polygon."
    Communications of the ACM 5(8), 434.

    Examples
    --------
    >>> square = (0, 0, 10, 0, 10, 10, 0, 10)
    >>> contains(square, 5, 5), contains(square, 15, 5)
    (True, False)
    """
    p = np.asarray(polygon, dtype=np.float64).reshape(-1, 2)
    if len(p) < 3:
        return False
    q = np.roll(p, -1, axis=0)
    spans = (p[:, 1] > y) != (q[:, 1] > y)
    with np.errstate(divide="ignore", invalid="ignore"):
        xc = p[:, 0] + (y - p[:, 1]) * (q[:, 0] - p[:, 0]) / (q[:, 1] - p[:, 1])
    return bool(np.count_nonzero(spans & (x < xc)) % 2)


def region_at(regions: Regions, x: float, y: float) -> int | None:
    """The id of the region under ``(x, y)``; where regions overlap, the one drawn last
    (the newest), which is the one on top.

    Examples
    --------
    >>> regions = [(4, ((0, 0, 10, 0, 10, 10, 0, 10),)), (9, ((5, 5, 20, 5, 20, 20),))]
    >>> region_at(regions, 8, 6), region_at(regions, 2, 2), region_at(regions, 30, 30)
    (9, 4, None)
    """
    for rid, polygons in reversed(list(regions)):
        if any(contains(poly, x, y) for poly in polygons):
            return int(rid)
    return None


def nearest_corner(polygons: Polygons, xy: np.ndarray, radius: float,
                   to_screen: np.ndarray) -> tuple[int, int] | None:
    """The corner of ``polygons`` nearest to the screen point ``xy``, within ``radius``.

    Parameters
    ----------
    polygons
        One region's polygons (image pixels).
    xy
        ``(2,)`` the pointer, screen pixels.
    radius
        Largest distance, screen pixels.
    to_screen
        ``(3,)`` scale and offset ``(s, ox, oy)``: screen = s * image + offset.

    Returns
    -------
    (polygon index, corner index) or None

    Examples
    --------
    >>> nearest_corner(((0, 0, 10, 0, 10, 10),), np.array([21.0, 1.0]), 4.0,
    ...                np.array([2.0, 0.0, 0.0]))
    (0, 1)
    """
    best: tuple[float, int, int] | None = None
    s, ox, oy = (float(v) for v in to_screen)
    for n, poly in enumerate(polygons):
        pts = np.asarray(poly, dtype=np.float64).reshape(-1, 2) * s + (ox, oy)
        d = np.hypot(pts[:, 0] - xy[0], pts[:, 1] - xy[1])
        i = int(np.argmin(d))
        if d[i] <= radius and (best is None or d[i] < best[0]):
            best = (float(d[i]), n, i)
    return None if best is None else (best[1], best[2])


def with_corner(polygons: Polygons, polygon: int, corner: int, x: float,
                y: float) -> Polygons:
    """``polygons`` with one corner moved to ``(x, y)``.

    Examples
    --------
    >>> with_corner(((0, 0, 10, 0, 10, 10),), 0, 2, 12.5, 11)
    ((0.0, 0.0, 10.0, 0.0, 12.5, 11.0),)
    """
    out = []
    for n, poly in enumerate(polygons):
        flat = [float(v) for v in poly]
        if n == polygon:
            flat[2 * corner], flat[2 * corner + 1] = round(float(x), 2), round(float(y), 2)
        out.append(tuple(flat))
    return tuple(out)


def moved(polygons: Polygons, dx: float, dy: float,
          bounds: tuple[float, float, float, float] | None = None) -> Polygons:
    """``polygons`` moved by ``(dx, dy)``; with ``bounds`` ``(x0, y0, x1, y1)`` the move is cut
    short so that the whole region stays inside them.

    Examples
    --------
    >>> moved(((0, 0, 10, 0, 10, 10),), 5, -2)
    ((5.0, -2.0, 15.0, -2.0, 15.0, 8.0),)
    >>> moved(((0, 0, 10, 0, 10, 10),), 50, 0, bounds=(0, 0, 20, 20))
    ((10.0, 0.0, 20.0, 0.0, 20.0, 10.0),)
    """
    pts = [np.asarray(p, dtype=np.float64).reshape(-1, 2) for p in polygons]
    if bounds is not None and pts:
        every = np.concatenate(pts)
        lo, hi = every.min(axis=0), every.max(axis=0)
        dx = float(np.clip(dx, bounds[0] - lo[0], bounds[2] - hi[0]))
        dy = float(np.clip(dy, bounds[1] - lo[1], bounds[3] - hi[1]))
    shift = np.array([dx, dy])
    return tuple(tuple(float(v) for v in np.round(p + shift, 2).ravel()) for p in pts)


def tidy_polygon(points: Sequence[tuple[float, float]],
                 min_gap: float = 0.5) -> tuple[float, ...]:
    """Corners clicked for a polygon, flat, with repeats dropped (a double click lands twice
    on one spot) and rounded to 1/100 pixel; fewer than three corners give ``()``.

    Examples
    --------
    >>> tidy_polygon([(0, 0), (10, 0), (10, 0.2), (10, 10)])
    (0.0, 0.0, 10.0, 0.0, 10.0, 10.0)
    >>> tidy_polygon([(0, 0), (10, 0)])
    ()
    """
    kept: list[tuple[float, float]] = []
    for x, y in points:
        if not kept or np.hypot(x - kept[-1][0], y - kept[-1][1]) > min_gap:
            kept.append((float(x), float(y)))
    if len(kept) > 1 and np.hypot(kept[0][0] - kept[-1][0], kept[0][1] - kept[-1][1]) <= min_gap:
        kept.pop()
    if len(kept) < 3:
        return ()
    return tuple(round(v, 2) for xy in kept for v in xy)
