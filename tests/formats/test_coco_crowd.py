"""Ignore regions leave as COCO crowd annotations that pycocotools reads: checked with
pycocotools' COCO() loader, annToMask and mask.area against our own polygon (the polygons and
images are synthetic)."""

import json

import cv2
import numpy as np
import pytest
from pycocotools import mask as mask_utils
from pycocotools.coco import COCO

from app.analysis.targets import rasterize_regions
from app.jobs import export_coco, import_coco, new_project
from app.model import coco_body

W, H = 200, 150
#: A synthetic concave polygon and a rectangle on one frame.
POLYGONS = [[20.0, 30.0, 90.0, 25.0, 110.0, 80.0, 60.0, 55.0, 30.0, 100.0],
            [130.0, 20.0, 190.0, 20.0, 190.0, 70.0, 130.0, 70.0]]


def _dataset():
    person = np.zeros((17, 3))
    person[:, :2] = [150.0, 110.0]
    person[:, 2] = 2
    person[:, 0] += np.arange(17)
    return {
        "images": [{"id": 3, "file_name": "a.png", "width": W, "height": H}],
        "annotations": [
            {"id": 31, "image_id": 3, "category_id": 1, "iscrowd": 0, "num_keypoints": 17,
             "keypoints": [float(v) if i % 3 < 2 else int(v)
                           for i, v in enumerate(person.ravel())]},
            {"id": 32, "image_id": 3, "category_id": 1, "iscrowd": 1, "num_keypoints": 0,
             "segmentation": POLYGONS}],
        "categories": [coco_body().coco_category()],
    }


# pycocotools' mask.area calls numpy's __array__ without the copy keyword numpy 2 expects.
@pytest.mark.filterwarnings("ignore::DeprecationWarning")
def test_exported_crowd_annotations_load_in_pycocotools_and_match_our_polygons(tmp_path):
    """Source: pycocotools (COCO, COCO.annToMask, mask.area). Its mask of our exported crowd
    annotation agrees with our own rasterisation of the polygon except on pixels within a
    pixel and a half of the outline (the two tools round edge pixels differently), its area
    is within 2 % of the polygon area we export, and importing the export again gives the
    same region."""
    images = tmp_path / "images"
    images.mkdir()
    cv2.imwrite(str(images / "a.png"), np.zeros((H, W, 3), np.uint8))
    source = tmp_path / "in.json"
    source.write_text(json.dumps(_dataset()))
    with new_project(tmp_path / "p", images=images, author="ana") as p:
        import_coco(p, source)
        exported = tmp_path / "out.json"
        export_coco(p, exported, states=None)  # every state, untouched frames included
    coco = COCO(str(exported))
    crowd = [a for a in coco.loadAnns(coco.getAnnIds(imgIds=[3], iscrowd=None)) if a["iscrowd"]]
    assert len(crowd) == 1 and crowd[0]["segmentation"] == POLYGONS
    theirs = coco.annToMask(crowd[0]).astype(bool)
    ours = rasterize_regions(POLYGONS, (W, H), 1)
    assert theirs.shape == ours.shape == (H, W)
    inside = cv2.distanceTransform(ours.astype(np.uint8), cv2.DIST_L2, 3)
    outside = cv2.distanceTransform((~ours).astype(np.uint8), cv2.DIST_L2, 3)
    disagree = theirs != ours
    assert disagree.sum() < 0.05 * ours.sum()
    assert np.all(np.minimum(inside, outside)[disagree] <= 1.5)
    area = float(mask_utils.area(coco.annToRLE(crowd[0])))
    assert abs(area - crowd[0]["area"]) <= 0.02 * crowd[0]["area"]
    with new_project(tmp_path / "q", images=images, author="ana") as q:
        import_coco(q, exported)
        assert [polys for _, polys, _ in q.regions(3)] == [POLYGONS]
