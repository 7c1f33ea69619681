"""Every key of the main window, walked under each keyboard scheme Qt knows: no key is bound
twice, and every key that the README's key table and the in-app shortcut sheet (F1) promise
reaches the one action it names.

Sources: Qt's table of standard key bindings per keyboard scheme (qtbase,
``src/gui/kernel/qplatformtheme.cpp``; the same table is printed as "Standard Shortcuts" in
the QKeySequence documentation). The rows used here: Undo is Ctrl+Z everywhere (Windows adds
Alt+Backspace, X11 the F14 key of some keyboards); Redo is Ctrl+Shift+Z on X11, GNOME, KDE and
macOS and Ctrl+Y, Alt+Shift+Backspace or Ctrl+Shift+Z on Windows; Quit is Ctrl+Q on X11,
GNOME, KDE and macOS and has no key on Windows; Open, Zoom in and Zoom out are Ctrl+O, Ctrl++
and Ctrl+- everywhere. The suite's offscreen platform uses Qt's default, the Windows scheme
(checked below against Qt itself), so every scheme is fed in from that table. A key
bound twice in one context fires neither binding (Qt's shortcut map reports "Ambiguous
shortcut overload"). Data: the synthetic project of tests/ui/conftest.py.
"""

from __future__ import annotations

import html
import re
from collections import defaultdict
from pathlib import Path

import pytest
from PySide6.QtCore import Qt
from PySide6.QtGui import QAction, QKeySequence, QShortcut
from PySide6.QtTest import QTest

from app.model.edits import SetVisibility
from app.ui import keys
from app.ui.keys import KEYS, sheet_html
from tests.ui.conftest import show_window

ROOT = Path(__file__).resolve().parents[2]
SK = QKeySequence.StandardKey
PORTABLE = QKeySequence.SequenceFormat.PortableText

_X11 = {SK.Undo: ["Ctrl+Z", "F14"], SK.Redo: ["Ctrl+Shift+Z"], SK.Quit: ["Ctrl+Q"],
        SK.Open: ["Ctrl+O"], SK.ZoomIn: ["Ctrl++"], SK.ZoomOut: ["Ctrl+-"]}
#: The standard keys the app uses, per keyboard scheme (Qt's table, see the module docstring).
SCHEMES: dict[str, dict[QKeySequence.StandardKey, list[str]]] = {
    "windows": {SK.Undo: ["Ctrl+Z", "Alt+Backspace"],
                SK.Redo: ["Ctrl+Y", "Alt+Shift+Backspace", "Ctrl+Shift+Z"], SK.Quit: [],
                SK.Open: ["Ctrl+O"], SK.ZoomIn: ["Ctrl++"], SK.ZoomOut: ["Ctrl+-"]},
    "x11": _X11,
    "gnome-kde": {**_X11, SK.Undo: ["Ctrl+Z"]},
    "macos": {**_X11, SK.Undo: ["Ctrl+Z"]},
}


@pytest.fixture(params=sorted(SCHEMES))
def scheme(request, monkeypatch):
    """The standard keys of one keyboard scheme, as the window gets them."""
    table = SCHEMES[request.param]
    monkeypatch.setattr(keys, "_standard_bindings",
                        lambda k: [QKeySequence(s) for s in table[k]])
    return request.param


def test_the_table_agrees_with_qt_on_this_platform(qapp):
    """Qt's live bindings here are one scheme of the table (offscreen: Qt's default, the
    Windows scheme; an X server without a desktop: X11). Qt 6 adds the dedicated Undo, Redo,
    Open, zoom and Exit keys of some keyboards, which the table leaves out."""
    dedicated = {"Undo", "Redo", "Open", "Zoom In", "Zoom Out", "Exit"}
    live = {k: {s.toString(PORTABLE) for s in QKeySequence.keyBindings(k)}
            for k in SCHEMES["windows"]}
    matching = [name for name, table in SCHEMES.items()
                if all(live[k] - dedicated == set(v) for k, v in table.items())]
    assert matching, live


