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
