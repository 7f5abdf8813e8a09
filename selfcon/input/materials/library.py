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

Hole density-of-states masses (``hole_dos_mass_hh``, ``hole_dos_mass_lh``): a cubic binary
either stores measured ones (GaP: Levinshtein, Rumyantsev and Shur 1996), which take
precedence, or stores 0 and uses the spherical estimate of Lipari and Baldereschi from its
Luttinger parameters (:func:`hole_dos_masses`), allowed only up to MAX_SPHERICAL_HH_MASS
(building the library fails otherwise: :func:`spherical_hh_mass_error`).  Alloys with an end
that stores them interpolate the inverse masses (``alloys.blend_hole_dos_masses``).

Static permittivities are not in that paper; they come from S. M. Sze and
K. K. Ng, Physics of Semiconductor Devices, 3rd ed. (Wiley 2007), Appendix.

Wurtzite nitrides (GaN, AlN, InN; AlGaN, InGaN, InAlN; ``CRYSTAL[name] == "wurtzite"``):
band parameters, a and c, C11-C44, e31, e33 and the deformation potentials a1, a2, D1-D4
from I. Vurgaftman and J. R. Meyer, J. Appl. Phys. 94, 3675 (2003), the spontaneous
polarization with its nonlinear alloy bowing from O. Ambacher et al., J. Phys.: Condens.
Matter 14, 3399 (2002), both recalled from memory; the hole masses follow from A1..A4 by
:func:`wurtzite_hole_masses`.  Every binary carries every key of ``PARAMETERS``: the keys
of the other crystal's model (``WURTZITE_ONLY``, ``ZINCBLENDE_ONLY``) hold finite "not
applicable" fillers (their sources say so) that the model of the crystal never reads.

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
    "hole_dos_mass_hh": ("m0", "heavy-hole density-of-states mass of the bulk valence band; 0: "
                               "not stored, the spherical estimate 1/(γ1 - 2γ̄) of Lipari and "
                               "Baldereschi from the Luttinger parameters is used"),
    "hole_dos_mass_lh": ("m0", "light-hole density-of-states mass of the bulk valence band; 0: "
                               "not stored, the spherical estimate 1/(γ1 + 2γ̄) is used"),
    "x_mass_long": ("m0", "X-valley longitudinal mass"),
    "x_mass_trans": ("m0", "X-valley transverse mass"),
    "l_mass_long": ("m0", "L-valley longitudinal mass"),
    "l_mass_trans": ("m0", "L-valley transverse mass"),
    "x_valleys": ("1", "number of equivalent X/Δ conduction valleys: 3 at the X points of a "
                       "zincblende crystal, 6 Δ valleys in Si and Ge"),
    "permittivity": ("1", "static relative permittivity"),
    "donor_binding": ("eV", "donor binding energy (below the conduction minimum: Γ, or the X/Δ "
                            "or L valley where lower)"),
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
    # wurtzite (hexagonal) crystals grown along c: selfcon.model.strain, selfcon.model.polarization
    "lattice_constant_c": ("nm", "wurtzite: lattice constant c at 300 K (lattice_constant is a)"),
    "elastic_c13": ("GPa", "wurtzite: elastic stiffness C13"),
    "elastic_c33": ("GPa", "wurtzite: elastic stiffness C33"),
    "piezo_e31": ("C/m^2", "wurtzite: piezoelectric constant e31"),
    "piezo_e33": ("C/m^2", "wurtzite: piezoelectric constant e33"),
    "spontaneous_polarization": ("C/m^2", "wurtzite: spontaneous polarization along [0001] "
                                          "(negative in the nitrides)"),
    "crystal_field": ("eV", "wurtzite: crystal-field splitting Δcr of the valence band"),
    "electron_mass_perp": ("m0", "wurtzite: electron mass perpendicular to c, in the growth "
                                 "plane (electron_mass is the mass along c)"),
    "valence_a1": ("1", "wurtzite: valence-band parameter A1 (units of ħ²/2m0)"),
    "valence_a2": ("1", "wurtzite: valence-band parameter A2 (units of ħ²/2m0)"),
    "valence_a3": ("1", "wurtzite: valence-band parameter A3 (units of ħ²/2m0)"),
    "valence_a4": ("1", "wurtzite: valence-band parameter A4 (units of ħ²/2m0)"),
    "deformation_a1": ("eV", "wurtzite: interband deformation potential a1 = a_cz - D1 "
                             "(strain along c)"),
    "deformation_a2": ("eV", "wurtzite: interband deformation potential a2 = a_ct - D2 "
                             "(strain in the c plane)"),
    "deformation_d1": ("eV", "wurtzite: valence-band deformation potential D1"),
    "deformation_d2": ("eV", "wurtzite: valence-band deformation potential D2"),
    "deformation_d3": ("eV", "wurtzite: valence-band deformation potential D3"),
    "deformation_d4": ("eV", "wurtzite: valence-band deformation potential D4"),
}

#: parameters that only wurtzite crystals use, and those only zincblende crystals use (the
#: other crystal's table fills them with a "not applicable" value; `selfcon materials` hides them)
WURTZITE_ONLY = ("lattice_constant_c", "elastic_c13", "elastic_c33", "piezo_e31", "piezo_e33",
                 "spontaneous_polarization", "crystal_field", "electron_mass_perp",
                 "valence_a1", "valence_a2", "valence_a3", "valence_a4", "deformation_a1",
                 "deformation_a2", "deformation_d1", "deformation_d2", "deformation_d3",
                 "deformation_d4")
ZINCBLENDE_ONLY = ("x_gap", "x_varshni_alpha", "x_varshni_beta", "l_gap", "l_varshni_alpha",
                   "l_varshni_beta", "luttinger_gamma1", "luttinger_gamma2", "luttinger_gamma3",
                   "hole_dos_mass_hh", "hole_dos_mass_lh",
                   "x_mass_long", "x_mass_trans", "l_mass_long", "l_mass_trans", "x_valleys",
                   "deformation_ac", "deformation_av", "deformation_b", "deformation_d",
                   "x_deformation_gap", "x_deformation_u", "l_deformation_gap", "l_deformation_u")

