"""The repository explains itself: code and comments cite only files that are in it.

Check values: the rule itself (DEVELOPERS.md, "Conventions": code cites only in-repository files);
the lists of files come from the working tree.
"""
import re
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
SOURCES = sorted(p for d in ("selfcon", "tests", "tools") for p in (ROOT / d).rglob("*.py")
                 if p.resolve() != Path(__file__).resolve())


def _rel(p):
    return str(p.relative_to(ROOT))


def test_sources_found():
    assert len(SOURCES) > 50, "selfcon/, tests/ and tools/ not found (the checks below would be vacuous)"


def test_no_reference_to_documents_outside_the_repository():
    bad = []
    for p in SOURCES:
        for n, line in enumerate(p.read_text(encoding="utf-8").splitlines(), 1):
            if "../shared" in line or "§" in line:
                bad.append(f"{_rel(p)}:{n}: {line.strip()}")
            for doc in re.findall(r"\b([A-Za-z0-9_\-]+\.md)\b", line):
                if not any(ROOT.glob(f"**/{doc}")):
                    bad.append(f"{_rel(p)}:{n}: {doc} is not in the repository")
    assert bad == [], "\n".join(bad)


@pytest.mark.parametrize("doc", ["README.md", "DEVELOPERS.md"])
def test_sections_cited_in_code_exist(doc):
    """A citation like ``DEVELOPERS.md, "Conventions"`` names a heading the document has."""
    headings = {re.sub(r"^#+\s*", "", h).strip()
                for h in (ROOT / doc).read_text(encoding="utf-8").splitlines() if h.startswith("#")}
    bad = []
    pattern = re.compile(re.escape(doc) + r',?\s+"([^"]+)"')          # README.md, "Deck reference"
    for p in SOURCES:
        for n, line in enumerate(p.read_text(encoding="utf-8").splitlines(), 1):
            for section in pattern.findall(line):
                if not any(h == section or h.startswith(section) or re.sub(r"^\d+\.\s*", "", h) == section
                           for h in headings):
                    bad.append(f"{_rel(p)}:{n}: {doc} has no section {section!r}")
    assert bad == [], "\n".join(bad)
