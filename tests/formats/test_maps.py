"""Network maps in: the .npz layout is checked and bad files are refused with the key."""

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from app.errors import BadInput
from app.formats.maps import match_map_files, read_maps
from app.model import Frame, coco_body

SK = coco_body()


def _write(path, **arrays):
    np.savez_compressed(path, **arrays)
    return path


def _good(h=30, w=40, stride=8):
    return {"confidence_maps": np.zeros((17, h, w), np.float16),
            "pafs": np.zeros((19, 2, h, w), np.float16), "stride": np.int64(stride)}


def test_reads_a_good_file(tmp_path):
    maps = read_maps(_write(tmp_path / "a.npz", **_good()), SK, (320, 240))
    assert maps.stride == 8 and maps.confidence_maps.dtype == np.float32
    assert maps.pafs.shape == (19, 2, 30, 40)


@pytest.mark.parametrize("change, words", [
    (lambda d: d.pop("pafs"), "key pafs is missing"),
    (lambda d: d.update(stride=np.float64(7.5)), "not an integer"),
    (lambda d: d.update(stride=np.arange(3)), "one integer"),
    (lambda d: d.update(confidence_maps=np.zeros((16, 30, 40))), "key confidence_maps: shape"),
    (lambda d: d.update(pafs=np.zeros((19, 2, 31, 40))), "key pafs: shape"),
    (lambda d: d.update(pafs=np.full((19, 2, 30, 40), np.nan)), "not finite"),
    (lambda d: d.update(confidence_maps=np.zeros((17, 30, 40), np.int32)), "not floating"),
])
def test_bad_files_name_the_key(tmp_path, change, words):
    data = _good()
    change(data)
    with pytest.raises(BadInput) as err:
        read_maps(_write(tmp_path / "a.npz", **data), SK, (320, 240))
    assert words in str(err.value) and "a.npz" in str(err.value)


def test_pickled_objects_and_junk_are_refused(tmp_path):
    path = tmp_path / "p.npz"
    np.savez(path, confidence_maps=np.array([object()], dtype=object), pafs=np.zeros(1),
             stride=np.int64(8))
    with pytest.raises(BadInput, match=r"confidence_maps\.npy': holds Python objects"):
        read_maps(path, SK, (320, 240))
    (tmp_path / "junk.npz").write_bytes(b"PK\x03\x04 not a zip")
    with pytest.raises(BadInput, match="not a readable"):
        read_maps(tmp_path / "junk.npz", SK, (320, 240))


def test_files_match_frames_by_name_and_strays_are_refused(tmp_path):
    frames = [Frame(1, "i/a.jpg", "a.jpg", 320, 240),
              Frame(2, "i/sub/b.png", "sub/b.png", 320, 240)]
    (tmp_path / "sub").mkdir()
    _write(tmp_path / "a.npz", **_good())
    _write(tmp_path / "sub" / "b.npz", **_good())
    assert match_map_files(tmp_path, frames) == {1: tmp_path / "a.npz",
                                                 2: tmp_path / "sub" / "b.npz"}
    _write(tmp_path / "stray.npz", **_good())
    with pytest.raises(BadInput, match=r"stray\.npz: matches no image"):
        match_map_files(tmp_path, frames)


def _npy(array_or_header, data=b""):
    """The bytes of a .npy member: a real array, or a bare header dict followed by ``data``."""
    import io

    buffer = io.BytesIO()
    if isinstance(array_or_header, dict):
        np.lib.format.write_array_header_1_0(buffer, array_or_header)
        buffer.write(data)
    else:
        np.save(buffer, array_or_header)
    return buffer.getvalue()


def _zip(path, members):
    import zipfile

    with zipfile.ZipFile(path, "w") as z:
        for name, data in members.items():
            z.writestr(name, data)
    return path


def test_a_header_declaring_a_huge_array_is_refused_before_allocating(tmp_path):
    """Synthetic hostile file: a .npy header that declares a 633 GiB array over 64 bytes of
    data. numpy would try to allocate the whole array (the .npy format keeps the shape in its
    header, https://numpy.org/doc/stable/reference/generated/numpy.lib.format.html)."""
    good = _good()
    header = {"descr": "<f4", "fortran_order": False, "shape": (17, 300_000, 33_333)}
    path = _zip(tmp_path / "huge.npz", {
        "confidence_maps.npy": _npy(header, b"\0" * 64),
        "pafs.npy": _npy(good["pafs"]), "stride.npy": _npy(good["stride"])})
    with pytest.raises(BadInput, match=r"huge\.npz: member 'confidence_maps\.npy': its header "
                                       r"declares 679,993,200,000 bytes"):
        read_maps(path, SK, (320, 240))


def test_a_member_that_is_not_npy_is_refused_by_name(tmp_path):
    """np.load hands back the raw bytes of a member not named .npy; such a member is refused."""
    good = _good()
    path = _zip(tmp_path / "odd.npz", {
        "confidence_maps": b"not an array", "pafs.npy": _npy(good["pafs"]),
        "stride.npy": _npy(good["stride"])})
    with pytest.raises(BadInput, match=r"odd\.npz: member 'confidence_maps' is not a \.npy"):
        read_maps(path, SK, (320, 240))


@settings(max_examples=60, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(shape=st.lists(st.integers(0, 10**7), max_size=4).map(tuple),
       descr=st.sampled_from(["<f4", "<f2", ">f8", "<i8", "|u1", "|O", "<U3", "|V8"]),
       data=st.binary(max_size=256), name=st.sampled_from(["pafs.npy", "pafs", "a/b.npy"]))
def test_random_npy_headers_never_crash_or_allocate_more_than_the_file(tmp_path, shape, descr,
                                                                      data, name):
    """Synthetic members with random headers and data: reading either refuses them with
    BadInput naming the file, or returns arrays no larger than the data the file holds."""
    from app.formats.maps import read_npz

    path = _zip(tmp_path / "f.npz", {name: _npy({"descr": descr, "fortran_order": False,
                                                 "shape": shape}, data)})
    try:
        arrays = read_npz(path)
    except BadInput as exc:
        assert "f.npz" in str(exc) and "\n" not in str(exc)
    else:
        assert sum(a.nbytes for a in arrays.values()) <= len(data)
