"""The command line: what a person types, what they see, and the exit status."""

import json
import subprocess
import sys

import pytest

from app.cli import main
from app.jobs import new_project


def _run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def test_new_import_export_history(tmp_path, image_dir, coco_file, capsys):
    proj = tmp_path / "p"
    assert _run(capsys, "new", proj, "--images", image_dir, "-q")[0] == 0
    code, out, _ = _run(capsys, "import", proj, coco_file, "-q", "--json")
    assert code == 0 and json.loads(out)["people"] == 18
    assert _run(capsys, "export", proj, "--out", tmp_path / "o.json", "--states", "all")[0] == 0
    assert json.loads((tmp_path / "o.json").read_text()) == json.loads(coco_file.read_text())
    code, out, _ = _run(capsys, "history", proj, "--json")
    assert code == 0 and json.loads(out)[0]["kind"] == "import"
    code, out, _ = _run(capsys, "summary", proj, "--json")
    assert json.loads(out)["people"] == 18


def test_history_names_people_by_tag_and_number_and_joints_by_name(tmp_path, image_dir,
                                                                   coco_file, capsys):
    """The ledger records ids and joint indices; `history` writes them as the app shows them
    (the 17 COCO joint names, Lin et al., ECCV 2014: index 9 is the left wrist). The labels are
    the suite's synthetic COCO file."""
    from app.model.edits import SetVisibility
    from app.store.project import Project

    proj = tmp_path / "p"
    _run(capsys, "new", proj, "--images", image_dir, "-q")
    _run(capsys, "import", proj, coco_file, "-q")
    with Project.open(proj, author="ana") as project:
        frame = project.frames()[0]
        people = project.people(frame.id)
        project.apply(SetVisibility(frame.id, people[1].id, 9, 1))
    code, out, _ = _run(capsys, "history", proj)
    assert code == 0
    assert f"mark person 2 (#{people[1].id})'s left wrist occluded" in out.splitlines()[0]


@pytest.mark.parametrize("argv_tail, words", [
    (["import", "{p}", "{missing}"], "cannot read the file"),
    (["import", "{p}", "{bad}"], "bad.json: annotations[0] (id 1): field keypoints"),
    (["history", "{p}", "--frame", "nope.jpg"], "no frame 'nope.jpg'"),
    (["export", "{p}", "--out", "{nodir}/x.json"], "does not exist"),
    (["export", "{p}", "--out", "{out}", "--states", "done"], "unknown frame state 'done'"),
    (["new", "{p}", "--images", "{missing}"], "already exists"),
    (["summary", "{nowhere}"], "no project here"),
    (["frobnicate"], "invalid choice"),
])
def test_bad_input_is_one_line_status_2_nothing_written(tmp_path, image_dir, capsys,
                                                        argv_tail, words):
    proj = tmp_path / "p"
    assert _run(capsys, "new", proj, "--images", image_dir, "-q")[0] == 0
    bad = tmp_path / "bad.json"
    bad.write_text(json.dumps({"images": [], "categories": [], "annotations": [
        {"id": 1, "image_id": 1, "category_id": 1, "keypoints": ["x"]}]}))
    names = {"p": proj, "missing": tmp_path / "missing.json", "bad": bad,
             "nodir": tmp_path / "no" / "dir", "out": tmp_path / "o.json",
             "nowhere": tmp_path / "nowhere"}
    argv = [a.format(**names) for a in argv_tail]
    before = sorted(p.name for p in tmp_path.iterdir())
    with pytest.raises(SystemExit) if argv[0] == "frobnicate" else _nullcontext() as exc:
        code, _, err = _run(capsys, *argv)
    if argv[0] == "frobnicate":
        code = exc.value.code
        err = capsys.readouterr().err
    assert code == 2
    lines = [line for line in err.splitlines() if line.strip()]
    assert len(lines) == 1, err
    assert words in lines[0] and "Traceback" not in err
    assert sorted(p.name for p in tmp_path.iterdir()) == before


