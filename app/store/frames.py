"""The frames of a project: one row per image, with its state, status and suspicion."""

from __future__ import annotations

import json
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from typing import Any, NamedTuple

from app.model.labels import Frame, FrameState
from app.store.db import Tx
from app.store.schema import FRAME_COLUMNS

_COLUMNS = ("frames.id, path, file_name, width, height, frames.state, status, video_index, "
            "timestamp, triage.score, frames.grouping")
#: The same for an older project opened read-only, whose frames have no ``grouping`` yet.
_COLUMNS_BEFORE_9 = _COLUMNS.replace("frames.grouping", "NULL")
_FROM = "frames LEFT JOIN triage ON triage.frame_id = frames.id"


@dataclass(frozen=True)
class NewFrame:
    """A frame to register: its image path (relative to the project folder, or absolute), the
    name COCO files know it by, its size and status; video frames carry index and time."""

    path: str
    file_name: str
    width: int
    height: int
    status: str = "ok"
    video_index: int | None = None
    timestamp: float | None = None
    state: FrameState = FrameState.UNTOUCHED


@dataclass(frozen=True)
class FrameQuery:
    """A page of the Worklist, sorted and filtered by the database.

    ``order`` is ``suspicion`` (most suspicious first, then by id) or ``id``; ``states``
    keeps frames in those states (None: all); ``reason`` keeps frames whose triage found a
    reason of that kind; ``offset`` and ``limit`` pick the page.
    """

    order: str = "suspicion"
    states: tuple[FrameState, ...] | None = None
    reason: str | None = None
    offset: int = 0
    limit: int | None = None


#: Beside a frame's columns, what a Worklist row shows: its triage reasons (JSON text), how
#: many findings are stored for it and whether its findings were ever computed.
_WORKLIST_COLUMNS = (
    ", triage.reasons, (SELECT count(*) FROM findings WHERE findings.frame_id = frames.id), "
    "(SELECT count(*) FROM findings_state WHERE findings_state.frame_id = frames.id)")


class WorklistEntry(NamedTuple):
    """One frame of a Worklist page: the frame, its triage result (score and reasons; None:
    never triaged) and how many findings are stored for it (None: never computed)."""

    frame: Frame
    triage: tuple[float, list[dict[str, Any]]] | None
    findings: int | None


def _frame(row: Sequence[Any]) -> Frame:
    return Frame(row[0], row[1], row[2], row[3], row[4], FrameState(row[5]), row[6], row[7],
                 row[8], row[9], row[10])


