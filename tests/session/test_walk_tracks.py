"""The walk in a project with tracks: a frame's stored findings are read with its findings
over time (not stored), and the joints the frames around place are one stop, accepted as
one undo step.

Data: synthetic dancers walking at a steady pace (tests/sequences.py), linked into tracks;
two joints of one dancer unlabelled by hand in the middle frame. Where the frames around put
them is where the dancer's steady walk has them (our own rule, app/analysis/triage/
temporal.py); one action, one undo step is common practice (no source).
"""

from __future__ import annotations

import numpy as np

from app.analysis.triage.findings import labels_digest
from app.jobs_tracks import link_project
from app.session import Session
from app.session.walk import GAP_KEY
from tests import sequences

LEFT_ELBOW, LEFT_WRIST = 7, 9


def _linked(tmp_path, people):
    """A project of ``people`` (synthetic dancers) linked into tracks, every frame's own
    findings stored as none, so that the walk's stops are the findings over time."""
    project, fids = sequences.make_project(tmp_path, people)
    link_project(project)
    project.store_findings({fid: (labels_digest(project.labels(fid)), []) for fid in fids})
    return project, fids


def test_the_joints_the_frames_around_place_are_one_stop_of_the_walk(tmp_path):
    people = sequences.dancers(frames=5, n=2)
    truth = people[2, 1, [LEFT_ELBOW, LEFT_WRIST], :2].copy()
    people[2, 1, [LEFT_ELBOW, LEFT_WRIST]] = (0.0, 0.0, 0)
    project, _ = _linked(tmp_path, people)
    with project:
        s = Session(project, order=lambda: [3, 1, 2, 4, 5])
        s.open_frame(3)
        stop = s.step(1)
        assert stop.key == GAP_KEY and {f.kind for f in stop.findings} == {"joint-gap"}
        assert "person 2's left elbow and left wrist" in stop.text
        groups = len({e.group_id for e in project.history()})
        s.accept()
        placed = next(p for p in project.people(3) if p.id == sequences.pid(2, 1)).keypoints
        assert np.hypot(*(placed[[LEFT_ELBOW, LEFT_WRIST], :2] - truth).T).max() < 2.0
        assert len({e.group_id for e in project.history()}) == groups + 1, "one undo step"
        project.undo()
        back = next(p for p in project.people(3) if p.id == sequences.pid(2, 1)).keypoints
        assert (back[[LEFT_ELBOW, LEFT_WRIST], 2] == 0).all()


def test_an_accepted_fix_forgets_the_findings_over_time_within_its_reach_only(tmp_path):
    """Accepting a fix of joints forgets the findings over time kept for the frames within
    its reach (``temporal.REACH``) and keeps those of the frames beyond, which equal a fresh
    computation. Synthetic dancers, joints unlabelled by hand in frames 3 and 12."""
    from app.analysis.triage.temporal import REACH
    from app.jobs_findings import time_findings

    people = sequences.dancers(frames=12, n=2)
    people[2, 1, [LEFT_ELBOW, LEFT_WRIST]] = (0.0, 0.0, 0)
    people[11, 0, LEFT_WRIST] = (0.0, 0.0, 0)
    project, fids = _linked(tmp_path, people)
    with project:
        s = Session(project, order=lambda: [3, 12, *range(1, 3), *range(4, 12)])
        # The fold ahead of the next frame (run at once here, without a worker) would read
        # the findings over time of a frame within reach again.
        s._fold_ahead = lambda fid: None
        for fid in fids:
            s.stops(fid)
        s.open_frame(3)
        assert s.step(1).key == GAP_KEY
        before = s._over_time[12]
        s.accept()
        assert 3 + REACH < 12
        assert all(fid not in s._over_time for fid in fids if abs(fid - 3) <= REACH)
        kept = s._over_time[12]
        assert kept is before, "kept, not computed again"
        assert [f.kind for f in kept] == ["joint-gap"]
        assert repr(kept) == repr(time_findings(project, [12])[12])


def test_the_findings_over_time_of_a_few_frames_are_those_of_all_frames(tmp_path):
    """``time_findings`` of one frame reads only the frames within reach and the later
    frames' tracks from the project; the findings equal those of all frames computed
    together (repr: every field). Synthetic dancers over 14 frames, one joint unlabelled by
    hand in frames 2 and 13 and one dismissed."""
    from app.jobs_findings import time_findings
    from app.model.edits import DismissFinding

    people = sequences.dancers(frames=14, n=2)
    people[1, 1, LEFT_WRIST] = (0.0, 0.0, 0)
    people[12, 0, LEFT_WRIST] = (0.0, 0.0, 0)
    people[12, 1, LEFT_ELBOW] = (0.0, 0.0, 0)
    project, fids = sequences.make_project(tmp_path, people)
    with project:
        link_project(project)
        every = time_findings(project)
        assert len(every[13]) == 2
        project.apply(DismissFinding(13, every[13][0].fingerprint, every[13][0].kind))
        every = time_findings(project)
        assert sorted(every) == [2, 13] and len(every[13]) == 1
        for fid in fids:
            assert repr(time_findings(project, [fid]).get(fid)) == repr(every.get(fid)), fid
        assert repr(time_findings(project, [2, 13])) == repr(every)


