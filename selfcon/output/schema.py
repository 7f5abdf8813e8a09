"""The result file's layout: every group, dataset, unit and description, defined once.

This module is data only (it imports nothing of selfcon).  The writer and the reader of
:mod:`selfcon.output.result`, the CSV export and the README's layout table all take the
names, units and descriptions from here.  Units are UDUNITS-style strings (``nm``, ``eV``,
``V``, ``V/cm``, ``cm-3``, ``cm-2``, ``nm-1/2``, ``m0``, ``s``, ``1``).
"""
from __future__ import annotations

SCHEMA = "selfcon.result"
SCHEMA_VERSION = 1

#: subband datasets: name -> (units, description)
SUBBAND_FIELDS = {
    "energy": ("eV", "subband edge energy relative to EF (hole states in electron energy)"),
    "occupation": ("cm-2", "sheet density held by the subband"),
    "wavefunction": ("nm-1/2", "envelope function psi(z) per state (columns), "
                               "integral of |psi|^2 dz = 1, zero outside its quantum region"),
    "in_plane_mass": ("m0", "in-plane effective mass used for the 2D density of states"),
    "region": ("1", "index of the quantum region (/mesh/quantum_regions) holding the state"),
    "degeneracy": ("1", "valley degeneracy used for the occupation (spin excluded)"),
    "channel": ("1", "index into /channels of the channel holding most of the state's |psi|^2 "
                     "(more than half of it), -1 for none"),
    "bound": ("1", "1 if the energy lies below the band edge at both ends of the quantum region "
                   "(holes: above it), 0 for a state of the region's box above a barrier"),
}

#: /channels datasets, 1-D over the ``channel`` dimension (one entry per channel, top first):
#: name -> (units, description)
CHANNEL_FIELDS = {
    "name": ("1", "channel name: a [[channel]] of the deck, the layer holding it, or "
                  "electron<N> / hole<N> numbered from the surface"),
    "carrier": ("1", "carrier confined in the channel: electron or hole"),
    "top_nm": ("nm", "depth of the top of the channel's interval"),
    "bottom_nm": ("nm", "depth of the bottom of the channel's interval"),
    "sheet_density": ("cm-2", "population of its subbands (tails included) plus the classical "
                              "carriers inside its interval"),
    "ground_energy": ("eV", "E0 minus the carrier's Fermi level, in the carrier's own sense: "
                            "positive when the ground subband lies on the empty side"),
    "spacing": ("eV", "E1 - E0 of the channel's own subbands (positive), NaN with one state"),
    "occupied_subbands": ("1", "subbands holding at least 1 % of the channel's sheet density "
                               "and at least 1e8 cm-2"),
    "centroid_nm": ("nm", "mean depth of the channel's carriers"),
    "in_plane_mass": ("m0", "in-plane effective mass of the channel's ground subband"),
    "layer": ("1", "the layer holding most of the channel's carriers"),
    "named": ("1", "1 for a channel named in a [[channel]] table of the deck, 0 for an "
                   "auto-detected one"),
    "main": ("1", "1 for the main channel (the first [[channel]] of the deck, else the one "
                  "with most carriers of the majority kind), 0 otherwise"),
}

#: /transitions datasets, 1-D over the ``transition`` dimension: every e_n - hh_m and
#: e_n - lh_m pair of the stored states: name -> (units, description)
TRANSITION_FIELDS = {
    "electron_state": ("1", "index of the electron state in /subbands/electron"),
    "hole_band": ("1", "band of the hole state: heavy_hole or light_hole"),
    "hole_state": ("1", "index of the hole state in /subbands/<hole_band>"),
    "energy": ("eV", "transition energy E_e - E_h"),
    "overlap": ("1", "envelope overlap |<psi_e|psi_h>|^2"),
}

#: per-iteration record datasets under /convergence: name -> (units, description)
RECORD_FIELDS = {
    "residual": ("V", "max |delta phi| between successive iterations"),
    "charge_residual": ("1", "relative change of the mobile sheet charge over the iteration (NaN: not evaluated, the potential was still far from converged)"),
    "newton_steps": ("1", "inner Newton steps of the nonlinear Poisson solve"),
    "seconds": ("s", "wall time spent in the iteration"),
    "damping": ("1", "damping / mixing factor applied in the iteration"),
}

