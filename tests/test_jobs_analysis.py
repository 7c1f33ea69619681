"""The training-target export: the round trip, the loss-mask rule on crafted frames, the
README's numpy-only loader, and `targets --check` finding what is wrong with an export.

Formulas: Cao et al., "Realtime Multi-Person 2D Pose Estimation using Part Affinity Fields",
CVPR 2017, Sec. 2.2-2.3 (maps and fields; the loss mask of Sec. 2.1 with our own box rule,
documented in app/analysis/targets.loss_mask). The frames and people are synthetic.
"""

import json
import math
import re
import shutil
from pathlib import Path

import cv2
import numpy as np
import pytest

from app.analysis.targets import cell_centres, confidence_maps, part_affinity_fields
from app.cli import main
from app.jobs import import_coco, new_project
from app.jobs_analysis import check_targets
from app.model import coco_body
from tests.cli.test_analysis_commands import maps_dir  # noqa: F401  (a fixture)

SK = coco_body()
W, H, STRIDE, SIGMA, WIDTH = 160, 120, 4, 3.0, 4.0
README = Path(__file__).resolve().parents[1] / "README.md"


def _person(x0, y0, unlabeled=()):
    """A synthetic upright COCO-17 person, 2 pixels per unit, feet near y0 + 80."""
    shape = np.array([[0, 0], [-2, -2], [2, -2], [-4, 0], [4, 0], [-8, 10], [8, 10],
                      [-10, 22], [10, 22], [-11, 32], [11, 32], [-5, 34], [5, 34],
                      [-5, 48], [5, 48], [-5, 62], [5, 62]], float)
    kp = np.zeros((17, 3))
    kp[:, :2] = np.array([x0, y0]) + shape
    kp[:, 2] = 2
    for j in unlabeled:
        kp[j] = 0
    return kp


#: Person 1 lacks the left wrist; person 2 is complete; a crowd region fills a corner.
PEOPLE = [_person(40, 20, unlabeled=[SK.index("left_wrist")]), _person(120, 30)]
CROWD = [118.0, 90.0, 159.0, 90.0, 159.0, 119.0, 118.0, 119.0]


@pytest.fixture
def export(tmp_path):
    """A one-frame project with the crafted people and crowd region, exported as float16."""
    images = tmp_path / "images"
    images.mkdir()
    cv2.imwrite(str(images / "a.png"), np.full((H, W, 3), 90, np.uint8))
    anns = [{"id": 10 + n, "image_id": 1, "category_id": 1, "iscrowd": 0,
             "keypoints": [float(v) if i % 3 < 2 else int(v) for i, v in enumerate(p.ravel())],
             "num_keypoints": int((p[:, 2] > 0).sum())} for n, p in enumerate(PEOPLE)]
    anns.append({"id": 20, "image_id": 1, "category_id": 1, "iscrowd": 1,
                 "segmentation": [CROWD], "num_keypoints": 0})
    labels = tmp_path / "labels.json"
    labels.write_text(json.dumps({"images": [{"id": 1, "file_name": "a.png", "width": W,
                                              "height": H}],
                                  "annotations": anns,
                                  "categories": [SK.coco_category()]}))
    proj = tmp_path / "p"
    with new_project(proj, images=images, author="ana") as p:
        import_coco(p, labels)
    out = tmp_path / "targets"
    assert main(["targets", str(proj), str(out), "--states", "all", "--stride", str(STRIDE),
                 "--sigma", str(SIGMA), "--limb-width", str(WIDTH), "--dtype", "float16",
                 "-q"]) == 0
    return proj, out


def _arrays(out):
    entry = json.loads((out / "manifest.json").read_text())["frames"][0]
    with np.load(out / entry["targets"], allow_pickle=False) as npz:
        return {k: npz[k] for k in npz.files}


def test_export_round_trip(export, capsys):
    """The file holds the formulas applied to the stored labels, in the manifest's dtype, and
    the manifest carries the parameters and the skeleton; `--check` agrees."""
    proj, out = export
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["parameters"]["dtype"] == "float16" and manifest["skeleton"] == SK.to_dict()
    assert manifest["frames"][0]["grid"] == [30, 40]
    arrays = _arrays(out)
    kp = np.stack(PEOPLE)
    assert all(a.dtype == np.float16 for a in arrays.values())
    np.testing.assert_allclose(arrays["confidence_maps"],
                               confidence_maps(kp, (W, H), STRIDE, SIGMA), atol=1e-3)
    np.testing.assert_allclose(arrays["pafs"],
                               part_affinity_fields(kp, SK.limbs, (W, H), STRIDE, WIDTH),
                               atol=1e-3)
    assert check_targets(out).problems == []
    capsys.readouterr()
    assert main(["targets", "--check", str(out)]) == 0
    assert capsys.readouterr().out == f"ok: 1 frame checked in {out}\n"
    assert main(["targets", str(proj), str(out), "--check", "-q"]) == 0


