"""The reviewer's side: open a packet as a small project, decide on frames, return it.

``open_packet("rehearsal.zip")`` checks the packet and builds ``rehearsal.review/`` beside it:
a real project (``project.db``) holding the packet's frames (with their ids, file names and
how their auto-labels were grouped, when the packet records it), people (with their ids),
notes, and images when the packet has them. The desktop app opens it
with the same window and edits it with the same ledger; every edit is credited to the
reviewer. Opening the same packet again reopens that folder, for the same reviewer: the one
named when it was first opened (else the reviewer the packet names, else the default author),
recorded in the folder so that every later decision, edit and the return credit them.

People the reviewer creates get ids from :data:`REVIEW_ID_BASE` up, and notes likewise, so
they can never be mistaken for the project's own; the merge gives them fresh ids of the
project anyway.

``return_packet(project)`` writes ``rehearsal-returned.zip`` beside the folder: the manifest
with a ``returned`` section (reviewer, time, decisions), the base labels exactly as received,
and ``returned.json`` with the final labels and the reviewer's ledger rows.
"""

from __future__ import annotations

import hashlib
import json
import logging
import os
import shutil
import tempfile
import time
from pathlib import Path
from typing import Any

from app.analysis.triage.findings import labels_digest
from app.errors import BadInput, NotFound
from app.review import safezip
from app.review.packet import (
    LABELS,
    MANIFEST,
    RETURNED,
    FrameDecision,
    Packet,
    atomic_zip,
    dumps_json,
    parse_decision,
    read_packet,
    write_member,
)
from app.safetext import check_name, shown
from app.store import NewFrame, Project
from app.store.project import DB_NAME
from app.wording import DECISION_WORDS

log = logging.getLogger(__name__)

#: First id of people and notes the reviewer creates.
REVIEW_ID_BASE = 1_000_000_000

_META_PACKET = "review_packet_id"
_META_MANIFEST = "review_manifest"
_META_BASE = "review_base_labels"
_META_REVIEWER = "review_reviewer"

__all__ = ["REVIEW_ID_BASE", "blur_record", "decisions", "is_review", "open_packet",
           "return_packet", "returned_path", "review_folder", "reviewer_of", "set_decision"]


def review_folder(path: str | Path) -> Path:
    """Where a packet is opened for review: ``FILE.zip`` -> ``FILE.review``.

    Examples
    --------
    >>> review_folder("/tmp/rehearsal.zip").as_posix()
    '/tmp/rehearsal.review'
    """
    path = Path(path)
    return path.with_name(path.stem + ".review")


def returned_path(folder: str | Path) -> Path:
    """Where a review folder is returned to: ``FILE.review`` -> ``FILE-returned.zip``.

    Examples
    --------
    >>> returned_path("/tmp/rehearsal.review").as_posix()
    '/tmp/rehearsal-returned.zip'
    """
    folder = Path(folder)
    return folder.with_name(folder.name.removesuffix(".review") + "-returned.zip")


def is_review(project: Project) -> bool:
    """Whether ``project`` was opened from a review packet."""
    return project.meta(_META_PACKET) is not None


def open_packet(path: str | Path, reviewer: str | None = None,
                limits: safezip.Limits = safezip.DEFAULT_LIMITS,
                fallback: str | None = None) -> Project:
    """Open a review packet for reviewing; returns the review project, open for editing.

    Parameters
    ----------
    path
        The packet (``FILE.zip``), as exported (not a returned one).
    reviewer
        Who reviews, as named on purpose (``--author``). On first opening the default is the
        reviewer the packet names, else ``fallback``, else ``$POSEWRIGHT_AUTHOR`` or the
        login name; later openings default to the reviewer recorded then.
    limits
        Bounds on the archive.
    fallback
        The name to use when neither ``reviewer`` nor the packet names one (the app passes
        the name its user gave on the first run).

    Returns
    -------
    Project
        The project in ``FILE.review/`` (built on first opening, reopened afterwards), its
        :attr:`~app.store.Project.author` the review's reviewer. The caller closes it.

    Raises
    ------
    BadInput
        A packet that fails any check of :func:`app.review.packet.read_packet` (nothing is
        written then), a ``FILE.review`` folder that holds something else, a reviewer's name
        that is not printable text (see :func:`app.safetext.check_name`), or a ``reviewer``
        other than the one the review was opened for.
    """
    path = Path(path)
    folder = review_folder(path)
    if reviewer is not None:
        check_name(reviewer, "--author")
    if (folder / DB_NAME).exists():
        recorded = _recorded_reviewer(folder)
        if reviewer is not None and reviewer != recorded:
            raise BadInput(f"the review in this folder is reviewed by {shown(recorded)}, not "
                           f"{shown(reviewer)}", where=str(folder),
                           hint="leave out --author, or ask for a packet of your own")
        project = Project.open(folder, author=recorded)
        if path.exists():
            packet = read_packet(path, returned=False, limits=limits)
            if packet.packet_id != project.meta(_META_PACKET):
                project.close()
                raise BadInput(f"the folder holds the review of another packet than {path.name}",
                               where=str(folder), hint="move the folder away or rename the zip")
        return project
    packet = read_packet(path, returned=False, limits=limits)
    if folder.exists():
        raise BadInput("the folder exists and holds no review project", where=str(folder),
                       hint="move it away, then open the packet again")
    build = Path(tempfile.mkdtemp(prefix=folder.name + ".", suffix=".new", dir=folder.parent))
    try:
        who = _build(build, packet, reviewer or packet.reviewer or fallback, limits)
        os.rename(build, folder)
    except BaseException:
        shutil.rmtree(build, ignore_errors=True)
        raise
    return Project.open(folder, author=who)


