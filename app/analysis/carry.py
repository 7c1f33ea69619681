"""Carry a correction forward: propose the same correction on the frames around it where the
same people show the same error.

A model's errors in a crowd persist: the same two dancers' wrists stay swapped while they stay
tangled. After a correction in frame ``t`` (its changes, as the ledger records them), the
people it touched are followed along their tracks to frame ``t + 1``; when their joints there
stand where the corrected joints stood before the correction (moved along with each body),
the error is the same, and the same correction is proposed there; then on to ``t + 2``, and so
on, stopping at the first frame where the error is absent. The same runs backwards from
``t - 1``. What is proposed is one batch, for the annotator to take, trim or leave with one
key (:meth:`app.store.project.Project.apply_batch` applies it as one undo step).

What the app and ``posewright carry`` carry is a person's whole correction: every change in
effect made in that frame to the people the newest correction touched (and to the people they
exchanged joints with; :func:`by_person` splits a frame's changes so), with ``each_joint``:
each joint, with the joint it was exchanged with, and a side swap as a whole, is carried as
far as its own error lasts, since a person's wrong joints seldom come right on the same frame;
the batch ends at the first frame where none of them shows.

Each changed joint ``(P, j)`` of the correction is one of

- a *copy*: its new value is the old value of a joint ``(Q, k)`` the correction also changed
  (a joint given to its owner, a side swap): carried as "``P'`` takes ``Q'``'s joint ``k``
  as it is in that frame" (``P'``, ``Q'`` the same tracks' people there);
- a *visibility* change where it stands: carried as the same visibility;
- a *move* to a new place: carried to that place moved along with ``P``'s body;
- a person deleted: carried as deleting the same track's person.

The error is present in a frame when every changed joint of ``P'`` (and every copied-from
joint of ``Q'``) is labelled as it was and lies within :data:`TOLERANCE` of a body of where it
stood before the correction, moved along with its body (or, for a joint the correction moved,
within :data:`FAR` of the distance it moved, when that is more; or on the same joint of the
same neighbour when it stood on a neighbour's joint, :data:`ON_JOINT`) and, for a joint that
got a new place, lies nearer its old place than its new one. A joint the correction moved
shows the same error, too, wherever it stands, when it stands farther from where the
correction put it (moved along with the body) than :data:`STRAY` of the correction's own
distance: the model got it wrong again in another way, and the correction's place is what it
needs. With ``each_joint``, a joint given over whose neighbour no longer holds its place is
carried as a move to where the give put it (:data:`PLACE_GIVEN`). A person whose track does not go
on is followed to the most alike person of the next frame (:data:`FOLLOW_OKS`). An exchange
of :data:`WHOLE` joints or more (a side swap) is judged on the mean of its joints' offsets
instead, so that one joint near the middle of the body, where both sides are close, does not
decide for all. A body's move from one
frame to the next is the median over its joints of their displacement, taking each changed
joint where it stood before the correction.

Examples
--------
A wrist given to its owner in frame 2 of four frames (synthetic): the same two tracks hold
the same mistake in frame 3 but not in frame 4, and frame 1 was already right.

>>> import numpy as np
>>> from app.model.edits import ReassignJoint
>>> from app.model.labels import FrameLabels, Person
>>> from app.model.skeleton import coco_body
>>> def person(pid, track, x, wrist):
...     kp = np.zeros((17, 3)); kp[:, 0] = x + np.arange(17); kp[:, 1] = 100 + 8 * np.arange(17)
...     kp[:, 2] = 2; kp[9, :2] = wrist
...     return Person(pid, kp, np.full(17, np.nan), ("auto",) * 17, track=track)
>>> def frame(f, a_wrist, b_wrist):
...     x = 10.0 * f
...     return FrameLabels(f, coco_body(), {10 * f: person(10 * f, 1, x, a_wrist(x)),
...                                        10 * f + 1: person(10 * f + 1, 2, x + 200, b_wrist(x))})
>>> own, other = (lambda x: (x + 9, 172)), (lambda x: (x + 209, 172))
>>> frames = [frame(1, own, other), frame(2, other, own), frame(3, other, own),
...           frame(4, own, other)]
>>> after, changes = ReassignJoint(2, 20, 9, 21).apply(frames[1])
>>> frames[1] = after
>>> batch = carry_changes(changes, frames, 1)
>>> [e.frame_id for e in batch.edits], batch.last_forward, batch.stopped_forward
([3], 3, 4)
>>> batch.stopped_backward
1
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace
from typing import Any

import numpy as np

from app.errors import EditRefused
from app.model.edits import (
    Change,
    DeletePerson,
    Edit,
    EditGroup,
    MoveJoint,
    SetVisibility,
    apply_changes,
)
from app.model.labels import FrameLabels, Person
from app.model.targets import JointTarget, PersonTarget

#: A carried joint must stand within this share of its body's size of where the corrected
#: joint stood, moved along with the body (a tenth of a body: our choice, no source; on demo
#: seeds 1-3 a twentieth gave the same counts of :mod:`app.demo.carrying`).
TOLERANCE = 0.1
#: A joint the correction moved far may have wandered further and still be the same error:
#: it stands where it stood when within this share of the correction's distance (and nearer
#: there than where the correction put it; our choice).
FAR = 0.5
#: A moved joint stood *on* another person's joint when within this share of its body's size
#: of it (our choice: about the spread of a peak; the error is then "the joint taken from
#: that neighbour", judged against the neighbour in the frames around).
ON_JOINT = 0.04
#: A person whose track does not go on is followed to the person of the next frame that is
#: most like it (OKS, :func:`app.analysis.similarity.oks_matrix`) when at least this alike and
#: not on a track of its own that the frame before already has (our choice).
FOLLOW_OKS = 0.5
#: A joint the correction moved shows the same error, too, when it stands farther from where
#: the correction put it (moved along with the body) than this share of the correction's own
#: distance (and than :data:`TOLERANCE` of a body), wherever it stands: the model got the
#: joint wrong again, in another way, and the correction's place is what it needs (our
#: choice, set on development demo seeds 104-109, where half gave 1,552 actions with
#: carrying and the whole distance 1,553, against 1,560 without the rule, with
#: :data:`PLACE_GIVEN`; 0 turns it off). With :data:`FAR` it makes the rule for a moved
#: joint: the same error unless it stands within half the correction's distance (or
#: :data:`TOLERANCE` of a body) of where the correction put it.
STRAY = 0.5
#: With ``each_joint``, a joint given over (with the joint handed back) whose give no longer
#: fits a frame, because the neighbour does not hold the joint's place there any more, is
#: carried as a move to where the give put it (moved along with its body) while it shows the
#: error a move would (our choice, tried on development demo seeds 104-109 with
#: :data:`STRAY`: together they took the actions with carrying from 1,560 to 1,552 grouped
#: alone and from 1,199 to 1,161 grouped with the frame before).
PLACE_GIVEN = True
#: An exchange judged as a whole shows the same error when its joints stand on average within
#: this share of a body of where they stood before it (and nearer there than where it put
#: them). Our choice; 0.25 was tried on development demo seeds 104-109 and not kept (four
#: actions fewer grouped alone, one more grouped with the frame before).
WHOLE_TOLERANCE = 0.1
#: The most frames a correction is carried in each direction.
MAX_FRAMES = 50
#: An exchange of at least this many joints is judged as a whole (their mean offsets).
WHOLE = 4
#: The most frames in a row where the error is absent that a batch steps over when the
#: error is back on the frame after them. 0 (the default) stops a batch at the first frame
#: where its error is absent, as the product's rule for carrying says. A crowd's grouping
#: flickers, so a wrong pairing sometimes comes right for one frame and back the next;
#: ``carry --step-over 1`` steps over such a frame, leaving it unchanged
#: (:attr:`CarriedBatch.skipped`), and ends at the first frame where the error is absent
#: and not back on the frame after. Measured on fresh dance seeds 104-109 (README
#: "Sequences"), stepping over one frame saved 0.6 points more of the annotator's actions.
GAP = 0
#: With ``each_joint``, carry each unit of a correction (:func:`_units`: a joint with the
#: joint it was exchanged with, a side swap, a person deleted) along on its own, each with
#: its own gaps, and gather their edits per frame: a joint whose error is absent for a frame
#: while another's lasts comes back into the batch when its error does.
APART = True


@dataclass(frozen=True)
class CarriedBatch:
    """What carrying one correction proposes.

    Attributes
    ----------
    origin
        The frame of the correction.
    edits
        One :class:`~app.model.edits.EditGroup` per frame the error is carried to, backward
        frames (nearest first) then forward frames (nearest first).
    last_forward, last_backward
        The last frame carried to in each direction (None when none).
    stopped_forward, stopped_backward
        The first frame in each direction where the error is absent and not back on the
        frame after (None when the sequence, or the track, ended first): where the batch
        ends.
    skipped
        Frames inside the batch where the error is absent for :data:`GAP` frames or fewer
        and back after them: the batch steps over them and leaves them as they are.
    """

    origin: int
    edits: tuple[EditGroup, ...]
    last_forward: int | None
    last_backward: int | None
    stopped_forward: int | None
    stopped_backward: int | None
    skipped: tuple[int, ...] = ()

    def until(self, frame_id: int | None) -> CarriedBatch:
        """The batch trimmed to the frames up to ``frame_id`` in each direction (None: the
        whole batch); what taking it only so far proposes."""
        if frame_id is None:
            return self
        ids = [e.frame_id for e in self.edits]
        if frame_id not in ids:
            return self
        keep_to = ids.index(frame_id)
        # Backward groups come first: trimming at a forward frame keeps every backward one.
        backward = [e for e in self.edits if e.frame_id in self._backward_ids()]
        forward = [e for e in self.edits if e not in backward]
        if self.edits[keep_to] in backward:
            backward = backward[:backward.index(self.edits[keep_to]) + 1]
        else:
            forward = forward[:forward.index(self.edits[keep_to]) + 1]
        kept = backward + forward
        lo = min([self.origin, *(e.frame_id for e in kept)])
        hi = max([self.origin, *(e.frame_id for e in kept)])
        return CarriedBatch(self.origin, tuple(kept),
                            forward[-1].frame_id if forward else None,
                            backward[-1].frame_id if backward else None,
                            self.stopped_forward, self.stopped_backward,
                            tuple(f for f in self.skipped if lo < f < hi))

    def _backward_ids(self) -> set[int]:
        ids = [e.frame_id for e in self.edits]
        if self.last_backward is None:
            return set()
        return set(ids[:ids.index(self.last_backward) + 1])


@dataclass(frozen=True)
class _Step:
    """One changed joint: ``kind`` is copy, visibility or move."""

    person: int
    joint: int
    kind: str
    before: tuple[float, float, int]
    after: tuple[float, float, int]
    source: tuple[int, int] | None = None
    #: For a move: the joint ``(person, joint)`` of another person the moved joint stood on
    #: before the correction (a joint given to a neighbour's joint), if any.
    holder: tuple[int, int] | None = None


def _xyv(value: Any) -> tuple[float, float, int]:
    x, y, v = value[0], value[1], value[2]
    return (np.nan if x is None else float(x), np.nan if y is None else float(y), int(v))


def _plan(changes: Sequence[Change]) -> tuple[list[_Step], list[int]] | None:
    """The correction as steps and deleted people; None when it cannot be carried (it makes
    a person, changes notes or regions only...)."""
    joints: dict[tuple[int, int], tuple[Any, Any]] = {}
    deleted = []
    for ch in changes:
        t = ch.target
        if isinstance(t, JointTarget):
            first = joints.get((t.person, t.joint), (ch.before, ch.after))[0]
            joints[(t.person, t.joint)] = (first, ch.after)
        elif isinstance(t, PersonTarget):
            if ch.after is not None:
                return None
            deleted.append(t.person)
    steps = []
    olds = {key: _xyv(b) for key, (b, _) in joints.items()}
    for (pid, j), (b, a) in joints.items():
        before, after = _xyv(b), _xyv(a)
        same_place = _close(before[:2], after[:2])
        source = None
        if not same_place:
            source = next((key for key, old in olds.items() if key != (pid, j)
                           and _close(old[:2], after[:2])), None)
        kind = "visibility" if same_place else "copy" if source is not None else "move"
        steps.append(_Step(pid, j, kind, before, after, source))
    if not steps and not deleted:
        return None
    return steps, deleted


def _with_holder(step: _Step, before: FrameLabels) -> _Step:
    """A move's step with the other person's joint its old place stood on (see
    :data:`ON_JOINT`), if any."""
    if step.kind != "move" or step.before[2] <= 0 or step.person not in before.people:
        return step
    size = _size(before.people[step.person].keypoints)
    best, where = ON_JOINT * size, None
    for q in before.people.values():
        if q.id == step.person:
            continue
        on = q.keypoints[:, 2] > 0
        d = np.hypot(q.keypoints[:, 0] - step.before[0], q.keypoints[:, 1] - step.before[1])
        d = np.where(on & np.isfinite(d), d, np.inf)
        k = int(np.argmin(d))
        if d[k] <= best:
            best, where = float(d[k]), (q.id, k)
    return step if where is None else replace(step, holder=where)


def _close(a: Sequence[float], b: Sequence[float]) -> bool:
    if any(np.isnan(v) for v in (*a, *b)):
        return all(np.isnan(v) for v in (*a, *b))
    return bool(np.hypot(a[0] - b[0], a[1] - b[1]) < 1e-6)


def _size(kp: np.ndarray) -> float:
    on = (kp[:, 2] > 0) & np.isfinite(kp[:, :2]).all(axis=1)
    if on.sum() < 2:
        return 0.0
    return float((kp[on, :2].max(axis=0) - kp[on, :2].min(axis=0)).max())


def _motion(a: np.ndarray, b: np.ndarray, skip: set[int]) -> np.ndarray | None:
    both = (a[:, 2] > 0) & (b[:, 2] > 0) & np.isfinite(a[:, :2]).all(axis=1) \
        & np.isfinite(b[:, :2]).all(axis=1)
    for j in skip:
        both[j] = False
    if both.sum() < 2:
        return None
    return np.median(b[both, :2] - a[both, :2], axis=0)


def _by_track(labels: FrameLabels) -> dict[int, Person]:
    return {p.track: p for p in labels.people.values() if p.track is not None}


def _units(steps: Sequence[_Step]) -> list[list[_Step]]:
    """The steps in units that carry together: a joint and the joint it was copied from (a
    joint given over and the one handed back), so that half of an exchange is never carried
    alone, and every exchange within one body (a side swap) as one unit, judged as a whole
    (:data:`WHOLE`). Units keep the steps' order."""
    parent = {(s.person, s.joint): (s.person, s.joint) for s in steps}
    parent.update({(s.person, -1): (s.person, -1) for s in steps})

    def root(key: tuple[int, int]) -> tuple[int, int]:
        while parent[key] != key:
            key = parent[key]
        return key

    for s in steps:
        if s.source is not None and s.source in parent:
            parent[root((s.person, s.joint))] = root(s.source)
            if s.source[0] == s.person:
                parent[root((s.person, s.joint))] = root((s.person, -1))
    out: dict[tuple[int, int], list[_Step]] = {}
    for s in steps:
        out.setdefault(root((s.person, s.joint)), []).append(s)
    return list(out.values())


