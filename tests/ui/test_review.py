"""Review with a colleague in the app: the reviewer's side (a packet opened in the same window,
decisions by key, the packet returned) and settling a disputed frame joint by joint on our side
(marks, the reviewer's version on the Canvas, take theirs, keep ours, undo, settle).

Data: the synthetic project of tests/ui/conftest.py (invented for these tests); the reviewer
"bea" is an invented name. Disputes are built through the real back end (export, review,
return, merge: app/review). The merge rules are our own (three ways per joint, README
"Commands" and app/review/merge.py); no outside source.
"""

from __future__ import annotations

import numpy as np
import pytest
from PySide6.QtCore import Qt
from PySide6.QtGui import QImage, QKeySequence, QPainter
from PySide6.QtTest import QTest
from PySide6.QtWidgets import QDialog, QFileDialog, QMessageBox

from app.cli import main
from app.model.edits import DeletePerson, MoveJoint
from app.model.labels import FrameState
from app.review.merge import merge_packet
from app.review.packet import export_packet, read_packet
from app.review.review import decisions, open_packet, return_packet, review_folder
from app.review.settle import differences
from app.ui.blurred import paint_blurred
from app.ui.keys import KEYS, sequences
from tests.ui.conftest import WAIT_MS, person_id, show_window

#: The reviewer's and our moves of person B's wrists (joints 9 and 10), image pixels.
THEIRS = {9: (6.0, -4.0), 10: (-5.0, 7.0)}
OURS = {9: (-4.0, 5.0), 10: (3.0, -6.0)}


def _kp(project, fid, pid):
    return next(p for p in project.people(fid) if p.id == pid).keypoints.copy()


def _press(widget, name):
    """Press an action's first key, as the key table gives it."""
    QTest.keySequence(widget, sequences(next(k for k in KEYS if k.name == name))[0])


def _close_boxes(window):
    """Close the report boxes, as the annotator does, and be back on the Canvas."""
    for box in window.findChildren(QMessageBox):
        box.close()
    window.activateWindow()
    window.canvas.setFocus()


@pytest.fixture
def dispute(qtbot, window, ui_project, tmp_path, monkeypatch):
    """Frame 2 sent to bea, person B's wrists moved by her and by us, her return merged from
    the Project menu: the frame is disputed on joints 9 and 10 of person B."""
    fid = window.frame_id
    b = person_id(window, 2)
    start = _kp(ui_project, fid, b)
    packet = tmp_path / "to-bea.zip"
    export_packet(ui_project, packet, [ui_project.frame(fid)], reviewer="bea", images="none")
    with open_packet(packet, reviewer="bea") as reviewed:
        for j, (dx, dy) in THEIRS.items():
            reviewed.apply(MoveJoint(fid, b, j, start[j, 0] + dx, start[j, 1] + dy))
        returned = return_packet(reviewed)
    for j, (dx, dy) in OURS.items():
        ui_project.apply(MoveJoint(fid, b, j, start[j, 0] + dx, start[j, 1] + dy))

    monkeypatch.setattr(QFileDialog, "getOpenFileName", lambda *a, **k: (str(returned), ""))
    _press(window.canvas, "merge_packet")
    qtbot.waitUntil(lambda: "merged the review by bea" in window.status_log, timeout=WAIT_MS)
    _close_boxes(window)
    assert window.dispute is not None
    assert ui_project.frame(fid).state is FrameState.DISPUTED
    return window, fid, b, start


