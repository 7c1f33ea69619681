"""Fixes: for each kind of problem triage sees, where it is and the correction to propose.

Each proposer looks at one frame (a :class:`FrameView`: the people, their scores, the maps and
what triage found) and returns :class:`Proposal` records: the kind, the person, the joints,
one sentence naming the person by tag and the joints by name, the evidence as numbers, a
*strength* in [0, 1] and the fix as a list of edit operations of :mod:`app.model.edits`
(empty when none can be proposed). :mod:`app.analysis.triage.findings` turns proposals into
findings with a calibrated confidence.

=================  =============================================  ============================
kind               the problem                                    the fix
=================  =============================================  ============================
``wrong-owner``    joints given to a neighbour                    give them to the owner the
                                                                  evidence supports (swapping
                                                                  with the receiver's), or
                                                                  unlabel them
``shared-spot``    one hand or foot labelled on two people        unlabel it on the person
                                                                  whose limb stretches to it
``invented``       a hidden joint placed at an invented spot      unlabel it
``hidden``         joints labelled visible that a nearer person   mark them occluded (their
                   hides                                          place is known)
``mirrored``       left and right swapped on the whole body       swap the person's sides
``crossed-sides``  one pair, arm or leg on the wrong side         swap those joints' sides
``duplicate``      one person found twice                         delete the weaker, keeping
                                                                  the joints only it has
``split``          one body cut in two                            merge the two
``phantom``        a person where there is no one                 delete it
``missing-joint``  an unused peak the field joins to a person     add the joint there
``missed-person``  someone made of unused peaks                   a new person
=================  =============================================  ============================

The measure that chose the thresholds (which labelled joints are right, against the demo's
true poses) and the figures are in :mod:`app.analysis.triage.calibration`.

References
----------
Z. Cao et al., "Realtime Multi-Person 2D Pose Estimation using Part Affinity Fields",
CVPR 2017, Sec. 2.4 (the line integral ``E`` and grouping). D. Hoiem, A. A. Efros, M. Hebert,
"Putting Objects in Perspective", CVPR 2006 (the floor: nearer people stand lower).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from functools import cached_property
from typing import Any

import numpy as np

from app.analysis.anthropometry import limb_fractions, person_scale, reach_matrix
from app.analysis.association import find_peaks, group_people
from app.analysis.kinds import KINDS as _KINDS
from app.analysis.triage.body import (
    body_scale,
    crossed_sides,
    feet_y,
    pair_index,
    stretched_limbs,
    upright_body,
)
from app.analysis.triage.combine import FrameTriage, Reason, ramp
from app.analysis.triage.crowd import (
    INVENTED_FROM,
    INVENTED_SURE,
    covers,
    ground_line,
    off_ground,
    stand_rows,
    typical_joint_score,
)
from app.analysis.triage.model_evidence import (
    FieldMemo,
    limb_support,
    typical_support,
    weak_limbs,
)
from app.model.edits import (
    DeletePerson,
    Edit,
    MergePeople,
    MoveJoint,
    NewPerson,
    ReassignJoint,
    SetVisibility,
    SwapSides,
)
from app.model.naming import Names, join_words
from app.model.skeleton import Skeleton
from app.wording import count

#: The kinds of finding, in the order they are proposed (and accepted) within a frame
#: (named in :mod:`app.analysis.kinds`, which the command line reads without importing this).
KINDS = _KINDS

#: Body evidence a hypothesis is judged by (triage's geometric and field checks, in log-odds).
_BODY_KINDS = ("stretched-limb", "short-legs", "tilted-torso", "off-ground", "crossed-sides",
               "weak-limb")
#: Wrong owner: a hypothesis must lower the people's summed body evidence by this much (log
#: odds: the labels become at least e^1.5 = 4.5 times as likely by triage's weights).
OWNER_GAIN = 1.5
#: Wrong owner: a hypothesis whose drop cannot reach this is not evaluated (``OWNER_GAIN``
#: less a margin wider than the rounding that orders hypotheses).
_HOPELESS = OWNER_GAIN - 1e-5
#: Wrong owner: unlabeling a joint rather than giving it away costs this much evidence per
#: joint (the prior that a labelled joint is right: most are).
UNLABEL_COST = 0.75
#: Wrong owner: a receiver's link to the chain may be this many times its expected length.
LINK_SLACK = 1.3
#: Duplicate: two people whose like joints scatter about one shift by less than
#: ``SHAPE_FROM`` of stature (sure at ``SHAPE_SURE``) are one body found twice; the farther
#: apart the two, the less sure (people of a crowd moving or standing alike look alike): the
#: shift counts fully up to ``NEAR_SURE`` of stature and not at all from ``DUPLICATE_FROM``,
#: a shoulder width (0.259 of stature, Drillis and Contini via Winter, from memory): two
#: bodies side by side stand at least that far apart, so alike at that shift they are two.
DUPLICATE_FROM, NEAR_SURE = 0.26, 0.2
SHAPE_FROM, SHAPE_SURE = 0.012, 0.004
#: Mirrored: the face's median score over the ears' and shoulders' counts from ``FACE_FROM``
#: and is sure at ``FACE_SURE``; the faintest of the ears and shoulders over the brightest
#: counts from ``BALANCE_FROM`` (below, a side is hidden, which explains a faint face) and is
#: sure at ``BALANCE_SURE`` (both sides show, as they do from behind).
FACE_FROM, FACE_SURE = 0.75, 0.55
BALANCE_FROM, BALANCE_SURE = 0.2, 0.45
#: Split: the union of two halves is one body when triage's body evidence against it falls
#: from ``SPLIT_FROM`` to ``SPLIT_SURE`` (log-odds).
SPLIT_FROM, SPLIT_SURE = 4.0, 0.5
#: Missing joint and missed person: a peak counts as used when a labelled joint of its type
#: lies within this fraction of the nearest person's stature.
USED_WITHIN = 0.04
#: Missing joint: a peak is joined to a person when the field along every limb to it reaches
#: this share of the frame's typical ``E`` of that limb, and its length fits.
JOIN_FROM, JOIN_SURE = 0.6, 1.0
#: Missing joint: a hidden joint's limbs often show no field (a covered limb) and its peak is
#: faint, so a faint peak whose limbs fit in length is offered without the field too: from
#: ``PEAK_FROM`` of the frame's typical labelled joint score (sure at ``PEAK_SURE``) to below
#: ``PEAK_TO``. The demo's noise peaks stay below a fifth of it; a bright peak the field does
#: not join is more often someone else's joint (about 4 in 10 right, against 8 in 10 for a
#: faint one, on the shipped demo, dance seed 1 and choir seed 1, looked at while choosing).
PEAK_FROM, PEAK_SURE, PEAK_TO = 0.25, 0.45, 0.6
#: Missing joint: a peak below this share of the frame's typical labelled joint score is the
#: maps' noise, whatever the field says (a field joins noise as readily as a joint: on the
#: shipped demo and dance and choir seeds 2-3, 70 % of the fixes helped with this floor,
#: 54 % without).
PEAK_FLOOR = 0.15
#: Missing joint: a faint peak offered without the field (a covered limb shows none) is not
#: offered when the field along a limb joining it runs the other way (its ``E`` below this,
#: in units of the frame's typical ``E`` of that limb): there the field is another limb's,
#: someone else's body crossing, not a hidden limb's. On the fit seeds (dance and choir 1-8,
#: 12 frames each, 3 December 2026) such fixes, applied alone, helped 0 of 19 (10 on the
#: dance, 9 on the choir), while those whose field was nil helped 58 of 63.
AGAINST_BELOW = 0.0
#: Invented spot: a field joining the spot to the person's neighbours from ``HELD_FROM`` of the
#: frame's typical ``E`` (fully at ``JOIN_SURE``) lowers the strength by up to ``HELD_WEIGHT``.
#: On the shipped demo and seeds 2 of both scenes, unlabelling such a spot helped 29-40 % of
#: the time on the dance (well joined) against 56 % (limbs too long to join); on the choir 40-70
#: % against 100 %.
HELD_FROM, HELD_WEIGHT = 0.3, 0.5
#: Invented spot: the joints whose hidden spot is most often a guess (by name); a wrist's
#: strength (``PARTLY_PARTS``) is weighed by ``PARTLY_WEIGHT``, and the other joints (the
#: face, shoulders, elbows, hips) are not proposed: inside a nearer body they are often only
#: partly covered, and the model's spot there is right more often than not. On dance seeds 5-7
#: and choir seeds 5-6 (12 frames each), unlabelling a knee or ankle helped 68 % (dance, 41
#: fixes) and 88 % (choir, 388) of the time, an arm 16 % and 66 % (25, 74), a hip 7 % and 17 %
#: (28, 6), a head 50 % and 0 % (8, 3). On the fit seeds (dance and choir 1-8, 12 frames each,
#: 3 December 2026), of the fixes proposed before this gate, unlabelling a knee or an ankle
#: helped 55 % on the dance (105 fixes) and 91 % on the choir (1,598), a wrist 33 % and 84 %
#: (45, 137), an elbow 18 % and 31 % (22, 70), a shoulder 25 % and 13 % (16, 23), a hip 17 %
#: and 12 % (42, 26), a face joint 17 % and 35 % (18, 17): below a half on both scenes.
GUESSED_PARTS = ("knee", "ankle")
PARTLY_PARTS = ("wrist",)
PARTLY_WEIGHT = 0.5
#: Missed person: at least this many unused parts that group into one plausible body.
MISSED_PARTS = 5
#: Missed person: a fix (a new person) is proposed only for a body this complete (share of the
#: skeleton's joints). On the shipped demo and seeds 2, 3 and choir 2, the bodies of 5-11 parts
#: matched no true person at OKS 0.8 (0.06-0.63), those of 15-17 parts did or nearly (0.79-0.94);
#: their limbs' field, a fifth to a third of the frame's typical, told them apart no better.
MISSED_COMPLETE = 0.85


@dataclass(frozen=True)
class Proposal:
    """One problem at one place and the fix for it (before calibration).

    ``people`` are every person the finding is about (their labels are what a dismissal is
    keyed on); ``edits`` is empty when no fix can be proposed.
    """

    kind: str
    person: int | None
    joints: tuple[int, ...]
    text: str
    strength: float
    evidence: tuple[tuple[str, float], ...]
    edits: tuple[Edit, ...] = ()
    people: tuple[int, ...] = ()
    summary: str = ""
    #: For a proposal about no existing person (a missed person): what it would add.
    extra: tuple[tuple[float, float, int], ...] = ()


@dataclass
class FrameView:
    """One frame as the proposers see it: labels, scores, maps and triage's verdict.

    Parameters
    ----------
    frame_id
        The frame's id (edits name it).
    people
        Person id -> ``(K, 3)`` ``x, y, v``, in the project's order (tags follow it).
    skeleton
        The project's skeleton.
    scores
        Person id -> ``(K,)`` model scores (NaN where none), or None.
    maps
        Network maps (``confidence_maps``, ``pafs``, ``stride``) or None.
    image_size
        ``(width, height)`` or None.
    triage
        The frame's :class:`~app.analysis.triage.combine.FrameTriage`.
    placed
        Person id -> joints a person placed or marked (not the model, not an import):
        :func:`invented_joints` proposes no unlabelling of those (their score is stale),
        and :func:`missing_joints` places none of them that a person unlabelled.
    """

    frame_id: int
    people: Mapping[int, np.ndarray]
    skeleton: Skeleton
    scores: Mapping[int, np.ndarray] | None
    maps: Any
    image_size: tuple[int, int] | None
    triage: FrameTriage
    placed: Mapping[int, frozenset[int]] = field(default_factory=dict)
    names: Names = field(init=False)
    _evidence: dict[tuple[int, bytes], float] = field(init=False, default_factory=dict)

    def __post_init__(self) -> None:
        self.people = {int(p): np.asarray(kp, dtype=np.float64) for p, kp in self.people.items()}
        if self.maps is not None and not isinstance(self.maps, FieldMemo):
            self.maps = FieldMemo(self.maps)
        if self.scores is not None:
            self.scores = {int(p): np.asarray(s, dtype=np.float64)
                           for p, s in self.scores.items()}
        self.names = Names.of_frame(self.skeleton, self.people)

    # -- per frame, computed once
    @cached_property
    def fractions(self) -> np.ndarray:
        return limb_fractions(self.skeleton)

    @cached_property
    def reach(self) -> np.ndarray:
        return reach_matrix(self.skeleton)

    @cached_property
    def present(self) -> list[int]:
        return [p for p, kp in self.people.items() if (kp[:, 2] > 0).any()]

    @cached_property
    def torso(self) -> dict[int, float]:
        return {p: person_scale(self.people[p], self.skeleton) for p in self.present}

    @cached_property
    def stature(self) -> dict[int, float]:
        return {p: body_scale(self.people[p], self.skeleton, self.fractions)
                for p in self.present}

    @cached_property
    def line(self) -> tuple[float, float] | None:
        feet = np.array([feet_y(self.people[p], self.skeleton) for p in self.present])
        return ground_line(feet, np.array([self.torso[p] for p in self.present]))

    @cached_property
    def typical(self) -> np.ndarray | None:
        if self.maps is None or not self.present:
            return None
        support = limb_support(np.stack([self.people[p] for p in self.present]),
                               self.skeleton, self.maps)
        return typical_support(support)

    @cached_property
    def reasons(self) -> dict[int, list[Reason]]:
        out: dict[int, list[Reason]] = {}
        for r in self.triage.reasons:
            if r.person is not None:
                out.setdefault(r.person, []).append(r)
        return out

    @cached_property
    def typical_score(self) -> float:
        """The frame's median score of a labelled joint (NaN without scores)."""
        return typical_joint_score({p: self.people[p] for p in self.present}, self.scores)

    @cached_property
    def depth(self) -> dict[int, float]:
        """Where each person stands: the image row of their feet
        (:func:`~app.analysis.triage.crowd.stand_rows`); lower in the image (larger) is
        nearer the camera, NaN when it cannot be told."""
        return stand_rows({p: self.people[p] for p in self.present}, self.skeleton,
                          self.torso, self.line)

    @cached_property
    def covered(self) -> dict[int, list[tuple[int, int]]]:
        """Joints a nearer person hides (:func:`~app.analysis.triage.crowd.covers`)."""
        return covers({p: self.people[p] for p in self.present}, self.skeleton,
                      {p: self.scale(p) for p in self.present}, self.depth)

    @cached_property
    def chains(self) -> list[tuple[int, ...]]:
        return body_chains(self.skeleton)

    def scale(self, pid: int) -> float:
        """The person's stature: from the torso, else from the longest limb."""
        s = self.torso.get(pid, float("nan"))
        return s if np.isfinite(s) else self.stature.get(pid, float("nan"))

    def body_evidence(self, pid: int, kp: np.ndarray) -> float:
        """Triage's body evidence against labels ``kp`` of person ``pid``: the summed
        log-odds, each kind once at its strongest, over :data:`_BODY_KINDS`."""
        key = (pid, kp.tobytes())
        known = self._evidence.get(key)
        if known is None:
            known = self._evidence[key] = self._body_evidence(pid, kp)
        return known

    def _body_evidence(self, pid: int, kp: np.ndarray) -> float:
        sk = self.skeleton
        on = kp[:, 2] > 0
        if not on.any():
            return 0.0
        scale = person_scale(kp, sk)
        reasons = stretched_limbs(pid, kp, sk, scale, self.reach)
        reasons += upright_body(pid, kp, sk, scale)
        reasons += off_ground(pid, kp, sk, scale, self.line)
        reasons += crossed_sides(pid, kp, sk, scale, self.maps)
        # Weighed as triage weighed the frame (its grouping's weight set). A weak limb counts
        # where it weighs (WEIGHTS["weak-limb"] is 0.5 since the refit of
        # app.analysis.triage.combine): its line integrals are most of this function's cost,
        # kept down by the view's FieldMemo (each limb's E at the same spots is asked once)
        # and by the cache above; a weight of zero skips them.
        weights = self.triage.weights
        if self.typical is not None and weights.evidence("weak-limb", 1.0) != 0.0:
            support = limb_support(kp[None], sk, self.maps)[0]
            reasons += weak_limbs(pid, kp, sk, support, self.typical)
        best: dict[str, float] = {}
        for r in reasons:
            if r.kind in _BODY_KINDS:
                best[r.kind] = max(best.get(r.kind, 0.0), weights.evidence(r.kind, r.strength))
        return float(sum(best.values()))


