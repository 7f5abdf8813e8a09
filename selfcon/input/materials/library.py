"""Material data: every number with its unit and its source.

Parameter names are the deck's own keys (README.md, "Deck reference", ``material.NAME.*``), so a deck-local
``[material.NAME]`` overrides a library value under the same name.

Binaries: ``BINARIES[name][key] -> Value``.  Ternaries: ``ALLOYS[name] -> Alloy``,
with the two end binaries and the bowing parameters; quaternaries: ``QUATERNARIES[name]
-> Quaternary``, interpolated from their ternaries.  The interpolation rules themselves
live in :mod:`selfcon.input.materials.alloys`.  ``x`` always counts the first-named element
of the mixed sublattice (In in InGaP, As in GaAsSb); a quaternary's ``y`` counts the other
mixed element named second (As in InGaAsP, Ga in AlGaInAs).

Band parameters, lattice constants with their temperature coefficients, elastic constants
C11, C12, C44, deformation potentials a_c, a_v, b, d and the bowing parameters are from
I. Vurgaftman, J. R. Meyer and L. R. Ram-Mohan, J. Appl. Phys. 89, 5815 (2001), recalled
from memory (no copy of the paper was consulted while writing this file); every such value
says "from memory" in its source where the author is less sure, and a few say "uncertain".

Sign convention of a_v (``deformation_av``): that of C. G. Van de Walle, Phys. Rev. B 39,
1871 (1989): the (average) valence edge moves by +a_v Tr(ε), a_v > 0, so that
a = a_c - a_v is the hydrostatic deformation potential of the gap (GaAs: -8.33 eV).  The
magnitudes are the review's.  The X- and L-valley deformation potentials are not in the
review: their hydrostatic parts are derived here from typical pressure coefficients of the
indirect gaps and their shear parts are typical values, each source string says how.

Static permittivities are not in that paper; they come from S. M. Sze and
K. K. Ng, Physics of Semiconductor Devices, 3rd ed. (Wiley 2007), Appendix.

Adding a binary: add a dict to ``BINARIES`` with every key of ``PARAMETERS``;
adding an alloy: an ``Alloy`` with its two ends and a ``Bowing`` for each of
``BOWED`` (zero where linear).  ``tests/test_materials.py`` checks that every
value has a unit and a non-empty source.
"""
from typing import NamedTuple


class Value(NamedTuple):
    """One stored number: ``value`` in ``unit``, taken from ``source``."""
    value: float
    unit: str
    source: str


class Bowing(NamedTuple):
    """Bowing parameter C(x) = c0 + c1 x, used as
    P(x) = (1 - x) P(x=0 end) + x P(x=1 end) - x (1 - x) C(x)."""
    c0: float
    c1: float
    unit: str
    source: str


class Alloy(NamedTuple):
    name: str
    end0: str          # binary at x = 0
    end1: str          # binary at x = 1
    meaning_of_x: str  # which element x counts
    bowing: dict       # key -> Bowing (keys: BOWED)


