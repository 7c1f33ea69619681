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
    variances = (sig * 2) ** 2
    labelled = ref[:, :, 2] > 0  # (M, K)
    num_labelled = labelled.sum(axis=1)
    px, py = pred[:, None, :, 0], pred[:, None, :, 1]  # (N, 1, K)
    dx = px - ref[None, :, :, 0]
    dy = py - ref[None, :, :, 1]
    empty = num_labelled == 0
    if empty.any() and boxes is not None:
        box = np.asarray(boxes, dtype=np.float64).reshape(-1, 4)
        if box.shape[0] != ref.shape[0]:
            raise BadInput(f"{count(box.shape[0], 'box')} for "
                           f"{count(ref.shape[0], 'reference person', 'reference people')}",
                           where="boxes")
        x0 = (box[:, 0] - box[:, 2])[None, :, None]
        x1 = (box[:, 0] + box[:, 2] * 2)[None, :, None]
        y0 = (box[:, 1] - box[:, 3])[None, :, None]
        y1 = (box[:, 1] + box[:, 3] * 2)[None, :, None]
        with np.errstate(invalid="ignore"):
            outside_x = np.maximum(0.0, x0 - px) + np.maximum(0.0, px - x1)
            outside_y = np.maximum(0.0, y0 - py) + np.maximum(0.0, py - y1)
        dx = np.where(empty[None, :, None], outside_x, dx)
        dy = np.where(empty[None, :, None], outside_y, dy)
    e = (dx**2 + dy**2) / variances / (area[None, :, None] + np.spacing(1)) / 2
    with np.errstate(invalid="ignore"):
        similarity = np.exp(-e)
    similarity[np.isnan(similarity)] = 0.0
    counted = np.where(empty[:, None], True, labelled)[None]  # (1, M, K)
    total = np.where(counted, similarity, 0.0).sum(axis=2)
    out = total / np.where(empty, k, num_labelled)[None, :]
    if boxes is None:
        out[:, empty] = 0.0
    return out


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
