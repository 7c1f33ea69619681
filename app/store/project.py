"""The project on disk: a folder with ``project.db`` (SQLite, WAL) and images beside it.

Durability: the database runs in WAL mode with ``synchronous=FULL``. Every user action is one
``BEGIN IMMEDIATE ... COMMIT`` transaction, and with FULL the WAL is fsynced at each commit, so
an edit for which :meth:`Project.apply` has returned survives a kill -9 *and* a power cut (with
``synchronous=NORMAL`` WAL mode stays consistent but may lose the last commits on power loss,
which would break "never loses an edit"). SQLite's journal makes a crash at any other moment
lose at most the action in flight.

Locking: one process at a time edits a project. The writer holds an advisory lock
(``filelock``, an OS-level ``flock`` that the kernel releases when the process dies, so a crash
leaves no stale lock) on ``project.lock``; a second process gets the project read-only, with the
reason (who holds it, since when) in :attr:`Project.read_only_reason`. A project in a folder
that cannot be written (a read-only file system or folder) cannot be locked; it opens read-only
and the reason says so.

Interrupted runs: the process that takes the lock first makes the files beside the database
agree with it again (:mod:`app.store.recovery`: map runs rolled back or forward, unfinished
video extractions and stale lock notes removed) and says so in one log line.
"""

from __future__ import annotations

import contextlib
import errno
import getpass
import json
import logging
import os
import shutil
import socket
import sqlite3
import tempfile
import threading
import time
import uuid
from collections.abc import Callable, Iterable, Iterator, Sequence
from contextlib import contextmanager
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Any

import filelock
import numpy as np

from app.errors import BadInput, NotFound, PosewrightError, ReadOnly, StorageFailed
from app.formats.images import ImageInfo, find_images, probe_image
from app.formats.video import extract_frames, probe_video
from app.model.edits import (
    AddNote,
    AddRegion,
    Change,
    Edit,
    EditContext,
    Restore,
    apply_changes,
    labels_changed,
    needs_person_id,
    with_person_id,
)
from app.model.labels import Frame, FrameLabels, FrameState, Note, Person, Region
from app.model.skeleton import Skeleton, coco_body, skeleton_from_dict
from app.progress import Progress
from app.store import recovery
from app.store.schema import SCHEMA_VERSION, migrate, schema_version

log = logging.getLogger(__name__)

DB_NAME = "project.db"
LOCK_NAME = "project.lock"
HOLDER_NAME = "project.holder.json"
VIDEO_FRAMES = "frames"  # where frames extracted from videos go, inside the project folder
#: The first 16 bytes of every SQLite database file (https://sqlite.org/fileformat.html, 1.3.1).
SQLITE_HEADER = b"SQLite format 3\x00"
#: Frame and person ids are SQLite integers (64-bit, signed).
_SQLITE_INT = (-(2**63), 2**63 - 1)
# What opening for writing meets in a folder that cannot be written.
_NOT_WRITABLE = (errno.EROFS, errno.EACCES, errno.EPERM)


@dataclass(frozen=True)
class LedgerEntry:
    """One row of the ledger: an atomic change, part of the user action ``group_id``.

    ``kind`` is ``edit``, ``undo``, ``redo`` or ``import``; ``reverts`` names the group an
    undo or redo entry reverses.
    """

    seq: int
    group_id: int
    kind: str
    action: str
    summary: str
    author: str
    time: float
    frame_id: int | None
    target: str
    before: Any
    after: Any
    reverts: int | None


@dataclass(frozen=True)
class Applied:
    """What :meth:`Project.apply` did: the ledger group (None if nothing changed) and the
    changes, with ids the store filled in."""

    group_id: int | None
    changes: tuple[Change, ...]
    edit: Edit


def _target_text(target: tuple[Any, ...]) -> str:
    return Change(target, None, None).describe()


def _parse_target(text: str) -> tuple[Any, ...]:
    if text == "state":
        return ("state",)
    parts = text.split("/")
    kind, _, ident = parts[0].partition(":")
    if kind == "person" and len(parts) == 2:
        return ("joint", int(ident), int(parts[1].partition(":")[2]))
    if kind in ("person", "note", "region", "kept"):
        return (kind, int(ident))
    raise PosewrightError(f"ledger target {text!r} is not a change")


def _encode_person(p: Person) -> tuple[Any, ...]:
    kp = np.ascontiguousarray(p.keypoints, dtype="<f8")
    scores = None if np.isnan(p.scores).all() else np.ascontiguousarray(p.scores, "<f8").tobytes()
    origin = p.sources[0] if p.sources else ""
    sources = None if all(s == origin for s in p.sources) else json.dumps(list(p.sources))
    extra = json.dumps(dict(p.extra)) if p.extra else None
    return (p.id, kp.tobytes(), scores, sources, origin, p.score, extra)


def _decode_person(row: Sequence[Any], num_joints: int) -> Person:
    pid, kp_blob, scores_blob, sources, origin, score, extra = row
    kp = np.frombuffer(kp_blob, dtype="<f8").reshape(num_joints, 3).copy()
    if scores_blob is None:
        scores = np.full(num_joints, np.nan)
    else:
        scores = np.frombuffer(scores_blob, dtype="<f8").copy()
    src = tuple(json.loads(sources)) if sources else (origin,) * num_joints
    return Person(pid, kp, scores, src, score, json.loads(extra) if extra else {})


_PERSON_COLUMNS = "id, keypoints, scores, sources, origin, score, extra"
_FRAME_COLUMNS = ("frames.id, path, file_name, width, height, state, status, video_index, "
                  "timestamp, triage.score")
_FRAME_FROM = "frames LEFT JOIN triage ON triage.frame_id = frames.id"


def _frame_from_row(row: Sequence[Any]) -> Frame:
    return Frame(row[0], row[1], row[2], row[3], row[4], FrameState(row[5]), row[6], row[7], row[8],
                 row[9])


