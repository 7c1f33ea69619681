"""Who a selected joint could belong to: its current owner's fit and the other people, ranked.

The ranking is :func:`app.analysis.suggest.candidate_owners` (the model's part affinity field
when the frame has network maps, limb lengths against the person's torso otherwise). The
current owner is scored the same way, as if the joint were not yet theirs, so that its fit
can stand beside the candidates' and the Canvas can say plainly when nobody fits better.

*Fit* is a number in [0, 1], higher is better: with maps, the mean line integral of the
model's field along the limbs that would join the joint to the person (Cao et al., CVPR 2017,
Sec. 2.4); without, ``exp(-4 * c)`` of the mean amount ``c`` by which those limbs are longer
than the person's torso allows. A person who already has this joint would take it in a swap.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from app.analysis.suggest import candidate_owners
from app.model.labels import Person
from app.model.naming import Names
from app.model.skeleton import Skeleton

#: Explains "fit" where it is shown.
FIT_MEANING = ("fit: how well the joint would attach to the person, 0 to 1 (the model's "
               "field along the limbs joining it, or without maps the limb lengths against "
               "the person's torso)")

#: A candidate must beat the current owner's fit by this much to count as fitting better
#: (the scores are rough; a hair's difference is no reason to move a joint).
BETTER_BY = 0.05


@dataclass(frozen=True)
class OwnerChoice:
    """One possible owner of the selected joint: ``number`` is the person's tag, ``score``
    the fit in [0, 1], ``reason`` why; ``is_owner`` for the current owner, ``swap`` when the
    person already has this joint (giving it to them swaps the two)."""

    person_id: int
    number: int
    score: float
    reason: str
    is_owner: bool = False
    swap: bool = False


@dataclass(frozen=True)
class OwnerRanking:
    """The selected joint's current owner and the other people, best first.

    ``verdict`` is one sentence for the annotator: who fits better, or that nobody does.
    """

    joint: int
    owner: OwnerChoice | None
    candidates: tuple[OwnerChoice, ...] = ()
    verdict: str = ""
    better: tuple[int, ...] = field(default=())

    @property
    def best(self) -> OwnerChoice | None:
        """The top candidate (None when there are no other people)."""
        return self.candidates[0] if self.candidates else None


def rank_owners(people: Sequence[Person], person_id: int, joint: int, skeleton: Skeleton,
                maps: Any = None) -> OwnerRanking:
    """Rank the frame's people as owners of joint ``joint`` of person ``person_id``.

    Parameters
    ----------
    people
        The frame's people in tag order (tag ``n`` is ``people[n - 1]``).
    person_id, joint
        The selected joint and its current owner.
    skeleton
        The project's skeleton.
    maps
        The frame's network maps (``.pafs``, ``.stride``) or None.

    Returns
    -------
    OwnerRanking
        Empty when the joint has no position.

    Examples
    --------
    Synthetic people: person 1 holds a left wrist that sits at person 2's left elbow.

    >>> from app.model.skeleton import coco_body
    >>> sk = coco_body()
    >>> def body(x0):
    ...     p = Person.blank(int(x0), 17)
    ...     p.keypoints[[5, 6, 11, 12]] = [[x0, 100, 2], [x0 - 26, 100, 2], [x0, 129, 2],
    ...                                    [x0 - 19, 129, 2]]
    ...     p.keypoints[7] = (x0 + 5, 118, 2)
    ...     return p
    >>> a, b = body(100.0), body(300.0)
    >>> a.keypoints[9] = (308.0, 132.0, 2)
    >>> r = rank_owners([a, b], 100, 9, sk)
    >>> r.owner.number, r.best.number, r.best.score > r.owner.score
    (1, 2, True)
    >>> r.verdict
    'person 2 fits better than the owner, person 1'
    """
    names = Names.of_frame(skeleton, [p.id for p in people])
    owner = next((p for p in people if p.id == person_id), None)
    if owner is None or not np.isfinite(owner.keypoints[joint, :2]).all():
        return OwnerRanking(int(joint), None)
    xy = owner.keypoints[joint, :2].astype(float)
    # The owner is judged as if the joint were not theirs yet, so no swap discount applies.
    mine = owner.keypoints.copy()
    mine[joint, 2] = 0
    arrays = {p.id: (mine if p.id == person_id else p.keypoints) for p in people}
    ranked = candidate_owners(arrays, int(joint), xy, skeleton, maps=maps)
    own, others = None, []
    for c in ranked:
        tag = names.tag(c.person_id)
        if tag is None:
            continue
        if c.person_id == person_id:
            own = OwnerChoice(c.person_id, tag, float(c.score), c.reason, is_owner=True)
        else:
            has = bool(arrays[c.person_id][joint, 2] > 0)
            others.append(OwnerChoice(c.person_id, tag, float(c.score), c.reason, swap=has))
    base = own.score if own is not None else 0.0
    better = tuple(c.person_id for c in others if c.score > base + BETTER_BY)
    who = names.person(person_id)
    if not others:
        verdict = f"nobody else in the frame could take it from {who}"
    elif not better:
        verdict = f"nobody fits better than the owner, {who}"
    else:
        top = others[0]
        verdict = f"{names.person(top.person_id)} fits better than the owner, {who}"
    return OwnerRanking(int(joint), own, tuple(others), verdict, better)


def swap_warning(people: Sequence[Person], joints: Sequence[tuple[int, int]], target: int,
                 skeleton: Skeleton) -> str:
    """What a give to ``target`` would swap, said before it is done ("" when nothing would).

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> a, b = Person.blank(4, 17), Person.blank(9, 17)
    >>> a.keypoints[9] = (10, 10, 2); b.keypoints[9] = (50, 10, 2)
    >>> swap_warning([a, b], [(4, 9)], 9, coco_body())
    "person 2 already has a left wrist: giving swaps it with person 1's"
    """
    names = Names.of_frame(skeleton, [p.id for p in people])
    receiver = next((p for p in people if p.id == target), None)
    if receiver is None:
        return ""
    swapped = [(p, j) for p, j in joints if p != target and receiver.keypoints[j, 2] > 0]
    if not swapped:
        return ""
    parts = names.joints([j for _, j in swapped])
    givers = sorted({p for p, _ in swapped})
    whose = " and ".join(f"{names.person(p)}'s" for p in givers)
    article = "a " if len(swapped) == 1 else ""
    return f"{names.person(target)} already has {article}{parts}: giving swaps it with {whose}"