def body_chains(skeleton: Skeleton) -> list[tuple[int, ...]]:
    """The parts a body's labels can be wrong by as a whole: each joint with everything it
    carries away from the torso, and the like parts of both sides together.

    Parameters
    ----------
    skeleton
        The project's skeleton; its torso is its shoulders and hips (without them, its first
        joint).

    Returns
    -------
    list of tuple of int
        Sorted joint tuples, distinct.

    Notes
    -----
    ``carried(S)``: the joints ``S`` and those that lose their path to the torso when ``S``
    is removed from the limb graph (the elbow carries the wrist; the left hip its knee and
    ankle). The chains are ``carried({j})`` of every joint, and for every left-right pair
    the union of the two sides' chains (both legs from the hips: a lower body given to the
    wrong torso) and, for a pair outside the torso, ``carried`` of the pair (both ears carry
    the face: a head given to the wrong body). Common practice, no source.

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> sk = coco_body()
    >>> chains = body_chains(sk)
    >>> (7, 9) in chains, (11, 12, 13, 14, 15, 16) in chains, (0, 1, 2, 3, 4) in chains
    (True, True, True)
    """
    k = skeleton.num_joints
    adjacency: list[set[int]] = [set() for _ in range(k)]
    for a, b in skeleton.limbs:
        adjacency[a].add(b)
        adjacency[b].add(a)
    torso = {j for pair in pair_index(skeleton, "shoulder", "hip") for j in pair} or {0}

    def carried(removed: set[int]) -> tuple[int, ...]:
        """``removed`` and the joints that lose their path to the torso without it."""
        seen = {t for t in torso if t not in removed}
        todo = list(seen)
        while todo:
            j = todo.pop()
            for n in adjacency[j]:
                if n not in removed and n not in seen:
                    seen.add(n)
                    todo.append(n)
        return tuple(sorted(set(range(k)) - seen))

    chains = {carried({j}) for j in range(k)}
    for a, b in skeleton.flip_pairs:
        chains.add(tuple(sorted(set(carried({a})) | set(carried({b})))))
        if a not in torso:
            chains.add(carried({a, b}))
    return sorted(chains, key=lambda c: (len(c), c))