def test_manifest_paths_are_relative_to_the_export(export, tmp_path):
    """No absolute path (a home folder, a user name) in the manifest: each image is named
    relative to the export, the images folder beside it, and both still lead to the image
    after the export and the project move together."""
    _, out = export
    manifest = json.loads((out / "manifest.json").read_text())
    entry = manifest["frames"][0]
    assert entry["image"] == "../images/a.png" and manifest["images_root"] == "../images"
    assert str(tmp_path) not in (out / "manifest.json").read_text()
    moved = tmp_path / "moved"
    moved.mkdir()
    for name in ("images", "targets"):
        shutil.move(str(tmp_path / name), str(moved / name))
    assert (moved / "targets" / entry["image"]).is_file()
    assert (moved / "targets" / manifest["images_root"] / entry["file_name"]).is_file()


def test_check_reports_hostile_target_files_without_allocating(export):
    """Synthetic hostile file: a loss_mask whose .npy header declares 633 GiB; the check
    names the file and member instead of asking numpy for the memory."""
    import io
    import zipfile

    _, out = export
    name = json.loads((out / "manifest.json").read_text())["frames"][0]["targets"]
    arrays = _arrays(out)
    header = io.BytesIO()
    np.lib.format.write_array_header_1_0(
        header, {"descr": "<f4", "fortran_order": False, "shape": (17, 300_000, 33_333)})
    with zipfile.ZipFile(out / name, "w") as z:
        for key in ("confidence_maps", "pafs"):
            buffer = io.BytesIO()
            np.save(buffer, arrays[key])
            z.writestr(f"{key}.npy", buffer.getvalue())
        z.writestr("loss_mask.npy", header.getvalue() + b"\0" * 64)
    problems = check_targets(out).problems
    assert len(problems) == 1
    assert "member 'loss_mask.npy': its header declares 679,993,200,000 bytes" in problems[0]


def test_loss_mask_rule_on_crafted_frames(export):
    """Zero on every channel inside the ignore region; zero on the unlabeled left wrist's
    channel and on both channels of the elbow-wrist limb inside person 1's box, one
    elsewhere; every other channel one outside the region. The box (tight box of the labelled
    joints grown by max(0.25 * its larger side, 3 sigma)) is worked out here by hand."""
    _, out = export
    mask = _arrays(out)["loss_mask"].astype(np.float32)
    k = SK.num_joints
    xs, ys = cell_centres(40, STRIDE)[None, :], cell_centres(30, STRIDE)[:, None]
    region = (xs > 118) & (xs < 159) & (ys > 90) & (ys < 119)
    assert region.sum() > 20 and np.all(mask[:, region] == 0)
    labelled = PEOPLE[0][PEOPLE[0][:, 2] > 0, :2]
    lo, hi = labelled.min(axis=0), labelled.max(axis=0)
    grow = max(0.25 * (hi - lo).max(), 3 * SIGMA)
    box = ((xs >= lo[0] - grow) & (xs <= hi[0] + grow) & (ys >= lo[1] - grow)
           & (ys <= hi[1] + grow))
    wrist = SK.index("left_wrist")
    limb = SK.limbs.index((SK.index("left_elbow"), wrist))
    for channel in (wrist, k + 2 * limb, k + 2 * limb + 1):
        np.testing.assert_array_equal(mask[channel], np.where(box | region, 0.0, 1.0))
    others = [c for c in range(mask.shape[0]) if c not in (wrist, k + 2 * limb, k + 2 * limb + 1)]
    assert np.all(mask[others][:, ~region] == 1)


def test_the_readme_loader_reads_the_export(export):
    """The loader printed in the README runs as written (numpy only) and gives the target and
    mask channels in the same order."""
    _, out = export
    text = README.read_text(encoding="utf-8")
    section = text.split("### Loading the training targets", 1)[1]
    code = re.search(r"```python\n(.*?)```", section, re.S).group(1)
    scope: dict = {}
    exec(compile(code, "README.md", "exec"), scope)
    (entry, target, mask), = list(scope["load_targets"](out))
    assert entry["width"] == W and target.shape == mask.shape == (17 + 38, 30, 40)
    arrays = _arrays(out)
    np.testing.assert_array_equal(target[17 + 2 * 3 + 1], arrays["pafs"][3, 1])