class _nullcontext:
    value = None

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False


def test_python_dash_m_app_is_the_same_command(tmp_path, image_dir):
    """Run as a real process: no traceback reaches the terminal on bad input."""
    out = subprocess.run([sys.executable, "-m", "app", "import", str(tmp_path / "none"),
                          str(tmp_path / "x.json")], capture_output=True, text=True)
    assert out.returncode == 2
    assert out.stderr.count("\n") == 1 and "Traceback" not in out.stderr


def test_second_writer_is_refused_with_the_reason(tmp_path, image_dir, coco_file, capsys):

    with new_project(tmp_path / "p", images=image_dir, author="ana"):
        code, _, err = _run(capsys, "import", tmp_path / "p", coco_file, "-q")
        assert code == 2 and "open for editing by ana" in err
        # Reading still works while someone edits.
        assert _run(capsys, "summary", tmp_path / "p")[0] == 0


def test_output_cut_short_by_its_reader_ends_quietly(tmp_path, image_dir, coco_file):
    """`posewright history P | head` printed "error: Broken pipe" with status 2. A reader
    that is gone before anything is written is the same case without timing: the command
    ends with status 141 (128 + SIGPIPE, what a shell reports for a command stopped by a
    broken pipe; common practice, no source) and nothing on stderr."""
    import os

    proj = tmp_path / "p"
    assert main(["new", str(proj), "--images", str(image_dir), "-q"]) == 0
    assert main(["import", str(proj), str(coco_file), "-q"]) == 0
    read, write = os.pipe()
    os.close(read)
    try:
        out = subprocess.run([sys.executable, "-m", "app", "history", str(proj)], stdout=write,
                             stderr=subprocess.PIPE, text=True)
    finally:
        os.close(write)
    assert out.returncode == 141 and out.stderr == ""


def test_version(capsys):
    from app import __version__

    with pytest.raises(SystemExit) as exit_:
        main(["--version"])
    assert exit_.value.code == 0 and capsys.readouterr().out == f"posewright {__version__}\n"


@pytest.mark.parametrize("argv, words", [
    (["export", "{p}", "--outt", "o.json"], "unrecognized argument --outt (did you mean --out?)"),
    (["export", "{p}", "--outt=o.json"], "unrecognized argument --outt (did you mean --out?)"),
    (["packet", "decide", "x.zip", "--frame", "1", "--decisoin", "agree"],
     "unrecognized argument --decisoin (did you mean --decision?)"),
    (["--verison"], "unrecognized argument --verison (did you mean --version?)"),
])
def test_a_mistyped_option_is_named(tmp_path, capsys, argv, words):
    """argparse checks required options before it reports unknown ones, so a mistyped
    `--outt` read as a missing `--out`."""
    with pytest.raises(SystemExit) as exit_:
        main([a.format(p=tmp_path) for a in argv])
    err = capsys.readouterr().err
    assert exit_.value.code == 2 and err.count("\n") == 1 and words in err


def test_counts_of_one_are_singular_and_an_unreadable_image_is_warned_once(tmp_path, capsys):
    """"1 frames" read wrong; the unreadable image was warned about twice, with two forms of
    its path. Synthetic images."""
    from tests import synthetic

    images = tmp_path / "images"
    synthetic.write_images(images, 1)
    (images / "broken.jpg").write_bytes(b"not an image")
    code, out, err = _run(capsys, "new", tmp_path / "p", "--images", images, "-q")
    assert code == 0 and out == f"created {tmp_path / 'p'}: 2 frames, 1 unreadable\n"
    assert err == f"posewright: warning: {images / 'broken.jpg'}: image is corrupt (not an " \
                  "image Posewright can read); registered and marked\n"
    (images / "broken.jpg").unlink()
    code, out, _ = _run(capsys, "new", tmp_path / "q", "--images", images, "-q")
    assert out == f"created {tmp_path / 'q'}: 1 frame\n"


