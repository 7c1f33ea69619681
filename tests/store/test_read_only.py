"""A project whose folder cannot be written opens read-only and says why: reading commands
work, changing ones are refused in one line, nothing is written.

Root ignores permission bits, so a folder made read-only with chmod would pass wrongly as root
(CI runs as root). Three ways are used instead, each saying what it stands on:

- the operating-system boundary simulated: ``os.open`` of anything in the project folder for
  writing raises EROFS, as a read-only file system does (runs everywhere);
- a real read-only file system: a tmpfs mounted and remounted read-only (needs root and the
  right to mount; skipped otherwise);
- a real read-only folder by permission bits (needs a user other than root; skipped as root).

Labels are synthetic (tests/synthetic.py).
"""

import errno
import json
import os
import subprocess
import sys
from pathlib import Path

import pytest

from app.cli import main
from app.jobs import import_coco, new_project

ROOT = str(Path(__file__).resolve().parents[2])


@pytest.fixture
def labelled(tmp_path, image_dir, coco_file):
    """A closed project with 18 synthetic people."""
    folder = tmp_path / "proj"
    with new_project(folder, images=image_dir, author="ana") as p:
        import_coco(p, coco_file)
    return folder


def _snapshot(folder):
    return sorted((p.name, p.stat().st_size) for p in folder.iterdir())


def _check_commands(run, folder, out, because):
    """summary, history and export work and say why the project is read-only; import is
    refused in one line; ``run(*argv) -> (status, stdout, stderr)``."""
    status, stdout, stderr = run("summary", folder, "--json")
    assert status == 0 and because in json.loads(stdout)["read_only"]
    assert json.loads(stdout)["people"] == 18
    status, stdout, stderr = run("history", folder)
    assert status == 0 and "import" in stdout
    assert stderr.strip().splitlines() == [f"posewright: note: {folder} is read-only: in a "
                                           f"folder that cannot be written ({because})"]
    status, stdout, stderr = run("export", folder, "--out", out, "--states", "all")
    assert status == 0 and len(json.loads(Path(out).read_text())["annotations"]) == 18
    status, stdout, stderr = run("import", folder, out)
    lines = stderr.strip().splitlines()
    assert status == 2 and len(lines) == 1
    assert "cannot change the project: it is in a folder that cannot be written" in lines[0]


def test_unwritable_folder_simulated_at_the_os_boundary(labelled, tmp_path, monkeypatch,
                                                        capsys):
    """Simulated: ``os.open`` for writing inside the project folder fails with EROFS."""
    real_open = os.open
    inside = str(labelled)

    def read_only_fs(path, flags, *args, **kwargs):
        writing = flags & (os.O_WRONLY | os.O_RDWR | os.O_CREAT)
        if writing and os.path.abspath(os.fsdecode(path)).startswith(inside):
            raise OSError(errno.EROFS, os.strerror(errno.EROFS), os.fsdecode(path))
        return real_open(path, flags, *args, **kwargs)

    monkeypatch.setattr(os, "open", read_only_fs)
    before = _snapshot(labelled)

    def run(*argv):
        status = main([str(a) for a in argv])
        captured = capsys.readouterr()
        return status, captured.out, captured.err

    _check_commands(run, labelled, tmp_path / "out.json", "Read-only file system")
    # SQLite opens its files below Python, where the simulation cannot reach: the shared-
    # memory and write-ahead files a reader makes beside the database are not counted here.
    after = [entry for entry in _snapshot(labelled) if not entry[0].endswith(("-shm", "-wal"))]
    assert after == before


def _posewright(*argv):
    done = subprocess.run([sys.executable, "-m", "app", *map(str, argv)], cwd=ROOT,
                          capture_output=True, text=True)
    return done.returncode, done.stdout, done.stderr


@pytest.mark.skipif(not hasattr(os, "geteuid") or os.geteuid() != 0,
                    reason="mounting a file system needs root")
def test_real_read_only_file_system(tmp_path, image_dir, coco_file):
    """Real: the project lives on a tmpfs remounted read-only; its database was left in WAL
    mode by a clean close, so SQLite must read it without creating its shared-memory file."""
    mnt = tmp_path / "mnt"
    mnt.mkdir()
    if subprocess.run(["mount", "-t", "tmpfs", "-o", "size=16m", "tmpfs", str(mnt)],
                      capture_output=True).returncode:
        pytest.skip("this machine does not let the tests mount a file system")
    try:
        folder = mnt / "proj"
        with new_project(folder, images=image_dir, author="ana") as p:
            import_coco(p, coco_file)
        subprocess.run(["mount", "-o", "remount,ro", str(mnt)], check=True)
        before = _snapshot(folder)
        _check_commands(_posewright, folder, tmp_path / "out.json", "Read-only file system")
        assert _snapshot(folder) == before
    finally:
        subprocess.run(["umount", str(mnt)], check=False)


@pytest.mark.skipif(not hasattr(os, "geteuid") or os.geteuid() == 0,
                    reason="root ignores permission bits")
def test_real_read_only_folder(labelled, tmp_path):
    """Real: the project folder and its files have no write bits (as a user other than
    root)."""
    for p in [labelled, *labelled.iterdir()]:
        p.chmod(0o555 if p.is_dir() else 0o444)
    try:
        before = _snapshot(labelled)
        _check_commands(_posewright, labelled, tmp_path / "out.json", "Permission denied")
        assert _snapshot(labelled) == before
    finally:
        for p in [labelled, *labelled.iterdir()]:
            p.chmod(0o755 if p.is_dir() else 0o644)
