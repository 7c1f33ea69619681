"""A disputed frame as the Canvas shows it, on the session without a window: our version or the
reviewer's (app/session/view.py), the marks on each, ours back when the dispute goes away, and
the session handing a real dispute to the view (app/session/session.py, ``read_dispute``).

Data: invented people (synthetic) and an invented reviewer, "bea". Which version is shown and
that the reviewer's is read-only are our own rules (README, "Settling a disputed frame"); the
three-way merge that makes the dispute is our own too (app/review/merge.py); no outside source.
"""

from __future__ import annotations

import numpy as np
import pytest

from app.jobs import import_coco
from app.model.edits import MoveJoint
from app.model.labels import FrameState, Person
from app.review.merge import merge_packet
from app.review.settle import settle_frame
from app.session import Session, View
from tests.review.conftest import review, send


def _people(xs, moved=None):
    """People 10, 11, ... standing at ``xs``; ``moved`` shifts one joint: {(pid, j): dx}."""
    out = []
    for n, x in enumerate(xs):
        p = Person.blank(10 + n, 17)
        p.keypoints[:5] = np.column_stack([np.full(5, x), np.arange(5.0) * 10, np.full(5, 2)])
        for (pid, j), dx in (moved or {}).items():
            if pid == p.id:
                p.keypoints[j, 0] += dx
        out.append(p)
    return out


def _heard(v):
    heard = []
    v.events.connect("people", lambda: heard.append(("people", [p.id for p in v.people])))
    v.events.connect("dispute", lambda: heard.append(("dispute", v.showing_theirs)))
    return heard


@pytest.fixture
def disputed():
    """A view showing ours, person 11's joint 2 in dispute: bea has it 6 px to the right."""
    v = View()
    ours = _people([0, 30, 60])
    theirs = _people([0, 30, 60], {(11, 2): 6.0})
    v.show(ours, {11: frozenset({2})}, keep_colours=False)
    v.set_dispute(theirs, {(11, 2): (36.0, 20.0)}, {(11, 2): (30.0, 20.0)}, "bea")
    return v, ours, theirs


def test_showing_the_reviewers_version_and_ours_again(disputed):
    v, ours, theirs = disputed
    colours = dict(v.colours)
    heard = _heard(v)
    assert v.has_theirs and not v.showing_theirs and v.people == ours
    assert v.marks == {(11, 2): (36.0, 20.0)}, "on ours, the mark points at bea's joint"
    assert v.show_theirs(True) and v.showing_theirs
    assert v.people == theirs and v.ours == ours, "ours are kept while bea's show"
    assert v.marks == {(11, 2): (30.0, 20.0)}, "on bea's, the mark points at ours"
    assert v.colours == colours and v.flags == {11: frozenset({2})}, "same colours and flags"
    assert v.show_theirs(True) and v.show_theirs(False) is False
    assert v.people == ours and v.marks == {(11, 2): (36.0, 20.0)}
    assert heard == [("people", [10, 11, 12]), ("dispute", True),
                     ("people", [10, 11, 12]), ("dispute", False)], "no event without change"
    assert v.reviewer == "bea"


def test_an_edit_while_the_reviewers_version_shows_changes_ours_only(disputed):
    v, _, theirs = disputed
    v.show_theirs(True)
    edited = _people([0, 30])  # person 12 deleted in our version
    v.show(edited, {})
    assert v.ours == edited and v.people == theirs and v.showing_theirs


def test_the_dispute_going_away_while_the_reviewers_version_shows_brings_ours_back(disputed):
    v, ours, _ = disputed
    v.show_theirs(True)
    heard = _heard(v)
    v.set_dispute(None)
    assert not v.showing_theirs and not v.has_theirs
    assert v.people == ours and v.marks == {} and v.reviewer == ""
    assert heard == [("people", [10, 11, 12]), ("dispute", False)]
    assert not v.show_theirs(True) and not v.showing_theirs, "nothing left to show"


def test_marks_are_replaced_and_their_new_people_shown(disputed):
    v, ours, _ = disputed
    heard = _heard(v)
    # One joint settled, another disputed: the marks are replaced, ours stay on screen.
    v.set_dispute(_people([0, 30, 60], {(12, 4): -5.0}), {(12, 4): (55.0, 40.0)},
                  {(12, 4): (60.0, 40.0)}, "bea")
    assert v.marks == {(12, 4): (55.0, 40.0)} and v.people == ours
    assert heard == [("dispute", False)], "ours did not change: no people event"
    v.show_theirs(True)
    newer = _people([0, 30, 60], {(10, 0): 3.0})
    v.set_dispute(newer, {(10, 0): (3.0, 0.0)}, {(10, 0): (0.0, 0.0)}, "bea and cleo")
    assert v.showing_theirs and v.people == newer and v.reviewer == "bea and cleo"
    assert v.marks == {(10, 0): (0.0, 0.0)}


def test_another_frame_drops_the_dispute(disputed):
    v, _, _ = disputed
    v.show_theirs(True)
    heard = _heard(v)
    other = _people([100, 200])
    v.open(other, {})
    assert v.people == other and not v.has_theirs and not v.showing_theirs and v.marks == {}
    assert v.colours == {10: 0, 11: 1}, "colours given anew"
    assert heard == [("people", [10, 11]), ("dispute", False)]


@pytest.fixture
def labelled(project, coco_file):
    """The shared folder ``project`` (author "ana") with 3 synthetic people per frame."""
    import_coco(project, coco_file)
    return project


