"""A project: the one facade the rest of Posewright uses, over a folder or a server.

A **folder project** is a folder with ``project.db`` (SQLite, WAL) and images beside it; a
**hosted project** lives in a PostgreSQL database that a team shares (:mod:`app.store.hosted`),
its images stay files on each machine. :meth:`Project.open` takes either (a folder, or a URL
as :func:`app.store.hosted.is_database_url` recognises it) and returns the same API. The
tables are written through gateways (:mod:`app.store.frames`, :mod:`app.store.people`, ...)
and every label change through the ledger (:mod:`app.store.ledger`).

Durability (folder): the database runs in WAL mode with ``synchronous=FULL``. Every user action
is one ``BEGIN IMMEDIATE ... COMMIT`` transaction, and with FULL the WAL is fsynced at each
commit, so an edit for which :meth:`Project.apply` has returned survives a kill -9 *and* a
power cut (with ``synchronous=NORMAL`` WAL mode stays consistent but may lose the last commits
on power loss, which would break "never loses an edit"). SQLite's journal makes a crash at any
other moment lose at most the action in flight.

Locking (folder): one process at a time edits a project. The writer holds an advisory lock
(``filelock``, an OS-level ``flock`` that the kernel releases when the process dies, so a crash
leaves no stale lock) on ``project.lock``; a second process gets the project read-only, with the
reason (who holds it, since when) in :attr:`Project.read_only_reason`. A project in a folder
that cannot be written (a read-only file system or folder) cannot be locked; it opens read-only
and the reason says so.

Interrupted runs (folder): the process that takes the lock first makes the files beside the
database agree with it again (:mod:`app.store.recovery`: map runs rolled back or forward,
unfinished video extractions and stale lock notes removed) and says so in one log line.
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
import time
import uuid
from collections.abc import Callable, Iterable, Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path
from typing import Any, TypeVar

import filelock

from app.errors import BadInput, NotFound, ReadOnly, StorageFailed
from app.model.edits import Edit, EditContext
from app.model.labels import Frame, FrameLabels, Note, Person
from app.model.records import Alternative, FrameDecision, PacketRecord
from app.model.skeleton import Skeleton, coco_body, skeleton_from_dict
from app.store import ledger, recovery
from app.store.claims import Claim
from app.store.db import SQLITE, Database, SqliteDatabase, Tx, storage_failed_text
from app.store.derived import TriageResult
from app.store.frames import FrameQuery, NewFrame, WorklistEntry
from app.store.ledger import Applied, LedgerEntry
from app.store.notes import RegionRow
from app.store.schema import SCHEMA_VERSION, columns, migrate_sqlite, schema_version
from app.wording import count

log = logging.getLogger(__name__)

DB_NAME = "project.db"
LOCK_NAME = "project.lock"
HOLDER_NAME = "project.holder.json"
VIDEO_FRAMES = "frames"  # where frames extracted from videos go, inside the project folder
#: The first 16 bytes of every SQLite database file (https://sqlite.org/fileformat.html, 1.3.1).
SQLITE_HEADER = b"SQLite format 3\x00"
#: Frame and person ids are database integers (64-bit, signed).
_INT64 = (-(2**63), 2**63 - 1)
# What opening for writing meets in a folder that cannot be written.
_NOT_WRITABLE = (errno.EROFS, errno.EACCES, errno.EPERM)

Listener = Callable[[str, frozenset[int]], None]
_T = TypeVar("_T")
#: An edit renews its annotator's claim at most this often (a claim stands for minutes).
_RENEW_SECONDS = 30.0

__all__ = ["DB_NAME", "HOLDER_NAME", "LOCK_NAME", "VIDEO_FRAMES", "Applied", "Bulk",
           "LedgerEntry", "Project", "relative_path"]


class Project:
    """A Posewright project. Open with :meth:`open`, make with :meth:`create`.

    The object is safe to use from several threads (calls are serialised, or on a server
    each runs on a connection of its own); long work should still run off the UI thread.

    Attributes
    ----------
    folder
        Where the paths of frames and maps are relative to: the project folder, or for a
        hosted project the images root on this machine.
    location
        Where the project is, for messages: the folder, or the server's URL without its
        password.
    hosted
        Whether the project is on a server, shared by a team.

    Examples
    --------
    >>> import tempfile
    >>> folder = tempfile.mkdtemp()
    >>> with Project.create(folder, author="ana") as p:
    ...     p.read_only, len(p.frames())
    (False, 0)
    """

    def __init__(self, db: Database, folder: Path, author: str, read_only_reason: str | None,
                 lock: filelock.BaseFileLock | None = None, location: str | None = None):
        self._db: Database | None = db
        self.folder = folder
        self.location = location or str(folder)
        self._lock = lock
        self.author = author
        self.read_only_reason = read_only_reason
        self.hosted = db.dialect.hosted
        # A folder project has one undo stack for whoever edits it; on a server, each
        # annotator has their own.
        self._owner = author if self.hosted else ""
        #: What opening cleaned up after an interrupted run (a phrase each; empty if nothing).
        self.recovered: tuple[str, ...] = ()
        self._listeners: list[Listener] = []
        #: When this annotator's claim on a frame was last renewed by an edit (monotonic s).
        self._renewed: dict[int, float] = {}
        with db.read() as tx:
            self._meta = tx.meta.all()
        self.skeleton: Skeleton = skeleton_from_dict(json.loads(self._meta["skeleton"]))

    # ------------------------------------------------------------------ opening and closing

    @classmethod
    def create(cls, folder: str | Path, skeleton: Skeleton | None = None,
               author: str | None = None, frames: Sequence[NewFrame] = (),
               images_root: str | Path | None = None) -> Project:
        """Make a new project in ``folder`` (created if needed) and open it for editing.

        ``frames`` are registered with ids 1, 2, ... and ``images_root`` (a folder) is where
        the project's images are (:func:`app.jobs.new_project` finds and reads the images of
        a folder). The project appears complete or not at all; refused if ``folder`` already
        holds a project.
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
        skeleton = skeleton or coco_body()
        lock = _take_lock(folder)
        if lock is None:
            raise BadInput("another process is creating or editing a project here",
                           where=str(folder))
        if db.exists():  # made by another process between the first look and the lock
            lock.release()
            raise BadInput("a project already exists here", where=str(folder))
        try:
            return cls._create_locked(folder, lock, skeleton, author, frames, images_root)
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
    def _create_locked(cls, folder: Path, lock: filelock.BaseFileLock, skeleton: Skeleton,
                       author: str | None, frames: Sequence[NewFrame],
                       images_root: str | Path | None) -> Project:
        tmp = folder / (DB_NAME + ".new")
        conn = None
        try:
            for stale in folder.glob(DB_NAME + ".new*"):
                stale.unlink()
            conn = SqliteDatabase.connect(tmp, read_only=False)
            migrate_sqlite(conn)
            with SqliteDatabase(conn, tmp).write() as tx:
                tx.meta.set_many({
                    "project_id": str(uuid.uuid4()),
                    "created": str(time.time()),
                    "skeleton": json.dumps(skeleton.to_dict()),
                    "images_root": relative_path(Path(images_root), folder)
                    if images_root is not None else "",
                    "next_person_id": "1",
                    "next_note_id": "1",
                })
                tx.frames.insert(frames, first_id=1)
            conn.close()
            conn = None
            # A project appears complete or not at all.
            os.replace(tmp, folder / DB_NAME)
        finally:
            if conn is not None:
                conn.close()
            for leftover in folder.glob(DB_NAME + ".new*"):
                leftover.unlink()
        return cls._open_locked(folder, lock, author)

    @classmethod
    def open(cls, place: str | Path, author: str | None = None, read_only: bool = False,
             images: str | Path | None = None) -> Project:
        """Open the project in a folder, or on a server (``place`` a PostgreSQL URL or libpq
        connection string; see :mod:`app.store.hosted`).

        A folder project that another process is editing, or whose folder cannot be written,
        opens read-only and :attr:`read_only_reason` says why (who holds it; or that the folder
        cannot be written, with the system's reason); a hosted project opens read-only when
        the database role may only read it. Ask with ``read_only=True`` to never write.
        ``images`` is the images root on this machine (hosted projects only; default
        ``$POSEWRIGHT_IMAGES``, else the one the project records).
        """
        from app.store.hosted import is_database_url, open_hosted

        if is_database_url(str(place)):
            return open_hosted(cls, str(place), _author(author), read_only, images)
        folder = Path(place)
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
        return cls(_read_only_db(folder), folder, _author(author),
                   reason + _unread_changes(folder))

    @classmethod
    def _open_locked(cls, folder: Path, lock: filelock.BaseFileLock,
                     author: str | None) -> Project:
        db = folder / DB_NAME
        # The lock file may exist and be writable in a folder or beside a database that are
        # not (SQLite needs both to write); such a project is read-only like any other.
        blocked = next((p for p in (folder, db) if not os.access(p, os.W_OK)), None)
        if blocked is not None:
            lock.release()
            where = "in a folder" if blocked == folder else f"stored in a {DB_NAME}"
            return cls(_read_only_db(folder), folder, _author(author),
                       f"{where} that cannot be written" + _unread_changes(folder))
        try:
            conn = SqliteDatabase.connect(db, read_only=False)
            _check_version(conn, folder)
            migrate_sqlite(conn)
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
        project = cls(SqliteDatabase(conn, db), folder, who, None, lock=lock)
        project.recovered = tuple(done)
        return project

    def close(self) -> None:
        """Close the database and release the lock (safe to call twice)."""
        db, self._db = self._db, None
        if db is None:
            return
        db.close()
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
        """The folder the project's images were registered from, links not followed (None if
        none was); for a hosted project, the images root on this machine."""
        root = self._meta.get("images_root", "")
        if self.hosted:
            return self.folder
        return Path(os.path.abspath(self.folder / root)) if root else None

    @property
    def db(self) -> Database:
        if self._db is None:
            raise ReadOnly(f"{self.location}: the project is closed")
        return self._db

    def meta(self, key: str, default: str | None = None) -> str | None:
        return self._meta.get(key, default)

    def settings(self) -> dict[str, str]:
        """Every project setting (a copy)."""
        return dict(self._meta)

    def subscribe(self, listener: Listener) -> None:
        """Call ``listener(kind, frame_ids)`` after every committed change, this process's
        and, for a hosted project, other annotators' (``kind``: ``edit``, ``undo``, ``redo``,
        ``import``, ``frames``, ``meta``, ``triage``, ``claims``). Others' changes arrive on
        another thread."""
        self._listeners.append(listener)

    def _notify(self, kind: str, frame_ids: Iterable[int | None]) -> None:
        ids = frozenset(int(f) for f in frame_ids if f is not None)
        for listener in list(self._listeners):
            listener(kind, ids)

    def _remote_change(self, kind: str, frame_ids: frozenset[int], session: str) -> None:
        """A change committed to a hosted project's database, by anyone (called on the
        listener's thread); this process's own changes were told already."""
        if session and session == getattr(self._db, "session", None):
            return
        if kind in ("meta", "import") and self._db is not None:
            with contextlib.suppress(StorageFailed), self._db.read() as tx:
                self._meta.update(tx.meta.all())
        self._notify(kind, frame_ids)

    # ------------------------------------------------------------------ transactions

    @contextmanager
    def _write(self, frames: Iterable[int] = (), exclusive: bool = False) -> Iterator[Tx]:
        """One write transaction; its writes to ``meta`` reach :meth:`meta` once it commits.
        Listeners hear of what it changed after the commit (and, on a server, so do other
        annotators)."""
        self.check_writable()
        with self.db.write(frames, exclusive) as tx:
            yield tx
        self._meta.update(tx.meta.written)

    def _read(self) -> contextlib.AbstractContextManager[Tx]:
        return self.db.read()

    def check_writable(self) -> None:
        """Raise :class:`~app.errors.ReadOnly`, with the reason, unless the project can be
        changed."""
        if self.read_only_reason is not None:
            raise ReadOnly(f"{self.location}: read-only ({self.read_only_reason})")
        if self._db is None:
            raise ReadOnly(f"{self.location}: the project is closed")

    # ------------------------------------------------------------------ reading

    def frames(self) -> list[Frame]:
        """Every frame, by id."""
        with self._read() as tx:
            return tx.frames.all()

    def frame_page(self, query: FrameQuery) -> list[Frame]:
        """One page of frames, sorted and filtered by the database (see
        :class:`~app.store.frames.FrameQuery`)."""
        with self._read() as tx:
            return tx.frames.page(query)

    def worklist_page(self, query: FrameQuery) -> list[WorklistEntry]:
        """One page of the Worklist in one read: each frame with its triage result (None:
        never triaged) and its count of stored findings (None: never computed); one query
        for a page of triaged frames (:meth:`FramesGateway.worklist
        <app.store.frames.FramesGateway.worklist>`)."""
        with self._read() as tx:
            return tx.frames.worklist(query)

    def frame_count(self, query: FrameQuery | None = None) -> int:
        """How many frames the query keeps (None: every frame)."""
        with self._read() as tx:
            return tx.frames.count(query or FrameQuery())

    def frame_position(self, query: FrameQuery, frame_id: int) -> int | None:
        """Where a frame stands (0-based) in the query's order; None if it does not keep it."""
        with self._read() as tx:
            return tx.frames.position(query, frame_id)

    def frame_ids(self, query: FrameQuery) -> list[int]:
        """The ids of the frames the query keeps, in its order (offset and limit aside)."""
        with self._read() as tx:
            return tx.frames.ordered_ids(query)

    def reason_counts(self) -> dict[str, int]:
        """How many frames triage found a reason of each kind in."""
        with self._read() as tx:
            return tx.frames.kind_counts()

    def has_triage(self) -> bool:
        """Whether triage has scored any frame."""
        with self._read() as tx:
            return tx.frames.any_triaged()

    def frame(self, frame_id: int) -> Frame:
        if not _INT64[0] <= int(frame_id) <= _INT64[1]:
            raise NotFound(f"the project has no frame {frame_id}")
        with self._read() as tx:
            found = tx.frames.get(frame_id)
        if found is None:
            raise NotFound(f"the project has no frame {frame_id}")
        return found

    def find_frame(self, ref: str | int) -> Frame:
        """A frame by id, or by file name (relative to the images folder) or base name."""
        text = str(ref)
        if text.lstrip("-").isdigit():
            try:
                return self.frame(int(text))
            except NotFound:
                pass
        with self._read() as tx:
            found = tx.frames.by_name(text)
        if len(found) == 1:
            return found[0]
        if len(found) > 1:
            raise NotFound(f"{text!r} names {count(len(found), 'frame')}; give the frame id")
        raise NotFound(f"the project has no frame {text!r} (neither an id nor a file name)")

    def image_path(self, frame: Frame) -> Path:
        """The absolute path of a frame's image."""
        path = Path(frame.path)
        return path if path.is_absolute() else self.folder / path

    def people(self, frame_id: int) -> list[Person]:
        """The people of a frame, by id."""
        with self._read() as tx:
            return tx.people.of_frame(frame_id, self.skeleton.num_joints)

    def people_by_frame(self) -> dict[int, list[Person]]:
        """Every person of the project grouped by frame id (for export and batch analysis)."""
        with self._read() as tx:
            return tx.people.by_frame(self.skeleton.num_joints)

    def groupings(self) -> dict[int, str]:
        """How each frame's auto-labels were grouped (:attr:`Frame.grouping`), for the frames
        that record it."""
        with self._read() as tx:
            return tx.frames.groupings()

    def frames_with_people(self) -> set[int]:
        """The ids of the frames that have at least one person (no person read)."""
        with self._read() as tx:
            return tx.people.frames_with_people()

    def people_of_frames(self, frame_ids: Iterable[int]) -> dict[int, list[Person]]:
        """The people of the given frames grouped by frame id (frames without people left
        out): :meth:`people_by_frame` for a few frames."""
        with self._read() as tx:
            return tx.people.of_frames(frame_ids, self.skeleton.num_joints)

    def tracks_by_frame(self) -> dict[int, dict[int, int]]:
        """Frame id -> {person id: track} of every person on a track (joints not read)."""
        with self._read() as tx:
            return tx.people.tracks()

    def regions(self, frame_id: int) -> list[RegionRow]:
        """The frame's ignore regions: ``(region_id, polygons, extra)``."""
        with self._read() as tx:
            return tx.regions.of_frame(frame_id)

    def regions_by_frame(self) -> dict[int, list[RegionRow]]:
        with self._read() as tx:
            return tx.regions.by_frame()

    def frame_extras(self) -> dict[int, dict[str, Any]]:
        """Fields of imported COCO image records kept for the round trip, by frame id."""
        with self._read() as tx:
            return tx.frames.extras()

    def triage(self, frame_id: int) -> TriageResult | None:
        """The frame's suspicion score and reasons from the last triage, or None."""
        with self._read() as tx:
            return tx.triage.of_frame(frame_id)

    def triage_all(self) -> dict[int, TriageResult]:
        """Every frame's triage result, by frame id."""
        with self._read() as tx:
            return tx.triage.all()

    def store_triage(self, results: dict[int, TriageResult]) -> None:
        """Replace the triage results of the given frames (one transaction, not ledgered:
        triage is derived from the labels and can be recomputed at any time)."""
        with self._write() as tx:
            tx.triage.store(results, time.time())
        self._tell(tx)

    def findings(self, frame_id: int | None = None) -> dict[int, list[dict[str, Any]]]:
        """The stored findings (as :meth:`app.analysis.triage.findings.Finding.to_dict`
        wrote them), worst first, by frame id; only one frame's with ``frame_id``. A frame
        whose findings were computed and found none maps to an empty list."""
        with self._read() as tx:
            return tx.findings.of_frames(frame_id)

    def finding_counts(self) -> dict[int, int]:
        """Per frame, how many findings are stored, without reading them (the Worklist
        counts them on every triage change); frames never computed are absent."""
        with self._read() as tx:
            return tx.findings.counts()

    def findings_digests(self, frame_id: int | None = None) -> dict[int, str]:
        """Per frame, the digest of the labels its stored findings were computed from; only
        one frame's with ``frame_id``."""
        with self._read() as tx:
            return tx.findings.digests(frame_id)

    def store_findings(self, results: dict[int, tuple[str, list[dict[str, Any]]]]) -> None:
        """Replace the findings of the given frames, each with the digest of the labels they
        were computed from (one transaction, not ledgered: findings are derived from the
        labels and the maps and can be recomputed at any time)."""
        with self._write() as tx:
            tx.findings.store(results, time.time())
        self._tell(tx)

    def dismissed(self) -> dict[int, set[str]]:
        """The fingerprints of the dismissed findings, by frame id."""
        with self._read() as tx:
            return tx.dismissals.keys()

    def dismissed_of_frames(self, frame_ids: Iterable[int]) -> dict[int, set[str]]:
        """:meth:`dismissed` of the given frames only."""
        with self._read() as tx:
            return tx.dismissals.keys_of_frames(frame_ids)

    def maps_path(self, frame_id: int) -> tuple[Path, int] | None:
        """Where the frame's network maps are (absolute path) and their stride, or None."""
        with self._read() as tx:
            found = tx.maps.of_frame(frame_id)
        if found is None:
            return None
        path = Path(found[0])
        return (path if path.is_absolute() else self.folder / path), found[1]

    def new_map_run(self, kind: str) -> Path:
        """A new, empty folder ``maps/<kind>-<run id>/`` for the map files of one run.

        Its files count once a :meth:`Bulk.set_maps` in a committed :meth:`bulk` names them;
        until then they are the run's alone, and if the process dies first the next open
        removes the folder (see :mod:`app.store.recovery`). Call :meth:`drop_map_run` when the
        run is over, whether it landed or not.
        """
        self.check_writable()
        return recovery.new_run_folder(self.folder, kind)

    def drop_map_run(self, folder: Path) -> None:
        """Remove a run folder from :meth:`new_map_run` unless a committed run uses it."""
        rel = relative_path(folder, self.folder)
        if rel not in json.loads(self._meta.get(recovery.MAP_RUNS_KEY, "[]")):
            shutil.rmtree(folder, ignore_errors=True)
            with contextlib.suppress(OSError):  # only when nothing else is in maps/
                folder.parent.rmdir()

    def _sweep_maps(self) -> None:
        """Delete map files that the last commit superseded (see :mod:`app.store.recovery`).
        On a server other annotators may still read them; they stay."""
        db = self.db
        if not isinstance(db, SqliteDatabase):
            return
        with db.mutex:
            try:
                recovery.sweep(self.folder, db.conn)
            except OSError as exc:
                # The work itself is committed; the list of folders to sweep stays in the
                # database, so the next open finishes this.
                log.warning("%s: old maps not deleted yet (%s); the next open will", self.folder,
                            exc)
            with db.read() as tx:
                for key in (recovery.MAP_RUNS_KEY, recovery.SWEEP_KEY):
                    value = tx.meta.get(key)
                    if value is not None:
                        self._meta[key] = value

    def notes(self, frame_id: int) -> list[Note]:
        with self._read() as tx:
            return tx.notes.of_frame(frame_id)

    def labels(self, frame_id: int) -> FrameLabels:
        """Everything an edit can touch in one frame (pass it to :meth:`apply` as ``seen``
        to have an edit refused if another annotator changed what it changes meanwhile)."""
        with self._read() as tx:
            return ledger.load_labels(tx, frame_id, self.skeleton)

    def alternatives(self, frame_id: int) -> list[Alternative]:
        """The reviewers' versions of the frame's people that still stand (see
        :mod:`app.review.settle`)."""
        with self._read() as tx:
            return tx.alternatives.open_for(frame_id)

    def packet_records(self, packet_id: str, direction: str, reviewer: str | None = None,
                       sha256: str | None = None) -> list[PacketRecord]:
        """This project's records of a review packet, newest first (see
        :class:`~app.model.records.PacketRecord`)."""
        with self._read() as tx:
            return tx.packets.find(packet_id, direction, reviewer, sha256)

    def decisions(self) -> dict[int, FrameDecision]:
        """In a project opened from a review packet: the reviewer's decisions, by frame."""
        with self._read() as tx:
            return tx.decisions.all()

    def history(self, frame_id: int | None = None, limit: int | None = None) -> list[LedgerEntry]:
        """Ledger entries, newest first; only those of one frame when ``frame_id`` is given."""
        with self._read() as tx:
            return tx.ledger.entries(frame_id=frame_id, limit=limit)

    def action(self, group: int) -> list[LedgerEntry]:
        """The ledger entries of one action (group), oldest first."""
        with self._read() as tx:
            return list(reversed(tx.ledger.entries(group=group)))

    def can_undo(self) -> bool:
        with self._read() as tx:
            return tx.ledger.top("undo_stack", self._owner) is not None

    def can_redo(self) -> bool:
        with self._read() as tx:
            return tx.ledger.top("redo_stack", self._owner) is not None

    def counts(self) -> dict[str, int]:
        """How many frames, people, labelled joints, ledger entries and frames per state."""
        with self._read() as tx:
            frames = tx.frames.counts()
            return {"frames": frames.pop("frames"), "people": tx.people.count(),
                    "ledger": tx.ledger.count(), "notes": tx.notes.count(),
                    "unreadable images": frames.pop("unreadable images"), **frames}

    # ------------------------------------------------------------------ claims

    def claim(self, frame_id: int) -> Claim | None:
        """Say that this annotator is working on ``frame_id`` (hosted projects; renewed by
        every edit on it). Returns the claim that stands on the frame: ours, or a colleague's
        that has not run out. A folder project has one editor, and no claims."""
        if not self.hosted or self.read_only:
            return None
        def run(tx: Tx) -> Claim | None:
            tx.event("claims", [frame_id])
            return tx.claims.take(frame_id, self.author)

        return self._transact(run)

    def release_claim(self) -> None:
        """Give up this annotator's claim (on closing the frame or the project)."""
        if not self.hosted or self.read_only or self._db is None:
            return
        with self._write() as tx:
            tx.event("claims", tx.claims.release(self.author))

    def claims(self) -> dict[int, Claim]:
        """The claims that stand, by frame id (empty for a folder project)."""
        if not self.hosted:
            return {}
        with self._read() as tx:
            return tx.claims.standing()

    # ------------------------------------------------------------------ editing

    def apply(self, edit: Edit, *, author: str | None = None,
              seen: FrameLabels | None = None) -> Applied:
        """Apply one edit as one transaction; returns once it is durable.

        The first label edit of an untouched frame also marks the frame corrected (in the same
        undo step). An edit that changes nothing records nothing. Refused edits raise
        :class:`~app.errors.EditRefused` and change nothing. ``author`` credits the edit to
        someone other than :attr:`author` (a merged review packet credits its reviewer).
        ``seen``: the frame's labels as the editor saw them (:meth:`labels`); the edit is
        planned from them and refused (:class:`~app.errors.ChangedMeanwhile`, naming who
        changed what and when) if what it changes no longer holds what they show. Without
        ``seen`` the edit is planned from the labels as they are.
        """
        renew = self.hosted and time.monotonic() - self._renewed.get(edit.frame_id, -1e9) \
            > _RENEW_SECONDS

        def run(tx: Tx) -> Applied:
            applied = ledger.apply_edit(tx, edit, self.skeleton, author or self.author,
                                        self._owner, seen)
            if applied.group_id is not None and renew:
                tx.claims.renew(edit.frame_id, self.author)
            return applied

        applied = self._transact(run, frames=[edit.frame_id])
        if renew and applied.group_id is not None:
            self._renewed = {edit.frame_id: time.monotonic()}
        return applied

    def apply_batch(self, edits: Sequence[Edit], summary: str, *,
                    action: str = "Batch") -> Applied:
        """Apply edits of several frames as one action (one transaction, one ledger group, one
        undo step): a track joined or split over a sequence, a correction carried forward.
        Refused whole, with nothing changed, when any edit is."""
        edits = list(edits)
        return self._transact(lambda tx: ledger.apply_batch(
            tx, edits, self.skeleton, self.author, self._owner, action, summary),
            frames=[e.frame_id for e in edits])

    def set_tracks(self, rows: Iterable[tuple[int, int | None, str]], summary: str,
                   target: str = "tracks") -> int:
        """Write many people's tracks at once, ``(person id, track, who set it)``, as bulk
        work (one ledger record, not undone, like an import): what linking a whole project
        does. Returns how many people were written."""
        rows = list(rows)
        with self.bulk("LinkTracks", summary, target, kind="import") as b:
            b.set_tracks(rows)
        return len(rows)

    def undo(self) -> int | None:
        """Undo the newest action still on the undo stack; returns the new ledger group or
        None when there is nothing to undo. Recorded in the ledger, so it survives a restart.
        On a server each annotator undoes their own actions; one whose changes a colleague has
        changed since is refused, naming who and when."""
        return self._transact(lambda tx: ledger.unwind(
            tx, "undo_stack", "redo_stack", "undo", self.skeleton, self.author, self._owner))

    def redo(self) -> int | None:
        """Redo the newest undone action; returns the new ledger group or None."""
        return self._transact(lambda tx: ledger.unwind(
            tx, "redo_stack", "undo_stack", "redo", self.skeleton, self.author, self._owner))

    def return_to(self, seq: int, frame_id: int | None = None) -> int | None:
        """Bring the labels back to how they were right after ledger entry ``seq``.

        With ``frame_id`` only that frame's changes are reverted, otherwise the whole project's.
        The return is itself one new undoable action (nothing is deleted from the ledger).
        Bulk work (imports, packet records) is not reverted.
        """
        return self._transact(lambda tx: ledger.return_to(
            tx, seq, frame_id, self.skeleton, self.author, self._owner))

    def _transact(self, work: Callable[[Tx], _T], frames: Iterable[int] = ()) -> _T:
        """Run ``work`` in one write transaction and tell the listeners; a transaction the
        server gave up to break a deadlock is run again (a few times)."""
        from app.store.hosted import TryAgain

        attempts = 0
        while True:
            try:
                with self._write(frames) as tx:
                    result = work(tx)
            except TryAgain:
                attempts += 1
                if attempts > 3:
                    raise
                log.info("%s: a transaction was given up to break a deadlock; running it "
                         "again", self.location)
                continue
            self._tell(tx)
            return result

    def _tell(self, tx: Tx) -> None:
        """Tell the listeners what a committed transaction changed."""
        for kind, ids in tx.events:
            self._notify(kind, ids)

    # ------------------------------------------------------------------ bulk work (importers)

    @contextmanager
    def bulk(self, action: str, summary: str, target: str, kind: str = "import",
             frame_id: int | None = None) -> Iterator[Bulk]:
        """One all-or-nothing transaction for bulk writers: everything written through the
        yielded :class:`Bulk` lands together with one ledger entry of ``kind`` (``import`` for
        importers, ``review`` for packet work), or nothing does. Such entries record what was
        done; they are not on the undo stack. On a server no edit interleaves with it.
        """
        with self._write(exclusive=True) as tx:
            bulk = Bulk(self, tx)
            yield bulk
            bulk.record_map_runs()
            ledger.record_bulk(tx, kind, action, summary, EditContext(self.author, time.time()),
                               frame_id, target, bulk.stats)
            touched = set(bulk.frames_touched)
            for event, ids in tx.events:
                if event in ("import", "frames"):
                    touched |= ids
            tx.events[:] = [("import", frozenset(touched))]
        if bulk.superseded:
            self._sweep_maps()
        self._tell(tx)

    def set_meta(self, key: str, value: str) -> None:
        """Record a project setting (one transaction)."""
        with self._write() as tx:
            tx.meta.set(key, value)
            tx.event("meta")
        self._tell(tx)

    def add_frames(self, frames: Sequence[NewFrame], images_root: str | Path | None = None,
                   settings: dict[str, str] | None = None) -> list[Frame]:
        """Register new frames (ids after the highest one) in one transaction, with project
        ``settings`` that go with them; ``images_root`` becomes the project's images folder
        if it has none yet. :mod:`app.jobs` finds and reads the images and videos."""
        with self._write(exclusive=True) as tx:
            ids = tx.frames.insert(frames, tx.frames.top_id() + 1)
            if images_root is not None and not self._meta.get("images_root"):
                tx.meta.set("images_root", relative_path(Path(images_root), self.folder))
            tx.meta.set_many(settings or {})
        self._tell(tx)
        return [self.frame(i) for i in ids]

    def mark_image_status(self, frame_id: int, status: str) -> None:
        """Record that a frame's image is ok, missing, corrupt or oversized (found on
        decoding). On a server the status belongs to this machine's copy of the image, so it
        is not written for everyone."""
        if self.read_only or self.hosted:
            return
        with self._write() as tx:
            tx.frames.set_status(frame_id, status)
        self._tell(tx)