class Project:
    """A Posewright project. Open with :meth:`open`, make with :meth:`create`.

    The object is safe to use from several threads (calls are serialised); long work should
    still run off the UI thread.

    Examples
    --------
    >>> import tempfile
    >>> folder = tempfile.mkdtemp()
    >>> with Project.create(folder, author="ana") as p:
    ...     p.read_only, len(p.frames())
    (False, 0)
    """

    def __init__(self, folder: Path, conn: sqlite3.Connection, lock: filelock.BaseFileLock | None,
                 author: str, read_only_reason: str | None):
        self.folder = folder
        self._conn = conn
        self._lock = lock
        self.author = author
        self.read_only_reason = read_only_reason
        #: What opening cleaned up after an interrupted run (a phrase each; empty if nothing).
        self.recovered: tuple[str, ...] = ()
        self._mutex = threading.RLock()
        self._listeners: list[Callable[[str, frozenset[int]], None]] = []
        self._meta = dict(conn.execute("SELECT key, value FROM meta").fetchall())
        self.skeleton: Skeleton = skeleton_from_dict(json.loads(self._meta["skeleton"]))

    # ------------------------------------------------------------------ opening and closing

    @classmethod
    def create(
        cls,
        folder: str | Path,
        images: str | Path | None = None,
        skeleton: Skeleton | None = None,
        author: str | None = None,
        progress: Progress | None = None,
    ) -> Project:
        """Make a new project in ``folder`` (created if needed) and open it for editing.

        ``images``, if given, is a folder whose images are registered (recursively, sorted by
        relative path, ids 1, 2, ...). Refused if ``folder`` already holds a project.
        """
        folder = Path(folder)
        made = [p for p in (folder, *folder.parents) if not p.exists()]
        try:
            folder.mkdir(parents=True, exist_ok=True)
        except OSError as exc:
            raise BadInput(f"cannot make the folder ({exc.strerror})", where=str(folder)) \
                from None
        db = folder / DB_NAME
        if db.exists():
            raise BadInput("a project already exists here", where=str(folder))
        images_dir = Path(images) if images is not None else None
        if images_dir is not None and not images_dir.is_dir():
            _remove_made(made)
            raise BadInput("not a folder of images", where=str(images_dir))
        skeleton = skeleton or coco_body()
        lock = _take_lock(folder)
        if lock is None:
            raise BadInput("another process is creating or editing a project here",
                           where=str(folder))
        if db.exists():  # made by another process between the first look and the lock
            lock.release()
            raise BadInput("a project already exists here", where=str(folder))
        try:
            return cls._create_locked(folder, lock, images_dir, skeleton, author, progress)
        except BaseException as exc:
            # A project appears complete or not at all: nothing of a failed one stays.
            for name in (DB_NAME, DB_NAME + "-wal", DB_NAME + "-shm", HOLDER_NAME):
                (folder / name).unlink(missing_ok=True)
            # The lock file goes while still held, so no other process takes it meanwhile.
            (folder / LOCK_NAME).unlink(missing_ok=True)
            lock.release()
            _remove_made(made)
            if isinstance(exc, sqlite3.Error):
                raise _storage_failed(exc, folder) from None
            raise

    @classmethod
    def _create_locked(cls, folder: Path, lock: filelock.BaseFileLock, images_dir: Path | None,
                       skeleton: Skeleton, author: str | None,
                       progress: Progress | None) -> Project:
        tmp = folder / (DB_NAME + ".new")
        conn = None
        try:
            for stale in folder.glob(DB_NAME + ".new*"):
                stale.unlink()
            conn = _connect(tmp, read_only=False)
            migrate(conn)
            meta = {
                "project_id": str(uuid.uuid4()),
                "created": str(time.time()),
                "skeleton": json.dumps(skeleton.to_dict()),
                "images_root": _relative(images_dir, folder) if images_dir else "",
                "next_person_id": "1",
                "next_note_id": "1",
            }
            conn.executemany("INSERT INTO meta VALUES (?, ?)", meta.items())
            if images_dir is not None:
                infos = _probe_all(find_images(images_dir), progress)
                _insert_frames(conn, folder, images_dir, infos, first_id=1)
            conn.close()
            conn = None
            os.replace(tmp, folder / DB_NAME)
        finally:
            if conn is not None:
                conn.close()
            for leftover in folder.glob(DB_NAME + ".new*"):
                leftover.unlink()
        return cls._open_locked(folder, lock, author)

    @classmethod
    def open(cls, folder: str | Path, author: str | None = None,
             read_only: bool = False) -> Project:
        """Open the project in ``folder``.

        If another process is editing it, or its folder cannot be written, the project opens
        read-only and :attr:`read_only_reason` says why (who holds it; or that the folder
        cannot be written, with the system's reason); ask with ``read_only=True`` to never take
        the lock.
        """
        folder = Path(folder)
        if not (folder / DB_NAME).is_file():
            raise NotFound(f"{folder}: no project here (no {DB_NAME}); make one with "
                           "`posewright new`")
        _check_database(folder / DB_NAME)
        reason = "opened read-only on request"
        if not read_only:
            try:
                lock = _take_lock(folder)
            except OSError as exc:
                if exc.errno not in _NOT_WRITABLE:
                    raise
                reason = f"in a folder that cannot be written ({exc.strerror or exc})"
            else:
                if lock is not None:
                    return cls._open_locked(folder, lock, author)
                reason = _holder_reason(folder)
        conn = _connect(folder / DB_NAME, read_only=True)
        _check_version(conn, folder)
        return cls(folder, conn, None, _author(author), reason + _unread_changes(folder))

    @classmethod
    def _open_locked(cls, folder: Path, lock: filelock.BaseFileLock,
                     author: str | None) -> Project:
        db = folder / DB_NAME
        # The lock file may exist and be writable in a folder or beside a database that are
        # not (SQLite needs both to write); such a project is read-only like any other.
        blocked = next((p for p in (folder, db) if not os.access(p, os.W_OK)), None)
        if blocked is not None:
            lock.release()
            conn = _connect(db, read_only=True)
            _check_version(conn, folder)
            where = "in a folder" if blocked == folder else f"stored in a {DB_NAME}"
            return cls(folder, conn, None, _author(author),
                       f"{where} that cannot be written" + _unread_changes(folder))
        try:
            conn = _connect(db, read_only=False)
            _check_version(conn, folder)
            migrate(conn)
            who = _author(author)
            done = recovery.settle(folder, conn)
            stale = _stale_holder(folder)
            if stale:
                done.append(stale)
            holder = {"pid": os.getpid(), "host": socket.gethostname(), "author": who,
                      "since": time.time()}
            (folder / HOLDER_NAME).write_text(json.dumps(holder))
        except BaseException as exc:
            lock.release()
            if isinstance(exc, sqlite3.Error):
                raise _storage_failed(exc, folder) from None
            raise
        if done:
            log.warning("%s: cleaned up after an interrupted run: %s", folder, "; ".join(done))
        project = cls(folder, conn, lock, who, None)
        project.recovered = tuple(done)
        return project

    def close(self) -> None:
        """Close the database and release the lock (safe to call twice)."""
        with self._mutex:
            if self._conn is None:
                return
            self._conn.close()
            self._conn = None  # type: ignore[assignment]
            if self._lock is not None:
                try:
                    (self.folder / HOLDER_NAME).unlink(missing_ok=True)
                finally:
                    self._lock.release()
                    self._lock = None

    def __enter__(self) -> Project:
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    @property
    def read_only(self) -> bool:
        return self.read_only_reason is not None

    @property
    def project_id(self) -> str:
        return self._meta["project_id"]

    @property
    def images_root(self) -> Path | None:
        root = self._meta.get("images_root", "")
        return (self.folder / root).resolve() if root else None

    def meta(self, key: str, default: str | None = None) -> str | None:
        return self._meta.get(key, default)

    def subscribe(self, listener: Callable[[str, frozenset[int]], None]) -> None:
        """Call ``listener(kind, frame_ids)`` after every committed change
        (``kind``: ``edit``, ``undo``, ``redo``, ``import``, ``frames``, ``meta``,
        ``triage``)."""
        self._listeners.append(listener)

    def _notify(self, kind: str, frame_ids: Iterable[int]) -> None:
        ids = frozenset(int(f) for f in frame_ids if f is not None)
        for listener in list(self._listeners):
            listener(kind, ids)

    # ------------------------------------------------------------------ reading

    def frames(self) -> list[Frame]:
        """Every frame, by id."""
        with self._mutex:
            rows = self._conn.execute(f"SELECT {_FRAME_COLUMNS} FROM {_FRAME_FROM} "
                                      "ORDER BY frames.id")
            return [_frame_from_row(r) for r in rows]

    def frame(self, frame_id: int) -> Frame:
        if not _SQLITE_INT[0] <= int(frame_id) <= _SQLITE_INT[1]:
            raise NotFound(f"the project has no frame {frame_id}")
        with self._mutex:
            row = self._conn.execute(
                f"SELECT {_FRAME_COLUMNS} FROM {_FRAME_FROM} WHERE frames.id = ?",
                (int(frame_id),)
            ).fetchone()
        if row is None:
            raise NotFound(f"the project has no frame {frame_id}")
        return _frame_from_row(row)

    def find_frame(self, ref: str | int) -> Frame:
        """A frame by id, or by file name (relative to the images folder) or base name."""
        text = str(ref)
        if text.lstrip("-").isdigit():
            try:
                return self.frame(int(text))
            except NotFound:
                pass
        with self._mutex:
            rows = self._conn.execute(
                f"SELECT {_FRAME_COLUMNS} FROM {_FRAME_FROM} WHERE file_name = ? OR path = ?",
                (text, text),
            ).fetchall()
            if not rows:
                like = "%/" + text.replace("%", "").replace("_", "\\_")
                rows = self._conn.execute(
                    f"SELECT {_FRAME_COLUMNS} FROM {_FRAME_FROM} "
                    "WHERE file_name LIKE ? ESCAPE '\\'",
                    (like,),
                ).fetchall()
        if len(rows) == 1:
            return _frame_from_row(rows[0])
        if len(rows) > 1:
            raise NotFound(f"{text!r} names {len(rows)} frames; give the frame id")
        raise NotFound(f"the project has no frame {text!r} (neither an id nor a file name)")

    def image_path(self, frame: Frame) -> Path:
        """The absolute path of a frame's image."""
        path = Path(frame.path)
        return path if path.is_absolute() else self.folder / path

    def people(self, frame_id: int) -> list[Person]:
        """The people of a frame, by id."""
        k = self.skeleton.num_joints
        with self._mutex:
            rows = self._conn.execute(
                f"SELECT {_PERSON_COLUMNS} FROM people WHERE frame_id = ? ORDER BY id",
                (int(frame_id),),
            ).fetchall()
        return [_decode_person(r, k) for r in rows]

    def people_by_frame(self) -> dict[int, list[Person]]:
        """Every person of the project grouped by frame id (for export and batch analysis)."""
        k = self.skeleton.num_joints
        out: dict[int, list[Person]] = {}
        with self._mutex:
            rows = self._conn.execute(
                f"SELECT frame_id, {_PERSON_COLUMNS} FROM people ORDER BY frame_id, id"
            ).fetchall()
        for row in rows:
            out.setdefault(row[0], []).append(_decode_person(row[1:], k))
        return out

    def regions(self, frame_id: int) -> list[tuple[int, list[list[float]], dict[str, Any]]]:
        """The frame's ignore regions: ``(region_id, polygons, extra)``."""
        with self._mutex:
            rows = self._conn.execute(
                "SELECT id, polygons, extra FROM regions WHERE frame_id = ? ORDER BY id",
                (int(frame_id),)).fetchall()
        return [(r[0], json.loads(r[1]), json.loads(r[2] or "{}")) for r in rows]

    def regions_by_frame(self) -> dict[int, list[tuple[int, list[list[float]], dict[str, Any]]]]:
        out: dict[int, list[tuple[int, list[list[float]], dict[str, Any]]]] = {}
        with self._mutex:
            rows = self._conn.execute(
                "SELECT frame_id, id, polygons, extra FROM regions ORDER BY frame_id, id")
            for f, rid, polys, extra in rows:
                out.setdefault(f, []).append((rid, json.loads(polys), json.loads(extra or "{}")))
        return out

    def frame_extras(self) -> dict[int, dict[str, Any]]:
        """Fields of imported COCO image records kept for the round trip, by frame id."""
        with self._mutex:
            rows = self._conn.execute("SELECT id, extra FROM frames WHERE extra IS NOT NULL")
            return {r[0]: json.loads(r[1]) for r in rows}

    def triage(self, frame_id: int) -> tuple[float, list[dict[str, Any]]] | None:
        """The frame's suspicion score and reasons from the last triage, or None."""
        with self._mutex:
            row = self._conn.execute("SELECT score, reasons FROM triage WHERE frame_id = ?",
                                     (int(frame_id),)).fetchone()
        return None if row is None else (row[0], json.loads(row[1]))

    def triage_all(self) -> dict[int, tuple[float, list[dict[str, Any]]]]:
        """Every frame's triage result, by frame id."""
        with self._mutex:
            rows = self._conn.execute("SELECT frame_id, score, reasons FROM triage").fetchall()
        return {r[0]: (r[1], json.loads(r[2])) for r in rows}

    def store_triage(self, results: dict[int, tuple[float, list[dict[str, Any]]]]) -> None:
        """Replace the triage results of the given frames (one transaction, not ledgered:
        triage is derived from the labels and can be recomputed at any time)."""
        self._check_writable()
        now = time.time()
        with self._mutex, self._transaction():
            self._conn.executemany(
                "INSERT OR REPLACE INTO triage VALUES (?, ?, ?, ?)",
                [(f, float(score), json.dumps(reasons), now)
                 for f, (score, reasons) in results.items()])
        self._notify("triage", results.keys())

    def maps_path(self, frame_id: int) -> tuple[Path, int] | None:
        """Where the frame's network maps are (absolute path) and their stride, or None."""
        with self._mutex:
            row = self._conn.execute("SELECT path, stride FROM maps WHERE frame_id = ?",
                                     (int(frame_id),)).fetchone()
        if row is None:
            return None
        path = Path(row[0])
        return (path if path.is_absolute() else self.folder / path), int(row[1])

    def new_map_run(self, kind: str) -> Path:
        """A new, empty folder ``maps/<kind>-<run id>/`` for the map files of one run.

        Its files count once a :meth:`Bulk.set_maps` in a committed :meth:`bulk` names them;
        until then they are the run's alone, and if the process dies first the next open
        removes the folder (see :mod:`app.store.recovery`). Call :meth:`drop_map_run` when the
        run is over, whether it landed or not.
        """
        self._check_writable()
        return recovery.new_run_folder(self.folder, kind)

    def drop_map_run(self, folder: Path) -> None:
        """Remove a run folder from :meth:`new_map_run` unless a committed run uses it."""
        rel = _relative(folder, self.folder)
        with self._mutex:
            if rel not in recovery.meta_list(self._conn, recovery.MAP_RUNS_KEY):
                shutil.rmtree(folder, ignore_errors=True)
                with contextlib.suppress(OSError):  # only when nothing else is in maps/
                    folder.parent.rmdir()

    def _sweep_maps(self) -> None:
        """Delete map files that the last commit superseded (see :mod:`app.store.recovery`)."""
        with self._mutex:
            try:
                recovery.sweep(self.folder, self._conn)
            except OSError as exc:
                # The work itself is committed; the list of folders to sweep stays in the
                # database, so the next open finishes this.
                log.warning("%s: old maps not deleted yet (%s); the next open will", self.folder,
                            exc)
            self._meta.update(self._conn.execute(
                "SELECT key, value FROM meta WHERE key IN (?, ?)",
                (recovery.MAP_RUNS_KEY, recovery.SWEEP_KEY)).fetchall())

    def notes(self, frame_id: int) -> list[Note]:
        with self._mutex:
            rows = self._conn.execute(
                "SELECT id, frame_id, author, time, text, person_id FROM notes "
                "WHERE frame_id = ? ORDER BY time, id", (int(frame_id),)
            ).fetchall()
        return [Note(*r) for r in rows]

    def query(self, sql: str, args: Sequence[Any] = ()) -> list[tuple[Any, ...]]:
        """The rows of one ``SELECT`` on the project's tables, for modules that keep tables of
        their own (review packets and alternatives); they write through :meth:`bulk`."""
        if not sql.lstrip().upper().startswith("SELECT"):
            raise PosewrightError("Project.query reads only; write through Project.bulk")
        with self._mutex:
            return self._conn.execute(sql, tuple(args)).fetchall()

    def labels(self, frame_id: int) -> FrameLabels:
        """Everything an edit can touch in one frame."""
        frame = self.frame(frame_id)
        return FrameLabels(
            frame.id, self.skeleton, {p.id: p for p in self.people(frame.id)}, frame.state,
            {n.id: n for n in self.notes(frame.id)},
            {rid: Region(rid, frame.id, tuple(tuple(p) for p in polys), extra)
             for rid, polys, extra in self.regions(frame.id)},
            self._kept(frame.id),
        )

    def _kept(self, frame_id: int) -> dict[int, frozenset[int]]:
        """Joints settled as ours, per reviewer's version still standing beside the frame."""
        with self._mutex:
            rows = self._conn.execute(
                "SELECT id, kept FROM alternatives WHERE frame_id = ? AND retired IS NULL",
                (int(frame_id),)).fetchall()
        return {r[0]: frozenset(json.loads(r[1])) for r in rows}

    def history(self, frame_id: int | None = None, limit: int | None = None) -> list[LedgerEntry]:
        """Ledger entries, newest first; only those of one frame when ``frame_id`` is given."""
        sql = ("SELECT seq, group_id, kind, action, summary, author, time, frame_id, target, "
               "before, after, reverts FROM ledger")
        args: list[Any] = []
        if frame_id is not None:
            sql += " WHERE frame_id = ?"
            args.append(int(frame_id))
        sql += " ORDER BY seq DESC"
        if limit is not None:
            sql += " LIMIT ?"
            args.append(int(limit))
        with self._mutex:
            rows = self._conn.execute(sql, args).fetchall()
        return [
            LedgerEntry(r[0], r[1], r[2], r[3], r[4], r[5], r[6], r[7], r[8],
                        _loads(r[9]), _loads(r[10]), r[11])
            for r in rows
        ]

    def can_undo(self) -> bool:
        with self._mutex:
            return self._conn.execute("SELECT 1 FROM undo_stack LIMIT 1").fetchone() is not None

    def can_redo(self) -> bool:
        with self._mutex:
            return self._conn.execute("SELECT 1 FROM redo_stack LIMIT 1").fetchone() is not None

    def counts(self) -> dict[str, int]:
        """How many frames, people, labelled joints, ledger entries and frames per state."""
        with self._mutex:
            c = self._conn
            out = {
                "frames": c.execute("SELECT count(*) FROM frames").fetchone()[0],
                "people": c.execute("SELECT count(*) FROM people").fetchone()[0],
                "ledger": c.execute("SELECT count(*) FROM ledger").fetchone()[0],
                "notes": c.execute("SELECT count(*) FROM notes").fetchone()[0],
                "unreadable images": c.execute(
                    "SELECT count(*) FROM frames WHERE status != 'ok'").fetchone()[0],
            }
            for state, n in c.execute("SELECT state, count(*) FROM frames GROUP BY state"):
                out[state] = n
        return out

    # ------------------------------------------------------------------ editing

    def apply(self, edit: Edit, *, author: str | None = None) -> Applied:
        """Apply one edit as one transaction; returns once it is durable on disk.

        The first label edit of an untouched frame also marks the frame corrected (in the same
        undo step). An edit that changes nothing records nothing. Refused edits raise
        :class:`~app.errors.EditRefused` and change nothing. ``author`` credits the edit to
        someone other than :attr:`author` (a merged review packet credits its reviewer).
        """
        self._check_writable()
        with self._mutex, self._transaction():
            if needs_person_id(edit):
                edit = with_person_id(edit, self._allocate("next_person_id"))
            if isinstance(edit, AddNote) and edit.note_id is None:
                edit = replace(edit, note_id=self._allocate("next_note_id"))
            if isinstance(edit, AddRegion) and edit.region_id is None:
                edit = replace(edit, region_id=self._next_region_id())
            labels = self.labels(edit.frame_id)
            ctx = EditContext(author or self.author, time.time())
            new_labels, changes = edit.apply(labels, ctx)
            if not changes:
                return Applied(None, (), edit)
            if (type(edit).changes_labels and labels.state is FrameState.UNTOUCHED
                    and labels_changed(changes)):
                state = Change(("state",), FrameState.UNTOUCHED.value,
                               FrameState.CORRECTED.value)
                changes.append(state)
                new_labels = apply_changes(new_labels, [state])
            self._write(labels, new_labels, changes)
            group = self._record("edit", type(edit).__name__, edit.summary(),
                                 [(edit.frame_id, c) for c in changes], ctx)
            self._conn.execute("INSERT INTO undo_stack (group_id) VALUES (?)", (group,))
            self._conn.execute("DELETE FROM redo_stack")
        self._notify("edit", [edit.frame_id])
        return Applied(group, tuple(changes), edit)

    def undo(self) -> int | None:
        """Undo the newest action still on the undo stack; returns the new ledger group or
        None when there is nothing to undo. Recorded in the ledger, so it survives a restart."""
        return self._unwind("undo_stack", "redo_stack", "undo")

    def redo(self) -> int | None:
        """Redo the newest undone action; returns the new ledger group or None."""
        return self._unwind("redo_stack", "undo_stack", "redo")

    def return_to(self, seq: int, frame_id: int | None = None) -> int | None:
        """Bring the labels back to how they were right after ledger entry ``seq``.

        With ``frame_id`` only that frame's changes are reverted, otherwise the whole project's.
        The return is itself one new undoable action (nothing is deleted from the ledger).
        Bulk work (imports, packet records) is not reverted.
        """
        self._check_writable()
        with self._mutex, self._transaction():
            sql = ("SELECT frame_id, target, before, after FROM ledger WHERE seq > ? "
                   "AND kind IN ('edit', 'undo', 'redo')")
            args: list[Any] = [int(seq)]
            if frame_id is not None:
                sql += " AND frame_id = ?"
                args.append(int(frame_id))
            rows = self._conn.execute(sql + " ORDER BY seq", args).fetchall()
            if not rows:
                return None
            inverse = [(f, Change(_parse_target(t), _loads(a), _loads(b)))
                       for f, t, b, a in reversed(rows)]
            ctx = EditContext(self.author, time.time())
            self._restore(inverse, ctx)
            group = self._record("edit", "ReturnTo", f"return to ledger entry {seq}", inverse,
                                 ctx)
            self._conn.execute("INSERT INTO undo_stack (group_id) VALUES (?)", (group,))
            self._conn.execute("DELETE FROM redo_stack")
        self._notify("edit", {f for f, _ in inverse})
        return group

    def _unwind(self, source: str, dest: str, kind: str) -> int | None:
        self._check_writable()
        with self._mutex, self._transaction():
            top = self._conn.execute(
                f"SELECT pos, group_id FROM {source} ORDER BY pos DESC LIMIT 1").fetchone()
            if top is None:
                return None
            pos, group = top
            rows = self._conn.execute(
                "SELECT frame_id, target, before, after, action, summary FROM ledger "
                "WHERE group_id = ? ORDER BY seq", (group,)).fetchall()
            inverse = [(f, Change(_parse_target(t), _loads(a), _loads(b)))
                       for f, t, b, a, _, _ in reversed(rows)]
            ctx = EditContext(self.author, time.time())
            self._restore(inverse, ctx)
            action, summary = (rows[0][4], rows[0][5]) if rows else ("", "")
            new_group = self._record(kind, action, f"{kind}: {summary}", inverse, ctx,
                                     reverts=group)
            self._conn.execute(f"DELETE FROM {source} WHERE pos = ?", (pos,))
            self._conn.execute(f"INSERT INTO {dest} (group_id) VALUES (?)", (new_group,))
        self._notify(kind, {f for f, _ in inverse})
        return new_group

    def _restore(self, changes: list[tuple[int, Change]], ctx: EditContext) -> None:
        by_frame: dict[int, list[Change]] = {}
        for f, ch in changes:
            by_frame.setdefault(f, []).append(ch)
        for f, chs in by_frame.items():
            labels = self.labels(f)
            new_labels, _ = Restore(f, tuple(chs)).apply(labels, ctx)
            self._write(labels, new_labels, chs)

    def _write(self, old: FrameLabels, new: FrameLabels, changes: Sequence[Change]) -> None:
        c = self._conn
        touched_people = {ch.target[1] for ch in changes if ch.target[0] in ("person", "joint")}
        for pid in sorted(touched_people):
            person = new.people.get(pid)
            if person is None:
                c.execute("DELETE FROM people WHERE id = ?", (pid,))
            else:
                c.execute(
                    f"INSERT OR REPLACE INTO people (frame_id, {_PERSON_COLUMNS}) "
                    "VALUES (?, ?, ?, ?, ?, ?, ?, ?)", (new.frame_id, *_encode_person(person)))
        if new.state != old.state:
            c.execute("UPDATE frames SET state = ? WHERE id = ?", (new.state.value, new.frame_id))
        for aid in {ch.target[1] for ch in changes if ch.target[0] == "kept"}:
            c.execute("UPDATE alternatives SET kept = ? WHERE id = ?",
                      (json.dumps(sorted(new.kept.get(aid, ()))), aid))
        for rid in {ch.target[1] for ch in changes if ch.target[0] == "region"}:
            region = new.regions.get(rid)
            c.execute("DELETE FROM regions WHERE id = ?", (rid,))
            if region is not None:
                c.execute("INSERT INTO regions (id, frame_id, polygons, extra) VALUES (?, ?, ?, ?)",
                          (rid, new.frame_id, json.dumps([list(p) for p in region.polygons]),
                           json.dumps(dict(region.extra))))
        for nid in {ch.target[1] for ch in changes if ch.target[0] == "note"}:
            note = new.notes.get(nid)
            c.execute("DELETE FROM notes WHERE id = ?", (nid,))
            if note is not None:
                c.execute("INSERT INTO notes VALUES (?, ?, ?, ?, ?, ?)",
                          (nid, new.frame_id, note.person_id, note.author, note.time, note.text))

    def _record(self, kind: str, action: str, summary: str,
                changes: Sequence[tuple[int | None, Change]], ctx: EditContext,
                reverts: int | None = None) -> int:
        group = self._allocate("next_group_id")
        self._conn.executemany(
            "INSERT INTO ledger (group_id, kind, action, summary, author, time, frame_id, "
            "target, before, after, reverts) VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
            [(group, kind, action, summary, ctx.author, ctx.time, f, c.describe(),
              json.dumps(c.before), json.dumps(c.after), reverts) for f, c in changes],
        )
        return group

    def _next_region_id(self) -> int:
        # Imported regions take their ids from SQLite; edits must never reuse one, even one
        # whose region was deleted (the ledger would then name two regions alike).
        top = self._conn.execute("SELECT max(id) FROM regions").fetchone()[0] or 0
        value = max(int(self._meta.get("next_region_id", "1")), top + 1)
        self._set_meta("next_region_id", str(value + 1))
        return value

    def _allocate(self, key: str) -> int:
        value = int(self._meta.get(key, "1"))
        self._set_meta(key, str(value + 1))
        return value

    def _set_meta(self, key: str, value: str) -> None:
        self._conn.execute("INSERT OR REPLACE INTO meta VALUES (?, ?)", (key, value))
        self._meta[key] = value

    def _check_writable(self) -> None:
        if self.read_only_reason is not None:
            raise ReadOnly(f"{self.folder}: read-only ({self.read_only_reason})")
        if self._conn is None:
            raise ReadOnly(f"{self.folder}: the project is closed")

    @contextmanager
    def _transaction(self) -> Iterator[None]:
        """One ``BEGIN IMMEDIATE ... COMMIT``; on any failure (a full disk at the commit
        included) nothing of it is kept, and a failure of SQLite itself is raised as
        :class:`~app.errors.StorageFailed`."""
        meta_before = dict(self._meta)
        try:
            self._conn.execute("BEGIN IMMEDIATE")
            try:
                yield
                self._conn.execute("COMMIT")
            except BaseException:
                # SQLite has already rolled back after some errors (a full disk, for one).
                if self._conn.in_transaction:
                    self._conn.execute("ROLLBACK")
                raise
        except BaseException as exc:
            self._meta = meta_before
            if isinstance(exc, sqlite3.Error) and not isinstance(exc, sqlite3.IntegrityError):
                raise _storage_failed(exc, self.folder) from None
            raise

    # ------------------------------------------------------------------ bulk work (importers)

    @contextmanager
    def bulk(self, action: str, summary: str, target: str, kind: str = "import",
             frame_id: int | None = None) -> Iterator[Bulk]:
        """One all-or-nothing transaction for bulk writers: everything written through the
        yielded :class:`Bulk` lands together with one ledger entry of ``kind`` (``import`` for
        importers, ``review`` for packet work), or nothing does. Such entries record what was
        done; they are not on the undo stack.
        """
        self._check_writable()
        with self._mutex, self._transaction():
            bulk = Bulk(self)
            yield bulk
            bulk.record_map_runs()
            ctx = EditContext(self.author, time.time())
            group = self._allocate("next_group_id")
            self._conn.execute(
                "INSERT INTO ledger (group_id, kind, action, summary, author, time, frame_id, "
                "target, before, after, reverts) "
                "VALUES (?, ?, ?, ?, ?, ?, ?, ?, NULL, ?, NULL)",
                (group, kind, action, summary, ctx.author, ctx.time, frame_id, target,
                 json.dumps(bulk.stats)),
            )
        if bulk.superseded:
            self._sweep_maps()
        self._notify("import", bulk.frames_touched)

    def set_meta(self, key: str, value: str) -> None:
        """Record a project setting (one transaction)."""
        self._check_writable()
        with self._mutex, self._transaction():
            self._set_meta(key, value)
        self._notify("meta", ())

    def add_images(self, images: str | Path, progress: Progress | None = None) -> list[Frame]:
        """Register the images under ``images`` that the project does not have yet."""
        self._check_writable()
        images_dir = Path(images)
        if not images_dir.is_dir():
            raise BadInput("not a folder of images", where=str(images_dir))
        known = {Path(f.path) for f in self.frames()}
        new = [p for p in find_images(images_dir)
               if Path(_relative(p, self.folder)) not in known]
        infos = _probe_all(new, progress)
        with self._mutex, self._transaction():
            first = (self._conn.execute("SELECT max(id) FROM frames").fetchone()[0] or 0) + 1
            ids = _insert_frames(self._conn, self.folder, images_dir, infos, first)
            if not self._meta.get("images_root"):
                self._set_meta("images_root", _relative(images_dir, self.folder))
        self._notify("frames", ids)
        return [self.frame(i) for i in ids]

    def add_video_frames(self, video: str | Path, every: int = 1, start: float | None = None,
                         end: float | None = None,
                         progress: Progress | None = None) -> list[Frame]:
        """Extract frames of ``video`` into ``frames/<video stem>/`` and register them with
        their index in the video and their time in seconds (see :mod:`app.formats.video` for
        ``every``, ``start`` and ``end``). ``file_name`` is ``<video stem>/<index>.jpg``.

        Frames the project already has (the same file) are not added again, so another range
        of the same video can be added later; a different video with the same name is refused.
        All or nothing: after a bad video, a failure or a cancel no file is left behind and no
        frame is registered.
        """
        self._check_writable()
        info = probe_video(video)
        stem = Path(video).stem.lstrip(".") or "video"
        rel_dir = f"{VIDEO_FRAMES}/{stem}"
        videos = json.loads(self._meta.get("videos", "{}"))
        if rel_dir in videos and videos[rel_dir]["fingerprint"] != info.fingerprint:
            raise BadInput(f"the project has frames of another video named {stem!r} in "
                           f"{rel_dir}", where=str(video), hint="rename the video to add it")
        root = self.folder / VIDEO_FRAMES
        target = root / stem
        made_root, made_target = not root.exists(), not target.exists()
        root.mkdir(exist_ok=True)
        staging = Path(tempfile.mkdtemp(prefix=f".{stem}.", suffix=".partial", dir=root))
        moved: list[Path] = []
        try:
            extracted = extract_frames(info.path, staging, every, start, end, progress)
            known = {f.path for f in self.frames()}
            target.mkdir(exist_ok=True)
            rows = []
            for vf in extracted:
                final = target / vf.path.name
                rel = _relative(final, self.folder)
                if rel in known:
                    continue
                os.replace(vf.path, final)
                moved.append(final)
                rows.append([rel, f"{stem}/{final.name}", vf.width, vf.height, vf.index,
                             vf.timestamp])
            with self._mutex, self._transaction():
                first = (self._conn.execute("SELECT max(id) FROM frames").fetchone()[0] or 0) + 1
                ids = list(range(first, first + len(rows)))
                self._conn.executemany(
                    "INSERT INTO frames (id, path, file_name, width, height, video_index, "
                    "timestamp) VALUES (?, ?, ?, ?, ?, ?, ?)",
                    [(i, *r) for i, r in zip(ids, rows)])
                videos[rel_dir] = {"source": str(info.path.resolve()),
                                   "fingerprint": info.fingerprint}
                self._set_meta("videos", json.dumps(videos))
                if not self._meta.get("images_root"):
                    self._set_meta("images_root", VIDEO_FRAMES)
        except BaseException:
            for path in moved:
                path.unlink(missing_ok=True)
            shutil.rmtree(staging, ignore_errors=True)
            for made, folder in ((made_target, target), (made_root, root)):
                if made and folder.is_dir() and not any(folder.iterdir()):
                    folder.rmdir()
            raise
        shutil.rmtree(staging, ignore_errors=True)
        self._notify("frames", ids)
        return [self.frame(i) for i in ids]

    def mark_image_status(self, frame_id: int, status: str) -> None:
        """Record that a frame's image is ok, missing, corrupt or oversized (found on decoding)."""
        if self.read_only:
            return
        with self._mutex, self._transaction():
            self._conn.execute("UPDATE frames SET status = ? WHERE id = ?", (status, frame_id))
        self._notify("frames", [frame_id])


