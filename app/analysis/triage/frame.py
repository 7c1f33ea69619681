"""Triage of one frame: every check, combined into each person's suspicion and a score."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

import numpy as np

from app.analysis.anthropometry import limb_fractions, person_scale, reach_matrix
from app.analysis.triage.body import (
    body_scale,
    crossed_sides,
    far_side,
    feet_y,
    mirrored,
    missing_joints,
    stretched_limbs,
    upright_body,
)
from app.analysis.triage.combine import (
    ALONE,
    CROWD_WEIGHT,
    CROWDED_FROM,
    FRAME_BEFORE,
    MIN_STRENGTH,
    FrameTriage,
    Reason,
    combine,
    reweigh,
    weight_set,
)
from app.analysis.triage.crowd import (
    covers,
    crowd_index,
    duplicates_and_splits,
    ground_line,
    invented,
    leg_ratio,
    long_legs,
    neighbour_face,
    off_ground,
    stand_rows,
    typical_joint_score,
)
from app.analysis.triage.model_evidence import (
    grouped_alone,
    held_tie,
    limb_support,
    low_scores,
    opposed_field,
    typical_support,
    weak_limbs,
)
from app.model.naming import Names
from app.model.skeleton import Skeleton


def triage_frame(
    people: Mapping[int, Any],
    skeleton: Skeleton,
    scores: Mapping[int, Any] | None = None,
    maps: Any = None,
    image_size: tuple[int, int] | None = None,
    placed: Mapping[int, Any] | None = None,
    grouping: str | None = None,
) -> FrameTriage:
    """Every check on one frame; the frame's score, its reasons and each person's suspicion.

    Parameters
    ----------
    people
        Person id -> ``(K, 3)`` ``x, y, v`` (image pixels).
    skeleton
        The project's skeleton.
    scores
        Person id -> ``(K,)`` model score per joint (NaN where none), optional.
    maps
        Optional network maps (``.pafs`` ``(L, 2, H, W)``, ``.stride``) for the field checks.
    image_size
        ``(width, height)``, so that joints beyond the border are not counted missing.
    placed
        Person id -> the joints a person placed or marked
        (:func:`app.analysis.triage.findings.placed_by_people`): ``invented`` leaves them
        alone, since a moved joint keeps the model's score of its old spot, and so does
        ``held-tie`` (the maps' grouping is not the question for a joint a person placed).
    grouping
        How the labels were grouped (:attr:`app.model.labels.Frame.grouping`): ``"alone"``,
        ``"frame-before"`` or None (no record). It chooses the weights
        (:func:`app.analysis.triage.combine.weight_set`: the frame before's set for
        ``"frame-before"``, the default one otherwise); and for labels grouped alone the
        maps' grouping alone is not computed (``held-tie`` compares the labels with it, and
        they are it, so it could not speak: about 11 ms a frame of the shipped demo saved).

    Returns
    -------
    FrameTriage

    Notes
    -----
    See the module docstring for the checks and how they combine.

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> sk = coco_body()
    >>> body = np.zeros((17, 3)); body[:, 2] = 2
    >>> body[:, :2] = [[50, 20], [52, 18], [48, 18], [55, 19], [45, 19], [60, 35], [40, 35],
    ...                [63, 55], [37, 55], [64, 72], [36, 72], [56, 68], [44, 68], [57, 95],
    ...                [43, 95], [57, 120], [43, 120]]
    >>> triage_frame({1: body}, sk).flagged
    []
    >>> wrong = body.copy(); wrong[9, :2] = (160, 72)      # left wrist on a neighbour
    >>> t = triage_frame({1: wrong}, sk)
    >>> sorted({r.kind for r in t.reasons}), round(t.suspicion[1], 3)  # PRIOR + its weight
    (['stretched-limb'], 0.168)
    >>> tilted = wrong.copy(); tilted[11:, 0] += 25       # and the hips and legs to the side
    >>> triage_frame({1: tilted}, sk).flagged
    [1]
    """
    arrays = {int(p): np.asarray(v, dtype=np.float64) for p, v in people.items()}
    score_arrays = None if scores is None else \
        {int(p): np.asarray(v, dtype=np.float64) for p, v in scores.items()}
    fractions = limb_fractions(skeleton)
    reach = reach_matrix(skeleton)
    present = [p for p, kp in arrays.items() if (kp[:, 2] > 0).any()]
    torso = {p: person_scale(arrays[p], skeleton) for p in present}
    scales = {p: body_scale(arrays[p], skeleton, fractions) for p in present}
    support = typical = alone = None
    if maps is not None and present:
        support = limb_support(np.stack([arrays[p] for p in present]), skeleton, maps)
        typical = typical_support(support)
        if grouping != ALONE:
            alone = grouped_alone(maps, skeleton)
    line = ground_line(np.array([feet_y(arrays[p], skeleton) for p in present]),
                       np.array([torso[p] for p in present]))
    typical_score = None
    if score_arrays is not None:
        means = [float(np.nanmean(score_arrays[p][(arrays[p][:, 2] > 0)]))
                 for p in present if p in score_arrays
                 and np.isfinite(score_arrays[p][arrays[p][:, 2] > 0]).any()]
        if len(means) >= 3:
            typical_score = float(np.median(means))
    shown = {p: arrays[p] for p in present}
    covered = covers(shown, skeleton, scales, stand_rows(shown, skeleton, torso, line))
    joint_score = typical_joint_score(shown, score_arrays)
    names = Names.of_frame(skeleton, arrays)
    leg_ratios = {p: leg_ratio(arrays[p], skeleton) for p in present}
    reasons: list[Reason] = []
    for n, pid in enumerate(present):
        kp = arrays[pid]
        own = None if score_arrays is None else score_arrays.get(pid)
        reasons += missing_joints(pid, kp, skeleton, image_size, scales[pid], reach, maps)
        reasons += stretched_limbs(pid, kp, skeleton, torso[pid], reach)
        reasons += upright_body(pid, kp, skeleton, torso[pid])
        reasons += off_ground(pid, kp, skeleton, torso[pid], line)
        reasons += mirrored(pid, kp, skeleton, own, torso[pid])
        reasons += far_side(pid, kp, skeleton, own, torso[pid])
        reasons += crossed_sides(pid, kp, skeleton, torso[pid], maps)
        mine = frozenset() if placed is None else frozenset(placed.get(pid, ()))
        if support is not None and typical is not None:
            reasons += weak_limbs(pid, kp, skeleton, support[n], typical)
            reasons += opposed_field(pid, kp, skeleton, support[n])
        reasons += held_tie(pid, kp, alone, mine, names)
        reasons += neighbour_face(pid, kp, skeleton, shown, names)
        reasons += long_legs(pid, kp, skeleton, leg_ratios, names)
        reasons += low_scores(pid, kp, own, typical_score)
        reasons += invented(pid, kp, skeleton,
                            [(j, q) for j, q in covered.get(pid, []) if j not in mine],
                            own, joint_score, names)
    reasons += duplicates_and_splits(shown, skeleton, scales, score_arrays, names)
    reasons = [r for r in reasons if r.strength >= MIN_STRENGTH]
    weights = weight_set(grouping)
    if grouping == FRAME_BEFORE:  # the checks weigh by the default set (make_reason)
        reasons = reweigh(reasons, weights)
    suspicion = combine(reasons, arrays, weights.prior)
    ci = crowd_index(arrays)
    if ci > CROWDED_FROM:
        reasons.append(Reason("crowded", f"crowded frame (crowd index {ci:.2f})", None, (),
                              min(ci, 1.0), min(ci, 1.0), 0.0))
    score = float(sum(suspicion.values()) + CROWD_WEIGHT * ci)
    reasons.sort(key=lambda r: (-r.weight, r.person if r.person is not None else -1))
    return FrameTriage(score, reasons, suspicion, ci, grouping=grouping)
