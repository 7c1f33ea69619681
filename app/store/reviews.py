"""Review records: packets sent and merged, the reviewer's versions of disputed people
(alternatives) and, in a project opened from a packet, the reviewer's decisions."""

from __future__ import annotations

import json
from collections.abc import Iterable, Sequence
from typing import Any

from app.model.labels import Person
from app.model.records import Alternative, FrameDecision, PacketRecord
from app.store.db import Tx


def _person(pid: int, text: str | None) -> Person | None:
    return None if text is None else Person.from_value(pid, json.loads(text))


def _value(person: Person | None) -> str | None:
    return None if person is None else json.dumps(person.to_value())


class PacketsGateway:
    def __init__(self, tx: Tx):
        self._tx = tx

    def find(self, packet_id: str, direction: str, reviewer: str | None = None,
             sha256: str | None = None) -> list[PacketRecord]:
        """The records of a packet in one direction, newest first (optionally only one
        reviewer's, or only those with one SHA-256)."""
        sql = ("SELECT packet_id, direction, sha256, reviewer, time, frames, report, audit "
               "FROM packets WHERE packet_id = ? AND direction = ?")
        args: list[Any] = [packet_id, direction]
        if reviewer is not None:
            sql += " AND reviewer = ?"
            args.append(reviewer)
        if sha256 is not None:
            sql += " AND sha256 = ?"
            args.append(sha256)
        return [PacketRecord(r[0], r[1], r[2], r[3], float(r[4]),
                             tuple(json.loads(r[5])), json.loads(r[6] or "{}"),
                             tuple(json.loads(r[7] or "[]")))
                for r in self._tx.rows(sql + " ORDER BY time DESC", args)]

    def add(self, record: PacketRecord) -> None:
        self._tx.run("INSERT INTO packets (packet_id, direction, sha256, reviewer, time, "
                     "frames, report, audit) VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
                     (record.packet_id, record.direction, record.sha256, record.reviewer,
                      record.time, json.dumps(list(record.frames)),
                      json.dumps(record.report),
                      json.dumps(list(record.audit)) if record.audit else None))

    def rows_for_copy(self) -> list[tuple[Any, ...]]:
        return self._tx.rows("SELECT packet_id, direction, sha256, reviewer, time, frames, "
                             "report, audit FROM packets ORDER BY time")

    def insert_copied(self, rows: Sequence[Sequence[Any]]) -> None:
        self._tx.run_many("INSERT INTO packets (packet_id, direction, sha256, reviewer, time, "
                          "frames, report, audit) VALUES (?, ?, ?, ?, ?, ?, ?, ?)", rows)


class AlternativesGateway:
    def __init__(self, tx: Tx):
        self._tx = tx

    def open_for(self, frame_id: int) -> list[Alternative]:
        """The frame's alternatives still standing (not retired), by person."""
        return [Alternative(r[0], r[1], r[2], r[3], r[4], r[5], _person(r[2], r[6]),
                            _person(r[2], r[7]), frozenset(json.loads(r[8])), r[9])
                for r in self._tx.rows(
                    "SELECT id, frame_id, person_id, packet_id, reviewer, kind, base, theirs, "
                    "kept, created FROM alternatives WHERE frame_id = ? AND retired IS NULL "
                    "ORDER BY person_id, id", (int(frame_id),))]

    def kept(self, frame_id: int) -> dict[int, frozenset[int]]:
        """Joints settled as ours, per reviewer's version still standing beside the frame."""
        return {r[0]: frozenset(json.loads(r[1])) for r in self._tx.rows(
            "SELECT id, kept FROM alternatives WHERE frame_id = ? AND retired IS NULL",
            (int(frame_id),))}

    def set_kept(self, alternative_id: int, joints: Iterable[int]) -> None:
        self._tx.run("UPDATE alternatives SET kept = ? WHERE id = ?",
                     (json.dumps(sorted(joints)), int(alternative_id)))

    def retire(self, frame_id: int, when: float, packet_id: str | None = None,
               reviewer: str | None = None, other_packets_than: str | None = None) -> None:
        """Retire the frame's standing alternatives: those of one packet and reviewer, or
        those of every packet but one."""
        sql = "UPDATE alternatives SET retired = ? WHERE frame_id = ? AND retired IS NULL"
        args: list[Any] = [when, int(frame_id)]
        if packet_id is not None:
            sql += " AND packet_id = ?"
            args.append(packet_id)
        if reviewer is not None:
            sql += " AND reviewer = ?"
            args.append(reviewer)
        if other_packets_than is not None:
            sql += " AND packet_id != ?"
            args.append(other_packets_than)
        self._tx.run(sql, args)

    def put(self, frame_id: int, person_id: int, packet_id: str, reviewer: str, created: float,
            kind: str, base: Person | None, theirs: Person | None) -> None:
        """Keep the reviewer's version of a person (replacing the packet's earlier one)."""
        self._tx.run(
            "INSERT INTO alternatives (frame_id, person_id, packet_id, reviewer, created, kind, "
            "base, theirs, kept, retired) VALUES (?, ?, ?, ?, ?, ?, ?, ?, '[]', NULL) "
            "ON CONFLICT (packet_id, frame_id, person_id) DO UPDATE SET "
            "reviewer = excluded.reviewer, created = excluded.created, kind = excluded.kind, "
            "base = excluded.base, theirs = excluded.theirs, kept = '[]', retired = NULL",
            (int(frame_id), int(person_id), packet_id, reviewer, created, kind, _value(base),
             _value(theirs)))

    def rows_for_copy(self) -> list[tuple[Any, ...]]:
        return self._tx.rows("SELECT id, frame_id, person_id, packet_id, reviewer, created, "
                             "kind, base, theirs, kept, retired FROM alternatives ORDER BY id")

    def insert_copied(self, rows: Sequence[Sequence[Any]]) -> None:
        self._tx.run_many("INSERT INTO alternatives (id, frame_id, person_id, packet_id, "
                          "reviewer, created, kind, base, theirs, kept, retired) "
                          "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)", rows)


class DecisionsGateway:
    def __init__(self, tx: Tx):
        self._tx = tx

    def all(self) -> dict[int, FrameDecision]:
        return {r[0]: FrameDecision(*r) for r in self._tx.rows(
            "SELECT frame_id, decision, author, time FROM review_decisions ORDER BY frame_id")}

    def put(self, decision: FrameDecision) -> None:
        self._tx.run("INSERT INTO review_decisions (frame_id, decision, author, time) "
                     "VALUES (?, ?, ?, ?) ON CONFLICT (frame_id) DO UPDATE SET "
                     "decision = excluded.decision, author = excluded.author, "
                     "time = excluded.time",
                     (decision.frame_id, decision.decision, decision.author, decision.time))

    def drop(self, frame_id: int) -> None:
        self._tx.run("DELETE FROM review_decisions WHERE frame_id = ?", (int(frame_id),))
