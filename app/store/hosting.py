"""``posewright host``: copy a folder project into an empty PostgreSQL database.

Everything a project holds goes over in one transaction: settings, frames, people, the whole
ledger with its undo and redo stacks, notes, ignore regions, triage results and findings,
dismissals, map references, review packets and the reviewers' versions. Either all of it
lands or nothing does. Images and map files stay where they are: the paths of frames and maps
are stored relative to the images root (the folder project's images folder, or the project
folder when it has none), whose absolute path on this machine becomes the project's default;
another machine names its own with ``--images DIR`` or ``$POSEWRIGHT_IMAGES``.

A folder project has one undo stack for whoever edits it; hosted, each entry goes to the stack
of the author who made that action.
"""

from __future__ import annotations

import os
from pathlib import Path

from app.errors import BadInput
from app.progress import Progress
from app.store.db import Tx
from app.store.hosted import PostgresDatabase
from app.store.meta import META_COUNTERS
from app.store.project import Project, project_in_use, relative_path
from app.store.schema import SCHEMA_VERSION, apply_migration

#: Settings that belong to the folder (its counters are sequences on a server, its map runs
#: are swept by the folder's own lock holder).
_FOLDER_ONLY = {*META_COUNTERS.values(), "map_runs", "maps_to_sweep", "images_root"}


def host(folder: str | Path, url: str, progress: Progress | None = None) -> dict[str, int]:
    """Copy the folder project in ``folder`` into the empty database at ``url``; returns
    how many frames, people, ledger entries, notes and regions went over.

    Refused (nothing written) when the database already holds tables, when the folder
    project is a review packet's, or when the project is open for editing elsewhere.
    """
    progress = progress or Progress()
    # Held for editing while it is copied, so that the copy is of one moment (a folder that
    # cannot be written is copied read-only: nobody can change it either).
    with Project.open(folder, author="posewright host") as source:
        holder = project_in_use(folder) if source.read_only else None
        if holder is not None:
            raise BadInput(f"the project is {holder}", where=str(folder),
                           hint="close it there first, then host it")
        if source.meta("review_packet") is not None:
            raise BadInput("a project opened from a review packet stays a folder",
                           where=str(folder), hint="host the project the packet came from")
        db = PostgresDatabase(url)
        try:
            with db.write(exclusive=True) as tx:
                _refuse_filled(tx, db.where)
                for n in range(1, SCHEMA_VERSION + 1):
                    apply_migration(tx, n)
                counts = _copy(source, tx, progress)
            with db.read() as tx:  # outside a transaction, as VACUUM must be
                # The planner's statistics of the tables just filled (PostgreSQL's manual
                # advises ANALYZE after loading a database; from memory, "Populating a
                # Database"): without them a Worklist page may sort a table, not walk an
                # index. VACUUM marks the pages all-visible, so that the rows a deep page
                # skips are counted from the index alone ("index-only scans" in the manual,
                # from memory): 2.5 ms instead of 22 ms for 25,000 rows. ANALYZE first, then
                # VACUUM: run as one VACUUM (ANALYZE), some tables were left not all-visible
                # (seen on PostgreSQL 15).
                tx.run("ANALYZE")
                tx.run("VACUUM")
        finally:
            db.close()
    return counts


def _refuse_filled(tx: Tx, where: str) -> None:
    n = int(tx.value("SELECT count(*) FROM information_schema.tables "
                     "WHERE table_schema = current_schema()", default=0))
    if n:
        raise BadInput(f"the database is not empty ({n} tables in its schema)", where=where,
                       hint="host into a new, empty database (createdb)")


def _copy(source: Project, tx: Tx, progress: Progress) -> dict[str, int]:
    root = source.images_root or source.folder
    root = Path(os.path.abspath(root))

    def moved(path: str) -> str:
        full = Path(path) if Path(path).is_absolute() else source.folder / path
        return relative_path(full, root)

    steps = 9
    progress.step(0, steps, "hosting: settings")
    meta = {k: v for k, v in source.settings().items() if k not in _FOLDER_ONLY}
    meta["images_root"] = root.as_posix()
    tx.meta.set_many(meta)
    with source.db.read() as src:
        progress.step(1, steps, "hosting: frames")
        frames = src.frames.rows_for_copy()
        tx.frames.insert_copied([(r[0], moved(r[1]), *r[2:]) for r in frames])
        progress.step(2, steps, "hosting: people")
        people = src.people.rows_for_copy()
        tx.people.insert_encoded(people)
        progress.step(3, steps, "hosting: ledger")
        ledger = src.ledger.rows_for_copy()
        tx.ledger.insert_copied(ledger)
        owners: dict[int, str] = {}
        for row in ledger:
            owners.setdefault(int(row[1]), str(row[5]))
        for stack in ("undo_stack", "redo_stack"):
            tx.ledger.insert_stack(stack, [(pos, group, author or owners.get(group, ""))
                                           for pos, group, author in
                                           src.ledger.stack_for_copy(stack)])
        progress.step(4, steps, "hosting: notes and regions")
        tx.notes.insert_copied(src.notes.rows_for_copy())
        regions = src.regions.rows_for_copy()
        tx.regions.insert_copied(regions)
        progress.step(5, steps, "hosting: triage and maps")
        tx.triage.insert_copied(src.triage.rows_for_copy())
        tx.maps.insert_copied([(f, moved(p), stride)
                               for f, p, stride in src.maps.rows_for_copy()])
        progress.step(6, steps, "hosting: review records")
        tx.packets.insert_copied(src.packets.rows_for_copy())
        tx.alternatives.insert_copied(src.alternatives.rows_for_copy())
        tx.findings.insert_copied(src.findings.rows_for_copy())
        tx.dismissals.insert_copied(src.dismissals.rows_for_copy())
    progress.step(7, steps, "hosting: counters")
    for name, key in (("person_ids", "next_person_id"), ("note_ids", "next_note_id"),
                      ("group_ids", "next_group_id")):
        top = int(source.meta(key) or 1) - 1
        tx.counters.reserve(name, [top])
    for table, column in (("regions", "id"), ("ledger", "seq"), ("alternatives", "id"),
                          ("undo_stack", "pos"), ("redo_stack", "pos")):
        tx.run(f"SELECT setval(pg_get_serial_sequence('{table}', '{column}'), "
               f"greatest((SELECT max({column}) FROM {table}), 1))")
    progress.step(steps, steps, "hosting")
    return {"frames": len(frames), "people": len(people), "ledger entries": len(ledger),
            "regions": len(regions)}
