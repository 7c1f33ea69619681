"""``posewright packet ...`` and ``posewright compare``: what a person types, what they see,
the exit status, and that refused input changes nothing. Labels are synthetic.
"""

from __future__ import annotations

import json
import zipfile

import pytest

from app.cli import main
from app.model.edits import MoveJoint
from app.model.labels import FrameState
from app.store import Project
from tests.review.conftest import rewrite


def _run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture
def folder(tmp_path, image_dir, coco_file, capsys):
    proj = tmp_path / "proj"
    assert _run(capsys, "new", proj, "--images", image_dir, "-q", "--author", "ana")[0] == 0
    assert _run(capsys, "import", proj, coco_file, "-q")[0] == 0
    return proj


def test_the_round_trip_from_the_command_line(folder, tmp_path, capsys):
    packet = tmp_path / "rehearsal.zip"
    code, out, _ = _run(capsys, "packet", "export", folder, "--frames", "100,107", "--out",
                        packet, "--images", "blurred-heads", "--reviewer", "bea",
                        "--accept-risk")
    assert code == 0 and "2 frames, 6 people, 2 images (blurred-heads)" in out
    code, out, _ = _run(capsys, "packet", "show", packet, "--json")
    assert code == 0 and json.loads(out)["frames"] == [100, 107]
    with Project.open(folder, read_only=True) as p:
        pid = p.people(100)[0].id
    # the reviewer edits in the review project (the app would do this), then decides
    # "signed off", the decision's name in version 0.1.0, is still read: as "ready"
    code, out, _ = _run(capsys, "packet", "decide", packet, "--frame", 107, "--decision",
                        "signed off")
    assert code == 0 and out.strip() == "frame 107: ready"
    code, out, _ = _run(capsys, "packet", "decide", packet, "--frame", 107, "--decision",
                        "Ready")
    assert code == 0 and out.strip() == "frame 107: ready"
    with Project.open(tmp_path / "rehearsal.review", author="bea") as reviewed:
        reviewed.apply(MoveJoint(100, pid, 0, 11.0, 12.0))
    code, out, _ = _run(capsys, "packet", "send-back", packet)
    returned = tmp_path / "rehearsal-returned.zip"
    assert code == 0 and returned.is_file() and str(returned) in out
    code, out, _ = _run(capsys, "packet", "merge", folder, returned)
    assert code == 0 and "1 joint taken" in out and "0 conflicts" in out
    with Project.open(folder, read_only=True) as p:
        assert p.people(100)[0].keypoints[0, :2].tolist() == [11.0, 12.0]
        assert p.frame(107).state is FrameState.SIGNED_OFF
        ledger = len(p.history())
    code, out, _ = _run(capsys, "packet", "merge", folder, returned)
    assert code == 0 and "already merged" in out and "nothing changed" in out
    with Project.open(folder, read_only=True) as p:
        assert len(p.history()) == ledger


def _one_line(err: str) -> str:
    lines = [line for line in err.splitlines() if line.strip()]
    assert len(lines) == 1, err
    assert "Traceback" not in err
    return lines[0]


def test_blurred_images_of_frames_without_maps_need_the_risk_accepted(folder, tmp_path, capsys):
    """Issue 17: without maps only the face detector looks for people the labels miss; one
    line per frame, then a refusal that writes nothing, unless --accept-risk."""
    packet = tmp_path / "p.zip"
    code, _, err = _run(capsys, "packet", "export", folder, "--frames", "100,107", "--out",
                        packet, "-q")
    lines = err.strip().splitlines()
    assert code == 2 and not packet.exists() and len(lines) == 3
    assert lines[:2] == [f"posewright: warning: frame {f}: people the labels miss may be "
                         "unblurred: no maps" for f in (100, 107)]
    assert "2 frames may show people unblurred; nothing written" in lines[2]
    assert "--accept-risk" in lines[2]
    code, _, err = _run(capsys, "packet", "export", folder, "--frames", "100", "--out", packet,
                        "--images", "blurred-people", "--accept-risk", "-q")
    assert code == 0 and "frame 100: people the labels miss" in err
    code, out, _ = _run(capsys, "packet", "show", packet, "--json")
    info = json.loads(out)
    assert code == 0 and info["images"] == "blurred-people"
    assert info["blurred_regions"]["labels"] >= 1 and info["blurred_regions"]["maps"] == 0
    assert info["blur_risks"] == ["frame 100: people the labels miss may be unblurred: no maps"]
    assert 0 < info["blurred_share"] < 1
    n = sum(info["blurred_regions"].values())  # one source each here: the labels
    assert info["blurred_frames"]["100"].startswith(
        f"{n} region{'s' if n != 1 else ''} (") and "placed by the labels" in \
        info["blurred_frames"]["100"]
    code, out, _ = _run(capsys, "packet", "show", packet)
    assert code == 0 and "   frame 100: " + info["blurred_frames"]["100"] in out


