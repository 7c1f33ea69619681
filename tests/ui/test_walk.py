"""The walk end to end in the window: W goes to a finding, selects its joints and says it on
the Canvas beside them; Y accepts its fix as one undo step and the walk moves on; with triage
reasons alone the walk stops at them.

Data: the synthetic project of tests/ui/conftest.py and a finding invented here. The visibility
values follow the COCO keypoint convention (v = 1 occluded, 2 visible; Lin et al., ECCV 2014);
one action, one undo step is the command pattern's rule (common practice, no source).
"""

from __future__ import annotations

from dataclasses import replace

from PySide6.QtCore import Qt

from app.analysis.triage.findings import Finding, Fix, FixPreview, labels_digest
from app.model.edits import SetVisibility
from tests.ui.conftest import WAIT_MS, person_id


def _store_finding(project, fid, pid):
    fix = Fix("mark person 2's left wrist occluded", (SetVisibility(fid, pid, 9, 1),),
              FixPreview(occluded=((pid, 9),)))
    finding = Finding("Ftest", fid, "hidden", pid, 2, (9,), ("left wrist",),
                      "person 2's left wrist is hidden behind person 3", (), 1.0, 0.9, fix,
                      (pid,), "0123456789abcdef")
    project.store_findings({fid: (labels_digest(project.labels(fid)), [finding.to_dict()])})


def _hidden(fid, pid, tag, joint, name, key):
    fix = Fix(f"mark person {tag}'s {name} occluded", (SetVisibility(fid, pid, joint, 1),),
              FixPreview(occluded=((pid, joint),)))
    return Finding(key, fid, "hidden", pid, tag, (joint,), (name,),
                   f"person {tag}'s {name} is hidden", (), 1.0, 0.9, fix, (pid,),
                   "0123456789abcdef")


def _wrist(project, fid, pid):
    return next(p for p in project.people(fid) if p.id == pid).keypoints[9].copy()


def test_w_shows_the_finding_and_y_accepts_its_fix_as_one_undo_step(qtbot, window, ui_project):
    fid, pid = window.frame_id, person_id(window, 2)
    _store_finding(ui_project, fid, pid)
    window.session.findings_changed()
    qtbot.keyClick(window.canvas, Qt.Key.Key_W)
    card = window.canvas.walk_card
    assert card is not None and card.stop.key == "Ftest"
    assert window.canvas.selected_joints == [(pid, 9)]
    assert window.actions_by_name["accept_fix"].isEnabled()
    groups = len({e.group_id for e in ui_project.history()})
    qtbot.keyClick(window.canvas, Qt.Key.Key_Y)
    assert window.session.pending == {fid}, "the frame is computed again off the UI thread"
    # Other jobs (the next frame's cards folded ahead) may deliver first.
    qtbot.waitUntil(lambda: not window.session.pending, timeout=WAIT_MS)
    assert _wrist(ui_project, fid, pid)[2] == 1
    assert len({e.group_id for e in ui_project.history()}) == groups + 1
    assert window.session.current is None or window.session.current.key != "Ftest", \
        "the walk moved on by itself"
    assert "accept finding Ftest" in window.ledger_model.index(0, 3).data()
    window.undo()
    assert _wrist(ui_project, fid, pid)[2] == 2


def test_without_findings_the_walk_stops_at_triage_reasons(qtbot, window):
    pid = person_id(window, 2)
    qtbot.keyClick(window.canvas, Qt.Key.Key_W)
    stop = window.canvas.walk_card.stop
    assert stop.person_id == pid and stop.fix is None
    assert stop.text.startswith("person 2: ")
    assert window.canvas.selected_joints == [(pid, 7), (pid, 9)]
    assert not window.actions_by_name["accept_fix"].isEnabled()


def test_a_frames_visibility_fixes_are_one_stop_accepted_and_undone_together(
        qtbot, window, ui_project):
    """Two 'hidden' findings of one frame (synthetic, invented here) are walked as one stop:
    W shows both joints, Y accepts both fixes as one undo step, one undo takes both back."""
    fid = window.frame_id
    b, c = person_id(window, 2), person_id(window, 3)
    found = [_hidden(fid, b, 2, 9, "left wrist", "Fb"), _hidden(fid, c, 3, 10, "right wrist", "Fc")]
    ui_project.store_findings({fid: (labels_digest(ui_project.labels(fid)),
                                     [f.to_dict() for f in found])})
    window.session.findings_changed()
    qtbot.keyClick(window.canvas, Qt.Key.Key_W)
    stop = window.canvas.walk_card.stop
    assert stop.key == "G:covered" and [f.id for f in stop.group] == ["Fb", "Fc"]
    assert window.actions_by_name["accept_fix"].isEnabled()
    groups = len({e.group_id for e in ui_project.history()})
    qtbot.keyClick(window.canvas, Qt.Key.Key_Y)
    assert _wrist(ui_project, fid, b)[2] == 1
    assert next(p for p in ui_project.people(fid) if p.id == c).keypoints[10][2] == 1
    assert len({e.group_id for e in ui_project.history()}) == groups + 1, "one undo step"
    window.undo()
    assert _wrist(ui_project, fid, b)[2] == 2
    assert next(p for p in ui_project.people(fid) if p.id == c).keypoints[10][2] == 2


