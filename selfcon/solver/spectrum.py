"""Every band's states in every quantum region at one potential: the spectrum a result reports.

The self-consistent loop (selfcon.solver.steps.solve_states) solves only what the charge
needs: it leaves out the bands ``physics.carriers`` does not list, and a band whose
classical charge in a region is negligible stays classical there.  A designer still
wants e1, hh1 and lh1 of an undoped well.  :func:`full_spectrum` therefore, after
convergence and without touching what the loop iterates on,

* keeps the loop's own states wherever the loop solved a band in a region (they carry
  the self-consistent charge, unbound box states included), marked ``populated``;
* solves every other (band, region) pair at the final potential, up to ``quantum.states``
  states, keeps only the *bound* ones and gives them zero occupation (a Sturm count below
  the lower region-end edge decides how many to solve; none costs no eigensolve).

A state is bound when its energy lies below the band edge (in the band's own kinetic
sense: above Ev for holes) at both ends of its quantum region; ``bound`` flags it for
every state, the loop's included.

Units: nm, eV (electron energy scale, EF = 0), masses in m0.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from selfcon.constants import DOS2D_PER_M0
from selfcon.solver.steps import region_states  # noqa: F401  (the loop's region solve, re-exported)

__all__ = ["BandSpectrum", "full_spectrum", "region_states", "region_edges", "bound_mask"]


@dataclass
class BandSpectrum:
    """States of one band in all quantum regions, lowest kinetic energy first."""

    band: str
    energy: np.ndarray        # (k,) eV, electron energy scale
    psi: np.ndarray           # (N, k) nm^-1/2, zero outside its region
    m_par: np.ndarray         # (k,) m0
    dos: np.ndarray           # (k,) nm^-2 eV^-1 (valley degeneracy and spin included)
    region: np.ndarray        # (k,) int
    degeneracy: np.ndarray    # (k,)
    sign: int                 # +1 electrons, -1 holes
    populated: np.ndarray     # (k,) bool: solved by the loop (its occupation is the charge)
    bound: np.ndarray         # (k,) bool: below the band edge at both region ends


def _specs():
    from selfcon.solver.steps import ALL_BANDS
    return ALL_BANDS


def region_edges(st, phi, band: str, r_idx: int) -> tuple[float, float]:
    """Band edge with electrostatics (eV, electron scale) just inside both ends of a region."""
    edge_key = _specs()[band][0]
    i0, i1 = st.regions[r_idx]
    cell = st.cell[edge_key]
    return float(cell[i0] - phi[i0]), float(cell[i1 - 1] - phi[i1])


def bound_mask(st, phi, band: str, energy, region) -> np.ndarray:
    """True for the states below the band edge at both ends of their region (holes: above Ev)."""
    sign = _specs()[band][3]
    energy = np.asarray(energy, dtype=float)
    region = np.asarray(region, dtype=np.int64)
    if energy.size == 0:
        return np.zeros(0, dtype=bool)
    # region_edges of every region at once (the same differences, one array operation)
    ends = np.asarray(st.regions, dtype=np.int64).reshape(-1, 2)
    cell = st.cell[_specs()[band][0]]
    phi = np.asarray(phi, dtype=float)
    top = cell[ends[:, 0]] - phi[ends[:, 0]]
    bottom = cell[ends[:, 1] - 1] - phi[ends[:, 1]]
    e = sign * energy
    return (e < sign * top[region]) & (e < sign * bottom[region])


def full_spectrum(st, phi, loop_states: dict, n_states: int | None = None) -> dict[str, BandSpectrum]:
    """Every band the structure solves (selfcon.solver.steps.bands_of: BAND_SPECS, and the
    quantum valley sets of the counted X/L carriers) in every quantum region (see the module
    docstring).

    ``loop_states``: the loop's ``{band: BandStates}`` at ``phi``; ``n_states``: states per
    band and region for the pairs the loop did not solve (default ``st.states``).
    Bands with no state anywhere are left out.  Each band's wavefunctions are a fresh
    C-ordered (N, k) array, never the loop's own: the overlaps of /transitions (a BLAS
    product) round alike only on arrays laid out alike.
    """
    k_extra = int(st.states if n_states is None else n_states)
    out = {}
    from selfcon.solver.steps import bands_of, state_degeneracy
    phi = np.asarray(phi, dtype=float)
    multiband = getattr(st, "hole_model", "parabolic") != "parabolic"
    for band, (_, _, _, sign, _) in bands_of(st).items():
        if sign < 0 and multiband:
            continue        # the multiband hole states replace the hole bands (/subbands/hole_kp)
        bs = loop_states.get(band)
        solved = set() if bs is None else set(np.asarray(bs.region).tolist())
        parts = []          # (energy, psi, m_par, region, populated, bound)
        if bs is not None and bs.energy.size:
            energy, region = np.asarray(bs.energy, float), np.asarray(bs.region, np.int64)
            parts.append((energy, np.asarray(bs.psi, float), np.asarray(bs.m_par, float), region,
                          np.ones(energy.size, dtype=bool), bound_mask(st, phi, band, energy, region)))
        for r_idx in range(len(st.regions)):
            if r_idx in solved:
                continue
            # bound states only: none below the lower region-end edge costs no eigensolve
            top, bottom = region_edges(st, phi, band, r_idx)
            below = min(sign * top, sign * bottom)
            e, psi, m_par = region_states(st, phi, band, r_idx, k_extra, below=below)
            if e.size == 0:
                continue
            # bound_mask of these states (their region's two end edges, as scalars)
            kinetic = sign * e
            keep = (kinetic < sign * top) & (kinetic < sign * bottom)
            count = int(keep.sum())
            if count == 0:
                continue
            if count < e.size:
                e, psi, m_par = e[keep], psi[:, keep], m_par[keep]
            parts.append((e, psi, m_par, np.full(count, r_idx, np.int64),
                          np.zeros(count, dtype=bool), np.ones(count, dtype=bool)))
        if not parts:
            continue
        if len(parts) == 1:
            energy, psi, m_par, region, populated, bound = parts[0]
            kinetic = energy if sign > 0 else -energy
            if energy.size < 2 or bool((kinetic[1:] >= kinetic[:-1]).all()):
                # one part, already in order (the stable argsort would be the identity): one
                # fresh C-ordered (N, k) copy of the wavefunctions; a part of extra states is
                # fresh already (region_states made its arrays for this call alone)
                if bool(populated[0]) or not psi.flags.c_contiguous:
                    psi = np.array(psi, dtype=float, order="C")
                    energy, m_par, region, bound = energy.copy(), m_par.copy(), region.copy(), bound.copy()
            else:
                order = np.argsort(sign * energy, kind="stable")
                energy, psi, m_par = energy[order], np.take(psi, order, axis=1), m_par[order]
                region, populated, bound = region[order], populated[order], bound[order]
        else:
            energy = np.concatenate([p[0] for p in parts])
            order = np.argsort(sign * energy, kind="stable")
            energy = energy[order]
            psi = np.take(np.concatenate([p[1] for p in parts], axis=1), order, axis=1)
            m_par, region, populated, bound = (np.concatenate([p[j] for p in parts])[order]
                                               for j in (2, 3, 4, 5))
        deg = state_degeneracy(st, band, psi)
        out[band] = BandSpectrum(band=band, energy=energy, psi=psi, m_par=m_par,
                                 dos=deg * DOS2D_PER_M0 * m_par, region=region, degeneracy=deg,
                                 sign=sign, populated=populated, bound=bound)
    return out
