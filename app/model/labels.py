"""Plain label data: people, frames, frame states, notes and one frame's labels.

A person is a ``(K, 3)`` float64 array ``x, y, v`` in pixels of the original image (x to the
right, y down, integer coordinates on pixel centres). ``v`` follows the COCO keypoint standard:
2 labelled and visible, 1 labelled but occluded, 0 unlabeled. An unlabeled joint may still
remember a position (the model's guess, or where it was before it was unlabeled); a joint that
never had one holds NaN. Beside the array a person carries a per-joint model score (NaN when
there is none) and a per-joint provenance: ``"auto"`` (from a model), ``"import"`` (from a label
file) or the name of the author who last edited the joint.
"""

from __future__ import annotations

from collections.abc import Mapping
from dataclasses import dataclass, field, replace
from enum import Enum
from typing import Any

import numpy as np

from app.errors import EditRefused
from app.model.skeleton import Skeleton

AUTO = "auto"
IMPORTED = "import"


class FrameState(str, Enum):
    """Where a frame stands in the correction loop."""

    UNTOUCHED = "untouched"
    CORRECTED = "corrected"
    DISPUTED = "disputed"
    SIGNED_OFF = "signed-off"

    @classmethod
    def parse(cls, text: str) -> FrameState:
        """Accept the value or a relaxed spelling ("signed off", "signed_off")."""
        norm = text.strip().lower().replace("_", "-").replace(" ", "-")
        for state in cls:
            if state.value == norm:
                return state
        raise ValueError(f"unknown frame state {text!r}; one of " + ", ".join(s.value for s in cls))


@dataclass(frozen=True, eq=False)
class Person:
    """One person in one frame.

    Attributes
    ----------
    id
        Unique within the project (the COCO annotation id when imported).
    keypoints
        ``(K, 3)`` float64: ``x, y, v``.
    scores
        ``(K,)`` float64 model score per joint in [0, 1], NaN where there is none.
    sources
        Per joint: ``"auto"``, ``"import"`` or the author who last edited it.
    score
        The model's score for the whole person, if any.
    extra
        Fields carried through from an imported file (``bbox``, ``area``, ``iscrowd``...).
    track
        The track the person belongs to in its sequence (the same dancer in every frame of
        one video or image folder carries one track id), or None when not linked.
    track_source
        Who set the track: ``"auto"`` (linked by :mod:`app.analysis.tracks`), ``"import"``
        (a label file's ``track_id``) or the author who edited it. Linking again keeps the
        tracks that someone edited.
    """

    id: int
    keypoints: np.ndarray
    scores: np.ndarray
    sources: tuple[str, ...]
    score: float | None = None
    extra: Mapping[str, Any] = field(default_factory=dict)
    track: int | None = None
    track_source: str = ""

    @staticmethod
    def blank(person_id: int, num_joints: int, source: str = "") -> Person:
        kp = np.full((num_joints, 3), np.nan)
        kp[:, 2] = 0
        return Person(person_id, kp, np.full(num_joints, np.nan), (source,) * num_joints)

    @property
    def labelled(self) -> np.ndarray:
        """``(K,)`` bool: joints with ``v > 0``."""
        return self.keypoints[:, 2] > 0

    @property
    def num_labelled(self) -> int:
        return int(np.count_nonzero(self.labelled))

    def to_value(self) -> dict[str, Any]:
        """A JSON-ready dict (NaN as None); :meth:`from_value` reads it back exactly. The
        track is written only when the person has one, so values written before tracks
        existed read the same."""
        out = {
            "keypoints": [[_num(x), _num(y), int(v)] for x, y, v in self.keypoints],
            "scores": [_num(s) for s in self.scores],
            "sources": list(self.sources),
            "score": self.score,
            "extra": dict(self.extra),
        }
        if self.track is not None:
            out["track"] = [int(self.track), self.track_source]
        return out

    @staticmethod
    def from_value(person_id: int, value: Mapping[str, Any]) -> Person:
        kp = np.array(
            [[np.nan if x is None else x, np.nan if y is None else y, v]
             for x, y, v in value["keypoints"]],
            dtype=np.float64,
        ).reshape(-1, 3)
        scores = np.array([np.nan if s is None else s for s in value["scores"]], dtype=np.float64)
        track = value.get("track")
        return Person(
            person_id, kp, scores, tuple(value["sources"]), value.get("score"),
            dict(value.get("extra") or {}),
            None if track is None else int(track[0]), "" if track is None else str(track[1]),
        )

    def track_value(self) -> list[Any]:
        """The track as ``[track id or None, who set it]``."""
        return [None if self.track is None else int(self.track), self.track_source]

    def with_track(self, value: list[Any]) -> Person:
        """A copy with the track set from ``[track id or None, who set it]``."""
        track, source = value
        return replace(self, track=None if track is None else int(track),
                       track_source="" if track is None else str(source))

    def joint_value(self, j: int) -> list[Any]:
        """One joint as ``[x, y, v, score, source]`` (NaN as None)."""
        x, y, v = self.keypoints[j]
        return [_num(x), _num(y), int(v), _num(self.scores[j]), self.sources[j]]

    def with_joint(self, j: int, value: list[Any]) -> Person:
        """A copy with joint ``j`` set from ``[x, y, v, score, source]``."""
        x, y, v, s, src = value
        kp = self.keypoints.copy()
        kp[j] = (np.nan if x is None else x, np.nan if y is None else y, v)
        scores = self.scores.copy()
        scores[j] = np.nan if s is None else s
        sources = list(self.sources)
        sources[j] = src
        return replace(self, keypoints=kp, scores=scores, sources=tuple(sources))

    def same_as(self, other: Person) -> bool:
        """Equal labels, scores and provenance (NaN equal to NaN)."""
        return (
            self.id == other.id
            and self.keypoints.shape == other.keypoints.shape
            and bool(np.array_equal(self.keypoints, other.keypoints, equal_nan=True))
            and bool(np.array_equal(self.scores, other.scores, equal_nan=True))
            and self.sources == other.sources
            and self.score == other.score
            and self.track == other.track
            and self.track_source == other.track_source
        )


