"""Fixtures for the review tests: a labelled project and the packet round trip.

All labels are synthetic (tests/synthetic.py); the reviewer "bea" and the annotator "ana" are
invented names.
"""

from __future__ import annotations

import hashlib
import json
import zipfile
from collections.abc import Callable, Sequence
from pathlib import Path
from typing import Any

import pytest

from app.jobs import import_coco
from app.review.packet import LABELS, MANIFEST, export_packet
from app.review.review import open_packet, return_packet, set_decision
from app.store import Project


@pytest.fixture
def labelled(project: Project, coco_file: Path) -> Project:
    """The shared ``project`` (6 frames, author "ana") with 3 synthetic people per frame."""
    import_coco(project, coco_file)
    return project


def send(project: Project, out: Path, frames: list[int] | None = None,
         images: str = "none") -> Path:
    """Export a packet of ``frames`` (default: the first two) for reviewer "bea" (the
    synthetic projects have no maps: blurred images are sent accepting the risk)."""
    chosen = [f for f in project.frames() if frames is None or f.id in frames]
    if frames is None:
        chosen = chosen[:2]
    export_packet(project, out, chosen, images=images, reviewer="bea", accept_risk=True)
    return out


def review(packet: Path, edit: Callable[[Project], None] | None = None,
           decisions: dict[int, str] | None = None, reviewer: str = "bea") -> Path:
    """Open ``packet`` as the reviewer, make ``edit``, record ``decisions`` and return it."""
    with open_packet(packet, reviewer=reviewer) as reviewed:
        if edit is not None:
            edit(reviewed)
        for frame_id, decision in (decisions or {}).items():
            set_decision(reviewed, frame_id, decision)
        return return_packet(reviewed)


def rewrite(src: Path, dst: Path, change: Callable[[str, bytes], bytes | None],
            extra: Sequence[tuple[zipfile.ZipInfo | str, bytes]] = ()) -> Path:
    """Copy a zip member by member through ``change(name, data)`` (None drops the member),
    then add ``extra`` members. Used to craft damaged and hostile packets."""
    with zipfile.ZipFile(src) as zin, zipfile.ZipFile(dst, "w", zipfile.ZIP_DEFLATED) as zout:
        for info in zin.infolist():
            data = change(info.filename, zin.read(info))
            if data is not None:
                zout.writestr(info, data)
        for info, data in extra:
            zout.writestr(info, data)
    return dst


def rewrite_json(src: Path, dst: Path, member: str, change: Callable[[Any], None]) -> Path:
    """Copy a packet with ``change`` applied to the parsed JSON ``member``, its SHA-256 in the
    manifest (and a return's ``base_sha256``) updated to match: a packet crafted by someone
    who knows the format, which only the checks of the content can refuse."""
    with zipfile.ZipFile(src) as z:
        manifest = json.loads(z.read(MANIFEST))
        data = manifest if member == MANIFEST else json.loads(z.read(member))
    change(data)
    raw = json.dumps(data).encode()
    if member != MANIFEST:
        digest = hashlib.sha256(raw).hexdigest()
        manifest["members"][member] = digest
        if member == LABELS and manifest.get("returned"):
            manifest["returned"]["base_sha256"] = digest
    replaced = {member: raw, MANIFEST: json.dumps(manifest).encode()}
    return rewrite(src, dst, lambda name, old: replaced.get(name, old))
