"""What a killed `targets` or `packet export` leaves beside its output (and the lock note it
leaves in the project) is removed by the next run, a line each, while a live writer's work in
flight is left alone.

The processes are real and are killed with SIGKILL at a chosen point (the child patches a
function of its own to kill itself there); the project and its labels are synthetic.
"""

import signal
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

from app.workfiles import Claim, sweep

ROOT = str(Path(__file__).resolve().parents[1])

KILLED = textwrap.dedent("""
    import os, signal, sys
    sys.path.insert(0, {root!r})
    import {module} as target
    original = getattr(target, {name!r})
    calls = []

    def die_on_second(*args, **kwargs):
        calls.append(1)
        if len(calls) == 2:
            os.kill(os.getpid(), signal.SIGKILL)
        return original(*args, **kwargs)

    setattr(target, {name!r}, die_on_second)
    from app.cli import main
    main({argv!r})
""")

HOLDER = textwrap.dedent("""
    import sys, time
    sys.path.insert(0, {root!r})
    from app.workfiles import Claim
    claim = Claim({path!r})
    print("held", flush=True)
    time.sleep(120)
""")


def _killed(module, name, argv):
    script = KILLED.format(root=ROOT, module=module, name=name, argv=[str(a) for a in argv])
    done = subprocess.run([sys.executable, "-c", script], capture_output=True, text=True)
    assert done.returncode == -signal.SIGKILL, done.stderr


def _posewright(*argv):
    """Run the command in a process of its own: its exit status and its stderr lines."""
    done = subprocess.run([sys.executable, "-m", "app", *map(str, argv)], cwd=ROOT,
                          capture_output=True, text=True)
    return done.returncode, done.stderr.strip().splitlines()


@pytest.fixture
def live(tmp_path):
    """Start a process that holds a claim on a path; yields the path maker."""
    children = []

    def hold(path: Path) -> Path:
        child = subprocess.Popen([sys.executable, "-c",
                                  HOLDER.format(root=ROOT, path=str(path))],
                                 stdout=subprocess.PIPE, text=True)
        assert child.stdout.readline().strip() == "held"
        children.append(child)
        return path

    yield hold
    for child in children:
        child.kill()
        child.wait()


def test_killed_targets_and_packet_export_are_cleaned_up_by_the_next_run(tmp_path, project,
                                                                         live):
    folder = project.folder
    project.close()
    out = tmp_path / "targets"
    _killed("numpy", "savez_compressed", ["targets", folder, out, "--states", "all", "-q"])
    stale = sorted(tmp_path.glob("targets.*.partial"))
    assert len(stale) == 1 and (stale[0] / "1.npz").is_file() and not out.exists()
    busy = tmp_path / "targets.live0000.partial"
    busy.mkdir()
    live(busy)

    code, err = _posewright("targets", folder, out, "--states", "all", "-q")
    # The killed run had the project open too: its lock note is stale, and said so once;
    # last comes the export rule's warning that every frame is untouched.
    assert code == 0 and len(err) == 3, err
    assert "interrupted run" in err[0] and "stale project.holder.json of process" in err[0]
    assert "interrupted run" in err[1] and stale[0].name in err[1] and busy.name not in err[1]
    assert "the export holds 6 untouched frames" in err[2]
    assert sorted(tmp_path.glob("targets.*.partial")) == [busy]
    assert len(list(out.glob("*.npz"))) == 6

    zipped = tmp_path / "send.zip"
    _killed("app.review.packet", "write_member",
            ["packet", "export", folder, "--frames", "untouched", "--images", "none",
             "--out", zipped])
    stale = sorted(tmp_path.glob("send.zip.*.tmp"))
    assert len(stale) == 1 and not zipped.exists()
    code, err = _posewright("packet", "export", folder, "--frames", "untouched",
                            "--images", "none", "--out", zipped, "-q")
    assert code == 0 and len(err) == 2 and stale[0].name in err[1], err
    assert zipped.is_file() and not list(tmp_path.glob("send.zip.*.tmp"))


def test_sweep_takes_only_the_destinations_own_temporaries(tmp_path, live):
    """Names must be the destination's, with tempfile's eight random characters: a user's
    ``labels.json.backup.tmp`` or another destination's temporary is not touched."""
    keep = ["labels.json.backup.tmp", "labels.json.abc.tmp", "other.json.k3x9q0ab.tmp",
            "labels.json.k3x9q0ab.partial"]
    for name in keep:
        (tmp_path / name).write_text("x")
    (tmp_path / "labels.json.k3x9q0ab.tmp").write_text("x")
    (tmp_path / "labels.json.zzzz9999.tmp").write_text("x")
    held = live(tmp_path / "labels.json.zzzz9999.tmp")
    assert [p.name for p in sweep(tmp_path / "labels.json", ".tmp")] == [
        "labels.json.k3x9q0ab.tmp"]
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted([*keep, held.name])


def test_a_claim_is_released_with_its_block(tmp_path):
    path = tmp_path / "out.json.abcdefgh.tmp"
    path.write_text("x")
    with Claim(path):
        assert sweep(tmp_path / "out.json", ".tmp") == []
    assert sweep(tmp_path / "out.json", ".tmp") == [path] and not path.exists()
