"""One rule for what leaves the project, said in --help: issue item 15.

``export`` and ``targets`` take the frames a person has checked (corrected and signed off)
unless ``--states`` says otherwise (``all`` takes every state) and warn when what they write
holds untouched or disputed frames; a frame whose image cannot be read is never exported.
``packet export`` sends images with heads blurred unless told otherwise, like the dialog.
The rule is our own; the labels and images are synthetic.
"""

from __future__ import annotations

import json

import pytest

from app.cli import build_parser, main
from app.model.edits import SetFrameState
from app.model.labels import FrameState
from app.store import Project


def _run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


@pytest.fixture
def mixed(tmp_path, image_dir, coco_file, capsys):
    """Six frames with three people each: 100 corrected, 107 signed off, 114 disputed,
    121 untouched, 128 untouched, 135 corrected but its image no longer reads (registered
    unreadable)."""
    (image_dir / "frame_0005.jpg").write_bytes(b"not an image")
    proj = tmp_path / "proj"
    assert _run(capsys, "new", proj, "--images", image_dir, "-q")[0] == 0
    assert _run(capsys, "import", proj, coco_file, "-q")[0] == 0
    with Project.open(proj, author="ana") as p:
        for fid, state in ((100, FrameState.CORRECTED), (107, FrameState.SIGNED_OFF),
                           (114, FrameState.DISPUTED), (135, FrameState.CORRECTED)):
            p.apply(SetFrameState(fid, state))
        assert p.frame(135).status == "corrupt"
    return proj


def test_export_takes_checked_frames_by_default_and_says_what_it_left_out(mixed, tmp_path,
                                                                          capsys):
    out = tmp_path / "labels.json"
    code, printed, err = _run(capsys, "export", mixed, "--out", out)
    data = json.loads(out.read_text())
    assert code == 0 and sorted(i["id"] for i in data["images"]) == [100, 107]
    assert {a["image_id"] for a in data["annotations"]} == {100, 107}
    assert "3 frames left out" in printed and "--states all" in printed
    assert "1 frame not exported: its image cannot be read" in err


def test_export_of_every_state_warns_and_still_leaves_the_unreadable_image(mixed, tmp_path,
                                                                           capsys):
    out = tmp_path / "labels.json"
    code, _, err = _run(capsys, "export", mixed, "--out", out, "--states", "all")
    data = json.loads(out.read_text())
    assert code == 0 and sorted(i["id"] for i in data["images"]) == [100, 107, 114, 121, 128]
    assert 135 not in {a["image_id"] for a in data["annotations"]}
    assert "warning: the export holds 2 untouched frames and 1 disputed frame" in err
    code, _, err = _run(capsys, "export", mixed, "--out", out, "--states", "untouched")
    assert code == 0 and "holds 2 untouched frames" in err and "disputed" not in err


def test_an_export_of_one_frame_counts_in_the_singular(mixed, tmp_path, capsys):
    """The merge of the export rule with singular counts: "1 images" read wrong (our own
    wording rule, app/wording.py)."""
    out = tmp_path / "labels.json"
    code, printed, _ = _run(capsys, "export", mixed, "--out", out, "--states", "signed-off")
    assert code == 0 and printed.startswith(f"wrote {out}: 1 image, 3 people; 5 frames left out")
    code, printed, _ = _run(capsys, "targets", mixed, tmp_path / "t", "--states", "signed-off",
                            "-q")
    assert code == 0 and printed.startswith("wrote 1 frame of training targets to ")


def test_targets_follow_the_same_rule(mixed, tmp_path, capsys):
    code, _, err = _run(capsys, "targets", mixed, tmp_path / "t1", "-q")
    manifest = json.loads((tmp_path / "t1" / "manifest.json").read_text())
    assert code == 0 and [f["id"] for f in manifest["frames"]] == [100, 107]
    assert "1 frame not exported: its image cannot be read" in err and "holds" not in err
    code, _, err = _run(capsys, "targets", mixed, tmp_path / "t2", "--states", "all", "-q")
    manifest = json.loads((tmp_path / "t2" / "manifest.json").read_text())
    assert code == 0 and [f["id"] for f in manifest["frames"]] == [100, 107, 114, 121, 128]
    assert "warning: the export holds 2 untouched frames and 1 disputed frame" in err


def test_help_states_the_rule_and_the_defaults(capsys):
    parser = build_parser()
    sub = next(a for a in parser._actions if a.dest == "command").choices
    for name in ("export", "targets"):
        text = " ".join(sub[name].format_help().split())
        assert "default corrected,signed-off" in text and "'all'" in text, name
        assert "image cannot be read" in text, name
    packet = next(a for a in sub["packet"]._actions if a.dest == "packet_command").choices
    text = " ".join(packet["export"].format_help().split())
    assert "heads blurred (default)" in text


def test_packet_export_blurs_heads_by_default(mixed, tmp_path, capsys):
    import zipfile

    code, printed, _ = _run(capsys, "packet", "export", mixed, "--frames", "100,107", "--out",
                            tmp_path / "p.zip", "--accept-risk")  # no maps in this project
    assert code == 0 and "(blurred-heads)" in printed
    with zipfile.ZipFile(tmp_path / "p.zip") as z:
        assert sorted(n for n in z.namelist() if n.startswith("images/")) == \
            ["images/100.png", "images/107.png"]