#: parameters that carry a bowing parameter in alloys (the rest interpolate linearly)
BOWED = ("band_gap", "x_gap", "l_gap", "valence_band_offset", "electron_mass", "spin_orbit",
         "deformation_ac", "spontaneous_polarization")

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


#: measured hole masses where the Luttinger parameters of the review fail in the spherical
#: average (GaP): the handbook's values, with the check we could make
_LRS = ("Levinshtein, Rumyantsev and Shur (eds.), Handbook Series on Semiconductor Parameters, "
        "Vol. 1 (World Scientific 1996)")
_LRS_GAP = (_LRS + ", GaP, {band}: {m} m0, from memory; checked against the handbook's data "
            "as the Ioffe NSM archive serves them, Ga_x In_(1-x) P basic parameters, "
            "{rule} m0 (x = 1: GaP)")


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
                                                  "GaP, about 48 meV" + _MEM),
                        # stored for the same reason: the spherical estimate 1/(gamma1 -
                        # 2 gamma_bar) = 7.04 m0 would put N_v 25 times too high
                        "hole_dos_mass_hh": Value(0.79, "m0", _LRS_GAP.format(
                            band="heavy holes", m="0.79", rule="m_h = 0.6 + 0.19 x")),
                        "hole_dos_mass_lh": Value(0.14, "m0", _LRS_GAP.format(
                            band="light holes", m="0.14", rule="m_lp = 0.09 + 0.05 x"))})


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
    m_v = (m_hh^(3/2) + m_lh^(3/2))^(2/3) (:func:`valence_dos_mass`).  A material that
    stores its own masses (``hole_dos_mass_hh``, ``hole_dos_mass_lh``) uses those instead:
    :func:`material_hole_dos_masses`."""
    inv_hh, inv_lh = spherical_inverse_masses(g1, g2, g3)
    return 1.0 / inv_hh, 1.0 / inv_lh


def spherical_inverse_masses(g1, g2, g3):
    """(gamma1 - 2 gamma_bar, gamma1 + 2 gamma_bar), gamma_bar = (2 gamma2 + 3 gamma3)/5: the
    inverse heavy- and light-hole DOS masses (1/m0) of :func:`hole_dos_masses` (the one place
    the spherical average is written; the alloys' mass blend and the library checks take it
    from here).  Scalars or arrays."""
    gbar = (2.0 * g2 + 3.0 * g3) / 5.0
    return g1 - 2.0 * gbar, g1 + 2.0 * gbar


#: m0: the largest heavy-hole DOS mass the spherical estimate may give.  Measured heavy-hole
#: masses of the cubic III-V and group-IV crystals lie between about 0.3 and 1 m0
#: (Levinshtein, Rumyantsev and Shur 1996, from memory); an estimate above twice the
#: heaviest comes from a nearly cancelling gamma1 - 2 gamma_bar (gamma3 near gamma1/2, GaP:
#: 7 m0), which measures the warping of the band, not its density of states.  Such a
#: material must store its measured masses (selfcon rule, DEVELOPERS.md, "How to add a
#: material")
MAX_SPHERICAL_HH_MASS = 2.0


def material_hole_dos_masses(g1, g2, g3, stored_hh, stored_lh):
    """The heavy- and light-hole DOS masses (m0) a material uses: its stored value where it
    stores one (> 0), else the spherical estimate of :func:`hole_dos_masses` (the very same
    bits as before stored masses existed).  Scalars or arrays."""
    import numpy as np
    m_hh, m_lh = hole_dos_masses(g1, g2, g3)
    return np.where(stored_hh > 0.0, stored_hh, m_hh), np.where(stored_lh > 0.0, stored_lh, m_lh)


def spherical_hh_mass_error(name, g1, g2, g3, stored_hh):
    """A MaterialError if ``name`` stores no heavy-hole DOS mass (``stored_hh`` = 0) where
    the spherical estimate is not a mass between 0 and MAX_SPHERICAL_HH_MASS (gamma1 -
    2 gamma_bar below 1/MAX_SPHERICAL_HH_MASS), else None.  Scalars or arrays (the first
    offending cell is reported)."""
    import numpy as np
    from selfcon.errors import MaterialError
    den = np.atleast_1d(spherical_inverse_masses(np.asarray(g1, float), np.asarray(g2, float),
                                                 np.asarray(g3, float))[0])
    bad = (np.atleast_1d(stored_hh) <= 0.0) & ~(den >= 1.0 / MAX_SPHERICAL_HH_MASS)
    if not bad.any():
        return None
    d = float(np.broadcast_to(den, bad.shape)[np.flatnonzero(bad)[0]])
    estimate = f"{1.0 / d:.3g} m0" if d > 0.0 else "no positive mass"
    return MaterialError(
        f"{name} stores no heavy-hole density-of-states mass and its Luttinger parameters give "
        f"the spherical estimate 1/(gamma1 - 2 gamma_bar) = {estimate} "
        f"(gamma1 - 2 gamma_bar = {d:.3g}, gamma_bar = (2 gamma2 + 3 gamma3)/5), "
        f"above the {MAX_SPHERICAL_HH_MASS:g} m0 this estimate may give: give a measured "
        "hole_dos_mass_hh (and hole_dos_mass_lh; a deck-local material that sets Luttinger "
        "parameters does not keep its base's stored masses)",
        key=f"material.{name}.hole_dos_mass_hh", allowed="hole_dos_mass_hh > 0 (m0)")


def valence_dos_mass(g1, g2, g3, stored_hh=0.0, stored_lh=0.0):
    """Combined hh + lh DOS mass (m0): m_v^(3/2) = m_hh^(3/2) + m_lh^(3/2), both from
    :func:`material_hole_dos_masses` (the one rule, used by alloys.derived too)."""
    mhh, mlh = material_hole_dos_masses(g1, g2, g3, stored_hh, stored_lh)
    return (mhh ** 1.5 + mlh ** 1.5) ** (2.0 / 3.0)


#: the hole DOS masses of a cubic binary that stores none: the spherical estimate is used
_NOT_STORED = ("not stored: the spherical estimate of Lipari and Baldereschi, Phys. Rev. Lett. "
               "25, 1660 (1970), from the Luttinger parameters above is used")


def finish_cubic_table(name, d):
    """The last step of building a cubic binary's table ``d`` (key -> Value): the hole DOS
    masses it does not store get 0 with the rule as source, the spherical estimate of an
    entry that stores none is checked (MaterialError above MAX_SPHERICAL_HH_MASS: the
    library does not build), the dopant levels it does not store get their hydrogenic
    estimates.  Returns the table in the order of PARAMETERS."""
    for key in ("hole_dos_mass_hh", "hole_dos_mass_lh"):
        d.setdefault(key, Value(0.0, "m0", _NOT_STORED))
    err = spherical_hh_mass_error(name, d["luttinger_gamma1"].value, d["luttinger_gamma2"].value,
                                  d["luttinger_gamma3"].value, d["hole_dos_mass_hh"].value)
    if err is not None:
        raise err
    return _add_hydrogenic(d)


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
        mv = float(valence_dos_mass(d["luttinger_gamma1"].value, d["luttinger_gamma2"].value,
                                    d["luttinger_gamma3"].value, d["hole_dos_mass_hh"].value,
                                    d["hole_dos_mass_lh"].value))
        d["acceptor_binding"] = Value(
            round(_RYD * mv / eps ** 2, 6), "eV",
            "hydrogenic estimate 13.6 eV m_v_dos/eps^2 from the Luttinger parameters and "
            "permittivity above (rough: acceptors are not hydrogenic)")
    return {k: d[k] for k in PARAMETERS}   # fixed order


#: "not applicable" fillers of the wurtzite-only parameters in a zincblende table, finite and
#: harmless: (001) growth of a cubic crystal has no spontaneous polarization and no
#: piezoelectric polarization along z (its only constant e14 couples to shear strain), no
#: crystal field, an isotropic electron mass, and C13 = C12, C33 = C11, c = a for the [001]
#: axis; the rest 0 (the zincblende model never reads them)
_NA_ZB = "not applicable: zincblende (this parameter belongs to the wurtzite model)"


def _zincblende_fill(table):
    same = {"lattice_constant_c": "lattice_constant", "elastic_c13": "elastic_c12",
            "elastic_c33": "elastic_c11", "electron_mass_perp": "electron_mass"}
    out = {}
    for key in WURTZITE_ONLY:
        if key in same:
            value, why = table[same[key]].value, f"; equal to {same[key]} for a cubic crystal"
        else:
            value, why = 0.0, ""
        out[key] = Value(value, PARAMETERS[key][0], _NA_ZB + why)
    return out


#: equivalent X valleys of a zincblende crystal: six half valleys at the zone-boundary X
#: points, three full ones (common practice)
_X_VALLEYS_ZB = Value(3.0, "1", "common practice: six half valleys at the X points of the "
                                "zincblende Brillouin zone, three full valleys")


def _binary(name, table):
    table.setdefault("x_valleys", _X_VALLEYS_ZB)
    table.update(_strain_values(name))
    table.update(_zincblende_fill(table))
    return finish_cubic_table(name, table)


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


# --------------------------------------------------------------------- group IV: Si, Ge
#: Si and Ge (diamond lattice).  Their (001) strain follows the cubic model of
#: selfcon.model.strain like the zincblende binaries (CRYSTAL says "zincblende": the strain,
#: valley and hole models only need the cubic symmetry).  The conduction minima are the six
#: Δ valleys of Si (``x_*`` keys: the X/Δ valley set) and the four L valleys of Ge.  Every
#: value was recalled from memory (no copy of a paper was consulted while writing this file);
#: each source says so.
_VDWM = "Van de Walle and Martin, Phys. Rev. B 34, 5621 (1986)"
_THURMOND = "Thurmond, J. Electrochem. Soc. 122, 1133 (1975)"
_WA = "Weber and Alonso, Phys. Rev. B 40, 5683 (1989)"
_LAWAETZ = "Lawaetz, Phys. Rev. B 4, 3460 (1971)"
_RV = "Rieger and Vogl, Phys. Rev. B 48, 14276 (1993)"
_SCH = "Schäffler, Semicond. Sci. Technol. 12, 1515 (1997)"
#: valence-band top of Ge on the common scale: 0.56 eV above that of GaAs (-0.80 eV), the
#: Ge/GaAs (110) valence offset (common practice, from memory); Si from Van de Walle and Martin
_GE_VBO = -0.24
#: Ge minus Si average valence energy E_v,av (Van de Walle and Martin 1986, model-solid theory)
_DEV_AV_GE_SI = 0.54
#: shallow dopants (eV): name -> {species: (binding, source)}, the first donor and acceptor
#: listed are the materials' donor_binding and acceptor_binding
_RR = "Ramdas and Rodriguez, Rep. Prog. Phys. 44, 1297 (1981)"
GROUP_IV_DOPANTS = {
    "Si": {"P": (0.0456, f"{_RR}, P donor in Si, 45.6 meV" + _MEM),
           "As": (0.0537, f"{_RR}, As donor in Si, 53.7 meV" + _MEM),
           "B": (0.0450, f"{_RR}, B acceptor in Si, 45 meV" + _MEM)},
    "Ge": {"P": (0.0120, f"{_RR}, P donor in Ge, 12.0 meV" + _MEM),
           "As": (0.0127, f"{_RR}, As donor in Ge, 12.7 meV" + _MEM),
           "B": (0.0104, f"{_RR}, B acceptor in Ge, 10.4 meV" + _MEM)},
}
#: the species of each kind (donors, acceptors) with binding energies in GROUP_IV_DOPANTS
DONOR_SPECIES = ("P", "As")
ACCEPTOR_SPECIES = ("B",)


def _cubic_lattice(name, a, expansion, c11, c12, c44):
    """Lattice constant (nm at 300 K), its temperature coefficient (a times the linear
    expansion coefficient ``expansion``, 1/K) and elastic constants (GPa) of Si or Ge."""
    hb = f"Madelung (ed.), Semiconductors: Data Handbook (Springer 2004), {name}" + _MEM
    return {
        "lattice_constant": Value(a, "nm", f"{hb} ({a * 10:.4f} Å at 300 K)"),
        "lattice_expansion": Value(round(a * expansion, 14), "nm/K",
                                   f"a times the thermal expansion coefficient {expansion:g} 1/K "
                                   "at 300 K (common practice)" + _MEM),
        "elastic_c11": Value(c11, "GPa", f"{_VDW}, Table" + _MEM),
        "elastic_c12": Value(c12, "GPa", f"{_VDW}, Table" + _MEM),
        "elastic_c44": Value(c44, "GPa", hb),
    }


def _group_iv(name):
    m = _MEM
    u = ", from memory, uncertain"
    if name == "Si":
        vbo_src = (f"{_VDWM}: E_v,av of Ge lies {_DEV_AV_GE_SI} eV above that of Si; the top "
                   "of each lies Δso/3 above its E_v,av, so the Si top lies 0.54 + (0.296 - "
                   "0.044)/3 = 0.624 eV below that of Ge" + m)
        gap_g = "the Γ15 conduction state of Si (E0' about 3.4 eV); a stand-in: the Γ minimum " \
                "lies 2 eV above the Δ valleys and holds no electrons" + u
        d = {
            "band_gap": Value(3.40, "eV", gap_g),
            "varshni_alpha": Value(4.73e-4, "eV/K", "the Δ gap's Varshni α standing in" + u),
            "varshni_beta": Value(636.0, "K", "the Δ gap's Varshni β standing in" + u),
            "x_gap": Value(1.170, "eV", f"{_THURMOND}, indirect (Δ) gap at 0 K" + m),
            "x_varshni_alpha": Value(4.73e-4, "eV/K", f"{_THURMOND}" + m),
            "x_varshni_beta": Value(636.0, "K", f"{_THURMOND}" + m),
            "l_gap": Value(2.010, "eV", f"{_WA}: the L branch of the SiGe gap, 2.010 - 1.27 x eV, "
                                        "at x = 0" + m),
            "l_varshni_alpha": Value(4.73e-4, "eV/K", "the Δ gap's Varshni α standing in" + u),
            "l_varshni_beta": Value(636.0, "K", "the Δ gap's Varshni β standing in" + u),
            "valence_band_offset": Value(round(_GE_VBO - _DEV_AV_GE_SI - (0.296 - 0.044) / 3.0, 6),
                                         "eV", vbo_src),
            "spin_orbit": Value(0.044, "eV", "Madelung (ed.), Semiconductors: Data Handbook "
                                              "(Springer 2004), Si" + m),
            "electron_mass": Value(0.30, "m0", "stand-in for the Γ15 conduction mass (never "
                                               "populated: 2 eV above Δ)" + u),
            "luttinger_gamma1": Value(4.285, "1", _LAWAETZ + m),
            "luttinger_gamma2": Value(0.339, "1", _LAWAETZ + m),
            "luttinger_gamma3": Value(1.446, "1", _LAWAETZ + m),
            "x_mass_long": Value(0.916, "m0", "Hensel, Hasegawa and Nakayama, Phys. Rev. 138, "
                                              "A225 (1965), Δ valley" + m),
            "x_mass_trans": Value(0.190, "m0", "Hensel, Hasegawa and Nakayama, Phys. Rev. 138, "
                                               "A225 (1965), Δ valley" + m),
            "l_mass_long": Value(1.70, "m0", f"{_RV}, Si L valley" + u),
            "l_mass_trans": Value(0.12, "m0", f"{_RV}, Si L valley" + u),
            "x_valleys": Value(6.0, "1", "six Δ valleys along <100>, inside the zone (common "
                                         "practice)"),
            "permittivity": Value(11.9, "1", _SZE),
            **_cubic_lattice("Si", 0.54310, 2.6e-6, 165.8, 63.9, 79.6),
            "deformation_ac": Value(-10.06, "eV", "Γ15 conduction potential; a stand-in (the Γ "
                                                  "minimum is never populated)" + u),
            "deformation_av": Value(2.46, "eV", f"{_VDW}, Si (ΔEv,av = +a_v Tr ε)" + m),
            "deformation_b": Value(-2.35, "eV", f"{_VDW}, Si" + m),
            "deformation_d": Value(-5.32, "eV", f"{_VDW}, Si" + u),
            "x_deformation_gap": Value(1.72, "eV", f"{_VDW}, Si Δ valleys: Ξ_d + Ξ_u/3 - a_v" + m),
            "x_deformation_u": Value(9.16, "eV", f"{_VDW}, Si Δ valleys: Ξ_u" + m),
            "l_deformation_gap": Value(-3.12, "eV", f"{_VDW}, Si L valleys: Ξ_d + Ξ_u/3 - a_v" + u),
            "l_deformation_u": Value(16.14, "eV", f"{_VDW}, Si L valleys: Ξ_u" + u),
        }
    else:
        d = {
            "band_gap": Value(0.8893, "eV", "direct (Γ) gap of Ge at 0 K, 0.80 eV at 300 K (common "
                                            "practice)" + m),
            "varshni_alpha": Value(6.842e-4, "eV/K", "Varshni α of the Ge direct gap (common "
                                                     "practice)" + u),
            "varshni_beta": Value(398.0, "K", "Varshni β of the Ge direct gap (common practice)" + u),
            "x_gap": Value(0.85, "eV", "Ge Δ minimum, about 0.85 eV above the valence top (common "
                                       "practice)" + u),
            "x_varshni_alpha": Value(4.73e-4, "eV/K", "the Si Δ gap's α standing in" + u),
            "x_varshni_beta": Value(636.0, "K", "the Si Δ gap's β standing in" + u),
            "l_gap": Value(0.744, "eV", f"{_THURMOND}, indirect (L) gap of Ge at 0 K" + m),
            "l_varshni_alpha": Value(4.774e-4, "eV/K", f"{_THURMOND}" + m),
            "l_varshni_beta": Value(235.0, "K", f"{_THURMOND}" + m),
            "valence_band_offset": Value(_GE_VBO, "eV", "0.56 eV above GaAs (-0.80 eV on the "
                                         "common scale), the Ge/GaAs valence offset (common "
                                         "practice)" + u),
            "spin_orbit": Value(0.296, "eV", "Madelung (ed.), Semiconductors: Data Handbook "
                                             "(Springer 2004), Ge" + m),
            "electron_mass": Value(0.038, "m0", "Γ mass of Ge (common practice)" + m),
            "luttinger_gamma1": Value(13.38, "1", _LAWAETZ + m),
            "luttinger_gamma2": Value(4.24, "1", _LAWAETZ + m),
            "luttinger_gamma3": Value(5.69, "1", _LAWAETZ + m),
            "x_mass_long": Value(1.353, "m0", f"{_RV}, Ge Δ valley" + u),
            "x_mass_trans": Value(0.288, "m0", f"{_RV}, Ge Δ valley" + u),
            "l_mass_long": Value(1.588, "m0", "Levinger and Frankl, J. Phys. Chem. Solids 20, 281 "
                                              "(1961), Ge L valley" + m),
            "l_mass_trans": Value(0.0815, "m0", "Levinger and Frankl, J. Phys. Chem. Solids 20, 281 "
                                                "(1961), Ge L valley" + m),
            "x_valleys": Value(6.0, "1", "six Δ valleys along <100> (common practice)"),
            "permittivity": Value(16.0, "1", _SZE),
            **_cubic_lattice("Ge", 0.56579, 5.9e-6, 128.5, 48.3, 66.8),
            "deformation_ac": Value(-8.24, "eV", "Γ conduction potential of Ge (common practice)" + u),
            "deformation_av": Value(1.24, "eV", f"{_VDW}, Ge (ΔEv,av = +a_v Tr ε)" + m),
            "deformation_b": Value(-2.86, "eV", f"{_VDW}, Ge" + m),
            "deformation_d": Value(-5.28, "eV", f"{_VDW}, Ge" + u),
            "x_deformation_gap": Value(1.31, "eV", f"{_VDW}, Ge Δ valleys: Ξ_d + Ξ_u/3 - a_v" + u),
            "x_deformation_u": Value(9.42, "eV", f"{_VDW}, Ge Δ valleys: Ξ_u" + u),
            "l_deformation_gap": Value(-2.78, "eV", f"{_VDW}, Ge L valleys: Ξ_d + Ξ_u/3 - a_v" + m),
            "l_deformation_u": Value(16.23, "eV", f"{_VDW}, Ge L valleys: Ξ_u" + m),
        }
    dop = GROUP_IV_DOPANTS[name]
    d["donor_binding"] = Value(dop["P"][0], "eV", dop["P"][1] + " (P is the library's donor)")
    d["acceptor_binding"] = Value(dop["B"][0], "eV", dop["B"][1] + " (B is the library's acceptor)")
    d.update(_zincblende_fill(d))
    return finish_cubic_table(name, d)


BINARIES.update({"Si": _group_iv("Si"), "Ge": _group_iv("Ge")})


# --------------------------------------------------------------------- wurtzite nitrides
#: the wurtzite band parameters: I. Vurgaftman and J. R. Meyer, J. Appl. Phys. 94, 3675 (2003),
#: recalled from memory (no copy of the paper was consulted while writing this file)
_VM = "Vurgaftman and Meyer, J. Appl. Phys. 94, 3675 (2003)"
#: spontaneous polarization: the binaries of Bernardini and Fiorentini as used, with the
#: nonlinear (bowed) alloy dependence, by Ambacher et al. 2002
_AMB02 = "Ambacher et al., J. Phys.: Condens. Matter 14, 3399 (2002)"
_CC96 = "Chuang and Chang, Phys. Rev. B 54, 2491 (1996)"


def wurtzite_valence_edges(delta_cr, delta_so, lam=0.0, theta=0.0):
    """Valence-band edges (eV) at k = 0 of a wurtzite crystal, heavy hole (A, Γ9), light hole
    (B, upper Γ7) and crystal-field split-off hole (C, lower Γ7), on the scale of
    S. L. Chuang and C. S. Chang, Phys. Rev. B 54, 2491 (1996):
        E_hh = Δ1 + Δ2 + θ + λ,
        E_lh = (Δ1 - Δ2 + θ)/2 + λ + sqrt(((Δ1 - Δ2 + θ)/2)^2 + 2 Δ3^2),
        E_ch = (Δ1 - Δ2 + θ)/2 + λ - sqrt(((Δ1 - Δ2 + θ)/2)^2 + 2 Δ3^2),
    with Δ1 = Δcr and the quasi-cubic Δ2 = Δ3 = Δso/3; λ = D1 ε_zz + D2 (ε_xx + ε_yy) and
    θ = D3 ε_zz + D4 (ε_xx + ε_yy) are the strain terms (0: unstrained).  Scalars or arrays.
    A negative crystal field (AlN) puts the light hole (the Z-like Γ7 state) on top."""
    import numpy as np
    d1 = np.asarray(delta_cr, float)
    d2 = np.asarray(delta_so, float) / 3.0
    half = 0.5 * (d1 - d2 + theta)
    root = np.sqrt(half * half + 2.0 * d2 * d2)
    return d1 + d2 + theta + lam, half + lam + root, half + lam - root


def wurtzite_hole_masses(a1, a2, a3, a4, delta_cr, delta_so, lam=0.0, theta=0.0):
    """Band-edge hole masses (m0) of a wurtzite crystal, along c (``_par``) and in the c
    plane (``_perp``), from the valence-band parameters A1..A4 (units of ħ²/2m0) by the k = 0
    expressions of Chuang and Chang, Phys. Rev. B 54, 2491 (1996):
        m_hh_par = -1/(A1 + A3),             m_hh_perp = -1/(A2 + A4),
        m_lh_par = -1/(A1 + f_lh A3),        m_lh_perp = -1/(A2 + f_lh A4),
        m_ch_par = -1/(A1 + f_ch A3),        m_ch_perp = -1/(A2 + f_ch A4),
    f_lh = (E_lh - λ)/(E_lh - E_ch), f_ch = 1 - f_lh = (λ - E_ch)/(E_lh - E_ch), the edges of
    :func:`wurtzite_valence_edges` (f: the X,Y-like share of the state; the crystal field
    and the strain change it).  Returns a dict of arrays; a non-positive mass comes back as
    it is (the caller refuses it)."""
    import numpy as np
    e_hh, e_lh, e_ch = wurtzite_valence_edges(delta_cr, delta_so, lam, theta)
    den = e_lh - e_ch
    safe = np.where(den > 0.0, den, 1.0)
    f_lh = np.where(den > 0.0, (e_lh - lam) / safe, 1.0)
    f_ch = 1.0 - f_lh
    a1, a2, a3, a4 = (np.asarray(v, float) for v in (a1, a2, a3, a4))
    with np.errstate(divide="ignore"):
        return {"m_hh_par": -1.0 / (a1 + a3), "m_hh_perp": -1.0 / (a2 + a4),
                "m_lh_par": -1.0 / (a1 + f_lh * a3), "m_lh_perp": -1.0 / (a2 + f_lh * a4),
                "m_ch_par": -1.0 / (a1 + f_ch * a3), "m_ch_perp": -1.0 / (a2 + f_ch * a4)}


def anisotropic_dos_mass(m_par, m_perp):
    """Density-of-states mass (m_perp^2 m_par)^(1/3) of an ellipsoidal band (common practice)."""
    return (m_perp * m_perp * m_par) ** (1.0 / 3.0)


#: "not applicable" fillers of the zincblende-only parameters in a wurtzite table
_NA_WZ = "not applicable: wurtzite (this parameter belongs to the zincblende model)"


def _wurtzite_fill(eg, alpha, beta):
    """The zincblende-only parameters of a wurtzite table: X and L valleys placed
    FILL_VALLEY_OFFSET = 10 eV above the Γ gap with its Varshni terms (they hold no electrons:
    the wurtzite model has no X/L valleys; selfcon convention, as for deck-local materials),
    masses 1 m0, Luttinger γ1 = 1, γ2 = γ3 = 0 (unused: the hole masses come from
    valence_a1..a4), zincblende deformation potentials 0 (unused)."""
    fill = {"x_gap": eg + 10.0, "l_gap": eg + 10.0, "x_varshni_alpha": alpha,
            "l_varshni_alpha": alpha, "x_varshni_beta": beta, "l_varshni_beta": beta,
            "luttinger_gamma1": 1.0, "luttinger_gamma2": 0.0, "luttinger_gamma3": 0.0,
            "x_mass_long": 1.0, "x_mass_trans": 1.0, "l_mass_long": 1.0, "l_mass_trans": 1.0,
            "x_valleys": 3.0}
    out = {}
    for key in ZINCBLENDE_ONLY:
        out[key] = Value(float(fill.get(key, 0.0)), PARAMETERS[key][0], _NA_WZ)
    return out


#: name -> (a [Å], c [Å], da/dT relative [1/K], Eg(0) [eV], alpha [meV/K], beta [K], VBO [eV],
#:          Δcr, Δso [eV], me_par, me_perp [m0], A1..A4, a1, a2, D1..D4 [eV],
#:          C11, C12, C13, C33, C44 [GPa], e31, e33, Psp [C/m^2], eps33)
_NITRIDE = {
    "GaN": (3.189, 5.185, 5.59e-6, 3.510, 0.909, 830, -2.64, 0.010, 0.017, 0.20, 0.20,
            -7.21, -0.44, 6.68, -3.46, -4.9, -11.3, -3.7, 4.5, 8.2, -4.1,
            390, 145, 106, 398, 105, -0.35, 1.27, -0.034, 10.4),
    "AlN": (3.112, 4.982, 4.2e-6, 6.25, 1.799, 1462, -3.44, -0.169, 0.019, 0.32, 0.30,
            -3.86, -0.25, 3.58, -1.32, -3.4, -11.8, -17.1, 7.9, 8.8, -3.9,
            396, 137, 108, 373, 116, -0.50, 1.79, -0.090, 9.14),
    "InN": (3.545, 5.703, 3.8e-6, 0.78, 0.245, 624, -2.14, 0.040, 0.005, 0.07, 0.07,
            -8.21, -0.68, 7.57, -5.23, -3.5, -3.5, -3.7, 4.5, 8.2, -4.1,
            223, 115, 92, 224, 48, -0.57, 0.97, -0.042, 15.3),
}

#: static permittivity along c (ε33): the review gives none (as its 2001 predecessor)
_EPS33 = {
    "GaN": "Barker and Ilegems, Phys. Rev. B 7, 743 (1973), static ε along c (ε33; 9.5 in the "
           "c plane), from memory",
    "AlN": "Akasaki and Hashimoto, Solid State Commun. 5, 851 (1967), static ε along c, from "
           "memory, uncertain (values from 8.5 to 10 are quoted)",
    "InN": "Zubrilov, in Levinshtein, Rumyantsev and Shur (eds.), Properties of Advanced "
           "Semiconductor Materials (Wiley 2001), static ε, from memory, uncertain",
}

#: dopant binding energies where a common-practice value is known (else hydrogenic)
_NITRIDE_DOPANTS = {
    "GaN": {"donor_binding": (0.017, "common practice: Si donor in GaN, 12-17 meV (Götz et al., "
                                     "Appl. Phys. Lett. 68, 3144 (1996)), from memory"),
            "acceptor_binding": (0.20, "common practice: Mg acceptor in GaN, about 0.16-0.21 eV, "
                                       "from memory")},
    "AlN": {"acceptor_binding": (0.51, "Mg acceptor in AlN, Nam et al., Appl. Phys. Lett. 83, "
                                       "878 (2003), from memory")},
}


def _nitride(name):
    (a, c, alpha_a, eg, alpha, beta, vbo, dcr, dso, me_par, me_perp, A1, A2, A3, A4,
     da1, da2, d1, d2, d3, d4, c11, c12, c13, c33, c44, e31, e33, psp, eps) = _NITRIDE[name]
    t = f"{_VM}, {name} (wurtzite) table" + _MEM
    elastic = t + " (elastic constants printed in GPa)"
    d = {
        "band_gap": Value(eg, "eV", t),
        "varshni_alpha": Value(alpha * _MEV, "eV/K", t),
        "varshni_beta": Value(float(beta), "K", t),
        "valence_band_offset": Value(vbo, "eV", f"{_VM}: the top of the valence band on the "
                                     "common scale; the review's recommended offsets (AlN 0.8 eV "
                                     "below GaN, InN 0.5 eV above GaN) placed at GaN = -2.64 eV"
                                     + _MEM),
        "spin_orbit": Value(dso, "eV", t),
        "crystal_field": Value(dcr, "eV", t),
        "electron_mass": Value(me_par, "m0", t + " (mass along c)"),
        "electron_mass_perp": Value(me_perp, "m0", t + " (mass perpendicular to c)"),
        "valence_a1": Value(A1, "1", t),
        "valence_a2": Value(A2, "1", t),
        "valence_a3": Value(A3, "1", t),
        "valence_a4": Value(A4, "1", t),
        "permittivity": Value(eps, "1", _EPS33[name]),
        "lattice_constant": Value(round(a * _ANG, 8), "nm", t + f" (a = {a} Å at 300 K)"),
        "lattice_constant_c": Value(round(c * _ANG, 8), "nm", t + f" (c = {c} Å at 300 K)"),
        "lattice_expansion": Value(round(a * _ANG * alpha_a, 12), "nm/K",
                                   f"a times the thermal expansion coefficient of a, "
                                   f"{alpha_a:g} 1/K (common practice for wurtzite {name}), "
                                   "from memory, uncertain"),
        "elastic_c11": Value(float(c11), "GPa", elastic),
        "elastic_c12": Value(float(c12), "GPa", elastic),
        "elastic_c13": Value(float(c13), "GPa", elastic),
        "elastic_c33": Value(float(c33), "GPa", elastic),
        "elastic_c44": Value(float(c44), "GPa", elastic),
        "piezo_e31": Value(e31, "C/m^2", t),
        "piezo_e33": Value(e33, "C/m^2", t),
        "spontaneous_polarization": Value(psp, "C/m^2", f"{_AMB02} (the binaries of Bernardini "
                                          f"and Fiorentini, also recommended by {_VM})" + _MEM),
        "deformation_a1": Value(da1, "eV", t),
        "deformation_a2": Value(da2, "eV", t),
        "deformation_d1": Value(d1, "eV", t),
        "deformation_d2": Value(d2, "eV", t),
        "deformation_d3": Value(d3, "eV", t),
        "deformation_d4": Value(d4, "eV", t),
    }
    if name == "InN":
        same = (f"; the review gives no InN values and recommends those of GaN" + _MEM)
        for k in ("deformation_d1", "deformation_d2", "deformation_d3", "deformation_d4"):
            d[k] = Value(d[k].value, "eV", t + same)
    d.update(_wurtzite_fill(eg, alpha * _MEV, float(beta)))
    for key, (v, src) in _NITRIDE_DOPANTS.get(name, {}).items():
        d[key] = Value(v, "eV", src)
    if "donor_binding" not in d:
        d["donor_binding"] = Value(round(_RYD * anisotropic_dos_mass(me_par, me_perp) / eps ** 2, 6),
                                   "eV", "hydrogenic estimate 13.6 eV m_e/eps^2 from the masses "
                                   "and permittivity above")
    if "acceptor_binding" not in d:
        m = wurtzite_hole_masses(A1, A2, A3, A4, dcr, dso)
        mh = float(anisotropic_dos_mass(m["m_hh_par"], m["m_hh_perp"]))
        d["acceptor_binding"] = Value(round(_RYD * mh / eps ** 2, 6), "eV",
                                      "hydrogenic estimate 13.6 eV m_hh_dos/eps^2 from A1..A4 "
                                      "and the permittivity above (rough: acceptors are not "
                                      "hydrogenic)")
    return {k: d[k] for k in PARAMETERS}


BINARIES.update({"GaN": _nitride("GaN"), "AlN": _nitride("AlN"), "InN": _nitride("InN")})

#: crystal structure of each library material (selfcon.model.strain picks its strain model
#: by it)
CRYSTAL = {name: "zincblende" for name in BINARIES}
CRYSTAL.update({"GaN": "wurtzite", "AlN": "wurtzite", "InN": "wurtzite"})


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


def _nitride_ternary(name, end0, end1, meaning, gap_bowing, psp_bowing):
    """A wurtzite nitride ternary: the gap bowing of the 2003 review and the nonlinear
    spontaneous polarization of Ambacher et al. 2002, P_sp(x) = (1-x) P0 + x P1 + b x(1-x),
    stored as the bowing C = -b of the rule P(x) = (1-x) P0 + x P1 - x(1-x) C."""
    alloy = _ternary(name, end0, end1, meaning, band_gap=(gap_bowing, 0.0, _MEM))
    bow = dict(alloy.bowing)
    src = f"{_VM}, {name} gap bowing" + _MEM
    bow["band_gap"] = Bowing(gap_bowing, 0.0, "eV", src)
    for key in bow:
        if key not in ("band_gap", "spontaneous_polarization"):
            bow[key] = Bowing(0.0, 0.0, bow[key].unit, f"{_VM}: none given (linear)" + _MEM)
    bow["spontaneous_polarization"] = Bowing(
        -psp_bowing, 0.0, "C/m^2",
        f"{_AMB02}: P_sp = (1-x) P0 + x P1 + {psp_bowing:g} x(1-x) C/m^2 (nonlinear alloy "
        "dependence, from the calculations of Bernardini and Fiorentini, Phys. Rev. B 64, "
        "085207 (2001))" + _MEM)
    return alloy._replace(bowing=bow)


ALLOYS.update({
    "AlGaN": _nitride_ternary("AlGaN", "GaN", "AlN", "x = Al fraction: Al_x Ga_(1-x) N",
                              0.7, 0.019),
    "InGaN": _nitride_ternary("InGaN", "GaN", "InN", "x = In fraction: In_x Ga_(1-x) N",
                              1.4, 0.038),
    "InAlN": _nitride_ternary("InAlN", "AlN", "InN", "x = In fraction: In_x Al_(1-x) N",
                              2.5, 0.071),
})
ALLOYS["SiGe"] = Alloy(
    "SiGe", "Si", "Ge", "x = Ge fraction: Si_(1-x) Ge_x (the one alloy whose x counts the "
    "second-named element, as Si1-xGex is written)",
    {key: Bowing(0.0, 0.0, PARAMETERS[key][0], "SiGe: linear interpolation between Si and Ge "
                 "(common practice; for the valence band the linear E_v,av of " + _VDWM + ")")
     for key in BOWED})
ALLOYS["SiGe"].bowing["x_gap"] = Bowing(
    -0.006, 0.474, "eV", "SiGe Δ gap: C = -0.006 + 0.474 x fitted by us (least squares over "
    f"0 <= x <= 0.85, within 28 meV) to the Δ branch of the gap, 1.155 - 0.43 x + 0.0206 x^2 eV "
    f"at 4.2 K, of {_WA}, moved to the Si gap above" + _MEM)
ALLOYS["SiGe"].bowing["l_gap"] = Bowing(
    0.0, 0.0, "eV", f"SiGe L gap: linear, as the L branch 2.010 - 1.27 x eV of {_WA}" + _MEM)
CRYSTAL.update({name: CRYSTAL[a.end0] for name, a in ALLOYS.items()})


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

CRYSTAL.update({name: "zincblende" for name in QUATERNARIES})

#: how alloys treat each parameter without a bowing parameter: key -> source of the rule
_VARSHNI_RULE = ("the Varshni shift is applied to each end binary and the gaps at T are then "
                 "bowed (Vurgaftman 2001 practice, from memory); the alloy's own α, β are the "
                 "linear mean, used only when a deck-local material overrides one of them")
_LUTT_RULE = ("linear interpolation (Vurgaftman 2001 recommend linear interpolation of the "
              "Luttinger parameters for these alloys, from memory)")
_LIN = "linear interpolation, common practice"
_HOLE_DOS_RULE = ("where an end binary stores its hole DOS mass: the inverse masses interpolated "
                  "linearly, the other end taking its spherical estimate (linear in its Luttinger "
                  "parameters, so this is the rule of the Luttinger parameters themselves); where "
                  "neither end stores one: not stored, the spherical estimate from the "
                  "interpolated Luttinger parameters (selfcon rule)")
ALLOY_RULES = {
    "varshni_alpha": _VARSHNI_RULE, "varshni_beta": _VARSHNI_RULE,
    "x_varshni_alpha": _VARSHNI_RULE, "x_varshni_beta": _VARSHNI_RULE,
    "l_varshni_alpha": _VARSHNI_RULE, "l_varshni_beta": _VARSHNI_RULE,
    "luttinger_gamma1": _LUTT_RULE, "luttinger_gamma2": _LUTT_RULE,
    "luttinger_gamma3": _LUTT_RULE,
    "hole_dos_mass_hh": _HOLE_DOS_RULE, "hole_dos_mass_lh": _HOLE_DOS_RULE,
    "x_mass_long": _LIN, "x_mass_trans": _LIN, "l_mass_long": _LIN, "l_mass_trans": _LIN,
    "x_valleys": "the count of the end binaries (both ends of every library alloy share it)",
    "permittivity": _LIN, "donor_binding": _LIN, "acceptor_binding": _LIN,
    "lattice_constant": "Vegard's law (linear in x), as the review recommends, common practice",
    "lattice_expansion": _LIN,
    "elastic_c11": _LIN, "elastic_c12": _LIN, "elastic_c44": _LIN,
    "deformation_av": _LIN, "deformation_b": _LIN, "deformation_d": _LIN,
    "x_deformation_gap": _LIN, "x_deformation_u": _LIN,
    "l_deformation_gap": _LIN, "l_deformation_u": _LIN,
    "lattice_constant_c": "Vegard's law (linear in x), common practice",
    "elastic_c13": _LIN, "elastic_c33": _LIN, "piezo_e31": _LIN, "piezo_e33": _LIN,
    "crystal_field": _LIN, "electron_mass_perp": _LIN,
    "valence_a1": _LIN, "valence_a2": _LIN, "valence_a3": _LIN, "valence_a4": _LIN,
    "deformation_a1": _LIN, "deformation_a2": _LIN, "deformation_d1": _LIN,
    "deformation_d2": _LIN, "deformation_d3": _LIN, "deformation_d4": _LIN,
}
