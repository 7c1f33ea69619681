"""The walk's cursor: next and previous across frames in the given order, empty frames
skipped, and a stop that goes away leaves the cursor where the next one takes its place.

Data: invented stops (synthetic); the expected orders are our own rule (module docstring of
app/session/walk.py), no outside source.
"""

from __future__ import annotations

from app.session.walk import Stop, Walk


def _stops():
    return {5: [Stop(5, "a", 1, (), "a"), Stop(5, "b", 2, (), "b")], 8: [],
            2: [Stop(2, "c", 3, (), "c"), Stop(2, "d", 3, (), "d")]}


def test_forward_crosses_frames_in_the_given_order_and_skips_frames_without_stops():
    stops = _stops()
    walk = Walk(lambda: [5, 8, 2], lambda f: stops[f])
    keys, shown = [], 5
    while (stop := walk.step(1, shown)) is not None:
        keys.append(stop.key)
        shown = stop.frame_id
    assert keys == ["a", "b", "c", "d"]
    assert walk.current.key == "d", "at the end the cursor stays on the last stop"


def test_backward_from_a_frame_starts_at_the_stop_before_it():
    stops = _stops()
    walk = Walk(lambda: [5, 8, 2], lambda f: stops[f])
    assert walk.step(-1, 8).key == "b", "frame 8 has none: the last of frame 5"
    assert walk.step(-1, 5).key == "a"
    assert walk.step(-1, 5) is None


def test_a_stop_that_went_away_is_replaced_by_the_next():
    stops = _stops()
    walk = Walk(lambda: [5, 8, 2], lambda f: stops[f])
    walk.step(1, 5)
    stops[5] = [s for s in stops[5] if s.key != "a"]  # accepted: it is gone
    assert walk.step(1, 5).key == "b"
    stops[5] = []
    assert walk.step(1, 5).key == "c"


def test_going_to_another_frame_by_hand_restarts_the_walk_there():
    stops = _stops()
    walk = Walk(lambda: [5, 8, 2], lambda f: stops[f])
    walk.step(1, 5)
    assert walk.step(1, 2).key == "c"


def _finding(i, kind, person, fix, sure):
    """An invented finding about one joint (synthetic)."""
    from app.analysis.triage.findings import Finding, Fix, FixPreview

    made = Fix(f"fix {i}", (), FixPreview()) if fix else None
    return Finding(i, 1, kind, person, person, (9,), ("left wrist",), f"t{i}", (), 1.0, sure,
                   made, () if person is None else (person,), i)


def test_a_frames_notes_without_a_fix_cost_at_most_one_key_and_none_is_dropped():
    """Our own rule (app/session/walk.py, _frame_notes): a person's notes ride on their fix;
    other weak notes (below PROPOSE_AT) ride on the frame's last stop with a fix; the rest
    share one card; every finding stays on exactly one stop. Synthetic findings."""
    from app.session.walk import WEAK_BELOW, group_findings

    found = [_finding("a", "wrong-owner", 1, True, 0.9),
             _finding("b", "mirrored", 2, False, WEAK_BELOW - 0.3),
             _finding("c", "missed-person", None, False, 1.0),
             _finding("d", "duplicate", 3, True, 0.8),
             _finding("e", "crossed-sides", 4, False, 0.05),
             _finding("f", "missing-joint", 1, False, 0.9),
             _finding("g", "missed-person", None, False, 0.95)]
    stops = group_findings(1, found)
    held = [f.id for s in stops for f in s.findings]
    assert sorted(held) == sorted(f.id for f in found), "each finding on one stop"
    assert sum(s.fix is None for s in stops) == 1, "one card of notes for the frame"
    by = {s.findings[0].id: s for s in stops}
    assert [f.id for f in by["a"].findings] == ["a", "f"], "the person's note on their fix"
    assert [f.id for f in by["d"].findings] == ["d", "b", "e"], "weak notes on the last fix"
    assert by["d"].fix.summary == "fix d" and "also on this frame" in by["d"].text
    assert [f.id for f in by["c"].findings] == ["c", "g"] and by["c"].person_id is None
    without = group_findings(1, [found[1], found[4]])
    assert len(without) == 1 and without[0].fix is None, "weak notes alone share one card"


