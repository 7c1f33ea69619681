"""The system libraries of Qt's platform plugin, checked before Qt starts (app/ui/syslibs.py).

Sources: Debian Policy Manual, section 8.1 ("Run-time shared libraries") for how a library's
package is named; the packages of the xcb plugin's libraries were read on Debian 12 with
``ldd`` on the plugin of the installed wheel and ``dpkg -S`` on each library (the list in the
README). The ``ldd`` listing format is that of the GNU C library's ``ldd``; the listing below
is synthetic, in that format. The dynamic loader itself (``ctypes``, i.e. ``dlopen``) is the
outside judge of which libraries are really missing.
"""

from __future__ import annotations

import ctypes
import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

from app.errors import PosewrightError
from app.jobs import new_project
from app.ui import commands, syslibs

linux_only = pytest.mark.skipif(sys.platform != "linux" or shutil.which("ldd") is None,
                                reason="the check reads ldd on Linux")

#: The xcb plugin's libraries and their packages on Debian 12 (ldd and dpkg -S, see above).
DEBIAN_12 = {
    "libxcb-cursor.so.0": "libxcb-cursor0", "libxcb-icccm.so.4": "libxcb-icccm4",
    "libxcb-image.so.0": "libxcb-image0", "libxcb-keysyms.so.1": "libxcb-keysyms1",
    "libxcb-render-util.so.0": "libxcb-render-util0", "libxcb-xkb.so.1": "libxcb-xkb1",
    "libxkbcommon-x11.so.0": "libxkbcommon-x11-0", "libxcb-shape.so.0": "libxcb-shape0",
    "libEGL.so.1": "libegl1", "libGL.so.1": "libgl1", "libfontconfig.so.1": "libfontconfig1",
    "libdbus-1.so.3": "libdbus-1-3", "libX11-xcb.so.1": "libx11-xcb1",
    "libxkbcommon.so.0": "libxkbcommon0", "libgcc_s.so.1": "libgcc-s1",
    "libstdc++.so.6": "libstdc++6", "libpng16.so.16": "libpng16-16",
    "libglib-2.0.so.0": "libglib2.0-0", "libGLdispatch.so.0": "libglvnd0",
    "libz.so.1": "zlib1g",
}

LDD = """\
\tlinux-vdso.so.1 (0x00007ffd1b3f2000)
\tlibQt6XcbQpa.so.6 => /venv/PySide6/Qt/plugins/platforms/../../lib/libQt6XcbQpa.so.6 (0x1)
\tlibGL.so.1 => /lib/x86_64-linux-gnu/libGL.so.1 (0x00007f3646a69000)
\tlibxcb-icccm.so.4 => not found
\tlibxcb-keysyms.so.1 => not found
\tlibxcb-icccm.so.4 => not found
\t/lib64/ld-linux-x86-64.so.2 (0x00007f3646b39000)
"""


def test_package_names_of_the_xcb_libraries_on_debian_12():
    assert {so: syslibs.debian_package(so) for so in DEBIAN_12} == DEBIAN_12


def test_the_missing_libraries_of_an_ldd_listing_each_once():
    assert syslibs.missing_in_ldd(LDD) == ["libxcb-icccm.so.4", "libxcb-keysyms.so.1"]
    assert syslibs.missing_in_ldd(LDD.replace("not found", "/opt/lib/x.so (0x2)")) == []


@linux_only
def test_the_check_agrees_with_the_dynamic_loader():
    """What the check calls missing for the real xcb plugin is exactly what dlopen cannot load
    (the plugin's system libraries; Qt's own come with the wheel)."""
    plugin = syslibs.platform_plugin("xcb")
    if plugin is None:
        pytest.skip("this PySide6 has no xcb plugin")
    listing = subprocess.run(["ldd", str(plugin)], capture_output=True, text=True).stdout
    system = {line.split()[0] for line in listing.splitlines()
              if "=>" in line and "PySide6" not in line}
    assert system, "ldd listed the plugin's libraries"

    def loads(soname: str) -> bool:
        try:
            ctypes.CDLL(soname)
        except OSError:
            return False
        return True

    assert set(syslibs.missing_libraries(plugin)) == {s for s in system if not loads(s)}