def test_the_other_frames_a_fix_along_a_track_changes_are_read_ahead_in_the_background(
        tmp_path):
    """Accepting a fix over several frames (a flipped stretch swapped back in frames 4-6)
    leaves frames 5 and 6 with stale stored findings: their stops are computed in the
    background while the walk is at its next stop (frame 8), so the step into frame 5 reads
    them ready; they equal the stops a fresh session reads (repr: every field). An edit of
    frame 6 before its result comes in drops that result. Synthetic dancers; the stretch
    flipped and a joint moved by hand."""
    from app.model.edits import MoveJoint
    from app.model.skeleton import coco_body

    people = sequences.dancers(frames=9, n=2)
    people[3:6, 0] = people[3:6, 0][:, coco_body().flip_index]
    people[7, 1, LEFT_WRIST, 0] += 60.0  # a jump in frame 8, the walk's next stop
    people[4, 1, LEFT_WRIST] = (0.0, 0.0, 0)  # frame 5 keeps a stop of its own
    project, fids = sequences.make_project(tmp_path, people)
    order = [4, 8, 5, 6, 1, 2, 3, 7, 9]
    with project:  # each dancer on a track of its own (the linker would break the stretch)
        project.set_tracks([(sequences.pid(t, p), p + 1, "hand") for t in range(9)
                            for p in range(2)], "tracks by hand")
        project.store_findings({fid: (labels_digest(project.labels(fid)), [])
                                for fid in fids})
        jobs = []
        s = Session(project, order=lambda: order,
                    background=lambda job, deliver: jobs.append((job, deliver)))
        s.open_frame(4)
        stop = s.step(1)
        assert {f.kind for f in stop.findings} == {"flipped-stretch"}
        assert s.accept().frame_id == 8
        assert {5, 6} <= s.pending and 5 not in s._stops and 6 not in s._stops
        ahead = {deliver.args[0]: (job(), deliver) for job, deliver in jobs
                 if getattr(deliver, "func", None) == s.read_ahead_in}
        assert sorted(ahead) == [5, 6]
        result, deliver = ahead[5]
        assert deliver(result) and 5 not in s.pending
        fresh = Session(project, order=lambda: order)
        assert s._stops[5] and repr(s._stops[5]) == repr(fresh.stops(5))
        s.project.apply(MoveJoint(6, sequences.pid(5, 1), LEFT_WRIST, 300.0, 200.0))
        s.labels_changed([6])
        result, deliver = ahead[6]
        assert not deliver(result) and 6 not in s._stops


def test_the_next_frames_findings_over_time_read_ahead_for_an_accept_equal_a_fresh_read(
        tmp_path):
    """While the last stop of a frame is shown, the next frame's findings over time are
    read ahead as that stop's accept would leave them; the accept uses them, and they equal
    a computation after it. Synthetic dancers, joints unlabelled by hand in frames 3 and 4
    (within each other's reach)."""
    from app.jobs_findings import time_findings

    people = sequences.dancers(frames=6, n=2)
    people[2, 1, [LEFT_ELBOW, LEFT_WRIST]] = (0.0, 0.0, 0)
    people[3, 0, LEFT_WRIST] = (0.0, 0.0, 0)
    project, _ = _linked(tmp_path, people)
    with project:
        s = Session(project, order=lambda: [3, 4, 1, 2, 5, 6])
        s.open_frame(3)
        assert s.step(1).key == GAP_KEY and [x.key for x in s.stops(3)] == [GAP_KEY]
        ahead = s._ahead[1]
        assert ahead and s._ahead[0][5] == 4
        s.accept()
        assert s.current.frame_id == 4 and s._over_time[4] is ahead, "used, not computed"
        assert repr(ahead) == repr(time_findings(project, [4])[4])


def test_the_read_ahead_also_serves_an_accept_that_drops_the_stops_after_it(tmp_path):
    """A stop that is not its frame's last, whose accept drops every stop after it (they are
    about the person it mends), reads the next frame's findings over time ahead too.
    Synthetic dancers as above; a stored finding (invented here) about dancer 2's left
    wrist, which the frames around place too (a stop of its own: the two would change the
    wrist two ways)."""
    from app.analysis.triage.findings import Finding, Fix, FixPreview
    from app.model.edits import SetVisibility

    people = sequences.dancers(frames=6, n=2)
    people[2, 1, [LEFT_ELBOW, LEFT_WRIST]] = (0.0, 0.0, 0)
    people[3, 0, LEFT_WRIST] = (0.0, 0.0, 0)
    project, fids = sequences.make_project(tmp_path, people)
    with project:
        link_project(project)
        pid = project.people(3)[1].id
        fix = Fix("unlabel it", (SetVisibility(3, pid, LEFT_WRIST, 0),),
                  FixPreview(unlabeled=((pid, LEFT_WRIST),)))
        mine = Finding("Fm", 3, "wrong-owner", pid, 2, (LEFT_WRIST,), ("left wrist",),
                       "person 2's left wrist", (), 1.0, 0.99, fix, (pid,), "FmFm")
        project.store_findings({fid: (labels_digest(project.labels(fid)),
                                      [mine.to_dict()] if fid == 3 else []) for fid in fids})
        s = Session(project, order=lambda: [3, 4, 1, 2, 5, 6])
        s.open_frame(3)
        first = s.step(1)
        keys = [x.key for x in s.stops(3)]
        assert len(keys) == 2 and keys.index(first.key) == 0, keys
        assert s._ahead is not None and s._ahead[0][5] == 4, "read ahead though not last"
