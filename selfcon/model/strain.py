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

**Wurtzite on the c plane** (:func:`wurtzite_c_plane_shifts`): the conduction edge moves by
a_cz eps_zz + a_ct (eps_xx + eps_yy), and the three valence edges (heavy hole A, light hole B,
crystal-field split-off C) follow the k = 0 eigenvalues of S. L. Chuang and C. S. Chang,
Phys. Rev. B 54, 2491 (1996), with the strain terms lambda = D1 eps_zz + D2 (eps_xx +
eps_yy) and theta = D3 eps_zz + D4 (eps_xx + eps_yy) and the quasi-cubic Delta2 = Delta3 =
Delta_so/3.  Vurgaftman and Meyer, J. Appl. Phys. 94, 3675 (2003) tabulate the interband
potentials a1 = a_cz - D1 and a2 = a_ct - D2 (the measured combinations): a_cz = a1 + D1,
a_ct = a2 + D2.  The hole masses follow the strain through the mixing of the two Gamma7
states (selfcon.input.materials.library.wurtzite_hole_masses).

**Critical thickness of wurtzite layers** (:func:`channel_cracking_thickness`): basal-plane
slip is not active in c-plane growth, and a tensile nitride layer (AlGaN, AlN or InAlN on
GaN) relaxes by cracking (observed for AlGaN on GaN: Einfeldt et al., J. Appl. Phys. 88,
7029 (2000), from memory).  The criterion is the energy balance of a channel crack in a
film on a substrate of similar stiffness (J. W. Hutchinson and Z. Suo, Adv. Appl. Mech. 29,
63 (1992); Z = 1.976 from J. L. Beuth, Int. J. Solids Struct. 29, 1657 (1992)):
    Z sigma^2 h / E' = Gamma = K_Ic^2 / E'   ->   h_c = K_Ic^2 / (Z sigma^2),
sigma = (C11 + C12 - 2 C13^2/C33) eps_xx the biaxial stress of the strained c plane and
K_Ic = 0.8 MPa m^1/2 the fracture toughness of GaN (Drory et al., Appl. Phys. Lett. 69,
4044 (1996), from memory), used for every nitride layer (an approximation: the film's own
toughness is not known for the alloys).  Compressive layers (InGaN on GaN) do not crack:
this criterion gives them no critical thickness, and `check` says so.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["biaxial_001", "biaxial_c_plane", "zincblende_001_shifts", "EDGE_SHIFTS",
           "wurtzite_c_plane_shifts", "channel_cracking_thickness", "biaxial_stress_c_plane",
           "wurtzite_stack_cracking", "K_IC_NITRIDE", "CRACK_Z",
           "bulk_strained_edges",
           "in_plane_lattice", "matthews_blakeslee", "stack_critical_thickness",
           "LayerStrain", "StrainSummary", "poisson_ratio_001", "X_VALLEY_SETS"]

#: the X valleys of a zincblende crystal under (001) strain: name -> (valleys, whose axis);
#: a material with more X/Delta valleys (x_valleys: the six Delta valleys of Si and Ge) has
#: the same thirds (2 along z, 4 in the plane)
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


def wurtzite_c_plane_shifts(exx, ezz, *, a1, a2, d1, d2, d3, d4, delta_cr, delta_so):
    """Band-edge shifts (eV) of a wurtzite crystal strained biaxially in the c plane, the
    model of Chuang and Chang, Phys. Rev. B 54, 2491 (1996) with the potentials of
    Vurgaftman and Meyer, J. Appl. Phys. 94, 3675 (2003) (module docstring):
    conduction  dEc = a_cz eps_zz + 2 a_ct eps_xx,  a_cz = a1 + D1, a_ct = a2 + D2;
    valence     lambda = D1 eps_zz + 2 D2 eps_xx, theta = D3 eps_zz + 2 D4 eps_xx in the k = 0
    edges of selfcon.input.materials.library.wurtzite_valence_edges.

    Returns a dict of arrays: ``ec_gamma``, ``ev_hh``, ``ev_lh``, ``ev_ch`` (each edge's shift
    from its unstrained place) and ``lambda``, ``theta`` (eV; the hole masses depend on them).
    """
    from selfcon.input.materials.library import wurtzite_valence_edges
    exx, ezz = np.asarray(exx, float), np.asarray(ezz, float)
    d1, d2, d3, d4 = (np.asarray(v, float) for v in (d1, d2, d3, d4))
    lam = d1 * ezz + 2.0 * d2 * exx
    theta = d3 * ezz + 2.0 * d4 * exx
    e0 = wurtzite_valence_edges(delta_cr, delta_so)
    e1 = wurtzite_valence_edges(delta_cr, delta_so, lam, theta)
    acz = np.asarray(a1, float) + d1
    act = np.asarray(a2, float) + d2
    return {"ec_gamma": acz * ezz + 2.0 * act * exx,
            "ev_hh": e1[0] - e0[0], "ev_lh": e1[1] - e0[1], "ev_ch": e1[2] - e0[2],
            "lambda": lam, "theta": theta}