class Bulk:
    """Writes inside one :meth:`Project.bulk` transaction (for importers)."""

    def __init__(self, project: Project):
        self._p = project
        self._c = project._conn
        self.stats: dict[str, int] = {}
        self.frames_touched: set[int] = set()
        #: Folders of map runs whose files this transaction replaces, and that it writes to.
        self.superseded: set[str] = set()
        self._runs_used: set[str] = set()
        self._is_run: dict[str, bool] = {}

    def count(self, key: str, n: int = 1) -> None:
        self.stats[key] = self.stats.get(key, 0) + n

    def allocate_person_ids(self, n: int, at_least: int = 1) -> int:
        """Reserve ``n`` fresh person ids; returns the first."""
        first = max(int(self._p._meta.get("next_person_id", "1")), at_least)
        self._p._set_meta("next_person_id", str(first + n))
        return first

    def reserve_person_ids(self, ids: Iterable[int]) -> None:
        """Make sure later allocations never hand out any of ``ids``."""
        top = max(ids, default=0)
        if top >= int(self._p._meta.get("next_person_id", "1")):
            self._p._set_meta("next_person_id", str(top + 1))

    def existing_person_ids(self, ids: Iterable[int]) -> set[int]:
        ids = list(ids)
        found: set[int] = set()
        for i in range(0, len(ids), 900):
            chunk = ids[i:i + 900]
            q = ",".join("?" * len(chunk))
            found.update(r[0] for r in self._c.execute(
                f"SELECT id FROM people WHERE id IN ({q})", chunk))
        return found

    def add_people(self, rows: Iterable[tuple[int, Person]]) -> None:
        """Insert people ``(frame_id, person)``; ids must be new."""
        encoded = []
        for frame_id, person in rows:
            encoded.append((frame_id, *_encode_person(person)))
            self.frames_touched.add(frame_id)
        try:
            self._c.executemany(
                f"INSERT INTO people (frame_id, {_PERSON_COLUMNS}) VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
                encoded)
        except sqlite3.IntegrityError as exc:
            raise BadInput(f"a person id is already in the project ({exc})") from None
        self.count("people", len(encoded))

    def add_people_raw(self, rows: list[tuple[Any, ...]]) -> None:
        """Insert pre-encoded rows ``(frame_id, id, keypoints, scores, sources, origin, score,
        extra)`` (the importers' fast path)."""
        try:
            self._c.executemany(
                f"INSERT INTO people (frame_id, {_PERSON_COLUMNS}) VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
                rows)
        except sqlite3.IntegrityError as exc:
            raise BadInput(f"a person id is already in the project ({exc})") from None
        self.frames_touched.update(r[0] for r in rows)
        self.count("people", len(rows))

    def rekey_frames(self, mapping: dict[int, int]) -> None:
        """Give frames new ids (``old -> new``), everywhere they are referenced."""
        mapping = {o: n for o, n in mapping.items() if o != n}
        if not mapping:
            return
        c = self._c
        # Two steps through temporary ids below every id in use and every new one, so that
        # swaps, chains and negative ids cannot collide.
        low = min(c.execute("SELECT min(id) FROM frames").fetchone()[0] or 0, *mapping.values(),
                  0)
        temporary = {o: low - 1 - n for n, o in enumerate(mapping)}
        for pairs in ([(o, temporary[o]) for o in mapping],
                      [(temporary[o], n) for o, n in mapping.items()]):
            for table, col in _frame_columns(c):
                c.executemany(f"UPDATE {table} SET {col} = ? WHERE {col} = ?",
                              [(b, a) for a, b in pairs])
        self.frames_touched.update(mapping.values())

    def set_maps(self, frame_id: int, path: Path, stride: int) -> None:
        """Record where a frame's network maps are (stored relative to the project folder).

        A map file of a run folder (:meth:`Project.new_map_run`) that this replaces is deleted
        after the commit, never before."""
        rel = _relative(path, self._p.folder)
        old = self._c.execute("SELECT path FROM maps WHERE frame_id = ?",
                              (frame_id,)).fetchone()
        if old is not None and old[0] != rel and self._in_run(old[0]):
            self.superseded.add(old[0].rpartition("/")[0])
        if self._in_run(rel):
            self._runs_used.add(rel.rpartition("/")[0])
        self._c.execute("INSERT OR REPLACE INTO maps VALUES (?, ?, ?)",
                        (frame_id, rel, int(stride)))

    def _in_run(self, rel: str) -> bool:
        folder = rel.rpartition("/")[0]
        if folder not in self._is_run:
            self._is_run[folder] = recovery.is_run_folder(self._p.folder, folder)
        return self._is_run[folder]

    def record_map_runs(self) -> None:
        """Write, in the transaction, which run folders rows may name and which to sweep."""
        if self._runs_used:
            runs = set(json.loads(self._p._meta.get(recovery.MAP_RUNS_KEY, "[]")))
            self._p._set_meta(recovery.MAP_RUNS_KEY, json.dumps(sorted(runs | self._runs_used)))
        if self.superseded:
            pending = set(json.loads(self._p._meta.get(recovery.SWEEP_KEY, "[]")))
            self._p._set_meta(recovery.SWEEP_KEY, json.dumps(sorted(pending | self.superseded)))

    def set_frame_extra(self, frame_id: int, extra: dict[str, Any]) -> None:
        """Replace the fields of an imported COCO image record kept for the round trip."""
        self._c.execute("UPDATE frames SET extra = ? WHERE id = ?",
                        (json.dumps(extra, allow_nan=False), int(frame_id)))

    def set_file_name(self, frame_id: int, file_name: str) -> None:
        self._c.execute("UPDATE frames SET file_name = ? WHERE id = ?", (file_name, frame_id))

    def set_meta(self, key: str, value: str) -> None:
        self._p._set_meta(key, value)

    def execute(self, sql: str, args: Sequence[Any] = ()) -> sqlite3.Cursor:
        return self._c.execute(sql, args)

    def executemany(self, sql: str, rows: Iterable[Sequence[Any]]) -> sqlite3.Cursor:
        return self._c.executemany(sql, rows)


