"""Measures against the demo's truth: which people and joints are wrong, how well tracks link.

:func:`wrong_people` calibrates the simulated network maps (:mod:`app.demo.maps`) and reports
how many auto-labels in the demo need correcting; :func:`judge_joints` judges every labelled
joint, which is what retraining sees (wrong labelled joints are what hurt it), and
:func:`wrong_for_training` counts the people wrong as training sees them (an unsure joint
unlabelled is masked out, not wrong): they measure the
findings and their fixes (:mod:`app.demo.calibrate`, the findings' acceptance test and ``make
bench``); :func:`demo_sequence` and :func:`linking_accuracy` measure
:func:`app.analysis.tracks.link_tracks` on a generated demo, on its true poses and on the
people grouped from its maps.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np
from scipy.optimize import linear_sum_assignment

from app.analysis.association import group_people
from app.analysis.similarity import match_people, oks_matrix
from app.analysis.tracks import LinkAccuracy, link_accuracy, link_tracks
from app.fileio import read_json
from app.formats.maps import read_maps
from app.model.skeleton import Skeleton, coco_body

#: A labelled joint is correct when its per-joint similarity to its partner's is at least this.
KS_CORRECT = 0.5


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


def judge_joints(labelled_people: Any, truth_people: Any, truth_areas: Any,
                 sigmas: Any) -> np.ndarray:
    """Every labelled joint judged against the true poses: correct, wrong or not labelled.

    Parameters
    ----------
    labelled_people
        ``(N, K, 3)`` (or a list of ``(K, 3)``) labels ``x, y, v``; joints with ``v > 0``
        are labelled (an unlabeled joint's remembered position is not read).
    truth_people
        ``(M, K, 3)`` true ``x, y, v`` (COCO visibility).
    truth_areas
        ``(M,)`` the true people's areas in square pixels (COCO ``area``).
    sigmas
        ``(K,)`` per-joint OKS sigmas.

    Returns
    -------
    numpy.ndarray
        ``(N, K)`` int8: ``1`` correct, ``-1`` wrong, ``0`` not labelled.

    Notes
    -----
    Labelled and true people are paired one to one by the assignment that maximises the
    summed OKS (as pycocotools computes it, :func:`app.analysis.similarity.oks_matrix`) over
    the pairs with OKS above 0 (a labelled person nothing true resembles stays unpaired). A
    labelled joint ``i`` is *correct* when its person's true partner labels joint ``i`` and
    the COCO per-joint similarity ``ks_i = exp(-d_i^2 / (2 area (2 sigma_i)^2))`` is at least
    0.5 (``d_i`` the distance to the partner's joint, ``area`` the partner's); otherwise it is
    *wrong*: a joint of an unpaired person (a duplicate, a fragment, a phantom), a joint the
    truth does not label, or a joint placed elsewhere (a neighbour's, the other side's, an
    invented spot). A pairing by OKS rather than at a threshold judges each joint on its own:
    a person with one wrong arm keeps its other joints correct.

    References
    ----------
    COCO keypoint evaluation (OKS, per-joint similarity ``ks``) and
    ``pycocotools.cocoeval.COCOeval.computeOks``; optimal assignment by
    ``scipy.optimize.linear_sum_assignment``.

    Examples
    --------
    >>> truth = np.array([[[10.0, 10.0, 2], [20.0, 30.0, 2]], [[60.0, 10.0, 2], [70.0, 30.0, 0]]])
    >>> labels = np.array([[[10.5, 10.0, 2], [70.0, 30.0, 2]],    # second joint: a neighbour's
    ...                    [[60.0, 10.0, 2], [70.0, 30.0, 1]],    # second: truth has none
    ...                    [[10.0, 11.0, 2], [0.0, 0.0, 0]]])     # found twice
    >>> judge_joints(labels, truth, [400.0, 400.0], [0.1, 0.1]).tolist()
    [[1, -1], [1, -1], [-1, 0]]
    """
    return _judged(labelled_people, truth_people, truth_areas, sigmas)[0]


def _judged(labelled_people: Any, truth_people: Any, truth_areas: Any,
            sigmas: Any) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """:func:`judge_joints`'s verdicts, each labelled person's true partner (-1: none) and
    the true people stacked."""
    labels = _stack(labelled_people)
    truth = _stack(truth_people)
    partner = np.full(len(labels), -1, dtype=np.int64)
    if labels.size == 0:
        return np.zeros(labels.shape[:2], dtype=np.int8), partner, truth
    on = labels[:, :, 2] > 0
    out = np.where(on, -1, 0).astype(np.int8)
    if truth.size == 0:
        return out, partner, truth
    xy = np.where(on[:, :, None], labels[:, :, :2], np.nan)
    areas = np.asarray(truth_areas, dtype=np.float64).reshape(-1)
    sig = np.asarray(sigmas, dtype=np.float64).reshape(-1)
    similarity = oks_matrix(np.concatenate([xy, labels[:, :, 2:]], axis=2), truth, areas, sig)
    rows, cols = linear_sum_assignment(np.where(similarity > 0, similarity, 0.0), maximize=True)
    for i, j in zip(rows.tolist(), cols.tolist()):
        if similarity[i, j] <= 0:
            continue
        partner[i] = j
        d2 = ((xy[i] - truth[j, :, :2]) ** 2).sum(axis=1)
        with np.errstate(invalid="ignore"):
            ks = np.exp(-d2 / (2.0 * areas[j] * (2.0 * sig) ** 2 + np.spacing(1)))
        right = on[i] & (truth[j, :, 2] > 0) & (ks >= KS_CORRECT)
        out[i] = np.where(right, 1, out[i])
    return out, partner, truth


def wrong_for_training(labelled_people: Any, truth_people: Any, truth_areas: Any,
                       sigmas: Any) -> np.ndarray:
    """Which labelled people are wrong as training sees them.

    Training reads a labelled joint as a target and an unlabelled one not at all: its loss
    mask is zero there (:mod:`app.analysis.targets`, after Cao et al., CVPR 2017). So the
    product's rule for a joint nobody can place is to *unlabel* it, and a person whose
    unsure joints were unlabelled teaches the network nothing false. :func:`wrong_people`
    (OKS 0.8, an unlabelled joint counted as not placed, as the COCO export writes it
    ``0,0,0``) counts such a person as wrong, since OKS divides by the joints the truth
    labels; that count stays the strict one, and this is the second one, from the rule.

    Parameters
    ----------
    labelled_people, truth_people, truth_areas, sigmas
        As for :func:`judge_joints` (a joint with ``v > 0`` is labelled).

    Returns
    -------
    numpy.ndarray
        ``(N,)`` bool: True where the labelled person is wrong.

    Notes
    -----
    People are paired as :func:`judge_joints` pairs them (the assignment maximising summed
    OKS over pairs with OKS above 0). A labelled person is *right* when it has a true partner,
    every joint it labels is correct (:func:`judge_joints`: the partner labels it and the COCO
    per-joint similarity ``ks`` is at least :data:`KS_CORRECT`), and no joint the partner
    shows visible (``v = 2``) is left unlabelled. A true occluded joint (``v = 1``) left
    unlabelled is not wrong: it is masked out of training, which is what the rule asks. A
    person with no joint labelled, or with no partner (a duplicate, a fragment, a phantom),
    is wrong. True people nobody labelled are not counted here (as in :func:`wrong_people`).
    Whether a labelled joint is marked occluded or visible is not judged.

    References
    ----------
    Per-joint similarity ``ks`` and the visibility flags: the COCO keypoint standard and
    ``pycocotools.cocoeval.COCOeval.computeOks``; the loss mask: Cao et al., "Realtime
    Multi-Person 2D Pose Estimation using Part Affinity Fields", CVPR 2017.

    Examples
    --------
    Synthetic: two true people of two joints, the second's second joint occluded.

    >>> truth = np.array([[[10.0, 10.0, 2], [20.0, 30.0, 2]], [[60.0, 10.0, 2], [70.0, 30.0, 1]]])
    >>> labels = np.array([[[10.5, 10.0, 2], [0.0, 0.0, 0]],      # a visible joint unlabelled
    ...                    [[60.0, 10.0, 2], [0.0, 0.0, 0]],      # the occluded one unlabelled
    ...                    [[10.0, 11.0, 2], [20.0, 30.0, 2]]])   # right, all placed
    >>> wrong_for_training(labels, truth, [400.0, 400.0], [0.1, 0.1]).tolist()
    [True, False, False]
    >>> wrong_people(np.where(labels[:, :, 2:] > 0, labels, np.nan), truth, [400.0, 400.0],
    ...              [0.1, 0.1]).tolist()
    [True, True, False]
    """
    verdict, partner, truth = _judged(labelled_people, truth_people, truth_areas, sigmas)
    wrong = np.ones(len(verdict), dtype=bool)
    for i, j in enumerate(partner.tolist()):
        if j < 0 or not (verdict[i] != 0).any() or (verdict[i] < 0).any():
            continue
        shown = truth[j, :, 2] == 2
        wrong[i] = bool((shown & (verdict[i] == 0)).any())
    return wrong


@dataclass(frozen=True)
class JointTally:
    """How many labelled joints are correct and how many wrong (:func:`judge_joints`)."""

    correct: int = 0
    wrong: int = 0

    def __add__(self, other: JointTally) -> JointTally:
        return JointTally(self.correct + other.correct, self.wrong + other.wrong)


def tally_joints(labelled_people: Any, truth_people: Any, truth_areas: Any,
                 sigmas: Any) -> JointTally:
    """Counts of :func:`judge_joints`.

    Examples
    --------
    >>> truth = np.array([[[10.0, 10.0, 2], [20.0, 30.0, 2]]])
    >>> tally_joints([[[10.0, 10.0, 2], [90.0, 30.0, 2]]], truth, [400.0], [0.1, 0.1])
    JointTally(correct=1, wrong=1)
    """
    verdict = judge_joints(labelled_people, truth_people, truth_areas, sigmas)
    return JointTally(int((verdict == 1).sum()), int((verdict == -1).sum()))


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
        Frames in the order of their image ids (the order of the dance, and of their file
        names); people grouped with :func:`app.analysis.association.group_people` at its
        defaults, as ``import-maps`` groups them: in order with the frame before as
        ``previous``, in runs of :data:`app.map_runs.GROUPING_RUN` frames (each frame
        alone when :data:`app.map_runs.FRAME_BEFORE` is False).
    """
    from app import map_runs

    folder = Path(folder)
    skeleton = skeleton or coco_body()
    truth = read_json(folder / "truth.json", "the demo's truth")
    per_image: dict[int, list[dict]] = {im["id"]: [] for im in truth["images"]}
    for ann in truth["annotations"]:
        per_image[ann["image_id"]].append(ann)
    k = skeleton.num_joints
    out = DemoSequence([], [], [], [])
    found: list[np.ndarray] = []
    for n, image in enumerate(sorted(truth["images"], key=lambda im: im["id"])):
        anns = per_image[image["id"]]
        maps = read_maps(folder / "maps" / f"{Path(image['file_name']).stem}.npz", skeleton,
                         (image["width"], image["height"]))
        before = found if map_runs.FRAME_BEFORE and n % map_runs.GROUPING_RUN else None
        found = group_people(maps.confidence_maps, maps.pafs, skeleton.limb_array,
                             stride=maps.stride, previous=before)
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


def add_grouping_flags(parser: Any) -> None:
    """The demo tools' ``--frame-before`` and ``--each-frame-alone`` (one or neither): how the
    demos a tool builds group their auto-labels, as ``import-maps`` takes them."""
    group = parser.add_mutually_exclusive_group()
    group.add_argument("--frame-before", action="store_true",
                       help="demos grouped with the frame before (import-maps' default); "
                            "give a cache of its own")
    group.add_argument("--each-frame-alone", action="store_true",
                       help="demos grouped each frame alone (import-maps "
                            "--each-frame-alone); give a cache of its own")


def use_grouping(args: Any) -> bool:
    """Set :data:`app.map_runs.FRAME_BEFORE` for this process from the flags of
    :func:`add_grouping_flags` (unchanged without either) and return it: the demos built,
    and those of an older cache that recorded no grouping, count as grouped that way."""
    from app import map_runs

    if args.frame_before or args.each_frame_alone:
        map_runs.FRAME_BEFORE = bool(args.frame_before)
    return map_runs.FRAME_BEFORE
