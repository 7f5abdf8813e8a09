"""Deck -> Structure: the mesh and every per-cell / per-node array the physics needs.

All arrays are in internal units (nm, eV, nm^-3, nm^-2) and read-only.  Material
properties are per cell (each cell lies in one layer); sheets sit on nodes.
Quantum regions are stored as inclusive node-index ranges whose end nodes carry
the Dirichlet condition psi = 0.
"""
from __future__ import annotations

import functools
import weakref
from dataclasses import dataclass, field, replace
from typing import TYPE_CHECKING, Any

import numpy as np

from selfcon.constants import CM2_PER_NM2, CM3_PER_NM3, KB_EV, NC_PER_M0_K, NM_PER_CM
from selfcon.errors import DeckError, MaterialError
from selfcon.model import dopants
from selfcon.model.mesh import MAX_NODES, Mesh, build_mesh, check_node_count
from selfcon.model.polarization import polarization_z, sheets_nm2
from selfcon.model.strain import (X_VALLEY_SETS, LayerStrain, StrainSummary,
                                  biaxial_stress_c_plane, bulk_strained_edges, in_plane_lattice,
                                  poisson_ratio_001, stack_critical_thickness,
                                  wurtzite_stack_cracking)

if TYPE_CHECKING:
    from selfcon.input.deck import Deck

#: per-cell arrays taken from the material library (selfcon.input.materials.cell_parameters
#: keys; "How to add a material parameter" in selfcon/input/materials/__init__.py)
MATERIAL_KEYS = ("eps", "ec_gamma", "ec_x", "ec_l", "ev_hh", "ev_lh", "m_e", "m_hh_z", "m_lh_z",
                 "m_hh_par", "m_lh_par", "m_x_l", "m_x_t", "g_x", "m_l_l", "m_l_t", "m_c_dos", "m_v_dos",
                 "donor_binding", "acceptor_binding", "eg_gamma",
                 # heavy- and light-hole DOS masses (the valence DOS mass rule combines them)
                 "m_hh_dos", "m_lh_dos",
                 # lattice, elasticity, deformation potentials (selfcon.model.strain)
                 # Luttinger parameters (the multiband hole model, selfcon.solver.kp)
                 "gamma1", "gamma2", "gamma3",
                 "vbo", "delta_so", "lattice", "c11", "c12", "c44", "ac", "av", "b_dp", "d_dp",
                 "xi_x_gap", "xi_x_u", "xi_l_gap", "xi_l_u",
                 # wurtzite: in-plane electron mass, the crystal-field split-off hole, and the
                 # constants of the c-plane strain and polarization (selfcon.model.polarization)
                 "m_e_par", "ev_ch", "m_ch_z", "m_ch_par", "m_ch_dos", "wurtzite", "lattice_c",
                 "c13", "c33", "e31", "e33", "psp", "delta_cr", "va1", "va2", "va3", "va4",
                 "da1", "da2", "dd1", "dd2", "dd3", "dd4")


#: equivalent L valleys (eight half valleys at the zone-boundary L points; common practice);
#: the X/Delta count is the material's x_valleys (cell["g_x"]: 3 zincblende X, 6 Si/Ge Delta)
L_VALLEYS = 4


@dataclass(frozen=True)
class Contact:
    kind: str            # schottky | ohmic | pinned | free
    barrier: float | None
    bias: float


@dataclass(frozen=True)
class LayerInfo:
    index: int
    name: str
    material: str
    x_top: float | None  # alloy fraction (solved when the deck says lattice_matched)
    x_bottom: float | None
    top: float           # nm
    bottom: float        # nm
    donors: float        # cm^-3
    acceptors: float     # cm^-3
    sheet_donors: float  # cm^-2
    sheet_acceptors: float
    y_top: float | None = None      # second composition of a quaternary
    y_bottom: float | None = None
    relaxed: bool = False
    lattice_matched: str | None = None
    donor_species: str = "shallow"              # shallow | Si-DX
    dx_freeze_temperature: float | None = None  # K (Si-DX dark cool-down)
    dx_state: str = "equilibrium"               # equilibrium | ionized (Si-DX)