def test_a_hostile_returned_packet_is_refused_in_one_line_and_nothing_changes(folder, tmp_path,
                                                                              capsys):
    packet = tmp_path / "p.zip"
    assert _run(capsys, "packet", "export", folder, "--frames", "untouched", "--out",
                packet, "--images", "none")[0] == 0
    assert _run(capsys, "packet", "return", packet, "--author", "bea")[0] == 0
    returned = tmp_path / "p-returned.zip"
    bad = rewrite(returned, tmp_path / "evil.zip", lambda n, d: d,
                  extra=[("../../escape.txt", b"x")])
    with Project.open(folder, read_only=True) as p:
        ledger = len(p.history())
    code, _, err = _run(capsys, "packet", "merge", folder, bad)
    line = _one_line(err)
    assert code == 2 and "evil.zip: member '../../escape.txt'" in line
    with Project.open(folder, read_only=True) as p:
        assert len(p.history()) == ledger
    assert not (tmp_path.parent / "escape.txt").exists()


@pytest.mark.parametrize("argv, words", [
    (["packet", "export", "{p}", "--frames", "9999", "--out", "{t}/x.zip"], "no frame '9999'"),
    (["packet", "export", "{p}", "--frames", "disputed", "--out", "{t}/x.zip"],
     "no frames to send"),
    (["packet", "merge", "{p}", "{t}/nothing.zip"], "nothing.zip: no such file"),
    (["packet", "merge", "{p}", "{t}/labels.json"], "not a readable zip archive"),
    (["packet", "decide", "{t}/nothing.zip", "--frame", "1", "--decision", "agree"],
     "no such file"),
    (["compare", "{t}/labels.json", "{p}", "--dispute-below", "0.5"], "must be a project"),
    (["compare", "{p}", "{t}/labels.json", "--dispute-below", "7"], "not an OKS"),
])
def test_bad_input_is_one_line_status_2(folder, tmp_path, capsys, argv, words):
    argv = [a.format(p=folder, t=tmp_path) for a in argv]
    before = sorted(p.name for p in tmp_path.iterdir())
    code, _, err = _run(capsys, *argv)
    assert code == 2 and words in _one_line(err)
    assert sorted(p.name for p in tmp_path.iterdir()) == before


def test_an_unknown_decision_is_refused(folder, tmp_path, capsys):
    packet = tmp_path / "p.zip"
    assert _run(capsys, "packet", "export", folder, "--frames", "100", "--out", packet,
                "--images", "none")[0] == 0
    code, _, err = _run(capsys, "packet", "decide", packet, "--frame", 100, "--decision", "meh")
    assert code == 2 and "unknown decision 'meh'" in _one_line(err)


def test_compare_marks_frames_below_the_threshold_disputed(folder, tmp_path, coco_file, capsys):
    data = json.loads(coco_file.read_text())
    moved = data["images"][1]["id"]
    for ann in data["annotations"]:
        if ann["image_id"] == moved:
            ann["keypoints"] = [v + 40 if k % 3 < 2 and v else v
                                for k, v in enumerate(ann["keypoints"])]
    other = tmp_path / "other.json"
    other.write_text(json.dumps(data))
    table = tmp_path / "frames.csv"
    code, out, _ = _run(capsys, "compare", folder, other, "--json", "--csv", table,
                        "--dispute-below", "0.9")
    result = json.loads(out)
    assert code == 0 and result["marked_disputed"] == [moved]
    assert table.read_text().count("\n") == 7
    with Project.open(folder, read_only=True) as p:
        assert [f.id for f in p.frames() if f.state is FrameState.DISPUTED] == [moved]
        (note,) = p.notes(moved)
        assert note.text.startswith("compared with other.json: mean OKS")
    code, out, _ = _run(capsys, "compare", folder, other)
    assert code == 0 and "mean OKS" in out and "left_wrist" in out


