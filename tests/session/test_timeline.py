"""The timeline's cells and marks (app/session/timeline.py), without a window, on synthetic
sequences (tests/sequences.py): three dancers walking over twelve frames, dancer 0's and
dancer 1's left wrists exchanged in frame ids 4-7 (as tests/test_carry.py), dancer 2 missing
from frame id 10. The rules checked are the module's own (no outside source)."""

from __future__ import annotations

import numpy as np
import pytest

from app.jobs_tracks import link_project, propose_carry, take_batch
from app.model import MoveJoint, ReassignJoint, SetTrack
from app.session.timeline import Timeline
from tests import sequences
from tests.sequences import pid

WRIST = 9


def _people():
    people = sequences.dancers()
    for t in range(3, 7):
        people[t, [0, 1], WRIST] = people[t, [1, 0], WRIST]
    people[9, 2] = np.nan  # dancer 2 not found in frame id 10
    return people


@pytest.fixture
def walk(tmp_path):
    project, _ = sequences.make_project(tmp_path, _people())
    link_project(project)
    yield project
    project.close()


def _track(project, fid, person):
    return next(p.track for p in project.people(fid) if p.id == person)


def test_one_cell_per_frame_with_the_track_present_or_absent(walk):
    timeline = Timeline(walk)
    strip = timeline.strip(5, pid(4, 2))
    assert strip is not None and strip.length == 12 and strip.track == _track(walk, 5, pid(4, 2))
    assert [c.frame_id for c in strip.cells] == list(range(1, 13))
    assert [c.place for c in strip.cells] == list(range(1, 13))
    assert [c.present for c in strip.cells] == [f != 10 for f in range(1, 13)]
    assert [c.person_id for c in strip.cells][:2] == [pid(0, 2), pid(1, 2)]
    assert [c.frame_id for c in strip.cells if c.current] == [5]
    assert not any(c.corrected or c.findings or c.batch for c in strip.cells)
    assert "frame 5 of 12" in strip.text and "absent from 1 frame" in strip.text


def test_no_strip_without_a_person_on_a_track(walk):
    timeline = Timeline(walk)
    assert timeline.strip(5, None) is None
    walk.apply(SetTrack(5, pid(4, 0), None))
    timeline.forget([5])
    assert timeline.strip(5, pid(4, 0)) is None


def test_a_long_sequence_is_shown_through_a_window_that_scrolls_and_stays_inside(walk):
    timeline = Timeline(walk)
    person = pid(5, 1)
    strip = timeline.strip(6, person, span=5)
    assert [c.frame_id for c in strip.cells] == [4, 5, 6, 7, 8]
    assert strip.more_before() and strip.more_after()
    timeline.scroll(-10)
    assert [c.frame_id for c in timeline.strip(6, person, span=5).cells] == [1, 2, 3, 4, 5]
    timeline.scroll(3)
    assert [c.frame_id for c in timeline.strip(6, person, span=5).cells] == [4, 5, 6, 7, 8]
    timeline.scroll(50)
    strip = timeline.strip(6, person, span=5)
    assert [c.frame_id for c in strip.cells] == [8, 9, 10, 11, 12] and not strip.more_after()
    assert strip.current is None  # the frame shown scrolled out of view
    # Another frame centres the window again; near the start it cannot centre.
    assert [c.frame_id for c in timeline.strip(2, pid(1, 1), span=5).cells] == [1, 2, 3, 4, 5]


def test_corrected_follows_the_ledger_and_its_undo(walk):
    timeline = Timeline(walk)
    walk.apply(MoveJoint(7, pid(6, 0), 0, 300.0, 100.0))
    timeline.forget([7])
    cells = {c.frame_id: c for c in timeline.strip(5, pid(4, 0)).cells}
    assert [f for f, c in cells.items() if c.corrected] == [7]
    # the other dancer of that frame was not corrected
    assert not any(c.corrected for c in timeline.strip(5, pid(4, 1)).cells)
    walk.undo()
    timeline.forget([7])
    assert not any(c.corrected for c in timeline.strip(5, pid(4, 0)).cells)
    walk.redo()
    timeline.forget([7])
    assert [c.frame_id for c in timeline.strip(5, pid(4, 0)).cells if c.corrected] == [7]


def test_findings_are_counted_on_the_person_they_are_about_while_they_are_current(walk):
    """Findings stored for frame 5 about dancer 0 count on dancer 0's cell only, and stop
    counting once the frame's labels change (they are no longer the findings of the frame
    as it is)."""
    from app.analysis.triage.findings import labels_digest

    finding = {"id": "f1", "frame_id": 5, "kind": "swapped", "person_id": pid(4, 0),
               "people": [pid(4, 0), pid(4, 1)], "text": "synthetic", "fingerprint": "x"}
    walk.store_findings({5: (labels_digest(walk.labels(5)), [finding])})
    timeline = Timeline(walk)
    for dancer, expected in ((0, 1), (1, 1), (2, 0)):
        cell = timeline.strip(5, pid(4, dancer)).cell_of(5)
        assert cell.findings == expected, dancer
    walk.apply(MoveJoint(5, pid(4, 2), 0, 500.0, 100.0))
    timeline.forget([5])
    assert timeline.strip(5, pid(4, 0)).cell_of(5).findings == 0


