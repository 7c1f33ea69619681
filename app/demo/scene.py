"""The rehearsal: who dances where, the camera, and the true labels of every frame.

A community folk-dance group rehearses in a hall on an evening: eleven dancers in an outer ring
with raised joined hands travel to their right with the six-count phrase of
:mod:`app.demo.poses`; four dancers in an inner ring, hands on each other's shoulders, travel
the other way. A camera on a tripod at the side of the hall, a little above head height, sees
the near side of the rings from behind, the far side from the front and the rest side-on, so
rows of dancers stand one behind another and neighbours' arms cross.

True labels come from the render: a joint is occluded (``v = 1``) when the pixel it projects to
shows another figure (or a prop of the room, such as a riser) nearer than the joint, or a part
of the same figure clearly in front of it (the far arm behind the chest, the back of the head
over the face, a folder the figure holds); ``v = 0`` when it falls outside the picture.
"""

from __future__ import annotations

import json
import logging
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import cv2
import numpy as np

from app.demo.camera import Camera
from app.demo.choir import DESCRIPTION as CHOIR_DESCRIPTION
from app.demo.choir import NAME as CHOIR_NAME
from app.demo.choir import ChoirNetwork, make_choir, render_choir
from app.demo.choir import perceive as perceive_choir
from app.demo.maps import ErrorRuns, draw, perceive, save_maps
from app.demo.poses import (
    COUNTS_PER_PHRASE,
    NUM_BODY_JOINTS,
    BodyPose,
    DancerBody,
    Ring,
    core_pose,
    facing_camera,
    hold,
)
from app.demo.render import Costume, Rendered, hall, random_costume, render
from app.model.skeleton import coco_body
from app.progress import Progress

log = logging.getLogger(__name__)

IMAGE_SIZE = (1280, 720)
#: Frames per count of the music (a phrase of six counts spans 24 frames).
FRAMES_PER_COUNT = 4

# How far in front of a joint (in units of the dancer's stature) a surface of the same figure
# must lie to hide it: deeper for joints buried inside the trunk. Our choice.
_SELF_MARGIN = np.array([
    0.03, 0.03, 0.03, 0.03, 0.03,
    0.085, 0.085, 0.04, 0.04, 0.035, 0.035,
    0.10, 0.10, 0.06, 0.06, 0.04, 0.04,
])


@dataclass(frozen=True)
class Scene:
    """Everything fixed for the whole sequence.

    Attributes
    ----------
    camera
        The tripod camera.
    rings
        The dancers' rings.
    bodies, costumes
        One per dancer; dancer ``i`` has track id ``i + 1``.
    start
        The count at the first frame.
    """

    camera: Camera
    rings: tuple[Ring, ...]
    bodies: tuple[DancerBody, ...]
    costumes: tuple[Costume, ...]
    start: float

    @property
    def track_ids(self) -> np.ndarray:
        return np.arange(1, len(self.bodies) + 1)


@dataclass
class FrameTruth:
    """The true labels of one frame, for the dancers that show in it.

    Attributes
    ----------
    track_ids
        ``(N,)`` which dancer each row is.
    keypoints
        ``(N, 17, 3)`` x, y, v in image pixels (COCO visibility; ``x = y = 0`` where ``v = 0``).
    depth
        ``(N, 17)`` camera depth of each joint, metres.
    occlusion
        ``(N, 17)`` in [0, 1]: the share of a small disc round the joint covered by something
        in front of it (other figures or the dancer's own nearer parts).
    area
        ``(N,)`` the number of pixels that show the figure.
    bbox
        ``(N, 4)`` first column, first row, columns and rows spanned by those pixels.
    height
        ``(N,)`` the dancer's projected stature in pixels (head top to floor at the pelvis).
    facing
        ``(N,)`` cosine between the chest's direction and the direction to the camera.
    """

    track_ids: np.ndarray
    keypoints: np.ndarray
    depth: np.ndarray
    occlusion: np.ndarray
    area: np.ndarray
    bbox: np.ndarray
    height: np.ndarray
    facing: np.ndarray