def test_demo_refuses_to_write_over_a_project_unless_forced(tmp_path, image_dir, capsys,
                                                            monkeypatch):
    """`posewright demo DIR` rewrote the images, maps and true poses of a project in DIR."""
    import app.demo

    proj = tmp_path / "p"
    assert main(["new", str(proj), "--images", str(image_dir), "-q"]) == 0
    before = sorted(p.name for p in proj.iterdir())
    code, _, err = _run(capsys, "demo", proj, "--frames", "1", "-q")
    assert code == 2 and err.count("\n") == 1
    assert f"{proj}: already holds project.db" in err and "--force" in err
    assert sorted(p.name for p in proj.iterdir()) == before
    written = []
    monkeypatch.setattr(app.demo, "generate",
                        lambda out, **kw: written.append((out, kw["frames"])))
    assert _run(capsys, "demo", proj, "--frames", "1", "--force", "-q")[0] == 0
    assert written == [(proj, 1)] and not (proj / "project.db").exists()


def test_demo_writes_the_choir_when_asked_and_the_dance_by_default(tmp_path, capsys,
                                                                    monkeypatch):
    """`posewright demo DIR --scene choir --seed N` asks the generator for the choir with that
    seed; without --scene it asks for the dance; an unknown scene is refused with status 2."""
    import app.demo

    asked = []
    monkeypatch.setattr(app.demo, "generate",
                        lambda out, **kw: asked.append((kw["scene"], kw["seed"])))
    assert _run(capsys, "demo", tmp_path / "a", "--scene", "choir", "--seed", "3", "-q")[0] == 0
    assert _run(capsys, "demo", tmp_path / "b", "-q")[0] == 0
    assert asked == [("choir", 3), ("dance", app.demo.DEFAULT_SEED)]
    with pytest.raises(SystemExit) as exit_:
        main(["demo", str(tmp_path / "c"), "--scene", "opera", "-q"])
    assert exit_.value.code == 2 and "--scene" in capsys.readouterr().err


def test_demo_force_refuses_a_project_open_for_editing(tmp_path, image_dir, capsys):

    with new_project(tmp_path / "p", images=image_dir, author="ana"):
        code, _, err = _run(capsys, "demo", tmp_path / "p", "--force", "-q")
    assert code == 2 and "open for editing by ana" in err
    assert (tmp_path / "p" / "project.db").exists()


def test_deciding_on_a_frame_not_in_the_packet_names_the_packet(tmp_path, image_dir,
                                                               coco_file, capsys):
    proj = tmp_path / "p"
    assert main(["new", str(proj), "--images", str(image_dir), "-q"]) == 0
    assert main(["import", str(proj), str(coco_file), "-q"]) == 0
    packet = tmp_path / "r.zip"
    assert main(["packet", "export", str(proj), "--frames", "100,107", "--out", str(packet),
                 "--images", "none", "-q"]) == 0
    capsys.readouterr()
    code, _, err = _run(capsys, "packet", "decide", packet, "--frame", "7", "--decision",
                        "agree")
    assert code == 2 and err == (f"posewright: error: {packet}: the packet has no frame 7; it "
                                 "holds 2 frames: 100, 107\n")


def _holding_infinity(proj):
    """A project as an import made before non-finite numbers were refused left it (written
    through the store's bulk writer, as that import did). Synthetic data."""
    import numpy as np

    from app.model import Person
    from app.store import Project

    kp = np.zeros((17, 3))
    kp[:3] = [[10, 20, 2], [30, 25, 1], [22, 40, 2]]
    with Project.open(proj) as p, p.bulk("ImportCoco", "import old.json", "file:old.json") as b:
        b.add_people([(1, Person(77, kp, np.full(17, np.nan), ("import",) * 17, None,
                                 {"area": float("inf"), "iscrowd": 0}))])


