"""The named steps of the self-consistent loop, and the workspace they share.

:func:`selfcon.solver.loop.run_loop` calls these, in this order::

    bc = boundary_conditions(structure)              # contacts -> (kind, value) per side
    ws = Workspace(structure, bc)                    # every cache of one solve
    phi = initial_guess(ws, phi0)                    # classical nonlinear Poisson, nested meshes
    states = solve_states(ws, phi)                   # Schrödinger: every quantum band and region
    phi_out, steps = poisson_pass(ws, phi, states)   # nonlinear Poisson with that charge
    charge_residual(ws, phi, phi_out, states)        # did the sheet charge stop moving?

and the result assembly (selfcon.output.assemble) asks the same workspace for the
densities of the final potential (:func:`densities`) and the Gauss check
(:func:`gauss_residual`).

This module is also the translation between the two vocabularies: the loop speaks in
Structures and :class:`BandStates`, the Poisson solver (selfcon.solver.poisson and its
kernels) in arrays.  :func:`classical_problem` and :meth:`Workspace.problem` build the
:class:`~selfcon.solver.poisson.PoissonProblem`: which nodes are quantum for which carrier,
the |psi|^2 weights and subband DOS of every state, the classical X/L valleys.

A :class:`~selfcon.model.structure.Structure` is immutable and shared (design studies
solve one structure many times); everything one solve computes once and reuses lives in
its :class:`Workspace`, created by the loop and handed on in the loop's outcome.
"""
from __future__ import annotations

import functools
from dataclasses import dataclass

import numpy as np

from selfcon.constants import CM2_PER_NM2, DOS2D_PER_M0
from selfcon.model.dopants import statistics_binding
from selfcon.model.structure import Structure, coarsened, derived
from selfcon.solver import poisson as P
from selfcon.solver import schrodinger
from selfcon.solver.control import POISSON_MAX_ITER, POISSON_TOL, START_TOL
from selfcon.solver.statistics import subband_density
from selfcon.solver.threads import run_all, thread_count

#: band name -> (edge key, mass along z, in-plane mass, sign: +1 electrons, -1 holes, valley degeneracy)
BAND_SPECS = {
    "electron": ("ec_gamma", "m_e", "m_e_par", +1, 1),     # in-plane mass: m_e but in wurtzite
    "heavy_hole": ("ev_hh", "m_hh_z", "m_hh_par", -1, 1),
    "light_hole": ("ev_lh", "m_lh_z", "m_lh_par", -1, 1),
}
HOLE_BANDS = ("heavy_hole", "light_hole")
#: the states of the multiband hole model (physics.hole_model kp4 / kp6) in place of the
#: hole bands: selfcon.solver.kp.KpStates under this name
KP_BAND = "hole_kp"

#: the conduction valley sets of physics.quantum_valleys (selfcon.model.structure.valley_sets):
#: band name -> (edge key, mass along z, in-plane mass, sign, degeneracy key: a per-cell count)
VALLEY_BANDS = {
    "x2_electron": ("ec_x2", "m_x2_z", "m_x2_par", +1, "g_x2"),
    "x4_electron": ("ec_x4", "m_x4_z", "m_x4_par", +1, "g_x4"),
    "l_electron": ("ec_l", "m_l_z", "m_l_par", +1, "g_l"),
}
#: the deck carrier (physics.carriers) of each valley band, and its classical rows
VALLEY_CARRIER = {"x2_electron": "x_electron", "x4_electron": "x_electron",
                  "l_electron": "l_electron"}
QUANTUM_VALLEY_ROWS = {"x_electron": (("x2_electron", "ec_x2", "nc_x2"),
                                      ("x4_electron", "ec_x4", "nc_x4")),
                       "l_electron": (("l_electron", "ec_l", "nc_l"),)}
#: every band any structure may solve (lookups by name)
ALL_BANDS = {**BAND_SPECS, **VALLEY_BANDS}
#: the bands whose states are electrons (their charge shares the electron mask)
ELECTRON_BANDS = ("electron",) + tuple(VALLEY_BANDS)

#: carrier name -> (band-edge key, effective-DOS key) of the classical conduction valleys
VALLEYS = {"x_electron": ("ec_x", "nc_x"), "l_electron": ("ec_l", "nc_l")}
#: the same valleys in a strained structure, split into sets of different edges
#: (selfcon.model.strain.X_VALLEY_SETS: the X valley along z and the two in the plane)
SPLIT_VALLEYS = {"x_electron": (("ec_x_z", "nc_x_z"), ("ec_x_xy", "nc_x_xy"))}


def bands_of(st: Structure) -> dict:
    """The bands a structure solves: BAND_SPECS, and with ``st.quantum_valleys`` the valley
    sets of the X/L carriers that ``st.carriers`` counts."""
    out = dict(BAND_SPECS)
    if getattr(st, "quantum_valleys", False):
        out.update({b: s for b, s in VALLEY_BANDS.items() if VALLEY_CARRIER[b] in st.carriers})
    return out


def carrier_of(band: str) -> str:
    """The physics.carriers name that switches a band on."""
    return VALLEY_CARRIER.get(band, band)


def state_degeneracy(st: Structure, band: str, psi) -> np.ndarray:
    """Valley degeneracy (spin excluded) of each state of ``band``: the band's number, or
    for a valley set its per-cell count averaged with the state's |psi|^2 (exact in a region
    of one crystal: 2 Delta valleys of Si and Ge along z, 1 zincblende X valley)."""
    g = ALL_BANDS[band][4]
    psi = np.asarray(psi, dtype=float)
    if not isinstance(g, str):
        return np.full(psi.shape[1], float(g))
    gn = st.node_average(st.cell[g])
    w = st.mesh.w[:, None] * psi ** 2
    tot = w.sum(axis=0)
    return np.where(tot > 0, (gn[:, None] * w).sum(axis=0) / np.where(tot > 0, tot, 1.0),
                    float(np.max(st.cell[g])))


#: a band whose classical sheet density in a region is below this (nm^-2), and below
#: NEGLIGIBLE_FRACTION of the structure's fixed sheet charge, is left classical there
NEGLIGIBLE_SHEET = 1e3 / CM2_PER_NM2
NEGLIGIBLE_FRACTION = 1e-8
#: grow the number of states while the top state still holds this fraction of the band's charge
TOP_STATE_FRACTION = 1e-4
MAX_STATES = 200
#: the nested classical start begins on a mesh of about this many nodes (see start_levels)
COARSE_START_NODES = 32


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
    weight: np.ndarray = None  # (N, k) density weight per state (|psi|^2 but for nearly degenerate
                               # states, schrodinger.in_plane_weights), sum_z w weight = 1
    #: (N,) 0.0 at the quantum nodes, 1.0 elsewhere (the Poisson problem's classical mask of
    #: a band alone; None: made from quantum_nodes when asked)
    classical: np.ndarray = None


# --------------------------------------------------------------------------- the workspace