#: deck key -> (unit, meaning).  The same names are the library's parameter names.
PARAMETERS = {
    "band_gap": ("eV", "Γ band gap at 0 K"),
    "varshni_alpha": ("eV/K", "Varshni α of the Γ gap: Eg(T) = Eg(0) - α T²/(T + β)"),
    "varshni_beta": ("K", "Varshni β of the Γ gap"),
    "x_gap": ("eV", "X-valley gap (X minimum - valence band top) at 0 K"),
    "x_varshni_alpha": ("eV/K", "Varshni α of the X gap"),
    "x_varshni_beta": ("K", "Varshni β of the X gap"),
    "l_gap": ("eV", "L-valley gap at 0 K"),
    "l_varshni_alpha": ("eV/K", "Varshni α of the L gap"),
    "l_varshni_beta": ("K", "Varshni β of the L gap"),
    "valence_band_offset": ("eV", "valence band top on the common scale (InSb = 0)"),
    "spin_orbit": ("eV", "spin-orbit splitting Δso"),
    "electron_mass": ("m0", "Γ electron effective mass"),
    "luttinger_gamma1": ("1", "Luttinger γ1"),
    "luttinger_gamma2": ("1", "Luttinger γ2"),
    "luttinger_gamma3": ("1", "Luttinger γ3"),
    "x_mass_long": ("m0", "X-valley longitudinal mass"),
    "x_mass_trans": ("m0", "X-valley transverse mass"),
    "l_mass_long": ("m0", "L-valley longitudinal mass"),
    "l_mass_trans": ("m0", "L-valley transverse mass"),
    "permittivity": ("1", "static relative permittivity"),
    "donor_binding": ("eV", "donor binding energy (below the Γ edge)"),
    "acceptor_binding": ("eV", "acceptor binding energy (above the valence edge)"),
    # lattice, elasticity and deformation potentials (strained layers, selfcon.model.strain)
    "lattice_constant": ("nm", "lattice constant a at 300 K"),
    "lattice_expansion": ("nm/K", "temperature coefficient da/dT: a(T) = a(300 K) + da/dT (T - 300 K)"),
    "elastic_c11": ("GPa", "elastic stiffness C11"),
    "elastic_c12": ("GPa", "elastic stiffness C12"),
    "elastic_c44": ("GPa", "elastic stiffness C44"),
    "deformation_ac": ("eV", "Γ conduction-band hydrostatic deformation potential a_c: "
                             "ΔEc = a_c Tr(ε)"),
    "deformation_av": ("eV", "valence-band hydrostatic deformation potential a_v, sign of Van de "
                             "Walle 1989: ΔEv = +a_v Tr(ε), so a = a_c - a_v is the gap potential"),
    "deformation_b": ("eV", "valence-band shear deformation potential b (tetragonal, [001])"),
    "deformation_d": ("eV", "valence-band shear deformation potential d (trigonal, [111])"),
    "x_deformation_gap": ("eV", "hydrostatic deformation potential of the X gap, "
                                "Ξ_d + Ξ_u/3 - a_v (X edge minus the average valence edge)"),
    "x_deformation_u": ("eV", "X-valley uniaxial deformation potential Ξ_u"),
    "l_deformation_gap": ("eV", "hydrostatic deformation potential of the L gap, "
                                "Ξ_d + Ξ_u/3 - a_v"),
    "l_deformation_u": ("eV", "L-valley uniaxial deformation potential Ξ_u (no shift under "
                              "(001) biaxial strain; kept for other orientations)"),
}

#: parameters that carry a bowing parameter in alloys (the rest interpolate linearly)
BOWED = ("band_gap", "x_gap", "l_gap", "valence_band_offset", "electron_mass", "spin_orbit",
         "deformation_ac")

_V = "Vurgaftman, Meyer and Ram-Mohan, J. Appl. Phys. 89, 5815 (2001)"
_MEM = ", from memory"
_SZE = "Sze and Ng, Physics of Semiconductor Devices, 3rd ed. (Wiley 2007), Appendix"
_VBO = f"{_V}, valence band offsets on the common scale"
_MEV = 1e-3  # meV/K -> eV/K
_RYD = 13.605693  # eV, Rydberg energy (CODATA 2018, 13.605693122994 eV)


def _table(name):
    return f"{_V}, {name} table"


def _gaas():
    t = _table("GaAs") + " (Table I)"
    return {
        "band_gap": Value(1.519, "eV", t),
        "varshni_alpha": Value(0.5405 * _MEV, "eV/K", t),
        "varshni_beta": Value(204.0, "K", t),
        "x_gap": Value(1.981, "eV", t),
        "x_varshni_alpha": Value(0.460 * _MEV, "eV/K", t),
        "x_varshni_beta": Value(204.0, "K", t),
        "l_gap": Value(1.815, "eV", t),
        "l_varshni_alpha": Value(0.605 * _MEV, "eV/K", t),
        "l_varshni_beta": Value(204.0, "K", t),
        "valence_band_offset": Value(-0.80, "eV", _VBO),
        "spin_orbit": Value(0.341, "eV", t),
        "electron_mass": Value(0.067, "m0", t),
        "luttinger_gamma1": Value(6.98, "1", t),
        "luttinger_gamma2": Value(2.06, "1", t),
        "luttinger_gamma3": Value(2.93, "1", t),
        "x_mass_long": Value(1.3, "m0", t + _MEM),
        "x_mass_trans": Value(0.23, "m0", t + _MEM),
        "l_mass_long": Value(1.9, "m0", t + _MEM),
        "l_mass_trans": Value(0.0754, "m0", t + _MEM),
        "permittivity": Value(12.9, "1", _SZE + " (room-temperature value)"),
        "donor_binding": Value(5.8e-3, "eV", "common practice: Si donor in GaAs, 5.8 meV"),
        "acceptor_binding": Value(26e-3, "eV", "common practice: C acceptor in GaAs, about 26 meV"
                                               + _MEM),
    }


