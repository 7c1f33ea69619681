"""Hostile input and a failing disk at the command line: one line on stderr, exit status 2, no
traceback, and nothing half written. All files here are synthetic."""

import errno
import io
import json
import zipfile

import numpy as np
import pytest

from app.cli import main
from app.jobs import new_project
from app.store import Project
from app.store.db import SqliteDatabase

DEEP = "[" * 100_000 + "]" * 100_000


def _run(capsys, *argv):
    code = main([str(a) for a in argv])
    out, err = capsys.readouterr()
    return code, out, err


def _one_line(err, words):
    lines = [line for line in err.splitlines() if line.strip()]
    assert len(lines) == 1, err
    assert "Traceback" not in err and words in lines[0], err


@pytest.fixture
def proj(tmp_path, image_dir, coco_file):
    folder = tmp_path / "p"
    with new_project(folder, images=image_dir, author="ana") as p:
        from app.jobs import import_coco

        import_coco(p, coco_file)
    return folder


@pytest.mark.parametrize("argv, what", [
    (["import", "{p}", "{deep}"], "deep.json: the file is nested too deeply"),
    (["compare", "{p}", "{deep}"], "deep.json: the file is nested too deeply"),
    (["prelabel", "{p}", "--model", "{model}", "--config", "{deep}"],
     "deep.json: the config is nested too deeply"),
])
def test_deeply_nested_json_is_one_line(proj, tmp_path, capsys, argv, what):
    """Python's json reader raises RecursionError past about a thousand levels (from memory)."""
    (tmp_path / "deep.json").write_text(DEEP)
    (tmp_path / "m.onnx").write_bytes(b"not a model")
    names = {"p": proj, "deep": tmp_path / "deep.json", "model": tmp_path / "m.onnx"}
    code, _, err = _run(capsys, *[a.format(**names) for a in argv])
    assert code == 2
    _one_line(err, what)


@pytest.mark.parametrize("argv, what", [
    (["history", "{p}", "--frame", str(2**63)], f"no frame '{2**63}'"),
    (["history", "{p}", "--limit", str(2**63)], "argument --limit"),
    (["render", "{p}", "--frame", "1", "--out", "x.png", "--focus", str(2**64)],
     "argument --focus"),
    (["demo", "{p}", "--seed", "-1"], "argument --seed: -1 is not between 0"),
    (["packet", "decide", "x.zip", "--frame", str(2**63), "--decision", "agree"],
     "argument --frame"),
])
def test_numbers_too_large_for_the_database_are_one_line(proj, capsys, argv, what):
    """SQLite integers are 64-bit; 2**63 raised OverflowError in the store before."""
    with pytest.raises(SystemExit) if "argument" in what else _Same() as exit_:
        code, _, err = _run(capsys, *[a.format(p=proj) for a in argv])
    if exit_.value is not None:
        code, err = exit_.value.code, capsys.readouterr().err
    assert code == 2
    _one_line(err, what)


@pytest.mark.parametrize("option, value, unit", [
    ("--max-megapixels", "1e305", "megapixels"), ("--max-megapixels", "nan", "megapixels"),
    ("--memory-budget-mb", "1e305", "megabytes"), ("--memory-budget-mb", "-inf", "megabytes"),
])
def test_limits_too_large_to_count_are_one_line(proj, tmp_path, capsys, option, value, unit):
    """1e305 megapixels is a finite float whose pixel count (times 10**6) overflows to
    infinity (IEEE 754 doubles end near 1.8e308), which raised OverflowError before."""
    code, _, err = _run(capsys, "prelabel", proj, "--model", tmp_path / "m.onnx",
                        f"{option}={value}")
    assert code == 2
    _one_line(err, f"{option}: {float(value)} is not a positive number of {unit}")


class _Same:
    value = None

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        return False


def _npy(array_or_header, data=b""):
    buffer = io.BytesIO()
    if isinstance(array_or_header, dict):
        np.lib.format.write_array_header_1_0(buffer, array_or_header)
        buffer.write(data)
    else:
        np.save(buffer, array_or_header)
    return buffer.getvalue()


