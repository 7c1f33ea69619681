"""The ``posewright`` command (also ``python -m app``).

Every command that meets bad input exits with status 2 after one line on stderr that says what
is wrong and where (file, record, field), without a traceback and without writing anything.
Text that came from a file (names, file names, ledger entries, messages quoting them) is
printed through :func:`app.safetext.shown`, so a file cannot drive the terminal.
"""

from __future__ import annotations

import argparse
import json
import logging
import sys
import time
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any, NoReturn

from app.errors import BadInput, Cancelled, PosewrightError, ProjectLocked
from app.model.labels import FrameState
from app.progress import Progress
from app.safetext import shown

log = logging.getLogger("posewright")


class _Parser(argparse.ArgumentParser):
    """argparse that reports a usage error in one line (status 2), like every other error."""

    def error(self, message: str) -> NoReturn:
        self.exit(2, f"{self.prog}: error: {message} (see --help)\n")


def _stderr_progress(quiet: bool) -> Progress:
    """Progress on stderr for work that takes more than a second (quick work stays quiet)."""
    start = time.monotonic()
    last = [start]

    def show(done: int, total: int, label: str) -> None:
        now = time.monotonic()
        if quiet or now - start < 1.0 or (now - last[0] < 0.5 and done < total):
            return
        last[0] = now
        pct = 100.0 * done / total if total else 100.0
        print(f"{label}: {done}/{total} ({pct:.0f}%)", file=sys.stderr, flush=True)

    return Progress(show)


def _open(args: argparse.Namespace, write: bool = True, say_why: bool = True):  # -> Project
    from app.jobs import open_project

    project = open_project(args.project, author=getattr(args, "author", None),
                           progress=_stderr_progress(getattr(args, "quiet", False)))
    if write and project.read_only:
        reason = project.read_only_reason
        project.close()
        raise ProjectLocked(f"{args.project}: cannot change the project: it is {reason}")
    if project.read_only and say_why:
        print(f"posewright: note: {args.project} is read-only: {project.read_only_reason}",
              file=sys.stderr)
    return project


def _print_json(data: Any) -> None:
    json.dump(data, sys.stdout, indent=2, default=str)
    sys.stdout.write("\n")


def _report_counts(args: argparse.Namespace, stats: dict[str, Any]) -> int:
    """What an import added: JSON with ``--json``, else one line."""
    if args.json:
        _print_json(stats)
    else:
        print("imported " + ", ".join(f"{v} {k}" for k, v in stats.items()))
    return 0


# ---------------------------------------------------------------------- commands

def cmd_new(args: argparse.Namespace) -> int:
    from app.jobs import new_project
    from app.model.skeleton import load_skeleton

    skeleton = load_skeleton(args.skeleton) if args.skeleton else None
    if (args.images is None) == (args.video is None):
        raise BadInput("give --images DIR or --video FILE", where="new")
    video_options = _video_options(args)
    if args.video is not None:
        return _new_from_video(args, skeleton, video_options)
    with new_project(args.project, images=args.images, skeleton=skeleton, author=args.author,
                     progress=_stderr_progress(args.quiet)) as project:
        frames = project.frames()
        bad = [f for f in frames if f.status != "ok"]
        for f in bad:
            print(f"posewright: warning: {shown(f.path)}: image is {f.status}; registered and "
                  "marked", file=sys.stderr)
        print(f"created {args.project}: {len(frames)} frames"
              + (f", {len(bad)} unreadable" if bad else ""))
    return 0


def _video_options(args: argparse.Namespace) -> dict[str, Any]:
    """``every``, ``start`` and ``end`` for a video (refused without ``--video``)."""
    from app.formats.video import parse_time

    given = [name for name in ("every", "start", "end") if getattr(args, name) is not None]
    if given and args.video is None:
        raise BadInput(f"--{given[0]} goes with --video FILE", where=args.command)
    return {"every": 1 if args.every is None else args.every,
            "start": None if args.start is None else parse_time(args.start, "--start"),
            "end": None if args.end is None else parse_time(args.end, "--end")}


