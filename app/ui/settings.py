"""Settings that belong to the person, not the project (QSettings): author name, window
layout, image cache size.

They live in an INI file under the user's configuration folder
(``$XDG_CONFIG_HOME/Posewright/posewright.ini`` on Linux), so tests and scripts can point
``XDG_CONFIG_HOME`` elsewhere.
"""

from __future__ import annotations

from PySide6.QtCore import QSettings

from app.ui.images import DEFAULT_CACHE_BYTES

ORGANISATION = "Posewright"
APPLICATION = "posewright"


def settings() -> QSettings:
    """The person's settings."""
    return QSettings(QSettings.Format.IniFormat, QSettings.Scope.UserScope, ORGANISATION,
                     APPLICATION)


def stored_author() -> str | None:
    """The author name given on the first run, if any."""
    value = settings().value("author/name")
    return str(value) if value else None


def store_author(name: str) -> None:
    s = settings()
    s.setValue("author/name", name)
    s.sync()


def cache_bytes() -> int:
    """The bound of the decoded-image cache (``images/cache_mb``, default 192 MB)."""
    value = settings().value("images/cache_mb")
    try:
        mb = int(value) if value is not None else DEFAULT_CACHE_BYTES // 2**20
    except (TypeError, ValueError):
        mb = DEFAULT_CACHE_BYTES // 2**20
    return max(16, mb) * 2**20
