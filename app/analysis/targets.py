"""Training targets of a bottom-up pose estimator: confidence maps, part affinity fields, masks.

Everything here is defined on the *target grid*: with stride ``s`` an image of ``w x h`` pixels
gives a grid of ``ceil(h / s)`` rows and ``ceil(w / s)`` columns, and grid cell ``(r, c)`` stands
for the image point ``(c * s + (s - 1) / 2, r * s + (s - 1) / 2)`` (image pixels, x to the right,
y down, integer coordinates on pixel centres). People are ``(P, K, 3)`` arrays of ``x, y, v`` with
COCO visibility: only joints with ``v > 0`` are labelled; the position of a ``v == 0`` joint is
never read (it may be NaN).

References
----------
Z. Cao, T. Simon, S.-E. Wei, Y. Sheikh, "Realtime Multi-Person 2D Pose Estimation using Part
Affinity Fields", CVPR 2017, Sec. 2.2 (confidence maps) and Sec. 2.3 (part affinity fields).
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import numpy as np

from app.errors import BadInput

#: Confidence-map values below this are cut to zero (each joint is drawn in a window).
CUTOFF = 1e-3

#: Most elements one vectorised step of the target builders holds at once (bounds memory).
_CHUNK_ELEMENTS = 1 << 21

__all__ = [
    "CUTOFF",
    "cell_centres",
    "confidence_maps",
    "grid_shape",
    "loss_mask",
    "part_affinity_fields",
    "rasterize_regions",
]


def grid_shape(image_size: Sequence[int], stride: int) -> tuple[int, int]:
    """``(H, W)`` of the target grid for an image of ``image_size = (width, height)`` pixels.

    Examples
    --------
    >>> grid_shape((37, 23), 8)
    (3, 5)
    """
    width, height = _image_size(image_size)
    stride = _stride(stride)
    return -(-height // stride), -(-width // stride)


def cell_centres(n: int, stride: int) -> np.ndarray:
    """``(n,)`` float64: the image coordinate each of ``n`` grid rows (or columns) stands for.

    Notes
    -----
    Cell ``i`` covers image pixels ``i * s .. i * s + s - 1``; its centre is
    ``i * s + (s - 1) / 2``.

    Examples
    --------
    >>> cell_centres(3, 4)
    array([1.5, 5.5, 9.5])
    """
    return np.arange(n) * float(stride) + (stride - 1) / 2.0


def confidence_maps(
    keypoints: Any, image_size: Sequence[int], stride: int, sigma: float
) -> np.ndarray:
    """One confidence map per joint type: a Gaussian peak at every labelled joint.

    Parameters
    ----------
    keypoints
        ``(P, K, 3)`` float ``x, y, v`` in image pixels (``P`` may be 0; a single ``(K, 3)``
        person is accepted too). Joints with ``v == 0`` are ignored, whatever their position.
    image_size
        ``(width, height)`` of the image in pixels.
    stride
        Image pixels per grid cell (a positive integer).
    sigma
        Spread of each peak, in image pixels.

    Returns
    -------
    numpy.ndarray
        ``(K, H, W)`` float32 with ``H = ceil(height / stride)``, ``W = ceil(width / stride)``.

    Notes
    -----
    ``S_j(p) = max_k exp(-||p - x_jk||^2 / sigma^2)`` over the people ``k`` whose joint ``j`` is
    labelled, ``p`` being the image point of a grid cell. The maximum (not the sum) keeps the
    peaks of nearby people apart. Each joint is drawn only in the square window of cells within
    ``sigma * sqrt(ln(1 / CUTOFF))`` of it, so values below ``CUTOFF = 1e-3`` may read as 0;
    everywhere else the value is the formula's (to float32 rounding). The Gaussian is evaluated
    as the product of its x and y factors, which is the same function.

    References
    ----------
    Cao et al., "Realtime Multi-Person 2D Pose Estimation using Part Affinity Fields",
    CVPR 2017, Sec. 2.2, Eq. 6-7.

    Examples
    --------
    >>> person = np.array([[[4.0, 2.0, 2], [np.nan, np.nan, 0]]])
    >>> maps = confidence_maps(person, (9, 5), stride=1, sigma=1.0)
    >>> maps.shape, float(maps[0, 2, 4]), float(maps[0, 2, 5].round(4)), float(maps[1].max())
    ((2, 5, 9), 1.0, 0.3679, 0.0)
    """
    kp = _people(keypoints)
    height, width = grid_shape(image_size, stride)
    sigma = _positive(sigma, "sigma")
    num_joints = kp.shape[1]
    out = np.zeros(num_joints * height * width, dtype=np.float32)
    person, joint = np.nonzero(kp[:, :, 2] > 0)
    if person.size:
        reach = sigma * math.sqrt(math.log(1.0 / CUTOFF)) / stride  # in grid cells
        span = math.floor(2.0 * reach) + 2
        cols, gx = _gaussian_window(kp[person, joint, 0], width, stride, reach, span, sigma)
        rows, gy = _gaussian_window(kp[person, joint, 1], height, stride, reach, span, sigma)
        base = joint * (height * width)
        step = max(1, _CHUNK_ELEMENTS // (rows.shape[1] * cols.shape[1]))
        for s in range(0, person.size, step):
            part = slice(s, s + step)
            values = gy[part, :, None] * gx[part, None, :]
            index = (base[part, None, None] + rows[part, :, None] * width) + cols[part, None, :]
            np.maximum.at(out, index.ravel(), values.ravel().astype(np.float32))
    return out.reshape(num_joints, height, width)


def part_affinity_fields(
    keypoints: Any,
    limbs: Any,
    image_size: Sequence[int],
    stride: int,
    limb_width: float,
) -> np.ndarray:
    """One 2D vector field per limb: the limb's unit direction on the limb, zero elsewhere.

    Parameters
    ----------
    keypoints
        ``(P, K, 3)`` float ``x, y, v`` in image pixels (``P`` may be 0).
    limbs
        ``(L, 2)`` 0-based joint index pairs ``(j1, j2)``; the field points from ``j1`` to ``j2``.
    image_size
        ``(width, height)`` of the image in pixels.
    stride
        Image pixels per grid cell.
    limb_width
        Half-width of the band around the limb's axis, in image pixels (the paper's
        ``sigma_l``).

    Returns
    -------
    numpy.ndarray
        ``(L, 2, H, W)`` float32; channel 0 is the x component, channel 1 the y component.

    Notes
    -----
    A person's limb ``c = (j1, j2)`` counts when both ends are labelled and the two points
    differ. With ``u = (x_j2 - x_j1) / ||x_j2 - x_j1||`` and ``u_perp = (-u_y, u_x)``, the point
    ``p`` is on the limb when ``0 <= u . (p - x_j1) <= ||x_j2 - x_j1||`` and
    ``|u_perp . (p - x_j1)| <= limb_width``. ``L_c(p)`` is the mean of ``u`` over the ``n_c(p)``
    people whose limb ``c`` covers ``p``, and zero where none does. Only cells near each limb are
    tested: in every grid row the run of cells the band crosses is solved for, widened by one
    cell against rounding, and the exact test above is applied to it.

    References
    ----------
    Cao et al., "Realtime Multi-Person 2D Pose Estimation using Part Affinity Fields",
    CVPR 2017, Sec. 2.3, Eq. 8-9.

    Examples
    --------
    >>> person = np.array([[[1.0, 2.0, 2], [7.0, 2.0, 1]]])
    >>> field = part_affinity_fields(person, [(0, 1)], (9, 5), stride=1, limb_width=1.0)
    >>> field.shape, field[0, 0, 2].tolist(), field[0, 0, 0, 4].item()
    ((1, 2, 5, 9), [0.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 0.0], 0.0)
    """
    kp = _people(keypoints)
    pairs = _limbs(limbs, kp.shape[1])
    height, width = grid_shape(image_size, stride)
    limb_width = _non_negative(limb_width, "limb_width")
    num_limbs = pairs.shape[0]
    cells = height * width
    out = np.zeros((num_limbs, 2, cells), dtype=np.float32)
    if num_limbs == 0 or kp.shape[0] == 0:
        return out.reshape(num_limbs, 2, height, width)

    first, second = kp[:, pairs[:, 0]], kp[:, pairs[:, 1]]  # (P, L, 3)
    delta = second[..., :2] - first[..., :2]
    length = np.hypot(delta[..., 0], delta[..., 1])
    labelled = (first[..., 2] > 0) & (second[..., 2] > 0)
    with np.errstate(invalid="ignore"):
        counts = labelled & (length > 0)
    person, limb = np.nonzero(counts)
    if person.size == 0:
        return out.reshape(num_limbs, 2, height, width)
    start = first[person, limb, :2]
    length = length[person, limb]
    unit = delta[person, limb] / length[:, None]
    ux_all, uy_all = unit[:, 0], unit[:, 1]

    # Each grid row of a limb's bounding box meets the limb in one run of cells; find it
    # analytically, widen it by a cell for rounding, then apply the exact test to the run.
    offset = (stride - 1) / 2.0
    y_lo = np.minimum(start[:, 1], second[person, limb, 1]) - limb_width
    y_hi = np.maximum(start[:, 1], second[person, limb, 1]) + limb_width
    r0 = np.clip(np.ceil((y_lo - offset) / stride) - 1, 0, height).astype(np.int64)
    r1 = np.clip(np.floor((y_hi - offset) / stride) + 1, -1, height - 1).astype(np.int64)
    seg, row = _runs(r0, np.maximum(r1 - r0 + 1, 0))
    dy = (row * float(stride) + offset) - start[seg, 1]
    ux, uy = ux_all[seg], uy_all[seg]
    # 0 <= ux dx + uy dy <= length  and  -w <= ux dy - uy dx <= w, solved for dx
    a1, b1 = _solve_interval(ux, -uy * dy, length[seg] - uy * dy)
    a2, b2 = _solve_interval(-uy, -limb_width - ux * dy, limb_width - ux * dy)
    x0 = start[seg, 0]
    c_from = np.ceil((x0 + np.maximum(a1, a2) - offset) / stride) - 1
    c_to = np.floor((x0 + np.minimum(b1, b2) - offset) / stride) + 1
    c_from = np.clip(c_from, 0, width).astype(np.int64)
    c_to = np.clip(c_to, -1, width - 1).astype(np.int64)
    run, col = _runs(c_from, np.maximum(c_to - c_from + 1, 0))
    seg = seg[run]
    dx = (col * float(stride) + offset) - start[seg, 0]
    dy = dy[run]
    ux, uy = ux_all[seg], uy_all[seg]
    along = ux * dx + uy * dy
    on = (along >= 0) & (along <= length[seg]) & (np.abs(ux * dy - uy * dx) <= limb_width)

    cell = row[run][on] * width + col[on]
    which = limb[seg[on]]
    hit = which * cells + cell
    count = np.zeros(num_limbs * cells, dtype=np.int32)
    np.add.at(count, hit, np.ones(hit.size, dtype=np.int32))
    share = 1.0 / count[hit]
    flat = out.reshape(-1)
    at_x = which * (2 * cells) + cell
    np.add.at(flat, at_x, (ux[on] * share).astype(np.float32))
    np.add.at(flat, at_x + cells, (uy[on] * share).astype(np.float32))
    return out.reshape(num_limbs, 2, height, width)


def rasterize_regions(polygons: Any, image_size: Sequence[int], stride: int) -> np.ndarray:
    """Mark the grid cells whose image point lies inside any of the polygons.

    Parameters
    ----------
    polygons
        A sequence of polygons in image pixels, each ``(n, 2)`` points (``n >= 3``) or a flat
        ``[x1, y1, x2, y2, ...]`` list (the COCO segmentation layout). A rectangle is a polygon
        of its four corners.
    image_size
        ``(width, height)`` of the image in pixels.
    stride
        Image pixels per grid cell.

    Returns
    -------
    numpy.ndarray
        ``(H, W)`` bool, True inside.

    Notes
    -----
    A cell is inside when its image point ``(c * s + (s - 1) / 2, r * s + (s - 1) / 2)`` is,
    by the even-odd (crossing number) rule: a horizontal ray from the point crosses the
    polygon's edges an odd number of times. Points exactly on an edge may fall either way.
    The test is vectorised over the cells of each polygon's bounding box, looping over edges.

    References
    ----------
    The crossing-number point-in-polygon test (common practice, no source).

    Examples
    --------
    >>> rectangle = [[(0.5, 0.5), (3.5, 0.5), (3.5, 2.5), (0.5, 2.5)]]
    >>> rasterize_regions(rectangle, (6, 4), 1).astype(int)
    array([[0, 0, 0, 0, 0, 0],
           [0, 1, 1, 1, 0, 0],
           [0, 1, 1, 1, 0, 0],
           [0, 0, 0, 0, 0, 0]])
    """
    height, width = grid_shape(image_size, stride)
    inside = np.zeros((height, width), dtype=bool)
    offset = (stride - 1) / 2.0
    for n, polygon in enumerate(polygons):
        try:
            pts = np.asarray(polygon, dtype=np.float64).reshape(-1, 2)
        except (TypeError, ValueError):
            raise BadInput(
                "a region is not a list of (x, y) points", where=f"ignore region {n}"
            ) from None
        if pts.shape[0] < 3 or not np.isfinite(pts).all():
            raise BadInput(
                "a region needs at least three finite points", where=f"ignore region {n}"
            )
        lo = np.ceil((pts.min(axis=0) - offset) / stride).astype(np.int64)
        hi = np.floor((pts.max(axis=0) - offset) / stride).astype(np.int64)
        c0, c1 = max(int(lo[0]), 0), min(int(hi[0]), width - 1)
        r0, r1 = max(int(lo[1]), 0), min(int(hi[1]), height - 1)
        if c1 < c0 or r1 < r0:
            continue
        px = cell_centres(width, stride)[c0 : c1 + 1]
        py = cell_centres(height, stride)[r0 : r1 + 1]
        odd = np.zeros((py.size, px.size), dtype=bool)
        for (xa, ya), (xb, yb) in zip(pts, np.roll(pts, -1, axis=0), strict=True):
            crosses = (ya > py) != (yb > py)
            if not crosses.any():
                continue
            yc = py[crosses]
            x_cross = xa + (yc - ya) * (xb - xa) / (yb - ya)
            odd[crosses] ^= px[None, :] < x_cross[:, None]
        inside[r0 : r1 + 1, c0 : c1 + 1] |= odd
    return inside


def loss_mask(
    keypoints: Any,
    limbs: Any,
    image_size: Sequence[int],
    stride: int,
    ignore: Any = None,
    box_margin: float = 0.25,
    min_margin: float = 24.0,
) -> np.ndarray:
    """Per-channel loss weights: 1 where the targets can be trusted, 0 where a label is missing.

    Parameters
    ----------
    keypoints
        ``(P, K, 3)`` float ``x, y, v`` in image pixels.
    limbs
        ``(L, 2)`` 0-based joint index pairs, as given to :func:`part_affinity_fields`.
    image_size
        ``(width, height)`` of the image in pixels.
    stride
        Image pixels per grid cell.
    ignore
        Regions to leave out of the loss (people too small or too packed to label): either an
        ``(H, W)`` bool mask on the target grid, or a sequence of polygons in image pixels
        (see :func:`rasterize_regions`), or None.
    box_margin
        How far a person's box reaches past its labelled joints, as a fraction of the larger side
        of their tight box (default 0.25).
    min_margin
        The least such reach, in image pixels (default 24). Pass about three times the
        confidence-map ``sigma`` so a hidden joint's whole peak is covered.

    Returns
    -------
    numpy.ndarray
        ``(K + 2 L, H, W)`` float32 of 0 and 1. Channels ``0 .. K-1`` weigh the confidence maps;
        channels ``K + 2 c`` and ``K + 2 c + 1`` weigh the x and y channels of limb ``c``, the
        order of ``part_affinity_fields(...).reshape(2 * L, H, W)``.

    Notes
    -----
    - Inside an ignore region every channel is 0.
    - For each person with at least one labelled joint and each of their unlabeled joints
      ``j`` (``v == 0``): channel ``j`` and both channels of every limb touching ``j`` are 0
      inside the person's box.
    - The box is the tight box around the person's labelled joints, grown on every side by
      ``max(box_margin * max(box width, box height), min_margin)``. Why: a hidden joint is not
      far from the body it belongs to (a hand or a foot lies at most about one limb, roughly a
      quarter of the body's extent, beyond the joints that are labelled), so the network must
      not be told "no joint here" anywhere it could be; the minimum keeps the box open around a
      person with a single labelled joint and covers the tails of the missing peak (at three
      ``sigma`` the Gaussian has fallen to ``exp(-9)``). A wider box would also mask the
      neighbours' good labels in a crowd; this is the compromise (common practice, no source).
    - A person with no labelled joint has no box: cover them with an ignore region.

    References
    ----------
    Cao et al., "Realtime Multi-Person 2D Pose Estimation using Part Affinity Fields",
    CVPR 2017, Sec. 2.1 (the loss is weighted by a binary mask that is 0 where a label is
    missing, so true positives are not penalised).

    Examples
    --------
    >>> person = np.array([[[10.0, 10.0, 2], [np.nan, np.nan, 0]]])
    >>> mask = loss_mask(person, [(0, 1)], (40, 30), 1, min_margin=4.0)
    >>> mask.shape, mask[1, 10, 10].item(), mask[1, 10, 20].item(), mask[0, 10, 10].item()
    ((4, 30, 40), 0.0, 1.0, 1.0)
    >>> mask[2:, 6, 6].tolist(), mask[2:, 5, 5].tolist()
    ([0.0, 0.0], [1.0, 1.0])
    """
    kp = _people(keypoints)
    pairs = _limbs(limbs, kp.shape[1])
    height, width = grid_shape(image_size, stride)
    box_margin = _non_negative(box_margin, "box_margin")
    min_margin = _non_negative(min_margin, "min_margin")
    num_joints = kp.shape[1]
    out = np.ones((num_joints + 2 * pairs.shape[0], height, width), dtype=np.float32)
    if ignore is not None:
        out[:, _ignore_mask(ignore, image_size, stride)] = 0.0
    offset = (stride - 1) / 2.0
    for person in kp:
        labelled = person[:, 2] > 0
        if labelled.all() or not labelled.any():
            continue
        pts = person[labelled, :2]
        lo, hi = pts.min(axis=0), pts.max(axis=0)
        grow = max(box_margin * float((hi - lo).max()), min_margin)
        g0 = np.ceil((lo - grow - offset) / stride).astype(np.int64)
        g1 = np.floor((hi + grow - offset) / stride).astype(np.int64)
        c0, c1 = max(int(g0[0]), 0), min(int(g1[0]), width - 1)
        r0, r1 = max(int(g0[1]), 0), min(int(g1[1]), height - 1)
        if c1 < c0 or r1 < r0:
            continue
        missing = np.nonzero(~labelled)[0]
        touching = np.nonzero(np.isin(pairs, missing).any(axis=1))[0]
        channels = np.concatenate(
            [missing, num_joints + 2 * touching, num_joints + 2 * touching + 1]
        )
        out[channels, r0 : r1 + 1, c0 : c1 + 1] = 0.0
    return out


def _gaussian_window(
    centre: np.ndarray, n: int, stride: int, reach: float, span: int, sigma: float
) -> tuple[np.ndarray, np.ndarray]:
    """Cell indices ``(m, w)`` of a window along one axis and the Gaussian factor on them.

    The window holds every cell within ``reach`` cells of the point (clipped to the grid).
    """
    size = min(span, n)
    grid = (centre - (stride - 1) / 2.0) / stride
    first = np.clip(np.ceil(grid - reach), 0, n - size).astype(np.int64)
    index = first[:, None] + np.arange(size)
    d = (index * float(stride) + (stride - 1) / 2.0) - centre[:, None]
    return index, np.exp(-(d * d) / (sigma * sigma))


def _runs(first: np.ndarray, counts: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Expand runs ``first[i] .. first[i] + counts[i] - 1`` into ``(run index, value)`` arrays."""
    owner = np.repeat(np.arange(counts.size), counts)
    starts = np.cumsum(counts) - counts
    return owner, first[owner] + (np.arange(owner.size) - starts[owner])


def _solve_interval(
    k: np.ndarray, lo: np.ndarray, hi: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Bounds ``[a, b]`` of ``x`` with ``lo <= k x <= hi`` (empty when ``a > b``)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        p, q = lo / k, hi / k
    holds = (lo <= 0) & (hi >= 0)
    a = np.where(k > 0, p, np.where(k < 0, q, np.where(holds, -np.inf, np.inf)))
    b = np.where(k > 0, q, np.where(k < 0, p, np.where(holds, np.inf, -np.inf)))
    return a, b


def _ignore_mask(ignore: Any, image_size: Sequence[int], stride: int) -> np.ndarray:
    shape = grid_shape(image_size, stride)
    if isinstance(ignore, np.ndarray) and ignore.dtype == bool:
        if ignore.shape != shape:
            raise BadInput(
                f"the ignore mask is {ignore.shape[0]} x {ignore.shape[1]} but the target grid "
                f"is {shape[0]} x {shape[1]}"
                if ignore.ndim == 2
                else f"the ignore mask has {ignore.ndim} dimensions",
                where="ignore",
                hint="give an (H, W) bool mask on the target grid or a list of polygons",
            )
        return ignore
    return rasterize_regions(ignore, image_size, stride)


def _people(keypoints: Any) -> np.ndarray:
    try:
        kp = np.asarray(keypoints, dtype=np.float64)
    except (TypeError, ValueError):
        raise BadInput("keypoints are not numbers", where="keypoints") from None
    if kp.ndim == 2:
        kp = kp[None]
    if kp.ndim != 3 or kp.shape[2] != 3:
        raise BadInput(
            f"keypoints have shape {kp.shape}", where="keypoints",
            hint="give (P, K, 3) x, y, v per person and joint",
        )
    labelled = kp[:, :, 2] > 0
    if not np.isfinite(kp[:, :, :2][labelled]).all():
        raise BadInput(
            "a labelled joint (v > 0) has no finite position", where="keypoints",
            hint="set v = 0 for joints without a position",
        )
    return kp


def _limbs(limbs: Any, num_joints: int) -> np.ndarray:
    pairs = np.asarray(limbs, dtype=np.int64).reshape(-1, 2)
    if pairs.size and (pairs.min() < 0 or pairs.max() >= num_joints):
        raise BadInput(f"a limb names a joint outside 0..{num_joints - 1}", where="limbs")
    return pairs


def _image_size(image_size: Sequence[int]) -> tuple[int, int]:
    try:
        width, height = (int(v) for v in image_size)
    except (TypeError, ValueError):
        raise BadInput("image_size must be (width, height)", where="image_size") from None
    if width <= 0 or height <= 0:
        raise BadInput(f"image size {width} x {height} is empty", where="image_size")
    return width, height


def _stride(stride: int) -> int:
    if int(stride) != stride or stride < 1:
        raise BadInput(f"stride {stride} is not a positive integer", where="stride")
    return int(stride)


def _positive(value: float, name: str) -> float:
    value = float(value)
    if not (value > 0 and math.isfinite(value)):
        raise BadInput(f"{name} = {value} must be positive", where=name)
    return value


def _non_negative(value: float, name: str) -> float:
    value = float(value)
    if not (value >= 0 and math.isfinite(value)):
        raise BadInput(f"{name} = {value} must not be negative", where=name)
    return value