def make_scene(seed: int) -> Scene:
    """Cast the dancers, dress them and set up the camera, all drawn from ``seed``.

    Examples
    --------
    >>> scene = make_scene(7)
    >>> len(scene.bodies), scene.camera.size
    (15, (1280, 720))
    """
    rng = np.random.default_rng(np.random.SeedSequence([seed, 1]))
    rings = (
        Ring((0.0, 0.0), 1.75, float(rng.uniform(0, 2 * np.pi)), 1, "raised", 11),
        Ring((0.05, 0.1), 0.62, float(rng.uniform(0, 2 * np.pi)), -1, "shoulders", 4),
    )
    bodies, costumes = [], []
    for r, ring in enumerate(rings):
        first = int(rng.integers(2))
        for slot in range(ring.size):
            # The outer ring mostly alternates skirts and trousers, as many such dances do.
            if r == 0:
                dress = "skirt" if (slot + first) % 2 == 0 or rng.random() < 0.2 else "trousers"
            else:
                dress = "skirt" if rng.random() < 0.5 else "trousers"
            tall = 1.64 if dress == "skirt" else 1.76
            bodies.append(DancerBody(
                stature=float(np.clip(rng.normal(tall, 0.06), 1.52, 1.92)),
                girth=float(rng.uniform(0.92, 1.12)),
                ring=r,
                slot=slot,
                phase=float(rng.normal(0.0, 0.06)),
                lift=float(rng.uniform(0.75, 1.2)),
                look=float(rng.normal(0.0, 0.3)),
                hold_height=float(rng.uniform(-0.01, 0.03)),
            ))
            costumes.append(random_costume(rng, dress))
    camera = Camera.looking_at((0.7, -5.3, 2.25), (0.0, 0.25, 0.72), focal=1000.0,
                               size=IMAGE_SIZE)
    return Scene(camera, rings, tuple(bodies), tuple(costumes),
                 start=float(rng.uniform(0, COUNTS_PER_PHRASE)))


def poses_at(scene: Scene, frame: int) -> list[BodyPose]:
    """Every dancer's body at frame ``frame`` (0-based), hands joined."""
    count = scene.start + frame / FRAMES_PER_COUNT
    rings = list(scene.rings)
    poses = [core_pose(b, rings[b.ring], count) for b in scene.bodies]
    hold(poses, list(scene.bodies), rings, count)
    return poses


def render_frame(scene: Scene, frame: int, background: np.ndarray | None = None
                 ) -> tuple[Rendered, list[BodyPose]]:
    """Render frame ``frame`` (0-based); ``background`` is :func:`hall` of the scene's camera,
    computed here when not given."""
    if background is None:
        background = hall(scene.camera)
    poses = poses_at(scene, frame)
    return render(scene.camera, poses, list(scene.costumes), background), poses


def label_frame(scene: Any, poses: list[BodyPose], rendered: Rendered) -> FrameTruth:
    """The true labels of a rendered frame (see the module docstring for visibility).

    ``scene`` is anything with the ``camera`` that rendered it (a :class:`Scene`, a
    :class:`app.demo.choir.ChoirScene`).

    Dancers with no pixel in the picture are left out.
    """
    cam = scene.camera
    w, h = cam.size
    owner, zbuf = rendered.owner, rendered.depth
    rows = []
    for i, pose in enumerate(poses):
        mask = owner == i
        area = int(mask.sum())
        if area == 0:
            continue
        joints = pose.points[:NUM_BODY_JOINTS]
        uv = cam.project(joints)
        z = cam.to_camera(joints)[:, 2]
        inside = (uv[:, 0] > -0.5) & (uv[:, 0] < w - 0.5) & (uv[:, 1] > -0.5) & (
            uv[:, 1] < h - 0.5)
        margin = _SELF_MARGIN * pose.stature
        kp = np.zeros((NUM_BODY_JOINTS, 3))
        occ = np.zeros(NUM_BODY_JOINTS)
        height_px = cam.focal * pose.stature / max(
            float(cam.to_camera(pose.points[[17]])[0, 2]), 1e-3)
        radius = int(np.clip(round(0.025 * height_px), 2, 6))
        for j in np.flatnonzero(inside):
            c, r = round(float(uv[j, 0])), round(float(uv[j, 1]))
            o, d = int(owner[r, c]), float(zbuf[r, c])
            hidden = (o == i and d < z[j] - margin[j]) or (o != i and d < z[j] + 0.05)
            kp[j] = (uv[j, 0], uv[j, 1], 1 if hidden else 2)
            r0, r1 = max(r - radius, 0), min(r + radius + 1, h)
            c0, c1 = max(c - radius, 0), min(c + radius + 1, w)
            gy, gx = np.ogrid[r0:r1, c0:c1]
            disc = (gy - r) ** 2 + (gx - c) ** 2 <= radius**2
            win_o, win_z = owner[r0:r1, c0:c1], zbuf[r0:r1, c0:c1]
            cover = (((win_o != i) & (win_z < z[j] + 0.05))
                     | ((win_o == i) & (win_z < z[j] - margin[j])))
            occ[j] = float(cover[disc].mean())
        ys, xs = np.nonzero(mask)
        bbox = (int(xs.min()), int(ys.min()), int(xs.max() - xs.min() + 1),
                int(ys.max() - ys.min() + 1))
        rows.append((i + 1, kp, z, occ, area, bbox, height_px, facing_camera(pose, cam.centre)))
    return FrameTruth(
        track_ids=np.array([r[0] for r in rows], dtype=np.int64),
        keypoints=np.array([r[1] for r in rows]).reshape(-1, NUM_BODY_JOINTS, 3),
        depth=np.array([r[2] for r in rows]).reshape(-1, NUM_BODY_JOINTS),
        occlusion=np.array([r[3] for r in rows]).reshape(-1, NUM_BODY_JOINTS),
        area=np.array([r[4] for r in rows], dtype=np.int64),
        bbox=np.array([r[5] for r in rows], dtype=np.int64).reshape(-1, 4),
        height=np.array([r[6] for r in rows]),
        facing=np.array([r[7] for r in rows]),
    )


