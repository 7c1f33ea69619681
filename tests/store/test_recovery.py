"""The next open settles what an interrupted run left: map runs rolled back or forward, old
staging folders restored or removed, unfinished video extractions and stale lock notes removed,
each open saying so in one line. The states are made by hand, as a crash at that moment would
leave them (tests/store/test_kill.py kills real processes); map contents are synthetic bytes.
"""

import json
import os

import pytest

from app.jobs import new_project
from app.store import Project
from app.store.project import HOLDER_NAME, LOCK_NAME

# What the lock holder of a folder finds on opening; a server has no such folder.
pytestmark = pytest.mark.folder_only


def _run(project, contents):
    """One committed run: ``{frame id: bytes}`` written into a new run folder and named."""
    run = project.new_map_run("prelabel")
    for frame_id, data in contents.items():
        (run / f"{frame_id}.npz").write_bytes(data)
    try:
        with project.bulk("Prelabel", "test run", "model:test") as b:
            for frame_id in contents:
                b.set_maps(frame_id, run / f"{frame_id}.npz", 8)
    finally:
        project.drop_map_run(run)
    return run


def _named(project):
    return {f.id: project.maps_path(f.id)[0].read_bytes()
            for f in project.frames() if project.maps_path(f.id)}


def _said(caplog):
    return [r.getMessage() for r in caplog.records if "interrupted run" in r.getMessage()]


def test_superseded_maps_go_after_the_commit_and_a_crash_there_is_rolled_forward(
        project, tmp_path, monkeypatch, caplog):
    first = _run(project, {1: b"one-a", 2: b"two-a"})
    monkeypatch.setattr(Project, "_sweep_maps", lambda self: None)  # dies after the commit
    second = _run(project, {1: b"one-b"})
    assert (first / "1.npz").exists()  # superseded but not yet deleted
    monkeypatch.undo()
    project.close()
    caplog.clear()
    with Project.open(tmp_path / "proj") as p:
        assert _named(p) == {1: b"one-b", 2: b"two-a"}
        assert sorted(x.name for x in first.glob("*.npz")) == ["2.npz"]
        said = _said(caplog)
        assert len(said) == 1 and "deleted the maps a finished run replaced" in said[0]
        _run(p, {2: b"two-c"})  # the first run's last frame: its folder goes
        assert not first.exists() and second.is_dir()
        assert json.loads(p.meta("map_runs")) == sorted(
            str(r.relative_to(p.folder)) for r in (p.folder / "maps").iterdir())
    with Project.open(tmp_path / "proj") as p:
        assert p.recovered == ()


def test_an_unfinished_run_is_rolled_back(project, tmp_path, caplog):
    kept = _run(project, {1: b"one-a"})
    unfinished = project.new_map_run("prelabel")   # the process dies before its commit
    (unfinished / "1.npz").write_bytes(b"half")
    project.close()
    caplog.clear()
    with Project.open(tmp_path / "proj") as p:
        assert not unfinished.exists() and _named(p) == {1: b"one-a"} and kept.is_dir()
        said = _said(caplog)
        assert len(said) == 1 and f"maps/{unfinished.name}" in said[0]


def test_maps_outside_run_folders_are_never_deleted(project, tmp_path):
    """Imported maps stay where the user keeps them, even when a run replaces them; a folder
    under maps/ that is not a run folder of ours is left alone on open."""
    own = tmp_path / "theirs"
    own.mkdir()
    (own / "1.npz").write_bytes(b"imported")
    stranger = project.folder / "maps" / "prelabel-mine"
    stranger.mkdir(parents=True)
    (stranger / "1.npz").write_bytes(b"mine")
    with project.bulk("ImportMaps", "import", "folder:theirs") as b:
        b.set_maps(1, own / "1.npz", 8)
    _run(project, {1: b"one-a"})
    assert (own / "1.npz").read_bytes() == b"imported"
    project.close()
    with Project.open(tmp_path / "proj") as p:
        assert p.recovered == () and (stranger / "1.npz").exists()


def test_old_staging_folders_are_put_back_when_the_run_certainly_did_not_commit(
        project, tmp_path, caplog):
    """The layout before run folders: a killed run had moved frame 1's maps aside and its new
    ones in, with frame 2's new maps still waiting in staging, inside an open transaction that
    died with it. The database names maps/prelabel/1.npz and 2.npz of the earlier run."""
    legacy = project.folder / "maps" / "prelabel"
    legacy.mkdir(parents=True)
    for frame_id in (1, 2):
        (legacy / f"{frame_id}.npz").write_bytes(b"old-%d" % frame_id)
    with project.bulk("Prelabel", "earlier run", "model:test") as b:
        for frame_id in (1, 2):
            b.set_maps(frame_id, legacy / f"{frame_id}.npz", 8)
    killed = legacy / ".staging-k3x9q0ab"
    (killed / "previous").mkdir(parents=True)
    os.replace(legacy / "1.npz", killed / "previous" / "1.npz")
    (legacy / "1.npz").write_bytes(b"new-1")
    (legacy / "3.npz").write_bytes(b"new-3")   # a frame the earlier run did not have
    (killed / "2.npz").write_bytes(b"new-2")
    ambiguous = legacy / ".staging-zz99zz99"   # everything moved: the commit may have landed
    (ambiguous / "previous").mkdir(parents=True)
    project.close()
    caplog.clear()
    with Project.open(tmp_path / "proj") as p:
        assert _named(p) == {1: b"old-1", 2: b"old-2"}
        assert sorted(x.name for x in legacy.iterdir()) == ["1.npz", "2.npz"]
        said = _said(caplog)
        assert len(said) == 1 and "put back the maps" in said[0] and ".staging-zz99zz99" in said[0]


def test_stale_lock_notes_and_unfinished_video_frames_are_removed(project, tmp_path, caplog):
    project.close()
    folder = tmp_path / "proj"
    (folder / HOLDER_NAME).write_text(json.dumps({"pid": 4242, "host": "hall-pc",
                                                  "author": "ana", "since": 0}))
    partial = folder / "frames" / ".rehearsal.k3x9q0ab.partial"
    partial.mkdir(parents=True)
    (partial / "000001.jpg").write_bytes(b"half a frame")
    caplog.clear()
    with Project.open(folder) as p:
        said = _said(caplog)
        assert len(said) == 1, said
        assert "frames/.rehearsal.k3x9q0ab.partial" in said[0]
        assert "stale project.holder.json of process 4242 on hall-pc" in said[0]
        assert not partial.exists() and len(p.recovered) == 2
        assert json.loads((folder / HOLDER_NAME).read_text())["pid"] == os.getpid()


@pytest.mark.parametrize("existed", [False, True])
def test_a_failed_create_leaves_no_lock_file_and_no_folder_it_made(tmp_path, image_dir,
                                                                    monkeypatch, existed):
    folder = tmp_path / "new"
    if existed:
        folder.mkdir()

    def broken(self, frames, first_id):
        raise RuntimeError("the disk went away")

    monkeypatch.setattr("app.store.frames.FramesGateway.insert", broken)
    with pytest.raises(RuntimeError):
        new_project(folder, images=image_dir)
    assert folder.exists() == existed
    assert not existed or list(folder.iterdir()) == []
    assert not (tmp_path / "new" / LOCK_NAME).exists()
