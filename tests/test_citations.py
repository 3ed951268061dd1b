"""Citations a clone can follow: tests, benchmarks and docs cite the check values' page in the repository
(docs/references.md), never a file that lives outside it."""

from __future__ import annotations

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
REFERENCES = ROOT / "docs" / "references.md"
# A references file named in upper case, or one reached through a folder beside or above the checkout.
OUTSIDE = re.compile(r"REFERENCES\.md|(?:\.\./|/work/)\S*(?i:references)")


def _texts():
    for folder, pattern in (("tests", "*.py"), ("benchmarks", "*.py"), ("docs", "*.md")):
        for path in sorted((ROOT / folder).rglob(pattern)):
            if path != Path(__file__).resolve():  # this file spells the pattern out
                yield path, path.read_text(encoding="utf-8")
    for name in ("README.md", "DEVELOPERS.md"):
        yield ROOT / name, (ROOT / name).read_text(encoding="utf-8")


def test_no_citation_reaches_outside_the_repository():
    found = [f"{path.relative_to(ROOT)}:{text.count(chr(10), 0, m.start()) + 1}: {m.group(0)}"
             for path, text in _texts() for m in OUTSIDE.finditer(text)]
    assert found == []


def test_the_cited_page_is_there_and_keeps_its_marks():
    text = REFERENCES.read_text(encoding="utf-8")
    cited = sum("docs/references.md" in t for _, t in _texts())
    assert cited >= 5, "the tests cite the page"
    for mark in ("from memory", "common practice, no source", "a consequence of the mathematics",
                 "measured here, not a published figure"):
        assert mark in text