def test_the_owner_list_goes_where_it_covers_fewest_connector_points():
    """The owner list's place beside a joint: the first side that covers the fewest points of
    the dispute connectors, never over the walk's card if another side is free (synthetic
    rectangles and points, invented here; our own rule, no outside source)."""
    from PySide6.QtCore import QPointF, QRectF

    from app.ui.callouts import _beside, least_covering

    bounds, joint = QRectF(0, 0, 800, 600), QRectF(392, 292, 16, 16)
    options = _beside(joint, (200, 100), bounds)
    assert least_covering(options, []) == options[0], "the usual place when nothing is in the way"
    below_right = [QPointF(450, 340), QPointF(500, 360)]
    chosen = least_covering(options, below_right)
    assert not any(chosen.contains(q) for q in below_right)
    card = QRectF(100, 320, 300, 200)
    chosen = least_covering(options, below_right, avoid=card)
    assert not chosen.intersects(card) and not any(chosen.contains(q) for q in below_right)


def test_the_walk_card_leaves_the_people_it_is_about_in_sight():
    """When the people concerned fill the view, every place beside them covers them; the card
    then goes to the view's corner that covers the fewest of their joints (synthetic points,
    invented here; our own rule, no outside source)."""
    from PySide6.QtCore import QPointF, QRectF

    from app.ui.callouts import card_places, least_covering

    bounds = QRectF(0, 0, 730, 470)
    # Joints spread over the view except its top-left corner.
    about = [QPointF(x, y) for x in range(400, 720, 40) for y in range(20, 460, 40)]
    about += [QPointF(x, y) for x in range(20, 400, 40) for y in range(220, 460, 40)]
    box = QRectF(10, 10, 710, 450)
    places = card_places(box, (380, 150), bounds)
    assert least_covering(places, []) == places[0], "the usual place when nothing is covered"
    chosen = least_covering(places, about)
    assert not any(chosen.contains(q) for q in about)
    assert chosen.left() < 10 and chosen.top() < 10, "the top-left corner is the free one"


def test_work_posted_after_paint_runs_after_the_repaint_under_way(qtbot):
    """The recompute and the maps read ahead start below Qt's repaint priority: a repaint
    asked for before or after the post is painted first (Qt's posted-event priorities)."""
    from PySide6.QtWidgets import QWidget

    from app.ui.work import MapsShelf, after_paint

    order = []

    class Painted(QWidget):
        def paintEvent(self, event):
            order.append("paint")

    widget = Painted()
    qtbot.addWidget(widget)
    widget.show()
    qtbot.waitUntil(lambda: "paint" in order, timeout=WAIT_MS)
    order.clear()
    shelf = MapsShelf()
    after_paint(shelf, lambda: order.append("work"))
    widget.update()
    qtbot.waitUntil(lambda: "work" in order, timeout=WAIT_MS)
    assert order == ["paint", "work"]


def test_the_maps_shelf_reads_ahead_and_forgets_on_clear(qtbot):
    """Maps read ahead land on the shelf and are not read again; after clear() a read that
    was under way lands nowhere. The 'maps' are stand-ins (synthetic)."""
    from app.ui.work import MapsShelf

    shelf = MapsShelf(keep=2)
    reads = []
    shelf.ahead(5, lambda: reads.append(5) or "maps of 5")
    qtbot.waitUntil(lambda: not shelf.wants(5) and 5 in shelf._held, timeout=WAIT_MS)
    assert shelf.get(5, lambda: "read again") == "maps of 5"
    assert shelf.get(6, lambda: "maps of 6") == "maps of 6"
    with qtbot.waitSignal(shelf.fetched, timeout=WAIT_MS):  # the read is done, and landed
        shelf.ahead(7, lambda: "maps of 7")
        shelf.clear()
    assert 7 not in shelf._held and shelf.get(7, lambda: "fresh") == "fresh"
    assert reads == [5]
    shelf.shutdown()


def test_a_persons_card_is_trimmed_with_e_and_d_and_taken_with_y(qtbot, window, ui_project):
    """Two fixes of person 2 are one card; E E puts the focus on the second, D leaves it out,
    Y takes the first alone (synthetic findings)."""
    fid, pid = window.frame_id, person_id(window, 2)
    first = replace(_hidden(fid, pid, 2, 9, "left wrist", "Fa"), kind="wrong-owner",
                    fingerprint="fedcba9876543210")
    second = _hidden(fid, pid, 2, 7, "left elbow", "Fb")
    ui_project.store_findings({fid: (labels_digest(ui_project.labels(fid)),
                                     [first.to_dict(), second.to_dict()])})
    window.session.findings_changed()
    qtbot.keyClick(window.canvas, Qt.Key.Key_W)
    assert [f.id for f in window.canvas.walk_card.stop.parts] == ["Fa", "Fb"]
    for key in (Qt.Key.Key_E, Qt.Key.Key_E, Qt.Key.Key_D):
        qtbot.keyClick(window.canvas, key)
    card = window.canvas.walk_card.stop
    assert card.left_out == {"Fb"} and window.canvas.selected_joints == [(pid, 7)]
    with qtbot.waitSignal(window.background.delivered, timeout=WAIT_MS):
        qtbot.keyClick(window.canvas, Qt.Key.Key_Y)
    person = next(p for p in ui_project.people(fid) if p.id == pid)
    assert (person.keypoints[9, 2], person.keypoints[7, 2]) == (1, 2)