def _bindings(window) -> list[tuple[str, str, str]]:
    """Every key sequence the window binds, as (sequence, scope, owner): the actions' shortcuts,
    any QShortcut, and the menu bar's Alt mnemonics. Window and application shortcuts share
    the window's scope; a widget shortcut is scoped to its widget."""
    window_wide = (Qt.ShortcutContext.WindowShortcut, Qt.ShortcutContext.ApplicationShortcut)
    out = []
    for action in window.findChildren(QAction):
        scope = "window" if action.shortcutContext() in window_wide else \
            ",".join(sorted(str(id(o)) for o in action.associatedObjects()))
        owner = action.objectName() or action.text()
        out += [(s.toString(PORTABLE), scope, owner) for s in action.shortcuts()]
    for shortcut in window.findChildren(QShortcut):
        scope = "window" if shortcut.context() in window_wide else str(id(shortcut.parent()))
        bound = shortcut.keys()
        out += [(s.toString(PORTABLE), scope, shortcut.objectName() or "shortcut")
                for s in bound]
    for menu in window.menuBar().actions():
        mnemonic = QKeySequence.mnemonic(menu.text())
        if not mnemonic.isEmpty():
            out.append((mnemonic.toString(PORTABLE), "window", f"menu {menu.text()}"))
    return out


def test_no_key_is_bound_twice(qtbot, ui_project, scheme):
    window = show_window(qtbot, ui_project)
    seen: dict[tuple[str, str], list[str]] = defaultdict(list)
    for text, scope, owner in _bindings(window):
        seen[text, scope].append(owner)
    window_keys = {text for text, scope in seen if scope == "window"}
    twice = {k: v for k, v in seen.items() if len(v) > 1}
    widget_clashes = {k: v for k, v in seen.items() if k[1] != "window" and k[0] in window_keys}
    window.shutdown()
    assert not twice, f"{scheme}: bound twice {twice}"
    assert not widget_clashes, f"{scheme}: a widget key clashes with a window key"


def _readme_rows() -> list[tuple[str, str]]:
    """(key cell, what it does) of each row of the README's key table."""
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    section = readme.split("## The desktop app", 1)[1].split("\n## ", 1)[0]
    rows = []
    for line in section.splitlines():
        cells = [c.strip() for c in line.split("|")]
        if line.startswith("|") and len(cells) == 5 and cells[2] not in ("key", "---"):
            rows.append((cells[2], cells[3]))
    return rows


def _sheet_rows() -> list[tuple[str, str]]:
    """(keys, help) of each row of the shortcut sheet, as the sheet shows them."""
    found = re.findall(r"<tr><td[^>]*><b>(.*?)</b></td><td>(.*?)</td></tr>", sheet_html())
    return [(html.unescape(k), html.unescape(h)) for k, h in found]


class _Spy:
    """Counts the triggers of every action of the window, with their handlers detached so
    that pressing a key changes nothing but the count (every action enabled)."""

    def __init__(self, window):
        self.fired: list[str] = []
        for name, action in window.actions_by_name.items():
            action.triggered.disconnect()
            action.setEnabled(True)
            action.triggered.connect(lambda _c=False, n=name: self.fired.append(n))

    def press(self, widget, text: str, native: bool = False) -> list[str]:
        """The actions a key fires, pressed on ``widget`` as a keyboard would."""
        fmt = QKeySequence.SequenceFormat.NativeText if native else PORTABLE
        seq = QKeySequence(text, fmt)
        assert seq.count() == 1 and not seq.isEmpty(), f"{text!r} is not a key"
        self.fired.clear()
        QTest.keySequence(widget, seq)
        return list(self.fired)


