"""The project carries its own references (issue 12 item 6): every "REFERENCES.md section N"
cited in code, tests and documents names a section of tests/REFERENCES.md, and nothing
cites a file outside the repository."""
from __future__ import annotations

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
SOURCES = [p for folder in ("filters", "app", "tests", "benchmarks") for p in (ROOT / folder).rglob("*.py")]
DOCS = [ROOT / "README.md", ROOT / "DEVELOPERS.md"]


def test_every_cited_section_exists():
    text = (ROOT / "tests" / "REFERENCES.md").read_text(encoding="utf-8")
    sections = set(re.findall(r"^## (\d+)\.", text, flags=re.M))
    assert {str(n) for n in range(1, 11)} <= sections
    cited = set()
    for p in SOURCES + DOCS:
        for n in re.findall(r"REFERENCES\.md[,)]?\s+(?:section|§)\s*(\d+)", p.read_text(encoding="utf-8")):
            cited.add((p.name, n))
    assert cited, "the tests cite the references"
    assert {n for _, n in cited} <= sections, sorted(c for c in cited if c[1] not in sections)


def test_no_citation_of_a_file_outside_the_repository():
    for p in SOURCES + DOCS:
        text = p.read_text(encoding="utf-8")
        outside = ("../" + "shared/", "/work/" + "shared")  # spelled apart so this file passes
        assert not any(o in text for o in outside), p
