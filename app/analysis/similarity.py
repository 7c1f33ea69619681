"""How alike two poses are: COCO object keypoint similarity (OKS), matching, per-joint distance.

OKS here is the number pycocotools' ``COCOeval.computeOks`` gives, operation for operation,
including its rule for a reference person with no labelled joint. People are ``(K, 3)`` arrays;
the *reference* (ground truth) person's third column is the COCO visibility ``v`` and decides
which joints count; the *predicted* person's third column is not read (pycocotools ignores it
too), so a predicted person may carry scores there.

References
----------
COCO keypoint evaluation, "Object Keypoint Similarity", and its reference code
``pycocotools.cocoeval.COCOeval.computeOks`` (the tests compare against the installed copy).
"""

from __future__ import annotations

import threading
from typing import Any

import numpy as np
from scipy.optimize import linear_sum_assignment

from app.errors import BadInput
from app.wording import count

__all__ = ["joint_disagreement", "match_people", "oks", "oks_matrix", "person_area"]


def person_area(keypoints: Any) -> Any:
    """Area of the tight box around a person's labelled joints, for people with no area.

    Parameters
    ----------
    keypoints
        ``(K, 3)`` ``x, y, v`` (or ``(..., K, 3)`` for many people at once).

    Returns
    -------
    float or numpy.ndarray
        ``width * height`` of the box around the joints with ``v > 0``, in square pixels; 0 when
        fewer than two joints are labelled. A float for one person, ``(...)`` for many.

    Notes
    -----
    COCO labels carry a segmentation area; when a person has none, the area of the tight box
    of the labelled joints stands in for it (common practice, no source). It is larger than a
    segmentation area would be for the same person, so OKS against it is a little more lenient.

    Examples
    --------
    >>> person_area(np.array([[0.0, 0.0, 2], [4.0, 10.0, 1], [99.0, 99.0, 0]]))
    40.0
    """
    kp = np.asarray(keypoints, dtype=np.float64)
    if kp.ndim < 2 or kp.shape[-1] != 3:
        raise BadInput(f"keypoints have shape {kp.shape}", where="keypoints",
                       hint="give (K, 3) x, y, v")
    labelled = (kp[..., 2] > 0) & np.isfinite(kp[..., :2]).all(axis=-1)
    some = labelled.any(axis=-1)

    def extent(c: np.ndarray) -> np.ndarray:
        top = np.where(labelled, c, -np.inf).max(axis=-1)
        bottom = np.where(labelled, c, np.inf).min(axis=-1)
        return np.where(some, top - bottom, 0.0)

    xr, yr = extent(kp[..., 0]), extent(kp[..., 1])
    area = xr * yr
    return float(area) if area.ndim == 0 else area


def oks(
    predicted: Any, reference: Any, area: float, sigmas: Any, box: Any = None
) -> float:
    """Object keypoint similarity of one predicted person against one reference person.

    Parameters
    ----------
    predicted
        ``(K, 3)``: ``x, y`` and anything (not read) in the third column. A joint with a NaN
        position counts as infinitely far away.
    reference
        ``(K, 3)`` ``x, y, v``; joints with ``v > 0`` count.
    area
        The reference person's area in square pixels (COCO ``area``; see :func:`person_area`).
    sigmas
        ``(K,)`` per-joint OKS sigmas (``Skeleton.sigma_array``).
    box
        The reference person's COCO box ``(x, y, width, height)``; read only when the reference
        has no labelled joint.

    Returns
    -------
    float
        OKS in [0, 1].

    Notes
    -----
    See :func:`oks_matrix`, of which this is one entry.

    References
    ----------
    ``pycocotools.cocoeval.COCOeval.computeOks``.

    Examples
    --------
    >>> ref = np.array([[10.0, 10.0, 2], [20.0, 10.0, 2], [0.0, 0.0, 0]])
    >>> pred = ref + [[1.0, 0.0, 0], [0.0, 0.0, 0], [50.0, 50.0, 0]]
    >>> round(oks(pred, ref, area=100.0, sigmas=[0.1, 0.1, 0.1]), 4)
    0.9412
    """
    pred = _people(predicted, "predicted")
    ref = _people(reference, "reference")
    if pred.shape[0] != 1 or ref.shape[0] != 1:
        raise BadInput("oks compares one person with one person", where="predicted",
                       hint="use oks_matrix for many")
    boxes = None if box is None else np.asarray(box, dtype=np.float64).reshape(1, 4)
    return float(oks_matrix(pred, ref, [area], sigmas, boxes)[0, 0])


