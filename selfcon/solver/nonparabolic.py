"""Conduction-band non-parabolicity of Γ electrons (physics.nonparabolicity).

The form is the energy-dependent effective mass of Nelson, Miller and Kleinman, Phys. Rev. B
35, 7770 (1987):

    m*(E, z) = m*_edge(z) [1 + (E - E_c(z)) / E_g,eff(z)],

E_c(z) the local band edge the electron sees (with electrostatics and, with LDA, V_xc), in
the BenDaniel–Duke equation with psi and psi'/m*(E, z) continuous.  E_g,eff is the
effective gap of the three-band Kane model (gap E_g, spin-orbit splitting Delta) to first
order in E - E_c: from m0/m* ~ (E_P/3) [2/(E_g + E) + 1/(E_g + Delta + E)],

    E_g,eff = E_g (E_g + Delta)(3 E_g + 2 Delta) / (3 E_g^2 + 4 E_g Delta + 2 Delta^2)

(the two-band value E_g when Delta = 0; GaAs 1.60 eV, In0.53Ga0.47As 0.88 eV at 4 K).

**Energies.**  Each state k solves E = lambda_k(E), lambda_k(E) the k-th eigenvalue of the
Hamiltonian with the masses m*(E, z).  The iteration on E is Newton's on
g(E) = lambda_k(E) - E, with d lambda_k/dE from the state itself (Hellmann–Feynman,
:func:`energy_slope`).  As the mass grows with energy, d lambda_k/dE <= 0 (Hellmann–
Feynman), so |g'| >= 1 and |E - E*| <= |g(E)|: the iteration stops when |g(E)| is below
``ENERGY_TOL``, and the energy returned, lambda_k(E) with its eigenvector, is within
2 ``ENERGY_TOL`` of the exact root of the discrete problem.  States closer than
``CLUSTER_TOL`` (degenerate wells, tunnel-split doublets) are then solved together at their
mean energy, so that their eigenvectors are orthogonal (within 2 ``ENERGY_TOL`` +
``CLUSTER_TOL``).

**In-plane motion.**  The same mass carries the in-plane kinetic energy, hbar^2 k^2 / 2m*(E, z).
To first order in k^2 at E = E_k (the derivative of E = lambda_k(E) + hbar^2 k^2 <1/m*>/2
with respect to k^2), the in-plane mass at the subband bottom is

    m_par,k = (1 - d lambda_k/dE) / <1/m*_par(E_k, z)>,

and the in-plane mass grows with the in-plane kinetic energy e as
m_par,k(1 + gamma_k e), gamma_k = <1/(E_g,eff + E_k - E_c(z))> (the energy derivative of
ln m*, averaged over |psi_k|^2), so the 2D density of states rises as
D(E) = g m_par,k/(pi hbar^2) [1 + 2 gamma_k (E - E_k)].  The subband then holds
D_k kT ln(1 + e^x) [1 + 2 gamma_k <e>], x = (E_F - E_k)/kT, <e> the mean in-plane kinetic
energy of its carriers (kT F_1(x)/F_0(x), Fermi–Dirac integrals): the loop's subband
density takes the density-of-states mass m_par,k (1 + 2 gamma_k <e>), which is the
``in_plane_mass`` the result reports for a nonparabolic band.  The wavefunctions are
normalised to sum w psi^2 = 1 (common practice; the norm correction of an energy-dependent
Hamiltonian, of the order of d lambda/dE, is left out of the density).
"""
from __future__ import annotations

import numpy as np

from selfcon.constants import HBAR2_2M0

#: eV: |lambda_k(E) - E| below this ends the energy iteration of a state (error <= 2x this)
ENERGY_TOL = 5e-8
#: eV: states whose energies differ by less than this are solved together at their mean
#: energy (so that degenerate states stay orthogonal); their error bound is 2 ENERGY_TOL +
#: CLUSTER_TOL
CLUSTER_TOL = 1e-7
#: energy iterations of one state before the solve is declared failed
MAX_ENERGY_ITERATIONS = 60
#: the factor 1 + (E - E_c)/E_g,eff is kept above this (deep under a high barrier the linear
#: form would turn the mass negative; a state's own well never gets near it)
MIN_MASS_FACTOR = 0.05