def test_every_key_the_readme_promises_reaches_one_action(qtbot, ui_project, scheme):
    """Each key of the README's table fires exactly one action, under every scheme; keys
    listed with a comma are alternatives for the same action, keys split by a slash are
    different actions. Gesture rows (mouse, Tab, arrows, region mode) must be the Canvas's
    own gestures of the key table; they are driven by the Canvas and region tests."""
    gestures = {k.gesture for k in KEYS if k.gesture}
    window = show_window(qtbot, ui_project)
    spy = _Spy(window)
    failures = []
    for cell, what in _readme_rows():
        if cell in gestures:
            continue
        if cell == "1 \u2013 9":
            for n in range(1, 10):
                if spy.press(window.canvas, str(n)) != [f"give_{n}"]:
                    failures.append(f"{n}: {spy.fired}")
            continue
        for alternative in cell.split(" / "):
            fired = {text: spy.press(window.canvas, text) for text in alternative.split(", ")}
            names = {tuple(f) for f in fired.values()}
            if any(len(f) != 1 for f in fired.values()) or len(names) != 1:
                failures.append(f"{alternative} ({what}): {fired}")
    window.shutdown()
    assert not failures, f"{scheme}: " + "; ".join(failures)


def test_every_key_of_the_shortcut_sheet_reaches_its_action(qtbot, ui_project, scheme):
    window = show_window(qtbot, ui_project)
    spy = _Spy(window)
    by_help = {k.help: k for k in KEYS}
    failures = []
    for shown, help_text in _sheet_rows():
        key = by_help[help_text]
        if key.gesture:
            assert shown == key.gesture
            continue
        for text in shown.split(", "):
            fired = spy.press(window.canvas, text, native=True)
            if fired != [key.name]:
                failures.append(f"{text} ({key.name}): {fired}")
    window.shutdown()
    assert not failures, f"{scheme}: " + "; ".join(failures)


def test_the_readme_and_the_sheet_list_every_entry_of_the_key_table(qapp, scheme):
    """The other direction: every action and gesture of the key table is in the README (with
    at least one of its keys under this scheme) and on the sheet, in the table's order."""
    cells = {cell for cell, _ in _readme_rows()}
    tokens = {t for cell in cells for t in re.split(r" / |, ", cell)}
    for key in KEYS:
        if key.gesture:
            assert key.gesture in cells, key.gesture
        elif key.name.startswith("give_"):
            assert "1 \u2013 9" in cells
        else:
            shown = {s.toString(PORTABLE) for s in keys.sequences(key)}
            assert shown & tokens, f"{scheme}: {key.name} ({shown}) is not in the README"
    assert [h for _, h in _sheet_rows()] == [k.help for k in KEYS]


def test_ctrl_q_quits_and_ctrl_y_redoes_on_linux(qtbot, ui_project, monkeypatch):
    """The X11 scheme of Qt's table (what a Linux desktop gets): Ctrl+Q closes the window;
    Ctrl+Y and Ctrl+Shift+Z both redo, as the README says."""
    table = SCHEMES["x11"]
    monkeypatch.setattr(keys, "_standard_bindings",
                        lambda k: [QKeySequence(s) for s in table[k]])
    window = show_window(qtbot, ui_project)
    person = ui_project.people(window.frame_id)[1]
    for redo in ("Ctrl+Y", "Ctrl+Shift+Z"):
        ui_project.apply(SetVisibility(window.frame_id, person.id, 9, 1))
        QTest.keySequence(window.canvas, QKeySequence("Ctrl+Z"))
        assert ui_project.people(window.frame_id)[1].keypoints[9, 2] == 2, "undone"
        QTest.keySequence(window.canvas, QKeySequence(redo))
        assert ui_project.people(window.frame_id)[1].keypoints[9, 2] == 1, f"{redo} redoes"
        ui_project.apply(SetVisibility(window.frame_id, person.id, 9, 2))
    QTest.keySequence(window.canvas, QKeySequence("Ctrl+Q"))
    assert not window.isVisible(), "Ctrl+Q closed the window"
