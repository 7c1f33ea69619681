"""Findings: one problem at one place, said in a sentence, with the correction to accept.

A :class:`Finding` names the frame, the person (stable id and on-screen tag), the joints by
name, its kind, one short sentence, the evidence as numbers, a proposed :class:`Fix` made of
the edit operations of :mod:`app.model.edits` (``None`` when no fix can be proposed) and a
*confidence*: the estimated probability that applying the fix makes the labels more right
(:mod:`app.analysis.triage.calibration`). :func:`frame_findings` computes a frame's findings
from its labels, the model's scores and maps and the skeleton; the proposers are in
:mod:`app.analysis.triage.fixes`.

A finding's ``id`` says which problem at which place (its frame, kind, person, joints and the
other people its fix touches) and stays the same while the problem is found there; its
``fingerprint`` also covers the labels of every person it is about, so that a finding
dismissed as not a problem (:class:`app.model.edits.DismissFinding`, keyed by the
fingerprint) is not raised again while those labels stay the same, and is raised again once
they change.

Examples
--------
>>> from app.model.skeleton import coco_body
>>> body = np.zeros((17, 3)); body[:, 2] = 2
>>> body[:, :2] = [[50, 20], [52, 18], [48, 18], [55, 19], [45, 19], [60, 35], [40, 35],
...                [63, 55], [37, 55], [64, 72], [36, 72], [56, 68], [44, 68], [57, 95],
...                [43, 95], [57, 120], [43, 120]]
>>> frame_findings(1, {4: body}, coco_body())
[]
>>> twice = body.copy(); twice[:, 0] += 3                 # the same body, found again
>>> found = frame_findings(1, {4: body, 9: twice}, coco_body(),
...                        scores={4: np.full(17, 0.9), 9: np.full(17, 0.5)})
>>> [(f.kind, f.person_id, f.tag, f.fix.summary) for f in found]
[('duplicate', 9, 2, 'delete person 2')]
"""

from __future__ import annotations

import hashlib
import json
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from app.analysis.triage.calibration import SHIPPED, Calibration
from app.analysis.triage.combine import FrameTriage
from app.analysis.triage.fixes import KINDS, FrameView, Proposal, propose
from app.analysis.triage.frame import triage_frame
from app.analysis.triage.model_evidence import FieldMemo
from app.model.edits import (
    Edit,
    MergePeople,
    edit_from_value,
    edit_to_value,
    needs_person_id,
    with_person_id,
)
from app.model.labels import AUTO, IMPORTED, FrameLabels, Person
from app.model.naming import Names
from app.model.skeleton import Skeleton


@dataclass(frozen=True)
class FixPreview:
    """What a fix would do, for showing it before it is accepted.

    Attributes
    ----------
    placed
        ``(person id, joint, x, y, v)`` of every joint that gets a new place or a new owner.
    unlabeled
        ``(person id, joint)`` of every joint that becomes unlabeled.
    occluded
        ``(person id, joint)`` of every joint that becomes occluded where it is.
    deleted
        Ids of the people deleted (merged people included).
    merged
        ``(kept id, merged id)`` of every merge.
    created
        The keypoints ``((x, y, v), ...)`` of every new person.
    """

    placed: tuple[tuple[int, int, float, float, int], ...] = ()
    unlabeled: tuple[tuple[int, int], ...] = ()
    occluded: tuple[tuple[int, int], ...] = ()
    deleted: tuple[int, ...] = ()
    merged: tuple[tuple[int, int], ...] = ()
    created: tuple[tuple[tuple[float, float, int], ...], ...] = ()

    def to_dict(self) -> dict[str, Any]:
        return {"placed": [list(p) for p in self.placed],
                "unlabeled": [list(p) for p in self.unlabeled],
                "occluded": [list(p) for p in self.occluded],
                "deleted": list(self.deleted), "merged": [list(m) for m in self.merged],
                "created": [[list(j) for j in kp] for kp in self.created]}

    @staticmethod
    def from_dict(value: Mapping[str, Any]) -> FixPreview:
        return FixPreview(
            tuple((int(p), int(j), float(x), float(y), int(v))
                  for p, j, x, y, v in value.get("placed", ())),
            tuple((int(p), int(j)) for p, j in value.get("unlabeled", ())),
            tuple((int(p), int(j)) for p, j in value.get("occluded", ())),
            tuple(int(p) for p in value.get("deleted", ())),
            tuple((int(a), int(b)) for a, b in value.get("merged", ())),
            tuple(tuple((_num(x), _num(y), int(v)) for x, y, v in kp)
                  for kp in value.get("created", ())))


