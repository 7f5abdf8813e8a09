"""Physical sanity checks a result must pass before it is called converged.

The loop converges when its potential stops changing; that says nothing about whether the
potential it stopped on is physical.  Every solve whose loop converged runs the checks
below on the assembled result (:func:`sanity_failures`, from
``selfcon/output/assemble.py::build_result``).  A failed check turns the result into a
failure: ``converged`` false, ``status`` ``UNPHYSICAL`` (6), and a message naming the check
and the numbers (the command line exits 3, the file is still written).  The limits
(README.md, "Sanity checks"):

``gauss``
    Gauss's law of the final potential and charge, ``summary["gauss_residual"]``: the
    violation relative to the larger of the two boundary displacement fluxes and the
    stack's charge counted without sign, fixed and mobile (a floor of 1e6 cm^-2, see
    ``selfcon/solver/poisson.py::gauss_residual``), at most :data:`GAUSS_LIMIT`, unless
    the violation itself (``summary["gauss_violation_cm2"]``) is within the charge whose
    field eps_r,max dphi / L the precision dphi of the potential allows (:func:`precision_flux`:
    the larger of solver.tolerance and the loop's last residual; L the stack thickness).
``band_edges``
    Every conduction- and valence-band edge within +-(largest gap of the stack + |bias| +
    :data:`EDGE_MARGIN_EV`) of the Fermi level (0 eV): a band edge further away means a
    band filled or emptied by volts, which no parabolic band model describes.
``density``
    Electrons (every valley) and holes at each node below the atom density of the
    material there: 8 / a^3 in zincblende (8 atoms per cubic cell), 4 / (sqrt(3)/2 a^2 c)
    in wurtzite (4 atoms per hexagonal cell), with the lattice constants of the material
    library at the deck temperature.  Where the lattice constant is unknown (a deck-local
    material without one), diamond's 1.76e23 cm^-3 (the densest of the common
    semiconductors, from memory) is the limit.
``field``
    The field of every cell below the bound Gauss's law puts on it: with Q the charge of
    the stack counted without sign (carriers, ionised dopants, sheets, polarization bound
    charge; in units of q/eps0) and dphi the potential step between the two ends,
    |eps_r E| <= 2 Q + eps_r,max |dphi| / L  (both ends fixed), <= Q (an end at zero
    field), plus the field the precision of the potential allows (:func:`precision_flux`).
    Real polarization and delta-doped stacks respect it by construction (it follows from
    Gauss's law and the two end conditions); it fails when the charge and the field of a
    result do not belong together.  A relative slack of :data:`FIELD_SLACK`
    covers round-off.

Each check is a function ``check_<name>(result, structure, deck) -> str | None`` listed in
:data:`CHECKS`; it returns one sentence naming the check, the place and the numbers, or
None when the result passes.
"""
from __future__ import annotations

import numpy as np

from selfcon.constants import CM2_PER_NM2, CM3_PER_NM3, NM_PER_CM, Q_EPS0
from selfcon.model.mesh import half_widths
from selfcon.model.structure import derived

#: largest relative violation of Gauss's law a converged result may have (issue contract;
#: shipped decks reach below 1e-6, tests/test_shipped_inputs.py)
GAUSS_LIMIT = 1e-5
#: eV beyond the largest gap and the bias that a band edge may lie from the Fermi level
EDGE_MARGIN_EV = 1.0
#: cm^-3, the atom density used where a material's lattice constant is unknown: diamond,
#: 8 / (0.3567 nm)^3 = 1.76e23 cm^-3 (lattice constant from memory)
FALLBACK_ATOM_DENSITY_CM3 = 1.76e23
#: relative slack of the field bound (round-off of the solution and of the charge sum)
FIELD_SLACK = 1e-3


