"""The Canvas driven with the mouse and keys like an annotator would, checked in the store.

Data: the synthetic project of tests/ui/conftest.py (invented for these tests). Expected
positions come from the Canvas's own image-to-screen mapping and plain arithmetic: a drag moves
a joint by the mouse travel divided by the zoom (common practice, no source).
"""

from __future__ import annotations

import numpy as np
from PySide6.QtCore import QPoint, QPointF, Qt

from tests.ui.conftest import person_id, screen_point


def _joint(project, frame_id, pid, j):
    return next(p for p in project.people(frame_id) if p.id == pid).keypoints[j]


def test_click_on_a_joint_selects_it(qtbot, window):
    pid = person_id(window, 2)
    qtbot.mouseClick(window.canvas, Qt.MouseButton.LeftButton, pos=screen_point(window, pid, 9))
    assert window.canvas.selected_joints == [(pid, 9)]
    assert window.canvas.selected_person == pid
    assert "left wrist" in window.owners.selection.text()


def test_click_near_but_outside_the_hit_radius_selects_nothing(qtbot, window):
    pid = person_id(window, 1)
    far = screen_point(window, pid, 15) + QPoint(0, 40)  # below the feet, on the floor
    qtbot.mouseClick(window.canvas, Qt.MouseButton.LeftButton, pos=far)
    assert window.canvas.selected_joints == []


def test_drag_moves_the_joint_in_one_edit(qtbot, window, ui_project):
    canvas = window.canvas
    pid = person_id(window, 3)
    before = _joint(ui_project, window.frame_id, pid, 10).copy()
    groups_before = len({e.group_id for e in ui_project.history()})
    start = screen_point(window, pid, 10)
    end = start + QPoint(37, -21)
    qtbot.mousePress(canvas, Qt.MouseButton.LeftButton, pos=start)
    for k in range(1, 6):  # a real drag passes through intermediate points
        qtbot.mouseMove(canvas, start + (end - start) * (k / 5))
    qtbot.mouseRelease(canvas, Qt.MouseButton.LeftButton, pos=end)

    after = _joint(ui_project, window.frame_id, pid, 10)
    expected = before[:2] + np.array([end.x() - start.x(), end.y() - start.y()]) / canvas.scale
    np.testing.assert_allclose(after[:2], expected, atol=0.01)
    assert after[2] == 2
    groups_after = len({e.group_id for e in ui_project.history()})
    assert groups_after == groups_before + 1  # one edit on release, not one per mouse move
    assert ui_project.frame(window.frame_id).state.value == "corrected"


def test_a_press_without_movement_moves_nothing(qtbot, window, ui_project):
    pid = person_id(window, 2)
    n = len(ui_project.history())
    qtbot.mouseClick(window.canvas, Qt.MouseButton.LeftButton, pos=screen_point(window, pid, 5))
    assert len(ui_project.history()) == n


def test_arrow_keys_nudge_one_pixel_and_shift_ten(qtbot, window, ui_project):
    pid = person_id(window, 2)
    qtbot.mouseClick(window.canvas, Qt.MouseButton.LeftButton, pos=screen_point(window, pid, 0))
    x0, y0, _ = _joint(ui_project, window.frame_id, pid, 0)
    qtbot.keyClick(window.canvas, Qt.Key.Key_Right)
    qtbot.keyClick(window.canvas, Qt.Key.Key_Down, Qt.KeyboardModifier.ShiftModifier)
    x1, y1, _ = _joint(ui_project, window.frame_id, pid, 0)
    assert (x1 - x0, y1 - y0) == (1.0, 10.0)


def test_click_on_a_limb_selects_the_person(qtbot, window):
    pid = person_id(window, 3)
    a, b = screen_point(window, pid, 13), screen_point(window, pid, 15)  # right knee to ankle
    middle = (a + b) / 2
    qtbot.mouseClick(window.canvas, Qt.MouseButton.LeftButton, pos=middle)
    assert window.canvas.selected_person == pid
    assert window.canvas.selected_joints == []


def test_tab_walks_the_joints_of_the_selected_person(qtbot, window):
    pid = person_id(window, 1)
    qtbot.mouseClick(window.canvas, Qt.MouseButton.LeftButton, pos=screen_point(window, pid, 5))
    qtbot.keyClick(window.canvas, Qt.Key.Key_Tab)
    assert window.canvas.selected_joint == (pid, 6)
    qtbot.keyClick(window.canvas, Qt.Key.Key_Backtab, Qt.KeyboardModifier.ShiftModifier)
    qtbot.keyClick(window.canvas, Qt.Key.Key_Backtab, Qt.KeyboardModifier.ShiftModifier)
    assert window.canvas.selected_joint == (pid, 4)


def test_hidden_unlabeled_joint_cannot_be_clicked_until_shown(qtbot, window):
    canvas = window.canvas
    pid = person_id(window, 1)  # person A: left knee (13) unlabeled
    pos = screen_point(window, pid, 13)
    assert canvas.joint_at(QPointF(pos)) != (pid, 13)
    qtbot.keyClick(canvas, Qt.Key.Key_H)
    assert canvas.show_unlabeled
    assert canvas.joint_at(QPointF(pos)) == (pid, 13)


def test_zoom_keeps_the_point_under_the_cursor(qtbot, window):
    canvas = window.canvas
    anchor = QPointF(300.0, 200.0)
    before = canvas.screen_to_image(anchor)
    canvas.zoom_at(2.5, anchor)
    np.testing.assert_allclose(canvas.screen_to_image(anchor), before, atol=1e-9)
    qtbot.keyClick(canvas, Qt.Key.Key_0, Qt.KeyboardModifier.ControlModifier)  # 1:1
    assert canvas.scale == 1.0
    qtbot.keyClick(canvas, Qt.Key.Key_0)  # fit: the whole image inside the Canvas
    top_left = canvas.image_to_screen(-0.5, -0.5)
    bottom_right = canvas.image_to_screen(319.5, 239.5)
    assert canvas.rect().contains(top_left.toPoint())
    assert canvas.rect().contains(bottom_right.toPoint() - QPoint(1, 1))


