"""Loop outcome -> Result: profiles in output units, subbands, per-layer charge, summary.

Band-edge profiles take each node's value from the cell to its right (the
layer of /profile/layer_index), so a band offset shows as a step at the
interface node; densities are dual-cell averages (the finite-volume values),
so that sum(n * w) is exactly the sheet density.
"""
from __future__ import annotations

import hashlib
from functools import lru_cache
from datetime import datetime, timezone
from importlib import metadata

import numpy as np

from selfcon.constants import CM2_PER_NM2, CM3_PER_NM3, NM_PER_CM
from selfcon.output.result import Result, Subbands
from selfcon.output.schema import BANDS
from selfcon.solver.statistics import subband_density

#: an electron subband counts as occupied above this sheet density (cm^-2) and fraction of n_s
OCCUPIED_CM2 = 1e8
OCCUPIED_FRACTION = 1e-3


def right_cell_values(cell_values: np.ndarray) -> np.ndarray:
    out = np.empty(cell_values.size + 1)
    out[:-1] = cell_values
    out[-1] = cell_values[-1]
    return out


def cell_contents(st, node_density: np.ndarray) -> np.ndarray:
    """Integral of a node (dual-average) density over each cell's two half cells (nm^-2)."""
    m = st.mesh
    return node_density[:-1] * m.wr[:-1] + node_density[1:] * m.wl[1:]


def per_layer(st, node_density: np.ndarray) -> np.ndarray:
    return np.bincount(st.cell_layer, weights=cell_contents(st, node_density),
                       minlength=len(st.layers))


def valley_density(st, phi, edge_cell, nc_cell) -> np.ndarray:
    """Classical density (nm^-3) of one conduction valley at the nodes, dual-cell averaged
    with each half cell's own edge (the Poisson kernel's model)."""
    from selfcon.solver.statistics import fermi_half
    m = st.mesh
    left = np.zeros(m.n)
    right = np.zeros(m.n)
    left[1:] = nc_cell * fermi_half((phi[1:] - edge_cell) / st.kT)
    right[:-1] = nc_cell * fermi_half((phi[:-1] - edge_cell) / st.kT)
    return (m.wl * left + m.wr * right) / m.w


def electric_field(z: np.ndarray, phi: np.ndarray) -> np.ndarray:
    """-dphi/dz at the nodes in V/cm (second-order one-sided at the ends)."""
    if z.size < 3:
        g = np.gradient(phi, z)
    else:
        g = np.gradient(phi, z, edge_order=2)
    return -g * NM_PER_CM


@lru_cache(maxsize=1)
def _package_versions() -> tuple:
    # importlib.metadata reads distribution files (~10 ms): once per process is enough
    out = {}
    for pkg in ("selfcon", "numpy", "scipy", "numba", "h5py"):
        try:
            out[f"{pkg}_version"] = metadata.version(pkg)
        except metadata.PackageNotFoundError:
            out[f"{pkg}_version"] = "unknown"
    return tuple(out.items())


def _versions() -> dict:
    return dict(_package_versions())