def test_settle_a_disputed_frame_joint_by_joint(qtbot, dispute, ui_project):
    window, fid, b, start = dispute
    canvas = window.canvas
    theirs = {j: start[j, :2] + THEIRS[j] for j in THEIRS}
    ours = {j: start[j, :2] + OURS[j] for j in OURS}
    # Both joints are marked, each pointing at where bea has it; the first is selected.
    marks = canvas.marks
    assert set(marks) == {(b, 9), (b, 10)}
    np.testing.assert_allclose(marks[(b, 9)], theirs[9])
    assert window.strips["dispute"].isVisible()
    assert "bea" in window.strips["dispute"].text.text()
    # The strip's line is short (its buttons carry the keys); the whole sentence is its tooltip.
    assert "A takes the reviewer's" in window.strips["dispute"].text.toolTip()
    assert canvas.selected_joint == (b, 9)
    assert "differs" in window.owners.selection.text()

    # B shows bea's version in place of ours, and back.
    qtbot.keyClick(canvas, Qt.Key.Key_B)
    assert canvas.showing_theirs
    np.testing.assert_allclose(canvas.person(b).keypoints[9, :2], theirs[9])
    qtbot.keyClick(canvas, Qt.Key.Key_B)
    assert not canvas.showing_theirs

    # Take theirs on the selected joint: one edit in the store.
    history = len(ui_project.history())
    qtbot.keyClick(canvas, Qt.Key.Key_A)
    now = _kp(ui_project, fid, b)
    np.testing.assert_allclose(now[9, :2], theirs[9])
    np.testing.assert_allclose(now[10, :2], ours[10])
    assert len(ui_project.history()) == history + 1
    assert canvas.selected_joint == (b, 10), "on to the next difference"

    # Keep ours on the other joint: labels unchanged, no difference left.
    qtbot.keyClick(canvas, Qt.Key.Key_K)
    np.testing.assert_allclose(_kp(ui_project, fid, b)[10, :2], ours[10])
    assert differences(ui_project, fid) == [] and window.dispute is None
    assert "Shift+Return" in window.strips["dispute"].text.text()

    # Undo by key takes back the keep, then the take: each was one step.
    QTest.keySequence(canvas, QKeySequence(QKeySequence.StandardKey.Undo))
    assert window.dispute is not None and window.dispute.joints == ((b, 10),)
    np.testing.assert_allclose(_kp(ui_project, fid, b)[9, :2], theirs[9])
    QTest.keySequence(canvas, QKeySequence(QKeySequence.StandardKey.Undo))
    np.testing.assert_allclose(_kp(ui_project, fid, b)[9, :2], ours[9])
    assert set(window.dispute.joints) == {(b, 9), (b, 10)}
    assert set(canvas.marks) == {(b, 9), (b, 10)}

    # Settle: the frame is corrected and the marks go; undo brings the dispute back.
    qtbot.keyClick(canvas, Qt.Key.Key_Return, Qt.KeyboardModifier.ShiftModifier)
    assert ui_project.frame(fid).state is FrameState.CORRECTED
    assert canvas.marks == {} and not window.strips["dispute"].isVisible()
    QTest.keySequence(canvas, QKeySequence(QKeySequence.StandardKey.Undo))
    assert ui_project.frame(fid).state is FrameState.DISPUTED
    assert set(canvas.marks) == {(b, 9), (b, 10)}


def test_take_a_whole_person_and_the_whole_frame_are_one_undo_step_each(qtbot, dispute,
                                                                        ui_project):
    window, fid, b, start = dispute
    canvas = window.canvas
    theirs = np.array([start[j, :2] + THEIRS[j] for j in (9, 10)])
    ours = np.array([start[j, :2] + OURS[j] for j in (9, 10)])
    qtbot.keyClick(canvas, Qt.Key.Key_A, Qt.KeyboardModifier.ShiftModifier)
    np.testing.assert_allclose(_kp(ui_project, fid, b)[[9, 10], :2], theirs)
    QTest.keySequence(canvas, QKeySequence(QKeySequence.StandardKey.Undo))
    np.testing.assert_allclose(_kp(ui_project, fid, b)[[9, 10], :2], ours)
    qtbot.keyClick(canvas, Qt.Key.Key_A, Qt.KeyboardModifier.ControlModifier
                   | Qt.KeyboardModifier.ShiftModifier)
    np.testing.assert_allclose(_kp(ui_project, fid, b)[[9, 10], :2], theirs)
    assert window.dispute is None


