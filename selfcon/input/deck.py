"""Deck reader: a TOML deck (README.md, "Deck reference") into validated, immutable objects.

    deck = load_deck("inputs/hemt.toml", overrides=["layer.spacer.thickness=12"])
    deck.layer("spacer").thickness      # 12.0 (nm)
    deck.to_toml()                      # canonical text of the effective deck
    deck.hash()                         # sha256 of that text

Units are those of the deck and are kept here: nm, cm^-3, cm^-2, eV, V, K.
Conversion to internal units (nm^-3, nm^-2) happens in structure.py.
Every key, its type, unit, default and meaning is in :data:`KEYS`;
:func:`deck_reference` lists them as rows for the README.

Choices made here (they are part of the deck contract):

* ``[surface]`` is required: the top contact decides the band bending, so it
  must be written down.  ``[substrate]`` may be left out and then means
  ``contact = "ohmic"`` (local neutrality at the bottom): a designer's stack
  usually ends in a thick buffer on a conducting or thick substrate.  A
  ``[substrate]`` table that gives only the growth lattice (``material`` or
  ``lattice_constant``) also means ``contact = "ohmic"``.
* Strain: ``[substrate] material`` (with ``x``, ``y`` for alloys) or
  ``[substrate] lattice_constant`` (nm, at every temperature; exclusive with
  ``material``) sets the in-plane lattice of the stack; ``layer.relaxed = true``
  marks a metamorphic buffer whose lattice the layers above take.  Without any
  of these the stack is unstrained, exactly as before these keys existed.
* Compositions: ``x`` counts the first-named element of the mixed sublattice;
  ``y`` is the second composition of a quaternary (InGaAsP, AlGaInAs) and is
  refused on anything else; ``layer.lattice_matched = "InP"`` (a library binary)
  solves the missing composition (a ternary's x, or one of a quaternary's x, y)
  for lattice match at 300 K.
* ``barrier`` (eV) is required for ``schottky`` and ``pinned`` contacts and
  refused for ``ohmic`` and ``free``; ``bias`` (V) is accepted only for
  ``schottky`` (default 0).
* Layers are numbered from 0 in key paths (``layer[2].x``) and overrides
  (``layer.2.x``), the same numbering as /profile/layer_index in results.
  An unnamed layer is called ``layer<index>``.  Names are letters, digits,
  ``_`` and ``-``, not all digits, unique.
* A deck-local ``[material.NAME]`` may not reuse a library name (write
  ``[material.MyGaAs] base = "GaAs"`` to start from a library entry).
* Doping above 1e22 cm^-3 or sheets above 1e16 cm^-2 are refused as unit
  mistakes (they exceed the density of atoms).
* A layer thinner than 0.1 nm (half a monolayer) is refused as a unit mistake (a
  thickness typed in metres); ``x`` on a binary, or on a deck-local material whose base
  chain ends in a binary (or in no library material), is refused rather than ignored.
* Numbers: int or float accepted, bool refused, inf/nan refused.  Integer
  keys accept integral floats (a study sweeping 4.0, 5.0, ... states).

Override paths (``--set PATH=VALUE``, studies): ``title``, ``temperature``,
``surface.KEY``, ``substrate.KEY``, ``layer.NAME.KEY`` or ``layer.INDEX.KEY``,
``material.NAME.KEY`` (deck-local materials; the key may be new), ``physics.KEY``,
``quantum.KEY``, ``mesh.KEY``, ``solver.KEY``.  Values are TOML values, else bare
strings; in the dict form a value of None removes the key.  Overrides are applied
to the raw deck, then the whole deck is validated again; an error in an overridden
value carries no file line and says "(value set by override)".

Errors are :class:`selfcon.errors.DeckError`, one line:
``FILE:LINE: KEY: what is wrong (allowed: ...)``.
"""
from __future__ import annotations

import copy
import dataclasses
import difflib
import functools
import hashlib
import math
import numbers
import os
import re
import tomllib
from dataclasses import dataclass, field
from typing import Any

from selfcon.errors import DeckError

__all__ = ["load_deck", "parse_override", "get_path", "register_method_name", "deck_reference", "dumps_toml", "KEYS",
           "Deck", "Contact", "Layer", "MaterialDef", "Params", "Physics", "ChannelSpec",
           "QuantumSpec", "MeshSpec", "SolverSpec", "DeckError"]

TEXT_NAME = "<deck>"

# ---------------------------------------------------------------------------
# key table: the single source for validation, defaults and documentation
# ---------------------------------------------------------------------------


class _Required:
    def __repr__(self):
        return "required"


REQUIRED = _Required()


@dataclass(frozen=True)
class KeySpec:
    """One deck key.  ``kind``: number | integer | string | fraction | carriers | regions."""

    kind: str
    unit: str
    default: Any
    doc: str
    lo: float | None = None          # lower limit
    lo_open: bool = False            # True: value must be > lo, else >= lo
    hi: float | None = None
    hi_open: bool = False
    choices: tuple | None = None     # for strings (None: free text); a callable name for lazy lists
    below: str | None = None         # what a value under ``lo`` most likely means (appended)


CONTACT_KINDS = ("schottky", "ohmic", "pinned", "free")
BARRIER_KINDS = ("schottky", "pinned")
CARRIERS = ("electron", "heavy_hole", "light_hole")
#: every carrier a deck may ask for: the default set plus the X and L conduction valleys
#: (classical, 3D density of states; opt-in because they need the X/L material data)
ALL_CARRIERS = CARRIERS + ("x_electron", "l_electron")
IONIZATION = ("thermal", "full")
CONTACTED = ("auto", "electron", "hole", "both")
POLARITIES = ("metal", "nitrogen")
#: physics.exchange_correlation: none (Hartree), lda (Hedin-Lundqvist local density, as used by
#: Stern and Das Sarma 1984), lda-gl (Gunnarsson-Lundqvist 1976 parametrization)
EXCHANGE_CORRELATION = ("none", "lda", "lda-gl")
#: layer.donor_species: shallow (hydrogenic level, Pearson-Bardeen at high density) or Si-DX
DONOR_SPECIES = ("shallow", "Si-DX", "P", "As")
#: the hosts of the group-IV donor species P and As (their levels: selfcon.input.materials.
#: library.GROUP_IV_DOPANTS; SiGe interpolates linearly in the Ge fraction)
GROUP_IV_HOSTS = ("Si", "Ge", "SiGe")
DX_STATES = ("equilibrium", "ionized")
#: library materials the Si-DX level is given for (selfcon.model.dopants.dx_binding)
DX_HOSTS = ("AlGaAs", "GaAs")
SOLVER_METHODS = ("predictor-corrector", "anderson", "linear")
#: physics.hole_model: parabolic (heavy and light holes as single bands) or the 4x4 / 6x6
#: Luttinger-Kohn multiband model of selfcon.solver.kp
HOLE_MODELS = ("parabolic", "kp4", "kp6")
#: nm, the thinnest layer accepted: about half a monolayer (a GaAs monolayer is a/2 = 0.283 nm,
#: common practice); anything thinner is a unit mistake (a thickness typed in metres or cm)
MIN_THICKNESS = 0.1

#: K, the temperature range the carrier statistics support (README.md, "Sanity checks").
#: Below 0.01 K kT (< 1e-6 eV) is so far below every level spacing that the occupancies
#: are steps the Newton solves of the loop no longer resolve (inputs/design/2dhg_4K.toml
#: stops unconverged at 1e-6 K; every shipped deck converges to its 4 K answer at 0.01 K).
#: Above 1000 K the models stop making sense: the band gaps' Varshni fits are made below
#: about 900 K and the III-V's decompose or melt near 1000-1500 K (from memory).
MIN_TEMPERATURE = 0.01
MAX_TEMPERATURE = 1000.0

_TOP = {
    "title": KeySpec("string", "-", "", "free text, shown in reports and stored in results"),
    "temperature": KeySpec("number", "K", REQUIRED, "lattice and carrier temperature",
                           lo=MIN_TEMPERATURE, hi=MAX_TEMPERATURE,
                           below="the carrier statistics are not resolved below 0.01 K"),
}
_CONTACT = {
    "contact": KeySpec("string", "-", REQUIRED,
                       "boundary kind: schottky (metal; Ec - EF = barrier - bias), ohmic (local "
                       "neutrality), pinned (Fermi level pinned, Ec - EF = barrier), free (zero field)",
                       choices=CONTACT_KINDS),
    "barrier": KeySpec("number", "eV", None, "Ec - EF at the contact (Ec: the conduction minimum "
                       "of the end layer, Gamma or the X/Delta or L valley where lower, as in Si "
                       "and AlAs); required for schottky and pinned, refused for ohmic and free"),
    "bias": KeySpec("number", "V", 0.0, "voltage on a schottky gate; positive bias lowers Ec at "
                    "the contact (schottky only)"),
}
_LAYER = {
    "name": KeySpec("string", "-", "layer<index>", "unique name used by overrides and studies "
                    "(letters, digits, _ and -, not all digits)"),
    "material": KeySpec("string", "-", REQUIRED, "library material or a [material.NAME] of this deck"),
    "x": KeySpec("fraction", "-", None, "alloy fraction in [0, 1], of the first-named element of "
                 "the mixed sublattice (In in InGaP, As in GaAsSb; table below); graded: [top, "
                 "bottom], linear in z; alloys only (refused on a binary)", lo=0.0, hi=1.0),
    "thickness": KeySpec("number", "nm", REQUIRED, "layer thickness (at least half a "
                         "monolayer)", lo=MIN_THICKNESS,
                         below="less than half a monolayer; thicknesses are in nm"),
    "donors": KeySpec("number", "cm^-3", 0.0, "uniform donor density", lo=0.0, hi=1e22),
    "acceptors": KeySpec("number", "cm^-3", 0.0, "uniform acceptor density", lo=0.0, hi=1e22),
    "sheet_donors": KeySpec("number", "cm^-2", 0.0, "delta sheet of donors at the layer centre",
                            lo=0.0, hi=1e16),
    "sheet_acceptors": KeySpec("number", "cm^-2", 0.0, "delta sheet of acceptors at the layer centre",
                               lo=0.0, hi=1e16),
    "y": KeySpec("fraction", "-", None, "second composition of a quaternary in [0, 1] (InGaAsP: As "
                 "fraction; AlGaInAs: Ga fraction); graded: [top, bottom]; refused on other "
                 "materials", lo=0.0, hi=1.0),
    "lattice_matched": KeySpec("string", "-", None, "library binary (e.g. \"InP\") the layer is "
                               "lattice-matched to at 300 K: solves the composition not given "
                               "(a ternary's x, or the one of a quaternary's x, y left out)"),
    "relaxed": KeySpec("boolean", "-", False, "true: a relaxed (metamorphic) buffer or virtual "
                       "substrate at its own lattice; the layers above grow on its lattice "
                       "(a graded one passes on the lattice at its top)"),
    "donor_species": KeySpec("string", "-", "shallow", "species of the layer's donors and "
                             "sheet_donors: shallow (the material's level), Si-DX (the deep DX level "
                             "of Si in AlGaAs, 0.15 eV below the L minimum after Chand et al. 1984; "
                             "a one-electron level; AlGaAs and GaAs only; needs physics.ionization "
                             "= thermal), or P or As in Si, Ge and SiGe (their binding energies, "
                             "Ramdas and Rodriguez 1981; P is the library's shallow donor there)",
                             choices=DONOR_SPECIES),
    "dx_freeze_temperature": KeySpec("number", "K", None, "Si-DX only: dark cool-down; the DX "
                                     "occupation is that of equilibrium at this temperature (gate "
                                     "unbiased) and kept at the run temperature (no effect when the "
                                     "run is not colder)", lo=MIN_TEMPERATURE,
                                     hi=MAX_TEMPERATURE),
    "dx_state": KeySpec("string", "-", "equilibrium", "Si-DX only: equilibrium (dark) or ionized "
                        "(illuminated: every DX centre ionised, persistent photoconductivity)",
                        choices=DX_STATES),
}

