"""COCO keypoints in and out: round trip checked with pycocotools, strict validation."""

import copy
import json
import sqlite3

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from app.errors import BadInput
from app.jobs import export_coco, import_coco, new_project
from app.model import MoveJoint, SetVisibility


def _load(path):
    return json.loads(path.read_text())


def test_dataset_round_trip_is_exact(project, coco_file, tmp_path):
    import_coco(project, coco_file)
    out = tmp_path / "out.json"
    export_coco(project, out, states=None)  # every state, untouched frames included
    assert _load(out) == _load(coco_file)


def test_frames_take_the_coco_image_ids(project, coco_file):
    import_coco(project, coco_file)
    original = _load(coco_file)
    by_name = {im["file_name"]: im["id"] for im in original["images"]}
    for f in project.frames():
        assert f.id == by_name[f.file_name]
    assert {p.id for ps in project.people_by_frame().values() for p in ps} == \
        {a["id"] for a in original["annotations"]}


def test_export_is_evaluated_perfect_by_pycocotools(project, coco_file, tmp_path):
    """Source: pycocotools COCO / COCOeval (keypoints): our export, read as detections with
    score 1, against the original file gives AP 1.0."""
    from pycocotools.coco import COCO
    from pycocotools.cocoeval import COCOeval

    import_coco(project, coco_file)
    out = tmp_path / "out.json"
    export_coco(project, out, states=None)  # every state, untouched frames included
    gt = COCO(str(coco_file))
    exported = COCO(str(out))  # loads as a dataset
    dets = [dict(a, score=1.0) for a in exported.dataset["annotations"] if a["num_keypoints"]]
    ev = COCOeval(gt, gt.loadRes(dets), iouType="keypoints")
    ev.evaluate()
    ev.accumulate()
    ev.summarize()
    assert ev.stats[0] == pytest.approx(1.0)


def test_edited_labels_export_with_recomputed_counts(project, coco_file, tmp_path):
    import_coco(project, coco_file)
    frame = project.frames()[0]
    person = project.people(frame.id)[0]
    j = int(np.flatnonzero(person.labelled)[0])
    project.apply(SetVisibility(frame.id, person.id, j, 0))
    project.apply(MoveJoint(frame.id, person.id, 16, 12.5, 13.5))
    out = tmp_path / "out.json"
    export_coco(project, out, states=None)  # every state, untouched frames included
    ann = next(a for a in _load(out)["annotations"] if a["id"] == person.id)
    assert ann["keypoints"][3 * j: 3 * j + 3] == [0, 0, 0]
    assert ann["keypoints"][48:51][:2] == [12.5, 13.5]
    assert ann["num_keypoints"] == int((np.asarray(ann["keypoints"][2::3]) > 0).sum())


def test_new_people_get_a_computed_box(project, tmp_path):
    from app.model import NewPerson

    kp = tuple((10.0 + 2 * j, 20.0 + j, 2 if j < 10 else 0) for j in range(17))
    project.apply(NewPerson(1, None, kp))
    out = tmp_path / "out.json"
    export_coco(project, out, states=None)  # every state, untouched frames included
    ann = _load(out)["annotations"][0]
    assert ann["bbox"] == [10.0, 20.0, 18.0, 9.0] and ann["area"] == 162.0
    assert ann["num_keypoints"] == 10
    assert _load(out)["categories"][0]["skeleton"][0] == [16, 14]  # 1-based


def test_results_list_becomes_auto_labels_with_scores(project, coco_file, tmp_path):
    import_coco(project, coco_file)
    image_id = project.frames()[0].id
    kp = []
    for j in range(17):
        kp += [30.0 + j, 40.0 + j, 0.9 if j != 3 else 0.0]  # per-joint scores
    res = tmp_path / "res.json"
    res.write_text(json.dumps([{"image_id": image_id, "category_id": 1, "keypoints": kp,
                                "score": 0.77}]))
    before = {p.id for p in project.people(image_id)}
    stats = import_coco(project, res)
    assert stats["people"] == 1
    (new,) = [p for p in project.people(image_id) if p.id not in before]
    assert new.sources[0] == "auto" and new.score == pytest.approx(0.77)
    assert new.scores[0] == pytest.approx(0.9) and new.keypoints[3, 2] == 0
    assert new.keypoints[0, 2] == 2


