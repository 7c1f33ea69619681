"""Review packets: what goes in, what comes back, and every way a hostile or damaged zip is
refused with one line and nothing written.

The zip rules checked follow PKWARE's APPNOTE (external attributes carry the Unix mode, so a
symbolic link is visible before extraction); the bounds (4 GiB, 200:1) are our own choice,
common practice, no source. All labels and images are synthetic.
"""

from __future__ import annotations

import hashlib
import json
import sqlite3
import zipfile
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
import pytest

from app.errors import BadInput
from app.formats.images import decode_image
from app.jobs import new_project
from app.model.edits import MoveJoint
from app.model.labels import FrameState
from app.review import safezip
from app.review.blur import head_ellipses
from app.review.merge import merge_packet
from app.review.packet import export_packet, read_packet, select_frames
from app.review.review import open_packet, review_folder
from app.store import Project
from tests.conftest import place
from tests.review.conftest import rewrite, rewrite_json, send


def test_manifest_lists_frames_base_revisions_and_member_hashes(labelled, tmp_path):
    f1, f2 = labelled.frames()[:2]
    person = labelled.people(f1.id)[0]
    labelled.apply(MoveJoint(f1.id, person.id, 0, 50.0, 60.0))
    path = send(labelled, tmp_path / "p.zip", images="full")
    with zipfile.ZipFile(path) as z:
        manifest = json.loads(z.read("manifest.json"))
        names = set(z.namelist())
        for name, digest in manifest["members"].items():
            assert hashlib.sha256(z.read(name)).hexdigest() == digest
    assert manifest["format"] == "posewright-review-packet" and manifest["version"] == 1
    assert manifest["project_id"] == labelled.project_id
    frames = {f["id"]: f for f in manifest["frames"]}
    newest = labelled.history(frame_id=f1.id, limit=1)[0].seq
    assert frames[f1.id]["base_seq"] == newest and frames[f2.id]["base_seq"] == 0
    assert frames[f1.id]["state"] == "corrected"
    assert names == {"manifest.json", "labels.json", f"images/{f1.id}.jpg", f"images/{f2.id}.jpg"}
    packet = read_packet(path)
    assert packet.base[f1.id].people[person.id].keypoints[0, :2].tolist() == [50.0, 60.0]
    # full images travel byte for byte
    with zipfile.ZipFile(path) as z:
        assert z.read(f"images/{f1.id}.jpg") == labelled.image_path(f1).read_bytes()


def test_select_frames_by_state_or_ids(labelled):
    frames = labelled.frames()
    assert [f.id for f in select_frames(labelled, "untouched")] == [f.id for f in frames]
    assert [f.id for f in select_frames(labelled, f"{frames[3].id}, {frames[1].id}")] == \
        [frames[1].id, frames[3].id]
    assert select_frames(labelled, "disputed") == []
    with pytest.raises(BadInput, match="no frame 'nope'"):
        select_frames(labelled, "nope")


def test_open_builds_a_review_project_with_the_same_ids(labelled, tmp_path):
    path = send(labelled, tmp_path / "p.zip", images="blurred-heads")
    f1 = labelled.frames()[0]
    with open_packet(path) as reviewed:
        assert reviewed.folder == review_folder(path) == tmp_path / "p.review"
        assert reviewed.author == "bea"  # the packet names its reviewer
        assert [f.id for f in reviewed.frames()] == [f.id for f in labelled.frames()[:2]]
        assert {p.id for p in reviewed.people(f1.id)} == {p.id for p in labelled.people(f1.id)}
        image = decode_image(reviewed.image_path(reviewed.frame(f1.id)))
        assert image is not None and image.shape[:2] == (f1.height, f1.width)
        assert int(reviewed.meta("next_person_id") or 0) >= 1_000_000_000
    with open_packet(path) as again:  # reopened, not rebuilt, for the same reviewer
        assert again.author == "bea" and len(again.history()) == 1
    with pytest.raises(BadInput, match="reviewed by bea, not cleo"):
        open_packet(path, reviewer="cleo")


