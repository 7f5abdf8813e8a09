"""The named argument bundles of the Poisson kernels (selfcon/solver/kernels/poisson.py).

Each bundle is a :class:`typing.NamedTuple` of arrays and scalars.  numba compiles a
function taking one as a typed record whose fields keep their names, so
``material.nd[c]`` in a kernel can never be confused with ``material.na[c]``: a swapped or
missing field is a compile-time error, not a silent wrong answer, as a swap of two of
the former 38 positional arrays would have been.  numba caches such kernels on disk
(``cache=True``) across processes like kernels of plain arrays; tests/test_kernel_cache.py
checks it in fresh subprocesses.

This module imports nothing but numpy and typing, so the Python side
(selfcon.solver.poisson) builds bundles without importing numba.  The classes must stay
module-level here: the numba cache names a bundle type by its module and class name.

Units: nm, eV, V, nm^-3, nm^-2 (internal units).  Per-cell arrays have N-1 entries,
per-node arrays N.
"""
from __future__ import annotations

from typing import NamedTuple

import numpy as np

__all__ = ["Grid", "Material", "Quantum", "Boundaries", "NewtonOptions"]


class Grid(NamedTuple):
    """The finite-volume mesh: ``h`` (N-1,) cell widths; ``wl``, ``wr`` (N,) the left and
    right half-cell widths of each node (0 outside the two ends); nm."""

    h: np.ndarray
    wl: np.ndarray
    wr: np.ndarray


class Material(NamedTuple):
    """The classical charge model of every cell, and the sheets at the nodes.

    Cells (N-1,): ``eps`` relative permittivity; ``ec0``, ``ev0`` band edges without
    electrostatics (eV); ``nc``, ``nv`` effective densities of states (nm^-3, 0 switches the
    carrier off); ``nd``, ``na`` dopants (nm^-3); ``ed``, ``ea`` their binding energies (eV).
    Nodes (N,): ``sheet_nd``, ``sheet_na`` (nm^-2) and their binding energies ``sheet_ed``,
    ``sheet_ea`` (eV; -inf: no bound state, fully ionised); ``sheet_fixed`` (nm^-2, fixed charge
    in units of q: the bound polarization sheets of wurtzite interfaces,
    selfcon.model.polarization).  ``ec0_v``, ``nc_v`` (V, N-1): further
    classical conduction valleys (X, L; V may be 0).  ``ev0_v``, ``nv_v`` (W, N-1): further
    classical valence bands (the light hole of a strained layer, at its own edge; W may be 0).
    ``kT`` (eV); ``full``: full ionisation; ``efn``, ``efp`` (eV, electron energy scale): the
    Fermi levels of the electrons and of the holes (0 and 0 unless the gate sets the minority
    carrier's level); dopant levels are occupied with EF = 0.
    """

    eps: np.ndarray
    ec0: np.ndarray
    ev0: np.ndarray
    nc: np.ndarray
    nv: np.ndarray
    nd: np.ndarray
    ed: np.ndarray
    na: np.ndarray
    ea: np.ndarray
    sheet_nd: np.ndarray
    sheet_na: np.ndarray
    sheet_ed: np.ndarray
    sheet_ea: np.ndarray
    sheet_fixed: np.ndarray
    ec0_v: np.ndarray
    nc_v: np.ndarray
    ev0_v: np.ndarray
    nv_v: np.ndarray
    kT: float
    full: bool
    efn: float
    efp: float


class Quantum(NamedTuple):
    """The subband (predictor) part of the charge.

    ``cls_e``, ``cls_h`` (N,): 1 where the carrier is classical, 0 where its density comes
    from the subbands; ``psi2`` (N, Ke) |psi|^2 (nm^-1), ``ek`` (Ke,) levels (eV),
    ``dos_e`` (Ke,) 2D densities of states (nm^-2 eV^-1); ``psi2h``, ``ekh``, ``dos_h`` the
    same for holes (levels on the electron energy scale); ``phi_ref`` (N,) the potential the
    subbands belong to; ``qshift``: 1 the subbands follow phi - phi_ref (predictor), 0 the
    quantum density is frozen at phi_ref.
    """

    cls_e: np.ndarray
    cls_h: np.ndarray
    psi2: np.ndarray
    ek: np.ndarray
    dos_e: np.ndarray
    psi2h: np.ndarray
    ekh: np.ndarray
    dos_h: np.ndarray
    phi_ref: np.ndarray
    qshift: float


class Boundaries(NamedTuple):
    """Boundary conditions at the top (z[0]) and the bottom (z[N-1]): kind 0 Dirichlet
    (phi = value, V), kind 1 zero field (value unused)."""

    kind_top: int
    value_top: float
    kind_bottom: int
    value_bottom: float


class NewtonOptions(NamedTuple):
    """Newton settings: ``tol`` (V) on max |step|; at most ``max_iter`` steps; each step
    scaled so that no node moves more than ``max_step`` (V); ``backtrack``: halve the step
    until the residual norm decreases (False: take the clamped step unchecked);
    ``check_last``: with backtracking, evaluate the residual also at a step already below
    ``tol`` (False: that step, which is accepted anyway and ends the solve, is taken
    without the evaluation); ``settle`` > 0: a full step right after a full accepted one and
    below ``settle`` times it ends the solve without the evaluation
    (selfcon.solver.kernels.poisson.poisson_newton; 0: off)."""

    tol: float
    max_iter: int
    max_step: float
    backtrack: bool
    check_last: bool = True
    settle: float = 0.0
