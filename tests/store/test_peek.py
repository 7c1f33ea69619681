"""app.store.peek: a folder project's frame count, read before the store is imported."""

from __future__ import annotations

import subprocess
import sys

import numpy as np
import pytest

from app.store import peek
from app.store import project as store_project
from tests.conftest import place


@pytest.mark.folder_only
def test_the_hint_is_the_projects_frame_count(project):
    """While the project is open for editing (its database in WAL mode, as the store opens
    it), the hint is what the store counts; a project on a server (a URL) has none."""
    assert peek.frame_count_hint(place(project)) == project.frame_count() == 6
    assert peek.DB_NAME == store_project.DB_NAME
    assert peek.frame_count_hint("postgresql://localhost/posewright") is None


@pytest.mark.folder_only
def test_the_maps_hint_is_what_the_store_reads(project):
    """import-maps' hint (read with sqlite3 alone, while the project is open): the skeleton as
    the store keeps it, every frame's id, file name, size, status, path and video index, the
    frames with people, and the folders marked not a sequence, as the store reads them."""
    from app.model.labels import AUTO, Person
    from app.model.sequences import NOT_SEQUENCES

    frame = project.frames()[2]
    k = project.skeleton.num_joints
    with project.bulk("Test", "a person", "test") as b:
        b.add_people([(frame.id, Person(b.allocate_person_ids(1), np.zeros((k, 3)),
                                        np.full(k, np.nan), (AUTO,) * k, 0.5))])
    skeleton, frames, people, marked = peek.map_frames_hint(place(project))
    assert skeleton == project.skeleton.to_dict()
    assert frames == [(f.id, f.file_name, f.width, f.height, f.status, f.path, f.video_index)
                      for f in project.frames()]
    assert people == project.frames_with_people() == {frame.id}
    assert marked is None
    project.set_meta(NOT_SEQUENCES, '["a"]')
    assert peek.map_frames_hint(place(project))[3] == project.meta(NOT_SEQUENCES) == '["a"]'


def test_no_project_no_hint(tmp_path):
    assert peek.map_frames_hint(tmp_path) is None
    assert peek.frame_count_hint(tmp_path) is None
    assert peek.frame_count_hint(tmp_path / "missing") is None
    (tmp_path / peek.DB_NAME).write_bytes(b"not a database")
    assert peek.frame_count_hint(tmp_path) is None


def test_reading_it_imports_nothing_of_the_store():
    """Importing the hint (and so the package app.store) brings no numpy, pydantic or model,
    which opening the project would (0.3-0.5 s of CPU)."""
    code = ("import sys, app.store.peek; "
            "print(sorted(m for m in sys.modules if m.split('.')[0] in ('numpy', 'pydantic') "
            "or m.startswith(('app.model', 'app.store.project'))))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == "[]"