@dataclass(frozen=True)
class Structure:
    mesh: Mesh
    temperature: float
    layers: tuple[LayerInfo, ...]
    cell_layer: np.ndarray          # (N-1,) layer index of each cell
    layer_index: np.ndarray         # (N,) layer of the node's right cell (last node: last layer)
    x_cell: np.ndarray              # (N-1,) alloy fraction (NaN for binaries)
    cell: dict[str, np.ndarray]     # per-cell material arrays (MATERIAL_KEYS) + nc, nv, donors, acceptors
    sheet_donors: np.ndarray        # (N,) nm^-2
    sheet_acceptors: np.ndarray     # (N,) nm^-2
    sheet_ed: np.ndarray            # (N,) donor binding energy at sheet nodes, eV
    sheet_ea: np.ndarray            # (N,) acceptor binding energy at sheet nodes, eV
    regions: tuple[tuple[int, int], ...]   # inclusive node ranges
    regions_nm: tuple[tuple[float, float], ...]
    carriers: tuple[str, ...]
    full_ionization: bool
    states: int
    surface: Contact
    substrate: Contact
    #: how the stack is strained (selfcon.model.strain.StrainSummary); the per-cell strain is
    #: cell["eps_xx"], cell["eps_zz"], cell["a_par"] (in-plane lattice, nm)
    strain: Any = None
    #: the carrier the channel's ohmic contacts reach ("electron", "hole"), or "both": one
    #: Fermi level for both (deck physics.contacted_carrier, "auto" resolved by contacted_carrier)
    contacted: str = "both"
    #: (N,) nm^-2, fixed charge on the nodes in units of q: the bound polarization sheets of
    #: wurtzite layers (selfcon.model.polarization; cell["polarization"] holds P_z in C/m^2)
    sheet_fixed: np.ndarray = None
    #: the growth polarity and polarization factor of the deck (physics.polarity, .polarization)
    polarity: str = "metal"
    polarization_factor: float = 1.0
    #: "zincblende" or "wurtzite": the crystal of every layer (a stack is one or the other)
    crystal: str = "zincblende"
    #: physics.exchange_correlation: none | lda | lda-gl (selfcon.solver.exchange)
    exchange_correlation: str = "none"
    #: physics.nonparabolicity: energy-dependent Gamma mass (selfcon.solver.nonparabolic)
    nonparabolicity: bool = False
    #: physics.quantum_valleys: the counted X/Delta and L electrons are subbands in the
    #: quantum regions, per valley set (cell["ec_x2"], ["m_x2_z"], ... : valley_sets)
    quantum_valleys: bool = False
    #: physics.hole_model: parabolic | kp4 | kp6 (selfcon.solver.kp)
    hole_model: str = "parabolic"
    #: (N,) bool: sheet nodes whose donors are Si-DX in equilibrium (cell["dx"] marks the cells)
    sheet_dx: Any = None
    #: a dark cool-down applied (selfcon.solver.dx.freeze): (ionised fraction per cell (N-1,),
    #: per node for the sheets (N,), freeze temperature K) of the cells / sheet nodes marked
    #: dx; None: the DX levels follow the Fermi level at the run temperature
    dx_frozen: Any = None

    @property
    def dx_freeze_temperatures(self) -> tuple:
        """Freeze temperatures (K) of the Si-DX layers cooled in the dark below them, i.e.
        whose occupation is set above the run temperature and must be frozen; () if none."""
        return tuple(sorted({float(L.dx_freeze_temperature) for L in self.layers
                             if L.donor_species == "Si-DX" and L.dx_state == "equilibrium"
                             and L.dx_freeze_temperature is not None
                             and L.dx_freeze_temperature > self.temperature}))

    @property
    def z(self) -> np.ndarray:
        return self.mesh.z

    @property
    def fermi_levels(self) -> tuple[float, float]:
        """(electron, hole) Fermi levels in eV on the electron energy scale.

        The contacted carrier keeps the channel's level, 0 eV.  Under a schottky surface the
        other carrier, the minority carrier under the gate, takes the gate metal's level,
        -surface.bias, in the whole stack and at every bias (the gate, not the channel, is its
        reservoir; no transport is modelled).  Otherwise both are 0.  Dopant levels are
        occupied with the contacted carrier's level, 0."""
        if self.surface.kind != "schottky" or self.contacted == "both":
            return 0.0, 0.0
        gate = 0.0 - float(self.surface.bias)          # (0.0 - 0.0 is +0.0, not -0.0)
        return (0.0, gate) if self.contacted == "electron" else (gate, 0.0)

    @property
    def n_nodes(self) -> int:
        return self.mesh.z.size

    @property
    def kT(self) -> float:
        return KB_EV * self.temperature

    @property
    def fixed_charge(self) -> np.ndarray:
        """(N,) nm^-3: the fixed sheets (polarization) spread over their dual cells, as the
        Poisson charge counts them (rho includes it)."""
        if self.sheet_fixed is None:
            return np.zeros(self.n_nodes)
        return self.sheet_fixed / self.mesh.w

    def interfaces(self) -> list[dict]:
        """The bound polarization sheet of every layer interface: dicts with ``upper``,
        ``lower`` (layer indices), ``node``, ``z_nm`` and ``sigma_nm2`` (elementary charges
        per nm^2, positive: positive bound charge); zero in zincblende stacks."""
        cl = self.cell_layer
        sheets = self.sheet_fixed if self.sheet_fixed is not None else np.zeros(self.n_nodes)
        out = []
        for c in np.flatnonzero(cl[1:] != cl[:-1]):
            i = int(c + 1)
            out.append({"upper": int(cl[c]), "lower": int(cl[c + 1]), "node": i,
                        "z_nm": float(self.z[i]), "sigma_nm2": float(sheets[i])})
        return out

    def node_average(self, cell_values: np.ndarray) -> np.ndarray:
        """Dual-cell average of a per-cell array onto the nodes."""
        m = self.mesh
        out = np.zeros(m.n)
        out[1:] += m.wl[1:] * cell_values
        out[:-1] += m.wr[:-1] * cell_values
        return out / m.w


def _contact(spec) -> Contact:
    return Contact(kind=spec.kind, barrier=spec.barrier, bias=float(spec.bias or 0.0))


@functools.lru_cache(maxsize=512)
def _uniform_parameters(name, x, temperature, local_defs, needs, y=None) -> dict:
    """Material parameters of one composition (scalars; x, y None when not given: None, not
    NaN, so that the key compares equal); cached, since studies solve the same materials at
    the same temperature over and over.  Errors are not cached."""
    from selfcon.input import materials
    params = materials.cell_parameters(name, np.array([np.nan if x is None else x]), temperature,
                                       local_defs, needs, y=None if y is None else np.array([y]))
    return {k: float(v[0]) for k, v in params.items()}


def clear_material_cache() -> None:
    """Forget the material parameters computed so far in this process (after the library
    data changed, e.g. in a test that adds a parameter)."""
    _uniform_parameters.cache_clear()
    _STRUCTURES.clear()
    _DERIVED.clear()


#: structures of recently built decks, Deck -> Structure (STRUCTURE_CACHE entries, the oldest
#: dropped first).  A Deck is frozen and hashable, its equality covers every value that
#: reaches the structure (not its file name or text), and a Structure is immutable (read-only
#: arrays), so a deck solved again -- a repeated solve in a script, the cold retry of
#: selfcon.api.solve_warm, a repeated study point in one worker -- reuses the one built before.
_STRUCTURES: dict = {}
STRUCTURE_CACHE = 4
#: structures with more nodes are not kept (their memory, not their build time, dominates)
STRUCTURE_CACHE_NODES = 100_000


def deck_structure(deck: Deck) -> Structure:
    """``build_structure(deck)``, reused when an equal deck was built by this function
    recently (see :data:`_STRUCTURES`); an error is raised each time, as it is never kept."""
    if _STRUCTURES and next(reversed(_STRUCTURES)) is deck:
        return _STRUCTURES[deck]                  # this very deck is the newest already
    st = _STRUCTURES.pop(deck, None)
    if st is None:
        st = build_structure(deck)
        if st.n_nodes > STRUCTURE_CACHE_NODES:
            return st
    _STRUCTURES[deck] = st                        # newest last
    while len(_STRUCTURES) > STRUCTURE_CACHE:
        del _STRUCTURES[next(iter(_STRUCTURES))]
    return st


