"""The ledger: every change, append-only, and the actions on it (apply, undo, redo, return to
a point), for both databases.

Each user action is one ledger *group*: one row per atomic change (target, before, after),
written in the same transaction as the labels it changes. Undo appends the inverse changes as
a new group (nothing is deleted), so the audit trail is complete and undo survives a restart.
The groups that undo and redo act on next are kept on stacks in the database, one per owner:
a folder project has one stack for whoever edits it (one editor at a time); in a hosted
project each annotator has their own, so I undo my own actions, never a colleague's.

**Compare and set.** An edit is planned from the labels its editor saw (``seen``); the
transaction then locks the frame, reads what its targets hold now and refuses the edit,
naming who changed what and when (from the ledger), if any of them no longer holds the value
the edit was planned from. Undo and redo check the same way that their targets still hold what
the action left. Nothing is ever silently overwritten: every change is either planned from the
value it replaces or refused.
"""

from __future__ import annotations

import json
import time
from collections.abc import Iterable, Sequence
from dataclasses import dataclass, replace
from typing import Any

from app.errors import ChangedMeanwhile, EditRefused, NotFound
from app.model.edits import (
    AddNote,
    AddRegion,
    Change,
    Edit,
    EditContext,
    Restore,
    apply_changes,
    current_value,
    labels_changed,
    needs_person_id,
    same_value,
    with_person_id,
)
from app.model.labels import FrameLabels, FrameState, Region
from app.model.naming import Names, ledger_names
from app.model.skeleton import Skeleton
from app.model.targets import (
    DismissalTarget,
    JointTarget,
    KeptTarget,
    NoteTarget,
    PersonTarget,
    RecordTarget,
    RegionTarget,
    StateTarget,
    Target,
    TrackTarget,
    from_columns,
    to_columns,
)
from app.store.db import Tx

_ENTRY_COLUMNS = ("seq, group_id, kind, action, summary, author, time, frame_id, target_kind, "
                  "person_id, joint, item_id, target_key, before, after, reverts")
#: Ledger kinds that change labels (and so can be returned past).
LABEL_KINDS = ("edit", "undo", "redo")


@dataclass(frozen=True)
class LedgerEntry:
    """One row of the ledger: an atomic change, part of the user action ``group_id``.

    ``kind`` is ``edit``, ``undo``, ``redo``, ``import`` or ``review``; ``reverts`` names the
    group an undo or redo entry reverses; ``target`` is typed (:mod:`app.model.targets`) and
    prints as the ledger's text (``person:12/joint:9``).
    """

    seq: int
    group_id: int
    kind: str
    action: str
    summary: str
    author: str
    time: float
    frame_id: int | None
    target: Target
    before: Any
    after: Any
    reverts: int | None

    def to_dict(self) -> dict[str, Any]:
        """A JSON-ready dict, the target as its text."""
        return {**self.__dict__, "target": str(self.target)}


@dataclass(frozen=True)
class Applied:
    """What :meth:`Project.apply` did: the ledger group (None if nothing changed) and the
    changes, with ids the store filled in."""

    group_id: int | None
    changes: tuple[Change, ...]
    edit: Edit


def _loads(text: str | None) -> Any:
    return None if text is None else json.loads(text)


def _entry(r: Sequence[Any]) -> LedgerEntry:
    return LedgerEntry(r[0], r[1], r[2], r[3], r[4], r[5], r[6], r[7],
                       from_columns(r[8], r[9], r[10], r[11], r[12]), _loads(r[13]),
                       _loads(r[14]), r[15])