# ---------------------------------------------------------------------- module helpers

def _frame_columns(conn: sqlite3.Connection) -> list[tuple[str, str]]:
    """Every ``(table, column)`` holding a frame id: ``frames.id`` and each ``frame_id``."""
    out = [("frames", "id")]
    tables = [r[0] for r in conn.execute("SELECT name FROM sqlite_master WHERE type = 'table'")]
    for table in tables:
        if any(col[1] == "frame_id" for col in conn.execute(f"PRAGMA table_info({table})")):
            out.append((table, "frame_id"))
    return out


def _loads(text: str | None) -> Any:
    return None if text is None else json.loads(text)


def _author(author: str | None) -> str:
    if author:
        return author
    env = os.environ.get("POSEWRIGHT_AUTHOR")
    if env:
        return env
    try:
        return getpass.getuser()
    except (KeyError, OSError):
        return "unknown"


def _connect(path: Path, read_only: bool) -> sqlite3.Connection:
    if read_only:
        uri = path.resolve().as_uri() + "?mode=ro"
        conn = sqlite3.connect(uri, uri=True, isolation_level=None, check_same_thread=False)
        try:
            conn.execute("SELECT count(*) FROM sqlite_master").fetchone()
        except sqlite3.OperationalError:
            if os.access(path.parent, os.W_OK):
                raise
            # A WAL database needs its shared-memory file beside it even to be read; in a
            # folder nobody can write, nobody can change the database either, so SQLite may
            # read it as immutable (no locks, no shared memory).
            conn.close()
            conn = sqlite3.connect(uri + "&immutable=1", uri=True, isolation_level=None,
                                   check_same_thread=False)
    else:
        conn = sqlite3.connect(str(path), isolation_level=None, check_same_thread=False)
        conn.execute("PRAGMA journal_mode = WAL")
        conn.execute("PRAGMA synchronous = FULL")
    conn.execute("PRAGMA foreign_keys = ON")
    conn.execute("PRAGMA busy_timeout = 5000")
    return conn


