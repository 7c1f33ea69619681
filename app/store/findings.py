"""Findings and their dismissals.

Findings are derived data, like triage's scores: computed from the labels and the maps,
replaced whenever triage runs, never in the ledger; beside each frame's findings is the digest
of the labels they were computed from. Dismissals are written only by the ledger's edits
(:class:`app.model.edits.DismissFinding`), so that undo takes them back.
"""

from __future__ import annotations

import json
from collections.abc import Iterable, Mapping, Sequence
from typing import Any

from app.store.db import Tx


class FindingsGateway:
    def __init__(self, tx: Tx):
        self._tx = tx

    def of_frames(self, frame_id: int | None = None) -> dict[int, list[dict[str, Any]]]:
        """The stored findings, worst first, by frame id (one frame's with ``frame_id``); a
        frame whose findings were computed and found none maps to an empty list."""
        where, args = ("", ()) if frame_id is None else (" WHERE frame_id = ?", (int(frame_id),))
        out: dict[int, list[dict[str, Any]]] = {
            int(r[0]): [] for r in self._tx.rows("SELECT frame_id FROM findings_state" + where,
                                                 args)}
        for f, data in self._tx.rows("SELECT frame_id, data FROM findings" + where
                                     + " ORDER BY frame_id, position", args):
            out.setdefault(int(f), []).append(json.loads(data))
        return out

    def counts(self, frame_ids: Sequence[int] | None = None) -> dict[int, int]:
        """How many findings each frame (of ``frame_ids``; None: every frame) has stored (0
        for a frame whose findings were computed and found none; frames never computed are
        absent)."""
        where, args = "", [int(f) for f in frame_ids or ()]
        if frame_ids is not None:
            if not args:
                return {}
            where = f" WHERE frame_id IN ({', '.join('?' * len(args))})"
        out = {int(r[0]): 0 for r in self._tx.rows(
            f"SELECT frame_id FROM findings_state{where}", args)}
        out.update({int(f): int(n) for f, n in self._tx.rows(
            f"SELECT frame_id, COUNT(*) FROM findings{where} GROUP BY frame_id", args)})
        return out

    def digests(self, frame_id: int | None = None) -> dict[int, str]:
        """Per frame (one frame's with ``frame_id``), the digest of the labels its stored
        findings were computed from."""
        where, args = ("", ()) if frame_id is None else (" WHERE frame_id = ?", (int(frame_id),))
        return {int(r[0]): str(r[1]) for r in self._tx.rows(
            "SELECT frame_id, digest FROM findings_state" + where, args)}

    def store(self, results: Mapping[int, tuple[str, Sequence[Mapping[str, Any]]]],
              computed: float) -> None:
        """Replace the findings of the given frames, each with its labels' digest."""
        frames = [(int(f),) for f in results]
        self._tx.run_many("DELETE FROM findings WHERE frame_id = ?", frames)
        self._tx.run_many(
            "INSERT INTO findings_state (frame_id, digest, computed) VALUES (?, ?, ?) "
            "ON CONFLICT (frame_id) DO UPDATE SET digest = excluded.digest, "
            "computed = excluded.computed",
            [(int(f), digest, computed) for f, (digest, _) in results.items()])
        self._tx.run_many(
            "INSERT INTO findings (frame_id, position, id, kind, person_id, confidence, data) "
            "VALUES (?, ?, ?, ?, ?, ?, ?)",
            [(int(f), n, str(d["id"]), str(d["kind"]), d.get("person_id"),
              float(d.get("confidence") or 0.0), json.dumps(d))
             for f, (_, found) in results.items() for n, d in enumerate(found)])
        self._tx.event("triage", results)

    def rows_for_copy(self) -> tuple[list[tuple[Any, ...]], list[tuple[Any, ...]]]:
        return (self._tx.rows("SELECT frame_id, position, id, kind, person_id, confidence, "
                              "data FROM findings ORDER BY frame_id, position"),
                self._tx.rows("SELECT frame_id, digest, computed FROM findings_state "
                              "ORDER BY frame_id"))

    def insert_copied(self, rows: tuple[Sequence[Sequence[Any]],
                                        Sequence[Sequence[Any]]]) -> None:
        found, state = rows
        self._tx.run_many("INSERT INTO findings (frame_id, position, id, kind, person_id, "
                          "confidence, data) VALUES (?, ?, ?, ?, ?, ?, ?)", found)
        self._tx.run_many("INSERT INTO findings_state (frame_id, digest, computed) "
                          "VALUES (?, ?, ?)", state)


class DismissalsGateway:
    def __init__(self, tx: Tx):
        self._tx = tx

    def of_frame(self, frame_id: int) -> dict[str, dict[str, Any]]:
        return {str(r[0]): json.loads(r[1]) for r in self._tx.rows(
            "SELECT key, value FROM dismissals WHERE frame_id = ?", (int(frame_id),))}

    def keys(self) -> dict[int, set[str]]:
        out: dict[int, set[str]] = {}
        for f, key in self._tx.rows("SELECT frame_id, key FROM dismissals"):
            out.setdefault(int(f), set()).add(str(key))
        return out

    def keys_of_frames(self, frame_ids: Iterable[int]) -> dict[int, set[str]]:
        """:meth:`keys` of the given frames only."""
        out: dict[int, set[str]] = {}
        for f, key in self._tx.rows_in("SELECT frame_id, key FROM dismissals WHERE frame_id "
                                       "IN ({values})", sorted({int(f) for f in frame_ids})):
            out.setdefault(int(f), set()).add(str(key))
        return out

    def put(self, frame_id: int, key: str, value: Mapping[str, Any]) -> None:
        self._tx.run("INSERT INTO dismissals (key, frame_id, value) VALUES (?, ?, ?) "
                     "ON CONFLICT (key) DO UPDATE SET frame_id = excluded.frame_id, "
                     "value = excluded.value", (key, int(frame_id), json.dumps(dict(value))))

    def delete(self, keys: Iterable[str]) -> None:
        self._tx.run_many("DELETE FROM dismissals WHERE key = ?", [(k,) for k in keys])

    def rows_for_copy(self) -> list[tuple[Any, ...]]:
        return self._tx.rows("SELECT key, frame_id, value FROM dismissals ORDER BY key")

    def insert_copied(self, rows: Sequence[Sequence[Any]]) -> None:
        self._tx.run_many("INSERT INTO dismissals (key, frame_id, value) VALUES (?, ?, ?)",
                          rows)