def _recorded_reviewer(folder: Path) -> str:
    """The reviewer a review folder was opened for, read without taking its lock."""
    with Project.open(folder, read_only=True) as peek:
        if peek.meta(_META_PACKET) is None:
            raise BadInput("the folder holds a project that is not a review", where=str(folder))
        return reviewer_of(peek)


def blur_record(project: Project, frame_id: int) -> dict[str, Any] | None:
    """What the packet a review was opened from records of a frame's blur (the manifest's
    ``blur``, see :mod:`app.review.packet`), or None: not a review, or the frame's image was
    not blurred."""
    if not is_review(project):
        return None
    manifest = json.loads(project.meta(_META_MANIFEST) or "{}")
    for entry in manifest.get("frames") or ():
        if isinstance(entry, dict) and entry.get("id") == frame_id:
            blur = entry.get("blur")
            return blur if isinstance(blur, dict) else None
    return None


def reviewer_of(project: Project) -> str:
    """Who reviews a project made by :func:`open_packet`: the name recorded when it was first
    opened (for a folder built before names were recorded, the author of its first ledger
    entry, which is the same person)."""
    recorded = project.meta(_META_REVIEWER)
    if recorded:
        return recorded
    history = project.history()
    return history[-1].author if history else project.author


def _build(folder: Path, packet: Packet, who: str | None, limits: safezip.Limits) -> str:
    """Build the review project in ``folder``; returns the reviewer's name it records."""
    images = folder / "images"
    images.mkdir()
    _extract_images(packet, images, limits)
    with Project.create(folder, skeleton=packet.skeleton, author=who) as project:
        _fill(project, packet)
        if packet.triage:
            # Why each frame was sent: the sender's scores, reasons and findings (derived
            # data, kept beside the labels as triage keeps them; not in the ledger).
            project.store_triage({fid: (score, reasons)
                                  for fid, (score, reasons, _) in packet.triage.items()
                                  if score is not None})
            project.store_findings({fid: (labels_digest(project.labels(fid)), found)
                                    for fid, (_, _, found) in packet.triage.items()})
    return project.author


def _fill(project: Project, packet: Packet) -> None:
    """The packet's frames, people and notes, and what the review remembers of it."""
    with project.bulk("OpenPacket", f"open review packet from {packet.exported_by}",
                      f"packet:{packet.packet_id}", kind="review") as b:
        frames = []
        for f in packet.frames:
            name = Path(f.image).name if f.image else f"{f.id}"
            frames.append((f.id, NewFrame(f"images/{name}", f.file_name, f.width, f.height,
                                          "ok" if f.image else "missing", state=f.state)))
        b.frames.insert_with_ids(frames)
        # How each frame's auto-labels were grouped, as the sender's project records it, so
        # the reviewer's triage weighs the frame by the same weights.
        for grouping in sorted({f.grouping for f in packet.frames if f.grouping is not None}):
            b.set_grouping([f.id for f in packet.frames if f.grouping == grouping], grouping)
        people = [(fid, p) for fid, c in packet.base.items() for p in c.people.values()]
        b.add_people(people)
        notes = [n for c in packet.base.values() for n in c.notes.values()]
        b.notes.insert(notes)
        top_person = max([p.id for _, p in people], default=0)
        top_note = max([n.id for n in notes], default=0)
        b.set_meta("next_person_id", str(max(REVIEW_ID_BASE, top_person + 1)))
        b.set_meta("next_note_id", str(max(REVIEW_ID_BASE, top_note + 1)))
        b.set_meta("images_root", "images")
        b.set_meta("name", f"review of {packet.path.name}")
        b.set_meta(_META_PACKET, packet.packet_id)
        b.set_meta(_META_REVIEWER, check_name(project.author, "the reviewer's name"))
        b.set_meta(_META_MANIFEST, json.dumps(packet.manifest))
        b.set_meta(_META_BASE, packet.base_json.decode("utf-8"))
        b.count("frames", len(frames))


