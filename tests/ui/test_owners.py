"""Owners: giving joints to people, visibility, new person, merge; each one undo step. Driven
through the real widgets and keys; checked in the store. What the intents do (several joints in
one step, split, a refused merge, swap, delete) is tested on the session without a window, in
tests/session/test_editing.py; these keep the keys and clicks that reach them.

Data: the synthetic project of tests/ui/conftest.py (invented for these tests). The expected
results follow the COCO keypoint visibility convention (v = 2 visible, 1 occluded, 0 unlabeled;
Lin et al., "Microsoft COCO: Common Objects in Context", ECCV 2014, and the COCO keypoints
format description) and our own edit rules in app/model/edits.py.
"""

from __future__ import annotations

import numpy as np
from PySide6.QtCore import Qt

from tests.ui.conftest import person_id, screen_point


def _people(project, frame_id):
    return {p.id: p for p in project.people(frame_id)}


def _groups(project):
    return len({e.group_id for e in project.history()})


def _select(qtbot, window, tag, joint, add=False):
    pid = person_id(window, tag)
    mods = Qt.KeyboardModifier.ControlModifier if add else Qt.KeyboardModifier.NoModifier
    qtbot.mouseClick(window.canvas, Qt.MouseButton.LeftButton, mods,
                     pos=screen_point(window, pid, joint))
    return pid


def test_give_a_joint_by_clicking_an_owner_listed_beside_it(qtbot, window, ui_project):
    giver = _select(qtbot, window, 1, 9)  # person A's left wrist
    window.canvas.repaint()
    rows = window.canvas.owner_rows
    assert rows, "the ranked owners are listed beside the joint on the Canvas"
    from app.ui.callouts import OWNER_WIDTH

    assert all(r.width() <= OWNER_WIDTH for r, _ in rows), "a compact list"
    rect, taker = rows[0]
    assert taker == window.owner_ranking.best.person_id, "the best candidate comes first"
    before = _people(ui_project, window.frame_id)
    n = _groups(ui_project)
    qtbot.mouseClick(window.canvas, Qt.MouseButton.LeftButton, pos=rect.center().toPoint())

    after = _people(ui_project, window.frame_id)
    np.testing.assert_array_equal(after[taker].keypoints[9, :2], before[giver].keypoints[9, :2])
    # The receiver had its own left wrist: the two are swapped, so no label is lost, and the
    # status bar says so.
    np.testing.assert_array_equal(after[giver].keypoints[9, :2], before[taker].keypoints[9, :2])
    assert "swapped:" in window.status_log
    assert _groups(ui_project) == n + 1
    assert window.canvas.selected_joint == (taker, 9), "the selection follows the joint"


def test_give_a_joint_by_the_number_key(qtbot, window, ui_project):
    giver = _select(qtbot, window, 3, 10)
    before = _people(ui_project, window.frame_id)[giver].keypoints[10].copy()
    qtbot.keyClick(window.canvas, Qt.Key.Key_1)
    taker = person_id(window, 1)
    np.testing.assert_array_equal(_people(ui_project, window.frame_id)[taker].keypoints[10],
                                  before)


def test_candidates_are_the_other_people(qtbot, window):
    giver = _select(qtbot, window, 2, 7)
    ranking = window.owner_ranking
    ids = [c.person_id for c in ranking.candidates]
    assert sorted(ids) == sorted(p.id for p in window.canvas.people if p.id != giver)
    assert ranking.owner.person_id == giver and ranking.owner.is_owner
    assert ranking.verdict, "the verdict says who fits better, or that nobody does"


def test_mark_unlabeled_occluded_and_visible_by_keys(qtbot, window, ui_project):
    pid = _select(qtbot, window, 2, 14)
    fid = window.frame_id
    qtbot.keyClick(window.canvas, Qt.Key.Key_U)
    kp = _people(ui_project, fid)[pid].keypoints[14]
    assert kp[2] == 0 and np.isfinite(kp[:2]).all(), "unlabeled keeps the position in store"
    assert window.canvas.joint_at(window.canvas.image_to_screen(*kp[:2])) != (pid, 14)
    qtbot.keyClick(window.canvas, Qt.Key.Key_O)
    assert _people(ui_project, fid)[pid].keypoints[14, 2] == 1
    qtbot.keyClick(window.canvas, Qt.Key.Key_V)
    assert _people(ui_project, fid)[pid].keypoints[14, 2] == 2


