"""The system libraries Qt's platform plugin needs, checked before Qt starts.

The PySide6 wheel brings Qt itself but not the system libraries its platform plugins link
against. On a Linux desktop the window opens through the ``xcb`` plugin, which needs (on
Debian 12, read with ``ldd`` from the plugin of the installed wheel) ``libxcb-cursor0``,
``libxcb-icccm4``, ``libxcb-image0``, ``libxcb-keysyms1``, ``libxcb-render-util0``,
``libxcb-shape0``, ``libxcb-xkb1``, ``libxkbcommon-x11-0``, ``libegl1``, ``libgl1``,
``libfontconfig1`` and ``libdbus-1-3``. When one is missing Qt aborts with a message that
suggests reinstalling the application, which does not help; the offscreen plugin that
``render`` and ``open --screenshot`` use on a server needs the same graphics libraries but none
of the xcb ones.

So before Qt starts, :func:`check_platform` asks the dynamic linker (``ldd``) which libraries of
the plugin about to be loaded cannot be found and raises an error that names them and the one
command that installs them. Where ``ldd`` is not there the check is skipped and Qt speaks for
itself.
"""

from __future__ import annotations

import importlib.util
import logging
import os
import re
import shutil
import subprocess
from collections.abc import Mapping
from pathlib import Path

from app.errors import PosewrightError

log = logging.getLogger(__name__)

#: Libraries whose Debian package is not named after the library (Debian 12, read with
#: ``dpkg -S``); every other one follows the naming rule of :func:`debian_package`.
PACKAGE_OF = {
    "libglib-2.0.so.0": "libglib2.0-0",
    "libgthread-2.0.so.0": "libglib2.0-0",
    "libGLdispatch.so.0": "libglvnd0",
    "libbrotlicommon.so.1": "libbrotli1",
    "libbrotlidec.so.1": "libbrotli1",
    "libz.so.1": "zlib1g",
}


def debian_package(soname: str) -> str:
    """The Debian (and Ubuntu) package that ships a shared library, from its soname.

    Parameters
    ----------
    soname
        The library as the linker asks for it, e.g. ``"libxcb-cursor.so.0"``.

    Returns
    -------
    str
        The package name; the soname itself when it has no version to build a name from.

    Notes
    -----
    Debian names a run-time library package after the library and its soname version, with a
    hyphen between them when the name ends in a digit; package names are lower case and have
    no underscores. The few libraries packaged under another name are listed in
    :data:`PACKAGE_OF`.

    References
    ----------
    Debian Policy Manual, section 8.1, "Run-time shared libraries".

    Examples
    --------
    >>> debian_package("libxcb-cursor.so.0"), debian_package("libxkbcommon-x11.so.0")
    ('libxcb-cursor0', 'libxkbcommon-x11-0')
    >>> debian_package("libEGL.so.1"), debian_package("libglib-2.0.so.0")
    ('libegl1', 'libglib2.0-0')
    """
    if soname in PACKAGE_OF:
        return PACKAGE_OF[soname]
    match = re.fullmatch(r"(.+)\.so\.([0-9][0-9.]*)", soname)
    if match is None:
        return soname
    name = match.group(1).lower().replace("_", "-")
    return f"{name}{'-' if name[-1].isdigit() else ''}{match.group(2)}"


def missing_in_ldd(text: str) -> list[str]:
    """The libraries an ``ldd`` listing could not find, each once, in the order listed.

    Parameters
    ----------
    text
        What ``ldd FILE`` printed: one ``name => path (address)`` line per library, and
        ``name => not found`` for one the linker cannot find.

    Returns
    -------
    list of str
        The sonames not found.

    Examples
    --------
    >>> missing_in_ldd("\\tlibGL.so.1 => /lib/libGL.so.1 (0x7f00)\\n"
    ...                "\\tlibxcb-icccm.so.4 => not found\\n"
    ...                "\\tlibxcb-icccm.so.4 => not found\\n")
    ['libxcb-icccm.so.4']
    """
    found = re.findall(r"^\s*(\S+)\s+=>\s+not found\s*$", text, flags=re.MULTILINE)
    return list(dict.fromkeys(found))


