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


#: markers of a citation that points outside this repository: a path into the folder beside
#: the clone, and a section sign (sections are cited by heading name here); spelled out from
#: their parts so this file does not carry the citation it looks for
OUTSIDE_MARKERS = ("/".join(("..", "shared")), "\u00a7")


def test_no_reference_to_documents_outside_the_repository():
    bad = []
    for p in SOURCES:
        for n, line in enumerate(p.read_text(encoding="utf-8").splitlines(), 1):
            if any(marker in line for marker in OUTSIDE_MARKERS):
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


def _defined_names(path):
    """Top-level functions, classes and assigned names of a module, and Class.method pairs."""
    import ast
    tree = ast.parse(path.read_text(encoding="utf-8"))
    names = set()
    for node in tree.body:
        if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef, ast.ClassDef)):
            names.add(node.name)
            if isinstance(node, ast.ClassDef):
                names.update(f"{node.name}.{m.name}" for m in node.body
                             if isinstance(m, (ast.FunctionDef, ast.AsyncFunctionDef)))
        elif isinstance(node, (ast.Assign, ast.AnnAssign)):
            targets = node.targets if isinstance(node, ast.Assign) else [node.target]
            names.update(t.id for t in targets if isinstance(t, ast.Name))
    return names


def test_files_and_functions_named_in_the_contributor_guide_exist():
    """Every ``path.py`` and ``path.py::name`` in DEVELOPERS.md's code spans is in the tree."""
    text = (ROOT / "DEVELOPERS.md").read_text(encoding="utf-8")
    refs = re.findall(r"`((?:selfcon|tests|tools)/[\w/.]+?\.py)(?:::([\w.]+))?", text)
    assert len(refs) > 30, "DEVELOPERS.md names few files (the check would be vacuous)"
    bad = []
    for path, name in refs:
        p = ROOT / path
        if not p.is_file():
            bad.append(f"{path} does not exist")
        elif name and name not in _defined_names(p):
            bad.append(f"{path} defines no {name}")
    assert bad == [], "\n".join(sorted(set(bad)))
