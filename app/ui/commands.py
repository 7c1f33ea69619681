"""``posewright open`` (the desktop app, or a screenshot of it) and ``posewright render``."""

from __future__ import annotations

import argparse
import getpass
import logging
import os
import sys
import time
from pathlib import Path

from app.errors import BadInput, PosewrightError
from app.ui import syslibs

log = logging.getLogger(__name__)

#: Size of the window in ``--screenshot`` mode (the README screenshot).
SCREENSHOT_SIZE = (1600, 960)
#: How long ``--screenshot`` waits for the frame's image to be decoded and painted (s).
SCREENSHOT_WAIT = 30.0


def render_frame(args: argparse.Namespace) -> int:
    """``posewright render PROJECT --frame ID --out FILE.png [--focus PERSON]``."""
    # Rendering starts Qt offscreen unless told otherwise (app.ui.render.gui_application).
    syslibs.check_platform(syslibs.first_platform(os.environ.get("QT_QPA_PLATFORM")
                                                  or "offscreen"))
    from app.jobs import open_project
    from app.ui.render import gui_application, render_frame_image

    gui_application()
    out = Path(args.out)
    with open_project(args.project, author=getattr(args, "author", None), read_only=True,
                      images=getattr(args, "images_root", None)) as project:
        frame = project.find_frame(args.frame)
        image = render_frame_image(project, frame, focus=getattr(args, "focus", None))
    _save(image, out)
    if not getattr(args, "quiet", False):
        print(f"wrote {out} ({image.width()} x {image.height()}, frame {frame.id})")
    return 0


def open_app(args: argparse.Namespace) -> int:
    """``posewright open PROJECT [--author NAME] [--screenshot FILE]``; ``PROJECT`` may be a
    review packet (``FILE.zip``), opened for reviewing in a folder beside it
    (:func:`app.review.review.open_packet`)."""
    screenshot = getattr(args, "screenshot", None)
    _choose_platform(bool(screenshot))
    from PySide6.QtWidgets import QApplication

    app = QApplication.instance() or QApplication([sys.argv[0] if sys.argv else "posewright"])
    app.setApplicationName("Posewright")
    headless = QApplication.platformName() in ("offscreen", "minimal")
    if headless:
        _quiet_platform_notices()
    author = _author(args, ask=not screenshot and not headless)
    if is_packet(args.project):
        from app.review.review import open_packet

        # The name given on the first run only stands in when neither --author nor the
        # packet names the reviewer, so a review keeps one reviewer from call to call.
        project = open_packet(args.project, reviewer=getattr(args, "author", None) or None,
                              fallback=author)
    else:
        project = _open(args.project, author, quiet=getattr(args, "quiet", False),
                        with_dialog=not screenshot and not headless,
                        images=getattr(args, "images_root", None))

    from app.ui.window import MainWindow, keep_open

    if screenshot:
        window = MainWindow(project, owns_project=True, restore_layout=False)
        try:
            return _screenshot(window, Path(screenshot))
        finally:
            window.close()
    window = MainWindow(project, owns_project=True)
    keep_open(window)
    window.show()
    return int(app.exec())


def _choose_platform(screenshot: bool) -> None:
    """Pick Qt's platform before the application exists, and check that the system has the
    libraries it needs: where Qt would abort, say so in a line instead.

    A screenshot needs no display: without one, or without the desktop's libraries, it renders
    offscreen. A window needs a display, and on a Linux desktop the xcb libraries
    (:mod:`app.ui.syslibs`).
    """
    if sys.platform != "linux":
        return
    env = os.environ
    chosen = bool(env.get("QT_QPA_PLATFORM"))
    if not chosen and not (env.get("DISPLAY") or env.get("WAYLAND_DISPLAY")):
        if not screenshot:
            raise PosewrightError(
                "there is no display to open the window on; use --screenshot FILE.png to "
                "render the window without one, or run under a virtual display (xvfb-run -a "
                "posewright open ...)")
        env["QT_QPA_PLATFORM"] = "offscreen"
    platform = syslibs.expected_platform(env)
    if platform is None:
        return
    try:
        syslibs.check_platform(platform)
    except PosewrightError:
        if not screenshot or chosen or platform == "offscreen":
            raise
        log.info("the %s platform cannot start here; the screenshot renders offscreen",
                 platform)
        env["QT_QPA_PLATFORM"] = "offscreen"
        syslibs.check_platform("offscreen")


def _quiet_platform_notices() -> None:
    """Drop the offscreen platform's notice that it cannot pass window size hints on (there is
    no window manager to pass them to); every other Qt message still reaches stderr."""
    from PySide6.QtCore import QtMsgType, qInstallMessageHandler

    def handler(kind: QtMsgType, context: object, message: str) -> None:
        if "propagateSizeHints" not in message:
            print(message, file=sys.stderr)

    qInstallMessageHandler(handler)


