"""The ``posewright`` command (also ``python -m app``).

Every command that meets bad input exits with status 2 after one line on stderr that says what
is wrong and where (file, record, field), without a traceback and without writing anything.
Output cut short by its reader (``posewright ledger P | head``) ends the command quietly with
status 141, what a shell reports for a command stopped by SIGPIPE (128 + 13), as the other
commands of such a pipeline do (common practice, no source).
Text that came from a file (names, file names, ledger entries, messages quoting them) is
printed through :func:`app.safetext.shown`, so a file cannot drive the terminal.
"""

from __future__ import annotations

import argparse
import difflib
import json
import logging
import os
import sqlite3
import sys
import time
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any, NoReturn

from app import __version__
from app.errors import BadInput, Cancelled, PosewrightError, ProjectLocked
from app.parallel import check_workers, drop_early, early_pool, head_start, keep_freed_memory
from app.progress import Progress
from app.safetext import shown
from app.wording import count, count_phrase, ledger_text

if TYPE_CHECKING:
    from app.model.labels import FrameState

# Nothing above imports numpy, pydantic or the model: a batch command tells its workers' fork
# server to start (app.parallel.head_start) within a tenth of a second of its own start, so the
# server's imports run beside the command's rather than after them. What a command needs it
# imports in its own function.

#: :data:`app.fileio.MAX_ID`, without importing app.fileio (pydantic, numpy) to build the parser
#: (tests/test_cli.py checks that the two agree).
MAX_ID = 2**53 - 1

#: Exit status when the reader of our output went away (128 + SIGPIPE).
BROKEN_PIPE_STATUS = 141


class _Parser(argparse.ArgumentParser):
    """argparse that reports a usage error in one line (status 2), like every other error, and
    names a mistyped option rather than the required one it hides."""

    _given: Sequence[str] = ()

    def parse_known_args(self, args: Sequence[str] | None = None,  # type: ignore[override]
                         namespace: argparse.Namespace | None = None,
                         ) -> tuple[argparse.Namespace, list[str]]:
        self._given = list(sys.argv[1:] if args is None else args)
        return super().parse_known_args(args, namespace)

    def error(self, message: str) -> NoReturn:
        unknown = self._unknown_option()
        if unknown is not None and message.startswith("the following arguments are required"):
            # argparse checks required options before it reports unknown ones, so `--outt`
            # would read as a missing `--out`.
            near = difflib.get_close_matches(unknown, list(self._option_string_actions), n=1)
            message = f"unrecognized argument {unknown}" + \
                (f" (did you mean {near[0]}?)" if near else "")
        self.exit(2, f"{self.prog}: error: {message} (see --help)\n")

    def _unknown_option(self) -> str | None:
        """The first option string given to this parser that it does not know."""
        known = self._option_string_actions
        for arg in self._given:
            if arg == "--":
                return None
            if not arg.startswith("-") or arg == "-" or self._negative_number_matcher.match(arg):
                continue
            name = arg.split("=", 1)[0]
            if name in known or (self.allow_abbrev and name.startswith("--") and
                                 sum(option.startswith(name) for option in known) == 1):
                continue
            return name
        return None


def whole_number(low: int = -MAX_ID, high: int = MAX_ID) -> Callable[[str], int]:
    """An argparse ``type`` for a whole-number option between ``low`` and ``high`` (by default
    the ids a project can hold, :data:`app.fileio.MAX_ID`), so that no number too large for
    the database or the work it sizes gets past the command line.

    Examples
    --------
    >>> whole_number(1, 9)("4")
    4
    >>> whole_number(1, 9)("12")
    Traceback (most recent call last):
    ...
    argparse.ArgumentTypeError: 12 is not between 1 and 9
    """
    def parse(text: str) -> int:
        try:
            value = int(text)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{text[:40]!r} is not a whole number") from None
        if not low <= value <= high:
            raise argparse.ArgumentTypeError(f"{value} is not between {low} and {high}")
        return value

    return parse


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
                           progress=_stderr_progress(getattr(args, "quiet", False)),
                           images=getattr(args, "images_root", None))
    if write and project.read_only:
        reason = project.read_only_reason
        project.close()
        raise ProjectLocked(f"{args.project}: cannot change the project: it is {reason}")
    if project.read_only and say_why:
        print(f"posewright: note: {shown(args.project)} is read-only: "
              f"{shown(project.read_only_reason)}", file=sys.stderr)
    return project


