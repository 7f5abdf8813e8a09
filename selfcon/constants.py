"""Physical constants and unit conversions: the one place they live.

Internal units: lengths in nm, energies in eV, potentials in V, temperature in K,
volume densities in nm^-3, sheet densities in nm^-2.  Decks and outputs use
cm^-3 and cm^-2; convert with the factors below at the edges only.

Values: CODATA 2018 (exact SI definitions where exact).
"""
import math

Q = 1.602176634e-19            # C, elementary charge (exact, SI 2019)
HBAR = 1.054571817e-34         # J s (CODATA 2018)
M0 = 9.1093837015e-31          # kg (CODATA 2018)
EPS0 = 8.8541878128e-12        # F/m (CODATA 2018)
KB_EV = 8.617333262e-5         # eV/K (exact ratio k_B/e)

#: hbar^2 / (2 m0) in eV nm^2  (= 0.0380998...)
HBAR2_2M0 = HBAR**2 / (2.0 * M0) / Q * 1e18

#: q / eps0 in V nm: d/dz(eps_r dphi/dz) = -Q_EPS0 * rho[nm^-3]  (= 18.0951...)
Q_EPS0 = Q / EPS0 * 1e9

#: 2D density of states per unit mass m/(pi hbar^2), in nm^-2 eV^-1 per m0, spin included
DOS2D_PER_M0 = 1.0 / (math.pi * 2.0 * HBAR2_2M0)

#: effective density of states prefactor: Nc = NC_PER_M0 * (m T)^(3/2) in nm^-3
#: Nc = 2 (m kT / (2 pi hbar^2))^(3/2) = 2 (m/m0 * kT / (4 pi HBAR2_2M0))^(3/2)
NC_PER_M0_K = 2.0 * (KB_EV / (4.0 * math.pi * HBAR2_2M0)) ** 1.5

CM3_PER_NM3 = 1e21             # 1 nm^-3 = 1e21 cm^-3
CM2_PER_NM2 = 1e14             # 1 nm^-2 = 1e14 cm^-2
NM_PER_CM = 1e7
#: C/m^2 of one elementary charge per nm^2 (= 0.1602...): sigma[nm^-2] = P[C/m^2] / C_M2_PER_NM2
C_M2_PER_NM2 = Q * 1e18

#: Bohr radius a_0 in nm (CODATA 2018: 5.29177210903e-11 m)
BOHR_RADIUS_NM = 0.0529177210903

#: Rydberg energy R_inf h c in eV (CODATA 2018: 13.605693122994 eV)
RYDBERG_EV = 13.605693122994