def oks_matrix(
    predicted: Any, reference: Any, areas: Any, sigmas: Any, boxes: Any = None
) -> np.ndarray:
    """OKS of every predicted person against every reference person.

    Parameters
    ----------
    predicted
        ``(N, K, 3)``: ``x, y`` and an unread third column (NaN position: infinitely far).
    reference
        ``(M, K, 3)`` ``x, y, v``.
    areas
        ``(M,)`` reference areas in square pixels.
    sigmas
        ``(K,)`` per-joint OKS sigmas.
    boxes
        ``(M, 4)`` reference COCO boxes ``x, y, width, height``, read only for references with
        no labelled joint. Without boxes such a reference scores 0 against everyone (nothing
        locates it).

    Returns
    -------
    numpy.ndarray
        ``(N, M)`` float64; entry ``[i, j]`` is predicted ``i`` against reference ``j``, the
        orientation of pycocotools' ``ious[i, j]`` (detection ``i``, ground truth ``j``).

    Notes
    -----
    With ``d_i`` the distance between predicted and reference joint ``i``:
    ``e_i = d_i^2 / (2 sigma_i)^2 / (area + eps) / 2`` (``eps`` = ``np.spacing(1)``) and
    ``OKS = sum over labelled i of exp(-e_i) / (number of labelled i)``.

    When the reference has no labelled joint, pycocotools instead measures, for *every* joint
    ``i``, how far the predicted joint lies outside the reference box enlarged to three times
    its width and height about the same centre (``x0 = x - w``, ``x1 = x + 2 w`` and likewise in
    y): ``dx = max(0, x0 - x_i) + max(0, x_i - x1)``, the same for ``dy``, and averages
    ``exp(-e_i)`` over all ``K`` joints. This is replicated exactly.

    pycocotools has no notion of a missing predicted joint (a NaN there would make OKS NaN); a
    predicted joint with a NaN coordinate contributes 0 here, as if infinitely far.

    One vectorised pass computes every pair and joint at once (joint-major, in chunks of
    references whose scratch buffers stay in cache and are reused between calls), about 200
    times faster than ``computeOks`` on 100 x 100 people (``make bench``). Terms below
    ``exp(-707)`` (1e-307, next to the smallest normal double) count as 0, which keeps numpy's
    exp on its fast path; pycocotools gives them as they are, so an entry may differ from its
    value by at most 1e-307 besides rounding (an entry below 1e-307 is 0).

    References
    ----------
    ``pycocotools.cocoeval.COCOeval.computeOks`` (COCO keypoint evaluation).

    Examples
    --------
    >>> ref = np.array([[[10.0, 10.0, 2], [20.0, 10.0, 2]]])
    >>> pred = np.stack([ref[0], ref[0] + [[3.0, 4.0, 0], [3.0, 4.0, 0]]])
    >>> oks_matrix(pred, ref, [100.0], [0.1, 0.1]).round(4)
    array([[1.    ],
           [0.0439]])
    """
    pred = _people(predicted, "predicted")
    ref = _people(reference, "reference")
    k = ref.shape[1]
    if pred.shape[1] != k:
        raise BadInput(f"predicted people have {count(pred.shape[1], 'joint')}, "
                       f"references {k}",
                       where="predicted")
    sig = np.asarray(sigmas, dtype=np.float64).reshape(-1)
    if sig.size != k:
        raise BadInput(f"{count(sig.size, 'sigma')} for {count(k, 'joint')}", where="sigmas")
    area = np.asarray(areas, dtype=np.float64).reshape(-1)
    if area.size != ref.shape[0]:
        raise BadInput(f"{count(area.size, 'area')} for "
                       f"{count(ref.shape[0], 'reference person', 'reference people')}",
                       where="areas")
    n, m = pred.shape[0], ref.shape[0]
    labelled = ref[:, :, 2] > 0  # (M, K)
    num_labelled = labelled.sum(axis=1)
    empty = num_labelled == 0
    out = np.zeros((n, m))
    if n == 0 or m == 0:
        return out
    # -1 / (2 (2 sigma)^2 (area + eps)) per reference joint: e = -coef * d^2. A reference
    # whose coefficient is not finite (an area of NaN or -eps) scores 0, as pycocotools' NaN.
    with np.errstate(divide="ignore", invalid="ignore"):
        coef = -1.0 / ((sig * 2) ** 2)[None, :] / (area[:, None] + np.spacing(1)) / 2
    usable = np.isfinite(coef).all(axis=1) & ~empty
    weight = np.where(labelled & usable[:, None], 1.0, 0.0) / np.maximum(num_labelled, 1)[:, None]
    coef[~usable] = 0.0
    _labelled_oks(pred, ref, coef, weight, out)
    if empty.any() and boxes is not None:
        box = np.asarray(boxes, dtype=np.float64).reshape(-1, 4)
        if box.shape[0] != m:
            raise BadInput(f"{count(box.shape[0], 'box')} for "
                           f"{count(m, 'reference person', 'reference people')}", where="boxes")
        cols = np.flatnonzero(empty)
        out[:, cols] = _box_oks(pred, box[cols], area[cols], sig)
    return out


