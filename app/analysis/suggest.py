"""Owner suggestions: for one joint, which person of the frame it most likely belongs to.

With the model's part affinity fields the evidence is the line integral ``E`` of Cao et al.
(CVPR 2017, Sec. 2.4) along every limb that would join the joint to a labelled joint of the
candidate person. Without maps it is geometric: how the implied limb lengths compare with what
the candidate's own torso allows (see :mod:`app.analysis.anthropometry`).
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any

import numpy as np

from app.analysis.anthropometry import limb_fractions, person_scale
from app.analysis.association import limb_scores
from app.model.skeleton import Skeleton

#: A limb up to this many times its expected length costs nothing (projection shortens limbs,
#: people differ by about 10 %, and the scale estimate itself is rough).
SLACK = 1.15


@dataclass(frozen=True)
class Candidate:
    """One possible owner: ``score`` in [0, 1], higher is better, and why."""

    person_id: int
    score: float
    reason: str


def candidate_owners(
    people: Mapping[int, Any],
    joint: int,
    xy: Any,
    skeleton: Skeleton,
    maps: Any = None,
    exclude: int | None = None,
) -> list[Candidate]:
    """Rank the people of a frame by how well a joint at ``xy`` would attach to each.

    Parameters
    ----------
    people
        Person id -> ``(K, 3)`` ``x, y, v`` in image pixels.
    joint
        Index of the joint type being placed.
    xy
        ``(2,)`` its position, image pixels.
    skeleton
        Gives the limbs touching ``joint``.
    maps
        Optional network maps with ``.pafs`` ``(L, 2, H, W)`` and ``.stride``.
    exclude
        A person id to leave out (e.g. the joint's current owner), or None.

    Returns
    -------
    list of Candidate
        Best first. People with no labelled neighbour of ``joint`` cannot be judged and come
        last with score 0.

    Notes
    -----
    With maps: for each limb ``c`` joining ``joint`` to a labelled joint ``o`` of the person,
    ``E_c`` from :func:`app.analysis.association.limb_scores` (10 samples, bilinear), oriented
    along the limb's field; the score is the mean of ``max(E_c, 0)`` over those limbs.

    Without maps: for each such limb, ``r = length / (fraction * scale)`` with the person's
    torso scale; the cost is ``max(r - SLACK, 0)`` (a limb can look shorter than it is, not
    longer), the score ``exp(-4 * mean cost)`` -- a limb half again as long as allowed costs a
    factor ``e^-1.4``. A person who already has this joint labelled would receive it in a swap;
    their score is multiplied by 0.8 so that an empty slot is preferred when the evidence ties.

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> sk = coco_body()
    >>> a = np.zeros((17, 3)); b = np.zeros((17, 3))
    >>> for kp, x0 in ((a, 100.0), (b, 300.0)):
    ...     kp[[5, 6, 11, 12], :] = [[x0, 100, 2], [x0 - 26, 100, 2], [x0, 129, 2],
    ...                              [x0 - 19, 129, 2]]
    ...     kp[7] = (x0 + 5, 118, 2)                       # left elbow
    >>> best = candidate_owners({1: a, 2: b}, 9, (308.0, 132.0), sk)   # a left wrist near b
    >>> [c.person_id for c in best]
    [2, 1]
    """
    point = np.asarray(xy, dtype=np.float64).reshape(2)
    limbs = skeleton.limb_array
    touching = [(c, int(b if a == joint else a), a == joint)
                for c, (a, b) in enumerate(limbs.tolist()) if joint in (a, b)]
    fractions = limb_fractions(skeleton)
    out = []
    for pid, value in people.items():
        if pid == exclude:
            continue
        kp = np.asarray(value, dtype=np.float64)
        usable = [(c, o, forward) for c, o, forward in touching if kp[o, 2] > 0]
        if not usable:
            out.append(Candidate(int(pid), 0.0, "no labelled joint next to this one"))
            continue
        names = [skeleton.joints[o].replace("_", " ") for _, o, _ in usable]
        if maps is not None:
            values = []
            for c, o, forward in usable:
                start, end = (point, kp[o, :2]) if forward else (kp[o, :2], point)
                mean, _ = limb_scores(maps.pafs[c], start[None], end[None], maps.stride)
                values.append(max(float(mean[0, 0]), 0.0))
            score = float(np.mean(values))
            reason = "field " + _listed(f"{v:.2f} to the {n}" for v, n in zip(values, names))
        else:
            scale = person_scale(kp, skeleton)
            costs, lengths = [], []
            for c, o, _ in usable:
                length = float(np.hypot(*(kp[o, :2] - point)))
                lengths.append(length)
                if np.isfinite(fractions[c]) and np.isfinite(scale) and scale > 0:
                    costs.append(max(length / (fractions[c] * scale) - SLACK, 0.0))
            if costs:
                score = float(np.exp(-4.0 * np.mean(costs)))
                worst = int(np.argmax(costs))
                reason = (f"the limb to the {names[worst]} would be {costs[worst] + SLACK:.1f}x "
                          "as long as the torso allows" if costs[worst] > 0 else
                          "limbs to the " + _listed(names) + " fit the torso")
            else:
                # No torso to compare against: the nearest neighbour joint decides.
                near = int(np.argmin(lengths))
                score = float(np.exp(-lengths[near] / 100.0))
                reason = f"{lengths[near]:.0f} px from the {names[near]} (no torso to compare)"
        if kp[joint, 2] > 0:
            score *= 0.8
            reason += " · swaps with its own"
        out.append(Candidate(int(pid), score, reason))
    out.sort(key=lambda c: (-c.score, c.person_id))
    return out


def _listed(words: Any) -> str:
    items = list(words)
    return items[0] if len(items) == 1 else ", ".join(items[:-1]) + " and " + items[-1]