#: [substrate]: the bottom contact and the lattice the stack grows on
_SUBSTRATE = {
    **{k: (KeySpec("string", "-", "ohmic", v.doc + "; default ohmic", choices=CONTACT_KINDS)
           if k == "contact" else v) for k, v in _CONTACT.items()},
    "material": KeySpec("string", "-", None, "substrate material: sets the in-plane lattice "
                        "constant of the stack (at the deck temperature); without it and "
                        "without lattice_constant or a relaxed layer the stack is unstrained"),
    "x": KeySpec("number", "-", None, "alloy fraction of an alloy substrate material", lo=0.0,
                 hi=1.0),
    "y": KeySpec("number", "-", None, "second composition of a quaternary substrate material",
                 lo=0.0, hi=1.0),
    "lattice_constant": KeySpec("number", "nm", None, "explicit in-plane lattice constant of the "
                                "stack, used at every temperature; exclusive with material",
                                lo=0.0, lo_open=True),
}


def _p(unit, doc, **kw):
    return KeySpec("number", unit, None, doc, **kw)


_POS = dict(lo=0.0, lo_open=True)
_NONNEG = dict(lo=0.0)

#: deck-local material parameters (all optional here; completeness is checked by selfcon.input.materials)
MATERIAL_PARAMS = {
    "band_gap": _p("eV", "Gamma gap at 0 K", **_POS),
    "varshni_alpha": _p("eV/K", "Varshni alpha of the Gamma gap"),
    "varshni_beta": _p("K", "Varshni beta of the Gamma gap", **_NONNEG),
    "valence_band_offset": _p("eV", "valence band maximum on the common scale; Ec = VBO + Eg(T)"),
    "electron_mass": _p("m0", "Gamma electron effective mass", **_POS),
    "permittivity": _p("-", "static relative permittivity", **_POS),
    "luttinger_gamma1": _p("-", "Luttinger gamma1 (hole masses along [001])", **_POS),
    "luttinger_gamma2": _p("-", "Luttinger gamma2"),
    "luttinger_gamma3": _p("-", "Luttinger gamma3"),
    "hole_dos_mass_hh": _p("m0", "heavy-hole density-of-states mass of the bulk valence band "
                           "(classical holes, N_v); 0 or absent: the spherical estimate "
                           "1/(gamma1 - 2 gamma_bar), gamma_bar = (2 gamma2 + 3 gamma3)/5, "
                           "refused above 2 m0; new Luttinger parameters drop the base's value",
                           **_NONNEG),
    "hole_dos_mass_lh": _p("m0", "light-hole density-of-states mass of the bulk valence band; "
                           "0 or absent: the spherical estimate 1/(gamma1 + 2 gamma_bar)",
                           **_NONNEG),
    "x_gap": _p("eV", "X-valley gap at 0 K", **_POS),
    "l_gap": _p("eV", "L-valley gap at 0 K", **_POS),
    "x_mass_long": _p("m0", "X-valley longitudinal mass", **_POS),
    "x_mass_trans": _p("m0", "X-valley transverse mass", **_POS),
    "l_mass_long": _p("m0", "L-valley longitudinal mass", **_POS),
    "l_mass_trans": _p("m0", "L-valley transverse mass", **_POS),
    "x_valleys": _p("-", "number of equivalent X/Delta valleys (3 zincblende X, 6 Si/Ge Delta); "
                    "a third of them has its axis along z", **_POS),
    "donor_binding": _p("eV", "donor binding energy below Ec (the conduction minimum: Gamma, "
                        "or the X/Delta or L valley where lower)", **_NONNEG),
    "acceptor_binding": _p("eV", "acceptor binding energy above Ev", **_NONNEG),
    "spin_orbit": _p("eV", "spin-orbit split-off energy", **_NONNEG),
    "x_varshni_alpha": _p("eV/K", "Varshni alpha of the X gap"),
    "x_varshni_beta": _p("K", "Varshni beta of the X gap", **_NONNEG),
    "l_varshni_alpha": _p("eV/K", "Varshni alpha of the L gap"),
    "l_varshni_beta": _p("K", "Varshni beta of the L gap", **_NONNEG),
    "lattice_constant": _p("nm", "lattice constant at 300 K (strained stacks)", **_POS),
    "lattice_expansion": _p("nm/K", "da/dT: a(T) = a(300 K) + da/dT (T - 300 K)"),
    "elastic_c11": _p("GPa", "elastic stiffness C11", **_POS),
    "elastic_c12": _p("GPa", "elastic stiffness C12", **_POS),
    "elastic_c44": _p("GPa", "elastic stiffness C44", **_POS),
    "deformation_ac": _p("eV", "Gamma conduction-band hydrostatic deformation potential a_c "
                         "(dEc = a_c Tr eps)"),
    "deformation_av": _p("eV", "valence-band hydrostatic deformation potential a_v, sign of "
                         "Van de Walle 1989 (dEv = +a_v Tr eps; a_c - a_v is the gap potential)"),
    "deformation_b": _p("eV", "valence-band shear deformation potential b"),
    "deformation_d": _p("eV", "valence-band shear deformation potential d"),
    "x_deformation_gap": _p("eV", "hydrostatic deformation potential of the X gap "
                            "(Xi_d + Xi_u/3 - a_v)"),
    "x_deformation_u": _p("eV", "X-valley uniaxial deformation potential Xi_u"),
    "l_deformation_gap": _p("eV", "hydrostatic deformation potential of the L gap "
                            "(Xi_d + Xi_u/3 - a_v)"),
    "l_deformation_u": _p("eV", "L-valley uniaxial deformation potential Xi_u"),
    "lattice_constant_c": _p("nm", "wurtzite: lattice constant c at 300 K (lattice_constant is "
                             "a)", **_POS),
    "elastic_c13": _p("GPa", "wurtzite: elastic stiffness C13", **_POS),
    "elastic_c33": _p("GPa", "wurtzite: elastic stiffness C33", **_POS),
    "piezo_e31": _p("C/m^2", "wurtzite: piezoelectric constant e31"),
    "piezo_e33": _p("C/m^2", "wurtzite: piezoelectric constant e33"),
    "spontaneous_polarization": _p("C/m^2", "wurtzite: spontaneous polarization along [0001]"),
    "crystal_field": _p("eV", "wurtzite: crystal-field splitting of the valence band"),
    "electron_mass_perp": _p("m0", "wurtzite: electron mass perpendicular to c (in the growth "
                             "plane)", **_POS),
    "valence_a1": _p("-", "wurtzite: valence-band parameter A1 (hbar^2/2m0)"),
    "valence_a2": _p("-", "wurtzite: valence-band parameter A2 (hbar^2/2m0)"),
    "valence_a3": _p("-", "wurtzite: valence-band parameter A3 (hbar^2/2m0)"),
    "valence_a4": _p("-", "wurtzite: valence-band parameter A4 (hbar^2/2m0)"),
    "deformation_a1": _p("eV", "wurtzite: interband deformation potential a1 (strain along c)"),
    "deformation_a2": _p("eV", "wurtzite: interband deformation potential a2 (strain in the c "
                         "plane)"),
    "deformation_d1": _p("eV", "wurtzite: valence-band deformation potential D1"),
    "deformation_d2": _p("eV", "wurtzite: valence-band deformation potential D2"),
    "deformation_d3": _p("eV", "wurtzite: valence-band deformation potential D3"),
    "deformation_d4": _p("eV", "wurtzite: valence-band deformation potential D4"),
}
_MATERIAL = {
    "base": KeySpec("string", "-", None, "library material to start from (its parameters, then "
                    "the ones given here)"),
    "x": KeySpec("number", "-", None, "alloy fraction of the base, in [0, 1]", lo=0.0, hi=1.0),
    "y": KeySpec("number", "-", None, "second composition of a quaternary base, in [0, 1]",
                 lo=0.0, hi=1.0),
    **MATERIAL_PARAMS,
}
_PHYSICS = {
    "carriers": KeySpec("carriers", "-", CARRIERS, "carriers included: any non-empty subset of "
                        "electron (Gamma), heavy_hole, light_hole (subbands in quantum regions), "
                        "x_electron, l_electron (X and L valleys, classical everywhere)",
                        choices=ALL_CARRIERS),
    "ionization": KeySpec("string", "-", "thermal", "thermal (donor/acceptor levels, "
                          "Fermi-Dirac occupied) | full (all dopants ionised)", choices=IONIZATION),
    "contacted_carrier": KeySpec(
        "string", "-", "auto", "the carrier the channel's ohmic contacts reach: it keeps the "
        "channel's Fermi level (0 eV); under a schottky surface the other carrier takes the gate "
        "metal's level, -surface.bias (eV), so a reverse-biased gate does not invert.  auto: "
        "electron when the stack's donors (sheets included) outnumber its acceptors, else hole "
        "(a wurtzite stack: electron unless its acceptors outnumber its donors); "
        "both: one Fermi level for both carriers", choices=CONTACTED),
    "polarity": KeySpec("string", "-", "metal", "growth polarity of wurtzite layers along c: "
                        "metal (Ga/Al/In-face, [0001] points to the surface, the usual HEMT) | "
                        "nitrogen (N-face); zincblende stacks ignore it", choices=POLARITIES),
    "polarization": KeySpec("number", "-", 1.0, "factor on the spontaneous and piezoelectric "
                            "polarization of wurtzite layers (0 switches the interface sheets "
                            "off)", lo=0.0),
    "exchange_correlation": KeySpec(
        "string", "-", "none", "none (Hartree) | lda (local-density exchange-correlation "
        "potential in each carrier's Schrödinger equation, Hedin-Lundqvist 1971 as used by "
        "Stern and Das Sarma 1984) | lda-gl (the Gunnarsson-Lundqvist 1976 parametrization)",
        choices=EXCHANGE_CORRELATION),
    "nonparabolicity": KeySpec("boolean", "-", False, "true: Gamma electrons with the "
                               "energy-dependent mass m*(E) = m*_edge (1 + (E - Ec(z))/Eg_eff) "
                               "(Nelson, Miller and Kleinman 1987), in the subband energies, "
                               "in-plane masses and 2D density of states"),
    "quantum_valleys": KeySpec(
        "boolean", "-", False, "true: the X/Delta and L electrons that physics.carriers counts "
        "(x_electron, l_electron) are subbands in the quantum regions, per valley set of the "
        "(001) growth axis: x2 (the X/Delta valleys along z, mass m_l along z), x4 (those in the "
        "plane, m_t along z) and l (the four L valleys, the mass projected on [001]); false: "
        "classical everywhere"),
    "hole_model": KeySpec("string", "-", "parabolic", "valence subbands in quantum regions: "
                          "parabolic (heavy and light holes as two single bands) | kp4 (4x4 "
                          "Luttinger-Kohn: heavy and light holes coupled, with their in-plane "
                          "dispersion) | kp6 (6x6: with the split-off band); zincblende (001) "
                          "stacks only", choices=HOLE_MODELS),
}
_QUANTUM = {
    "regions": KeySpec("regions", "nm", None, "quantum regions [[top, bottom], ...], sorted, "
                       "non-overlapping; default the whole stack; [] = fully classical"),
    "states": KeySpec("integer", "-", 10, "bound states per band and region", lo=1),
}
_MESH = {
    "step": KeySpec("number", "nm", 0.5, "largest step inside quantum regions", **_POS),
    "fine": KeySpec("number", "nm", None, "step at interfaces and sheets (default: mesher's choice)",
                    **_POS),
    "bulk_step": KeySpec("number", "nm", None, "largest step in classical bulk (default: mesher's "
                         "choice)", **_POS),
    "growth": KeySpec("number", "-", None, "largest ratio of neighbouring steps (default: mesher's "
                      "choice)", lo=1.0, lo_open=True, hi=2.0),
}
_SOLVER = {
    "method": KeySpec("string", "-", "predictor-corrector", "coupling scheme",
                      choices=SOLVER_METHODS),
    "tolerance": KeySpec("number", "V", 1e-6, "max |dphi| between iterations", **_POS),
    "max_iterations": KeySpec("integer", "-", 100, "iteration limit (then converged = false)", lo=1),
    "charge_tolerance": KeySpec("number", "-", 1e-6, "relative change of the sheet charge", **_POS),
    "mixing": KeySpec("number", "-", None, "mixing factor in (0, 1] (default: the method's own)",
                      lo=0.0, lo_open=True, hi=1.0),
    "history": KeySpec("integer", "-", 6, "Anderson history depth", lo=1),
}
CHANNEL_CARRIERS = ("electron", "hole")
_CHANNEL = {
    "name": KeySpec("string", "-", REQUIRED, "unique channel name (letters, digits, _ and -; "
                    "electron<N> and hole<N> are the names of auto-detected channels)"),
    "carrier": KeySpec("string", "-", REQUIRED, "the carrier confined in it",
                       choices=CHANNEL_CARRIERS),
    "layers": KeySpec("layers", "-", REQUIRED, "its layers, one contiguous block: layer names, "
                      "0-based indices or \"A:B\" ranges (both ends included)"),
}

