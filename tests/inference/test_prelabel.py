"""The pre-labelling job: auto-labels with scores and provenance, maps kept, corrections never
overwritten, all or nothing. Models and frames are synthetic (tests/inference/onnx_models.py);
the grouping is Cao et al. 2017, Sec. 2.4, through app.analysis.association."""

import json

import cv2
import numpy as np
import pytest

from app.errors import Cancelled, NotFound
from app.formats.maps import read_maps
from app.inference.prelabel import parse_frames, prelabel
from app.jobs import new_project
from app.jobs_analysis import load_maps
from app.model import MoveJoint
from app.progress import Progress
from app.store import Project
from tests.inference.onnx_models import colour_dot_model
from tests.inference.test_network import FIELDS, MAPS_FROM, SK, _config, _people_at

XS = ([30.3, 80.7, 131.2], [25.0, 95.0], [40.0, 75.0, 110.0, 145.0])


@pytest.fixture
def setup(tmp_path):
    """A project of three synthetic frames (3, 2 and 4 people), a colour-dot model and its
    config file."""
    images = tmp_path / "images"
    images.mkdir()
    truth = {}
    for n, xs in enumerate(XS):
        people, image = _people_at(xs)
        cv2.imwrite(str(images / f"f{n}.png"), image)
        truth[f"f{n}.png"] = people
    model = colour_dot_model(tmp_path / "dots.onnx", MAPS_FROM, FIELDS, stride=4,
                             channel_order="bgr", mean=(10, 20, 30), scale=(0.5, 0.25, 0.125))
    config = tmp_path / "dots-config.json"
    config.write_text(_config().model_dump_json())
    project = new_project(tmp_path / "proj", images=images, skeleton=SK, author="ana")
    yield project, model, config, truth
    project.close()


def _match(found, truth):
    n = int(np.argmin(np.abs(truth[:, 0, 0] - found[0, 0])))
    return truth[n]


def test_auto_labels_are_stored_with_scores_provenance_and_maps(setup):
    project, model, config, truth = setup
    stats = prelabel(project, model, config)
    run = project.folder / json.loads(project.meta("last_prelabel"))["maps"]
    assert stats == {"people": 9, "frames": 3, "frames grouped": 3, "frames kept": 0,
                     "unreadable": 0}
    # each frame grouped alone, recorded for triage's weights (Frame.grouping), read back
    # from a second opening of the project
    with Project.open(project.folder, read_only=True) as again:
        assert [f.grouping for f in again.frames()] == ["alone"] * 3
    for f in project.frames():
        people = project.people(f.id)
        assert len(people) == len(truth[f.file_name])
        for p in people:
            np.testing.assert_allclose(p.keypoints[:3, :2], _match(p.keypoints, truth[f.file_name]),
                                       atol=2.0)
            assert p.keypoints[:3, 2].tolist() == [2, 2, 2] and p.keypoints[3, 2] == 0
            assert np.all((p.scores[:3] > 0.2) & (p.scores[:3] <= 1)) and np.isnan(p.scores[3])
            assert p.sources == ("auto",) * 4 and p.score == pytest.approx(p.scores[:3].mean())
        path, stride = project.maps_path(f.id)
        assert path == run / f"{f.id}.npz" and stride == 8
        maps = read_maps(path, SK, (f.width, f.height))
        assert maps.confidence_maps.shape == (4, 15, 20)
        assert load_maps(project, f) is not None
        with np.load(path) as npz:
            assert npz["confidence_maps"].dtype == np.float16
    entry = project.history()[0]
    assert entry.kind == "import" and entry.summary == "pre-label with dots.onnx"
    record = json.loads(project.meta("last_prelabel"))
    assert record["config"]["stride"] == 4 and len(record["model_sha256"]) == 64
    assert run.parent == project.folder / "maps" and run.name.startswith("prelabel-")
    assert list((project.folder / "maps").iterdir()) == [run]
    assert sorted(p.name for p in run.glob("*.npz")) == ["1.npz", "2.npz", "3.npz"]


def test_frames_with_people_keep_them_and_get_new_maps(setup):
    project, model, config, _ = setup
    prelabel(project, model, config)
    frame = project.frames()[0]
    person = project.people(frame.id)[0]
    project.apply(MoveJoint(frame.id, person.id, 0, 12.0, 13.0))
    before = {f.id: [p.keypoints.copy() for p in project.people(f.id)] for f in project.frames()}
    stats = prelabel(project, model, config)
    assert stats["people"] == 0 and stats["frames kept"] == 3
    for f in project.frames():
        after = [p.keypoints for p in project.people(f.id)]
        assert all(np.array_equal(a, b, equal_nan=True) for a, b in zip(after, before[f.id]))
        assert project.maps_path(f.id) is not None
    assert project.people(frame.id)[0].keypoints[0, :2].tolist() == [12.0, 13.0]