def test_a_fix_with_unlabelled_joints_travels_without_warnings(labelled, tmp_path, caplog):
    """A stored finding whose fix adds a person with unlabelled (NaN) joints is written as
    JSON null (RFC 8259 has no NaN) without a warning per number, and the reviewer's copy of
    the fix reads the NaN back."""
    import logging

    from app.analysis.triage.findings import Finding, Fix, FixPreview
    from app.model import NewPerson

    f1 = labelled.frames()[0]
    kp = ((10.0, 20.0, 2),) + ((float("nan"), float("nan"), 0),) * 16
    fix = Fix("add them", (NewPerson(f1.id, None, kp),), FixPreview(created=(kp,)))
    finding = Finding("f-missed", f1.id, "missed", None, None, (), (), "someone is missing",
                      (), 0.5, 0.9, fix, (), "fp")
    labelled.store_findings({f1.id: ("digest", [finding.to_dict()])})
    with caplog.at_level(logging.WARNING):
        path = send(labelled, tmp_path / "p.zip")
    assert not [r for r in caplog.records if "not a finite number" in r.getMessage()]
    with open_packet(path) as reviewed:
        got = Finding.from_dict(reviewed.findings()[f1.id][0])
    assert got.fix is not None
    (made,) = got.fix.edits
    assert isinstance(made, NewPerson) and made.keypoints is not None
    assert made.keypoints[0] == (10.0, 20.0, 2)
    assert all(np.isnan(x) and np.isnan(y) for x, y, _ in made.keypoints[1:])


def test_the_reviewer_sees_why_each_frame_was_sent(labelled, tmp_path):
    """Triage's scores and reasons and the findings travel with the packet and stand in the
    review as they stood when it was sent (the findings current there, so the walk offers
    them); a packet whose findings cannot be read is refused."""
    from app.jobs_analysis import run_triage
    from app.jobs_findings import current_findings

    run_triage(labelled)
    f1, f2 = labelled.frames()[:2]
    sent = current_findings(labelled, [f1.id, f2.id])
    path = send(labelled, tmp_path / "p.zip")
    with open_packet(path) as reviewed:
        assert reviewed.triage(f1.id) == labelled.triage(f1.id)
        got = current_findings(reviewed, [f1.id, f2.id])
        assert {fid: [f.id for f in fs] for fid, fs in got.items()} == \
            {fid: [f.id for f in fs] for fid, fs in sent.items()}
    bad = rewrite_json(path, tmp_path / "bad.zip", "triage.json",
                       lambda d: d["frames"][0]["findings"].append({"id": "x"}))
    with pytest.raises(BadInput, match="not a finding"):
        read_packet(bad)


def _valid(labelled: Project, tmp_path: Path) -> Path:
    return send(labelled, tmp_path / "p.zip", images="full")


def _with_member(labelled, tmp_path, info, data=b"x"):
    return rewrite(_valid(labelled, tmp_path), tmp_path / "bad.zip", lambda n, d: d,
                   extra=[(info, data)])


def _symlink(name: str) -> zipfile.ZipInfo:
    info = zipfile.ZipInfo(name)
    info.external_attr = 0o120777 << 16
    return info


