"""The project documents itself: every document and module its code, tests and docs point to is
in the repository, and the conventions section of DEVELOPERS.md names the modules that state
them. Our own rule, no outside source.
"""

from __future__ import annotations

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

#: Where the project's own words are.
SOURCES = [*sorted((ROOT / "app").rglob("*.py")), *sorted((ROOT / "tests").rglob("*.py")),
           ROOT / "README.md", ROOT / "DEVELOPERS.md", ROOT / "Makefile", ROOT / ".ci" / "run"]


def _cited(pattern: str) -> dict[str, set[str]]:
    """What the sources cite by ``pattern``: cited name -> the files citing it."""
    found: dict[str, set[str]] = {}
    for path in SOURCES:
        for name in re.findall(pattern, path.read_text(encoding="utf-8")):
            found.setdefault(name, set()).add(str(path.relative_to(ROOT)))
    return found


def test_every_document_cited_is_in_the_repository():
    cited = _cited(r"[A-Za-z0-9_./-]*[A-Za-z0-9_-]\.md\b")
    missing = {name: files for name, files in cited.items()
               if not (ROOT / name).is_file() and not (ROOT / Path(name).name).is_file()}
    assert not missing, f"cited but not in the repository: {missing}"


def test_every_module_path_cited_in_the_docs_exists():
    cited = {}
    for doc in ("README.md", "DEVELOPERS.md"):
        for name in re.findall(r"\b(?:app|tests)/[A-Za-z0-9_/.-]*[A-Za-z0-9_/]",
                               (ROOT / doc).read_text(encoding="utf-8")):
            cited.setdefault(name, doc)
    missing = {n: d for n, d in cited.items() if not (ROOT / n).exists()}
    assert not missing, missing


def test_the_conventions_are_stated_with_the_module_that_defines_each():
    text = (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8")
    section = text.split("## Conventions", 1)[1].split("\n## ", 1)[0]
    topics = dict(re.findall(r"^- \*\*(.+?)\*\* \((.+?)\)", section, flags=re.MULTILINE))
    for topic in ("Coordinates", "The grid of cell centres", "Visual language", "Vocabulary"):
        assert topic in topics, topic
    for topic in ("Coordinates", "The grid of cell centres", "Visual language"):
        module = re.match(r"`(app/[^`]+\.py)`", topics[topic])
        assert module and (ROOT / module.group(1)).is_file(), f"{topic}: {topics[topic]}"
