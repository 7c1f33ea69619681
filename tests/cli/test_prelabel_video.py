"""`posewright new/add --video` and `posewright prelabel` from the command line: the work
done, and bad input answered with one line on stderr, status 2 and nothing written. Videos,
frames and models are synthetic (written by the tests with OpenCV and the onnx package)."""

import json

import cv2
import pytest

from app.cli import main
from app.store import Project
from tests.formats.test_video import write_video
from tests.inference.onnx_models import colour_dot_model
from tests.inference.test_network import FIELDS, MAPS_FROM, SK, _config, _people_at


def _err(capsys):
    err = capsys.readouterr().err
    assert err.count("\n") == 1, err
    return err


# ---------------------------------------------------------------- video


def test_new_from_a_video_stores_index_and_time(tmp_path, capsys):
    video = write_video(tmp_path / "clip.avi")
    proj = tmp_path / "p"
    assert main(["new", str(proj), "--video", str(video), "--every", "5", "--start", "0.5",
                 "--end", "0:02.2", "-q"]) == 0
    assert "4 frames (video frames 5 to 20, 0.50 s to 2.00 s)" in capsys.readouterr().out
    with Project.open(proj) as p:
        frames = p.frames()
        assert [(f.video_index, f.timestamp) for f in frames] == [(5, 0.5), (10, 1.0),
                                                                  (15, 1.5), (20, 2.0)]
        assert frames[0].file_name == "clip/000005.jpg"
        assert frames[0].path == "frames/clip/000005.jpg"
        assert (frames[0].width, frames[0].height) == (64, 48)
        assert all(p.image_path(f).is_file() for f in frames)
        assert p.images_root == (proj / "frames").resolve()


def test_add_more_of_the_same_video_and_refuse_another_with_its_name(tmp_path, capsys):
    video = write_video(tmp_path / "clip.avi")
    proj = tmp_path / "p"
    main(["new", str(proj), "--video", str(video), "--every", "10", "-q"])     # 0, 10, 20
    assert main(["add", str(proj), "--video", str(video), "--every", "5", "-q"]) == 0
    assert "added to" in capsys.readouterr().out
    with Project.open(proj) as p:
        assert [f.video_index for f in p.frames()] == [0, 10, 20, 5, 15]
    assert main(["add", str(proj), "--video", str(video), "--every", "5", "-q"]) == 0
    assert "no new frames" in capsys.readouterr().out
    other = tmp_path / "elsewhere"
    other.mkdir()
    write_video(other / "clip.avi", count=8)
    assert main(["add", str(proj), "--video", str(other / "clip.avi"), "-q"]) == 2
    assert "the project has frames of another video named 'clip'" in _err(capsys)
    with Project.open(proj) as p:
        assert len(p.frames()) == 5
    assert len(list((proj / "frames" / "clip").iterdir())) == 5


def test_a_bad_video_leaves_nothing_behind(tmp_path, capsys):
    junk = tmp_path / "junk.mp4"
    junk.write_bytes(b"\x00junk" * 500)
    proj = tmp_path / "p"
    assert main(["new", str(proj), "--video", str(junk), "-q"]) == 2
    assert f"{junk}: OpenCV cannot" in _err(capsys)
    assert not proj.exists()
    assert main(["new", str(proj), "--video", str(write_video(tmp_path / "c.avi")),
                 "--start", "30", "-q"]) == 2
    assert "no frame between 30 s and the end" in _err(capsys)
    assert not proj.exists()
    main(["new", str(proj), "--images", str(tmp_path / "none"), "-q"])
    capsys.readouterr()
    images = tmp_path / "imgs"
    images.mkdir()
    cv2.imwrite(str(images / "a.png"), _people_at([50.0])[1])
    main(["new", str(proj), "--images", str(images), "-q"])
    assert main(["add", str(proj), "--video", str(junk), "-q"]) == 2
    _err(capsys)
    assert sorted(p.name for p in proj.iterdir()) == ["project.db", "project.lock"]


