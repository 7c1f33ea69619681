"""The overlay painter, checked on rendered pixels.

Sources: the palette is Okabe and Ito (2008), "Color Universal Design (CUD): How to make
figures and presentations that are friendly to colorblind people", J*Fly (RGB values from
memory of the paper's table). Contrast follows the WCAG 2.1 definitions of relative luminance
and contrast ratio (W3C); the grey #767676 at 4.54:1 on white is WebAIM's often-quoted lightest
AA grey (from memory). Label coordinates are pixel centres (app/model/labels.py). Data: the
synthetic project of tests/ui/conftest.py and synthetic people made here (invented for these
tests).
"""

from __future__ import annotations

from types import SimpleNamespace

import cv2
import numpy as np
import pytest
from PySide6.QtGui import QColor, QImage, QPainter, QTransform

from app.cli import main
from app.model.labels import Person
from app.model.skeleton import coco_body
from app.ui.overlay import (
    OKABE_ITO,
    PERSON_COLOURS,
    OverlayStyle,
    assign_colours,
    layout_tags,
    paint_overlay,
    relative_luminance,
    text_colour_on,
)
from app.ui.render import render_overlay
from tests.ui.conftest import frame_people

PUBLISHED = [(0, 0, 0), (230, 159, 0), (86, 180, 233), (0, 158, 115), (240, 228, 66),
             (0, 114, 178), (213, 94, 0), (204, 121, 167)]


def test_palette_is_okabe_and_ito_without_black():
    assert [QColor(c).getRgb()[:3] for c in OKABE_ITO] == PUBLISHED
    assert [QColor(c).getRgb()[:3] for c in PERSON_COLOURS] == PUBLISHED[1:]


def test_contrast_follows_wcag():
    contrast = 1.05 / (relative_luminance(QColor("#767676")) + 0.05)
    assert contrast == pytest.approx(4.54, abs=0.01)
    assert (1.0 + 0.05) / (relative_luminance(QColor("#000000")) + 0.05) == pytest.approx(21)
    # Each tag's number must be readable: at least WCAG's 4.5:1 for normal text.
    for c in PERSON_COLOURS:
        lum = relative_luminance(QColor(c))
        text = relative_luminance(text_colour_on(QColor(c)))
        hi, lo = max(lum, text), min(lum, text)
        assert (hi + 0.05) / (lo + 0.05) >= 4.5, c


def _people():
    out = []
    for n, kp in enumerate(frame_people()):
        p = Person.blank(100 + n, 17)
        p.keypoints[:] = kp
        out.append(p)
    return out


def _near(bgr, x, y, radius):
    """Pixels within ``radius`` of label point (x, y) (a pixel centre)."""
    h, w = bgr.shape[:2]
    yy, xx = np.mgrid[0:h, 0:w]
    return bgr[(xx - x) ** 2 + (yy - y) ** 2 <= radius ** 2].astype(int)


def _has_colour(pixels, colour, tol=10):
    bgr = np.array([colour.blue(), colour.green(), colour.red()])
    return bool((np.abs(pixels - bgr).max(axis=1) <= tol).any())


