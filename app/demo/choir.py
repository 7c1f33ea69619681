"""The second scenario: a community choir rehearsing on stepped risers.

Where the folk dance (:mod:`app.demo.scene`) has upright people on one flat floor, the choir
breaks the assumptions that checks designed on the dance may make:

- Three or four rows stand one riser step (:data:`RISE`) above the row in front, so feet stand
  on several floor levels; in half the casts the front row sits on a bench on the floor.
- The rows are packed (:data:`SPACING` between neighbours, the rows staggered by half of it),
  so each row hides the legs, and often the hips, of the row behind.
- A conductor stands on the floor in front, seen from behind, beating time with raised hands.
- Singers keep their arms down; about two in five hold an open folder in front of the chest
  with both hands, which hides their wrists.
- Now and then a singer turns to a neighbour (the chest a little, the head more) for about a
  second and turns back.

The camera, the room, the figures and the way true labels are read from the render are the
dance's (:func:`app.demo.scene.label_frame`): a joint is occluded (``v = 1``) when something
nearer covers its pixel, be it another singer, a riser, or the singer's own folder. Everything
is invented: no real people, places or data.

Simulated network errors (:func:`perceive`)
--------------------------------------------
The dance's error model (:func:`app.demo.maps.perceive`) applies to every singer, and three
errors that a crowd on risers invites come on top, each a run of frames like the dance's
(:func:`app.demo.maps.run_lengths`, mean :data:`MEAN_RUN`), started while its cause holds:

- *Hidden legs invented* (:data:`LEGS_INVENTED`): a singer whose knees or ankles are mostly
  covered by the row in front gets confident peaks for legs that reach down past the feet to
  where the floor of the row in front would be: the hidden ankles lowered by
  ``U(0.12, 0.3)`` of the projected stature, the knees by half that.
- *Wrists given to the folder's neighbour* (:data:`WRIST_TO_NEIGHBOUR`): a wrist hidden behind
  the singer's own folder answers at the nearest visible wrist of another singer within a
  third of a stature, with the singer's own arm field pointing there.
- *Heads found twice* (:data:`HEAD_TWICE`): where another singer's head is within a third of a
  stature (dense rows), a faint second copy of the face (nose, eyes, ears) appears, shifted
  by ``N(0, 0.05)`` of a stature.

The rates are our choice, not calibrated against a real network; they make these errors
clearly more frequent than in the dance, which is the point of the scenario.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from app.demo.camera import Camera
from app.demo.maps import ErrorRuns, NetworkPerson, run_lengths
from app.demo.maps import perceive as perceive_crowd
from app.demo.poses import (
    NUM_BODY_JOINTS,
    STATURE_FRACTIONS,
    BodyPose,
    P,
    _frame_facing,
    _rotation,
    _unit,
    trunk_and_head,
    two_link,
)
from app.demo.render import Costume, Prop, Rendered, hall, render
from app.model.skeleton import Skeleton

#: Frames per second of the footage (the dance's pace: four frames to a count, two counts a
#: second).
FRAMES_PER_SECOND = 8.0
#: Height of one riser step and the depth of a row, metres (common stage risers: our choice).
RISE, ROW_DEPTH = 0.24, 0.62
#: Lateral distance between neighbours in a row, metres.
SPACING = 0.6
#: Depth of the front row's places, metres (the camera stands at y = -5.3).
FRONT_Y = 0.3
#: Seat height of the front row's bench, metres.
SEAT = 0.45
#: Shares of frames (while the cause holds) of the choir's own network errors.
LEGS_INVENTED = 0.3
WRIST_TO_NEIGHBOUR = 0.3
HEAD_TWICE = 0.1
#: Mean run length in frames of each of those errors.
MEAN_RUN: dict[str, float] = {"legs": 4.0, "wrist": 4.0, "head": 3.0}
#: Where the singers look: the conductor's hands.
_CONDUCTOR_XY = np.array([0.2, -1.2])

_UP = np.array([0.0, 0.0, 1.0])
_FACE = (0, 1, 2, 3, 4)
_LEG_JOINTS = (13, 14, 15, 16)
_WRISTS = (9, 10)


@dataclass(frozen=True)
class Singer:
    """One member of the choir (or the conductor, ``row == -1``).

    Attributes
    ----------
    stature, girth
        Metres; width scale of trunk and limbs.
    row
        0 for the front row, counting back; -1 for the conductor.
    x, y
        The place on the floor (pelvis), metres.
    floor
        Height of the floor the singer stands on (or whose bench they sit on), metres.
    seated
        Sitting on the bench rather than standing.
    folder
        Holds an open folder in front of the chest.
    sway
        Phase of the slow sway, in periods.
    look
        The head's yaw relative to the chest, radians.
    turn
        ``(start, length, side)``: from ``start`` seconds, for ``length`` seconds, the singer
        turns to the neighbour on ``side`` (+1 the singer's left, -1 their right); None if not.
    """

    stature: float
    girth: float
    row: int
    x: float
    y: float
    floor: float
    seated: bool
    folder: bool
    sway: float
    look: float
    turn: tuple[float, float, int] | None = None


@dataclass(frozen=True)
class ChoirScene:
    """Everything fixed for the whole sequence: camera, singers (track id = index + 1; the
    conductor comes first), their clothes and the room's risers and bench."""

    camera: Camera
    singers: tuple[Singer, ...]
    costumes: tuple[Costume, ...]
    room: tuple[Prop, ...]
    rows: int
    seated_front: bool

    @property
    def track_ids(self) -> np.ndarray:
        return np.arange(1, len(self.singers) + 1)


_SKIN = ((0.87, 0.68, 0.55), (0.80, 0.60, 0.47), (0.66, 0.47, 0.35), (0.92, 0.76, 0.64),
         (0.52, 0.36, 0.26))
_HAIR = ((0.20, 0.13, 0.08), (0.08, 0.07, 0.06), (0.42, 0.24, 0.12), (0.74, 0.58, 0.34),
         (0.58, 0.56, 0.53), (0.85, 0.84, 0.82))
#: The choir's own dress: dark trousers, a light shirt, a waistcoat in one of the choir's two
#: colours, a sash-coloured scarf; folders in dark colours.
_SHIRTS = ((0.94, 0.93, 0.90), (0.90, 0.92, 0.95), (0.95, 0.90, 0.82))
_WAISTCOATS = ((0.16, 0.22, 0.42), (0.40, 0.10, 0.16))
_TROUSERS = ((0.07, 0.07, 0.09), (0.12, 0.12, 0.14))
_FOLDERS = ((0.05, 0.05, 0.06), (0.30, 0.06, 0.08), (0.06, 0.12, 0.30))


def _costume(rng: np.random.Generator, conductor: bool) -> Costume:
    def pick(options: tuple) -> tuple[float, float, float]:
        r, g, b = options[int(rng.integers(len(options)))]
        return float(r), float(g), float(b)

    style = ("short", "short", "bun", "braid", "short")[int(rng.integers(5))]
    shirt = pick(_SHIRTS)
    waistcoat = (0.08, 0.08, 0.09) if conductor else pick(_WAISTCOATS)
    trousers = pick(_TROUSERS)
    return Costume("trousers", style, pick(_SKIN), pick(_HAIR), shirt, waistcoat, trousers,
                   waistcoat, trousers, trousers, (0.04, 0.04, 0.04), waistcoat)


def _box_faces(x0: float, x1: float, y0: float, y1: float, z0: float, z1: float
               ) -> tuple[np.ndarray, np.ndarray]:
    """The top and the front (towards -y) of an axis-aligned box, one quad each."""
    top = np.array([[[x0, y0, z1], [x1, y0, z1], [x1, y1, z1], [x0, y1, z1]]])
    front = np.array([[[x0, y0, z0], [x1, y0, z0], [x1, y0, z1], [x0, y0, z1]]])
    return top, front


def _tiles(quad: np.ndarray, n: int) -> np.ndarray:
    """Split a quad into ``n`` strips along its first edge (so that far-to-near sorting of
    facets stays right next to figures)."""
    a, b, c, d = quad
    s = np.linspace(0.0, 1.0, n + 1)[:, None]
    bottom, top = a + s * (b - a), d + s * (c - d)
    return np.stack([bottom[:-1], bottom[1:], top[1:], top[:-1]], axis=1)


def _room(rows: int, seated_front: bool) -> tuple[Prop, ...]:
    """Riser steps behind the front row, and the front row's bench when it sits."""
    props = []
    half = 0.5 * SPACING * 9
    back = FRONT_Y + (rows - 0.5) * ROW_DEPTH + 0.4
    carpet, riser = (0.33, 0.31, 0.34), (0.20, 0.19, 0.21)
    for k in range(1, rows):
        y0 = FRONT_Y + (k - 0.5) * ROW_DEPTH
        top, front = _box_faces(-half, half, y0, back, (k - 1) * RISE, k * RISE)
        props.append(Prop(np.concatenate([_tiles(q, 12) for q in top]), carpet))
        props.append(Prop(np.concatenate([_tiles(q, 12) for q in front]), riser))
    if seated_front:
        top, front = _box_faces(-half + 0.3, half - 0.3, FRONT_Y - 0.1, FRONT_Y + 0.25, 0.0,
                                SEAT)
        wood = (0.36, 0.22, 0.12)
        props.append(Prop(np.concatenate([_tiles(q, 12) for q in top]), wood))
        props.append(Prop(np.concatenate([_tiles(q, 12) for q in front]),
                          tuple(0.7 * np.asarray(wood))))
    return tuple(props)


def make_choir(seed: int) -> ChoirScene:
    """Cast the choir, dress it and build the risers, all drawn from ``seed``.

    Examples
    --------
    >>> scene = make_choir(3)
    >>> scene.singers[0].row, scene.rows in (3, 4), scene.camera.size
    (-1, True, (1280, 720))
    """
    rng = np.random.default_rng(np.random.SeedSequence([seed, 11]))
    rows = int(rng.integers(3, 5))
    seated_front = bool(rng.random() < 0.5)
    singers = [Singer(float(np.clip(rng.normal(1.74, 0.05), 1.6, 1.9)), 1.0, -1,
                      float(rng.uniform(0.0, 0.4)), -1.25, 0.0, False, False,
                      float(rng.random()), 0.0)]
    costumes = [_costume(rng, conductor=True)]
    for r in range(rows):
        size = 7 if r % 2 == 0 else 8
        # Rows of seven and eight alternate, which staggers them by half a place.
        floor = r * RISE
        for slot in range(size):
            turn = None
            if rng.random() < 0.12:
                turn = (float(rng.uniform(-0.5, 2.5)), float(rng.uniform(0.8, 1.6)),
                        int(rng.choice([-1, 1])))
            seated = seated_front and r == 0
            singers.append(Singer(
                stature=float(np.clip(rng.normal(1.70, 0.08), 1.52, 1.92)),
                girth=float(rng.uniform(0.92, 1.12)),
                row=r,
                x=float((slot - (size - 1) / 2) * SPACING + rng.normal(0, 0.03)),
                y=FRONT_Y + r * ROW_DEPTH + float(rng.normal(0, 0.03)),
                floor=floor,
                seated=seated,
                folder=bool(rng.random() < 0.4),
                sway=float(rng.random()),
                look=float(rng.normal(0.0, 0.15)),
                turn=turn,
            ))
            costumes.append(_costume(rng, conductor=False))
    camera = Camera.looking_at((0.7, -5.3, 2.25), (0.0, 0.25, 0.72), focal=1000.0,
                               size=(1280, 720))
    return ChoirScene(camera, tuple(singers), tuple(costumes), _room(rows, seated_front), rows,
                      seated_front)


def _bump(t: float, turn: tuple[float, float, int] | None) -> float:
    """How far into a turn a singer is at ``t`` seconds: 0 before and after, 1 at the peak."""
    if turn is None:
        return 0.0
    start, length, side = turn
    s = (t - start) / length
    if not 0.0 < s < 1.0:
        return 0.0
    ramp_in = min(s / 0.25, 1.0, (1.0 - s) / 0.25)
    return side * ramp_in * ramp_in * (3 - 2 * ramp_in)


def singer_pose(singer: Singer, t: float) -> tuple[BodyPose, np.ndarray | None]:
    """A singer's body at ``t`` seconds, and the folder's four corners (None without one).

    Standing singers stand with feet a hip width apart on their floor; seated ones sit on the
    bench with knees bent forward; everyone faces the conductor (the conductor faces the
    choir). Arms hang, hold a folder before the chest, or (the conductor) beat time.
    """
    h = singer.stature
    conductor = singer.row < 0
    place = np.array([singer.x, singer.y])
    target = np.array([0.0, 3.0]) if conductor else _CONDUCTOR_XY
    turn = _bump(t, singer.turn)
    pelvis_frame = _rotation(_UP, 0.12 * turn) @ _frame_facing(target - place)
    right, fwd, up = pelvis_frame.T
    sway = 0.008 * h * np.sin(2 * np.pi * (t / 2.4 + singer.sway))
    if singer.seated:
        pelvis = np.array([*place, SEAT + 0.06 * h])
    else:
        pelvis = np.array([*(place + sway * right[:2]), singer.floor
                           + h * (STATURE_FRACTIONS["hip_height"] - 0.012)])
    chest_frame = (_rotation(up, 0.3 * turn) @ _rotation(right, -0.03) @ pelvis_frame)
    c_right, c_fwd, c_up = chest_frame.T
    head_frame = (_rotation(c_up, singer.look * (1 - abs(turn)) + 0.75 * turn)
                  @ _rotation(c_right, -0.06 + 0.04 * np.sin(2 * np.pi * t / 1.7))
                  @ chest_frame)

    pts = trunk_and_head(pelvis, pelvis_frame, chest_frame, head_frame, h)

    thigh = h * STATURE_FRACTIONS["thigh"]
    shank = h * STATURE_FRACTIONS["shank"]
    ankle_z = singer.floor + h * STATURE_FRACTIONS["ankle_height"]
    for side, sign in (("left", -1.0), ("right", 1.0)):
        hip = pts[P[f"{side}_hip"]]
        if singer.seated:
            foot = np.array([*(pelvis[:2] + fwd[:2] * (0.27 * h) + right[:2] * (sign * 0.08 * h)),
                             ankle_z])
            pole = up + fwd
        else:
            foot = np.array([*(place + right[:2] * (sign * 0.075 * h) + fwd[:2] * (0.02 * h)),
                             ankle_z])
            pole = fwd + 0.15 * sign * right
        knee, ankle = two_link(hip, foot, thigh, shank, pole)
        pts[P[f"{side}_knee"]] = knee
        pts[P[f"{side}_ankle"]] = ankle
        toe_dir = _rotation(_UP, -sign * 0.14) @ fwd
        heel_dir = _unit(-toe_dir - 0.4 * _UP)
        length = STATURE_FRACTIONS["foot_length"] * h
        pts[P[f"{side}_heel"]] = ankle + heel_dir * (0.28 * length) - _UP * (0.02 * h)
        pts[P[f"{side}_toe"]] = ankle + toe_dir * (0.72 * length) - _UP * (0.03 * h)

    upper = STATURE_FRACTIONS["upper_arm"] * h
    lower = STATURE_FRACTIONS["forearm"] * h
    beat = np.sin(2 * np.pi * 2.0 * t + singer.sway)
    chest = pts[P["chest"]]
    wrists = {}
    for side, sign in (("left", -1.0), ("right", 1.0)):
        sh = pts[P[f"{side}_shoulder"]]
        if conductor:
            goal = (sh + c_fwd * (0.2 * h) + c_right * (sign * 0.06 * h)
                    + c_up * (0.02 * h + 0.05 * h * beat * sign))
            pole = -c_up + 0.6 * sign * c_right
        elif singer.folder:
            goal = chest + c_fwd * (0.16 * h) - c_up * (0.05 * h) + c_right * (sign * 0.085 * h)
            pole = -c_up + 0.5 * sign * c_right - 0.3 * c_fwd
        elif singer.seated:
            goal = (pts[P[f"{side}_hip"]] + pts[P[f"{side}_knee"]]) / 2 + up * (0.06 * h)
            pole = -c_fwd + 0.3 * sign * c_right
        else:
            goal = (sh - c_up * (0.95 * (upper + lower)) + c_fwd * (0.03 * h)
                    + c_right * (sign * 0.03 * h))
            pole = -c_fwd + 0.3 * sign * c_right
        elbow, wrist = two_link(sh, goal, upper, lower, pole)
        pts[P[f"{side}_elbow"]] = elbow
        pts[P[f"{side}_wrist"]] = wrist
        wrists[side] = wrist
        reach = (0.7 if singer.folder else 0.8) * STATURE_FRACTIONS["hand"] * h
        towards = _unit(wrist - elbow) if not singer.folder else _unit(
            0.5 * _unit(wrist - elbow) + 0.5 * c_fwd)
        pts[P[f"{side}_hand"]] = wrist + towards * reach
    pose = BodyPose(pts, pelvis_frame, chest_frame, head_frame, h, singer.girth)
    if not singer.folder:
        return pose, None
    return pose, _folder(wrists["left"], wrists["right"], chest_frame, h)


def _folder(left: np.ndarray, right: np.ndarray, chest: np.ndarray, h: float) -> np.ndarray:
    """``(2, 4, 3)``: the two covers of an open folder held by both hands, in front of the
    wrists (far enough to hide them: the self-cover margin of a wrist is 0.035 of stature)."""
    c_right, c_fwd, c_up = chest.T
    tilt = 0.4
    w = _unit(c_up * np.cos(tilt) - c_fwd * np.sin(tilt))
    normal = _unit(np.cross(w, c_right))
    if np.dot(normal, c_fwd) < 0:
        normal = -normal
    centre = 0.5 * (left + right) + c_fwd * (0.07 * h) + w * (0.05 * h)
    half_h, width, fold = 0.15, 0.21, 0.05
    spine_lo, spine_hi = centre - w * half_h, centre + w * half_h
    covers = []
    for sign in (-1.0, 1.0):
        edge = c_right * (sign * width) - normal * fold
        covers.append([spine_lo, spine_hi, spine_hi + edge, spine_lo + edge])
    return np.array(covers)


def poses_at(scene: ChoirScene, frame: int) -> tuple[list[BodyPose], list[Prop]]:
    """Every singer's body at frame ``frame`` (0-based), and the props drawn with them
    (the room's risers and bench, and each held folder, which counts as its holder's)."""
    t = frame / FRAMES_PER_SECOND
    poses, props = [], list(scene.room)
    for i, singer in enumerate(scene.singers):
        pose, folder = singer_pose(singer, t)
        poses.append(pose)
        if folder is not None:
            colour = _FOLDERS[i % len(_FOLDERS)]
            props.append(Prop(folder, colour, owner=i))
    return poses, props


def render_choir(scene: ChoirScene, frame: int, background: np.ndarray | None = None
                 ) -> tuple[Rendered, list[BodyPose]]:
    """Render frame ``frame`` (0-based) in the hall of the dance, risers and all."""
    if background is None:
        background = hall(scene.camera)
    poses, props = poses_at(scene, frame)
    return render(scene.camera, poses, list(scene.costumes), background, props), poses


@dataclass
class ChoirRuns:
    """The choir's own network errors in progress, carried from frame to frame: frames left
    of each run, keyed by ``(track id, kind, joint)``, and what keeps a run looking the same
    (the lowering of invented legs, the head copy's shift)."""

    left: dict[tuple[int, str, int], int] = field(default_factory=dict)
    drop: dict[int, float] = field(default_factory=dict)
    shift: dict[int, np.ndarray] = field(default_factory=dict)

    def step(self, key: tuple[int, str, int], share: float, fresh: bool,
             rng: np.random.Generator) -> bool:
        active = int(run_lengths(self.left.get(key, 0), share, MEAN_RUN[key[1]], fresh, rng))
        self.left[key] = max(active - 1, 0)
        return active > 0


@dataclass
class ChoirNetwork:
    """The state of the simulated network over a sequence: the dance's runs and the choir's."""

    crowd: ErrorRuns = field(default_factory=ErrorRuns)
    choir: ChoirRuns = field(default_factory=ChoirRuns)
    seen: set[int] = field(default_factory=set)


def perceive(keypoints: np.ndarray, occlusion: np.ndarray, height: np.ndarray,
             facing: np.ndarray, skeleton: Skeleton, rng: np.random.Generator,
             track_ids: np.ndarray, folders: np.ndarray, state: ChoirNetwork
             ) -> list[NetworkPerson]:
    """The people a network confused by a choir on risers responds to (module docstring).

    Parameters
    ----------
    keypoints, occlusion, height, facing, skeleton, rng, track_ids
        As for :func:`app.demo.maps.perceive`.
    folders
        ``(P,)`` bool: who holds a folder.
    state
        The error runs of the sequence so far (advanced in place).

    Returns
    -------
    list of NetworkPerson
        What :func:`app.demo.maps.perceive` returns for the changed poses, then the faint
        copies of heads found twice.

    Notes
    -----
    Before the dance's model runs, per singer: the hidden-legs run (share
    ``LEGS_INVENTED`` while at least two knees and ankles are more than half covered) lowers
    the hidden ankles by ``U(0.12, 0.3)`` of the stature and the knees by half that, marking
    them seen (a confident guess); the wrist run (share ``WRIST_TO_NEIGHBOUR`` per hidden wrist
    of a folder holder while another singer's visible wrist is within a third of a stature)
    moves the wrist there, marked seen. After it, the head run (share ``HEAD_TWICE`` while
    another head is within a third of a stature) adds a copy of the face with peaks
    ``U(0.4, 0.7)`` and face fields at 0.6. Our own model, no source.
    """
    kp = keypoints.copy()
    occ = occlusion.copy()
    runs = state.choir
    heads = keypoints[:, 0, :2]
    copies: list[NetworkPerson] = []
    fresh_of = {}
    for p, tid in enumerate(track_ids.tolist()):
        fresh = tid not in state.seen
        fresh_of[p] = fresh
        state.seen.add(tid)
        h = float(height[p])
        legs = np.array(_LEG_JOINTS)
        hidden_legs = (kp[p, legs, 2] > 0) & (occ[p, legs] > 0.5)
        drop = runs.drop.setdefault(tid, float(rng.uniform(0.12, 0.3)))
        if runs.step((tid, "legs", 0), LEGS_INVENTED if hidden_legs.sum() >= 2 else 0.0,
                     fresh, rng):
            for j, hid in zip(_LEG_JOINTS, hidden_legs):
                if hid:
                    lower = drop if j in (15, 16) else 0.5 * drop
                    kp[p, j, 1] += lower * h
                    kp[p, j, 2], occ[p, j] = 2, 0.0
        else:
            runs.drop[tid] = float(rng.uniform(0.12, 0.3))
        for j in _WRISTS:
            others = [q for q in range(len(kp)) if q != p]
            near = None
            if folders[p] and kp[p, j, 2] == 1 and others:
                cand = [(float(np.hypot(*(keypoints[q, w, :2] - keypoints[p, j, :2]))), q, w)
                        for q in others for w in _WRISTS if keypoints[q, w, 2] == 2]
                cand = [c for c in cand if c[0] < h / 3]
                near = min(cand) if cand else None
            if runs.step((tid, "wrist", j), WRIST_TO_NEIGHBOUR if near else 0.0, fresh, rng) \
                    and near is not None:
                kp[p, j, :2] = keypoints[near[1], near[2], :2]
                kp[p, j, 2], occ[p, j] = 2, 0.0
    people = perceive_crowd(kp, occ, height, facing, skeleton, rng, track_ids,
                            state.crowd)
    limbs = skeleton.limb_array
    face_limbs = np.isin(limbs[:, 0], _FACE) & np.isin(limbs[:, 1], _FACE)
    for p, tid in enumerate(track_ids.tolist()):
        h = float(height[p])
        d = np.hypot(*(heads - heads[p]).T)
        d[p] = np.inf
        d[keypoints[:, 0, 2] == 0] = np.inf
        dense = keypoints[p, 0, 2] > 0 and bool((d < h / 3).any())
        shift = runs.shift.setdefault(tid, rng.normal(0, 0.05, 2))
        if not runs.step((tid, "head", 0), HEAD_TWICE if dense else 0.0, fresh_of[p], rng):
            runs.shift[tid] = rng.normal(0, 0.05, 2)
            continue
        copy = np.zeros_like(kp[p])
        face = np.array(_FACE)
        copy[face, :2] = people[p].keypoints[face, :2] + shift * h
        copy[face, 2] = (people[p].keypoints[face, 2] > 0) * 2
        peak = np.zeros(len(copy))
        peak[face] = rng.uniform(0.4, 0.7, len(face)) * (copy[face, 2] > 0)
        copies.append(NetworkPerson(copy, peak, np.where(face_limbs, 0.6, 0.0),
                                    people[p].sigma, people[p].limb_width))
    return people + copies


NAME = "Choir rehearsal on risers (synthetic)"
DESCRIPTION = (
    "A synthetic rehearsal of a community choir on stepped risers in a hall, rendered "
    "procedurally: three or four rows, each a step above the row in front (in some casts the "
    "front row seated on a bench), a conductor seen from behind, singers with arms down, some "
    "holding folders before the chest, now and then one turning to a neighbour. truth.json "
    "holds the true poses (COCO keypoints; v=1 where another figure, a riser or the singer's "
    "own body or folder covers the joint in the picture; bbox and area are those of the "
    "figure's visible pixels; track_id names the singer, 1 the conductor). maps/ holds "
    "simulated network output with a choir's errors. Invented people and data only."
)
__all__ = ["NUM_BODY_JOINTS", "ChoirScene", "Singer", "make_choir", "perceive", "poses_at",
           "render_choir", "singer_pose"]