def _carry_once(steps: list[_Step], deleted: list[int], before: FrameLabels,
                after: FrameLabels, there: FrameLabels, each_joint: bool = False
                ) -> tuple[list[Edit], list[_Step], list[int]] | None:
    """The correction's edits in ``there`` when it shows the same error, with the steps and
    deletions as they are there (for carrying on); None when the error is absent.

    With ``each_joint``, each unit of the correction (:func:`_units`; a deleted person) is
    judged alone: the units whose error shows there are carried, the others dropped (their
    error ended); None only when no unit's error shows."""
    people = _by_track(there)
    going_on = {p.track for p in after.people.values() if p.track is not None}
    who: dict[int, Person] = {}
    for pid in sorted({s.person for s in steps} | {s.source[0] for s in steps if s.source}
                      | set(deleted)):
        known = after.people.get(pid) or before.people.get(pid)
        found = None
        if known is not None and known.track is not None:
            found = people.get(known.track) or _follow(known, there, going_on, who.values())
        if found is None:
            if not each_joint:
                return None
            continue
        who[pid] = found
    if each_joint:
        steps = [s for unit in _units(steps)
                 if all(s.person in who and (s.source is None or s.source[0] in who)
                        for s in unit) for s in unit]
        deleted = [pid for pid in deleted if pid in who]
    holders: dict[int, Person] = {}
    for s in steps:
        if s.holder is not None and s.holder[0] not in who:
            known = after.people.get(s.holder[0]) or before.people.get(s.holder[0])
            if known is not None and known.track in people:
                holders[s.holder[0]] = people[known.track]
    changed: dict[int, set[int]] = {}
    for s in steps:
        changed.setdefault(s.person, set()).add(s.joint)
        if s.source:
            changed.setdefault(s.source[0], set()).add(s.source[1])
    motion = {}
    for pid, p in who.items():
        # Where each joint was: as corrected where the correction left it alone, as it was
        # before the correction where it changed it (the error, if it persists, is there).
        ref = (after.people.get(pid) or before.people[pid]).keypoints.copy()
        mine = sorted(changed.get(pid, set()))
        if mine and pid in before.people:
            ref[mine] = before.people[pid].keypoints[mine]
        u = _motion(ref, p.keypoints, set())
        size = _size(before.people[pid].keypoints) if pid in before.people else 0.0
        if u is None or size <= 0:
            if not each_joint:
                return None
            continue
        motion[pid] = (u, size)
    if each_joint:
        steps = [s for unit in _units(steps)
                 if all(s.person in motion and (s.source is None or s.source[0] in motion)
                        for s in unit) for s in unit]

    def stands(pid: int, j: int, old: tuple[float, float, int],
               new: tuple[float, float, int] | None = None,
               holder: tuple[int, int] | None = None) -> bool:
        """Joint ``j`` of ``pid``'s person there stands where ``old`` stood (moved with the
        body; on the same joint of the same neighbour when ``holder`` says it stood on one),
        labelled as it was, and nearer there than where ``new`` stands."""
        p = who[pid]
        x, y, v = p.keypoints[j]
        if (v > 0) != (old[2] > 0):
            return False
        if old[2] <= 0:
            return True
        u, size = motion[pid]
        off = np.hypot(x - old[0] - u[0], y - old[1] - u[1])
        neighbour = None if holder is None else (who.get(holder[0]) or holders.get(holder[0]))
        if holder is not None and neighbour is not None and \
                neighbour.keypoints[holder[1], 2] > 0:
            hx, hy = neighbour.keypoints[holder[1], :2]
            off = min(off, float(np.hypot(x - hx, y - hy)))
        moved = 0.0 if new is None or not np.isfinite(new[0]) or new[2] <= 0 else float(
            np.hypot(new[0] - old[0], new[1] - old[1]))
        away = 0.0 if not moved or new is None else float(
            np.hypot(x - new[0] - u[0], y - new[1] - u[1]))
        if STRAY and moved and away > max(TOLERANCE * size, STRAY * moved):
            # Wrong again another way: farther from where the correction put it (moved with
            # the body) than the correction itself moved it.
            return True
        if off > max(TOLERANCE * size, FAR * moved):
            return False
        if not moved or new is None:
            return True
        return bool(off < away)

    olds = {(s.person, s.joint): s.before for s in steps}

    def shows(group: list[_Step]) -> bool:
        """Whether the error these steps corrected shows there."""
        copies = [s for s in group if s.kind == "copy"]
        if len(copies) >= WHOLE:
            # Many joints exchanged at once (a side swap, a chain given over): judged
            # together, so that one joint near the body's middle does not decide for all.
            if not _stand_together(copies, who, motion):
                return False
            alone = [s for s in group if s.kind != "copy"]
        else:
            alone = group
        for s in alone:
            if not stands(s.person, s.joint, s.before,
                          s.after if s.kind in ("move", "copy") else None, s.holder):
                return False
            if s.source and s.source in olds and not stands(s.source[0], s.source[1],
                                                            olds[s.source]):
                return False
        return True

    if each_joint:
        kept = []
        for unit in _units(steps):
            if shows(unit):
                kept.extend(unit)
            elif PLACE_GIVEN and len(unit) < WHOLE and all(s.kind == "copy" for s in unit):
                # The neighbour no longer holds the joint's place: each joint of the give
                # still wrong (where it stood, or wrong another way) goes where the give put
                # it, moved with its body, as a drag would.
                kept.extend(m for m in (replace(s, kind="move", source=None) for s in unit)
                            if shows([m]))
        steps = kept
        if not steps and not deleted:
            return None
    elif not shows(steps):
        return None
    edits: list[Edit] = []
    new_steps = []
    for s in steps:
        p = who[s.person]
        x, y, v = (float(c) for c in p.keypoints[s.joint])
        if s.kind == "copy" and s.source is not None:
            q = who[s.source[0]]
            nx, ny = (float(c) for c in q.keypoints[s.source[1], :2])
        elif s.kind == "move":
            u, _ = motion[s.person]
            nx, ny = s.after[0] + float(u[0]), s.after[1] + float(u[1])
        else:
            nx, ny = x, y
        nv = s.after[2]
        if np.isfinite(nx) and np.isfinite(ny) and not (nx == x and ny == y):
            edits.append(MoveJoint(there.frame_id, p.id, s.joint, nx, ny))
        if nv != int(v) or (nv > 0 and int(v) == 0):
            edits.append(SetVisibility(there.frame_id, p.id, s.joint, nv))
        source = None if s.source is None else (who[s.source[0]].id, s.source[1])
        holder = None
        if s.holder is not None:
            neighbour = who.get(s.holder[0]) or holders.get(s.holder[0])
            holder = None if neighbour is None else (neighbour.id, s.holder[1])
        new_steps.append(_Step(p.id, s.joint, s.kind, (x, y, int(v)), (nx, ny, nv), source,
                               holder))
    for pid in deleted:
        edits.append(DeletePerson(there.frame_id, who[pid].id))
    return edits, new_steps, [who[pid].id for pid in deleted]


