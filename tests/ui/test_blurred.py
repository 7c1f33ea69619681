"""The outlines of a packet's blurred regions: built once per frame's blur, in image pixels,
and only mapped to the screen on each paint (app/ui/blurred.py). The regions are synthetic."""

from __future__ import annotations

import pytest
from PySide6.QtCore import QPointF

from app.session.blurred import BlurredFrame, BlurredRegion
from app.ui.blurred import _outlines, _transform

FRAME = BlurredFrame((
    BlurredRegion(((100.0, 50.0, 20.0, 30.0), (120.0, 50.0, 20.0, 30.0)), (),
                  (80.0, 20.0, 140.0, 80.0), ("labels", "maps")),
    BlurredRegion((), (((10.0, 10.0), (40.0, 10.0), (40.0, 60.0)),),
                  (10.0, 10.0, 40.0, 60.0), ("detector",)),
), ("labels", "maps", "detector"), 0.05, None)


def test_a_frames_outlines_are_built_once_and_mapped_to_each_zoom():
    outlines = _outlines(FRAME)
    assert _outlines(FRAME) is outlines  # the same frame's blur: nothing rebuilt
    for scale, dx, dy in ((1.0, 0.0, 0.0), (0.25, 30.0, -7.0), (3.0, -50.0, 12.0)):
        transform = _transform(lambda x, y, s=scale, a=dx, b=dy: QPointF(s * x + a, s * y + b))
        for region, outline in zip(FRAME.regions, outlines, strict=True):
            box = transform.map(outline).boundingRect()
            x0, y0, x1, y1 = region.box
            assert (box.left(), box.top(), box.right(), box.bottom()) == pytest.approx(
                (scale * x0 + dx, scale * y0 + dy, scale * x1 + dx, scale * y1 + dy), abs=0.01)
