"""A guard against a reference-counting defect of some PySide6 builds on CPython 3.11 and older.

Some PySide6 wheels hand ``None``, ``True`` and ``False`` to Python without taking a reference
to them: every method that returns nothing (``setPen``, ``drawLine``, ``resize``, ...), every
slot result, and every ``bool`` converted from C++ (a ``Signal(bool)`` argument) takes one
reference away. From CPython 3.12 on these objects are immortal (PEP 683) and that is harmless;
on 3.11, after a few thousand Qt calls (a handful of Canvas paints), CPython aborts with
"deallocating None" (or "True or False").

:func:`shield_singletons` probes for the defect with harmless calls and, only for the objects
whose count really drops, raises their reference count by 2**40 -- what CPython 3.12 does to make
them immortal. Nothing else is touched, and a build without the defect is left alone.
"""

from __future__ import annotations

import ctypes
import logging
import sys
from collections.abc import Callable
from typing import Any

log = logging.getLogger(__name__)

#: How far a count is raised: more Qt calls than a session can make.
BOOST = 1 << 40

_shielded: set[str] = set()


def _drops(obj: Any, probe: Callable[[], object], times: int = 8) -> bool:
    before = sys.getrefcount(obj)
    for _ in range(times):
        probe()
    return sys.getrefcount(obj) < before


def _immortalise(obj: Any) -> None:
    # ob_refcnt is the object's first field (a Py_ssize_t) in CPython's non-debug ABI.
    ctypes.c_ssize_t.from_address(id(obj)).value += BOOST


def shield_singletons() -> set[str]:
    """Make ``None``, ``True`` and ``False`` effectively immortal where this PySide6 build
    needs it; returns the names of those shielded (now or before).

    Notes
    -----
    Probes: eight calls of ``QRectF.setWidth`` (returns nothing) must leave
    ``sys.getrefcount(None)`` unchanged; eight emissions of a ``Signal(bool)`` carrying
    ``True`` (and ``False``) must leave their counts unchanged. A drop means the defect.

    References
    ----------
    PEP 683, "Immortal Objects, Using a Fixed Refcount" (CPython 3.12).

    Examples
    --------
    >>> shield_singletons() <= {"None", "True", "False"}
    True
    """
    if sys.implementation.name != "cpython" or sys.version_info >= (3, 12):
        return set()
    from PySide6.QtCore import QObject, QRectF, Signal

    class _Probe(QObject):
        flag = Signal(bool)

    rect = QRectF()
    probe = _Probe()
    probe.flag.connect(lambda _v: 0)
    checks: dict[str, tuple[Any, Callable[[], object]]] = {
        "None": (None, lambda: rect.setWidth(1.0)),
        "True": (True, lambda: probe.flag.emit(True)),
        "False": (False, lambda: probe.flag.emit(False)),
    }
    for name, (obj, call) in checks.items():
        if name not in _shielded and _drops(obj, call):
            _immortalise(obj)
            _shielded.add(name)
            log.info("PySide6 drops references to %s on this Python; made it immortal", name)
    return set(_shielded)
