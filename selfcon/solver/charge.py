"""Structure + subbands -> the Poisson problem: the glue between the loop and the kernels.

The loop (selfcon.solver.loop) speaks in Structures and BandStates; the Poisson code
(selfcon.solver.poisson, selfcon.solver.kernels.poisson) speaks in arrays.  This module
translates, and nothing else: which nodes are quantum for which carrier, the
|psi|^2 weights and subband DOS of every state, the boundary conditions.
"""
from __future__ import annotations

import numpy as np

from selfcon.model.dopants import statistics_binding
from selfcon.solver import poisson as P

_HOLE_BANDS = ("heavy_hole", "light_hole")


def base_problem(st, bc=None):
    """The classical Poisson problem of a structure (every carrier classical, no states).

    Cached on the structure per boundary condition (structures are immutable).
    """
    cache = st.extras.setdefault("poisson_problem", {})
    key = tuple(bc) if bc is not None else None
    prob = cache.get(key)
    if prob is not None:
        return prob
    c = st.cell
    carriers = st.carriers
    nc = c["nc"] if "electron" in carriers else np.zeros_like(c["nc"])
    nv = c["nv"] if any(b in carriers for b in _HOLE_BANDS) else np.zeros_like(c["nv"])
    top, bottom = bc if bc is not None else ((P.ZERO_FIELD, 0.0), (P.ZERO_FIELD, 0.0))
    ec_v, nc_v = valley_arrays(st)
    prob = P.PoissonProblem(z=st.z, eps=c["eps"], ec0=c["ec_gamma"], ev0=c["ev0"], nc=nc, nv=nv,
                            nd=c["donors"], ed=statistics_binding(c["donor_binding"]),
                            na=c["acceptors"], ea=statistics_binding(c["acceptor_binding"]),
                            temperature=st.temperature,
                            sheet_nd=st.sheet_donors, sheet_na=st.sheet_acceptors,
                            full_ionization=st.full_ionization, top=top, bottom=bottom,
                            ec0_v=ec_v, nc_v=nc_v)
    cache[key] = prob
    return prob


#: carrier name -> (band-edge key, effective-DOS key) of the classical conduction valleys
VALLEYS = {"x_electron": ("ec_x", "nc_x"), "l_electron": ("ec_l", "nc_l")}


def valley_arrays(st):
    """(ec0_v, nc_v), each (V, N-1), of the X/L valleys the deck's carriers include."""
    rows = [name for name in VALLEYS if name in st.carriers]
    n = st.n_nodes - 1
    if not rows:
        return np.zeros((0, n)), np.zeros((0, n))
    return (np.stack([st.cell[VALLEYS[r][0]] for r in rows]),
            np.stack([st.cell[VALLEYS[r][1]] for r in rows]))


def problem_with_states(st, bc, phi_ref, states, *, shift=1.0):
    """Poisson problem whose quantum nodes take their density from ``states``.

    ``shift`` = 1: predictor (subbands follow the local potential change);
    ``shift`` = 0: frozen quantum density (classic mixing).
    """
    prob = base_problem(st, bc)
    n = st.n_nodes
    kw = {}
    e = states.get("electron")
    if e is not None:
        kw.update(cls_e=np.where(e.quantum_nodes, 0.0, 1.0), psi2=np.ascontiguousarray(e.psi ** 2),
                  ek=e.energy, dos_e=e.dos)
    holes = [states[b] for b in _HOLE_BANDS if b in states]
    if holes:
        qn = np.zeros(n, dtype=bool)
        for hb in holes:
            qn |= hb.quantum_nodes
        kw.update(cls_h=np.where(qn, 0.0, 1.0),
                  psi2h=np.ascontiguousarray(np.concatenate([hb.psi ** 2 for hb in holes], axis=1)),
                  ekh=np.concatenate([hb.energy for hb in holes]),
                  dos_h=np.concatenate([hb.dos for hb in holes]))
    prob = prob.with_quantum(phi_ref=np.asarray(phi_ref, dtype=float), **kw)
    if shift != 1.0:
        prob = prob.with_shift(shift)
    return prob


def neutral_potential_cell(st, c: int) -> float:
    return P.cell_neutral_potential(base_problem(st), c)


def linear_start(st, bc):
    """A first potential for Newton: the boundary values joined linearly (flat if both free)."""
    z = st.z
    (k0, v0), (k1, v1) = bc
    if k0 == 0 and k1 == 0:
        return v0 + (v1 - v0) * (z - z[0]) / (z[-1] - z[0])
    if k0 == 0:
        return np.full(z.size, v0)
    if k1 == 0:
        return np.full(z.size, v1)
    return np.full(z.size, neutral_potential_cell(st, st.n_nodes // 2 - 1 if st.n_nodes > 2 else 0))


def solve_classical(st, bc, phi0, *, tol, max_iter):
    return P.solve_poisson(base_problem(st, bc), phi0, tol=tol, max_iter=max_iter)


def solve_with_states(st, bc, phi, states, *, predictor, tol, max_iter, backtrack=True):
    prob = problem_with_states(st, bc, phi, states, shift=1.0 if predictor else 0.0)
    return P.solve_poisson(prob, phi, tol=tol, max_iter=max_iter, backtrack=backtrack)


def densities_with_states(st, phi, states):
    """(n, p, Nd+, Na-) at the nodes in nm^-3 with the subband density where it applies.

    The last evaluation is remembered (by identity of phi and states): the loop's charge
    check and the result assembly ask for the same one."""
    last = st.extras.get("last_densities")
    if last is not None and last[0] is phi and last[1] is states:
        return last[2]
    prob = problem_with_states(st, None, phi, states)
    d = P.densities(prob, phi)
    out = (d.n, d.p, d.nd_plus, d.na_minus)
    st.extras["last_densities"] = (phi, states, out)
    return out


def mobile_sheets(st, phi_ref, phi, states):
    """(electron, hole) sheet densities (nm^-2) at ``phi`` with the subbands of ``phi_ref``
    shifted by the local potential change (the predictor density)."""
    w = st.mesh.w
    if phi is phi_ref:
        n, p, _, _ = densities_with_states(st, phi, states)
        return float(np.dot(n, w)), float(np.dot(p, w))
    prob = problem_with_states(st, None, phi_ref, states)
    d = P.densities(prob, phi)
    return float(np.dot(d.n, w)), float(np.dot(d.p, w))


def classical_sheet(st, phi, band, i0, i1) -> float:
    """Classical sheet density (nm^-2) of a carrier over nodes i0..i1 at potential phi."""
    cache = st.extras.setdefault("classical_cache", {})
    key = id(phi)
    d = cache.get(key)
    if d is None or d[0] is not phi:
        cache.clear()
        dens = P.densities(base_problem(st), phi)
        d = (phi, dens)
        cache[key] = d
    dens = d[1]
    arr = dens.n if band == "electron" else dens.p
    return float(np.sum(arr[i0:i1 + 1] * st.mesh.w[i0:i1 + 1]))


def gauss_residual(st, bc, phi, states, rho=None) -> float:
    """Gauss's law check of the solution (rho: its node charge, if already computed)."""
    return P.gauss_residual(problem_with_states(st, bc, phi, states), phi, rho)