class Workspace:
    """Everything one solve of one structure computes once and reuses.

    Owned by :func:`selfcon.solver.loop.run_loop` (one per solve) and passed to every
    step; the loop hands it on in its ``LoopOutcome`` so the result assembly reuses the
    last density evaluation.  Holds:

    * ``problem_classical`` / ``problem_free``: the classical Poisson problem with the
      solve's boundary conditions and with free ends (for density evaluations);
    * ``n_states``: the number of states asked of each band (grown while the top state
      still holds charge, kept for the next iteration);
    * which (band, region) pairs hold negligible charge and stay classical (decided once,
      at the starting potential), and the eigen-solver buffers of the others;
    * the last density evaluation (by identity of phi and the states).
    """

    def __init__(self, structure: Structure, bc, threads: int | None = None):
        self.structure = structure
        #: threads for the independent eigenproblems of each iteration (selfcon.solver.threads)
        self.threads = thread_count(threads)
        self.bc = tuple(bc)
        self.problem_classical, self.problem_free = classical_problems(structure, self.bc)
        self.n_states = {band: structure.states for band in bands_of(structure)}
        self.n_states[KP_BAND] = 0             # 0: selfcon.solver.kp.FIRST_STATES
        self.kp_top = 0.0                      # nm^-1, the end of the multiband holes' k grid
        self.kp_basis: dict = {}               # region -> the kept reduced basis (kp.reduced_dispersion)
        self.negligible: dict = {}       # (band, region) -> bool
        #: the (band, region) eigenproblems of every iteration (solve_states, _state_plan)
        self.plan = None
        #: band -> (its quantum nodes, its classical mask) under the plan (solve_states)
        self.band_nodes: dict = {}
        self.eigen: dict = {}            # (band, region) -> EigenWorkspace
        #: (band, region) pairs whose count of states did not grow at the last solve
        #: (band_region_states solves them without probing the count first)
        self.settled: set = set()
        self._last = None                # (phi, states, (n, p, nd+, na-))
        self._slope = None               # (phi, states, d(n + p)/d phi): charge_residual
        self._classical = None           # (phi, Densities) with every carrier classical
        #: band -> (N,) eV exchange-correlation potential energy on the band's kinetic scale
        #: (selfcon.solver.exchange; set by update_exchange, empty for a Hartree solve)
        self.vxc: dict = {}
        #: classical sheet density (nm^-2) below which a band is not worth an eigensolve
        self.negligible_sheet = derived(structure, "negligible_sheet", lambda: _negligible_sheet(structure))

    def problem(self, phi_ref, states, *, shift=1.0, boundaries=True):
        """Poisson problem whose quantum nodes take their density from ``states``.

        ``shift`` = 1: predictor (subbands follow the local potential change);
        ``shift`` = 0: frozen quantum density (classic mixing).  ``boundaries``: the
        solve's boundary conditions (True) or free ends (False: density evaluations).
        """
        base = self.problem_classical if boundaries else self.problem_free
        return with_states(base, self.structure.n_nodes, phi_ref, states, shift,
                           structure=self.structure)

    def classical_densities(self, phi) -> P.Densities:
        """Densities with every carrier classical at ``phi`` (the last one is remembered)."""
        if self._classical is None or self._classical[0] is not phi:
            self._classical = (phi, P.densities(self.problem_free, phi))
        return self._classical[1]


def _negligible_sheet(structure: Structure) -> float:
    """Workspace.negligible_sheet of a structure (its doping and fixed sheets alone: made once
    per structure)."""
    m = structure.mesh
    fixed = (np.sum((structure.cell["donors"] + structure.cell["acceptors"]) * m.h)
             + np.sum(structure.sheet_donors + structure.sheet_acceptors)
             + (np.sum(np.abs(structure.sheet_fixed)) if structure.sheet_fixed is not None else 0.0))
    return max(NEGLIGIBLE_SHEET, NEGLIGIBLE_FRACTION * float(fixed))


def classical_problems(st: Structure, bc) -> tuple[P.PoissonProblem, P.PoissonProblem]:
    """(the classical problem with boundary conditions ``bc``, the same with free ends), made
    once per structure and ``bc`` (selfcon.model.structure.derived): every solve of a
    structure starts from the same two."""
    made = derived(st, "classical_problems", dict)        # bc -> the two, the newest last
    bc = tuple(bc)
    pair = made.pop(bc, None)
    if pair is None:
        base = classical_problem(st, bc)
        pair = (base, base.with_boundaries((P.ZERO_FIELD, 0.0), (P.ZERO_FIELD, 0.0)))
    made[bc] = pair
    while len(made) > 4:                  # a bias sweep on one structure keeps only a few
        del made[next(iter(made))]
    return pair


def classical_problem(st: Structure, bc=None) -> P.PoissonProblem:
    """The classical Poisson problem of a structure (every carrier classical, no states)."""
    c = st.cell
    carriers = st.carriers
    nc = c["nc"] if "electron" in carriers else np.zeros_like(c["nc"])
    ev0, nv, ev_v, nv_v = hole_arrays(st)
    top, bottom = bc if bc is not None else ((P.ZERO_FIELD, 0.0), (P.ZERO_FIELD, 0.0))
    ec_v, nc_v = valley_arrays(st)
    efn, efp = st.fermi_levels
    nd, ed, sheet_nd, sheet_ed = donor_arrays(st)
    return P.PoissonProblem(z=st.z, eps=c["eps"], ec0=c["ec_gamma"], ev0=ev0, nc=nc, nv=nv,
                            nd=nd, ed=ed,
                            na=c["acceptors"], ea=statistics_binding(c["acceptor_binding"]),
                            temperature=st.temperature,
                            sheet_nd=sheet_nd, sheet_na=st.sheet_acceptors,
                            sheet_ed=sheet_ed,
                            sheet_ea=statistics_binding(st.sheet_ea),
                            sheet_fixed=st.sheet_fixed,
                            full_ionization=st.full_ionization, top=top, bottom=bottom,
                            ec0_v=ec_v, nc_v=nc_v, ev0_v=ev_v, nv_v=nv_v, efn=efn, efp=efp)


def donor_arrays(st: Structure):
    """(nd per cell, donor binding per cell as the statistics take it, donor sheets per node,
    their binding per node as the statistics take it).

    Shallow donors: binding 0 (no bound state) is -inf (fully ionised,
    selfcon.model.dopants.statistics_binding).  Si-DX cells (cell["dx"]) keep their deep
    binding as it is, negative where the level is resonant with the band.  After a dark
    cool-down (``st.dx_frozen``) the DX centres no longer follow the Fermi level: their
    ionised part is a fixed charge (density times the frozen ionised fraction, binding
    -inf) and the rest is neutral."""
    c = st.cell
    # shallow levels lie their binding below the conduction minimum: as the statistics take
    # the Gamma edge, the binding grows by Gamma minus that minimum (0 where Gamma is lowest)
    below = c["ec_gamma"] - c.get("ec_min", c["ec_gamma"])
    ed = statistics_binding(c["donor_binding"]) + below
    nd = c["donors"]
    sheet = st.sheet_donors
    sheet_ed = statistics_binding(st.sheet_ed) + np.append(below, below[-1])
    dx = c.get("dx")
    if dx is None or not np.any(dx > 0):
        return nd, ed, sheet, sheet_ed
    deep = dx > 0
    ed = np.where(deep, c["donor_binding"], ed)
    sheet_ed = np.where(st.sheet_dx, st.sheet_ed, sheet_ed)
    if st.dx_frozen is not None:
        cell_f, sheet_f, _ = st.dx_frozen
        frozen = deep & np.isfinite(cell_f)            # NaN: this layer stays in equilibrium
        nd = np.where(frozen, nd * np.nan_to_num(cell_f), nd)
        ed = np.where(frozen, -np.inf, ed)
        sheet_frozen = st.sheet_dx & np.isfinite(sheet_f)
        sheet = np.where(sheet_frozen, sheet * np.nan_to_num(sheet_f), sheet)
        sheet_ed = np.where(sheet_frozen, -np.inf, sheet_ed)
    return nd, ed, sheet, sheet_ed


