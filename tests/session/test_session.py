"""The session's walk over a real (folder) project, without a window: it goes from finding to
finding across frames, accepts a fix as one undo step and moves on by itself, dismisses, and
falls back to triage's reasons when a project has no findings.

The people are synthetic (tests/analysis/synth.py, invented): a body found twice (a faint
copy of its upper body) on frame 1, a body cut into upper and lower halves on frame 2, a
plain body on frame 3. That a duplicate is deleted and a split merged is the findings' own
rule (app/analysis/triage/fixes.py); one action, one undo step is the command pattern's rule
(common practice, no source).
"""

from __future__ import annotations

import pytest

from app.jobs_analysis import run_triage
from app.model.edits import MoveJoint
from app.session import Session
from tests.analysis.synth import store_duplicate_and_split


@pytest.fixture
def scene(project):
    made = store_duplicate_and_split(project)
    return project, [f.id for f in project.frames()[:3]], made["ids"][0]


def _session(project, order):
    s = Session(project, order=lambda: order)
    seen, said = [], []
    s.events.connect("stop", seen.append)
    s.events.connect("message", said.append)
    s.open_frame(order[0])
    return s, seen, said


def _follow(s, stop):
    if stop is not None and stop.frame_id != s.frame_id:
        s.open_frame(stop.frame_id)
    return stop


def test_the_walk_visits_every_frames_findings_in_worklist_order(scene):
    project, fids, _ = scene
    run_triage(project)
    order = [fids[1], fids[0], fids[2]]
    s, seen, said = _session(project, order)
    frames = []
    while _follow(s, s.step(1)) is not None:
        frames.append(s.frame_id)
    assert frames == sorted(frames, key=order.index), "frames in the order given"
    assert {fids[0], fids[1]} <= set(frames)
    assert len(seen) == len(frames) and "no more findings" in said[-1]


def test_accept_applies_the_fix_as_one_undo_step_and_walks_on(scene):
    project, fids, _first = scene
    run_triage(project)
    s, _seen, said = _session(project, [fids[0], fids[1], fids[2]])
    stop = s.step(1)
    while stop is not None and (stop.fix is None or stop.finding.kind != "duplicate"):
        stop = _follow(s, s.step(1))
    assert stop is not None and stop.frame_id == fids[0]
    before = {p.id for p in project.people(fids[0])}
    groups = len({e.group_id for e in project.history()})
    nxt = s.accept()
    after = {p.id for p in project.people(fids[0])}
    assert after < before, "the duplicate was deleted"
    assert len({e.group_id for e in project.history()}) == groups + 1, "one ledger group"
    assert nxt is None or nxt.key != stop.key, "the walk moved on by itself"
    assert any(m.startswith("done:") for m in said)
    project.undo()
    assert {p.id for p in project.people(fids[0])} == before, "one undo step takes it back"


def test_dismiss_records_not_a_problem_and_the_finding_is_not_raised_again(scene):
    project, fids, _ = scene
    run_triage(project)
    s, _, _ = _session(project, [fids[1]])
    stop = s.step(1)
    assert stop is not None
    s.dismiss()
    fresh = Session(project, order=lambda: [fids[1]])
    assert stop.key not in [x.key for x in fresh.stops(fids[1])]


def test_without_findings_the_walk_stops_at_triage_reasons_about_people(scene):
    project, fids, first = scene
    reasons = [{"kind": "long limb", "person": first, "joints": [7, 9], "weight": 1.0,
                "text": "left forearm 2.1x as long as the torso allows"},
               {"kind": "crowded", "person": None, "joints": [], "weight": 1.0, "text": "x"}]
    project.store_triage({fids[0]: (3.0, reasons)})
    s, _, said = _session(project, [fids[0]])
    stop = s.step(1)
    assert stop.person_id == first and stop.joints == (7, 9) and stop.fix is None
    assert stop.text.startswith("person 1: ")
    assert s.step(1) is None, "the frame-level reason is not a stop"
    assert s.accept() is None and "no fix" in said[-1]


def _note(fid, pid, key, kind, joint, name, fix=None):
    """An invented finding about one joint of one person (synthetic)."""
    from app.analysis.triage.findings import Finding

    return Finding(key, fid, kind, pid, 1, (joint,), (name,), f"person 1's {name}: {kind}",
                   (), 1.0, 0.9, fix, (pid,), key * 2)