def _follow(known: Person, there: FrameLabels, going_on: set[int],
            taken: Any) -> Person | None:
    """The person of ``there`` that ``known`` (a person of the frame before, whose track does
    not reach ``there``) most likely is: the most alike by OKS, at least :data:`FOLLOW_OKS`,
    among those whose track the frame before does not have (a track broken by the linking
    goes on under a new number)."""
    from app.analysis.similarity import oks_matrix

    busy = {p.id for p in taken}
    free = [p for p in there.people.values()
            if p.id not in busy and (p.track is None or p.track not in going_on)]
    ref = known.keypoints
    on = (ref[:, 2] > 0) & np.isfinite(ref[:, :2]).all(axis=1)
    if not free or on.sum() < 2:
        return None
    lo, hi = ref[on, :2].min(axis=0), ref[on, :2].max(axis=0)
    area = float(np.prod(np.maximum(hi - lo, 1.0)))
    cand = np.array([p.keypoints for p in free])
    xy = np.where(cand[:, :, 2:] > 0, cand[:, :, :2], np.nan)
    sim = oks_matrix(np.concatenate([xy, cand[:, :, 2:]], axis=2), ref[None], np.array([area]),
                     there.skeleton.sigma_array)[:, 0]
    best = int(np.argmax(sim))
    return free[best] if sim[best] >= FOLLOW_OKS else None