def valley_rows(st: Structure, name):
    """[(edge, effective DOS), ...] per cell of one classical conduction valley carrier: one
    row, or one per valley set where strain splits them or quantum valleys solve them
    (QUANTUM_VALLEY_ROWS: x2, x4 and l, whose cells inside quantum regions with_states
    empties)."""
    if getattr(st, "quantum_valleys", False):
        return [(st.cell[e], st.cell[d]) for _, e, d in QUANTUM_VALLEY_ROWS[name]]
    split = SPLIT_VALLEYS.get(name)
    if split is not None and split[0][0] in st.cell:
        return [(st.cell[e], st.cell[d]) for e, d in split]
    e, d = VALLEYS[name]
    return [(st.cell[e], st.cell[d])]


def valley_row_bands(st: Structure) -> list:
    """The valley band of each row of :func:`valley_arrays` (None: a row no band solves)."""
    out = []
    for name in VALLEYS:
        if name not in st.carriers:
            continue
        if getattr(st, "quantum_valleys", False):
            out += [b for b, _, _ in QUANTUM_VALLEY_ROWS[name]]
        else:
            out += [None] * len(valley_rows(st, name))
    return out


def quantum_cells(quantum_nodes) -> np.ndarray:
    """(N-1,) True for the cells whose two nodes are both quantum nodes of a band."""
    q = np.asarray(quantum_nodes, dtype=bool)
    return q[:-1] & q[1:]


def masked_valley_dos(st: Structure, nc_v, states) -> np.ndarray:
    """The rows of effective DOS ``nc_v`` (V, N-1) with the cells where a quantum valley band
    holds the charge emptied: there its subbands carry the density (the Gamma electrons' mask
    does the same at the quantum nodes)."""
    rows = valley_row_bands(st)
    if not any(b is not None and b in states for b in rows):
        return nc_v
    out = np.array(nc_v, dtype=float, copy=True)
    for r, b in enumerate(rows):
        if b is not None and b in states:
            out[r, quantum_cells(states[b].quantum_nodes)] = 0.0
    return out


def valley_arrays(st: Structure):
    """(ec0_v, nc_v), each (V, N-1), of the X/L valleys the deck's carriers include."""
    rows = [row for name in VALLEYS if name in st.carriers for row in valley_rows(st, name)]
    n = st.n_nodes - 1
    if not rows:
        return np.zeros((0, n)), np.zeros((0, n))
    return np.stack([r[0] for r in rows]), np.stack([r[1] for r in rows])


def hole_arrays(st: Structure):
    """(ev0, nv, ev0_v, nv_v) of the classical holes.

    Unstrained: heavy and light holes share the edge ev0 and one effective DOS nv of the
    combined valence DOS mass, no further band.  Strained (the structure carries nv_hh,
    nv_lh): the heavy hole at ev_hh with nv_hh and the light hole as a further band at ev_lh
    with nv_lh, so each sits at its own edge.  Both bands count whenever the deck's carriers
    include a hole band (as the combined DOS does).  Wurtzite (the structure carries nv_ch):
    the crystal-field split-off hole at ev_ch is a second further band."""
    c = st.cell
    n = st.n_nodes - 1
    on = any(b in st.carriers for b in HOLE_BANDS)
    if "nv_hh" not in c:
        nv = c["nv"] if on else np.zeros_like(c["nv"])
        return c["ev0"], nv, np.zeros((0, n)), np.zeros((0, n))
    if not on:
        return c["ev0"], np.zeros(n), np.zeros((0, n)), np.zeros((0, n))
    if "nv_ch" in c:        # wurtzite: the crystal-field split-off hole as a third band
        return (c["ev_hh"], c["nv_hh"], np.stack([c["ev_lh"], c["ev_ch"]]),
                np.stack([c["nv_lh"], c["nv_ch"]]))
    return c["ev_hh"], c["nv_hh"], c["ev_lh"][None, :], c["nv_lh"][None, :]


def _stacked(bands, n_nodes: int):
    """(classical mask, |psi|^2 weights, levels, DOS) of one carrier's bands stacked: the mask
    is 0 at the nodes any of them holds quantum."""
    if len(bands) == 1:
        # one band's own arrays as they are (read only): a copy of its (N, K) weights per
        # Poisson problem cost ~1 ms on a 160-state stack, several problems per iteration
        b = bands[0]
        cls = getattr(b, "classical", None)
        return (np.where(b.quantum_nodes, 0.0, 1.0) if cls is None else cls, np.ascontiguousarray(b.weight),
                np.ascontiguousarray(b.energy, dtype=float), np.ascontiguousarray(b.dos, dtype=float))
    qn = np.zeros(n_nodes, dtype=bool)
    for b in bands:
        qn |= b.quantum_nodes
    return (np.where(qn, 0.0, 1.0), np.ascontiguousarray(np.concatenate([b.weight for b in bands], axis=1)),
            np.concatenate([b.energy for b in bands]), np.concatenate([b.dos for b in bands]))


def with_states(base: P.PoissonProblem, n_nodes: int, phi_ref, states, shift=1.0, structure=None):
    """``base`` with the quantum part of ``states`` (the masks, |psi|^2, levels and DOS).

    Every electron band (Gamma and the quantum valley sets) shares the electron mask and
    adds its states to the electron subbands; a quantum valley set also empties its
    classical row inside its quantum cells (:func:`masked_valley_dos`, needs ``structure``)."""
    kw = {}
    elec = [states[b] for b in ELECTRON_BANDS if b in states]
    if elec:
        kw.update(zip(("cls_e", "psi2", "ek", "dos_e"), _stacked(elec, n_nodes)))
    holes = [states[b] for b in HOLE_BANDS + (KP_BAND,) if b in states]
    if holes:
        kw.update(zip(("cls_h", "psi2h", "ekh", "dos_h"), _stacked(holes, n_nodes)))
    prob = base.with_quantum(phi_ref=np.asarray(phi_ref, dtype=float), **kw)
    if structure is not None and any(eb.band in VALLEY_BANDS for eb in elec):
        prob = prob.with_valley_dos(masked_valley_dos(structure, base.nc_v, states))
    if shift != 1.0:
        prob = prob.with_shift(shift)
    return prob


# --------------------------------------------------------------------------- the steps

def boundary_conditions(st: Structure):
    """Per side (kind, value): kind 0 Dirichlet phi = value (V), kind 1 zero field.  A
    barrier is measured from the conduction minimum of the end cell (cell["ec_min"]: Gamma,
    or the X/Delta or L valley where lower)."""
    out = []
    free = None
    ecm = st.cell.get("ec_min", st.cell["ec_gamma"])
    for contact, c in ((st.surface, 0), (st.substrate, st.n_nodes - 2)):
        ec0 = ecm[c]
        if contact.kind == "schottky":
            out.append((P.DIRICHLET, ec0 - (contact.barrier - contact.bias)))
        elif contact.kind == "pinned":
            out.append((P.DIRICHLET, ec0 - contact.barrier))
        elif contact.kind == "ohmic":
            free = free or classical_problem(st)
            out.append((P.DIRICHLET, contact_neutral_potential(st, free, c)))
        else:  # free
            out.append((P.ZERO_FIELD, 0.0))
    return tuple(out)