def atom_density(cell) -> np.ndarray:
    """Atoms per cm^3 of each cell: 8 / a^3 (zincblende), 4 / (sqrt(3)/2 a^2 c) (wurtzite),
    a and c in nm at the deck temperature (``cell["lattice"]``, ``cell["lattice_c"]``);
    :data:`FALLBACK_ATOM_DENSITY_CM3` where the lattice constant is unknown."""
    a = np.asarray(cell["lattice"], dtype=float)
    wz = np.asarray(cell.get("wurtzite", np.zeros_like(a)), dtype=float) > 0.5
    c = np.asarray(cell.get("lattice_c", np.full_like(a, np.nan)), dtype=float)
    with np.errstate(invalid="ignore", divide="ignore"):
        zb = 8.0 / a ** 3
        hexagonal = 4.0 / (np.sqrt(3.0) / 2.0 * a ** 2 * c)
    n = np.where(wz, hexagonal, zb) * CM3_PER_NM3
    return np.where(np.isfinite(n) & (n > 0), n, FALLBACK_ATOM_DENSITY_CM3)


def _bias(deck) -> float:
    return sum(abs(float(getattr(c, "bias", 0.0) or 0.0)) for c in (deck.surface, deck.substrate))


def _layer_at(result, node: int) -> str:
    idx = np.asarray(result.layer_index)
    names = [row["name"] for row in result.layers]
    i = int(idx[min(node, idx.size - 1)])
    return names[i] if 0 <= i < len(names) else "?"


def precision_flux(result, st, deck) -> float:
    """eps_r,max * dphi / L (V/nm, the flux unit of the checks): the field a potential known
    to dphi carries across the stack of thickness L, dphi the larger of the deck's
    solver.tolerance and the loop's last residual (V).  A nearly uncharged stack (an undoped
    well under a pinned surface) has boundary fluxes of that size and nothing else: a
    violation of Gauss's law or of the field bound within it is the precision of the
    potential, not a potential that does not belong to its charge."""
    z = np.asarray(result.z, dtype=float)
    tol = getattr(getattr(deck, "solver", None), "tolerance", None)
    dphi = max(float(tol) if tol is not None else 0.0, float(result.residual)
               if np.isfinite(result.residual) else 0.0)
    if z.size < 2 or not dphi > 0:
        return 0.0
    return float(np.max(st.cell["eps"])) * dphi / float(z[-1] - z[0])


def check_gauss(result, st, deck):
    g = float(result.summary.get("gauss_residual", 0.0))
    if g <= GAUSS_LIMIT:
        return None
    violation = result.summary.get("gauss_violation_cm2")
    allowed = precision_flux(result, st, deck) / Q_EPS0 * CM2_PER_NM2
    if violation is not None and float(violation) <= allowed:
        return None
    amount = f" ({float(violation):.3g} cm^-2, beyond the {allowed:.3g} cm^-2 the potential's precision " \
             "allows)" if violation is not None else ""
    return (f"sanity check 'gauss': Gauss's law is violated by {g:.2e} of the boundary flux (limit "
            f"{GAUSS_LIMIT:g}){amount}; the potential does not belong to its charge")


def _largest_gap(st) -> float:
    """The largest gap of the stack (eV): its Gamma gaps and conduction-valence edge distances."""
    cell = st.cell
    return float(np.nanmax(np.concatenate([cell["ec_gamma"] - cell["ev0"], cell["eg_gamma"]])))


def check_band_edges(result, st, deck):
    # a property of the structure: computed once per structure (model.structure.derived)
    gap = derived(st, "sanity_largest_gap", lambda: _largest_gap(st))
    bias = _bias(deck)
    limit = gap + bias + EDGE_MARGIN_EV
    worst = None
    for key, name in (("conduction_band", "Ec"), ("valence_band", "Ev")):
        e = np.asarray(result.profile[key], dtype=float)
        bad = ~(np.abs(e) <= limit)
        if bad.any():
            i = int(np.argmax(np.where(np.isfinite(e), np.abs(e), np.inf)))
            if worst is None or not abs(e[i]) <= abs(worst[1]):
                worst = (name, float(e[i]), i)
    if worst is None:
        return None
    name, e, i = worst
    return (f"sanity check 'band_edges': {name} lies {e:+.3g} eV from E_F at z = {result.z[i]:.1f} nm in layer "
            f"'{_layer_at(result, i)}' (limit +-{limit:.2f} eV = largest gap {gap:.2f} eV + "
            f"|bias| {bias:g} V + {EDGE_MARGIN_EV:g} eV); a band that deep is outside every "
            "band model here: check the doping, the sheets and the bias")