#: extra profile fields other contributors may add: name -> (units, description)
EXTRA_PROFILE_FIELDS = {
    "layer_index": ("1", "index into /layers of the layer holding each node"),
    "conduction_band_x": ("eV", "X-valley conduction band edge with electrostatics, relative to EF"),
    "conduction_band_l": ("eV", "L-valley conduction band edge with electrostatics, relative to EF"),
    "heavy_hole_band": ("eV", "heavy-hole band edge with electrostatics, relative to EF "
                              "(strain-shifted in strained layers)"),
    "light_hole_band": ("eV", "light-hole band edge with electrostatics, relative to EF "
                              "(strain-shifted in strained layers)"),
    "strain_xx": ("1", "in-plane strain eps_xx = (a_par - a)/a of the cell to the right of each "
                       "node (0 in an unstrained stack)"),
    "strain_zz": ("1", "strain along the growth axis, eps_zz = -2 (C12/C11) eps_xx"),
    "x_electron_density": ("cm-3", "X-valley electrons (classical; part of electron_density)"),
    "l_electron_density": ("cm-3", "L-valley electrons (classical; part of electron_density)"),
}

#: units of the /layers columns (others: derived from the column name)
LAYER_UNITS = {
    "name": "1", "material": "1", "x_top": "1", "x_bottom": "1",
    "top_nm": "nm", "bottom_nm": "nm", "thickness_nm": "nm",
    "electron_sheet_density_cm2": "cm-2", "hole_sheet_density_cm2": "cm-2",
    "y_top": "1", "y_bottom": "1", "relaxed": "1", "strain_xx": "1", "strain_zz": "1",
    "lattice_inplane_nm": "nm", "lattice_own_nm": "nm", "critical_thickness_nm": "nm",
}

LAYER_DESCRIPTIONS = {
    "name": "layer name from the deck (or its index when unnamed)",
    "material": "material name",
    "x_top": "alloy fraction at the top of the layer",
    "x_bottom": "alloy fraction at the bottom of the layer",
    "top_nm": "depth of the top interface",
    "bottom_nm": "depth of the bottom interface",
    "electron_sheet_density_cm2": "electrons integrated over the layer",
    "hole_sheet_density_cm2": "holes integrated over the layer",
    "y_top": "second composition (quaternaries) at the top of the layer",
    "y_bottom": "second composition (quaternaries) at the bottom of the layer",
    "relaxed": "true for a relaxed (metamorphic) layer: the layers above take its lattice",
    "strain_xx": "in-plane strain, thickness-weighted mean over the layer (0: unstrained)",
    "strain_zz": "strain along the growth axis, thickness-weighted mean over the layer",
    "lattice_inplane_nm": "in-plane lattice constant the layer grows on (at its top; its own "
                          "lattice constant in an unstrained stack or a relaxed layer)",
    "lattice_own_nm": "the layer's own (relaxed) lattice constant at the temperature, mean",
    "critical_thickness_nm": "Matthews-Blakeslee critical thickness of the layer on its own "
                             "(inf: unstrained or relaxed); see the design warnings for runs "
                             "of strained layers",
}

ROOT_ATTRS = ("schema", "schema_version", "selfcon_version", "created", "title", "temperature_K",
              "converged", "iterations", "residual_V", "message", "deck")

#: band names used under /subbands
BANDS = ("electron", "heavy_hole", "light_hole")

#: profile datasets: name -> (units, description)
PROFILE_FIELDS = {
    "conduction_band": ("eV", "Gamma conduction band edge with electrostatics, relative to EF"),
    "valence_band": ("eV", "top valence band edge with electrostatics, relative to EF"),
    "potential": ("V", "electrostatic potential phi; band edges are E0(z) - q*phi(z)"),
    "electric_field": ("V/cm", "electric field E = -dphi/dz at the nodes"),
    "electron_density": ("cm-3", "electron density (subbands in quantum regions, classical elsewhere)"),
    "hole_density": ("cm-3", "hole density (subbands in quantum regions, classical elsewhere)"),
    "ionized_donors": ("cm-3", "ionised donor density, sheets spread over their dual cell"),
    "ionized_acceptors": ("cm-3", "ionised acceptor density, sheets spread over their dual cell"),
}


def guess_units(name: str) -> str:
    """Units of a column or dataset named by the project's conventions (suffix rules)."""
    if name.endswith("_cm2"):
        return "cm-2"
    if name.endswith("_cm3") or name.endswith("_density") or name.startswith("ionized_"):
        return "cm-3"
    if name.endswith("_nm"):
        return "nm"
    if name.endswith("_eV") or name.endswith("_band"):
        return "eV"
    if name.endswith("_V"):
        return "V"
    if name.endswith("_s"):
        return "s"
    if name.endswith("_K"):
        return "K"
    return "1"
