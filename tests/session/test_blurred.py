"""What the reviewer's window shows of a packet's blur: the regions the manifest records, read
back from a review project, with the sources that placed each.

The people are synthetic (two invented people in a row, one with only shoulders labelled);
the record is the one app/review/packet.py writes. The wording is our own.
"""

from __future__ import annotations

import numpy as np

from app.model.skeleton import coco_body
from app.review.blur import place_regions
from app.review.packet import _blur_record
from app.session.blurred import BlurredFrame, load_blurred

SK = coco_body()


def _person(x: float, face: bool = True) -> np.ndarray:
    kp = np.zeros((17, 3))
    if face:
        kp[[0, 1, 2]] = [[x, 80, 2], [x + 5, 75, 2], [x - 5, 75, 2]]
    kp[[5, 6]] = [[x + 26, 120, 2], [x - 26, 120, 2]]
    return kp


def _record():
    peaks = [np.zeros((0, 3)) for _ in range(17)]
    peaks[0] = np.array([[500.0, 90.0, 0.8]])          # a nose no label owns
    plan = place_regions([_person(100), _person(300, face=False)], SK, (640, 360),
                         ids=[11, 12], peaks=peaks)
    return plan, _blur_record(plan)


def test_the_record_reads_back_as_the_regions_that_were_blurred():
    plan, record = _record()
    shown = BlurredFrame.from_record(record)
    assert len(shown.regions) == len(plan.regions) == 3
    for region, placed in zip(shown.regions, plan.regions):
        assert np.allclose(region.ellipses, placed.ellipses, atol=0.05)
        assert set(region.sources) == placed.sources
        assert set(region.people) == placed.people
    assert [r.caption() for r in shown.regions] == ["labels", "labels", "maps"]
    assert [r.beyond_labels for r in shown.regions] == [False, False, True]
    assert shown.placed_by() == {"labels": 2, "maps": 1, "detector": 0}
    assert shown.line().startswith("blurred in the packet: 3 regions (2 placed by the "
                                   "labels, 1 by the maps), ")
    assert shown.risk is None and shown.sources == ("labels", "maps")


def test_a_region_that_does_not_read_is_left_out_not_drawn_wrong():
    _, record = _record()
    record["regions"][0]["ellipses"] = [[1.0, 2.0, "wide", 4.0]]
    record["regions"][1]["box"] = None
    shown = BlurredFrame.from_record(record)
    assert [r.caption() for r in shown.regions] == ["maps"]
    one = BlurredFrame.from_record({**record, "regions": record["regions"][2:],
                                    "risk": "1 person may be unblurred: no maps"})
    assert one.line().endswith("; the sender was warned: 1 person may be unblurred: no maps")
    assert "1 region (1 placed by the maps)" in one.line()


def test_a_project_that_is_no_review_has_no_blur_to_show(project):
    assert load_blurred(project, 1) is None
