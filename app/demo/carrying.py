"""How many annotator actions carrying corrections forward saves, measured on demo rehearsals.

An annotator fixes every wrong labelled joint of a demo's auto-labels (wrong as
:func:`app.demo.evaluate.judge_joints` judges it against the true poses), frame by frame in
the order of the dance. The annotator is simulated by an *oracle* that knows the truth and
takes one action at a time (:func:`next_action`), each one edit of the app:

1. delete a labelled person that pairs with no true dancer (a duplicate, a fragment, a
   phantom);
2. swap a person's sides when that makes at least two of its wrong joints right;
3. for a wrong joint of a person paired with a dancer: give it the joint of another person
   that stands where the dancer's joint is and is wrong on that person (one
   :class:`~app.model.edits.ReassignJoint`, which hands the wrong one back), else place it at
   the dancer's joint, or mark it unlabeled when the dancer's joint is not labelled.

*Frame by frame* counts every such action. *With carrying*, once the oracle has fixed a
frame, each person's corrections there (:func:`app.analysis.carry.by_person`: every change
made to a person, with those of the people it exchanged joints with) are carried forward as
one batch (:func:`app.analysis.carry.carry_changes` with ``each_joint``: each joint as far as
its own error lasts), the people linked into tracks by :func:`app.analysis.tracks.link_tracks`
first, as the app proposes them (:func:`app.jobs_tracks.propose_carry`; with
``--step-over N`` a batch steps over up to N frames where an error is absent and back
after, :data:`app.analysis.carry.GAP`, 0 by default); then, when more than
one person was corrected, the frame's corrections together as one more batch (the app's
Ctrl+Alt+C, ``posewright carry --whole-frame``): errors that last one more frame on
several people spare one action each, too few to pay for a key per person, but together
they do. The annotator looks at each batch and takes it as far as it helps (a carried frame
helps when the oracle needs fewer actions to fix it with the carried edits than without
them, the count this measure makes; the first frame where it does not is where the batch is
trimmed), which is one more action, when that spares actions: a batch over at least
:data:`MIN_BATCH` frames, or over one frame whose edits spare at least two of the oracle's
actions there (a batch that spares one action costs one; it is left alone and the frame fixed
when its turn comes). Frames later in the dance then start with fewer errors. Both sides use
the same oracle, the same frames and the same judge, and every wrong joint ends fixed both
ways. ``take="joints"`` (``--take joints``) judges a carried frame by the earlier, stricter
rule (fewer wrong joints and no fewer right ones), which refused frames that spare actions
all the same (two dragged joints set right while two neighbours' wrists end exchanged, which
one give puts back); ``frame_batch=False``
(``--no-frame-batch``) carries per person only. With ``per="action"`` (``--per action``)
each action is carried alone right after it, as far as all of it lasts: the earlier way,
kept for comparison.

:func:`persistence` (``--persistence``) says how long the auto-labels' wrong joints last from
frame to frame, which bounds what any carrying can spare: a correction is carried only to
frames where its error shows.

``python -m app.demo.carrying --seeds 31-33 --shipped --cache /tmp/demos`` prints the table
of the README's "Sequences" section; ``--frame-before`` measures demos grouped with the frame
before (``import-maps --frame-before``), in a cache of their own (a demo's project, with its
auto-labels, is built in the cache once).
"""

from __future__ import annotations

import argparse
import json
import sys
from collections.abc import Sequence
from dataclasses import asdict, dataclass, replace
from pathlib import Path
from typing import Any

import numpy as np
from scipy.optimize import linear_sum_assignment

from app.analysis.carry import CarriedBatch, by_person, carry_changes
from app.analysis.similarity import oks_matrix
from app.analysis.tracks import link_tracks
from app.demo.evaluate import KS_CORRECT, add_grouping_flags, judge_joints, use_grouping
from app.model.edits import (
    Change,
    DeletePerson,
    Edit,
    EditGroup,
    MoveJoint,
    ReassignJoint,
    SetVisibility,
    SwapSides,
)
from app.model.labels import FrameLabels

#: The most actions the oracle takes in one frame (a guard; the demo needs far fewer).
MAX_ACTIONS = 400
#: The fewest frames of a batch the annotator takes: a batch of one frame spares nothing.
MIN_BATCH = 2