__all__ = ["ENERGY_TOL", "CLUSTER_TOL", "effective_gap", "mass_factor", "refine_states", "energy_slope",
           "mean_in_plane_energy", "in_plane_masses"]


def effective_gap(eg, delta_so):
    """E_g,eff (eV) of the three-band Kane mass to first order in energy (module docstring)."""
    eg = np.asarray(eg, dtype=float)
    d = np.asarray(delta_so, dtype=float)
    return eg * (eg + d) * (3 * eg + 2 * d) / (3 * eg * eg + 4 * eg * d + 2 * d * d)


def mass_factor(energy, edge_cell, eg_eff_cell):
    """1 + (E - E_c)/E_g,eff per cell (kept above MIN_MASS_FACTOR)."""
    return np.maximum(1.0 + (energy - edge_cell) / eg_eff_cell, MIN_MASS_FACTOR)


def _inverse_mass_slope(energy, m_edge_cell, edge_cell, eg_eff_cell):
    """d(1/m*)/dE per cell (0 where the factor is clamped)."""
    f = 1.0 + (energy - edge_cell) / eg_eff_cell
    return np.where(f > MIN_MASS_FACTOR, -1.0 / (m_edge_cell * eg_eff_cell * f * f), 0.0)


def energy_slope(h_cell, psi, energy, m_edge_cell, edge_cell, eg_eff_cell) -> float:
    """d lambda/dE = <psi| dH/dE |psi> of the discrete operator (Hellmann–Feynman):
    sum over cells of HBAR2_2M0 d(1/m*)/dE (psi_{c+1} - psi_c)^2 / h_c (<= 0)."""
    dpsi = np.diff(psi)
    return float(np.sum(HBAR2_2M0 * _inverse_mass_slope(energy, m_edge_cell, edge_cell, eg_eff_cell)
                        * dpsi * dpsi / h_cell))


def refine_states(h_cell, w, v_node, m_edge_cell, edge_cell, eg_eff_cell, energies, workspace=None,
                  tol: float = ENERGY_TOL, psi=None):
    """The nonparabolic states of one region from the parabolic energies ``energies`` (k,):
    (energies (k,) eV, psi (n, k), d lambda/dE (k,)).  Arrays as for
    selfcon.solver.schrodinger.solve_region; ``edge_cell`` the cells' band edge (eV) the
    electron sees, ``m_edge_cell`` its band-edge mass (m0), ``eg_eff_cell`` E_g,eff (eV);
    ``psi`` (n, k) the parabolic states, the start of each state's first solve.  Each solve
    after a state's first starts from that state's last wavefunction (Rayleigh-quotient
    iteration, selfcon.solver.schrodinger.refine_region_state; bisection if it strays)."""
    from selfcon.solver.schrodinger import refine_region_state, solve_region_state
    n = w.size
    k = len(energies)
    out_e = np.empty(k)
    out_psi = np.empty((n, k))
    out_slope = np.empty(k)

    def lam(j, e, guess=None):
        inv_m = 1.0 / (m_edge_cell * mass_factor(e, edge_cell, eg_eff_cell))
        if guess is not None:        # the state at the last energy: a few O(n) steps from it
            got = refine_region_state(h_cell, w, v_node, inv_m, j, guess, workspace)
            if got is not None:
                return got
        return solve_region_state(h_cell, w, v_node, inv_m, j, workspace)

    for j in range(k):
        e = float(energies[j])
        lam_e, state = lam(j, e, None if psi is None else psi[:, j])
        g = lam_e - e
        slope = energy_slope(h_cell, state, lam_e, m_edge_cell, edge_cell, eg_eff_cell)
        it = 0
        while abs(g) >= tol:
            it += 1
            if it > MAX_ENERGY_ITERATIONS:
                raise RuntimeError(f"nonparabolic energy iteration of state {j} did not converge "
                                   f"(|lambda(E) - E| = {abs(g):.2e} eV after {it - 1} steps)")
            # Newton on g(E) = lambda(E) - E with g' = d lambda/dE - 1 <= -1 (Hellmann-Feynman)
            e = e - g / (min(slope, 0.0) - 1.0)
            lam_e, state = lam(j, e, state)
            g = lam_e - e
            slope = energy_slope(h_cell, state, lam_e, m_edge_cell, edge_cell, eg_eff_cell)
        out_e[j] = lam_e
        out_psi[:, j] = state
        out_slope[j] = slope
    # states closer than CLUSTER_TOL (degenerate wells far apart, tunnel-split doublets): each
    # solved alone, inverse iteration may return the same vector twice; solve each cluster
    # together at its mean energy so that its states come out orthogonal
    j = 0
    while j < k:
        last = j
        while last + 1 < k and out_e[last + 1] - out_e[last] < CLUSTER_TOL:
            last += 1
        if last > j:
            from selfcon.solver.schrodinger import solve_region_window
            e_mean = float(np.mean(out_e[j:last + 1]))
            inv_m = 1.0 / (m_edge_cell * mass_factor(e_mean, edge_cell, eg_eff_cell))
            e_c, psi_c = solve_region_window(h_cell, w, v_node, inv_m, j, last - j + 1, workspace)
            out_e[j:last + 1] = e_c
            out_psi[:, j:last + 1] = psi_c
            for i in range(j, last + 1):
                out_slope[i] = energy_slope(h_cell, out_psi[:, i], out_e[i], m_edge_cell,
                                            edge_cell, eg_eff_cell)
        j = last + 1
    return out_e, out_psi, out_slope


