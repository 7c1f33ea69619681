"""What an interrupted run can leave in a project folder, and how the next open settles it.

The database is always consistent (every action is one SQLite transaction); files beside it
are made consistent with it here. Only the process that holds the project's lock writes these
files, so whatever the lock holder finds on opening was left by a process that died.

**Map runs.** A run that keeps network maps (pre-labelling) writes them into a folder of its
own, ``maps/<kind>-<run id>/``, marked as ours by a ``.posewright-run`` file, beside the
maps of earlier runs. The transaction that records the run also points each frame's ``maps``
row at the new files, adds the folder to the meta key ``map_runs`` (the folders rows may name)
and lists the folders whose files it superseded under ``maps_to_sweep``. Only after the commit
are superseded files deleted. So at any moment:

- before the commit, the database names the earlier maps, which are untouched, and the new
  folder is not in ``map_runs``: the next open removes it (rolled back);
- after the commit, the database names the new maps, which are complete; superseded files
  still on disk are in folders listed in ``maps_to_sweep``: the next open deletes every map
  file there that no row names (rolled forward).

**Leftovers.** Besides, the next open removes folders of video frames being extracted
(``frames/.<name>.*.partial``), the staging folders of pre-labelling runs made before map runs
had folders of their own (``maps/prelabel/.staging-*``; their moved-aside maps are put back
when the run certainly did not commit) and reports a lock note (``project.holder.json``) left
by a process that died.
"""

from __future__ import annotations

import json
import logging
import os
import shutil
import sqlite3
import time
import uuid
from collections.abc import Iterable
from pathlib import Path

log = logging.getLogger(__name__)

MAPS_DIR = "maps"
#: The folder where pre-labelling kept its maps before each run had a folder of its own.
LEGACY_PRELABEL_DIR = "maps/prelabel"
RUN_MARKER = ".posewright-run"
MAP_RUNS_KEY = "map_runs"
SWEEP_KEY = "maps_to_sweep"


def new_run_folder(project_folder: Path, kind: str) -> Path:
    """Make ``maps/<kind>-<time>-<random>/`` with its marker; returns its absolute path."""
    root = project_folder / MAPS_DIR
    root.mkdir(exist_ok=True)
    name = f"{kind}-{time.strftime('%Y%m%d-%H%M%S')}-{uuid.uuid4().hex[:6]}"
    folder = root / name
    folder.mkdir()
    (folder / RUN_MARKER).write_text(json.dumps({"kind": kind, "created": time.time(),
                                                 "pid": os.getpid()}))
    return folder


def is_run_folder(project_folder: Path, rel_dir: str) -> bool:
    """Whether ``rel_dir`` (relative, posix) is a folder of map runs this store manages."""
    if rel_dir == LEGACY_PRELABEL_DIR:
        return True
    head, _, name = rel_dir.partition("/")
    return (head == MAPS_DIR and "/" not in name and bool(name)
            and (project_folder / rel_dir / RUN_MARKER).is_file())


def meta_list(conn: sqlite3.Connection, key: str) -> list[str]:
    row = conn.execute("SELECT value FROM meta WHERE key = ?", (key,)).fetchone()
    return list(json.loads(row[0])) if row else []


def sweep(project_folder: Path, conn: sqlite3.Connection) -> list[str]:
    """Delete the superseded map files of the folders in ``maps_to_sweep`` (those no ``maps``
    row names), remove folders left with no maps, and clear the list. Returns the folders
    touched (relative paths). Call with the project's lock held, outside a transaction."""
    pending = meta_list(conn, SWEEP_KEY)
    if not pending:
        return []
    runs = meta_list(conn, MAP_RUNS_KEY)
    for rel_dir in pending:
        folder = project_folder / rel_dir
        if not folder.is_dir():
            continue
        named = _named(conn, rel_dir)
        left = 0
        for entry in folder.glob("*.npz"):
            if entry.name in named:
                left += 1
            else:
                entry.unlink(missing_ok=True)
        if not left:
            shutil.rmtree(folder, ignore_errors=True)
    runs = [r for r in runs if (project_folder / r).is_dir()]
    _write_meta(conn, {MAP_RUNS_KEY: runs, SWEEP_KEY: []})
    return pending


