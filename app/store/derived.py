"""Data derived from the labels and the maps, kept beside them but never in the ledger:
triage results and where each frame's network maps are. Either can be recomputed at any time.
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from typing import Any

from app.store.db import Tx

#: A frame's suspicion score and its reasons (JSON objects).
TriageResult = tuple[float, list[dict[str, Any]]]


class TriageGateway:
    def __init__(self, tx: Tx):
        self._tx = tx

    def of_frame(self, frame_id: int) -> TriageResult | None:
        row = self._tx.row("SELECT score, reasons FROM triage WHERE frame_id = ?",
                           (int(frame_id),))
        return None if row is None else (row[0], json.loads(row[1]))

    def all(self) -> dict[int, TriageResult]:
        return {r[0]: (r[1], json.loads(r[2])) for r in self._tx.rows(
            "SELECT frame_id, score, reasons FROM triage")}

    def store(self, results: dict[int, TriageResult], computed: float) -> None:
        """Replace the results of the given frames."""
        self._tx.run_many(
            "INSERT INTO triage (frame_id, score, reasons, computed) VALUES (?, ?, ?, ?) "
            "ON CONFLICT (frame_id) DO UPDATE SET score = excluded.score, "
            "reasons = excluded.reasons, computed = excluded.computed",
            [(int(f), float(score), json.dumps(reasons), computed)
             for f, (score, reasons) in results.items()])
        self._tx.event("triage", results)

    def rows_for_copy(self) -> list[tuple[Any, ...]]:
        return self._tx.rows("SELECT frame_id, score, reasons, computed FROM triage "
                             "ORDER BY frame_id")

    def insert_copied(self, rows: Sequence[Sequence[Any]]) -> None:
        self._tx.run_many("INSERT INTO triage (frame_id, score, reasons, computed) "
                          "VALUES (?, ?, ?, ?)", rows)


class MapsGateway:
    """Where each frame's network maps are (a path relative to the project's folder, or
    absolute) and their stride."""

    def __init__(self, tx: Tx):
        self._tx = tx

    def of_frame(self, frame_id: int) -> tuple[str, int] | None:
        row = self._tx.row("SELECT path, stride FROM maps WHERE frame_id = ?",
                           (int(frame_id),))
        return None if row is None else (str(row[0]), int(row[1]))

    def put(self, frame_id: int, path: str, stride: int) -> None:
        self._tx.run("INSERT INTO maps (frame_id, path, stride) VALUES (?, ?, ?) "
                     "ON CONFLICT (frame_id) DO UPDATE SET path = excluded.path, "
                     "stride = excluded.stride", (int(frame_id), path, int(stride)))

    def paths_like(self, prefix: str) -> list[str]:
        """The map paths that start with ``prefix``."""
        like = prefix.replace("\\", "\\\\").replace("%", "\\%").replace("_", "\\_") + "%"
        return [r[0] for r in self._tx.rows("SELECT path FROM maps WHERE path LIKE ? "
                                            "ESCAPE '\\'", (like,))]

    def rows_for_copy(self) -> list[tuple[Any, ...]]:
        return self._tx.rows("SELECT frame_id, path, stride FROM maps ORDER BY frame_id")

    def insert_copied(self, rows: Sequence[Sequence[Any]]) -> None:
        self._tx.run_many("INSERT INTO maps (frame_id, path, stride) VALUES (?, ?, ?)", rows)