def mean_in_plane_energy(x):
    """<e>/kT of a 2D subband's carriers at x = (E_F - E_k)/kT: F_1(x)/F_0(x), with
    F_0 = ln(1 + e^x) and F_1 = -Li2(-e^x) (scipy.special.spence: Li2(z) = spence(1 - z))."""
    from scipy.special import spence
    x = np.asarray(x, dtype=float)
    f0 = np.logaddexp(0.0, x)
    pos = x > 0
    xp = np.where(pos, x, 0.0)
    xn = np.where(pos, 0.0, x)
    # x > 0: -Li2(-e^x) = x^2/2 + pi^2/6 + Li2(-e^-x)
    f1 = np.where(pos, 0.5 * xp * xp + np.pi ** 2 / 6 + spence(1.0 + np.exp(-xp)),
                  -spence(1.0 + np.exp(xn)))
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(x < -30.0, 1.0, f1 / np.where(x < -30.0, 1.0, f0))   # -> 1 as x -> -inf


def in_plane_masses(psi, w, energies, slopes, m_par_node, edge_node, eg_eff_node, kT, fermi):
    """(density-of-states masses (k,) m0, masses at the subband bottoms (k,) m0) of
    nonparabolic states (module docstring).  Node arrays: the in-plane band-edge mass, the
    band edge the electron sees and E_g,eff; ``fermi`` the electrons' Fermi level (eV)."""
    psi = np.asarray(psi, dtype=float)
    p2 = psi * psi * np.asarray(w)[:, None]
    norm = np.sum(p2, axis=0)
    e = np.asarray(energies, dtype=float)
    f = 1.0 + (e[None, :] - edge_node[:, None]) / eg_eff_node[:, None]
    fc = np.maximum(f, MIN_MASS_FACTOR)
    inv_m = np.sum(p2 / (m_par_node[:, None] * fc), axis=0) / norm
    bottom = (1.0 - np.asarray(slopes, dtype=float)) / inv_m
    gamma = np.sum(p2 * np.where(f > MIN_MASS_FACTOR, 1.0 / (eg_eff_node[:, None] * fc), 0.0),
                   axis=0) / norm
    mean_e = kT * mean_in_plane_energy((fermi - e) / kT)
    return bottom * (1.0 + 2.0 * gamma * mean_e), bottom
