"""Dancers' bodies in 3D: an anthropometric body model, the dance step and the holds.

Each dancer is a kinematic chain whose segment lengths are fractions of the dancer's stature
(:data:`STATURE_FRACTIONS`). The dance is a circle dance of our own: a six-count phrase
(step to the side, cross behind, step to the side, raise the knee, step down, raise the other
knee) that carries the ring round a little each phrase. The feet follow that phrase on the
floor; the pelvis rides over the supporting foot; the legs and arms reach their targets by
analytic two-link inverse kinematics (the knee and elbow angles from the law of cosines); the
trunk and head turn by joint angles animated over the phrase. Hands are joined with both
neighbours: the outer ring in a raised hold (hands at shoulder height, elbows down), the inner
ring with hands resting on the neighbours' shoulders.

World coordinates are metres: x and y span the floor, z points up, the floor is ``z = 0``.
A body frame is a 3x3 matrix whose columns are the body's right, forward and up directions.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: Landmark heights and segment lengths as fractions of stature, after Drillis and Contini (1966)
#: as tabulated in Winter, "Biomechanics and Motor Control of Human Movement" (segment-length
#: figure of the anthropometry chapter). Written from memory, not copied from the book; the
#: differences agree with each other (shoulder - elbow = upper arm, hip - knee = thigh, ...).
STATURE_FRACTIONS: dict[str, float] = {
    "eye_height": 0.936,
    "chin_height": 0.870,
    "shoulder_height": 0.818,
    "chest_height": 0.720,
    "elbow_height": 0.630,
    "hip_height": 0.530,
    "wrist_height": 0.485,
    "knee_height": 0.285,
    "ankle_height": 0.039,
    "shoulder_width": 0.259,
    "chest_width": 0.174,
    "hip_width": 0.191,
    "upper_arm": 0.186,
    "forearm": 0.146,
    "hand": 0.108,
    "thigh": 0.245,
    "shank": 0.246,
    "foot_length": 0.152,
    "foot_width": 0.055,
}

#: The 17 COCO body joints come first, in the COCO order; then the extra points the renderer uses.
POINTS: tuple[str, ...] = (
    "nose", "left_eye", "right_eye", "left_ear", "right_ear",
    "left_shoulder", "right_shoulder", "left_elbow", "right_elbow",
    "left_wrist", "right_wrist", "left_hip", "right_hip",
    "left_knee", "right_knee", "left_ankle", "right_ankle",
    "pelvis", "waist", "chest", "neck", "head",
    "left_hand", "right_hand", "left_heel", "right_heel", "left_toe", "right_toe",
)
P = {name: i for i, name in enumerate(POINTS)}
NUM_BODY_JOINTS = 17

_UP = np.array([0.0, 0.0, 1.0])

# Where the dimensions below are not in the table they are our own choice for the look of the
# figures, in units of stature: joint centres sit inside the outline (hips at 3/4 of half the
# hip width, shoulders at 4/5 of half the shoulder width), the head is an ellipsoid.
_HIP_HALF = 0.75 * 0.5 * STATURE_FRACTIONS["hip_width"]
_SHOULDER_HALF = 0.8 * 0.5 * STATURE_FRACTIONS["shoulder_width"]
_NECK_ABOVE_SHOULDER = 0.015
_HEAD_ABOVE_NECK = 0.5 * (STATURE_FRACTIONS["chin_height"] + 1.0) - (
    STATURE_FRACTIONS["shoulder_height"] + _NECK_ABOVE_SHOULDER)
#: Head ellipsoid semi-axes (right, forward, up) in units of stature; our choice.
HEAD_AXES = (0.046, 0.057, 0.065)

# The phrase: feet positions at the end of each of the six counts, in units of stature, in the
# dancer's travel frame (x along the line of travel, y forward towards the ring's centre, z up).
_STEP = 0.19
_HALF_STANCE = 0.055
_LIFT = 0.12
_FOOT_KEYS = np.array([
    [(-_HALF_STANCE, 0.0, 0.0), (_HALF_STANCE - 0.02, 0.10, _LIFT)],
    [(-_HALF_STANCE, 0.0, 0.0), (_HALF_STANCE + _STEP, 0.0, 0.0)],
    [(_STEP + _HALF_STANCE + 0.03, -0.08, 0.0), (_HALF_STANCE + _STEP, 0.0, 0.0)],
    [(_STEP + _HALF_STANCE + 0.03, -0.08, 0.0), (_HALF_STANCE + 2 * _STEP, 0.0, 0.0)],
    [(2 * _STEP - _HALF_STANCE + 0.02, 0.10, _LIFT), (_HALF_STANCE + 2 * _STEP, 0.0, 0.0)],
    [(2 * _STEP - _HALF_STANCE, 0.0, 0.0), (_HALF_STANCE + 2 * _STEP, 0.0, 0.0)],
    [(2 * _STEP - _HALF_STANCE, 0.0, 0.0), (2 * _STEP + _HALF_STANCE - 0.02, 0.10, _LIFT)],
])
COUNTS_PER_PHRASE = 6
#: How far one phrase carries a dancer along the ring, in units of stature.
PHRASE_TRAVEL = 2 * _STEP
#: Statures used for the travel along the ring so that a ring of mixed heights stays together.
REFERENCE_STATURE = 1.70


@dataclass(frozen=True)
class Ring:
    """Dancers on a circle, facing its centre, hands joined with both neighbours.

    Attributes
    ----------
    centre
        ``(2,)`` the circle's centre on the floor, metres.
    radius
        Metres, measured to the dancers' pelvises at rest.
    start_angle
        Angle of slot 0 in radians (counter-clockwise from +x seen from above).
    direction
        +1 when the ring travels to the dancers' right (counter-clockwise), -1 to their left.
    hold
        ``"raised"`` (hands joined at shoulder height) or ``"shoulders"`` (hands on the
        neighbours' shoulders).
    size
        Number of dancers on the ring.
    """

    centre: tuple[float, float]
    radius: float
    start_angle: float
    direction: int
    hold: str
    size: int


@dataclass(frozen=True)
class DancerBody:
    """What the body model needs to know about one dancer.

    Attributes
    ----------
    stature
        Metres.
    girth
        Width scale of the trunk and limbs (1 is average).
    ring, slot
        Which ring (index into the scene's rings) and which place on it.
    phase
        Lag behind the music in counts (nobody is perfectly in time).
    lift
        Scale of the knee raises.
    look
        The head's yaw relative to the chest, radians (where the dancer looks).
    hold_height
        Height of the joined hands relative to the shoulders, in units of stature.
    """

    stature: float
    girth: float
    ring: int
    slot: int
    phase: float
    lift: float
    look: float
    hold_height: float


@dataclass(frozen=True)
class BodyPose:
    """One dancer's body at one instant.

    Attributes
    ----------
    points
        ``(len(POINTS), 3)`` world positions in metres; the first 17 are the COCO body joints.
    pelvis, chest, head
        3x3 body frames (columns: right, forward, up) of the pelvis, the chest and the head.
    stature, girth
        Copied from the dancer for the renderer.
    """

    points: np.ndarray
    pelvis: np.ndarray
    chest: np.ndarray
    head: np.ndarray
    stature: float
    girth: float


def _unit(v: np.ndarray) -> np.ndarray:
    n = np.linalg.norm(v, axis=-1, keepdims=True)
    return v / np.maximum(n, 1e-12)


def _rotation(axis: np.ndarray, angle: float) -> np.ndarray:
    """Rodrigues' rotation matrix about a unit axis."""
    x, y, z = _unit(np.asarray(axis, dtype=float))
    c, s = np.cos(angle), np.sin(angle)
    k = np.array([[0, -z, y], [z, 0, -x], [-y, x, 0]])
    return np.eye(3) + s * k + (1 - c) * (k @ k)


def _frame_facing(forward_xy: np.ndarray) -> np.ndarray:
    """Upright body frame whose forward direction is ``forward_xy`` on the floor."""
    f = _unit(np.array([forward_xy[0], forward_xy[1], 0.0]))
    r = np.cross(f, _UP)
    return np.column_stack([r, f, _UP])


def two_link(root: np.ndarray, target: np.ndarray, upper: float, lower: float,
             pole: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Analytic two-link inverse kinematics: the middle joint and the reached end.

    Parameters
    ----------
    root, target
        ``(3,)`` the chain's root (hip, shoulder) and where its end (ankle, wrist) should go.
    upper, lower
        Segment lengths.
    pole
        ``(3,)`` the direction the middle joint (knee, elbow) bends towards.

    Returns
    -------
    middle, end
        ``(3,)`` each. The end is the target, pulled in along the root-target line when the
        target is out of reach.

    Notes
    -----
    With ``d = |target - root|`` the angle at the root between the root-target line and the
    upper segment follows from the law of cosines, ``cos(a) = (upper^2 + d^2 - lower^2) /
    (2 upper d)``; the middle joint lies at ``root + upper (cos(a) u + sin(a) w)`` where ``u``
    points at the target and ``w`` is the pole direction made perpendicular to ``u``.

    References
    ----------
    Two-link inverse kinematics by the law of cosines: common practice, no source.

    Examples
    --------
    >>> mid, end = two_link(np.zeros(3), np.array([0.0, 0.0, -1.0]), 0.6, 0.6,
    ...                     np.array([0.0, 1.0, 0.0]))
    >>> round(float(np.linalg.norm(mid)), 3), round(float(np.linalg.norm(end - mid)), 3)
    (0.6, 0.6)
    """
    span = target - root
    d = float(np.linalg.norm(span))
    u = span / max(d, 1e-9)
    d = float(np.clip(d, abs(upper - lower) + 1e-4, 0.995 * (upper + lower)))
    end = root + u * d
    w = pole - np.dot(pole, u) * u
    if np.linalg.norm(w) < 1e-6:
        w = np.cross(u, _UP) if abs(u[2]) < 0.9 else np.array([1.0, 0.0, 0.0])
    w = _unit(w)
    cos_a = np.clip((upper**2 + d**2 - lower**2) / (2 * upper * d), -1.0, 1.0)
    a = np.arccos(cos_a)
    middle = root + upper * (np.cos(a) * u + np.sin(a) * w)
    return middle, end


def _smoothstep(s: np.ndarray | float) -> np.ndarray | float:
    return s * s * (3 - 2 * s)


def feet_in_phrase(count: float) -> tuple[np.ndarray, int]:
    """Both feet at a moment of the phrase, in the travel frame, in units of stature.

    Parameters
    ----------
    count
        Time in counts since the dance began (a real number; 6 counts make a phrase).

    Returns
    -------
    feet
        ``(2, 3)``: left then right foot (ankle above its floor point), x along the travel,
        y forward, z up. The phrases already danced are added to x.
    phrase
        How many whole phrases were danced before this moment.

    Examples
    --------
    >>> feet, n = feet_in_phrase(1.0)
    >>> n, [round(float(v), 3) for v in feet[1]]
    (0, [0.245, 0.0, 0.0])
    """
    phrase = int(np.floor(count / COUNTS_PER_PHRASE))
    u = count - phrase * COUNTS_PER_PHRASE
    k = min(int(np.floor(u)), COUNTS_PER_PHRASE - 1)
    s = u - k
    a, b = _FOOT_KEYS[k], _FOOT_KEYS[k + 1]
    feet = a + (b - a) * _smoothstep(s)
    moving = np.linalg.norm((b - a)[:, :2], axis=1) > 0.01
    feet[:, 2] += moving * 0.035 * np.sin(np.pi * s)
    feet[:, 0] += phrase * PHRASE_TRAVEL
    return feet, phrase


def _support(feet: np.ndarray) -> np.ndarray:
    """How firmly each foot carries the weight: 1 on the floor, falling as it lifts."""
    return 1.0 / (1.0 + (feet[..., 2] / 0.015) ** 2)


def _pelvis_over_feet(count: float, direction: int) -> tuple[float, float]:
    """Pelvis position over the feet (travel frame, units of stature), smoothed over a count."""
    xs, ys = [], []
    for t in count + np.linspace(-0.5, 0.5, 9):
        feet, _ = feet_in_phrase(float(t))
        if direction < 0:
            feet = feet[::-1] * np.array([-1.0, 1.0, 1.0])
        w = _support(feet)
        xs.append(np.dot(w, feet[:, 0]) / w.sum())
        ys.append(np.dot(w, feet[:, 1]) / w.sum())
    return float(np.mean(xs)), 0.5 * float(np.mean(ys))


def _yaw_towards_travel(u: float) -> float:
    """How far the body turns towards the line of travel during the phrase (radians)."""
    return 0.12 + 0.12 * np.cos(2 * np.pi * (u - 1.5) / COUNTS_PER_PHRASE)


def _ring_point(ring: Ring, angle0: float, x: float, y: float) -> tuple[np.ndarray, np.ndarray]:
    """Floor position and inward direction for travel ``x`` (to the dancer's right along the
    ring) and forward offset ``y``, both in metres."""
    phi = angle0 + x / ring.radius
    radial = np.array([np.cos(phi), np.sin(phi)])
    return np.asarray(ring.centre) + (ring.radius - y) * radial, -radial


def core_pose(body: DancerBody, ring: Ring, count: float) -> BodyPose:
    """The dancer's legs, trunk and head at time ``count``; the arms hang until :func:`hold`.

    Parameters
    ----------
    body
        The dancer.
    ring
        The dancer's ring.
    count
        Time in counts since the dance began.

    Returns
    -------
    BodyPose
        With the arm points provisionally hanging at the sides.
    """
    h = body.stature
    c = count - body.phase
    feet_h, _ = feet_in_phrase(c)
    if ring.direction < 0:
        # The mirrored phrase travels to the dancer's left: swap the feet and flip x.
        feet_h = feet_h[::-1] * np.array([-1.0, 1.0, 1.0])
    u = c - np.floor(c / COUNTS_PER_PHRASE) * COUNTS_PER_PHRASE
    lift_scale = np.array([1.0, 1.0, body.lift])
    feet_h = feet_h * lift_scale
    angle0 = ring.start_angle + 2 * np.pi * body.slot / ring.size

    feet = np.zeros((2, 3))
    inward = np.zeros((2, 2))
    for i in range(2):
        xy, inw = _ring_point(ring, angle0, REFERENCE_STATURE * feet_h[i, 0], h * feet_h[i, 1])
        feet[i] = (*xy, h * (feet_h[i, 2] + STATURE_FRACTIONS["ankle_height"]))
        inward[i] = inw

    # The pelvis rides over the supporting foot (each foot weighted by how firmly it is
    # planted), averaged over the surrounding count so that the weight shifts smoothly.
    support = _support(feet_h)
    px, py = _pelvis_over_feet(c, ring.direction)
    pxy, inw = _ring_point(ring, angle0, REFERENCE_STATURE * px, h * py)
    # A positive turn about the vertical is to the left; the ring travels to the right when
    # its direction is +1.
    yaw = -ring.direction * _yaw_towards_travel(u)
    pelvis_frame = _rotation(_UP, yaw) @ _frame_facing(inw)
    right, fwd, up = pelvis_frame.T

    dip = 0.012 * (1 + np.cos(2 * np.pi * u))
    pz = h * (STATURE_FRACTIONS["hip_height"] - 0.015 - dip)
    thigh = h * STATURE_FRACTIONS["thigh"]
    shank = h * STATURE_FRACTIONS["shank"]
    reach = 0.985 * (thigh + shank)
    hip_off = np.array([-1.0, 1.0])[:, None] * (h * _HIP_HALF) * right
    for i in range(2):
        if feet_h[i, 2] > 0.02:
            continue
        horiz = np.linalg.norm(pxy + hip_off[i, :2] - feet[i, :2])
        allowed = feet[i, 2] + np.sqrt(max(reach**2 - horiz**2, 0.0))
        pz = min(pz, allowed)
    pelvis = np.array([*pxy, pz])

    # Trunk: lean forward a little, bend towards the supporting side, twist against the hips.
    stance_side = float(np.dot(support, [-1.0, 1.0]) / support.sum())
    chest_frame = (
        _rotation(up, -0.5 * yaw + 0.05 * np.sin(2 * np.pi * u / 3))
        @ _rotation(fwd, 0.04 * stance_side)
        @ _rotation(right, -0.07)
        @ pelvis_frame
    )
    c_right, c_fwd, c_up = chest_frame.T
    head_frame = (
        _rotation(c_up, body.look + 0.08 * np.sin(2 * np.pi * (u + 1) / COUNTS_PER_PHRASE))
        @ _rotation(c_right, -0.12)
        @ chest_frame
    )

    pts = trunk_and_head(pelvis, pelvis_frame, chest_frame, head_frame, h)

    for i, side in enumerate(("left", "right")):
        sign = -1.0 if side == "left" else 1.0
        hip = pts[P[f"{side}_hip"]]
        pole = fwd + 0.15 * sign * right
        knee, ankle = two_link(hip, feet[i], thigh, shank, pole)
        pts[P[f"{side}_knee"]] = knee
        pts[P[f"{side}_ankle"]] = ankle
        # Toes turn out a little; a raised foot points its toes down.
        toe_dir = _rotation(_UP, -sign * 0.14) @ fwd
        raised = min(feet_h[i, 2] / 0.1, 1.0)
        toe_dir = _unit(toe_dir - 0.9 * raised * _UP)
        heel_dir = _unit(-toe_dir - 0.4 * _UP)
        foot = STATURE_FRACTIONS["foot_length"] * h
        pts[P[f"{side}_heel"]] = ankle + heel_dir * (0.28 * foot) - _UP * (0.02 * h)
        pts[P[f"{side}_toe"]] = ankle + toe_dir * (0.72 * foot) - _UP * (0.03 * h)

    upper = STATURE_FRACTIONS["upper_arm"] * h
    lower = STATURE_FRACTIONS["forearm"] * h
    for side, sign in (("left", -1.0), ("right", 1.0)):
        sh = pts[P[f"{side}_shoulder"]]
        elbow, wrist = two_link(sh, sh - c_up * (upper + lower) + c_right * sign * 0.1 * h,
                                upper, lower, c_fwd)
        pts[P[f"{side}_elbow"]] = elbow
        pts[P[f"{side}_wrist"]] = wrist
        hand = 0.8 * STATURE_FRACTIONS["hand"] * h
        pts[P[f"{side}_hand"]] = wrist + _unit(wrist - elbow) * hand
    return BodyPose(pts, pelvis_frame, chest_frame, head_frame, h, body.girth)


def trunk_and_head(pelvis: np.ndarray, pelvis_frame: np.ndarray, chest_frame: np.ndarray,
                   head_frame: np.ndarray, h: float) -> np.ndarray:
    """The body's points ``(len(POINTS), 3)`` with the pelvis, trunk, shoulders, hips and head
    placed from the three body frames (columns right, forward, up) and stature ``h``; legs and
    arms are left at zero for the caller. Shared by the dance and the choir."""
    right, _, up = pelvis_frame.T
    c_right, _, c_up = chest_frame.T
    h_right, h_fwd, h_up = head_frame.T
    pts = np.zeros((len(POINTS), 3))
    pts[P["pelvis"]] = pelvis
    pts[P["waist"]] = pelvis + up * (0.07 * h)
    trunk = STATURE_FRACTIONS["shoulder_height"] + _NECK_ABOVE_SHOULDER - STATURE_FRACTIONS[
        "hip_height"]
    pts[P["chest"]] = pts[P["waist"]] + c_up * (0.12 * h)
    neck = pts[P["waist"]] + c_up * ((trunk - 0.07) * h)
    pts[P["neck"]] = neck
    for side, sign in (("left", -1.0), ("right", 1.0)):
        pts[P[f"{side}_shoulder"]] = (neck + c_right * (sign * _SHOULDER_HALF * h)
                                      - c_up * (_NECK_ABOVE_SHOULDER * h))
        pts[P[f"{side}_hip"]] = pelvis + right * (sign * _HIP_HALF * h)
    head = neck + h_up * (_HEAD_ABOVE_NECK * h)
    pts[P["head"]] = head
    pts[P["nose"]] = head + h * (0.062 * h_fwd - 0.018 * h_up)
    for side, sign in (("left", -1.0), ("right", 1.0)):
        pts[P[f"{side}_eye"]] = head + h * (0.051 * h_fwd + 0.004 * h_up + sign * 0.019 * h_right)
        pts[P[f"{side}_ear"]] = head + h * (-0.005 * h_fwd + sign * HEAD_AXES[0] * h_right)
    return pts


def _place_arm(pose: BodyPose, side: str, target: np.ndarray, pole: np.ndarray,
               hand_towards: np.ndarray) -> None:
    h = pose.stature
    sh = pose.points[P[f"{side}_shoulder"]]
    elbow, wrist = two_link(sh, target, STATURE_FRACTIONS["upper_arm"] * h,
                            STATURE_FRACTIONS["forearm"] * h, pole)
    pose.points[P[f"{side}_elbow"]] = elbow
    pose.points[P[f"{side}_wrist"]] = wrist
    direction = _unit(0.5 * _unit(wrist - elbow) + 0.5 * _unit(hand_towards - wrist))
    pose.points[P[f"{side}_hand"]] = wrist + direction * (0.7 * STATURE_FRACTIONS["hand"] * h)


def hold(poses: list[BodyPose], bodies: list[DancerBody], rings: list[Ring],
         count: float) -> None:
    """Join the hands of neighbours on each ring, moving the arm points of ``poses`` in place.

    Parameters
    ----------
    poses
        Core poses from :func:`core_pose`, one per dancer (changed in place).
    bodies
        The dancers, in the same order.
    rings
        The scene's rings.
    count
        Time in counts (the raised hold pumps forward on the knee raises).
    """
    by_place = {(b.ring, b.slot): i for i, b in enumerate(bodies)}
    for i, b in enumerate(bodies):
        ring = rings[b.ring]
        nb = by_place.get((b.ring, (b.slot + 1) % ring.size))
        if nb is None or nb == i:
            continue
        me, other = poses[i], poses[nb]
        # Slot + 1 sits at the larger angle: to the right of a dancer facing the centre.
        mine, theirs = "right", "left"
        a = me.points[P[f"{mine}_shoulder"]]
        z = other.points[P[f"{theirs}_shoulder"]]
        chord = _unit(z - a)
        inward = _unit(np.array([*ring.centre, 0.0]) - 0.5 * (a + z))
        inward[2] = 0.0
        inward = _unit(inward)
        if ring.hold == "raised":
            c = count - 0.5 * (b.phase + bodies[nb].phase)
            u = c - np.floor(c / COUNTS_PER_PHRASE) * COUNTS_PER_PHRASE
            pump = 0.5 - 0.5 * np.cos(2 * np.pi * u / 3)
            hh = 0.5 * (b.hold_height * me.stature + bodies[nb].hold_height * other.stature)
            meet = 0.5 * (a + z) + _UP * hh + inward * (0.07 + 0.05 * pump) * me.stature
            gap = 0.02 * me.stature
            clasp = meet + _UP * (0.1 * me.stature)
            _place_arm(me, mine, meet - chord * gap,
                       -_UP + 0.6 * chord - 0.35 * inward, clasp)
            _place_arm(other, theirs, meet + chord * gap,
                       -_UP - 0.6 * chord - 0.35 * inward, clasp)
        else:
            # Each rests a hand on the near shoulder of the neighbour; the arms cross.
            top_z = z + _UP * (0.035 * other.stature) - inward * (0.02 * other.stature)
            top_a = a + _UP * (0.035 * me.stature) - inward * (0.02 * me.stature)
            _place_arm(me, mine, top_z, -_UP - 0.5 * inward, top_z - _UP)
            _place_arm(other, theirs, top_a, -_UP - 0.5 * inward, top_a - _UP)


def facing_camera(pose: BodyPose, camera_centre: np.ndarray) -> float:
    """Cosine between the chest's forward direction and the direction to the camera, on the floor.

    1 faces the camera, -1 turns the back to it, 0 is side-on.

    Examples
    --------
    >>> frame = np.eye(3)
    >>> pose = BodyPose(np.zeros((len(POINTS), 3)), frame, frame, frame, 1.7, 1.0)
    >>> facing_camera(pose, np.array([0.0, 5.0, 1.5]))
    1.0
    """
    to_cam = camera_centre[:2] - pose.points[P["chest"], :2]
    fwd = pose.chest[:2, 1]
    return float(np.dot(_unit(fwd), _unit(to_cam)))