def test_a_project_holding_infinity_exports_says_where_and_mends(tmp_path, image_dir, capsys):
    """Export and packet export crashed ("Out of range float values are not JSON
    compliant"); they now write strict JSON (RFC 8259) and name the record, and `mend`
    replaces the value for good."""
    proj = tmp_path / "p"
    assert main(["new", str(proj), "--images", str(image_dir), "-q"]) == 0
    _holding_infinity(proj)
    out = tmp_path / "o.json"
    # Every state, as the frame of the old import is untouched; that is warned about as well.
    code, _, err = _run(capsys, "export", proj, "--out", out, "--states", "all")
    unchecked = "posewright: warning: the export holds 6 untouched frames: labels nobody has " \
                "checked or still in dispute\n"
    assert code == 0
    assert err == (f"posewright: warning: {out}: annotations[0] (id 77): field area: Infinity, "
                   f"written as 400.0; `posewright mend {proj}` mends the project\n"
                   + unchecked)
    json.loads(out.read_text(), parse_constant=_refuse)
    code, _, err = _run(capsys, "packet", "export", proj, "--frames", "1", "--out",
                        tmp_path / "r.zip", "--images", "none", "-q")
    assert code == 0 and "field people.0.extra.area: not a finite number" in err
    code, out_text, _ = _run(capsys, "mend", proj)
    assert code == 0 and out_text == ("mended frame 1: person #77: field area: dropped\n"
                                      f"{proj}: mended 1 field\n")
    code, _, err = _run(capsys, "export", proj, "--out", out, "--states", "all")
    assert code == 0 and err == unchecked
    assert _run(capsys, "mend", proj)[1].endswith("nothing to mend\n")


def _refuse(token):
    raise AssertionError(f"{token} in output that must be strict JSON")


def test_json_output_is_strict(tmp_path, image_dir, capsys):
    """What --json prints is read by programs: a value kept from an old import that JSON
    cannot hold is null (RFC 8259 has no NaN or Infinity; `history --json` printed Infinity).
    Synthetic project."""
    from app.model import DeletePerson
    from app.store import Project

    proj = tmp_path / "p"
    assert main(["new", str(proj), "--images", str(image_dir), "-q"]) == 0
    _holding_infinity(proj)
    with Project.open(proj, author="ana") as p:
        p.apply(DeletePerson(1, 77))
    capsys.readouterr()
    code, out, _ = _run(capsys, "history", proj, "--json")
    (row,) = [r for r in json.loads(out, parse_constant=_refuse) if r["target"] == "person:77"]
    assert code == 0 and row["before"]["extra"]["area"] is None


def test_building_the_parser_imports_no_numpy():
    """A batch command asks for its workers' fork server right after parsing its arguments
    (app.parallel.head_start), so the parser is built without numpy, pydantic, OpenCV or the
    model (importing app.cli took 0.30 s before, 0.06 s after, 3 December 2026); app.cli
    keeps its own copy of the largest id, which must agree with app.fileio's."""
    code = ("import sys; from app.cli import MAX_ID, build_parser; build_parser(); "
            "print(sorted({m.split('.')[0] for m in sys.modules} & {'numpy', 'pydantic', "
            "'cv2', 'scipy'}), sorted(m for m in sys.modules if m.startswith('app.model')), "
            "MAX_ID)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    from app.fileio import MAX_ID

    assert out.stdout.split() == ["[]", "[]", str(MAX_ID)]


def test_building_the_parser_imports_no_triage():
    """Every command's start: the parser (``findings --help`` lists the kinds of finding)
    is built without importing triage or scipy.stats, which took most of a second of every
    command's start, the batch jobs' included (app/analysis/kinds.py)."""
    code = ("import sys; from app.cli import build_parser; build_parser(); "
            "print(sorted(m for m in sys.modules if m.startswith(('app.analysis.triage', "
            "'scipy.stats', 'app.jobs_findings'))))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == "[]"