def _num(x: Any) -> float:
    return float("nan") if x is None else float(x)


@dataclass(frozen=True)
class Fix:
    """A proposed correction: the edits to apply together (one ledger group) and what they
    would do."""

    summary: str
    edits: tuple[Edit, ...]
    preview: FixPreview

    def to_dict(self) -> dict[str, Any]:
        return {"summary": self.summary, "edits": [edit_to_value(e) for e in self.edits],
                "preview": self.preview.to_dict()}

    @staticmethod
    def from_dict(value: Mapping[str, Any]) -> Fix:
        return Fix(str(value["summary"]), tuple(edit_from_value(e) for e in value["edits"]),
                   FixPreview.from_dict(value.get("preview") or {}))


@dataclass(frozen=True)
class Finding:
    """One problem at one place, and the fix for it.

    Attributes
    ----------
    id
        Stable while the same problem is found at the same place.
    frame_id
        The frame.
    kind
        One of :data:`app.analysis.triage.fixes.KINDS`.
    person_id, tag
        The person (stable id, and the number tag the Canvas shows); None for a missed person.
    joints, joint_names
        The joints concerned, as skeleton indices and as text (``left wrist``).
    text
        One sentence naming the person by tag and the joints by name.
    evidence
        The numbers behind it, as ``(name, value)`` pairs.
    strength
        How far the evidence lies into its range, in [0, 1] (what confidence is fitted on).
    confidence
        Estimated probability that applying the fix makes the labels more right.
    fix
        The proposed fix, or None when none can be proposed.
    people
        Every person the finding is about (their labels are in the fingerprint).
    fingerprint
        Digest of the kind, the place and those people's labels (dismissals are keyed on it).
    """

    id: str
    frame_id: int
    kind: str
    person_id: int | None
    tag: int | None
    joints: tuple[int, ...]
    joint_names: tuple[str, ...]
    text: str
    evidence: tuple[tuple[str, float], ...]
    strength: float
    confidence: float
    fix: Fix | None
    people: tuple[int, ...]
    fingerprint: str

    @property
    def worth(self) -> float:
        """How much accepting the fix is expected to do: the confidence times the number of
        joints concerned (a quarter of a joint each when only their visibility changes).
        Findings are listed worst first: by this, highest first."""
        per_joint = 0.25 if self.kind == "hidden" else 1.0
        return self.confidence * per_joint * max(len(self.joints), 1)

    def to_dict(self, file_name: str | None = None) -> dict[str, Any]:
        """A JSON-ready dict (``file_name`` added when given); :meth:`from_dict` reads it."""
        out: dict[str, Any] = {"id": self.id, "frame_id": self.frame_id}
        if file_name is not None:
            out["file_name"] = file_name
        out.update({
            "kind": self.kind, "person_id": self.person_id, "tag": self.tag,
            "joints": list(self.joint_names), "joint_ids": list(self.joints),
            "text": self.text, "confidence": round(float(self.confidence), 4),
            "strength": round(float(self.strength), 4),
            "evidence": {k: round(float(v), 4) for k, v in self.evidence},
            "fix": None if self.fix is None else self.fix.to_dict(),
            "people": list(self.people), "fingerprint": self.fingerprint,
        })
        return out

    @staticmethod
    def from_dict(value: Mapping[str, Any]) -> Finding:
        fix = value.get("fix")
        return Finding(
            str(value["id"]), int(value["frame_id"]), str(value["kind"]),
            None if value.get("person_id") is None else int(value["person_id"]),
            None if value.get("tag") is None else int(value["tag"]),
            tuple(int(j) for j in value.get("joint_ids", ())),
            tuple(str(n) for n in value.get("joints", ())), str(value["text"]),
            tuple((str(k), float(v)) for k, v in (value.get("evidence") or {}).items()),
            float(value.get("strength") or 0.0), float(value.get("confidence") or 0.0),
            None if fix is None else Fix.from_dict(fix),
            tuple(int(p) for p in value.get("people", ())), str(value["fingerprint"]))