# ---------------------------------------------------------------------- whole people

def _mean_score(view: FrameView, pid: int, joints: np.ndarray) -> float:
    if view.scores is None or pid not in view.scores:
        return float("nan")
    values = view.scores[pid][joints]
    values = values[np.isfinite(values)]
    return float(values.mean()) if values.size else float("nan")


def duplicates(view: FrameView) -> list[Proposal]:
    """People found twice: two people of one shape at a small offset; the weaker is the copy.

    Notes
    -----
    For two people with at least three joint types labelled in both, ``d_j`` is the offset of
    their joint ``j`` and ``shift`` the median offset. Two bodies of a crowd that stand close
    differ in pose and size, so their offsets scatter; a network's second response to one body
    repeats its shape, and its size, at one shift. ``residual``: the median distance of the
    ``d_j`` from ``shift``, over the smaller stature; ``near``: the median ``|d_j|`` over the
    smaller stature (a copy is as large as its body, so a torso inflated by a wrong joint must
    not make its neighbours look near). Strength: ``residual`` ramped from ``SHAPE_FROM``
    (0.012) to ``SHAPE_SURE`` (0.004; a network's jitter on a joint is about 1 % of stature),
    times ``near`` ramped from ``DUPLICATE_FROM`` (0.26, a shoulder width: neighbours side by
    side stand at least that far apart) to ``NEAR_SURE`` (0.2): far apart, two people of a crowd
    that moves or stands alike look alike. The copy is the one with fewer labelled joints (the
    other carries more of the body); of two as complete, the one the model scored lower on the
    shared joints. Fix: give the keeper the joints only the copy has, carried over by the shift
    (where they fit the keeper's body), and delete the copy. Common practice, no source.
    """
    out = []
    ids = view.present
    for i, p in enumerate(ids):
        for q in ids[i + 1:]:
            a, b = view.people[p], view.people[q]
            both = (a[:, 2] > 0) & (b[:, 2] > 0)
            if both.sum() < 3:
                continue
            scales = [s for s in (view.scale(p), view.scale(q)) if np.isfinite(s)]
            if not scales:
                continue
            offsets = a[both, :2] - b[both, :2]
            # A copy repeats its body's size: measured against the smaller body, a torso that
            # a wrong joint inflates does not make everyone round it look near and alike.
            near = float(np.median(np.hypot(*offsets.T))) / min(scales)
            if near >= DUPLICATE_FROM:
                continue
            shift = np.median(offsets, axis=0)
            residual = float(np.median(np.hypot(*(offsets - shift).T))) / min(scales)
            strength = ramp(residual, SHAPE_FROM, SHAPE_SURE) * \
                ramp(near, DUPLICATE_FROM, NEAR_SURE)
            if strength <= 0:
                continue
            shared = np.flatnonzero(both)
            sp, sq = _mean_score(view, p, shared), _mean_score(view, q, shared)
            np_, nq = int((a[:, 2] > 0).sum()), int((b[:, 2] > 0).sum())
            if np_ != nq:
                copy, keeper = (q, p) if nq < np_ else (p, q)
            else:
                copy, keeper = (p, q) if np.isfinite(sp) and np.isfinite(sq) and sp < sq \
                    else (q, p)
            gap = abs(sp - sq) if np.isfinite(sp) and np.isfinite(sq) else 0.0
            carry = shift if keeper == p else -shift
            kept = view.people[keeper].copy()
            edits: list[Edit] = []
            given = []
            for j in np.flatnonzero((view.people[copy][:, 2] > 0) & (kept[:, 2] <= 0)).tolist():
                trial = kept.copy()
                x, y, v = view.people[copy][j]
                trial[j] = (x + carry[0], y + carry[1], v)
                if not _stretches(view, keeper, trial, j):
                    kept = trial
                    given.append(j)
                    edits.append(MoveJoint(view.frame_id, keeper, j, float(trial[j, 0]),
                                           float(trial[j, 1])))
                    if v != 2:
                        edits.append(SetVisibility(view.frame_id, keeper, j, int(v)))
            edits.append(DeletePerson(view.frame_id, copy))
            n = view.names
            text = (f"{n.person(copy)} is {n.person(keeper)} found twice: the same pose "
                    f"shifted by {near:.2f} of a body height (every joint within "
                    f"{residual:.3f}), with fewer joints or lower scores")
            summary = f"delete {n.person(copy)}" + (
                f", giving {n.person(keeper)} its {n.joints(given)}" if given else "")
            out.append(Proposal("duplicate", copy, tuple(int(j) for j in shared), text,
                                strength, (("residual", residual), ("offset", near),
                                           ("score_gap", gap)),
                                tuple(edits), (copy, keeper), summary))
    return out


def _stretches(view: FrameView, pid: int, kp: np.ndarray, joint: int) -> bool:
    """Whether joint ``joint`` of ``kp`` stretches a limb or chain of the body."""
    scale = view.scale(pid)
    found = stretched_limbs(pid, kp, view.skeleton, scale, view.reach)
    return any(joint in r.joints for r in found)


def splits(view: FrameView) -> list[Proposal]:
    """One body cut in two: triage's ``split`` pairs, merged into the larger part.

    Notes
    -----
    Triage names both halves of a pair that share no joint type, join at a plausible limb
    length and together stretch no limb (:func:`app.analysis.triage.crowd.duplicates_and_splits`).
    Whether the two make one body is judged on the union: triage's body evidence against it
    (:meth:`FrameView.body_evidence`: its proportions, poise, floor and field support).
    Strength: that evidence ramped from ``SPLIT_FROM`` (4, in log-odds) down to
    ``SPLIT_SURE`` (0.5). Fix: merge the smaller half into the larger.
    """
    out = []
    pairs: set[tuple[int, int]] = set()
    for r in view.triage.reasons:
        if r.kind == "split" and r.person is not None and r.other is not None:
            a, b = sorted((r.person, r.other))
            pairs.add((a, b))
    for p, q in sorted(pairs):
        first, second = view.people[p], view.people[q]
        keep, gone = (p, q) if (first[:, 2] > 0).sum() >= (second[:, 2] > 0).sum() else (q, p)
        union = np.where((view.people[gone][:, 2] > 0)[:, None], view.people[gone],
                         view.people[keep])
        evidence = view.body_evidence(keep, union)
        strength = ramp(evidence, SPLIT_FROM, SPLIT_SURE)
        n = view.names
        joints = tuple(np.flatnonzero(view.people[gone][:, 2] > 0).tolist())
        text = (f"{n.person(gone)} looks like the rest of {n.person(keep)}'s body: they share "
                f"no joint and, joined, make one plausible body (triage's evidence against "
                f"it: {evidence:.1f})")
        out.append(Proposal("split", gone, joints, text, strength,
                            (("union_evidence", evidence),),
                            (MergePeople(view.frame_id, keep, gone),), (keep, gone),
                            f"merge {n.person(gone)} into {n.person(keep)}"))
    return out


def phantoms(view: FrameView) -> list[Proposal]:
    """A person where there is no body: a few faint parts that fit no body, and no split.

    Notes
    -----
    A phantom has fewer than half the skeleton's joints labelled, scores below the frame's
    typical joint, no torso or a torso that stretches its own limbs at full strength, and is
    not half of a split. Strength: how far its mean score lies below the frame's typical
    score, ramped from 0 to 0.3. Fix: delete it.
    """
    out = []
    in_split = {r.person for r in view.triage.reasons if r.kind == "split"}
    for p in view.present:
        kp = view.people[p]
        on = kp[:, 2] > 0
        if p in in_split or on.sum() * 2 >= view.skeleton.num_joints:
            continue
        reasons = view.reasons.get(p, [])
        body_wrong = any(r.kind in ("stretched-limb", "off-ground") and r.strength >= 1.0
                         for r in reasons)
        if np.isfinite(view.torso.get(p, np.nan)) and not body_wrong:
            continue
        mean = _mean_score(view, p, np.flatnonzero(on))
        gap = view.typical_score - mean if np.isfinite(mean) else 0.0
        strength = ramp(gap, 0.0, 0.3)
        if strength <= 0:
            continue
        n = view.names
        text = (f"{n.person(p)} has {count(int(on.sum()), 'faint joint')} ({mean:.2f} against the "
                f"frame's {view.typical_score:.2f}) that make no body")
        out.append(Proposal("phantom", p, tuple(np.flatnonzero(on).tolist()), text, strength,
                            (("score_gap", gap), ("joints", float(on.sum()))),
                            (DeletePerson(view.frame_id, p),), (p,), f"delete {n.person(p)}"))
    return out