@pytest.fixture
def desktop(monkeypatch):
    """A Linux X desktop without Qt's platform chosen, where the xcb plugin lacks two
    libraries (the listing above) and the offscreen plugin lacks none."""
    for name in ("QT_QPA_PLATFORM", "WAYLAND_DISPLAY", "XDG_SESSION_TYPE",
                 "QT_QPA_PLATFORM_PLUGIN_PATH"):
        monkeypatch.delenv(name, raising=False)
    monkeypatch.setenv("DISPLAY", ":0")
    monkeypatch.setattr(sys, "platform", "linux")
    monkeypatch.setattr(syslibs, "platform_plugin", lambda p: Path(f"libq{p}.so"))
    monkeypatch.setattr(syslibs, "missing_libraries", lambda plugin: syslibs.missing_in_ldd(
        LDD) if plugin.name == "libqxcb.so" else [])
    monkeypatch.setattr(shutil, "which", lambda name: f"/usr/bin/{name}")
    return monkeypatch


def test_a_window_on_a_desktop_without_the_libraries_says_what_to_install(desktop):
    with pytest.raises(PosewrightError) as raised:
        commands._choose_platform(screenshot=False)
    message = str(raised.value)
    assert "libxcb-icccm.so.4, libxcb-keysyms.so.1" in message
    assert message.endswith("apt-get install libxcb-icccm4 libxcb-keysyms1")
    assert "\n" not in message and "QT_QPA_PLATFORM" not in os.environ


def test_a_screenshot_on_that_desktop_renders_offscreen(desktop):
    commands._choose_platform(screenshot=True)
    assert os.environ["QT_QPA_PLATFORM"] == "offscreen"


def test_headless_and_wayland_are_not_stopped_by_the_xcb_libraries(desktop):
    desktop.setenv("QT_QPA_PLATFORM", "offscreen")
    commands._choose_platform(screenshot=False)
    desktop.delenv("QT_QPA_PLATFORM")
    desktop.setenv("WAYLAND_DISPLAY", "wayland-0")
    desktop.setenv("XDG_SESSION_TYPE", "wayland")
    commands._choose_platform(screenshot=False)
    assert "QT_QPA_PLATFORM" not in os.environ, "on Wayland Qt chooses"


def test_xcb_asked_for_by_name_is_checked_even_for_a_screenshot(desktop):
    desktop.setenv("QT_QPA_PLATFORM", "xcb")
    with pytest.raises(PosewrightError, match="libxcb-keysyms1"):
        commands._choose_platform(screenshot=True)


def test_with_every_library_there_qt_chooses(desktop):
    desktop.setattr(syslibs, "missing_libraries", lambda plugin: [])
    commands._choose_platform(screenshot=False)
    assert "QT_QPA_PLATFORM" not in os.environ


@linux_only
def test_open_stops_before_qt_starts_in_one_line(tmp_path, image_dir):
    """End to end, in a process of its own: a copy of the real xcb plugin away from the
    wheel cannot find Qt's libraries, which is what the dynamic linker reports; ``posewright
    open`` must say so in one line with status 2 rather than let Qt abort (status 134)."""
    plugin = syslibs.platform_plugin("xcb")
    if plugin is None:
        pytest.skip("this PySide6 has no xcb plugin")
    plugins = tmp_path / "platforms"
    plugins.mkdir()
    shutil.copy(plugin, plugins / plugin.name)
    new_project(tmp_path / "p", images=image_dir).close()
    env = {k: v for k, v in os.environ.items()
           if k not in ("QT_QPA_PLATFORM", "WAYLAND_DISPLAY", "XDG_SESSION_TYPE")}
    env.update(DISPLAY=":987", QT_QPA_PLATFORM_PLUGIN_PATH=str(plugins),
               POSEWRIGHT_AUTHOR="ana")
    done = subprocess.run([sys.executable, "-m", "app", "open", str(tmp_path / "p")],
                          env=env, capture_output=True, text=True, timeout=120, cwd=tmp_path)
    assert done.returncode == 2, done.stderr
    assert done.stderr.count("\n") == 1
    assert "platform needs system libraries" in done.stderr and "libQt6Gui.so.6" in done.stderr