def _stand_together(copies: Sequence[_Step], who: dict[int, Person],
                    motion: dict[int, tuple[np.ndarray, float]]) -> bool:
    """Whether the joints of an exchange of many joints stand, on average, within
    :data:`TOLERANCE` of where they stood before it and nearer there than where it put them
    (joints labelled on one side only are left out)."""
    old_off, new_off = [], []
    for s in copies:
        x, y, v = who[s.person].keypoints[s.joint]
        if v <= 0 or s.before[2] <= 0 or not np.isfinite(s.after[0]):
            continue
        u, size = motion[s.person]
        old_off.append(np.hypot(x - s.before[0] - u[0], y - s.before[1] - u[1]) / size)
        new_off.append(np.hypot(x - s.after[0] - u[0], y - s.after[1] - u[1]) / size)
    if len(old_off) < WHOLE // 2:
        return False
    return bool(np.mean(old_off) <= WHOLE_TOLERANCE and np.mean(old_off) < np.mean(new_off))


def carry_changes(changes: Sequence[Change], frames: Sequence[FrameLabels], at: int,
                  max_frames: int = MAX_FRAMES, each_joint: bool = False,
                  gap: int | None = None) -> CarriedBatch:
    """Carry a correction of ``frames[at]`` to the frames around it that show the same error.

    Parameters
    ----------
    changes
        The correction's changes in ``frames[at]`` (an :class:`~app.store.ledger.Applied`'s
        changes, or one ledger group's entries of that frame), in order.
    frames
        A sequence's frames, in order, as they are now: ``frames[at]`` after the correction,
        every person that has a track carrying it (:attr:`app.model.labels.Person.track`).
    at
        The index of the corrected frame.
    max_frames
        The most frames carried to in each direction.
    each_joint
        Carry each joint (with the joint it was exchanged with, if any) as far as its own
        error lasts, rather than the whole correction as far as all of it lasts: what
        carrying a person's corrections (:func:`by_person`) does, since a person's wrong
        joints rarely come right on the same frame. The batch then ends at the first frame
        where none of the errors shows.
    gap
        The most frames in a row where the error is absent that the batch steps over when
        it is back on the frame after them (None: :data:`GAP`); the error there is judged against
        the last frame carried to, with the body's motion over the frames between. The
        frames stepped over get no edit (:attr:`CarriedBatch.skipped`).

    Returns
    -------
    CarriedBatch
        Empty when the correction cannot be carried (it makes a person, or touches people
        without a track) or no frame around shows the same error.
    """
    gap = GAP if gap is None else int(gap)
    origin = frames[at].frame_id
    plan = _plan(changes)
    empty = CarriedBatch(origin, (), None, None, None, None)
    if plan is None:
        return empty
    undo = [c.inverted() for c in reversed(changes)]
    start_before = apply_changes(frames[at], undo)
    plan = ([_with_holder(s, start_before) for s in plan[0]], plan[1])
    steps, deleted = plan
    parts: list[tuple[list[_Step], list[int]]]
    if each_joint and APART:
        parts = [(unit, []) for unit in _units(steps)] + [([], [d]) for d in deleted]
    else:
        parts = [(steps, deleted)]
    found: dict[int, tuple[list[EditGroup], int | None, int | None, list[int]]] = {}
    for step in (1, -1):
        walks = [_walk(part, start_before, frames, at, step, max_frames, each_joint, gap,
                       frames[at] if len(parts) == 1 else _only(part, start_before))
                 for part in parts]
        found[step] = _merge(walks, frames, at, step, max_frames, origin)
    back, last_back, stop_back, skip_back = found[-1]
    fwd, last_fwd, stop_fwd, skip_fwd = found[1]
    return CarriedBatch(origin, tuple(back + fwd), last_fwd, last_back, stop_fwd, stop_back,
                        tuple(skip_back + skip_fwd))