# ---------------------------------------------------------------------- sides

def mirrored_people(view: FrameView,
                    covered: dict[int, list[tuple[int, int]]] | None = None) -> list[Proposal]:
    """A body labelled as facing the camera whose face the model hardly sees: swap sides.

    Notes
    -----
    Triage's ``mirrored`` check (:func:`app.analysis.triage.body.mirrored`) finds a body
    labelled as facing the camera whose face scores low against its ears and shoulders. The
    fix weighs two things. Seen from behind the face is hidden as a whole: ``q``, the median
    score of the face joints (nose, eyes) over the mean of the ears' and shoulders', ramped
    from ``FACE_FROM`` (0.75) to ``FACE_SURE`` (0.55). Seen from behind both ears and both
    shoulders show: ``balance``, the faintest of the four over the brightest, ramped from
    ``BALANCE_FROM`` (0.2) to ``BALANCE_SURE`` (0.45); a side far fainter than the other is
    hidden (by a neighbour, or a turn), which explains a faint face as well. A person who
    stands behind someone nearer (joints inside the nearer one's trunk,
    :func:`covered_joints`) may owe a faint face to the people in front: ``exposed``, the
    number of such joints ramped from 2 down to 0. Strength: the product of the three ramps.
    Fix: swap the person's left and right joints. Common practice, no source. A joint a
    person placed is scored where it is now (:func:`scores_now`).
    """
    out: list[Proposal] = []
    if view.scores is None:
        return out
    sk = view.skeleton
    idx = {name: i for i, name in enumerate(sk.joints)}
    face = [idx[name] for name in ("nose", "left_eye", "right_eye") if name in idx]
    sides = [j for pair in pair_index(sk, "ear", "shoulder") for j in pair]
    covered = covered if covered is not None else covered_joints(view)
    for p in view.present:
        found = [r for r in view.reasons.get(p, []) if r.kind == "mirrored"]
        mine = scores_now(view, p)
        if not found or mine is None:
            continue
        on = (view.people[p][:, 2] > 0) & np.isfinite(mine)
        seen = [j for j in face if on[j]]
        rest = [j for j in sides if on[j]]
        if not seen or not rest or float(np.max(mine[rest])) <= 0:
            continue
        q = float(np.median(mine[seen])) / float(np.mean(mine[rest]))
        balance = float(np.min(mine[rest])) / float(np.max(mine[rest])) \
            if len(rest) == len(sides) else 0.0
        exposed = ramp(len(covered.get(p, [])), 2.0, 0.0)
        strength = ramp(q, FACE_FROM, FACE_SURE) * ramp(balance, BALANCE_FROM, BALANCE_SURE) \
            * exposed
        n = view.names
        text = (f"{n.person(p)} is labelled as facing the camera, but the model scores its "
                f"face only {q:.2f} times as high as its ears and shoulders, which it sees alike "
                "on both sides: seen from behind, with left and right swapped")
        out.append(Proposal("mirrored", p, found[0].joints, text, strength,
                            (("face_ratio", q), ("side_balance", balance),
                             ("covered_joints", float(len(covered.get(p, []))))),
                            (SwapSides(view.frame_id, p),), (p,),
                            f"swap the left and right joints of {n.person(p)}"))
    return out


def crossed(view: FrameView) -> list[Proposal]:
    """One pair, arm or leg on the wrong side: swap the sides of just those joints.

    Notes
    -----
    For each of triage's ``crossed-sides`` reasons (a left-right pair), the candidate swaps
    are the pair alone and the pair with all it carries away from the torso (the hips with the
    knees and ankles); the one that leaves the least body evidence is proposed when it removes
    the crossing. Strength: 1 minus the body evidence left, over triage's weight of
    ``crossed-sides``.
    """
    out = []
    sk = view.skeleton
    flip = sk.flip_index
    for p in view.present:
        kp = view.people[p]
        done: set[int] = set()
        for r in view.reasons.get(p, []):
            if r.kind != "crossed-sides" or len(r.joints) != 2 or set(r.joints) & done:
                continue
            a, b = r.joints
            options: list[tuple[int, ...]] = [(a,)]
            for chain in view.chains:
                if a in chain and flip[a] == b and all(
                        (j in chain) == (flip[j] in chain) or flip[j] == j for j in chain):
                    options.append(tuple(j for j in chain if flip[j] != j
                                         and view.skeleton.sides[j].value == "left"))
            before = view.body_evidence(p, kp)
            best = None
            for lefts in options:
                pairs = [(int(j), int(flip[j])) for j in lefts if flip[j] != j]
                trial = kp.copy()
                for left, right in pairs:
                    trial[[left, right]] = trial[[right, left]]
                after = view.body_evidence(p, trial)
                if best is None or after < best[0]:
                    best = (after, pairs, trial)
            if best is None or best[0] >= before:
                continue
            after, pairs, trial = best
            if any(set(x.joints) & {a, b} for x in crossed_sides(
                    p, trial, view.skeleton, view.scale(p), view.maps)):
                continue
            joints = tuple(sorted(j for pair in pairs for j in pair))
            done.update(joints)
            n = view.names
            # The drop in body evidence over the weight of one crossed pair (at least 0.5, should
            # a fit weigh crossed sides at nothing).
            strength = float(np.clip((before - after) / max(
                view.triage.weights.evidence("crossed-sides", 1.0), 0.5),
                                     0.0, 1.0))
            parts = join_words([_part(sk, j) for j, _ in pairs])
            text = (f"{n.person(p)}'s left and right {parts} are the other way round from the "
                    "rest of the body")
            out.append(Proposal("crossed-sides", p, joints, text, strength,
                                (("evidence_before", before), ("evidence_after", after)),
                                tuple(_swap_edits(view.frame_id, p, kp, pairs)), (p,),
                                f"swap {n.person(p)}'s left and right {parts}"))
    return out


def _part(skeleton: Skeleton, joint: int) -> str:
    """``left_knee`` -> ``knee``: the name of a sided joint without its side."""
    name = skeleton.joints[joint]
    for side in ("left_", "right_"):
        if name.startswith(side):
            return name[len(side):].replace("_", " ")
    return name.replace("_", " ")


def _swap_edits(frame_id: int, pid: int, kp: np.ndarray,
                pairs: Sequence[tuple[int, int]]) -> list[Edit]:
    """Edits that exchange the labels of each joint pair of one person."""
    edits: list[Edit] = []
    for a, b in pairs:
        for to, src in ((a, b), (b, a)):
            v = int(kp[src, 2])
            if v > 0:
                edits.append(MoveJoint(frame_id, pid, to, float(kp[src, 0]), float(kp[src, 1])))
                if v != 2:
                    edits.append(SetVisibility(frame_id, pid, to, v))
            elif kp[to, 2] > 0:
                edits.append(SetVisibility(frame_id, pid, to, 0))
    return edits


# ---------------------------------------------------------------------- joints

def _links(view: FrameView, chain: Sequence[int], pid: int, xy: np.ndarray) -> list[float]:
    """For each limb joining a joint of ``chain`` (at ``xy[j]``) to a labelled joint of
    person ``pid`` outside the chain, its length over the length the person's scale allows."""
    scale = view.scale(pid)
    kp = view.people[pid]
    out = []
    inside = set(chain)
    for c, (a, b) in enumerate(view.skeleton.limbs):
        for x, y in ((a, b), (b, a)):
            if x in inside and y not in inside and kp[y, 2] > 0 and np.isfinite(view.fractions[c]):
                length = float(np.hypot(*(xy[x] - kp[y, :2])))
                out.append(length / (view.fractions[c] * scale) if scale > 0 else np.inf)
    return out