def _num(x: float) -> float | None:
    x = float(x)
    return None if x != x else x


@dataclass(frozen=True)
class Note:
    """One message in a frame's review thread (optionally about one person)."""

    id: int
    frame_id: int
    author: str
    time: float
    text: str
    person_id: int | None = None

    def to_value(self) -> dict[str, Any]:
        return {"author": self.author, "time": self.time, "text": self.text,
                "person": self.person_id}

    @staticmethod
    def from_value(note_id: int, frame_id: int, value: Mapping[str, Any]) -> Note:
        return Note(note_id, frame_id, value["author"], value["time"], value["text"],
                    value.get("person"))


@dataclass(frozen=True)
class Region:
    """An ignore region: part of a frame too crowded or too small to label, left out of training.

    ``polygons`` are flat ``[x0, y0, x1, y1, ...]`` lists in image pixels (a rectangle is four
    corners); ``extra`` keeps the fields of an imported COCO crowd annotation for the round trip.
    """

    id: int
    frame_id: int
    polygons: tuple[tuple[float, ...], ...]
    extra: Mapping[str, Any] = field(default_factory=dict)

    def to_value(self) -> dict[str, Any]:
        return {"polygons": [list(p) for p in self.polygons], "extra": dict(self.extra)}

    @staticmethod
    def from_value(region_id: int, frame_id: int, value: Mapping[str, Any]) -> Region:
        return Region(region_id, frame_id,
                      tuple(tuple(float(v) for v in p) for p in value["polygons"]),
                      dict(value.get("extra") or {}))


#: How a frame's auto-labels were grouped from the network's maps (:attr:`Frame.grouping`):
#: each frame on its own, or each sequence in order with the frame before.
GROUPED_ALONE = "alone"
GROUPED_FRAME_BEFORE = "frame-before"
GROUPINGS = (GROUPED_ALONE, GROUPED_FRAME_BEFORE)


@dataclass(frozen=True)
class Frame:
    """One image of the project.

    ``path`` is relative to the project folder (or absolute); ``file_name`` is the name the
    frame has in COCO files (relative to the images folder it was registered from). ``status``
    is ``"ok"``, ``"missing"``, ``"corrupt"`` or ``"oversized"`` (over the pixel limit). Video
    frames carry their index and time (s); ``grouping`` says how the auto-labels were grouped.
    """

    id: int
    path: str
    file_name: str
    width: int
    height: int
    state: FrameState = FrameState.UNTOUCHED
    status: str = "ok"
    video_index: int | None = None
    timestamp: float | None = None
    suspicion: float | None = None
    #: How the frame's auto-labels were grouped from the network's maps: ``"alone"`` (each
    #: frame on its own: ``import-maps``, ``prelabel``), ``"frame-before"`` (``import-maps
    #: --frame-before``: in order with the frame before, in runs, see
    #: :func:`app.jobs_analysis.import_maps`), or None: no record (labels imported from COCO,
    #: drawn by hand, or grouped before the record existed). Triage weighs by it
    #: (:func:`app.analysis.triage.combine.weight_set`).
    grouping: str | None = None


@dataclass(frozen=True)
class FrameLabels:
    """Everything an edit can touch in one frame: its people, state, notes and ignore regions."""

    frame_id: int
    skeleton: Skeleton
    people: Mapping[int, Person]
    state: FrameState = FrameState.UNTOUCHED
    notes: Mapping[int, Note] = field(default_factory=dict)
    regions: Mapping[int, Region] = field(default_factory=dict)
    #: For each reviewer's version kept beside a disputed frame (by its id), the joints for
    #: which ours was chosen (see :class:`app.model.edits.KeepOurs`).
    kept: Mapping[int, frozenset[int]] = field(default_factory=dict)
    #: Findings dismissed as "not a problem", by the fingerprint of the labels they were about
    #: (see :class:`app.model.edits.DismissFinding`): what was dismissed, by whom and when.
    dismissed: Mapping[str, Mapping[str, Any]] = field(default_factory=dict)

    @property
    def num_joints(self) -> int:
        return self.skeleton.num_joints

    def person(self, person_id: int) -> Person:
        try:
            return self.people[person_id]
        except KeyError:
            raise EditRefused(f"frame {self.frame_id} has no person #{person_id}") from None

    def same_as(self, other: FrameLabels) -> bool:
        return (
            self.frame_id == other.frame_id
            and self.state == other.state
            and self.people.keys() == other.people.keys()
            and all(p.same_as(other.people[i]) for i, p in self.people.items())
            and dict(self.notes) == dict(other.notes)
            and dict(self.regions) == dict(other.regions)
            and dict(self.kept) == dict(other.kept)
            and dict(self.dismissed) == dict(other.dismissed)
        )