def _only(plan: tuple[list[_Step], list[int]], start_before: FrameLabels) -> FrameLabels:
    """The corrected frame as it would be with only this part of the correction made: what
    a part carried on its own starts from, so that the other parts' joints count, like the
    frames around, as they were before the correction."""
    steps, deleted = plan
    people = dict(start_before.people)
    for s in steps:
        kp = people[s.person].keypoints.copy()
        kp[s.joint] = s.after
        people[s.person] = replace(people[s.person], keypoints=kp)
    for pid in deleted:
        people.pop(pid, None)
    return replace(start_before, people=people)


def _walk(plan: tuple[list[_Step], list[int]], start_before: FrameLabels,
          frames: Sequence[FrameLabels], at: int, step: int, max_frames: int,
          each_joint: bool, gap: int, start_after: FrameLabels
          ) -> tuple[dict[int, list[Edit]], int | None]:
    """One part of a correction carried in one direction from ``start_after`` (the frame
    corrected by it): its edits per frame index, and the index of the frame where its error
    is absent (and not back within ``gap``; None when the sequence or ``max_frames`` ended
    first)."""
    steps, deleted = plan
    before, after = start_before, start_after
    out: dict[int, list[Edit]] = {}
    k = at + step
    while 0 <= k < len(frames) and len(out) < max_frames:
        taken = None
        for ahead in range(gap + 1):
            n = k + step * ahead
            if not 0 <= n < len(frames):
                break
            taken = _carry_there(steps, deleted, before, after, frames[n], each_joint,
                                 frames[at].frame_id)
            if taken is not None:
                break
        if taken is None:
            return out, k
        group, new, steps, deleted = taken
        out[n] = list(group.edits)
        before, after = frames[n], new
        k = n + step
    return out, None