def _write(tmp_path, data, name="bad.json"):
    path = tmp_path / name
    path.write_text(data if isinstance(data, str) else json.dumps(data))
    return path


def _bad_variants(ds):
    def mutate(fn):
        d = copy.deepcopy(ds)
        fn(d)
        return d

    a0 = "annotations[0]"
    return [
        ("{ truncated", "not valid JSON"),
        (mutate(lambda d: d["annotations"][0].update(keypoints=[1, 2, 2] * 16)),
         f"{a0} (id 5000): field keypoints: 48 values"),
        (mutate(lambda d: d["annotations"][0]["keypoints"].__setitem__(0, "12")),
         f"{a0} (id 5000): field keypoints.0"),
        (mutate(lambda d: d["annotations"][0]["keypoints"].__setitem__(2, 3)),
         "visibility 3 of joint 0"),
        (mutate(lambda d: d["annotations"][0].update(image_id=99999)), "no image with id 99999"),
        (mutate(lambda d: d["annotations"][0].update(category_id=4)), "no category with id 4"),
        (mutate(lambda d: d["annotations"][1].update(id=5000)), "annotation id 5000 appears twice"),
        (mutate(lambda d: d["images"][0].update(file_name="elsewhere.jpg")),
         "images[0] (id 100): field file_name: 'elsewhere.jpg' is not in the project"),
        (mutate(lambda d: d["images"][0].update(width=10**7)), "not a plausible image size"),
        (mutate(lambda d: d["images"][0].update(width=321)), "image on disk is 320x240"),
        (mutate(lambda d: d["annotations"][0]["keypoints"].__setitem__(0, 10**6)),
         "far outside"),
        (mutate(lambda d: d["categories"][0]["keypoints"].__setitem__(1, "eye_l")),
         "joint 1 is 'eye_l' here"),
        (mutate(lambda d: d.pop("images")), "field images"),
    ]


def test_bad_files_are_refused_with_where_and_nothing_written(project, coco_file, tmp_path):
    ds = _load(coco_file)
    for n, (data, words) in enumerate(_bad_variants(ds)):
        path = _write(tmp_path, data, f"bad{n}.json")
        with pytest.raises(BadInput) as err:
            import_coco(project, path)
        assert words in str(err.value), (n, str(err.value))
        assert f"bad{n}.json" in str(err.value)
        assert project.counts()["people"] == 0 and project.history() == []
        assert [f.id for f in project.frames()] == [1, 2, 3, 4, 5, 6]


def test_nan_and_infinity_are_refused(project, coco_file, tmp_path):
    text = coco_file.read_text()
    first = json.dumps(_load(coco_file)["annotations"][0]["keypoints"][0])
    for token in ("NaN", "Infinity", "-Infinity"):
        path = _write(tmp_path, text.replace(first, token, 1), "nan.json")
        with pytest.raises(BadInput, match=r"finite|valid number"):
            import_coco(project, path)
    assert project.counts()["people"] == 0


_NON_FINITE_PLACES = [
    (("annotations", 0, "area"), "annotations[0] (id 5000): field area"),
    (("annotations", 1, "bbox", 2), "annotations[1] (id 5001): field bbox.2"),
    (("annotations", 2, "attributes"), "annotations[2] (id 5002): field attributes"),
    (("images", 3, "taken"), "images[3] (id 121): field taken"),
    (("info", "year"), "field info.year"),
    (("categories", 0, "weight"), "categories[0] (id 1): field weight"),
]


