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


def test_the_joints_the_frames_around_place_are_one_stop_of_the_walk(tmp_path):
    people = sequences.dancers(frames=5, n=2)
    truth = people[2, 1, [LEFT_ELBOW, LEFT_WRIST], :2].copy()
    people[2, 1, [LEFT_ELBOW, LEFT_WRIST]] = (0.0, 0.0, 0)
    project, fids = sequences.make_project(tmp_path, people)
    with project:
        link_project(project)
        project.store_findings({fid: (labels_digest(project.labels(fid)), [])
                                for fid in fids})
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