def _alas():
    t = _table("AlAs")
    return {
        "band_gap": Value(3.099, "eV", t),
        "varshni_alpha": Value(0.885 * _MEV, "eV/K", t),
        "varshni_beta": Value(530.0, "K", t),
        "x_gap": Value(2.24, "eV", t),
        "x_varshni_alpha": Value(0.70 * _MEV, "eV/K", t),
        "x_varshni_beta": Value(530.0, "K", t),
        "l_gap": Value(2.46, "eV", t),
        "l_varshni_alpha": Value(0.605 * _MEV, "eV/K", t + _MEM),
        "l_varshni_beta": Value(204.0, "K", t + _MEM),
        "valence_band_offset": Value(-1.33, "eV", _VBO),
        "spin_orbit": Value(0.28, "eV", t),
        "electron_mass": Value(0.15, "m0", t),
        "luttinger_gamma1": Value(3.76, "1", t),
        "luttinger_gamma2": Value(0.82, "1", t),
        "luttinger_gamma3": Value(1.42, "1", t),
        "x_mass_long": Value(0.97, "m0", t + _MEM),
        "x_mass_trans": Value(0.22, "m0", t + _MEM),
        "l_mass_long": Value(1.32, "m0", t + _MEM),
        "l_mass_trans": Value(0.15, "m0", t + _MEM),
        "permittivity": Value(10.06, "1", _SZE),
    }


def _inas():
    t = _table("InAs")
    return {
        "band_gap": Value(0.417, "eV", t),
        "varshni_alpha": Value(0.276 * _MEV, "eV/K", t),
        "varshni_beta": Value(93.0, "K", t),
        "x_gap": Value(1.433, "eV", t + _MEM),
        "x_varshni_alpha": Value(0.276 * _MEV, "eV/K", t + _MEM),
        "x_varshni_beta": Value(93.0, "K", t + _MEM),
        "l_gap": Value(1.133, "eV", t + _MEM),
        "l_varshni_alpha": Value(0.276 * _MEV, "eV/K", t + _MEM),
        "l_varshni_beta": Value(93.0, "K", t + _MEM),
        "valence_band_offset": Value(-0.59, "eV", _VBO),
        "spin_orbit": Value(0.39, "eV", t),
        "electron_mass": Value(0.026, "m0", t),
        "luttinger_gamma1": Value(20.0, "1", t),
        "luttinger_gamma2": Value(8.5, "1", t),
        "luttinger_gamma3": Value(9.2, "1", t),
        "x_mass_long": Value(1.13, "m0", t + _MEM),
        "x_mass_trans": Value(0.16, "m0", t + _MEM),
        "l_mass_long": Value(0.64, "m0", t + _MEM),
        "l_mass_trans": Value(0.05, "m0", t + _MEM),
        "permittivity": Value(15.15, "1", _SZE + _MEM),
    }


def _inp():
    t = _table("InP")
    unsure = t + _MEM + ", uncertain"
    return {
        "band_gap": Value(1.4236, "eV", t),
        "varshni_alpha": Value(0.363 * _MEV, "eV/K", t),
        "varshni_beta": Value(162.0, "K", t),
        # the paper gives the InP X gap as linear in T (2.384 eV - 0.37 meV/K T);
        # beta = 0 turns the Varshni form into exactly that
        "x_gap": Value(2.384, "eV", t + _MEM),
        "x_varshni_alpha": Value(0.37 * _MEV, "eV/K", t + " (linear in T, beta = 0)" + _MEM),
        "x_varshni_beta": Value(0.0, "K", t + " (linear in T, beta = 0)" + _MEM),
        "l_gap": Value(2.014, "eV", t + _MEM),
        "l_varshni_alpha": Value(0.363 * _MEV, "eV/K", t + _MEM),
        "l_varshni_beta": Value(162.0, "K", t + _MEM),
        "valence_band_offset": Value(-0.94, "eV", _VBO),
        "spin_orbit": Value(0.108, "eV", t),
        "electron_mass": Value(0.0795, "m0", t),
        "luttinger_gamma1": Value(5.08, "1", t),
        "luttinger_gamma2": Value(1.60, "1", t),
        "luttinger_gamma3": Value(2.10, "1", t),
        "x_mass_long": Value(1.64, "m0", unsure),
        "x_mass_trans": Value(0.34, "m0", unsure),
        "l_mass_long": Value(1.64, "m0", unsure),
        "l_mass_trans": Value(0.10, "m0", unsure),
        "permittivity": Value(12.56, "1", _SZE + _MEM),
    }


