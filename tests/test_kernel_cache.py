"""The Poisson kernels take NamedTuple bundles (selfcon/solver/kernels/bundles.py); numba's
on-disk cache must still serve them to a new process (numba documents cache=True for
any argument types it can pickle; checked here because the whole start-up budget rests on it).

The test process compiles (or loads) the kernels once, which writes the cache; a fresh
subprocess then calls them and reports numba's own per-dispatcher counters.
"""
import json
import subprocess
import sys

import numpy as np

CALL = """
import numpy as np
from selfcon.solver import poisson as P
z = np.linspace(0.0, 20.0, 11)
one = np.ones(10)
pr = P.PoissonProblem(z=z, eps=12.9 * one, ec0=1.42 * one, ev0=0.0 * one, nc=1e-3 * one,
                      nv=1e-2 * one, nd=1e-4 * one, ed=0.006 * one, na=0.0 * one, ea=0.03 * one,
                      temperature=77.0, top=(P.DIRICHLET, 0.7), bottom=(P.ZERO_FIELD, 0.0))
sol = P.solve_poisson(pr, np.full(11, 0.7))
d = P.densities(pr, sol.phi)
"""

REPORT = """
import json
from selfcon.solver.kernels import poisson as KP
out = {}
for name in ("poisson_newton", "node_densities"):
    st = getattr(KP, name).stats
    out[name] = {"hits": sum(st.cache_hits.values()), "misses": sum(st.cache_misses.values()),
                 "signatures": [str(s) for s in st.cache_hits] + [str(s) for s in st.cache_misses]}
print(json.dumps(out))
"""


def test_bundled_kernels_load_from_the_disk_cache_in_a_new_process():
    exec(compile(CALL, "<warm>", "exec"), {})          # writes the cache if it was not there
    proc = subprocess.run([sys.executable, "-c", CALL + REPORT], capture_output=True, text=True,
                          timeout=600)
    assert proc.returncode == 0, proc.stderr
    out = json.loads(proc.stdout.strip().splitlines()[-1])
    for name, st in out.items():
        # the signature really is made of the named bundles (else the test would be vacuous)
        assert any("Grid(" in s and "Material(" in s and "Quantum(" in s for s in st["signatures"]), st
        assert st["hits"] >= 1 and st["misses"] == 0, (name, st)


def test_bundle_fields_reach_the_kernel_by_name():
    # a Material with nd and na swapped must give a different (opposite-sign) charge:
    # the kernel reads the fields by name, so the swap shows (charge neutrality, analytic:
    # with full ionisation and no carriers rho = Nd - Na)
    from selfcon.solver import poisson as P
    z = np.linspace(0.0, 10.0, 6)
    one = np.ones(5)
    kw = dict(z=z, eps=12.9 * one, ec0=1.42 * one, ev0=0.0 * one, nc=0.0 * one, nv=0.0 * one,
              ed=0.0 * one, ea=0.0 * one, temperature=300.0, full_ionization=True)
    a = P.densities(P.PoissonProblem(nd=3e-3 * one, na=1e-3 * one, **kw), np.zeros(6))
    b = P.densities(P.PoissonProblem(nd=1e-3 * one, na=3e-3 * one, **kw), np.zeros(6))
    np.testing.assert_allclose(a.rho, 2e-3, rtol=1e-12)
    np.testing.assert_allclose(b.rho, -2e-3, rtol=1e-12)