#: numpy's vectorised exp leaves its fast path for x below about -708 (results near or past the
#: smallest normal double), about 6x slower; such terms (below 1e-307) count as 0 instead.
_EXP_FLOOR = -707.0
#: Joint-pairs worked on at once: two float64 buffers of this many stay in a core's cache.
_CHUNK = 1 << 16
_workspace = threading.local()


def _buffers(size: int) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Two float64 scratch buffers of at least ``size`` elements and one of as many copies of
    the exponent's floor (numpy's maximum is twice as fast against an array as against a
    number), kept per thread."""
    bufs = getattr(_workspace, "buffers", None)
    if bufs is None or bufs[0].size < size:
        bufs = (np.empty(size), np.empty(size), np.full(size, _EXP_FLOOR))
        _workspace.buffers = bufs
    return bufs


def _labelled_oks(pred: np.ndarray, ref: np.ndarray, coef: np.ndarray, weight: np.ndarray,
                  out: np.ndarray) -> None:
    """Fill ``out (N, M)`` with OKS over the references' labelled joints.

    Works joint-major, ``(K, M, N)``, on references in chunks that keep the scratch buffers
    in cache, reusing them between calls; the weighted sum over joints is one batched matrix
    product per chunk.
    """
    n, k = pred.shape[0], pred.shape[1]
    m = ref.shape[0]
    # A missing (non-finite) coordinate stands so far away that its term is 0 (pycocotools:
    # NaN, which the caller's rule turns into 0): predicted ones at +1e150, reference ones at
    # -1e150, any other coordinate within 1e100, so no difference is inf - inf or overflows.
    px = _coordinates(pred[:, :, 0].T, 1e150)[:, None, :]  # (K, 1, N)
    py = _coordinates(pred[:, :, 1].T, 1e150)[:, None, :]
    rx = _coordinates(ref[:, :, 0].T, -1e150)  # (K, M)
    ry = _coordinates(ref[:, :, 1].T, -1e150)
    ct = coef.T  # (K, M)
    step = max(1, _CHUNK // (n * k))
    a_buf, b_buf, floors = _buffers(min(m, step) * n * k)
    floor = np.exp(_EXP_FLOOR)
    for lo in range(0, m, step):
        hi = min(m, lo + step)
        shape = (k, hi - lo, n)
        a = a_buf[: k * (hi - lo) * n].reshape(shape)
        b = b_buf[: k * (hi - lo) * n].reshape(shape)
        np.subtract(px, rx[:, lo:hi, None], out=a)
        np.multiply(a, a, out=a)
        np.subtract(py, ry[:, lo:hi, None], out=b)
        np.multiply(b, b, out=b)
        np.add(a, b, out=a)
        with np.errstate(over="ignore"):  # a huge distance at a zero area: -inf, a term of 0
            np.multiply(a, ct[:, lo:hi, None], out=a)
        np.maximum(a, floors[: a.size].reshape(shape), out=a)
        np.exp(a, out=a)
        # (M, 1, K) @ (M, K, N): each reference's weighted sum over its joints. Every term
        # cut at the floor adds exactly `floor` times its weight; the weights of a reference
        # sum to 1 (or 0), so subtracting `floor` takes those terms back out.
        total = np.matmul(weight[lo:hi, None, :], a.transpose(1, 0, 2))[:, 0, :]
        out[:, lo:hi] = total.T
    np.subtract(out, floor, out=out)
    out[out < floor] = 0.0  # what rounding of the weights left of those terms


def _coordinates(values: np.ndarray, missing: float) -> np.ndarray:
    """``values`` with NaN and infinities at ``missing`` and the rest clipped to 1e100."""
    out = np.clip(values, -1e100, 1e100)
    out[~np.isfinite(values)] = missing
    return out


def _box_oks(pred: np.ndarray, box: np.ndarray, area: np.ndarray, sig: np.ndarray) -> np.ndarray:
    """pycocotools' rule for references with no labelled joint: how far each predicted joint
    lies outside the box enlarged to three times its size, averaged over all joints."""
    k = pred.shape[1]
    px, py = pred[:, None, :, 0], pred[:, None, :, 1]  # (N, 1, K)
    x0 = (box[:, 0] - box[:, 2])[None, :, None]
    x1 = (box[:, 0] + box[:, 2] * 2)[None, :, None]
    y0 = (box[:, 1] - box[:, 3])[None, :, None]
    y1 = (box[:, 1] + box[:, 3] * 2)[None, :, None]
    with np.errstate(invalid="ignore"):
        dx = np.maximum(0.0, x0 - px) + np.maximum(0.0, px - x1)
        dy = np.maximum(0.0, y0 - py) + np.maximum(0.0, py - y1)
        e = (dx**2 + dy**2) / ((sig * 2) ** 2) / (area[None, :, None] + np.spacing(1)) / 2
        similarity = np.exp(-e)
    similarity[np.isnan(similarity)] = 0.0
    return similarity.sum(axis=2) / k


def match_people(
    predicted: Any,
    reference: Any,
    areas: Any,
    sigmas: Any,
    threshold: float = 0.5,
    boxes: Any = None,
) -> list[tuple[int, int, float]]:
    """Pair predicted people with reference people one to one, by OKS.

    Parameters
    ----------
    predicted, reference, areas, sigmas, boxes
        As for :func:`oks_matrix`.
    threshold
        Least OKS for a pair to count (default 0.5, the loosest COCO threshold).

    Returns
    -------
    list of (int, int, float)
        ``(i, j, oks)``: predicted ``i`` is reference ``j``, sorted by ``i``. People left over
        on either side are unmatched.

    Notes
    -----
    The pairing maximises the sum of OKS over pairs at or above the threshold (pairs below it
    weigh 0, so they never displace a good pair), solved exactly as a linear assignment.

    References
    ----------
    Optimal assignment: ``scipy.optimize.linear_sum_assignment`` (Crouse, "On implementing 2D
    rectangular assignment algorithms", IEEE TAES 52(4), 2016).

    Examples
    --------
    >>> a = np.array([[[0.0, 0.0, 2], [10.0, 0.0, 2]]])
    >>> b = np.array([[[50.0, 0.0, 2], [60.0, 0.0, 2]], [[0.5, 0.0, 2], [10.0, 0.5, 2]]])
    >>> [(i, j, round(s, 3)) for i, j, s in match_people(a, b, [100.0, 100.0], [0.1, 0.1])]
    [(0, 1, 0.969)]
    """
    table = oks_matrix(predicted, reference, areas, sigmas, boxes)
    if table.size == 0:
        return []
    weight = np.where(table >= threshold, table, 0.0)
    rows, cols = linear_sum_assignment(weight, maximize=True)
    return [
        (int(i), int(j), float(table[i, j]))
        for i, j in zip(rows, cols, strict=True)
        if table[i, j] >= threshold
    ]


def joint_disagreement(a: Any, b: Any, scale: float) -> np.ndarray:
    """Per-joint distance between two versions of one person, in units of the person's scale.

    Parameters
    ----------
    a, b
        ``(K, 3)`` ``x, y, v`` (a joint counts where the third column is > 0, so model output
        with scores in that column works too).
    scale
        The person's scale in pixels, usually ``sqrt(area)``.

    Returns
    -------
    numpy.ndarray
        ``(K,)`` float64 ``||a_i - b_i|| / scale``; NaN where either side is unlabeled.

    Notes
    -----
    Dividing by ``sqrt(area)`` makes the figure comparable across people of different size, as
    OKS does (common practice, no source).

    Examples
    --------
    >>> a = np.array([[0.0, 0.0, 2], [10.0, 0.0, 2]])
    >>> b = np.array([[3.0, 4.0, 1], [10.0, 0.0, 0]])
    >>> joint_disagreement(a, b, 10.0)
    array([0.5, nan])
    """
    pa = _people(a, "a")[0]
    pb = _people(b, "b")[0]
    if pa.shape != pb.shape:
        raise BadInput(f"the two people have {pa.shape[0]} and {count(pb.shape[0], 'joint')}",
                       where="b")
    scale = float(scale)
    if not scale > 0:
        raise BadInput(f"scale {scale} must be positive", where="scale")
    d = np.hypot(pa[:, 0] - pb[:, 0], pa[:, 1] - pb[:, 1]) / scale
    return np.where((pa[:, 2] > 0) & (pb[:, 2] > 0), d, np.nan)


def _people(value: Any, where: str) -> np.ndarray:
    try:
        arr = np.asarray(value, dtype=np.float64)
    except (TypeError, ValueError):
        raise BadInput("keypoints are not numbers", where=where) from None
    if arr.ndim == 2:
        arr = arr[None]
    if arr.ndim != 3 or arr.shape[2] != 3:
        raise BadInput(f"keypoints have shape {arr.shape}", where=where,
                       hint="give (K, 3) or (N, K, 3) x, y, v")
    return arr