def build_result(deck, st, bc, loop, *, wall_time: float, method: str) -> Result:
    from selfcon.solver import charge as coupling
    phi = loop.phi
    n, p, ndp, nam = coupling.densities_with_states(st, phi, loop.states)
    ec = right_cell_values(st.cell["ec_gamma"]) - phi
    ev = right_cell_values(st.cell["ev0"]) - phi
    profile = {
        "conduction_band": ec,
        "conduction_band_x": right_cell_values(st.cell["ec_x"]) - phi,
        "conduction_band_l": right_cell_values(st.cell["ec_l"]) - phi,
        "valence_band": ev,
        "potential": phi.copy(),
        "electric_field": electric_field(st.z, phi),
        "electron_density": n * CM3_PER_NM3,
        "hole_density": p * CM3_PER_NM3,
        "ionized_donors": ndp * CM3_PER_NM3,
        "ionized_acceptors": nam * CM3_PER_NM3,
    }

    valley_sheets = {}
    for name, (edge, dos) in coupling.VALLEYS.items():
        if name in st.carriers:
            nv = valley_density(st, phi, st.cell[edge], st.cell[dos])
            profile[name + "_density"] = nv * CM3_PER_NM3
            valley_sheets[name] = float(np.sum(nv * st.mesh.w)) * CM2_PER_NM2

    subbands = {}
    for band in BANDS:
        bs = loop.states.get(band)
        if bs is None:
            continue
        occ = subband_density(bs.energy, bs.dos, st.temperature, bs.sign)
        subbands[band] = Subbands(energy=bs.energy.copy(), occupation=occ * CM2_PER_NM2,
                                  wavefunction=bs.psi.copy(), in_plane_mass=bs.m_par.copy(),
                                  region=bs.region.astype(np.int64), degeneracy=bs.degeneracy.copy())

    e_layer = per_layer(st, n) * CM2_PER_NM2
    h_layer = per_layer(st, p) * CM2_PER_NM2
    d_layer = per_layer(st, ndp) * CM2_PER_NM2
    a_layer = per_layer(st, nam) * CM2_PER_NM2
    layers = []
    for Li in st.layers:
        layers.append({
            "name": Li.name, "material": Li.material,
            "x_top": float("nan") if Li.x_top is None else float(Li.x_top),
            "x_bottom": float("nan") if Li.x_top is None else
            float(Li.x_bottom if Li.x_bottom is not None else Li.x_top),
            "top_nm": Li.top, "bottom_nm": Li.bottom,
            "electron_sheet_density_cm2": float(e_layer[Li.index]),
            "hole_sheet_density_cm2": float(h_layer[Li.index]),
            "ionized_donor_sheet_density_cm2": float(d_layer[Li.index]),
            "ionized_acceptor_sheet_density_cm2": float(a_layer[Li.index]),
        })

    w = st.mesh.w
    ns = float(np.sum(n * w)) * CM2_PER_NM2
    ps = float(np.sum(p * w)) * CM2_PER_NM2
    ch = int(np.argmax(e_layer)) if ns > 0 else int(np.argmax(h_layer))
    ch_cells = st.cell_layer == ch
    ch_nodes = np.zeros(st.n_nodes, dtype=bool)
    ch_nodes[:-1] |= ch_cells
    ch_nodes[1:] |= ch_cells
    summary = {
        "electron_sheet_density_cm2": ns,
        "hole_sheet_density_cm2": ps,
        "donor_sheet_density_cm2": float(np.sum(ndp * w)) * CM2_PER_NM2,
        "acceptor_sheet_density_cm2": float(np.sum(nam * w)) * CM2_PER_NM2,
        "gauss_residual": float(coupling.gauss_residual(st, bc, phi, loop.states, rho=p - n + ndp - nam)),
        "channel_layer": st.layers[ch].name,
        "channel_electron_sheet_density_cm2": float(e_layer[ch]),
        "channel_hole_sheet_density_cm2": float(h_layer[ch]),
        "ef_minus_ec_channel_eV": float(-np.min(ec[ch_nodes])),
        "ev_minus_ef_channel_eV": float(np.max(ev[ch_nodes])),
        "converged": bool(loop.converged),
        "iterations": len(loop.iterations),
        "residual_V": float(loop.iterations[-1].residual) if loop.iterations else float("nan"),
        "method": method,
        "nodes": int(st.n_nodes),
        "wall_time_s": float(wall_time),
    }
    for band in BANDS:
        sb = subbands.get(band)
        tot = float(sb.occupation.sum()) if sb is not None else 0.0
        for k in range(3):
            summary[f"{band}_E{k}_eV"] = float(sb.energy[k]) if sb is not None and sb.energy.size > k else float("nan")
        if sb is not None:
            occd = (sb.occupation > OCCUPIED_CM2) & (sb.occupation > OCCUPIED_FRACTION * max(tot, 1e-300))
            summary[f"{band}_occupied_subbands"] = int(np.sum(occd))
        else:
            summary[f"{band}_occupied_subbands"] = 0
    for name in coupling.VALLEYS:
        if name in valley_sheets:
            summary[f"{name}_sheet_density_cm2"] = valley_sheets[name]
    e = subbands.get("electron")
    summary["E1_minus_E0_eV"] = (float(e.energy[1] - e.energy[0]) if e is not None and e.energy.size > 1
                                 else float("nan"))
    summary["E0_minus_EF_eV"] = float(e.energy[0]) if e is not None and e.energy.size else float("nan")

    record = {
        "residual": np.array([h.residual for h in loop.iterations]),
        "charge_residual": np.array([h.charge_residual for h in loop.iterations]),
        "newton_steps": np.array([h.newton_steps for h in loop.iterations], dtype=np.int64),
        "seconds": np.array([h.seconds for h in loop.iterations]),
        "damping": np.array([h.damping for h in loop.iterations]),
    }
    text = deck.text
    provenance = dict(_versions())
    provenance["deck_hash"] = hashlib.sha256(text.encode()).hexdigest()
    provenance["wall_time_s"] = float(wall_time)
    provenance["created"] = datetime.now(timezone.utc).strftime("%Y-%m-%dT%H:%M:%SZ")

    result = Result(
        title=deck.title, temperature=float(deck.temperature), converged=bool(loop.converged),
        iterations=len(loop.iterations), residual=summary["residual_V"], message=loop.message,
        deck_text=text, z=st.z.copy(), profile=profile, layer_index=st.layer_index.astype(np.int64),
        layers=layers, subbands=subbands, residual_history=record["residual"].copy(),
        summary=summary, warnings=[], provenance=provenance, record=record,
        regions_nm=[tuple(map(float, r)) for r in st.regions_nm])
    try:
        from selfcon.output.diagnostics import design_warnings
    except ImportError:
        design_warnings = None
    if design_warnings is not None:
        result.warnings = list(design_warnings(result, st))
    elif not loop.converged:
        result.warnings = [loop.message]
    result.summary["warnings"] = list(result.warnings)
    return result