def _extract_images(packet: Packet, images: Path, limits: safezip.Limits) -> None:
    """Copy the packet's images into ``images``, each under a name we make from the frame id
    (never from the archive), checking each SHA-256 again as it is written."""
    wanted = [f for f in packet.frames if f.image]
    if not wanted:
        return
    where = str(packet.path)
    with safezip.open_archive(packet.path) as archive:
        entries = safezip.check_archive(archive, where, limits)
        for f in wanted:
            assert f.image is not None
            info = entries.get(f.image)
            if info is None:
                raise BadInput("the manifest lists it but the archive lacks it",
                               where=f"{where}: member {f.image!r}")
            target = images / f"{f.id}{Path(f.image).suffix}"
            with open(target, "xb") as out:
                safezip.copy_member(archive, info, where, out, packet.members[f.image])


def _require_review(project: Project) -> None:
    if not is_review(project):
        raise BadInput("not a project opened from a review packet", where=str(project.folder),
                       hint="open the packet with `posewright open FILE.zip`")


def set_decision(project: Project, frame_id: int, decision: str | None) -> FrameDecision | None:
    """Record the reviewer's decision on a frame (``looks-right``, ``query``, ``ready``;
    ``None`` withdraws it), credited to the review's reviewer. One transaction and one ledger
    entry; returns the decision recorded."""
    _require_review(project)
    frame = project.frame(frame_id)
    if decision is None:
        with project.bulk("ReviewDecision", f"withdraw the decision on frame {frame.id}",
                          f"frame:{frame.id}", kind="review", frame_id=frame.id) as b:
            b.decisions.drop(frame.id)
        return None
    value = parse_decision(decision)
    made = FrameDecision(frame.id, value, reviewer_of(project), time.time())
    with project.bulk("ReviewDecision", f"frame {frame.id}: {DECISION_WORDS[value]}",
                      f"frame:{frame.id}",
                      kind="review", frame_id=frame.id) as b:
        b.decisions.put(made)
    return made


def decisions(project: Project) -> dict[int, FrameDecision]:
    """The reviewer's decisions so far, by frame id."""
    return project.decisions()


def return_packet(project: Project, out: str | Path | None = None) -> Path:
    """Write the returned packet of a review project (atomically) and return its path.

    Parameters
    ----------
    project
        A project made by :func:`open_packet`.
    out
        Where to write; default ``FILE-returned.zip`` beside ``FILE.review``.

    Returns
    -------
    pathlib.Path
        The returned packet, ready to send back and merge with
        :func:`app.review.merge.merge_packet`.
    """
    _require_review(project)
    out = Path(out) if out is not None else returned_path(project.folder)
    manifest: dict[str, Any] = json.loads(project.meta(_META_MANIFEST) or "{}")
    base_json = (project.meta(_META_BASE) or "").encode("utf-8")
    frames = []
    for entry in manifest["frames"]:
        try:
            labels = project.labels(entry["id"])
        except NotFound:
            raise BadInput(f"frame {entry['id']} of the packet is gone from the review",
                           where=str(project.folder)) from None
        frames.append({
            "id": labels.frame_id, "state": labels.state.value,
            "people": [{"id": p.id, **p.to_value()} for p in labels.people.values()],
            "notes": [{"id": n.id, **n.to_value()} for n in labels.notes.values()],
        })
    ledger = [e.to_dict() for e in reversed(project.history())]
    returned_json = dumps_json({"frames": frames, "ledger": ledger})
    with atomic_zip(out) as archive:
        members = {LABELS: write_member(archive, LABELS, base_json),
                   RETURNED: write_member(archive, RETURNED, returned_json)}
        manifest = {**manifest, "members": members, "returned": {
            "reviewer": reviewer_of(project), "time": time.time(),
            "decisions": [{"frame": d.frame_id, "decision": d.decision, "author": d.author,
                           "time": d.time} for d in decisions(project).values()],
            "base_sha256": hashlib.sha256(base_json).hexdigest(),
        }}
        write_member(archive, MANIFEST, dumps_json(manifest))
    log.info("sent %d frames back in %s", len(frames), out)
    return out
