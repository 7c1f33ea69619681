"""The ``track`` and ``carry`` commands of ``posewright`` (registered by app/cli.py): link
every sequence's people into tracks, keeping the tracks someone set, and say which folders are
not sequences; carry a correction to the frames around it that show the same error. Nothing
heavy is imported until a command runs."""

from __future__ import annotations

import argparse
from collections.abc import Callable
from typing import Any

from app.safetext import shown
from app.wording import count

Command = Callable[..., argparse.ArgumentParser]


def register(sub: Any, command: Command) -> None:
    """Add ``track`` to the parser (``command`` is app/cli.py's helper)."""
    p = command("track", cmd_track,
                "link the people of every sequence (a video's frames, an image folder in "
                "file-name order) into tracks; tracks someone set are kept")
    p.add_argument("--json", action="store_true", help="list the tracks as JSON")
    p.add_argument("--not-a-sequence", metavar="FOLDER", action="append", default=[],
                   help="the frames of FOLDER are unrelated pictures: never link them (the "
                        "setting is kept; repeat for more folders)")
    p.add_argument("--a-sequence", metavar="FOLDER", action="append", default=[],
                   help="take back --not-a-sequence for FOLDER")

    from app.cli import whole_number

    p = command("carry", cmd_carry,
                "carry your newest correction (or --action G), with every other correction "
                "in effect of the same people in that frame, to the frames before and after "
                "it where the same tracks show the same error, each joint as far as its "
                "error lasts, as one action")
    p.add_argument("--action", metavar="G", type=whole_number(1),
                   help="the ledger group of the correction (default: your newest edit)")
    p.add_argument("--until", metavar="FRAME", type=whole_number(),
                   help="take the batch only as far as this frame (in its direction)")
    p.add_argument("--dry-run", action="store_true",
                   help="list the frames the batch would change; change nothing")
    p.add_argument("--this-action-only", action="store_true",
                   help="carry only that correction, as far as all of it shows, not the "
                        "people's whole correction in the frame")
    p.add_argument("--whole-frame", action="store_true",
                   help="carry every correction in effect in that frame, of every person, "
                        "each joint as far as its error lasts, as one action")
    p.add_argument("--step-over", metavar="N", type=whole_number(), default=0,
                   help="step over up to N frames in a row where the error is absent when "
                        "it is back on the frame after them, leaving them unchanged "
                        "(default 0: stop at the first frame without the error)")
    p.add_argument("--json", action="store_true", help="print the batch as JSON")


def cmd_track(args: argparse.Namespace) -> int:
    from app.cli import _open, _stderr_progress, print_json
    from app.jobs_tracks import link_project, mark_not_sequence

    with _open(args) as project:
        if args.not_a_sequence:
            mark_not_sequence(project, args.not_a_sequence)
        if args.a_sequence:
            mark_not_sequence(project, args.a_sequence, not_sequence=False)
        linked = link_project(project, progress=_stderr_progress(args.quiet))
    if args.json:
        print_json({"sequences": linked.sequences, "frames": linked.frames,
                    "people": linked.people, "kept": linked.kept, "links": linked.links,
                    "tracks": [t.to_dict() for t in linked.tracks]})
        return 0
    print(f"{count(len(linked.tracks), 'tracks')} with {count(linked.links, 'links')} over "
          f"{count(linked.frames, 'frames')} of {count(linked.sequences, 'sequences')}; "
          f"{count(linked.kept, 'people')} whose track someone set kept")
    for key in sorted({t.sequence for t in linked.tracks}):
        here = [t for t in linked.tracks if t.sequence == key]
        print(f"  {shown(key) or '.'}: {count(len(here), 'tracks')}, the longest over "
              f"{count(max(len(t.frames) for t in here), 'frames')}")
    return 0


def cmd_carry(args: argparse.Namespace) -> int:
    from app.cli import _open, print_json
    from app.jobs_tracks import last_correction, propose_carry, take_batch
    from app.model.edits import edit_to_value

    with _open(args, write=not args.dry_run) as project:
        group, frame, changes = last_correction(project, args.action)
        batch = propose_carry(project, frame, changes,
                              whole_person=not args.this_action_only,
                              whole_frame=args.whole_frame,
                              step_over=args.step_over).until(args.until)
        applied = None if args.dry_run else take_batch(project, batch)
    frames = [g.frame_id for g in batch.edits]
    if args.json:
        print_json({"action": group, "frame": frame, "frames": frames,
                    "stopped_forward": batch.stopped_forward,
                    "stopped_backward": batch.stopped_backward,
                    "skipped": list(batch.skipped),
                    "applied": None if applied is None else applied.group_id,
                    "edits": [edit_to_value(g) for g in batch.edits]})
        return 0
    if not frames:
        print(f"the correction of frame {frame} shows in no frame around it; nothing to carry")
        return 0
    verb = "would carry" if args.dry_run else "carried"
    ends = [str(f) for f in (batch.stopped_backward, batch.stopped_forward) if f is not None]
    print(f"{verb} the correction of frame {frame} to {count(len(frames), 'frames')} "
          f"({', '.join(map(str, frames))})"
          + (f", stepping over {count(len(batch.skipped), 'frame')} where the error is "
             f"absent and back after ({', '.join(map(str, batch.skipped))})"
             if batch.skipped else "")
          + (f"; the error is absent from frame {' and '.join(ends)}" if ends else ""))
    return 0