def test_a_persons_findings_without_a_fix_ride_on_their_stop_with_one(scene):
    """One key passes a frame's findings without a fix: a person's are read on the card of
    that person's fix, and dismissing the stop dismisses them with it; another person's
    ride on the frame's last card with a fix and are not dismissed with it (our own rule,
    app/session/walk.py). Synthetic findings."""
    from app.analysis.triage.findings import Fix, FixPreview, labels_digest
    from app.model.edits import SetVisibility

    project, fids, first = scene
    fid = fids[0]
    fix = Fix("mark person 1's left wrist occluded", (SetVisibility(fid, first, 9, 1),),
              FixPreview(occluded=((first, 9),)))
    found = [_note(fid, first, "Fa", "wrong-owner", 9, "left wrist", fix),
             _note(fid, first + 1, "Fb", "mirrored", 5, "left shoulder"),
             _note(fid, first, "Fc", "missing-joint", 10, "right wrist"),
             _note(fid, first, "Fd", "invented", 1, "left eye")]
    project.store_findings({fid: (labels_digest(project.labels(fid)),
                                  [f.to_dict() for f in found])})
    s, _, _ = _session(project, [fid])
    stops = s.stops(fid)
    assert [[f.id for f in x.findings] for x in stops] == [["Fa", "Fc", "Fd", "Fb"]]
    assert stops[0].fix == fix and "also person 1's right wrist" in stops[0].text
    assert "no fix proposed: person 1's left shoulder" in stops[0].text, "the other's note"
    assert s.step(1).key == stops[0].key
    after = s.dismiss()  # the frame's own findings, computed again after the dismissal
    assert after is None or not {f.id for f in after.findings} & {"Fa", "Fb", "Fc", "Fd"}, \
        "one key passes them all"
    assert project.dismissed()[fid] == {"FaFa", "FcFc", "FdFd"}, \
        "the person's notes went with it, the frame's other note did not"


def _two_frames_of_fixes(project, fids, first):
    """Stored findings (invented): two fixes about the two people of the first frame, one
    about the first person of the second."""
    from app.analysis.triage.findings import Fix, FixPreview, labels_digest
    from app.model.edits import SetVisibility

    def fixed(fid, pid, key):
        fix = Fix(f"mark {key}'s wrist occluded", (SetVisibility(fid, pid, 9, 1),),
                  FixPreview(occluded=((pid, 9),)))
        return _note(fid, pid, key, "wrong-owner", 9, "left wrist", fix)

    per = {fids[0]: [fixed(fids[0], first, "Fa"), fixed(fids[0], first + 1, "Fb")],
           fids[1]: [fixed(fids[1], first + 2, "Fc")]}
    project.store_findings({fid: (labels_digest(project.labels(fid)), [f.to_dict() for f in fs])
                            for fid, fs in per.items()})


def test_the_walk_does_not_wait_for_a_changed_frames_recompute(scene):
    """The recompute runs in the background (a runner held by the test, synchronous): at the
    end of the frame the walk moves on at once; a result for an older revision is dropped;
    the fresh findings that arrive later join the frame's list, without those passed, and
    the walk comes back to that frame after the last one."""
    from app.session import Stop

    project, fids, first = scene
    _two_frames_of_fixes(project, fids, first)
    held = []
    s = Session(project, order=lambda: fids[:2],
                background=lambda job, deliver: held.append((job, deliver)))
    s._fold_ahead = lambda fid: None  # only the recompute's jobs are held here
    said = []
    s.events.connect("message", said.append)
    s.open_frame(fids[0])
    assert s.step(1).key == "Fa"
    assert s.accept().key == "Fb", "the walk moved on by itself"
    assert s.pending == {fids[0]} and len(held) == 1
    nxt = _follow(s, s.accept())
    assert nxt.key == "Fc" and nxt.frame_id == fids[1], "it did not wait for the recompute"
    assert len(held) == 2 and held[0][0]() is None, "the older job knows it is stale"
    late = Stop(fids[0], "Fz", first, (9,), "person 1's left wrist: still wrong")
    passed = Stop(fids[0], "Fa", first, (9,), "passed already")
    assert held[0][1]([late]) is False, "a result for an older revision is dropped"
    assert held[1][1]([passed, late]) is True and not s.pending
    assert [x.key for x in s.stops(fids[0])] == ["Fz"], "fresh, without the ones passed"
    assert "1 more finding after its fixes" in said[-1]
    s.findings_changed()  # triage stored again elsewhere: the frame is read anew ...
    s._read_stops = lambda fid: [passed, late] if fid == fids[0] else []
    assert [x.key for x in s.stops(fids[0])] == ["Fz"], "... and what was passed stays so"
    assert _follow(s, s.step(1)).key == "Fz", "the walk comes back to it after the last frame"


