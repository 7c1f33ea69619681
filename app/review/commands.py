"""The ``packet`` and ``compare`` commands of ``posewright`` (registered by app/cli.py).

Nothing heavy is imported until a command runs, so building the parser stays quick. Text that
came from a file (names, file names, joint names) is printed through
:func:`app.safetext.shown`.
"""

from __future__ import annotations

import argparse
import math
import sys
import time
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

from app.cli import print_json, whole_number
from app.errors import BadInput, NotFound, ProjectLocked
from app.review import DEFAULT_IMAGES, IMAGE_MODES
from app.safetext import shown
from app.wording import count

Command = Callable[..., argparse.ArgumentParser]


def register(sub: Any, command: Command) -> None:
    """Add ``packet export|show|decide|send-back|merge`` and ``compare`` to the parser.

    ``sub`` is the top-level subparsers object, ``command`` app/cli.py's helper that adds a
    command with ``PROJECT``, ``--author`` and ``-q``.
    """
    p = command("compare", cmd_compare,
                "compare two projects or COCO datasets over the same images, by OKS",
                project=False)
    p.add_argument("a", metavar="A", help="project folder or COCO dataset (the reference)")
    p.add_argument("b", metavar="B", help="project folder or COCO dataset")
    p.add_argument("--json", action="store_true", help="print the whole comparison as JSON")
    p.add_argument("--csv", metavar="FILE", help="write one row per image to FILE")
    p.add_argument("--dispute-below", metavar="OKS", type=float,
                   help="mark A's frames with a mean OKS below this disputed (A: a project)")
    p.add_argument("--match-oks", metavar="OKS", type=float, default=0.2,
                   help="least OKS for two people to be paired (default 0.2)")
    p.add_argument("--skeleton", metavar="FILE.json",
                   help="skeleton of COCO files that are not the 17-joint COCO body")

    group = sub.add_parser("packet", help="review packets: export, show, decide, send-back, "
                           "merge",
                           description="send frames to a colleague for review and merge "
                                       "their answer")
    actions = group.add_subparsers(dest="packet_command", required=True, metavar="ACTION",
                                   parser_class=type(group))

    def action(name: str, fn: Callable[[argparse.Namespace], int],
               text: str, aliases: Sequence[str] = ()) -> argparse.ArgumentParser:
        q = actions.add_parser(name, help=text, description=text, aliases=list(aliases))
        q.add_argument("--author", help="who is working; reviewing, the reviewer (default: "
                                        "the one the review was first opened for, else the "
                                        "reviewer the packet names, $POSEWRIGHT_AUTHOR or "
                                        "the login name)")
        q.add_argument("-q", "--quiet", action="store_true", help="no progress on stderr")
        q.set_defaults(fn=fn)
        return q

    q = action("export", cmd_export, "write frames, labels and notes to a review packet (zip)")
    q.add_argument("project", metavar="PROJECT")
    q.add_argument("--frames", required=True, metavar="WHICH",
                   help="a state (disputed, untouched, ...) or frame ids 3,7,12")
    q.add_argument("--out", required=True, metavar="FILE.zip")
    q.add_argument("--images", choices=IMAGE_MODES, default=DEFAULT_IMAGES,
                   help="send the images with heads blurred (default), with every "
                        "person blurred whole, as they are, or none; blurs are placed from "
                        "the labels, the network maps and a face detector; an image that "
                        "cannot be read, or that a link brings from outside the images "
                        "folder, is never sent")
    q.add_argument("--accept-risk", action="store_true",
                   help="send blurred images even of frames without network maps, where "
                        "people the labels miss may stay recognisable (each is named in a "
                        "warning)")
    q.add_argument("--reviewer", metavar="NAME", help="who is to review")

    q = action("show", cmd_show, "check a packet and say what it holds (for blurred images: "
                                 "regions by what placed them, the largest share of a frame "
                                 "blurred, frames sent at risk, and per frame its regions "
                                 "and share)")
    q.add_argument("packet", metavar="FILE.zip")
    q.add_argument("--json", action="store_true")

    q = action("decide", cmd_decide, "record the reviewer's decision on a frame of a packet")
    q.add_argument("packet", metavar="FILE.zip")
    q.add_argument("--frame", required=True, type=whole_number(), metavar="ID")
    q.add_argument("--decision", required=True,
                   help="looks-right, query (it comes back disputed), ready (for training: "
                   "it comes back signed off), or none to withdraw; agree, needs-change and "
                   "signed-off, the words of version 0.1.0, still work")

    q = action("send-back", cmd_send_back, "write FILE-returned.zip from the reviewed packet, "
               "to send back (`return`, its name until version 0.1.0, still works for one "
               "more release)", aliases=["return"])
    q.add_argument("packet", metavar="FILE.zip")
    q.add_argument("--out", metavar="FILE", help="default: FILE-returned.zip beside FILE.zip")

    q = action("merge", cmd_merge, "merge a packet sent back into the project, joint by joint "
               "(the packet's base, the project now, the reviewer's)")
    q.add_argument("project", metavar="PROJECT")
    q.add_argument("returned", metavar="RETURNED.zip")
    q.add_argument("--json", action="store_true", help="print the merge report as JSON")