def test_a_proposed_batch_marks_where_it_goes_and_where_it_ends(walk):
    """The wrist given back in frame 6 carries to frames 4, 5 and 7 (tests/test_carry.py):
    proposed, the cells say so; taken, the same marks say it is taken."""
    timeline = Timeline(walk)
    applied = walk.apply(ReassignJoint(6, pid(5, 0), WRIST, pid(5, 1)))
    batch = timeline.propose(6, applied.changes)
    assert [g.frame_id for g in batch.edits] == \
        [g.frame_id for g in propose_carry(walk, 6, applied.changes).edits] == [5, 4, 7]
    timeline.forget([6])
    strip = timeline.strip(6, pid(5, 0))
    roles = {c.frame_id: c.batch for c in strip.cells if c.batch}
    assert roles == {3: "stop", 4: "last", 5: "carried", 6: "origin", 7: "last", 8: "stop"}
    assert not strip.taken and "can carry" in strip.text
    assert timeline.carry.worklist_marks() == {4: "last", 7: "last"}
    take_batch(walk, batch)
    timeline.carry.show(batch, taken=True)
    timeline.forget([4, 5, 7])
    strip = timeline.strip(6, pid(5, 0))
    assert strip.taken and "carried the correction of frame 6 to 3 frames" in strip.text
    assert [c.frame_id for c in strip.cells if c.corrected] == [4, 5, 6, 7]
    timeline.carry.clear()
    assert not any(c.batch for c in timeline.strip(6, pid(5, 0)).cells)


def test_nothing_is_proposed_or_shown_outside_a_sequence(walk):
    """A folder marked as not a sequence has no timeline and carries nothing."""
    from app.jobs_tracks import mark_not_sequence

    applied = walk.apply(ReassignJoint(6, pid(5, 0), WRIST, pid(5, 1)))
    mark_not_sequence(walk, [""])
    timeline = Timeline(walk)
    assert timeline.propose(6, applied.changes) is None
    assert timeline.carry.roles() == {} and timeline.strip(6, pid(5, 0)) is None


def test_a_proposal_worked_out_before_a_change_is_dropped(walk):
    """The window works a proposal out on a worker: an edit made meanwhile (which clears the
    marks) makes its answer stale, and a later proposal's answer is the one kept."""
    timeline = Timeline(walk)
    applied = walk.apply(ReassignJoint(6, pid(5, 0), WRIST, pid(5, 1)))
    work = timeline.propose_work(6, applied.changes)
    token = timeline.begin_proposal()
    batch = work()
    timeline.drop_carry()  # an edit arrived before the answer
    assert not timeline.offer(token, batch) and timeline.carry.batch is None
    newer = timeline.begin_proposal()
    assert timeline.offer(newer, work()) and timeline.carry.worklist_marks() == {4: "last",
                                                                              7: "last"}
    # the people corrected on no track: nothing to work out, and the marks go
    walk.apply(SetTrack(6, pid(5, 2), None))
    timeline.forget([6])
    moved = walk.apply(MoveJoint(6, pid(5, 2), 0, 500.0, 90.0))
    assert timeline.propose_work(6, moved.changes) is None and timeline.carry.batch is None


def test_the_proposal_after_a_correction_holds_the_persons_whole_correction(tmp_path):
    """Dancer 0's wrist exchanged in frames 4-7 and its elbow dragged off in frames 4-5
    (synthetic): after the wrist is given back and then the elbow put back in frame 4, the
    proposal made after the elbow carries both, each as far as its error lasts (to frame 7,
    ending at 8), not the elbow alone (frame 5)."""
    people = sequences.dancers()
    for t in range(3, 7):
        people[t, [0, 1], WRIST] = people[t, [1, 0], WRIST]
    people[3:5, 0, 7, 0] -= 30.0
    truth = sequences.dancers()
    project, _ = sequences.make_project(tmp_path, people)
    with project:
        link_project(project)
        project.apply(ReassignJoint(4, pid(3, 1), WRIST, pid(3, 0)))
        elbow = project.apply(MoveJoint(4, pid(3, 0), 7, *truth[3, 0, 7, :2]))
        batch = Timeline(project).propose(4, elbow.changes)
    assert [g.frame_id for g in batch.edits] == [5, 6, 7]
    assert batch.stopped_forward == 8
