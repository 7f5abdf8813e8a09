"""Strained layers: which lattice each layer grows on, its strain, the band-edge shifts the
strain causes, and the critical thickness for misfit dislocations.

Pure functions on numpy arrays (per cell, internal units: nm, eV, GPa); nothing here knows
the deck.  :func:`selfcon.model.structure.build_structure` calls them once per structure.

**Which lattice** (:func:`in_plane_lattice`).  Growth runs from the bottom of the stack
(the substrate side, largest z) to the top.  A layer takes the in-plane lattice constant
a_par of the nearest relaxed layer below it (at that layer's top), else that of the
reference (the ``[substrate]`` material or ``lattice_constant``); a relaxed layer keeps its
own lattice.  Without any reference every layer is at its own lattice: unstrained.

**Strain** (:func:`biaxial_001`; :func:`biaxial_c_plane` for wurtzite on the c plane).
Pseudomorphic growth on (001): eps_xx = eps_yy = (a_par - a)/a, and zero stress along z
gives eps_zz = -2 (C12/C11) eps_xx (c plane: -2 (C13/C33) eps_xx).

**Band edges** (:func:`zincblende_001_shifts`), the model-solid deformation potentials of
C. G. Van de Walle, Phys. Rev. B 39, 1871 (1989), written in the Pikus-Bir notation of
S. L. Chuang, Physics of Optoelectronic Devices (Wiley 1995), which is the same physics:
    P = -a_v (eps_xx + eps_yy + eps_zz),  Q = -(b/2)(eps_xx + eps_yy - 2 eps_zz)
    Gamma:  dEc = a_c Tr(eps)
    heavy hole:  dE_hh = -P - Q
    light hole:  dE_lh = -P + (Q - D + sqrt(D^2 + 2 D Q + 9 Q^2)) / 2
    split-off:   dE_so = -P + (Q - D - sqrt(D^2 + 2 D Q + 9 Q^2)) / 2   (relative to -D)
with D the spin-orbit splitting: the light hole is coupled to the split-off band by the
shear strain (the 2x2 block of the 6x6 Hamiltonian at k = 0), which Van de Walle's Eq. for
the light-hole edge also contains.  The sign of a_v is Van de Walle's: the (average)
valence edge moves by +a_v Tr(eps) and a = a_c - a_v is the gap potential (GaAs: a_v =
1.16 eV, a = -8.33 eV).  Compressive strain (eps_xx < 0; b < 0) gives Q < 0 and puts the
heavy hole above the light hole; tensile strain reverses the order.
The X valleys (Van de Walle's model-solid form, Xi_d and Xi_u) split into the one whose
axis is along z and the two in the plane:
    dE_X,z  = (a_X + a_v) Tr(eps) + (2/3) Xi_u^X (eps_zz - eps_xx)
    dE_X,xy = (a_X + a_v) Tr(eps) - (1/3) Xi_u^X (eps_zz - eps_xx)
with a_X = Xi_d + Xi_u/3 - a_v the hydrostatic potential of the X gap; the four L valleys
are equivalent under (001) strain: dE_L = (a_L + a_v) Tr(eps).  The shifts are returned per
valley set (``x_z``, ``x_xy``, ``l``) so that models with confined valleys can use them.
Hole masses are left unstrained (the multiband hole model will carry the strain terms).

**Critical thickness** (:func:`matthews_blakeslee`): the force balance of J. W. Matthews
and A. E. Blakeslee, J. Cryst. Growth 27, 118 (1974), for 60-degree misfit dislocations
(b = a/sqrt 2, alpha = lambda = 60 degrees, nu = C12/(C11 + C12)):
    h_c = k b (1 - nu cos^2 alpha) / (8 pi |eps| (1 + nu) cos lambda) [ln(h_c/b) + 1]
with k = 1 for a layer at the surface (one misfit segment: the strain force on the
threading dislocation equals the line tension of one segment) and k = 2 for a buried layer
under a cap (a segment at each of its two interfaces).  Solved by fixed-point iteration.
The cumulative case (:func:`stack_critical_thickness`) is an approximation stated there.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["biaxial_001", "biaxial_c_plane", "zincblende_001_shifts", "EDGE_SHIFTS",
           "bulk_strained_edges",
           "in_plane_lattice", "matthews_blakeslee", "stack_critical_thickness",
           "LayerStrain", "StrainSummary", "poisson_ratio_001", "X_VALLEY_SETS"]

#: the X valleys of a zincblende crystal under (001) strain: name -> (valleys, whose axis)
X_VALLEY_SETS = {"x_z": (1, "along z"), "x_xy": (2, "in the growth plane")}


def biaxial_001(a_par, a0, c11, c12):
    """(eps_xx, eps_zz) of a cubic layer grown pseudomorphically on (001)."""
    a_par, a0 = np.asarray(a_par, float), np.asarray(a0, float)
    exx = (a_par - a0) / a0
    return exx, -2.0 * np.asarray(c12, float) / np.asarray(c11, float) * exx


def biaxial_c_plane(a_par, a0, c13, c33):
    """(eps_xx, eps_zz) of a hexagonal (wurtzite) layer strained in the c plane; ``a0`` is
    its own a lattice constant: eps_zz = -2 (C13/C33) eps_xx."""
    a_par, a0 = np.asarray(a_par, float), np.asarray(a0, float)
    exx = (a_par - a0) / a0
    return exx, -2.0 * np.asarray(c13, float) / np.asarray(c33, float) * exx


def zincblende_001_shifts(exx, ezz, *, ac, av, b, delta_so, x_gap, x_u, l_gap):
    """Band-edge shifts (eV) of a (001) biaxially strained zincblende crystal, on the
    common energy scale (see the module docstring for the formulas and their source).

    Returns a dict of arrays: ``ec_gamma``, ``ev_hh``, ``ev_lh``, ``ev_so`` (the split-off
    edge relative to its unstrained place, -D), ``x_z``, ``x_xy`` (the X valley along z and
    the two in the plane) and ``l``.
    """
    exx, ezz = np.asarray(exx, float), np.asarray(ezz, float)
    tr = 2.0 * exx + ezz
    p = -np.asarray(av, float) * tr
    q = -np.asarray(b, float) * (exx - ezz)
    d = np.asarray(delta_so, float)
    root = np.sqrt(d * d + 2.0 * d * q + 9.0 * q * q)
    hydro_x = (np.asarray(x_gap, float) + av) * tr
    shear = np.asarray(x_u, float) * (ezz - exx)
    return {
        "ec_gamma": np.asarray(ac, float) * tr,
        "ev_hh": -p - q,
        "ev_lh": -p + 0.5 * (q - d + root),
        "ev_so": -p + 0.5 * (q - d - root) + d,
        "x_z": hydro_x + (2.0 / 3.0) * shear,
        "x_xy": hydro_x - (1.0 / 3.0) * shear,
        "l": (np.asarray(l_gap, float) + av) * tr,
    }


#: crystal structure -> band-edge model (the wurtzite nitrides register theirs here)
EDGE_SHIFTS = {"zincblende": zincblende_001_shifts}


def in_plane_lattice(own, cell_layer, relaxed, top_lattice, reference):
    """The in-plane lattice constant a_par of every cell (nm).

    ``own`` (C,) each cell's own lattice constant at the temperature; ``cell_layer`` (C,)
    the layer of each cell; ``relaxed`` (L,) bool per layer; ``top_lattice`` (L,) the lattice
    constant of each layer at its top (a graded relaxed layer passes that one on);
    ``reference``: the substrate's lattice constant, or None.  Layers below the lowest
    relaxed layer with no reference keep their own lattice.
    """
    n_layers = len(relaxed)
    below = np.full(n_layers, np.nan)      # lattice each layer grows on
    current = np.nan if reference is None else float(reference)
    for k in range(n_layers - 1, -1, -1):
        below[k] = current
        if relaxed[k]:
            current = float(top_lattice[k])
    a_par = below[cell_layer]
    keep = np.asarray(relaxed)[cell_layer] | ~np.isfinite(a_par)
    return np.where(keep, own, a_par)


def poisson_ratio_001(c11, c12):
    """Poisson ratio for the misfit-dislocation energy, nu = C12 / (C11 + C12)."""
    return c12 / (c11 + c12)


def matthews_blakeslee(eps, a, nu, *, capped=True, tol=1e-12, max_iter=200):
    """Matthews-Blakeslee critical thickness (nm) of a layer with misfit strain ``eps``,
    lattice constant ``a`` (nm) and Poisson ratio ``nu`` (module docstring; ``capped``:
    two misfit segments, a buried layer).  inf for eps = 0."""
    e = abs(float(eps))
    if e == 0.0 or not math.isfinite(e):
        return math.inf
    bv = a / math.sqrt(2.0)
    cos2a, cosl = 0.25, 0.5
    k = 2.0 if capped else 1.0
    pref = k * bv * (1.0 - nu * cos2a) / (8.0 * math.pi * e * (1.0 + nu) * cosl)
    h = max(pref, bv) * 4.0
    for _ in range(max_iter):
        # h = pref (ln(h/b) + 1); below h = b the logarithm term has no meaning: no solution
        new = pref * (math.log(max(h, bv) / bv) + 1.0)
        if abs(new - h) <= tol * max(h, 1.0):
            h = new
            break
        h = new
    return max(h, bv) if h > 0 else bv


def bulk_strained_edges(p, a_par):
    """Band edges of bulk material ``p`` (a dict of per-cell arrays from
    selfcon.input.materials.cell_parameters, unstrained) grown pseudomorphically on (001) with
    in-plane lattice constant ``a_par`` (nm).  Returns a dict of arrays: eps_xx, eps_zz and the
    strained edges ec_gamma, ev_hh, ev_lh, ev_so, ec_x_z, ec_x_xy, ec_x (lowest), ec_l."""
    exx, ezz = biaxial_001(a_par, p["lattice"], p["c11"], p["c12"])
    sh = zincblende_001_shifts(exx, ezz, ac=p["ac"], av=p["av"], b=p["b_dp"],
                               delta_so=p["delta_so"], x_gap=p["xi_x_gap"], x_u=p["xi_x_u"],
                               l_gap=p["xi_l_gap"])
    vbo = p["vbo"]
    out = {"eps_xx": exx, "eps_zz": ezz, "ec_gamma": p["ec_gamma"] + sh["ec_gamma"],
           "ev_hh": vbo + sh["ev_hh"], "ev_lh": vbo + sh["ev_lh"],
           "ev_so": vbo - p["delta_so"] + sh["ev_so"],
           "ec_x_z": p["ec_x"] + sh["x_z"], "ec_x_xy": p["ec_x"] + sh["x_xy"],
           "ec_l": p["ec_l"] + sh["l"]}
    out["ec_x"] = np.minimum(out["ec_x_z"], out["ec_x_xy"])
    return out


@dataclass(frozen=True)
class LayerStrain:
    """One layer's strain summary: thickness-weighted means over its cells."""

    index: int
    strained: bool            # False: relaxed or at its own lattice
    relaxed: bool             # layer.relaxed: a metamorphic buffer or virtual substrate
    eps_xx: float
    eps_zz: float
    lattice_inplane: float    # nm, at the top of the layer
    lattice_own: float        # nm, mean over the layer
    critical_thickness: float  # nm (inf when eps = 0 or relaxed)
    thickness: float          # nm