def _merge(walks: Sequence[tuple[dict[int, list[Edit]], int | None]],
           frames: Sequence[FrameLabels], at: int, step: int, max_frames: int,
           origin: int) -> tuple[list[EditGroup], int | None, int | None, list[int]]:
    """The parts' walks in one direction as one batch's groups (one per frame, the parts'
    edits together, people deleted last), the last frame carried to, the frame where the
    batch ends and the frames it steps over."""
    reach = [k for out, _ in walks for k in out]
    if not reach:
        ends = [stop for _, stop in walks if stop is not None]
        return [], None, (frames[at + step].frame_id if ends else None), []
    last = max(reach, key=lambda k: step * k)
    groups: list[EditGroup] = []
    skipped: list[int] = []
    for k in range(at + step, last + step, step):
        edits = [e for out, _ in walks for e in out.get(k, [])]
        if not edits:
            skipped.append(frames[k].frame_id)
            continue
        edits.sort(key=lambda e: isinstance(e, DeletePerson))
        groups.append(EditGroup(frames[k].frame_id, tuple(edits),
                                f"carried from frame {origin}"))
        if len(groups) == max_frames and k != last:
            return groups, frames[k].frame_id, None, skipped  # cut at max_frames
    stops = [stop for out, stop in walks if out and max(out, key=lambda k: step * k) == last]
    stopped = None if last + step < 0 or last + step >= len(frames) or None in stops else \
        frames[last + step].frame_id
    return groups, frames[last].frame_id, stopped, skipped


