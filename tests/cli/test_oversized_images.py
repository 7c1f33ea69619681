"""An image whose header claims 40000 x 40000 pixels, from `new` to `render`, `prelabel` and a
blurred-heads packet: registered as unreadable with its header's size, refused in one line
wherever it would be decoded, never decoded. Frames, header and model are synthetic (the
header after the PNG specification, see tests/formats/test_images.py)."""

import json

import cv2
import pytest

from app.cli import main
from app.formats import images as image_files
from app.formats.images import set_max_megapixels
from app.store import Project
from tests.formats.test_images import png_header
from tests.inference.onnx_models import colour_dot_model
from tests.inference.test_network import FIELDS, MAPS_FROM, SK, _config, _people_at


@pytest.fixture
def decodes(monkeypatch):
    """The shapes of the images OpenCV decodes during the test."""
    seen = []
    real = cv2.imdecode

    def counting(data, flags):
        image = real(data, flags)
        seen.append(None if image is None else image.shape[:2])
        return image

    monkeypatch.setattr(image_files.cv2, "imdecode", counting)
    yield seen
    set_max_megapixels(None)


def test_an_oversized_image_is_unreadable_everywhere_and_never_decoded(tmp_path, capsys, caplog,
                                                                       decodes):
    folder = tmp_path / "images"
    folder.mkdir()
    for n, xs in enumerate(([30.0, 90.0], [40.0, 80.0, 130.0])):
        cv2.imwrite(str(folder / f"f{n}.png"), _people_at(xs)[1])
    (folder / "huge.png").write_bytes(png_header(40000, 40000))
    skeleton = tmp_path / "skeleton.json"
    skeleton.write_text(json.dumps(SK.to_dict()))
    proj = tmp_path / "p"

    assert main(["new", str(proj), "--images", str(folder), "--skeleton", str(skeleton),
                 "-q"]) == 0
    assert decodes == []  # sizes come from the headers
    assert "1 unreadable" in capsys.readouterr().out
    limit = [r.getMessage() for r in caplog.records if "huge.png" in r.getMessage()]
    assert limit and "40000 x 40000 pixels (1600 megapixels) is over the limit of 100 " \
                     "megapixels" in limit[0]
    with Project.open(proj) as p:
        huge = p.find_frame("huge.png")
        assert (huge.width, huge.height, huge.status) == (40000, 40000, "oversized")
        assert p.counts()["unreadable images"] == 1

    out = tmp_path / "huge-render.png"
    assert main(["render", str(proj), "--frame", "huge.png", "--out", str(out), "-q"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "over the limit of 100 megapixels" in err[0], err
    assert not out.exists() and decodes == []

    model = colour_dot_model(tmp_path / "dots.onnx", MAPS_FROM, FIELDS, stride=4,
                             channel_order="bgr", mean=(10, 20, 30), scale=(0.5, 0.25, 0.125))
    config = tmp_path / "config.json"
    config.write_text(_config().model_dump_json())
    assert main(["prelabel", str(proj), "--model", str(model), "--config", str(config),
                 "-q"]) == 0
    assert "2 frames" in (said := capsys.readouterr().out) and "1 unreadable" in said
    assert sorted(decodes) == [(120, 160), (120, 160)]

    packet = tmp_path / "send.zip"
    assert main(["packet", "export", str(proj), "--frames", "1,2,3", "--out", str(packet),
                 "--images", "blurred-heads", "-q"]) == 0
    assert "1 frame went without their image" in capsys.readouterr().err
    assert len(decodes) == 4 and packet.is_file()


def test_the_limit_is_an_option_of_the_commands_that_decode(tmp_path, image_dir, capsys,
                                                             decodes):
    """``--max-megapixels`` below a 320 x 240 frame (0.08 megapixels): `render` refuses it in
    one line without decoding; the environment variable does the same."""
    proj = tmp_path / "p"
    assert main(["new", str(proj), "--images", str(image_dir), "-q"]) == 0
    out = tmp_path / "r.png"
    argv = ["render", str(proj), "--frame", "1", "--out", str(out), "-q"]
    assert main([*argv, "--max-megapixels", "0.05"]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "over the limit of 0.05 megapixels" in err[0] and decodes == []
    set_max_megapixels(None)
    assert main(argv) == 0 and out.is_file() and decodes == [(240, 320)]
