"""The packaging metadata: installing (``make``) prints no deprecation warning."""

from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def test_license_is_an_spdx_expression_for_a_setuptools_that_reads_it():
    """PEP 639 (https://peps.python.org/pep-0639/): ``project.license`` is an SPDX expression
    string; the older table form makes setuptools 77 and later print a deprecation warning
    on every install. Custom licenses are written ``LicenseRef-...`` (SPDX specification,
    annex D)."""
    tomllib = pytest.importorskip("tomllib")  # Python 3.11+
    meta = tomllib.loads((ROOT / "pyproject.toml").read_text(encoding="utf-8"))
    assert isinstance(meta["project"]["license"], str)
    assert meta["project"]["license"].startswith("LicenseRef-")
    assert "setuptools>=77" in meta["build-system"]["requires"]
