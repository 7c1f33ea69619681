"""The words of the window: every menu, action, button, column header, label, tooltip, list
item, the shortcut sheet and the status messages of a short session, checked for counts that
do not agree with their number, the one spelling of "unlabelled" and our own words for the
sides of a review; no two actions share a name, and "Return" names only the key.

Our own rules (README.md, "The desktop app"), no outside source; the patterns are those of
tests/test_words.py, which checks the code's strings and the command line's help. Data: the
synthetic project of tests/ui/conftest.py.
"""

from __future__ import annotations

import re

from PySide6.QtCore import QAbstractListModel, QModelIndex, Qt
from PySide6.QtWidgets import (
    QAbstractButton,
    QAbstractItemView,
    QComboBox,
    QLabel,
    QLineEdit,
    QSpinBox,
)

from app.ui.keys import KEYS, sheet_html
from tests.test_words import FORBIDDEN


def _widget_texts(top, add) -> None:
    """The words of a widget and its children: buttons, labels, fields, lists, spin boxes."""
    for w in top.findChildren(QAbstractButton):
        add("button", w.text())
        add("button tip", w.toolTip())
    for w in top.findChildren(QLabel):
        add("label", w.text())
    for w in top.findChildren(QLineEdit):
        add("placeholder", w.placeholderText())
    for w in top.findChildren(QComboBox):
        for i in range(w.count()):
            add("list item", w.itemText(i))
    for w in top.findChildren(QSpinBox):
        add("number field", f"{w.prefix()}{w.value()}{w.suffix()}")


def _texts(window) -> dict[str, str]:
    """Everything the window shows in words, each with where it is."""
    found: dict[str, str] = {}

    def add(where: str, text: object) -> None:
        if text and isinstance(text, str):
            found[f"{where}: {text[:50]}"] = text

    for menu_action in window.menuBar().actions():
        add("menu", menu_action.text())
        for a in menu_action.menu().actions():
            add("menu item", a.text())
            add("tooltip", a.toolTip())
    for name, a in window.actions_by_name.items():
        add(f"action {name}", a.text())
        add(f"action {name} (short)", a.iconText())
        add(f"action {name} (tip)", a.statusTip() or a.toolTip())
    _widget_texts(window, add)
    for view in window.findChildren(QAbstractItemView):
        model = view.model()
        if model is None:
            continue
        columns = 1 if isinstance(model, QAbstractListModel) else model.columnCount(QModelIndex())
        rows = model.rowCount(QModelIndex())
        for col in range(columns):
            add("column", model.headerData(col, Qt.Orientation.Horizontal))
        for row in range(min(rows, 20)):
            for col in range(columns):
                index = model.index(row, col)
                add("cell", index.data())
                add("cell tip", index.data(Qt.ItemDataRole.ToolTipRole))
    for dock in window.docks.values():
        add("dock", dock.windowTitle())
    add("shortcut sheet", sheet_html())
    for message in window.status_log.lines:
        add("status", message)
    return found


def test_the_window_says_everything_in_our_words(qtbot, window):
    canvas = window.canvas
    for key, modifier in ((Qt.Key.Key_BracketRight, None), (Qt.Key.Key_Tab, None),
                          (Qt.Key.Key_D, Qt.KeyboardModifier.ControlModifier),
                          (Qt.Key.Key_U, None), (Qt.Key.Key_Space, None)):
        if modifier is None:
            qtbot.keyClick(canvas, key)
        else:
            qtbot.keyClick(canvas, key, modifier)
    texts = _texts(window)
    assert len(texts) > 150, "the walk reaches the menus, the docks and the status bar"
    offenders = [f"{where}: {why}" for where, text in texts.items()
                 for pattern, why in FORBIDDEN.items() if re.search(pattern, text)]
    assert not offenders, "\n".join(offenders)
    _no_two_actions_share_a_name(window)
    _return_names_the_key_only(window)


def _no_two_actions_share_a_name(window) -> None:
    """Within the menus, and among the short names the strips and panels show."""
    in_menus = [a.text().replace("&", "") for m in window.menuBar().actions()
                for a in m.menu().actions() if not a.isSeparator()]
    assert len(in_menus) == len(set(in_menus)), sorted(t for t in in_menus
                                                       if in_menus.count(t) > 1)
    named = [k.text for k in KEYS if k.name]
    assert len(named) == len(set(named))
    short = [a.iconText() for a in window.actions_by_name.values()]
    assert len(short) == len(set(short)), sorted(t for t in short if short.count(t) > 1)


def _return_names_the_key_only(window) -> None:
    """An action or a button is never called "return ..." (the packet is sent back, the
    Ledger rewinds); the word is left to the Return key, as in "Shift+Return"."""
    names = [a.text() for a in window.actions_by_name.values()]
    names += [a.iconText() for a in window.actions_by_name.values()]
    names += [b.text() for b in window.findChildren(QAbstractButton)]
    used = [n for n in names if re.search(r"(?i)\breturn", re.sub(r"\w+\+Return\b", "", n))]
    assert not used, used


def test_the_project_forms_say_counts_in_our_words(qtbot, tmp_path):
    """The forms of the Project menu, with one frame and with several in each choice."""
    from app.ui.dialogs import PacketDialog, PrelabelDialog, VideoDialog

    found: dict[str, str] = {}

    def add(where: str, text: object) -> None:
        if text and isinstance(text, str):
            found[f"{where}: {text[:50]}"] = text

    for n in (1, 2):
        counts = {"all": n, "untouched": n, "disputed": n, "corrected": n}
        for dialog in (PacketDialog(tmp_path, counts, 7), PrelabelDialog(tmp_path, counts),
                       VideoDialog(tmp_path)):
            qtbot.addWidget(dialog)
            if isinstance(dialog, VideoDialog):
                dialog.every.setValue(n)
            add("title", dialog.windowTitle())
            _widget_texts(dialog, add)
    fields = [t for k, t in found.items() if k.startswith("number field")]
    assert any(t.endswith("1 frame") for t in fields), fields
    assert any(t.endswith("2 frames") for t in fields), fields
    offenders = [f"{where}: {why}" for where, text in found.items()
                 for pattern, why in FORBIDDEN.items() if re.search(pattern, text)]
    assert not offenders, "\n".join(offenders)
