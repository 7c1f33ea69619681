"""Data derived from the labels and the maps, kept beside them but never in the ledger:
triage results and where each frame's network maps are. Either can be recomputed at any time.
"""

from __future__ import annotations

import json
from collections.abc import Iterable, Sequence
from typing import Any

from app.store.db import Tx

#: A frame's suspicion score and its reasons (JSON objects).
TriageResult = tuple[float, list[dict[str, Any]]]


def kind_rows(rows: Iterable[Sequence[Any]]) -> list[tuple[int, str, float]]:
    """The ``triage_kinds`` rows ``(frame id, kind, score)`` of triage rows ``(frame id,
    score, reasons as JSON text or a list)``: each kind once per frame.

    Examples
    --------
    >>> kind_rows([(3, 0.5, '[{"kind": "crowded"}, {"kind": "weak-limb"}, {"kind": "crowded"}]')])
    [(3, 'crowded', 0.5), (3, 'weak-limb', 0.5)]
    """
    out = []
    for fid, score, reasons in rows:
        found = json.loads(reasons) if isinstance(reasons, str) else reasons
        kinds = dict.fromkeys(str(r.get("kind", "other")) for r in found)
        out += [(int(fid), k, float(score)) for k in kinds]
    return out


#: A triage row keeps its frame's state (schema 8; :meth:`FramesGateway.set_state
#: <app.store.frames.FramesGateway.set_state>` keeps it up to date), read from the frame.
_STATE = "(SELECT state FROM frames WHERE frames.id = ?)"


class TriageGateway:
    def __init__(self, tx: Tx):
        self._tx = tx

    def of_frame(self, frame_id: int) -> TriageResult | None:
        row = self._tx.row("SELECT score, reasons FROM triage WHERE frame_id = ?",
                           (int(frame_id),))
        return None if row is None else (row[0], json.loads(row[1]))

    def of_frames(self, frame_ids: Sequence[int]) -> dict[int, TriageResult]:
        """The results of the given frames (those that have one), by frame id."""
        ids = [int(f) for f in frame_ids]
        if not ids:
            return {}
        return {r[0]: (r[1], json.loads(r[2])) for r in self._tx.rows(
            f"SELECT frame_id, score, reasons FROM triage WHERE frame_id IN "
            f"({', '.join('?' * len(ids))})", ids)}

    def all(self) -> dict[int, TriageResult]:
        return {r[0]: (r[1], json.loads(r[2])) for r in self._tx.rows(
            "SELECT frame_id, score, reasons FROM triage")}

    def store(self, results: dict[int, TriageResult], computed: float) -> None:
        """Replace the results of the given frames."""
        self._tx.run_many(
            f"INSERT INTO triage (frame_id, score, reasons, computed, state) VALUES "
            f"(?, ?, ?, ?, {_STATE}) ON CONFLICT (frame_id) DO UPDATE SET "
            "score = excluded.score, reasons = excluded.reasons, computed = excluded.computed, "
            "state = excluded.state",
            [(int(f), float(score), json.dumps(reasons), computed, int(f))
             for f, (score, reasons) in results.items()])
        self._store_kinds([(f, score, reasons) for f, (score, reasons) in results.items()])
        self._tx.event("triage", results)

    def _store_kinds(self, rows: Sequence[Sequence[Any]]) -> None:
        """Rewrite the ``triage_kinds`` rows of these triage rows' frames."""
        self._tx.run_many("DELETE FROM triage_kinds WHERE frame_id = ?",
                          [(int(r[0]),) for r in rows])
        self._tx.run_many("INSERT INTO triage_kinds (frame_id, kind, score) VALUES (?, ?, ?)",
                          kind_rows(rows))

    def rows_for_copy(self) -> list[tuple[Any, ...]]:
        return self._tx.rows("SELECT frame_id, score, reasons, computed FROM triage "
                             "ORDER BY frame_id")

    def insert_copied(self, rows: Sequence[Sequence[Any]]) -> None:
        """Copy triage rows ``(frame id, score, reasons, computed)`` in, after the frames."""
        self._tx.run_many("INSERT INTO triage (frame_id, score, reasons, computed, state) "
                          f"VALUES (?, ?, ?, ?, {_STATE})", [(*r, r[0]) for r in rows])
        self._store_kinds([r[:3] for r in rows])


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
