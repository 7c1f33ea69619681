"""Item models over store queries: the Worklist, the Owners (people and candidate owners), the
Ledger and the Notes. Views show them; nothing is filled into widgets by hand.

Each model reloads from the store when told that something changed (the main window forwards
the store's change notifications); none of them writes.
"""

from __future__ import annotations

import contextlib
import logging
import time
from collections import OrderedDict
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
from PySide6.QtCore import (
    QAbstractListModel,
    QAbstractTableModel,
    QModelIndex,
    QPersistentModelIndex,
    Qt,
)
from PySide6.QtGui import QColor, QFont

from app.errors import PosewrightError
from app.model.labels import Frame, FrameState, Note, Person
from app.model.naming import Names, ledger_names, person_text
from app.session.status import STATE_WORDS
from app.session.worklist import people_summary, separating_counts
from app.store.frames import FrameQuery, WorklistEntry
from app.store.project import LedgerEntry, Project
from app.ui.overlay import WHOLE_PERSON, palette_colour
from app.wording import DECISION_WORDS, count, ledger_text, reason_count

Index = QModelIndex | QPersistentModelIndex
_ROOT = QModelIndex()
DisplayRole = Qt.ItemDataRole.DisplayRole
ToolTipRole = Qt.ItemDataRole.ToolTipRole
DecorationRole = Qt.ItemDataRole.DecorationRole
ForegroundRole = Qt.ItemDataRole.ForegroundRole
FontRole = Qt.ItemDataRole.FontRole
AlignRole = Qt.ItemDataRole.TextAlignmentRole
#: The role that carries each row's key (frame id, person id, ledger seq, note id).
KeyRole = Qt.ItemDataRole.UserRole + 1
#: The Worklist role that carries a row's mark from the session (``"last"``: a carried
#: batch ends on that frame, :meth:`app.session.timeline.CarryMarks.worklist_marks`).
MarkRole = Qt.ItemDataRole.UserRole + 2
#: What a Worklist mark says, on the row and in its tooltip.
MARK_TEXT = {"last": "carry ends"}
#: The same, in the row's tooltip.
MARK_TIP = {"last": "the carried correction ends on this frame"}
#: The roles the Worklist answers (the others are answered without reading a row).
_WORK_ROLES = frozenset({KeyRole, DisplayRole, ToolTipRole, AlignRole, FontRole, ForegroundRole,
                         MarkRole})

log = logging.getLogger(__name__)

STATE_TEXT = STATE_WORDS


#: A reviewer's decision on a frame, as the Worklist and the status bar say it.
DECISION_TEXT = DECISION_WORDS


def clock(seconds: float) -> str:
    """A time in a video as ``m:ss.ss`` (``h:mm:ss.ss`` from an hour on).

    Examples
    --------
    >>> clock(0.48), clock(75.5), clock(3723.25)
    ('0:00.48', '1:15.50', '1:02:03.25')
    """
    cents = round(float(seconds) * 100)
    minutes, cs = divmod(cents, 6000)
    hours, minutes = divmod(minutes, 60)
    sec = f"{cs // 100:02d}.{cs % 100:02d}"
    return f"{hours}:{minutes:02d}:{sec}" if hours else f"{minutes}:{sec}"


def video_position(frame: Frame) -> str:
    """Where a frame comes from in its video ("" for a still image).

    Examples
    --------
    >>> video_position(Frame(7, "frames/clip/000012.jpg", "clip/000012.jpg", 64, 48,
    ...                      video_index=12, timestamp=0.48))
    'video frame 12 at 0:00.48'
    """
    if frame.video_index is None:
        return ""
    at = f" at {clock(frame.timestamp)}" if frame.timestamp is not None else ""
    return f"video frame {frame.video_index}{at}"


def when(t: float) -> str:
    """A ledger or note time as the annotator reads it: the clock time today, else the date.

    Examples
    --------
    >>> when(time.time()).count(":")
    2
    """
    lt = time.localtime(t)
    if time.strftime("%Y-%m-%d", lt) == time.strftime("%Y-%m-%d"):
        return time.strftime("%H:%M:%S", lt)
    return time.strftime("%Y-%m-%d %H:%M", lt)


