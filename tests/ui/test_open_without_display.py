"""`posewright open` on a machine without a display: a screenshot still works, a window is
refused in one line (common practice for command-line tools, no source)."""

import os
import subprocess
import sys

import pytest

from app.jobs import new_project


@pytest.fixture
def bare_env():
    env = {k: v for k, v in os.environ.items()
           if k not in ("DISPLAY", "WAYLAND_DISPLAY", "QT_QPA_PLATFORM")}
    env["POSEWRIGHT_AUTHOR"] = "ana"
    return env


@pytest.mark.skipif(sys.platform != "linux", reason="the display check is for Linux")
def test_screenshot_needs_no_display_and_a_window_is_refused_in_one_line(
        tmp_path, image_dir, bare_env):
    new_project(tmp_path / "p", images=image_dir).close()
    shot = tmp_path / "shot.png"
    done = subprocess.run([sys.executable, "-m", "app", "open", str(tmp_path / "p"),
                           "--screenshot", str(shot)], env=bare_env, capture_output=True,
                          text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    assert shot.stat().st_size > 0 and "propagateSizeHints" not in done.stderr
    refused = subprocess.run([sys.executable, "-m", "app", "open", str(tmp_path / "p")],
                             env=bare_env, capture_output=True, text=True, timeout=120)
    assert refused.returncode == 2
    assert refused.stderr.count("\n") == 1 and "no display" in refused.stderr