#: table name -> {key: KeySpec}; "" is the top level, "material" is per [material.NAME]
KEYS = {"": _TOP, "surface": _CONTACT, "substrate": _SUBSTRATE, "layer": _LAYER,
        "material": _MATERIAL, "physics": _PHYSICS, "quantum": _QUANTUM, "mesh": _MESH,
        "solver": _SOLVER, "channel": _CHANNEL}
TABLES = ("surface", "substrate", "layer", "material", "physics", "quantum", "mesh", "solver",
          "channel")
TOP_KEYS = tuple(_TOP) + TABLES
#: top-level keys of a study file (selfcon/batch/study.py), named when one is read as a deck
STUDY_MARKS = ("deck", "mode", "vary", "fixed", "samples", "along", "continuation")
_SIMPLE_TABLES = ("surface", "substrate", "physics", "quantum", "mesh", "solver")

_TYPE_NAMES = {"number": "number", "integer": "integer", "string": "string", "boolean": "boolean",
               "fraction": "number or [top, bottom]", "carriers": "list of strings",
               "regions": "list of [top, bottom]",
               "layers": "list of names, indices or \"A:B\""}


def deck_reference():
    """Rows ``(path, type, unit, default, description)`` for every deck key, in deck order."""
    def dflt(spec):
        d = spec.default
        if d is REQUIRED:
            return "required"
        if d is None:
            return "-"
        if isinstance(d, tuple):
            return "[" + ", ".join(_toml_value(v) for v in d) + "]"
        return d if isinstance(d, str) and d.startswith("layer<") else _toml_value(d)

    def doc(spec):
        rng = None if spec.kind == "fraction" else _range_text(spec)
        return f"{spec.doc}; {rng}" if rng else spec.doc

    rows = []
    for key, spec in _TOP.items():
        rows.append((key, _TYPE_NAMES[spec.kind], spec.unit, dflt(spec), doc(spec)))
    rows.append(("surface", "table", "-", "required", "the contact at z = 0 (top surface)"))
    for key, spec in _CONTACT.items():
        rows.append((f"surface.{key}", _TYPE_NAMES[spec.kind], spec.unit, dflt(spec), doc(spec)))
    rows.append(("substrate", "table", "-", 'contact = "ohmic"', "the contact at the bottom "
                 "(same keys as surface) and the lattice the stack grows on"))
    for key, spec in _SUBSTRATE.items():
        if key not in _CONTACT or key == "contact":
            rows.append((f"substrate.{key}", _TYPE_NAMES[spec.kind], spec.unit, dflt(spec),
                         doc(spec)))
    rows.append(("layer", "array of tables", "-", "required", "the stack, top to bottom ([[layer]])"))
    for key, spec in _LAYER.items():
        rows.append((f"layer.{key}", _TYPE_NAMES[spec.kind], spec.unit, dflt(spec), doc(spec)))
    rows.append(("material.NAME", "table", "-", "-", "deck-local material named NAME"))
    for key, spec in _MATERIAL.items():
        rows.append((f"material.NAME.{key}", _TYPE_NAMES[spec.kind], spec.unit, dflt(spec), doc(spec)))
    for table in ("physics", "quantum", "mesh", "solver"):
        for key, spec in KEYS[table].items():
            rows.append((f"{table}.{key}", _TYPE_NAMES[spec.kind], spec.unit, dflt(spec), doc(spec)))
    rows.append(("channel", "array of tables", "-", "-", "named channels ([[channel]]): each replaces "
                 "the auto-detected channels of its carrier it overlaps; the first is the main channel"))
    for key, spec in _CHANNEL.items():
        rows.append((f"channel.{key}", _TYPE_NAMES[spec.kind], spec.unit, dflt(spec), doc(spec)))
    return rows


# ---------------------------------------------------------------------------
# the immutable deck objects
# ---------------------------------------------------------------------------


class Choices(tuple):
    """The ``allowed`` of an error: a tuple that prints as ``a, b, c``."""

    __slots__ = ()

    def __str__(self):
        return ", ".join(str(c) for c in self)


class Params(tuple):
    """Ordered ``((key, value), ...)`` of material parameters (floats)."""

    __slots__ = ()

    def get(self, key, default=None):
        for k, v in self:
            if k == key:
                return v
        return default

    def names(self):
        return tuple(k for k, _ in self)

    def as_dict(self):
        return {k: v for k, v in self}


@dataclass(frozen=True)
class Contact:
    kind: str                     # schottky | ohmic | pinned | free
    barrier: float | None         # eV, Ec - EF at the contact (schottky, pinned)
    bias: float = 0.0             # V (schottky only; 0.0 otherwise)


@dataclass(frozen=True)
class Layer:
    index: int                    # 0-based, as /profile/layer_index
    name: str
    material: str
    x_top: float | None           # alloy fraction at the top, None if not given
    x_bottom: float | None        # at the bottom (== x_top unless graded)
    thickness: float              # nm
    donors: float = 0.0           # cm^-3
    acceptors: float = 0.0        # cm^-3
    sheet_donors: float = 0.0     # cm^-2 at the layer centre
    sheet_acceptors: float = 0.0  # cm^-2
    y_top: float | None = None    # second composition (quaternaries), None if not given
    y_bottom: float | None = None
    lattice_matched: str | None = None   # binary the composition is matched to (300 K)
    relaxed: bool = False         # a relaxed (metamorphic) buffer: the layers above take its lattice
    donor_species: str = "shallow"   # shallow | Si-DX (donors and sheet_donors)
    dx_freeze_temperature: float | None = None   # K, dark cool-down (Si-DX)
    dx_state: str = "equilibrium"    # equilibrium | ionized (Si-DX)
    line: int | None = field(default=None, compare=False)   # [[layer]] line in the deck file

    @property
    def graded(self):
        return ((self.x_top is not None and self.x_top != self.x_bottom)
                or (self.y_top is not None and self.y_top != self.y_bottom))


@dataclass(frozen=True)
class MaterialDef:
    name: str
    base: str | None
    x: float | None
    params: Params                # only the parameters given in the deck
    y: float | None = None        # second composition of a quaternary base
    file: str | None = field(default=None, compare=False)   # for located MaterialErrors
    line: int | None = field(default=None, compare=False)   # [material.NAME] line in the deck


@dataclass(frozen=True)
class Lattice:
    """The lattice the stack grows on ([substrate] material / x / y or lattice_constant)."""
    material: str | None = None
    x: float | None = None
    y: float | None = None
    lattice_constant: float | None = None   # nm, at every temperature

    @property
    def given(self) -> bool:
        return self.material is not None or self.lattice_constant is not None


@dataclass(frozen=True)
class Physics:
    carriers: tuple = CARRIERS
    ionization: str = "thermal"
    contacted_carrier: str = "auto"   # auto | electron | hole | both
    polarity: str = "metal"         # wurtzite growth polarity: metal | nitrogen
    polarization: float = 1.0       # factor on the wurtzite polarization
    exchange_correlation: str = "none"
    nonparabolicity: bool = False
    quantum_valleys: bool = False   # X/Delta and L electrons as subbands in quantum regions
    hole_model: str = "parabolic"   # parabolic | kp4 | kp6


@dataclass(frozen=True)
class QuantumSpec:
    regions: tuple | None = None  # ((top, bottom), ...) nm; None = whole stack; () = classical
    states: int = 10


@dataclass(frozen=True)
class MeshSpec:
    step: float = 0.5
    fine: float | None = None
    bulk_step: float | None = None
    growth: float | None = None


@dataclass(frozen=True)
class SolverSpec:
    method: str = "predictor-corrector"
    tolerance: float = 1e-6
    max_iterations: int = 100
    charge_tolerance: float = 1e-6
    mixing: float | None = None
    history: int = 6


@dataclass(frozen=True)
class ChannelSpec:
    name: str
    carrier: str                  # electron | hole
    layers: tuple                 # 0-based layer indices, contiguous, ascending
    line: int | None = field(default=None, compare=False)   # [[channel]] line in the deck file