@pytest.mark.folder_only  # the packet's format: no backend changes it
@pytest.mark.filterwarnings("ignore:Duplicate name")
@pytest.mark.parametrize("make, words", [
    (lambda lp, t: _with_member(lp, t, "../outside.txt"), "'../outside.txt': the name leaves"),
    (lambda lp, t: _with_member(lp, t, "images/../../x"), "the name leaves the packet's folder"),
    (lambda lp, t: _with_member(lp, t, "/etc/passwd"), "'/etc/passwd': the name is an absolute"),
    (lambda lp, t: _with_member(lp, t, "C:/x.txt"), "the name is an absolute path"),
    (lambda lp, t: _with_member(lp, t, "images\\..\\..\\x"), "holds a backslash"),
    (lambda lp, t: _with_member(lp, t, _symlink("images/link.jpg"), b"/etc/passwd"),
     "'images/link.jpg': the member is a symbolic link"),
    (lambda lp, t: _with_member(lp, t, "notes.txt"), "'notes.txt': the member is not listed"),
    (lambda lp, t: _with_member(lp, t, "labels.json"), "'labels.json': the name appears twice"),
])
def test_hostile_names_are_refused_before_anything_is_written(labelled, tmp_path, make, words):
    bad = make(labelled, tmp_path)
    with pytest.raises(BadInput, match=r"bad.zip: member") as exc:
        open_packet(bad)
    assert words in str(exc.value) and "\n" not in str(exc.value)
    assert not review_folder(bad).exists()
    assert not (tmp_path / "outside.txt").exists()


def test_a_zip_bomb_is_refused_unread(labelled, tmp_path):
    """100 MB of zeros deflate to about 100 kB: 1000:1, beyond the 200:1 bound."""
    info = zipfile.ZipInfo("images/bomb.jpg")
    info.compress_type = zipfile.ZIP_DEFLATED
    bad = _with_member(labelled, tmp_path, info, bytes(100 << 20))
    assert bad.stat().st_size < 2 << 20
    with pytest.raises(BadInput, match=r"'images/bomb.jpg': the member inflates .* zip bomb"):
        read_packet(bad)
    assert not review_folder(bad).exists()


@pytest.mark.folder_only  # the packet's format: no backend changes it
def test_the_total_size_bound_holds(labelled, tmp_path):
    path = _valid(labelled, tmp_path)
    with pytest.raises(BadInput, match="inflates past 1000 bytes"):
        read_packet(path, limits=safezip.Limits(max_total=1000))


@pytest.mark.folder_only  # the packet's format: no backend changes it
@pytest.mark.parametrize("cut", [0.5, 0.97])
def test_a_truncated_packet_is_refused(labelled, tmp_path, cut):
    data = _valid(labelled, tmp_path).read_bytes()
    bad = tmp_path / "cut.zip"
    bad.write_bytes(data[: int(len(data) * cut)])
    with pytest.raises(BadInput, match=r"cut.zip: not a readable zip archive"):
        open_packet(bad)
    assert not review_folder(bad).exists()


@pytest.mark.folder_only  # the packet's format: no backend changes it
def test_tampered_members_are_refused(labelled, tmp_path):
    path = _valid(labelled, tmp_path)

    def move_a_joint(name: str, data: bytes) -> bytes:
        if name != "labels.json":
            return data
        labels = json.loads(data)
        labels["frames"][0]["people"][0]["keypoints"][0][0] += 40
        return json.dumps(labels).encode()

    bad = rewrite(path, tmp_path / "t.zip", move_a_joint)
    with pytest.raises(BadInput, match=r"'labels.json': the member's SHA-256 does not match"):
        open_packet(bad)
    image = next(n for n in zipfile.ZipFile(path).namelist() if n.startswith("images/"))
    bad = rewrite(path, tmp_path / "t2.zip", lambda n, d: d[:-10] + bytes(10) if n == image
                  else d)
    with pytest.raises(BadInput, match=f"'{image}': the member's SHA-256"):
        open_packet(bad)
    dropped = rewrite(path, tmp_path / "t3.zip", lambda n, d: None if n == image else d)
    with pytest.raises(BadInput, match="lists it but the archive lacks it"):
        open_packet(dropped)