@pytest.mark.parametrize("members, what", [
    ({"confidence_maps.npy": _npy({"descr": "<f4", "fortran_order": False,
                                   "shape": (17, 300_000, 33_333)}, b"\0" * 64)},
     "member 'confidence_maps.npy': its header declares 679,993,200,000 bytes"),
    ({"confidence_maps": b"plain bytes"}, "member 'confidence_maps' is not a .npy array"),
])
def test_hostile_npz_members_are_one_line(proj, tmp_path, capsys, members, what):
    """A .npy header declaring a 633 GiB array made numpy allocate it (MemoryError); a member
    not named .npy came back as bytes."""
    maps = tmp_path / "maps"
    maps.mkdir()
    with zipfile.ZipFile(maps / "frame_0000.npz", "w") as z:
        for name, data in {"pafs.npy": _npy(np.zeros((19, 2, 30, 40), np.float32)),
                           "stride.npy": _npy(np.array(8)), **members}.items():
            z.writestr(name, data)
    code, _, err = _run(capsys, "import-maps", proj, maps, "-q")
    assert code == 2
    _one_line(err, what)


def _full_disk(monkeypatch):
    """Simulate a full disk: SQLite's max_page_count caps the database at its current size,
    and SQLite then fails a write with the error of a full disk (SQLITE_FULL; SQLite
    documentation, "PRAGMA max_page_count")."""
    connect = SqliteDatabase.connect

    def full(path, read_only, immutable=False):
        conn = connect(path, read_only, immutable)
        if not read_only:
            pages = conn.execute("PRAGMA page_count").fetchone()[0]
            conn.execute(f"PRAGMA max_page_count = {max(pages, 1)}")
        return conn

    monkeypatch.setattr(SqliteDatabase, "connect", staticmethod(full))


def test_a_full_disk_during_import_keeps_nothing(proj, tmp_path, coco_file, capsys,
                                                 monkeypatch):
    other = json.loads(coco_file.read_text())
    for ann in other["annotations"]:
        ann["id"] += 1000
    (tmp_path / "more.json").write_text(json.dumps(other))
    with Project.open(proj) as p:
        before = (p.counts()["people"], len(p.history()))
    _full_disk(monkeypatch)
    code, _, err = _run(capsys, "import", proj, tmp_path / "more.json", "-q")
    assert code == 2
    _one_line(err, "project.db: database or disk is full; the action was not kept")
    monkeypatch.undo()
    with Project.open(proj) as p:
        assert (p.counts()["people"], len(p.history())) == before


def test_a_full_disk_while_making_a_project_leaves_nothing(tmp_path, image_dir, capsys,
                                                           monkeypatch):
    _full_disk(monkeypatch)
    code, _, err = _run(capsys, "new", tmp_path / "a" / "b", "--images", image_dir, "-q")
    assert code == 2
    _one_line(err, "database or disk is full")
    assert not (tmp_path / "a").exists()


def test_a_full_disk_during_new_video_leaves_no_folder_and_no_lock(tmp_path, capsys,
                                                                   monkeypatch):
    import cv2

    video = tmp_path / "clip.avi"
    writer = cv2.VideoWriter(str(video), cv2.VideoWriter_fourcc(*"MJPG"), 10.0, (64, 48))
    for i in range(6):
        writer.write(np.full((48, 64, 3), 40 * i, np.uint8))
    writer.release()
    import app.formats.video as video_format

    write = video_format._write_bytes
    written = []

    def fill_up(path, data):
        if len(written) == 3:
            raise OSError(errno.ENOSPC, "No space left on device", str(path))
        written.append(path)
        write(path, data)

    monkeypatch.setattr(video_format, "_write_bytes", fill_up)
    code, _, err = _run(capsys, "new", tmp_path / "v", "--video", video, "-q")
    assert code == 2
    _one_line(err, "000003.jpg: No space left on device")
    assert not (tmp_path / "v").exists()


@pytest.mark.parametrize("content, what", [
    (b"", "project.db: the project database is empty (0 bytes)"),
    (b"these are my notes, not a database\n", "project.db: the project database is not an "
                                               "SQLite database"),
])
@pytest.mark.parametrize("command", ["summary", "import", "export"])
def test_a_project_db_that_is_not_a_database_is_refused_and_left_alone(
        proj, tmp_path, coco_file, capsys, content, what, command):
    """SQLite treats an empty file as a new database, so opening wrote a schema into it."""
    for name in ("project.db-wal", "project.db-shm"):
        (proj / name).unlink(missing_ok=True)
    (proj / "project.db").write_bytes(content)
    extra = {"summary": [], "import": [coco_file], "export": ["--out", tmp_path / "o.json"]}
    code, _, err = _run(capsys, command, proj, *extra[command])
    assert code == 2
    _one_line(err, what)
    assert (proj / "project.db").read_bytes() == content
    assert not (tmp_path / "o.json").exists()
    assert sorted(p.name for p in proj.iterdir()) == ["project.db", "project.lock"]