def wrong_owners(view: FrameView, people: Sequence[int] | None = None) -> list[Proposal]:
    """Joints given to a neighbour: the chain of joints that belongs to someone else.

    Notes
    -----
    For each person triage flags with body evidence (a stretched limb, short legs, a tilted
    torso, feet off the floor, weak field support), every chain of labelled joints
    (:func:`body_chains`) is tried elsewhere: given to each other person it links to at a
    plausible length (at most ``LINK_SLACK`` times the expected limb, on that person's scale;
    a receiver that has those joints gives its own in exchange), or unlabeled. A hypothesis is
    judged by triage's body evidence of both people before and after
    (:meth:`FrameView.body_evidence`, log-odds), unlabeling costing ``UNLABEL_COST`` per
    joint. The best hypothesis that lowers the evidence by at least ``OWNER_GAIN`` is
    proposed; strength: that drop ramped from ``OWNER_GAIN`` to three times it. With maps
    the evidence includes the field's support of every limb (Cao et al.'s ``E``), without
    them geometry alone decides.
    """
    out = []
    candidates = people if people is not None else [
        p for p in view.present
        if any(r.kind in _BODY_KINDS or r.kind == "tangled" for r in view.reasons.get(p, []))]
    hypotheses: list[tuple[float, int, tuple[int, ...], int | None, float, float]] = []
    for p in candidates:
        kp = view.people[p]
        on = kp[:, 2] > 0
        base_p = view.body_evidence(p, kp)
        if base_p <= 0:
            continue
        named = {j for r in view.reasons.get(p, []) if r.kind in _BODY_KINDS for j in r.joints}
        for chain in view.chains:
            mine = tuple(j for j in chain if on[j])
            if not mine or len(mine) == on.sum() or not named & set(mine):
                continue
            # Evidence is never below 0, so a hypothesis whose evidence before (less the
            # cost of unlabeling) is under OWNER_GAIN cannot reach it: it is not evaluated
            # (it would be dropped below; the proposals are the same without it). The
            # margin keeps out only drops that also sort below every one that reaches it.
            if base_p - UNLABEL_COST * len(mine) >= _HOPELESS:
                without = kp.copy()
                without[list(mine), 2] = 0
                after = view.body_evidence(p, without)
                drop = base_p - after - UNLABEL_COST * len(mine)
                hypotheses.append((drop, p, mine, None, base_p, after))
            for q in view.present:
                if q == p:
                    continue
                links = _links(view, mine, q, kp[:, :2])
                if not links or max(links) > LINK_SLACK:
                    continue
                taker = view.people[q]
                before = base_p + view.body_evidence(q, taker)
                if before < _HOPELESS:
                    continue
                new_p, new_q = _exchange(kp, taker, chain)
                after_p = view.body_evidence(p, new_p)
                if before - after_p < _HOPELESS:
                    continue
                after = after_p + view.body_evidence(q, new_q)
                hypotheses.append((before - after, p, tuple(chain), q, before, after))
    # The best hypotheses of the frame that leave each other's people alone.
    # Best first; of hypotheses that explain the labels as well, the one that moves less.
    hypotheses.sort(key=lambda h: (-round(h[0], 6), len(h[2]), h[1], h[2],
                                   -1 if h[3] is None else h[3]))
    used: set[int] = set()
    n = view.names
    for drop, p, chain, receiver, before, after in hypotheses:
        if drop < OWNER_GAIN:
            break
        involved: tuple[int, ...] = (p,) if receiver is None else (p, receiver)
        if used & set(involved):
            continue
        used.update(involved)
        strength = ramp(drop, OWNER_GAIN, 3 * OWNER_GAIN)
        mine = tuple(j for j in chain if view.people[p][j, 2] > 0)
        joints = n.joints(mine)
        evidence: tuple[tuple[str, float], ...] = (
            ("evidence_before", before), ("evidence_after", after), ("evidence_drop", drop))
        if receiver is None:
            edits: list[Edit] = [SetVisibility(view.frame_id, p, j, 0) for j in mine]
            fit = "fits" if len(mine) == 1 else "fit"
            text = (f"{n.person(p)}'s {joints} {fit} no one's body here: without them, "
                    f"triage's evidence against {n.person(p)} falls from {before:.1f} to "
                    f"{after:.1f}")
            summary = f"mark {n.person(p)}'s {joints} unlabelled"
        else:
            q = receiver
            theirs = tuple(j for j in chain if view.people[q][j, 2] > 0)
            edits = [ReassignJoint(view.frame_id, p, j, q) for j in mine]
            edits += [ReassignJoint(view.frame_id, q, j, p) for j in theirs if j not in mine]
            field_clause = ""
            joined = _joining_field(view, chain, p, q)
            if joined is not None and joined[1] > joined[0]:
                evidence += (("field_own", joined[0]), ("field_receiver", joined[1]))
                field_clause = (f"; the model's field joins them to {n.person(q)} "
                                f"({joined[1]:.2f}) more than to {n.person(p)} "
                                f"({joined[0]:.2f})")
            belong = "belongs" if len(mine) == 1 else "belong"
            text = (f"{n.person(p)}'s {joints} {belong} to {n.person(q)}: given to "
                    f"{n.person(q)}, triage's evidence against the two bodies falls from "
                    f"{before:.1f} to {after:.1f}" + field_clause)
            if theirs and set(theirs) == set(mine):
                summary = f"exchange the {joints} of {n.person(p)} and {n.person(q)}"
            else:
                summary = f"give {n.person(p)}'s {joints} to {n.person(q)}" + (
                    f", taking {n.person(q)}'s {n.joints(theirs)} in exchange" if theirs
                    else "")
        out.append(Proposal("wrong-owner", p, mine, text, strength, evidence, tuple(edits),
                            involved, summary))
    return out


def _joining_field(view: FrameView, chain: Sequence[int], giver: int,
                   taker: int) -> tuple[float, float] | None:
    """Mean ``E`` of the limbs that join the giver's chain to the rest of the giver's body,
    and to the taker's body: ``(own, taker)``, None without maps or such limbs."""
    if view.maps is None:
        return None
    kp = view.people[giver]
    inside = set(chain)
    own: list[float] = []
    theirs: list[float] = []
    for c, (a, b) in enumerate(view.skeleton.limbs):
        for x, y in ((a, b), (b, a)):
            if x not in inside or y in inside or kp[x, 2] <= 0:
                continue
            forward = x == a
            for body, values in ((kp, own), (view.people[taker], theirs)):
                if body[y, 2] > 0:
                    start, end = (kp[x, :2], body[y, :2]) if forward else (body[y, :2], kp[x, :2])
                    values.append(max(_e(view, c, start, end), 0.0))
    if not own or not theirs:
        return None
    return float(np.mean(own)), float(np.mean(theirs))


def _exchange(giver: np.ndarray, taker: np.ndarray,
              chain: Sequence[int]) -> tuple[np.ndarray, np.ndarray]:
    """Both people's labels once they have exchanged the joints of ``chain``."""
    new_giver, new_taker = giver.copy(), taker.copy()
    for j in chain:
        new_giver[j], new_taker[j] = taker[j], giver[j]
    return new_giver, new_taker


def covered_joints(view: FrameView) -> dict[int, list[tuple[int, int]]]:
    """Joints that a nearer person's body hides: person id -> ``[(joint, coverer), ...]``
    (:func:`app.analysis.triage.crowd.covers` on the frame's people and where they stand)."""
    return view.covered


def scores_now(view: FrameView, pid: int) -> np.ndarray | None:
    """The person's joint scores, each the model's word on the joint where it is now: a
    joint a person placed or marked (:attr:`FrameView.placed`) keeps the model's score of
    the spot it was moved from (:class:`MoveJoint` keeps it), so its score is read again
    from its confidence map at the map cell under it, as :func:`find_peaks` scores a peak
    (NaN without maps); the others' as labelled. None without scores.

    Examples
    --------
    >>> from types import SimpleNamespace
    >>> maps = SimpleNamespace(confidence_maps=np.zeros((2, 4, 4)), stride=2)
    >>> maps.confidence_maps[1, 2, 3] = 0.7          # cell (row 2, column 3): pixel (6.5, 4.5)
    >>> view = SimpleNamespace(scores={5: np.array([0.9, 0.2])}, maps=maps,
    ...                        people={5: np.array([[1.0, 1.0, 2], [6.4, 4.6, 2]])},
    ...                        placed={5: frozenset({1})})
    >>> scores_now(view, 5).tolist()
    [0.9, 0.7]
    """
    mine = view.scores.get(pid) if view.scores is not None else None
    placed = view.placed.get(pid, ())
    if mine is None or not placed:
        return mine
    out = np.array(mine, dtype=np.float64)
    maps = view.maps
    kp = view.people[pid]
    for j in placed:
        if maps is None or not np.isfinite(kp[j, :2]).all():
            out[j] = np.nan
            continue
        cm = maps.confidence_maps[j]
        s = maps.stride
        r = round((float(kp[j, 1]) - (s - 1) / 2) / s)
        c = round((float(kp[j, 0]) - (s - 1) / 2) / s)
        inside = 0 <= r < cm.shape[0] and 0 <= c < cm.shape[1]
        out[j] = float(cm[r, c]) if inside else 0.0
    return out


