"""Start-up contract (issue 7): `import selfcon` is light and compiles nothing.

Checked in fresh subprocesses so that modules imported by other tests do not hide a
regression.  No timings here (tools/bench.py startup measures them).
"""
import json
import subprocess
import sys

import pytest

HEAVY = ("numba", "h5py", "matplotlib", "dask")


def _run(code: str) -> dict:
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300)
    assert proc.returncode == 0, proc.stderr
    return json.loads(proc.stdout.strip().splitlines()[-1])


def test_import_selfcon_loads_no_heavy_module():
    # DEVELOPERS.md, "Conventions" (heavy modules load on first use); common practice for CLI start-up
    out = _run("import sys, json, selfcon\n"
               f"print(json.dumps(sorted(m for m in {HEAVY!r} if m in sys.modules)))")
    assert out == []


def test_public_api_names_resolve_without_heavy_imports():
    # the lazy front functions must stay lazy until called
    out = _run("import sys, json, selfcon\n"
               "fs = [selfcon.load_deck, selfcon.solve, selfcon.load_result, selfcon.bound_states]\n"
               f"print(json.dumps(sorted(m for m in {HEAVY!r} if m in sys.modules)))")
    assert out == []


KERNELS = ("schrodinger", "statistics", "poisson")


@pytest.mark.parametrize("module", KERNELS)
def test_importing_kernels_compiles_nothing(module):
    # a numba dispatcher with no signatures has compiled (or loaded) nothing
    code = (
        "import json, importlib, numba, selfcon\n"
        f"m = importlib.import_module('selfcon.solver.kernels.{module}')\n"
        "from numba.core.registry import CPUDispatcher\n"
        "d = {k: len(v.signatures) for k, v in vars(m).items() if isinstance(v, CPUDispatcher)}\n"
        "print(json.dumps(d))\n")
    out = _run(code)
    assert out, f"selfcon.solver.kernels.{module} defines no numba dispatcher (test would be vacuous)"
    compiled = {k: n for k, n in out.items() if n}
    assert compiled == {}, f"compiled at import: {compiled}"


def test_importing_all_kernels_and_glue_compiles_nothing():
    # the glue modules (schrodinger, poisson, statistics, steps, control, loop) may import kernels, never call them
    code = (
        "import json, importlib, selfcon\n"
        "for g in ('solver.schrodinger', 'solver.poisson', 'solver.statistics', 'solver.steps', 'solver.control',\n"
        "          'solver.loop', 'model.structure', 'model.mesh', 'api'):\n"
        "    importlib.import_module('selfcon.' + g)\n"
        "from numba.core.registry import CPUDispatcher\n"
        "d = {}\n"
        f"for name in {KERNELS!r}:\n"
        "    m = importlib.import_module('selfcon.solver.kernels.' + name)\n"
        "    d.update({name + '.' + k: len(v.signatures) for k, v in vars(m).items()\n"
        "              if isinstance(v, CPUDispatcher)})\n"
        "print(json.dumps(d))\n")
    out = _run(code)
    assert len(out) >= 3
    assert {k: n for k, n in out.items() if n} == {}
