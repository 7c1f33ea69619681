"""The store is the only place that speaks SQL: every other package calls its typed gateways
(the layering rule of DEVELOPERS.md, "No SQL outside app/store"; common practice of a data
access layer, no source)."""

from __future__ import annotations

import ast
import re
from pathlib import Path

APP = Path(__file__).resolve().parent.parent / "app"

#: SQL as we write it: upper-case keywords that start a statement.
_SQL = re.compile(r"\b(SELECT\s+\S|INSERT\s+(OR\s+\w+\s+)?INTO|UPDATE\s+\w+\s+SET|DELETE\s+FROM|"
                  r"CREATE\s+(TABLE|INDEX|SEQUENCE)|DROP\s+TABLE|ALTER\s+TABLE|PRAGMA\s+\w)")
#: Calls that hand SQL to a database driver.
_CALLS = {"execute", "executemany", "executescript", "query"}


def sql_found(source: str) -> list[str]:
    """Where ``source`` holds SQL text or calls a driver: ``line: what`` each."""
    found = []
    for node in ast.walk(ast.parse(source)):
        if isinstance(node, ast.Constant) and isinstance(node.value, str) \
                and _SQL.search(node.value):
            found.append(f"{node.lineno}: SQL text {node.value.strip()[:40]!r}")
        if isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute) \
                and node.func.attr in _CALLS:
            found.append(f"{node.lineno}: call of .{node.func.attr}()")
    return found


def test_the_detector_finds_sql_text_and_driver_calls():
    """Synthetic snippets: the check can fail."""
    assert sql_found('x = "SELECT id FROM frames"')
    assert sql_found('b.execute("anything")')
    assert sql_found('p.query("x")')
    assert sql_found('s = "INSERT OR REPLACE INTO t VALUES (?)"')
    assert not sql_found('label = "Select a joint, then press G"')


def test_no_module_outside_the_store_holds_sql_or_calls_a_driver():
    offenders = []
    for path in sorted(APP.rglob("*.py")):
        if path.relative_to(APP).parts[0] == "store":
            continue
        offenders += [f"{path.relative_to(APP.parent)}:{hit}"
                      for hit in sql_found(path.read_text(encoding="utf-8"))]
    assert not offenders, "SQL outside app/store:\n" + "\n".join(offenders)


def qt_imports(source: str, ui_too: bool = False) -> list[str]:
    """Where ``source`` imports Qt (PySide6, shiboken6), and with ``ui_too`` the app's Qt
    layer (``app.ui``): ``line: module`` each."""
    banned = ("PySide6", "shiboken6") + (("app.ui",) if ui_too else ())
    found = []
    for node in ast.walk(ast.parse(source)):
        names = []
        if isinstance(node, ast.Import):
            names = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom) and node.module:
            names = [node.module]
        found += [f"{node.lineno}: {n}" for n in names
                  if any(n == b or n.startswith(b + ".") for b in banned)]
    return found


def test_the_qt_detector_finds_imports():
    """Synthetic snippets: the check can fail."""
    assert qt_imports("from PySide6.QtCore import Qt")
    assert qt_imports("import shiboken6")
    assert qt_imports("from app.ui.canvas import Canvas", ui_too=True)
    assert not qt_imports("from app.ui.canvas import Canvas")
    assert not qt_imports("from app.session import Session", ui_too=True)


def test_qt_is_imported_only_under_app_ui_and_the_session_layer_needs_no_window():
    """Qt lives in app/ui alone (DEVELOPERS.md, "Layout"); app/session holds the state a
    window shows and must not reach the window's modules either, so that every behaviour
    there is testable without one (common practice of a presentation model, no source)."""
    offenders = []
    for path in sorted(APP.rglob("*.py")):
        part = path.relative_to(APP).parts[0]
        if part == "ui":
            continue
        offenders += [f"{path.relative_to(APP.parent)}:{hit}" for hit in
                      qt_imports(path.read_text(encoding="utf-8"), ui_too=part == "session")]
    assert not offenders, "Qt outside app/ui:\n" + "\n".join(offenders)