def initial_guess(ws: Workspace, phi0=None):
    """Starting potential and its Newton step count: the classical nonlinear Poisson
    solution (every carrier classical) on coarsened meshes, interpolated to the full
    mesh; or ``phi0`` (a warm start) with the Dirichlet values imposed.

    The classical start depends only on the structure and the boundary conditions, so it
    is made once per structure and ``bc`` (selfcon.model.structure.derived, like
    :func:`classical_problems`), together with the classical densities at it that decide
    which (band, region) pairs stay classical: a structure solved again (a repeated solve,
    a study point, the cold retry of solve_warm) starts from the same bits without redoing
    the nested Newton solves."""
    st, bc = ws.structure, ws.bc
    if phi0 is not None:
        phi = np.array(phi0, dtype=float)
        for side, idx in ((0, 0), (1, -1)):
            if bc[side][0] == P.DIRICHLET:
                phi[idx] = bc[side][1]
        return phi, 0
    made = derived(st, "classical_start", dict)       # bc -> (phi, steps, densities), newest last
    start = made.pop(bc, None)
    if start is None:
        phi, steps = nested_start(ws)
        phi.setflags(write=False)
        dens = None
        if st.regions:            # solve_states decides its negligible pairs at these densities
            dens = P.densities(ws.problem_free, phi)
            for a in (dens.n, dens.p, dens.nd_plus, dens.na_minus):
                a.setflags(write=False)
        start = (phi, steps, dens)
    made[bc] = start
    while len(made) > 4:                  # a bias sweep on one structure keeps only a few
        del made[next(iter(made))]
    phi = start[0].copy()
    if start[2] is not None:
        ws._classical = (phi, start[2])
    return phi, start[1]


def first_counts(ws: Workspace, keep: bool = False) -> None:
    """The counts of states the first iteration from the classical start settles on, kept
    with the structure and ``bc`` (selfcon.model.structure.derived, like the start itself).

    ``keep=False`` (before the first iteration): a count kept by an earlier solve is taken
    as the band's count and its (band, region) as settled, so the eigensolve asks for it
    at once instead of probing it up from ``structure.states`` (the same phi, so the same
    count; a settled count is solved with the same bits, band_region_states).  ``keep=True``
    (after the first iteration): keep them.  Only bands of one quantum region with a
    parabolic clustered eigensolve take part: a band's count is the largest of its regions',
    and the other solvers' states may depend on the counts asked for before."""
    made = derived(ws.structure, "first_counts", dict)      # bc -> {(band, region): count}
    if not keep:
        if schrodinger.DEFAULT_METHOD != "clustered":         # (tools/bench.py's baseline)
            return
        for (band, r_idx), count in made.get(ws.bc, {}).items():
            ws.n_states[band] = count
            ws.settled.add((band, r_idx))
        return
    keys = [key for key in ws.eigen if not ws.negligible.get(key, False)]
    out = {}
    for band, r_idx in keys:
        eig = ws.eigen[(band, r_idx)]
        if (sum(1 for b, _ in keys if b == band) == 1 and eig.method == "clustered"
                and not nonparabolic_band(ws.structure, band)):
            out[(band, r_idx)] = ws.n_states[band]
    made[ws.bc] = out
    while len(made) > 4:                  # a bias sweep on one structure keeps only a few
        del made[next(iter(made))]


def nested_start(ws: Workspace):
    """The classical start of :func:`initial_guess` computed: (phi, Newton steps)."""
    st, bc = ws.structure, ws.bc
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
        prob = classical_problems(level, bc)[0] if factor > 1 else ws.problem_classical
        phi = linear_start(level, bc) if previous is None else np.interp(level.z, *previous)
        sol = P.solve_poisson(prob, phi, tol=START_TOL, max_iter=POISSON_MAX_ITER)
        steps += sol.steps
        if not sol.converged and factor > 1:
            continue                  # a coarse level that fails is skipped, not trusted
        previous = (level.z, sol.phi)
    return sol.phi, steps


#: farthest (V) the neutral flat start of a stack with two free ends is sought from its first guess
NEUTRAL_SPAN = 16.0


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


def linear_start(st: Structure, bc):
    """A first potential for Newton: the boundary values joined linearly (flat if both free)."""
    z = st.z
    (k0, v0), (k1, v1) = bc
    if k0 == P.DIRICHLET and k1 == P.DIRICHLET:
        return v0 + (v1 - v0) * (z - z[0]) / (z[-1] - z[0])
    if k0 == P.DIRICHLET:
        return np.full(z.size, v0)
    if k1 == P.DIRICHLET:
        return np.full(z.size, v1)
    # both ends free (zero field): Gauss's law leaves the stack neutral as a whole, so the
    # start is the one flat potential at which it is (:func:`neutral_shift`), not the
    # neutral level of one cell, which left a stack of doped and undoped layers charged:
    # at low temperature its carriers then sat ~exp(-1 eV/kT) below anything Newton could
    # move, and the loop walked the whole band gap in clamped steps
    mid = st.n_nodes // 2 - 1 if st.n_nodes > 2 else 0
    problem = classical_problem(st)
    level = contact_neutral_potential(st, problem, mid)
    return np.full(z.size, neutral_shift(problem, level))


def neutral_shift(problem: P.PoissonProblem, guess: float) -> float:
    """The flat potential (V) at which the whole stack of ``problem`` is neutral, the FV
    integral of rho zero (selfcon.solver.poisson.total_charge).  rho falls with phi at every
    node, so the total does too: a bracket around ``guess`` is widened until the total
    changes sign, then brentq.  Without a sign change within NEUTRAL_SPAN V (no carrier can
    balance the doping and the sheets: the deck's carriers leave one sign out) ``guess``."""
    from scipy.optimize import brentq
    flat = np.empty(problem.z.size)

    def total(phi):
        flat.fill(phi)
        return P.total_charge(problem, flat)

    a = float(guess)
    fa = total(a)
    if fa == 0.0:
        return a
    up = 1.0 if fa > 0 else -1.0          # positive: more electrons, fewer holes (a higher phi)
    step, travelled = 0.25, 0.0
    while travelled + step <= NEUTRAL_SPAN:
        b = a + up * step
        fb = total(b)
        if (fb < 0) if up > 0 else (fb > 0):
            return float(brentq(total, min(a, b), max(a, b), xtol=1e-12))
        a = b
        travelled += step
        step *= 2.0
    return float(guess)


def contact_neutral_potential(st: Structure, problem: P.PoissonProblem, c: int) -> float:
    """phi (V) of the neutral level of cell c: with the deck's carriers where they can
    neutralise the cell; otherwise (an undoped layer with ``carriers = ["electron"]``, an
    n-type one without electrons) the level at which the material itself is neutral, with
    both bands' density of states (the intrinsic level of an undoped layer), although the
    carriers of one band are not computed.  Without that fallback no finite level exists:
    the band edges would land ~1e18 eV from the Fermi level."""
    if P.can_neutralise(problem, c):
        return P.cell_neutral_potential(problem, c)
    cell = st.cell
    efn, efp = st.fermi_levels
    nc, nv, kT = cell["nc"][c], cell["nv"][c], problem.kT
    if problem.nd[c] == problem.na[c]:
        # undoped (or exactly compensated): n = p, nondegenerate, in closed form:
        # Nc exp((efn - Ec0 + phi)/kT) = Nv exp((Ev0 - phi - efp)/kT); the root search would
        # find only underflowed densities at low temperature (exp(-Eg/2kT) = 0 below ~30 K)
        return float(0.5 * (problem.ec0[c] + cell["ev0"][c] - efn - efp)
                     + 0.5 * kT * np.log(nv / nc))
    return P.neutral_potential(problem.ec0[c], cell["ev0"][c], cell["nc"][c], cell["nv"][c],
                               problem.nd[c], problem.ed[c], problem.na[c], problem.ea[c],
                               kT, problem.full_ionization, efn=efn, efp=efp)


def interpolate_guess(st: Structure, guess):
    """A starting potential on this structure's mesh from ``guess``: phi (V) per node, or
    ``(z_nm, phi_V)`` from another mesh (linear interpolation)."""
    if isinstance(guess, tuple) and len(guess) == 2:
        z_old, phi_old = (np.asarray(a, dtype=float) for a in guess)
        return np.interp(st.z, z_old, phi_old)
    arr = np.asarray(guess, dtype=float)
    if arr.shape != st.z.shape:
        raise ValueError(f"initial_potential has {arr.size} values but the mesh has {st.z.size} nodes; "
                         "pass (z_nm, phi_V) to interpolate")
    return arr


