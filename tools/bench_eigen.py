#!/usr/bin/env python
"""Benchmark the bound-state solver: tridiagonal (selfcon.solver.schrodinger) versus dense eigh, and
the growth of its cost with the number of nodes.

    python tools/bench_eigen.py [--states 10] [--out bench-results/eigen.json]

1. k lowest states of a 2,000-node and a 50,000-node structure with selfcon's solver
   and with dense scipy.linalg.eigh on the same symmetric matrix B (where it fits in
   memory: 2,000 nodes is 32 MB; 50,000 nodes would be a 20 GB matrix, so it is skipped).
2. Time per node for N = 1e3 .. 1e5 with a fitted exponent t ~ N^p.

This is a ratio and a growth exponent, not a timed test.  Exit status 1 if the
energies differ from dense eigh by more than 1e-9 eV or p > 1.15.
"""
import argparse
import json
import platform
import sys
import time
from pathlib import Path

import numpy as np

ENERGY_TOL = 1e-9      # eV
MAX_EXPONENT = 1.15
DENSE_LIMIT_BYTES = 2e9   # do not build dense matrices larger than this


def structure(n_nodes):
    """A 200 nm structure with a field, three wells of different widths (a double well with
    a thin barrier among them) and GaAs/AlGaAs-like masses; interfaces on nodes, mesh
    nonuniform (graded, finer in the wells)."""
    from selfcon.model.mesh import half_widths
    from selfcon.solver.kernels.schrodinger import dual_average
    # layers: (thickness nm, band edge eV at the layer start, mass m0)
    layers = [(40.0, 0.30, 0.092), (8.0, 0.0, 0.067), (2.0, 0.30, 0.092), (8.0, 0.0, 0.067),
              (30.0, 0.30, 0.092), (12.0, 0.0, 0.067), (100.0, 0.30, 0.092)]
    total = sum(t for t, _, _ in layers)
    field = 0.002  # eV/nm, a tilt across the whole structure
    z = [0.0]
    weights = [t * (3.0 if v == 0.0 else 1.0) for t, v, _ in layers]   # 3x node density in wells
    cells = [max(int(round((n_nodes - 1) * wt / sum(weights))), 2) for wt in weights]
    cells[-1] += (n_nodes - 1) - sum(cells)
    for (t, _, _), nc in zip(layers, cells):
        s = np.linspace(0.0, 1.0, nc + 1)
        s = s - 0.5 * np.sin(2 * np.pi * s) / (2 * np.pi)   # graded: fine near interfaces
        z.extend(z[-1] + t * s[1:])
    z = np.array(z)
    h = np.diff(z)
    zc = 0.5 * (z[:-1] + z[1:])
    edges = np.cumsum([0.0] + [t for t, _, _ in layers])
    layer = np.clip(np.searchsorted(edges, zc) - 1, 0, len(layers) - 1)
    v_cell = np.array([layers[i][1] for i in layer]) + field * (total - zc)
    m_cell = np.array([layers[i][2] for i in layer])
    w = half_widths(z)[3]
    v_node = np.empty(z.size)
    dual_average(h, v_cell, v_node)
    return h, w, v_node, 1.0 / m_cell


def time_call(fn, min_time=0.2, max_repeat=50):
    """Best-of-repeats wall time of fn() (s)."""
    best = np.inf
    spent = 0.0
    rep = 0
    while rep < max_repeat and (rep < min(5, max_repeat) or spent < min_time):
        t0 = time.perf_counter()
        out = fn()
        dt = time.perf_counter() - t0
        best = min(best, dt)
        spent += dt
        rep += 1
    return best, out


