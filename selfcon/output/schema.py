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
    "heavy_hole_band": ("eV", "heavy-hole band edge with electrostatics, relative to EF"),
    "light_hole_band": ("eV", "light-hole band edge with electrostatics, relative to EF"),
    "charge_density": ("cm-3", "net charge density p - n + Nd+ - Na- in units of q"),
    "x_electron_density": ("cm-3", "X-valley electrons (classical; part of electron_density)"),
    "l_electron_density": ("cm-3", "L-valley electrons (classical; part of electron_density)"),
}

#: units of the /layers columns (others: derived from the column name)
LAYER_UNITS = {
    "name": "1", "material": "1", "x_top": "1", "x_bottom": "1",
    "top_nm": "nm", "bottom_nm": "nm", "thickness_nm": "nm",
    "electron_sheet_density_cm2": "cm-2", "hole_sheet_density_cm2": "cm-2",
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
