"""The installed Qt binding keeps Python's reference counts straight.

PySide6 6.12.0 loses a reference to ``None`` on every Qt call that returns nothing, and to
``True``/``False`` on every ``bool`` it hands to Python. On CPython 3.12 and later those objects
are immortal (PEP 683) and nothing happens; on 3.10 and 3.11 the interpreter aborts after a few
thousand calls. pyproject.toml keeps that build off the older interpreters; this test catches a
build with the same defect before it crashes the app. Found by running the app (no source).
"""

import subprocess
import sys

import pytest

PROBE = """
import sys
from PySide6.QtCore import QObject, QRectF, Signal
r = QRectF(0, 0, 1, 1)
before = sys.getrefcount(None)
for _ in range(200):
    r.setWidth(2.0)
none_drop = before - sys.getrefcount(None)
class Emitter(QObject):
    flag = Signal(bool)
e = Emitter()
e.flag.connect(lambda value: None)
before = sys.getrefcount(True)
for _ in range(200):
    e.flag.emit(True)
print(none_drop, before - sys.getrefcount(True))
"""


def test_qt_calls_do_not_leak_references_to_none_true_false():
    if sys.version_info >= (3, 12):
        pytest.skip("CPython 3.12+ makes None, True and False immortal; a drop cannot hurt")
    out = subprocess.run([sys.executable, "-c", PROBE], capture_output=True, text=True,
                         env={"QT_QPA_PLATFORM": "offscreen", "PATH": ""})
    assert out.returncode == 0, f"the Qt binding crashed the interpreter: {out.stderr[-300:]}"
    none_drop, true_drop = map(int, out.stdout.split())
    assert (none_drop, true_drop) == (0, 0), (
        "this PySide6 build loses references to None/True on CPython < 3.12; install the "
        "version pyproject.toml asks for")
