"""The demo generator's files: formats, determinism, crowd, and visibility from the render."""

from __future__ import annotations

import dataclasses
import json
from itertools import pairwise
from pathlib import Path

import cv2
import numpy as np
import pytest
from pycocotools.coco import COCO

from app.demo import DEFAULT_SEED, generate
from app.demo.camera import Camera
from app.demo.poses import NUM_BODY_JOINTS
from app.demo.render import hall, render
from app.demo.scene import label_frame, make_scene, poses_at, render_frame
from app.formats.maps import read_maps
from app.model.skeleton import coco_body

from .conftest import SESSION_FRAMES


def _box_iou(a: list[float], b: list[float]) -> float:
    ax, ay, aw, ah = a
    bx, by, bw, bh = b
    iw = max(0.0, min(ax + aw, bx + bw) - max(ax, bx))
    ih = max(0.0, min(ay + ah, by + bh) - max(ay, by))
    inter = iw * ih
    return inter / (aw * ah + bw * bh - inter)


def _per_image(truth: dict) -> dict[int, list[dict]]:
    out: dict[int, list[dict]] = {im["id"]: [] for im in truth["images"]}
    for ann in truth["annotations"]:
        out[ann["image_id"]].append(ann)
    return out


def test_files_are_written_with_the_promised_names(demo_dir: Path) -> None:
    """Frames, maps, truth and sources exist with sorted names in frame order (common
    practice, no source)."""
    images = sorted(p.name for p in (demo_dir / "images").iterdir())
    maps = sorted(p.name for p in (demo_dir / "maps").iterdir())
    assert images == [f"rehearsal_{i:04d}.jpg" for i in range(1, SESSION_FRAMES + 1)]
    assert maps == [f"rehearsal_{i:04d}.npz" for i in range(1, SESSION_FRAMES + 1)]
    sources = json.loads((demo_dir / "project-sources.json").read_text())
    assert sources["format"] == "posewright-project-sources"
    assert sources["version"] == 1
    assert (sources["images"], sources["maps"], sources["truth"]) == ("images", "maps",
                                                                      "truth.json")
    assert sources["skeleton"] == coco_body().to_dict()
    assert sources["seed"] == DEFAULT_SEED
    assert "synthetic" in sources["name"].lower()


def test_frames_are_1280_by_720_jpegs(demo_dir: Path) -> None:
    """OpenCV decodes every frame at 1280 x 720, three channels (external: OpenCV's decoder)."""
    for path in sorted((demo_dir / "images").iterdir()):
        image = cv2.imread(str(path), cv2.IMREAD_UNCHANGED)
        assert image is not None and image.shape == (720, 1280, 3)


def test_truth_is_a_coco_keypoints_dataset(demo_dir: Path) -> None:
    """pycocotools' COCO() indexes truth.json (external check: pycocotools)."""
    coco = COCO(str(demo_dir / "truth.json"))
    images = coco.loadImgs(coco.getImgIds())
    assert [im["id"] for im in images] == list(range(1, SESSION_FRAMES + 1))
    assert [im["file_name"] for im in images] == sorted(im["file_name"] for im in images)
    assert all((im["width"], im["height"]) == (1280, 720) for im in images)
    assert coco.loadCats(1)[0] == coco_body().coco_category()
    anns = coco.loadAnns(coco.getAnnIds())
    assert len({a["id"] for a in anns}) == len(anns)
    for ann in anns:
        kp = np.asarray(ann["keypoints"], dtype=float).reshape(NUM_BODY_JOINTS, 3)
        assert set(np.unique(kp[:, 2])) <= {0.0, 1.0, 2.0}
        assert ann["num_keypoints"] == int((kp[:, 2] > 0).sum())
        assert (kp[kp[:, 2] == 0, :2] == 0).all()
        w, h = ann["bbox"][2:]
        assert w > 0 and h > 0 and 0 < ann["area"] <= w * h
        assert ann["category_id"] == 1 and ann["iscrowd"] == 0
        assert isinstance(ann["track_id"], int)


def test_maps_have_the_documented_format(demo_dir: Path) -> None:
    """Each npz loads without pickles and passes the project's own map reader; values look
    like a network's (peaks up to about 1, fields unit-ish). Common practice, no source."""
    skeleton = coco_body()
    for path in sorted((demo_dir / "maps").iterdir()):
        with np.load(path, allow_pickle=False) as npz:
            assert sorted(npz.files) == ["confidence_maps", "pafs", "stride"]
            conf, pafs, stride = npz["confidence_maps"], npz["pafs"], int(npz["stride"])
        assert stride == 8
        assert conf.shape == (17, 90, 160) and conf.dtype == np.float16
        assert pafs.shape == (19, 2, 90, 160) and pafs.dtype == np.float16
        assert conf.min() >= 0.0 and 0.5 <= conf.max() <= 1.0
        assert 0.5 <= np.abs(pafs).max() <= 1.3
        # Mostly empty: the network answers near people only.
        assert (conf > 0).mean() < 0.35
        read_maps(path, skeleton, (1280, 720))