def test_a_recompute_in_before_the_frames_end_is_offered_before_the_walk_moves_on(scene):
    from app.session import Stop

    project, fids, first = scene
    _two_frames_of_fixes(project, fids, first)
    held = []
    s = Session(project, order=lambda: fids[:2],
                background=lambda job, deliver: held.append((job, deliver)))
    s._fold_ahead = lambda fid: None  # only the recompute's jobs are held here
    s.open_frame(fids[0])
    s.step(1)
    assert s.accept().key == "Fb"
    held[0][1]([Stop(fids[0], "Fa", first, (9,), "passed"),
                Stop(fids[0], "Fy", first, (9,), "held back by Fa")])
    assert s.skip().key == "Fy", "offered before the walk leaves the frame"
    assert s.skip().key == "Fc"


def _covered_frame(project, fid, first, owner_too=True):
    """Stored findings (invented): person 1's knees marked occluded, person 2's left wrist
    an invented spot to unlabel, and (``owner_too``) a wrong owner about person 1."""
    from app.analysis.triage.findings import Finding, Fix, FixPreview, labels_digest
    from app.model.edits import SetVisibility

    a, b = first, first + 1
    hidden = Fix("mark person 1's knees occluded",
                 (SetVisibility(fid, a, 13, 1), SetVisibility(fid, a, 14, 1)),
                 FixPreview(occluded=((a, 13), (a, 14))))
    invented = Fix("mark person 2's left wrist unlabelled", (SetVisibility(fid, b, 9, 0),),
                   FixPreview(unlabeled=((b, 9),)))
    owner = Fix("mark person 1's nose occluded", (SetVisibility(fid, a, 0, 1),),
                FixPreview(occluded=((a, 0),)))
    found = [_note(fid, a, "Fo", "wrong-owner", 0, "nose", owner)] if owner_too else []
    found += [Finding("Fh", fid, "hidden", a, 1, (13, 14), ("left knee", "right knee"),
                     "person 1's knees are hidden", (), 1.0, 0.9, hidden, (a,), "FhFh"),
             Finding("Fi", fid, "invented", b, 2, (9,), ("left wrist",),
                     "person 2's left wrist is invented", (), 1.0, 0.9, invented, (b,), "FiFi")]
    project.store_findings({fid: (labels_digest(project.labels(fid)),
                                  [f.to_dict() for f in found])})


def _v(project, fid, pid, joint):
    return int(next(p for p in project.people(fid) if p.id == pid).keypoints[joint][2])


def test_a_frames_hidden_and_invented_fixes_are_one_stop_and_one_undo_step(scene):
    """The occluded-marking and invented-spot fixes of a frame are one stop: its sentence
    counts them and names people by tag and joints by name; one accept applies them all as
    one ledger group, and one undo takes them all back (common practice: one action, one
    undo step)."""
    project, fids, first = scene
    fid = fids[0]
    _covered_frame(project, fid, first, owner_too=False)
    s, _, _ = _session(project, [fid])
    stops = s.stops(fid)
    assert [x.key for x in stops] == ["G:covered"]
    group = stops[0]
    assert [f.id for f in group.findings] == ["Fh", "Fi"]
    assert group.text.startswith("nearer people hide 3 joints of 2 people (2 to mark "
                                 "occluded, 1 invented spot to unlabel)")
    assert "person 1's knees occluded" in group.text
    assert "person 2's left wrist unlabelled" in group.text
    assert set(group.fix.preview.occluded) == {(first, 13), (first, 14)}
    assert group.fix.preview.unlabeled == ((first + 1, 9),)
    assert s.step(1).key == "G:covered"
    groups = len({e.group_id for e in project.history()})
    s.accept()
    assert (_v(project, fid, first, 13), _v(project, fid, first, 14),
            _v(project, fid, first + 1, 9)) == (1, 1, 0)
    assert len({e.group_id for e in project.history()}) == groups + 1, "one ledger group"
    project.undo()
    assert (_v(project, fid, first, 13), _v(project, fid, first, 14),
            _v(project, fid, first + 1, 9)) == (2, 2, 2), "one undo step takes all back"


def test_dismissing_the_grouped_stop_dismisses_each_of_its_findings(scene):
    project, fids, first = scene
    fid = fids[0]
    _covered_frame(project, fid, first, owner_too=False)
    s, _, said = _session(project, [fid])
    s.step(1)
    assert s.current.key == "G:covered"
    s.dismiss()
    assert project.dismissed()[fid] == {"FhFh", "FiFi"}
    assert _v(project, fid, first, 13) == 2, "nothing was changed"
    assert "dismissed as not a problem" in " ".join(said)