def _unread_changes(folder: Path) -> str:
    """What a reader must be told when the database was opened as immutable with committed
    changes still in its write-ahead log, which SQLite cannot read without its shared-memory
    file (one that nobody could create in this folder)."""
    wal = folder / (DB_NAME + "-wal")
    shm = folder / (DB_NAME + "-shm")
    if os.access(folder, os.W_OK) or shm.exists() or not wal.is_file() or not wal.stat().st_size:
        return ""
    return (f"; the last changes, still in {wal.name}, cannot be read until the project is "
            "opened once where its folder can be written")


def _check_database(path: Path) -> None:
    """Refuse a ``project.db`` that is not an SQLite database before SQLite sees it: SQLite
    would take an empty file for a new database and write a schema into it."""
    try:
        with open(path, "rb") as fh:
            head = fh.read(len(SQLITE_HEADER))
    except OSError as exc:
        raise StorageFailed(f"{path}: cannot read the project database ({exc.strerror})") \
            from None
    if head != SQLITE_HEADER:
        what = "empty (0 bytes)" if not head else "not an SQLite database"
        raise BadInput(f"the project database is {what}", where=str(path),
                       hint="restore it from a backup; Posewright leaves it as it is")


def _storage_failed(exc: sqlite3.Error, folder: Path) -> StorageFailed:
    """The one-line error for a failure of SQLite; a disk nearly full is named as the likely
    cause (SQLite reports it in several ways: "database or disk is full", "disk I/O error")."""
    try:
        free = shutil.disk_usage(next(p for p in (folder, *folder.parents) if p.exists())).free
    except (OSError, StopIteration):
        free = None
    hint = f"; the disk has {free // 1024} KiB free" if free is not None and free < 2**24 \
        else ""
    return StorageFailed(f"{folder / DB_NAME}: {exc}; the action was not kept{hint}")