def fingerprint(kind: str, people: Mapping[int, np.ndarray], about: Iterable[int],
                place: Any = ()) -> str:
    """A digest of a finding's kind, its place and the labels of the people it is about.

    Parameters
    ----------
    kind
        The finding's kind.
    people
        Person id -> ``(K, 3)`` ``x, y, v``.
    about
        The ids of the people the finding is about.
    place
        Anything JSON-ready that says where (joints; for a missed person, its parts).

    Returns
    -------
    str
        16 hex digits of SHA-256 over the kind, the place and each person's id with the
        positions (to 0.01 pixel) and visibilities of their labelled joints.

    Examples
    --------
    >>> kp = np.array([[10.0, 20.0, 2], [0.0, 0.0, 0]])
    >>> a = fingerprint("invented", {3: kp}, [3], [0])
    >>> moved = kp.copy(); moved[0, 0] += 1
    >>> a == fingerprint("invented", {3: kp.copy()}, [3], [0]), a == fingerprint(
    ...     "invented", {3: moved}, [3], [0])
    (True, False)
    """
    labels = []
    for pid in sorted(set(int(p) for p in about)):
        kp = np.asarray(people[pid], dtype=np.float64)
        on = kp[:, 2] > 0
        labels.append([pid, np.flatnonzero(on).tolist(),
                       np.round(kp[on, :2], 2).tolist(), kp[on, 2].astype(int).tolist()])
    text = json.dumps([kind, _plain(place), labels], separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()[:16]


#: Changes whenever what findings are computed changes, so that stored findings made by an
#: older version count as stale (:func:`labels_digest`).
FINDINGS_VERSION = 1


def labels_digest(labels: FrameLabels) -> str:
    """A digest of what a frame's findings are computed from and filtered by: its people's
    labels and its dismissals (and :data:`FINDINGS_VERSION`).

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> a = FrameLabels(1, coco_body(), {3: Person.blank(3, 17)})
    >>> b = FrameLabels(1, coco_body(), {3: Person.blank(3, 17).with_joint(
    ...     0, [5.0, 5.0, 2, None, "ana"])})
    >>> labels_digest(a) == labels_digest(a), labels_digest(a) == labels_digest(b)
    (True, False)
    """
    people = sorted(labels.people.items())
    text = json.dumps([FINDINGS_VERSION, labels.frame_id, sorted(labels.dismissed),
                       [[pid, np.round(np.nan_to_num(p.keypoints, nan=-1.0), 3).tolist()]
                        for pid, p in people]], separators=(",", ":"))
    return hashlib.sha256(text.encode()).hexdigest()[:16]


def _plain(value: Any) -> Any:
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, (tuple, list)):
        return [_plain(v) for v in value]
    if isinstance(value, np.generic):
        return value.item()
    return value