def test_a_persons_fixes_are_one_card_taken_with_one_key_as_one_undo_step(scene):
    """Person 1's wrong owner and hidden knees are one card (person 2's invented wrist,
    about nobody on it, stays its own stop); one accept applies both fixes as one ledger
    group and one undo takes both back (common practice: one action, one undo step)."""
    project, fids, first = scene
    fid = fids[0]
    _covered_frame(project, fid, first)
    s, _, _ = _session(project, [fid])
    assert [x.key for x in s.stops(fid)] == ["C:Fo+Fh", "Fi"]
    card = s.step(1)
    assert [f.id for f in card.parts] == ["Fo", "Fh"] and card.person_id == first
    assert set(card.fix.preview.occluded) == {(first, 0), (first, 13), (first, 14)}
    assert "person 1's knees occluded" in card.text, "named by tag and joint names"
    groups = len({e.group_id for e in project.history()})
    s.accept()
    assert [_v(project, fid, first, j) for j in (0, 13, 14)] == [1, 1, 1]
    assert len({e.group_id for e in project.history()}) == groups + 1, "one ledger group"
    project.undo()
    assert [_v(project, fid, first, j) for j in (0, 13, 14)] == [2, 2, 2], "one undo step"


def test_a_card_is_trimmed_by_key_before_it_is_taken(scene):
    """E puts the focus on a fix of the card (and selects its joints), D leaves it out, Y
    takes the others alone; the card stays in its place while it is trimmed."""
    project, fids, first = scene
    fid = fids[0]
    _covered_frame(project, fid, first)
    s, seen, said = _session(project, [fid])
    s.step(1)
    assert s.leave_out() is None and "E chooses a fix" in said[-1], "nothing under focus"
    s.focus_part(1)
    s.focus_part(1)
    assert s.current.focused.id == "Fh"
    s.select_stop(s.current)  # as the window does when a stop is shown
    assert set(s.selection.joints) == {(first, 13), (first, 14)}, "the part's joints selected"
    card = s.leave_out()
    assert seen[-1] is card and [f.id for f in card.taken] == ["Fo"]
    assert s.stop_place(card) == "\u00b7 stop 1 of 2", "kept in its place"
    s.accept()
    assert [_v(project, fid, first, j) for j in (0, 13, 14)] == [1, 2, 2], "knees left alone"


def test_a_cards_fix_under_focus_is_dismissed_alone(scene):
    """I with a fix under focus dismisses that finding only; the card keeps the others."""
    project, fids, first = scene
    fid = fids[0]
    _covered_frame(project, fid, first)
    s, _, _ = _session(project, [fid])
    s.step(1)
    s.focus_part(1)
    card = s.dismiss()
    assert project.dismissed()[fid] == {"FoFo"}
    assert [f.id for f in card.parts] == ["Fh"] and s.current is card
    s.accept()
    assert [_v(project, fid, first, j) for j in (0, 13, 14)] == [2, 1, 1]


def test_the_frames_people_are_held_once_by_the_view(scene):
    """The session's people are the view's (one holding): opening a frame clears the
    selection and a pick; an edit read again keeps the colours of those still shown."""
    project, fids, _ = scene
    s = Session(project)
    s.selection.select_joint(999, 1)
    s.view.set_pick("merge")
    s.open_frame(fids[0])
    assert s.people is s.view.ours and s.view.people == s.view.ours
    assert [p.id for p in s.people] == [p.id for p in project.people(fids[0])]
    assert s.selection.person is None and s.view.pick is None
    colours = dict(s.view.colours)
    first = s.people[0]
    project.apply(MoveJoint(fids[0], first.id, 0, 12.0, 34.0))
    s.reload_frame()
    assert tuple(s.view.person(first.id).keypoints[0, :2]) == (12.0, 34.0)
    assert s.view.colours == colours


def test_a_stop_selects_what_it_is_about_and_says_its_place(scene):
    project, fids, _ = scene
    run_triage(project)
    s, _seen, _said = _session(project, [fids[0], fids[1], fids[2]])
    moved = []
    s.events.connect("selection", lambda: moved.append(s.selection.person))
    stop = _follow(s, s.step(1))
    s.select_stop(stop)
    assert moved and s.selection.person == stop.person_id
    labelled = [j for j in stop.joints if s.view.person(stop.person_id).keypoints[j, 2] > 0]
    assert [j for _, j in s.selection.joints] == labelled
    n = len(s.stops(stop.frame_id))
    assert s.stop_place(stop) == f"\u00b7 stop 1 of {n}"