class _TableModel(QAbstractTableModel):
    """A table over a Python list of rows (``_rows``) with fixed column titles
    (``COLUMNS``); subclasses give ``data``."""

    COLUMNS: tuple[str, ...] = ()
    _rows: Sequence[Any] = ()

    def rowCount(self, parent: Index = _ROOT) -> int:
        return 0 if parent.isValid() else len(self._rows)

    def columnCount(self, parent: Index = _ROOT) -> int:
        return 0 if parent.isValid() else len(self.COLUMNS)

    def headerData(self, section: int, orientation: Qt.Orientation, role: int = DisplayRole):
        if role == DisplayRole and orientation == Qt.Orientation.Horizontal:
            return self.COLUMNS[section]
        return None


# ---------------------------------------------------------------------------------- Worklist

@dataclass
class WorkRow:
    """One frame as the Worklist shows it."""

    frame_id: int
    name: str
    score: float | None
    state: FrameState
    kinds: frozenset[str]
    summary: str
    video: str = ""
    decision: str = ""
    #: On a hosted project: the colleague working on this frame now (their claim).
    claimed_by: str = ""
    #: The frame's open findings, as last computed (None: never computed).
    findings: int | None = None
    #: The triage reasons, for the per-person tooltip.
    reasons: tuple[dict[str, Any], ...] = ()