def _band(name, *, eg, alpha, beta, egx, ax, bx, egl, al, bl, vbo, so, me, g1, g2, g3,
          mxl, mxt, mll, mlt, eps, eps_src=None, unsure=(), extra=None):
    """One binary's band table (the layout of the four above) from the review's numbers:
    gaps in eV, Varshni alpha in meV/K, beta in K.  ``unsure``: keys whose source also says
    "uncertain"."""
    t = _table(name) + _MEM
    src = {k: t + (", uncertain" if k in unsure else "") for k in PARAMETERS}
    d = {
        "band_gap": Value(eg, "eV", src["band_gap"]),
        "varshni_alpha": Value(alpha * _MEV, "eV/K", src["varshni_alpha"]),
        "varshni_beta": Value(float(beta), "K", src["varshni_beta"]),
        "x_gap": Value(egx, "eV", src["x_gap"]),
        "x_varshni_alpha": Value(ax * _MEV, "eV/K", src["x_varshni_alpha"]),
        "x_varshni_beta": Value(float(bx), "K", src["x_varshni_beta"]),
        "l_gap": Value(egl, "eV", src["l_gap"]),
        "l_varshni_alpha": Value(al * _MEV, "eV/K", src["l_varshni_alpha"]),
        "l_varshni_beta": Value(float(bl), "K", src["l_varshni_beta"]),
        "valence_band_offset": Value(vbo, "eV", _VBO + _MEM),
        "spin_orbit": Value(so, "eV", src["spin_orbit"]),
        "electron_mass": Value(me, "m0", src["electron_mass"]),
        "luttinger_gamma1": Value(g1, "1", src["luttinger_gamma1"]),
        "luttinger_gamma2": Value(g2, "1", src["luttinger_gamma2"]),
        "luttinger_gamma3": Value(g3, "1", src["luttinger_gamma3"]),
        "x_mass_long": Value(mxl, "m0", src["x_mass_long"]),
        "x_mass_trans": Value(mxt, "m0", src["x_mass_trans"]),
        "l_mass_long": Value(mll, "m0", src["l_mass_long"]),
        "l_mass_trans": Value(mlt, "m0", src["l_mass_trans"]),
        "permittivity": Value(eps, "1", eps_src or (_SZE + _MEM)),
    }
    d.update(extra or {})
    return d


_NO_XL_MASS = ("x_mass_long", "x_mass_trans", "l_mass_long", "l_mass_trans")


def _gasb():
    return _band("GaSb", eg=0.812, alpha=0.417, beta=140, egx=1.141, ax=0.475, bx=94,
                 egl=0.875, al=0.597, bl=140, vbo=-0.03, so=0.76, me=0.039,
                 g1=13.4, g2=4.7, g3=6.0, mxl=1.51, mxt=0.22, mll=1.3, mlt=0.10, eps=15.7)


def _alsb():
    return _band("AlSb", eg=2.386, alpha=0.42, beta=140, egx=1.696, ax=0.39, bx=140,
                 egl=2.329, al=0.58, bl=140, vbo=-0.41, so=0.676, me=0.14,
                 g1=5.18, g2=1.19, g3=1.97, mxl=1.357, mxt=0.123, mll=1.64, mlt=0.23, eps=12.04)


def _insb():
    # the review gives no X/L masses for InSb that the author recalls: typical III-V values
    # (those of GaSb) stand in; the InSb X and L minima lie far above the Γ edge
    d = _band("InSb", eg=0.235, alpha=0.32, beta=170, egx=0.63, ax=0.32, bx=170,
              egl=0.93, al=0.32, bl=170, vbo=0.0, so=0.81, me=0.0135,
              g1=34.8, g2=15.5, g3=16.5, mxl=1.51, mxt=0.22, mll=1.3, mlt=0.10, eps=16.8,
              unsure=("x_varshni_alpha", "x_varshni_beta", "l_varshni_alpha", "l_varshni_beta"))
    stand_in = ("typical III-V value (that of GaSb) standing in: no InSb value recalled from "
                f"{_V}; uncertain")
    for k in _NO_XL_MASS:
        d[k] = Value(d[k].value, "m0", stand_in)
    return d


def _gap():
    fit = (f"least-squares Varshni fit by us (within 8 meV over 10-600 K) to the form "
           f"Eg(T) = 2.886 + 0.1081 [1 - coth(164 K / T)] eV of {_table('GaP')}" + _MEM)
    return _band("GaP", eg=2.886, alpha=0.86, beta=424, egx=2.35, ax=0.5771, bx=372,
                 egl=2.72, al=0.5771, bl=372, vbo=-1.27, so=0.08, me=0.13,
                 g1=4.05, g2=0.49, g3=2.93, mxl=2.0, mxt=0.253, mll=1.2, mlt=0.15, eps=11.1,
                 extra={"varshni_alpha": Value(0.86 * _MEV, "eV/K", fit),
                        "varshni_beta": Value(424.0, "K", fit),
                        # stored, not the hydrogenic estimate: these Luttinger parameters give
                        # a nearly flat heavy-hole band in the spherical average (gamma1 -
                        # 2 gamma_bar = 0.14, m_hh = 7 m0), hence an absurd 0.78 eV estimate
                        "acceptor_binding": Value(48e-3, "eV", "common practice: C acceptor in "
                                                  "GaP, about 48 meV" + _MEM)})