def test_a_hand_on_two_people_is_a_card_whose_accept_unlabels_the_stretched_ones(project):
    """A synthetic frame (tests/analysis/synth.py, invented bodies): person 1's left wrist
    put on person 2's nearest wrist, its forearm stretched to reach it. The walk stops at the
    ``shared-spot`` finding on a card like any other (its sentence in tag numbers and joint
    names), and one accept unlabels that wrist as one undo step (our own rule,
    app/analysis/triage/fixes.py ``shared_spots``)."""
    import numpy as np

    from app.model.labels import Person
    from tests.analysis.synth import person

    rng = np.random.default_rng(5)
    fid = project.frames()[0].id
    a, b = person(rng, (100.0, 120.0), 120.0), person(rng, (175.0, 120.0), 120.0)
    near = min((9, 10), key=lambda k: np.hypot(*(b[k, :2] - a[9, :2])))
    a[9, :2] = b[near, :2] + 0.5
    with project.bulk("SyntheticPeople", "synthetic people", "test") as bulk:
        first = bulk.allocate_person_ids(2)
        bulk.add_people([(fid, Person(first + n, kp, np.full(17, 0.9), ("auto",) * 17))
                         for n, kp in enumerate((a, b))])
    run_triage(project)
    s, _, _ = _session(project, [fid])
    stop = next(x for x in s.stops(fid) if any(f.kind == "shared-spot" for f in x.findings))
    assert "person 1's left wrist lies on person 2's" in stop.text
    assert stop.fix is not None and (first, 9) in stop.fix.preview.unlabeled
    while (shown := s.step(1)) is not None and shown.key != stop.key:
        pass
    groups = len({e.group_id for e in project.history()})
    s.accept()
    assert _v(project, fid, first, 9) == 0
    assert len({e.group_id for e in project.history()}) == groups + 1, "one undo step"


def _riding_frame(project, fid, first):
    """Stored findings (invented): person 1's nose to unlabel (a wrong owner), and person 2's
    knees and ankles, which a nearer person hides, to mark occluded (two findings)."""
    from app.analysis.triage.findings import Finding, Fix, FixPreview, labels_digest
    from app.model.edits import SetVisibility

    a, b = first, first + 1
    owner = Fix("mark person 1's nose unlabelled", (SetVisibility(fid, a, 0, 0),),
                FixPreview(unlabeled=((a, 0),)))
    found = [_note(fid, a, "Fo", "wrong-owner", 0, "nose", owner)]
    for key, joints, names in (("Fh", (13, 14), ("left knee", "right knee")),
                               ("Fk", (15, 16), ("left ankle", "right ankle"))):
        fix = Fix(f"mark person 2's {names[0]} and {names[1]} occluded",
                  tuple(SetVisibility(fid, b, j, 1) for j in joints),
                  FixPreview(occluded=tuple((b, j) for j in joints)))
        found.append(Finding(key, fid, "hidden", b, 2, joints, names, f"person 2's {key}",
                             (), 1.0, 0.9, fix, (b,), key * 2))
    project.store_findings({fid: (labels_digest(project.labels(fid)),
                                  [f.to_dict() for f in found])})


def test_the_frames_hidden_joints_ride_on_its_card_one_key_one_undo_step(scene):
    """The frame's joints to mark occluded ride on its other card (app/session/walk.py,
    ride): one stop, one accept applies every fix as one ledger group, one undo takes them
    back (common practice: one action, one undo step); dismissing the card dismisses its
    own finding and leaves the riders (found again by the frame's recompute). Synthetic."""
    project, fids, first = scene
    fid = fids[0]
    _riding_frame(project, fid, first)
    s, _, _ = _session(project, [fid])
    (card,) = s.stops(fid)
    assert card.key == "Fo&G:covered" and card.riders == ("Fh", "Fk")
    assert set(card.fix.preview.occluded) == {(first + 1, j) for j in (13, 14, 15, 16)}
    assert s.step(1).key == card.key
    groups = len({e.group_id for e in project.history()})
    before = [_v(project, fid, first, 0)] + [_v(project, fid, first + 1, j)
                                             for j in (13, 14, 15, 16)]
    s.accept()
    assert [_v(project, fid, first, 0)] + [_v(project, fid, first + 1, j)
                                           for j in (13, 14, 15, 16)] == [0, 1, 1, 1, 1]
    assert len({e.group_id for e in project.history()}) == groups + 1, "one ledger group"
    project.undo()
    assert [_v(project, fid, first, 0)] + [_v(project, fid, first + 1, j)
                                           for j in (13, 14, 15, 16)] == before
    _riding_frame(project, fid, first)
    s, _, _ = _session(project, [fid])
    s.step(1)
    s.dismiss()
    assert project.dismissed()[fid] == {"FoFo"}, "the riders are not dismissed"
