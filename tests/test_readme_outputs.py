"""README.md cannot go stale: every command output it quotes (```console blocks) is produced
here by running the command, and compared after masking wall times, dates and versions (the
patterns of tools/readme_outputs.py, MASKS, and nothing else). A change to the code that
changes a quoted output fails here until `python tools/readme_outputs.py` rewrites the README."""
import runpy
import shutil
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
TOOL = runpy.run_path(str(ROOT / "tools" / "readme_outputs.py"))
QUOTES = TOOL["quotes"]((ROOT / "README.md").read_text(encoding="utf-8"))


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    """One folder holding a copy of inputs/: the quoted commands run there, in README order."""
    path = tmp_path_factory.mktemp("readme")
    shutil.copytree(ROOT / "inputs", path / "inputs")
    return path


def test_the_readme_quotes_commands():
    commands = [cmd for _, cmd, _, _ in QUOTES]
    assert len(commands) >= 4                              # design warnings, sweep, tune, tune error
    assert any(c.startswith("selfcon sweep-bias") for c in commands)


@pytest.mark.parametrize("line, command, raw, quoted", QUOTES, ids=[f"README.md:{q[0]}" for q in QUOTES])
def test_quoted_output_is_what_the_command_prints(folder, line, command, raw, quoted):
    got = TOOL["run"](command, folder)
    assert TOOL["mask"](got) == TOOL["mask"](quoted), (
        f"README.md:{line}: `{command}` now prints\n{got}\n(rerun `python tools/readme_outputs.py`)")


def test_masks_only_times_dates_and_versions():
    mask = TOOL["mask"]
    # what may differ between two runs of one command (examples by hand)
    assert mask("converged: 5 iterations, final residual 1.5e-7 V, 5.34 s") == \
        mask("converged: 5 iterations, final residual 1.5e-7 V, 0.8 s")
    assert mask("written 2026-12-02T06:17:17Z by selfcon 0.1.0") == mask("written 2027-01-01T00:00:00Z by selfcon 0.2.1")
    # and what may not: any number of the physics
    assert mask("n_s = 3.15e12 cm-2") != mask("n_s = 3.16e12 cm-2")
    assert mask("after 7 solves") != mask("after 8 solves")


def test_performance_table_is_the_last_benchmark_output():
    """README.md's Performance table is tools/bench-last.txt verbatim: the file
    `python tools/bench.py --cpu --markdown tools/bench-last.txt` wrote (no benchmark runs here)."""
    import re
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    m = re.search(r"<!-- bench-last -->\n(.*?)<!-- /bench-last -->", readme, re.S)
    assert m, "README.md's Performance section has no <!-- bench-last --> quote"
    last = (ROOT / "tools" / "bench-last.txt").read_text(encoding="utf-8")
    assert m.group(1) == last
    assert "python tools/bench.py --cpu --markdown tools/bench-last.txt" in readme
