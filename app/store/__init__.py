"""The project on disk: :class:`Project` (SQLite store, edit ledger, undo and redo, locking)."""

from app.store.project import Applied, LedgerEntry, Project

__all__ = ["Applied", "LedgerEntry", "Project"]
