"""Linking a project's sequences into tracks and the `track` command, on synthetic
sequences (tests/sequences.py)."""

import json

import numpy as np
import pytest

from app.cli import main
from app.jobs_tracks import link_project, project_sequences, track_step
from app.model import DeletePerson, SetTrack
from app.model.skeleton import coco_body
from app.store import Project
from tests import sequences
from tests.sequences import pid


@pytest.fixture
def walk(tmp_path):
    project, frames = sequences.make_project(tmp_path, sequences.dancers())
    yield project, frames
    project.close()


def _track(project, t, p):
    return next(q.track for q in project.people(t + 1) if q.id == pid(t, p))


def test_image_names_are_taken_in_natural_order_and_each_dancer_is_one_track(walk):
    project, _ = walk
    (seq,) = project_sequences(project)
    assert [project.frame(f).file_name for f in seq.frame_ids][:3] == \
        ["step_1.jpg", "step_2.jpg", "step_3.jpg"]
    linked = link_project(project)
    assert (linked.sequences, linked.frames, linked.people, linked.links) == (1, 12, 36, 33)
    assert [len(t.frames) for t in linked.tracks] == [12, 12, 12]
    for p in range(3):
        assert {_track(project, t, p) for t in range(12)} == {p + 1}


def test_linking_again_keeps_the_tracks_someone_set(walk):
    project, _ = walk
    link_project(project)
    # Someone says dancer 0 in frame index 5 is really on track 9 (an edit).
    project.apply(SetTrack(6, pid(5, 0), 9))
    linked = link_project(project)
    assert linked.kept == 1
    assert _track(project, 5, 0) == 9
    # The linking carries the edited track on from there; the frames before keep one track.
    assert {_track(project, t, 0) for t in range(6, 12)} == {9}
    assert len({_track(project, t, 0) for t in range(5)}) == 1
    assert _track(project, 0, 0) not in (9, _track(project, 0, 1), _track(project, 0, 2))


def test_a_folder_that_is_not_a_sequence_is_not_linked(walk, capsys):
    project, _ = walk
    where = project.folder
    project.close()
    assert main(["track", str(where), "--not-a-sequence", "", "-q"]) == 0
    assert "0 tracks" in capsys.readouterr().out
    assert main(["track", str(where), "--a-sequence", "", "--json", "-q"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert (out["sequences"], out["links"], len(out["tracks"])) == (1, 33, 3)
    assert out["tracks"][0]["frames"] == list(range(1, 13))
    assert main(["track", str(where), "--not-a-sequence", "elsewhere", "-q"]) == 2
    assert "no folder of frames is called 'elsewhere'" in capsys.readouterr().err


def test_findings_over_time_join_triage_and_findings_once_tracks_exist(tmp_path, capsys):
    """A synthetic dancer flipped left-right for three frames: nothing over time before
    linking; after `track`, `findings` lists a flipped stretch, `--accept` swaps the three
    frames back as one undo step, and `undo` takes it back whole."""
    people = sequences.dancers()
    people[3:6, 0] = people[3:6, 0][:, coco_body().flip_index]
    project, _ = sequences.make_project(tmp_path, people)
    where = str(project.folder)
    project.close()
    kinds = ["--kinds", "flipped-stretch", "-q"]
    assert main(["findings", where, "--json", *kinds]) == 0
    assert json.loads(capsys.readouterr().out) == []
    assert main(["track", where, "-q"]) == 0
    capsys.readouterr()
    assert main(["triage", where, "--json", "-q"]) == 0
    over = {r["frame"]: [f["kind"] for f in r["over_time"]]
            for r in json.loads(capsys.readouterr().out)}
    assert over[4] == ["flipped-stretch"]
    assert main(["findings", where, "--json", *kinds]) == 0
    (found,) = json.loads(capsys.readouterr().out)
    assert (found["frame_id"], found["kind"], found["person_id"]) == (4, "flipped-stretch",
                                                                    pid(3, 0))
    assert [e["op"] for e in found["fix"]["edits"]] == ["SwapSides"] * 3
    assert main(["findings", where, "--accept", "flipped-stretch", *kinds[2:]]) == 0
    capsys.readouterr()
    with Project.open(where) as p:
        for t in range(12):
            (dancer,) = [q for q in p.people(t + 1) if q.id == pid(t, 0)]
            assert np.allclose(dancer.keypoints[:, :2], sequences.dancers()[t, 0, :, :2])
    assert main(["undo", where, "-q"]) == 0
    with Project.open(where) as p:
        (dancer,) = [q for q in p.people(5) if q.id == pid(4, 0)]
        assert np.allclose(dancer.keypoints[:, :2], people[4, 0, :, :2])
        assert p.can_undo() is False


def test_stepping_along_a_track_goes_to_the_frames_where_it_has_someone(walk):
    project, _ = walk
    link_project(project)
    assert track_step(project, 1, pid(0, 1), 1) == (2, pid(1, 1), 2, 12)
    assert track_step(project, 5, pid(4, 1), -1) == (4, pid(3, 1), 4, 12)
    assert track_step(project, 12, pid(11, 1), 1) is None
    project.apply(DeletePerson(3, pid(2, 1)))  # the track skips frame 3 now
    assert track_step(project, 2, pid(1, 1), 1) == (4, pid(3, 1), 3, 11)
