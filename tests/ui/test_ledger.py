"""Ledger and Notes: undo and redo with the platform's keys, return to a point, the edit list
with author and time, and the note thread.

Data: the synthetic project of tests/ui/conftest.py (invented for these tests). Undo and redo
must give back exactly the labels before and after (the command pattern; common practice, no
source).
"""

from __future__ import annotations

import numpy as np
from PySide6.QtCore import Qt
from PySide6.QtGui import QKeySequence
from PySide6.QtTest import QTest

from tests.ui.conftest import WAIT_MS, person_id, screen_point


def _kp(project, frame_id, pid):
    return next(p for p in project.people(frame_id) if p.id == pid).keypoints.copy()


def test_undo_and_redo_with_the_platform_keys(qtbot, window, ui_project):
    fid = window.frame_id
    pid = person_id(window, 2)
    before = _kp(ui_project, fid, pid)
    qtbot.mouseClick(window.canvas, Qt.MouseButton.LeftButton, pos=screen_point(window, pid, 9))
    qtbot.keyClick(window.canvas, Qt.Key.Key_U)
    edited = _kp(ui_project, fid, pid)
    assert edited[9, 2] == 0

    QTest.keySequence(window.canvas, QKeySequence(QKeySequence.StandardKey.Undo))
    np.testing.assert_array_equal(_kp(ui_project, fid, pid), before)
    QTest.keySequence(window.canvas, QKeySequence(QKeySequence.StandardKey.Redo))
    np.testing.assert_array_equal(_kp(ui_project, fid, pid), edited)


def test_undo_of_an_edit_on_another_frame_shows_that_frame(qtbot, window, ui_project):
    pid = person_id(window, 1)
    qtbot.mouseClick(window.canvas, Qt.MouseButton.LeftButton, pos=screen_point(window, pid, 0))
    qtbot.keyClick(window.canvas, Qt.Key.Key_O)
    qtbot.keyClick(window.canvas, Qt.Key.Key_Space)
    assert window.frame_id == 3
    QTest.keySequence(window.canvas, QKeySequence(QKeySequence.StandardKey.Undo))
    assert window.frame_id == 2
    assert _kp(ui_project, 2, pid)[0, 2] == 2


def test_ledger_lists_the_frame_edits_newest_first_with_author(qtbot, window):
    pid = person_id(window, 2)
    qtbot.mouseClick(window.canvas, Qt.MouseButton.LeftButton, pos=screen_point(window, pid, 9))
    qtbot.keyClick(window.canvas, Qt.Key.Key_O)
    qtbot.keyClick(window.canvas, Qt.Key.Key_U)
    model = window.ledger_model
    assert model.rowCount() == 2
    # People by tag and stable number, joints by name (never a 0-based index).
    assert model.index(0, 3).data() == f"mark person 2 (#{pid})'s left wrist unlabelled"
    assert model.index(1, 3).data() == f"mark person 2 (#{pid})'s left wrist occluded"
    assert model.index(0, 1).data() == "ana"
    assert model.index(0, 0).data().count(":") == 2  # today: the clock time


def test_return_to_a_point_is_recorded_and_undoable(qtbot, window, ui_project):
    fid = window.frame_id
    pid = person_id(window, 2)
    start = _kp(ui_project, fid, pid)
    qtbot.mouseClick(window.canvas, Qt.MouseButton.LeftButton, pos=screen_point(window, pid, 9))
    qtbot.keyClick(window.canvas, Qt.Key.Key_O)
    after_first = _kp(ui_project, fid, pid)
    for key in (Qt.Key.Key_U, Qt.Key.Key_S):
        qtbot.keyClick(window.canvas, key)
    latest = _kp(ui_project, fid, pid)
    panel = window.ledger
    view = panel.view
    rect = view.visualRect(view.model().index(2, 0))  # the oldest action: "occluded"
    qtbot.mouseClick(view.viewport(), Qt.MouseButton.LeftButton, pos=rect.center())
    assert panel.back.isEnabled()
    qtbot.mouseClick(panel.back, Qt.MouseButton.LeftButton)
    np.testing.assert_array_equal(_kp(ui_project, fid, pid), after_first)
    assert window.ledger_model.index(0, 3).data().startswith("rewind to ledger entry")
    assert not np.array_equal(after_first, start)
    window.undo()  # the return itself is one undoable action
    np.testing.assert_array_equal(_kp(ui_project, fid, pid), latest)


def test_whole_project_scope_lists_every_frame(qtbot, window):
    pid = person_id(window, 2)
    qtbot.mouseClick(window.canvas, Qt.MouseButton.LeftButton, pos=screen_point(window, pid, 9))
    qtbot.keyClick(window.canvas, Qt.Key.Key_O)
    qtbot.keyClick(window.canvas, Qt.Key.Key_Space)
    # The Ledger follows the Canvas to the new frame a moment later.
    qtbot.waitUntil(lambda: window.ledger_model.rowCount() == 0, timeout=WAIT_MS)
    window.ledger.scope.setCurrentIndex(1)
    rows = [window.ledger_model.index(r, 3).data() for r in range(window.ledger_model.rowCount())]
    assert rows[0] == f"mark person 2 (#{pid})'s left wrist occluded"
    assert any(r == "synthetic people" for r in rows), "imports show in the project's ledger"


def test_notes_thread_with_author(qtbot, window, ui_project):
    qtbot.keyClick(window.canvas, Qt.Key.Key_C)
    entry = window.notes.entry
    assert entry.hasFocus()
    qtbot.keyClicks(entry, "left wrist of 2 looks swapped")
    qtbot.keyClick(entry, Qt.Key.Key_Return)
    (note,) = ui_project.notes(window.frame_id)
    assert (note.author, note.text) == ("ana", "left wrist of 2 looks swapped")
    assert entry.text() == ""
    text = window.notes_model.index(0, 0).data()
    assert text.startswith("ana, ") and text.endswith("left wrist of 2 looks swapped")