DEFAULT_SEED = 1966
#: JPEG quality of the frames: high enough to judge a wrist by eye, small enough that 24 frames
#: and their maps stay well under 15 MB.
JPEG_QUALITY = 90
STRIDE = 8
NAME = "Folk-dance rehearsal (synthetic)"
DESCRIPTION = (
    "A synthetic evening rehearsal of a community folk-dance group in a hall, rendered "
    "procedurally: an outer ring of dancers with raised joined hands and an inner ring with "
    "hands on each other's shoulders, travelling in opposite directions through one six-count "
    "phrase. truth.json holds the true poses (COCO keypoints; v=1 where another figure or the "
    "dancer's own body covers the joint in the picture; bbox and area are those of the "
    "figure's visible pixels; track_id names the dancer). maps/ holds simulated network output "
    "with a crowd's errors, for the grouping to make auto-labels from. Invented people and "
    "data only."
)


#: The scenarios :func:`generate` writes: the folk dance (the default) and the choir on
#: risers (:mod:`app.demo.choir`).
SCENES = ("dance", "choir")


def generate(out_dir: str | Path, seed: int = DEFAULT_SEED, frames: int = 24,
             stride: int = STRIDE, jpeg_quality: int = JPEG_QUALITY,
             progress: Progress | None = None, scene: str = "dance") -> Path:
    """Write a synthetic rehearsal: frames, true poses, simulated network maps.

    Parameters
    ----------
    out_dir
        Folder to write into (created if needed). Files this function writes are replaced;
        earlier ``rehearsal_*`` frames and maps in ``images/`` and ``maps/`` are removed first
        so a shorter run leaves no stale frames. Nothing else in the folder is touched.
    seed
        Everything (cast, costumes, the start of the phrase, the network's errors) is drawn
        from this seed; the same seed gives the same bytes.
    frames
        Number of consecutive frames (24 is one phrase of the dance; more continue it).
    stride
        Image pixels per map cell.
    jpeg_quality
        OpenCV JPEG quality of the frames.
    progress
        Told ``(done, total, "frames")`` after each frame; may cancel.
    scene
        ``"dance"``, the folk-dance rehearsal of this module, or ``"choir"``, the choir on
        stepped risers of :mod:`app.demo.choir` (its frames are 1/8 s apart, its ``track_id``
        1 is the conductor, and its maps carry the choir's errors as well as the dance's).

    Returns
    -------
    pathlib.Path
        The ``project-sources.json`` written, which names the rest:

        - ``images/rehearsal_0001.jpg`` ... 1280 x 720 JPEG frames, in frame order.
        - ``truth.json``: a COCO keypoints dataset. Images have ids 1..N in file-name order;
          annotations carry ``keypoints`` (x, y, v per joint in image pixels; ``v = 2``
          visible, ``v = 1`` covered by another figure or the dancer's own body, ``v = 0`` and
          ``x = y = 0`` outside the picture), ``num_keypoints``, ``bbox`` (first column, first
          row, columns and rows spanned by the figure's visible pixels), ``area`` (the number of
          those pixels), ``iscrowd`` 0 and ``track_id`` (the dancer). The category is
          ``coco_body().coco_category()``.
        - ``maps/rehearsal_0001.npz`` ...: ``confidence_maps`` ``(17, H, W)`` float16,
          ``pafs`` ``(19, 2, H, W)`` float16 and ``stride``; ``H = ceil(720 / stride)``,
          ``W = ceil(1280 / stride)``. Simulated network output (see :mod:`app.demo.maps`).
        - ``project-sources.json``: what a project is built from (format
          ``posewright-project-sources``, version 1).

    Examples
    --------
    >>> import tempfile
    >>> sources = generate(tempfile.mkdtemp(), frames=1)
    >>> sorted(p.name for p in sources.parent.iterdir())
    ['images', 'maps', 'project-sources.json', 'truth.json']
    """
    out = Path(out_dir)
    images_dir, maps_dir = out / "images", out / "maps"
    for folder, pattern in ((images_dir, "rehearsal_*.jpg"), (maps_dir, "rehearsal_*.npz")):
        folder.mkdir(parents=True, exist_ok=True)
        for stale in folder.glob(pattern):
            stale.unlink()
    if scene not in SCENES:
        raise ValueError(f"no demo scene {scene!r}; there are {', '.join(SCENES)}")
    skeleton = coco_body()
    choir = scene == "choir"
    cast: Any = make_choir(seed) if choir else make_scene(seed)
    background = hall(cast.camera)
    width, height = cast.camera.size
    images: list[dict[str, Any]] = []
    annotations: list[dict[str, Any]] = []
    # The network's errors last over frames while their cause does (see app.demo.maps).
    runs = ErrorRuns()
    network = ChoirNetwork()
    for f in range(frames):
        if choir:
            rendered, poses = render_choir(cast, f, background)
        else:
            rendered, poses = render_frame(cast, f, background)
        truth = label_frame(cast, poses, rendered)
        stem = f"rehearsal_{f + 1:04d}"
        cv2.imwrite(str(images_dir / f"{stem}.jpg"), rendered.image,
                    [cv2.IMWRITE_JPEG_QUALITY, int(jpeg_quality)])
        if choir:
            rng = np.random.default_rng(np.random.SeedSequence([seed, 12, f]))
            holders = np.array([cast.singers[t - 1].folder for t in truth.track_ids], bool)
            seen = perceive_choir(truth.keypoints, truth.occlusion, truth.height,
                                  truth.facing, skeleton, rng, truth.track_ids, holders,
                                  network)
        else:
            rng = np.random.default_rng(np.random.SeedSequence([seed, 2, f]))
            seen = perceive(truth.keypoints, truth.occlusion, truth.height, truth.facing,
                            skeleton, rng, truth.track_ids, runs)
        confidence, fields = draw(seen, skeleton, (width, height), stride, rng)
        save_maps(maps_dir / f"{stem}.npz", confidence, fields, stride)
        images.append({"id": f + 1, "file_name": f"{stem}.jpg", "width": width,
                       "height": height})
        for n in range(len(truth.track_ids)):
            kp = truth.keypoints[n]
            annotations.append({
                "id": len(annotations) + 1,
                "image_id": f + 1,
                "category_id": 1,
                "keypoints": [round(float(v), 2) if k % 3 < 2 else int(v)
                              for k, v in enumerate(kp.ravel())],
                "num_keypoints": int((kp[:, 2] > 0).sum()),
                "bbox": [int(v) for v in truth.bbox[n]],
                "area": int(truth.area[n]),
                "iscrowd": 0,
                "track_id": int(truth.track_ids[n]),
            })
        log.debug("frame %d: %d dancers", f + 1, len(truth.track_ids))
        if progress is not None:
            progress.step(f + 1, frames, "frames")
    name, description = (CHOIR_NAME, CHOIR_DESCRIPTION) if choir else (NAME, DESCRIPTION)
    dataset = {
        "info": {"description": name, "version": "1", "year": 2026,
                 "contributor": "posewright demo generator (synthetic)"},
        "images": images,
        "annotations": annotations,
        "categories": [skeleton.coco_category()],
    }
    (out / "truth.json").write_text(json.dumps(dataset, indent=1) + "\n", encoding="utf-8")
    sources = {
        "format": "posewright-project-sources",
        "version": 1,
        "name": name,
        "images": "images",
        "maps": "maps",
        "truth": "truth.json",
        "skeleton": skeleton.to_dict(),
        "seed": int(seed),
        "scene": scene,
        "description": description,
    }
    path = out / "project-sources.json"
    path.write_text(json.dumps(sources, indent=2) + "\n", encoding="utf-8")
    return path