def is_packet(target: str) -> bool:
    """Whether ``posewright open`` was given a review packet rather than a project folder.

    Examples
    --------
    >>> is_packet("rehearsal.zip"), is_packet("rehearsal")
    (True, False)
    """
    path = Path(target)
    return path.suffix.lower() == ".zip" and not path.is_dir()


def _author(args: argparse.Namespace, ask: bool) -> str | None:
    """``--author``, else the name given on the first run; asked once when there is none."""
    from app.ui.settings import store_author, stored_author

    if getattr(args, "author", None):
        return str(args.author)
    name = stored_author()
    if name or not ask:
        return name
    from PySide6.QtWidgets import QInputDialog

    default = os.environ.get("POSEWRIGHT_AUTHOR") or getpass.getuser()
    text, ok = QInputDialog.getText(
        None, "Posewright", "Your name, as the Ledger records it with every edit:", text=default)
    name = text.strip() if ok and text.strip() else default
    store_author(name)
    return name


def _open(folder: str, author: str | None, quiet: bool, with_dialog: bool,
          images: str | None = None):  # -> Project
    """Open the project; a folder of sources is built first, off the UI thread with a
    progress dialog when there is a screen, else with progress on stderr."""
    from app.jobs import SOURCES_NAME, build_from_sources, open_project
    from app.store.hosted import is_database_url
    from app.store.project import DB_NAME

    if is_database_url(folder):
        return open_project(folder, author=author, images=images)
    path = Path(folder)
    needs_build = not (path / DB_NAME).exists() and (path / SOURCES_NAME).is_file()
    if needs_build and author is None and not os.environ.get("POSEWRIGHT_AUTHOR"):
        # Nobody was asked for a name (no screen, or --screenshot): say whose it is.
        author = getpass.getuser()
        print(f"posewright: note: building {path} records it in the ledger as by {author!r}, "
              "the login name; give --author NAME or set POSEWRIGHT_AUTHOR to record another",
              file=sys.stderr)
    if needs_build and with_dialog:
        from PySide6.QtCore import QEventLoop

        from app.ui.work import run_job

        loop = QEventLoop()
        failure: list[BaseException] = []

        def failed(exc: BaseException) -> None:
            failure.append(exc)

        job = run_job(None, "Building the project from its sources",  # type: ignore[arg-type]
                      lambda pr: build_from_sources(path, author=author, progress=pr),
                      lambda _r: None, failed)
        job.finished.connect(loop.quit)
        if job.isRunning():
            loop.exec()
        job.wait()
        if failure:
            raise failure[0]
    return open_project(path, author=author, progress=_stderr_steps(quiet))


def _stderr_steps(quiet: bool):  # -> Progress
    """Progress of a build without a window: a line on stderr now and then."""
    from app.progress import Progress

    last = [0.0]

    def show(done: int, total: int, label: str) -> None:
        now = time.monotonic()
        if quiet or (now - last[0] < 1.0 and done < total):
            return
        last[0] = now
        print(f"{label}: {done}/{total}", file=sys.stderr, flush=True)

    return Progress(show)


def _screenshot(window, out: Path) -> int:
    """Show the most suspicious frame, wait for its image, save the whole window."""
    from PySide6.QtWidgets import QApplication

    window.resize(*SCREENSHOT_SIZE)
    window.show()
    window.select_first_flag()
    deadline = time.monotonic() + SCREENSHOT_WAIT
    frame_id = window.frame_id
    while frame_id is not None and window.canvas.painted_frame != frame_id:
        QApplication.processEvents()
        if window.canvas.message or time.monotonic() > deadline:
            break  # an unreadable image: the Canvas says so, and that is what we show
        window.canvas.repaint()
        time.sleep(0.005)
    QApplication.processEvents()
    _save(window.grab().toImage(), out)
    return 0


def _save(image, out: Path) -> None:
    if out.suffix.lower() != ".png":
        raise BadInput("the output must be a .png file", where=str(out))
    if not out.parent.exists():
        raise BadInput("the folder does not exist", where=str(out.parent))
    tmp = out.with_name(out.name + ".part.png")
    if not image.save(str(tmp), "PNG"):
        tmp.unlink(missing_ok=True)
        raise BadInput("cannot write the image", where=str(out))
    try:
        os.replace(tmp, out)
    except OSError as exc:
        tmp.unlink(missing_ok=True)
        raise PosewrightError(f"{out}: cannot write the image ({exc.strerror})") from None
