"""Signs tried for triage on demos grouped with the frame before, measured but not (yet) in
triage.

Grouping a sequence with the frame before (``import-maps --frame-before``) leaves fewer wrong
people, and those it leaves share triage's signs with right people (DEVELOPERS.md, "The
demo"). :func:`app.demo.weights.judge` can add the signs below as extra columns
(``python -m app.demo.weights --trial-signs ...``), so that they are fitted and measured
like triage's own kinds, without touching triage:

- ``held-tie`` (our own heuristic, no published source): the frame's maps grouped again, each
  frame alone (:func:`app.analysis.association.group_people` without ``previous``); the
  person's labelled joints that this grouping places elsewhere (1 pixel or more away) or not
  at all, on the person of that grouping that shares most of its joints. Such joints were
  decided by the frame before (a near tie kept), or by a person. The strength is
  :data:`HELD_FULL` such joints or more ramped to 1.
- ``opposed-field``: the person's labelled limbs whose line integral ``E`` on the network's
  part affinity field (Z. Cao et al., CVPR 2017, Sec. 2.4; from
  :meth:`app.analysis.triage.model_evidence.FieldMemo.e`) is negative, the field running
  from the second joint to the first: the limb's ends are likely exchanged or given to
  someone else. :data:`OPPOSED_FULL` such limbs or more give strength 1 (our choice).

Both need the maps; a frame without maps gives every person 0. The demos they are measured
on are synthetic (:mod:`app.demo`).
"""

from __future__ import annotations

from collections.abc import Callable
from typing import TYPE_CHECKING

import numpy as np

from app.analysis.association import group_people
from app.analysis.triage.combine import ramp

if TYPE_CHECKING:
    from app.demo.calibrate import DemoFrame

#: Joints placed elsewhere by the grouping alone at which ``held-tie`` is at full strength.
HELD_FULL = 3
#: Labelled limbs against their field at which ``opposed-field`` is at full strength.
OPPOSED_FULL = 2
#: A joint of the grouping alone within this many pixels of the labelled one is the same.
SAME_SPOT = 1.0


def held_joints(kp: np.ndarray, alone: list[np.ndarray]) -> int:
    """The labelled joints of ``kp`` (``(K, 3)``, ``v > 0`` labelled) that the person of
    ``alone`` (grouped people, ``(K, 3)`` rows of ``x, y, score``, score 0 where missing)
    sharing most of them places elsewhere or not at all.

    Examples
    --------
    >>> kp = np.array([[10.0, 10, 2], [20, 10, 2], [30, 10, 2], [0, 0, 0]])
    >>> same = np.array([[10.0, 10, 0.9], [20, 10, 0.9], [30, 10, 0.9], [40, 10, 0.9]])
    >>> held_joints(kp, [same])
    0
    >>> moved = same.copy(); moved[2, 0] = 45; moved[1, 2] = 0   # one elsewhere, one missing
    >>> held_joints(kp, [moved]), held_joints(kp, [])
    (2, 3)
    """
    on = kp[:, 2] > 0
    best, shared = None, -1
    for person in alone:
        same = on & (person[:, 2] > 0) & \
            (np.hypot(person[:, 0] - kp[:, 0], person[:, 1] - kp[:, 1]) < SAME_SPOT)
        if int(same.sum()) > shared:
            best, shared = person, int(same.sum())
    return int(on.sum()) - max(shared, 0) if best is not None else int(on.sum())


def held_tie(frame: DemoFrame) -> dict[int, float]:
    """``held-tie`` of each person of a :class:`app.demo.calibrate.DemoFrame`."""
    people = frame.labels.people
    if frame.maps is None:
        return dict.fromkeys(people, 0.0)
    maps = frame.maps.maps
    alone = group_people(maps.confidence_maps, maps.pafs, np.asarray(frame.labels.skeleton.limbs),
                         stride=maps.stride)
    return {p: ramp(held_joints(x.keypoints, alone), 0, HELD_FULL) for p, x in people.items()}


def opposed_limbs(kp: np.ndarray, limbs: list[tuple[int, int]], e: Callable[..., float]) -> int:
    """The labelled limbs of ``kp`` whose line integral ``e(limb, start, end)`` is negative.

    Examples
    --------
    >>> kp = np.array([[0.0, 0, 2], [10, 0, 2], [10, 10, 2]])
    >>> opposed_limbs(kp, [(0, 1), (1, 2)], lambda c, a, b: 0.8 if c == 0 else -0.3)
    1
    """
    return sum(1 for c, (a, b) in enumerate(limbs)
               if kp[a, 2] > 0 and kp[b, 2] > 0 and e(c, kp[a, :2], kp[b, :2]) < 0)


def opposed_field(frame: DemoFrame) -> dict[int, float]:
    """``opposed-field`` of each person of a :class:`app.demo.calibrate.DemoFrame`."""
    people = frame.labels.people
    if frame.maps is None:
        return dict.fromkeys(people, 0.0)
    limbs = list(frame.labels.skeleton.limbs)
    return {p: ramp(opposed_limbs(x.keypoints, limbs, frame.maps.e), 0, OPPOSED_FULL)
            for p, x in people.items()}


#: The signs :func:`app.demo.weights.judge` can add, by name.
TRIAL_SIGNS: dict[str, Callable[[DemoFrame], dict[int, float]]] = {
    "held-tie": held_tie,
    "opposed-field": opposed_field,
}