def test_only_the_chosen_frames_are_run(setup):
    project, model, config, _ = setup
    chosen = parse_frames("2", project.frames())
    prelabel(project, model, config, frames=[f.id for f in chosen])
    assert [f.id for f in project.frames() if project.people(f.id)] == [2]
    assert [f.id for f in project.frames() if project.maps_path(f.id)] == [2]
    with pytest.raises(NotFound, match="no frame 9"):
        prelabel(project, model, config, frames=[9])


def _state(project):
    return (project.counts(), [project.maps_path(f.id) for f in project.frames()],
            sorted(p.name for p in (project.folder / "maps").rglob("*")))


def test_cancel_writes_nothing(setup):
    project, model, config, _ = setup
    before = _state(project)
    progress = Progress(lambda done, total, label: done == 2 and progress.cancel())
    with pytest.raises(Cancelled):
        prelabel(project, model, config, progress=progress)
    assert _state(project) == before


def test_a_failure_while_storing_keeps_the_previous_maps(setup, monkeypatch):
    """The new maps are written beside the previous run's; when the transaction that would
    name them fails, they are removed and the project is as it was."""
    project, model, config, _ = setup
    prelabel(project, model, config, frames=[1])
    path, _ = project.maps_path(1)
    old = path.read_bytes()
    before = _state(project)
    other = _config(extra_scales=[1.5]).model_dump_json()
    config.write_text(other)

    def boom(self, key, value):
        raise OSError("disk full")

    monkeypatch.setattr("app.store.project.Bulk.set_meta", boom)
    with pytest.raises(OSError, match="disk full"):
        prelabel(project, model, config)
    assert _state(project) == before and path.read_bytes() == old


def test_unreadable_images_are_skipped_and_counted(setup):
    project, model, config, _ = setup
    frame = project.frames()[1]
    project.image_path(frame).write_bytes(b"broken")
    stats = prelabel(project, model, config)
    assert stats["unreadable"] == 1 and stats["frames"] == 2
    assert project.maps_path(frame.id) is None and not project.people(frame.id)


def test_frame_lists():
    """Ids, ranges, 'untouched' and 'all' (common practice, no source)."""
    from app.errors import BadInput
    from app.model import Frame, FrameState

    frames = [Frame(i, f"{i}.png", f"{i}.png", 8, 8,
                    FrameState.CORRECTED if i == 5 else FrameState.UNTOUCHED)
              for i in (1, 2, 5, 6, 9)]
    assert [f.id for f in parse_frames("1,5-9", frames)] == [1, 5, 6, 9]
    assert [f.id for f in parse_frames("untouched", frames)] == [1, 2, 6, 9]
    assert len(parse_frames("all", frames)) == 5
    for bad, words in (("3", "no frame 3"), ("1,x", "'x' is not a frame id"),
                       ("7-3", "the range 7-3 is empty"), ("10-12", "no frame in 10-12")):
        with pytest.raises(BadInput, match=words):
            parse_frames(bad, frames)


def test_one_worker_runs_opencv_on_one_thread_and_gives_the_threads_back(setup, monkeypatch):
    """--workers 1 keeps the job to one core: OpenCV runs on one thread while the frames
    run, and the process has its threads back afterwards (the window's decoding uses them)."""
    import importlib

    job = importlib.import_module("app.inference.prelabel")
    project, model, config, _ = setup
    seen = []
    real = job._prelabel_one
    monkeypatch.setattr(job, "_prelabel_one",
                        lambda item: seen.append(cv2.getNumThreads()) or real(item))
    before = cv2.getNumThreads()
    assert prelabel(project, model, config, workers=1)["frames"] == 3
    assert seen == [1, 1, 1]
    assert cv2.getNumThreads() == before


def test_two_workers_store_what_one_does(setup, tmp_path, free_pool):
    """Pre-labelling in two worker processes stores the same people and writes the same maps
    as in one (synthetic frames and model, as above)."""
    project, model, config, _ = setup
    other = new_project(tmp_path / "proj2", images=tmp_path / "images", skeleton=SK,
                        author="ana")
    try:
        assert prelabel(project, model, config, workers=1) == prelabel(other, model, config,
                                                                        workers=2)
        for f in project.frames():
            mine, theirs = project.people(f.id), other.people(f.id)
            assert [p.id for p in mine] == [p.id for p in theirs] and mine
            for a, b in zip(mine, theirs, strict=True):
                np.testing.assert_array_equal(a.keypoints, b.keypoints)
                np.testing.assert_array_equal(a.scores, b.scores)
            with np.load(project.maps_path(f.id)[0]) as x, np.load(other.maps_path(f.id)[0]) as y:
                for key in ("confidence_maps", "pafs", "stride"):
                    np.testing.assert_array_equal(x[key], y[key])
    finally:
        other.close()