def _carry_there(steps: list[_Step], deleted: list[int], before: FrameLabels,
                 after: FrameLabels, there: FrameLabels, each_joint: bool, origin: int
                 ) -> tuple[EditGroup, FrameLabels, list[_Step], list[int]] | None:
    """The carried group in ``there`` and the frame after it, with the steps and deletions
    as they are there; None when the error is absent there (or the proposal cannot apply)."""
    carried = _carry_once(steps, deleted, before, after, there, each_joint)
    if carried is None or not carried[0]:
        return None
    edits, steps, deleted = carried
    group = EditGroup(there.frame_id, tuple(edits), f"carried from frame {origin}")
    try:
        new, _ = group.apply(there)
    except EditRefused:  # a proposal that cannot apply there ends the batch
        return None
    return group, new, steps, deleted


def by_person(changes: Sequence[Change]) -> list[list[Change]]:
    """A frame's corrections split into one relation per person: every change made to a
    person's joints (or the person deleted), in order, together with the changes of the
    people it exchanged joints with (a joint given over changes the giver too). What is
    carried as one batch per person (``carry_changes(..., each_joint=True)``) once a person
    is corrected. Changes of neither joints nor people (notes, regions) are left out.

    >>> from app.model.targets import JointTarget
    >>> give = [Change(JointTarget(1, 9), (5, 5, 2), (9, 9, 2)),
    ...         Change(JointTarget(2, 9), (9, 9, 2), (5, 5, 2))]
    >>> drag = [Change(JointTarget(3, 7), (0, 0, 2), (1, 1, 2))]
    >>> [len(r) for r in by_person(give + drag + [Change(JointTarget(1, 10), (4, 4, 2),
    ...                                                  (4, 4, 0))])]
    [3, 1]
    """
    firsts: dict[tuple[int, int], tuple[float, float]] = {}
    for ch in changes:
        t = ch.target
        if isinstance(t, JointTarget) and (t.person, t.joint) not in firsts:
            firsts[(t.person, t.joint)] = _xyv(ch.before)[:2]
    parent: dict[int, int] = {}

    def root(p: int) -> int:
        parent.setdefault(p, p)
        while parent[p] != p:
            p = parent[p]
        return p

    for ch in changes:
        t = ch.target
        if not isinstance(t, (JointTarget, PersonTarget)):
            continue
        root(t.person)
        if isinstance(t, JointTarget) and ch.after is not None:
            new = _xyv(ch.after)[:2]
            for (q, _), old in firsts.items():
                if q != t.person and not any(np.isnan(new)) and _close(old, new):
                    parent[root(t.person)] = root(q)
    out: dict[int, list[Change]] = {}
    for ch in changes:
        t = ch.target
        if isinstance(t, (JointTarget, PersonTarget)):
            out.setdefault(root(t.person), []).append(ch)
    return list(out.values())