@pytest.mark.parametrize("token", ["NaN", "Infinity", "-Infinity", "1e309"])
@pytest.mark.parametrize("place, named", _NON_FINITE_PLACES)
def test_non_finite_numbers_anywhere_are_refused_naming_record_and_field(
        project, coco_file, tmp_path, place, named, token):
    """RFC 8259, section 6: JSON has no NaN or Infinity; a number past the range of a double
    (1e309) would be read as Infinity. Fields Posewright passes through unchanged were let in
    before, and their export then failed. Synthetic data."""
    ds = _load(coco_file)
    parent = ds
    for key in place[:-1]:
        parent = parent[key]
    parent[place[-1]] = "@@"
    path = _write(tmp_path, json.dumps(ds).replace('"@@"', token), "odd.json")
    with pytest.raises(BadInput) as err:
        import_coco(project, path)
    assert str(err.value).startswith(f"{path}: {named}: ")
    assert "is not a finite number" in str(err.value)
    assert project.counts()["people"] == 0 and project.history() == []


@pytest.mark.parametrize("value", [7, 2, -1, True, 1.0, "1", None])
def test_iscrowd_other_than_0_and_1_is_refused(project, coco_file, tmp_path, value):
    """COCO data format (https://cocodataset.org/#format-data): iscrowd is 0 or 1; 7 used to
    come back as 1. Synthetic data."""
    ds = _load(coco_file)
    ds["annotations"][0]["iscrowd"] = value
    with pytest.raises(BadInput, match=r"annotations\[0\] \(id 5000\): field iscrowd"):
        import_coco(project, _write(tmp_path, ds, "crowd.json"))
    assert project.counts()["people"] == 0


@pytest.mark.parametrize("record, field", [
    ("annotations", "id"), ("annotations", "image_id"), ("images", "id"),
    ("categories", "id")])
@pytest.mark.parametrize("value", [2**63, 2**64 + 5, -(2**63) - 1, 2**53])
def test_ids_beyond_what_json_holds_exactly_are_refused(project, coco_file, tmp_path, record,
                                                        field, value):
    """RFC 8259, section 6: integers in [-(2**53)+1, 2**53-1] are interoperable; SQLite
    integers are 64-bit (2**63 raised OverflowError before). Synthetic data."""
    ds = _load(coco_file)
    ds[record][0][field] = value
    with pytest.raises(BadInput, match=rf"{record}\[0\] .*field {field}: input should be") \
            as err:
        import_coco(project, _write(tmp_path, ds, "big.json"))
    assert str(value) in str(err.value)
    assert project.counts()["people"] == 0


def test_the_largest_exact_id_is_accepted(project, coco_file, tmp_path):
    ds = _load(coco_file)
    ds["annotations"][0]["id"] = 2**53 - 1
    import_coco(project, _write(tmp_path, ds, "top.json"))
    assert 2**53 - 1 in {p.id for ps in project.people_by_frame().values() for p in ps}


def test_negative_image_ids_in_any_order_are_taken(project, coco_file, tmp_path):
    """Frames take the image ids of the file; renumbering went through temporary ids that
    negative image ids could collide with (IntegrityError). Synthetic data; checked with
    pycocotools (it reads the export with the same ids)."""
    from pycocotools.coco import COCO

    ds = _load(coco_file)
    new_ids = [-3, -5, 2, -2, 1, -1]  # -3 and -2 once landed on the temporary ids of 2 and 1
    old_ids = [im["id"] for im in ds["images"]]
    for image, new in zip(ds["images"], new_ids):
        image["id"] = new
    for ann in ds["annotations"]:
        ann["image_id"] = new_ids[old_ids.index(ann["image_id"])]
    path = _write(tmp_path, ds, "negative.json")
    import_coco(project, path)
    assert [f.id for f in project.frames()] == sorted(new_ids)
    out = tmp_path / "out.json"
    export_coco(project, out, states=None)  # every state, untouched frames included
    got = _load(out)
    for key, order in (("images", "id"), ("annotations", "id")):
        assert sorted(got.pop(key), key=lambda r: r[order]) == \
            sorted(ds.pop(key), key=lambda r: r[order])
    assert got == ds
    assert sorted(COCO(str(out)).getImgIds()) == sorted(new_ids)


