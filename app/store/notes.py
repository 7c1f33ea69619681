"""The notes of each frame's thread and the ignore regions of each frame."""

from __future__ import annotations

import json
from collections.abc import Iterable, Sequence
from typing import Any

from app.model.labels import Note, Region
from app.store.db import Tx

#: A region as stored: ``(region_id, polygons, extra)``.
RegionRow = tuple[int, list[list[float]], dict[str, Any]]


class NotesGateway:
    def __init__(self, tx: Tx):
        self._tx = tx

    def of_frame(self, frame_id: int) -> list[Note]:
        return [Note(*r) for r in self._tx.rows(
            "SELECT id, frame_id, author, time, text, person_id FROM notes "
            "WHERE frame_id = ? ORDER BY time, id", (int(frame_id),))]

    def count(self) -> int:
        return int(self._tx.value("SELECT count(*) FROM notes", default=0))

    def put(self, note: Note) -> None:
        self._tx.run("DELETE FROM notes WHERE id = ?", (note.id,))
        self._tx.run("INSERT INTO notes (id, frame_id, person_id, author, time, text) "
                     "VALUES (?, ?, ?, ?, ?, ?)",
                     (note.id, note.frame_id, note.person_id, note.author, note.time,
                      note.text))

    def delete(self, note_id: int) -> None:
        self._tx.run("DELETE FROM notes WHERE id = ?", (int(note_id),))

    def insert(self, notes: Iterable[Note]) -> None:
        """Insert notes that come with their ids (a review packet's)."""
        self._tx.run_many("INSERT INTO notes (id, frame_id, person_id, author, time, text) "
                          "VALUES (?, ?, ?, ?, ?, ?)",
                          [(n.id, n.frame_id, n.person_id, n.author, n.time, n.text)
                           for n in notes])

    def rows_for_copy(self) -> list[tuple[Any, ...]]:
        return self._tx.rows("SELECT id, frame_id, person_id, author, time, text FROM notes "
                             "ORDER BY id")

    def insert_copied(self, rows: Sequence[Sequence[Any]]) -> None:
        self._tx.run_many("INSERT INTO notes (id, frame_id, person_id, author, time, text) "
                          "VALUES (?, ?, ?, ?, ?, ?)", rows)


class RegionsGateway:
    def __init__(self, tx: Tx):
        self._tx = tx

    def of_frame(self, frame_id: int) -> list[RegionRow]:
        return [(r[0], json.loads(r[1]), json.loads(r[2] or "{}")) for r in self._tx.rows(
            "SELECT id, polygons, extra FROM regions WHERE frame_id = ? ORDER BY id",
            (int(frame_id),))]

    def by_frame(self) -> dict[int, list[RegionRow]]:
        out: dict[int, list[RegionRow]] = {}
        for f, rid, polys, extra in self._tx.rows(
                "SELECT frame_id, id, polygons, extra FROM regions ORDER BY frame_id, id"):
            out.setdefault(f, []).append((rid, json.loads(polys), json.loads(extra or "{}")))
        return out

    def put(self, region: Region) -> None:
        self._tx.run("DELETE FROM regions WHERE id = ?", (region.id,))
        self._tx.run("INSERT INTO regions (id, frame_id, polygons, extra) VALUES (?, ?, ?, ?)",
                     (region.id, region.frame_id,
                      json.dumps([list(p) for p in region.polygons]),
                      json.dumps(dict(region.extra))))

    def delete(self, region_id: int) -> None:
        self._tx.run("DELETE FROM regions WHERE id = ?", (int(region_id),))

    def add(self, rows: Iterable[tuple[int, Any, dict[str, Any]]]) -> int:
        """Add imported regions ``(frame_id, polygons, extra)`` (the database gives the ids);
        returns how many."""
        encoded = [(int(f), json.dumps(polys), json.dumps(extra)) for f, polys, extra in rows]
        self._tx.run_many("INSERT INTO regions (frame_id, polygons, extra) VALUES (?, ?, ?)",
                          encoded)
        self._tx.event("import", (r[0] for r in encoded))
        return len(encoded)

    def rows_for_copy(self) -> list[tuple[Any, ...]]:
        return self._tx.rows("SELECT id, frame_id, polygons, extra FROM regions ORDER BY id")

    def insert_copied(self, rows: Sequence[Sequence[Any]]) -> None:
        self._tx.run_many("INSERT INTO regions (id, frame_id, polygons, extra) "
                          "VALUES (?, ?, ?, ?)", rows)