class Bulk:
    """Writes inside one :meth:`Project.bulk` transaction (for importers and review work).

    Besides its own methods it offers the gateways importers write through: ``frames``,
    ``notes``, ``regions``, ``packets``, ``alternatives`` and ``decisions``.
    """

    def __init__(self, project: Project, tx: Tx):
        self._p = project
        self._tx = tx
        self.stats: dict[str, int] = {}
        self.frames_touched: set[int] = set()
        #: Folders of map runs whose files this transaction replaces, and that it writes to.
        self.superseded: set[str] = set()
        self._runs_used: set[str] = set()
        self._is_run: dict[str, bool] = {}
        self.frames = tx.frames
        self.notes = tx.notes
        self.regions = tx.regions
        self.packets = tx.packets
        self.alternatives = tx.alternatives
        self.decisions = tx.decisions

    def count(self, key: str, n: int = 1) -> None:
        self.stats[key] = self.stats.get(key, 0) + n

    def allocate_person_ids(self, n: int, at_least: int = 1) -> int:
        """Reserve ``n`` fresh person ids; returns the first."""
        return self._tx.counters.take("person_ids", n, at_least)

    def reserve_person_ids(self, ids: Iterable[int]) -> None:
        """Make sure later allocations never hand out any of ``ids``."""
        self._tx.counters.reserve("person_ids", ids)

    def set_tracks(self, rows: Sequence[tuple[int, int | None, str]]) -> None:
        """Write ``(person id, track, who set it)`` of many people."""
        self.count("people", self._tx.people.set_tracks(rows))

    def reserve_note_ids(self, ids: Iterable[int]) -> None:
        self._tx.counters.reserve("note_ids", ids)

    def existing_person_ids(self, ids: Iterable[int]) -> set[int]:
        return self._tx.people.existing_ids(ids)

    def add_people(self, rows: Iterable[tuple[int, Person]]) -> None:
        """Insert people ``(frame_id, person)`` in batches; ids must be new."""
        rows = list(rows)
        self.count("people", self._tx.people.insert(rows))
        self.frames_touched.update(f for f, _ in rows)

    def add_people_raw(self, rows: list[tuple[Any, ...]]) -> None:
        """Insert pre-encoded rows ``(frame_id, id, keypoints, scores, sources, origin, score,
        extra)`` (the importers' fast path)."""
        self.count("people", self._tx.people.insert_encoded(rows))
        self.frames_touched.update(r[0] for r in rows)

    def rekey_frames(self, mapping: dict[int, int]) -> None:
        """Give frames new ids (``old -> new``), everywhere they are referenced."""
        self._tx.frames.rekey(mapping)
        self.frames_touched.update(n for o, n in mapping.items() if o != n)

    def set_maps(self, frame_id: int, path: Path, stride: int) -> None:
        """Record where a frame's network maps are (stored relative to the project folder).

        A map file of a run folder (:meth:`Project.new_map_run`) that this replaces is deleted
        after the commit, never before."""
        rel = relative_path(path, self._p.folder)
        old = self._tx.maps.of_frame(frame_id)
        if old is not None and old[0] != rel and self._in_run(old[0]):
            self.superseded.add(old[0].rpartition("/")[0])
        if self._in_run(rel):
            self._runs_used.add(rel.rpartition("/")[0])
        self._tx.maps.put(frame_id, rel, stride)

    def _in_run(self, rel: str) -> bool:
        folder = rel.rpartition("/")[0]
        if folder not in self._is_run:
            self._is_run[folder] = recovery.is_run_folder(self._p.folder, folder)
        return self._is_run[folder]

    def record_map_runs(self) -> None:
        """Write, in the transaction, which run folders rows may name and which to sweep."""
        if self._runs_used:
            runs = set(json.loads(self._p.meta(recovery.MAP_RUNS_KEY) or "[]"))
            self.set_meta(recovery.MAP_RUNS_KEY, json.dumps(sorted(runs | self._runs_used)))
        if self.superseded:
            pending = set(json.loads(self._p.meta(recovery.SWEEP_KEY) or "[]"))
            self.set_meta(recovery.SWEEP_KEY, json.dumps(sorted(pending | self.superseded)))

    def set_grouping(self, frame_ids: Iterable[int], grouping: str | None) -> None:
        """Record how the auto-labels of ``frame_ids`` were grouped (``"alone"``,
        ``"frame-before"``), or None: no record (labels from elsewhere)."""
        self._tx.frames.set_grouping(frame_ids, grouping)

    def set_file_name(self, frame_id: int, file_name: str) -> None:
        self._tx.frames.set_file_name(frame_id, file_name)

    def set_frame_extra(self, frame_id: int, extra: dict[str, Any]) -> None:
        """Replace the fields of an imported COCO image record kept for the round trip."""
        self._tx.frames.set_extra(frame_id, extra)

    def set_meta(self, key: str, value: str) -> None:
        self._tx.meta.set(key, value)


