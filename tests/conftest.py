"""Fixtures shared by the suite."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from app.jobs import new_project
from tests import synthetic


@pytest.fixture
def image_dir(tmp_path: Path) -> Path:
    """Six small synthetic images in ``tmp_path/images``."""
    folder = tmp_path / "images"
    synthetic.write_images(folder, 6)
    return folder


@pytest.fixture
def project(tmp_path: Path, image_dir: Path):
    """A fresh project over ``image_dir``, open for editing by author "ana"."""
    p = new_project(tmp_path / "proj", images=image_dir, author="ana")
    yield p
    p.close()


@pytest.fixture
def coco_file(tmp_path: Path, image_dir: Path) -> Path:
    """A synthetic COCO dataset over ``image_dir`` (3 people per image)."""
    names = sorted(p.name for p in image_dir.iterdir())
    path = tmp_path / "labels.json"
    path.write_text(json.dumps(synthetic.coco_dataset(names)))
    return path