def _located(deck, key_prefix, fn, *args, **kw):
    """Run fn; a MaterialError about a bare composition key ("x", "y", "lattice_matched",
    "material") is re-raised at ``key_prefix + key`` in the deck (file and line), one about a
    parameter of a deck-local material (``material.NAME.key``) at that key (its line, else
    the line of its ``[material.NAME]`` table)."""
    try:
        return fn(*args, **kw)
    except MaterialError as err:
        if not hasattr(deck, "error"):
            raise
        if err.key in ("x", "y", "lattice_matched", "material", "temperature"):
            raise deck.error(key_prefix + err.key, err.message, allowed=err.allowed,
                             cls=MaterialError) from None
        parts = (err.key or "").split(".")
        if (err.line is None and len(parts) > 2 and parts[0] == "material"
                and any(getattr(d, "name", None) == parts[1] for d in deck.materials)):
            raise deck.error(err.key, err.message, allowed=err.allowed, cls=MaterialError) from None
        raise


#: temperature at which ``layer.lattice_matched`` solves the composition (wafers are specified
#: by room-temperature x-ray diffraction, common practice)
LATTICE_MATCH_T = 300.0


def _compositions(deck, L, zc_sel, top, bottom):
    """(x per cell, y per cell, x_top, x_bottom, y_top, y_bottom) of one layer, with the
    composition that ``lattice_matched`` leaves out solved per cell."""
    from selfcon.input import materials
    frac = (zc_sel - top) / (bottom - top)
    xc = yc = None
    if L.x_top is not None:
        xb = L.x_bottom if L.x_bottom is not None else L.x_top
        xc = L.x_top + (xb - L.x_top) * frac
    y_top = getattr(L, "y_top", None)
    y_bot = getattr(L, "y_bottom", None)
    if y_top is not None:
        yb = y_bot if y_bot is not None else y_top
        yc = y_top + (yb - y_top) * frac
    target = getattr(L, "lattice_matched", None)
    ends = None
    if target is not None:
        p = f"layer[{L.index}]."

        def solve(xv, yv):
            return _located(deck, p, materials.lattice_matched, L.material, target, x=xv, y=yv,
                            temperature=LATTICE_MATCH_T, local_defs=deck.materials)
        xs, ys = solve(xc, yc)
        xc = None if xs is None else np.broadcast_to(xs, zc_sel.shape).astype(float)
        yc = None if ys is None else np.broadcast_to(ys, zc_sel.shape).astype(float)
        ex = None if L.x_top is None else np.array([L.x_top, L.x_bottom if L.x_bottom is not None else L.x_top])
        ey = None if y_top is None else np.array([y_top, y_bot if y_bot is not None else y_top])
        xe, ye = solve(ex, ey)
        xe = None if xe is None else np.broadcast_to(xe, (2,))
        ye = None if ye is None else np.broadcast_to(ye, (2,))
        ends = (None if xe is None else float(xe[0]), None if xe is None else float(xe[-1]),
                None if ye is None else float(ye[0]), None if ye is None else float(ye[-1]))
    if ends is None:
        ends = (L.x_top, L.x_bottom if L.x_top is not None else None, y_top,
                y_bot if y_top is not None else None)
    return (xc, yc) + ends


def _needs(carriers, ionization) -> frozenset:
    needs = set(carriers)
    if ionization == "thermal":
        needs.add("thermal_ionization")
    return frozenset(needs)