class FramesGateway:
    def __init__(self, tx: Tx):
        self._tx = tx
        self._columns = _COLUMNS if tx.frames_grouping else _COLUMNS_BEFORE_9

    def all(self) -> list[Frame]:
        """Every frame, by id."""
        return [_frame(r) for r in self._tx.rows(
            f"SELECT {self._columns} FROM {_FROM} ORDER BY frames.id")]

    def get(self, frame_id: int, lock: bool = False) -> Frame | None:
        """The frame; ``lock`` keeps other writers off its row until the transaction ends
        (on a server)."""
        lock_sql = " FOR UPDATE OF frames" if lock and self._tx.hosted else ""
        row = self._tx.row(f"SELECT {self._columns} FROM {_FROM} WHERE frames.id = ?" + lock_sql,
                           (int(frame_id),))
        return None if row is None else _frame(row)

    def lock(self, frame_ids: Iterable[int]) -> None:
        """Lock the frames' rows until the transaction ends (in id order, so that two
        writers never wait on each other in a circle); a no-op where one writer holds the
        whole database."""
        if self._tx.hosted:
            for fid in sorted({int(f) for f in frame_ids}):
                self._tx.row("SELECT id FROM frames WHERE id = ? FOR UPDATE", (fid,))

    def by_name(self, text: str) -> list[Frame]:
        """Frames whose file name or path is ``text``, else whose file name ends in
        ``/text``."""
        rows = self._tx.rows(f"SELECT {self._columns} FROM {_FROM} WHERE file_name = ? OR path = ?",
                             (text, text))
        if not rows:
            like = "%/" + text.replace("\\", "\\\\").replace("%", "\\%").replace("_", "\\_")
            rows = self._tx.rows(f"SELECT {self._columns} FROM {_FROM} "
                                 "WHERE file_name LIKE ? ESCAPE '\\'", (like,))
        return [_frame(r) for r in rows]

    def page(self, query: FrameQuery) -> list[Frame]:
        """The frames of one Worklist page (see :class:`FrameQuery`).

        A page in suspicion order is read in two parts: the triaged frames, most suspicious
        first, walking the index on the triage score (``triage_rank``; ``triage_state_rank``
        for a state, ``triage_kinds_rank`` for a reason kind), then the frames never triaged,
        by id. One query sorting the whole join (score NULL last) reads and sorts every frame
        for each page: for 100 of 100,000 frames in SQLite, 20 ms against 0.3 ms at the top
        and 56 ms against 12 ms half way down (``make bench``).
        """
        if query.order == "suspicion" and query.limit is not None:
            return [_frame(r) for r in self._suspicion_page(query)]
        sql = f"SELECT {self._columns} FROM {_FROM}"
        where, args = self._filters(query)
        if where is None:
            return []
        if where:
            sql += " WHERE " + " AND ".join(where)
        if query.order == "suspicion":
            sql += " ORDER BY CASE WHEN triage.score IS NULL THEN 1 ELSE 0 END, " \
                   "triage.score DESC, frames.id"
        else:
            sql += " ORDER BY frames.id"
        if query.limit is not None:
            sql += " LIMIT ? OFFSET ?"
            args += [int(query.limit), int(query.offset)]
        return [_frame(r) for r in self._tx.rows(sql, args)]

    def worklist(self, query: FrameQuery) -> list[WorklistEntry]:
        """One Worklist page: the frames of :meth:`page`, each with its triage result and
        its count of stored findings (see :class:`WorklistEntry`), in one query on the
        triaged frames (and one more where the page runs on into the frames never triaged):
        the frames, their triage rows and the counts joined to the page's rows only."""
        if query.order == "suspicion" and query.limit is not None:
            rows = self._suspicion_page(query, _WORKLIST_COLUMNS)
        else:
            ids = [f.id for f in self.page(query)]
            found = {r[0]: r for r in self._tx.rows(
                f"SELECT {self._columns}{_WORKLIST_COLUMNS} FROM {_FROM} WHERE frames.id IN "
                f"({', '.join('?' * len(ids))})", ids)} if ids else {}
            rows = [found[i] for i in ids]
        return [WorklistEntry(
            _frame(r), None if r[11] is None else (r[9], json.loads(r[11])),
            int(r[12]) if r[12] or r[13] else None) for r in rows]

    @staticmethod
    def _triaged(query: FrameQuery) -> tuple[str, list[Any]] | None:
        """``FROM ... WHERE ...`` of the triaged frames the query keeps (their score and id as
        ``triage.score`` and ``triage.frame_id``); None when nothing can match."""
        conds: list[str] = []
        args: list[Any] = []
        source = "triage"
        if query.reason is not None:
            source = "triage_kinds triage"
            conds.append("triage.kind = ?")
            args.append(str(query.reason))
        if query.states is not None:
            states = [FrameState(s).value for s in query.states]
            if not states:
                return None
            marks = ", ".join("?" * len(states))
            if query.reason is None:
                # The frame's state is kept on its triage row (schema 8), so that a state's
                # frames are walked in order off the index ``triage_state_rank``.
                conds.append(f"triage.state IN ({marks})")
            else:
                # The frames' rows are joined only where the state needs them, so that the
                # rows skipped by an offset are read from the index alone.
                source += " JOIN frames ON frames.id = triage.frame_id"
                conds.append(f"frames.state IN ({marks})")
            args += states
        return f"FROM {source} WHERE " + (" AND ".join(conds) or "1 = 1"), args

    @staticmethod
    def _untriaged(query: FrameQuery) -> tuple[str, list[Any]] | None:
        """``FROM ... WHERE ...`` of the frames never triaged that the query keeps (none when
        it asks for a reason kind: only triage finds reasons)."""
        if query.reason is not None:
            return None
        sql = "FROM frames WHERE NOT EXISTS (SELECT 1 FROM triage WHERE triage.frame_id = " \
              "frames.id)"
        args: list[Any] = []
        if query.states is not None:
            states = [FrameState(s).value for s in query.states]
            if not states:
                return None
            sql += f" AND frames.state IN ({', '.join('?' * len(states))})"
            args += states
        return sql, args

    def _count(self, part: tuple[str, list[Any]] | None, cond: str = "",
               extra: Sequence[Any] = ()) -> int:
        if part is None:
            return 0
        return int(self._tx.value(f"SELECT count(*) {part[0]}{cond}", [*part[1], *extra],
                                  default=0))

    def _suspicion_page(self, query: FrameQuery, extra: str = "") -> list[Any]:
        """The rows (:data:`_COLUMNS`, then ``extra``) of one page in suspicion order. The
        page's ids are picked off an index in a subquery, and only its rows are joined to
        the frames and triage rows and given ``extra`` (so that the rows an offset skips
        cost an index entry each)."""
        limit, offset = int(query.limit or 0), max(0, int(query.offset))
        if limit <= 0:
            return []
        rows: list[Any] = []
        triaged = self._triaged(query)
        if triaged is not None:
            ranked = (f"SELECT triage.frame_id AS frame_id, triage.score AS score {triaged[0]} "
                      "ORDER BY triage.score DESC, triage.frame_id LIMIT ? OFFSET ?")
            rows = list(self._tx.rows(
                f"SELECT {self._columns}{extra} FROM ({ranked}) ranked JOIN frames ON frames.id = "
                "ranked.frame_id JOIN triage ON triage.frame_id = ranked.frame_id "
                "ORDER BY ranked.score DESC, ranked.frame_id", [*triaged[1], limit, offset]))
        untriaged = self._untriaged(query)
        if len(rows) < limit and untriaged is not None:
            # The page runs past the triaged frames into those never triaged.
            skip = 0 if rows else offset - self._count(triaged)
            picked = (f"SELECT frames.id AS id {untriaged[0]} ORDER BY frames.id "
                      "LIMIT ? OFFSET ?")
            rows += self._tx.rows(
                f"SELECT {self._columns}{extra} FROM ({picked}) picked JOIN frames ON frames.id = "
                "picked.id LEFT JOIN triage ON triage.frame_id = frames.id ORDER BY frames.id",
                [*untriaged[1], limit - len(rows), max(0, skip)])
        return rows

    def count(self, query: FrameQuery) -> int:
        """How many frames the query keeps (its offset and limit aside)."""
        if query.reason is not None:
            return self._count(self._triaged(query))
        return self._count(self._in_states(query))

    @staticmethod
    def _in_states(query: FrameQuery) -> tuple[str, list[Any]] | None:
        """``FROM ... WHERE ...`` of every frame in the query's states, triaged or not."""
        if query.states is None:
            return "FROM frames WHERE 1 = 1", []
        states = [FrameState(s).value for s in query.states]
        if not states:
            return None
        return f"FROM frames WHERE frames.state IN ({', '.join('?' * len(states))})", states

    def position(self, query: FrameQuery, frame_id: int) -> int | None:
        """Where the frame stands (0-based) among those the query keeps, in its order; None
        when the query does not keep it. Counted through the same indexes as a page."""
        fid = int(frame_id)
        if query.order != "suspicion":
            where, args = self._filters(query)
            if where is None:
                return None
            cond = "".join(f" AND {w}" for w in where)
            part = (f"FROM {_FROM} WHERE 1 = 1{cond}", args)
            if not self._count(part, " AND frames.id = ?", (fid,)):
                return None
            return self._count(part, " AND frames.id < ?", (fid,))
        triaged, untriaged = self._triaged(query), self._untriaged(query)
        if triaged is not None:
            score = self._tx.value(f"SELECT triage.score {triaged[0]} AND triage.frame_id = ?",
                                   [*triaged[1], fid])
            if score is not None:
                return (self._count(triaged, " AND triage.score > ?", (score,))
                        + self._count(triaged, " AND triage.score = ? AND triage.frame_id < ?",
                                      (score, fid)))
        if untriaged is None or not self._count(untriaged, " AND frames.id = ?", (fid,)):
            return None
        # The frames never triaged before it: those in its states before it, less the triaged
        # ones (two counts of index ranges, not a scan of the frames for the ones untriaged).
        before = self._count(self._in_states(query), " AND frames.id < ?", (fid,)) \
            - self._count(triaged, " AND triage.frame_id < ?", (fid,))
        return self._count(triaged) + before

    def ordered_ids(self, query: FrameQuery) -> list[int]:
        """The ids of every frame the query keeps, in its order (offset and limit aside)."""
        if query.order != "suspicion":
            return [f.id for f in self.page(FrameQuery("id", query.states, query.reason))]
        out: list[int] = []
        triaged, untriaged = self._triaged(query), self._untriaged(query)
        if triaged is not None:
            out += [int(r[0]) for r in self._tx.rows(
                f"SELECT triage.frame_id {triaged[0]} ORDER BY triage.score DESC, "
                "triage.frame_id", triaged[1])]
        if untriaged is not None:
            out += [int(r[0]) for r in self._tx.rows(
                f"SELECT frames.id {untriaged[0]} ORDER BY frames.id", untriaged[1])]
        return out

    def kind_counts(self) -> dict[str, int]:
        """How many frames have a triage reason of each kind (through ``triage_kinds``)."""
        return {str(k): int(n) for k, n in self._tx.rows(
            "SELECT kind, count(*) FROM triage_kinds GROUP BY kind")}

    def any_triaged(self) -> bool:
        """Whether any frame has a triage result."""
        return self._tx.value("SELECT 1 FROM triage LIMIT 1") is not None

    @staticmethod
    def _filters(query: FrameQuery) -> tuple[list[str] | None, list[Any]]:
        """The query's conditions on ``frames LEFT JOIN triage`` and their arguments; None
        when nothing can match."""
        where: list[str] = []
        args: list[Any] = []
        if query.states is not None:
            states = [FrameState(s).value for s in query.states]
            if not states:
                return None, []
            where.append(f"frames.state IN ({', '.join('?' * len(states))})")
            args += states
        if query.reason is not None:
            where.append("frames.id IN (SELECT frame_id FROM triage_kinds WHERE kind = ?)")
            args.append(str(query.reason))
        return where, args

    def ids(self) -> list[int]:
        return [r[0] for r in self._tx.rows("SELECT id FROM frames ORDER BY id")]

    def paths(self) -> set[str]:
        return {r[0] for r in self._tx.rows("SELECT path FROM frames")}

    def top_id(self) -> int:
        return int(self._tx.value("SELECT max(id) FROM frames", default=0))

    def insert(self, frames: Sequence[NewFrame], first_id: int) -> list[int]:
        """Register ``frames`` with ids ``first_id, first_id + 1, ...``; returns the ids."""
        ids = list(range(first_id, first_id + len(frames)))
        self._tx.run_many(
            "INSERT INTO frames (id, path, file_name, width, height, state, status, "
            "video_index, timestamp) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)",
            [(i, f.path, f.file_name, int(f.width), int(f.height), FrameState(f.state).value,
              f.status, f.video_index, f.timestamp) for i, f in zip(ids, frames)])
        self._tx.event("frames", ids)
        return ids

    def insert_with_ids(self, frames: Sequence[tuple[int, NewFrame]]) -> None:
        """Register frames that come with their ids (a review packet's)."""
        self._tx.run_many(
            "INSERT INTO frames (id, path, file_name, width, height, state, status, "
            "video_index, timestamp) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?)",
            [(i, f.path, f.file_name, int(f.width), int(f.height), FrameState(f.state).value,
              f.status, f.video_index, f.timestamp) for i, f in frames])
        self._tx.event("frames", [i for i, _ in frames])

    def set_state(self, frame_id: int, state: FrameState) -> None:
        """Set the frame's state, on its triage row too (kept there for the index)."""
        self._tx.run("UPDATE frames SET state = ? WHERE id = ?", (state.value, int(frame_id)))
        self._tx.run("UPDATE triage SET state = ? WHERE frame_id = ?",
                     (state.value, int(frame_id)))

    def set_status(self, frame_id: int, status: str) -> None:
        self._tx.run("UPDATE frames SET status = ? WHERE id = ?", (status, int(frame_id)))
        self._tx.event("frames", [frame_id])

    def set_file_name(self, frame_id: int, file_name: str) -> None:
        self._tx.run("UPDATE frames SET file_name = ? WHERE id = ?",
                     (file_name, int(frame_id)))

    def set_extra(self, frame_id: int, extra: dict[str, Any]) -> None:
        """Replace the fields of an imported COCO image record kept for the round trip."""
        self._tx.run("UPDATE frames SET extra = ? WHERE id = ?",
                     (json.dumps(extra, allow_nan=False), int(frame_id)))

    def set_grouping(self, frame_ids: Iterable[int], grouping: str | None) -> None:
        """Record how the auto-labels of ``frame_ids`` were grouped (``alone``,
        ``frame-before``; None: no record, for labels from elsewhere)."""
        self._tx.run_many("UPDATE frames SET grouping = ? WHERE id = ?",
                          [(grouping, int(f)) for f in frame_ids])

    def groupings(self) -> dict[int, str]:
        """How each frame's auto-labels were grouped, for the frames that record it."""
        return {int(r[0]): str(r[1]) for r in self._tx.rows(
            "SELECT id, grouping FROM frames WHERE grouping IS NOT NULL")} \
            if self._tx.frames_grouping else {}

    def extras(self) -> dict[int, dict[str, Any]]:
        """Fields of imported COCO image records kept for the round trip, by frame id."""
        return {r[0]: json.loads(r[1]) for r in self._tx.rows(
            "SELECT id, extra FROM frames WHERE extra IS NOT NULL")}

    def rows_for_copy(self) -> list[tuple[Any, ...]]:
        """Every column of every frame, for copying the project elsewhere."""
        return self._tx.rows("SELECT id, path, file_name, width, height, state, status, "
                             "video_index, timestamp, extra, "
                             + ("grouping" if self._tx.frames_grouping else "NULL")
                             + " FROM frames ORDER BY id")

    def insert_copied(self, rows: Sequence[Sequence[Any]]) -> None:
        self._tx.run_many("INSERT INTO frames (id, path, file_name, width, height, state, "
                          "status, video_index, timestamp, extra, grouping) "
                          "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)", rows)

    def rekey(self, mapping: dict[int, int]) -> None:
        """Give frames new ids (``old -> new``), everywhere they are referenced."""
        mapping = {o: n for o, n in mapping.items() if o != n}
        if not mapping:
            return
        # Two steps through temporary ids below every id in use and every new one, so that
        # swaps, chains and negative ids cannot collide.
        low = min(int(self._tx.value("SELECT min(id) FROM frames", default=0)),
                  *mapping.values(), 0)
        temporary = {o: low - 1 - n for n, o in enumerate(mapping)}
        for pairs in ([(o, temporary[o]) for o in mapping],
                      [(temporary[o], n) for o, n in mapping.items()]):
            for table, col in [("frames", "id")] + [(t, "frame_id") for t in FRAME_COLUMNS]:
                self._tx.run_many(f"UPDATE {table} SET {col} = ? WHERE {col} = ?",
                                  [(b, a) for a, b in pairs])
        self._tx.event("frames", mapping.values())

    def counts(self) -> dict[str, int]:
        """How many frames, how many of them unreadable, and how many per state."""
        tx = self._tx
        out = {"frames": int(tx.value("SELECT count(*) FROM frames", default=0)),
               "unreadable images": int(tx.value(
                   "SELECT count(*) FROM frames WHERE status != 'ok'", default=0))}
        for state, n in tx.rows("SELECT state, count(*) FROM frames GROUP BY state"):
            out[state] = int(n)
        return out