def _judge(labels: FrameLabels, truth: np.ndarray, areas: np.ndarray) -> tuple[list[int],
                                                                                np.ndarray]:
    order = sorted(labels.people)
    k = labels.num_joints
    people = np.array([labels.people[p].keypoints for p in order]).reshape(-1, k, 3)
    return order, judge_joints(people, truth, areas, labels.skeleton.sigma_array)


def _pairs(labels: FrameLabels, order: list[int], truth: np.ndarray,
           areas: np.ndarray) -> dict[int, int]:
    """Labelled person -> true dancer (index), as :func:`judge_joints` pairs them."""
    if not order or not len(truth):
        return {}
    k = labels.num_joints
    kp = np.array([labels.people[p].keypoints for p in order]).reshape(-1, k, 3)
    on = kp[:, :, 2] > 0
    xy = np.where(on[:, :, None], kp[:, :, :2], np.nan)
    sim = oks_matrix(np.concatenate([xy, kp[:, :, 2:]], axis=2), truth, areas,
                     labels.skeleton.sigma_array)
    rows, cols = linear_sum_assignment(np.where(sim > 0, sim, 0.0), maximize=True)
    return {order[i]: int(j) for i, j in zip(rows.tolist(), cols.tolist()) if sim[i, j] > 0}


def _ks(xy: np.ndarray, true_xy: np.ndarray, area: float, sigma: float) -> float:
    d2 = float(((xy - true_xy) ** 2).sum())
    return float(np.exp(-d2 / (2.0 * area * (2.0 * sigma) ** 2 + np.spacing(1))))


def next_action(labels: FrameLabels, truth: np.ndarray, areas: np.ndarray) -> Edit | None:
    """The oracle's next correction of one frame (see the module docstring), or None when
    no labelled joint is wrong."""
    order, verdict = _judge(labels, truth, areas)
    wrong = {p: np.flatnonzero(verdict[n] == -1) for n, p in enumerate(order)}
    if not any(len(w) for w in wrong.values()):
        return None
    pairs = _pairs(labels, order, truth, areas)
    fid = labels.frame_id
    for p in order:
        if len(wrong[p]) and p not in pairs:
            return DeletePerson(fid, p)
    sig = labels.skeleton.sigma_array
    for p in order:
        if len(wrong[p]) >= 2:
            swapped, _ = SwapSides(fid, p).apply(labels)
            _, after = _judge(swapped, truth, areas)
            if (verdict == -1).sum() - (after == -1).sum() >= 2:
                return SwapSides(fid, p)
    for p in order:
        d = pairs[p]
        given: dict[int, list[int]] = {}
        for j in wrong[p].tolist():
            if truth[d, j, 2] <= 0:
                continue
            for n, q in enumerate(order):
                other = labels.people[q].keypoints[j]
                if q != p and verdict[n, j] == -1 and _ks(other[:2], truth[d, j, :2], areas[d],
                                                       sig[j]) >= KS_CORRECT:
                    given.setdefault(q, []).append(j)
                    break
        if given:
            q, joints = max(given.items(), key=lambda kv: (len(kv[1]), -kv[0]))
            return _one(EditGroup(fid, tuple(ReassignJoint(fid, q, j, p) for j in joints)))
        unseen = [j for j in wrong[p].tolist() if truth[d, j, 2] <= 0]
        if unseen:
            return _one(EditGroup(fid, tuple(SetVisibility(fid, p, j, 0) for j in unseen)))
        for j in wrong[p].tolist():
            x, y = (float(c) for c in truth[d, j, :2])
            return MoveJoint(fid, p, j, x, y)
    return None


def _one(group: EditGroup) -> Edit:
    return group.edits[0] if len(group.edits) == 1 else group


@dataclass(frozen=True)
class ActionCount:
    """Actions to fix every wrong labelled joint of a demo, frame by frame and carrying."""

    demo: str
    wrong_before: int
    frame_by_frame: int
    carrying: int
    corrections: int
    batches: int
    carried_frames: int
    wrong_left_frame_by_frame: int
    wrong_left_carrying: int
    #: Frame-by-frame actions that repeat an action of the frame before on the same tracks
    #: (the same gesture on the same joints): the most that carrying could spare.
    repeated: int = 0

    @property
    def saved(self) -> float:
        return 1.0 - self.carrying / max(self.frame_by_frame, 1)

    def to_dict(self) -> dict[str, Any]:
        return {**asdict(self), "saved": round(self.saved, 4)}