def _remove_made(made: Sequence[Path]) -> None:
    """Remove the folders in ``made`` (deepest first) while they are empty."""
    for path in made:
        try:
            path.rmdir()
        except OSError:
            return


def project_in_use(folder: str | Path) -> str | None:
    """Who has the project in ``folder`` open for editing (as :attr:`Project.read_only_reason`
    says it), or None when no process does."""
    folder = Path(folder)
    lock = _take_lock(folder)
    if lock is None:
        return _holder_reason(folder)
    lock.release()
    return None


def _check_version(conn: sqlite3.Connection, folder: Path) -> None:
    try:
        version = schema_version(conn)
        has_meta = version > 0 and conn.execute(
            "SELECT 1 FROM meta WHERE key = 'skeleton'").fetchone() is not None
    except sqlite3.DatabaseError as exc:
        conn.close()
        raise BadInput(f"the project database cannot be read ({exc})",
                       where=str(folder / DB_NAME),
                       hint="restore it from a backup; Posewright leaves it as it is") from None
    if not has_meta:
        conn.close()
        raise BadInput("an SQLite database, but not a Posewright project (no project record)",
                       where=str(folder / DB_NAME))
    if version > SCHEMA_VERSION:
        conn.close()
        raise BadInput(
            f"the project was written by a newer Posewright (schema {version}, this one "
            f"reads up to {SCHEMA_VERSION})", where=str(folder / DB_NAME),
            hint="update Posewright to open it")