def solve_states(ws: Workspace, phi) -> dict:
    """Schrödinger in every quantum region for every quantum band at potential ``phi``:
    band name -> :class:`BandStates`.  A (band, region) pair whose classical charge is
    negligible stays classical; the number of states grows while the top one holds charge.

    The (band, region) eigenproblems are independent: they run on ``ws.threads`` threads
    (selfcon.solver.threads.run_all) and are put together in a fixed order, so the answer
    does not depend on the thread count.  Each starts from the band's count of states
    of the previous iteration and grows on its own; the band keeps the largest."""
    st = ws.structure
    bands = bands_of(st)
    multiband = st.hole_model != "parabolic"
    plan = ws.plan
    if plan is None:          # the (band, region) pairs to solve: the same every iteration
        plan = ws.plan = _state_plan(ws, phi, bands)
    tasks = [[band, r_idx, eig, ws.n_states[band], ws.vxc.get(band), alone, (band, r_idx) not in ws.settled]
             for band, r_idx, eig, alone in plan]
    solved = run_all(lambda task: band_region_states(st, phi, *task), tasks, ws.threads)
    mine_of = {}
    for task, res in zip(tasks, solved):      # a count that did not grow: no probe next time
        (ws.settled.add if res[5] == task[3] else ws.settled.discard)((task[0], task[1]))
        mine_of.setdefault(task[0], []).append((task, res))
    # the full-mesh (N, K) arrays of each band, states in energy order: each task's region
    # part goes into its rows and its states' columns, on the same threads (nogil kernel;
    # rows of different regions do not overlap)
    out, places = {}, []
    for band, (_, _, _, sign, _) in bands.items():
        mine = mine_of.get(band)
        if not mine:
            continue
        nodes = ws.band_nodes.get(band)
        if nodes is None:         # the band's regions are the plan's: the same every iteration
            qnodes = np.zeros(st.n_nodes, dtype=bool)
            for task, _ in mine:
                i0, i1 = st.regions[task[1]]
                qnodes[i0:i1 + 1] = True
            nodes = ws.band_nodes[band] = (qnodes, np.where(qnodes, 0.0, 1.0))
        qnodes, classical = nodes
        ws.n_states[band] = max([ws.n_states[band]] + [res[5] for _, res in mine])
        if mine[0][0][5]:                  # alone: the task's (N, k) arrays
            res = mine[0][1]
            E = res[0]
            kinetic = E if sign > 0 else -E
            if E.size < 2 or bool((kinetic[1:] >= kinetic[:-1]).all()):
                # already lowest kinetic energy first (the eigensolver's order): the stable
                # argsort would be the identity, so the task's own fresh arrays are the band's
                out[band] = BandStates(band=band, energy=E, psi=res[1], m_par=res[2], dos=None,
                                       region=res[4], degeneracy=None, sign=sign,
                                       quantum_nodes=qnodes, weight=res[3], classical=classical)
                continue
            order = np.argsort(sign * E, kind="stable")
            out[band] = BandStates(band=band, energy=E[order], psi=np.take(res[1], order, axis=1),
                                   m_par=res[2][order], dos=None, region=res[4][order],
                                   degeneracy=None, sign=sign, quantum_nodes=qnodes,
                                   weight=np.take(res[3], order, axis=1), classical=classical)
            continue
        E = np.concatenate([res[0] for _, res in mine])
        order = np.argsort(sign * E, kind="stable")     # lowest kinetic energy first
        m_par = np.concatenate([res[2] for _, res in mine])[order]
        region = np.concatenate([res[4] for _, res in mine])[order]
        column = np.empty(E.size, dtype=np.int64)
        column[order] = np.arange(E.size)
        # rows of the band's regions are written whole by their own task (_place), the others
        # zeroed here: no serial pass over the whole (N, K) arrays
        psi, weight = np.empty((st.n_nodes, E.size)), np.empty((st.n_nodes, E.size))
        psi[~qnodes] = 0.0
        weight[~qnodes] = 0.0
        start = 0
        for task, res in mine:
            count = res[0].size
            places.append((res, st.regions[task[1]][0], column[start:start + count], psi, weight))
            start += count
        out[band] = BandStates(band=band, energy=E[order], psi=psi, m_par=m_par, dos=None,
                               region=region, degeneracy=None, sign=sign, quantum_nodes=qnodes,
                               weight=weight, classical=classical)
    if places:
        run_all(_place, places, ws.threads)
    for band, bs in out.items():
        bs.degeneracy = state_degeneracy(st, band, bs.psi)
        bs.dos = bs.degeneracy * DOS2D_PER_M0 * bs.m_par
    if multiband and st.regions and any(b in st.carriers for b in HOLE_BANDS):
        hk = kp_states(ws, phi)
        if hk is not None:
            out[KP_BAND] = hk
    return out


def _state_plan(ws: Workspace, phi, bands) -> list:
    """[(band, region, EigenWorkspace, alone)] of :func:`solve_states`: every (band, quantum
    region) pair of a counted carrier whose classical charge at ``phi`` (the solve's first
    potential) is not negligible, in band and region order; ``alone``: the band's only
    region, which writes the band's full-mesh arrays itself.  Decided once per solve."""
    st = ws.structure
    multiband = st.hole_model != "parabolic"
    plan = []
    for band in bands:
        if (carrier_of(band) not in st.carriers or not st.regions
                or (multiband and band in HOLE_BANDS)):
            continue
        for r_idx, (i0, i1) in enumerate(st.regions):
            if i1 - i0 < 3:
                continue
            key = (band, r_idx)
            if key not in ws.negligible:        # decided once per solve, at the starting potential
                ws.negligible[key] = classical_sheet(ws, phi, band, i0, i1) < ws.negligible_sheet
            if ws.negligible[key]:
                continue           # this carrier is absent here: leave it classical (negligible)
            eig = ws.eigen.get(key)
            if eig is None:
                eig = ws.eigen[key] = schrodinger.EigenWorkspace(i1 - i0 + 1)
            plan.append([band, r_idx, eig, False])
    for band in bands:
        mine = [t for t in plan if t[0] == band]
        if len(mine) == 1:
            mine[0][3] = True
    return [tuple(t) for t in plan]


def _place(item):
    """One region's states into its band's full-mesh arrays (a task of solve_states)."""
    from selfcon.solver.kernels.schrodinger import place_columns
    res, row0, cols, psi, weight = item
    if res[1].shape[0]:
        place_columns(np.ascontiguousarray(res[1]), psi, row0, cols)
        place_columns(np.ascontiguousarray(res[3]), weight, row0, cols)


def subband_profile(st: Structure, bs: BandStates, shift) -> np.ndarray:
    """(N,) nm^-3: the density of one band's subbands with every level moved by the local
    potential change ``shift`` (V), E_k - shift(z) (the predictor's density, Trellakis et al.
    1997); zero where the band is classical."""
    from selfcon.solver.kernels.statistics import subband_profile as kernel
    fermi = st.fermi_levels[0 if bs.sign > 0 else 1]
    f = lambda a: np.ascontiguousarray(a, dtype=float)     # noqa: E731
    return kernel(f(bs.weight), f(bs.energy), f(bs.dos), f(shift),
                  np.flatnonzero(bs.quantum_nodes), int(bs.sign), float(fermi), float(st.kT))


