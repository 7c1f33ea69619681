"""Findings through the store: dismiss, accept and undo round trips; each fix all or nothing;
accepting twice proposes nothing the first run fixed; stale findings are recomputed.

The people are synthetic (tests/analysis/synth.py, invented): a body found twice (a faint
copy of its upper body at one shift) on frame 1, a body cut into upper and lower halves on
frame 2, and plain bodies elsewhere.
"""

from __future__ import annotations

import numpy as np
import pytest

from app.errors import EditRefused, NotFound
from app.jobs_findings import accept_fixes, current_findings, dismiss, parse_kinds
from app.model import EditGroup, MoveJoint, ReassignJoint
from app.model.edits import DismissFinding
from tests.analysis.synth import store_duplicate_and_split


@pytest.fixture
def scene(project):
    """Frame 1: a body and its faint copy; frame 2: a body in two halves; frame 3: a body."""
    return project, project.frames(), store_duplicate_and_split(project)


def _labels(project, frame_id):
    return {p.id: p.keypoints.copy() for p in project.people(frame_id)}


def test_findings_name_the_problems_and_propose_fixes(scene):
    project, frames, made = scene
    found = current_findings(project)
    kinds = {(fid, f.kind) for fid, fs in found.items() for f in fs if f.fix is not None}
    assert (frames[0].id, "duplicate") in kinds and (frames[1].id, "split") in kinds
    assert not [f for f in found[frames[2].id] if f.fix is not None]
    dup = next(f for f in found[frames[0].id] if f.kind == "duplicate")
    assert dup.person_id == made["ids"][1] and dup.tag == 2
    assert dup.text.startswith("person 2 is person 1 found twice")


def test_dismiss_undo_redo_round_trip(scene):
    """A dismissal is a ledger edit credited to its author; the finding is gone while the
    labels stay the same, back after undo, gone again after redo."""
    project, frames, _ = scene
    dup = next(f for f in current_findings(project)[frames[0].id] if f.kind == "duplicate")
    dismiss(project, [dup.id])
    entry = project.history(limit=1)[0]
    assert entry.author == "ana" and entry.action == "DismissFinding"
    assert dup.id not in {f.id for f in current_findings(project)[frames[0].id]}
    assert project.frame(frames[0].id).state.value == "untouched"
    project.undo()
    assert dup.id in {f.id for f in current_findings(project)[frames[0].id]}
    project.redo()
    assert dup.id not in {f.id for f in current_findings(project)[frames[0].id]}


def test_a_dismissed_finding_returns_once_its_labels_change(scene):
    project, frames, made = scene
    dup = next(f for f in current_findings(project)[frames[0].id] if f.kind == "duplicate")
    dismiss(project, [dup.id])
    copy = made["ids"][1]
    x, y = project.labels(frames[0].id).people[copy].keypoints[0, :2]
    project.apply(MoveJoint(frames[0].id, copy, 0, x + 0.5, y))
    again = [f for f in current_findings(project)[frames[0].id] if f.kind == "duplicate"]
    assert [f.id for f in again] == [dup.id] and again[0].fingerprint != dup.fingerprint


def test_accept_applies_each_fix_as_one_undo_step(scene):
    """Accepting deletes the copy and merges the halves, one ledger group per fix credited to
    the author; undoing both steps gives back exactly the labels before."""
    project, frames, made = scene
    before = {f.id: _labels(project, f.id) for f in frames}
    report = accept_fixes(project, {"duplicate", "split"})
    assert sorted((f.frame_id, f.kind) for f in report.fixes) == [
        (frames[0].id, "duplicate"), (frames[1].id, "split")]
    assert sorted(_labels(project, frames[0].id)) == [made["ids"][0]]
    (merged,) = _labels(project, frames[1].id).values()
    np.testing.assert_array_equal(merged, made["whole"])
    groups = {e.group_id for e in project.history() if e.kind == "edit"}
    assert len(groups) == 2
    assert all(e.author == "ana" for e in project.history() if e.kind == "edit")
    project.undo()
    project.undo()
    for f in frames:
        after = _labels(project, f.id)
        assert after.keys() == before[f.id].keys()
        for pid in after:
            np.testing.assert_array_equal(after[pid], before[f.id][pid])


def test_accepting_twice_proposes_nothing_the_first_run_fixed(scene):
    project, _, _ = scene
    first = accept_fixes(project, {"duplicate", "split"})
    again = accept_fixes(project, {"duplicate", "split"}, dry_run=True)
    assert first.fixes and not again.fixes
    assert not {f.id for f in again.fixes} & {f.id for f in first.fixes}


def test_a_dry_run_changes_nothing(scene):
    project, _, _ = scene
    ledger = project.counts()["ledger"]
    report = accept_fixes(project, None, dry_run=True)
    assert report.fixes and project.counts()["ledger"] == ledger


def test_a_fix_is_all_or_nothing(scene):
    """A group whose second edit is refused (a joint that is not labelled cannot be given
    away) changes nothing at all: the first edit is not kept, the ledger is as it was."""
    project, frames, made = scene
    fid, body = frames[0].id, made["ids"][0]
    before = _labels(project, fid)
    ledger = project.counts()["ledger"]
    x, y = before[body][0, :2]
    group = EditGroup(fid, (MoveJoint(fid, body, 0, x + 3.0, y),
                            ReassignJoint(fid, made["ids"][1], 15, body)))
    with pytest.raises(EditRefused):
        project.apply(group)
    np.testing.assert_array_equal(_labels(project, fid)[body], before[body])
    assert project.counts()["ledger"] == ledger


def test_stored_findings_are_recomputed_when_the_labels_change(scene):
    """Triage stores the findings with a digest of the labels; an edit since makes the frame
    stale, and reading the findings recomputes it."""
    project, frames, _ = scene
    current_findings(project)
    stored = project.findings()
    assert frames[0].id in stored and frames[2].id in stored
    project.apply(DismissFinding(frames[2].id, "not-a-real-fingerprint", "duplicate"))
    digest = project.findings_digests()[frames[2].id]
    current_findings(project, [frames[2].id])
    assert project.findings_digests()[frames[2].id] != digest


def test_unknown_findings_and_kinds_are_refused(scene):
    project, _, _ = scene
    with pytest.raises(NotFound):
        dismiss(project, ["F0000000000"])
    from app.errors import BadInput

    with pytest.raises(BadInput, match="not a kind of finding"):
        parse_kinds("duplicate,nonsense")


def test_one_finding_is_accepted_only_while_it_is_current(scene):
    """accept_finding (what a walk through the findings accepts with one key) applies a
    current finding's fix as one group, and refuses one whose frame changed since."""
    from app.jobs_findings import accept_finding

    project, frames, made = scene
    found = current_findings(project)
    split = next(f for f in found[frames[1].id] if f.kind == "split")
    dup = next(f for f in found[frames[0].id] if f.kind == "duplicate")
    body = made["ids"][0]
    x, y = project.labels(frames[0].id).people[body].keypoints[0, :2]
    project.apply(MoveJoint(frames[0].id, body, 0, x + 1.0, y))
    ledger = project.counts()["ledger"]
    with pytest.raises(EditRefused, match="changed since"):
        accept_finding(project, dup)
    assert project.counts()["ledger"] == ledger
    applied = accept_finding(project, split)
    assert applied.group_id is not None and len(project.people(frames[1].id)) == 1