def _fix_frame(labels: FrameLabels, truth: np.ndarray,
               areas: np.ndarray) -> tuple[FrameLabels, list[Any]]:
    """The frame fixed by the oracle, and each action's gesture on tracks (:func:`_gesture`)."""
    done = []
    while len(done) < MAX_ACTIONS:
        edit = next_action(labels, truth, areas)
        if edit is None:
            break
        done.append(_gesture(edit, labels))
        labels, _ = edit.apply(labels)
    return labels, done


def _gesture(edit: Edit, labels: FrameLabels) -> Any:
    """What an action does, in terms that carry over frames: its kind, joints and tracks."""
    if isinstance(edit, EditGroup):
        return tuple(_gesture(e, labels) for e in edit.edits)
    people = [getattr(edit, name) for name in ("person_id", "to_person_id")
              if getattr(edit, name, None) is not None]
    return (type(edit).__name__, getattr(edit, "joint", None),
            tuple(labels.people[p].track for p in people))


def _wrong(labels: FrameLabels, truth: np.ndarray, areas: np.ndarray) -> int:
    return int((_judge(labels, truth, areas)[1] == -1).sum())


def _correct(labels: FrameLabels, truth: np.ndarray, areas: np.ndarray) -> int:
    return int((_judge(labels, truth, areas)[1] == 1).sum())


def with_tracks(frames: Sequence[FrameLabels]) -> list[FrameLabels]:
    """The frames with their people linked into tracks (as ``posewright track`` does)."""
    sigmas = frames[0].skeleton.sigma_array if frames else None
    arrays = [np.array([f.people[p].keypoints for p in sorted(f.people)]).reshape(
        -1, f.num_joints, 3) for f in frames]
    ids = link_tracks(arrays, sigmas)
    out = []
    for f, tracks in zip(frames, ids, strict=True):
        people = {p: replace(f.people[p], track=int(t), track_source="auto")
                  for p, t in zip(sorted(f.people), tracks.tolist(), strict=True)}
        out.append(replace(f, people=people))
    return out


def count_actions(frames: Sequence[FrameLabels], truth: Sequence[np.ndarray],
                  areas: Sequence[np.ndarray], demo: str = "",
                  per: str = "person", take: str = "actions",
                  frame_batch: bool = True) -> ActionCount:
    """Actions to fix every wrong labelled joint of a sequence, frame by frame and with
    carrying forward (see the module docstring).

    Parameters
    ----------
    frames
        The sequence's labels, in order.
    truth, areas
        Per frame, the true poses ``(M, K, 3)`` and their areas ``(M,)``.
    demo
        A name for the row.
    per
        ``"person"``: once a frame is fixed, each person's corrections are carried as one
        batch, each joint as far as its own error lasts (:func:`app.analysis.carry.by_person`);
        ``"action"``: each action is carried alone, right after it, as far as all of it
        lasts (the earlier way, kept for comparison).
    take
        How the annotator judges where a batch stops helping (:func:`_helps`): ``"actions"``
        (a carried frame is taken while it spares actions there) or ``"joints"`` (while it
        removes a wrong joint and loses no correct one; the earlier rule).
    frame_batch
        With ``per="person"``: once each person's batch is taken or left alone, the frame's
        corrections together are carried as one more batch
        (``posewright carry --whole-frame``, Ctrl+Alt+C in the app), each joint as far as
        its error lasts, and taken when it spares actions: it gathers the errors that last
        one more frame on several people, each too short to pay for a key of its own.
    """
    wrong_before = sum(_wrong(f, t, a) for f, t, a in zip(frames, truth, areas, strict=True))
    plain = repeated = 0
    left_plain = 0
    before: set[Any] = set()
    for f, t, a in zip(with_tracks(frames), truth, areas, strict=True):
        fixed, done = _fix_frame(f, t, a)
        plain += len(done)
        repeated += sum(g in before for g in done)
        before = set(done)
        left_plain += _wrong(fixed, t, a)
    labels = with_tracks(frames)
    corrections = batches = carried = 0
    for i in range(len(labels)):
        t, a = truth[i], areas[i]
        made: list[Change] = []
        while corrections < MAX_ACTIONS * len(labels):
            edit = next_action(labels[i], t, a)
            if edit is None:
                break
            labels[i], changes = edit.apply(labels[i])
            corrections += 1
            if per == "action":
                taken = _take(carry_changes(changes, labels, i), labels, i, truth, areas,
                              take)
                batches += taken > 0
                carried += taken
            else:
                made.extend(changes)
        relations = by_person(made) if per == "person" else []
        if frame_batch and len(relations) > 1:
            relations.append([c for r in relations for c in r])
        for relation in relations:
            taken = _take(carry_changes(relation, labels, i, each_joint=True), labels, i,
                          truth, areas, take)
            batches += taken > 0
            carried += taken
    left_carry = sum(_wrong(f, t, a) for f, t, a in zip(labels, truth, areas, strict=True))
    return ActionCount(demo, wrong_before, plain, corrections + batches, corrections, batches,
                       carried, left_plain, left_carry, repeated)


