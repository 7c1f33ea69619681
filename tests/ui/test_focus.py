"""Keyboard focus comes back to the Canvas after the short trips a key takes elsewhere: writing
a note (Return or Esc), a menu closed with Esc, a click in Owners. Keys are sent to whichever
widget has the focus (or the open menu), as a keyboard would; the check is that Tab then walks
the selected person's joints (README key table: Tab / Shift+Tab), which only the Canvas does.

Data: the synthetic project of tests/ui/conftest.py (invented for these tests). Our own
behaviour, no outside source.
"""

from __future__ import annotations

from PySide6.QtCore import Qt
from PySide6.QtWidgets import QApplication

from tests.ui.conftest import person_id, screen_point


def _key(qtbot, key, modifier=Qt.KeyboardModifier.NoModifier) -> None:
    """Press a key where the keyboard's input goes: the open menu, else the focus widget."""
    target = QApplication.activePopupWidget() or QApplication.focusWidget()
    assert target is not None, "some widget has the keyboard"
    qtbot.keyClick(target, key, modifier)


def _type(qtbot, text: str) -> None:
    qtbot.keyClicks(QApplication.focusWidget(), text)


def _select_shoulder(qtbot, window) -> int:
    pid = person_id(window, 1)
    qtbot.mouseClick(window.canvas, Qt.MouseButton.LeftButton, pos=screen_point(window, pid, 5))
    assert window.canvas.selected_joint == (pid, 5)
    return pid


def _tab_walks_joints(qtbot, window, pid: int) -> None:
    assert QApplication.focusWidget() is window.canvas, QApplication.focusWidget()
    before = window.canvas.selected_joint
    _key(qtbot, Qt.Key.Key_Tab)
    assert window.canvas.selected_joint == (pid, before[1] + 1), "Tab walked to the next joint"


def test_return_in_the_note_box_adds_the_note_and_gives_the_keys_back(qtbot, window,
                                                                      ui_project):
    pid = _select_shoulder(qtbot, window)
    _key(qtbot, Qt.Key.Key_C)
    assert QApplication.focusWidget() is window.notes.entry
    _type(qtbot, "shoulder hidden by the scarf")
    _key(qtbot, Qt.Key.Key_Return)
    assert [n.text for n in ui_project.notes(window.frame_id)] == ["shoulder hidden by the scarf"]
    _tab_walks_joints(qtbot, window, pid)
    _key(qtbot, Qt.Key.Key_O)  # a Canvas key, no longer typed into the note box
    assert ui_project.people(window.frame_id)[0].keypoints[6, 2] == 1
    assert window.notes.entry.text() == ""


def test_esc_in_the_note_box_keeps_the_draft_and_the_selection(qtbot, window, ui_project):
    pid = _select_shoulder(qtbot, window)
    _key(qtbot, Qt.Key.Key_C)
    _type(qtbot, "half a thought")
    _key(qtbot, Qt.Key.Key_Escape)
    assert window.canvas.selected_joint == (pid, 5), "Esc left the note box, not the selection"
    assert window.notes.entry.text() == "half a thought"
    assert ui_project.notes(window.frame_id) == []
    _tab_walks_joints(qtbot, window, pid)


def test_return_in_an_empty_note_box_gives_the_keys_back(qtbot, window, ui_project):
    pid = _select_shoulder(qtbot, window)
    _key(qtbot, Qt.Key.Key_C)
    _key(qtbot, Qt.Key.Key_Return)
    assert ui_project.notes(window.frame_id) == []
    _tab_walks_joints(qtbot, window, pid)


def test_the_add_note_button_gives_the_keys_back(qtbot, window, ui_project):
    pid = _select_shoulder(qtbot, window)
    _key(qtbot, Qt.Key.Key_C)
    _type(qtbot, "checked")
    qtbot.mouseClick(window.notes.add, Qt.MouseButton.LeftButton)
    assert [n.text for n in ui_project.notes(window.frame_id)] == ["checked"]
    _tab_walks_joints(qtbot, window, pid)


def _menu(window, title: str):
    return next(a for a in window.menuBar().actions() if a.text() == title)


def test_a_menu_opened_by_mouse_and_closed_with_esc(qtbot, window):
    pid = _select_shoulder(qtbot, window)
    bar, frame = window.menuBar(), _menu(window, "&Frame")
    qtbot.mouseClick(bar, Qt.MouseButton.LeftButton, pos=bar.actionGeometry(frame).center())
    assert QApplication.activePopupWidget() is frame.menu()
    _key(qtbot, Qt.Key.Key_Escape)
    assert not frame.menu().isVisible()
    _tab_walks_joints(qtbot, window, pid)


def test_a_menu_opened_by_its_alt_key_and_closed_with_esc(qtbot, window):
    pid = _select_shoulder(qtbot, window)
    _key(qtbot, Qt.Key.Key_V, Qt.KeyboardModifier.AltModifier)
    view = _menu(window, "&View").menu()
    assert QApplication.activePopupWidget() is view
    _key(qtbot, Qt.Key.Key_Escape)
    assert not view.isVisible()
    _tab_walks_joints(qtbot, window, pid)


def test_walking_the_menus_with_arrows_still_works(qtbot, window):
    """Esc closes the menu; Left and Right inside an open menu still walk the menu bar."""
    bar = window.menuBar()
    edit, frame = _menu(window, "&Edit"), _menu(window, "&Frame")
    qtbot.mouseClick(bar, Qt.MouseButton.LeftButton, pos=bar.actionGeometry(edit).center())
    _key(qtbot, Qt.Key.Key_Right)
    assert QApplication.activePopupWidget() is frame.menu()
    _key(qtbot, Qt.Key.Key_Escape)
    assert QApplication.activePopupWidget() is None


def test_a_click_on_an_owner_beside_the_joint_keeps_the_keys(qtbot, window):
    _select_shoulder(qtbot, window)
    window.canvas.repaint()
    rect, taker = window.canvas.owner_rows[0]
    qtbot.mouseClick(window.canvas, Qt.MouseButton.LeftButton, pos=rect.center().toPoint())
    assert window.canvas.selected_joint == (taker, 5)
    _tab_walks_joints(qtbot, window, taker)


def test_a_click_on_a_person_in_owners_gives_the_keys_back(qtbot, window):
    _select_shoulder(qtbot, window)
    pid = person_id(window, 3)
    view = window.owners.people
    rect = view.visualRect(view.model().index(2, 1))
    qtbot.mouseClick(view.viewport(), Qt.MouseButton.LeftButton, pos=rect.center())
    assert window.canvas.selected_person == pid
    assert QApplication.focusWidget() is window.canvas
    _key(qtbot, Qt.Key.Key_Tab)
    assert window.canvas.selected_joint == (pid, 0), "Tab starts at the first joint"
