"""Fixtures shared by the suite.

The store and review suites run against both backends: every test there that takes the
``project`` fixture runs once on a folder project (SQLite) and once on a hosted project
(PostgreSQL, a throwaway server from :mod:`tests.pg`), unless it is marked ``folder_only``
(it tests what only a folder has: its lock, its files, its read-only folder; or what no
backend changes, such as a packet's format).
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import pytest

from app.jobs import new_project
from app.store import Project
from tests import pg, synthetic

# Batch commands compute on every core unless told otherwise; the suite already runs one test
# per core, so they use one process here, and tests/test_parallel.py checks that more
# workers give the same results.
os.environ["POSEWRIGHT_WORKERS"] = "1"

#: The suites whose ``project`` runs on both backends.
BOTH_BACKENDS = ("store", "review")


def pytest_configure(config: pytest.Config) -> None:
    config.addinivalue_line("markers", "folder_only: a store or review test about what only a "
                                       "folder has or no backend changes (runs on SQLite alone)")


def pytest_generate_tests(metafunc: pytest.Metafunc) -> None:
    if "backend" not in metafunc.fixturenames:
        return
    suite = Path(str(metafunc.definition.fspath)).parent.name
    if suite in BOTH_BACKENDS and metafunc.definition.get_closest_marker("folder_only") is None:
        metafunc.parametrize("backend", ["folder", "hosted"])


@pytest.fixture
def backend() -> str:
    """``folder`` or ``hosted``: where ``project`` lives (see the module docstring)."""
    return "folder"


@pytest.fixture(scope="session")
def pg_server():
    """A PostgreSQL server for this test session (one per test worker)."""
    if pg.pg_bin() is None:
        if pg.required():
            pytest.fail("PostgreSQL is not installed, and POSEWRIGHT_REQUIRE_POSTGRES=1")
        pytest.skip("PostgreSQL is not installed (initdb, pg_ctl); hosted tests skipped")
    server = pg.Server()
    yield server
    server.stop()


@pytest.fixture
def pg_url(pg_server: pg.Server) -> str:
    """The URL of a fresh, empty database on the test server."""
    return pg_server.new_database()


@pytest.fixture
def image_dir(tmp_path: Path) -> Path:
    """Six small synthetic images in ``tmp_path/images``."""
    folder = tmp_path / "images"
    synthetic.write_images(folder, 6)
    return folder


@pytest.fixture
def project(tmp_path: Path, image_dir: Path, backend: str, request: pytest.FixtureRequest):
    """A fresh project over ``image_dir``, open for editing by author "ana": a folder, or the
    same project hosted on PostgreSQL."""
    p = new_project(tmp_path / "proj", images=image_dir, author="ana")
    if backend == "hosted":
        from app.store.hosting import host

        p.close()
        url = request.getfixturevalue("pg_url")
        host(tmp_path / "proj", url)
        p = Project.open(url, author="ana")
    yield p
    p.close()


def place(project: Project) -> str | Path:
    """Where to open ``project`` again: its folder, or its URL."""
    return project.location if project.hosted else project.folder


@pytest.fixture
def coco_file(tmp_path: Path, image_dir: Path) -> Path:
    """A synthetic COCO dataset over ``image_dir`` (3 people per image)."""
    names = sorted(p.name for p in image_dir.iterdir())
    path = tmp_path / "labels.json"
    path.write_text(json.dumps(synthetic.coco_dataset(names)))
    return path


@pytest.fixture
def free_pool(monkeypatch: pytest.MonkeyPatch) -> None:
    """Worker pools cost nothing to start, the first items are not timed for long and a pool
    is up before any item is shared out, so even a test's tiny job goes to the workers
    (app/parallel.py runs short jobs in the calling process, and works while a pool starts)."""
    from app import parallel

    monkeypatch.setattr(parallel, "POOL_START_SECONDS", 0.0)
    monkeypatch.setattr(parallel, "_WARM_START_SECONDS", 0.0)
    monkeypatch.setattr(parallel, "_START_ALONGSIDE", False)
    monkeypatch.setattr(parallel, "_PROBE_SECONDS", 0.0)