def _take(batch: CarriedBatch, labels: list[FrameLabels], i: int,
          truth: Sequence[np.ndarray], areas: Sequence[np.ndarray],
          take: str = "actions") -> int:
    """The annotator's look at a batch proposed from frame ``i``: its later frames taken in
    order as far as each helps (:func:`_helps` with ``take``), when that spares actions: at least
    :data:`MIN_BATCH` frames, or one frame whose carried edits spare at least two of the
    oracle's actions there (counted by fixing that frame with and without them). Applies
    what is taken to ``labels``; returns the number of frames taken (0: left alone)."""
    staged: dict[int, FrameLabels] = {}
    for group in batch.edits:
        k = next(n for n, f in enumerate(labels) if f.frame_id == group.frame_id)
        if k < i:
            continue  # frames already fixed: the error is absent there
        after = _helps(group, labels[k], truth[k], areas[k], take)
        if after is None:
            break
        staged[k] = after
    if len(staged) < MIN_BATCH:
        # Taking a batch is an action too: a short one is left alone unless it spares more.
        spared = sum(len(_fix_frame(labels[k], truth[k], areas[k])[1])
                     - len(_fix_frame(after, truth[k], areas[k])[1])
                     for k, after in staged.items())
        if spared < 2:
            return 0
    for k, after in staged.items():
        labels[k] = after
    return len(staged)


def _helps(group: EditGroup, labels: FrameLabels, truth: np.ndarray,
           areas: np.ndarray, take: str = "actions") -> FrameLabels | None:
    """The frame after a carried group when taking it there helps; else None (where the
    annotator trims the batch).

    ``take="actions"`` (the default): the group spares actions there, that is, the oracle
    needs fewer actions to fix the frame with the group's edits than without (what the
    measure counts; what the group puts wrong is fixed afterwards and counted).
    ``take="joints"``: it leaves fewer wrong joints and no fewer right ones (the earlier
    rule, kept for comparison)."""
    after, _ = group.apply(labels)
    if take == "actions":
        spared = len(_fix_frame(labels, truth, areas)[1]) - len(_fix_frame(after, truth,
                                                                            areas)[1])
        return after if spared > 0 else None
    w0, w1 = _wrong(labels, truth, areas), _wrong(after, truth, areas)
    if w1 < w0 and _correct(after, truth, areas) >= _correct(labels, truth, areas):
        return after
    return None


#: Why a frame-by-frame action is not carried to the next frame (:func:`why_not_carried`).
WHY = ("carried", "same action next frame, carrying did not match it",
       "same action next frame, carried but did not help", "error absent next frame",
       "error absent next frame, other joints of the person wrong",
       "same joint wrong next frame, fixed another way", "person not in the next frame",
       "error absent next frame, back the frame after: carried across the gap")


def _kind(edit: Edit) -> str:
    first = edit.edits[0] if isinstance(edit, EditGroup) else edit
    if isinstance(first, SetVisibility):
        return "unlabel"
    return {ReassignJoint: "give", SwapSides: "swap", DeletePerson: "delete",
            MoveJoint: "drag"}.get(type(first), type(first).__name__)