@dataclass(frozen=True)
class Deck:
    """A validated deck: frozen, hashable, every value in deck units (nm, K, V, cm^-3, cm^-2).

    Made by :func:`load_deck` (never directly).  The tables of the TOML are typed fields
    (``surface``, ``substrate``, ``layers``, ``materials``, ``physics``, ``quantum``,
    ``mesh``, ``solver``); ``get(path)`` reads any value by its ``--set`` path,
    ``with_overrides`` makes a changed copy, ``error(key, message)`` raises a
    :class:`~selfcon.errors.DeckError` located at the key's line, and ``to_toml``/``hash``
    give the canonical text and its SHA-256 (the same deck always hashes the same).

    Examples
    --------
    >>> import selfcon
    >>> deck = selfcon.load_deck("inputs/hemt_4K.toml")
    >>> deck.layer("spacer").thickness, deck.get("surface.contact")
    (20.0, 'schottky')
    >>> thinner = deck.with_overrides({"layer.spacer.thickness": 10.0})
    >>> thinner.total_thickness - deck.total_thickness
    -10.0
    >>> thinner == deck, thinner.hash() == deck.hash()
    (False, False)
    """

    title: str
    temperature: float            # K
    surface: Contact
    substrate: Contact
    layers: tuple                 # of Layer, top to bottom
    materials: tuple              # of MaterialDef (deck-local), in deck order
    physics: Physics
    quantum: QuantumSpec
    mesh: MeshSpec
    solver: SolverSpec
    channels: tuple = ()          # of ChannelSpec, in deck order (the first is the main channel)
    lattice: Lattice = field(default_factory=Lattice)
    text: str = field(default="", compare=False, repr=False)
    path: str | None = field(default=None, compare=False)
    overrides: tuple = field(default=(), compare=False)     # ((canonical key, value), ...)
    _raw: dict = field(default_factory=dict, compare=False, repr=False)
    _source: str = field(default="", compare=False, repr=False)

    # -- look-ups ---------------------------------------------------------
    @property
    def total_thickness(self):
        """Stack thickness in nm."""
        return math.fsum(l.thickness for l in self.layers)

    def layer_bounds(self):
        """``((top, bottom), ...)`` of every layer in nm, z = 0 at the surface."""
        out, z = [], 0.0
        for l in self.layers:
            out.append((z, z + l.thickness))
            z += l.thickness
        return tuple(out)

    def layer(self, name_or_index):
        """The Layer with that name or 0-based index (DeckError listing the names otherwise)."""
        if isinstance(name_or_index, numbers.Integral) and not isinstance(name_or_index, bool):
            i = int(name_or_index)
            if 0 <= i < len(self.layers):
                return self.layers[i]
            raise DeckError(f"no layer {i} (the stack has {len(self.layers)})", file=self._file,
                            key=f"layer.{i}", allowed=Choices(range(len(self.layers))))
        for l in self.layers:
            if l.name == name_or_index:
                return l
        names = [l.name for l in self.layers]
        raise DeckError(f"no layer named {name_or_index!r}{_did_you_mean(str(name_or_index), names)}",
                        file=self._file, key=f"layer.{name_or_index}", allowed=Choices(names))

    def get(self, path, default=None):
        """Value of a deck path (``temperature``, ``surface.bias``, ``layer.spacer.thickness``,
        ``layer.2.x``, ``material.M.electron_mass``) in the effective deck, defaults filled in;
        ``default`` when the deck leaves the key unset.

        >>> deck.get("layer.spacer.thickness")
        20.0
        """
        try:
            return get_path(self._canonical(), path)
        except KeyError:
            # [physics] keys at their default are left out of the canonical text (so older
            # decks keep their hash); their value is still the deck's
            table, _, key = path.partition(".")
            if table == "physics" and key in _PHYSICS and hasattr(self.physics, key):
                return getattr(self.physics, key)
            return default

    def material(self, name):
        """The deck-local MaterialDef called ``name``, or None (a library material)."""
        for m in self.materials:
            if m.name == name:
                return m
        return None

    # -- locations, for errors raised by other modules -----------------------
    @property
    def _file(self):
        return self.path or TEXT_NAME

    def line_of(self, key):
        """Line of a key path (``layer[2].x``, ``surface.barrier``) in the deck file, or None."""
        return _locate(self._source, key)

    def error(self, key, message, allowed=None, cls=DeckError):
        """An exception (not raised) located at ``key`` in this deck's file.

        For other modules: ``raise deck.error("layer[2].x", "AlGaAs needs x", cls=MaterialError)``.
        """
        line = None if _is_overridden(key, self.overrides) else self.line_of(key)
        if line is None and _is_overridden(key, self.overrides):
            message += " (value set by override)"
        return cls(_one_line(message), file=self._file, line=line, key=key, allowed=allowed)

    # -- derived decks and serialisation ---------------------------------------
    def with_overrides(self, items):
        """A new validated Deck with ``items`` ("PATH=VALUE" strings or {path: value}) applied."""
        pairs = _override_pairs(items)
        raw = _clone(self._raw)
        done = list(self.overrides)
        for path, value in pairs:
            done.append((_apply_override(raw, path, value, self._file), value))
        return _build(raw, self._source, self.path, tuple(done))

    def to_toml(self):
        """Canonical TOML of the effective deck (defaults filled in; None values left out)."""
        return dumps_toml(self._canonical())

    def hash(self):
        """sha256 hex digest of :meth:`to_toml`."""
        return hashlib.sha256(self.to_toml().encode("utf-8")).hexdigest()

    def _canonical(self):
        def contact(c):
            d = {"contact": c.kind}
            if c.barrier is not None:
                d["barrier"] = c.barrier
            if c.kind == "schottky":
                d["bias"] = c.bias
            return d

        def layer(l):
            d = {"name": l.name, "material": l.material}
            if l.x_top is not None:
                d["x"] = [l.x_top, l.x_bottom] if l.x_top != l.x_bottom else l.x_top
            for k in ("thickness", "donors", "acceptors", "sheet_donors", "sheet_acceptors"):
                d[k] = getattr(l, k)
            # keys of strained stacks: written only when set, so the text (and hash) of a
            # deck without them is what it always was
            if l.y_top is not None:
                d["y"] = [l.y_top, l.y_bottom] if l.y_top != l.y_bottom else l.y_top
            if l.lattice_matched is not None:
                d["lattice_matched"] = l.lattice_matched
            if l.relaxed:
                d["relaxed"] = True
            if l.donor_species != "shallow":
                d["donor_species"] = l.donor_species
            if l.dx_freeze_temperature is not None:
                d["dx_freeze_temperature"] = l.dx_freeze_temperature
            if l.dx_state != "equilibrium":
                d["dx_state"] = l.dx_state
            return d

        def table(obj):
            return {f.name: getattr(obj, f.name) for f in dataclasses.fields(obj)
                    if getattr(obj, f.name) is not None}

        sub = contact(self.substrate)
        for k in ("material", "x", "y", "lattice_constant"):
            v = getattr(self.lattice, k)
            if v is not None:
                sub[k] = v
        out = {"title": self.title, "temperature": self.temperature,
               "surface": contact(self.surface), "substrate": sub,
               "layer": [layer(l) for l in self.layers]}
        if self.materials:
            mats = {}
            for m in self.materials:
                d = {}
                if m.base is not None:
                    d["base"] = m.base
                if m.x is not None:
                    d["x"] = m.x
                if m.y is not None:
                    d["y"] = m.y
                d.update(m.params.as_dict())
                mats[m.name] = d
            out["material"] = mats
        out["physics"] = {"carriers": list(self.physics.carriers),
                          "ionization": self.physics.ionization}
        if self.physics.contacted_carrier != "auto":     # the default is left out: old hashes hold
            out["physics"]["contacted_carrier"] = self.physics.contacted_carrier
        # written only when not the default, so that older decks keep their canonical text
        if self.physics.polarity != "metal":
            out["physics"]["polarity"] = self.physics.polarity
        if self.physics.polarization != 1.0:
            out["physics"]["polarization"] = self.physics.polarization
        # written only when set, so the text (and hash) of a deck without them is unchanged
        if self.physics.exchange_correlation != "none":
            out["physics"]["exchange_correlation"] = self.physics.exchange_correlation
        if self.physics.nonparabolicity:
            out["physics"]["nonparabolicity"] = True
        if self.physics.quantum_valleys:
            out["physics"]["quantum_valleys"] = True
        if self.physics.hole_model != "parabolic":
            out["physics"]["hole_model"] = self.physics.hole_model
        q = {}
        if self.quantum.regions is not None:
            q["regions"] = [list(r) for r in self.quantum.regions]
        q["states"] = self.quantum.states
        out["quantum"] = q
        out["mesh"] = table(self.mesh)
        out["solver"] = table(self.solver)
        if self.channels:
            out["channel"] = [{"name": c.name, "carrier": c.carrier,
                               "layers": [self.layers[i].name for i in c.layers]} for c in self.channels]
        return out


# ---------------------------------------------------------------------------
# loading
# ---------------------------------------------------------------------------


def load_deck(path_or_text, overrides=()):
    """Read and validate a deck.

    ``path_or_text``: an ``os.PathLike`` is a path; a ``str`` holding a newline or ``=``
    is TOML text (shown as ``<deck>`` in errors); any other ``str`` is a path.
    ``overrides``: "PATH=VALUE" strings or a {path: value} dict, applied before validation.
    """
    if isinstance(path_or_text, os.PathLike) or (
            isinstance(path_or_text, str) and "\n" not in path_or_text and "=" not in path_or_text):
        path = os.fspath(path_or_text)
        text = read_input(path, what="deck")
    elif isinstance(path_or_text, str):
        path, text = None, path_or_text
    else:
        raise DeckError(f"load_deck wants a path or TOML text, got {type(path_or_text).__name__}")
    file = path or TEXT_NAME
    raw = _parse_toml(text, file)
    done = []
    for p, value in _override_pairs(overrides):
        done.append((_apply_override(raw, p, value, file), value))
    return _build(raw, text, path, tuple(done))


def get_path(deck_data: dict, path: str):
    """Value of a deck path (the override paths described above) in a parsed deck dict, or
    raise KeyError with the reason.  ``layer.NAME.KEY`` and ``layer.INDEX.KEY`` select a layer."""
    parts = path.split(".")
    if parts[0] == "layer" and len(parts) == 3:
        layers = deck_data.get("layer", [])
        if parts[1].isdigit():
            i = int(parts[1])
            if i >= len(layers):
                raise KeyError(f"the deck has {len(layers)} layers")
            layer = layers[i]
        else:
            match = [lay for lay in layers if lay.get("name") == parts[1]]
            if not match:
                raise KeyError(f"no layer named {parts[1]!r}")
            layer = match[0]
        if parts[2] not in layer:
            raise KeyError(f"the layer does not set {parts[2]!r}")
        return layer[parts[2]]
    node = deck_data
    for part in parts:
        if not isinstance(node, dict) or part not in node:
            raise KeyError(f"the deck does not set {path!r}")
        node = node[part]
    return node


#: the largest deck or study file read, in bytes (a deck is a few kB, a 10 000-layer deck under
#: 1 MB): a device or a wrong file given as a deck must not fill the memory
MAX_INPUT_BYTES = 16 * 2 ** 20
#: the deepest nesting of arrays and tables accepted in a deck or study file (a deck needs 4:
#: the document, [quantum], regions, one [top, bottom])
MAX_NESTING = 32


def _size_text(n):
    return f"{n / 2 ** 20:g} MiB"


def read_input(path, *, what="deck", error=DeckError) -> str:
    """The text of a deck or study file, refused (``error``, exit 2) when it is missing, not a
    file, not UTF-8, or larger than :data:`MAX_INPUT_BYTES` (only that many bytes are ever
    read: the zero device is refused at once)."""
    try:
        with open(path, "rb") as fh:
            data = fh.read(MAX_INPUT_BYTES + 1)
    except FileNotFoundError:
        raise error(f"{what} file not found", file=str(path)) from None
    except IsADirectoryError:
        raise error(f"is a directory, not a {what} file", file=str(path)) from None
    except OSError as exc:
        raise error(f"cannot read the {what} file: {exc.strerror or exc}", file=str(path)) from None
    if len(data) > MAX_INPUT_BYTES:
        raise error(f"larger than {_size_text(MAX_INPUT_BYTES)}: not a {what} file (a {what} is "
                    f"a few kB of TOML text)", file=str(path))
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as exc:
        raise error(f"not UTF-8 text (byte {exc.start})", file=str(path)) from None


def _depth(data) -> int:
    """Nesting depth of parsed TOML (a scalar 0, a table or array of scalars 1), without recursion."""
    deepest = 0
    stack = [(data, 0)]
    while stack:
        node, d = stack.pop()
        if isinstance(node, dict):
            node = node.values()
        elif not isinstance(node, list):
            continue
        d += 1
        deepest = max(deepest, d)
        if d > MAX_NESTING:
            break
        stack.extend((v, d) for v in node if isinstance(v, (dict, list)))
    return deepest