def invented_joints(view: FrameView,
                    covered: dict[int, list[tuple[int, int]]] | None = None) -> list[Proposal]:
    """Hidden joints at an invented spot: covered by a nearer person, yet scored as seen.

    Notes
    -----
    A joint a nearer person's trunk hides (:func:`covered_joints`) cannot be seen; a network
    that still scores it as confidently as the frame's typical labelled joint has guessed
    where it is. ``ratio = score / typical score``, ramped from ``INVENTED_FROM`` (0.85) to
    ``INVENTED_SURE`` (1.1). A spot the model's field joins to the person's labelled
    neighbours as a typical limb is joined (the least share of the frame's typical ``E``,
    ramped from ``HELD_FROM`` to ``JOIN_SURE``) is less likely a guess: the nearer body may
    hide only part of the limb. And a knee or an ankle behind someone nearer is most often a
    guess (the whole leg is behind their legs or trunk), a wrist less often (it counts
    ``PARTLY_WEIGHT``, a half), while a hip, a shoulder, an elbow or a face joint inside a
    nearer body is often only partly covered and the model's spot there right more often
    than not: those are not proposed (:data:`GUESSED_PARTS` has the figures). Strength: the
    ratio's ramp, times ``1 - HELD_WEIGHT`` times the share's ramp, times that weight. Fix:
    mark it unlabeled (the place is a guess).
    """
    out: list[Proposal] = []
    if view.scores is None or not np.isfinite(view.typical_score):
        return out
    covered = covered if covered is not None else covered_joints(view)
    n = view.names
    for p, joints in covered.items():
        mine = view.scores.get(p)
        if mine is None:
            continue
        placed = view.placed.get(p, frozenset())
        for j, cover in joints:
            name = view.skeleton.joints[j]
            guessed = any(part in name for part in GUESSED_PARTS)
            if not np.isfinite(mine[j]) or j in placed or not (
                    guessed or any(part in name for part in PARTLY_PARTS)):
                continue
            ratio = float(mine[j]) / view.typical_score
            strength = ramp(ratio, INVENTED_FROM, INVENTED_SURE)
            if strength <= 0:
                continue
            evidence: tuple[tuple[str, float], ...] = (("score_ratio", ratio),)
            if view.maps is not None and view.typical is not None:
                kp = view.people[p]
                without = kp.copy()
                without[j, 2] = 0
                held = _join_share(view, p, j, kp[j, :2], without)
                if held is not None:
                    evidence += (("field_share", held),)
                    strength *= 1.0 - HELD_WEIGHT * ramp(held, HELD_FROM, JOIN_SURE)
            if not guessed:
                strength *= PARTLY_WEIGHT
            text = (f"{n.whose(p, j)} lies inside the body of {n.person(cover)}, who stands "
                    f"nearer, yet the model scores it {mine[j]:.2f}, as if seen: an invented "
                    "spot")
            out.append(Proposal("invented", p, (j,), text, strength, evidence,
                                (SetVisibility(view.frame_id, p, j, 0),), (p, cover),
                                f"mark {n.whose(p, j)} unlabelled"))
    return out


def hidden_joints(view: FrameView,
                  covered: dict[int, list[tuple[int, int]]] | None = None) -> list[Proposal]:
    """Joints labelled visible that a nearer person hides, where the model agrees they are
    hidden: mark them occluded (their place is known; COCO ``v = 1``).

    Notes
    -----
    The joints of :func:`covered_joints` labelled visible (``v = 2``) that the model scores
    below ``INVENTED_FROM`` of the frame's typical joint, one finding per person. Strength:
    the share of the person's covered joints that the model scores that low. A joint a
    person placed is scored where it is now (:func:`scores_now`).
    """
    out: list[Proposal] = []
    covered = covered if covered is not None else covered_joints(view)
    n = view.names
    for p, joints in covered.items():
        kp = view.people[p]
        mine = scores_now(view, p)
        faint = [(j, q) for j, q in joints if kp[j, 2] == 2 and (
            mine is None or not np.isfinite(view.typical_score) or not np.isfinite(mine[j])
            or mine[j] / view.typical_score < INVENTED_FROM)]
        if not faint:
            continue
        hidden = tuple(sorted(j for j, _ in faint))
        covers = sorted({q for _, q in faint})
        strength = len(faint) / len(joints)
        verb = "lies" if len(hidden) == 1 else "lie"
        stand = "stands" if len(covers) == 1 else "stand"
        text = (f"{n.person(p)}'s {n.joints(hidden)} {verb} inside the body of "
                f"{join_words([n.person(q) for q in covers])}, who {stand} nearer: hidden, "
                "not visible")
        out.append(Proposal("hidden", p, hidden, text, strength,
                            (("covered", float(len(joints))), ("faint", float(len(faint)))),
                            tuple(SetVisibility(view.frame_id, p, j, 1) for j in hidden),
                            (p, *covers), f"mark {n.person(p)}'s {n.joints(hidden)} occluded"))
    return out


# ---------------------------------------------------------------------- one spot, two labels

#: Shared spot: the parts of a limb that two people may be given at one spot (a hand or a
#: foot answered for both). Elbows are left out: on the dance's fit seeds two people's elbows
#: at one spot were nearly always both right (arms linked), and unlabelling the stretched
#: one helped 1 time in 21 even at strength 0.5 or more (on the choir 49 in 53); knees too
#: rarely share a spot to tell (3 pairs).
SPOT_PARTS = ("wrist", "ankle")
#: Shared spot: two people's labels of one part (either side) closer than this share of the
#: smaller one's stature lie on one spot.
SPOT_WITHIN = 0.03
#: Shared spot: the limb that reaches the spot counts as stretched from ``REACH_FROM`` of its
#: expected length on the person's stature, surely at ``REACH_SURE``. Within 30 % of it a
#: forearm is not told from a right one by its length (the stature is read from a torso that
#: turns and bends): on the dance's fit seeds, the 24 proposed fixes that unlabelled a right
#: wrist had forearms of 1.11-1.29 of their length, and every one from 1.68 on unlabelled a
#: wrong one; on the choir's, 9 in 10 from 1.0 on did.
REACH_FROM, REACH_SURE = 1.3, 1.8
#: Shared spot: a hand is shared with a neighbour within reach, who stands about as far from
#: the camera, so about as tall in the picture (Hoiem et al.: the image height of a person is
#: inversely proportional to their distance); the smaller stature over the larger counts
#: from ``ALIKE_FROM`` and fully at ``ALIKE_SURE``. On the dance's fit seeds, of the 27
#: proposed fixes that unlabelled a right wrist or ankle, 18 were of two people whose
#: statures differ by a third or more (a far dancer's hand meeting a near one's only in the
#: picture); of the 27 that unlabelled a wrong one, 5.
ALIKE_FROM, ALIKE_SURE = 0.65, 0.85
#: Shared spot: two people sharing this many spots or more are one body found twice, the
#: duplicate check's matter, not this one's.
SPOT_MOST = 3


def _reach(view: FrameView, pid: int, joint: int) -> float:
    """The longest of the limbs joining the person's ``joint`` to their other labelled
    joints, over its expected length on their stature (NaN when none can be told)."""
    kp = view.people[pid]
    scale = view.scale(pid)
    out = float("nan")
    for c, (a, b) in enumerate(view.skeleton.limbs):
        if joint not in (a, b) or not np.isfinite(view.fractions[c]) or not scale > 0:
            continue
        other = b if a == joint else a
        if kp[other, 2] <= 0:
            continue
        ratio = float(np.hypot(*(kp[joint, :2] - kp[other, :2]))) / (view.fractions[c] * scale)
        out = ratio if not np.isfinite(out) else max(out, ratio)
    return out