def _fixes(edit: Edit, labels: FrameLabels) -> tuple[int | None, set[int]]:
    """The track of the person an action corrects and the joints it corrects there."""
    edits = edit.edits if isinstance(edit, EditGroup) else (edit,)
    first = edits[0]
    if isinstance(first, ReassignJoint):
        return labels.people[first.to_person_id].track, {e.joint for e in edits}
    joints = {getattr(e, "joint", None) for e in edits} - {None}
    return labels.people[first.person_id].track, joints


def _walk(labels: FrameLabels, truth: np.ndarray,
          areas: np.ndarray) -> list[tuple[Edit, FrameLabels, FrameLabels, list[Any]]]:
    """The oracle's actions on one frame: (edit, labels before, labels after, changes)."""
    out: list[tuple[Edit, FrameLabels, FrameLabels, list[Any]]] = []
    while len(out) < MAX_ACTIONS:
        edit = next_action(labels, truth, areas)
        if edit is None:
            break
        after, changes = edit.apply(labels)
        out.append((edit, labels, after, changes))
        labels = after
    return out


def why_not_carried(frames: Sequence[FrameLabels], truth: Sequence[np.ndarray],
                    areas: Sequence[np.ndarray]) -> dict[tuple[str, str], int]:
    """Why each frame-by-frame action is, or is not, carried to the next frame.

    Every action of the oracle on frame ``t`` (frames fixed one by one from the auto-labels)
    is carried alone to frame ``t + 1`` (:func:`app.analysis.carry.carry_changes`) and sorted
    into one of :data:`WHY`: carried (and it helps there); the next frame needs the same
    action on the same tracks and carrying did not propose it, or proposed it and it did not
    help; the joints it corrects are right next frame (the rest of that person right too, or
    not); the same joint is wrong next frame but the oracle fixes it with another action; the
    person's track does not reach the next frame; or, of those whose error is absent next
    frame, the error is back the frame after and the carrying steps over the gap
    (:data:`app.analysis.carry.GAP`) and helps there. Returns ``(action kind, why) ->
    count``.
    """
    tracked = with_tracks(frames)
    acts = [_walk(f, t, a) for f, t, a in zip(tracked, truth, areas, strict=True)]
    out: dict[tuple[str, str], int] = {}
    for i in range(len(tracked) - 1):
        nxt, t1, a1 = tracked[i + 1], truth[i + 1], areas[i + 1]
        gestures = {_gesture(e, lab) for e, lab, _, _ in acts[i + 1]}
        order, verdict = _judge(nxt, t1, a1)
        wrong = {nxt.people[p].track: set(np.flatnonzero(verdict[n] == -1).tolist())
                 for n, p in enumerate(order)}
        for edit, before, after, changes in acts[i]:
            seq = list(tracked)
            seq[i] = after
            batch = carry_changes(changes, seq, i, max_frames=1)
            group = [g for g in batch.edits if g.frame_id == nxt.frame_id]
            track, joints = _fixes(edit, before)
            across = [g for g in batch.edits if i + 2 < len(tracked)
                      and g.frame_id == tracked[i + 2].frame_id]
            if group and _helps(group[0], nxt, t1, a1) is not None:
                why = WHY[0]
            elif _gesture(edit, before) in gestures:
                why = WHY[2] if group else WHY[1]
            elif track not in wrong:
                why = WHY[6]
            elif not joints or not wrong[track] & joints:
                why = WHY[4] if wrong[track] and joints else WHY[3]
            else:
                why = WHY[5]
            if why in WHY[3:5] and across and _helps(across[0], tracked[i + 2], truth[i + 2],
                                                    areas[i + 2]) is not None:
                why = WHY[7]
            key = (_kind(edit), why)
            out[key] = out.get(key, 0) + 1
    return out


def demo_count(folder: str | Path, demo: str = "", per: str = "person",
               take: str = "actions", frame_batch: bool = True) -> ActionCount:
    """:func:`count_actions` on a generated demo (built into a project the first time)."""
    from app.demo.calibrate import demo_frames

    frames = demo_frames(folder)
    return count_actions([f.labels for f in frames], [f.truth for f in frames],
                         [f.areas for f in frames], demo, per, take, frame_batch)