class LedgerGateway:
    """The ledger's rows and the undo and redo stacks."""

    def __init__(self, tx: Tx):
        self._tx = tx

    def add(self, group: int, kind: str, action: str, summary: str, ctx: EditContext,
            changes: Sequence[tuple[int | None, Change]], reverts: int | None = None) -> None:
        self._tx.run_many(
            f"INSERT INTO ledger ({_ENTRY_COLUMNS.partition(', ')[2]}) "
            "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)",
            [(group, kind, action, summary, ctx.author, ctx.time, f, *to_columns(c.target),
              None if c.before is None and kind not in LABEL_KINDS else json.dumps(c.before),
              json.dumps(c.after), reverts) for f, c in changes])

    def entries(self, frame_id: int | None = None, limit: int | None = None,
                group: int | None = None) -> list[LedgerEntry]:
        """Entries newest first: all, one frame's, or one group's."""
        sql = f"SELECT {_ENTRY_COLUMNS} FROM ledger"
        args: list[Any] = []
        if frame_id is not None:
            sql += " WHERE frame_id = ?"
            args.append(int(frame_id))
        elif group is not None:
            sql += " WHERE group_id = ?"
            args.append(int(group))
        sql += " ORDER BY seq DESC"
        if limit is not None:
            sql += " LIMIT ?"
            args.append(int(limit))
        return [_entry(r) for r in self._tx.rows(sql, args)]

    def label_changes_after(self, seq: int, frame_id: int | None) -> list[LedgerEntry]:
        """The label changes after ledger entry ``seq`` (of one frame), oldest first."""
        sql = (f"SELECT {_ENTRY_COLUMNS} FROM ledger WHERE seq > ? "
               "AND kind IN ('edit', 'undo', 'redo')")
        args: list[Any] = [int(seq)]
        if frame_id is not None:
            sql += " AND frame_id = ?"
            args.append(int(frame_id))
        return [_entry(r) for r in self._tx.rows(sql + " ORDER BY seq", args)]

    def last_change(self, frame_id: int, target: Target) -> LedgerEntry | None:
        """The newest entry that changed ``target`` (or, for a joint, its whole person)."""
        sql = f"SELECT {_ENTRY_COLUMNS} FROM ledger WHERE frame_id = ? AND "
        args: list[Any] = [int(frame_id)]
        if isinstance(target, JointTarget):
            sql += ("((target_kind = 'joint' AND person_id = ? AND joint = ?) OR "
                    "(target_kind = 'person' AND person_id = ?))")
            args += [target.person, target.joint, target.person]
        elif isinstance(target, PersonTarget):
            sql += "target_kind IN ('joint', 'person', 'track') AND person_id = ?"
            args.append(target.person)
        elif isinstance(target, TrackTarget):
            sql += "target_kind IN ('track', 'person') AND person_id = ?"
            args.append(target.person)
        elif isinstance(target, (NoteTarget, RegionTarget, KeptTarget)):
            kind, _, _, item, _ = to_columns(target)
            sql += "target_kind = ? AND item_id = ?"
            args += [kind, item]
        else:
            sql += "target_kind = ?"
            args.append(target.kind)
        row = self._tx.row(sql + " AND kind IN ('edit', 'undo', 'redo', 'import', 'review') "
                           "ORDER BY seq DESC LIMIT 1", args)
        return None if row is None else _entry(row)

    def last_bulk(self, frame_id: int) -> LedgerEntry | None:
        """The newest bulk entry (import, review) that may have touched ``frame_id``."""
        row = self._tx.row(f"SELECT {_ENTRY_COLUMNS} FROM ledger WHERE target_kind = 'record' "
                           "AND (frame_id = ? OR frame_id IS NULL) ORDER BY seq DESC LIMIT 1",
                           (int(frame_id),))
        return None if row is None else _entry(row)

    def top_seq(self, frame_id: int | None = None) -> int:
        if frame_id is None:
            return int(self._tx.value("SELECT max(seq) FROM ledger", default=0))
        return int(self._tx.value("SELECT max(seq) FROM ledger WHERE frame_id = ?",
                                  (int(frame_id),), default=0))

    def count(self) -> int:
        return int(self._tx.value("SELECT count(*) FROM ledger", default=0))

    # ------------------------------------------------------------------ stacks

    def top(self, stack: str, owner: str) -> tuple[int, int] | None:
        """``(pos, group)`` on top of ``stack`` (``undo_stack`` or ``redo_stack``)."""
        row = self._tx.row(f"SELECT pos, group_id FROM {_stack(stack)} WHERE author = ? "
                           "ORDER BY pos DESC LIMIT 1", (owner,))
        return None if row is None else (int(row[0]), int(row[1]))

    def push(self, stack: str, group: int, owner: str) -> None:
        self._tx.run(f"INSERT INTO {_stack(stack)} (group_id, author) VALUES (?, ?)",
                     (group, owner))

    def pop(self, stack: str, pos: int) -> None:
        self._tx.run(f"DELETE FROM {_stack(stack)} WHERE pos = ?", (pos,))

    def clear(self, stack: str, owner: str) -> None:
        self._tx.run(f"DELETE FROM {_stack(stack)} WHERE author = ?", (owner,))

    def rows_for_copy(self) -> list[tuple[Any, ...]]:
        return self._tx.rows(f"SELECT {_ENTRY_COLUMNS} FROM ledger ORDER BY seq")

    def insert_copied(self, rows: Sequence[Sequence[Any]]) -> None:
        self._tx.run_many(f"INSERT INTO ledger ({_ENTRY_COLUMNS}) "
                          "VALUES (?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?, ?)", rows)

    def stack_for_copy(self, stack: str) -> list[tuple[int, int, str]]:
        return [(int(r[0]), int(r[1]), str(r[2])) for r in self._tx.rows(
            f"SELECT pos, group_id, author FROM {_stack(stack)} ORDER BY pos")]

    def insert_stack(self, stack: str, rows: Sequence[tuple[int, int, str]]) -> None:
        self._tx.run_many(f"INSERT INTO {_stack(stack)} (pos, group_id, author) "
                          "VALUES (?, ?, ?)", rows)


