"""Polarization of wurtzite layers grown along c, and the bound sheet charges it leaves at
every interface.

Pure functions on numpy arrays (per cell; C/m^2, nm^-2); nothing here knows the deck.
:func:`selfcon.model.structure.build_structure` calls them once per structure, after the
strain (selfcon.model.strain).

**Polarization along [0001]** of a wurtzite cell (O. Ambacher et al., J. Phys.: Condens.
Matter 14, 3399 (2002), Eqs. for the c-plane heterostructure):
    P = P_sp + P_pz,   P_pz = 2 eps_xx (e31 - e33 C13/C33),
with the spontaneous polarization P_sp of the material (the binaries of Bernardini and
Fiorentini with the nonlinear alloy bowing of Ambacher et al. 2002, in the material library)
and the piezoelectric polarization of the biaxial c-plane strain eps_xx, linear in the strain
with the constants e31, e33, C13, C33 of Vurgaftman and Meyer, J. Appl. Phys. 94, 3675 (2003)
(interpolated linearly in alloys).  Zincblende cells have none (no spontaneous polarization;
(001) biaxial strain gives no piezoelectric polarization along z).

**Sign convention.**  The deck's z axis points into the wafer.  P_z is the component of P
along +z.  For metal-face growth ([0001] points from the substrate to the surface) P_z =
-P[0001]; for nitrogen-face growth P_z = +P[0001].  The deck's factor
``physics.polarization`` multiplies P_z (0 switches polarization off).

**Bound sheets.**  The bound charge is rho_b = -dP_z/dz; across an interface between the
layer above (smaller z) and the layer below it leaves the sheet
    sigma = P_z(above) - P_z(below),
positive at AlGaN on GaN grown metal-face (AlGaN has the larger |P|, both negative along
[0001]).  On the finite-volume mesh (selfcon/solver/kernels/poisson.py) P_z is constant in
each cell, so integrating rho_b over the dual cell of node i gives exactly
sigma_i = P_z(cell i-1) - P_z(cell i): a fixed sheet on the node, which keeps the discrete
Gauss balance of every dual cell exact.  Layer interfaces are nodes, so each interface gets
its sheet; inside a graded layer every node gets the small sheet of its two cells (the
discrete form of the bulk bound charge -dP_z/dz).  The two ends of the stack carry no sheet:
the surface and the substrate contact compensate the bound charge of the outer faces
(surface states, the contact), as they do in the devices.
"""
from __future__ import annotations

import numpy as np

from selfcon.constants import C_M2_PER_NM2

__all__ = ["piezoelectric", "polarization_z", "bound_sheets", "POLARITY_SIGN"]

#: growth polarity -> sign of P_z relative to P[0001] (see the module docstring)
POLARITY_SIGN = {"metal": -1.0, "nitrogen": +1.0}


def piezoelectric(exx, e31, e33, c13, c33):
    """Piezoelectric polarization along [0001] (C/m^2) of a wurtzite layer under biaxial
    c-plane strain ``exx``: 2 eps_xx (e31 - e33 C13/C33)."""
    exx = np.asarray(exx, float)
    return 2.0 * exx * (np.asarray(e31, float) - np.asarray(e33, float) * np.asarray(c13, float)
                        / np.asarray(c33, float))


def polarization_z(wurtzite, psp, exx, e31, e33, c13, c33, *, polarity="metal", factor=1.0):
    """P_z (C/m^2) per cell, along the deck's +z (into the wafer): sign(polarity) x factor x
    (P_sp + P_pz) in wurtzite cells (``wurtzite`` > 0.5), 0 in the others."""
    wz = np.asarray(wurtzite, float) > 0.5
    with np.errstate(invalid="ignore", divide="ignore"):
        p = np.asarray(psp, float) + piezoelectric(exx, e31, e33, c13, c33)
    return np.where(wz, POLARITY_SIGN[polarity] * float(factor) * p, 0.0)


def bound_sheets(pz):
    """Bound sheet charge (C/m^2, units of charge, not of q) on every node of a mesh whose
    cells have polarization ``pz``: sigma_i = P_z(cell i-1) - P_z(cell i) at the inner nodes,
    0 at the two ends.  Divide by C_M2_PER_NM2 for nm^-2."""
    pz = np.asarray(pz, float)
    out = np.zeros(pz.size + 1)
    out[1:-1] = pz[:-1] - pz[1:]
    return out


def sheets_nm2(pz):
    """:func:`bound_sheets` in elementary charges per nm^2."""
    return bound_sheets(pz) / C_M2_PER_NM2