def _rewrite(path, **change):
    with np.load(path, allow_pickle=False) as npz:
        arrays = {k: npz[k] for k in npz.files}
    arrays.update(change)
    for key in [k for k, v in change.items() if v is None]:
        arrays.pop(key)
    np.savez_compressed(path, **arrays)


@pytest.mark.parametrize("spoil, words", [
    (lambda f: _rewrite(f, confidence_maps=np.full((17, 30, 40), 1.5, np.float16)),
     "key confidence_maps: values from 1.5 to 1.5, outside [0, 1]"),
    (lambda f: _rewrite(f, pafs=np.full((19, 2, 30, 40), 0.9, np.float16)),
     "key pafs: a vector is 1.27"),
    (lambda f: _rewrite(f, loss_mask=np.full((55, 30, 40), 0.5, np.float16)),
     "key loss_mask: holds values other than 0 and 1"),
    (lambda f: _rewrite(f, loss_mask=np.ones((55, 30, 40), np.float32)),
     "key loss_mask: dtype float32, the manifest says float16"),
    (lambda f: _rewrite(f, pafs=np.zeros((19, 2, 30, 41), np.float16)),
     "key pafs: shape (19, 2, 30, 41), expected (19, 2, 30, 40)"),
    (lambda f: _rewrite(f, pafs=None), "keys ['confidence_maps', 'loss_mask'], expected"),
    (lambda f: _rewrite(f, confidence_maps=np.full((17, 30, 40), np.nan, np.float16)),
     "key confidence_maps: holds values that are not finite"),
    (lambda f: f.write_bytes(b"junk"), "not a readable .npz"),
    (lambda f: shutil.copy(f, f.with_name("stray.npz")), "stray.npz: no frame of the "
                                                         "manifest names this file"),
])
def test_check_finds_what_is_wrong(export, capsys, spoil, words):
    _, out = export
    spoil(out / "1.npz")
    problems = check_targets(out).problems
    assert len(problems) == 1 and words in problems[0]
    capsys.readouterr()
    assert main(["targets", "--check", str(out), "-q"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and words in err


def test_check_reads_the_manifest_strictly(export, tmp_path, capsys):
    _, out = export
    manifest = json.loads((out / "manifest.json").read_text())
    manifest["frames"][0]["grid"] = [31, 40]
    (out / "manifest.json").write_text(json.dumps(manifest))
    assert "field grid [31, 40], expected [30, 40]" in check_targets(out).problems[0]
    manifest["parameters"]["dtype"] = "int8"
    (out / "manifest.json").write_text(json.dumps(manifest))
    capsys.readouterr()
    assert main(["targets", "--check", str(out)]) == 2
    assert "field parameters.dtype: 'int8' is not float16 or float32" in capsys.readouterr().err
    assert main(["targets", "--check", str(tmp_path)]) == 2
    assert "manifest.json: cannot read the manifest" in capsys.readouterr().err
    other = tmp_path / "other"
    main(["new", str(other), "--images", str(tmp_path / "images"), "-q"])
    manifest["parameters"]["dtype"] = "float16"
    manifest["frames"][0]["grid"] = [math.ceil(H / STRIDE), math.ceil(W / STRIDE)]
    (out / "manifest.json").write_text(json.dumps(manifest))
    capsys.readouterr()
    assert main(["targets", str(other), str(out), "--check", "-q"]) == 2
    assert "field project_id: the export was made from another project" in \
        capsys.readouterr().err


def test_import_maps_groups_a_sequence_in_runs_with_the_frame_before(tmp_path, image_dir,
                                                                     maps_dir,  # noqa: F811
                                                                     coco_file, monkeypatch):
    """With frame_before, the six synthetic frames (one image folder, so one sequence) are
    each grouped with the people of the frame before (grouped just now, or kept there), in
    runs of GROUPING_RUN frames whose first has none; once the folder is marked not a
    sequence, or with frame_before=False, no frame has a frame before; the default is
    FRAME_BEFORE (on). (Our own rule;
    group_people's prior is tested in tests/analysis/test_association.py.)

    Each grouped frame records how, read back after reopening (Frame.grouping, for triage's
    weights): ``frame-before`` in a run of two or more, ``alone`` otherwise; a frame that
    kept its people has no record, and labels imported from COCO clear it (our own rule)."""
    from app import map_runs
    from app.jobs_analysis import import_maps
    from app.jobs_tracks import mark_not_sequence
    from app.model import NewPerson
    from app.store import Project

    def recorded(folder):
        with Project.open(folder, read_only=True) as again:
            return [f.grouping for f in again.frames()]

    folder, _ = maps_dir
    calls = []

    def recording(*args, previous=None, **kw):
        found = real(*args, previous=previous, **kw)
        calls.append((previous, found))
        return found

    real = map_runs.group_people  # what the workers (here, this process) call
    monkeypatch.setattr(map_runs, "group_people", recording)
    monkeypatch.setattr(map_runs, "GROUPING_RUN", 4)
    assert map_runs.FRAME_BEFORE  # the default since 3 December 2026
    kept = np.array([(10.0 + k, 20.0 + k, 2) for k in range(17)])
    with new_project(tmp_path / "p", images=image_dir, author="ana") as p:
        third = p.frames()[2]
        p.apply(NewPerson(third.id, None, tuple(map(tuple, kept))))
        import_maps(p, folder, frame_before=True)
    # Frames 1-4 are a run (frame 3 kept its person, so is not grouped), 5-6 the next.
    assert len(calls) == 5
    assert calls[0][0] is None and calls[1][0] is calls[0][1]
    np.testing.assert_array_equal(np.stack(calls[2][0]), kept[None])
    assert calls[3][0] is None and calls[4][0] is calls[3][1]
    run = "frame-before"
    assert recorded(tmp_path / "p") == [run, run, None, run, run, run]
    calls.clear()
    with new_project(tmp_path / "q", images=image_dir, author="ana") as p:
        mark_not_sequence(p, [""])
        import_maps(p, folder, frame_before=True)
    assert len(calls) == 6 and all(previous is None for previous, _ in calls)
    assert recorded(tmp_path / "q") == ["alone"] * 6
    calls.clear()
    with new_project(tmp_path / "r", images=image_dir, author="ana") as p:
        import_maps(p, folder, frame_before=False)  # each frame alone
    assert len(calls) == 6 and all(previous is None for previous, _ in calls)
    assert recorded(tmp_path / "r") == ["alone"] * 6
    with Project.open(tmp_path / "r", author="ana") as p:
        import_coco(p, coco_file)   # labels from elsewhere on every frame
    assert recorded(tmp_path / "r") == [None] * 6


def test_triage_weighs_each_frame_by_its_recorded_grouping(tmp_path, image_dir, maps_dir,  # noqa: F811
                                                           monkeypatch):
    """The triage job weighs each frame by the grouping its project records
    (FrameTriage.grouping, which chooses the weight set) and, for frames grouped alone, does
    not group the maps alone again (held-tie could not speak there). Our own rule; the
    synthetic frames of tests/cli/test_analysis_commands.py."""
    import app.analysis.triage.frame as frame_module
    from app.jobs_analysis import import_maps, run_triage

    folder, _ = maps_dir
    calls = []
    real = frame_module.grouped_alone
    monkeypatch.setattr(frame_module, "grouped_alone",
                        lambda maps, sk: calls.append(1) or real(maps, sk))
    with new_project(tmp_path / "p", images=image_dir, author="ana") as p:
        import_maps(p, folder, frame_before=False)  # each frame alone
        ids = [f.id for f in p.frames()]
        with p.bulk("Test", "record groupings", "test") as b:
            b.set_grouping(ids[:2], "frame-before")
            b.set_grouping(ids[2:3], None)
        results = run_triage(p, findings=False)
    assert [results[f].grouping for f in ids] == ["frame-before"] * 2 + [None] + ["alone"] * 3
    assert len(calls) == 3   # the two frames grouped with the frame before, the unknown one


def test_packing_frames_into_the_workers_items_changes_no_person(
        tmp_path, image_dir, maps_dir, monkeypatch):  # noqa: F811
    """However import-maps packs runs of frames into the items it hands the workers (here
    each run an item, all three runs of two frames in one, or each run an item in the
    reverse order, as the longest runs go first), every frame gets the same
    people with the same ids: each run is still grouped in order from its own first frame.
    Packing is fixed whatever the workers (tests/test_parallel.py compares 1 and 2). (Our
    own rule; the synthetic frames of tests/cli/test_analysis_commands.py.)"""
    from app import jobs_analysis, map_runs
    from app.jobs_analysis import import_maps

    folder, _ = maps_dir
    monkeypatch.setattr(map_runs, "GROUPING_RUN", 2)
    stored = []
    for n, packed in enumerate([jobs_analysis.packed_runs, lambda runs: [runs],
                                lambda runs: [[run] for run in reversed(runs)]]):
        monkeypatch.setattr(jobs_analysis, "packed_runs", packed)
        with new_project(tmp_path / f"p{n}", images=image_dir, author="ana") as p:
            import_maps(p, folder, frame_before=True)
            stored.append({f: [(q.id, q.keypoints.tobytes(), q.scores.tobytes(), q.score)
                               for q in people] for f, people in p.people_by_frame().items()})
    assert sum(len(v) for v in stored[0].values()) >= 12
    assert stored[0] == stored[1] == stored[2]