# ---------------------------------------------------------------------- module helpers

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


def _read_only_db(folder: Path) -> SqliteDatabase:
    path = folder / DB_NAME
    conn = SqliteDatabase.connect(path, read_only=True)
    try:
        conn.execute("SELECT count(*) FROM sqlite_master").fetchone()
    except sqlite3.OperationalError:
        if os.access(folder, os.W_OK):
            raise
        # A WAL database needs its shared-memory file beside it even to be read; in a
        # folder nobody can write, nobody can change the database either, so SQLite may
        # read it as immutable (no locks, no shared memory).
        conn.close()
        conn = SqliteDatabase.connect(path, read_only=True, immutable=True)
    _check_version(conn, folder)
    db = SqliteDatabase(conn, path)
    with db.read() as tx:  # not migrated: an older project's frames record no grouping
        db.frames_grouping = "grouping" in columns(tx, "frames")
    return db


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
    return StorageFailed(storage_failed_text(exc, folder / DB_NAME))


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
    cursor = conn.cursor()
    try:
        tx = Tx(cursor, SQLITE, writing=False)
        version = schema_version(tx)
        has_meta = version > 0 and tx.row(
            "SELECT 1 FROM meta WHERE key = 'skeleton'") is not None
    except sqlite3.DatabaseError as exc:
        conn.close()
        raise BadInput(f"the project database cannot be read ({exc})",
                       where=str(folder / DB_NAME),
                       hint="restore it from a backup; Posewright leaves it as it is") from None
    finally:
        cursor.close()
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


def relative_path(path: Path, folder: Path) -> str:
    """``path`` relative to ``folder`` when it lies inside it (or beside it), else absolute.

    Examples
    --------
    >>> relative_path(Path("/data/p/images/a.jpg"), Path("/data/p"))
    'images/a.jpg'
    >>> relative_path(Path("/elsewhere/a.jpg"), Path("/data/p"))
    '/elsewhere/a.jpg'
    """
    path = Path(os.path.abspath(path))
    try:
        rel = os.path.relpath(path, os.path.abspath(folder))
    except ValueError:  # another drive on Windows
        return path.as_posix()
    if rel.startswith(".." + os.sep + ".." + os.sep):
        return path.as_posix()
    return Path(rel).as_posix()
