"""Dopant binding energies at high concentration: the impurity band merging with the band.

A shallow donor (acceptor) level of binding energy E_0 in dilute material moves towards
its band as the dopant density N grows (Pearson and Bardeen, Phys. Rev. 75, 865 (1949)):

    E(N) = E_0 (1 - (N / N_M)^(1/3))     for N < N_M,      E(N) = 0 above,

with N = N_d + N_a the total impurity density (donors and acceptors both screen and
overlap) and N_M the Mott density of the metal-insulator transition,

    N_M^(1/3) a_B* = 0.26     (Mott's criterion, N. F. Mott, Can. J. Phys. 34, 1356 (1956);
                               the constant 0.26 as found across many semiconductors by
                               Edwards and Sigel, Phys. Rev. B 17, 2575 (1978), from memory),

a_B* = a_0 eps_r / m* the effective Bohr radius of the impurity: the Γ mass m_e for donors,
the bulk valence density-of-states mass m_v for acceptors (a hydrogenic acceptor radius;
the real acceptor ground state is more compact, so N_M is then an upper estimate).  Above
N_M the dopants are fully ionised: binding 0, the impurity band has merged with the band.

A delta sheet of density s (cm^-2) has no volume density of its own; it is given the
volume density with the same mean spacing between impurities, N = s^(3/2) (an impurity
spacing s^(-1/2) in the plane is what the overlap of neighbouring impurity states, and so
Mott's criterion, measures), plus the volume doping of its host layer.  The choice makes
the binding of a sheet independent of the mesh and of the thickness of the layer that
holds it in the deck.

A binding energy of 0 means the dopant has no bound state (above N_M, or a material whose
dopant level is given as 0): such dopants are fully ionised.  The occupancy statistics get
this as a binding energy of -inf (:func:`statistics_binding`): the level infinitely far
above the band edge, never occupied, the exact limit of the Fermi-Dirac occupancy.
"""
from __future__ import annotations

import numpy as np

from selfcon.constants import BOHR_RADIUS_NM

#: Mott's criterion N_M^(1/3) a_B* = 0.26 (Mott 1956; Edwards and Sigel 1978, from memory)
MOTT_CONSTANT = 0.26


def bohr_radius(eps_r, mass_m0):
    """Effective Bohr radius a_B* = a_0 eps_r / m* in nm."""
    return BOHR_RADIUS_NM * np.asarray(eps_r, dtype=float) / np.asarray(mass_m0, dtype=float)


def mott_density(eps_r, mass_m0):
    """Mott density N_M = (0.26 / a_B*)^3 in nm^-3."""
    return (MOTT_CONSTANT / bohr_radius(eps_r, mass_m0)) ** 3


def binding_energy(e0, density, n_mott):
    """Pearson-Bardeen binding energy E_0 (1 - (N/N_M)^(1/3)), 0 for N >= N_M (eV).

    ``density`` and ``n_mott`` in the same unit; arrays broadcast."""
    ratio = np.cbrt(np.asarray(density, dtype=float) / np.asarray(n_mott, dtype=float))
    return np.asarray(e0, dtype=float) * np.clip(1.0 - ratio, 0.0, 1.0)


def sheet_equivalent_density(sheet):
    """Volume density (nm^-3) with the mean impurity spacing of a sheet of density
    ``sheet`` (nm^-2): N = s^(3/2)."""
    return np.asarray(sheet, dtype=float) ** 1.5


def statistics_binding(binding):
    """Binding energies as the ionisation statistics take them: 0 (no bound state: above
    the Mott density, fully ionised) becomes -inf, so the occupancy 1/(1 + g e^x) of the
    level is exactly 0; positive values pass unchanged."""
    b = np.asarray(binding, dtype=float)
    return np.where(b > 0.0, b, -np.inf)


# --------------------------------------------------------------------------- Si DX centres

#: depth of the Si DX level below the L conduction-band minimum (eV).  Chand, Henderson,
#: Klem, Masselink, Fischer, Chang and Morkoc, Phys. Rev. B 30, 4481 (1984) found the deep
#: donor of Si in Al_xGa_{1-x}As (x = 0 to 1) to follow the L minimum at a fixed depth of
#: about 0.15 eV (from memory).  It lies in the gap, below the Gamma edge, from x ~ 0.2 on
#: (the DX onset of Mooney, J. Appl. Phys. 67, R1 (1990)) and is resonant with the band,
#: above the Gamma edge, in GaAs.
DX_BELOW_L = 0.15

#: the statistics of the DX level: a one-electron deep level of spin degeneracy 2 (the
#: positive-U picture), occupied by Fermi-Dirac statistics like the shallow level,
#: N_DX+ = N_D / (1 + 2 exp((EF - E_DX)/kT)).  The negative-U picture (Chadi and Chang,
#: Phys. Rev. Lett. 61, 873 (1988)) is not modelled.
DX_MODEL = ("one-electron deep level (spin degeneracy 2) at E_L - 0.15 eV, after Chand et al., "
            "Phys. Rev. B 30, 4481 (1984)")


def dx_binding(ec_gamma, ec_l):
    """Binding energy (eV) of the Si DX level below the Gamma edge: Ec - E_DX with
    E_DX = E_L - DX_BELOW_L.  Negative where the level is resonant with the band (GaAs,
    AlGaAs below x ~ 0.2).  A deep level does not merge with the band at high density (the
    Mott criterion is for hydrogenic states), so no Pearson-Bardeen reduction applies."""
    return np.asarray(ec_gamma, dtype=float) - (np.asarray(ec_l, dtype=float) - DX_BELOW_L)
