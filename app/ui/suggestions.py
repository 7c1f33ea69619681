"""Candidate owners for the selected joint, as the Owners panel lists them.

The ranking is :func:`app.analysis.suggest.candidate_owners` (PAF evidence when the frame has
network maps, limb-length geometry otherwise). If the analysis package is not available the
people are listed by distance to the joint, with a note saying so.
"""

from __future__ import annotations

import logging
from collections.abc import Sequence
from typing import Any

import numpy as np

from app.model.labels import Person
from app.model.skeleton import Skeleton
from app.ui.models import OwnerChoice

log = logging.getLogger(__name__)

#: Shown above the list when only distances could be used.
FALLBACK_NOTE = "suggestions need triage/analysis; people sorted by distance to the joint"


def rank_owners(people: Sequence[Person], person_id: int, joint: int, skeleton: Skeleton,
                maps: Any = None) -> tuple[list[OwnerChoice], str]:
    """The other people of the frame ranked as owners of joint ``joint`` of ``person_id``.

    Parameters
    ----------
    people
        The frame's people in tag order (tag ``n`` is ``people[n - 1]``).
    person_id, joint
        The selected joint and its current owner (left out of the ranking).
    skeleton
        The project's skeleton.
    maps
        The frame's network maps (``.pafs``, ``.stride``) or None.

    Returns
    -------
    (list of OwnerChoice, str)
        Best first, and a note for the panel ("" when the analysis ranked them).

    Notes
    -----
    The fallback score is None and the reason names the distance from the joint to the
    nearest labelled joint of each person (Euclidean, image pixels).

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> a, b, c = (Person.blank(i, 17) for i in (1, 2, 3))
    >>> a.keypoints[9] = (10, 10, 2); b.keypoints[5] = (60, 10, 2); c.keypoints[5] = (15, 12, 2)
    >>> ranked, _ = rank_owners([a, b, c], 1, 9, coco_body())
    >>> sorted(r.person_id for r in ranked)             # the owner, person 1, is left out
    [2, 3]
    >>> [c.person_id for c in _by_distance([b, c], {2: 2, 3: 3}, np.array([10.0, 10.0]))]
    [3, 2]
    """
    numbers = {p.id: n + 1 for n, p in enumerate(people)}
    owner = next((p for p in people if p.id == person_id), None)
    if owner is None or not np.isfinite(owner.keypoints[joint, :2]).all():
        return [], ""
    xy = owner.keypoints[joint, :2].astype(float)
    others = [p for p in people if p.id != person_id]
    try:
        from app.analysis.suggest import candidate_owners
    except ImportError:
        return _by_distance(others, numbers, xy), FALLBACK_NOTE
    ranked = candidate_owners({p.id: p.keypoints for p in people}, int(joint), xy, skeleton,
                              maps=maps, exclude=person_id)
    return [OwnerChoice(c.person_id, numbers[c.person_id], float(c.score), c.reason)
            for c in ranked if c.person_id in numbers and c.person_id != person_id], ""


def _by_distance(others: Sequence[Person], numbers: dict[int, int],
                 xy: np.ndarray) -> list[OwnerChoice]:
    rows = []
    for p in others:
        pts = p.keypoints[(p.keypoints[:, 2] > 0) & np.isfinite(p.keypoints[:, :2]).all(axis=1),
                          :2]
        d = float(np.hypot(*(pts - xy).T).min()) if len(pts) else np.inf
        reason = f"nearest joint {d:.0f} px away" if np.isfinite(d) else "no labelled joints"
        rows.append((d, OwnerChoice(p.id, numbers[p.id], None, reason)))
    rows.sort(key=lambda r: r[0])
    return [c for _, c in rows]