def test_wheel_zooms_in(qtbot, window):
    from PySide6.QtCore import QPoint as P
    from PySide6.QtGui import QWheelEvent
    from PySide6.QtWidgets import QApplication

    canvas = window.canvas
    s = canvas.scale
    pos = QPointF(250, 180)
    event = QWheelEvent(pos, canvas.mapToGlobal(pos), P(0, 0), P(0, 120),
                        Qt.MouseButton.NoButton, Qt.KeyboardModifier.NoModifier,
                        Qt.ScrollPhase.NoScrollPhase, False)
    QApplication.sendEvent(canvas, event)
    assert canvas.scale == s * 1.2


def test_place_puts_the_selected_joint_at_the_pointer(qtbot, window, ui_project):
    canvas = window.canvas
    pid = person_id(window, 1)
    qtbot.keyClick(canvas, Qt.Key.Key_H)
    qtbot.mouseClick(canvas, Qt.MouseButton.LeftButton, pos=screen_point(window, pid, 13))
    target = screen_point(window, pid, 13) + QPoint(12, 4)
    qtbot.mouseMove(canvas, target)
    qtbot.keyClick(canvas, Qt.Key.Key_P)
    x, y, v = _joint(ui_project, window.frame_id, pid, 13)
    ex, ey = canvas.screen_to_image(QPointF(target))
    assert (round(x, 2), round(y, 2), v) == (round(ex, 2), round(ey, 2), 2)


def test_the_remembered_overlay_layer_shows_what_painting_anew_shows(qtbot, window):
    """A repaint that copies the overlay layer gives the picture a repaint that paints every
    person again gives (to 1 of 255 per channel: premultiplied rounding), and a selection
    or a moved joint is painted, not the remembered layer (synthetic project)."""
    canvas = window.canvas
    qtbot.waitUntil(lambda: canvas.has_image, timeout=5000)

    def grab(fresh):
        if fresh:
            canvas._overlay._key = None
        return canvas.grab().toImage()

    def pixels(image):
        image = image.convertToFormat(image.Format.Format_RGB32)
        rows = np.frombuffer(image.constBits(), np.uint8).reshape(image.height(), -1)
        return rows[:, : image.width() * 4].copy()  # a copy: the image goes with this call

    copied, painted = pixels(grab(False)), pixels(grab(True))
    assert np.abs(copied.astype(int) - painted).max() <= 1
    pid = person_id(window, 2)
    qtbot.mouseClick(canvas, Qt.MouseButton.LeftButton, pos=screen_point(window, pid, 9))
    selected = pixels(grab(False))
    assert np.abs(selected.astype(int) - pixels(grab(True))).max() <= 1
    assert np.abs(selected.astype(int) - painted).max() > 50  # the selection ring shows


def test_a_drag_repaints_only_the_dragged_person_and_shows_what_a_whole_paint_shows(
        qtbot, window):
    """While a joint is dragged each move repaints a rectangle around the dragged person's
    old and new places only; the Canvas then shows, pixel for pixel, what painting its whole
    overlay again shows (the whole paint is the reference)."""
    canvas = window.canvas
    pid = person_id(window, 3)
    start = screen_point(window, pid, 10)
    layer = canvas._overlay
    parts = []
    paint_part = layer._paint_part
    layer._paint_part = lambda *a: parts.append(paint_part(*a)) or parts[-1]
    qtbot.mousePress(canvas, Qt.MouseButton.LeftButton, pos=start)
    for k in range(1, 5):
        qtbot.mouseMove(canvas, start + QPoint(9 * k, -5 * k))
        dirty = canvas.drag_dirty
        assert dirty is not None and dirty.width() < canvas.width() \
            and dirty.height() < canvas.height(), "a rectangle, not the whole Canvas"
        canvas.repaint(dirty)  # the move's own paint, now rather than when Qt gets to it
        canvas.repaint(dirty)
        shown = canvas.grab().toImage()
        canvas._overlay._key = None  # forget the layer: everything painted again
        whole = canvas.grab().toImage()
        assert shown == whole, f"move {k}: the partial paint differs from the whole one"
    assert len(parts) >= 3 and all(p is not None for p in parts), "painted in part each time"
    assert layer._under is not None, "what lies under the dragged person kept in a layer"
    qtbot.mouseRelease(canvas, Qt.MouseButton.LeftButton, pos=start + QPoint(36, -20))


def test_other_tags_stay_put_while_a_joint_is_dragged(qtbot, window):
    """A drag places only the dragged person's tag again; everybody else's stays where it
    was when the drag began (synthetic project)."""
    canvas = window.canvas
    pid = person_id(window, 3)
    start = screen_point(window, pid, 0)
    qtbot.mousePress(canvas, Qt.MouseButton.LeftButton, pos=start)
    canvas.repaint()
    before = dict(canvas._layout.tags)
    for k in range(1, 4):
        qtbot.mouseMove(canvas, start + QPoint(-12 * k, 10 * k))
        canvas.repaint()
        assert {q: r for q, r in canvas._layout.tags.items() if q != pid} == \
            {q: r for q, r in before.items() if q != pid}
    assert canvas._drag.held_tags is not None
    qtbot.mouseRelease(canvas, Qt.MouseButton.LeftButton, pos=start + QPoint(-36, 30))