def update_exchange(ws: Workspace, phi, states=None, states_phi=None) -> float:
    """Set ``ws.vxc`` (the exchange-correlation potential of every quantum band,
    selfcon.solver.exchange) from the carrier densities at ``phi``; returns its largest
    change in eV (inf the first time).  Nothing to do for a Hartree solve (returns 0).

    The density is the predictor density (:func:`subband_profile`): the subbands of
    ``states`` (solved at ``states_phi``) shifted by the local potential change to ``phi``,
    which is what the last Poisson pass made consistent with the potential; before any
    states, the classical (Thomas–Fermi) density at ``phi``.  Electrons see the electron density, each hole band
    the hole density, each in its own effective mass and the local permittivity."""
    st = ws.structure
    form = st.exchange_correlation
    if form == "none":
        return 0.0
    from selfcon.solver.exchange import xc_potential
    if states:
        shift = np.asarray(phi) - np.asarray(states_phi)
        n, p = np.zeros(st.n_nodes), np.zeros(st.n_nodes)
        for bs in states.values():
            if bs.band not in BAND_SPECS and bs.band != KP_BAND:   # X/L valleys: a gas of their own
                continue
            if bs.sign > 0:
                n += subband_profile(st, bs, shift)
            else:
                p += subband_profile(st, bs, shift)
    else:
        d = ws.classical_densities(phi)
        n, p = d.n, d.p
    # the node averages of the permittivity and the masses: once per structure (read-only)
    eps = derived(st, ("node_average", "eps"), lambda: st.node_average(st.cell["eps"]))
    change = 0.0
    for band, (_, mass_key, _, sign, _) in BAND_SPECS.items():
        if band not in st.carriers:
            continue
        dens = n if sign > 0 else p
        # the potential of an empty node is the formula's value at n = 0 (a signed zero):
        # evaluate the formula only where there are carriers (the subband density is zero
        # outside the quantum nodes, and a band with no states at all is zero everywhere)
        v = np.full(st.n_nodes, _xc_at_zero(form))
        there = dens > 0.0
        if there.any():
            mass = derived(st, ("node_average", mass_key), lambda: st.node_average(st.cell[mass_key]))
            v[there] = xc_potential(dens[there], mass[there], eps[there], form)
        old = ws.vxc.get(band)
        change = max(change, float("inf") if old is None else float(np.max(np.abs(v - old))))
        ws.vxc[band] = v
    return change


@functools.lru_cache(maxsize=None)
def _xc_at_zero(form: str) -> float:
    """The exchange-correlation potential of no carriers (a signed zero)."""
    from selfcon.solver.exchange import xc_potential
    return float(xc_potential(0.0, 1.0, 1.0, form))


def band_region_states(st: Structure, phi, band: str, r_idx: int, workspace, n_states: int,
                       vxc=None, alone=False, probe_first: bool = True):
    """One task of :func:`solve_states`: the states of ``band`` in region ``r_idx``, their
    number doubled (up to MAX_STATES) while the top state still holds charge (``vxc``: the
    band's exchange-correlation potential, :func:`update_exchange`).  ``probe_first``: decide
    the count on the energies alone before solving for vectors (worth it while the count
    may still grow; False once a count settled: the states at ``n_states`` are solved
    outright, and a count that grows after all goes on probing).  Returns
    (energy (k,), psi (n_r, k) on the region's nodes, in-plane mass (k,), density weight
    (n_r, k) on the region's nodes, region (k,), the number of states asked for last): the
    region's part only, the full-mesh arrays are made once per band (:func:`solve_states`).
    ``alone``: the band's only region: psi and the weights (N, k) on the full mesh, written
    in place (no copy into the band's arrays)."""
    sign = ALL_BANDS[band][3]
    fermi = st.fermi_levels[0 if sign > 0 else 1]             # the carrier's own level
    # the count is decided on the energies alone: the clustered solver's bisection, whose
    # brackets the final solve continues from (parabolic bands; a nonparabolic state's
    # energy needs its wavefunction)
    can_probe = (workspace is not None and workspace.method == "clustered"
                 and not nonparabolic_band(st, band))
    probe = can_probe and probe_first
    k = n_states
    # the region's last solve (the previous iteration's) guides every bisection of this one,
    # whichever count they ask for (a count probed first or solved outright: the same states)
    previous = workspace.last if workspace is not None else None
    while True:
        e, psi = region_eigenstates(st, phi, band, r_idx, k, workspace=workspace, vxc=vxc,
                                    full=alone, levels_only=probe, warm=previous)
        if e.size < k or k >= MAX_STATES:
            break
        occ = subband_density(e, np.ones(e.size), st.temperature, sign, fermi)
        total = occ.sum()
        if total <= 0 or occ[-1] < TOP_STATE_FRACTION * total:
            break
        k = min(2 * k, MAX_STATES)
        probe = can_probe
    if probe:
        e, psi = region_eigenstates(st, phi, band, r_idx, k, workspace=workspace, vxc=vxc,
                                    full=alone, warm=previous)
    if not alone:
        m_par, weight = in_plane_motion(st, band, e, psi, phi, vxc, region=r_idx)
        return e, psi, m_par, weight, np.full(e.size, r_idx), k
    i0, i1 = st.regions[r_idx]
    weight = np.empty_like(psi)
    if i0:
        weight[:i0] = 0.0
    if i1 + 1 < weight.shape[0]:
        weight[i1 + 1:] = 0.0
    m_par, _ = in_plane_motion(st, band, e, psi[i0:i1 + 1], phi, vxc, region=r_idx,
                               weight_out=weight[i0:i1 + 1])
    return e, psi, m_par, weight, np.full(e.size, r_idx), k


def kp_states(ws: Workspace, phi):
    """The multiband hole states (physics.hole_model kp4 / kp6) of every quantum region whose
    classical hole charge is not negligible, as a selfcon.solver.kp.KpStates, or None.

    Each region: the axial dispersion on K_POINTS k_par values from 0 to a top that covers
    the Fermi sea (one grid for all regions), the hole density as the annulus pseudo-states
    of selfcon.solver.kp.linked_states (the states of neighbouring k_par joined by their
    overlap); the number of states grows while the top one still holds TOP_STATE_FRACTION of
    the charge, as for the single bands."""
    from selfcon.solver import kp
    st = ws.structure
    nb = kp.MODELS[st.hole_model]
    efp, kT = st.fermi_levels[1], st.kT
    todo = []
    for r_idx, (i0, i1) in enumerate(st.regions):
        if i1 - i0 < 3:
            continue
        key = (KP_BAND, r_idx)
        if key not in ws.negligible:        # decided once per solve, at the starting potential
            ws.negligible[key] = classical_sheet(ws, phi, "heavy_hole", i0, i1) < ws.negligible_sheet
        if not ws.negligible[key]:
            part = st.mesh.part(i0, i1)
            todo.append((r_idx, i0, i1, part, kp.region_material(st.cell, i0, i1)))
    if not todo:
        return None
    vxc = ws.vxc.get("heavy_hole")         # the holes' exchange-correlation (hole kinetic scale)
    if vxc is not None:
        phi = np.asarray(phi) + vxc        # -H carries +phi on its diagonal: the same shift
    k_top = max(kp.fermi_sea_top(part.h, part.w, mat, phi[i0:i1 + 1], nb, efp, kT)
                for _, i0, i1, part, mat in todo)
    k_top = max(k_top, ws.kp_top)        # the grid only grows during a solve: a steady quadrature
    n = ws.n_states[KP_BAND] or kp.FIRST_STATES
    while True:
        solved = []
        for r_idx, i0, i1, part, mat in todo:
            solved.append(kp.region_dispersion(part.h, part.w, mat, phi[i0:i1 + 1], nb, n,
                                               efp, kT, k_top,
                                               cache=ws.kp_basis.setdefault(r_idx, {}),
                                               threads=ws.threads, links=True))
        grown = max(s[0][-1] for s in solved)
        if grown > k_top * (1 + 1e-12):          # a region needed a longer grid: one grid for all
            k_top = grown
            continue
        # each region's states of neighbouring k_par paired by their overlap (continuous in
        # the potential where states of two wells cross; by their energy rank where the
        # whole solve gave them)
        linked = [kp.link_pairs(kg, E, links, efp, kT) for kg, E, dens, psi0, links in solved]
        sheets = [lk[4] for lk in linked]
        total = sum(float(x.sum()) for x in sheets)
        full = all(s[1].shape[0] >= n and np.all(np.isfinite(s[1])) for s in solved)
        top = max(float(x[-1]) for x in sheets)
        if not full or n >= MAX_STATES or total <= 0 or top < TOP_STATE_FRACTION * total:
            break
        n = min(2 * n, MAX_STATES)
        ws.n_states[KP_BAND] = n
    ws.kp_top = k_top
    return kp.collect_states(st.n_nodes, st.hole_model, [t[:3] for t in todo], solved, efp, kT,
                             linked=linked)


