"""Measures against the demo's truth: which grouped people are wrong, how well tracks link.

:func:`wrong_people` calibrates the simulated network maps (:mod:`app.demo.maps`) and reports
how many auto-labels in the demo need correcting; :func:`demo_sequence` and
:func:`linking_accuracy` measure :func:`app.analysis.tracks.link_tracks` on a generated demo,
on its true poses and on the people grouped from its maps.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from app.analysis.association import group_people
from app.analysis.similarity import match_people
from app.analysis.tracks import LinkAccuracy, link_accuracy, link_tracks
from app.fileio import read_json
from app.formats.maps import read_maps
from app.model.skeleton import Skeleton, coco_body


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


@dataclass(frozen=True)
class DemoSequence:
    """A demo's frames in order: the true people and the people grouped from its maps.

    Attributes
    ----------
    truth
        Per frame, ``(M_t, K, 3)`` true ``x, y, v``.
    areas
        Per frame, ``(M_t,)`` the true people's COCO areas.
    dancers
        Per frame, ``(M_t,)`` their ``track_id``: who each true person is.
    auto
        Per frame, ``(N_t, K, 3)`` people grouped from the maps (``x, y, score``; NaN where
        missing).
    """

    truth: list[np.ndarray]
    areas: list[np.ndarray]
    dancers: list[np.ndarray]
    auto: list[np.ndarray]


def demo_sequence(folder: str | Path, skeleton: Skeleton | None = None) -> DemoSequence:
    """Read a demo written by :func:`app.demo.generate` and group its maps into people.

    Parameters
    ----------
    folder
        The demo's folder (``truth.json`` and ``maps/``).
    skeleton
        The joint layout (default: the COCO body the demo is drawn with).

    Returns
    -------
    DemoSequence
        Frames in the order of their image ids (the order of the dance); people grouped with
        :func:`app.analysis.association.group_people` at its defaults.
    """
    folder = Path(folder)
    skeleton = skeleton or coco_body()
    truth = read_json(folder / "truth.json", "the demo's truth")
    per_image: dict[int, list[dict]] = {im["id"]: [] for im in truth["images"]}
    for ann in truth["annotations"]:
        per_image[ann["image_id"]].append(ann)
    k = skeleton.num_joints
    out = DemoSequence([], [], [], [])
    for image in sorted(truth["images"], key=lambda im: im["id"]):
        anns = per_image[image["id"]]
        maps = read_maps(folder / "maps" / f"{Path(image['file_name']).stem}.npz", skeleton,
                         (image["width"], image["height"]))
        found = group_people(maps.confidence_maps, maps.pafs, skeleton.limb_array,
                             stride=maps.stride)
        out.truth.append(np.array([a["keypoints"] for a in anns], float).reshape(-1, k, 3))
        out.areas.append(np.array([a["area"] for a in anns], float))
        out.dancers.append(np.array([a["track_id"] for a in anns], dtype=np.int64))
        out.auto.append(np.array(found, float).reshape(-1, k, 3))
    return out


def linking_accuracy(sequence: DemoSequence, sigmas: Any, pair_at: float = 0.5,
                     **options: Any) -> tuple[LinkAccuracy, LinkAccuracy]:
    """How well :func:`app.analysis.tracks.link_tracks` links a demo's true and grouped people.

    Parameters
    ----------
    sequence
        From :func:`demo_sequence`.
    sigmas
        ``(K,)`` per-joint OKS sigmas.
    pair_at
        Least OKS for a grouped person to be taken as a dancer (default 0.5, the loosest
        COCO threshold).
    **options
        Passed on to :func:`app.analysis.tracks.link_tracks`.

    Returns
    -------
    truth, auto
        :class:`app.analysis.tracks.LinkAccuracy` of the true poses (linked with their areas)
        and of the grouped people (linked without areas, as auto-labels come).

    Notes
    -----
    A grouped person is the dancer it is paired with one to one by OKS against the true poses
    (:func:`app.analysis.similarity.match_people`, optimal assignment over pairs at
    ``pair_at`` or more); a person paired with no one (a phantom, a duplicate, a fragment) has
    no identity, and its links are not judged.
    """
    truth_ids = link_tracks(sequence.truth, sigmas, sequence.areas, **options)
    auto_ids = link_tracks(sequence.auto, sigmas, **options)
    who = []
    for auto, truth, areas, dancers in zip(sequence.auto, sequence.truth, sequence.areas,
                                           sequence.dancers, strict=True):
        known = np.full(len(auto), -1, dtype=np.int64)
        for i, j, _ in match_people(auto, truth, areas, sigmas, threshold=pair_at):
            known[i] = dancers[j]
        who.append(known)
    return (link_accuracy(truth_ids, sequence.dancers), link_accuracy(auto_ids, who))