@pytest.mark.parametrize("argv, words", [
    (["new", "P", "-q"], "give --images DIR or --video FILE"),
    (["new", "P", "--images", "D", "--video", "V", "-q"], "give --images DIR or --video FILE"),
    (["new", "P", "--images", "D", "--every", "2", "-q"], "--every goes with --video FILE"),
    (["add", "P", "-q"], "one of the arguments --images --video is required"),
    (["new", "P", "--video", "V", "--start", "soon", "-q"], "'soon' is not a time"),
])
def test_video_options_are_checked(tmp_path, capsys, argv, words):
    argv = [str(tmp_path / a) if a in ("P", "D", "V") else a for a in argv]
    try:
        status = main(argv)
    except SystemExit as exc:  # usage errors leave through argparse
        status = exc.code
    assert status == 2
    assert words in _err(capsys)
    assert not (tmp_path / "P").exists()


# ---------------------------------------------------------------- prelabel


@pytest.fixture
def dots(tmp_path):
    """A project of two synthetic frames, a colour-dot model and its config."""
    images = tmp_path / "images"
    images.mkdir()
    for n, xs in enumerate(([30.0, 90.0], [40.0, 80.0, 130.0])):
        cv2.imwrite(str(images / f"f{n}.png"), _people_at(xs)[1])
    skeleton = tmp_path / "skeleton.json"
    skeleton.write_text(json.dumps(SK.to_dict()))
    proj = tmp_path / "p"
    assert main(["new", str(proj), "--images", str(images), "--skeleton", str(skeleton),
                 "-q"]) == 0
    model = colour_dot_model(tmp_path / "dots.onnx", MAPS_FROM, FIELDS, stride=4,
                             channel_order="bgr", mean=(10, 20, 30), scale=(0.5, 0.25, 0.125))
    config = tmp_path / "config.json"
    config.write_text(_config().model_dump_json())
    return proj, model, config


def test_prelabel_command(dots, capsys):
    proj, model, config = dots
    capsys.readouterr()
    assert main(["prelabel", str(proj), "--model", str(model), "--config", str(config),
                 "-q"]) == 0
    assert capsys.readouterr().out == "pre-labelled 2 frames with dots.onnx: 5 people on 2 " \
                                      "frames\n"
    with Project.open(proj) as p:
        assert [len(p.people(f.id)) for f in p.frames()] == [2, 3]
    assert main(["prelabel", str(proj), "--model", str(model), "--config", str(config),
                 "--frames", "2", "--json", "-q"]) == 0
    assert json.loads(capsys.readouterr().out)["frames kept"] == 1


def test_config_beside_the_model_is_used(dots, capsys):
    proj, model, config = dots
    model.with_suffix(".json").write_text(config.read_text())
    assert main(["prelabel", str(proj), "--model", str(model), "-q"]) == 0
    assert "5 people" in capsys.readouterr().out


def _bad_config(config, **change):
    data = json.loads(config.read_text())
    data.update(change)
    config.write_text(json.dumps(data))


@pytest.mark.parametrize("spoil, words", [
    (lambda m, c: m.write_bytes(b"junk"), "dots.onnx: OpenCV cannot load the model"),
    (lambda m, c: _bad_config(c, stride="eight"), "config.json: field stride:"),
    (lambda m, c: _bad_config(c, joint_order=["top", "middle"]),
     "config.json: field joint_order: 2 entries, but the confidence maps have 4 channels"),
    (lambda m, c: _bad_config(c, outputs={"confidence_maps": "maps", "pafs": 1}),
     "config.json: field outputs.confidence_maps: the model has no output 'maps'"),
    (lambda m, c: _bad_config(c, joint_order=[None, "bottom", "top", "head"]),
     "config.json: field joint_order.3: the project's skeleton 'synthetic-4' has no joint "
     "'head'"),
])
def test_a_bad_model_or_config_changes_nothing(dots, capsys, spoil, words):
    proj, model, config = dots
    spoil(model, config)
    capsys.readouterr()
    assert main(["prelabel", str(proj), "--model", str(model), "--config", str(config),
                 "-q"]) == 2
    err = _err(capsys)
    assert err.startswith("posewright: error: ") and words in err
    with Project.open(proj) as p:
        assert p.counts()["people"] == 0 and p.counts()["ledger"] == 0
        assert all(p.maps_path(f.id) is None for f in p.frames())
    assert not (proj / "maps").exists()


def test_a_bad_frame_list_changes_nothing(dots, capsys):
    proj, model, config = dots
    capsys.readouterr()
    assert main(["prelabel", str(proj), "--model", str(model), "--config", str(config),
                 "--frames", "1,7", "-q"]) == 2
    assert "--frames: the project has no frame 7" in _err(capsys)
