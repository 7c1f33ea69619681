"""A project locked by another editor opens read-only: every edit is disabled and the status
bar says why. Data: the synthetic project of tests/ui/conftest.py (invented for these tests).
"""

from __future__ import annotations

import numpy as np
import pytest
from PySide6.QtCore import QPoint, Qt

from app.store import Project
from tests.ui.conftest import person_id, screen_point, show_window


@pytest.fixture
def locked_window(qtbot, ui_project):
    # ui_project holds the lock; a second open of the same folder is read-only.
    second = Project.open(ui_project.folder, author="ben")
    assert second.read_only
    w = show_window(qtbot, second)
    yield w
    w.shutdown()
    second.close()


def test_read_only_state_is_shown_and_edits_are_disabled(qtbot, locked_window, ui_project):
    w = locked_window
    assert w.status_lock.isVisibleTo(w) and w.status_lock.text().startswith("read-only")
    assert "ana" in w.status_lock.text(), "the reason names who holds the project"
    pid = person_id(w, 2)
    qtbot.mouseClick(w.canvas, Qt.MouseButton.LeftButton, pos=screen_point(w, pid, 9))
    assert w.canvas.selected_joints == [(pid, 9)], "looking around still works"
    for name in ("give_1", "mark_unlabeled", "mark_occluded", "new_person", "split_person",
                 "swap_sides", "merge_people", "delete_person", "mark_disputed", "sign_off",
                 "undo", "redo", "import_labels", "run_triage"):
        assert not w.actions_by_name[name].isEnabled(), name
    assert not w.notes.entry.isEnabled()
    assert not w.ledger.back.isEnabled()


def test_read_only_keys_and_drags_change_nothing(qtbot, locked_window, ui_project):
    w = locked_window
    fid = w.frame_id
    before = {p.id: p.keypoints.copy() for p in ui_project.people(fid)}
    n = len(ui_project.history())
    pid = person_id(w, 2)
    start = screen_point(w, pid, 9)
    qtbot.mousePress(w.canvas, Qt.MouseButton.LeftButton, pos=start)
    qtbot.mouseMove(w.canvas, start + QPoint(30, 30))
    qtbot.mouseRelease(w.canvas, Qt.MouseButton.LeftButton, pos=start + QPoint(30, 30))
    for key in (Qt.Key.Key_U, Qt.Key.Key_1, Qt.Key.Key_S, Qt.Key.Key_D, Qt.Key.Key_Right):
        qtbot.keyClick(w.canvas, key)
    after = {p.id: p.keypoints for p in ui_project.people(fid)}
    assert before.keys() == after.keys()
    for k in before:
        np.testing.assert_array_equal(before[k], after[k])
    assert len(ui_project.history()) == n
    assert ui_project.frame(fid).state.value == "untouched"