def _holding_non_finite(project):
    """A project as an import made before non-finite numbers were refused left it: NaN and
    infinity in the fields kept for the round trip (written here through the store's bulk
    writer, as that import did). Synthetic data."""
    from app.model import Person

    kp = np.zeros((17, 3))
    kp[:4] = [[10, 20, 2], [30, 25, 1], [22, 40, 2], [12, 44, 2]]
    person = Person(41, kp, np.full(17, np.nan), ("import",) * 17, None,
                    {"bbox": [0, 0, float("inf"), 3], "area": float("nan"), "iscrowd": 0,
                     "attributes": {"weight": float("-inf")}})
    with project.bulk("ImportCoco", "import dataset old.json", "file:old.json") as b:
        b.add_people([(1, person)])
        b.set_meta("coco_dataset_extra", json.dumps({"info": {"year": float("nan")}}))
    # Written as an import before such numbers were refused wrote it (the store now refuses).
    with sqlite3.connect(project.folder / "project.db") as conn:
        conn.execute("UPDATE frames SET extra = ? WHERE id = 2",
                     (json.dumps({"taken": float("inf")}),))
    conn.close()
    return person


def _strict(text):
    def refuse(token):
        raise ValueError(f"{token} in the output")

    return json.loads(text, parse_constant=refuse)


def test_a_project_holding_non_finite_numbers_still_exports(project, tmp_path, caplog):
    """The export is strict JSON (RFC 8259) that pycocotools reads; the box and area of the
    person are computed as for a person without imported ones (tight box around the labelled
    joints, area w * h: common practice, no source); every other such value is null, and a
    warning names the record, the field and the mend."""
    from pycocotools.coco import COCO

    _holding_non_finite(project)
    out = tmp_path / "out.json"
    export_coco(project, out, states=None)  # every state, untouched frames included
    ds = _strict(out.read_text())
    ann = ds["annotations"][0]
    assert ann["bbox"] == [10.0, 20.0, 20.0, 24.0] and ann["area"] == 480.0
    assert ann["attributes"] == {"weight": None}
    assert ds["images"][1]["taken"] is None and ds["info"] == {"year": None}
    COCO(str(out))
    warned = [r.getMessage() for r in caplog.records if r.levelname == "WARNING"]
    assert len(warned) == 5
    assert any("annotations[0] (id 41): field bbox.2: Infinity, written as [10.0, 20.0, 20.0, "
               "24.0]" in w for w in warned)
    assert any("annotations[0] (id 41): field area: NaN, written as 480.0" in w for w in warned)
    assert any("images[1] (id 2): field taken: Infinity, written as null" in w for w in warned)
    assert all(f"`posewright mend {project.folder}` mends the project" in w for w in warned)


def test_mend_replaces_them_for_good_and_the_export_does_not_change(project, tmp_path,
                                                                   caplog):
    from app.jobs import mend_numbers

    person = _holding_non_finite(project)
    before = tmp_path / "before.json"
    export_coco(project, before, states=None)  # every state, untouched frames included
    notes = mend_numbers(project)
    assert sorted(notes) == sorted([
        "frame 1: person #41: field bbox.2: dropped", "frame 1: person #41: field area: dropped",
        "frame 1: person #41: field attributes.weight: null",
        "image 2: field taken: null", "dataset: field info.year: null"])
    assert project.frame(1).state.value == "untouched"
    caplog.clear()
    after = tmp_path / "after.json"
    export_coco(project, after, states=None)  # every state, untouched frames included
    assert not [r for r in caplog.records if r.levelname == "WARNING"]
    assert _strict(after.read_text()) == _strict(before.read_text())
    assert mend_numbers(project) == []
    project.undo()  # the people's part is an ordinary undoable edit
    assert project.people(1)[0].extra["bbox"][2] == float("inf")
    assert person.id == 41


def test_reimport_is_refused_as_a_whole(project, coco_file):
    import_coco(project, coco_file)
    n = project.counts()["people"]
    with pytest.raises(BadInput, match="already in the project"):
        import_coco(project, coco_file)
    assert project.counts()["people"] == n