def settle(project_folder: Path, conn: sqlite3.Connection) -> list[str]:
    """Make the files of a project agree with its database after an interrupted run (see the
    module docstring); returns what was done, a phrase each, for one line to the user."""
    done: list[str] = []
    root = project_folder / MAPS_DIR
    if root.is_dir():
        runs = set(meta_list(conn, MAP_RUNS_KEY))
        with os.scandir(root) as entries:  # maps/ may hold many imported map files
            folders = sorted(e.name for e in entries if "-" in e.name and e.is_dir())
        for name in folders:
            rel = f"{MAPS_DIR}/{name}"
            if rel not in runs and (root / name / RUN_MARKER).is_file():
                shutil.rmtree(root / name, ignore_errors=True)
                done.append(f"removed the maps of a run that did not finish ({rel})")
        done += _settle_legacy_staging(project_folder, conn)
        if meta_list(conn, SWEEP_KEY):
            swept = sweep(project_folder, conn)
            done.append("deleted the maps a finished run replaced (in "
                        + ", ".join(swept) + ")")
    frames = project_folder / "frames"
    if frames.is_dir():
        for partial in sorted(frames.glob(".*.partial")):
            shutil.rmtree(partial, ignore_errors=True)
            done.append(f"removed the frames of a video extraction that did not finish "
                        f"(frames/{partial.name})")
    return done


def _settle_legacy_staging(project_folder: Path, conn: sqlite3.Connection) -> list[str]:
    """Staging folders of the earlier pre-labelling layout, where a run moved the previous
    maps aside into ``.staging-*/previous/`` and its new ones over them inside its
    transaction. New maps still waiting in the staging folder prove the run was killed before
    its commit, so the moved-aside maps, the ones the database names, go back in place."""
    legacy = project_folder / LEGACY_PRELABEL_DIR
    if not legacy.is_dir():
        return []
    done = []
    for staging in sorted(legacy.glob(".staging-*")):
        previous = staging / "previous"
        if any(staging.glob("*.npz")) and previous.is_dir():
            for old in previous.glob("*.npz"):
                os.replace(old, legacy / old.name)
            done.append(f"put back the maps an unfinished run had replaced "
                        f"({LEGACY_PRELABEL_DIR}/{staging.name})")
        else:
            done.append(f"removed {LEGACY_PRELABEL_DIR}/{staging.name}")
        shutil.rmtree(staging, ignore_errors=True)
    if done:
        _write_meta(conn, {SWEEP_KEY: sorted({*meta_list(conn, SWEEP_KEY),
                                              LEGACY_PRELABEL_DIR})})
    return done


def _named(conn: sqlite3.Connection, rel_dir: str) -> set[str]:
    """The file names in ``rel_dir`` that a ``maps`` row names."""
    like = rel_dir.replace("\\", "\\\\").replace("%", "\\%").replace("_", "\\_") + "/%"
    rows = conn.execute("SELECT path FROM maps WHERE path LIKE ? ESCAPE '\\'", (like,))
    prefix = rel_dir + "/"
    return {p[len(prefix):] for (p,) in rows if "/" not in p[len(prefix):]}


def _write_meta(conn: sqlite3.Connection, values: dict[str, Iterable[str]]) -> None:
    conn.execute("BEGIN IMMEDIATE")
    try:
        conn.executemany("INSERT OR REPLACE INTO meta VALUES (?, ?)",
                         [(k, json.dumps(sorted(v))) for k, v in values.items()])
    except BaseException:
        conn.execute("ROLLBACK")
        raise
    conn.execute("COMMIT")