def dense_matrix(h, w, v_node, inv_m):
    from selfcon.solver.kernels.schrodinger import assemble_tridiagonal
    m = w.size - 2
    d = np.empty(m)
    e = np.empty(m - 1)
    assemble_tridiagonal(h, w, v_node, inv_m, d, e)
    return np.diag(d) + np.diag(e, 1) + np.diag(e, -1)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--states", type=int, default=10, help="number of states k (default 10)")
    ap.add_argument("--out", default=str(Path(__file__).resolve().parents[1] / "bench-results" / "eigen.json"))
    args = ap.parse_args(argv)
    k = args.states

    import scipy
    import scipy.linalg
    from rich.console import Console
    from rich.table import Table

    from selfcon.solver.schrodinger import EigenWorkspace, solve_region

    console = Console(width=max(Console().width, 100))
    ok = True
    # warm-up: compile (or load cached) numba kernels outside the timings
    solve_region(*structure(200), k)

    # ---------------------------------------------------------------- 1. versus dense eigh
    compare = []
    tab = Table(title=f"Lowest {k} states: tridiagonal solver vs dense scipy.linalg.eigh")
    for col in ("nodes", "selfcon (ms)", "dense eigh (ms)", "dense / selfcon", "max |dE| evr (eV)",
                "max |dE| evd (eV)"):
        tab.add_column(col, justify="right")
    notes = []
    for n in (2000, 50000):
        args_n = structure(n)
        ws = EigenWorkspace(n)
        t_ours, (E, psi) = time_call(lambda: solve_region(*args_n, k, ws))
        row = dict(nodes=n, selfcon_s=t_ours, dense_s=None, ratio=None, max_abs_dE_eV=None, energies_eV=E.tolist())
        dense_bytes = 8.0 * (n - 2) ** 2
        if dense_bytes <= DENSE_LIMIT_BYTES:
            B = dense_matrix(*args_n)
            # timed: the fastest dense call for k states (dsyevr, subset by index)
            t_dense, Ed = time_call(lambda: scipy.linalg.eigh(B, eigvals_only=True, subset_by_index=[0, k - 1]),
                                    min_time=0.5, max_repeat=3)
            # check also against an independent algorithm (divide and conquer, all states)
            Ed2 = scipy.linalg.eigh(B, eigvals_only=True, driver="evd")[:k]
            dE = float(np.max(np.abs(Ed - E)))
            dE2 = float(np.max(np.abs(Ed2 - E)))
            row.update(dense_s=t_dense, ratio=t_dense / t_ours, max_abs_dE_eV=max(dE, dE2),
                       max_abs_dE_evr_eV=dE, max_abs_dE_evd_eV=dE2)
            if not max(dE, dE2) <= ENERGY_TOL:
                ok = False
                notes.append(f"FAIL at {n:,} nodes: energies differ from dense eigh by more than {ENERGY_TOL:g} eV")
            tab.add_row(f"{n:,}", f"{t_ours * 1e3:.2f}", f"{t_dense * 1e3:.1f}", f"{t_dense / t_ours:.0f}x",
                        f"{dE:.1e}", f"{dE2:.1e}")
        else:
            note = (f"dense eigh skipped at {n:,} nodes: B alone would take {dense_bytes / 1e9:.0f} GB "
                    f"(limit {DENSE_LIMIT_BYTES / 1e9:.0f} GB) and O(N^3) work")
            row["note"] = note
            notes.append(note)
            tab.add_row(f"{n:,}", f"{t_ours * 1e3:.2f}", "-", "-", "-", "-")
        compare.append(row)
    console.print(tab)
    for note in notes:
        console.print("  " + note)

    # ---------------------------------------------------------------- 2. growth with N
    sizes = [1000, 2000, 5000, 10000, 20000, 50000, 100000]
    scaling = []
    for n in sizes:
        args_n = structure(n)
        ws = EigenWorkspace(n)
        t, _ = time_call(lambda: solve_region(*args_n, k, ws))
        scaling.append(dict(nodes=n, seconds=t, ns_per_node=t / n * 1e9))
    ns = np.array(sizes, float)
    ts = np.array([r["seconds"] for r in scaling])
    p_all = float(np.polyfit(np.log(ns), np.log(ts), 1)[0])
    big = ns >= 1e4               # above the fixed per-call overhead
    p_big = float(np.polyfit(np.log(ns[big]), np.log(ts[big]), 1)[0])
    tab2 = Table(title=f"Time per node, lowest {k} states (selfcon.solver.kernels.eigen via selfcon.solver.schrodinger)")
    for col in ("nodes", "time (ms)", "ns / node", "local exponent"):
        tab2.add_column(col, justify="right")
    for i, r in enumerate(scaling):
        loc = "" if i == 0 else f"{np.log(ts[i] / ts[i - 1]) / np.log(ns[i] / ns[i - 1]):.2f}"
        tab2.add_row(f"{r['nodes']:,}", f"{r['seconds'] * 1e3:.2f}", f"{r['ns_per_node']:.0f}", loc)
    console.print(tab2)
    verdict = "ok" if p_big <= MAX_EXPONENT and p_all <= MAX_EXPONENT else "FAIL"
    if verdict == "FAIL":
        ok = False
    console.print(f"fitted exponent t ~ N^p: p = {p_all:.3f} over 1e3..1e5, p = {p_big:.3f} over 1e4..1e5 "
                  f"(limit {MAX_EXPONENT}) -> {verdict}")

    # ---------------------------------------------------------------- 3. why not dstemr
    from scipy.linalg import eigh_tridiagonal
    mrrr = []
    for n in (1000, 4000):
        h, w, v, im = structure(n)
        from selfcon.solver.kernels.schrodinger import assemble_tridiagonal
        d, e = np.empty(n - 2), np.empty(n - 3)
        assemble_tridiagonal(h, w, v, im, d, e)
        t, _ = time_call(lambda: eigh_tridiagonal(d, e, select="i", select_range=(0, k - 1),
                                                  lapack_driver="stemr"), min_time=0.1, max_repeat=3)
        mrrr.append(dict(nodes=n, seconds=t))
    p_mrrr = float(np.log(mrrr[1]["seconds"] / mrrr[0]["seconds"]) / np.log(4.0))
    console.print(f"for contrast, scipy eigh_tridiagonal(lapack_driver='stemr'): "
                  f"{mrrr[0]['seconds'] * 1e3:.1f} ms at 1,000 and {mrrr[1]['seconds'] * 1e3:.1f} ms at 4,000 "
                  f"nodes, exponent {p_mrrr:.2f} (it allocates an N x N eigenvector array)")

    out = dict(
        benchmark="eigen", states=k, energy_tol_eV=ENERGY_TOL, max_exponent=MAX_EXPONENT,
        solver="selfcon.solver.kernels.eigen (multi-shift bisection, inverse iteration, cluster orthogonalisation) on the symmetrised FV tridiagonal",
        versus_dense=compare, scaling=scaling, exponent_1e3_1e5=p_all, exponent_1e4_1e5=p_big,
        stemr_contrast=dict(runs=mrrr, exponent=p_mrrr), passed=ok,
        python=platform.python_version(), numpy=np.__version__, scipy=scipy.__version__,
        machine=platform.machine(), processor=platform.processor(),
    )
    path = Path(args.out)
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(json.dumps(out, indent=2))
    console.print(f"wrote {path}")
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main())