def _stack(name: str) -> str:
    if name not in ("undo_stack", "redo_stack"):
        raise ValueError(f"no stack {name!r}")
    return name


# ---------------------------------------------------------------------- the actions


def load_labels(tx: Tx, frame_id: int, skeleton: Skeleton, lock: bool = False) -> FrameLabels:
    """Everything an edit can touch in one frame; ``lock`` keeps other writers off its rows
    until the transaction ends."""
    frame = tx.frames.get(frame_id, lock=lock)
    if frame is None:
        raise NotFound(f"the project has no frame {frame_id}")
    people = tx.people.of_frame(frame.id, skeleton.num_joints, lock=lock)
    return FrameLabels(
        frame.id, skeleton, {p.id: p for p in people}, frame.state,
        {n.id: n for n in tx.notes.of_frame(frame.id)},
        {rid: Region(rid, frame.id, tuple(tuple(p) for p in polys), extra)
         for rid, polys, extra in tx.regions.of_frame(frame.id)},
        tx.alternatives.kept(frame.id), tx.dismissals.of_frame(frame.id),
    )


def apply_edit(tx: Tx, edit: Edit, skeleton: Skeleton, author: str, owner: str,
               seen: FrameLabels | None = None) -> Applied:
    """Apply ``edit`` inside the write transaction ``tx`` (see the module docstring)."""
    while needs_person_id(edit):
        edit = with_person_id(edit, tx.counters.take("person_ids"))
    if isinstance(edit, AddNote) and edit.note_id is None:
        edit = replace(edit, note_id=tx.counters.take("note_ids"))
    if isinstance(edit, AddRegion) and edit.region_id is None:
        edit = replace(edit, region_id=tx.counters.take("region_ids"))
    now = load_labels(tx, edit.frame_id, skeleton, lock=True)
    base = now if seen is None or seen.frame_id != now.frame_id else seen
    ctx = EditContext(author, time.time())
    _, changes = edit.apply(base, ctx)
    if not changes:
        return Applied(None, (), edit)
    if base is not now:
        for ch in changes:
            if not same_value(current_value(now, ch.target), ch.before):
                raise refusal(tx, now.frame_id, ch.target, "your edit was not applied",
                              "; the frame shows their change now", skeleton)
    new = apply_changes(now, changes)
    if (type(edit).changes_labels and now.state is FrameState.UNTOUCHED
            and labels_changed(changes)):
        state = Change(StateTarget(), FrameState.UNTOUCHED.value, FrameState.CORRECTED.value)
        changes.append(state)
        new = apply_changes(new, [state])
    group = tx.counters.take("group_ids")
    with tx.batch():
        write_changes(tx, now, new, changes)
        tx.ledger.add(group, "edit", type(edit).__name__, edit.summary(), ctx,
                      [(edit.frame_id, c) for c in changes])
        tx.ledger.push("undo_stack", group, owner)
        tx.ledger.clear("redo_stack", owner)
    tx.event("edit", [edit.frame_id])
    return Applied(group, tuple(changes), edit)


