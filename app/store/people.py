"""The people of a project: one row per person, joints as exact little-endian float64 bytes."""

from __future__ import annotations

import json
from collections import Counter
from collections.abc import Iterable, Sequence
from typing import Any

import numpy as np

from app.errors import BadInput
from app.model.labels import Person
from app.store.db import Tx

COLUMNS = "id, keypoints, scores, sources, origin, score, extra, track, track_source"
#: How many rows one batch of a bulk insert sends (a streaming import writes in such batches
#: inside one transaction).
BATCH = 2000


def encode_person(p: Person) -> tuple[Any, ...]:
    """``(id, keypoints, scores, sources, origin, score, extra, track, track_source)`` as
    stored."""
    kp = np.ascontiguousarray(p.keypoints, dtype="<f8")
    scores = None if np.isnan(p.scores).all() else np.ascontiguousarray(p.scores, "<f8").tobytes()
    origin = p.sources[0] if p.sources else ""
    sources = None if p.sources.count(origin) == len(p.sources) else json.dumps(list(p.sources))
    extra = json.dumps(dict(p.extra)) if p.extra else None
    return (p.id, kp.tobytes(), scores, sources, origin, p.score, extra,
            None if p.track is None else int(p.track), p.track_source or None)


def decode_person(row: Sequence[Any], num_joints: int) -> Person:
    pid, kp_blob, scores_blob, sources, origin, score, extra, track, track_source = row
    kp = np.frombuffer(bytes(kp_blob), dtype="<f8").reshape(num_joints, 3).copy()
    if scores_blob is None:
        scores = np.full(num_joints, np.nan)
    else:
        scores = np.frombuffer(bytes(scores_blob), dtype="<f8").copy()
    src = tuple(json.loads(sources)) if sources else (origin,) * num_joints
    return Person(pid, kp, scores, src, score, json.loads(extra) if extra else {},
                  None if track is None else int(track),
                  "" if track is None else (track_source or ""))


class PeopleGateway:
    def __init__(self, tx: Tx):
        self._tx = tx

    def of_frame(self, frame_id: int, num_joints: int, lock: bool = False) -> list[Person]:
        """The people of a frame, by id; ``lock`` keeps other writers off their rows until
        the transaction ends (on a server)."""
        lock_sql = " FOR UPDATE" if lock and self._tx.hosted else ""
        rows = self._tx.rows(f"SELECT {COLUMNS} FROM people WHERE frame_id = ? ORDER BY id"
                             + lock_sql, (int(frame_id),))
        return [decode_person(r, num_joints) for r in rows]

    def by_frame(self, num_joints: int) -> dict[int, list[Person]]:
        """Every person grouped by frame id."""
        out: dict[int, list[Person]] = {}
        for row in self._tx.rows(f"SELECT frame_id, {COLUMNS} FROM people "
                                 "ORDER BY frame_id, id"):
            out.setdefault(row[0], []).append(decode_person(row[1:], num_joints))
        return out

    def of_frames(self, frame_ids: Iterable[int], num_joints: int) -> dict[int, list[Person]]:
        """The people of the given frames grouped by frame id (frames without any left
        out), each frame's by id as :meth:`by_frame` gives them."""
        out: dict[int, list[Person]] = {}
        for row in self._tx.rows_in(f"SELECT frame_id, {COLUMNS} FROM people WHERE frame_id "
                                    "IN ({values}) ORDER BY frame_id, id",
                                    sorted({int(f) for f in frame_ids})):
            out.setdefault(row[0], []).append(decode_person(row[1:], num_joints))
        return out

    def tracks(self) -> dict[int, dict[int, int]]:
        """Frame id -> {person id: track} of every person on a track (no joints read)."""
        out: dict[int, dict[int, int]] = {}
        for f, pid, t in self._tx.rows("SELECT frame_id, id, track FROM people "
                                       "WHERE track IS NOT NULL ORDER BY frame_id, id"):
            out.setdefault(int(f), {})[int(pid)] = int(t)
        return out

    def frames_with_people(self) -> set[int]:
        return {r[0] for r in self._tx.rows("SELECT DISTINCT frame_id FROM people")}

    def count(self) -> int:
        return int(self._tx.value("SELECT count(*) FROM people", default=0))

    def existing_ids(self, ids: Iterable[int]) -> set[int]:
        return {r[0] for r in self._tx.rows_in("SELECT id FROM people WHERE id IN ({values})",
                                                [int(i) for i in ids])}

    def insert(self, rows: Iterable[tuple[int, Person]]) -> int:
        """Insert people ``(frame_id, person)`` whose ids are new, in batches; returns how
        many."""
        return self.insert_encoded((f, *encode_person(p)) for f, p in rows)

    def insert_encoded(self, rows: Iterable[Sequence[Any]]) -> int:
        """Insert pre-encoded rows ``(frame_id, id, keypoints, scores, sources, origin, score,
        extra, track, track_source)`` in batches of :data:`BATCH`; returns how many. A person
        id already in the project is refused (:class:`~app.errors.BadInput`)."""
        n = 0
        batch: list[Sequence[Any]] = []
        frames: set[int] = set()
        for row in rows:
            batch.append(row)
            frames.add(int(row[0]))
            if len(batch) == BATCH:
                n += self._insert(batch)
                batch = []
        n += self._insert(batch)
        self._tx.event("import", frames)
        return n

    def _insert(self, rows: list[Sequence[Any]]) -> int:
        if not rows:
            return 0
        ids = [int(r[1]) for r in rows]
        dup = self.existing_ids(ids) | {i for i, n in Counter(ids).items() if n > 1}
        if dup:
            raise BadInput(f"a person id is already in the project (id {min(dup)})")
        self._tx.run_many(f"INSERT INTO people (frame_id, {COLUMNS}) "
                          "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?)", rows)
        return len(rows)

    def put(self, frame_id: int, person: Person) -> None:
        """Write a person (new or changed)."""
        self._tx.run(
            f"INSERT INTO people (frame_id, {COLUMNS}) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?) "
            "ON CONFLICT (id) DO UPDATE SET frame_id = excluded.frame_id, "
            "keypoints = excluded.keypoints, scores = excluded.scores, "
            "sources = excluded.sources, origin = excluded.origin, score = excluded.score, "
            "extra = excluded.extra, track = excluded.track, "
            "track_source = excluded.track_source", (int(frame_id), *encode_person(person)))

    def set_tracks(self, rows: Iterable[tuple[int, int | None, str]]) -> int:
        """Write ``(person id, track, who set it)`` for many people at once (linking a whole
        sequence); returns how many rows were given."""
        params = [(None if t is None else int(t), s if t is not None else None, int(pid))
                  for pid, t, s in rows]
        self._tx.run_many("UPDATE people SET track = ?, track_source = ? WHERE id = ?", params)
        return len(params)

    def delete(self, person_id: int) -> None:
        self._tx.run("DELETE FROM people WHERE id = ?", (int(person_id),))

    def rows_for_copy(self) -> list[tuple[Any, ...]]:
        return self._tx.rows(f"SELECT frame_id, {COLUMNS} FROM people ORDER BY id")