def build_structure(deck: Deck, *, mesh: Mesh | None = None, max_nodes: float | None = None) -> Structure:
    """Mesh the deck's stack and fill every array from the material library.

    Parameters
    ----------
    deck : Deck
        A loaded deck.
    mesh : Mesh, optional
        Use this mesh instead of the deck's graded one (benchmarks compare a uniform mesh,
        :func:`selfcon.model.mesh.uniform_mesh`); it must span the stack and carry every
        interface, sheet and region end as a node.
    max_nodes : float, optional
        Refuse a deck whose mesh would have more nodes (default
        :data:`selfcon.model.mesh.MAX_NODES`, 2e6): counted before any array is made.

    Returns
    -------
    Structure
        Frozen: the mesh, per-cell material arrays (band edges, masses, permittivity,
        doping in nm^-3), sheets on nodes (nm^-2), quantum regions as node ranges and the
        contacts, in internal units (nm, eV, V, K).

    Raises
    ------
    selfcon.errors.MaterialError
        A material or composition the library cannot evaluate, located at its deck key.
    selfcon.errors.DeckError
        A mesh above ``max_nodes`` nodes, located at ``mesh.step``, with the node count and
        the memory it would take.

    Examples
    --------
    >>> import selfcon
    >>> from selfcon.model.structure import build_structure
    >>> st = build_structure(selfcon.load_deck("inputs/hemt_4K.toml"))
    >>> float(st.z[-1]), st.regions_nm
    (1039.0, ((30.0, 200.0),))
    >>> st.cell["eps"].shape == (st.z.size - 1,)          # one value per cell
    True
    """
    from selfcon.input import materials

    T = float(deck.temperature)
    layers = []
    top = 0.0
    for L in deck.layers:
        bottom = top + float(L.thickness)
        layers.append(LayerInfo(index=L.index, name=L.name, material=L.material,
                                x_top=L.x_top, x_bottom=L.x_bottom, top=top, bottom=bottom,
                                donors=float(L.donors), acceptors=float(L.acceptors),
                                sheet_donors=float(L.sheet_donors),
                                sheet_acceptors=float(L.sheet_acceptors),
                                y_top=getattr(L, "y_top", None), y_bottom=getattr(L, "y_bottom", None),
                                relaxed=bool(getattr(L, "relaxed", False)),
                                lattice_matched=getattr(L, "lattice_matched", None),
                                donor_species=getattr(L, "donor_species", "shallow"),
                                dx_freeze_temperature=getattr(L, "dx_freeze_temperature", None),
                                dx_state=getattr(L, "dx_state", "equilibrium")))
        top = bottom
    total = top

    # quantum regions in nm (default: the whole stack)
    if deck.quantum.regions is None:
        regions_nm = ((0.0, total),)
    else:
        regions_nm = tuple((float(a), float(b)) for a, b in deck.quantum.regions)
    for k, (a, b) in enumerate(regions_nm):
        if not (0.0 <= a < b <= total + 1e-9):
            raise DeckError(f"region [{a}, {b}] nm lies outside the stack (0 to {total:g} nm)",
                            file=deck.path, key=f"quantum.regions[{k}]")

    key_points = {0.0, total}
    for Li in layers:
        key_points.update((Li.top, Li.bottom))
        if Li.sheet_donors or Li.sheet_acceptors:
            key_points.add(0.5 * (Li.top + Li.bottom))
    for a, b in regions_nm:
        key_points.update((a, min(b, total)))
    if mesh is None:
        ms = deck.mesh
        check_node_count(deck, sorted(key_points), regions_nm, MAX_NODES if max_nodes is None else max_nodes)
        mesh = build_mesh(sorted(key_points), regions_nm, step=ms.step, fine=ms.fine,
                          bulk_step=ms.bulk_step, growth=ms.growth)
    else:
        missing = [p for p in key_points if np.min(np.abs(mesh.z - p)) > 1e-9]
        if abs(mesh.z[0]) > 1e-9 or abs(mesh.z[-1] - total) > 1e-9 or missing:
            raise ValueError(f"mesh override must span 0..{total:g} nm with nodes at every key point "
                             f"(missing: {missing[:5]})")
    z, n = mesh.z, mesh.z.size
    zc = 0.5 * (z[:-1] + z[1:])

    bounds = np.array([Li.bottom for Li in layers])
    cell_layer = np.minimum(np.searchsorted(bounds, zc), len(layers) - 1).astype(np.int64)
    layer_index = np.empty(n, dtype=np.int64)
    layer_index[:-1] = cell_layer
    layer_index[-1] = cell_layer[-1]

    lattice_ref = getattr(deck, "lattice", None)
    strained = bool((lattice_ref is not None and lattice_ref.given)
                    or any(Li.relaxed for Li in layers))
    crystal = _stack_crystal(deck, layers, strained)
    needs = _needs(deck.physics.carriers, deck.physics.ionization)
    if strained:
        needs = needs | {"strain"}
    x_cell = np.full(n - 1, np.nan)
    y_cell = np.full(n - 1, np.nan)
    cell = {k: np.empty(n - 1) for k in MATERIAL_KEYS}
    cell["donors"] = np.zeros(n - 1)
    cell["acceptors"] = np.zeros(n - 1)
    spans = layer_cells(cell_layer, len(layers))
    for Li in layers:
        sel = spans[Li.index]
        if sel.start == sel.stop:
            continue
        xc, yc, xt, xb, yt, yb = _compositions(deck, Li, zc[sel], Li.top, Li.bottom)
        if (xt, xb, yt, yb) != (Li.x_top, Li.x_bottom, Li.y_top, Li.y_bottom):
            Li = layers[Li.index] = replace(Li, x_top=xt, x_bottom=xb, y_top=yt, y_bottom=yb)
        if xc is not None:
            x_cell[sel] = xc
        if yc is not None:
            y_cell[sel] = yc
        graded = ((xc is not None and np.ptp(xc) > 0.0) or (yc is not None and np.ptp(yc) > 0.0))
        where = f"layer[{Li.index}]."
        if graded:
            params = _located(deck, where, materials.cell_parameters, Li.material, x_cell[sel], T,
                              deck.materials, needs, y=None if yc is None else y_cell[sel])
        else:       # one composition: evaluate once (cached across solves) and broadcast
            x0 = None if xc is None else float(xc[0])
            y0 = None if yc is None else float(yc[0])
            params = _located(deck, where, _uniform_parameters, Li.material, x0, T, deck.materials,
                              needs, y0)
        for k in MATERIAL_KEYS:
            cell[k][sel] = params[k]
        if Li.donor_species in ("P", "As"):
            cell["donor_binding"][sel] = group_iv_donor(deck, Li, x_cell[sel])
        cell["donors"][sel] = Li.donors / CM3_PER_NM3
        cell["acceptors"][sel] = Li.acceptors / CM3_PER_NM3
    if deck.physics.ionization != "thermal":
        cell["donor_binding"][:] = 0.0
        cell["acceptor_binding"][:] = 0.0
    # heavy doping: binding energies fall with the total impurity density (Pearson-Bardeen)
    # and vanish above the Mott density (selfcon.model.dopants); materials give dilute values
    n_imp = cell["donors"] + cell["acceptors"]
    dilute_ed, dilute_ea = cell["donor_binding"], cell["acceptor_binding"]
    n_mott_d = dopants.mott_density(cell["eps"], cell["m_e"])
    n_mott_a = dopants.mott_density(cell["eps"], cell["m_v_dos"])
    cell["donor_binding"] = dopants.binding_energy(cell["donor_binding"], n_imp, n_mott_d)
    cell["acceptor_binding"] = dopants.binding_energy(cell["acceptor_binding"], n_imp, n_mott_a)
    # Si-DX layers: the deep level (selfcon.model.dopants.dx_binding) replaces the shallow
    # one; illuminated (dx_state = ionized) DX centres are all ionised (binding 0)
    dx_layer = np.array([Li.donor_species == "Si-DX" for Li in layers], dtype=bool)
    dx_lit = np.array([Li.donor_species == "Si-DX" and Li.dx_state == "ionized" for Li in layers],
                      dtype=bool)
    dx_cells = dx_layer[cell_layer]
    dx_deep = dopants.dx_binding(cell["ec_gamma"], cell["ec_l"])
    cell["donor_binding"] = np.where(dx_cells, np.where(dx_lit[cell_layer], 0.0, dx_deep),
                                     cell["donor_binding"])
    cell["dx"] = (dx_cells & ~dx_lit[cell_layer]).astype(float)
    cell["nc"] = NC_PER_M0_K * (cell["m_c_dos"] * T) ** 1.5
    # X/Delta and L valleys: g_x (3 zincblende X, 6 Si/Ge Delta) and 4 equivalent valleys of
    # DOS mass (m_l m_t^2)^(1/3) each (common practice); used only when physics.carriers asks
    for v, g in (("x", cell["g_x"]), ("l", L_VALLEYS)):
        m_dos = (cell[f"m_{v}_l"] * cell[f"m_{v}_t"] ** 2) ** (1.0 / 3.0)
        cell[f"nc_{v}"] = g * NC_PER_M0_K * (m_dos * T) ** 1.5
    cell["nv"] = NC_PER_M0_K * (cell["m_v_dos"] * T) ** 1.5
    cell["y"] = y_cell
    if strained:
        summary = _apply_strain(deck, layers, cell, cell_layer, T, needs, mesh.h)
        # X valleys split by the strain: the one along z and the two in the plane, each with
        # its share of the valley DOS (selfcon.model.strain.X_VALLEY_SETS)
        m_dos = (cell["m_x_l"] * cell["m_x_t"] ** 2) ** (1.0 / 3.0)
        for name, (g, _) in X_VALLEY_SETS.items():
            cell[f"nc_{name}"] = (g / 3.0) * cell["g_x"] * NC_PER_M0_K * (m_dos * T) ** 1.5
        # classical holes: heavy and light hole each at its own edge, with its own DOS mass
        cell["nv_hh"] = NC_PER_M0_K * (cell["m_hh_dos"] * T) ** 1.5
        cell["nv_lh"] = NC_PER_M0_K * (cell["m_lh_dos"] * T) ** 1.5
        if crystal == "wurtzite":
            # the crystal-field split-off hole, a third classical band at its own edge
            cell["nv_ch"] = NC_PER_M0_K * (cell["m_ch_dos"] * T) ** 1.5
    else:
        summary = _unstrained(layers, cell, cell_layer)
    cell["ev0"] = np.maximum(cell["ev_hh"], cell["ev_lh"])
    cell.update(valley_sets(cell, T))
    # the conduction band minimum of each cell (Gamma, X/Delta or L, strain-split): Schottky
    # barriers and shallow donor levels are measured from it (in Si the Delta valleys lie
    # 2 eV below Gamma; in AlAs the X valleys 0.8 eV)
    cell["ec_min"] = np.minimum(cell["ec_gamma"], np.minimum(cell["ec_x"], cell["ec_l"]))
    # polarization along +z and its bound sheets (selfcon.model.polarization)
    physics = deck.physics
    polarity = getattr(physics, "polarity", "metal")
    factor = float(getattr(physics, "polarization", 1.0))
    cell["polarization"] = polarization_z(cell["wurtzite"], cell["psp"], cell["eps_xx"], cell["e31"],
                                          cell["e33"], cell["c13"], cell["c33"], polarity=polarity,
                                          factor=factor)
    sheet_fixed = sheets_nm2(cell["polarization"])

    sheet_d = np.zeros(n)
    sheet_a = np.zeros(n)
    sheet_ed = np.zeros(n)
    sheet_ea = np.zeros(n)
    sheet_dx = np.zeros(n, dtype=bool)
    for Li in layers:
        if Li.sheet_donors or Li.sheet_acceptors:
            i = mesh.index_of(0.5 * (Li.top + Li.bottom))
            c = min(i, n - 2)
            sheet_d[i] += Li.sheet_donors / CM2_PER_NM2
            sheet_a[i] += Li.sheet_acceptors / CM2_PER_NM2
            # the sheet's own density (its impurity spacing, dopants.sheet_equivalent_density)
            # plus its host cell's volume doping sets its binding; dilute values of the host
            n_sheet = n_imp[c] + dopants.sheet_equivalent_density(sheet_d[i] + sheet_a[i])
            sheet_ed[i] = dopants.binding_energy(dilute_ed[c], n_sheet, n_mott_d[c])
            sheet_ea[i] = dopants.binding_energy(dilute_ea[c], n_sheet, n_mott_a[c])
            if Li.donor_species == "Si-DX" and Li.sheet_donors:
                sheet_ed[i] = 0.0 if Li.dx_state == "ionized" else dx_deep[c]
                sheet_dx[i] = Li.dx_state != "ionized"

    regions = tuple((mesh.index_of(a), mesh.index_of(b)) for a, b in regions_nm)
    for arr in list(cell.values()) + [x_cell, cell_layer, layer_index, sheet_d, sheet_a, sheet_ed,
                                      sheet_ea, sheet_fixed, sheet_dx]:
        arr.flags.writeable = False
    return Structure(mesh=mesh, temperature=T, layers=tuple(layers), cell_layer=cell_layer,
                     layer_index=layer_index, x_cell=x_cell, cell=cell, sheet_donors=sheet_d,
                     sheet_acceptors=sheet_a, sheet_ed=sheet_ed, sheet_ea=sheet_ea,
                     regions=regions, regions_nm=regions_nm, carriers=tuple(deck.physics.carriers),
                     full_ionization=deck.physics.ionization != "thermal",
                     states=int(deck.quantum.states), surface=_contact(deck.surface),
                     substrate=_contact(deck.substrate), strain=summary, sheet_fixed=sheet_fixed,
                     polarity=polarity, polarization_factor=factor, crystal=crystal,
                     contacted=contacted_carrier(deck.physics.contacted_carrier, layers, crystal),
                     exchange_correlation=getattr(deck.physics, "exchange_correlation", "none"),
                     nonparabolicity=bool(getattr(deck.physics, "nonparabolicity", False)),
                     quantum_valleys=bool(getattr(deck.physics, "quantum_valleys", False)),
                     hole_model=_hole_model(deck, crystal), sheet_dx=sheet_dx)