def parse_input(text, file, *, what="deck", error=DeckError) -> dict:
    """TOML text of a deck or study -> dict, with the limits of :data:`MAX_INPUT_BYTES` and
    :data:`MAX_NESTING` (too deep is refused, never a RecursionError); a syntax error is
    ``error`` located at its line."""
    if len(text) > MAX_INPUT_BYTES:
        raise error(f"larger than {_size_text(MAX_INPUT_BYTES)}: not a {what} (a {what} is a few "
                    "kB of TOML text)", file=file)
    too_deep = (f"nested deeper than {MAX_NESTING} levels of arrays and tables (a {what} needs "
                "at most 4)")
    try:
        data = tomllib.loads(text)
    except RecursionError:
        raise error(too_deep, file=file) from None
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        line = None
        m = re.search(r"\s*\(at line (\d+), column (\d+)\)\s*$", msg)
        if m:
            line = int(m.group(1))
            msg = msg[:m.start()] + f" (column {m.group(2)})"
        elif msg.endswith("(at end of document)"):
            line = text.count("\n") + (0 if text.endswith("\n") else 1) or 1
            msg = msg[:-len("(at end of document)")].rstrip() + " (at end of file)"
        raise error(_one_line(f"TOML syntax: {msg}"), file=file, line=line) from None
    if _depth(data) > MAX_NESTING:
        raise error(too_deep, file=file)
    return data


def _parse_toml(text, file):
    return parse_input(text, file)


# ---------------------------------------------------------------------------
# overrides
# ---------------------------------------------------------------------------

_PATH_PART = re.compile(r"^[A-Za-z0-9_-]+$")


def parse_override(item):
    """``"layer.spacer.thickness=12"`` -> ``("layer.spacer.thickness", 12)``.

    The value is read as a TOML value (numbers, booleans, "strings", [lists]); anything
    else is taken as a bare string (``surface.contact=ohmic``).
    """
    if not isinstance(item, str) or "=" not in item:
        raise DeckError(f"override {item!r} must be PATH=VALUE, e.g. layer.spacer.thickness=12",
                        key=str(item))
    path, _, text = item.partition("=")
    path, text = path.strip(), text.strip()
    if not path or not all(_PATH_PART.match(p) for p in path.split(".")):
        raise DeckError(_one_line(f"override path {path!r} must be dot-separated names, e.g. "
                                  "layer.spacer.thickness or surface.bias"), key=path or item)
    if not text:
        raise DeckError("override has no value after '='", key=path)
    try:
        parsed = tomllib.loads("v = " + text)
        if set(parsed) != {"v"}:
            raise tomllib.TOMLDecodeError("more than one value")
        value = parsed["v"]
    except tomllib.TOMLDecodeError:
        if text[0] in "[{\"'" or "\n" in text:
            raise DeckError(_one_line(f"override value {text!r} is not a valid TOML value"),
                            key=path) from None
        value = text
    return path, value


def _override_pairs(items):
    if items is None:
        return []
    if isinstance(items, dict):
        return [(str(k).strip(), v) for k, v in items.items()]
    if isinstance(items, str):
        items = [items]
    out = []
    for it in items:
        if isinstance(it, tuple) and len(it) == 2:
            out.append((str(it[0]).strip(), it[1]))
        else:
            out.append(parse_override(it))
    return out


def _apply_override(raw, path, value, file):
    """Apply one override to the raw dict in place; returns the canonical key path."""
    parts = path.split(".")
    root = parts[0]

    def bad(msg, allowed):
        return DeckError(_one_line(msg), file=file, key=path, allowed=Choices(allowed))

    def put(table, key, canon):
        if value is None:
            table.pop(key, None)
        else:
            table[key] = value
        return canon

    if root in _TOP:
        if len(parts) != 1:
            raise bad(f"{root} is a value, not a table", ())
        return put(raw, root, root)
    if root in _SIMPLE_TABLES:
        keys = list(KEYS[root])
        if len(parts) != 2:
            raise bad(f"override path must be {root}.KEY", keys)
        key = parts[1]
        if key not in keys:
            raise bad(f"unknown key {key!r} in [{root}]{_did_you_mean(key, keys)}", keys)
        table = raw.setdefault(root, {})
        if not isinstance(table, dict):
            raise bad(f"{root} in the deck is not a table", ())
        return put(table, key, f"{root}.{key}")
    if root == "layer":
        layers = raw.get("layer")
        if not isinstance(layers, list) or not all(isinstance(l, dict) for l in layers):
            raise bad("the deck has no [[layer]] stack to override", ())
        names = [l.get("name", f"layer{i}") for i, l in enumerate(layers)]
        if len(parts) != 3:
            raise bad("override path must be layer.NAME.KEY or layer.INDEX.KEY", names)
        sel, key = parts[1], parts[2]
        if sel.isdigit():
            i = int(sel)
            if i >= len(layers):
                raise bad(f"no layer {i}: the stack has {len(layers)} layers, numbered from 0",
                          [str(j) for j in range(len(layers))])
        elif sel in names:
            i = names.index(sel)
        else:
            raise bad(f"no layer named {sel!r}{_did_you_mean(sel, names)}", names)
        keys = list(_LAYER)
        if key not in keys:
            raise bad(f"unknown layer key {key!r}{_did_you_mean(key, keys)}", keys)
        return put(layers[i], key, f"layer[{i}].{key}")
    if root == "material":
        mats = raw.get("material")
        local = list(mats) if isinstance(mats, dict) else []
        if len(parts) != 3:
            raise bad("override path must be material.NAME.KEY", local)
        name, key = parts[1], parts[2]
        if name not in local:
            hint = (" (library materials cannot be changed: define [material.MyName] "
                    "with base = ... in the deck)") if name in _library_names() else ""
            raise bad(f"no deck-local material {name!r}{_did_you_mean(name, local)}{hint}", local)
        keys = list(_MATERIAL)
        if key not in keys:
            raise bad(f"unknown material key {key!r}{_did_you_mean(key, keys)}", keys)
        if not isinstance(mats[name], dict):
            raise bad(f"material.{name} in the deck is not a table", ())
        return put(mats[name], key, f"material.{name}.{key}")
    if root == "channel":
        raise bad("[[channel]] tables cannot be set by an override; edit the deck", ())
    raise bad(f"unknown override root {root!r}{_did_you_mean(root, TOP_KEYS)}", TOP_KEYS)


def _is_overridden(key, overrides):
    for k, _ in overrides:
        if key == k or key.startswith(k + "[") or key.startswith(k + "."):
            return True
    return False


# ---------------------------------------------------------------------------
# lazy look-ups of other modules' registries
# ---------------------------------------------------------------------------


def _library_names():
    """Names of every library material (imported when a deck is validated, not before)."""
    from selfcon.input import materials
    return tuple(materials.names())


def _library_alloys():
    """Names of the library's alloys."""
    from selfcon.input import materials
    return tuple(n for n in materials.names() if materials.is_alloy(n))


#: method names registered by the solver stage (selfcon.solver.mixers.register adds each mixer
#: it registers here): the deck stage validates ``solver.method`` without importing the solver
_REGISTERED_METHODS: list[str] = []


def register_method_name(name: str) -> None:
    """Make ``name`` an allowed ``solver.method`` (called by selfcon.solver.mixers.register)."""
    if name not in _REGISTERED_METHODS:
        _REGISTERED_METHODS.append(name)


def _solver_methods():
    return tuple(dict.fromkeys(SOLVER_METHODS + tuple(_REGISTERED_METHODS)))


# ---------------------------------------------------------------------------
# validation
# ---------------------------------------------------------------------------

_NAME = re.compile(r"^[A-Za-z0-9_-]+$")


def _one_line(s):
    return " ".join(str(s).splitlines())


def _did_you_mean(word, choices):
    choices = [str(c) for c in choices]
    lower = [c for c in choices if c.lower() == str(word).lower() and c != word]
    close = lower or difflib.get_close_matches(str(word), choices, n=1, cutoff=0.6)
    return f" (did you mean {close[0]!r}?)" if close else ""


def _show(v):
    if isinstance(v, str):
        return repr(v)
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, dict):
        return "a table"
    if isinstance(v, list):
        return _one_line(repr(v))[:60]
    return repr(v)


def _type_of(v):
    if isinstance(v, bool):
        return "boolean"
    if isinstance(v, str):
        return "string"
    if isinstance(v, numbers.Real):
        return "number"
    if isinstance(v, dict):
        return "table"
    if isinstance(v, (list, tuple)):
        return "list"
    return type(v).__name__


class _Ctx:
    def __init__(self, text, path, overrides):
        self.text = text
        self.file = path or TEXT_NAME
        self.overrides = overrides

    def error(self, key, message, allowed=None):
        over = _is_overridden(key, self.overrides) if key else False
        line = None if over else _locate(self.text, key)
        if over:
            message += " (value set by override)"
        return DeckError(_one_line(message), file=self.file, line=line, key=key,
                         allowed=Choices(allowed) if allowed is not None else None)

    def check_keys(self, table, spec, prefix, label):
        for k in table:
            if k not in spec:
                hint = _did_you_mean(k, spec)
                if not hint and k in TOP_KEYS and prefix:
                    hint = f" ({k!r} is a top-level key: put it before the first [table] header)"
                if not prefix and k in STUDY_MARKS and "deck" in table:
                    hint = (" (this file is a study: it names its deck with 'deck = ...'; "
                            "run it with `selfcon batch FILE`)")
                raise self.error(f"{prefix}{k}" if prefix else k,
                                 f"unknown key {k!r} in {label}{hint}", allowed=list(spec))

    def number(self, key, v, spec):
        if isinstance(v, bool) or not isinstance(v, numbers.Real):
            raise self.error(key, f"must be a number ({_unit(spec)}), got {_type_of(v)} {_show(v)}")
        v = float(v)
        if not math.isfinite(v):
            raise self.error(key, f"must be a finite number ({_unit(spec)}), got {v!r}")
        self.limits(key, v, spec)
        return v

    def integer(self, key, v, spec):
        if isinstance(v, bool) or not isinstance(v, numbers.Real) or (
                not isinstance(v, numbers.Integral) and not float(v).is_integer()):
            raise self.error(key, f"must be an integer, got {_type_of(v)} {_show(v)}")
        v = int(v)
        self.limits(key, v, spec)
        return v

    def string(self, key, v, spec, choices=None):
        if not isinstance(v, str):
            raise self.error(key, f"must be a string, got {_type_of(v)} {_show(v)}",
                             allowed=choices)
        if choices is not None and v not in choices:
            raise self.error(key, f"unknown value {v!r}{_did_you_mean(v, choices)}", allowed=choices)
        return v

    def limits(self, key, v, spec):
        lo_ok = spec.lo is None or (v > spec.lo if spec.lo_open else v >= spec.lo)
        hi_ok = spec.hi is None or (v < spec.hi if spec.hi_open else v <= spec.hi)
        if lo_ok and hi_ok:
            return
        why = f": {spec.below}" if spec.below and not lo_ok else ""
        raise self.error(key, f"must be {_range_text(spec)}, got {_num(v)}{why}")

    def get(self, table, name, spec, prefix, choices=None):
        """Value of ``table[name]`` checked against ``spec``, or its default."""
        key = f"{prefix}{name}"
        if name not in table:
            if spec.default is REQUIRED:
                what = f" ({_unit(spec)})" if spec.kind == "number" else ""
                raise self.error(key, f"is required{what}: {spec.doc}",
                                 allowed=choices or spec.choices)
            return spec.default
        v = table[name]
        if spec.kind == "number":
            return self.number(key, v, spec)
        if spec.kind == "integer":
            return self.integer(key, v, spec)
        if spec.kind == "string":
            return self.string(key, v, spec, choices or spec.choices)
        if spec.kind == "boolean":
            if not isinstance(v, bool):
                raise self.error(key, f"must be true or false, got {_type_of(v)} {_show(v)}")
            return v
        raise AssertionError(spec.kind)