def _alp():
    d = _band("AlP", eg=3.63, alpha=0.5771, beta=372, egx=2.52, ax=0.318, bx=588,
              egl=3.57, al=0.318, bl=588, vbo=-1.74, so=0.07, me=0.22,
              g1=3.35, g2=0.71, g3=1.23, mxl=2.68, mxt=0.155, mll=1.2, mlt=0.15, eps=9.8,
              unsure=("l_mass_long", "l_mass_trans"))
    stand_in = ("typical III-V value (that of GaP) standing in: no AlP value recalled from "
                f"{_V}; uncertain")
    for k in ("l_mass_long", "l_mass_trans"):
        d[k] = Value(d[k].value, "m0", stand_in)
    return d


# --------------------------------------------------------------------- strain data
_VDW = "Van de Walle, Phys. Rev. B 39, 1871 (1989)"
_ANG = 0.1   # nm per Å
#: typical pressure coefficients of the indirect gaps of III-V's (eV/GPa), from memory:
#: X about -1.4 meV/kbar (GaAs -1.35, GaP -1.1, Si -1.41), L about +5 meV/kbar (GaAs, Ge)
_DEDP_X = -0.014
_DEDP_L = +0.050
_XI_U_X = 6.0     # eV, typical III-V X-valley shear potential (Si: 9.16, Van de Walle 1989)
_XI_U_L = 15.0    # eV, typical L-valley shear potential (Ge: 16.2, Van de Walle 1989)

#: name -> (a at 300 K [Å], da/dT [Å/K], C11, C12, C44 [GPa], a_c, |a_v|, b, d [eV]),
#: all from the binary's table of the review, recalled from memory.  The review prints the
#: elastic constants as e.g. 1221 (units of 0.1 GPa, i.e. kbar); they are stored in GPa.
_STRAIN = {
    "GaAs": (5.65325, 3.88e-5, 122.1, 56.6, 60.0, -7.17, 1.16, -2.0, -4.8),
    "AlAs": (5.6611, 2.90e-5, 125.0, 53.4, 54.2, -5.64, 2.47, -2.3, -3.4),
    "InAs": (6.0583, 2.74e-5, 83.29, 45.26, 39.59, -5.08, 1.00, -1.8, -3.6),
    "InP": (5.8687, 2.79e-5, 101.1, 56.1, 45.6, -6.0, 0.6, -2.0, -5.0),
    "GaSb": (6.0959, 4.72e-5, 88.42, 40.26, 43.22, -7.5, 0.8, -2.0, -4.7),
    "AlSb": (6.1355, 2.60e-5, 87.69, 43.41, 40.76, -4.5, 1.4, -1.35, -4.3),
    "InSb": (6.4794, 3.48e-5, 68.47, 37.35, 31.11, -6.94, 0.36, -2.0, -4.7),
    "GaP": (5.4505, 2.92e-5, 140.5, 62.03, 70.33, -8.2, 1.7, -1.6, -4.6),
    "AlP": (5.4672, 2.92e-5, 133.0, 63.0, 61.5, -5.7, 3.0, -1.5, -4.6),
}


def _strain_values(name):
    a, dadt, c11, c12, c44, ac, av, b, d = _STRAIN[name]
    t = _table(name) + _MEM
    bulk = (c11 + 2.0 * c12) / 3.0          # GPa, bulk modulus of the cubic crystal
    avs = (t + "; the magnitude is the review's, the sign is that of " + _VDW
           + " (ΔEv = +a_v Tr ε, a = a_c - a_v is the gap potential)")
    xsrc = (f"{_VDW} tabulates Ξ_d + Ξ_u/3 - a_v only for the band extrema of each material; "
            "here -B dE/dP with B = (C11 + 2 C12)/3 from the elastic constants above and a "
            "typical III-V {v} pressure coefficient {c:+.1f} meV/kbar (GaAs, GaP, Si, Ge), from "
            "memory, uncertain")
    return {
        "lattice_constant": Value(round(a * _ANG, 8), "nm", t + f" ({a} Å at 300 K)"),
        "lattice_expansion": Value(dadt * _ANG, "nm/K", t + f" ({dadt:g} Å/K)"),
        "elastic_c11": Value(c11, "GPa", t + " (printed in units of 0.1 GPa)"),
        "elastic_c12": Value(c12, "GPa", t + " (printed in units of 0.1 GPa)"),
        "elastic_c44": Value(c44, "GPa", t + " (printed in units of 0.1 GPa)"),
        "deformation_ac": Value(ac, "eV", t),
        "deformation_av": Value(av, "eV", avs),
        "deformation_b": Value(b, "eV", t),
        "deformation_d": Value(d, "eV", t),
        "x_deformation_gap": Value(round(-bulk * _DEDP_X, 6), "eV",
                                   xsrc.format(v="X-gap", c=_DEDP_X * 100)),
        "x_deformation_u": Value(_XI_U_X, "eV", "typical III-V X-valley value, from memory, "
                                 f"uncertain (Si Δ: 9.16 eV, {_VDW})"),
        "l_deformation_gap": Value(round(-bulk * _DEDP_L, 6), "eV",
                                   xsrc.format(v="L-gap", c=_DEDP_L * 100)),
        "l_deformation_u": Value(_XI_U_L, "eV", "typical L-valley value, from memory, uncertain "
                                 f"(Ge L: 16.2 eV, {_VDW}); unused for (001) growth"),
    }


