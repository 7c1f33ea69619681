"""``findings``, ``undo`` and ``redo`` from the command line, on a project of synthetic people
(tests/analysis/synth.py, invented): on frame 1 a body and a faint copy of its upper body at
one shift (found twice), on frame 2 a body cut into upper and lower halves, elsewhere plain
bodies. The one-line errors with status 2 are our own command-line convention (README,
"Commands").
"""

from __future__ import annotations

import json

import numpy as np
import pytest

from app.cli import main
from app.jobs import new_project
from app.store import Project
from tests.analysis.synth import store_duplicate_and_split

KEYS = {"id", "frame_id", "file_name", "kind", "person_id", "tag", "joints", "text",
        "confidence", "fix"}


@pytest.fixture
def proj(tmp_path, image_dir):
    folder = tmp_path / "p"
    with new_project(folder, images=image_dir, author="ana") as project:
        store_duplicate_and_split(project, lone_frames=None)
    return folder


def _people(folder):
    with Project.open(folder, read_only=True) as p:
        return {f.id: {q.id: q.keypoints.copy() for q in p.people(f.id)} for f in p.frames()}


def _same(a, b):
    assert a.keys() == b.keys()
    for f in a:
        assert a[f].keys() == b[f].keys()
        for pid in a[f]:
            np.testing.assert_array_equal(a[f][pid], b[f][pid])


def test_findings_json_lists_each_problem_with_its_fix(proj, capsys):
    assert main(["findings", str(proj), "--json", "-q"]) == 0
    rows = json.loads(capsys.readouterr().out)
    assert rows and all(set(r) >= KEYS for r in rows)
    worth = [r["confidence"] * max(len(r["joints"]), 1) * (0.25 if r["kind"] == "hidden" else 1)
             for r in rows]
    assert worth == sorted(worth, reverse=True)
    kinds = {(r["frame_id"], r["kind"]) for r in rows if r["fix"] is not None}
    assert (1, "duplicate") in kinds and (2, "split") in kinds
    dup = next(r for r in rows if r["kind"] == "duplicate")
    assert dup["file_name"] == "frame_0000.jpg" and dup["tag"] == 2
    assert dup["fix"]["summary"].startswith("delete person 2")
    assert [e["op"] for e in dup["fix"]["edits"]][-1] == "DeletePerson"
    assert main(["findings", str(proj), "--json", "-q", "--kinds", "split"]) == 0
    assert {r["kind"] for r in json.loads(capsys.readouterr().out)} == {"split"}


def test_accept_dry_run_then_accept_then_undo(proj, capsys):
    """--dry-run lists and changes nothing; --accept applies each fix as one group credited
    to the author and says how many in how many frames; undo --steps takes them back."""
    before = _people(proj)
    assert main(["findings", str(proj), "--accept", "duplicate,split", "--dry-run",
                 "-q"]) == 0
    out = capsys.readouterr().out
    assert "would apply 2 fixes in 2 frames" in out
    _same(_people(proj), before)
    assert main(["findings", str(proj), "--accept", "duplicate,split", "--author", "bo",
                 "-q"]) == 0
    assert "applied 2 fixes in 2 frames" in capsys.readouterr().out
    after = _people(proj)
    assert len(after[1]) == 1 and len(after[2]) == 1
    with Project.open(proj, read_only=True) as p:
        edits = [e for e in p.history() if e.kind == "edit"]
    assert {e.author for e in edits} == {"bo"} and len({e.group_id for e in edits}) == 2
    assert main(["findings", str(proj), "--accept", "duplicate,split", "-q"]) == 0
    assert "applied 0 fixes in 0 frames" in capsys.readouterr().out
    assert main(["undo", str(proj), "--steps", "2", "-q"]) == 0
    out = capsys.readouterr().out
    assert out.count("undid") == 2 and "accept finding" in out
    _same(_people(proj), before)
    assert main(["redo", str(proj), "-q"]) == 0
    assert capsys.readouterr().out.startswith("redid")


