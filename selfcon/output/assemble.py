"""Loop outcome -> Result: profiles in output units, subbands, per-layer charge, summary.

Band-edge profiles take each node's value from the cell to its right (the
layer of /profile/layer_index), so a band offset shows as a step at the
interface node; densities are dual-cell averages (the finite-volume values),
so that sum(n * w) is exactly the sheet density.
"""
from __future__ import annotations

import hashlib
from functools import lru_cache
from importlib import metadata

import numpy as np

from selfcon.constants import C_M2_PER_NM2, CM2_PER_NM2, CM3_PER_NM3, NM_PER_CM, Q_EPS0
from selfcon.output import channels as chx
from selfcon.output.channels import OCCUPIED_CM2, OCCUPIED_FRACTION  # noqa: F401  (the one rule)
from selfcon.output.diagnostics import design_warnings
from selfcon.output.heading import OVERRIDES_KEY, override_notes
from selfcon.output.result import Result, Subbands, utc_now
from selfcon.output.sanity import sanity_failures
from selfcon.solver.control import MESSAGES, Status
from selfcon.output import schema
from selfcon.output.schema import BANDS
from selfcon.solver.poisson import electric_field, gradient_coefficients


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
    with each half cell's own edge, at the electrons' Fermi level (the Poisson kernel's model)."""
    from selfcon.solver.statistics import fermi_half
    m = st.mesh
    efn = st.fermi_levels[0]
    left = np.zeros(m.n)
    right = np.zeros(m.n)
    f_left = fermi_half((phi[1:] - edge_cell + efn) / st.kT)       # cell i at node i + 1
    # cell i at node i: where cell i has the edge of cell i - 1 (inside a uniform layer) its
    # argument is the one of cell i - 1 at node i, so is its value; F_1/2 is evaluated anew
    # only where the edge changes (half the evaluations, the same numbers)
    f_right = np.empty(edge_cell.size)
    new = np.ones(edge_cell.size, dtype=bool)
    new[1:] = edge_cell[1:] != edge_cell[:-1]
    f_right[1:] = f_left[:-1]
    f_right[new] = fermi_half((phi[:-1][new] - edge_cell[new] + efn) / st.kT)
    left[1:] = nc_cell * f_left
    right[:-1] = nc_cell * f_right
    return (m.wl * left + m.wr * right) / m.w


def electron_edge(st, phi, ec) -> np.ndarray:
    """The band edge of the electrons at the nodes (eV) for the channels and their figures:
    the Gamma edge ``ec``, or with physics.quantum_valleys the lowest edge of the counted
    electron bands (Gamma, X/Delta, L): the electrons of a Si well sit in its Delta valleys,
    2 eV below Gamma."""
    if not getattr(st, "quantum_valleys", False):
        return ec
    edges = [ec] if "electron" in st.carriers else []
    if "x_electron" in st.carriers:
        edges.append(right_cell_values(np.minimum(st.cell["ec_x2"], st.cell["ec_x4"])) - phi)
    if "l_electron" in st.carriers:
        edges.append(right_cell_values(st.cell["ec_l"]) - phi)
    return np.minimum.reduce(edges) if edges else ec


def valley_parts(st, phi, states) -> dict:
    """carrier name (x_electron, l_electron) -> (classical density, subband density) at the
    nodes (nm^-3) of each counted X/L carrier: the classical rows with the cells of its
    quantum valley sets emptied (selfcon.solver.steps.masked_valley_dos, the Poisson model)
    and the population of those sets' states (physics.quantum_valleys)."""
    from selfcon.solver import steps
    from selfcon.solver.statistics import subband_density
    out = {}
    rows = steps.valley_row_bands(st)
    r = 0
    for name in steps.VALLEYS:
        if name not in st.carriers:
            continue
        pairs = steps.valley_rows(st, name)
        nv = np.zeros(st.n_nodes)
        nq = np.zeros(st.n_nodes)
        for edge, dos in pairs:
            band = rows[r]
            bs = states.get(band) if band is not None else None
            if bs is not None:
                dos = np.where(steps.quantum_cells(bs.quantum_nodes), 0.0, dos)
                occ = subband_density(bs.energy, bs.dos, st.temperature, +1, st.fermi_levels[0])
                nq += np.asarray(bs.weight) @ occ
            nv += valley_density(st, phi, edge, dos)
            r += 1
        out[name] = (nv, nq)
    return out


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


@lru_cache(maxsize=256)
def deck_hash(text: str) -> str:
    """SHA-256 of a deck's text (hex), the provenance's ``deck_hash``: kept per text, since
    the solves of a sweep or a study point's retries hash the same text again."""
    return hashlib.sha256(text.encode()).hexdigest()


def solve_channels(deck, st, loop, n, p, n_valleys, ec, ev) -> chx.SolvedChannels:
    """Every band's states in every quantum region and the channels of a converged loop.

    n, p, n_valleys: node densities (nm^-3); ec, ev: band edges at the nodes (eV)."""
    qn_e = np.zeros(st.n_nodes, dtype=bool)
    qn_h = np.zeros(st.n_nodes, dtype=bool)
    from selfcon.solver.steps import VALLEY_CARRIER
    for band, bs in loop.states.items():
        if band == "electron" or band in VALLEY_CARRIER:     # Gamma and the X/L valley sets
            qn_e |= bs.quantum_nodes
        else:
            qn_h |= bs.quantum_nodes
    classical_n = np.where(qn_e, n_valleys, n)
    classical_p = np.where(qn_h, 0.0, p)
    return chx.from_structure(st, loop.phi, loop.states, n=n * CM3_PER_NM3, p=p * CM3_PER_NM3,
                              classical_n=classical_n * CM3_PER_NM3, classical_p=classical_p * CM3_PER_NM3,
                              edges={"electron": ec, "hole": ev}, requests=chx.requests_of(deck, st))


def hole_kp_datasets(st, loop) -> dict:
    """The /subbands/hole_kp variables (selfcon/output/schema.py, KP_GROUP) of a solve with the
    multiband holes, in output units; {} for the parabolic model.  The loop's axial dispersion
    and its k grid, each state's masses, Fermi wave vector and spin splitting at EF
    (selfcon.solver.kp.subband_figures), and the dispersion along [100] and [110] with the
    warped Hamiltonian at the final potential."""
    from selfcon.solver import kp, steps
    hk = loop.states.get(steps.KP_BAND)
    if hk is None:
        return {}
    phi = np.asarray(loop.phi, dtype=float)
    vxc = loop.workspace.vxc.get("heavy_hole") if loop.workspace is not None else None
    if vxc is not None:                 # the potential the hole states saw (steps.kp_states)
        phi = phi + vxc
    shared: dict = {}                   # the two lines share their zone-centre states
    out = {"energy": hk.subband_energy.copy(), "occupation": hk.sheet * CM2_PER_NM2,
           "region": hk.subband_region.astype(np.int64), "k_parallel": hk.k_parallel.copy(),
           "dispersion": hk.dispersion.copy(),
           "dispersion_100": kp.along_direction(st.mesh, st.cell, st.regions, phi, hk, 0.0, shared),
           "dispersion_110": kp.along_direction(st.mesh, st.cell, st.regions, phi, hk, np.pi / 4,
                                                shared),
           "wavefunction": np.abs(hk.psi0).transpose(0, 2, 1).copy()}
    out.update(kp.subband_figures(hk.k_parallel, hk.dispersion, st.fermi_levels[1]))
    return out


def main_channel_summary(an, st, n, p, ec, ev) -> dict:
    """The /summary figures of the main channel (kept names of earlier versions)."""
    c = an.main_channel
    nan = float("nan")
    if c is None:
        return {"main_channel": "", "channel_layer": "", "channel_electron_sheet_density_cm2": 0.0,
                "channel_hole_sheet_density_cm2": 0.0, "ef_minus_ec_channel_eV": nan,
                "ev_minus_ef_channel_eV": nan, "E1_minus_E0_eV": nan, "E0_minus_EF_eV": nan}
    sl = slice(c.i0, c.i1 + 1)
    w = st.mesh.w
    inside_n = float(np.dot(w[sl], n[sl])) * CM2_PER_NM2
    inside_p = float(np.dot(w[sl], p[sl])) * CM2_PER_NM2
    return {
        "main_channel": c.name,
        "channel_layer": c.layer,
        "channel_electron_sheet_density_cm2": c.sheet_density if c.carrier == "electron" else inside_n,
        "channel_hole_sheet_density_cm2": c.sheet_density if c.carrier == "hole" else inside_p,
        "ef_minus_ec_channel_eV": float(st.fermi_levels[0] - ec[sl].min()),
        "ev_minus_ef_channel_eV": float(ev[sl].max() - st.fermi_levels[1]),
        "E1_minus_E0_eV": float(c.spacing),
        "E0_minus_EF_eV": float(c.ground_energy),
    }


def channel_summary(an) -> dict:
    """Per-channel /summary figures: ``channel.NAME.<figure>`` for every channel."""
    out = {}
    for c in an.channels:
        out[f"channel.{c.name}.sheet_density_cm2"] = float(c.sheet_density)
        out[f"channel.{c.name}.E1_minus_E0_eV"] = float(c.spacing)
        out[f"channel.{c.name}.ground_energy_eV"] = float(c.ground_energy)
        out[f"channel.{c.name}.occupied_subbands"] = int(c.occupied_subbands)
    return out


def interface_columns(st) -> dict:
    """The /interfaces columns of a structure: every layer interface, top first, with its
    depth and bound polarization sheet (cm^-2 and C/m^2) and the two layers' names.  Made
    once per structure (model.structure.derived); each call returns its own copies."""
    from selfcon.model.structure import derived
    made = derived(st, "interface_columns", lambda: _interface_columns(st))
    return {k: v.copy() for k, v in made.items()}


def _interface_columns(st) -> dict:
    rows = st.interfaces()
    sigma = np.array([r["sigma_nm2"] for r in rows], dtype=float)
    return {"depth_nm": np.array([r["z_nm"] for r in rows], dtype=float),
            "sigma_cm2": sigma * CM2_PER_NM2,
            "sigma_C_m2": sigma * C_M2_PER_NM2,
            "upper": np.array([st.layers[r["upper"]].name for r in rows], dtype=object),
            "lower": np.array([st.layers[r["lower"]].name for r in rows], dtype=object)}


def _static_layer_rows(st) -> tuple:
    """The /layers columns of each layer that depend on the structure alone, in the column
    order of the rows (the sheet densities are placeholders the solve fills in); made once
    per structure (model.structure.derived) and copied for each result."""
    from selfcon.model.structure import derived

    def make():
        strain_rows = {L.index: L for L in st.strain.layers} if st.strain is not None else {}
        rows = []
        for Li in st.layers:
            ls = strain_rows.get(Li.index)
            rows.append({
                "name": Li.name, "material": Li.material,
                "x_top": float("nan") if Li.x_top is None else float(Li.x_top),
                "x_bottom": float("nan") if Li.x_top is None else
                float(Li.x_bottom if Li.x_bottom is not None else Li.x_top),
                "top_nm": Li.top, "bottom_nm": Li.bottom,
                "electron_sheet_density_cm2": 0.0,
                "hole_sheet_density_cm2": 0.0,
                "ionized_donor_sheet_density_cm2": 0.0,
                "ionized_acceptor_sheet_density_cm2": 0.0,
                "y_top": float("nan") if Li.y_top is None else float(Li.y_top),
                "y_bottom": float("nan") if Li.y_top is None else
                float(Li.y_bottom if Li.y_bottom is not None else Li.y_top),
                "relaxed": bool(Li.relaxed),
                "strain_xx": float("nan") if ls is None else ls.eps_xx,
                "strain_zz": float("nan") if ls is None else ls.eps_zz,
                "lattice_inplane_nm": float("nan") if ls is None else ls.lattice_inplane,
                "lattice_own_nm": float("nan") if ls is None else ls.lattice_own,
                "critical_thickness_nm": float("nan") if ls is None else ls.critical_thickness,
            })
        return tuple(rows)
    return derived(st, "layer_rows", make)


def _field_coefficients(st):
    """selfcon.solver.poisson.gradient_coefficients of the structure's nodes, made once per
    structure (model.structure.derived; read-only)."""
    from selfcon.model.structure import derived

    def make():
        coef = gradient_coefficients(st.z)
        for a in (coef[0] if len(coef) > 1 else ()):
            a.setflags(write=False)
        return coef
    return derived(st, "field_coefficients", make)


def build_result(deck, st, loop, *, wall_time: float) -> Result:
    """The Result of one solve: ``deck`` (the Deck solved), ``st`` (its Structure), ``loop``
    (the :class:`selfcon.solver.loop.LoopOutcome`, whose workspace holds the densities of
    the final potential), ``wall_time`` (s) of the whole solve."""
    from selfcon.solver import steps
    phi = loop.phi
    ws = loop.workspace
    n, p, ndp, nam = steps.densities(ws, phi, loop.states)
    ec = right_cell_values(st.cell["ec_gamma"]) - phi
    ev = right_cell_values(st.cell["ev0"]) - phi
    ec_ch = electron_edge(st, phi, ec)          # the edge the channels of electrons follow
    profile = {
        "conduction_band": ec,
        "conduction_band_x": right_cell_values(st.cell["ec_x"]) - phi,
        "conduction_band_l": right_cell_values(st.cell["ec_l"]) - phi,
        "valence_band": ev,
        "heavy_hole_band": right_cell_values(st.cell["ev_hh"]) - phi,
        "light_hole_band": right_cell_values(st.cell["ev_lh"]) - phi,
        "strain_xx": right_cell_values(st.cell["eps_xx"]),
        "strain_zz": right_cell_values(st.cell["eps_zz"]),
        "potential": phi.copy(),
        # the one field rule (selfcon.solver.poisson), its weights once per structure
        "electric_field": electric_field(st.z, phi, _field_coefficients(st)),
        "electron_density": n * CM3_PER_NM3,
        "hole_density": p * CM3_PER_NM3,
        "ionized_donors": ndp * CM3_PER_NM3,
        "ionized_acceptors": nam * CM3_PER_NM3,
        # wurtzite polarization and its bound sheets (selfcon.model.polarization; 0 otherwise)
        "polarization": right_cell_values(st.cell["polarization"]),
        "bound_charge": st.fixed_charge * CM3_PER_NM3,
    }
    if st.exchange_correlation != "none":       # the V_xc the final states saw (selfcon.solver.exchange)
        profile["exchange_correlation"] = np.array(ws.vxc.get("electron", np.zeros(st.n_nodes)))
        if "heavy_hole" in ws.vxc:
            profile["exchange_correlation_hole"] = np.array(ws.vxc["heavy_hole"])
    for key in schema.MATERIAL_PROFILES:        # material parameters the schema asks to report
        profile[key] = right_cell_values(st.cell[key])

    valley_sheets = {}
    n_valleys = np.zeros(st.n_nodes)          # the classical part of the X/L electrons
    for name, (nv, nq) in valley_parts(st, phi, loop.states).items():
        n_valleys += nv
        profile[name + "_density"] = (nv + nq) * CM3_PER_NM3
        valley_sheets[name] = float(((nv + nq) * st.mesh.w).sum()) * CM2_PER_NM2

    # every band in every quantum region, and the channels (selfcon.output.channels); the
    # classical carriers are those at nodes the loop kept classical, plus the X/L valleys
    solved = solve_channels(deck, st, loop, n, p, n_valleys, ec_ch, ev)
    an = solved.analysis
    subbands = {}
    for band in BANDS:
        bs = solved.spectrum.get(band)
        if bs is None:
            continue
        # the spectrum's, the occupations' and the attribution's arrays are made for this
        # result alone (selfcon.solver.spectrum.full_spectrum: fresh arrays, never the loop's
        # own; chx.from_structure and analyse likewise): the result takes them as they are
        subbands[band] = Subbands(energy=bs.energy, occupation=solved.occupation[band],
                                  wavefunction=bs.psi, in_plane_mass=bs.m_par,
                                  region=bs.region.astype(np.int64), degeneracy=bs.degeneracy,
                                  channel=an.attribution[band], bound=bs.bound)

    e_layer = per_layer(st, n) * CM2_PER_NM2
    h_layer = per_layer(st, p) * CM2_PER_NM2
    d_layer = per_layer(st, ndp) * CM2_PER_NM2
    a_layer = per_layer(st, nam) * CM2_PER_NM2
    layers = []
    for Li, static in zip(st.layers, _static_layer_rows(st)):     # the structure's columns, made once
        row = dict(static)
        row["electron_sheet_density_cm2"] = float(e_layer[Li.index])
        row["hole_sheet_density_cm2"] = float(h_layer[Li.index])
        row["ionized_donor_sheet_density_cm2"] = float(d_layer[Li.index])
        row["ionized_acceptor_sheet_density_cm2"] = float(a_layer[Li.index])
        layers.append(row)

    w = st.mesh.w
    ns = float((n * w).sum()) * CM2_PER_NM2
    violation, scale = steps.gauss_balance(ws, phi, loop.states, rho=p - n + ndp - nam + st.fixed_charge)
    ps = float((p * w).sum()) * CM2_PER_NM2
    summary = {
        "electron_sheet_density_cm2": ns,
        "hole_sheet_density_cm2": ps,
        "donor_sheet_density_cm2": float((ndp * w).sum()) * CM2_PER_NM2,
        "acceptor_sheet_density_cm2": float((nam * w).sum()) * CM2_PER_NM2,
        "gauss_residual": float(violation / scale),
        # the violation itself, as a sheet charge (the sanity check weighs it against the
        # potential's precision, selfcon/output/sanity.py)
        "gauss_violation_cm2": float(violation / Q_EPS0 * CM2_PER_NM2),
        # each carrier's own Fermi level (the gate's for the minority carrier under a schottky
        # surface); every energy in the file is relative to the contacted carrier's, 0 eV
        "electron_fermi_level_eV": float(st.fermi_levels[0]),
        "hole_fermi_level_eV": float(st.fermi_levels[1]),
        "contacted_carrier": st.contacted,
        **main_channel_summary(an, st, n, p, ec_ch, ev),
        "converged": bool(loop.converged),
        "status": int(loop.status),
        "iterations": len(loop.iterations),
        "residual_V": float(loop.iterations[-1].residual) if loop.iterations else float("nan"),
        "method": loop.method,
        "strain": st.strain.reference if st.strain is not None else "unstrained",
        "nodes": int(st.n_nodes),
        "wall_time_s": float(wall_time),
    }
    rows = [dict(c.as_row(), main=(j == an.main)) for j, c in enumerate(an.channels)]
    references: dict = {}            # occupied_states' references of each carrier kind, made once
    for band in BANDS:
        sb = subbands.get(band)
        if sb is None and band in schema.VALLEY_BANDS:
            continue                 # written only with physics.quantum_valleys
        for k in range(3):
            summary[f"{band}_E{k}_eV"] = float(sb.energy[k]) if sb is not None and sb.energy.size > k else float("nan")
        summary[f"{band}_occupied_subbands"] = (int(chx.occupied_states(band, subbands, rows, references).sum())
                                                if sb is not None else 0)
    for name in steps.VALLEYS:
        if name in valley_sheets:
            summary[f"{name}_sheet_density_cm2"] = valley_sheets[name]
    summary.update(channel_summary(an))

    record = {
        "residual": np.array([h.residual for h in loop.iterations]),
        "charge_residual": np.array([h.charge_residual for h in loop.iterations]),
        "newton_steps": np.array([h.newton_steps for h in loop.iterations], dtype=np.int64),
        "seconds": np.array([h.seconds for h in loop.iterations]),
        "damping": np.array([h.damping for h in loop.iterations]),
    }
    text = deck.text
    provenance = dict(_versions())
    provenance["deck_hash"] = deck_hash(text)
    provenance["wall_time_s"] = float(wall_time)
    provenance["created"] = utc_now()
    notes = override_notes(deck)
    if notes:                      # what --set (or a study) changed, for every heading
        provenance[OVERRIDES_KEY] = notes

    result = Result(
        interfaces=interface_columns(st),
        title=deck.title, temperature=float(deck.temperature), converged=bool(loop.converged),
        iterations=len(loop.iterations), residual=summary["residual_V"], message=loop.message,
        deck_text=text, z=st.z.copy(), profile=profile, layer_index=st.layer_index.astype(np.int64),
        layers=layers, subbands=subbands, residual_history=record["residual"].copy(),
        summary=summary, warnings=[], provenance=provenance, record=record,
        regions_nm=[tuple(map(float, r)) for r in st.regions_nm], channels=rows,
        transitions=solved.transitions, hole_kp=hole_kp_datasets(st, loop))
    if result.hole_kp:             # each multiband state's channel, as /subbands/<band>/channel
        result.hole_kp["channel"] = np.asarray(an.attribution.get(
            "hole_kp", np.full(result.hole_kp["energy"].size, -1)), dtype=np.int64).copy()
    result.warnings = list(design_warnings(result, st, deck))
    result.summary["warnings"] = list(result.warnings)
    if result.converged:
        failures = sanity_failures(result, st, deck)
        if failures:        # never call garbage converged (selfcon/output/sanity.py)
            result.converged = False
            result.summary["converged"] = False
            result.summary["status"] = int(Status.UNPHYSICAL)
            result.message = MESSAGES[Status.UNPHYSICAL].format(
                iterations=len(loop.iterations), detail="; ".join(failures))
    return result
