"""The self-consistent Schrödinger–Poisson loop.

:func:`solve` is the front function; :func:`run_loop` is the loop itself, one
plain function of named steps::

    phi = initial_guess(...)                       # classical nonlinear Poisson
    repeat:
        states  = solve_states(structure, phi)     # Schrödinger in every quantum region, every band
        phi_out = poisson_pass(structure, phi, states, predictor=mixer.predictor)
        r = phi_out - phi                          # residual (V)
        check convergence (max|r|, charge change)  # -> done
        control (damp on growth, stop on divergence / stagnation)
        phi = mixer.update(phi, r)

The mixer (selfcon.solver.mixers) is chosen by name and knows no physics.  With the
predictor–corrector coupling (Trellakis et al., J. Appl. Phys. 81, 7880, 1997)
the Poisson pass lets the quantum density follow the potential,
n(z) = sum_k |psi_k(z)|^2 D_k kT ln(1 + exp((EF - E_k + dphi(z))/kT)), so the
loop converges in a handful of iterations; classic mixers get the frozen
quantum density instead.

Non-convergence is a result (``converged=False`` with a message), never an
exception.  Bad input raises :class:`selfcon.errors.SelfconInputError`.
"""
from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np

from selfcon.constants import CM2_PER_NM2
from selfcon.solver.mixers import get_mixer
from selfcon.solver.statistics import subband_density
from selfcon.model.structure import Structure, build_structure, coarsened

#: band name -> (edge key, mass along z, in-plane mass, sign: +1 electrons, -1 holes, valley degeneracy)
BAND_SPECS = {
    "electron": ("ec_gamma", "m_e", "m_e", +1, 1),
    "heavy_hole": ("ev_hh", "m_hh_z", "m_hh_par", -1, 1),
    "light_hole": ("ev_lh", "m_lh_z", "m_lh_par", -1, 1),
}

#: a band whose classical sheet density in a region is below this (nm^-2), and below
#: NEGLIGIBLE_FRACTION of the structure's fixed sheet charge, is left classical there
NEGLIGIBLE_SHEET = 1e3 / CM2_PER_NM2
NEGLIGIBLE_FRACTION = 1e-8
#: grow the number of states while the top state still holds this fraction of the band's charge
TOP_STATE_FRACTION = 1e-4
MAX_STATES = 200
POISSON_TOL = 1e-10       # V, inner Newton tolerance of the final passes
START_TOL = 1e-6          # V, the classical starting solution needs no more
#: the nested classical start begins on a mesh of about this many nodes (see start_levels)
COARSE_START_NODES = 32
#: inner Newton tolerance as a fraction of the last outer residual (capped by START_TOL);
#: the first pass, whose residual is not known yet, solves to FIRST_PASS_TOL
INNER_FACTOR = 0.1
FIRST_PASS_TOL = 1e-3
#: a residual above this multiple of the previous one damps the mixer (Anderson and
#: linear mixing are not monotone: smaller rises are normal and left alone)
GROWTH_FACTOR = 1.5
#: a residual above this multiple of the best one so far sends the loop back to the best iterate
BACKTRACK_FACTOR = 10.0
POISSON_MAX_ITER = 200
#: predictor passes take a single clamped Newton step while the outer residual is below this (V)
ONE_STEP_BELOW = 3e-3


# --------------------------------------------------------------------------- data

@dataclass
class BandStates:
    """Bound states of one band, all regions stacked; psi is (N, k) on the full mesh."""

    band: str
    energy: np.ndarray        # (k,) eV, electron energy scale
    psi: np.ndarray           # (N, k)
    m_par: np.ndarray         # (k,)
    dos: np.ndarray           # (k,) nm^-2 eV^-1 (valley degeneracy and spin included)
    region: np.ndarray        # (k,) int
    degeneracy: np.ndarray    # (k,)
    sign: int
    quantum_nodes: np.ndarray  # (N,) bool: nodes whose density of this carrier comes from these states


@dataclass
class Iteration:
    residual: float
    charge_residual: float
    newton_steps: int
    seconds: float
    damping: float


# --------------------------------------------------------------------------- set-up

def make_mixer(method: str, spec):
    from selfcon.solver.mixers import _REGISTRY
    cls = _REGISTRY.get(method)
    opts = {}
    if cls is not None:
        for name in cls.option_names:
            val = getattr(spec, name, None)
            if val is not None:
                opts[name] = val
    return get_mixer(method, **opts)