#: crystal structure -> band-edge model of its biaxially strained growth plane ((001) for
#: zincblende, the c plane for wurtzite)
EDGE_SHIFTS = {"zincblende": zincblende_001_shifts, "wurtzite": wurtzite_c_plane_shifts}


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
    selfcon.input.materials.cell_parameters, unstrained) grown pseudomorphically with in-plane
    lattice constant ``a_par`` (nm): on (001) for zincblende cells, on the c plane for
    wurtzite cells (``p["wurtzite"]`` = 1; :func:`bulk_strained_edges_wurtzite`).  Returns a dict
    of arrays: eps_xx, eps_zz and the strained edges ec_gamma, ev_hh, ev_lh, ev_so, ec_x_z,
    ec_x_xy, ec_x (lowest), ec_l; a structure with wurtzite cells also gets ev_ch and the
    strained hole masses m_{hh,lh,ch}_{z,par}, m_{hh,lh,ch}_dos (zincblende cells keep theirs)."""
    wz = np.asarray(p.get("wurtzite", 0.0), float) > 0.5
    out = _zincblende_strained(p, a_par)
    if np.any(wz):
        w = bulk_strained_edges_wurtzite(p, a_par)
        for k, v in w.items():
            base = out.get(k, p.get(k))
            out[k] = np.where(wz, v, base) if base is not None else v
    return out


def bulk_strained_edges_wurtzite(p, a_par):
    """The c-plane strain, strained edges and hole masses of wurtzite cells (see
    :func:`bulk_strained_edges`; zincblende cells in ``p`` give meaningless numbers here)."""
    from selfcon.input.materials.library import anisotropic_dos_mass, wurtzite_hole_masses
    with np.errstate(invalid="ignore", divide="ignore"):
        exx, ezz = biaxial_c_plane(a_par, p["lattice"], p["c13"], p["c33"])
        sh = wurtzite_c_plane_shifts(exx, ezz, a1=p["da1"], a2=p["da2"], d1=p["dd1"], d2=p["dd2"],
                                     d3=p["dd3"], d4=p["dd4"], delta_cr=p["delta_cr"],
                                     delta_so=p["delta_so"])
        m = wurtzite_hole_masses(p["va1"], p["va2"], p["va3"], p["va4"], p["delta_cr"],
                                 p["delta_so"], sh["lambda"], sh["theta"])
    out = {"eps_xx": exx, "eps_zz": ezz, "ec_gamma": p["ec_gamma"] + sh["ec_gamma"],
           "ev_hh": p["ev_hh"] + sh["ev_hh"], "ev_lh": p["ev_lh"] + sh["ev_lh"],
           "ev_ch": p["ev_ch"] + sh["ev_ch"], "ev_so": p["ev_ch"] + sh["ev_ch"],
           "ec_x_z": p["ec_x"], "ec_x_xy": p["ec_x"], "ec_x": p["ec_x"], "ec_l": p["ec_l"]}
    for b in ("hh", "lh", "ch"):
        out[f"m_{b}_z"] = m[f"m_{b}_par"]          # along c = along z
        out[f"m_{b}_par"] = m[f"m_{b}_perp"]       # in the c plane = in the growth plane
        out[f"m_{b}_dos"] = anisotropic_dos_mass(m[f"m_{b}_par"], m[f"m_{b}_perp"])
    return out


def _zincblende_strained(p, a_par):
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


#: MPa m^1/2, fracture toughness of GaN (Drory et al., Appl. Phys. Lett. 69, 4044 (1996), from
#: memory), used for every wurtzite layer
K_IC_NITRIDE = 0.8
#: channel-crack factor of a film on a substrate of similar stiffness (Beuth 1992)
CRACK_Z = 1.976


def biaxial_stress_c_plane(exx, c11, c12, c13, c33):
    """Biaxial in-plane stress (GPa) of a c-plane wurtzite layer at strain ``exx``:
    (C11 + C12 - 2 C13^2/C33) eps_xx (zero stress along c)."""
    return (np.asarray(c11, float) + np.asarray(c12, float)
            - 2.0 * np.asarray(c13, float) ** 2 / np.asarray(c33, float)) * np.asarray(exx, float)


def channel_cracking_thickness(stress_gpa, k_ic=K_IC_NITRIDE, z=CRACK_Z):
    """Critical thickness (nm) for channel cracking of a film under biaxial tension
    ``stress_gpa`` (module docstring): K_Ic^2 / (Z sigma^2); inf for sigma <= 0 (compression
    does not crack a film)."""
    s = float(stress_gpa) * 1e9
    if not s > 0.0:
        return math.inf
    return (float(k_ic) * 1e6) ** 2 / (z * s * s) * 1e9


def wurtzite_stack_cracking(layers, stress, min_strain=1e-3, k_ic=K_IC_NITRIDE, z=CRACK_Z):
    """Cracking thickness per layer and for runs of tensile layers (wurtzite stacks).

    ``layers``: :class:`LayerStrain` top to bottom; ``stress`` (GPa) per layer.  A layer under
    tension has h_c = K_Ic^2 / (Z sigma^2); a compressed or unstrained one none (inf).  A run
    of consecutive layers from one tensile layer (|eps| >= ``min_strain``) to another, with no
    relaxed layer between, cracks through when its released energy exceeds the fracture
    energy: sum_i Z sigma_i^2 h_i / K_Ic^2 > 1 (compressed layers inside count as 0: an
    approximation, the layers' moduli taken equal).  Its h_c is reported as H / that sum, so
    that H > h_c means cracking.  Returns (h_c per layer, windows (first, last, H, h_c, mean
    strain))."""
    n = len(layers)
    hc = np.full(n, np.inf)
    drive = np.zeros(n)          # Z sigma^2 / K_Ic^2 per nm of each tensile layer
    for k, L in enumerate(layers):
        if L.strained and stress[k] > 0.0:
            hc[k] = channel_cracking_thickness(stress[k], k_ic, z)
            drive[k] = 1.0 / hc[k]
    idx = [k for k, L in enumerate(layers) if L.strained and L.eps_xx >= min_strain]
    windows = []
    for i0 in range(len(idx)):
        for i1 in range(i0 + 1, len(idx)):
            a0, a1 = idx[i0], idx[i1]
            sub = layers[a0:a1 + 1]
            if any(L.relaxed for L in sub):
                continue
            h = np.array([L.thickness for L in sub])
            H = float(h.sum())
            r = float(np.dot(drive[a0:a1 + 1], h))
            eps = float(np.dot([L.eps_xx if L.strained else 0.0 for L in sub], h) / H)
            windows.append((a0, a1, H, H / r if r > 0 else math.inf, eps))
    return hc, tuple(windows)


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
    criterion: str = "Matthews-Blakeslee"   # of critical_thickness ("channel cracking": wurtzite)
    stress: float = 0.0       # GPa, biaxial in-plane stress (wurtzite layers; 0 otherwise)


@dataclass(frozen=True)
class StrainSummary:
    """How the stack is strained: ``reference`` (text), ``mode`` ("unstrained", "substrate",
    "lattice_constant", "relaxed layers"), ``a_reference`` (nm or None), per-layer
    :class:`LayerStrain` and the cumulative windows (``windows``: (first, last, h, h_c, mean
    strain) of every run of two or more strained layers); ``crystal`` of the stack and the
    ``criterion`` of its critical thicknesses ("Matthews-Blakeslee" for zincblende,
    "channel cracking" for wurtzite)."""

    mode: str
    reference: str
    a_reference: float | None
    layers: tuple
    windows: tuple = ()
    crystal: str = "zincblende"              # of the stack: "zincblende" | "wurtzite"
    criterion: str = "Matthews-Blakeslee"    # critical-thickness criterion of the windows

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