def _hole_model(deck, crystal: str) -> str:
    """physics.hole_model, refused for wurtzite stacks (the Luttinger-Kohn Hamiltonian of
    selfcon.solver.kp is that of a cubic crystal grown on (001))."""
    model = getattr(deck.physics, "hole_model", "parabolic")
    if model != "parabolic" and crystal == "wurtzite":
        raise deck.error("physics.hole_model", f"{model} is the (001) Luttinger-Kohn model of "
                         "zincblende crystals; this stack is wurtzite (use parabolic)",
                         allowed=("parabolic",))
    return model


def group_iv_donor(deck, layer, x) -> np.ndarray:
    """Binding energy (eV) of the layer's P or As donors in Si, Ge or Si_(1-x) Ge_x (``x`` the
    Ge fraction per cell), linear in x between the two ends (selfcon.input.materials.library.
    GROUP_IV_DOPANTS; a stated approximation)."""
    from selfcon.input.deck import alloy_root
    from selfcon.input.materials.library import GROUP_IV_DOPANTS
    root, _ = alloy_root(layer.material, deck.materials)
    ge = {"Si": 0.0, "Ge": 1.0}.get(root)
    xg = np.full(np.shape(x), ge) if ge is not None else np.asarray(x, dtype=float)
    si_b = GROUP_IV_DOPANTS["Si"][layer.donor_species][0]
    ge_b = GROUP_IV_DOPANTS["Ge"][layer.donor_species][0]
    return (1.0 - xg) * si_b + xg * ge_b


