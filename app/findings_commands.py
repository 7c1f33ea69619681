"""The ``findings``, ``undo`` and ``redo`` commands of ``posewright`` (registered by app/cli.py).

``findings`` lists each problem triage found at one place with the fix it proposes, accepts the
fixes in bulk (each one ledger group) or dismisses findings as not a problem; ``undo`` and
``redo`` take the newest actions back and forth, so that a batch can be taken back from the
command line. Nothing heavy is imported until a command runs.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable
from typing import Any

from app.errors import BadInput
from app.safetext import shown
from app.wording import count

Command = Callable[..., argparse.ArgumentParser]


def register(sub: Any, command: Command) -> None:
    """Add ``findings``, ``undo`` and ``redo`` to the parser.

    ``sub`` is the top-level subparsers object, ``command`` app/cli.py's helper that adds a
    command with ``PROJECT``, ``--author`` and ``-q``.
    """
    from app.analysis.kinds import ALL_KINDS
    from app.cli import whole_number

    p = command("findings", cmd_findings,
                "each problem triage found, where it is and the fix it proposes, worst first; "
                "accept fixes in bulk or dismiss findings")
    p.add_argument("--frames", metavar="LIST",
                   help="frame ids and ranges (1,2,5-9), 'untouched' or 'all' (default all)")
    p.add_argument("--kinds", metavar="K,K",
                   help="only these kinds: " + ", ".join(ALL_KINDS) + " (default all; the "
                        "kinds over time once the project has tracks, see `posewright track`)")
    p.add_argument("--json", action="store_true", help="print the findings as JSON")
    p.add_argument("--accept", metavar="all|K,K",
                   help="apply the proposed fixes of all kinds or of these kinds, each as one "
                        "ledger group credited to the author")
    p.add_argument("--min-confidence", metavar="P", type=float, default=0.0,
                   help="with --accept: only fixes at least this confident (0 to 1)")
    p.add_argument("--dry-run", action="store_true",
                   help="with --accept: list the fixes that would be applied; change nothing")
    p.add_argument("--carry", action="store_true",
                   help="with --accept: carry each fix of one frame to the frames around it "
                        "where the same tracks show the same error, as one more action each "
                        "(see `posewright carry`)")
    p.add_argument("--dismiss", metavar="ID,ID",
                   help="record these findings as not a problem (undoable); they are not "
                        "raised again while the labels they are about stay the same")
    p.add_argument("--workers", type=whole_number(1, 1024), metavar="N",
                   help="processes to triage the frames whose findings are out of date in "
                        "(default: $POSEWRIGHT_WORKERS, else every core); the same findings "
                        "whatever N")


    for name, fn, text in (("undo", cmd_undo, "take back your newest actions (one step each)"),
                           ("redo", cmd_redo, "do again your newest actions taken back")):
        p = command(name, fn, text)
        p.add_argument("--steps", metavar="N", type=whole_number(1, 10_000), default=1,
                       help="how many actions (default 1)")


def _open(args: argparse.Namespace, write: bool) -> Any:
    from app.cli import _open as open_project

    return open_project(args, write=write)


def _progress(args: argparse.Namespace) -> Any:
    from app.cli import _stderr_progress

    return _stderr_progress(args.quiet)


def cmd_findings(args: argparse.Namespace) -> int:
    from app.cli import print_json
    from app.jobs_findings import current_findings, dismiss, parse_kinds
    from app.parallel import check_workers

    kinds = parse_kinds(args.kinds)
    if args.accept is None and (args.dry_run or args.min_confidence != 0.0 or args.carry):
        raise BadInput("--dry-run, --min-confidence and --carry go with --accept",
                       where="findings")
    if args.carry and args.dry_run:
        raise BadInput("--carry follows each fix as it is applied, which --dry-run does not "
                       "do; give one of them", where="findings")
    if args.accept is not None and args.dismiss is not None:
        raise BadInput("give --accept or --dismiss, not both", where="findings")
    if not 0.0 <= args.min_confidence <= 1.0:
        raise BadInput(f"{args.min_confidence} is not between 0 and 1",
                       where="--min-confidence")
    if args.dismiss is not None:
        with _open(args, write=True) as project:
            done = dismiss(project, args.dismiss.split(","))
        for f in done:
            print(f"dismissed {f.id} (frame {f.frame_id}, {f.kind}): {shown(f.text)}")
        return 0
    if args.accept is not None:
        return _accept(args, kinds)
    with _open(args, write=False) as project:
        frame_ids = _frame_ids(project, args.frames)
        found = current_findings(project, frame_ids, _progress(args),
                                 workers=check_workers(args.workers))
        names = {f.id: f.file_name for f in project.frames()}
    rows = [f for fid in sorted(found) for f in found[fid] if kinds is None or f.kind in kinds]
    rows.sort(key=lambda f: (-f.worth, f.frame_id, f.id))
    if args.json:
        print_json([f.to_dict(names[f.frame_id]) for f in rows])
        return 0
    if not rows:
        print("no findings")
        return 0
    for f in rows:
        who = "" if f.person_id is None else f"  person {f.tag} (#{f.person_id})"
        print(f"{f.confidence:4.2f}  {f.id}  frame {f.frame_id} {shown(names[f.frame_id])}  "
              f"{f.kind}{who}")
        print(f"      {shown(f.text)}")
        print(f"      fix: {shown(f.fix.summary)}" if f.fix is not None else
              "      fix: none proposed")
    with_fix = sum(f.fix is not None for f in rows)
    print(f"{count(len(rows), 'finding')} in {count(len({f.frame_id for f in rows}), 'frame')}, "
          f"{with_fix} with a proposed fix")
    return 0


def _accept(args: argparse.Namespace, kinds: set[str] | None) -> int:
    from app.jobs_findings import accept_fixes, parse_kinds

    if kinds is not None:
        raise BadInput("with --accept, name the kinds there (--accept K,K)", where="--kinds")
    chosen = parse_kinds(args.accept, where="--accept")
    with _open(args, write=not args.dry_run) as project:
        frame_ids = _frame_ids(project, args.frames)
        report = accept_fixes(project, chosen, args.min_confidence, frame_ids,
                              dry_run=args.dry_run, progress=_progress(args), carry=args.carry)
        names = {f.id: f.file_name for f in project.frames()}
    for f in report.fixes:
        print(f"{f.confidence:4.2f}  {f.id}  frame {f.frame_id} {shown(names[f.frame_id])}  "
              f"{f.kind}: {shown(f.fix.summary if f.fix else '')}")
    verb = "would apply" if args.dry_run else "applied"
    line = f"{verb} {count(len(report.fixes), 'fix')} in {count(len(report.frames), 'frame')}"
    extra = []
    if report.held_back:
        extra.append(f"{report.held_back} held back by an overlapping fix")
    if report.refused:
        extra.append(f"{report.refused} refused: the labels had changed")
    if report.carried:
        extra.append(f"{count(report.carried, 'fix')} carried to "
                     f"{count(report.carried_frames, 'more frame')}")
    print(line + (f" ({'; '.join(extra)})" if extra else "")
          + ("" if args.dry_run or not report.fixes else
             "; `posewright undo PROJECT --steps N` takes them back"))
    return 0


def _frame_ids(project: Any, spec: str | None) -> list[int] | None:
    from app.inference.prelabel import parse_frames

    if spec is None:
        return None
    return [f.id for f in parse_frames(spec, project.frames())]


def _unwind(args: argparse.Namespace, redo: bool) -> int:
    from app.model.naming import Names, ledger_names
    from app.wording import ledger_text

    steps = int(args.steps)
    word = "redid" if redo else "undid"
    done = 0
    with _open(args, write=True) as project:
        for _ in range(steps):
            group = project.redo() if redo else project.undo()
            if group is None:
                break
            done += 1
            entry = next(e for e in project.history(limit=50) if e.group_id == group)
            summary = ledger_text(entry.summary.partition(": ")[2] or entry.summary)
            frame = "" if entry.frame_id is None else f" (frame {entry.frame_id})"
            if entry.frame_id is not None:  # people by tag and stable number, joints by name
                ids = [p.id for p in project.people(entry.frame_id)]
                summary = ledger_names(summary, Names.of_frame(project.skeleton, ids))
            print(f"{word}{frame}: {shown(summary)}")
    if done < steps:
        print(f"nothing more to {'redo' if redo else 'undo'}"
              + (f" after {count(done, 'step')}" if done else ""),
              file=sys.stderr if done else sys.stdout)
    return 0


def cmd_undo(args: argparse.Namespace) -> int:
    return _unwind(args, redo=False)


def cmd_redo(args: argparse.Namespace) -> int:
    return _unwind(args, redo=True)
