"""Synthetic COCO-17 people for the analysis tests.

Everything here is invented (synthetic data): no pose comes from a data set. A person is built
from a standing body with random arm and leg angles. Segment lengths are fractions of stature
after the Drillis and Contini (1966) table as reproduced in Winter, "Biomechanics and Motor
Control of Human Movement" (from memory, rounded): upper arm 0.186, forearm 0.146, thigh 0.245,
shank 0.246, shoulder width 0.259, hip width 0.191, shoulder above hip 0.288, nose above the
shoulders about 0.11.
"""

from __future__ import annotations

import numpy as np

from app.model.labels import Person
from app.model.skeleton import coco_body

SKELETON = coco_body()
LIMBS = np.asarray(SKELETON.limbs, dtype=np.int64)
SIGMAS = SKELETON.sigma_array
K = SKELETON.num_joints


def person(
    rng: np.random.Generator, centre: tuple[float, float], stature: float
) -> np.ndarray:
    """One plausible person, ``(17, 3)`` x, y, v (all v = 2), hips centred on ``centre``."""
    facing = 1.0 if rng.random() < 0.7 else -1.0  # front view puts the left side on image right
    pts = np.zeros((K, 2))
    hip_c = np.zeros(2)
    lean = np.radians(rng.uniform(-8, 8))
    up = np.array([np.sin(lean), -np.cos(lean)])
    side = np.array([np.cos(lean), np.sin(lean)]) * facing
    shoulder_c = hip_c + 0.288 * up
    nose = shoulder_c + 0.11 * up + side * rng.uniform(-0.02, 0.02)
    turn = rng.uniform(-0.015, 0.015)
    pts[0] = nose
    for s, (eye, ear, sh, el, wr, hip, kn, an) in (
        (1.0, (1, 3, 5, 7, 9, 11, 13, 15)),
        (-1.0, (2, 4, 6, 8, 10, 12, 14, 16)),
    ):
        pts[eye] = nose + side * (s * 0.03 + turn) + up * 0.02
        pts[ear] = nose + side * (s * 0.065 + turn) + up * 0.005
        pts[sh] = shoulder_c + side * (s * 0.1295)
        pts[hip] = hip_c + side * (s * 0.0955)
        raise_ = np.radians(rng.uniform(-20, 110))
        bend = np.radians(rng.uniform(0, 100))
        d1 = -np.cos(raise_) * up + s * np.sin(raise_) * side
        pts[el] = pts[sh] + 0.186 * d1
        a2 = raise_ + bend * (1 if rng.random() < 0.5 else -1)
        d2 = -np.cos(a2) * up + s * np.sin(a2) * side
        pts[wr] = pts[el] + 0.146 * d2
        splay = np.radians(rng.uniform(-5, 25))
        d3 = -np.cos(splay) * up + s * np.sin(splay) * side
        pts[kn] = pts[hip] + 0.245 * d3
        knee = splay - np.radians(rng.uniform(0, 25))
        d4 = -np.cos(knee) * up + s * np.sin(knee) * side
        pts[an] = pts[kn] + 0.246 * d4
    out = np.empty((K, 3))
    out[:, :2] = np.asarray(centre) + stature * pts
    out[:, 2] = 2.0
    return out


def crowd(
    rng: np.random.Generator,
    n: int,
    image_size: tuple[int, int],
    stature: tuple[float, float],
    min_gap: float = 0.0,
    margin: float = 0.0,
) -> np.ndarray:
    """``n`` random people wholly inside the image, ``(n, 17, 3)``.

    ``min_gap`` is the least distance between two hip centres, in units of the larger stature;
    ``margin`` keeps every joint that many pixels inside the image.
    """
    width, height = image_size
    people: list[np.ndarray] = []
    centres: list[np.ndarray] = []
    tries = 0
    while len(people) < n:
        tries += 1
        if tries > 100_000:
            raise RuntimeError("cannot place that many people; lower min_gap")
        size = rng.uniform(*stature)
        c = np.array([rng.uniform(0, width), rng.uniform(0, height)])
        if any(np.hypot(*(c - o)) < min_gap * stature[1] for o in centres):
            continue
        body = person(rng, (c[0], c[1]), size)
        lo, hi = body[:, :2].min(axis=0), body[:, :2].max(axis=0)
        if (lo < margin).any() or hi[0] > width - 1 - margin or hi[1] > height - 1 - margin:
            continue
        centres.append(c)
        people.append(body)
    return np.stack(people) if people else np.zeros((0, K, 3))


def hide(
    rng: np.random.Generator, people: np.ndarray, p_unlabelled: float, p_occluded: float = 0.2
) -> np.ndarray:
    """A copy with joints randomly made unlabeled (v = 0, half of them NaN) or occluded (v = 1)."""
    out = people.copy()
    draw = rng.random(out.shape[:2])
    occluded = draw < p_occluded
    out[..., 2][occluded] = 1
    gone = rng.random(out.shape[:2]) < p_unlabelled
    out[..., 2][gone] = 0
    wipe = gone & (rng.random(out.shape[:2]) < 0.5)
    out[..., 0][wipe] = np.nan
    out[..., 1][wipe] = np.nan
    return out