def valley_sets(cell, T) -> dict:
    """Per-cell arrays of the conduction valley sets of (001) growth, for quantum valleys.

    ``x2``: the X/Delta valleys whose axis is z, a third of ``g_x`` (2 Delta valleys in Si and
    Ge, 1 X valley in a zincblende crystal), mass m_l along z and m_t in the plane; ``x4``:
    the other two thirds (4 in Si and Ge, 2 in zincblende), mass m_t along z and the in-plane
    DOS mass sqrt(m_l m_t); ``l``: the four L valleys, whose <111> axes make the angle
    arccos(1/sqrt 3) with z: mass along z 3 m_l m_t / (m_t + 2 m_l) and in-plane DOS mass
    sqrt(m_t (m_t + 2 m_l) / 3) (F. Stern and W. E. Howard, Phys. Rev. 163, 816 (1967); the
    product m_z m_par^2 = m_l m_t^2 keeps the bulk DOS).  The edges are the strain-split ones
    (ec_x_z, ec_x_xy: selfcon.model.strain) or ec_x unstrained.  Keys: ec_x2, ec_x4, m_x2_z,
    m_x2_par, m_x4_z, m_x4_par, m_l_z, m_l_par, g_x2, g_x4, g_l and the effective DOS nc_x2,
    nc_x4 (nm^-3) of the classical valley sets."""
    ml, mt = cell["m_x_l"], cell["m_x_t"]
    lz, lt = cell["m_l_l"], cell["m_l_t"]
    out = {
        "ec_x2": cell.get("ec_x_z", cell["ec_x"]).copy(),
        "ec_x4": cell.get("ec_x_xy", cell["ec_x"]).copy(),
        "m_x2_z": ml.copy(), "m_x2_par": mt.copy(),
        "m_x4_z": mt.copy(), "m_x4_par": np.sqrt(ml * mt),
        "m_l_z": 3.0 * lz * lt / (lt + 2.0 * lz), "m_l_par": np.sqrt(lt * (lt + 2.0 * lz) / 3.0),
        "g_x2": cell["g_x"] / 3.0, "g_x4": 2.0 * cell["g_x"] / 3.0,
        "g_l": np.full_like(ml, float(L_VALLEYS)),
    }
    m_dos = (ml * mt ** 2) ** (1.0 / 3.0)
    for s in ("x2", "x4"):
        out[f"nc_{s}"] = out[f"g_{s}"] * NC_PER_M0_K * (m_dos * T) ** 1.5
    return out


def contacted_carrier(choice: str, layers, crystal: str = "zincblende") -> str:
    """The deck's physics.contacted_carrier with "auto" resolved: "electron" when the stack's
    donors (volume density x thickness, plus sheets) outnumber its acceptors, else "hole".
    A wurtzite stack is an electron device unless its acceptors outnumber its donors: an
    undoped nitride HEMT's channel is the 2DEG its polarization sheets induce."""
    if choice != "auto":
        return choice
    donors = sum(L.donors * (L.bottom - L.top) / NM_PER_CM + L.sheet_donors for L in layers)
    acceptors = sum(L.acceptors * (L.bottom - L.top) / NM_PER_CM + L.sheet_acceptors for L in layers)
    if crystal == "wurtzite":
        return "hole" if acceptors > donors else "electron"
    return "electron" if donors > acceptors else "hole"


def layer_cells(cell_layer, n_layers) -> list:
    """The cells of each layer as a slice (``cell_layer`` is sorted: the layers are stacked),
    found by bisection so that a deck of many layers costs O(N log N), not O(N^2)."""
    idx = np.arange(n_layers)
    lo = np.searchsorted(cell_layer, idx, side="left")
    hi = np.searchsorted(cell_layer, idx, side="right")
    return [slice(int(a), int(b)) for a, b in zip(lo, hi)]


def _layer_means(layers, cell_layer, w, values):
    """Width-weighted mean of a per-cell array over each layer."""
    tot = np.bincount(cell_layer, weights=w, minlength=len(layers))
    return np.bincount(cell_layer, weights=w * values, minlength=len(layers)) / np.where(tot > 0, tot, 1.0)


def _unstrained(layers, cell, cell_layer) -> StrainSummary:
    """Every layer at its own lattice: zero strain, no shifts (the arrays for the result)."""
    zero = np.zeros(cell_layer.size)
    cell["eps_xx"] = zero
    cell["eps_zz"] = zero.copy()
    cell["a_par"] = cell["lattice"].copy()
    per = []
    spans = layer_cells(cell_layer, len(layers))
    for Li in layers:
        own = cell["lattice"][spans[Li.index]]
        a = float(own[0]) if own.size else float("nan")
        per.append(LayerStrain(index=Li.index, strained=False, relaxed=Li.relaxed, eps_xx=0.0,
                               eps_zz=0.0, lattice_inplane=a, lattice_own=float(np.mean(own)) if own.size else a,
                               critical_thickness=float("inf"), thickness=Li.bottom - Li.top))
    return StrainSummary(mode="unstrained", reference="unstrained: no [substrate] material or "
                         "lattice_constant and no relaxed layer, every layer at its own lattice "
                         "constant", a_reference=None, layers=tuple(per))