def _take_lock(folder: Path) -> filelock.BaseFileLock | None:
    lock = filelock.FileLock(str(folder / LOCK_NAME))
    try:
        lock.acquire(timeout=0)
    except filelock.Timeout:
        return None
    return lock


def _holder_reason(folder: Path) -> str:
    try:
        holder = json.loads((folder / HOLDER_NAME).read_text())
        since = time.strftime("%Y-%m-%d %H:%M", time.localtime(holder["since"]))
        return (f"open for editing by {holder.get('author') or 'someone'} "
                f"(process {holder['pid']} on {holder['host']}) since {since}")
    except (OSError, ValueError, KeyError, TypeError, RecursionError):
        return "open for editing in another process"


def _stale_holder(folder: Path) -> str | None:
    """A lock note left by a process that died holding the lock (we hold it now), described."""
    path = folder / HOLDER_NAME
    if not path.exists():
        return None
    try:
        holder = json.loads(path.read_text())
        who = f"process {holder['pid']} on {holder['host']}"
    except (OSError, ValueError, KeyError, TypeError):
        who = "a process"
    path.unlink(missing_ok=True)
    return f"removed the stale {HOLDER_NAME} of {who}, which ended without closing the project"


def _relative(path: Path, folder: Path) -> str:
    """``path`` relative to ``folder`` when it lies inside it (or beside it), else absolute."""
    path = Path(os.path.abspath(path))
    try:
        rel = os.path.relpath(path, os.path.abspath(folder))
    except ValueError:  # another drive on Windows
        return path.as_posix()
    if rel.startswith(".." + os.sep + ".." + os.sep):
        return path.as_posix()
    return Path(rel).as_posix()


def _probe_all(paths: Sequence[Path], progress: Progress | None) -> list[ImageInfo]:
    progress = progress or Progress()
    infos = []
    for i, p in enumerate(paths):
        progress.step(i, len(paths), "reading images")
        info = probe_image(p)
        if info.status != "ok":
            log.warning("%s: image is %s (%s); registered and marked", p, info.status,
                        info.reason)
        infos.append(info)
    progress.step(len(paths), len(paths), "reading images")
    return infos


def _insert_frames(conn: sqlite3.Connection, folder: Path, images_dir: Path,
                   infos: Sequence[ImageInfo], first_id: int) -> list[int]:
    rows = []
    for n, info in enumerate(infos):
        rows.append((first_id + n, _relative(info.path, folder),
                     info.path.relative_to(images_dir).as_posix(), info.width, info.height,
                     info.status))
    conn.executemany(
        "INSERT INTO frames (id, path, file_name, width, height, status) VALUES (?, ?, ?, ?, ?, ?)",
        rows)
    return [r[0] for r in rows]
