"""Ignore regions on the Canvas, drawn, selected, reshaped and deleted with the mouse and keys
like an annotator would, checked in the store; and the hatch in the headless render.

Data: the synthetic project of tests/ui/conftest.py and the synthetic images of
tests/synthetic.py (invented for these tests). Expected corners come from the Canvas's own
screen-to-image mapping (a drag moves a corner by the mouse travel divided by the zoom; common
practice, no source). Point-in-polygon is checked against OpenCV's ``cv2.pointPolygonTest``.
"""

from __future__ import annotations

import cv2
import numpy as np
import pytest
from PySide6.QtCore import QPoint, QPointF, Qt
from PySide6.QtGui import QKeySequence
from PySide6.QtTest import QTest

from app.formats.images import decode_image
from app.model.edits import AddRegion
from app.ui.regions import contains, rectangle
from app.ui.render import render_frame_image
from tests.ui.test_overlay import _to_bgr


def _at(canvas, x, y) -> QPoint:
    return canvas.image_to_screen(x, y).toPoint()


def _image(canvas, point: QPoint) -> tuple[float, float]:
    return canvas.screen_to_image(QPointF(point))


def _drag(qtbot, canvas, start: QPoint, end: QPoint, steps: int = 5) -> None:
    qtbot.mousePress(canvas, Qt.MouseButton.LeftButton, pos=start)
    for k in range(1, steps + 1):
        qtbot.mouseMove(canvas, start + (end - start) * (k / steps))
    qtbot.mouseRelease(canvas, Qt.MouseButton.LeftButton, pos=end)


def _groups(project) -> int:
    return len({e.group_id for e in project.history()})


def _corners(project, fid):
    return [np.asarray(polys[0]).reshape(-1, 2) for _, polys, _ in project.regions(fid)]


@pytest.fixture
def region_mode(qtbot, window):
    qtbot.keyClick(window.canvas, Qt.Key.Key_R)
    assert window.canvas.region_mode and window.strips["regions"].isVisible()
    return window


def test_drag_draws_a_rectangle_in_one_edit(qtbot, region_mode, ui_project):
    window, canvas = region_mode, region_mode.canvas
    fid, groups = window.frame_id, _groups(ui_project)
    start, end = _at(canvas, 20, 30), _at(canvas, 120, 90)
    _drag(qtbot, canvas, start, end)

    (corners,) = _corners(ui_project, fid)
    (x0, y0), (x1, y1) = _image(canvas, start), _image(canvas, end)
    np.testing.assert_allclose(corners, [[x0, y0], [x1, y0], [x1, y1], [x0, y1]], atol=0.01)
    assert _groups(ui_project) == groups + 1, "one edit on release"
    assert canvas.selected_region == ui_project.regions(fid)[0][0], "the new region is selected"
    assert "1 ignore region" in window.status_people.text()


def test_clicked_corners_close_into_a_polygon_with_return_or_a_double_click(
        qtbot, region_mode, ui_project):
    canvas, fid = region_mode.canvas, region_mode.frame_id
    clicks = [_at(canvas, *xy) for xy in ((200, 20), (300, 20), (250, 70))]
    for point in clicks:
        qtbot.mouseClick(canvas, Qt.MouseButton.LeftButton, pos=point)
    assert canvas.drafting and "Drawing a polygon" in region_mode.strips["regions"].text.text()
    qtbot.keyClick(canvas, Qt.Key.Key_Return)
    (triangle,) = _corners(ui_project, fid)
    np.testing.assert_allclose(triangle, [_image(canvas, p) for p in clicks], atol=0.01)

    qtbot.keyClick(canvas, Qt.Key.Key_Escape)  # let go of the new region
    square = [_at(canvas, *xy) for xy in ((10, 150), (40, 150), (40, 180), (10, 180))]
    for point in square[:3]:
        qtbot.mouseClick(canvas, Qt.MouseButton.LeftButton, pos=point)
    qtbot.mouseDClick(canvas, Qt.MouseButton.LeftButton, pos=square[3])
    assert not canvas.drafting
    polygons = _corners(ui_project, fid)
    assert len(polygons) == 2
    np.testing.assert_allclose(polygons[1], [_image(canvas, p) for p in square], atol=0.01)


def test_backspace_takes_back_a_corner_and_esc_cancels_then_leaves(qtbot, region_mode,
                                                                    ui_project):
    canvas, fid = region_mode.canvas, region_mode.frame_id
    for xy in ((10, 10), (60, 10), (60, 50)):
        qtbot.mouseClick(canvas, Qt.MouseButton.LeftButton, pos=_at(canvas, *xy))
    qtbot.keyClick(canvas, Qt.Key.Key_Backspace)
    qtbot.keyClick(canvas, Qt.Key.Key_Return)  # two corners left: nothing to close
    assert ui_project.regions(fid) == [] and canvas.drafting
    qtbot.keyClick(canvas, Qt.Key.Key_Escape)
    assert not canvas.drafting and canvas.region_mode
    qtbot.keyClick(canvas, Qt.Key.Key_Escape)
    assert not canvas.region_mode
    assert not region_mode.actions_by_name["region_mode"].isChecked()
    assert ui_project.regions(fid) == []