def _library_crystal(name, local):
    from selfcon.input.materials import crystal
    return crystal(name, local)


def _stack_crystal(deck, layers, strained) -> str:
    """The crystal of the stack ("zincblende" or "wurtzite"); refuses (exit 2) a stack that
    mixes the two, a wurtzite stack without the lattice it grows on, a substrate of the other
    crystal, and the X/L valleys (zincblende only) in a wurtzite stack."""
    crystals = [_library_crystal(Li.material, deck.materials) for Li in layers]
    if len(set(crystals)) > 1:
        k = next(i for i, c in enumerate(crystals) if c != crystals[0])
        raise deck.error(f"layer[{k}].material",
                         f"{layers[k].material} is {crystals[k]} but {layers[0].material} above it "
                         f"is {crystals[0]}: a stack of wurtzite and zincblende layers (their "
                         "interface, polarity and strain) is not modelled",
                         allowed=f"{crystals[0]} materials in this stack", cls=MaterialError)
    crystal = crystals[0] if crystals else "zincblende"
    if crystal != "wurtzite":
        ref = getattr(deck, "lattice", None)
        if ref is not None and ref.material is not None and \
                _library_crystal(ref.material, deck.materials) == "wurtzite":
            raise deck.error("substrate.material", f"{ref.material} is wurtzite but the stack is "
                             "zincblende", allowed="a zincblende substrate material",
                             cls=MaterialError)
        return crystal
    if not strained:
        raise deck.error("substrate.material",
                         "a wurtzite stack needs the lattice it grows on (there is no unstrained "
                         "default: the polarization sheets depend on the strain): give "
                         "[substrate] material (e.g. \"GaN\") or lattice_constant (a, nm), or "
                         "mark a buffer layer relaxed = true", allowed="GaN, AlN, InN, AlGaN, "
                         "InGaN, InAlN or a deck-local wurtzite material", cls=MaterialError)
    ref = deck.lattice
    if ref.material is not None and _library_crystal(ref.material, deck.materials) != "wurtzite":
        raise deck.error("substrate.material", f"{ref.material} is zincblende but the stack is "
                         "wurtzite (c-plane growth)", allowed="GaN, AlN, InN, AlGaN, InGaN, InAlN",
                         cls=MaterialError)
    valleys = [c for c in deck.physics.carriers if c in ("x_electron", "l_electron")]
    if valleys:
        raise deck.error("physics.carriers", f"{valleys[0]}: the wurtzite model has no X or L "
                         "valleys", allowed="electron, heavy_hole, light_hole", cls=MaterialError)
    return crystal


def _apply_strain(deck, layers, cell, cell_layer, T, needs, h) -> StrainSummary:
    """Strain every cell on the lattice it grows on and shift its band edges (in place)."""
    from selfcon.input import materials
    ref = deck.lattice
    if ref.lattice_constant is not None:
        a_ref = float(ref.lattice_constant)
        mode, text = "lattice_constant", f"in-plane lattice constant {a_ref:.6g} nm (deck, every temperature)"
    elif ref.material is not None:
        p = _located(deck, "substrate.", _uniform_parameters, ref.material, ref.x, T,
                     deck.materials, frozenset({"strain"}), ref.y)
        a_ref = float(p["lattice"])
        comp = "".join(f" {k} = {v:g}" for k, v in (("x", ref.x), ("y", ref.y)) if v is not None)
        mode, text = "substrate", (f"substrate {ref.material}{comp}: a = {a_ref:.6g} nm at "
                                   f"{T:g} K")
        if not np.isfinite(a_ref):
            raise deck.error("substrate.material", f"{ref.material} has no lattice constant",
                             cls=MaterialError)
    else:
        a_ref = None
        mode, text = "relaxed layers", ("relaxed layers set the lattice of the layers above them; "
                                        "layers below the lowest relaxed one are unstrained")
    relaxed = np.array([Li.relaxed for Li in layers], dtype=bool)
    top_lattice = np.full(len(layers), np.nan)
    for Li in layers:
        if Li.relaxed:
            p = _located(deck, f"layer[{Li.index}].", _uniform_parameters, Li.material, Li.x_top,
                         T, deck.materials, needs, Li.y_top)
            top_lattice[Li.index] = float(p["lattice"])
    own = cell["lattice"]
    a_par = in_plane_lattice(own, cell_layer, relaxed, top_lattice, a_ref)
    wurtzite = bool(np.any(cell["wurtzite"] > 0.5))
    e = bulk_strained_edges(cell, a_par)
    exx, ezz = e["eps_xx"], e["eps_zz"]
    for key in ("ec_gamma", "ev_hh", "ev_lh", "ec_x_z", "ec_x_xy", "ec_x", "ec_l"):
        cell[key] = e[key]
    if wurtzite:        # the strained edge of the split-off hole and the strained hole masses
        for key in ("ev_ch", "m_hh_z", "m_hh_par", "m_lh_z", "m_lh_par", "m_ch_z", "m_ch_par",
                    "m_hh_dos", "m_lh_dos", "m_ch_dos"):
            cell[key] = e[key]
        bad = ~(np.isfinite(cell["m_lh_z"]) & (cell["m_lh_z"] > 0) & (cell["m_ch_z"] > 0)
                & (cell["m_lh_par"] > 0) & (cell["m_ch_par"] > 0))
        if bad.any():
            Li = layers[int(cell_layer[np.flatnonzero(bad)[0]])]
            raise deck.error(f"layer[{Li.index}].material", f"{Li.material} under this strain "
                             "gets a non-positive hole mass from valence_a1..a4 (check the "
                             "deck-local parameters)", cls=MaterialError)
    cell["eg_gamma"] = cell["ec_gamma"] - np.maximum(cell["ev_hh"], cell["ev_lh"])
    cell["eps_xx"], cell["eps_zz"], cell["a_par"] = exx, ezz, a_par
    # per-layer summary (cell-width-weighted means) and critical thickness
    nu = _layer_means(layers, cell_layer, h, poisson_ratio_001(cell["c11"], cell["c12"]))
    a_mean = _layer_means(layers, cell_layer, h, own)
    ex_mean = _layer_means(layers, cell_layer, h, exx)
    ez_mean = _layer_means(layers, cell_layer, h, ezz)
    per = []
    spans = layer_cells(cell_layer, len(layers))
    for Li in layers:
        sel = spans[Li.index]
        per.append(LayerStrain(index=Li.index, strained=bool(not Li.relaxed and np.any(exx[sel] != 0.0)),
                               relaxed=Li.relaxed, eps_xx=float(ex_mean[Li.index]),
                               eps_zz=float(ez_mean[Li.index]),
                               lattice_inplane=float(a_par[sel][0]),
                               lattice_own=float(a_mean[Li.index]),
                               critical_thickness=float("inf"), thickness=Li.bottom - Li.top))
    if wurtzite:
        # c-plane layers: the channel-cracking criterion (selfcon.model.strain)
        stress = biaxial_stress_c_plane(exx, cell["c11"], cell["c12"], cell["c13"], cell["c33"])
        s_mean = _layer_means(layers, cell_layer, h, stress)
        per = [replace(L, stress=float(s_mean[L.index]), criterion="channel cracking") for L in per]
        hc, windows = wurtzite_stack_cracking(per, s_mean)
        crystal, criterion = "wurtzite", "channel cracking"
    else:
        hc, windows = stack_critical_thickness(per, nu, a_mean)
        crystal, criterion = "zincblende", "Matthews-Blakeslee"
    per = tuple(replace(L, critical_thickness=float(hc[L.index])) for L in per)
    return StrainSummary(mode=mode, reference=text, a_reference=a_ref, layers=per, windows=windows,
                         crystal=crystal, criterion=criterion)