def test_same_seed_gives_the_same_bytes(demo_dir: Path, tmp_path: Path) -> None:
    """A second run with the same seed writes identical frames, maps and labels; another seed
    does not (common practice, no source)."""
    generate(tmp_path / "again", seed=DEFAULT_SEED, frames=2)
    for sub in ("images", "maps"):
        for name in ("rehearsal_0001", "rehearsal_0002"):
            ext = ".jpg" if sub == "images" else ".npz"
            a = (demo_dir / sub / f"{name}{ext}").read_bytes()
            b = (tmp_path / "again" / sub / f"{name}{ext}").read_bytes()
            assert a == b, f"{sub}/{name}{ext} differs between runs"
    first = json.loads((demo_dir / "truth.json").read_text())
    again = json.loads((tmp_path / "again" / "truth.json").read_text())
    keep = [a for a in first["annotations"] if a["image_id"] <= 2]
    assert again["annotations"] == keep

    generate(tmp_path / "other", seed=DEFAULT_SEED + 1, frames=1)
    other = json.loads((tmp_path / "other" / "truth.json").read_text())
    assert other["annotations"][0]["keypoints"] != first["annotations"][0]["keypoints"]


def test_shipped_demo_is_a_crowd(shipped: Path) -> None:
    """The shipped demo has a whole phrase of frames with 8 to 16 dancers each, and dancers
    really overlap: in at least half the frames some pair of boxes has IoU above 0.3
    (box IoU as in the COCO detection evaluation; thresholds are our own brief)."""
    truth = json.loads((shipped / "truth.json").read_text())
    per_image = _per_image(truth)
    assert len(per_image) >= 24
    crowded = 0
    for anns in per_image.values():
        assert 8 <= len(anns) <= 16
        ious = [_box_iou(a["bbox"], b["bbox"]) for i, a in enumerate(anns) for b in anns[i + 1:]]
        crowded += max(ious) > 0.3
        assert len({a["track_id"] for a in anns}) == len(anns)
    assert crowded >= len(per_image) / 2


def test_shipped_demo_matches_the_generator(shipped: Path, demo_dir: Path) -> None:
    """demo_project/ is what generate() writes for its seed: the first frames' labels, maps
    and pictures agree with the session's. Within a hair rather than byte for byte, so that a
    machine with other floating-point or JPEG code paths still passes (common practice, no
    source)."""
    sources = json.loads((shipped / "project-sources.json").read_text())
    assert sources["seed"] == DEFAULT_SEED
    ours = json.loads((demo_dir / "truth.json").read_text())["annotations"]
    theirs = json.loads((shipped / "truth.json").read_text())["annotations"][: len(ours)]
    assert [a["track_id"] for a in theirs] == [a["track_id"] for a in ours]
    a = np.array([x["keypoints"] for x in ours], float).reshape(-1, 17, 3)
    b = np.array([x["keypoints"] for x in theirs], float).reshape(-1, 17, 3)
    np.testing.assert_allclose(a[..., :2], b[..., :2], atol=0.05)
    assert (a[..., 2] == b[..., 2]).mean() > 0.99
    for i in range(1, SESSION_FRAMES + 1):
        name = f"rehearsal_{i:04d}"
        with np.load(shipped / "maps" / f"{name}.npz", allow_pickle=False) as x, \
                np.load(demo_dir / "maps" / f"{name}.npz", allow_pickle=False) as y:
            for key in ("confidence_maps", "pafs"):
                diff = np.abs(x[key].astype(np.float32) - y[key].astype(np.float32))
                assert (diff > 0.02).mean() < 1e-3
        pic_a = cv2.imread(str(shipped / "images" / f"{name}.jpg")).astype(float)
        pic_b = cv2.imread(str(demo_dir / "images" / f"{name}.jpg")).astype(float)
        assert np.abs(pic_a - pic_b).mean() < 1.0


@pytest.fixture(scope="module")
def frame0() -> tuple:
    scene = make_scene(DEFAULT_SEED)
    background = hall(scene.camera)
    rendered, poses = render_frame(scene, 0, background)
    return scene, background, rendered, poses, label_frame(scene, poses, rendered)


def test_occluded_joints_lie_under_something_nearer(frame0: tuple) -> None:
    """Every v=1 joint's pixel shows another figure nearer than the joint, or a part of the
    same figure in front of it; every v=2 joint's pixel shows its own figure or the hall.
    Common practice for COCO visibility ("labelled but not visible"), no source."""
    _, _, rendered, _, truth = frame0
    by_other = 0
    for row, track in enumerate(truth.track_ids):
        me = int(track) - 1
        for j in range(NUM_BODY_JOINTS):
            x, y, v = truth.keypoints[row, j]
            if v == 0:
                continue
            owner = int(rendered.owner[round(y), round(x)])
            depth = float(rendered.depth[round(y), round(x)])
            if v == 2:
                assert owner in (me, -1)
            else:
                assert owner != -1
                assert depth < truth.depth[row, j] + 0.05
                by_other += owner != me
    # A crowd: many joints are hidden by other dancers, not only by the dancer's own body.
    assert by_other >= 20