@dataclass(frozen=True)
class Persistence:
    """How long the auto-labels' wrong joints last on a demo (:func:`persistence`)."""

    demo: str
    #: Wrong labelled joints whose dancer is labelled in the next frame too.
    wrong: int
    #: Of those, the same joint of the same dancer wrong in the next frame.
    same_joint_next: int
    #: Of those, some joint of the same dancer wrong in the next frame.
    same_dancer_next: int
    #: Runs of consecutive frames a dancer's joint is wrong, and their frames in all.
    runs: int
    run_frames: int

    @property
    def joint_share(self) -> float:
        return self.same_joint_next / max(self.wrong, 1)

    @property
    def dancer_share(self) -> float:
        return self.same_dancer_next / max(self.wrong, 1)

    @property
    def mean_run(self) -> float:
        return self.run_frames / max(self.runs, 1)


def _truth_tracks(folder: Path) -> list[list[int]]:
    """Per frame of :func:`app.demo.calibrate.demo_frames`, the true poses' ``track_id``s in
    the order of its truth arrays."""
    from app.fileio import read_json
    from app.jobs import SOURCES_NAME
    from app.store.project import Project

    sources = read_json(folder / SOURCES_NAME, "the project sources")
    truth = read_json(folder / sources["truth"], "the true poses")
    image_of = {im["file_name"]: im["id"] for im in truth["images"]}
    by_image: dict[int, list[int]] = {}
    for ann in truth["annotations"]:
        by_image.setdefault(ann["image_id"], []).append(int(ann.get("track_id", -1)))
    with Project.open(folder, read_only=True) as project:
        return [by_image.get(image_of[Path(f.file_name).name], []) for f in project.frames()]


def persistence(folder: str | Path, demo: str = "") -> Persistence:
    """How the wrong joints of a demo's auto-labels last from frame to frame, per true dancer
    (``track_id``) and joint, wrong as :func:`app.demo.evaluate.judge_joints` judges: what
    bounds carrying, since a correction is carried only to frames where its error shows."""
    from app.demo.calibrate import demo_frames

    folder = Path(folder)
    frames = demo_frames(folder)
    ids = _truth_tracks(folder)
    wrong_at: list[dict[int, set[int]]] = []
    for f, tracks in zip(frames, ids, strict=True):
        order, verdict = _judge(f.labels, f.truth, f.areas)
        pairs = _pairs(f.labels, order, f.truth, f.areas)
        here: dict[int, set[int]] = {tid: set() for tid in tracks}
        for n, p in enumerate(order):
            if p in pairs:
                here[tracks[pairs[p]]] |= set(np.flatnonzero(verdict[n] == -1).tolist())
        wrong_at.append(here)
    return runs_of(wrong_at, demo)


def runs_of(wrong_at: Sequence[dict[int, set[int]]], demo: str = "") -> Persistence:
    """:class:`Persistence` from, per frame, each dancer's wrong joints (dancer -> joints;
    a dancer absent from a frame has no entry).

    >>> r = runs_of([{1: {9}}, {1: {9, 10}}, {1: set()}, {1: {9}}])
    >>> (r.wrong, r.same_joint_next, r.same_dancer_next, r.runs, r.run_frames)
    (3, 1, 1, 3, 4)
    """
    wrong = joint = dancer = runs = run_frames = 0
    for t, here in enumerate(wrong_at):
        after = wrong_at[t + 1] if t + 1 < len(wrong_at) else {}
        before = wrong_at[t - 1] if t else {}
        for tid, joints in here.items():
            run_frames += len(joints)
            runs += len(joints - before.get(tid, set()))
            if tid not in after:
                continue
            wrong += len(joints)
            joint += len(joints & after[tid])
            dancer += len(joints) if after[tid] else 0
    return Persistence(demo, wrong, joint, dancer, runs, run_frames)


def format_table(rows: Sequence[ActionCount]) -> str:
    """The README's table, as Markdown."""
    lines = ["| demo | wrong joints | actions frame by frame | of which repeat the frame "
             "before | with carrying | of which batches taken | frames carried to | saved |",
             "|---|---:|---:|---:|---:|---:|---:|---:|"]
    for r in rows:
        lines.append(f"| {r.demo} | {r.wrong_before:,} | {r.frame_by_frame:,} | "
                     f"{r.repeated:,} | {r.carrying:,} | {r.batches:,} | "
                     f"{r.carried_frames:,} | {100 * r.saved:.1f} % |")
    return "\n".join(lines)


