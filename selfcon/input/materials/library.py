"""Material data: every number with its unit and its source.

Parameter names are the deck's own keys (DESIGN.md §3), so a deck-local
``[material.NAME]`` overrides a library value under the same name.

Binaries: ``BINARIES[name][key] -> Value``.  Alloys: ``ALLOYS[name] -> Alloy``,
with the two end binaries and the bowing parameters; the interpolation rules
themselves live in :mod:`selfcon.input.materials.alloys`.

Band parameters are from I. Vurgaftman, J. R. Meyer and L. R. Ram-Mohan,
J. Appl. Phys. 89, 5815 (2001), recalled from memory (no copy of the paper was
consulted while writing this file); values the author is less sure of say
"from memory" in their source, and a few say "uncertain" as well.
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
}

#: parameters that carry a bowing parameter in alloys (the rest interpolate linearly)
BOWED = ("band_gap", "x_gap", "l_gap", "valence_band_offset", "electron_mass", "spin_orbit")

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


def _hole_dos_mass(g1, g2):
    """Combined hh + lh density-of-states mass (same rule as alloys.derived)."""
    mhh = (1.0 / (g1 - 2 * g2) / (g1 + g2) ** 2) ** (1 / 3)
    mlh = (1.0 / (g1 + 2 * g2) / (g1 - g2) ** 2) ** (1 / 3)
    return (mhh ** 1.5 + mlh ** 1.5) ** (2 / 3)


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
        mv = _hole_dos_mass(d["luttinger_gamma1"].value, d["luttinger_gamma2"].value)
        d["acceptor_binding"] = Value(
            round(_RYD * mv / eps ** 2, 6), "eV",
            "hydrogenic estimate 13.6 eV m_v_dos/eps^2 from the Luttinger parameters and "
            "permittivity above (rough: acceptors are not hydrogenic)")
    return {k: d[k] for k in PARAMETERS}   # fixed order


BINARIES = {
    "GaAs": _add_hydrogenic(_gaas()),
    "AlAs": _add_hydrogenic(_alas()),
    "InAs": _add_hydrogenic(_inas()),
    "InP": _add_hydrogenic(_inp()),
}


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


ALLOYS = {
    "AlGaAs": Alloy(
        "AlGaAs", "GaAs", "AlAs", "x = Al fraction: Al_x Ga_(1-x) As",
        _bowings("AlGaAs",
                 band_gap=(-0.127, 1.310, " (x-dependent: C = -0.127 + 1.310 x)"),
                 x_gap=(0.055, 0.0, _MEM),
                 l_gap=(0.0, 0.0, _MEM))),
    "InGaAs": Alloy(
        "InGaAs", "GaAs", "InAs", "x = In fraction: In_x Ga_(1-x) As",
        _bowings("InGaAs",
                 band_gap=(0.477, 0.0, ""),
                 x_gap=(1.4, 0.0, _MEM),
                 l_gap=(0.33, 0.0, _MEM),
                 valence_band_offset=(-0.38, 0.0, ""),
                 electron_mass=(0.0091, 0.0, ""),
                 spin_orbit=(0.15, 0.0, _MEM))),
    "InAlAs": Alloy(
        "InAlAs", "AlAs", "InAs", "x = In fraction: In_x Al_(1-x) As",
        _bowings("InAlAs",
                 band_gap=(0.70, 0.0, ""),
                 x_gap=(0.0, 0.0, _MEM),
                 l_gap=(0.0, 0.0, _MEM),
                 valence_band_offset=(-0.64, 0.0, ""),
                 electron_mass=(0.049, 0.0, ""),
                 spin_orbit=(0.15, 0.0, _MEM))),
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
}