def first_platform(value: str) -> str:
    """Qt's first choice in a ``QT_QPA_PLATFORM`` value (choices split by ``;``, options
    after ``:``).

    Examples
    --------
    >>> first_platform("xcb;wayland"), first_platform("offscreen:fontengine=freetype")
    ('xcb', 'offscreen')
    """
    return value.split(";")[0].split(":")[0].strip()


def expected_platform(environ: Mapping[str, str]) -> str | None:
    """The platform plugin Qt will start on Linux, or None when it cannot be told.

    ``QT_QPA_PLATFORM`` names it (its first choice; options follow a colon); without it, a
    Wayland session leaves the choice to Qt, and an X display means ``xcb``.

    Examples
    --------
    >>> expected_platform({"DISPLAY": ":0"}), expected_platform({"QT_QPA_PLATFORM": "offscreen"})
    ('xcb', 'offscreen')
    >>> expected_platform({"DISPLAY": ":0", "WAYLAND_DISPLAY": "wayland-0",
    ...                    "XDG_SESSION_TYPE": "wayland"}) is None
    True
    """
    chosen = environ.get("QT_QPA_PLATFORM", "").strip()
    if chosen:
        return first_platform(chosen)
    if environ.get("XDG_SESSION_TYPE") == "wayland" and environ.get("WAYLAND_DISPLAY"):
        return None
    return "xcb" if environ.get("DISPLAY") else None


def platform_plugin(platform: str) -> Path | None:
    """The file of a Qt platform plugin (``libq<platform>.so``) in the installed PySide6, or
    in ``QT_QPA_PLATFORM_PLUGIN_PATH`` when that is set; None when there is no such file."""
    folder = os.environ.get("QT_QPA_PLATFORM_PLUGIN_PATH")
    if not folder:
        spec = importlib.util.find_spec("PySide6")
        if spec is None or not spec.submodule_search_locations:
            return None
        folder = str(Path(next(iter(spec.submodule_search_locations)), "Qt", "plugins",
                          "platforms"))
    path = Path(folder) / f"libq{platform}.so"
    return path if path.is_file() else None


def missing_libraries(plugin: Path) -> list[str]:
    """The system libraries the dynamic linker cannot find for ``plugin`` (and for the Qt
    libraries it loads), by ``ldd``; empty when ``ldd`` is not there or fails."""
    ldd = shutil.which("ldd")
    if ldd is None:
        log.debug("no ldd here: the system libraries of %s are not checked", plugin)
        return []
    try:
        done = subprocess.run([ldd, str(plugin)], capture_output=True, text=True,
                              timeout=60, check=False)
    except (OSError, subprocess.TimeoutExpired) as exc:
        log.debug("ldd %s failed (%s): not checked", plugin, exc)
        return []
    return missing_in_ldd(done.stdout)


def install_advice(platform: str, missing: list[str], apt: bool, root: bool) -> str:
    """One line naming the missing libraries and how to install them.

    Examples
    --------
    >>> print(install_advice("xcb", ["libxcb-icccm.so.4", "libxcb-keysyms.so.1"], apt=True,
    ...                      root=False))  # doctest: +ELLIPSIS
    Qt's xcb platform ...; install them with: sudo apt-get install libxcb-icccm4 libxcb-keysyms1
    """
    head = (f"Qt's {platform} platform needs system libraries that are not installed "
            f"({', '.join(missing)})")
    if not apt:
        return f"{head}; install the packages of your system that provide them"
    packages = " ".join(dict.fromkeys(debian_package(m) for m in missing))
    return f"{head}; install them with: {'' if root else 'sudo '}apt-get install {packages}"


def check_platform(platform: str) -> None:
    """Raise if the system lacks a library that Qt's ``platform`` plugin needs.

    Raises
    ------
    PosewrightError
        Naming the missing libraries and the command that installs them.
    """
    plugin = platform_plugin(platform)
    if plugin is None:
        return
    missing = missing_libraries(plugin)
    if missing:
        raise PosewrightError(install_advice(
            platform, missing, apt=shutil.which("apt-get") is not None,
            root=hasattr(os, "geteuid") and os.geteuid() == 0))