def preview(labels: FrameLabels, edits: Sequence[Edit]) -> FixPreview:
    """What applying ``edits`` in order to ``labels`` would do.

    Parameters
    ----------
    labels
        The frame's labels now.
    edits
        The fix's edits; new people get stand-in ids (they are listed in ``created``).

    Returns
    -------
    FixPreview

    Examples
    --------
    >>> from app.model.edits import ReassignJoint
    >>> from app.model.skeleton import coco_body
    >>> a = Person.blank(1, 17); b = Person.blank(2, 17)
    >>> a = a.with_joint(9, [40.0, 60.0, 2, 0.9, "auto"])
    >>> labels = FrameLabels(5, coco_body(), {1: a, 2: b})
    >>> preview(labels, [ReassignJoint(5, 1, 9, 2)]).placed
    ((2, 9, 40.0, 60.0, 2),)
    """
    staged = labels
    stand_in = max([*labels.people, 0]) + 1
    merged = []
    for edit in edits:
        while needs_person_id(edit):
            edit = with_person_id(edit, stand_in)
            stand_in += 1
        if isinstance(edit, MergePeople):
            merged.append((edit.person_id, edit.other_id))
        staged, _ = edit.apply(staged)
    placed, unlabeled, occluded, created = [], [], [], []
    for pid, after in staged.people.items():
        before = labels.people.get(pid)
        if before is None:
            created.append(tuple((float(x), float(y), int(v)) for x, y, v in after.keypoints))
            continue
        b, a = before.keypoints, after.keypoints
        same_place = np.isclose(b[:, 0], a[:, 0]) & np.isclose(b[:, 1], a[:, 1])
        for j in np.flatnonzero((b[:, 2] > 0) & (a[:, 2] <= 0)).tolist():
            unlabeled.append((pid, j))
        for j in np.flatnonzero((a[:, 2] > 0) & ((b[:, 2] <= 0) | ~same_place)).tolist():
            placed.append((pid, j, float(a[j, 0]), float(a[j, 1]), int(a[j, 2])))
        for j in np.flatnonzero((a[:, 2] == 1) & (b[:, 2] == 2) & same_place).tolist():
            occluded.append((pid, j))
    for pid, before in labels.people.items():
        if pid in staged.people:
            continue
        given = next((k for k, m in merged if m == pid), None)
        if given is not None:
            for j in np.flatnonzero(before.labelled).tolist():
                if (given, j) not in {(p, jj) for p, jj, *_ in placed}:
                    x, y, v = before.keypoints[j]
                    placed.append((given, j, float(x), float(y), int(v)))
    deleted = tuple(sorted(p for p in labels.people if p not in staged.people))
    return FixPreview(tuple(placed), tuple(unlabeled), tuple(occluded), deleted,
                      tuple(merged), tuple(created))


def placed_by_people(labels: FrameLabels) -> dict[int, frozenset[int]]:
    """Person id -> the joints whose provenance is an author (a person placed or marked them,
    or accepted a fix that did), not the model (``auto``) nor an import.

    A joint a person moved keeps the model's score of its old spot (:class:`MoveJoint`
    keeps it), so a check that reads that score as the model's word on the joint's present
    place (``invented``) must leave these joints alone.

    Examples
    --------
    >>> from app.model.skeleton import coco_body
    >>> kp = np.zeros((17, 3)); kp[:, 2] = 2
    >>> src = ("auto",) * 16 + ("ann",)
    >>> labels = FrameLabels(1, coco_body(), {3: Person(3, kp, np.ones(17), src)})
    >>> placed_by_people(labels)
    {3: frozenset({16})}
    """
    out = {}
    for p in labels.people.values():
        mine = frozenset(j for j, s in enumerate(p.sources) if s not in (AUTO, IMPORTED))
        if mine:
            out[p.id] = mine
    return out