def test_dismiss_from_the_command_line(proj, capsys):
    main(["findings", str(proj), "--json", "-q"])
    dup = next(r for r in json.loads(capsys.readouterr().out) if r["kind"] == "duplicate")
    assert main(["findings", str(proj), "--dismiss", dup["id"], "-q"]) == 0
    assert capsys.readouterr().out.startswith(f"dismissed {dup['id']}")
    status = main(["findings", str(proj), "--json", "-q"])
    got = capsys.readouterr()
    assert status == 0, got.err
    assert dup["id"] not in {r["id"] for r in json.loads(got.out)}
    assert main(["undo", str(proj), "-q"]) == 0
    assert "dismiss finding" in capsys.readouterr().out
    main(["findings", str(proj), "--json", "-q"])
    assert dup["id"] in {r["id"] for r in json.loads(capsys.readouterr().out)}


@pytest.mark.parametrize("argv, says", [
    (["--kinds", "nonsense"], "--kinds: nonsense is not a kind of finding"),
    (["--accept", "all", "--min-confidence", "2"], "--min-confidence: 2.0 is not between"),
    (["--dry-run"], "--dry-run, --min-confidence and --carry go with --accept"),
    (["--dismiss", "F0000000000"], "no current finding 'F0000000000'"),
])
def test_bad_input_is_one_line_and_status_2(proj, capsys, argv, says):
    before = _people(proj)
    assert main(["findings", str(proj), "-q", *argv]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and says in err[0] and "Traceback" not in err[0]
    _same(_people(proj), before)


def test_undo_steps_must_be_positive_and_stop_when_nothing_is_left(proj, capsys):
    with pytest.raises(SystemExit) as stop:
        main(["undo", str(proj), "--steps", "0", "-q"])
    assert stop.value.code == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "--steps: 0 is not between 1" in err[0]
    assert main(["undo", str(proj), "-q"]) == 0
    assert "nothing more to undo" in capsys.readouterr().out


def _doubled_sequence(tmp_path):
    """Three synthetic dancers walking over eight frames (tests/sequences.py) and a copy of
    dancer 0 (shifted 6, 5 px, legs unlabelled) in frame ids 3-6: one error that lasts four
    frames, on one track once linked."""
    from app.jobs_tracks import link_project
    from tests import sequences

    people = sequences.dancers(frames=8, n=3)
    dup = np.full((8, 1, 17, 3), np.nan)
    for t in range(2, 6):
        dup[t, 0] = people[t, 0]
        dup[t, 0, :, :2] += (6.0, 5.0)
        dup[t, 0, 11:, 2] = 0
    project, _ = sequences.make_project(tmp_path, np.concatenate([people, dup], axis=1))
    with project:
        link_project(project)
        return project.folder


@pytest.mark.parametrize("carry, groups", [(False, 4), (True, 2)])
def test_accept_with_carry_takes_a_fix_to_the_frames_with_the_same_error(tmp_path, capsys,
                                                                         carry, groups):
    """Frame by frame each copy is deleted by its own fix (four actions); with --carry the
    first fix is carried to the three frames after it (two actions), with the same result."""
    folder = _doubled_sequence(tmp_path)
    args = ["findings", str(folder), "--accept", "duplicate", "-q"] + (["--carry"] if carry
                                                                       else [])
    assert main(args) == 0
    out = capsys.readouterr().out
    assert ("1 fix carried to 3 more frames" in out) is carry
    with Project.open(folder, read_only=True) as p:
        assert [len(p.people(f.id)) for f in p.frames()] == [3] * 8
        edits = {e.group_id for e in p.history() if e.kind == "edit"}
    assert len(edits) == groups


def test_carry_goes_with_accept_and_not_with_dry_run(proj, capsys):
    assert main(["findings", str(proj), "--carry", "-q"]) == 2
    assert "--carry go with --accept" in capsys.readouterr().err
    assert main(["findings", str(proj), "--accept", "all", "--carry", "--dry-run", "-q"]) == 2
    assert "give one of them" in capsys.readouterr().err


def test_undo_names_people_by_tag_and_joints_by_name(proj, capsys):
    """The ledger records ``joint 9 of person 49`` (index, stable id); what `undo` prints
    names the joint and the person as the Canvas does (our own naming rule, README)."""
    from app.model.edits import MoveJoint

    with Project.open(proj, author="ana") as p:
        frame = p.frames()[0].id
        first = p.people(frame)[0].id
        p.apply(MoveJoint(frame, first, 9, 12.0, 34.0))
    assert main(["undo", str(proj), "-q"]) == 0
    out = capsys.readouterr().out
    assert f"move person 1 (#{first})'s left wrist to (12.0, 34.0)" in out, out