def _new_from_video(args: argparse.Namespace, skeleton: Any, options: dict[str, Any]) -> int:
    """``new --video``: the video is checked before the project exists, and a project whose
    frames could not be extracted is removed again, so a failed ``new`` leaves nothing."""
    from app.formats.video import probe_video
    from app.jobs import add_video_frames
    from app.store import Project
    from app.store.project import DB_NAME, HOLDER_NAME, LOCK_NAME, VIDEO_FRAMES

    probe_video(args.video)
    folder = Path(args.project)
    existed = folder.exists()
    project = Project.create(folder, skeleton=skeleton, author=args.author)
    try:
        with project:
            frames = add_video_frames(project, args.video,
                                      progress=_stderr_progress(args.quiet), **options)
    except BaseException:
        for name in (DB_NAME, DB_NAME + "-wal", DB_NAME + "-shm", HOLDER_NAME, LOCK_NAME):
            (folder / name).unlink(missing_ok=True)
        for made in [folder / VIDEO_FRAMES] + ([] if existed else [folder]):
            if made.is_dir() and not any(made.iterdir()):
                made.rmdir()
        raise
    print(f"created {args.project}: {_video_summary(frames)}")
    return 0


def _video_summary(frames: Sequence[Any]) -> str:
    if not frames:
        return "no new frames (the project has them all)"
    first, last = frames[0], frames[-1]
    return (f"{len(frames)} frames (video frames {first.video_index} to {last.video_index}, "
            f"{first.timestamp:.2f} s to {last.timestamp:.2f} s)")


def cmd_add(args: argparse.Namespace) -> int:
    from app.jobs import add_images, add_video_frames

    options = _video_options(args)
    with _open(args) as project:
        if args.video is not None:
            added = add_video_frames(project, args.video, progress=_stderr_progress(args.quiet),
                                     **options)
            print(f"added to {args.project}: {_video_summary(added)}")
            return 0
        added = add_images(project, args.images, progress=_stderr_progress(args.quiet))
        print(f"added {len(added)} frames to {args.project}")
    return 0


def cmd_import(args: argparse.Namespace) -> int:
    from app.jobs import import_coco

    with _open(args) as project:
        stats = import_coco(project, args.file, progress=_stderr_progress(args.quiet))
    return _report_counts(args, stats)


def cmd_export(args: argparse.Namespace) -> int:
    from app.jobs import export_coco, left_out_note

    with _open(args, write=False) as project:
        stats = export_coco(project, args.out, states=_states(args.states))
    _warn_export(stats)
    note = left_out_note(stats)
    print(f"wrote {args.out}: {stats['images']} images, {stats['people']} people"
          + (f"; {note} (--states all takes every state)" if note else ""))
    return 0


def _warn_export(stats: dict[str, Any]) -> None:
    from app.jobs import export_warnings

    for line in export_warnings(stats):
        print(f"posewright: warning: {line}", file=sys.stderr)


def cmd_history(args: argparse.Namespace) -> int:
    with _open(args, write=False) as project:
        frame_id = project.find_frame(args.frame).id if args.frame is not None else None
        entries = project.history(frame_id=frame_id, limit=args.limit)
    if args.json:
        _print_json([e.__dict__ for e in entries])
        return 0
    for e in entries:
        when = time.strftime("%Y-%m-%d %H:%M:%S", time.localtime(e.time))
        frame = "-" if e.frame_id is None else str(e.frame_id)
        print(f"{e.seq:>6}  {when}  {shown(e.author):<12}  frame {frame:<6}  {e.kind:<6}  "
              f"{shown(e.target):<22}  {shown(e.summary)}")
    return 0


def cmd_summary(args: argparse.Namespace) -> int:
    from app.jobs import summary

    with _open(args, write=False, say_why=False) as project:  # the summary says it
        info = summary(project)
    if args.json:
        _print_json(info)
    else:
        for key, value in info.items():
            if value is not None:
                print(f"{key:>18}: {shown(value)}")
    return 0


def cmd_demo(args: argparse.Namespace) -> int:
    from app.demo import DEFAULT_SEED, generate

    out = Path(args.dir)
    generate(out, seed=DEFAULT_SEED if args.seed is None else args.seed, frames=args.frames,
             progress=_stderr_progress(args.quiet))
    print(f"wrote the demo scenario to {out}; open it with `posewright open {out}`")
    return 0


def cmd_import_maps(args: argparse.Namespace) -> int:
    from app.jobs_analysis import import_maps

    with _open(args) as project:
        stats = import_maps(project, args.dir, progress=_stderr_progress(args.quiet))
    return _report_counts(args, stats)


