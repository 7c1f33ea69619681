"""The memory budget of pre-labelling: planned from the config, checked before the model loads.

Models, frames and configs are synthetic (tests/inference/onnx_models.py). The measured side of
the bound is Python's own allocation tracer (``tracemalloc``, which sees numpy's and OpenCV's
Python-side arrays), not a figure of ours.
"""

import json
import tracemalloc

import numpy as np
import pytest

from app.cli import main
from app.errors import BadInput
from app.inference.budget import check_budget, planned_bytes, set_budget_mb
from app.inference.config import default_config
from app.inference.network import PoseNetwork
from app.model.skeleton import coco_body
from app.store import Project
from tests.inference.onnx_models import colour_dot_model
from tests.inference.test_network import FIELDS, MAPS_FROM, SK, _config, _people_at


@pytest.mark.parametrize("change", [{}, {"extra_scales": [0.5, 2.0]},
                                    {"resize": "fit-height", "input_width": None}])
def test_the_plan_bounds_what_a_run_allocates(tmp_path, change):
    """The planned peak is at least the peak of the arrays a real run of the model makes on a
    frame (measured by tracemalloc), and within a small factor of it, so the budget neither
    lets a run through that needs more nor refuses one for a wild overestimate."""
    model = colour_dot_model(tmp_path / "dots.onnx", MAPS_FROM, FIELDS, stride=4,
                             channel_order="bgr", mean=(10, 20, 30), scale=(0.5, 0.25, 0.125))
    cfg = _config(**{"input_width": 320, "input_height": 320, **change})
    _, image = _people_at([100.0, 300.0, 500.0], size=(640, 480))
    net = PoseNetwork(model, cfg, SK)
    plan = planned_bytes(cfg, [(640, 480)], SK.num_joints, len(SK.limbs))
    tracemalloc.start()
    try:
        tracemalloc.reset_peak()
        base = tracemalloc.get_traced_memory()[0]
        maps = net.maps(image)
        peak = tracemalloc.get_traced_memory()[1] - base
    finally:
        tracemalloc.stop()
    assert maps.confidence_maps.shape[0] == SK.num_joints
    peak += image.nbytes  # decoded before the run; the plan counts it
    assert peak <= plan.total <= 4 * peak, (peak, plan)


def test_the_issue_config_is_refused_in_one_line_before_anything_runs(tmp_path, image_dir,
                                                                       capsys, monkeypatch):
    """An 8192 x 8192 input with an extra scale of 4 (the configuration that used 24 GB and
    was killed) is refused in one line naming the field, before the model is even looked at
    (the model path does not exist); with the budget raised (option or environment) the same
    config gets as far as the model."""
    proj = tmp_path / "p"
    assert main(["new", str(proj), "--images", str(image_dir), "-q"]) == 0
    config = tmp_path / "big.json"
    data = json.loads(default_config(coco_body()).model_dump_json())
    data.update(input_width=8192, input_height=8192, extra_scales=[4])
    config.write_text(json.dumps(data))
    capsys.readouterr()
    before = sorted(p.name for p in proj.rglob("*"))
    argv = ["prelabel", str(proj), "--model", str(tmp_path / "absent.onnx"),
            "--config", str(config), "-q"]
    assert main(argv) == 2
    err = capsys.readouterr().err.strip()
    assert len(err.splitlines()) == 1, err
    assert "big.json: field extra_scales:" in err and "memory budget of 2,048 MB" in err
    assert "32768x32768 input" in err and "Traceback" not in err
    assert sorted(p.name for p in proj.rglob("*")) == before
    try:
        assert main([*argv, "--memory-budget-mb", "1e9"]) == 2
        assert "no such model file" in capsys.readouterr().err
    finally:
        set_budget_mb(None)
    monkeypatch.setenv("POSEWRIGHT_MEMORY_BUDGET_MB", "1e9")
    assert main(argv) == 2
    assert "no such model file" in capsys.readouterr().err
    with Project.open(proj) as p:
        assert p.counts()["people"] == 0 and p.history() == []


def test_the_budget_is_settable_and_checked(monkeypatch):
    """A plan just over the budget is refused, just under it passes (synthetic sizes)."""
    cfg = _config(input_width=512, input_height=512)
    need = planned_bytes(cfg, [(640, 480)], 4, 3).total
    monkeypatch.setenv("POSEWRIGHT_MEMORY_BUDGET_MB", str(need / 2**20 * 1.01))
    assert check_budget(cfg, [(640, 480)], 4, 3).total == need
    monkeypatch.setenv("POSEWRIGHT_MEMORY_BUDGET_MB", str(need / 2**20 * 0.99))
    with pytest.raises(BadInput, match="field input_height: the run would need"):
        check_budget(cfg, [(640, 480)], 4, 3)
    monkeypatch.setenv("POSEWRIGHT_MEMORY_BUDGET_MB", "-3")
    with pytest.raises(BadInput, match=r"POSEWRIGHT_MEMORY_BUDGET_MB: -3\.0 is not a positive"):
        check_budget(cfg, [(640, 480)], 4, 3)
    assert planned_bytes(cfg, [], 4, 3).total == 0
    assert np.isfinite(planned_bytes(cfg, [(0, 0), (64, 48)], 4, 3).total)
