"""The project on disk or on a server: :class:`Project` (store, edit ledger, undo and redo,
locking), behind one seam for SQLite folders and PostgreSQL databases.

The names below are imported when first asked for (PEP 562), so that importing a module of
the package that needs none of them (:mod:`app.store.peek`, which a batch command reads
before anything else) does not import the model, numpy and pydantic with them.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from app.store.frames import FrameQuery, NewFrame, WorklistEntry
    from app.store.ledger import Applied, LedgerEntry
    from app.store.project import Project

__all__ = ["Applied", "FrameQuery", "LedgerEntry", "NewFrame", "Project", "WorklistEntry"]

#: Where each name of :data:`__all__` lives.
_HOMES = {"FrameQuery": "app.store.frames", "NewFrame": "app.store.frames",
          "WorklistEntry": "app.store.frames", "Applied": "app.store.ledger",
          "LedgerEntry": "app.store.ledger", "Project": "app.store.project"}


def __getattr__(name: str) -> Any:
    home = _HOMES.get(name)
    if home is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(importlib.import_module(home), name)
    globals()[name] = value
    return value
