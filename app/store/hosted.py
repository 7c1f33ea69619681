"""Hosted projects: a project in a PostgreSQL database that a team edits at once."""

from __future__ import annotations

import re
from pathlib import Path
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from app.store.project import Project

_KEYWORDS = re.compile(r"^\s*(host|hostaddr|dbname|user|port|service|sslmode|password)\s*=")


def is_database_url(text: str) -> bool:
    """Whether ``text`` names a PostgreSQL database rather than a folder: a URL
    (``postgresql://`` or ``postgres://``) or a libpq keyword string (``host=... dbname=...``,
    ``service=NAME``).

    Examples
    --------
    >>> is_database_url("postgresql://ana@db.example/rehearsal"), is_database_url("service=team")
    (True, True)
    >>> is_database_url("projects/rehearsal")
    False
    """
    return text.startswith(("postgresql://", "postgres://")) or bool(_KEYWORDS.match(text))


def open_hosted(cls: type[Project], url: str, author: str, read_only: bool,
                images: str | Path | None) -> Project:
    raise NotImplementedError
