"""Shared fixtures: the demo generated once per test session (a few frames keep it quick)."""

from pathlib import Path

import pytest

from app.demo import DEFAULT_SEED, generate

#: Frames generated for the session; tests that need a whole phrase read demo_project/.
SESSION_FRAMES = 3

SHIPPED = Path(__file__).resolve().parents[2] / "demo_project"


@pytest.fixture(scope="session")
def demo_dir(tmp_path_factory: pytest.TempPathFactory) -> Path:
    out = tmp_path_factory.mktemp("demo")
    generate(out, seed=DEFAULT_SEED, frames=SESSION_FRAMES)
    return out


@pytest.fixture(scope="session")
def shipped() -> Path:
    if not (SHIPPED / "truth.json").exists():
        pytest.fail("demo_project/ is missing: regenerate it with app.demo.generate")
    return SHIPPED