#: Joints whose loss leaves the rest of a COCO body connected by limbs: wrists and ankles.
ENDS = (9, 10, 15, 16)


def hide_ends(rng: np.random.Generator, people: np.ndarray, p_unlabelled: float) -> np.ndarray:
    """A copy with wrists and ankles randomly unlabeled (v = 0, NaN) and 20% of joints v = 1.

    Grouping by part affinity fields can only join parts that a chain of labelled limbs
    connects; hiding only limb ends keeps every person in one piece.
    """
    out = people.copy()
    out[..., 2][rng.random(out.shape[:2]) < 0.2] = 1
    gone = np.zeros(out.shape[:2], dtype=bool)
    gone[:, ENDS] = rng.random((out.shape[0], len(ENDS))) < p_unlabelled
    out[gone] = (np.nan, np.nan, 0)
    return out


def walkers(
    rng: np.random.Generator,
    n: int,
    frames: int,
    image_size: tuple[int, int],
    stature: tuple[float, float] = (200.0, 320.0),
    speed: float = 0.03,
    jitter: float = 0.004,
) -> tuple[list[np.ndarray], list[np.ndarray]]:
    """``n`` people walking across the image for ``frames`` frames, and who is who.

    Each person keeps one body from :func:`person`, starts anywhere in the image with a heading
    at random and a speed of about ``speed`` statures per frame, turns a little every frame and
    bounces off the image's edges; every joint jitters by ``jitter`` statures (normal, per
    axis). People pass in front of each other freely, so paths cross. Returns per frame the
    ``(n, 17, 3)`` people in a shuffled order and the ``(n,)`` identity (0 to ``n - 1``) of
    each row.
    """
    width, height = image_size
    size = rng.uniform(*stature, n)
    bodies = np.stack([person(rng, (0.0, 0.0), s) for s in size])
    pos = np.column_stack([rng.uniform(0, width, n), rng.uniform(0, height, n)])
    heading = rng.uniform(0, 2 * np.pi, n)
    pace = speed * size * rng.uniform(0.6, 1.4, n)
    people, identities = [], []
    for _ in range(frames):
        heading += rng.normal(0, 0.08, n)
        step = pace[:, None] * np.column_stack([np.cos(heading), np.sin(heading)])
        pos += step
        # Bounce: mirror the heading about the edge that was crossed.
        out_x = (pos[:, 0] < 0) | (pos[:, 0] > width)
        out_y = (pos[:, 1] < 0) | (pos[:, 1] > height)
        heading = np.where(out_x, np.pi - heading, heading)
        heading = np.where(out_y, -heading, heading)
        pos = np.clip(pos, 0, [width, height])
        frame = bodies.copy()
        wobble = rng.normal(0, 1, (n, K, 2)) * (jitter * size)[:, None, None]
        frame[..., :2] += pos[:, None, :] + wobble
        order = rng.permutation(n)
        people.append(frame[order])
        identities.append(order)
    return people, identities


def store_duplicate_and_split(project, lone_frames: int | None = 1) -> dict:
    """Store synthetic people that triage finds fault with, in the project's first frames.

    Frame 1: a body and a faint copy of it (shifted 6, 5 px, legs unlabelled, score 0.5);
    frame 2: a body labelled as two people, its upper and its lower half; the next
    ``lone_frames`` frames (None: all the rest): one body each. Returns the first person id
    (``"ids"``, in that order), the doubled ``"body"`` and the split ``"whole"``.
    """
    rng = np.random.default_rng(5)
    frames = project.frames()
    body = person(rng, (110.0, 120.0), 120.0)
    copy = body.copy()
    copy[:, :2] += (6.0, 5.0)
    copy[11:, 2] = 0
    whole = person(rng, (220.0, 120.0), 120.0)
    upper, lower = whole.copy(), whole.copy()
    upper[11:, 2] = 0
    lower[:11, 2] = 0
    rows = [(frames[0].id, body, 0.9), (frames[0].id, copy, 0.5),
            (frames[1].id, upper, 0.9), (frames[1].id, lower, 0.9)]
    lone = frames[2:] if lone_frames is None else frames[2:2 + lone_frames]
    rows += [(f.id, person(rng, (160.0, 120.0), 120.0), 0.9) for f in lone]
    with project.bulk("SyntheticPeople", "synthetic people", "test") as b:
        first = b.allocate_person_ids(len(rows))
        b.add_people([(fid, Person(first + n, kp, np.where(kp[:, 2] > 0, score, np.nan),
                                   ("auto",) * K))
                      for n, (fid, kp, score) in enumerate(rows)])
    return {"ids": list(range(first, first + len(rows))), "body": body, "whole": whole}
