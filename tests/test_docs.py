"""The README's promises that can drift: the deck reference, the CI command, the example decks."""
import re
import subprocess
import sys
from pathlib import Path

import pytest

import selfcon

ROOT = Path(__file__).resolve().parent.parent


def test_deck_reference_table_is_current():
    r = subprocess.run([sys.executable, str(ROOT / "tools" / "deck_reference.py"), "--check"],
                       capture_output=True, text=True)
    assert r.returncode == 0, r.stdout + r.stderr


def test_file_layout_tables_are_current():
    # the README's HDF5 layout tables are generated from selfcon/output/schema.py
    r = subprocess.run([sys.executable, str(ROOT / "tools" / "file_layout.py"), "--check"],
                       capture_output=True, text=True)
    assert r.returncode == 0, r.stdout + r.stderr


#: the tools that rewrite a committed file, and the files they rewrite
REGENERATORS = {
    "deck_reference.py": ["README.md"], "file_layout.py": ["README.md"],
    "readme_outputs.py": ["README.md"], "figure_layouts.py": ["tests/layouts"],
    "gen_fermi_table.py": ["selfcon/solver/kernels/_fermi_table.py"],
}


def _stamps(paths):
    files = []
    for rel in paths:
        p = ROOT / rel
        files += sorted(p.glob("*")) if p.is_dir() else [p]
    return {str(f): f.stat().st_mtime_ns for f in files}


@pytest.mark.parametrize("tool", sorted(REGENERATORS))
def test_regenerating_tools_write_nothing_on_help_or_a_typo(tool):
    # common practice: --help prints and exits 0; an unknown option exits 2; neither writes
    before = _stamps(REGENERATORS[tool])
    for args, code in ((["--help"], 0), (["--chek"], 2)):
        r = subprocess.run([sys.executable, str(ROOT / "tools" / tool), *args], capture_output=True, text=True)
        assert r.returncode == code, r.stdout + r.stderr
    assert _stamps(REGENERATORS[tool]) == before


@pytest.mark.slow
def test_fermi_table_is_what_its_generator_writes():
    # mpmath.polylog at 30 digits, refitted (about 30 s): the committed data module is current
    r = subprocess.run([sys.executable, str(ROOT / "tools" / "gen_fermi_table.py"), "--check"],
                       capture_output=True, text=True)
    assert r.returncode == 0, r.stdout + r.stderr


def test_ci_runs_exactly_the_readme_test_command():
    readme = (ROOT / "README.md").read_text()
    blocks = re.findall(r"```bash\n(.*?)```", readme, flags=re.S)
    test_cmd = next(b.strip() for b in blocks if "pytest" in b)
    assert test_cmd in (ROOT / ".ci" / "run").read_text()
    run_cmd = next(b.strip() for b in blocks if "selfcon run" in b)
    deck = re.search(r"selfcon run (\S+\.toml)", run_cmd).group(1)
    assert (ROOT / deck).is_file()


def test_every_shipped_deck_loads():
    decks = sorted((ROOT / "inputs").glob("*.toml")) + sorted((ROOT / "inputs" / "design").glob("*.toml"))
    assert decks
    for p in decks:
        text = p.read_text()
        if "[[layer]]" in text:
            selfcon.load_deck(p)