def test_a_person_the_reviewer_deleted_is_taken_whole(qtbot, window, ui_project, tmp_path):
    """bea deletes person C whom we edited: joint by joint is refused, Shift+A takes the
    deletion in one step, Ctrl+Z brings the person back."""
    fid = window.frame_id
    c = person_id(window, 3)
    packet = tmp_path / "to-bea.zip"
    export_packet(ui_project, packet, [ui_project.frame(fid)], reviewer="bea", images="none")
    with open_packet(packet, reviewer="bea") as reviewed:
        reviewed.apply(DeletePerson(fid, c))
        returned = return_packet(reviewed)
    ui_project.apply(MoveJoint(fid, c, 0, 250.0, 70.0))
    merge_packet(ui_project, returned)  # the window follows the store as it changes
    canvas = window.canvas
    assert window.dispute is not None and {p for p, _ in canvas.marks} == {c}
    assert all(xy is None for xy in canvas.marks.values()), "nothing on their side"
    canvas.select_joint(c, 0)
    assert "deleted" in window.owners.selection.text()
    qtbot.keyClick(canvas, Qt.Key.Key_A)
    assert c in {p.id for p in ui_project.people(fid)}
    assert "take the whole person" in window.status_log.last
    qtbot.keyClick(canvas, Qt.Key.Key_A, Qt.KeyboardModifier.ShiftModifier)
    assert c not in {p.id for p in ui_project.people(fid)} and window.dispute is None
    QTest.keySequence(canvas, QKeySequence(QKeySequence.StandardKey.Undo))
    assert c in {p.id for p in ui_project.people(fid)}


def test_the_reviewer_version_is_not_edited(qtbot, dispute, ui_project):
    window, fid, b, _ = dispute
    before = _kp(ui_project, fid, b)
    qtbot.keyClick(window.canvas, Qt.Key.Key_B)
    qtbot.keyClick(window.canvas, Qt.Key.Key_U)  # mark unlabeled: refused while theirs shows
    np.testing.assert_array_equal(_kp(ui_project, fid, b), before)
    assert "B goes back to mine" in window.status_log.last


def test_send_frames_for_review_from_the_project_menu(qtbot, window, ui_project, tmp_path):
    out = tmp_path / "for-bea.zip"
    _press(window.canvas, "export_packet")
    dialog = window.findChild(QDialog, "PacketDialog")
    assert dialog is not None and dialog.isVisible()
    dialog.frames.setCurrentIndex(dialog.frames.findData("this"))
    dialog.images.setCurrentIndex(dialog.images.findData("none"))
    dialog.reviewer.setText("bea")
    dialog.out.set_text(str(out))
    dialog.accept()
    qtbot.waitUntil(out.exists, timeout=WAIT_MS)
    qtbot.waitUntil(lambda: "wrote" in window.status_log, timeout=WAIT_MS)
    packet = read_packet(out)
    assert [f.id for f in packet.frames] == [window.frame_id] and packet.reviewer == "bea"
    _close_boxes(window)


def test_the_send_form_warns_of_frames_without_maps_and_sends_blurred_only_if_accepted(
        qtbot, window, ui_project, tmp_path):
    """Issue 17: without maps the labels are all that places a blur (with the face
    detector); the form shows the command line's lines and needs "Send anyway"."""
    out = tmp_path / "blurred.zip"
    _press(window.canvas, "export_packet")
    dialog = window.findChild(QDialog, "PacketDialog")
    dialog.frames.setCurrentIndex(dialog.frames.findData("this"))
    dialog.images.setCurrentIndex(dialog.images.findData("blurred-heads"))
    line = f"frame {window.frame_id}: people the labels miss may be unblurred: no maps"
    assert dialog.risk_lines == [line] and line in dialog.warning.text()
    assert dialog.warning.isVisible() and dialog.accept_risk.isVisible()
    dialog.out.set_text(str(out))
    dialog.accept()
    assert dialog.isVisible() and "may show people unblurred" in dialog.problem.text()
    dialog.images.setCurrentIndex(dialog.images.findData("none"))
    assert not dialog.warning.isVisible()
    dialog.images.setCurrentIndex(dialog.images.findData("blurred-heads"))
    dialog.accept_risk.setChecked(True)
    dialog.accept()
    qtbot.waitUntil(out.exists, timeout=WAIT_MS)
    qtbot.waitUntil(lambda: "wrote" in window.status_log, timeout=WAIT_MS)
    frame, = read_packet(out).manifest["frames"]
    assert frame["blur"]["risk"] == line.split(": ", 1)[1]
    _close_boxes(window)