def shared_spots(view: FrameView) -> list[Proposal]:
    """One hand or foot labelled on two people at one spot: the one whose limb is stretched
    to reach it lets go of it.

    Notes
    -----
    Two people's wrists or ankles (either side; :data:`SPOT_PARTS`) within :data:`SPOT_WITHIN` of
    the smaller stature lie on one spot: two hands held (right on both), or one hand given
    to two people (the network answered a hidden hand at the neighbour's visible one, or the
    grouping gave one peak to both). The maps cannot tell whose it is (one peak, and the
    field joins it to both), but the bodies can: the person whose limb reaches the spot only
    by stretching past its expected length (:func:`_reach`, the limb's share of stature,
    :func:`app.analysis.anthropometry.limb_fractions`) is the borrower. On the fit seeds
    (dance and choir 1-8, 12 frames each, auto-labels; wrists and ankles within 0.03), of
    the pairs where one label was right and the other wrong, the more stretched one was the
    wrong one 326 times, the right one 85 times; held hands (both right) are common on the
    dance (268 of its 335 pairs, against 35 of the choir's 431) and are told, where they
    are, by neither limb being stretched. Strength: the borrower's stretch ramped from
    :data:`REACH_FROM` to :data:`REACH_SURE`, times how much more it is stretched than the
    keeper's (the ratio ramped from 1 to 1.5), times how alike the two statures are (the
    smaller over the larger ramped from :data:`ALIKE_FROM` to :data:`ALIKE_SURE`: people far
    apart in depth meet only in the picture); a pair of strength 0 (held hands, people at
    other depths) is no finding at all: named without a fix, such notes rode on the walk's
    cards and kept fixes that go together apart (the walk with tracks took 11 more presses
    on the shipped demo). Two people sharing :data:`SPOT_MOST` spots or
    more are left to the duplicate check. Fix: unlabel the borrower's joint, unless a person
    placed or marked it (then the finding has no fix). Our own rule; the numbers are the
    demo's, looked at while choosing.
    """
    out: list[Proposal] = []
    sk = view.skeleton
    parts = [j for j, name in enumerate(sk.joints) if any(name.endswith(x) for x in SPOT_PARTS)]
    if not parts:
        return out
    part_of = {j: _part(sk, j) for j in parts}
    people = view.present
    n = view.names
    if len(people) < 2:
        return out
    kp = np.stack([view.people[p] for p in people])
    scales = np.array([view.scale(p) for p in people], dtype=np.float64)
    with np.errstate(invalid="ignore"):
        limit = SPOT_WITHIN * np.fmin.outer(scales, scales)
    upper = np.triu(np.ones((len(people), len(people)), dtype=bool), 1)
    found: dict[tuple[int, int], list[tuple[int, int]]] = {}
    for j in parts:
        for k in parts:
            if part_of[j] != part_of[k]:
                continue
            gap = np.hypot(kp[:, None, j, 0] - kp[None, :, k, 0],
                           kp[:, None, j, 1] - kp[None, :, k, 1])
            on = (kp[:, None, j, 2] > 0) & (kp[None, :, k, 2] > 0) & upper
            with np.errstate(invalid="ignore"):
                near = on & (gap < limit)
            for a, b in zip(*np.nonzero(near), strict=True):
                found.setdefault((int(a), int(b)), []).append((j, k))
    for (a, b), pairs in sorted(found.items()):
        p, q = people[a], people[b]
        kp_, kq = kp[a], kp[b]
        scale = float(np.nanmin([scales[a], scales[b]]))
        if len(pairs) >= SPOT_MOST:
            continue
        for j, k in pairs:
            reach_p, reach_q = _reach(view, p, j), _reach(view, q, k)
            if not (np.isfinite(reach_p) and np.isfinite(reach_q)):
                continue
            (loser, lj, lr), (keeper, kj, kr) = sorted(
                ((p, j, reach_p), (q, k, reach_q)), key=lambda x: (-x[2], x[0]))
            alike = float(np.nanmin([scales[a], scales[b]]) / np.nanmax([scales[a], scales[b]]))
            strength = (ramp(lr, REACH_FROM, REACH_SURE)
                        * ramp(lr / max(kr, 1e-9), 1.0, 1.5)
                        * ramp(alike, ALIKE_FROM, ALIKE_SURE))
            if strength <= 0:
                continue  # held hands, or people at other depths: no problem to name
            apart = float(np.hypot(*(kp_[j, :2] - kq[k, :2]))) / scale
            edits: tuple[Edit, ...] = ()
            if lj not in view.placed.get(loser, frozenset()):
                edits = (SetVisibility(view.frame_id, loser, lj, 0),)
            text = (f"{n.whose(loser, lj)} lies on {n.whose(keeper, kj)} "
                    f"({apart:.2f} of a body height apart): one joint labelled on two "
                    f"people; {n.person(loser)}'s limb reaches it at {lr:.2f} of its "
                    f"length, {n.person(keeper)}'s at {kr:.2f}")
            out.append(Proposal(
                "shared-spot", loser, (lj,), text, strength,
                (("apart", apart), ("reach", lr), ("reach_keeper", kr), ("alike", alike)),
                edits,
                (loser, keeper), f"mark {n.whose(loser, lj)} unlabelled"))
    return out


# ---------------------------------------------------------------------- additions

@dataclass(frozen=True)
class _Peaks:
    """Each joint type's peaks not used by any labelled joint: ``(n, 3)`` x, y, score."""

    unused: list[np.ndarray]


def _unused_peaks(view: FrameView) -> _Peaks:
    peaks = find_peaks(view.maps.confidence_maps, threshold=0.05, stride=view.maps.stride)
    unused = []
    for j, found in enumerate(peaks):
        keep = np.ones(len(found), dtype=bool)
        for p in view.present:
            kp = view.people[p]
            if kp[j, 2] > 0 and len(found):
                radius = USED_WITHIN * view.scale(p) if np.isfinite(view.scale(p)) else 8.0
                keep &= np.hypot(*(found[:, :2] - kp[j, :2]).T) > max(radius, view.maps.stride)
        unused.append(found[keep])
    return _Peaks(unused)


def _e(view: FrameView, limb: int, start: np.ndarray, end: np.ndarray) -> float:
    return float(view.maps.e(limb, start, end))


def missing_joints(view: FrameView, peaks: _Peaks | None = None) -> list[Proposal]:
    """A person's unlabeled joints where the model has unused peaks that its field joins to
    the person (or, for a hidden joint, a faint peak within reach): one proposal per person,
    placing all of them.

    Notes
    -----
    Joints are placed outward from the labelled ones, in rounds. In a round, for every
    unlabeled joint ``j`` of a person with at least one labelled (or already placed)
    neighbour and every unused peak of ``j``: each limb from ``j`` to those neighbours must
    fit (length at most ``LINK_SLACK`` times expected) and its ``E`` (Cao et al. 2017, Eq.
    10, along the limb's field) must reach ``JOIN_FROM`` (0.6) of the frame's typical ``E``
    of that limb; or, for a hidden joint whose covered limbs show no field, the peak must be
    faint (from ``PEAK_FROM`` to below ``PEAK_TO`` of the frame's typical labelled joint
    score), the limbs only fitting in length, and no limb's field running the other way
    (``E`` below ``AGAINST_BELOW``: a crossing body's field, not a covered limb's). A peak
    below ``PEAK_FLOOR`` of that score is noise and never offered. The offer is how sure
    each way makes it (the share ramped from ``JOIN_FROM`` to ``JOIN_SURE``, the faint
    peak's height from ``PEAK_FROM`` to ``PEAK_SURE``), the larger of the two. Offers are
    granted best first, each peak and each person's joint once (a peak goes to the person
    whose field joins it best, Cao et al.'s greedy matching per limb, Sec. 2.4). The joints
    placed in a round are the neighbours of the next: a missing elbow and wrist are placed
    together, the wrist joined to the elbow's peak. A peak where the person's joint was
    unlabeled (the position it remembers) is not offered: someone, or a fix, took it away
    there; nor is any peak for a joint a person unlabelled (:attr:`FrameView.placed`: its
    provenance is an author), so that a joint a fix took away as an invented spot is not
    offered back at a peak nearby.

    Strength: the least sure placed joint's offer. Fix: place the joints at their peaks,
    visible, or occluded (COCO ``v = 1``) where the peak is fainter than ``INVENTED_FROM`` of
    the typical score (the model barely sees it).
    """
    out: list[Proposal] = []
    if view.maps is None or view.typical is None:
        return out
    peaks = peaks or _unused_peaks(view)
    limbs_of: list[list[tuple[int, int]]] = [[] for _ in range(view.skeleton.num_joints)]
    for c, (a, b) in enumerate(view.skeleton.limbs):
        limbs_of[a].append((c, b))
        limbs_of[b].append((c, a))
    #: person -> joint -> x, y, peak score, share of the typical E, how sure
    placed: dict[int, dict[int, tuple[float, float, float, float, float]]] = {}
    typical_score = view.typical_score
    known = {p: view.people[p][:, 2] > 0 for p in view.present}
    taken: set[tuple[int, int]] = set()
    # The joints that joined each person last round: the first round starts from the
    # labelled ones; later rounds look only at joints next to those just placed (an offer
    # that lost once loses again: its peak or its joint is taken).
    new = {p: set(np.flatnonzero(known[p]).tolist()) for p in view.present}
    for _ in range(view.skeleton.num_joints):
        offers: list[tuple[float, float, int, int, int]] = []
        for p in view.present:
            if not new[p]:
                continue
            kp = view.people[p]
            mine = placed.get(p, {})
            at = _placed_view(kp, mine)
            for j in range(view.skeleton.num_joints):
                if (known[p][j] or j in mine or j in view.placed.get(p, ())
                        or not any(o in new[p] for _, o in limbs_of[j])):
                    continue
                for n, (x, y, score) in enumerate(peaks.unused[j].tolist()):
                    # Without scores there is no typical height: the field alone decides.
                    height = score / typical_score if np.isfinite(typical_score) else np.nan
                    if (height < PEAK_FLOOR or (j, n) in taken
                            or _unlabeled_here(view, kp, j, x, y)):
                        continue
                    share = _join_share(view, p, j, np.array([x, y]), at)
                    if share is None:
                        continue
                    if share < JOIN_FROM and _field_against(view, j, np.array([x, y]), at):
                        continue
                    if share >= JOIN_FROM or PEAK_FROM <= height < PEAK_TO:
                        sure = max(ramp(share, JOIN_FROM, JOIN_SURE) if share >= JOIN_FROM
                                   else 0.0, ramp(height, PEAK_FROM, PEAK_SURE)
                                   if height < PEAK_TO else 0.0)
                        offers.append((sure, share, p, j, n))
        new = {p: set() for p in view.present}
        for sure, share, p, j, n in sorted(offers, reverse=True):
            if (j, n) in taken or j in placed.get(p, {}):
                continue
            taken.add((j, n))
            x, y, score = peaks.unused[j][n]
            placed.setdefault(p, {})[j] = (float(x), float(y), float(score), share, sure)
            new[p].add(j)
        if not any(new.values()):
            break
    names = view.names
    for p, mine in placed.items():
        joints = tuple(sorted(mine))
        weakest = min(share for *_, share, _ in mine.values())
        strength = min(sure for *_, sure in mine.values())
        faintest = min(score for _, _, score, *_ in mine.values())
        if len(joints) == 1:
            j = joints[0]
            x, y, score, share, _ = mine[j]
            if share >= JOIN_FROM:
                text = (f"{names.whose(p, j)} is not labelled, but the model has a peak "
                        f"({score:.2f}) that its field joins to {names.person(p)} at "
                        f"{share:.0%} of the frame's typical support")
            else:
                text = (f"{names.whose(p, j)} is not labelled, but the model has a faint "
                        f"peak ({score:.2f}) within reach of {names.person(p)}, as it gives a "
                        f"hidden joint; its field there is {share:.0%} of the frame's typical "
                        "support (a covered limb)")
            summary = f"place {names.whose(p, j)} at ({x:.0f}, {y:.0f})"
        else:
            text = (f"{names.person(p)}'s {names.joints(joints)} are not labelled, but the "
                    f"model has peaks there within reach of {names.person(p)} (the faintest "
                    f"{faintest:.2f}), each joined by its field or faint as a hidden joint's "
                    f"(the weakest field {weakest:.0%} of the frame's typical support)")
            summary = f"place {names.person(p)}'s {names.joints(joints)} at the model's peaks"
        edits: list[Edit] = []
        for j in joints:
            x, y, score, *_ = mine[j]
            edits.append(MoveJoint(view.frame_id, p, j, x, y))
            if np.isfinite(typical_score) and score / typical_score < INVENTED_FROM:
                edits.append(SetVisibility(view.frame_id, p, j, 1))  # the model barely sees it
        out.append(Proposal(
            "missing-joint", p, joints, text, strength,
            (("support_share", weakest), ("peak", faintest), ("joints", float(len(joints)))),
            tuple(edits), (p,), summary))
    return out


