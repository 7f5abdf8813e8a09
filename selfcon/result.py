"""The Result of one self-consistent solve: plain data, numpy arrays, picklable.

Field names follow the HDF5 layout of DESIGN.md §4 so that the file is this
object written out.  Units are those of the file (outputs): nm, eV, V, V/cm,
cm^-3, cm^-2, m0.  Energies are relative to the Fermi level (EF = 0 eV).
"""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np

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


@dataclass
class Subbands:
    """Bound states of one band in all quantum regions, ordered by energy."""

    energy: np.ndarray          # (k,) eV relative to EF (hole states in electron energy)
    occupation: np.ndarray      # (k,) cm^-2
    wavefunction: np.ndarray    # (N, k) nm^-1/2, zero outside its region
    in_plane_mass: np.ndarray   # (k,) m0
    region: np.ndarray          # (k,) int, index of the quantum region holding the state
    degeneracy: np.ndarray      # (k,) valley degeneracy used for the occupation (spin excluded)


@dataclass
class Result:
    """Outcome of :func:`selfcon.solve`.  ``converged = False`` is a result, not an error."""

    title: str
    temperature: float
    converged: bool
    iterations: int
    residual: float                     # V, last max |dphi|
    message: str
    deck_text: str
    z: np.ndarray                       # (N,) nm
    profile: dict[str, np.ndarray]      # keys of PROFILE_FIELDS, each (N,)
    layer_index: np.ndarray             # (N,) int
    layers: list[dict[str, Any]]        # rows: name, material, x_top, x_bottom, top_nm, bottom_nm,
                                        #       electron_sheet_density_cm2, hole_sheet_density_cm2, ...
    subbands: dict[str, Subbands]
    residual_history: np.ndarray        # (iterations,) V
    summary: dict[str, Any]             # /summary attributes (floats, ints, strings)
    warnings: list[str] = field(default_factory=list)
    provenance: dict[str, Any] = field(default_factory=dict)
    record: dict[str, np.ndarray] = field(default_factory=dict)   # per-iteration: residual, charge_residual,
                                                                   # newton_steps, seconds, damping
    regions_nm: list[tuple[float, float]] = field(default_factory=list)

    # SciPy-style status fields
    @property
    def success(self) -> bool:
        return bool(self.converged)

    @property
    def status(self) -> int:
        """0 converged, 1 not converged (mirrors the CLI exit codes 0 / 3)."""
        return 0 if self.converged else 1

    @property
    def potential(self) -> np.ndarray:
        return self.profile["potential"]

    def save(self, path, *, force: bool = False) -> None:
        """Write the DESIGN.md §4 HDF5 file atomically (see selfcon.results)."""
        from .results import save_result
        save_result(self, path, force=force)

    def __repr__(self) -> str:  # keep reprs short: arrays are large
        ns = self.summary.get("electron_sheet_density_cm2", float("nan"))
        return (f"Result(title={self.title!r}, converged={self.converged}, iterations={self.iterations}, "
                f"residual={self.residual:.2e} V, n_s={ns:.4g} cm^-2, nodes={self.z.size})")