def test_review_mode_opens_a_zip_decides_and_returns_it(qtbot, ui_project, tmp_path):
    packet = tmp_path / "rehearsal.zip"
    export_packet(ui_project, packet, [ui_project.frame(2), ui_project.frame(3)],
                  images="full", reviewer="bea")
    shot = tmp_path / "review.png"
    assert main(["open", str(packet), "--author", "bea", "--screenshot", str(shot)]) == 0
    assert shot.exists() and (review_folder(packet) / "project.db").exists()

    project = open_packet(packet, reviewer="bea")
    window = show_window(qtbot, project, owns_project=True)
    try:
        canvas, fid = window.canvas, window.frame_id
        assert window.review_mode and window.strips["review"].isVisible()
        assert "&Review" in [a.text() for a in window.menuBar().actions()]

        qtbot.keyClick(canvas, Qt.Key.Key_1, Qt.KeyboardModifier.ControlModifier)
        assert decisions(project)[fid].decision == "looks-right"
        assert decisions(project)[fid].author == "bea"
        row = window.worklist_model.row_of(fid)
        assert "looks right" in window.worklist_model.index(row, 2).data()
        qtbot.keyClick(canvas, Qt.Key.Key_1, Qt.KeyboardModifier.ControlModifier)
        assert fid not in decisions(project), "the same key again withdraws it"
        qtbot.keyClick(canvas, Qt.Key.Key_2, Qt.KeyboardModifier.ControlModifier)
        assert decisions(project)[fid].decision == "query"
        assert "queried" in window.status_state.text()
        assert window.actions_by_name["decide_needs_change"].isChecked()

        _press(canvas, "return_packet")
        returned = tmp_path / "rehearsal-returned.zip"
        qtbot.waitUntil(returned.exists, timeout=WAIT_MS)
        qtbot.waitUntil(lambda: str(returned) in window.status_log, timeout=WAIT_MS)
        back = read_packet(returned, returned=True)
        assert back.returned.reviewer == "bea"
        assert back.returned.decisions[fid].decision == "query"
        _close_boxes(window)
    finally:
        window.shutdown()


def test_the_reviewer_sees_where_the_packet_blurred_and_can_hide_it(qtbot, ui_project,
                                                                     tmp_path):
    """Issue 17: the regions a blurred packet records are outlined on the reviewer's Canvas,
    each captioned with what placed it; L hides and shows them (our own drawing)."""
    packet = tmp_path / "blurred.zip"
    export_packet(ui_project, packet, [ui_project.frame(2)], images="blurred-heads",
                  accept_risk=True, reviewer="bea")
    recorded = read_packet(packet).manifest["frames"][0]["blur"]["regions"]
    project = open_packet(packet, reviewer="bea")
    window = show_window(qtbot, project, owns_project=True)
    try:
        canvas = window.canvas
        assert canvas.blurred is not None and canvas.show_blurred
        assert len(canvas.blurred.regions) == len(recorded) >= 1
        assert [list(r.sources) for r in canvas.blurred.regions] == \
            [r["sources"] for r in recorded]
        # The painter outlines each region where the Canvas maps it (an image of its own:
        # the Canvas's picture changes when the whole image replaces the reduced one).
        sheet = QImage(canvas.size(), QImage.Format.Format_ARGB32)
        sheet.fill(0)
        painter = QPainter(sheet)
        paint_blurred(painter, canvas.blurred, canvas.image_to_screen, canvas.font())
        painter.end()
        cx, cy, ax, _ay = canvas.blurred.regions[0].ellipses[0]
        edge = canvas.image_to_screen(cx - ax, cy)
        near = [sheet.pixelColor(int(edge.x()) + dx, int(edge.y()) + dy).alpha()
                for dx in range(-3, 4) for dy in range(-6, 7)]
        assert max(near) > 0, "an outline on the region's edge"
        inside = canvas.image_to_screen(cx, cy)
        assert sheet.pixelColor(int(inside.x()), int(inside.y())).alpha() == 0, "no fill"
        _press(canvas, "show_blurred")
        assert not canvas.show_blurred
        assert not window.actions_by_name["show_blurred"].isChecked()
        _press(canvas, "show_blurred")
        assert canvas.show_blurred and "blurred in the packet: " in window.status_log
    finally:
        window.shutdown()