@dataclass(frozen=True)
class StrainSummary:
    """How the stack is strained: ``reference`` (text), ``mode`` ("unstrained", "substrate",
    "lattice_constant", "relaxed layers"), ``a_reference`` (nm or None), per-layer
    :class:`LayerStrain` and the cumulative windows (``windows``: (first, last, h, h_c, mean
    strain) of every run of two or more strained layers)."""

    mode: str
    reference: str
    a_reference: float | None
    layers: tuple
    windows: tuple = ()

    @property
    def strained(self) -> bool:
        return self.mode != "unstrained"


def stack_critical_thickness(layers, nu, a, min_strain=1e-3):
    """Critical thickness per layer and for runs of strained layers.

    ``layers``: sequence of :class:`LayerStrain` top to bottom (its ``critical_thickness`` is
    ignored); ``nu``, ``a``: per-layer mean Poisson ratio and lattice constant.  Returns
    (h_c per layer, windows).  Each strained layer alone is a buried (capped) layer unless it
    is the top layer.  Cumulative case, a stated approximation (the average-strain rule for
    multilayers): every window of consecutive layers from one strained layer to another
    acts as one layer of thickness H = sum h_i with the thickness-weighted mean strain
    sum eps_i h_i / H (unstrained spacers inside count with eps = 0) and the weighted mean
    nu and a; it is compared with its own Matthews-Blakeslee thickness.  Strains of
    opposite sign compensate in the mean, as in strain-balanced stacks.  Windows start and
    end at layers with |eps| >= ``min_strain`` (0.1 %: nearly matched layers such as AlGaAs on
    GaAs start none, but count inside one).
    """
    n = len(layers)
    hc = np.full(n, np.inf)
    for k, L in enumerate(layers):
        if L.strained and L.eps_xx != 0.0:
            hc[k] = matthews_blakeslee(L.eps_xx, a[k], nu[k], capped=k > 0)
    # windows start and end at layers of at least min_strain (weaker ones count inside)
    idx = [k for k, L in enumerate(layers) if L.strained and abs(L.eps_xx) >= min_strain]
    windows = []
    for i0 in range(len(idx)):
        for i1 in range(i0 + 1, len(idx)):
            a0, a1 = idx[i0], idx[i1]
            sub = layers[a0:a1 + 1]
            if any(L.relaxed for L in sub):
                continue          # a relaxed layer in between starts a new history
            h = np.array([L.thickness for L in sub])
            H = float(h.sum())
            eps = float(np.dot([L.eps_xx if L.strained else 0.0 for L in sub], h) / H)
            nu_m = float(np.dot(nu[a0:a1 + 1], h) / H)
            a_m = float(np.dot(a[a0:a1 + 1], h) / H)
            windows.append((a0, a1, H, matthews_blakeslee(eps, a_m, nu_m, capped=a0 > 0), eps))
    return hc, tuple(windows)
