"""The project on disk or on a server: :class:`Project` (store, edit ledger, undo and redo,
locking), behind one seam for SQLite folders and PostgreSQL databases."""

from app.store.frames import FrameQuery, NewFrame, WorklistEntry
from app.store.ledger import Applied, LedgerEntry
from app.store.project import Project

__all__ = ["Applied", "FrameQuery", "LedgerEntry", "NewFrame", "Project", "WorklistEntry"]
