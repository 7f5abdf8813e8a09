"""Deck -> Structure: the mesh and every per-cell / per-node array the physics needs.

All arrays are in internal units (nm, eV, nm^-3, nm^-2) and read-only.  Material
properties are per cell (each cell lies in one layer); sheets sit on nodes.
Quantum regions are stored as inclusive node-index ranges whose end nodes carry
the Dirichlet condition psi = 0.
"""
from __future__ import annotations

import functools
from dataclasses import dataclass
from typing import TYPE_CHECKING

import numpy as np

from selfcon.constants import CM2_PER_NM2, CM3_PER_NM3, KB_EV, NC_PER_M0_K
from selfcon.errors import DeckError
from selfcon.model import dopants
from selfcon.model.mesh import Mesh, build_mesh

if TYPE_CHECKING:
    from selfcon.input.deck import Deck

#: per-cell arrays taken from the material library (selfcon.input.materials.cell_parameters keys)
MATERIAL_KEYS = ("eps", "ec_gamma", "ec_x", "ec_l", "ev_hh", "ev_lh", "m_e", "m_hh_z", "m_lh_z",
                 "m_hh_par", "m_lh_par", "m_x_l", "m_x_t", "m_l_l", "m_l_t", "m_c_dos", "m_v_dos",
                 "donor_binding", "acceptor_binding", "eg_gamma")


#: equivalent conduction valleys in bulk zinc-blende (common practice)
X_VALLEYS = 3
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
    x_top: float | None
    x_bottom: float | None
    top: float           # nm
    bottom: float        # nm
    donors: float        # cm^-3
    acceptors: float     # cm^-3
    sheet_donors: float  # cm^-2
    sheet_acceptors: float


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

    @property
    def z(self) -> np.ndarray:
        return self.mesh.z

    @property
    def n_nodes(self) -> int:
        return self.mesh.z.size

    @property
    def kT(self) -> float:
        return KB_EV * self.temperature

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
def _uniform_parameters(name, x, temperature, local_defs, needs) -> dict:
    """Material parameters of one composition (scalars); cached, since studies solve the
    same materials at the same temperature over and over.  Errors are not cached."""
    from selfcon.input import materials
    params = materials.cell_parameters(name, np.array([x]), temperature, local_defs, needs)
    return {k: float(v[0]) for k, v in params.items()}


def _needs(carriers, ionization) -> frozenset:
    needs = set(carriers)
    if ionization == "thermal":
        needs.add("thermal_ionization")
    return frozenset(needs)


def build_structure(deck: Deck, *, mesh: Mesh | None = None) -> Structure:
    """Mesh the deck's stack and fill every array from the material library.

    Parameters
    ----------
    deck : Deck
        A loaded deck.
    mesh : Mesh, optional
        Use this mesh instead of the deck's graded one (benchmarks compare a uniform mesh,
        :func:`selfcon.model.mesh.uniform_mesh`); it must span the stack and carry every
        interface, sheet and region end as a node.

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
                                sheet_acceptors=float(L.sheet_acceptors)))
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

    needs = _needs(deck.physics.carriers, deck.physics.ionization)
    x_cell = np.full(n - 1, np.nan)
    cell = {k: np.empty(n - 1) for k in MATERIAL_KEYS}
    cell["donors"] = np.zeros(n - 1)
    cell["acceptors"] = np.zeros(n - 1)
    for Li in layers:
        sel = cell_layer == Li.index
        if not np.any(sel):
            continue
        if Li.x_top is not None:
            xb = Li.x_bottom if Li.x_bottom is not None else Li.x_top
            frac = (zc[sel] - Li.top) / (Li.bottom - Li.top)
            x_cell[sel] = Li.x_top + (xb - Li.x_top) * frac
        graded = Li.x_top is not None and Li.x_bottom is not None and Li.x_bottom != Li.x_top
        if graded:
            params = materials.cell_parameters(Li.material, x_cell[sel], T, deck.materials, needs)
        else:       # one composition: evaluate once (cached across solves) and broadcast
            x0 = float("nan") if Li.x_top is None else float(Li.x_top)
            params = _uniform_parameters(Li.material, x0, T, deck.materials, needs)
        for k in MATERIAL_KEYS:
            cell[k][sel] = params[k]
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
    cell["nc"] = NC_PER_M0_K * (cell["m_c_dos"] * T) ** 1.5
    # X and L valleys: 3 and 4 equivalent valleys of DOS mass (m_l m_t^2)^(1/3) each
    # (common practice for the cubic III-V's); used only when physics.carriers asks for them
    for v, g in (("x", X_VALLEYS), ("l", L_VALLEYS)):
        m_dos = (cell[f"m_{v}_l"] * cell[f"m_{v}_t"] ** 2) ** (1.0 / 3.0)
        cell[f"nc_{v}"] = g * NC_PER_M0_K * (m_dos * T) ** 1.5
    cell["nv"] = NC_PER_M0_K * (cell["m_v_dos"] * T) ** 1.5
    cell["ev0"] = np.maximum(cell["ev_hh"], cell["ev_lh"])

    sheet_d = np.zeros(n)
    sheet_a = np.zeros(n)
    sheet_ed = np.zeros(n)
    sheet_ea = np.zeros(n)
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

    regions = tuple((mesh.index_of(a), mesh.index_of(b)) for a, b in regions_nm)
    for arr in list(cell.values()) + [x_cell, cell_layer, layer_index, sheet_d, sheet_a, sheet_ed, sheet_ea]:
        arr.flags.writeable = False
    return Structure(mesh=mesh, temperature=T, layers=tuple(layers), cell_layer=cell_layer,
                     layer_index=layer_index, x_cell=x_cell, cell=cell, sheet_donors=sheet_d,
                     sheet_acceptors=sheet_a, sheet_ed=sheet_ed, sheet_ea=sheet_ea,
                     regions=regions, regions_nm=regions_nm, carriers=tuple(deck.physics.carriers),
                     full_ionization=deck.physics.ionization != "thermal",
                     states=int(deck.quantum.states), surface=_contact(deck.surface),
                     substrate=_contact(deck.substrate))


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


def coarsened(st: Structure, factor: int = 4) -> tuple[Structure, np.ndarray]:
    """The same stack on every ``factor``-th node (key nodes always kept).

    Each coarse cell lies inside one layer and takes the properties of its middle fine
    cell (the exact value in uniform layers, the mid-cell value in graded ones).  Used
    for a cheap starting potential; returns (coarse structure, kept fine-node indices).
    """
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
                  sheet_ea=st.sheet_ea[nodes])
    for arr in [z, h, wl, wr, w, *cell.values(), *picked.values()]:
        arr.flags.writeable = False     # read-only like every structure array (one numba signature)
    coarse = replace(st, mesh=Mesh(z=z, h=h, wl=wl, wr=wr, w=w), cell=cell, regions=regions,
                     **picked)
    return coarse, nodes