def _num(v):
    if isinstance(v, float):
        return f"{v:.12g}"
    return repr(v)



def _range_text(spec):
    """'in [lo, hi] unit', '> lo unit' or '<= hi unit' for a KeySpec's limits (None if none)."""
    unit = "" if spec.unit == "-" else " " + spec.unit
    if spec.lo is not None and spec.hi is not None:
        return (f"in {'(' if spec.lo_open else '['}{_num(spec.lo)}, "
                f"{_num(spec.hi)}{')' if spec.hi_open else ']'}{unit}")
    if spec.lo is not None:
        return f"{'>' if spec.lo_open else '>='} {_num(spec.lo)}{unit}"
    if spec.hi is not None:
        return f"{'<' if spec.hi_open else '<='} {_num(spec.hi)}{unit}"
    return None

def _a(word):
    return ("an " if word[:1] in "aeiou" else "a ") + word


def _unit(spec):
    return "dimensionless" if spec.unit == "-" else spec.unit


def _table(ctx, raw, name, required=False, default=None):
    if name not in raw:
        if required:
            raise ctx.error(name, f"[{name}] table is required")
        return dict(default or {})
    t = raw[name]
    if not isinstance(t, dict):
        raise ctx.error(name, f"must be a table [{name}], got {_type_of(t)} {_show(t)}")
    return t


def _build(raw, text, path, overrides):
    ctx = _Ctx(text, path, overrides)
    ctx.check_keys(raw, {k: None for k in TOP_KEYS}, "", "the deck (top level)")

    title = ctx.get(raw, "title", _TOP["title"], "")
    temperature = ctx.get(raw, "temperature", _TOP["temperature"], "")

    surface = _contact(ctx, _table(ctx, raw, "surface", required=True), "surface")
    sub_table = _table(ctx, raw, "substrate", default={"contact": "ohmic"})
    ctx.check_keys(sub_table, _SUBSTRATE, "substrate.", "[substrate]")
    contact_part = {k: v for k, v in sub_table.items() if k in _CONTACT}
    contact_part.setdefault("contact", "ohmic")
    substrate = _contact(ctx, contact_part, "substrate")

    materials = _materials(ctx, raw)
    lattice = _lattice(ctx, sub_table, materials)
    layers = _layers(ctx, raw, materials)
    total = math.fsum(l.thickness for l in layers)

    physics = _physics(ctx, _table(ctx, raw, "physics"))
    if physics.ionization != "thermal":
        for l in layers:
            if l.donor_species == "Si-DX":
                raise ctx.error(f"layer[{l.index}].donor_species", "Si-DX donors need "
                                "physics.ionization = \"thermal\" (the DX level is occupied by "
                                "Fermi-Dirac statistics); with full ionisation use shallow")
    quantum = _quantum(ctx, _table(ctx, raw, "quantum"), total)
    mesh = _mesh(ctx, _table(ctx, raw, "mesh"))
    solver = _solver(ctx, _table(ctx, raw, "solver"))
    channels = _channels(ctx, raw, layers)

    deck = Deck(title=title, temperature=temperature, surface=surface, substrate=substrate,
                layers=layers, materials=materials, physics=physics, quantum=quantum,
                mesh=mesh, solver=solver, channels=channels, lattice=lattice, text="", path=path,
                overrides=overrides, _raw=_clone(raw), _source=text)
    object.__setattr__(deck, "text", text if not overrides else deck.to_toml())
    return deck


def _contact(ctx, t, name):
    p = f"{name}."
    ctx.check_keys(t, _CONTACT, p, f"[{name}]")
    kind = ctx.get(t, "contact", _CONTACT["contact"], p)
    if kind in BARRIER_KINDS:
        if "barrier" not in t:
            raise ctx.error(f"{p}barrier", f"is required for {_a(kind)} contact "
                            "(eV, Ec - EF at the contact)")
        barrier = ctx.get(t, "barrier", _CONTACT["barrier"], p)
    else:
        if "barrier" in t:
            raise ctx.error(f"{p}barrier", f"is not used by {_a(kind)} contact; only "
                            f"{' and '.join(BARRIER_KINDS)} contacts take a barrier")
        barrier = None
    if "bias" in t and kind != "schottky":
        raise ctx.error(f"{p}bias", f"is not used by {_a(kind)} contact; only schottky contacts "
                        "take a bias")
    bias = ctx.get(t, "bias", _CONTACT["bias"], p)
    return Contact(kind=kind, barrier=barrier, bias=bias)


def _materials(ctx, raw):
    t = _table(ctx, raw, "material")
    library = set(_library_names())
    out = []
    pending_x = []          # (key, name) of materials giving x: checked once every base is known
    for name, m in t.items():
        key = f"material.{name}"
        if not isinstance(m, dict):
            raise ctx.error(key, f"must be a table [material.{name}], got {_type_of(m)} {_show(m)}")
        if not _NAME.match(name):
            raise ctx.error(key, f"material name {name!r} may hold only letters, digits, _ and -")
        if name in library:
            raise ctx.error(key, f"{name!r} is a library material; give the deck-local one "
                            f"another name and write base = \"{name}\"")
        p = f"{key}."
        ctx.check_keys(m, _MATERIAL, p, f"[material.{name}]")
        base = ctx.get(m, "base", _MATERIAL["base"], p)
        x = ctx.get(m, "x", _MATERIAL["x"], p)
        if x is not None:
            pending_x.append((f"{p}x", name))
        y = ctx.get(m, "y", _MATERIAL["y"], p)
        params = Params((k, ctx.get(m, k, spec, p)) for k, spec in MATERIAL_PARAMS.items() if k in m)
        out.append(MaterialDef(name=name, base=base, x=x, y=y, params=params, file=ctx.file,
                               line=None if _is_overridden(key, ctx.overrides)
                               else _locate(ctx.text, key)))
    for key, name in pending_x:
        _refuse_x_without_alloy(ctx, key, name, out)
    return tuple(out)


def _composition_kind(material, materials):
    """binary | ternary | quaternary | standalone | None (materials not importable)."""
    try:
        from selfcon.input.materials import kind
    except ImportError:            # pragma: no cover - the deck stage without the library
        return None
    return kind(material, materials)


def _lattice(ctx, t, materials):
    """[substrate] material / x / y / lattice_constant -> Lattice (checked)."""
    p = "substrate."
    material = ctx.get(t, "material", _SUBSTRATE["material"], p)
    x = ctx.get(t, "x", _SUBSTRATE["x"], p)
    y = ctx.get(t, "y", _SUBSTRATE["y"], p)
    a = ctx.get(t, "lattice_constant", _SUBSTRATE["lattice_constant"], p)
    if a is not None and material is not None:
        raise ctx.error(f"{p}lattice_constant", "is exclusive with substrate.material: give the "
                        "substrate material (its lattice constant at the deck temperature) or "
                        "an explicit lattice constant, not both")
    if material is None:
        for k, v in (("x", x), ("y", y)):
            if v is not None:
                raise ctx.error(f"{p}{k}", "needs substrate.material (the alloy it is the "
                                "composition of)")
        return Lattice(lattice_constant=a)
    known = [m.name for m in materials] + list(_library_names())
    if material not in known:
        raise ctx.error(f"{p}material", f"unknown substrate material {material!r}"
                        f"{_did_you_mean(material, known)}", allowed=known)
    k = _composition_kind(material, materials)
    _check_composition(ctx, p, k, material, x is not None, y is not None, False,
                       _material_fixes(material, materials))
    return Lattice(material=material, x=x, y=y)


def _material_fixes(material, materials):
    """Which compositions a deck-local material (chain) fixes itself: set of "x", "y"."""
    by = {m.name: m for m in materials}
    out, seen = set(), set()
    while material in by and material not in seen:
        seen.add(material)
        m = by[material]
        if m.x is not None:
            out.add("x")
        if m.y is not None:
            out.add("y")
        material = m.base
    return out


def _check_composition(ctx, p, kind, material, has_x, has_y, matched, fixed=()):
    """x / y / lattice_matched against the material's kind; errors name the key."""
    has_x = has_x or "x" in fixed
    has_y = has_y or "y" in fixed
    if kind in ("binary", "standalone"):
        what = "a binary" if kind == "binary" else "a deck-local material without base"
        if has_y:
            raise ctx.error(f"{p}y", f"{material} is {what}: it takes no composition y (only the "
                            "quaternaries InGaAsP and AlGaInAs do)")
        if matched:
            raise ctx.error(f"{p}lattice_matched", f"{material} is {what}: it has no "
                            "composition to choose")
    elif kind == "ternary":
        if has_y:
            raise ctx.error(f"{p}y", f"{material} is a ternary: it takes only x (the quaternaries "
                            "InGaAsP and AlGaInAs take y)")
        if matched and has_x:
            raise ctx.error(f"{p}x", f"{material} with lattice_matched: the composition x is "
                            "solved, leave x out")
        if not matched and not has_x:
            raise ctx.error(f"{p}x", f"{material} is an alloy and needs x (or lattice_matched)",
                            allowed="0 <= x <= 1")
    elif kind == "quaternary":
        if matched and has_x and has_y:
            raise ctx.error(f"{p}y", f"{material} with lattice_matched: give one of x and y, "
                            "the other is solved")
        if matched and not (has_x or has_y):
            raise ctx.error(f"{p}x", f"{material} with lattice_matched needs one of x and y")
        if not matched and not (has_x and has_y):
            raise ctx.error(f"{p}{'y' if has_x else 'x'}", f"{material} is a quaternary and needs "
                            "both x and y (or lattice_matched and one of them)")


def _check_match(ctx, p, material, target, xs, ys, materials):
    """The composition lattice_matched asks for exists (at both ends of a graded layer)."""
    try:
        from selfcon.errors import MaterialError
        from selfcon.input.materials import lattice_matched
    except ImportError:            # pragma: no cover - the deck stage without the library
        return
    for k in range(2):
        try:
            lattice_matched(material, target, x=xs[k], y=ys[k], local_defs=materials)
        except MaterialError as err:
            key = err.key if err.key in ("x", "y", "lattice_matched") else "lattice_matched"
            raise ctx.error(f"{p}{key}", err.message) from None