def _placed_view(kp: np.ndarray, placed: Mapping[int, tuple[float, ...]]) -> np.ndarray:
    """A person's labels with the joints placed so far in :func:`missing_joints`."""
    if not placed:
        return kp
    out = kp.copy()
    for j, (x, y, *_) in placed.items():
        out[j] = (x, y, 2)
    return out


def _unlabeled_here(view: FrameView, kp: np.ndarray, joint: int, x: float, y: float) -> bool:
    """Whether the person's joint was unlabeled at ``(x, y)``: it remembers a position within
    the radius of a used peak (:data:`USED_WITHIN` of stature, at least one map cell)."""
    if kp[joint, 2] > 0 or not np.isfinite(kp[joint, :2]).all():
        return False
    radius = USED_WITHIN * scale if np.isfinite(scale := person_scale(kp, view.skeleton)) else 8.0
    return bool(np.hypot(kp[joint, 0] - x, kp[joint, 1] - y) <= max(radius, view.maps.stride))


def _field_against(view: FrameView, joint: int, xy: np.ndarray, kp: np.ndarray) -> bool:
    """Whether the field along a limb joining ``xy`` (as ``joint``) to the person's labelled
    joints (``kp``) runs the other way: its ``E`` below :data:`AGAINST_BELOW` of the frame's
    typical ``E`` of that limb (Cao et al. 2017, Eq. 10: the field's dot product with the
    limb's direction, negative where it points from the far end back)."""
    for c, (a, b) in enumerate(view.skeleton.limbs):
        if joint not in (a, b):
            continue
        other = b if a == joint else a
        typical = view.typical[c] if view.typical is not None else np.nan
        if kp[other, 2] <= 0 or not (np.isfinite(typical) and typical > 0):
            continue
        start, end = (xy, kp[other, :2]) if a == joint else (kp[other, :2], xy)
        if _e(view, c, start, end) < AGAINST_BELOW * typical:
            return True
    return False


def _join_share(view: FrameView, pid: int, joint: int, xy: np.ndarray,
                kp: np.ndarray | None = None) -> float | None:
    """The least share of the typical ``E`` over the limbs joining ``xy`` (as ``joint``) to
    the person's labelled joints (``kp``: the person's labels with joints placed so far), None
    when a limb is too long or none joins it; 0 when the limbs fit but the frame has no
    typical ``E`` of them to compare with."""
    kp = view.people[pid] if kp is None else kp
    scale = view.scale(pid)
    shares = []
    fits = False
    for c, (a, b) in enumerate(view.skeleton.limbs):
        if joint not in (a, b):
            continue
        other = b if a == joint else a
        if kp[other, 2] <= 0 or not np.isfinite(view.fractions[c]):
            continue
        length = float(np.hypot(*(xy - kp[other, :2])))
        if not (np.isfinite(scale) and length <= LINK_SLACK * view.fractions[c] * scale):
            return None
        fits = True
        start, end = (xy, kp[other, :2]) if a == joint else (kp[other, :2], xy)
        typical = view.typical[c] if view.typical is not None else np.nan
        if not (np.isfinite(typical) and typical > 0):
            continue
        shares.append(max(_e(view, c, start, end), 0.0) / typical)
    return min(shares) if shares else (0.0 if fits else None)


def missed_people(view: FrameView, peaks: _Peaks | None = None) -> list[Proposal]:
    """People the labels miss: unused peaks that the fields group into one plausible body.

    Notes
    -----
    The maps are grouped again (:func:`app.analysis.association.group_people`, Cao et al.
    2017) with a low peak threshold (0.05) and no least mean score; a grouped body whose
    parts are all unused, at least ``MISSED_PARTS`` of them, with no stretched limb and a
    torso, is a missed person. Strength: its mean part score over the frame's typical score,
    ramped from 0.2 to 0.6. Fix: a new person with those joints (visible), proposed only when
    the body is complete, with at least ``MISSED_COMPLETE`` (85 %) of the skeleton's joints:
    a partial body added as a person would itself be a wrong one (below OKS 0.8), so a
    partial one is a finding without a fix (someone to label by hand).
    """
    out: list[Proposal] = []
    if view.maps is None:
        return out
    peaks = peaks or _unused_peaks(view)
    sk = view.skeleton
    found = group_people(view.maps.confidence_maps, view.maps.pafs, sk.limb_array,
                         stride=view.maps.stride, peak_threshold=0.05, min_mean_score=0.0,
                         min_parts=MISSED_PARTS)
    for body in found:
        on = body[:, 2] > 0
        if on.sum() < MISSED_PARTS:
            continue
        unused = all(
            any(np.hypot(*(u[:2] - body[j, :2])) < 1e-6 for u in peaks.unused[j])
            for j in np.flatnonzero(on).tolist())
        if not unused:
            continue
        kp = np.zeros((sk.num_joints, 3))
        kp[on, :2] = body[on, :2]
        kp[on, 2] = 2
        scale = person_scale(kp, sk)
        if not np.isfinite(scale) or stretched_limbs(-1, kp, sk, scale) or any(
                _same_body(kp, view.people[p], max(scale, view.scale(p)))
                for p in view.present):
            continue
        mean = float(body[on, 2].mean())
        typical = view.typical_score if np.isfinite(view.typical_score) else 0.7
        strength = ramp(mean / typical, 0.2, 0.6)
        if strength <= 0:
            continue
        rows = tuple((float(x), float(y), int(v)) for x, y, v in
                     np.where(on[:, None], kp, [np.nan, np.nan, 0]).tolist())
        names = view.names
        centre = body[on, :2].mean(axis=0)
        text = (f"someone at ({centre[0]:.0f}, {centre[1]:.0f}) is not labelled: the model has "
                f"{int(on.sum())} unused parts there ({mean:.2f} on average) that its fields "
                "join into one body")
        complete = on.sum() >= MISSED_COMPLETE * sk.num_joints
        if not complete:
            text += f", too few ({int(on.sum())} of {sk.num_joints}) to add as a person"
        joints = tuple(np.flatnonzero(on).tolist())
        out.append(Proposal("missed-person", None, joints, text, strength,
                            (("parts", float(on.sum())), ("mean_peak", mean)),
                            (NewPerson(view.frame_id, None, rows),) if complete else (), (),
                            f"add a person with {names.joints(joints)}" if complete else "",
                            rows))
    return out


def _same_body(a: np.ndarray, b: np.ndarray, scale: float) -> bool:
    """Whether ``a`` repeats ``b`` at a small shift (the test of :func:`duplicates`)."""
    both = (a[:, 2] > 0) & (b[:, 2] > 0)
    if both.sum() < 3 or not np.isfinite(scale):
        return False
    offsets = a[both, :2] - b[both, :2]
    if float(np.median(np.hypot(*offsets.T))) / scale >= DUPLICATE_FROM:
        return False
    shift = np.median(offsets, axis=0)
    return float(np.median(np.hypot(*(offsets - shift).T))) / scale < SHAPE_FROM


def propose(view: FrameView) -> list[Proposal]:
    """Every proposer on one frame, in the order of :data:`KINDS`."""
    peaks = _unused_peaks(view) if view.maps is not None else None
    covered = covered_joints(view)
    return (duplicates(view) + splits(view) + phantoms(view) + mirrored_people(view, covered)
            + crossed(view) + wrong_owners(view) + shared_spots(view)
            + invented_joints(view, covered)
            + hidden_joints(view, covered) + missing_joints(view, peaks)
            + missed_people(view, peaks))