def test_corrupt_compressed_bytes_fail_their_crc(labelled, tmp_path):
    path = _valid(labelled, tmp_path)
    with zipfile.ZipFile(path) as z:
        info = z.getinfo("labels.json")
    data = bytearray(path.read_bytes())
    start = info.header_offset + 30 + len(info.filename.encode()) + len(info.extra)
    data[start + info.compress_size // 2] ^= 0xFF
    bad = tmp_path / "crc.zip"
    bad.write_bytes(bytes(data))
    with pytest.raises(BadInput, match=r"'labels.json': the member cannot be read"):
        read_packet(bad)


def test_a_packet_from_another_project_is_refused_and_nothing_changes(labelled, tmp_path,
                                                                      image_dir, coco_file):
    from tests.review.conftest import review

    returned = review(send(labelled, tmp_path / "p.zip"),
                      lambda r: r.apply(MoveJoint(r.frames()[0].id,
                                                  r.people(r.frames()[0].id)[0].id, 0, 9, 9)))
    with new_project(tmp_path / "other", images=image_dir, author="ana") as other:
        from app.jobs import import_coco

        import_coco(other, coco_file)
        before = len(other.history())
        with pytest.raises(BadInput, match="belongs to another project"):
            merge_packet(other, returned)
        assert len(other.history()) == before


def test_a_packet_not_yet_returned_cannot_be_merged(labelled, tmp_path):
    with pytest.raises(BadInput, match="has not been sent back yet"):
        merge_packet(labelled, send(labelled, tmp_path / "p.zip"))


@pytest.mark.folder_only  # the packet's format: no backend changes it
def test_values_that_do_not_fit_the_skeleton_are_refused(labelled, tmp_path):
    path = _valid(labelled, tmp_path)
    with zipfile.ZipFile(path) as z:
        manifest = json.loads(z.read("manifest.json"))
        labels = json.loads(z.read("labels.json"))
    labels["frames"][0]["people"][0]["keypoints"][3] = [1.0, 2.0, 3]
    raw = json.dumps(labels).encode()
    manifest["members"]["labels.json"] = hashlib.sha256(raw).hexdigest()

    def swap(name: str, data: bytes) -> bytes:
        return {"labels.json": raw, "manifest.json": json.dumps(manifest).encode()}.get(name,
                                                                                         data)

    bad = rewrite(path, tmp_path / "v.zip", swap)
    with pytest.raises(BadInput, match=r"keypoints.3: visibility 3 is not one of 0, 1, 2"):
        read_packet(bad)


def test_blurred_heads_packet_changes_heads_only(labelled, tmp_path):
    """The sent image differs from the original inside the head ellipses and is the decoded
    original, pixel for pixel, everywhere else (the image is synthetic noise, so a blur shows)."""
    import cv2

    frame = labelled.frames()[0]
    noise = np.random.default_rng(3).integers(0, 256, (frame.height, frame.width, 3), np.uint8)
    cv2.imwrite(str(labelled.image_path(frame)), noise)
    original = decode_image(labelled.image_path(frame))
    path = send(labelled, tmp_path / "p.zip", frames=[frame.id], images="blurred-heads")
    with zipfile.ZipFile(path) as z:
        sent = cv2.imdecode(np.frombuffer(z.read(f"images/{frame.id}.png"), np.uint8),
                            cv2.IMREAD_COLOR)
    ellipses = head_ellipses([p.keypoints for p in labelled.people(frame.id)],
                             labelled.skeleton, (frame.width, frame.height))
    yy, xx = np.mgrid[: frame.height, : frame.width]
    inside = np.zeros((frame.height, frame.width), bool)
    for cx, cy, ax, ay in ellipses:
        inside |= ((xx - cx) / ax) ** 2 + ((yy - cy) / ay) ** 2 <= 1
    core = np.zeros_like(inside)
    for cx, cy, ax, ay in ellipses:
        core |= ((xx - cx) / (ax * 0.8)) ** 2 + ((yy - cy) / (ay * 0.8)) ** 2 <= 1
    assert original is not None and core.any() and not inside.all()
    assert np.array_equal(sent[~inside], original[~inside])
    assert (sent[core] != original[core]).any(axis=1).mean() > 0.9


@pytest.mark.folder_only  # the packet's format: no backend changes it
@pytest.mark.parametrize("labels_text, words", [
    ('{"frames": [' * 20_000, "nested too deeply"),
    ('{"frames": [{"id": 1, "people": [], "notes": [], "x": 1e999}]}',
     "frames[0] (id 1): field x: Infinity is not a finite number"),
    ('{"frames": NaN}', "field frames: NaN is not a finite number"),
])
def test_hostile_json_is_refused_in_one_line(labelled, tmp_path, labels_text, words):
    path = _valid(labelled, tmp_path)
    raw = labels_text.encode()
    with zipfile.ZipFile(path) as z:
        manifest = json.loads(z.read("manifest.json"))
    manifest["members"]["labels.json"] = hashlib.sha256(raw).hexdigest()

    def swap(name: str, data: bytes) -> bytes:
        return {"labels.json": raw, "manifest.json": json.dumps(manifest).encode()}.get(name,
                                                                                         data)

    bad = rewrite(path, tmp_path / "j.zip", swap)
    with pytest.raises(BadInput, match=r"j.zip: member 'labels.json'") as exc:
        read_packet(bad)
    assert words in str(exc.value)


# ---------------------------------------------------------------------- names from a packet

#: An invented hostile name: retitles a terminal window, then clears the screen.
_HOSTILE = "bea\x1b]0;owned\x07\x1b[2J"


def _returned_with_everything(labelled: Project, tmp_path: Path) -> Path:
    """A returned packet with a decision, a note and ledger rows (synthetic)."""
    from app.model.edits import AddNote
    from tests.review.conftest import review

    fid = labelled.frames()[0].id
    pid = labelled.people(fid)[0].id

    def edit(r: Project) -> None:
        r.apply(MoveJoint(fid, pid, 3, 20.0, 21.0))
        r.apply(AddNote(fid, "the wrist is the neighbour's"))

    return review(send(labelled, tmp_path / "p.zip"), edit, decisions={fid: "agree"})


def _put(path: list[Any], value: Any) -> Callable[[Any], None]:
    def change(data: Any) -> None:
        for key in path[:-1]:
            data = data[key]
        data[path[-1]] = value
    return change


@pytest.mark.folder_only  # the packet's format: no backend changes it
@pytest.mark.parametrize("member, path, value, words", [
    ("manifest.json", ["reviewer"], _HOSTILE, "field reviewer: a name must be printable"),
    ("manifest.json", ["exported_by"], _HOSTILE, "field exported_by: a name must be"),
    ("manifest.json", ["returned", "reviewer"], _HOSTILE, "field returned.reviewer: a name"),
    ("manifest.json", ["returned", "decisions", 0, "author"], "bea\u202egnp.exe",
     "field returned.decisions.0.author: a name must be printable text; this one holds "
     "\\u202e"),
    ("manifest.json", ["reviewer"], "b" * 101, "a name must be at most 100 characters"),
    ("manifest.json", ["returned", "reviewer"], "", "field returned.reviewer"),
    ("manifest.json", ["packet_id"], "p\x1b[2J", "field packet_id"),
    ("returned.json", ["ledger", 0, "author"], _HOSTILE, "field ledger.0.author: a name"),
    ("returned.json", ["frames", 0, "notes", 0, "author"], _HOSTILE,
     "field frames.0.notes.0.author: a name"),
    ("returned.json", ["frames", 0, "people", 0, "sources", 3], _HOSTILE,
     "field frames.0.people.0.sources.3: a name"),
    ("labels.json", ["frames", 0, "people", 0, "sources", 0], "x\ny",
     "this one holds \\n"),
])
def test_names_that_are_not_printable_text_are_refused_on_reading(labelled, tmp_path, member,
                                                                 path, value, words):
    """Issue item 8: a name read from a packet (exporter, reviewer, decision, note and ledger
    authors, joint provenance) is printable text of at most 100 characters, else the packet
    is refused in one line that shows the offending character escaped and nothing changes.
    "Printable" is Python's str.isprintable (Unicode categories Other and Separator are not;
    U+202E is the right-to-left override, category Cf); the bound is our own choice."""
    returned = _returned_with_everything(labelled, tmp_path)
    bad = rewrite_json(returned, tmp_path / "bad-returned.zip", member, _put(path, value))
    ledger = len(labelled.history())
    with pytest.raises(BadInput) as exc:
        merge_packet(labelled, bad)
    message = str(exc.value)
    assert words in message and "bad-returned.zip" in message
    assert message.isprintable()
    assert len(labelled.history()) == ledger


def test_an_exported_packet_never_names_someone_it_would_refuse(labelled, tmp_path):
    """The same rule at the writing end: nothing is written for a name a reader refuses."""
    frames = labelled.frames()[:1]
    with pytest.raises(BadInput, match="--reviewer: a name must be printable"):
        export_packet(labelled, tmp_path / "p.zip", frames, images="none", reviewer=_HOSTILE)
    assert not (tmp_path / "p.zip").exists()
    with Project.open(place(labelled), author=_HOSTILE, read_only=True) as shared, \
            pytest.raises(BadInput, match="--author: a name must be printable"):
        export_packet(shared, tmp_path / "p.zip", frames, images="none")
    assert not (tmp_path / "p.zip").exists()


# ---------------------------------------------------------------------- which images travel

def _images_in(path: Path) -> set[str]:
    with zipfile.ZipFile(path) as z:
        return {n for n in z.namelist() if n.startswith("images/")}


@pytest.fixture
def linked(tmp_path):
    """A project over synthetic images where frame 2 is a link to a decodable image outside
    the images folder, frame 3 a link to another image inside it, frame 4 an unreadable file
    (registered and marked), and frame 5 decoded fine when registered but not any more."""
    import cv2

    from tests import synthetic

    images = tmp_path / "images"
    synthetic.write_images(images, 6)
    private = tmp_path / "private"
    private.mkdir()
    cv2.imwrite(str(private / "someone.png"), np.full((24, 32, 3), 200, np.uint8))
    (images / "frame_0001.jpg").unlink()
    (images / "frame_0001.jpg").symlink_to(private / "someone.png")
    (images / "frame_0002.jpg").unlink()
    (images / "frame_0002.jpg").symlink_to(images / "frame_0005.jpg")
    (images / "frame_0003.jpg").write_bytes(b"\xff\xd8 not a JPEG after all")
    project = new_project(tmp_path / "proj", images=images, author="ana")
    (images / "frame_0004.jpg").write_bytes(b"\xff\xd8 truncated since")
    yield project
    project.close()


@pytest.mark.parametrize("mode", ["full", "blurred-heads"])
def test_only_images_that_decode_inside_the_images_folder_travel(linked, tmp_path, mode):
    """Issue item 9: no raw bytes of an unreadable or no longer decodable image, nothing a
    link brings in from outside the images folder; a link that stays inside it is followed.
    Synthetic images; the rule is our own."""
    frames = linked.frames()
    assert [f.status for f in frames] == ["ok", "ok", "ok", "corrupt", "ok", "ok"]
    stats = export_packet(linked, tmp_path / "p.zip", frames, images=mode, accept_risk=True)
    suffix = ".jpg" if mode == "full" else ".png"
    assert _images_in(tmp_path / "p.zip") == {f"images/{f.id}{suffix}"
                                              for f in frames if f.id in (1, 3, 6)}
    assert stats["images"] == 3 and stats["missing_images"] == 2
    assert stats["outside_images"] == 1
    if mode == "full":
        with zipfile.ZipFile(tmp_path / "p.zip") as z:
            assert z.read("images/3.jpg") == (tmp_path / "images" / "frame_0005.jpg") \
                .read_bytes()
    manifest = read_packet(tmp_path / "p.zip").frames
    assert [f.image is not None for f in manifest] == [True, False, True, False, False, True]


def test_a_linked_images_folder_is_its_own_root(tmp_path):
    """The images folder itself may be a link (footage kept on another disk): its images
    travel."""
    from tests import synthetic

    synthetic.write_images(tmp_path / "disk" / "footage", 2)
    (tmp_path / "images").symlink_to(tmp_path / "disk" / "footage")
    with new_project(tmp_path / "proj", images=tmp_path / "images", author="ana") as p:
        stats = export_packet(p, tmp_path / "p.zip", p.frames(), images="full")
    assert stats["images"] == 2 and stats["outside_images"] == 0


def test_a_review_folder_from_before_names_were_recorded_keeps_its_reviewer(labelled,
                                                                           tmp_path):
    """A review folder built without the recorded name credits whoever it was built for
    (the author of its first ledger entry), not the login name."""
    path = send(labelled, tmp_path / "p.zip", images="none")
    with open_packet(path) as reviewed:
        db = reviewed.folder / "project.db"
    with sqlite3.connect(db) as conn:  # as a folder built before the name was recorded
        conn.execute("DELETE FROM meta WHERE key = 'review_reviewer'")
    conn.close()
    with open_packet(path) as again:
        assert again.meta("review_reviewer") is None and again.author == "bea"


@pytest.mark.folder_only  # the packet's format: no backend changes it
@pytest.mark.parametrize(("old", "new", "state"), [
    ("agree", "looks-right", None), ("needs-change", "query", FrameState.DISPUTED),
    ("signed-off", "ready", FrameState.SIGNED_OFF)])
def test_a_packet_returned_with_the_decisions_of_version_0_1_0_still_merges(
        labelled, tmp_path, old, new, state):
    """A returned packet written before the decisions were renamed (its manifest holds
    ``agree``, ``needs-change`` or ``signed-off``) reads as today's words and sets the same
    state (synthetic packet; our own format)."""
    returned = _returned_with_everything(labelled, tmp_path)
    older = rewrite_json(returned, tmp_path / "old-returned.zip", "manifest.json",
                         _put(["returned", "decisions", 0, "decision"], old))
    packet = read_packet(older, returned=True)
    fid = labelled.frames()[0].id
    assert packet.returned.decisions[fid].decision == new
    merge_packet(labelled, older)
    assert labelled.frame(fid).state is (state or FrameState.CORRECTED)


@pytest.mark.folder_only  # a review project is always a folder
def test_a_review_project_that_holds_decisions_of_version_0_1_0_reads_them_as_today(
        labelled, tmp_path):
    """A review opened with version 0.1.0 stored "needs-change" in its project; opened again
    it reads as "query", and the same key withdraws it (synthetic project; our own rule)."""
    from app.review.review import decisions, set_decision

    path = send(labelled, tmp_path / "p.zip", images="none")
    fid = labelled.frames()[0].id
    with open_packet(path) as reviewed:
        set_decision(reviewed, fid, "query")
    db = sqlite3.connect(review_folder(path) / "project.db")
    with db:
        db.execute("UPDATE review_decisions SET decision = 'needs-change'")
    db.close()
    with open_packet(path) as reviewed:
        assert decisions(reviewed)[fid].decision == "query"
        assert set_decision(reviewed, fid, "needs change").decision == "query"
        set_decision(reviewed, fid, None)
        assert fid not in decisions(reviewed)


# ---------------------------------------------------------------------- how frames were grouped

def _grouped(project: Project) -> tuple[int, int, int]:
    """Mark the first frame's (synthetic) labels as grouped with the frame before and the
    second's as grouped alone; the third records nothing (as after a COCO import)."""
    f1, f2, f3 = (f.id for f in project.frames()[:3])
    with project.bulk("ImportMaps", "group", "frames", kind="import") as b:
        b.set_grouping([f1], "frame-before")
        b.set_grouping([f2], "alone")
    return f1, f2, f3


def test_how_each_frame_was_grouped_travels_to_the_reviewer(labelled, tmp_path):
    """Issue 14 follow-up: the manifest records each frame's grouping (absent when there is
    none), the reviewer's project records it on its frames, and the reviewer's triage weighs a
    frame-before frame by the frame-before weights (the same choice as the sender's:
    app.analysis.triage.combine.weight_set)."""
    from app.analysis.triage.combine import weight_set
    from app.jobs_analysis import run_triage

    f1, f2, f3 = _grouped(labelled)
    path = send(labelled, tmp_path / "p.zip", frames=[f1, f2, f3])
    with zipfile.ZipFile(path) as z:
        entries = {f["id"]: f for f in json.loads(z.read("manifest.json"))["frames"]}
    assert entries[f1]["grouping"] == "frame-before" and entries[f2]["grouping"] == "alone"
    assert "grouping" not in entries[f3]
    assert [f.grouping for f in read_packet(path).frames] == ["frame-before", "alone", None]
    with open_packet(path) as reviewed:
        assert reviewed.groupings() == {f1: "frame-before", f2: "alone"}
        assert reviewed.frame(f3).grouping is None
        verdicts = run_triage(reviewed, frame_ids=[f1, f2], findings=False)
    assert verdicts[f1].grouping == "frame-before"
    assert verdicts[f1].weights == weight_set("frame-before") != weight_set("alone")
    assert verdicts[f2].grouping == "alone" and verdicts[f2].weights == weight_set("alone")


@pytest.mark.folder_only  # the packet's format: no backend changes it
def test_a_packet_from_before_the_grouping_record_still_opens(labelled, tmp_path):
    """A manifest written before the field existed (no ``grouping``, still version 1)."""
    f1, f2, _ = _grouped(labelled)
    path = send(labelled, tmp_path / "p.zip", frames=[f1, f2])

    def drop(manifest: Any) -> None:
        for entry in manifest["frames"]:
            del entry["grouping"]

    old = rewrite_json(path, tmp_path / "old.zip", "manifest.json", drop)
    assert [f.grouping for f in read_packet(old).frames] == [None, None]
    with open_packet(old) as reviewed:
        assert reviewed.groupings() == {}
        assert [f.id for f in reviewed.frames()] == [f1, f2]


@pytest.mark.folder_only  # the packet's format: no backend changes it
@pytest.mark.parametrize("value", ["frame_before", "Alone", "", 1, ["alone"]])
def test_a_bad_grouping_is_refused_and_nothing_is_written(labelled, tmp_path, value):
    f1, f2, _ = _grouped(labelled)
    path = send(labelled, tmp_path / "p.zip", frames=[f1, f2])
    bad = rewrite_json(path, tmp_path / "bad.zip", "manifest.json",
                       _put(["frames", 1, "grouping"], value))
    there = sorted(tmp_path.iterdir())
    with pytest.raises(BadInput, match=r"bad.zip: member 'manifest.json'.*field "
                                       r"frames\.1\.grouping"):
        open_packet(bad)
    assert not review_folder(bad).exists()
    assert sorted(tmp_path.iterdir()) == there


def test_bringing_a_packet_back_keeps_the_senders_groupings(labelled, tmp_path):
    """Merging reads the packet's groupings but writes none: the sender's records stay as
    they are now, even one changed since the packet was sent."""
    f1, f2, f3 = _grouped(labelled)
    path = send(labelled, tmp_path / "p.zip", frames=[f1, f2, f3])
    with labelled.bulk("ImportMaps", "group again", "frames", kind="import") as b:
        b.set_grouping([f1], "alone")
    before = labelled.groupings()
    pid = labelled.people(f1)[0].id
    from tests.review.conftest import review

    returned = review(path, lambda r: r.apply(MoveJoint(f1, pid, 0, 31.0, 32.0)),
                      decisions={f2: "looks-right"})
    merge_packet(labelled, returned)
    assert labelled.people(f1)[0].keypoints[0, :2].tolist() == [31.0, 32.0]
    assert labelled.groupings() == before == {f1: "alone", f2: "alone"}