def _layers(ctx, raw, materials):
    if "layer" not in raw:
        raise ctx.error("layer", "the stack is empty: give at least one [[layer]] "
                        "(material and thickness)")
    arr = raw["layer"]
    if isinstance(arr, dict):
        raise ctx.error("layer", "must be an array of tables: write [[layer]], not [layer]")
    if not isinstance(arr, list) or not all(isinstance(l, dict) for l in arr):
        raise ctx.error("layer", f"must be an array of tables [[layer]], got {_type_of(arr)}")
    if not arr:
        raise ctx.error("layer", "the stack is empty: give at least one [[layer]]")
    local = [m.name for m in materials]
    known = local + sorted(set(_library_names()))
    out, seen = [], {}
    for i, t in enumerate(arr):
        p = f"layer[{i}]."
        ctx.check_keys(t, _LAYER, p, f"[[layer]] {i}")
        if "name" in t:
            name = ctx.string(f"{p}name", t["name"], _LAYER["name"])
            if not _NAME.match(name) or name.isdigit():
                raise ctx.error(f"{p}name", f"layer name {name!r} must be letters, digits, _ and "
                                "-, not all digits (so layer.NAME and layer.INDEX differ)")
        else:
            name = f"layer{i}"
        if name in seen:
            raise ctx.error(f"{p}name", f"duplicate layer name {name!r} (also layer {seen[name]}; "
                            "unnamed layers are called layer<index>)")
        seen[name] = i
        material = ctx.get(t, "material", _LAYER["material"], p)
        if material not in known:
            raise ctx.error(f"{p}material", f"unknown material {material!r}"
                            f"{_did_you_mean(material, known)}", allowed=known)
        x_top = x_bottom = None
        if "x" in t:
            x_top, x_bottom = _fraction(ctx, f"{p}x", t["x"], _LAYER["x"])
            _refuse_x_without_alloy(ctx, f"{p}x", material, materials)
        y_top = y_bottom = None
        if "y" in t:
            y_top, y_bottom = _fraction(ctx, f"{p}y", t["y"], _LAYER["y"])
        matched = ctx.get(t, "lattice_matched", _LAYER["lattice_matched"], p)
        if matched is not None:
            binaries = [n for n in _library_names() if _composition_kind(n, ()) == "binary"]
            if matched not in binaries:
                raise ctx.error(f"{p}lattice_matched", f"unknown lattice-match target "
                                f"{matched!r}{_did_you_mean(matched, binaries)}: give a library "
                                "binary", allowed=binaries)
        relaxed = ctx.get(t, "relaxed", _LAYER["relaxed"], p)
        kind = _composition_kind(material, materials)
        if "y" in t or matched is not None or kind in ("ternary", "quaternary"):
            _check_composition(ctx, p, kind, material, x_top is not None, y_top is not None,
                               matched is not None, _material_fixes(material, materials))
        if matched is not None:
            _check_match(ctx, p, material, matched, (x_top, x_bottom), (y_top, y_bottom), materials)
        thickness = ctx.get(t, "thickness", _LAYER["thickness"], p)
        dens = {k: ctx.get(t, k, _LAYER[k], p)
                for k in ("donors", "acceptors", "sheet_donors", "sheet_acceptors")}
        dx = _donor_species(ctx, t, p, material, materials)
        out.append(Layer(index=i, name=name, material=material, x_top=x_top, x_bottom=x_bottom,
                         thickness=thickness, y_top=y_top, y_bottom=y_bottom,
                         lattice_matched=matched, relaxed=relaxed,
                         line=_locate(ctx.text, f"layer[{i}]"), **dens, **dx))
    return tuple(out)


def _donor_species(ctx, t, p, material, materials):
    """layer.donor_species, dx_freeze_temperature, dx_state (checked together)."""
    species = ctx.get(t, "donor_species", _LAYER["donor_species"], p)
    freeze = ctx.get(t, "dx_freeze_temperature", _LAYER["dx_freeze_temperature"], p)
    state = ctx.get(t, "dx_state", _LAYER["dx_state"], p)
    if species != "Si-DX":
        for k in ("dx_freeze_temperature", "dx_state"):
            if k in t:
                raise ctx.error(f"{p}{k}", f"applies to Si-DX donors only; set {p}donor_species "
                                "= \"Si-DX\" or remove it")
        if species in ("P", "As") and alloy_root(material, materials)[0] not in GROUP_IV_HOSTS:
            raise ctx.error(f"{p}donor_species", f"{species} donor levels are given for Si, Ge and "
                            f"SiGe only, not for {material!r}", allowed=DONOR_SPECIES)
    else:
        root, _ = alloy_root(material, materials)
        if root not in DX_HOSTS:
            raise ctx.error(f"{p}donor_species", f"the Si-DX level is given for AlGaAs and GaAs "
                            f"only, not for {material!r}", allowed=DONOR_SPECIES)
        if freeze is not None and state == "ionized":
            raise ctx.error(f"{p}dx_freeze_temperature", "a dark cool-down and dx_state = "
                            "\"ionized\" (illuminated) exclude each other; give one")
    return {"donor_species": species, "dx_freeze_temperature": freeze, "dx_state": state}


def alloy_root(name, materials):
    """(root, chain): the library material a deck-local chain ends in (None for a base-less
    material or a cycle, which the material library reports) and the local names passed."""
    local = {m.name: m for m in materials}
    chain = []
    while name in local and name not in chain:
        chain.append(name)
        name = local[name].base
        if name is None:
            return None, chain
    return (None if name in chain else name), chain


def _refuse_x_without_alloy(ctx, key, material, materials):
    """An alloy fraction on a binary (or on a deck-local material built on one) would be
    silently ignored: refuse it, naming the key."""
    root, chain = alloy_root(material, materials)
    if root in _library_alloys():
        return
    if root is None:
        what = f"material {material!r} has no library alloy as its base"
    elif chain:
        what = f"material {material!r} is based on the binary {root}"
    else:
        what = f"{root} is a binary"
    raise ctx.error(key, f"x is given but {what}, which has no alloy fraction; remove x or "
                    "use an alloy", allowed=_library_alloys())


def _fraction(ctx, key, v, spec):
    if isinstance(v, (list, tuple)):
        if len(v) != 2:
            raise ctx.error(key, f"must be a number or [top, bottom] (graded), got a list of "
                            f"{len(v)} values")
        return ctx.number(key, v[0], spec), ctx.number(key, v[1], spec)
    if isinstance(v, bool) or not isinstance(v, numbers.Real):
        raise ctx.error(key, f"must be a number or [top, bottom] in [0, 1], got {_type_of(v)} "
                        f"{_show(v)}")
    x = ctx.number(key, v, spec)
    return x, x


def _physics(ctx, t):
    p = "physics."
    ctx.check_keys(t, _PHYSICS, p, "[physics]")
    carriers = CARRIERS
    if "carriers" in t:
        v, key = t["carriers"], "physics.carriers"
        if isinstance(v, str):
            v = [v]
        if not isinstance(v, (list, tuple)):
            raise ctx.error(key, f"must be a list of strings, got {_type_of(v)} {_show(v)}",
                            allowed=ALL_CARRIERS)
        if not v:
            raise ctx.error(key, "must name at least one carrier", allowed=ALL_CARRIERS)
        for c in v:
            ctx.string(key, c, _PHYSICS["carriers"], ALL_CARRIERS)
        dup = [c for c in v if list(v).count(c) > 1]
        if dup:
            raise ctx.error(key, f"{dup[0]!r} is listed twice", allowed=ALL_CARRIERS)
        carriers = tuple(v)
    ionization = ctx.get(t, "ionization", _PHYSICS["ionization"], p)
    contacted = ctx.get(t, "contacted_carrier", _PHYSICS["contacted_carrier"], p)
    polarity = ctx.get(t, "polarity", _PHYSICS["polarity"], p)
    polarization = ctx.get(t, "polarization", _PHYSICS["polarization"], p)
    xc = ctx.get(t, "exchange_correlation", _PHYSICS["exchange_correlation"], p)
    nonparabolic = ctx.get(t, "nonparabolicity", _PHYSICS["nonparabolicity"], p)
    hole_model = ctx.get(t, "hole_model", _PHYSICS["hole_model"], p)
    quantum_valleys = ctx.get(t, "quantum_valleys", _PHYSICS["quantum_valleys"], p)
    if quantum_valleys and not {"x_electron", "l_electron"} & set(carriers):
        raise ctx.error("physics.quantum_valleys", "true needs x_electron or l_electron in "
                        "physics.carriers (the valleys it makes quantum)",
                        allowed=("x_electron", "l_electron"))
    return Physics(carriers=carriers, ionization=ionization, contacted_carrier=contacted,
                   polarity=polarity, polarization=float(polarization), exchange_correlation=xc,
                   nonparabolicity=bool(nonparabolic),
                   quantum_valleys=bool(quantum_valleys), hole_model=hole_model)


def _quantum(ctx, t, total):
    p = "quantum."
    ctx.check_keys(t, _QUANTUM, p, "[quantum]")
    regions = None
    if "regions" in t:
        v, key = t["regions"], "quantum.regions"
        if not isinstance(v, (list, tuple)):
            raise ctx.error(key, f"must be a list of [top, bottom] pairs in nm, got {_type_of(v)}")
        spec = KeySpec("number", "nm", None, "")
        regs = []
        tol = 1e-9 * max(total, 1.0)
        for j, r in enumerate(v):
            k = f"{key}[{j}]"
            if not isinstance(r, (list, tuple)) or len(r) != 2:
                raise ctx.error(k, f"must be a [top, bottom] pair in nm, got {_show(r)}")
            top, bot = ctx.number(k, r[0], spec), ctx.number(k, r[1], spec)
            if not 0.0 <= top < bot:
                raise ctx.error(k, f"needs 0 <= top < bottom (nm), got [{_num(top)}, {_num(bot)}]")
            if bot > total + tol:
                raise ctx.error(k, f"bottom {_num(bot)} nm lies below the stack "
                                f"(total thickness {_num(total)} nm)")
            if regs and top < regs[-1][1]:
                raise ctx.error(k, f"[{_num(top)}, {_num(bot)}] overlaps or precedes "
                                f"[{_num(regs[-1][0])}, {_num(regs[-1][1])}]: regions must be "
                                "sorted top to bottom and must not overlap")
            regs.append((top, min(bot, total) if bot > total else bot))
        regions = tuple(regs)
    states = ctx.get(t, "states", _QUANTUM["states"], p)
    return QuantumSpec(regions=regions, states=states)


def _mesh(ctx, t):
    p = "mesh."
    ctx.check_keys(t, _MESH, p, "[mesh]")
    vals = {k: ctx.get(t, k, spec, p) for k, spec in _MESH.items()}
    step, fine, bulk = vals["step"], vals["fine"], vals["bulk_step"]
    if fine is not None and fine > step:
        raise ctx.error("mesh.fine", f"must be <= mesh.step ({_num(step)} nm), got {_num(fine)} nm")
    if bulk is not None and bulk < step:
        raise ctx.error("mesh.bulk_step", f"must be >= mesh.step ({_num(step)} nm), got "
                        f"{_num(bulk)} nm")
    return MeshSpec(**vals)


_AUTO_CHANNEL_NAME = re.compile(r"^(electron|hole)[0-9]+$")


def _layer_ref(ctx, key, item, layers):
    """One entry of channel.layers -> a tuple of layer indices."""
    names = [l.name for l in layers]

    def one(ref):
        if isinstance(ref, bool):
            raise ctx.error(key, f"layer reference must be a name or an index, got {_show(ref)}",
                            allowed=names)
        if isinstance(ref, numbers.Integral) or (isinstance(ref, str) and ref.strip().isdigit()):
            i = int(ref)
            if not 0 <= i < len(layers):
                raise ctx.error(key, f"no layer {i}: the stack has {len(layers)} layers, numbered "
                                "from 0", allowed=list(range(len(layers))))
            return i
        if isinstance(ref, str) and ref.strip() in names:
            return names.index(ref.strip())
        if isinstance(ref, str):
            raise ctx.error(key, f"no layer named {ref.strip()!r}{_did_you_mean(ref.strip(), names)}",
                            allowed=names)
        raise ctx.error(key, f"layer reference must be a name, an index or \"A:B\", got "
                        f"{_type_of(ref)} {_show(ref)}", allowed=names)

    if isinstance(item, str) and ":" in item:
        a, _, b = item.partition(":")
        i, j = one(a), one(b)
        if j < i:
            raise ctx.error(key, f"range {item!r} runs upwards (layer {j} lies above layer {i}); "
                            "write the top layer first")
        return tuple(range(i, j + 1))
    return (one(item),)


