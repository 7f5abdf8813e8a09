"""The README's promises that can drift: the deck reference, the CI command, the example decks."""
import re
import subprocess
import sys
from pathlib import Path

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
