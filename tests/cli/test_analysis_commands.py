"""import-maps, triage and targets from the command line, on synthetic maps drawn by our own
target functions from synthetic people (Cao et al. 2017 formulas; no real data)."""

import json

import numpy as np
import pytest

from app.analysis.targets import confidence_maps, part_affinity_fields
from app.cli import main
from app.model import coco_body
from app.store import Project
from tests.analysis.synth import person

SK = coco_body()


@pytest.fixture
def maps_dir(tmp_path, image_dir):
    """One maps file per image: two or three well separated synthetic people each."""
    rng = np.random.default_rng(11)
    folder = tmp_path / "maps"
    folder.mkdir()
    truth = {}
    for i, img in enumerate(sorted(image_dir.iterdir())):
        people = np.stack([person(rng, (60.0 + 100 * n, 150.0), 120.0) for n in range(2 + i % 2)])
        truth[img.name] = people
        np.savez_compressed(folder / (img.stem + ".npz"),
                            confidence_maps=confidence_maps(people, (320, 240), 4, 5.0),
                            pafs=part_affinity_fields(people, SK.limbs, (320, 240), 4, 5.0),
                            stride=np.int64(4))
    return folder, truth


def test_import_maps_groups_auto_labels_and_keeps_maps(tmp_path, image_dir, maps_dir, capsys):
    folder, truth = maps_dir
    proj = tmp_path / "p"
    assert main(["new", str(proj), "--images", str(image_dir), "-q"]) == 0
    capsys.readouterr()
    assert main(["import-maps", str(proj), str(folder), "-q", "--json"]) == 0
    stats = json.loads(capsys.readouterr().out)
    assert stats["frames with maps"] == 6
    with Project.open(proj) as p:
        for f in p.frames():
            people = p.people(f.id)
            assert len(people) == len(truth[f.file_name])
            assert all(q.sources[5] == "auto" and np.isfinite(q.scores[5]) for q in people)
            assert p.maps_path(f.id) is not None
    # Importing again adds no people: frames that have people keep them.
    capsys.readouterr()
    assert main(["import-maps", str(proj), str(folder), "-q"]) == 0
    line = capsys.readouterr().out
    assert "frames grouped" in line or "frame grouped" in line
    assert "groupeds" not in line and "mapss" not in line
    with Project.open(proj) as p:
        assert p.counts()["people"] == sum(len(t) for t in truth.values())


def test_import_maps_groups_with_the_frame_before_unless_told_each_frame_alone(
        tmp_path, image_dir, maps_dir):
    """The six synthetic frames are one sequence (one image folder): by default each is
    grouped with the frame before and records so; --each-frame-alone groups and records each
    alone; the two flags together are refused (our own rule)."""
    folder, _ = maps_dir
    recorded = {}
    for flags in ((), ("--each-frame-alone",)):
        proj = tmp_path / f"p{len(flags)}"
        assert main(["new", str(proj), "--images", str(image_dir), "-q"]) == 0
        assert main(["import-maps", str(proj), str(folder), "-q", *flags]) == 0
        with Project.open(proj, read_only=True) as p:
            recorded[flags] = {f.grouping for f in p.frames()}
    assert recorded[()] == {"frame-before"}
    assert recorded[("--each-frame-alone",)] == {"alone"}
    with pytest.raises(SystemExit):
        main(["import-maps", str(tmp_path / "p0"), str(folder), "--frame-before",
              "--each-frame-alone"])


def test_triage_ranks_and_stores_reasons(tmp_path, image_dir, maps_dir, capsys):
    folder, _ = maps_dir
    proj = tmp_path / "p"
    main(["new", str(proj), "--images", str(image_dir), "-q"])
    main(["import-maps", str(proj), str(folder), "-q"])
    with Project.open(proj, author="ana") as p:
        f = p.frames()[0]
        q = p.people(f.id)[0]
        from app.model import MoveJoint

        x, y = q.keypoints[SK.index("left_ankle"), :2]
        p.apply(MoveJoint(f.id, q.id, SK.index("left_ankle"), x + 150.0, y))  # way too long
    capsys.readouterr()
    assert main(["triage", str(proj), "-q", "--json"]) == 0
    ranked = json.loads(capsys.readouterr().out)
    # The frame comes first; whether one stretched limb alone flags the person depends on
    # the fitted weights (prior -4.1 and weight 2.5: suspicion 0.168, under 1/5).
    assert ranked[0]["frame"] == f.id
    assert set(ranked[0]["flagged_people"]) <= {r["person"] for r in ranked[0]["reasons"]}
    assert any(r["kind"] == "stretched-limb" and r["person"] == q.id
               for r in ranked[0]["reasons"])
    assert [r["score"] for r in ranked] == sorted((r["score"] for r in ranked), reverse=True)
    with Project.open(proj) as p:
        assert p.frame(f.id).suspicion == pytest.approx(ranked[0]["score"], abs=1e-4)


def test_targets_export_round_trip(tmp_path, image_dir, maps_dir, capsys):
    """The export re-read equals the formulas applied to the stored labels, and the manifest
    carries every parameter and the skeleton."""
    folder, _ = maps_dir
    proj = tmp_path / "p"
    main(["new", str(proj), "--images", str(image_dir), "-q"])
    main(["import-maps", str(proj), str(folder), "-q"])
    out = tmp_path / "targets"
    assert main(["targets", str(proj), str(out), "--states", "all", "--stride", "4",
                 "--sigma", "5", "--limb-width", "6", "-q"]) == 0
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["parameters"]["stride"] == 4 and manifest["parameters"]["sigma"] == 5.0
    assert manifest["skeleton"] == SK.to_dict() and len(manifest["frames"]) == 6
    with Project.open(proj) as p:
        entry = manifest["frames"][0]
        kp = np.stack([q.keypoints for q in p.people(entry["id"])])
    with np.load(out / entry["targets"], allow_pickle=False) as npz:
        assert npz["confidence_maps"].shape == (17, 60, 80)
        np.testing.assert_allclose(npz["confidence_maps"], confidence_maps(kp, (320, 240), 4, 5.0))
        np.testing.assert_allclose(npz["pafs"], part_affinity_fields(kp, SK.limbs, (320, 240), 4,
                                                                     6.0))
        assert npz["loss_mask"].shape == (17 + 38, 60, 80)
    # Nothing corrected yet: the default export (corrected, signed-off) is empty but valid.
    out2 = tmp_path / "targets2"
    assert main(["targets", str(proj), str(out2), "-q"]) == 0
    assert json.loads((out2 / "manifest.json").read_text())["frames"] == []
    # An existing, non-empty folder is refused and left alone.
    assert main(["targets", str(proj), str(out), "-q"]) == 2
    assert (out / "manifest.json").exists()


def test_bad_maps_folder_changes_nothing(tmp_path, image_dir, maps_dir, capsys):
    folder, _ = maps_dir
    np.savez(folder / "frame_0003.npz", confidence_maps=np.zeros((17, 5, 5)),
             pafs=np.zeros((19, 2, 5, 5)), stride=np.int64(4))
    proj = tmp_path / "p"
    main(["new", str(proj), "--images", str(image_dir), "-q"])
    capsys.readouterr()
    assert main(["import-maps", str(proj), str(folder), "-q"]) == 2
    err = capsys.readouterr().err
    assert "frame_0003.npz: key confidence_maps: shape" in err and err.count("\n") == 1
    with Project.open(proj) as p:
        assert p.counts()["people"] == 0 and p.maps_path(1) is None