def apply_batch(tx: Tx, edits: Sequence[Edit], skeleton: Skeleton, author: str, owner: str,
                action: str, summary: str) -> Applied:
    """Apply edits of several frames as one action: one ledger group, one undo step (a track
    joined over a sequence, a correction carried over the frames that show the same error).

    Each edit is planned on the labels the ones before it (of its frame) leave; the whole
    batch is refused, with nothing changed, when any edit is. Frames whose labels change and
    were untouched become corrected, as with :func:`apply_edit`. When nothing changes nothing
    is recorded (the group is None).
    """
    if not edits:
        raise EditRefused("a batch needs at least one edit")
    frames = sorted({e.frame_id for e in edits})
    tx.frames.lock(frames)
    now = {f: load_labels(tx, f, skeleton, lock=True) for f in frames}
    staged = dict(now)
    ctx = EditContext(author, time.time())
    planned: dict[int, list[Change]] = {f: [] for f in frames}
    relabelled: set[int] = set()
    for edit in edits:
        while needs_person_id(edit):
            edit = with_person_id(edit, tx.counters.take("person_ids"))
        staged[edit.frame_id], changes = edit.apply(staged[edit.frame_id], ctx)
        planned[edit.frame_id] += changes
        if type(edit).changes_labels and labels_changed(changes):
            relabelled.add(edit.frame_id)
    rows: list[tuple[int | None, Change]] = []
    writes = []
    for f in frames:
        changes, new = planned[f], staged[f]
        if not changes:
            continue
        if f in relabelled and now[f].state is FrameState.UNTOUCHED:
            state = Change(StateTarget(), FrameState.UNTOUCHED.value,
                           FrameState.CORRECTED.value)
            changes.append(state)
            new = apply_changes(new, [state])
        writes.append((now[f], new, changes))
        rows += [(f, c) for c in changes]
    if not rows:
        return Applied(None, (), edits[-1])
    group = tx.counters.take("group_ids")
    with tx.batch():
        for old, new, changes in writes:
            write_changes(tx, old, new, changes)
        tx.ledger.add(group, "edit", action, summary, ctx, rows)
        tx.ledger.push("undo_stack", group, owner)
        tx.ledger.clear("redo_stack", owner)
    tx.event("edit", [w[0].frame_id for w in writes])
    return Applied(group, tuple(c for _, c in rows), edits[-1])


def unwind(tx: Tx, source: str, dest: str, kind: str, skeleton: Skeleton, author: str,
           owner: str) -> int | None:
    """Undo (``source`` the undo stack) or redo the owner's newest action; returns the new
    ledger group, or None when the stack is empty."""
    top = tx.ledger.top(source, owner)
    if top is None:
        return None
    pos, group = top
    rows = list(reversed(tx.ledger.entries(group=group)))
    inverse = [(e.frame_id, Change(e.target, e.after, e.before)) for e in reversed(rows)]
    ctx = EditContext(author, time.time())
    try:
        restore(tx, inverse, skeleton, ctx)
    except ChangedMeanwhile as exc:
        raise refusal(tx, exc.frame_id, exc.target, f"cannot {kind} {rows[0].summary!r}"
                      if rows else f"cannot {kind}", "; nothing was changed",
                      skeleton) from None
    action, summary = (rows[0].action, rows[0].summary) if rows else ("", "")
    new_group = record(tx, kind, action, f"{kind}: {summary}", inverse, ctx, reverts=group)
    tx.ledger.pop(source, pos)
    tx.ledger.push(dest, new_group, owner)
    tx.event(kind, (f for f, _ in inverse))
    return new_group


def return_to(tx: Tx, seq: int, frame_id: int | None, skeleton: Skeleton, author: str,
              owner: str) -> int | None:
    """Bring the labels back to how they were right after ledger entry ``seq`` (of one frame,
    or of the whole project) as one new undoable action."""
    rows = tx.ledger.label_changes_after(seq, frame_id)
    if not rows:
        return None
    inverse = [(e.frame_id, Change(e.target, e.after, e.before)) for e in reversed(rows)]
    ctx = EditContext(author, time.time())
    try:
        restore(tx, inverse, skeleton, ctx)
    except ChangedMeanwhile as exc:
        raise refusal(tx, exc.frame_id, exc.target, f"cannot rewind to ledger entry {seq}",
                      "; nothing was changed", skeleton) from None
    group = record(tx, "edit", "ReturnTo", f"rewind to ledger entry {seq}", inverse, ctx)
    tx.ledger.push("undo_stack", group, owner)
    tx.ledger.clear("redo_stack", owner)
    tx.event("edit", (f for f, _ in inverse))
    return group


def restore(tx: Tx, changes: Sequence[tuple[int | None, Change]], skeleton: Skeleton,
            ctx: EditContext) -> None:
    """Apply recorded changes verbatim (per frame, frames locked in id order), each checked
    to hold its ``before`` first."""
    by_frame: dict[int, list[Change]] = {}
    for f, ch in changes:
        if f is not None:
            by_frame.setdefault(int(f), []).append(ch)
    tx.frames.lock(by_frame)
    for f, chs in by_frame.items():
        labels = load_labels(tx, f, skeleton, lock=True)
        new_labels, _ = Restore(f, tuple(chs)).apply(labels, ctx)
        write_changes(tx, labels, new_labels, chs)