def _open_project(folder: str, author: str | None, write: bool,
                  images: str | None = None):  # -> Project
    """Open for editing when possible; ``write`` makes read-only (another process holds the
    project) an error. ``images``: a hosted project's images root on this machine."""
    from app.jobs import open_project

    project = open_project(folder, author=author, images=images)
    if write and project.read_only:
        reason = project.read_only_reason
        project.close()
        raise ProjectLocked(f"{folder}: cannot change the project: it is {reason}")
    return project


def _progress(quiet: bool):  # -> Progress
    from app.progress import Progress

    start = time.monotonic()

    def show(done: int, total: int, label: str) -> None:
        if not quiet and time.monotonic() - start > 1.0 and done == total:
            print(f"{label}: {done}/{total}", file=sys.stderr, flush=True)

    return Progress(show)


def cmd_export(args: argparse.Namespace) -> int:
    from app.review.packet import blur_risks, export_packet, select_frames

    with _open_project(args.project, args.author, write=False,
                       images=args.images_root) as project:
        frames = select_frames(project, args.frames)
        risks = blur_risks(project, frames, args.images, _progress(args.quiet))
        for line in risks:
            print(f"posewright: warning: {line}", file=sys.stderr)
        if risks and not args.accept_risk:
            raise BadInput(f"{count(len(risks), 'frames')} may show people unblurred; nothing "
                           "written", where="--images " + args.images,
                           hint="add their maps (import-maps, prelabel), send --images none, "
                                "or pass --accept-risk")
        stats = export_packet(project, args.out, frames, images=args.images,
                              reviewer=args.reviewer, progress=_progress(args.quiet),
                              accept_risk=args.accept_risk)
    if stats["missing_images"]:
        print(f"posewright: warning: {count(stats['missing_images'], 'frames')} went without "
              "their image (missing or unreadable)", file=sys.stderr)
    if stats["outside_images"]:
        print(f"posewright: warning: {count(stats['outside_images'], 'frames')} went without "
              "their image: it is a link to a file outside the images folder", file=sys.stderr)
    if stats["unplaced_heads"]:
        print(f"posewright: warning: {count(stats['unplaced_heads'], 'people')} with no "
              "labelled joint: no head to blur", file=sys.stderr)
    if args.images.startswith("blurred") and stats["images"] and not stats["detector"]:
        print("posewright: warning: no face detector (install opencv-python-headless<5): "
              "blurred from the labels and maps only", file=sys.stderr)
    print(f"wrote {shown(args.out)}: {count(stats['frames'], 'frames')}, "
          f"{count(stats['people'], 'people')}, {count(stats['images'], 'images')} "
          f"({args.images})")
    return 0


def cmd_show(args: argparse.Namespace) -> int:
    from app.review.packet import read_packet

    packet = read_packet(args.packet)
    info = {
        "packet_id": packet.packet_id, "project_id": packet.project_id,
        "returned": packet.returned is not None,
        "exported_by": packet.exported_by, "reviewer": packet.reviewer,
        "images": packet.images, "frames": [f.id for f in packet.frames],
        "people": sum(len(c.people) for c in packet.base.values()),
    }
    blurs = [f["blur"] for f in packet.manifest.get("frames", []) if f.get("blur")]
    if blurs:
        placed = {"labels": 0, "maps": 0, "detector": 0}
        for blur in blurs:
            for region in blur["regions"]:
                for source in region["sources"]:
                    placed[source] += 1
        info["blurred_regions"] = placed
        info["blurred_share"] = round(max(b["share"] for b in blurs), 4)
        info["blur_risks"] = [f"frame {f['id']}: {f['blur']['risk']}"
                              for f in packet.manifest["frames"]
                              if f.get("blur") and f["blur"]["risk"]]
        # Where each frame was blurred, as the reviewer's window outlines it.
        from app.session.blurred import BlurredFrame

        info["blurred_frames"] = {str(f["id"]): BlurredFrame.from_record(f["blur"]).summary()
                                  for f in packet.manifest["frames"] if f.get("blur")}
    if packet.returned is not None:
        info["returned_by"] = packet.returned.reviewer
        info["decisions"] = {str(d.frame_id): d.decision
                             for d in packet.returned.decisions.values()}
    if args.json:
        print_json(info)
    else:
        for key, value in info.items():
            if key == "blurred_frames":
                for fid, line in value.items():
                    print(f"{'frame ' + fid:>12}: {shown(line)}")
                continue
            print(f"{key:>12}: {shown(value)}")
    return 0


def cmd_decide(args: argparse.Namespace) -> int:
    from app.review.review import open_packet, set_decision

    decision = None if args.decision.strip().lower() == "none" else args.decision
    with open_packet(args.packet, reviewer=args.author) as project:
        held = [f.id for f in project.frames()]
        if args.frame not in held:
            listed = ", ".join(map(str, held[:12])) + (", ..." if len(held) > 12 else "")
            raise NotFound(f"{args.packet}: the packet has no frame {args.frame}; it holds "
                           f"{count(len(held), 'frames')}: {listed}")
        made = set_decision(project, args.frame, decision)
    print(f"frame {args.frame}: " + (made.decision if made else "decision withdrawn"))
    return 0