def _channels(ctx, raw, layers):
    if "channel" not in raw:
        return ()
    arr = raw["channel"]
    if isinstance(arr, dict):
        raise ctx.error("channel", "must be an array of tables: write [[channel]], not [channel]")
    if not isinstance(arr, list) or not all(isinstance(c, dict) for c in arr):
        raise ctx.error("channel", f"must be an array of tables [[channel]], got {_type_of(arr)}")
    out, seen = [], {}
    for k, t in enumerate(arr):
        p = f"channel[{k}]."
        ctx.check_keys(t, _CHANNEL, p, f"[[channel]] {k}")
        name = ctx.get(t, "name", _CHANNEL["name"], p)
        if not _NAME.match(name) or name.isdigit():
            raise ctx.error(f"{p}name", f"channel name {name!r} must be letters, digits, _ and -, "
                            "not all digits")
        if _AUTO_CHANNEL_NAME.match(name):
            raise ctx.error(f"{p}name", f"{name!r} is reserved for auto-detected channels "
                            "(electron<N>, hole<N>); choose another name")
        if name in seen:
            raise ctx.error(f"{p}name", f"duplicate channel name {name!r} (also channel {seen[name]})")
        seen[name] = k
        carrier = ctx.get(t, "carrier", _CHANNEL["carrier"], p)
        key = f"{p}layers"
        if "layers" not in t:
            raise ctx.error(key, f"is required: {_CHANNEL['layers'].doc}", allowed=[l.name for l in layers])
        v = t["layers"]
        if isinstance(v, (str, numbers.Integral)) and not isinstance(v, bool):
            v = [v]
        if not isinstance(v, list) or not v:
            raise ctx.error(key, f"must be a non-empty list of layer names, indices or \"A:B\" ranges, "
                            f"got {_show(v)}", allowed=[l.name for l in layers])
        idx = sorted({i for item in v for i in _layer_ref(ctx, key, item, layers)})
        if idx != list(range(idx[0], idx[-1] + 1)):
            missing = [layers[i].name for i in range(idx[0], idx[-1] + 1) if i not in idx]
            raise ctx.error(key, "a channel is one depth interval: its layers must be contiguous "
                            f"(missing {', '.join(repr(m) for m in missing)})")
        for other in out:
            if other.carrier == carrier and set(other.layers) & set(idx):
                raise ctx.error(key, f"overlaps channel {other.name!r} of the same carrier "
                                f"({carrier}); one layer belongs to one {carrier} channel")
        out.append(ChannelSpec(name=name, carrier=carrier, layers=tuple(idx),
                               line=_locate(ctx.text, f"channel[{k}]")))
    return tuple(out)


def _solver(ctx, t):
    p = "solver."
    ctx.check_keys(t, _SOLVER, p, "[solver]")
    vals = {}
    for k, spec in _SOLVER.items():
        choices = _solver_methods() if k == "method" else None
        vals[k] = ctx.get(t, k, spec, p, choices=choices)
    return SolverSpec(**vals)


# ---------------------------------------------------------------------------
# locating a key path in the source text
# ---------------------------------------------------------------------------

_HEADER = re.compile(r"^\s*(\[\[?)\s*([A-Za-z0-9_\-.\"' ]+?)\s*\]\]?\s*(?:#.*)?$")


def _norm(name):
    return ".".join(part.strip().strip("\"'") for part in name.split("."))


def _split_key(key):
    """``layer[2].x`` -> ("layer", 2, "x"); ``material.M.band_gap`` -> ("material.M", None,
    "band_gap"); ``surface`` -> ("surface", None, None); ``temperature`` -> ("", None, ...)."""
    key = re.sub(r"(\.\w+)\[\d+\]$", r"\1", key)       # quantum.regions[1] -> quantum.regions
    m = re.match(r"^(\w+)\[(\d+)\](?:\.(.+))?$", key)
    if m:
        return m.group(1), int(m.group(2)), m.group(3)
    parts = key.split(".")
    if parts[0] == "material":
        if len(parts) == 1:
            return "material", None, None
        return "material." + parts[1], None, ".".join(parts[2:]) or None
    if parts[0] in TABLES:
        return parts[0], None, ".".join(parts[1:]) or None
    return "", None, key


def _clone(obj):
    """A deep copy of parsed TOML (dicts, lists, scalars); several times faster than copy.deepcopy,
    which a study of 1e5 decks would otherwise call 2e5 times."""
    t = type(obj)
    if t is dict:
        return {k: _clone(v) for k, v in obj.items()}
    if t is list:
        return [_clone(v) for v in obj]
    if t in (str, int, float, bool) or obj is None:
        return obj
    return copy.deepcopy(obj)


_KEY_LINE = re.compile(r"^\s*([\"']?)(.*?)\1\s*=")
_TOP_HEAD = re.compile(r"^\s*([A-Za-z0-9_-]+)\s*[.=]")


class _LineIndex:
    """Where every key and table header of one deck text is: built in one pass over the
    text, so that locating all the keys of a deck of N layers costs O(N), not O(N^2).

    ``header[name]`` first header line of a table (any ``[name]`` or ``[[name]]``);
    ``prefix[name]`` first header line whose name is ``name`` or starts with ``name.``;
    ``array[(name, k)]`` the k-th ``[[name]]`` header (0-based);
    ``first_key[(name, key)]`` first ``key =`` line inside any section called ``name``
    (``""``: the top level, before the first header);
    ``array_key[(name, k, key)]`` the same inside the k-th ``[[name]]`` only;
    ``top_dotted[head]`` first top-level line ``head.x = ...`` or ``head = {...}``."""

    __slots__ = ("header", "prefix", "array", "first_key", "array_key", "top_dotted", "lines")

    def __init__(self, text):
        self.header, self.prefix, self.array = {}, {}, {}
        self.first_key, self.array_key, self.top_dotted = {}, {}, {}
        count = {}
        current, k = "", None
        n = 0
        for n, line in enumerate(text.splitlines(), 1):
            m = _HEADER.match(line)
            if m and "=" not in line:
                name = _norm(m.group(2))
                if m.group(1) == "[[":
                    k = count[name] = count.get(name, -1) + 1
                    self.array.setdefault((name, k), n)
                else:
                    k = None
                current = name
                self.header.setdefault(name, n)
                parts = name.split(".")
                for j in range(1, len(parts) + 1):
                    self.prefix.setdefault(".".join(parts[:j]), n)
                continue
            km = _KEY_LINE.match(line)
            if km:
                key = km.group(2)
                self.first_key.setdefault((current, key), n)
                if k is not None:
                    self.array_key.setdefault((current, k, key), n)
            if current == "":
                tm = _TOP_HEAD.match(line)
                if tm:
                    self.top_dotted.setdefault(tm.group(1), n)
        self.lines = n


@functools.lru_cache(maxsize=16)
def _line_index(text):
    """The :class:`_LineIndex` of a deck text (cached: every deck of a study shares the base
    deck's text)."""
    return _LineIndex(text)


def _first(*lines):
    found = [n for n in lines if n is not None]
    return min(found) if found else None


@functools.lru_cache(maxsize=4096)
def _locate(text, key):
    """1-based line of ``key`` in ``text`` (its ``key =`` line, else its table header), or None.

    Linear in the deck's size: one pass builds the text's :class:`_LineIndex`, then each
    key is a few dictionary look-ups (a 10 000-layer deck locates its layers in one pass)."""
    if not text or not key:
        return None
    table, index, leaf = _split_key(key)
    ix = _line_index(text)
    if table == "":
        return _first(ix.first_key.get(("", leaf))) or ix.prefix.get(leaf)
    if index is not None:
        if leaf is not None:
            found = ix.array_key.get((table, index, leaf))
            if found is not None:
                return found
        return ix.array.get((table, index))
    if leaf is not None:
        found = ix.first_key.get((table, leaf))
        if found is not None:
            return found
    return _first(ix.header.get(table), ix.top_dotted.get(table.split(".")[0]))


# ---------------------------------------------------------------------------
# a small TOML writer (canonical, deterministic)
# ---------------------------------------------------------------------------

_BARE = re.compile(r"^[A-Za-z0-9_-]+$")


def _toml_key(k):
    return k if _BARE.match(k) else _toml_str(k)


_PLAIN = re.compile(r'^[^"\\\x00-\x1f\x7f]*$')


def _toml_str(s):
    if _PLAIN.match(s):                 # nothing to escape (the common case)
        return f'"{s}"'
    out = ['"']
    for ch in s:
        o = ord(ch)
        if ch == '"':
            out.append('\\"')
        elif ch == "\\":
            out.append("\\\\")
        elif ch == "\n":
            out.append("\\n")
        elif ch == "\t":
            out.append("\\t")
        elif o < 0x20 or o == 0x7F:
            out.append(f"\\u{o:04x}")
        else:
            out.append(ch)
    out.append('"')
    return "".join(out)


def _toml_value(v):
    t = type(v)
    if t is float:                      # fast paths for the common exact types
        return repr(v) if math.isfinite(v) else ("nan" if math.isnan(v) else ("inf" if v > 0 else "-inf"))
    if t is str:
        return _toml_str(v)
    if t is int:
        return str(v)
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, str):
        return _toml_str(v)
    if isinstance(v, numbers.Integral):
        return str(int(v))
    if isinstance(v, numbers.Real):
        f = float(v)
        if math.isnan(f):
            return "nan"
        if math.isinf(f):
            return "inf" if f > 0 else "-inf"
        return repr(f)
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_toml_value(x) for x in v) + "]"
    if isinstance(v, dict):
        return "{" + ", ".join(f"{_toml_key(k)} = {_toml_value(x)}" for k, x in v.items()) + "}"
    raise TypeError(f"cannot write {type(v).__name__} to TOML")


def _is_table_array(v):
    return isinstance(v, (list, tuple)) and len(v) > 0 and all(isinstance(x, dict) for x in v)


def dumps_toml(data):
    """Serialise a dict (str/int/float/bool, lists, tables, arrays of tables) to TOML text."""
    lines = []
    _dump_table(data, [], lines)
    return "\n".join(lines).strip("\n") + "\n"


def _dump_table(data, prefix, lines, header=None):
    scalars = [(k, v) for k, v in data.items() if not isinstance(v, dict) and not _is_table_array(v)]
    if header is not None and (scalars or not any(isinstance(v, dict) or _is_table_array(v)
                                                  for v in data.values())):
        lines.append("")
        lines.append(header)
    for k, v in scalars:
        lines.append(f"{_toml_key(k)} = {_toml_value(v)}")
    for k, v in data.items():
        path = prefix + [_toml_key(k)]
        if isinstance(v, dict):
            _dump_table(v, path, lines, "[" + ".".join(path) + "]")
        elif _is_table_array(v):
            for item in v:
                lines.append("")
                lines.append("[[" + ".".join(path) + "]]")
                sub = []
                _dump_table(item, path, sub)
                lines.extend(sub)