def frame_findings(
    frame_id: int,
    people: Mapping[int, Any],
    skeleton: Skeleton,
    scores: Mapping[int, Any] | None = None,
    maps: Any = None,
    image_size: tuple[int, int] | None = None,
    triage: FrameTriage | None = None,
    dismissed: Iterable[str] = (),
    kinds: Iterable[str] | None = None,
    calibration: Calibration = SHIPPED,
    placed: Mapping[int, Iterable[int]] | None = None,
    grouping: str | None = None,
) -> list[Finding]:
    """A frame's findings, worst first.

    Parameters
    ----------
    frame_id
        The frame (the fixes' edits name it).
    people
        Person id -> ``(K, 3)`` ``x, y, v`` in the project's order (tags follow it).
    skeleton
        The project's skeleton.
    scores
        Person id -> ``(K,)`` model score per joint (NaN where none), optional.
    maps
        Network maps (``confidence_maps``, ``pafs``, ``stride``), optional: without them the
        field evidence is left out and no peaks can be added.
    image_size
        ``(width, height)``, optional.
    triage
        The frame's :func:`~app.analysis.triage.frame.triage_frame` result (computed if None).
    dismissed
        Fingerprints of dismissed findings: those findings are left out.
    kinds
        Only these kinds (default: all of :data:`~app.analysis.triage.fixes.KINDS`).
    calibration
        Turns a finding's strength into its confidence (default: the shipped one, see
        :mod:`app.analysis.triage.calibration`).
    placed
        Person id -> the joints a person placed or marked (their provenance is an author,
        not the model or an import; :func:`placed_by_people`): the ``invented`` check
        leaves them alone, since their model score belongs to the model's old spot.
    grouping
        How the frame's auto-labels were grouped (:attr:`app.model.labels.Frame.grouping`),
        for the triage computed here (:func:`~app.analysis.triage.frame.triage_frame`); a
        given ``triage`` carries its own.

    Returns
    -------
    list of Finding
        Worst first (:attr:`Finding.worth`); findings of one frame never share an id.

    Notes
    -----
    A fix is proposed when its confidence reaches the calibration's ``propose_at``; below it
    the finding still says where the problem is, with ``fix`` None. Proposals of one kind
    whose fixes would do the same (a swap found from both of its people) are one finding.
    """
    arrays = {int(p): np.asarray(v, dtype=np.float64) for p, v in people.items()}
    score_arrays = None if scores is None else {int(p): np.asarray(v, dtype=np.float64)
                                                 for p, v in scores.items()}
    if maps is not None and not isinstance(maps, FieldMemo):
        maps = FieldMemo(maps)  # triage and the proposers ask for many of the same E
    mine = {int(p): frozenset(int(j) for j in js) for p, js in (placed or {}).items()}
    if triage is None:
        triage = triage_frame(arrays, skeleton, score_arrays, maps, image_size, mine, grouping)
    view = FrameView(frame_id, arrays, skeleton, score_arrays, maps, image_size, triage, mine)
    wanted = set(KINDS if kinds is None else kinds)
    labels = _labels(frame_id, skeleton, arrays, score_arrays)
    skip = set(dismissed)
    out: dict[str, Finding] = {}
    for proposal in propose(view):
        if proposal.kind not in wanted:
            continue
        effect = preview(labels, proposal.edits) if proposal.edits else None
        finding = _finding(view, labels, proposal, calibration, effect)
        if finding.fingerprint in skip:
            continue
        key = finding.id if effect is None else json.dumps([finding.kind, effect.to_dict()])
        known = out.get(key)
        if known is None or finding.confidence > known.confidence:
            out[key] = finding
    return sorted(out.values(), key=lambda f: (-f.worth, KINDS.index(f.kind), f.id))


def _labels(frame_id: int, skeleton: Skeleton, people: Mapping[int, np.ndarray],
            scores: Mapping[int, np.ndarray] | None) -> FrameLabels:
    k = skeleton.num_joints
    made = {}
    for pid, kp in people.items():
        s = scores.get(pid) if scores is not None else None
        made[pid] = Person(pid, kp.copy(), np.full(k, np.nan) if s is None else s.copy(),
                           ("auto",) * k)
    return FrameLabels(frame_id, skeleton, made)


def _finding(view: FrameView, labels: FrameLabels, p: Proposal, calibration: Calibration,
             effect: FixPreview | None) -> Finding:
    names: Names = view.names
    conf = calibration.confidence(p.kind, p.strength)
    fix = None
    if effect is not None and conf >= calibration.propose_at:
        fix = Fix(p.summary, p.edits, effect)
    touched = sorted({pid for pid in p.people} | ({p.person} if p.person is not None else set()))
    place = [list(p.joints), [list(r) for r in p.extra]]
    key = json.dumps([view.frame_id, p.kind, p.person, list(p.joints), touched])
    ident = "F" + hashlib.sha256(key.encode()).hexdigest()[:10]
    return Finding(
        ident, view.frame_id, p.kind, p.person,
        None if p.person is None else names.tag(p.person), p.joints,
        tuple(names.joint(j) for j in p.joints), p.text,
        tuple((k, round(float(v), 4)) for k, v in p.evidence), round(float(p.strength), 4),
        round(conf, 4), fix, tuple(touched), fingerprint(p.kind, view.people, touched, place))