def _joint_fix(i, kind, person, edit):
    """An invented finding whose fix is one edit of one joint (synthetic)."""
    from app.analysis.triage.findings import Finding, Fix, FixPreview

    return Finding(i, 1, kind, person, person, (edit.joint,), ("x",), f"t{i}", (), 1.0, 0.9,
                   Fix(f"fix {i}", (edit,), FixPreview()), (person,), i)


def test_a_frames_hidden_and_gap_fixes_are_one_stop_after_the_peoples_cards():
    """Our own rule (app/session/walk.py, group_findings): the joints a nearer body hides and
    those the frames around place, of people without a card, are one stop for the frame
    (one key, one undo step), after the people's stops; a fix of one that conflicts with a
    fix of the other keeps the two groups apart. Synthetic findings."""
    from app.model.edits import MoveJoint, SetVisibility
    from app.session.walk import COVERED_KEY, GAP_KEY, JOINTS_KEY, group_findings

    hidden = [_joint_fix("h1", "hidden", 2, SetVisibility(1, 2, 13, 1)),
              _joint_fix("h2", "invented", 3, SetVisibility(1, 3, 14, 0))]
    gaps = [_joint_fix("g1", "joint-gap", 5, MoveJoint(1, 5, 9, 3.0, 4.0)),
            _joint_fix("g2", "jumping-joint", 6, MoveJoint(1, 6, 10, 5.0, 6.0))]
    owner = _joint_fix("w", "wrong-owner", 7, SetVisibility(1, 7, 9, 0))
    stops = group_findings(1, [hidden[0], gaps[0], owner, hidden[1], gaps[1]])
    assert [s.key for s in stops] == ["w", JOINTS_KEY]
    assert [f.id for f in stops[1].parts] == ["h1", "g1", "h2", "g2"]
    assert "nearer people hide" in stops[1].text and "the frames around" in stops[1].text
    clash = _joint_fix("g3", "joint-gap", 2, MoveJoint(1, 2, 13, 3.0, 4.0))  # h1's knee
    apart = group_findings(1, [*hidden, gaps[0], clash])
    assert [s.key for s in apart] == [COVERED_KEY, GAP_KEY]


def test_a_frames_hidden_joints_ride_on_its_last_card_and_stand_alone_without_one():
    """Our own rule (app/session/walk.py, ride): a frame's stop that only marks joints
    occluded (its hidden joints: neither count of wrong people changes, app.demo.evaluate)
    rides on the frame's last other stop with a fix it does not conflict with, taken by the
    same key; with an invented spot to unlabel, or alone on the frame, it stays a stop of its
    own. Every finding stays on exactly one stop. Synthetic findings."""
    from app.model.edits import ReassignJoint, SetVisibility
    from app.session.walk import COVERED_KEY, group_findings, ride

    hidden = [_joint_fix("h1", "hidden", 2, SetVisibility(1, 2, 13, 1)),
              _joint_fix("h2", "hidden", 3, SetVisibility(1, 3, 14, 1))]
    owner = _joint_fix("w", "wrong-owner", 7, ReassignJoint(1, 7, 9, 8))
    other = _joint_fix("x", "wrong-owner", 2, SetVisibility(1, 2, 13, 0))  # h1's knee
    found = [owner, *hidden]
    stops = ride(group_findings(1, found))
    assert [s.key for s in stops] == [f"w&{COVERED_KEY}"]
    card = stops[0]
    assert [f.id for f in card.parts] == ["w", "h1", "h2"] and card.riders == ("h1", "h2")
    assert [f.id for f in card.own] == ["w"], "dismissing the card leaves the riders"
    assert len(card.fix.edits) == 3 and "nearer people hide" in card.text
    assert sorted(f.id for s in stops for f in s.findings) == sorted(f.id for f in found)
    # The last stop's fix marks h1's knee unlabelled: the riders go on the card before it.
    stops = ride(group_findings(1, [owner, other, *hidden]))
    assert [s.key for s in stops] == [f"w&{COVERED_KEY}", "x"]
    # Alone on the frame, or with an invented spot in the group: a stop of its own.
    assert [s.key for s in ride(group_findings(1, hidden))] == [COVERED_KEY]
    spot = _joint_fix("i", "invented", 4, SetVisibility(1, 4, 9, 0))
    assert [s.key for s in ride(group_findings(1, [owner, *hidden, spot]))] == ["w",
                                                                               COVERED_KEY]
