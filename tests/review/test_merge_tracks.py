"""Track edits in a review packet merge like the other label edits: three ways, per person.

The rule is the usual three-way rule of version control (common practice, no source), applied
to a person's track as to a joint's label. Every label and track is synthetic; "ana"
annotates, "bea" reviews.
"""

from __future__ import annotations

from app.jobs_tracks import link_project
from app.model.edits import SetTrack
from app.model.tracks import exchange_tracks, join_tracks, split_track
from app.review.merge import merge_packet
from tests.review.conftest import review, send


def _tracks(project, frame_id):
    return {p.id: p.track for p in project.people(frame_id)}


def _linked(project):
    """The labelled project's people on tracks 1, 2, 3 in every frame (by person id: the
    synthetic people keep their order), as one batch by "ana"."""
    edits = [SetTrack(f.id, p.id, n + 1) for f in project.frames()
             for n, p in enumerate(sorted(project.people(f.id), key=lambda p: p.id))]
    project.apply_batch(edits, "put everyone on a track")
    return project


def test_a_packet_of_a_linked_project_opens_and_keeps_its_tracks(labelled, tmp_path):
    """Linking writes tracks into the labels a packet carries: the reviewer's copy reads
    them (a packet of a linked project was refused before)."""
    link_project(labelled)
    fid = labelled.frames()[0].id
    seen = {}
    returned = review(send(labelled, tmp_path / "p.zip"),
                      lambda r: seen.update(_tracks(r, fid)))
    assert seen == _tracks(labelled, fid) and None not in seen.values()
    report = merge_packet(labelled, returned)
    assert report.tracks_taken == 0 and report.conflicts == []


def test_a_track_the_reviewer_set_is_taken_and_credited_to_them(labelled, tmp_path):
    _linked(labelled)
    fid = labelled.frames()[0].id
    pid = labelled.people(fid)[0].id
    packet = send(labelled, tmp_path / "p.zip")
    returned = review(packet, lambda r: r.apply(SetTrack(fid, pid, 77)))
    report = merge_packet(labelled, returned)
    person = next(p for p in labelled.people(fid) if p.id == pid)
    assert (person.track, person.track_source) == (77, "bea")
    assert report.conflicts == [] and report.tracks_taken == 1
    assert labelled.undo() is not None
    assert _tracks(labelled, fid)[pid] != 77


def _people_of(project, frame_ids):
    return {fid: project.people(fid) for fid in frame_ids}


def test_tracks_exchanged_in_the_packet_come_over_frame_by_frame(labelled, tmp_path):
    """The reviewer exchanges two tracks from the packet's first frame on (a batch of SetTrack
    edits over both frames): both frames of the packet take it, the frames it did not carry
    keep their tracks, and each frame's merge is one undo step."""
    _linked(labelled)
    frames = [f.id for f in labelled.frames()]
    sent, kept = frames[:2], frames[2]
    a, b = (p.track for p in labelled.people(sent[0])[:2])
    before = {fid: _tracks(labelled, fid) for fid in frames}
    packet = send(labelled, tmp_path / "p.zip")

    def exchange(r):
        r.apply_batch(exchange_tracks(_people_of(r, sent), a, b, sent[0]), "exchange")

    report = merge_packet(labelled, review(packet, exchange))
    swap = {a: b, b: a}
    for fid in sent:
        assert _tracks(labelled, fid) == {pid: swap.get(t, t) for pid, t in before[fid].items()}
    assert _tracks(labelled, kept) == before[kept]
    exchanged = sum(t in swap for fid in sent for t in before[fid].values())
    assert exchanged == 4 and report.tracks_taken == exchanged and report.conflicts == []
    assert labelled.undo() is not None and labelled.undo() is not None
    assert {fid: _tracks(labelled, fid) for fid in frames} == before


def test_a_split_and_a_join_by_the_reviewer_merge_as_edits(labelled, tmp_path):
    """The reviewer splits tracks 1 and 2 off at the second frame and joins each piece onto
    the other track (the two dancers were followed the wrong way from there): the second
    frame arrives with its two people's tracks exchanged, credited to the reviewer; the
    project's own track edit in the first frame stays."""
    _linked(labelled)
    f1, f2 = (f.id for f in labelled.frames()[:2])
    one, two, three = sorted(labelled.people(f2), key=lambda p: p.id)
    ours_pid = sorted(labelled.people(f1), key=lambda p: p.id)[2].id
    packet = send(labelled, tmp_path / "p.zip")
    labelled.apply(SetTrack(f1, ours_pid, 500))  # ours only

    def edit(r):
        r.apply_batch(split_track(_people_of(r, [f1, f2]), 1, f2, new_track=300), "split")
        r.apply_batch(split_track(_people_of(r, [f1, f2]), 2, f2, new_track=301), "split")
        r.apply_batch(join_tracks(_people_of(r, [f1, f2]), 1, 301), "join")
        r.apply_batch(join_tracks(_people_of(r, [f1, f2]), 2, 300), "join")

    report = merge_packet(labelled, review(packet, edit))
    assert _tracks(labelled, f1)[ours_pid] == 500
    after = {p.id: (p.track, p.track_source) for p in labelled.people(f2)}
    assert after[one.id] == (2, "bea") and after[two.id] == (1, "bea")
    assert after[three.id] == (3, "ana")
    assert report.tracks_taken == 2 and report.conflicts == []


def test_tracks_changed_on_both_sides(labelled, tmp_path):
    """The same change on both sides is no conflict; different changes keep ours, list a
    track conflict with the reviewer's id, and do not dispute the frame."""
    _linked(labelled)
    fid = labelled.frames()[0].id
    p, q = (x.id for x in labelled.people(fid)[:2])
    packet = send(labelled, tmp_path / "p.zip")
    labelled.apply(SetTrack(fid, p, 41))
    labelled.apply(SetTrack(fid, q, 42))

    def edit(r):
        r.apply(SetTrack(fid, p, 41))
        r.apply(SetTrack(fid, q, 43))

    state = labelled.frame(fid).state
    report = merge_packet(labelled, review(packet, edit, decisions={fid: "ready"}))
    assert _tracks(labelled, fid)[p] == 41 and _tracks(labelled, fid)[q] == 42
    assert report.conflicts == [{"frame": fid, "person": q, "kind": "track", "joints": [],
                                 "theirs_track": 43}]
    assert report.tracks_taken == 0 and report.disputed == []
    # what the reviewer called ready is not what the project has: not signed off
    assert labelled.frame(fid).state is state