def test_packet_members_are_what_the_manifest_says(folder, tmp_path, capsys):
    packet = tmp_path / "p.zip"
    assert _run(capsys, "packet", "export", folder, "--frames", "100", "--out", packet,
                "--images", "full")[0] == 0
    with zipfile.ZipFile(packet) as z:
        manifest = json.loads(z.read("manifest.json"))
        assert set(z.namelist()) == {"manifest.json", *manifest["members"]}


def test_the_reviewer_the_packet_names_is_credited_on_every_call(folder, tmp_path, capsys,
                                                                 monkeypatch):
    """Issue item 14: ``decide`` and ``return`` without ``--author`` credit the reviewer the
    packet names on every call, not the login name ("root" here) after the first one."""
    monkeypatch.delenv("POSEWRIGHT_AUTHOR", raising=False)
    monkeypatch.setattr("getpass.getuser", lambda: "root")
    packet = tmp_path / "rehearsal.zip"
    assert _run(capsys, "packet", "export", folder, "--frames", "100,107,114", "--out", packet,
                "--images", "none", "--reviewer", "bea")[0] == 0
    for frame, decision in ((100, "agree"), (107, "needs-change"), (114, "signed-off")):
        assert _run(capsys, "packet", "decide", packet, "--frame", frame, "--decision",
                    decision)[0] == 0
    assert _run(capsys, "packet", "return", packet)[0] == 0
    with Project.open(tmp_path / "rehearsal.review", read_only=True) as reviewed:
        assert {e.author for e in reviewed.history()} == {"bea"}
    returned = tmp_path / "rehearsal-returned.zip"
    code, out, _ = _run(capsys, "packet", "show", returned, "--json")
    info = json.loads(out)
    assert code == 0 and info["returned_by"] == "bea"
    code, out, _ = _run(capsys, "packet", "merge", folder, returned)
    assert code == 0 and "from bea:" in out
    with Project.open(folder, read_only=True) as p:
        # every change the review brought is bea's; the merge itself is the merger's act
        merged = [e for e in p.history() if e.kind not in ("import", "review")]
        assert merged and {e.author for e in merged} == {"bea"}


def test_a_later_call_naming_another_reviewer_is_refused(folder, tmp_path, capsys):
    """One review folder, one reviewer: a second name would split the credit."""
    packet = tmp_path / "p.zip"
    assert _run(capsys, "packet", "export", folder, "--frames", "100", "--out", packet,
                "--images", "none", "--reviewer", "bea")[0] == 0
    assert _run(capsys, "packet", "decide", packet, "--frame", 100, "--decision", "agree")[0] == 0
    code, _, err = _run(capsys, "packet", "return", packet, "--author", "cai")
    assert code == 2 and "reviewed by bea" in _one_line(err)
    assert not (tmp_path / "p-returned.zip").exists()


def test_packet_lines_show_file_names_escaped(folder, tmp_path, capsys):
    """Issue item 8: a returned packet saved under a name that holds an escape sequence
    (ECMA-48 CSI "clear the screen"; synthetic) is merged and shown with the sequence as
    text."""
    packet = tmp_path / "p.zip"
    assert _run(capsys, "packet", "export", folder, "--frames", "100", "--out", packet,
                "--images", "none", "--reviewer", "bea")[0] == 0
    returned = tmp_path / "p\x1b[2J-returned.zip"
    assert _run(capsys, "packet", "return", packet, "--out", returned)[0] == 0
    code, out, err = _run(capsys, "packet", "show", returned)
    assert code == 0 and "\x1b" not in out + err and "returned_by: bea" in out
    for merged in ("merged ", "already merged"):  # first merge, then the repeat
        code, out, err = _run(capsys, "packet", "merge", folder, returned)
        assert code == 0 and merged in out and "\x1b" not in out + err
        assert "p\\x1b[2J-returned.zip" in out