def cmd_triage(args: argparse.Namespace) -> int:
    from app.jobs_analysis import run_triage

    with _open(args) as project:
        results = run_triage(project, progress=_stderr_progress(args.quiet))
        frames = {f.id: f for f in project.frames()}
    ranked = sorted(results.items(), key=lambda kv: (-kv[1].score, kv[0]))
    if args.limit is not None:
        ranked = ranked[: args.limit]
    if args.json:
        _print_json([{"frame": fid, "file_name": frames[fid].file_name,
                      "score": round(t.score, 4), "crowd_index": round(t.crowd_index, 4),
                      "flagged_people": t.flagged,
                      "reasons": [r.to_dict() for r in t.reasons]} for fid, t in ranked])
        return 0
    for fid, t in ranked:
        kinds = sorted({r.kind for r in t.reasons})
        print(f"{t.score:7.2f}  frame {fid:<6} {shown(frames[fid].file_name):<28} "
              f"{len(t.flagged)} flagged  {', '.join(kinds)}")
    return 0


def cmd_targets(args: argparse.Namespace) -> int:
    from app.jobs import left_out_note
    from app.jobs_analysis import TargetSettings, export_targets

    if args.check:
        return _check_targets(args)
    if args.out_dir is None:
        raise BadInput("give the OUT_DIR to write the targets to", where="targets")
    settings = TargetSettings(stride=args.stride, sigma=args.sigma, limb_width=args.limb_width,
                              dtype=args.dtype)
    settings.check()
    with _open(args, write=False) as project:
        stats = export_targets(project, args.out_dir, settings, states=_states(args.states),
                               progress=_stderr_progress(args.quiet))
    _warn_export(stats)
    note = left_out_note(stats)
    print(f"wrote {stats['frames']} frames of training targets to {stats['out']}"
          + (f"; {note} (--states all takes every state)" if note else ""))
    return 0


def _check_targets(args: argparse.Namespace) -> int:
    """``targets --check OUT_DIR``, or ``targets PROJECT OUT_DIR --check``, which also checks
    that the export was made from PROJECT with its skeleton. Writes nothing."""
    from app.jobs_analysis import check_targets

    out = Path(args.project if args.out_dir is None else args.out_dir)
    report = check_targets(out, progress=_stderr_progress(args.quiet))
    problems = list(report.problems)
    if args.out_dir is not None:
        manifest = json.loads((out / "manifest.json").read_text(encoding="utf-8"))
        with _open(args, write=False) as project:
            if manifest.get("project_id") != project.project_id:
                problems.append(f"{out / 'manifest.json'}: field project_id: the export was "
                                f"made from another project than {args.project}")
            if manifest.get("skeleton") != project.skeleton.to_dict():
                problems.append(f"{out / 'manifest.json'}: field skeleton: not the skeleton "
                                f"of {args.project}")
    for problem in problems:
        print(f"posewright: error: {shown(problem)}", file=sys.stderr)
    if problems:
        return 2
    print(f"ok: {report.frames} frames checked in {out}")
    return 0


def cmd_prelabel(args: argparse.Namespace) -> int:
    from app.inference.prelabel import parse_frames, prelabel

    with _open(args) as project:
        frames = None
        if args.frames is not None:
            frames = [f.id for f in parse_frames(args.frames, project.frames())]
        stats = prelabel(project, args.model, args.config, frames=frames,
                         progress=_stderr_progress(args.quiet))
    if args.json:
        _print_json(stats)
    else:
        print(f"pre-labelled {stats.get('frames', 0)} frames with {Path(args.model).name}: "
              f"{stats.get('people', 0)} people on {stats.get('frames grouped', 0)} frames"
              + (f"; {stats['frames kept']} frames kept their labels"
                 if stats.get("frames kept") else "")
              + (f"; {stats['unreadable']} unreadable images skipped"
                 if stats.get("unreadable") else ""))
    return 0


def cmd_open(args: argparse.Namespace) -> int:
    from app.ui.commands import open_app

    return open_app(args)


def cmd_render(args: argparse.Namespace) -> int:
    from app.ui.commands import render_frame

    return render_frame(args)