def test_the_session_gives_the_view_a_real_dispute_and_takes_it_back(labelled, tmp_path):
    """Through the real back end (export, review by bea, merge): bea and we moved one joint
    differently; reading the dispute fills the view, settling the frame empties it."""
    frame = labelled.frames()[0]
    a = labelled.people(frame.id)[0]
    packet = send(labelled, tmp_path / "p.zip", frames=[frame.id])
    labelled.apply(MoveJoint(frame.id, a.id, 3, 30.0, 30.0))
    merge_packet(labelled, review(packet, lambda r: r.apply(MoveJoint(frame.id, a.id, 3,
                                                                       33.0, 33.0))))
    s = Session(labelled)
    s.open_frame(frame.id)
    s.view.open(s.people, {})
    s.read_dispute(labelled.frame(frame.id), s.view.ours)
    assert labelled.frame(frame.id).state is FrameState.DISPUTED
    assert s.view.reviewer == "bea" and s.view.marks == {(a.id, 3): (33.0, 33.0)}
    assert s.view.show_theirs(True)
    np.testing.assert_allclose(s.view.person(a.id).keypoints[3, :2], (33.0, 33.0))
    settle_frame(labelled, frame.id)
    s.read_dispute(labelled.frame(frame.id), s.view.ours)
    assert s.dispute is None and not s.view.showing_theirs
    np.testing.assert_allclose(s.view.person(a.id).keypoints[3, :2], (30.0, 30.0))


def test_region_mode_and_the_reviewers_version_exclude_each_other(disputed):
    """Regions are drawn on ours and the reviewer's version is read-only (our rule, README
    "Settling a disputed frame"): entering one leaves the other, and says so by events."""
    v, ours, theirs = disputed
    heard = _heard(v)
    v.events.connect("mode", lambda: heard.append(("mode", v.region_mode)))
    assert v.show_theirs(True)
    heard.clear()
    assert v.set_region_mode(True) and v.region_mode and not v.showing_theirs
    assert v.people == ours
    assert heard == [("people", [10, 11, 12]), ("dispute", False), ("mode", True)]
    heard.clear()
    assert v.show_theirs(True) and not v.region_mode and v.people == theirs
    assert heard[0] == ("mode", False), "region mode is left first"
    v.show_theirs(False)
    assert not v.region_mode, "showing ours again does not bring region mode back"


def test_the_settling_keys_walk_take_keep_and_settle_without_a_window(labelled, tmp_path):
    """Through the real back end: bea and we moved joints 3 and 4 of one person differently.
    J selects a difference and brings it into view, A takes bea's joint and the selection
    moves on to the next open one, Ctrl+Shift+K keeps mine for the rest, Shift+Return
    settles; each step says what it did."""
    frame = labelled.frames()[0]
    a = labelled.people(frame.id)[0]
    packet = send(labelled, tmp_path / "p.zip", frames=[frame.id])
    for j in (3, 4):
        labelled.apply(MoveJoint(frame.id, a.id, j, 30.0 + j, 30.0))

    def bea(r):
        for j in (3, 4):
            r.apply(MoveJoint(frame.id, a.id, j, 40.0 + j, 40.0))

    merge_packet(labelled, review(packet, bea))
    s = Session(labelled)
    said, seen = [], []
    s.events.connect("message", lambda text, *_: said.append(text))
    s.events.connect("reveal", lambda x, y: seen.append((x, y)))

    def reread(kind, ids):  # what the window does on the project's change notice
        if s.frame_id in ids:
            s.reload_frame()
            s.read_dispute(labelled.frame(s.frame_id), s.people)

    labelled.subscribe(reread)
    s.open_frame(frame.id)
    s.read_dispute(labelled.frame(frame.id), s.people)
    s.settling.take_theirs("joint")
    assert said[-1] == "select a joint that differs first (J walks them)"
    s.settling.step(1)
    assert s.selection.joint == (a.id, 3) and seen == [(33.0, 30.0)]
    s.settling.take_theirs("joint")
    assert said[-1] == f"took bea's version of {s.names.whose(a.id, 3)} (Ctrl+Z takes it back)"
    assert tuple(labelled.people(frame.id)[0].keypoints[3, :2]) == (43.0, 40.0)
    assert s.selection.joint == (a.id, 4), "on to the next open difference"
    s.settling.keep_ours("frame")
    assert said[-1].endswith("no differences left: Shift+Return settles the frame")
    assert s.dispute is None
    s.settling.settle()
    assert said[-1] == "settled: the frame is corrected (Ctrl+Z takes it back)"
    assert labelled.frame(frame.id).state is FrameState.CORRECTED
    s.settling.settle()
    assert said[-1] == "this frame is not disputed"


def test_the_reviewer_decides_and_the_same_decision_again_withdraws_it(labelled, tmp_path):
    """The reviewer's side of a real packet (our rule, README "Reviewing a packet"): a
    decision is recorded on the frame shown and read back; the same one again withdraws it;
    the main project takes no decisions."""
    from app.review.review import decisions, open_packet

    frame = labelled.frames()[0]
    packet = send(labelled, tmp_path / "p.zip", frames=[frame.id])
    main = Session(labelled)
    main.open_frame(frame.id)
    assert not main.review and main.decision() is None
    with open_packet(packet, reviewer="bea") as reviewed:
        s = Session(reviewed)
        said = []
        s.events.connect("message", lambda text, *_: said.append(text))
        s.open_frame(frame.id)
        assert s.review and s.decision() is None
        s.decide("query")
        assert s.decision() == "query" == decisions(reviewed)[frame.id].decision
        assert said[-1] == f"frame {frame.id}: queried (the same key again withdraws it)"
        s.decide("query")
        assert s.decision() is None and said[-1] == f"frame {frame.id}: decision withdrawn"