def test_merge_by_key_then_click(qtbot, window, ui_project):
    fid = window.frame_id
    keep = _select(qtbot, window, 2, 0)
    # Make person 2 a half body first, so the merge has free joints to take.
    for j in range(11, 17):
        window.canvas.select_joint(keep, j)
        qtbot.keyClick(window.canvas, Qt.Key.Key_U)
    other = person_id(window, 3)
    for j in range(0, 11):
        window.canvas.select_joint(other, j)
        qtbot.keyClick(window.canvas, Qt.Key.Key_U)
    legs = _people(ui_project, fid)[other].keypoints[11:, :2].copy()

    window.canvas.select_person(keep)
    qtbot.keyClick(window.canvas, Qt.Key.Key_M)
    assert window.canvas.pick_mode == "merge"
    qtbot.mouseClick(window.canvas, Qt.MouseButton.LeftButton, pos=screen_point(window, other, 13))

    after = _people(ui_project, fid)
    assert other not in after
    np.testing.assert_array_equal(after[keep].keypoints[11:, :2], legs)
    assert (after[keep].keypoints[:, 2] > 0).all()
    assert window.canvas.selected_person == keep


def test_new_empty_person_then_place_a_joint(qtbot, window, ui_project):
    fid = window.frame_id
    window.canvas.clear_selection()
    before = set(_people(ui_project, fid))
    qtbot.keyClick(window.canvas, Qt.Key.Key_N)
    (new,) = set(_people(ui_project, fid)) - before
    assert window.canvas.selected_person == new
    qtbot.keyClick(window.canvas, Qt.Key.Key_Tab)  # first joint: the nose
    assert window.canvas.selected_joint == (new, 0)
    qtbot.mouseMove(window.canvas, window.canvas.image_to_screen(30, 40).toPoint())
    qtbot.keyClick(window.canvas, Qt.Key.Key_P)
    x, y, v = _people(ui_project, fid)[new].keypoints[0]
    assert v == 2 and abs(x - 30) <= 0.5 / window.canvas.scale + 0.01 \
        and abs(y - 40) <= 0.5 / window.canvas.scale + 0.01


def test_people_table_lists_tags_and_counts(qtbot, window):
    model = window.owners.people_model
    assert model.rowCount() == 3
    assert model.index(0, 0).data() == f"1 (#{person_id(window, 1)})"
    assert model.index(0, 1).data() == "16/17"  # person A: the knee is unlabelled
    assert model.index(0, 2).data() == "1"  # one occluded joint
    assert model.index(1, 3).data() == "2"  # triage flagged two joints of person 2


def test_give_to_the_top_suggestion_with_g(qtbot, window, ui_project):
    giver = _select(qtbot, window, 2, 9)
    best = window.owner_ranking.best.person_id
    moved = _people(ui_project, window.frame_id)[giver].keypoints[9].copy()
    qtbot.keyClick(window.canvas, Qt.Key.Key_G)
    np.testing.assert_array_equal(_people(ui_project, window.frame_id)[best].keypoints[9], moved)


def test_two_digit_tags(qtbot, window, ui_project):
    """With ten or more people a first digit waits briefly for a second one. The wait is not
    timed here: both digits arrive before the event loop runs again, and the end of the wait
    is the wait timer firing, driven by hand."""
    from app.model.edits import NewPerson

    fid = window.frame_id
    for k in range(9):  # twelve people in all
        kp = np.full((17, 3), 2.0)
        kp[:, 0] = 10.0 + 3 * k
        kp[:, 1] = 5.0 + np.arange(17)
        ui_project.apply(NewPerson(fid, None, tuple(map(tuple, kp))))
    assert len(window.canvas.people) == 12
    giver = _select(qtbot, window, 2, 10)
    moved = _people(ui_project, fid)[giver].keypoints[10].copy()
    qtbot.keyClick(window.canvas, Qt.Key.Key_1)
    qtbot.keyClick(window.canvas, Qt.Key.Key_2)
    twelfth = person_id(window, 12)
    np.testing.assert_array_equal(_people(ui_project, fid)[twelfth].keypoints[10], moved)
    # A lone "1" waits for a second digit, and is given to person 1 once the wait is over.
    qtbot.keyClick(window.canvas, Qt.Key.Key_1)
    first = person_id(window, 1)
    assert window._typed_timer.isActive()
    assert not np.array_equal(_people(ui_project, fid)[first].keypoints[10], moved)
    window._typed_timer.timeout.emit()
    np.testing.assert_array_equal(_people(ui_project, fid)[first].keypoints[10], moved)


def test_hovering_a_joint_names_it(qtbot, window):
    pid = person_id(window, 2)
    qtbot.mouseMove(window.canvas, screen_point(window, pid, 9))
    assert window.canvas.toolTip().startswith(f"person 2's left wrist (#{pid})")
