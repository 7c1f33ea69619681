"""Text from files reaches the terminal escaped: file names, ledger entries, messages.

Issue item 8. The escape and control sequences used are ECMA-48's (ESC ] 0 ; ... BEL sets a
terminal's window title, ESC [ 2 J clears the screen); the file names are synthetic.
"""

from __future__ import annotations

import json
import subprocess
import sys

from app.cli import main

#: Sets the window title, then clears the screen (ECMA-48 OSC and CSI sequences).
_TRAP = "\x1b]0;owned\x07\x1b[2J"


def _run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def _clean(text: str) -> bool:
    """No character a terminal would act on, except the ends of lines."""
    return all(line.isprintable() for line in text.splitlines())


def test_history_summary_and_triage_escape_file_names(tmp_path, image_dir, coco_file, capsys):
    """A COCO file and an image whose names carry escape sequences: every line printed
    about them shows the sequences as text."""
    (image_dir / "frame_0002.jpg").rename(image_dir / f"frame{_TRAP}.jpg")
    data = json.loads(coco_file.read_text())
    for image in data["images"]:
        image["file_name"] = image["file_name"].replace("frame_0002", f"frame{_TRAP}")
    hostile = tmp_path / f"labels{_TRAP}.json"
    hostile.write_text(json.dumps(data))
    proj = tmp_path / "p"
    assert _run(capsys, "new", proj, "--images", image_dir, "-q")[0] == 0
    assert _run(capsys, "import", proj, hostile, "-q")[0] == 0
    for argv in (["history", proj], ["summary", proj], ["triage", proj]):
        code, out, err = _run(capsys, *argv)
        assert code == 0 and _clean(out) and _clean(err), argv
    assert "labels\\x1b]0;owned\\x07\\x1b[2J.json" in _run(capsys, "history", proj)[1]
    assert "frame\\x1b]0;owned" in _run(capsys, "triage", proj)[1]


def test_an_error_about_a_hostile_file_name_is_one_clean_line(tmp_path, image_dir, capsys):
    proj = tmp_path / "p"
    assert _run(capsys, "new", proj, "--images", image_dir, "-q")[0] == 0
    code, _, err = _run(capsys, "import", proj, tmp_path / f"x{_TRAP}\nsecond line.json")
    assert code == 2 and err.count("\n") == 1 and _clean(err)
    assert "x\\x1b]0;owned\\x07\\x1b[2J\\nsecond line.json" in err


def test_log_lines_are_escaped_too(tmp_path):
    """Run as a real process, so that the command's own logging set-up is in force: the
    warning that an image cannot be read names the file escaped."""
    images = tmp_path / "images"
    images.mkdir()
    (images / f"broken{_TRAP}.jpg").write_bytes(b"not an image")
    out = subprocess.run([sys.executable, "-m", "app", "new", str(tmp_path / "p"), "--images",
                          str(images), "-q"], capture_output=True, text=True)
    assert out.returncode == 0
    assert "broken\\x1b]0;owned" in out.stderr and _clean(out.stderr), out.stderr