def test_crowd_annotations_become_ignore_regions_and_round_trip(project, coco_file, tmp_path):
    ds = _load(coco_file)
    ds["annotations"].append({"id": 9000, "image_id": ds["images"][0]["id"], "category_id": 1,
                              "iscrowd": 1, "segmentation": [[1, 1, 60, 1, 60, 50, 1, 50]],
                              "bbox": [1, 1, 59, 49], "area": 2891.0, "num_keypoints": 0,
                              "keypoints": [0] * 51})
    path = _write(tmp_path, ds, "crowd.json")
    import_coco(project, path)
    assert project.regions(ds["images"][0]["id"])[0][1] == [[1, 1, 60, 1, 60, 50, 1, 50]]
    out = tmp_path / "out.json"
    export_coco(project, out, states=None)  # every state, untouched frames included
    got = _load(out)
    assert sorted(got.pop("annotations"), key=lambda a: a["id"]) == \
        sorted(ds.pop("annotations"), key=lambda a: a["id"])
    assert got == ds


# ---------------------------------------------------------------- fuzzing

_json_values = st.recursive(
    st.none() | st.booleans() | st.integers(-10**12, 10**12) | st.floats(allow_nan=True)
    | st.text(max_size=6)
    | st.sampled_from([7, -1, 2**53, 2**63, -(2**63) - 1, 2**64 + 1, 10**400]),
    lambda inner: st.lists(inner, max_size=4) | st.dictionaries(st.text(max_size=8), inner,
                                                                   max_size=4),
    max_leaves=12)

#: Raw JSON text put in place of a value: what json.dumps never writes but a file may hold.
_RAW_TOKENS = ["NaN", "-Infinity", "1e309", "-1e999", "1" + "0" * 5000,
               "[" * 70 + "]" * 70, "[" * 50_000 + "]" * 50_000, '{"a": ' * 3000 + "1" + "}" * 3000]