def _states(text: str) -> list[FrameState] | None:
    """The states an export takes: ``all`` (None), or a comma-separated list."""
    if text.strip().lower() == "all":
        return None
    try:
        states = [FrameState.parse(s) for s in text.split(",") if s.strip()]
    except ValueError as exc:
        raise BadInput(str(exc), where="--states") from None
    if not states:
        raise BadInput("no states named", where="--states", hint="e.g. corrected,signed-off")
    return states


#: What ``--states`` says in the help of every command that exports.
_STATES_HELP = ("frames in these states, e.g. corrected,signed-off,disputed (default "
                "corrected,signed-off: the frames a person has checked), or 'all'; a frame "
                "whose image cannot be read is never exported; a warning names untouched or "
                "disputed frames in the export")


def _limits(args: argparse.Namespace) -> None:
    """Apply ``--max-megapixels`` and ``--memory-budget-mb`` to this process."""
    if getattr(args, "max_megapixels", None) is not None:
        from app.formats.images import set_max_megapixels

        set_max_megapixels(args.max_megapixels)
    if getattr(args, "memory_budget_mb", None) is not None:
        from app.inference.budget import set_budget_mb

        set_budget_mb(args.memory_budget_mb)


# ---------------------------------------------------------------------- wiring

def build_parser() -> argparse.ArgumentParser:
    parser = _Parser(prog="posewright", description=__doc__.splitlines()[0])
    parser.add_argument("-v", "--verbose", action="store_true", help="log what happens")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND",
                                parser_class=_Parser)

    def command(name: str, fn: Callable[[argparse.Namespace], int], text: str,
                project: bool = True) -> argparse.ArgumentParser:
        p = sub.add_parser(name, help=text, description=text)
        if project:
            p.add_argument("project", metavar="PROJECT", help="the project folder")
        p.add_argument("--author", help="who is working (default: $POSEWRIGHT_AUTHOR or the "
                                        "login name)")
        p.add_argument("-q", "--quiet", action="store_true", help="no progress on stderr")
        p.set_defaults(fn=fn)
        return p

    def pixel_limit(p: argparse.ArgumentParser) -> None:
        p.add_argument("--max-megapixels", type=float, metavar="N",
                       help="refuse to decode images over N megapixels (default: "
                            "$POSEWRIGHT_MAX_MEGAPIXELS, else 100); larger ones are unreadable")

    def video_options(p: argparse.ArgumentParser) -> None:
        p.add_argument("--every", type=int, metavar="N",
                       help="with --video: keep every N-th frame (default 1)")
        p.add_argument("--start", metavar="T",
                       help="with --video: from this time (seconds, or m:ss or h:mm:ss)")
        p.add_argument("--end", metavar="T", help="with --video: up to this time (excluded)")

    p = command("new", cmd_new, "make a project from a folder of images or from a video")
    p.add_argument("--images", metavar="DIR", help="folder of images (searched recursively)")
    p.add_argument("--video", metavar="FILE",
                   help="video whose frames are extracted into PROJECT/frames/<name>/")
    video_options(p)
    p.add_argument("--skeleton", metavar="FILE.json", help="custom skeleton (default: COCO body)")
    pixel_limit(p)

    p = command("add", cmd_add, "add the new images of a folder, or frames of a video")
    source = p.add_mutually_exclusive_group(required=True)
    source.add_argument("--images", metavar="DIR")
    source.add_argument("--video", metavar="FILE")
    video_options(p)
    pixel_limit(p)

    p = command("import", cmd_import, "import COCO keypoints labels (dataset or results list)")
    p.add_argument("file", metavar="FILE.json")
    p.add_argument("--json", action="store_true", help="print the counts as JSON")

    p = command("export", cmd_export, "export the labels as a COCO keypoints dataset (by "
                "default of the corrected and signed-off frames)")
    p.add_argument("--out", metavar="FILE.json", required=True)
    p.add_argument("--states", metavar="LIST", default="corrected,signed-off",
                   help=_STATES_HELP)

    p = command("history", cmd_history, "show the ledger of edits, newest first")
    p.add_argument("--frame", metavar="ID", help="only this frame (id or file name)")
    p.add_argument("--limit", type=int, metavar="N")
    p.add_argument("--json", action="store_true")

    p = command("summary", cmd_summary, "what the project holds")
    p.add_argument("--json", action="store_true")

    p = command("import-maps", cmd_import_maps,
                "import network maps (.npz per image) and group them into auto-labels")
    p.add_argument("dir", metavar="DIR")
    p.add_argument("--json", action="store_true")

    p = command("triage", cmd_triage, "rank frames by suspicion, with reasons (stored)")
    p.add_argument("--json", action="store_true")
    p.add_argument("--limit", type=int, metavar="N", help="show only the N worst frames")

    p = command("targets", cmd_targets,
                "write training targets (confidence maps, PAFs, loss masks) per frame (by "
                "default of the corrected and signed-off frames)")
    p.add_argument("out_dir", metavar="OUT_DIR", nargs="?")
    p.add_argument("--check", action="store_true",
                   help="re-read the export in OUT_DIR and verify shapes, ranges and the "
                        "manifest; writes nothing (`targets --check OUT_DIR` needs no project)")
    p.add_argument("--stride", type=int, default=8)
    p.add_argument("--sigma", type=float, default=7.0, help="confidence-map sigma, image px")
    p.add_argument("--limb-width", type=float, default=8.0, help="PAF half-width, image px")
    p.add_argument("--dtype", choices=("float16", "float32"), default="float32")
    p.add_argument("--states", metavar="LIST", default="corrected,signed-off",
                   help=_STATES_HELP)

    p = command("prelabel", cmd_prelabel,
                "run an ONNX pose model on the CPU and store what it finds as auto-labels")
    p.add_argument("--model", metavar="FILE.onnx", required=True)
    p.add_argument("--config", metavar="FILE.json",
                   help="how to feed the model and read its outputs (default: FILE.json beside "
                        "the model, else the built-in config; see "
                        "assets/prelabel-config.example.json)")
    p.add_argument("--frames", metavar="LIST",
                   help="frame ids and ranges (1,2,5-9), 'untouched' or 'all' (default all)")
    p.add_argument("--json", action="store_true", help="print the counts as JSON")
    p.add_argument("--memory-budget-mb", type=float, metavar="MB",
                   help="refuse a config whose tensors would need more than MB megabytes "
                        "(default: $POSEWRIGHT_MEMORY_BUDGET_MB, else 2048)")
    pixel_limit(p)

    p = command("open", cmd_open, "open the project in the desktop app")
    p.add_argument("--screenshot", metavar="FILE.png",
                   help="render the window showing the most suspicious frame to FILE and exit")
    pixel_limit(p)

    p = command("render", cmd_render, "draw one frame with its labels, as the Canvas shows it")
    p.add_argument("--frame", metavar="ID", required=True, help="frame id or image file name")
    p.add_argument("--out", metavar="FILE.png", required=True)
    p.add_argument("--focus", metavar="PERSON", type=int, help="dim everyone but this person")
    pixel_limit(p)

    p = command("demo", cmd_demo, "generate the synthetic demo scenario in DIR", project=False)
    p.add_argument("dir", metavar="DIR")
    p.add_argument("--seed", type=int, default=None,
                   help="another seed gives another rehearsal (default: the shipped one)")
    p.add_argument("--frames", type=int, default=24)

    # Review packets and comparing labels: app/review/commands.py.
    from app.review.commands import register as register_review

    register_review(sub, command)
    return parser


class _ShownFormatter(logging.Formatter):
    """Log lines on the terminal, escaped like everything else printed (library code logs
    file names and paths as they are)."""

    def format(self, record: logging.LogRecord) -> str:
        return shown(super().format(record))


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    handler = logging.StreamHandler()
    handler.setFormatter(_ShownFormatter("posewright: %(levelname)s: %(message)s"))
    logging.basicConfig(level=logging.INFO if args.verbose else logging.WARNING,
                        handlers=[handler])
    try:
        _limits(args)
        return int(args.fn(args))
    except Cancelled as exc:
        print(f"posewright: {shown(exc)}; nothing was changed", file=sys.stderr)
        return 130
    except PosewrightError as exc:
        print(f"posewright: error: {shown(exc)}", file=sys.stderr)
        return exc.exit_status
    except KeyboardInterrupt:
        print("posewright: interrupted; the action in flight was not kept", file=sys.stderr)
        return 130
    except OSError as exc:
        where = f"{exc.filename}: " if exc.filename else ""
        print(f"posewright: error: {shown(where)}{shown(exc.strerror or exc)}", file=sys.stderr)
        return 2