def hole_dos_masses(g1, g2, g3):
    """Heavy- and light-hole density-of-states masses (m0) from the Luttinger parameters,
    spherical approximation of Lipari and Baldereschi, Phys. Rev. Lett. 25, 1660 (1970):
    gamma_bar = (2 gamma2 + 3 gamma3)/5, m_hh = 1/(gamma1 - 2 gamma_bar),
    m_lh = 1/(gamma1 + 2 gamma_bar).  Scalars or arrays.  The bulk valence DOS mass is
    m_v = (m_hh^(3/2) + m_lh^(3/2))^(2/3) (:func:`valence_dos_mass`)."""
    gbar = (2.0 * g2 + 3.0 * g3) / 5.0
    return 1.0 / (g1 - 2.0 * gbar), 1.0 / (g1 + 2.0 * gbar)


def valence_dos_mass(g1, g2, g3):
    """Combined hh + lh DOS mass (m0): m_v^(3/2) = m_hh^(3/2) + m_lh^(3/2), both from
    :func:`hole_dos_masses` (the one rule, used by alloys.derived too)."""
    mhh, mlh = hole_dos_masses(g1, g2, g3)
    return (mhh ** 1.5 + mlh ** 1.5) ** (2.0 / 3.0)


def _add_hydrogenic(d):
    """Dopant binding energies where no common-practice value is stored:
    hydrogenic estimate Ry m*/eps^2 (Ry = 13.6057 eV), with the Γ mass for
    donors and the combined valence DOS mass for acceptors (acceptors are not
    really hydrogenic: a rough estimate)."""
    me = d["electron_mass"].value
    eps = d["permittivity"].value
    if "donor_binding" not in d:
        d["donor_binding"] = Value(
            round(_RYD * me / eps ** 2, 6), "eV",
            "hydrogenic estimate 13.6 eV m_e/eps^2 from the mass and permittivity above")
    if "acceptor_binding" not in d:
        mv = valence_dos_mass(d["luttinger_gamma1"].value, d["luttinger_gamma2"].value,
                              d["luttinger_gamma3"].value)
        d["acceptor_binding"] = Value(
            round(_RYD * mv / eps ** 2, 6), "eV",
            "hydrogenic estimate 13.6 eV m_v_dos/eps^2 from the Luttinger parameters and "
            "permittivity above (rough: acceptors are not hydrogenic)")
    return {k: d[k] for k in PARAMETERS}   # fixed order


def _binary(name, table):
    table.update(_strain_values(name))
    return _add_hydrogenic(table)


BINARIES = {
    "GaAs": _binary("GaAs", _gaas()),
    "AlAs": _binary("AlAs", _alas()),
    "InAs": _binary("InAs", _inas()),
    "InP": _binary("InP", _inp()),
    "GaSb": _binary("GaSb", _gasb()),
    "AlSb": _binary("AlSb", _alsb()),
    "InSb": _binary("InSb", _insb()),
    "GaP": _binary("GaP", _gap()),
    "AlP": _binary("AlP", _alp()),
}

#: crystal structure of each library material (selfcon.model.strain picks its strain model
#: by it; the wurtzite nitrides will add "wurtzite")
CRYSTAL = {name: "zincblende" for name in BINARIES}


def _bowings(name, **given):
    """Bowing table of one alloy; anything not given is zero (linear)."""
    src = f"{_V}, {name} bowing parameters"
    out = {}
    for key in BOWED:
        unit = PARAMETERS[key][0]
        if key in given:
            c0, c1, note = given[key]
            out[key] = Bowing(c0, c1, unit, src + note)
        else:
            out[key] = Bowing(0.0, 0.0, unit, src + ": none given (linear)" + _MEM)
    return out


_UNS = ", from memory, uncertain"


def _ternary(name, end0, end1, meaning, **bowing):
    return Alloy(name, end0, end1, meaning, _bowings(name, **bowing))


