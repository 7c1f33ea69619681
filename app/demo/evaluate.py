"""How many grouped people are wrong: OKS against the true poses, matched one to one.

Used to calibrate the simulated network maps (:mod:`app.demo.maps`) and to report how many
auto-labels in the demo need correcting.
"""

from __future__ import annotations

from typing import Any

import numpy as np

from app.analysis.similarity import match_people


def wrong_people(auto_people: Any, truth_people: Any, truth_areas: Any, sigmas: Any,
                 oks_threshold: float = 0.8) -> np.ndarray:
    """Which automatically grouped people are wrong.

    Parameters
    ----------
    auto_people
        ``(N, K, 3)`` (or a list of ``(K, 3)``) grouped people: ``x, y`` in image pixels, NaN
        for a missing joint; the third column (a score) is not read.
    truth_people
        ``(M, K, 3)`` true ``x, y, v`` (COCO visibility).
    truth_areas
        ``(M,)`` the true people's areas in square pixels (COCO ``area``).
    sigmas
        ``(K,)`` per-joint OKS sigmas.
    oks_threshold
        Least OKS for a grouped person to count as right (default 0.8).

    Returns
    -------
    numpy.ndarray
        ``(N,)`` bool: True where the grouped person is wrong.

    Notes
    -----
    ``OKS = sum over labelled i of exp(-d_i^2 / (2 area (2 sigma_i)^2)) / #labelled`` as
    pycocotools computes it (:func:`app.analysis.similarity.oks_matrix`). Grouped and true
    people are paired one to one by optimal assignment maximising the summed OKS over pairs
    whose OKS reaches the threshold (:func:`app.analysis.similarity.match_people`). A grouped
    person is right when it is in such a pair; it is wrong when its best available pairing is
    below the threshold or it pairs with no one (a duplicate, a fragment, a phantom).

    References
    ----------
    COCO keypoint evaluation (OKS) and ``pycocotools.cocoeval.COCOeval.computeOks``;
    optimal assignment by ``scipy.optimize.linear_sum_assignment``.

    Examples
    --------
    >>> truth = np.array([[[10.0, 10.0, 2], [20.0, 30.0, 2]], [[60.0, 10.0, 2], [70.0, 30.0, 1]]])
    >>> auto = np.array([[[10.5, 10.0, 1], [20.0, 30.5, 1]],       # right
    ...                  [[60.0, 10.0, 1], [20.0, 30.0, 1]],       # a joint of its neighbour
    ...                  [[10.0, 11.0, 1], [20.0, 31.0, 1]]])      # found twice
    >>> wrong_people(auto, truth, [400.0, 400.0], [0.1, 0.1]).tolist()
    [False, True, True]
    """
    auto = _stack(auto_people)
    truth = _stack(truth_people)
    wrong = np.ones(len(auto), dtype=bool)
    if len(auto) == 0 or len(truth) == 0:
        return wrong
    for i, _, _ in match_people(auto, truth, truth_areas, sigmas, threshold=oks_threshold):
        wrong[i] = False
    return wrong


def _stack(people: Any) -> np.ndarray:
    if isinstance(people, np.ndarray):
        return people.astype(np.float64).reshape((-1, *people.shape[-2:]))
    items = [np.asarray(p, dtype=np.float64) for p in people]
    return np.stack(items) if items else np.zeros((0, 0, 3))