def extrapolate_potential(previous, value):
    """Continuation guess at parameter ``value`` from converged neighbours.

    ``previous``: up to two ``(z_nm, phi_V, parameter_value)`` tuples, nearest first.
    With one, its potential is returned; with two on the same mesh and distinct
    values, the linear (secant) extrapolation phi_1 + (v - v_1)/(v_1 - v_2) (phi_1 - phi_2),
    whose error is second order in the step, so the loop starts much closer.
    Returns ``(z_nm, phi_V)`` for ``solve(..., initial_potential=...)``.
    """
    if not previous:
        return None
    z1, p1, v1 = previous[0]
    if len(previous) < 2:
        return (z1, p1)
    z2, p2, v2 = previous[1]
    try:
        v, v1f, v2f = float(value), float(v1), float(v2)
    except (TypeError, ValueError):
        return (z1, p1)
    if (np.shape(z1) != np.shape(z2) or not np.allclose(z1, z2, rtol=0, atol=1e-9)
            or v1f == v2f or not np.isfinite(v - v1f)):
        return (z1, p1)
    t = (v - v1f) / (v1f - v2f)
    return (z1, np.asarray(p1) + t * (np.asarray(p1) - np.asarray(p2)))



# --------------------------------------------------------------------------- the loop

@dataclass
class LoopOutcome:
    phi: np.ndarray
    states: dict
    converged: bool
    message: str
    iterations: list
    classical_steps: int


def run_loop(st: Structure, bc, mixer, *, phi0=None, tol=1e-6, charge_tol=1e-6, max_iter=100,
             progress=None) -> LoopOutcome:
    from selfcon.solver import schrodinger as quantum
    workspaces = {}
    phi, classical_steps = initial_guess(st, bc, phi0)
    n_states = {band: st.states for band in BAND_SPECS}
    history: list[Iteration] = []
    best = (np.inf, phi.copy(), np.zeros_like(phi))
    growth_count = 0
    converged = False
    message = ""
    for it in range(1, max_iter + 1):
        t_it = time.perf_counter()
        states = solve_states(st, phi, n_states, workspaces, quantum)
        # inexact inner solves: the outer loop shrinks the residual ~10x per pass, so the
        # Poisson pass need only be a little tighter than the current outer residual
        inner_tol = (FIRST_PASS_TOL if not history
                     else min(max(INNER_FACTOR * history[-1].residual, POISSON_TOL), START_TOL))
        # with the predictor the Poisson Jacobian already carries the subbands' response, so
        # one clamped Newton step per pass is enough (inexact Newton): the outer iteration
        # count stays the same, each pass costs one assembly and one tridiagonal solve, and
        # the loop's own damping guards the step.  Classic mixers need the true Poisson map.
        one_step = mixer.predictor and bool(history) and history[-1].residual < ONE_STEP_BELOW
        phi_out, newton_steps = poisson_pass(st, bc, phi, states, predictor=mixer.predictor, tol=inner_tol,
                                             max_newton=1 if one_step else POISSON_MAX_ITER,
                                             backtrack=not one_step)
        r = phi_out - phi
        res = float(np.max(np.abs(r))) if r.size else 0.0
        # the charge check only decides convergence: evaluate it once the potential is close
        cres = charge_residual(st, bc, phi, phi_out, states) if res < tol else float("nan")
        history.append(Iteration(res, cres, newton_steps, time.perf_counter() - t_it, mixer.factor))
        if progress is not None:
            progress(it, res)
        if not np.isfinite(res):
            message = ("diverged: the potential became non-finite; try solver.method = "
                       "\"predictor-corrector\", a smaller solver.mixing, or a coarser start")
            phi = best[1]
            break
        if res < tol and cres < max(charge_tol, 10 * tol):     # (NaN compares False)
            converged = True
            message = f"converged in {it} iterations (max |dphi| = {res:.2e} V)"
            break
        if res < best[0]:
            best = (res, phi.copy(), r.copy())
        # convergence control: damp when the residual grows; after a step that made things
        # much worse, go back to the best iterate so far and take a damped step from there
        if len(history) > 1 and res > GROWTH_FACTOR * history[-2].residual:
            growth_count += 1
            if not mixer.damp() and growth_count > 8:
                message = ("stopped: the residual keeps growing even at the smallest mixing "
                           "factor; the structure may have no stable solution at this bias, or try "
                           "another solver.method")
                phi = best[1]
                break
            if res > BACKTRACK_FACTOR * best[0]:
                phi, r = best[1].copy(), best[2].copy()
        else:
            growth_count = max(0, growth_count - 1)
            relax = getattr(mixer, "relax", None)
            if relax is not None and len(history) > 2 and res < 0.5 * history[-2].residual:
                relax()
        if res > 1e3 * max(history[0].residual, 1e-3):
            message = ("diverged: max |dphi| grew above 1000x its first value; try "
                       "solver.method = \"predictor-corrector\" or a smaller solver.mixing")
            phi = best[1]
            break
        if _oscillating(history):
            if not mixer.damp():
                message = "stopped: the residual oscillates without decreasing; try a smaller solver.mixing"
                phi = best[1]
                break
            phi, r = best[1].copy(), best[2].copy()
        phi = mixer.update(phi, r)
    else:
        last = history[-1].residual if history else float("nan")
        message = (f"not converged after {max_iter} iterations (max |dphi| = {last:.2e} V, "
                   f"tolerance {tol:.1e} V); raise solver.max_iterations or try solver.method = "
                   "\"predictor-corrector\"")
    if not converged:       # phi moved after the last eigensolve: states at the final phi
        states = solve_states(st, phi, n_states, workspaces, quantum)
    return LoopOutcome(phi=phi, states=states, converged=converged, message=message,
                       iterations=history, classical_steps=classical_steps)