def test_removing_the_occluder_reveals_the_joint(frame0: tuple) -> None:
    """Rendering again without the figure that covers a v=1 joint shows the dancer there: the
    cover really was that other figure (common practice, no source)."""
    scene, background, rendered, poses, truth = frame0
    revealed = tried = 0
    for row, track in enumerate(truth.track_ids):
        me = int(track) - 1
        for j in (0, 5, 6, 9, 10, 13, 14):
            x, y, v = truth.keypoints[row, j]
            cover = int(rendered.owner[round(y), round(x)])
            if v != 1 or cover in (me, -1):
                continue
            keep = [k for k in range(len(poses)) if k != cover]
            again = render(scene.camera, [poses[k] for k in keep],
                           [scene.costumes[k] for k in keep], background)
            shown = int(again.owner[round(y), round(x)])
            tried += 1
            revealed += shown >= 0 and keep[shown] == me
            break
        if tried == 4:
            break
    # A joint may hide behind two dancers at once; most are behind one.
    assert tried == 4 and revealed >= 3


def test_joints_outside_the_picture_are_unlabelled(frame0: tuple) -> None:
    """With the camera turned away from part of the ring, joints that project outside the
    picture get v=0 and x=y=0 (COCO keypoint convention), the others keep v>0."""
    scene, _, _, poses, _ = frame0
    turned = Camera.looking_at((0.7, -5.3, 2.25), (2.2, 0.25, 0.9), focal=1000.0,
                               size=(1280, 720))
    moved = dataclasses.replace(scene, camera=turned)
    background = hall(turned)
    rendered = render(turned, poses, list(scene.costumes), background)
    truth = label_frame(moved, poses, rendered)
    outside = 0
    for row, track in enumerate(truth.track_ids):
        uv = turned.project(poses[int(track) - 1].points[:NUM_BODY_JOINTS])
        out = (uv[:, 0] < -0.5) | (uv[:, 0] >= 1279.5) | (uv[:, 1] < -0.5) | (uv[:, 1] >= 719.5)
        kp = truth.keypoints[row]
        assert (kp[out, 2] == 0).all() and (kp[out, :2] == 0).all()
        assert (kp[~out, 2] > 0).all()
        outside += int(out.sum())
    assert outside > 0


def test_box_and_area_are_the_visible_pixels(frame0: tuple) -> None:
    """bbox is the tight box of the figure's visible pixels and area their count; visible
    joints lie inside the box (COCO: box and area of the visible segment)."""
    _, _, rendered, _, truth = frame0
    for row, track in enumerate(truth.track_ids):
        mask = rendered.owner == int(track) - 1
        ys, xs = np.nonzero(mask)
        assert truth.area[row] == mask.sum()
        x, y, w, h = truth.bbox[row]
        assert (x, y, x + w - 1, y + h - 1) == (xs.min(), ys.min(), xs.max(), ys.max())
        kp = truth.keypoints[row]
        seen = kp[kp[:, 2] == 2]
        assert ((seen[:, 0] > x - 1) & (seen[:, 0] < x + w) & (seen[:, 1] > y - 1)
                & (seen[:, 1] < y + h)).all()


def test_track_id_names_the_same_dancer_in_every_frame(shipped: Path) -> None:
    """truth.json's track_id is the dancer: in every frame each labelled joint is where the
    scene's dancer of that id projects (OpenCV's pinhole projection, cv2.projectPoints), and
    from one frame to the next each dancer's joints lie closer to their own previous place
    than to any other dancer's (common practice for track ids, no source)."""
    truth = json.loads((shipped / "truth.json").read_text())
    scene = make_scene(json.loads((shipped / "project-sources.json").read_text())["seed"])
    cam = scene.camera
    k = np.array([[cam.focal, 0, cam.principal_point[0]], [0, cam.focal, cam.principal_point[1]],
                  [0, 0, 1]])
    rvec, _ = cv2.Rodrigues(cam.rotation)
    tvec = -cam.rotation @ cam.centre
    frames: list[dict[int, np.ndarray]] = []
    for image_id, anns in sorted(_per_image(truth).items()):
        poses = poses_at(scene, image_id - 1)
        people = {}
        for ann in anns:
            kp = np.reshape(ann["keypoints"], (NUM_BODY_JOINTS, 3))
            body = poses[ann["track_id"] - 1].points[:NUM_BODY_JOINTS]
            uv, _ = cv2.projectPoints(body, rvec, tvec, k, None)
            seen = kp[:, 2] > 0
            np.testing.assert_allclose(kp[seen, :2], uv.reshape(-1, 2)[seen], atol=0.01)
            people[ann["track_id"]] = kp
        frames.append(people)
    for before, after in pairwise(frames):
        for track, kp in after.items():
            if track not in before:
                continue

            def gap(other: np.ndarray, kp: np.ndarray = kp) -> float:
                both = (other[:, 2] > 0) & (kp[:, 2] > 0)
                return float(np.hypot(*(other[both, :2] - kp[both, :2]).T).mean()
                             if both.any() else np.inf)

            nearest = min(before, key=lambda t: gap(before[t]))
            assert nearest == track