def test_select_delete_then_undo_and_redo_by_keys(qtbot, window, ui_project):
    fid = window.frame_id
    rect = rectangle(20, 20, 100, 60)
    rid = ui_project.apply(AddRegion(fid, (rect,))).edit.region_id
    canvas = window.canvas
    assert canvas.regions == [(rid, (rect,))], "the Canvas follows the store"
    qtbot.keyClick(canvas, Qt.Key.Key_R)
    qtbot.mouseClick(canvas, Qt.MouseButton.LeftButton, pos=_at(canvas, 60, 40))
    assert canvas.selected_region == rid
    qtbot.keyClick(canvas, Qt.Key.Key_Delete)
    assert ui_project.regions(fid) == []
    QTest.keySequence(canvas, QKeySequence(QKeySequence.StandardKey.Undo))
    assert [r for r, _, _ in ui_project.regions(fid)] == [rid]
    QTest.keySequence(canvas, QKeySequence(QKeySequence.StandardKey.Redo))
    assert ui_project.regions(fid) == []
    # Del outside region mode still marks joints unlabeled, as before.
    assert ui_project.people(fid)[0].keypoints[5, 2] == 2


def test_drag_a_corner_reshapes_and_a_drag_inside_moves_in_one_edit_each(qtbot, window,
                                                                          ui_project):
    fid, canvas = window.frame_id, window.canvas
    rid = ui_project.apply(AddRegion(fid, (rectangle(20, 20, 100, 60),))).edit.region_id
    qtbot.keyClick(canvas, Qt.Key.Key_R)
    qtbot.mouseClick(canvas, Qt.MouseButton.LeftButton, pos=_at(canvas, 60, 40))
    groups = _groups(ui_project)

    corner = canvas.image_to_screen(100, 60)
    _drag(qtbot, canvas, corner.toPoint(), corner.toPoint() + QPoint(30, 20))
    (now,) = _corners(ui_project, fid)
    moved = np.array([100, 60]) + np.array([30, 20]) / canvas.scale
    offset = np.array([corner.x() - corner.toPoint().x(), corner.y() - corner.toPoint().y()])
    np.testing.assert_allclose(now[2], moved, atol=0.01 + np.abs(offset).max() / canvas.scale)
    np.testing.assert_allclose(now[[0, 1, 3]], [[20, 20], [100, 20], [20, 60]])
    assert _groups(ui_project) == groups + 1

    inside = _at(canvas, 50, 40)
    _drag(qtbot, canvas, inside, inside + QPoint(-12, 16))
    (after,) = _corners(ui_project, fid)
    shift = np.array([-12, 16]) / canvas.scale
    np.testing.assert_allclose(after, now + shift, atol=0.02)
    assert _groups(ui_project) == groups + 2
    assert [r for r, _, _ in ui_project.regions(fid)] == [rid]


def test_clicks_in_region_mode_do_not_select_joints(qtbot, region_mode):
    from tests.ui.conftest import person_id, screen_point

    canvas = region_mode.canvas
    qtbot.mouseClick(canvas, Qt.MouseButton.LeftButton,
                     pos=screen_point(region_mode, person_id(region_mode, 2), 9))
    assert canvas.selected_joints == [] and canvas.drafting


def test_render_shows_the_hatch_inside_and_leaves_the_image_alone_outside(project):
    """Headless render of a synthetic frame with one ignore region: most pixels inside change
    (wash and hatch), none well outside it do."""
    frame = project.frames()[0]
    project.apply(AddRegion(frame.id, (rectangle(40, 30, 200, 150),)))
    rendered = _to_bgr(render_frame_image(project, frame))
    original = decode_image(project.image_path(frame))
    changed = np.abs(rendered.astype(int) - original.astype(int)).max(axis=2) > 6
    assert changed[35:146, 45:196].mean() > 0.6
    outside = np.ones_like(changed)
    outside[26:155, 36:205] = False  # the region and a margin for its edge
    assert not changed[outside].any()


@pytest.mark.parametrize("shape", [
    [(10, 10), (90, 20), (60, 80)],
    [(0, 0), (100, 0), (100, 100), (50, 40), (0, 100)],  # not convex
])
def test_point_in_polygon_agrees_with_opencv(shape):
    """Points on a grid around each synthetic polygon: inside exactly where OpenCV's
    ``pointPolygonTest`` says inside (points on an edge left out: either answer is right)."""
    flat = [v for xy in shape for v in xy]
    contour = np.array(shape, np.float32).reshape(-1, 1, 2)
    for x in np.arange(-5, 106, 3.7):
        for y in np.arange(-5, 106, 3.3):
            side = cv2.pointPolygonTest(contour, (float(x), float(y)), False)
            if side != 0:
                assert contains(flat, x, y) == (side > 0), (x, y)