def _to_bgr(image: QImage) -> np.ndarray:
    image = image.convertToFormat(QImage.Format.Format_RGB32)
    buf = np.frombuffer(image.constBits(), np.uint8).reshape(image.height(),
                                                              image.bytesPerLine() // 4, 4)
    return buf[:, :image.width(), :3].copy()


def test_render_has_each_persons_colour_at_labelled_joints_and_nothing_at_unlabeled(
        tmp_path, ui_project, capsys):
    """End to end through ``posewright render``: the person's colour at every labelled joint,
    none at the unlabeled one (person A's left knee, which keeps a remembered position)."""
    out = tmp_path / "f2.png"
    assert main(["render", str(ui_project.folder), "--frame", "2", "--out", str(out)]) == 0
    bgr = cv2.imread(str(out))
    assert bgr.shape == (240, 320, 3)
    people = ui_project.people(2)
    colours = assign_colours(people)
    for p in people:
        colour = QColor(PERSON_COLOURS[colours[p.id]])
        for j, (x, y, v) in enumerate(p.keypoints):
            if v > 0:
                assert _has_colour(_near(bgr, x, y, 5), colour), (p.id, j)
    a = people[0]
    x, y, v = a.keypoints[13]
    assert v == 0 and np.isfinite([x, y]).all()
    colour = QColor(PERSON_COLOURS[colours[a.id]])
    assert not _has_colour(_near(bgr, x, y, 4), colour)
    grey = bgr[int(np.rint(y)), int(np.rint(x))]
    assert (grey == grey[0]).all(), "the image shows through where nothing is drawn"


def test_shape_says_side():
    """Left: filled disc; right: ring with a hole; centre: filled diamond."""
    p = Person.blank(1, 17)
    p.keypoints[0] = (20, 20, 2)   # nose: centre
    p.keypoints[5] = (60, 20, 2)   # left shoulder
    p.keypoints[6] = (100, 20, 2)  # right shoulder
    img = render_overlay(np.full((40, 130, 3), 128, np.uint8), [p], coco_body(),
                         OverlayStyle(show_tags=False))
    colour = QColor(PERSON_COLOURS[0]).name()
    assert img.pixelColor(60, 20).name() == colour       # disc: filled
    assert img.pixelColor(20, 20).name() == colour       # diamond: filled
    assert img.pixelColor(100, 20).name() != colour      # ring: the middle shows the image
    assert img.pixelColor(105, 20).name() == colour      # ...and the ring is the colour


def test_occluded_limbs_are_dashed():
    p = Person.blank(1, 17)
    p.keypoints[5] = (20, 20, 2)
    p.keypoints[7] = (120, 20, 1)   # occluded elbow: the upper arm is dashed
    p.keypoints[6] = (20, 50, 2)
    p.keypoints[8] = (120, 50, 2)   # visible: solid
    img = _to_bgr(render_overlay(np.full((70, 140, 3), 128, np.uint8), [p], coco_body(),
                                 OverlayStyle(show_tags=False)))
    colour = np.array([0, 159, 230])  # orange, BGR
    dashed = np.abs(img[20, 30:110].astype(int) - colour).max(axis=1) <= 10
    solid = np.abs(img[50, 30:110].astype(int) - colour).max(axis=1) <= 10
    assert solid.all()
    assert 0.3 < dashed.mean() < 0.8, "dashes and gaps along the occluded limb"


def test_sizes_are_screen_pixels_at_any_zoom():
    p = Person.blank(1, 17)
    p.keypoints[5] = (100, 100, 2)

    def extent(scale):
        img = QImage(200, 200, QImage.Format.Format_RGB32)
        img.fill(QColor("#808080"))
        qp = QPainter(img)
        t = QTransform(scale, 0, 0, scale, 100 - 100 * scale, 100 - 100 * scale)
        paint_overlay(qp, [p], coco_body(), t, OverlayStyle(show_tags=False))
        qp.end()
        bgr = _to_bgr(img)
        drawn = np.abs(bgr.astype(int) - 128).max(axis=2) > 20
        cols = np.flatnonzero(drawn.any(axis=0))
        return cols.max() - cols.min() + 1

    assert extent(0.25) == extent(1.0) == extent(4.0)


def test_focus_dims_everyone_else_and_the_image():
    people = _people()
    bg = np.full((240, 320, 3), 160, np.uint8)
    plain = _to_bgr(render_overlay(bg, people, coco_body(), OverlayStyle(show_tags=False)))
    focus = _to_bgr(render_overlay(bg, people, coco_body(),
                                   OverlayStyle(show_tags=False, focus=people[1].id)))
    colours = assign_colours(people)
    x, y = people[1].keypoints[5, :2].round().astype(int)
    assert _has_colour(focus[y - 1:y + 2, x - 1:x + 2].reshape(-1, 3),
                       QColor(PERSON_COLOURS[colours[people[1].id]]))
    x, y = people[2].keypoints[5, :2].round().astype(int)
    assert not _has_colour(focus[y - 1:y + 2, x - 1:x + 2].reshape(-1, 3),
                           QColor(PERSON_COLOURS[colours[people[2].id]]), tol=25)
    assert focus[5, 5].mean() < plain[5, 5].mean() - 20, "the image is dimmed a little"


def test_neighbours_get_different_colours():
    people = []
    for n in range(7):  # seven people side by side: all colours differ
        p = Person.blank(n + 1, 17)
        p.keypoints[[0, 15]] = [(20.0 + 30 * n, 10, 2), (20.0 + 30 * n, 80, 2)]
        people.append(p)
    colours = assign_colours(people)
    assert len(set(colours.values())) == 7
    extra = Person.blank(99, 17)
    extra.keypoints[[0, 15]] = [(20.0, 200, 2), (20.0, 260, 2)]  # far below person 1
    more = assign_colours([*people, extra], keep=colours)
    assert {k: more[k] for k in colours} == colours, "people on screen keep their colour"
    assert more[99] != colours[1], "not the colour of the person right above"
    assert more[99] == colours[7], "the colour whose holder is farthest away"


def test_tags_do_not_overlap_when_people_crowd():
    anchors = np.array([[100.0 + 3 * i, 100.0 + (i % 2)] for i in range(8)])
    sizes = np.tile([18.0, 14.0], (8, 1))
    centres = layout_tags(anchors, sizes, 9.0)
    boxes = np.column_stack([centres - sizes / 2, centres + sizes / 2])
    for i in range(8):
        for k in range(i + 1, 8):
            ox = min(boxes[i, 2], boxes[k, 2]) - max(boxes[i, 0], boxes[k, 0])
            oy = min(boxes[i, 3], boxes[k, 3]) - max(boxes[i, 1], boxes[k, 1])
            assert ox <= 0 or oy <= 0, (i, k)


def test_the_sessions_palette_size_is_the_canvass():
    """app/session/view.py colours people without Qt; its palette size must be this one's."""
    from app.session.view import PALETTE_SIZE
    from app.ui.overlay import PERSON_COLOURS

    assert len(PERSON_COLOURS) == PALETTE_SIZE


def _painted(people, style, **kw) -> bytes:
    image = QImage(320, 240, QImage.Format.Format_ARGB32_Premultiplied)
    image.fill(0)
    qp = QPainter(image)
    for part in kw.pop("parts", ("whole",)):
        paint_overlay(qp, people, coco_body(), QTransform.fromTranslate(0.5, 0.5), style,
                      (320, 240), part=part, **kw)
    qp.end()
    return bytes(image.constBits())


@pytest.mark.parametrize("focused", [False, True])
def test_painting_under_then_over_the_person_on_top_is_painting_it_whole(qapp, focused):
    """The Canvas keeps what lies under a dragged person in a layer and paints the rest per
    move: the two parts together give the whole paint's pixels exactly, with regions, flags,
    a selection, difference marks and focus (synthetic people)."""
    people = _people()
    top = people[1].id
    style = OverlayStyle(
        selected_person=top, selected_joints=frozenset({(top, 9)}), focus=top if focused
        else None, flags={people[0].id: frozenset({7, 9})},
        regions=((1, ((10.0, 10.0, 90.0, 10.0, 90.0, 60.0),)),),
        differences={(top, 5): (150.0, 40.0), (people[2].id, 9): None})
    assert _painted(people, style, parts=("under", "over")) == _painted(people, style)


def test_held_tags_stay_and_the_others_are_placed_around_them(qapp):
    """While a joint is dragged everybody else's tag keeps its place (given as
    ``held_tags``), and the dragged person's tag goes where it covers none of them
    (synthetic people)."""
    people = _people()
    image = QImage(320, 240, QImage.Format.Format_ARGB32_Premultiplied)
    qp = QPainter(image)
    before = paint_overlay(qp, people, coco_body(), QTransform()).tags
    moving = people[0].id
    held = {pid: r.translated(3, 0) for pid, r in before.items() if pid != moving}
    moved = people[0].keypoints + np.array([25.0, 0.0, 0.0])  # towards the others
    dragged = [SimpleNamespace(id=moving, keypoints=moved) if p.id == moving else p
               for p in people]
    after = paint_overlay(qp, dragged, coco_body(), QTransform(), held_tags=held).tags
    qp.end()
    assert {pid: after[pid] for pid in held} == held
    assert not any(after[moving].intersects(r) for r in held.values())
