"""The ``track`` command of ``posewright`` (registered by app/cli.py): link every sequence's
people into tracks, keeping the tracks someone set; say which folders are not sequences.
Nothing heavy is imported until the command runs."""

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