ALLOYS = {
    "AlGaAs": _ternary(
        "AlGaAs", "GaAs", "AlAs", "x = Al fraction: Al_x Ga_(1-x) As",
        band_gap=(-0.127, 1.310, " (x-dependent: C = -0.127 + 1.310 x)"),
        x_gap=(0.055, 0.0, _MEM),
        l_gap=(0.0, 0.0, _MEM)),
    "InGaAs": _ternary(
        "InGaAs", "GaAs", "InAs", "x = In fraction: In_x Ga_(1-x) As",
        band_gap=(0.477, 0.0, ""),
        x_gap=(1.4, 0.0, _MEM),
        l_gap=(0.33, 0.0, _MEM),
        valence_band_offset=(-0.38, 0.0, ""),
        electron_mass=(0.0091, 0.0, ""),
        spin_orbit=(0.15, 0.0, _MEM),
        deformation_ac=(2.61, 0.0, _MEM)),
    "InAlAs": _ternary(
        "InAlAs", "AlAs", "InAs", "x = In fraction: In_x Al_(1-x) As",
        band_gap=(0.70, 0.0, ""),
        x_gap=(0.0, 0.0, _MEM),
        l_gap=(0.0, 0.0, _MEM),
        valence_band_offset=(-0.64, 0.0, ""),
        electron_mass=(0.049, 0.0, ""),
        spin_orbit=(0.15, 0.0, _MEM),
        deformation_ac=(-1.4, 0.0, _MEM)),
    "AlGaSb": _ternary(
        "AlGaSb", "GaSb", "AlSb", "x = Al fraction: Al_x Ga_(1-x) Sb",
        band_gap=(-0.044, 1.22, " (x-dependent: C = -0.044 + 1.22 x)" + _MEM),
        spin_orbit=(0.3, 0.0, _MEM)),
    "InGaSb": _ternary(
        "InGaSb", "GaSb", "InSb", "x = In fraction: In_x Ga_(1-x) Sb",
        band_gap=(0.415, 0.0, _MEM),
        x_gap=(0.33, 0.0, _MEM),
        l_gap=(0.4, 0.0, _MEM),
        spin_orbit=(0.1, 0.0, _MEM),
        electron_mass=(0.0092, 0.0, _MEM)),
    "InAsSb": _ternary(
        "InAsSb", "InSb", "InAs", "x = As fraction: In As_x Sb_(1-x)",
        band_gap=(0.67, 0.0, _MEM),
        x_gap=(0.6, 0.0, _MEM),
        l_gap=(0.6, 0.0, _MEM),
        spin_orbit=(1.2, 0.0, _MEM),
        electron_mass=(0.035, 0.0, _MEM)),
    "GaAsSb": _ternary(
        "GaAsSb", "GaSb", "GaAs", "x = As fraction: Ga As_x Sb_(1-x)",
        band_gap=(1.43, 0.0, _MEM),
        x_gap=(1.2, 0.0, _MEM),
        l_gap=(1.2, 0.0, _MEM),
        spin_orbit=(0.6, 0.0, _MEM),
        valence_band_offset=(-1.06, 0.0, _MEM)),
    "AlAsSb": _ternary(
        "AlAsSb", "AlSb", "AlAs", "x = As fraction: Al As_x Sb_(1-x)",
        band_gap=(0.8, 0.0, _MEM),
        x_gap=(0.28, 0.0, _MEM),
        l_gap=(0.28, 0.0, _MEM),
        spin_orbit=(0.15, 0.0, _MEM),
        valence_band_offset=(-1.71, 0.0, _MEM)),
    "InGaP": _ternary(
        "InGaP", "GaP", "InP", "x = In fraction: In_x Ga_(1-x) P",
        band_gap=(0.65, 0.0, _MEM),
        x_gap=(0.20, 0.0, _MEM),
        l_gap=(1.03, 0.0, _MEM),
        electron_mass=(0.01854, 0.0, _MEM)),
    "AlInP": _ternary(
        "AlInP", "InP", "AlP", "x = Al fraction: Al_x In_(1-x) P",
        band_gap=(-0.48, 0.0, _UNS),
        x_gap=(0.38, 0.0, _UNS),
        valence_band_offset=(-0.19, 0.0, _UNS)),
    "GaAsP": _ternary(
        "GaAsP", "GaP", "GaAs", "x = As fraction: Ga As_x P_(1-x)",
        band_gap=(0.19, 0.0, _MEM),
        x_gap=(0.24, 0.0, _MEM),
        l_gap=(0.16, 0.0, _MEM)),
    "InAsP": _ternary(
        "InAsP", "InP", "InAs", "x = As fraction: In As_x P_(1-x)",
        band_gap=(0.10, 0.0, _MEM),
        x_gap=(0.27, 0.0, _MEM),
        l_gap=(0.27, 0.0, _MEM),
        spin_orbit=(0.16, 0.0, _MEM)),
}