def region_parts(st: Structure, band: str, r_idx: int):
    """(the band edge of ``band`` without electrostatics at the nodes i0..i1 of quantum region
    ``r_idx``, the mesh of those nodes, the inverse mass along z of its cells): made once per
    structure (selfcon.model.structure.derived; read-only), since every eigensolve of a
    region asks for them."""
    def make():
        edge_key, mass_key = ALL_BANDS[band][:2]
        i0, i1 = st.regions[r_idx]
        edge = derived(st, ("node_edge", edge_key), lambda: st.node_average(st.cell[edge_key]))
        parts = (np.ascontiguousarray(edge[i0:i1 + 1]), st.mesh.part(i0, i1),
                 np.ascontiguousarray(1.0 / st.cell[mass_key][i0:i1]))
        for a in (parts[0], parts[2]):
            a.setflags(write=False)
        return parts
    return derived(st, ("region_parts", band, r_idx), make)


def region_eigenstates(st: Structure, phi, band: str, r_idx: int, n_states: int, workspace=None,
                       below=None, vxc=None, full=True, levels_only=False, warm=None):
    """Lowest ``n_states`` eigenstates of the z problem of ``band`` in quantum region
    ``r_idx`` at potential ``phi``.

    BenDaniel–Duke on the region's nodes (selfcon.solver.schrodinger.solve_region) with
    psi = 0 at both end nodes; the band edge with electrostatics is the dual-cell average
    of the cells' edges minus phi.  Returns (energy (k,) eV on the electron scale, psi
    (N, k) on the full mesh, zero outside the region), lowest kinetic energy first.
    ``below``: only the states of kinetic energy (sign * E) below it.  ``vxc``: (N,) eV, the
    exchange-correlation potential energy on the band's kinetic scale (Workspace.vxc).
    ``full=False``: psi (n_r, k) on the region's nodes i0..i1 only.  ``levels_only``: the
    energies without wavefunctions (psi None; parabolic bands: EigenWorkspace.levels).
    ``warm``: the ``workspace.last`` of this region's solve at a nearby potential (the loop's
    previous iteration), whose energies guide the bisection
    (selfcon.solver.schrodinger.warm_guess)."""
    edge_key, mass_key, _, sign, _ = ALL_BANDS[band]
    i0, i1 = st.regions[r_idx]
    n = st.n_nodes
    if i1 - i0 < 3:
        return np.empty(0), np.zeros((n if full else i1 - i0 + 1, 0))
    sl = slice(i0, i1 + 1)
    edge_r, part, inv_mass = region_parts(st, band, r_idx)
    kinetic = edge_r - phi[sl]                                # band edge with electrostatics
    if sign < 0:
        kinetic = -kinetic                                    # holes: kinetic up = -Ev
    if vxc is not None:
        kinetic = kinetic + vxc[sl]
    nonparabolic = nonparabolic_band(st, band)
    embed = (n, i0) if full and not nonparabolic else None    # written in place, no copy
    e, p = schrodinger.solve_region(part.h, part.w, kinetic, inv_mass, n_states,
                                    workspace=workspace, below=below,
                                    levels_only=levels_only, embed=embed, warm=warm)
    if levels_only:
        return (e if sign > 0 else -e), None
    if embed is not None:
        return (e if sign > 0 else -e), p
    if e.size and nonparabolic:                    # energy-dependent mass: iterate each state
        from selfcon.solver import nonparabolic
        e, p, _ = nonparabolic.refine_states(part.h, part.w, kinetic, st.cell[mass_key][i0:i1],
                                             cell_edge(st, band, phi, vxc)[i0:i1],
                                             effective_gap(st)[i0:i1], e, workspace, psi=p)
    if not full:
        return sign * e, p
    out = np.zeros((n, e.size))
    out[sl, :] = p
    return sign * e, out


def in_plane_motion(st: Structure, band: str, energy, psi, phi=None, vxc=None, region=None,
                    weight_out=None):
    """The in-plane motion of the states of one region (selfcon.solver.schrodinger.
    in_plane_weights): the in-plane masses (k,) m0 and the density weights (N, k), such that
    the charge of nearly degenerate states does not depend on their mixture.  ``energy``
    on the electron scale; the carrier's own Fermi level.  A nonparabolic band
    (selfcon.solver.nonparabolic) takes its density-of-states masses at the potential
    ``phi`` (and ``vxc``) its states were solved at.  ``region``: psi is (n_r, k) on the
    nodes of that quantum region only (the weights then too), else on the full mesh.
    ``weight_out``: a C-contiguous array of the weights' shape to write them into."""
    _, mass_key, par_key, sign, _ = ALL_BANDS[band]
    fermi = st.fermi_levels[0 if sign > 0 else 1]
    nodes, cells = slice(None), slice(None)
    if region is not None:
        i0, i1 = st.regions[region]
        nodes, cells = slice(i0, i1 + 1), slice(i0, i1)
    w = st.mesh.w[nodes]
    # the in-plane mass at the nodes, made once per structure (read-only, like region_parts)
    m_node = derived(st, ("node_average", par_key), lambda: st.node_average(st.cell[par_key]))[nodes]
    mass, weight = schrodinger.in_plane_weights(sign * np.asarray(energy), psi, w,
                                                m_node, st.kT, sign * fermi, out=weight_out)
    if nonparabolic_band(st, band) and len(mass):
        from selfcon.solver import nonparabolic
        if phi is None:
            raise ValueError("in_plane_motion of a nonparabolic band needs the potential phi")
        edge, eg, m_edge = cell_edge(st, band, phi, vxc), effective_gap(st), st.cell[mass_key]
        slopes = [nonparabolic.energy_slope(st.mesh.h[cells], psi[:, k], energy[k], m_edge[cells],
                                            edge[cells], eg[cells])
                  for k in range(len(mass))]
        dos_mass, _ = nonparabolic.in_plane_masses(psi, w, energy, slopes, m_node,
                                                   st.node_average(edge)[nodes],
                                                   st.node_average(eg)[nodes], st.kT, fermi)
        # the nonparabolic/parabolic ratio of each state's mass, on the blend of nearly
        # degenerate states that in_plane_weights made
        mass = mass * dos_mass / schrodinger.in_plane_mass(psi, w, m_node)
    return mass, weight


def nonparabolic_band(st: Structure, band: str) -> bool:
    """True for the band the energy-dependent mass applies to: Γ electrons, when the deck
    asks for physics.nonparabolicity."""
    return band == "electron" and bool(st.nonparabolicity)