@settings(max_examples=120, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(st.data())
def test_random_malformed_input_never_crashes_and_never_half_imports(
        image_dir, coco_file, tmp_path_factory, data):
    """Synthetic mutations of a valid file: replace one value anywhere (also by raw text such
    as NaN, 1e309 or deep nesting), drop one key, or cut the text; the import either succeeds
    whole, and then the project exports strict JSON (RFC 8259), or raises BadInput in one line
    and writes nothing."""
    ds = _load(coco_file)
    paths = []

    def collect(node, path):
        paths.append(path)
        if isinstance(node, dict):
            for k, v in node.items():
                collect(v, (*path, k))
        elif isinstance(node, list):
            for i, v in enumerate(node[:3]):
                collect(v, (*path, i))

    collect(ds, ())
    mode = data.draw(st.sampled_from(["replace", "raw", "drop", "cut"]))
    target = data.draw(st.sampled_from(paths[1:]))
    if mode == "cut":
        text = json.dumps(ds)
        text = text[: data.draw(st.integers(0, len(text) - 1))]
    else:
        parent = ds
        for key in target[:-1]:
            parent = parent[key]
        if mode == "replace":
            parent[target[-1]] = data.draw(_json_values)
        elif mode == "raw":
            parent[target[-1]] = "@@raw@@"
        elif isinstance(parent, dict):
            del parent[target[-1]]
        else:
            parent.pop(target[-1])
        text = json.dumps(ds).replace('"@@raw@@"', data.draw(st.sampled_from(_RAW_TOKENS)))
    folder = tmp_path_factory.mktemp("fuzz")
    path = folder / "fuzz.json"
    path.write_text(text)
    with new_project(folder / "proj", images=image_dir) as project:
        frames_before = project.frames()
        try:
            import_coco(project, path)
        except BadInput as exc:
            assert "fuzz.json" in str(exc) and "\n" not in str(exc)
            assert project.counts()["people"] == 0 and project.history() == []
            assert project.frames() == frames_before
        else:
            # Accepted whole: every person of the file is in, and it all exports.
            people = [a for a in ds["annotations"] if not a.get("iscrowd")]
            assert project.counts()["people"] == len(people)
            export_coco(project, folder / "out.json", states=None)
            json.loads((folder / "out.json").read_text(), parse_constant=_refuse_constant)


def test_an_integer_past_a_floats_range_in_keypoints_is_refused_in_one_line(
        image_dir, coco_file, tmp_path):
    """JSON (RFC 8259) allows integers of any size; one past the largest IEEE 754 double
    (about 1.8e308) is refused in one line naming the record, and nothing is written (found
    by the fuzz test above)."""
    ds = _load(coco_file)
    ds["annotations"][2]["keypoints"][0] = 10**400
    path = tmp_path / "big.json"
    path.write_text(json.dumps(ds))
    with new_project(tmp_path / "proj", images=image_dir) as project:
        with pytest.raises(BadInput, match=r"annotations\[2\].*keypoints\.0: an integer past"):
            import_coco(project, path)
        assert project.counts()["people"] == 0 and project.history() == []


def _refuse_constant(token):
    raise AssertionError(f"{token} in a file that must be strict JSON")


@pytest.fixture
def small_pieces(monkeypatch):
    """Read files 7 characters at a time and write 2 people per batch, so that the small
    synthetic files cross every boundary a large file does."""
    from app.fileio import JsonStream
    from app.formats import coco

    monkeypatch.setattr(JsonStream, "CHUNK", 7)
    monkeypatch.setattr(coco, "BATCH", 2)


def _people_of(project):
    return sorted((p.id, f.id, np.nan_to_num(p.keypoints, nan=-1).tolist())
                  for f in project.frames() for p in project.people(f.id))


def test_read_in_pieces_imports_what_a_whole_read_does(project, coco_file, tmp_path,
                                                       image_dir, small_pieces):
    """Synthetic data. Read 7 characters at a time in batches of 2 people, with the annotations
    before the images (a second reading), a crowd region and keys after the annotations, the
    import equals the whole-file reading of the same file (pycocotools-checked elsewhere)."""
    from app.formats.coco import read_coco

    ds = _load(coco_file)
    ds["annotations"].append({"id": 6000, "image_id": ds["images"][0]["id"], "category_id": 1,
                              "iscrowd": 1, "segmentation": [[1, 1, 30, 1, 30, 20]]})
    reordered = {"info": {"note": "synthetic"}, "annotations": ds["annotations"],
                 "images": ds["images"], "categories": ds["categories"],
                 "licenses": [{"id": 1}]}
    path = _write(tmp_path, json.dumps(reordered, indent=1), "reordered.json")
    whole = read_coco(path, project.skeleton, project.frames())
    stats = import_coco(project, path)
    assert stats["people"] == len(whole.people) == 18 and stats["ignore regions"] == 1
    assert _people_of(project) == sorted(
        (p.id, f, np.nan_to_num(p.keypoints, nan=-1).tolist()) for f, p in whole.people)
    out = tmp_path / "out.json"
    export_coco(project, out, states=None)
    back = _load(out)
    assert back["info"] == {"note": "synthetic"} and back["licenses"] == [{"id": 1}]


def test_a_problem_in_the_last_batch_leaves_nothing(project, coco_file, tmp_path,
                                                    small_pieces):
    """All or nothing across batches: the 18th of 18 people is wrong (synthetic data)."""
    ds = _load(coco_file)
    ds["annotations"][-1]["keypoints"][2] = 3
    path = _write(tmp_path, json.dumps(ds), "late.json")
    with pytest.raises(BadInput, match=r"annotations\[17\] \(id \d+\): field keypoints: "
                                       "visibility 3 of joint 0"):
        import_coco(project, path)
    assert project.counts()["people"] == 0 and project.history() == []
    assert [f.id for f in project.frames()] == [1, 2, 3, 4, 5, 6]


def test_results_read_in_pieces_decide_scores_on_the_whole_file(project, coco_file, tmp_path,
                                                                 small_pieces):
    """The third keypoint values are scores when any of them, in any batch, is not 0, 1 or
    2 (synthetic results)."""
    import_coco(project, coco_file)
    image_id = project.frames()[0].id
    results = [{"image_id": image_id, "category_id": 1, "score": 0.5,
                "keypoints": [10.0 + j, 20.0, 1] * 17} for j in range(5)]
    results[4]["keypoints"][2] = 0.25  # only the last batch holds a score
    path = _write(tmp_path, json.dumps(results), "res.json")
    before = project.counts()["people"]
    assert import_coco(project, path)["people"] == 5
    new = sorted((p for p in project.people(image_id) if p.sources[0] == "auto"),
                 key=lambda p: p.id)
    assert len(new) == 5 and project.counts()["people"] == before + 5
    assert new[0].scores[0] == 1.0 and new[4].scores[0] == 0.25
    assert new[0].keypoints[0, 2] == 2
def test_track_ids_round_trip_and_pycocotools_still_loads_the_file(project, coco_file,
                                                                  tmp_path):
    """Source: pycocotools COCO reads our export with ``track_id`` on each annotation (an
    extra field, as track-annotated COCO-style datasets carry it; common practice, no
    source) and evaluates it against the original as perfect. Data synthetic."""
    from pycocotools.coco import COCO
    from pycocotools.cocoeval import COCOeval

    from app.model import SetTrack

    ds = _load(coco_file)
    for n, a in enumerate(ds["annotations"]):
        a["track_id"] = n % 3  # from 0, as some datasets number them
    tracked = _write(tmp_path, ds, "tracked.json")
    import_coco(project, tracked)
    people = [p for ps in project.people_by_frame().values() for p in ps]
    assert {(p.track, p.track_source) for p in people} == {(0, "import"), (1, "import"),
                                                          (2, "import")}
    assert all("track_id" not in p.extra for p in people)
    out = tmp_path / "out.json"
    export_coco(project, out, states=None)
    assert _load(out) == ds
    # An edited track is exported as edited.
    frame = project.frames()[0].id
    moved = project.people(frame)[0]
    project.apply(SetTrack(frame, moved.id, 40))
    export_coco(project, out, states=None)
    exported = COCO(str(out))
    assert exported.anns[moved.id]["track_id"] == 40
    gt = COCO(str(tracked))
    dets = [dict(a, score=1.0) for a in exported.dataset["annotations"] if a["num_keypoints"]]
    ev = COCOeval(gt, gt.loadRes(dets), iouType="keypoints")
    ev.evaluate()
    ev.accumulate()
    ev.summarize()
    assert ev.stats[0] == pytest.approx(1.0)


@pytest.mark.parametrize("value", [-1, 1.5, "7", True])
def test_a_track_id_that_is_not_a_whole_number_is_refused(project, coco_file, tmp_path, value):
    ds = _load(coco_file)
    ds["annotations"][4]["track_id"] = value
    with pytest.raises(BadInput, match=r"annotations\[4\].*field track_id"):
        import_coco(project, _write(tmp_path, ds, "bad.json"))
    assert project.counts()["people"] == 0


_FIELD_VALUES = st.one_of(
    st.none(), st.booleans(), st.integers(-2**60, 2**60), st.sampled_from([2**53 - 1, 2**53]),
    st.floats(allow_nan=False, allow_infinity=False), st.text(max_size=3),
    st.lists(st.one_of(st.integers(-5, 5), st.floats(-1e3, 1e3), st.booleans(), st.none(),
                       st.text(max_size=1)), max_size=6))


@settings(max_examples=300, deadline=None)
@given(st.lists(st.fixed_dictionaries(
    {}, optional={k: _FIELD_VALUES for k in ("id", "image_id", "category_id", "keypoints",
                                             "iscrowd", "score", "area")}), max_size=3))
def test_the_quick_reading_of_annotations_agrees_with_pydantic(records):
    """Synthetic records of every field type: whatever the quick reading accepts, the
    pydantic model accepts with the same values, and whatever pydantic refuses, the quick
    reading leaves to it (pydantic's strict types are the reference)."""
    from pydantic import ValidationError

    from app.formats.coco import _ANNOTATIONS, plain_annotations

    quick = plain_annotations(records)
    try:
        full = _ANNOTATIONS.validate_python(records)
    except ValidationError:
        assert quick is None
        return
    if quick is not None:
        assert [(a.id, a.image_id, a.category_id, a.keypoints, a.iscrowd, a.score)
                for a in full] == [tuple(a) for a in quick]
