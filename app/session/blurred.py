"""Where a packet's image was blurred, as the reviewer's window shows it.

A blurred review packet records, per frame, each region it blurred and which sources placed it
(``labels``, ``maps``, ``detector``; see :mod:`app.review.packet` and :mod:`app.review.blur`).
The reviewer opens the packet as a small project (:mod:`app.review.review`), which keeps the
manifest; this module reads a frame's record from it and words it. No Qt here: the Canvas draws
:class:`BlurredFrame` with :func:`app.ui.blurred.paint_blurred`, and the window toggles it.

Examples
--------
>>> record = {"sources": ["labels", "maps"], "share": 0.082, "risk": None, "regions": [
...     {"sources": ["labels"], "people": [4], "box": [10, 10, 30, 40], "sigma": 4.0,
...      "ellipses": [[20, 25, 10, 15]], "polygons": []},
...     {"sources": ["maps"], "people": [], "box": [50, 10, 70, 40], "sigma": 4.0,
...      "ellipses": [[60, 25, 10, 15]], "polygons": []}]}
>>> shown = BlurredFrame.from_record(record)
>>> shown.line()
'blurred in the packet: 2 regions (1 placed by the labels, 1 by the maps), 8.2 % of the image'
>>> [r.caption() for r in shown.regions]
['labels', 'maps']
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

from app.review.blur import SOURCES
from app.store import Project
from app.wording import count

__all__ = ["BlurredFrame", "BlurredRegion", "load_blurred"]

#: How a caption and a sentence name each source.
SOURCE_WORDS = {"labels": "the labels", "maps": "the maps", "detector": "the face detector"}


def _numbers(values: Any, width: int) -> tuple[float, ...] | None:
    """``width`` finite floats from a record's list, or None."""
    if not isinstance(values, Sequence) or len(values) != width:
        return None
    try:
        out = tuple(float(v) for v in values)
    except (TypeError, ValueError):
        return None
    return out if all(math.isfinite(v) for v in out) else None


@dataclass(frozen=True)
class BlurredRegion:
    """One blurred region of a packet's image, in image pixels.

    ``ellipses``: ``(cx, cy, half_width, half_height)`` each; ``polygons``: ``(x, y)``
    corners each; ``box``: ``x0, y0, x1, y1`` around them; ``sources``: what placed it, in
    :data:`app.review.blur.SOURCES` order; ``people``: the ids of the labelled people whose
    labels placed a part of it.
    """

    ellipses: tuple[tuple[float, float, float, float], ...]
    polygons: tuple[tuple[tuple[float, float], ...], ...]
    box: tuple[float, float, float, float]
    sources: tuple[str, ...]
    people: tuple[int, ...] = ()

    def caption(self) -> str:
        """The sources that placed the region, as the Canvas writes them beside it.

        Examples
        --------
        >>> BlurredRegion((), (), (0, 0, 1, 1), ("labels", "detector")).caption()
        'labels + detector'
        """
        return " + ".join(self.sources)

    @property
    def beyond_labels(self) -> bool:
        """Whether the labels had no part in placing it: a head only the maps or the
        detector saw, where the labels may miss someone."""
        return "labels" not in self.sources


@dataclass(frozen=True)
class BlurredFrame:
    """A frame's blur as its packet records it: the regions, the sources there were to look
    with, the share of the image blurred and the risk the sender was warned of."""

    regions: tuple[BlurredRegion, ...]
    sources: tuple[str, ...]
    share: float
    risk: str | None

    @staticmethod
    def from_record(record: Mapping[str, Any]) -> BlurredFrame:
        """Read a manifest's ``blur`` record (already checked by
        :func:`app.review.packet.read_packet`); a region whose shapes do not read is left
        out rather than drawn wrong."""
        regions = []
        for value in record.get("regions") or ():
            if not isinstance(value, Mapping):
                continue
            box = _numbers(value.get("box"), 4)
            ellipses = [_numbers(e, 4) for e in value.get("ellipses") or ()]
            polygons = [tuple(_numbers(p, 2) for p in poly) for poly in value.get("polygons")
                        or ()]
            if box is None or any(e is None for e in ellipses) or any(
                    p is None for poly in polygons for p in poly):
                continue
            sources = tuple(s for s in SOURCES if s in (value.get("sources") or ()))
            people = tuple(int(p) for p in value.get("people") or () if isinstance(p, int))
            regions.append(BlurredRegion(
                tuple(e for e in ellipses if e is not None),
                tuple(tuple(p for p in poly if p is not None) for poly in polygons),
                box, sources, people))
        share = record.get("share")
        risk = record.get("risk")
        return BlurredFrame(
            tuple(regions), tuple(s for s in SOURCES if s in (record.get("sources") or ())),
            float(share) if isinstance(share, (int, float)) else 0.0,
            risk if isinstance(risk, str) else None)

    def placed_by(self) -> dict[str, int]:
        """How many regions each source had a part in placing.

        Examples
        --------
        >>> r = BlurredRegion((), (), (0, 0, 1, 1), ("labels", "maps"))
        >>> BlurredFrame((r, r), ("labels", "maps"), 0.1, None).placed_by()
        {'labels': 2, 'maps': 2, 'detector': 0}
        """
        return {s: sum(s in r.sources for r in self.regions) for s in SOURCES}

    def line(self) -> str:
        """One line for the status bar: ``blurred in the packet:`` and :meth:`summary`."""
        return f"blurred in the packet: {self.summary()}"

    def summary(self) -> str:
        """How many regions, placed by what, and how much of the image (``packet show``
        prints it per frame)."""
        placed = [(s, n) for s, n in self.placed_by().items() if n]
        by = ", ".join(f"{n} {'placed by ' if i == 0 else 'by '}{SOURCE_WORDS[s]}"
                       for i, (s, n) in enumerate(placed))
        text = count(len(self.regions), "region")
        if by:
            text += f" ({by})"
        text += f", {100 * self.share:.1f} % of the image"
        if self.risk:
            text += f"; the sender was warned: {self.risk}"
        return text


def load_blurred(project: Project, frame_id: int) -> BlurredFrame | None:
    """The blur of a frame of a review project, as its packet records it; None when the
    project is not a review, or the packet's images of the frame were not blurred."""
    from app.review.review import blur_record

    record = blur_record(project, frame_id)
    return None if record is None else BlurredFrame.from_record(record)