def cmd_send_back(args: argparse.Namespace) -> int:
    from app.review.review import open_packet, return_packet

    with open_packet(args.packet, reviewer=args.author) as project:
        out = return_packet(project, args.out)
    print(f"wrote {shown(out)}; send it back to be merged")
    return 0


def cmd_merge(args: argparse.Namespace) -> int:
    from app.review.merge import merge_packet

    with _open_project(args.project, args.author, write=True,
                       images=args.images_root) as project:
        report = merge_packet(project, args.returned, progress=_progress(args.quiet))
    if args.json:
        print_json(report.to_dict())
        return 0
    if report.already_merged:
        when = time.strftime("%Y-%m-%d %H:%M", time.localtime(report.merged_at or 0))
        print(f"{shown(args.returned)}: already merged on {when}; nothing changed")
        return 0
    print(f"merged {shown(args.returned)} from {shown(report.reviewer)}: "
          f"{count(report.frames, 'frames')}, {count(report.joints_taken, 'joints')} taken, "
          + (f"{count(report.tracks_taken, 'tracks')} taken, " if report.tracks_taken else "")
          + f"{count(report.people_added, 'people')} added, {report.people_deleted} deleted, "
          f"{count(report.notes_added, 'notes')}, {count(len(report.conflicts), 'conflicts')}")
    for c in report.conflicts:
        what = c["kind"] if c["kind"] != "joints" else "joints " + ", ".join(map(str,
                                                                                c["joints"]))
        if c["kind"] == "track":
            what = (f"track: kept mine, {shown(report.reviewer)} put them on track "
                    f"{c.get('theirs_track')}")
        print(f"  conflict: frame {c['frame']}, person {c['person']}: {what}")
    if report.disputed:
        print("  disputed: frames " + ", ".join(map(str, report.disputed)))
    if report.signed_off:
        print("  signed off: frames " + ", ".join(map(str, report.signed_off)))
    if not report.base_checked:
        print("posewright: warning: the packet was not recorded when it was sent, so its base "
              "labels could not be checked", file=sys.stderr)
    return 0


def cmd_compare(args: argparse.Namespace) -> int:
    from app.model.skeleton import load_skeleton
    from app.review.compare import compare, load_labels, mark_disputed, write_csv

    threshold = args.dispute_below
    if threshold is not None and not 0 <= threshold <= 1:
        raise BadInput(f"{threshold} is not an OKS in [0, 1]", where="--dispute-below")
    if not 0 <= args.match_oks <= 1:
        raise BadInput(f"{args.match_oks} is not an OKS in [0, 1]", where="--match-oks")
    if threshold is not None and not Path(args.a).is_dir():
        raise BadInput("--dispute-below marks frames of A, which must be a project",
                       where=args.a)
    skeleton = load_skeleton(args.skeleton) if args.skeleton else None
    a = load_labels(args.a, skeleton)
    b = load_labels(args.b, skeleton)
    result = compare(a, b, skeleton or a.skeleton, match_oks=args.match_oks)
    if args.csv:
        write_csv(result, args.csv)
    marked: list[int] = []
    if threshold is not None:
        with _open_project(args.a, args.author, write=True) as project:
            marked = mark_disputed(project, result, threshold, Path(args.b).name)
    if args.json:
        data = result.to_dict()
        data["marked_disputed"] = marked
        print_json(data)
        return 0
    _print_comparison(result, threshold, marked)
    return 0


def _fmt(x: float, spec: str = ".3f") -> str:
    return "-" if math.isnan(x) else format(x, spec)


def _print_comparison(result: Any, threshold: float | None, marked: list[int]) -> None:
    print(f"A: {shown(result.a)}\nB: {shown(result.b)}")
    print(f"images compared: {len(result.frames)} (only in A: {len(result.only_a)}, "
          f"only in B: {len(result.only_b)}); mean OKS {_fmt(result.mean_oks)}")
    print(f"{'joint':<16}{'compared':>9}{'one side':>9}{'agree':>8}{'mean error':>11}"
          f"{'mean KS':>9}")
    for row in result.joints:
        print(f"{shown(row.name):<16}{row.compared:>9}{row.one_side:>9}"
              f"{_fmt(row.agreement, '.1%'):>8}{_fmt(row.mean_error):>11}"
              f"{_fmt(row.mean_similarity):>9}")
    worst = sorted(result.frames, key=lambda f: f.mean_oks)[:10]
    print("lowest mean OKS:")
    for f in worst:
        print(f"  {f.mean_oks:.3f}  {shown(f.file_name):<28} {count(len(f.pairs), 'pairs')}, "
              f"{len(f.unpaired_a)}+{len(f.unpaired_b)} unpaired, "
              f"{count(len(f.disagreements), 'joints')} disagree")
    if threshold is not None:
        print(f"marked {count(len(marked), 'frames')} of A disputed (mean OKS below "
              f"{threshold:g})")