def write_changes(tx: Tx, old: FrameLabels, new: FrameLabels,
                  changes: Iterable[Change]) -> None:
    """Write the rows ``changes`` touched, as they are in ``new``."""
    changes = list(changes)
    people = sorted({c.target.person for c in changes
                     if isinstance(c.target, (PersonTarget, JointTarget, TrackTarget))})
    for pid in people:
        person = new.people.get(pid)
        if person is None:
            tx.people.delete(pid)
        else:
            tx.people.put(new.frame_id, person)
    if new.state != old.state:
        tx.frames.set_state(new.frame_id, new.state)
    for aid in {c.target.alternative for c in changes if isinstance(c.target, KeptTarget)}:
        tx.alternatives.set_kept(aid, new.kept.get(aid, ()))
    keys = {c.target.key for c in changes if isinstance(c.target, DismissalTarget)}
    tx.dismissals.delete(k for k in keys if k not in new.dismissed)
    for key in sorted(k for k in keys if k in new.dismissed):
        tx.dismissals.put(new.frame_id, key, new.dismissed[key])
    for rid in {c.target.region for c in changes if isinstance(c.target, RegionTarget)}:
        region = new.regions.get(rid)
        if region is None:
            tx.regions.delete(rid)
        else:
            tx.regions.put(region)
    for nid in {c.target.note for c in changes if isinstance(c.target, NoteTarget)}:
        note = new.notes.get(nid)
        if note is None:
            tx.notes.delete(nid)
        else:
            tx.notes.put(note)


def record(tx: Tx, kind: str, action: str, summary: str,
           changes: Sequence[tuple[int | None, Change]], ctx: EditContext,
           reverts: int | None = None) -> int:
    """Append one group of ledger rows; returns its group id."""
    group = tx.counters.take("group_ids")
    tx.ledger.add(group, kind, action, summary, ctx, changes, reverts)
    return group


def record_bulk(tx: Tx, kind: str, action: str, summary: str, ctx: EditContext,
                frame_id: int | None, what: str, stats: dict[str, int]) -> int:
    """Append the one ledger row of bulk work (an import, a packet): what it was about and
    its counts. Such rows are not on any undo stack."""
    return record(tx, kind, action, summary,
                  [(frame_id, Change(RecordTarget(what), None, stats))], ctx)


def refusal(tx: Tx, frame_id: int | None, target: Any, what: str,
            outcome: str, skeleton: Skeleton | None = None) -> ChangedMeanwhile:
    """A one-line refusal naming who changed ``target`` and when (from the ledger).

    With the ``skeleton``, people and joints are written as the annotator reads them
    (:func:`app.model.naming.ledger_names`: the frame's tag and the stable number, joint
    names), the tags from the frame's people as they are now."""
    name = describe_target(target)
    entry = None
    if frame_id is not None and target is not None:
        entry = tx.ledger.last_change(frame_id, target) or tx.ledger.last_bulk(frame_id)
    if entry is None:
        who = "changed since"
    else:
        when = time.strftime("%Y-%m-%d %H:%M:%S", time.localtime(entry.time))
        by = entry.author or "someone"
        who = (f"changed by {by} at {when}" if entry.kind in LABEL_KINDS
               else f"changed by {by}'s {entry.action} at {when}")
    where = f"frame {frame_id}: " if frame_id is not None else ""
    text = f"{where}{what}: {name} was {who}{outcome}"
    if skeleton is not None and frame_id is not None:
        ids = [p.id for p in tx.people.of_frame(frame_id, skeleton.num_joints)]
        text = ledger_names(text, Names.of_frame(skeleton, ids))
    return ChangedMeanwhile(text, frame_id=frame_id, target=target)


def describe_target(target: Any) -> str:
    """A target in words: ``joint 9 of person 12``, ``the frame's state``.

    Examples
    --------
    >>> describe_target(JointTarget(12, 9)), describe_target(StateTarget())
    ('joint 9 of person 12', "the frame's state")
    """
    if isinstance(target, JointTarget):
        return f"joint {target.joint} of person {target.person}"
    if isinstance(target, PersonTarget):
        return f"person {target.person}"
    if isinstance(target, TrackTarget):
        return f"the track of person {target.person}"
    if isinstance(target, StateTarget):
        return "the frame's state"
    if isinstance(target, NoteTarget):
        return f"note {target.note}"
    if isinstance(target, RegionTarget):
        return f"ignore region {target.region}"
    if isinstance(target, KeptTarget):
        return f"the joints kept against reviewer's version {target.alternative}"
    if isinstance(target, DismissalTarget):
        return f"the dismissal of finding {target.key}"
    return str(target) if target is not None else "what it would change"