def key_nodes(st: Structure) -> np.ndarray:
    """Boolean mask of the nodes a mesh of this structure must keep: the two ends,
    every interface (the cell's layer changes), every sheet and every region end."""
    n = st.n_nodes
    key = np.zeros(n, dtype=bool)
    key[0] = key[-1] = True
    key[1:-1] |= st.cell_layer[1:] != st.cell_layer[:-1]
    key |= (st.sheet_donors != 0) | (st.sheet_acceptors != 0)
    for i0, i1 in st.regions:
        key[i0] = key[i1] = True
    return key


#: what was derived from a structure once for all its solves, id(structure) -> (weak
#: reference, {key: value}); an entry goes with its structure (Structures are immutable, so
#: nothing derived from one goes stale)
_DERIVED: dict = {}


def derived(st: Structure, key, make):
    """``make()``, computed once per structure and ``key`` and kept while ``st`` lives: for
    data every solve of a structure derives alike (its coarse start meshes, its classical
    Poisson problem, its classical starting potential).  The value is shared: treat it as read-only (a dict value may be a
    small cache of its own)."""
    entry = _DERIVED.get(id(st))
    if entry is None or entry[0]() is not st:
        entry = _DERIVED[id(st)] = (weakref.ref(st, lambda _, k=id(st): _DERIVED.pop(k, None)), {})
    try:
        return entry[1][key]
    except KeyError:
        value = entry[1][key] = make()
        return value


def coarsened(st: Structure, factor: int = 4) -> tuple[Structure, np.ndarray]:
    """The same stack on every ``factor``-th node (key nodes always kept).

    Each coarse cell lies inside one layer and takes the properties of its middle fine
    cell (the exact value in uniform layers, the mid-cell value in graded ones).  Used
    for a cheap starting potential; returns (coarse structure, kept fine-node indices).
    Made once per structure and factor (:func:`derived`): every solve starts the same way.
    """
    return derived(st, ("coarsened", int(factor)), lambda: _coarsened(st, factor))


def _coarsened(st: Structure, factor: int) -> tuple[Structure, np.ndarray]:
    from dataclasses import replace
    from selfcon.model.mesh import half_widths
    key = key_nodes(st)
    keep = key.copy()
    idx = np.flatnonzero(key)
    for a, b in zip(idx[:-1], idx[1:]):
        keep[a:b:factor] = True
    nodes = np.flatnonzero(keep)
    mid = (nodes[:-1] + nodes[1:] - 1) // 2            # a fine cell inside each coarse cell
    z = st.z[nodes].copy()
    h, wl, wr, w = half_widths(z)
    cell = {k: v[mid] for k, v in st.cell.items()}
    regions = tuple((int(np.searchsorted(nodes, i0)), int(np.searchsorted(nodes, i1)))
                    for i0, i1 in st.regions)
    picked = dict(cell_layer=st.cell_layer[mid], layer_index=st.layer_index[nodes],
                  x_cell=st.x_cell[mid], sheet_donors=st.sheet_donors[nodes],
                  sheet_acceptors=st.sheet_acceptors[nodes], sheet_ed=st.sheet_ed[nodes],
                  sheet_ea=st.sheet_ea[nodes],
                  sheet_dx=None if st.sheet_dx is None else st.sheet_dx[nodes])
    if "polarization" in cell:
        # the bound sheets of the coarse cells' polarization: exact at the interfaces (kept
        # nodes), a graded layer's bulk bound charge on the coarse nodes
        picked["sheet_fixed"] = sheets_nm2(cell["polarization"])
    for arr in [z, h, wl, wr, w, *cell.values(), *[a for a in picked.values() if a is not None]]:
        arr.flags.writeable = False     # read-only like every structure array (one numba signature)
    if st.dx_frozen is not None:
        picked["dx_frozen"] = (st.dx_frozen[0][mid], st.dx_frozen[1][nodes], st.dx_frozen[2])
    coarse = replace(st, mesh=Mesh(z=z, h=h, wl=wl, wr=wr, w=w), cell=cell, regions=regions,
                     **picked)
    return coarse, nodes