class WorklistModel(_TableModel):
    """The frames, most suspicious first (frames without a triage score last, by id), with
    their score, state and reasons; kept to one state and/or one reason kind when asked.

    The model holds no list of every frame: it counts the frames its filters keep and reads
    the rows the view asks for a page at a time (:meth:`Project.worklist_page
    <app.store.project.Project.worklist_page>`), the database sorting and filtering through
    its indexes. At most :data:`KEEP_PAGES` pages stay in memory.
    """

    COLUMNS = ("frame and reasons", "score", "state")
    #: Rows read from the store at a time.
    PAGE = 100
    #: Pages kept in memory, the most recently used (the rows in view and those near them).
    KEEP_PAGES = 40

    def __init__(self, project: Project, parent: Any = None, review: bool = False):
        super().__init__(parent)
        self._project = project
        #: A review project: each frame also shows the reviewer's decision.
        self._review = review
        self._state: FrameState | None = None
        self._kind: str | None = None
        self._count = 0
        self._total = 0
        self._kinds: list[tuple[str, int]] = []
        self._has_triage = False
        self._decided: dict[int, str] = {}
        self._pages: OrderedDict[int, list[WorkRow]] = OrderedDict()
        self._row_of: dict[int, int] = {}
        self._claims: dict[int, Any] = {}
        self._claimed: dict[int, str] = {}
        #: Every page read from the store since the last reload, as (first row, rows read):
        #: what the view made the model fetch.
        self.fetched: list[tuple[int, int]] = []
        #: Frame id -> mark, given by the session (:meth:`set_marks`).
        self._marks: dict[int, str] = {}
        self.reload()

    # -- filters
    @property
    def state(self) -> FrameState | None:
        """The state the rows are kept to (None: any)."""
        return self._state

    @property
    def kind(self) -> str | None:
        """The reason kind the rows are kept to (None: any)."""
        return self._kind

    def set_filters(self, state: FrameState | None, kind: str | None) -> None:
        """Keep the frames in ``state`` whose triage found a reason of ``kind`` (None: any)."""
        if (state, kind) != (self._state, self._kind):
            self._state, self._kind = state, kind
            self.reload()

    def frame_query(self, offset: int = 0, limit: int | None = None) -> FrameQuery:
        """The store query of the rows shown (filters applied), in Worklist order."""
        states = None if self._state is None else (self._state,)
        return FrameQuery("suspicion", states, self._kind, offset, limit)

    def set_marks(self, marks: dict[int, str]) -> None:
        """Mark frames (frame id -> a key of :data:`MARK_TEXT`); the rows whose mark changed
        are repainted."""
        if marks == self._marks:
            return
        changed = set(marks) | set(self._marks)
        self._marks = dict(marks)
        for fid in changed:
            i = self._row_of.get(fid)
            if i is not None:
                self.dataChanged.emit(self.index(i, 0), self.index(i, 0))

    # -- loading
    def reload(self) -> None:
        """Count the frames again and forget the rows read (they are read again when shown)."""
        project = self._project
        total = project.frame_count()
        shown = total if self._state is None and self._kind is None else \
            project.frame_count(self.frame_query())
        kinds = separating_counts(project.reason_counts(), total)
        decided: dict[int, str] = {}
        if self._review:
            from app.review.review import decisions

            decided = {fid: d.decision for fid, d in decisions(project).items()}
        claimed = self._others_claims()
        self.beginResetModel()
        self._total, self._count, self._kinds = total, shown, kinds
        self._has_triage = project.has_triage()
        self._decided, self._claimed = decided, claimed
        self._pages.clear()
        self._row_of.clear()
        self.fetched = []
        self.endResetModel()

    def _page(self, page: int) -> list[WorkRow]:
        """The rows of one page, read from the store unless kept."""
        rows = self._pages.get(page)
        if rows is not None:
            self._pages.move_to_end(page)
            return rows
        first = page * self.PAGE
        try:
            entries = self._project.worklist_page(self.frame_query(first, self.PAGE))
        except PosewrightError:  # closed, or the server gone for a moment: blank rows
            log.warning("the Worklist could not read rows %d-%d", first, first + self.PAGE)
            return []
        self.fetched.append((first, len(entries)))
        rows = [self._work_row(e) for e in entries]
        self._pages[page] = rows
        self._row_of.update({r.frame_id: first + i for i, r in enumerate(rows)})
        while len(self._pages) > self.KEEP_PAGES:
            _, dropped = self._pages.popitem(last=False)
            for r in dropped:
                self._row_of.pop(r.frame_id, None)
        return rows

    def _work_row(self, entry: WorklistEntry) -> WorkRow:
        f = entry.frame
        score, reasons = entry.triage if entry.triage is not None else (None, [])
        row = _work_row(f.id, f.file_name or f.path, score, f.state, reasons)
        row.findings = entry.findings
        row.video = video_position(f)
        row.decision = DECISION_TEXT.get(self._decided.get(f.id, ""), "")
        row.claimed_by = self._claimed.get(f.id, "")
        return row

    def _kept_rows(self) -> list[tuple[int, WorkRow]]:
        return [(p * self.PAGE + i, r) for p, rows in self._pages.items()
                for i, r in enumerate(rows)]

    def _others_claims(self) -> dict[int, str]:
        """Who else is working on which frame (a hosted project's claims, ours left out)."""

        # The server may be gone for a moment; the last claims read stay until it is back.
        with contextlib.suppress(PosewrightError):
            self._claims = self._project.claims()
        return {f: c.author for f, c in self._claims.items() if c.author != self._project.author}

    def reload_claims(self) -> None:
        """Re-read the claims and mark the rows whose claim changed."""
        self._claimed = self._others_claims()
        for i, row in self._kept_rows():
            who = self._claimed.get(row.frame_id, "")
            if who != row.claimed_by:
                row.claimed_by = who
                self.dataChanged.emit(self.index(i, 0), self.index(i, 2))

    def refresh_states(self, frame_ids: Sequence[int]) -> None:
        """Re-read the state of the given frames (after edits) without reordering; with a
        state filter the rows are counted and read again (a frame may have left it)."""
        if self._state is not None:
            self.reload()
            return
        for fid in frame_ids:
            i = self._row_of.get(fid)
            if i is None:
                continue  # not read yet: read with its new state when shown
            row = self._page(i // self.PAGE)[i % self.PAGE]
            try:
                state = self._project.frame(fid).state
            except PosewrightError:
                continue
            if state != row.state:
                row.state = state
                idx = self.index(i, 2)
                self.dataChanged.emit(idx, idx)

    # -- queries
    def rowCount(self, parent: Index = _ROOT) -> int:
        return 0 if parent.isValid() else self._count

    def total(self) -> int:
        """How many frames the project has, whatever the filters."""
        return self._total

    def frame_ids(self) -> list[int]:
        """Every frame id shown, in order (read from the store: for a walk, not a view)."""
        return self._project.frame_ids(self.frame_query())

    def frame_id_at(self, row: int) -> int | None:
        """The frame on a row (None past the ends)."""
        if not 0 <= row < self._count:
            return None
        rows = self._page(row // self.PAGE)
        k = row % self.PAGE
        return rows[k].frame_id if k < len(rows) else None

    def row_of(self, frame_id: int) -> int | None:
        """The row showing a frame (None when the filters leave it out)."""
        row = self._row_of.get(frame_id)
        if row is None:
            row = self._project.frame_position(self.frame_query(), frame_id)
        return row

    def position_in_all(self, frame_id: int) -> int | None:
        """Where a frame stands in the whole Worklist, filters aside (0-based)."""
        if self._state is None and self._kind is None:
            return self.row_of(frame_id)
        return self._project.frame_position(FrameQuery(), frame_id)

    def work_row(self, row: int) -> WorkRow:
        return self._page(row // self.PAGE)[row % self.PAGE]

    def has_triage(self) -> bool:
        return self._has_triage

    def reason_kinds(self) -> list[tuple[str, int]]:
        """The reason kinds that tell frames apart, with the number of frames that have each,
        most frequent first: a kind every frame has would filter nothing out."""
        return list(self._kinds)

    def _people_summary(self, row: WorkRow) -> str:
        """The tooltip's per-person lines (people named by their tags now)."""
        try:
            names = Names.of_frame(self._project.skeleton,
                                   [p.id for p in self._project.people(row.frame_id)])
        except PosewrightError:
            names = None
        return people_summary(row.reasons, names)

    # -- Qt model
    def data(self, index: Index, role: int = DisplayRole) -> Any:
        if not index.isValid() or role not in _WORK_ROLES:
            return None
        rows = self._page(index.row() // self.PAGE)
        k = index.row() % self.PAGE
        if k >= len(rows):
            return None
        r = rows[k]
        col = index.column()
        if role == KeyRole:
            return r.frame_id
        mark = self._marks.get(r.frame_id)
        if role == MarkRole:
            return mark
        if role == DisplayRole:
            if col == 0:
                # Two lines: the frame, then why it is suspicious (the reasons are what the
                # annotator scans the list for, so they get a full line).
                line = r.summary
                if r.findings:
                    line = f"{count(r.findings, 'findings')} \u00b7 {line}" if line else \
                        count(r.findings, "findings")
                if mark in MARK_TEXT:
                    line = f"{MARK_TEXT[mark]} \u00b7 {line}" if line else MARK_TEXT[mark]
                return f"{r.name}\n{line}" if line else r.name
            if col == 1:
                return "" if r.score is None else f"{r.score:.2f}"
            if self._review:
                return f"{STATE_TEXT[r.state]}\n{r.decision}" if r.decision else \
                    STATE_TEXT[r.state]
            if r.claimed_by:
                return f"{STATE_TEXT[r.state]}\n\u270e {r.claimed_by}"
            return STATE_TEXT[r.state]
        if role == ToolTipRole:
            head = f"frame {r.frame_id}: {r.name}" + (f"\n{r.video}" if r.video else "")
            if r.claimed_by:
                head += f"\n{r.claimed_by} is working on this frame"
            if self._review:
                head += f"\nyour decision: {r.decision or 'none yet'}"
            if r.findings is not None:
                head += f"\n{count(r.findings, 'open findings')} (W walks them)"
            if mark in MARK_TIP:
                head += f"\n{MARK_TIP[mark]}"
            details = self._people_summary(r)
            return f"{head}\n{details}" if details else head
        if role == AlignRole and col == 1:
            return int(Qt.AlignmentFlag.AlignRight | Qt.AlignmentFlag.AlignVCenter)
        if role == AlignRole and col == 0:
            return int(Qt.AlignmentFlag.AlignLeft | Qt.AlignmentFlag.AlignVCenter)
        if role == FontRole and col == 2 and r.state is FrameState.DISPUTED:
            font = QFont()
            font.setBold(True)
            return font
        if role == ForegroundRole and col == 0 and mark in MARK_TEXT:
            return QColor("#1f5fb4")
        if role == ForegroundRole and col == 2 and r.claimed_by:
            return QColor("#8a4f00")
        if role == ForegroundRole and col == 2 and r.state is FrameState.SIGNED_OFF:
            return QColor("#2f7d4f")
        return None


def _work_row(frame_id: int, name: str, score: float | None, state: FrameState,
              reasons: list[dict[str, Any]]) -> WorkRow:
    kinds = frozenset(str(r.get("kind", "other")) for r in reasons)
    return WorkRow(frame_id, name, score, state, kinds, summarise_reasons(reasons),
                   reasons=tuple(reasons))


def summarise_reasons(reasons: Sequence[dict[str, Any]]) -> str:
    """One line for the Worklist: how many reasons of each kind, kinds about people first,
    strongest evidence first (a single sure sign outranks many faint ones), frame-level kinds
    (no person) last.

    Examples
    --------
    >>> summarise_reasons([{"kind": "crowded", "person": None, "weight": 1.0},
    ...                    {"kind": "weak-limb", "person": 3, "weight": 0.4},
    ...                    {"kind": "weak-limb", "person": 5, "weight": 0.3},
    ...                    {"kind": "stretched-limb", "person": 4, "weight": 0.9}])
    'stretched limb \u00b7 2 weak limbs \u00b7 crowded'
    """
    kinds: dict[str, list[float]] = {}
    for r in reasons:
        kind = str(r.get("kind", "other"))
        entry = kinds.setdefault(kind, [0.0, 0.0, 0.0])  # strongest, count, about the frame
        entry[0] = max(entry[0], float(r.get("weight") or 0.0))
        entry[1] += 1
        entry[2] = max(entry[2], 1.0 if r.get("person") is None else 0.0)
    order = sorted(kinds, key=lambda k: (kinds[k][2], -kinds[k][0], -kinds[k][1], k))
    parts = [reason_count(k, int(kinds[k][1])) for k in order]
    return " \u00b7 ".join(parts)


# ---------------------------------------------------------------------------------- Owners

class PeopleModel(_TableModel):
    """The people of the current frame: tag (with colour) and stable number, then how many of
    their joints are labelled, occluded and flagged by triage."""

    COLUMNS = ("person", "labelled", "occluded", "flagged")

    def __init__(self, parent: Any = None):
        super().__init__(parent)
        self._people: list[Person] = []
        self._flags: dict[int, frozenset[int]] = {}
        self._colours: dict[int, int] = {}

    def set_people(self, people: Sequence[Person], flags: dict[int, frozenset[int]],
                   colours: dict[int, int]) -> None:
        """The frame's people in tag order, their triage flags and palette indices."""
        self.beginResetModel()
        self._people = list(people)
        self._flags = dict(flags)
        self._colours = dict(colours)
        self.endResetModel()

    def person_id(self, row: int) -> int:
        return self._people[row].id

    def row_of(self, person_id: int) -> int | None:
        for i, p in enumerate(self._people):
            if p.id == person_id:
                return i
        return None

    def rowCount(self, parent: Index = _ROOT) -> int:
        return 0 if parent.isValid() else len(self._people)

    _ROLES = frozenset({KeyRole, DecorationRole, DisplayRole, ToolTipRole, AlignRole})

    def data(self, index: Index, role: int = DisplayRole) -> Any:
        if role not in self._ROLES or not index.isValid():
            return None
        n = index.row() + 1
        p = self._people[index.row()]
        col = index.column()
        if role == KeyRole:
            return p.id
        if role == DecorationRole and col == 0:
            return palette_colour(self._colours.get(p.id, n - 1))
        if role == DisplayRole:
            v = p.keypoints[:, 2]
            if col == 0:
                return f"{n} (#{p.id})"
            if col == 1:
                return f"{int(np.count_nonzero(v > 0))}/{len(v)}"
            if col == 2:
                occluded = int(np.count_nonzero(v == 1))
                return str(occluded) if occluded else ""
            flags = self._flags.get(p.id, frozenset())
            n_flags = len(flags - {WHOLE_PERSON}) + (1 if WHOLE_PERSON in flags else 0)
            return str(n_flags) if n_flags else ""
        if role == ToolTipRole:
            name = person_text(n, p.id)
            return f"{name}; number key {n} gives the selected joint to them" \
                if n <= 9 else name
        if role == AlignRole and col in (1, 2, 3):
            return int(Qt.AlignmentFlag.AlignCenter)
        return None


# ---------------------------------------------------------------------------------- Ledger

@dataclass(frozen=True)
class LedgerRow:
    """One user action: the ledger entries of one group, shown as one row."""

    group_id: int
    seq: int
    kind: str
    summary: str
    author: str
    time: float
    frames: tuple[int, ...]
    changes: int


class LedgerModel(_TableModel):
    """The edits of one frame or of the whole project, newest first, one row per action."""

    COLUMNS = ("when", "who", "frame", "what")
    #: Ledger entries read for the whole-project view (the newest; older ones via the CLI).
    PROJECT_LIMIT = 20_000

    def __init__(self, project: Project, parent: Any = None):
        super().__init__(parent)
        self._project = project
        self._frame_id: int | None = None
        self._whole = False
        self._rows: list[LedgerRow] = []
        #: Per frame, the names of its people now (the summaries are written with them).
        self._names: dict[int, Names] = {}

    @property
    def whole_project(self) -> bool:
        return self._whole

    def set_scope(self, frame_id: int | None, whole_project: bool) -> None:
        self._frame_id = frame_id
        self._whole = whole_project
        self.reload()

    def reload(self) -> None:
        if self._whole:
            entries = self._project.history(limit=self.PROJECT_LIMIT)
        elif self._frame_id is not None:
            entries = self._project.history(frame_id=self._frame_id)
        else:
            entries = []
        self.beginResetModel()
        self._rows = group_entries(entries)
        self._names = {}
        if self._rows and not self._whole:
            self.text(self._rows[0])  # the frame's names read now, not while painting
        self.endResetModel()

    def text(self, row: LedgerRow) -> str:
        """The row's summary with people by tag and number and joints by name."""
        if not row.frames:
            return row.summary
        fid = row.frames[0]
        names = self._names.get(fid)
        if names is None:
            try:
                names = Names.of_frame(self._project.skeleton,
                                       [p.id for p in self._project.people(fid)])
            except PosewrightError:  # closed or gone: the summary as recorded
                return row.summary
            self._names[fid] = names
        return ledger_names(row.summary, names)

    def ledger_row(self, row: int) -> LedgerRow:
        return self._rows[row]

    def data(self, index: Index, role: int = DisplayRole) -> Any:
        if not index.isValid():
            return None
        r = self._rows[index.row()]
        col = index.column()
        if role == KeyRole:
            return r.seq
        if role == DisplayRole:
            if col == 0:
                return when(r.time)
            if col == 1:
                return r.author
            if col == 2:
                return ", ".join(map(str, r.frames[:3])) + ("\u2026" if len(r.frames) > 3 else "")
            return self.text(r)
        if role == ToolTipRole:
            return (f"{r.kind}, {count(r.changes, 'change')}, ledger entry {r.seq}\n"
                    f"{time.strftime('%Y-%m-%d %H:%M:%S', time.localtime(r.time))}")
        if role == ForegroundRole and r.kind in ("undo", "redo"):
            return QColor("#777777")
        return None


def group_entries(entries: Sequence[LedgerEntry]) -> list[LedgerRow]:
    """Ledger entries (newest first) folded into one row per action, newest first.

    Examples
    --------
    >>> e = lambda seq, g: LedgerEntry(seq, g, "edit", "MoveJoint", "move", "ana", 1.0, 3,
    ...                                 "person:1/joint:2", None, None, None)
    >>> [(r.group_id, r.seq, r.changes) for r in group_entries([e(5, 2), e(4, 2), e(3, 1)])]
    [(2, 5, 2), (1, 3, 1)]
    """
    rows: dict[int, LedgerRow] = {}
    order: list[int] = []
    for e in entries:
        row = rows.get(e.group_id)
        frames = () if e.frame_id is None else (e.frame_id,)
        if row is None:
            rows[e.group_id] = LedgerRow(e.group_id, e.seq, e.kind, ledger_text(e.summary),
                                         e.author, e.time, frames, 1)
            order.append(e.group_id)
        else:
            merged = row.frames + tuple(f for f in frames if f not in row.frames)
            rows[e.group_id] = LedgerRow(row.group_id, max(row.seq, e.seq), row.kind,
                                         row.summary, row.author, row.time, merged,
                                         row.changes + 1)
    return [rows[g] for g in order]


# ---------------------------------------------------------------------------------- Notes

class NotesModel(QAbstractListModel):
    """The note thread of the current frame, oldest first."""

    def __init__(self, project: Project, parent: Any = None):
        super().__init__(parent)
        self._project = project
        self._frame_id: int | None = None
        self._notes: list[Note] = []
        self._numbers: dict[int, int] = {}

    def set_frame(self, frame_id: int | None, numbers: dict[int, int] | None = None) -> None:
        self._frame_id = frame_id
        self._numbers = dict(numbers or {})
        self.reload()

    def reload(self) -> None:
        notes = [] if self._frame_id is None else self._project.notes(self._frame_id)
        self.beginResetModel()
        self._notes = notes
        self.endResetModel()

    def rowCount(self, parent: Index = _ROOT) -> int:
        return 0 if parent.isValid() else len(self._notes)

    def data(self, index: Index, role: int = DisplayRole) -> Any:
        if not index.isValid():
            return None
        n = self._notes[index.row()]
        if role == KeyRole:
            return n.id
        if role == DisplayRole:
            about = ""
            if n.person_id is not None:
                about = " about " + person_text(self._numbers.get(n.person_id), n.person_id)
            return f"{n.author}, {when(n.time)}{about}\n{n.text}"
        if role == ToolTipRole:
            return time.strftime("%Y-%m-%d %H:%M:%S", time.localtime(n.time))
        return None