def print_json(data: Any) -> None:
    """``data`` as JSON on stdout for a program to read: a number that is not defined (a NaN,
    such as the mean of nothing) or not finite is ``null``."""
    from app.fileio import json_ready

    json.dump(json_ready(data)[0], sys.stdout, indent=2, default=str, allow_nan=False)
    sys.stdout.write("\n")


def _report_counts(args: argparse.Namespace, stats: dict[str, Any]) -> int:
    """What an import added: JSON with ``--json``, else one line."""
    if args.json:
        print_json(stats)
    else:
        print("imported " + ", ".join(count_phrase(v, k) for k, v in stats.items()))
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
        bad = [f for f in frames if f.status != "ok"]  # each was warned about as it was read
        print(f"created {shown(args.project)}: {count(len(frames), 'frames')}"
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
    print(f"created {shown(args.project)}: {_video_summary(frames)}")
    return 0


def _video_summary(frames: Sequence[Any]) -> str:
    if not frames:
        return "no new frames (the project has them all)"
    first, last = frames[0], frames[-1]
    return (f"{count(len(frames), 'frames')} (video frames {first.video_index} to "
            f"{last.video_index}, "
            f"{first.timestamp:.2f} s to {last.timestamp:.2f} s)")


def cmd_add(args: argparse.Namespace) -> int:
    from app.jobs import add_images, add_video_frames

    options = _video_options(args)
    with _open(args) as project:
        if args.video is not None:
            added = add_video_frames(project, args.video, progress=_stderr_progress(args.quiet),
                                     **options)
            print(f"added to {shown(args.project)}: {_video_summary(added)}")
            return 0
        added = add_images(project, args.images, progress=_stderr_progress(args.quiet))
        print(f"added {count(len(added), 'frames')} to {shown(args.project)}")
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
    print(f"wrote {shown(args.out)}: {count(stats['images'], 'images')}, "
          f"{count(stats['people'], 'people')}"
          + (f"; {note} (--states all takes every state)" if note else ""))
    return 0


def _warn_export(stats: dict[str, Any]) -> None:
    from app.jobs import export_warnings

    for line in export_warnings(stats):
        print(f"posewright: warning: {line}", file=sys.stderr)


def cmd_ledger(args: argparse.Namespace) -> int:
    from app.model.naming import Names, ledger_names

    with _open(args, write=False) as project:
        frame_id = project.find_frame(args.frame).id if args.frame is not None else None
        entries = project.history(frame_id=frame_id, limit=args.limit)
        names = {fid: Names.of_frame(project.skeleton, [p.id for p in project.people(fid)])
                 for fid in {e.frame_id for e in entries if e.frame_id is not None}}
    if args.json:
        print_json([e.__dict__ for e in entries])
        return 0
    for e in entries:
        when = time.strftime("%Y-%m-%d %H:%M:%S", time.localtime(e.time))
        frame = "-" if e.frame_id is None else str(e.frame_id)
        what = ledger_text(e.summary)
        if e.frame_id is not None:
            what = ledger_names(what, names[e.frame_id])
        print(f"{e.seq:>6}  {when}  {shown(e.author):<12}  frame {frame:<6}  {e.kind:<6}  "
              f"{shown(e.target):<22}  {shown(what)}")
    return 0


def cmd_summary(args: argparse.Namespace) -> int:
    from app.jobs import summary

    with _open(args, write=False, say_why=False) as project:  # the summary says it
        info = summary(project)
    if args.json:
        print_json(info)
    else:
        for key, value in info.items():
            if value is not None:
                print(f"{key:>18}: {shown(value)}")
    return 0


def cmd_mend(args: argparse.Namespace) -> int:
    from app.jobs import mend_numbers

    with _open(args) as project:
        notes = mend_numbers(project)
    for note in notes:
        print(f"mended {shown(note)}")
    print(f"{shown(args.project)}: " + (f"mended {count(len(notes), 'fields')}" if notes
                                        else "every number is finite; nothing to mend"))
    return 0


def cmd_demo(args: argparse.Namespace) -> int:
    from app.demo import DEFAULT_SEED, generate

    out = Path(args.dir)
    _check_demo_target(out, args.force)
    generate(out, seed=DEFAULT_SEED if args.seed is None else args.seed, frames=args.frames,
             progress=_stderr_progress(args.quiet), scene=args.scene)
    print(f"wrote the {args.scene} demo scenario to {shown(out)}; open it with "
          f"`posewright open {shown(out)}`")
    return 0


def _check_demo_target(out: Path, force: bool) -> None:
    """Refuse to write the demo over a project or an earlier demo unless ``force``; with it, a
    project database built from the old sources is removed, so the next open builds it from
    the new ones (refused while another process has the project open)."""
    from app.jobs import SOURCES_NAME
    from app.store.project import DB_NAME, project_in_use

    if not out.is_dir():
        return
    ours = [name for name in (DB_NAME, SOURCES_NAME, "truth.json", "images", "maps")
            if (out / name).exists()]
    if ours and not force:
        raise BadInput(f"already holds {ours[0]}; the demo would replace its images, maps and "
                       "true poses", where=str(out), hint="give --force to write it anyway")
    if (out / DB_NAME).exists():
        holder = project_in_use(out)
        if holder:
            raise ProjectLocked(f"{out}: cannot replace the project: it is {holder}")
        for name in (DB_NAME, DB_NAME + "-wal", DB_NAME + "-shm"):
            (out / name).unlink(missing_ok=True)


def cmd_import_maps(args: argparse.Namespace) -> int:
    workers = check_workers(args.workers)
    keep_freed_memory()  # this process ends with the job (app/parallel.py)
    # Before the job's imports: the workers' own start runs beside them (app/parallel.py).
    if head_start("app.map_runs.group_runs", _files_ending(args.dir, ".npz"), workers):
        _first_maps(args, workers)
    try:
        from app.jobs_analysis import import_maps

        with _open(args) as project:
            stats = import_maps(project, args.dir, progress=_stderr_progress(args.quiet),
                                workers=workers, frame_before=_frame_before(args))
    finally:
        drop_early()  # the job did not take it (an error on the way)
    return _report_counts(args, stats)


def _frame_before(args: argparse.Namespace) -> bool:
    """Whether import-maps groups each sequence with the frame before: the default
    (:data:`app.map_runs.FRAME_BEFORE`, read without importing the job) unless a flag says
    otherwise."""
    if args.frame_before or args.each_frame_alone:
        return bool(args.frame_before)
    from app import map_runs

    return map_runs.FRAME_BEFORE


def _first_maps(args: argparse.Namespace, workers: int) -> None:
    """Hand the workers the first items to group before the project is open
    (:func:`app.parallel.early_pool`), when a folder project tells them
    (:func:`app.store.peek.map_frames_hint`, :func:`app.map_runs.first_items`): frames
    grouped alone, or, grouped with the frame before (the default), the first runs of
    consecutive frames, which are independent of each other. The job checks them against its
    own and computes again any that differ."""
    from app.store.peek import map_frames_hint

    hint = map_frames_hint(args.project)
    if hint is None:
        return
    from app.map_runs import first_items, group_runs

    items = first_items(*hint, args.dir, frame_before=_frame_before(args))
    if items:
        early_pool(group_runs, items, workers)


def _files_ending(folder: str | Path, suffix: str) -> int:
    """How many entries of ``folder`` end with ``suffix`` (0 when it does not read): a job's
    size, told before the job reads anything."""
    try:
        with os.scandir(folder) as entries:
            return sum(1 for e in entries if e.name.endswith(suffix))
    except OSError:
        return 0


def _early_start(job: str, args: argparse.Namespace, workers: int) -> None:
    """Ask for the workers' fork server before the project is even opened, when the folder
    project's frames make the job large (:func:`app.store.peek.frame_count_hint`, read without
    importing the store): opening it imports most of the app, and the server's own imports
    then run beside that rather than after it. The command asks again, with the frames the
    job takes, once the project is open (a server already asked for is not started twice)."""
    from app.store.peek import frame_count_hint

    frames = frame_count_hint(args.project)
    if frames:
        head_start(job, frames, workers)


def cmd_triage(args: argparse.Namespace) -> int:
    workers = check_workers(args.workers)
    keep_freed_memory()
    _early_start("app.jobs_analysis._triage_one", args, workers)
    with _open(args) as project:
        head_start("app.jobs_analysis._triage_one", project.frame_count(), workers)
        from app.jobs_analysis import run_triage
        from app.jobs_findings import time_findings

        results = run_triage(project, progress=_stderr_progress(args.quiet), workers=workers)
        frames = {f.id: f for f in project.frames()}
        over_time = time_findings(project)
    ranked = sorted(results.items(), key=lambda kv: (-kv[1].score, kv[0]))
    if args.limit is not None:
        ranked = ranked[: args.limit]
    if args.json:
        print_json([{"frame": fid, "file_name": frames[fid].file_name,
                     "score": round(t.score, 4), "crowd_index": round(t.crowd_index, 4),
                     "flagged_people": t.flagged,
                     "reasons": [r.to_dict() for r in t.reasons],
                     "over_time": [f.to_dict() for f in over_time.get(fid, [])]}
                    for fid, t in ranked])
        return 0
    for fid, t in ranked:
        kinds = sorted({r.kind for r in t.reasons} | {f.kind for f in over_time.get(fid, [])})
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
    from app.store.frames import FrameQuery

    workers = check_workers(args.workers)
    keep_freed_memory()
    states = _states(args.states)
    with _open(args, write=False) as project:
        head_start("app.jobs_analysis._write_targets",
                   project.frame_count(FrameQuery(states=None if states is None
                                                  else tuple(states))), workers)
        stats = export_targets(project, args.out_dir, settings, states=states,
                               progress=_stderr_progress(args.quiet), workers=workers)
    _warn_export(stats)
    note = left_out_note(stats)
    print(f"wrote {count(stats['frames'], 'frames')} of training targets to "
          f"{shown(stats['out'])}"
          + (f"; {note} (--states all takes every state)" if note else ""))
    return 0


def _check_targets(args: argparse.Namespace) -> int:
    """``targets --check OUT_DIR``, or ``targets PROJECT OUT_DIR --check``, which also checks
    that the export was made from PROJECT with its skeleton. Writes nothing."""
    from app.fileio import read_json
    from app.jobs_analysis import check_targets

    out = Path(args.project if args.out_dir is None else args.out_dir)
    report = check_targets(out, progress=_stderr_progress(args.quiet))
    problems = list(report.problems)
    if args.out_dir is not None:
        manifest = read_json(out / "manifest.json", "the manifest")
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
    print(f"ok: {count(report.frames, 'frames')} checked in {shown(out)}")
    return 0


def cmd_prelabel(args: argparse.Namespace) -> int:
    workers = check_workers(args.workers)
    keep_freed_memory()
    _early_start("app.inference.prelabel._prelabel_one", args, workers)
    with _open(args) as project:
        head_start("app.inference.prelabel._prelabel_one", project.frame_count(), workers)
        from app.inference.prelabel import parse_frames, prelabel

        frames = None
        if args.frames is not None:
            frames = [f.id for f in parse_frames(args.frames, project.frames())]
        stats = prelabel(project, args.model, args.config, frames=frames,
                         progress=_stderr_progress(args.quiet), workers=workers)
    if args.json:
        print_json(stats)
    else:
        print(f"pre-labelled {count(stats.get('frames', 0), 'frames')} with "
              f"{shown(Path(args.model).name)}: {count(stats.get('people', 0), 'people')} on "
              f"{count(stats.get('frames grouped', 0), 'frames')}"
              + (f"; {count(stats['frames kept'], 'frames')} kept their labels"
                 if stats.get("frames kept") else "")
              + (f"; {count(stats['unreadable'], 'unreadable images')} skipped"
                 if stats.get("unreadable") else ""))
    return 0


def cmd_host(args: argparse.Namespace) -> int:
    from app.store.hosted import redact
    from app.store.hosting import host

    counts = host(args.project, args.url, progress=_stderr_progress(args.quiet))
    print(f"hosted {shown(args.project)} at {shown(redact(args.url))}: "
          + ", ".join(count(n, what) for what, n in counts.items()))
    return 0


def cmd_open(args: argparse.Namespace) -> int:
    from app.ui.commands import open_app

    return open_app(args)


def cmd_render(args: argparse.Namespace) -> int:
    from app.ui.commands import render_frame

    return render_frame(args)


def _states(text: str) -> list[FrameState] | None:
    """The states an export takes: ``all`` (None), or a comma-separated list."""
    from app.model.labels import FrameState

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
    parser.add_argument("--version", action="version", version=f"%(prog)s {__version__}")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND",
                                parser_class=_Parser)

    def command(name: str, fn: Callable[[argparse.Namespace], int], text: str,
                project: bool = True, aliases: Sequence[str] = ()) -> argparse.ArgumentParser:
        p = sub.add_parser(name, help=text, description=text, aliases=list(aliases))
        if project:
            p.add_argument("project", metavar="PROJECT",
                           help="the project folder, or a hosted project's database URL")
        p.add_argument("--author", help="who is working (default: $POSEWRIGHT_AUTHOR or the "
                                        "login name)")
        p.add_argument("-q", "--quiet", action="store_true", help="no progress on stderr")
        p.set_defaults(fn=fn)
        return p

    def pixel_limit(p: argparse.ArgumentParser) -> None:
        p.add_argument("--max-megapixels", type=float, metavar="N",
                       help="refuse to decode images over N megapixels (default: "
                            "$POSEWRIGHT_MAX_MEGAPIXELS, else 100); larger ones are unreadable")

    def workers(p: argparse.ArgumentParser) -> None:
        p.add_argument("--workers", type=whole_number(1, 1024), metavar="N",
                       help="processes to compute in (default: $POSEWRIGHT_WORKERS, else "
                            "every core); the result is the same whatever N")

    def video_options(p: argparse.ArgumentParser) -> None:
        p.add_argument("--every", type=whole_number(), metavar="N",
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

    p = command("ledger", cmd_ledger, "show the Ledger: every edit, newest first (`history`, "
                "its name until version 0.1.0, still works for one more release)",
                aliases=["history"])
    p.add_argument("--frame", metavar="ID", help="only this frame (id or file name)")
    p.add_argument("--limit", type=whole_number(0), metavar="N")
    p.add_argument("--json", action="store_true")

    p = command("summary", cmd_summary, "what the project holds")
    p.add_argument("--json", action="store_true")

    p = command("import-maps", cmd_import_maps,
                "import network maps (.npz per image) and group them into auto-labels")
    p.add_argument("dir", metavar="DIR")
    p.add_argument("--json", action="store_true")
    grouping = p.add_mutually_exclusive_group()
    grouping.add_argument("--frame-before", action="store_true",
                          help="group the frames of each sequence in order, near ties between "
                               "overlapping people decided as on the frame before (the "
                               "default; each frame records how it was grouped, and triage "
                               "weighs it by that)")
    grouping.add_argument("--each-frame-alone", action="store_true",
                          help="group every frame on its own, as for unrelated pictures")
    workers(p)

    p = command("triage", cmd_triage, "rank frames by suspicion, with reasons (stored)")
    p.add_argument("--json", action="store_true")
    p.add_argument("--limit", type=whole_number(0), metavar="N",
                   help="show only the N worst frames")
    workers(p)

    p = command("targets", cmd_targets,
                "write training targets (confidence maps, PAFs, loss masks) per frame (by "
                "default of the corrected and signed-off frames)")
    p.add_argument("out_dir", metavar="OUT_DIR", nargs="?")
    p.add_argument("--check", action="store_true",
                   help="re-read the export in OUT_DIR and verify shapes, ranges and the "
                        "manifest; writes nothing (`targets --check OUT_DIR` needs no project)")
    p.add_argument("--stride", type=whole_number(), default=8)
    p.add_argument("--sigma", type=float, default=7.0, help="confidence-map sigma, image px")
    p.add_argument("--limb-width", type=float, default=8.0, help="PAF half-width, image px")
    p.add_argument("--dtype", choices=("float16", "float32"), default="float32")
    p.add_argument("--states", metavar="LIST", default="corrected,signed-off",
                   help=_STATES_HELP)
    workers(p)

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
    workers(p)

    p = command("open", cmd_open, "open the project in the desktop app")
    p.add_argument("--screenshot", metavar="FILE.png",
                   help="render the window showing the most suspicious frame to FILE and exit")
    pixel_limit(p)

    p = command("render", cmd_render, "draw one frame with its labels, as the Canvas shows it")
    p.add_argument("--frame", metavar="ID", required=True, help="frame id or image file name")
    p.add_argument("--out", metavar="FILE.png", required=True)
    p.add_argument("--focus", metavar="PERSON", type=whole_number(),
                   help="dim everyone but this person")
    pixel_limit(p)

    p = command("mend", cmd_mend, "replace NaN and infinite numbers kept from an import made "
                                  "before they were refused, so exports write what it holds")

    p = command("host", cmd_host, "copy a folder project into an empty PostgreSQL database, "
                "for a team to edit at once")
    p.add_argument("url", metavar="URL", help="the database: postgresql://USER@HOST:PORT/DB or "
                   "any libpq form (host=... dbname=..., service=NAME); the password comes "
                   "from PGPASSWORD, the password file or a service file, never the URL")

    p = command("demo", cmd_demo, "generate the synthetic demo scenario in DIR", project=False)
    p.add_argument("dir", metavar="DIR")
    p.add_argument("--force", action="store_true",
                   help="write over a project or an earlier demo in DIR (its project database "
                        "is rebuilt from the new sources when next opened)")
    p.add_argument("--seed", type=whole_number(0), default=None,
                   help="another seed gives another rehearsal (default: the shipped one)")
    p.add_argument("--frames", type=whole_number(1, 10_000), default=24)
    p.add_argument("--scene", choices=("dance", "choir"), default="dance",
                   help="the folk-dance rehearsal (default) or a choir on stepped risers")

    # Review packets and comparing labels: app/review/commands.py.
    from app.review.commands import register as register_review

    register_review(sub, command)
    # Findings with proposed fixes, and undo/redo: app/findings_commands.py.
    from app.findings_commands import register as register_findings

    register_findings(sub, command)
    # Sequences and tracks: app/track_commands.py.
    from app.track_commands import register as register_tracks

    register_tracks(sub, command)
    _images_root_option(sub)
    return parser


def _images_root_option(sub: Any) -> None:
    """Give every command that takes a project ``--images-root DIR`` (and ``--images DIR``
    where ``--images`` means nothing else): a hosted project's images root on this machine."""
    for parser in {id(p): p for p in sub.choices.values()}.values():  # aliases: once each
        nested = [a for a in parser._actions if isinstance(a, argparse._SubParsersAction)]
        for action in nested:
            _images_root_option(action)
        if not any(a.dest == "project" for a in parser._actions):
            continue
        names = ["--images-root"]
        if "--images" not in parser._option_string_actions:
            names.insert(0, "--images")
        parser.add_argument(*names, dest="images_root", metavar="DIR",
                            help="for a hosted project: where its images are on this machine "
                                 "(default: $POSEWRIGHT_IMAGES, else the folder it records)")


class _ShownFormatter(logging.Formatter):
    """Log lines as the command's other messages (``posewright: warning: ...``), escaped like
    everything else printed (library code logs file names and paths as they are)."""

    def format(self, record: logging.LogRecord) -> str:
        return shown(f"posewright: {record.levelname.lower()}: {record.getMessage()}")


class _Stderr(logging.StreamHandler):  # type: ignore[type-arg]
    """A handler writing to whatever ``sys.stderr`` is when a record comes (so a caller that
    redirects stderr, as tests do, gets the lines)."""

    @property  # type: ignore[override]
    def stream(self) -> Any:
        return sys.stderr

    @stream.setter
    def stream(self, _value: Any) -> None:
        pass


_HANDLER = _Stderr()
_HANDLER.setFormatter(_ShownFormatter())


def _log_to_stderr(verbose: bool) -> None:
    """Show the log lines of Posewright's modules (``app.*``) on stderr, with one handler
    however often :func:`main` runs in a process."""
    logger = logging.getLogger("app")
    logger.setLevel(logging.INFO if verbose else logging.WARNING)
    if _HANDLER not in logger.handlers:
        logger.addHandler(_HANDLER)


def _stdout_gone() -> int:
    """The reader of stdout went away: point stdout at the null device so that the flush at
    exit cannot fail again, and end with :data:`BROKEN_PIPE_STATUS`."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError, AttributeError):  # stdout is not a file (captured)
        pass
    return BROKEN_PIPE_STATUS


def main(argv: Sequence[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    _log_to_stderr(args.verbose)
    try:
        _limits(args)
        status = int(args.fn(args))
        sys.stdout.flush()
        return status
    except BrokenPipeError:
        return _stdout_gone()
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
    except sqlite3.Error as exc:
        # The store turns failed writes into errors of our own; this is a read that failed.
        print(f"posewright: error: the project database: {shown(exc)}", file=sys.stderr)
        return 2