class Quaternary(NamedTuple):
    """A quaternary interpolated from its four (or three) ternaries.

    ``kind`` "two-sublattice": A_x B_(1-x) C_y D_(1-y) (x on the group-III, y on the group-V
    sublattice); ``corners`` maps (x, y) in {0, 1}^2 to the binary there and ``edges`` names
    the ternary on each edge: "y=1" and "y=0" are functions of x, "x=1" and "x=0" of y (each
    ternary's own x is then that composition).
    ``kind`` "one-sublattice": A_x B_y C_(1-x-y) D; ``corners`` maps "A", "B", "C" to binaries
    and ``edges`` maps the pairs "AB", "BC", "AC" to (ternary, the corner its x counts).
    ``gap_bowing``: (C_Q in eV, source) of an extra quaternary term on the Γ gap,
    -C_Q x(1-x) y(1-y) (two sublattices) or -C_Q x y (1-x-y) (one sublattice); None: none.
    """
    name: str
    kind: str
    meaning_of_x: str
    meaning_of_y: str
    corners: dict
    edges: dict
    source: str
    gap_bowing: tuple | None = None


_QUAT_RULE = (f"{_V}: quaternary parameters interpolated from the ternaries (bowing included) "
              "with the weighted form of Glisson et al. (two mixed sublattices) and of "
              "Williams et al. (three elements on one sublattice); no extra quaternary bowing is "
              "applied" + _MEM)

QUATERNARIES = {
    "InGaAsP": Quaternary(
        "InGaAsP", "two-sublattice",
        "x = In fraction of the group-III sublattice: In_x Ga_(1-x) As_y P_(1-y)",
        "y = As fraction of the group-V sublattice",
        {(1, 1): "InAs", (1, 0): "InP", (0, 1): "GaAs", (0, 0): "GaP"},
        {"y=1": "InGaAs", "y=0": "InGaP", "x=1": "InAsP", "x=0": "GaAsP"},
        _QUAT_RULE,
        gap_bowing=(1.40, "fitted by us (least squares, 0 <= y <= 1) to the measured gap of "
                          "InGaAsP lattice-matched to InP, Eg = 1.35 - 0.72 y + 0.12 y^2 eV at "
                          "300 K, Nahory, Pollack, Johnston and Barns, Appl. Phys. Lett. 33, 659 "
                          "(1978), from memory: the ternary interpolation alone lies up to 62 meV "
                          "above it, with the term within 19 meV")),
    "AlGaInAs": Quaternary(
        "AlGaInAs", "one-sublattice",
        "x = Al fraction: Al_x Ga_y In_(1-x-y) As",
        "y = Ga fraction (x + y <= 1; In is the rest)",
        {"A": "AlAs", "B": "GaAs", "C": "InAs"},
        {"AB": ("AlGaAs", "A"), "BC": ("InGaAs", "C"), "AC": ("InAlAs", "C")},
        _QUAT_RULE),
}

#: how alloys treat each parameter without a bowing parameter: key -> source of the rule
_VARSHNI_RULE = ("the Varshni shift is applied to each end binary and the gaps at T are then "
                 "bowed (Vurgaftman 2001 practice, from memory); the alloy's own α, β are the "
                 "linear mean, used only when a deck-local material overrides one of them")
_LUTT_RULE = ("linear interpolation (Vurgaftman 2001 recommend linear interpolation of the "
              "Luttinger parameters for these alloys, from memory)")
_LIN = "linear interpolation, common practice"
ALLOY_RULES = {
    "varshni_alpha": _VARSHNI_RULE, "varshni_beta": _VARSHNI_RULE,
    "x_varshni_alpha": _VARSHNI_RULE, "x_varshni_beta": _VARSHNI_RULE,
    "l_varshni_alpha": _VARSHNI_RULE, "l_varshni_beta": _VARSHNI_RULE,
    "luttinger_gamma1": _LUTT_RULE, "luttinger_gamma2": _LUTT_RULE,
    "luttinger_gamma3": _LUTT_RULE,
    "x_mass_long": _LIN, "x_mass_trans": _LIN, "l_mass_long": _LIN, "l_mass_trans": _LIN,
    "permittivity": _LIN, "donor_binding": _LIN, "acceptor_binding": _LIN,
    "lattice_constant": "Vegard's law (linear in x), as the review recommends, common practice",
    "lattice_expansion": _LIN,
    "elastic_c11": _LIN, "elastic_c12": _LIN, "elastic_c44": _LIN,
    "deformation_av": _LIN, "deformation_b": _LIN, "deformation_d": _LIN,
    "x_deformation_gap": _LIN, "x_deformation_u": _LIN,
    "l_deformation_gap": _LIN, "l_deformation_u": _LIN,
}