def _oscillating(history, window=8) -> bool:
    """True when the last ``window`` residuals neither fell by 2x nor trended down."""
    if len(history) < window:
        return False
    r = np.array([h.residual for h in history[-window:]])
    return bool(r[-1] > 0.5 * r[0] and np.sum(np.diff(r) > 0) >= window // 2 - 1)


# --------------------------------------------------------------------------- named steps

def boundary_conditions(st: Structure):
    """Per side (kind, value): kind 0 Dirichlet phi = value, kind 1 zero field."""
    from selfcon.solver import charge as coupling
    out = []
    for contact, c in ((st.surface, 0), (st.substrate, st.n_nodes - 2)):
        ec0 = st.cell["ec_gamma"][c]
        if contact.kind == "schottky":
            out.append((0, ec0 - (contact.barrier - contact.bias)))
        elif contact.kind == "pinned":
            out.append((0, ec0 - contact.barrier))
        elif contact.kind == "ohmic":
            out.append((0, coupling.neutral_potential_cell(st, c)))
        else:  # free
            out.append((1, 0.0))
    return tuple(out)


def initial_guess(st: Structure, bc, phi0=None):
    """Starting potential: the classical nonlinear Poisson solution (every carrier
    classical) on the coarsened meshes, interpolated to the full mesh; or a warm start."""
    from selfcon.solver import charge as coupling
    if phi0 is not None:
        phi = np.array(phi0, dtype=float)
        for side, idx in ((0, 0), (1, -1)):
            if bc[side][0] == 0:
                phi[idx] = bc[side][1]
        return phi, 0
    # nested start: solve the classical problem on coarsened copies of the mesh (every
    # interface, sheet and region end kept), coarsest first, each level starting from the
    # one before; the damped, expensive Newton phase then happens on a few dozen nodes.
    # Small meshes (one level) solve it on the mesh itself.
    steps = 0
    previous = None                   # (z, phi) of the last level solved
    for factor in start_levels(st.n_nodes):
        if factor == 1 and previous is not None:
            # the first predictor pass is a full nonlinear solve on the fine mesh anyway:
            # finishing the classical problem there first would only repeat its work
            return np.interp(st.z, *previous), steps
        level = coarsened(st, factor)[0] if factor > 1 else st
        phi = (coupling.linear_start(level, bc) if previous is None
               else np.interp(level.z, *previous))
        sol = coupling.solve_classical(level, bc, phi, tol=START_TOL, max_iter=POISSON_MAX_ITER)
        steps += sol.steps
        if not sol.converged and factor > 1:
            continue                  # a coarse level that fails is skipped, not trusted
        previous = (level.z, sol.phi)
    return sol.phi, steps


def start_levels(n_nodes: int) -> list[int]:
    """Coarsening factors of the nested classical start, coarsest first, ending with 1:
    the largest power of 4 leaving >= COARSE_START_NODES nodes, then 16x finer each level."""
    f = 1
    while n_nodes / (4 * f) >= COARSE_START_NODES:
        f *= 4
    levels = []
    while f > 1:
        levels.append(f)
        f //= 16
    return levels + [1]


def _interpolate_guess(st: Structure, guess):
    if isinstance(guess, tuple) and len(guess) == 2:
        z_old, phi_old = (np.asarray(a, dtype=float) for a in guess)
        return np.interp(st.z, z_old, phi_old)
    arr = np.asarray(guess, dtype=float)
    if arr.shape != st.z.shape:
        raise ValueError(f"initial_potential has {arr.size} values but the mesh has {st.z.size} nodes; "
                         "pass (z_nm, phi_V) to interpolate")
    return arr


def solve_states(st: Structure, phi, n_states, workspaces, quantum) -> dict:
    """Schrödinger in every quantum region for every quantum band at potential phi."""
    from selfcon.solver import charge as coupling
    out = {}
    n = st.n_nodes
    for band, (edge_key, mass_key, par_key, sign, gval) in BAND_SPECS.items():
        if band not in st.carriers or not st.regions:
            continue
        edge_node = st.node_average(st.cell[edge_key]) - phi      # band edge with electrostatics
        energies, psis, mpar, regs = [], [], [], []
        qnodes = np.zeros(n, dtype=bool)
        for r_idx, (i0, i1) in enumerate(st.regions):
            if i1 - i0 < 3:
                continue
            key = ("negligible", band, r_idx)
            if key not in workspaces:        # decided once per solve, at the starting potential
                workspaces[key] = coupling.classical_sheet(st, phi, band, i0, i1) < negligible_sheet(st)
            if workspaces[key]:
                continue           # this carrier is absent here: leave it classical (negligible)
            qnodes[i0:i1 + 1] = True
            sl = slice(i0, i1 + 1)
            h = st.mesh.h[i0:i1]
            w = st.mesh.w[sl].copy()
            w[0] = st.mesh.wr[i0]
            w[-1] = st.mesh.wl[i1]
            v = sign * edge_node[sl]                  # holes: kinetic energy up = -Ev
            inv_m = 1.0 / st.cell[mass_key][i0:i1]
            ws = workspaces.get((band, r_idx))
            if ws is None:
                ws = workspaces[(band, r_idx)] = quantum.EigenWorkspace(i1 - i0 + 1)
            k = n_states[band]
            while True:
                e, p = quantum.solve_region(h, w, v, inv_m, k, workspace=ws)
                occ = subband_density(sign * e, np.ones(e.size), st.temperature, sign)
                if (e.size < k or k >= MAX_STATES or occ.sum() <= 0
                        or occ[-1] < TOP_STATE_FRACTION * occ.sum()):
                    break
                k = min(2 * k, MAX_STATES)
                n_states[band] = k
            full = np.zeros((n, e.size))
            full[sl, :] = p
            energies.append(sign * e)
            psis.append(full)
            m_par_node = st.node_average(st.cell[par_key])
            mpar.append(quantum.in_plane_mass(full, st.mesh.w, m_par_node))
            regs.append(np.full(e.size, r_idx))
        if not energies:
            continue
        E = np.concatenate(energies)
        order = np.argsort(sign * E, kind="stable")     # lowest kinetic energy first
        psi = np.concatenate(psis, axis=1)[:, order]
        m_par = np.concatenate(mpar)[order]
        from selfcon.constants import DOS2D_PER_M0
        deg = np.full(E.size, float(gval))
        out[band] = BandStates(band=band, energy=E[order], psi=psi, m_par=m_par,
                               dos=deg * DOS2D_PER_M0 * m_par, region=np.concatenate(regs)[order],
                               degeneracy=deg, sign=sign, quantum_nodes=qnodes)
    return out


def negligible_sheet(st: Structure) -> float:
    """Classical sheet density (nm^-2) below which a band is not worth an eigensolve."""
    val = st.extras.get("negligible_sheet")
    if val is None:
        m = st.mesh
        fixed = (np.sum((st.cell["donors"] + st.cell["acceptors"]) * m.h)
                 + np.sum(st.sheet_donors + st.sheet_acceptors))
        val = st.extras["negligible_sheet"] = max(NEGLIGIBLE_SHEET, NEGLIGIBLE_FRACTION * float(fixed))
    return val


def poisson_pass(st: Structure, bc, phi, states, *, predictor: bool, tol: float = POISSON_TOL,
                 max_newton: int = POISSON_MAX_ITER, backtrack: bool = True):
    """Nonlinear Poisson with the quantum density from ``states`` (predictor or frozen):
    Newton to ``tol`` or at most ``max_newton`` steps."""
    from selfcon.solver import charge as coupling
    sol = coupling.solve_with_states(st, bc, phi, states, predictor=predictor,
                                    tol=tol, max_iter=max_newton, backtrack=backtrack)
    return sol.phi, sol.steps


def charge_residual(st, bc, phi, phi_out, states) -> float:
    """Relative change of the mobile sheet charge over one step: subband density at phi
    against the (predicted) density at phi_out, both with the same states."""
    from selfcon.solver import charge as coupling
    n0, p0 = coupling.mobile_sheets(st, phi, phi, states)
    n1, p1 = coupling.mobile_sheets(st, phi, phi_out, states)
    total = n0 + p0
    return abs((n1 + p1) - total) / max(total, 1e-6 / CM2_PER_NM2)


__all__ = ["run_loop", "make_mixer", "extrapolate_potential", "solve_states",
           "poisson_pass", "initial_guess", "boundary_conditions", "BAND_SPECS", "BandStates"]