def cell_edge(st: Structure, band: str, phi, vxc=None) -> np.ndarray:
    """(N-1,) eV: the band edge each cell's carriers see on their kinetic scale (the cell's
    edge minus its mean potential, plus the exchange-correlation potential if given)."""
    edge_key, _, _, sign, _ = ALL_BANDS[band]
    phi = np.asarray(phi, dtype=float)
    out = sign * (st.cell[edge_key] - 0.5 * (phi[:-1] + phi[1:]))
    if vxc is not None:
        out = out + 0.5 * (vxc[:-1] + vxc[1:])
    return out


def effective_gap(st: Structure) -> np.ndarray:
    """(N-1,) eV: E_g,eff of the nonparabolic mass per cell (selfcon.solver.nonparabolic)."""
    from selfcon.solver.nonparabolic import effective_gap as gap
    return gap(st.cell["eg_gamma"], st.cell["delta_so"])


def region_states(st: Structure, phi, band: str, r_idx: int, n_states: int, workspace=None, below=None):
    """The states the loop uses in one region: :func:`region_eigenstates` with
    :func:`in_plane_motion`.  Returns (energy (k,) eV electron scale, psi (N, k), in-plane
    mass (k,) m0), lowest kinetic energy first (``below``: see region_eigenstates)."""
    e, psi = region_eigenstates(st, phi, band, r_idx, n_states, workspace, below=below)
    if e.size == 0:
        return e, psi, np.empty(0)
    if not nonparabolic_band(st, band):
        # the masses from the region's rows (psi is zero outside them: the sums over the whole
        # mesh only add zeros, the same bits), as the loop's own solves take them
        i0, i1 = st.regions[r_idx]
        return e, psi, in_plane_motion(st, band, e, psi[i0:i1 + 1], phi, region=r_idx)[0]
    return e, psi, in_plane_motion(st, band, e, psi, phi)[0]


def classical_sheet(ws: Workspace, phi, band, i0, i1) -> float:
    """Classical sheet density (nm^-2) of a carrier over nodes i0..i1 at potential phi."""
    dens = ws.classical_densities(phi)
    arr = dens.n if ALL_BANDS[band][3] > 0 else dens.p
    return float((arr[i0:i1 + 1] * ws.structure.mesh.w[i0:i1 + 1]).sum())


def poisson_pass(ws: Workspace, phi, states, *, predictor: bool, tol: float = POISSON_TOL,
                 max_newton: int = POISSON_MAX_ITER, backtrack: bool = True, settle: float = 0.0):
    """Nonlinear Poisson with the quantum density of ``states``: with ``predictor`` the
    subbands follow the potential change (Trellakis et al., J. Appl. Phys. 81, 7880 (1997)),
    else their density is frozen.  Newton to ``tol`` (V) or at most ``max_newton`` steps
    (``settle``: or until the quadratic phase shows, selfcon.solver.poisson.solve_poisson);
    returns (phi_out, Newton steps)."""
    prob = ws.problem(phi, states, shift=1.0 if predictor else 0.0)
    # the first assembly's densities at phi are those of densities(ws, phi, states) (at the
    # reference potential the predictor's shift is zero): the charge check and the result
    # assembly take them from there when the Dirichlet values are phi's own
    (kind0, value0), (kind1, value1) = ws.bc
    fixed = ((kind0 != P.DIRICHLET or phi[0] == value0)
             and (kind1 != P.DIRICHLET or phi[-1] == value1))
    sol = P.solve_poisson(prob, phi, tol=tol, max_iter=max_newton, backtrack=backtrack,
                          start_densities=fixed, settle=settle)
    if sol.start is not None:
        d = sol.start
        ws._last = (phi, states, (d.n, d.p, d.nd_plus, d.na_minus))
        # the predictor density's slope at phi: the charge check's linear estimate
        ws._slope = (phi, states, d.mobile_slope) if predictor else None
    return sol.phi, sol.steps


def densities(ws: Workspace, phi, states):
    """(n, p, Nd+, Na-) at the nodes in nm^-3, with the subband density where it applies.

    The last evaluation is remembered (by identity of phi and states): the loop's charge
    check and the result assembly ask for the same one."""
    last = ws._last
    if last is not None and last[0] is phi and last[1] is states:
        return last[2]
    d = P.densities(ws.problem(phi, states, boundaries=False), phi)
    out = (d.n, d.p, d.nd_plus, d.na_minus)
    ws._last = (phi, states, out)
    return out


def mobile_sheets(ws: Workspace, phi_ref, phi, states):
    """(electron, hole) sheet densities (nm^-2) at ``phi`` with the subbands of ``phi_ref``
    shifted by the local potential change (the predictor density)."""
    w = ws.structure.mesh.w
    if phi is phi_ref:
        n, p, _, _ = densities(ws, phi, states)
        return float(np.dot(n, w)), float(np.dot(p, w))
    d = P.densities(ws.problem(phi_ref, states, boundaries=False), phi)
    return float(np.dot(d.n, w)), float(np.dot(d.p, w))


def charge_residual(ws: Workspace, phi, phi_out, states) -> float:
    """Relative change of the mobile sheet charge over one step: subband density at phi
    against the (predicted) density at phi_out, both with the same states.

    After a predictor Poisson pass from ``phi`` with these states the change is taken to
    first order, sum_i d(n + p)/d phi_i (phi_out - phi)_i w_i, from the slope that pass's
    first Jacobian assembly left (poisson_pass): no density evaluation at phi_out.  The
    check runs only once max |phi_out - phi| < the loop tolerance, where the neglected second
    order is a fraction ~ max |phi_out - phi| / kT of the change itself (the check compares
    the change with a threshold, it is not a quoted quantity)."""
    n0, p0 = mobile_sheets(ws, phi, phi, states)
    total = n0 + p0
    slope = ws._slope
    if slope is not None and slope[0] is phi and slope[1] is states:
        change = float(np.dot(slope[2] * ws.structure.mesh.w, phi_out - phi))
    else:
        n1, p1 = mobile_sheets(ws, phi, phi_out, states)
        change = (n1 + p1) - total
    return abs(change) / max(total, 1e-6 / CM2_PER_NM2)


def gauss_residual(ws: Workspace, phi, states, rho=None) -> float:
    """Gauss's law check of the solution (rho: its node charge, if already computed: then the
    check needs only the mesh and permittivities, the same in every problem of the solve)."""
    violation, scale = gauss_balance(ws, phi, states, rho)
    return violation / scale


def gauss_balance(ws: Workspace, phi, states, rho=None) -> tuple[float, float]:
    """(violation, scale) of :func:`gauss_residual` (selfcon.solver.poisson.gauss_balance)."""
    return P.gauss_balance(ws.problem_classical if rho is not None else ws.problem(phi, states), phi, rho)


__all__ = ["BAND_SPECS", "KP_BAND", "kp_states", "VALLEY_BANDS", "ALL_BANDS", "bands_of", "carrier_of", "state_degeneracy",
           "masked_valley_dos", "valley_row_bands", "VALLEYS", "BandStates", "Workspace", "boundary_conditions",
           "initial_guess", "first_counts", "start_levels", "linear_start", "interpolate_guess", "solve_states",
           "update_exchange", "subband_profile", "nonparabolic_band", "cell_edge",
           "band_region_states",
           "region_states", "region_eigenstates", "in_plane_motion",
           "poisson_pass", "charge_residual", "densities", "mobile_sheets", "gauss_residual", "gauss_balance",
           "classical_problem", "classical_problems", "valley_arrays", "with_states"]