def main(argv: Sequence[str] | None = None) -> int:
    from app.demo.calibrate import _seeds, demo_folder

    parser = argparse.ArgumentParser(prog="python -m app.demo.carrying",
                                     description=__doc__.split("\n\n")[0])
    parser.add_argument("--seeds", default="31-33", help="demo seeds (1-3,7)")
    parser.add_argument("--shipped", action="store_true", help="also the shipped demo")
    parser.add_argument("--cache", default="/tmp/posewright-demos",
                        help="where demos are generated (once)")
    parser.add_argument("--json", action="store_true")
    parser.add_argument("--per", choices=("person", "action"), default="person",
                        help="carry each person's corrections once a frame is fixed (the "
                             "default), or each action alone as it is made")
    parser.add_argument("--take", choices=("actions", "joints"), default="actions",
                        help="a carried frame is taken while it spares actions there (the "
                             "default), or while it removes a wrong joint and loses no "
                             "correct one (the earlier rule)")
    parser.add_argument("--no-frame-batch", action="store_true",
                        help="carry per person only, without the whole frame's batch after")
    parser.add_argument("--persistence", action="store_true",
                        help="instead, how long the auto-labels' wrong joints last")
    add_grouping_flags(parser)
    parser.add_argument("--step-over", metavar="N", type=int, default=None,
                        help="carry across up to N frames where the error is absent and "
                             "back after (app.analysis.carry.GAP; default 0)")
    parser.add_argument("--why", action="store_true",
                        help="instead, why each frame-by-frame action is or is not carried")
    args = parser.parse_args(argv)
    if args.step_over is not None:
        import app.analysis.carry

        app.analysis.carry.GAP = args.step_over
    use_grouping(args)
    targets: list[tuple[str, int | None]] = [(f"seed {s}", s) for s in _seeds(args.seeds)]
    if args.shipped:
        targets.insert(0, ("shipped (seed 1966)", None))
    if args.persistence:
        print("| demo | wrong joints (dancer seen next frame) | same joint wrong next frame | "
              "some joint of the dancer wrong next frame | mean run of a wrong joint |\n"
              "|---|---:|---:|---:|---:|")
        for name, seed in targets:
            r = persistence(demo_folder(args.cache, seed), name)
            print(f"| {name} | {r.wrong:,} | {r.joint_share:.0%} | {r.dancer_share:.0%} | "
                  f"{r.mean_run:.2f} frames |")
        return 0
    if args.why:
        from app.demo.calibrate import demo_frames

        why: dict[tuple[str, str], int] = {}
        for _, seed in targets:
            frames = demo_frames(demo_folder(args.cache, seed))
            found = why_not_carried([f.labels for f in frames], [f.truth for f in frames],
                                    [f.areas for f in frames])
            for key, n in found.items():
                why[key] = why.get(key, 0) + n
        total = sum(why.values())
        kinds = sorted({k for k, _ in why})
        print("| why | actions | share | " + " | ".join(kinds) + " |\n|---|---:|---:|"
              + "---:|" * len(kinds))
        for reason in WHY:
            n = sum(v for (_, w), v in why.items() if w == reason)
            each = " | ".join(f"{why.get((k, reason), 0):,}" for k in kinds)
            print(f"| {reason} | {n:,} | {n / max(total, 1):.0%} | {each} |")
        each = " | ".join(f"{sum(v for (k2, _), v in why.items() if k2 == k):,}"
                          for k in kinds)
        print(f"| all | {total:,} | | {each} |")
        return 0
    rows = [demo_count(demo_folder(args.cache, seed), name, args.per, args.take,
                       not args.no_frame_batch) for name, seed in targets]
    seeds = [r for r, (_, seed) in zip(rows, targets, strict=True) if seed is not None]
    total = ActionCount(f"**seeds {args.seeds}**", *(sum(getattr(r, f) for r in seeds) for f in (
        "wrong_before", "frame_by_frame", "carrying", "corrections", "batches",
        "carried_frames", "wrong_left_frame_by_frame", "wrong_left_carrying", "repeated")))
    if args.json:
        json.dump([r.to_dict() for r in [*rows, total]], sys.stdout, indent=2)
        print()
    else:
        print(format_table([*rows, total]))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