def _node_atom_density(st) -> np.ndarray:
    per_cell = atom_density(st.cell)
    node = np.empty(per_cell.size + 1)
    node[:-1] = per_cell
    node[-1] = per_cell[-1]
    node[1:-1] = np.maximum(per_cell[:-1], per_cell[1:])
    node.setflags(write=False)          # kept with the structure (check_density): shared
    return node


def _electrons(result) -> np.ndarray:
    n = np.array(result.profile["electron_density"], dtype=float)
    for key in ("x_electron_density", "l_electron_density"):
        if key in result.profile:
            n = n + np.asarray(result.profile[key], dtype=float)
    return n


def check_density(result, st, deck):
    limit = derived(st, "sanity_node_atom_density", lambda: _node_atom_density(st))
    for carriers, dens in (("electrons", _electrons(result)),
                           ("holes", np.asarray(result.profile["hole_density"], dtype=float))):
        ratio = dens / limit
        bad = ~(ratio < 1.0)
        if bad.any():
            i = int(np.argmax(np.where(np.isfinite(ratio), ratio, np.inf)))
            return (f"sanity check 'density': {carriers} reach {dens[i]:.3g} cm^-3 at z = {result.z[i]:.1f} nm "
                    f"in layer '{_layer_at(result, i)}', above the atom density of the material "
                    f"there ({limit[i]:.3g} cm^-3); check the doping and the sheet densities")
    return None


def field_bound(result, st):
    """(|eps_r E| per cell in V/nm, its bound in V/nm) of a result (see the module docstring)."""
    z = np.asarray(result.z, dtype=float)
    phi = np.asarray(result.profile["potential"], dtype=float)
    m = st.mesh
    if z.shape == m.z.shape and np.array_equal(z, m.z):
        h, w = m.h, m.w                 # the structure's widths (the same half_widths of z)
    else:
        h, _, _, w = half_widths(z)
    eps = np.asarray(st.cell["eps"], dtype=float)
    d = eps * np.abs((phi[1:] - phi[:-1]) / h)       # np.diff(phi)
    p = result.profile
    charge = (np.abs(_electrons(result)) + np.abs(np.asarray(p["hole_density"], dtype=float))
              + np.abs(np.asarray(p["ionized_donors"], dtype=float))
              + np.abs(np.asarray(p["ionized_acceptors"], dtype=float))
              + np.abs(np.asarray(p["bound_charge"] if "bound_charge" in p else np.zeros_like(z), dtype=float)))
    q = Q_EPS0 * float((charge / CM3_PER_NM3 * w).sum())
    fixed_ends = st.surface.kind != "free" and st.substrate.kind != "free"
    if fixed_ends:
        bound = 2.0 * q + float(eps.max()) * abs(phi[-1] - phi[0]) / (z[-1] - z[0])
    else:
        bound = q
    return d, bound


def check_field(result, st, deck):
    d, bound = field_bound(result, st)
    limit = bound * (1.0 + FIELD_SLACK) + 1e-12 + precision_flux(result, st, deck)
    if (d <= limit).all():
        return None
    c = int(np.argmax(np.where(np.isfinite(d), d, np.inf)))
    eps = float(st.cell["eps"][c])
    return (f"sanity check 'field': |E| = {d[c] / eps * NM_PER_CM:.3g} V/cm at z = {result.z[c]:.1f} nm in layer "
            f"'{_layer_at(result, c)}' exceeds the bound of Gauss's law "
            f"{limit / eps * NM_PER_CM:.3g} V/cm from the stack's charge and end potentials")


#: the checks, in the order their failures are reported
CHECKS = (check_gauss, check_band_edges, check_density, check_field)


def sanity_failures(result, st, deck) -> list[str]:
    """One sentence per failed check of :data:`CHECKS` (empty: the result is physical)."""
    out = []
    for check in CHECKS:
        msg = check(result, st, deck)
        if msg:
            out.append(msg)
    return out
