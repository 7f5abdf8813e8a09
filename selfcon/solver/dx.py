"""Si DX centres after a dark cool-down: the occupation frozen at the freeze temperature.

Electron capture and emission by DX centres are thermally activated over a barrier of a few
tenths of an eV, so below some 100-150 K the occupation of the DX level no longer follows
the Fermi level (Mooney, J. Appl. Phys. 67, R1 (1990)): a wafer cooled in the dark keeps
the DX occupation it had when it passed that temperature, while the free and the shallow
carriers go on equilibrating.  ``layer.dx_freeze_temperature`` names that temperature.

:func:`frozen_fractions` takes the potential of a solve at the freeze temperature (the
same stack and mesh; the gate unbiased, as a wafer is cooled) and returns the ionised
fraction of every DX cell and DX sheet node, evaluated with the deep level's one-electron
statistics (selfcon.model.dopants.DX_MODEL) at that temperature;
:func:`frozen_structure` hands them to a Structure, whose Poisson problem then holds the
DX centres as a fixed charge (selfcon.solver.steps.donor_arrays).  The front function
``selfcon.solve`` runs the two solves (selfcon/api.py).

Units: nm, eV, V, K.  EF = 0.
"""
from __future__ import annotations

from dataclasses import replace

import numpy as np

from selfcon.constants import KB_EV

__all__ = ["ionized_fraction", "frozen_fractions", "frozen_structure"]


def ionized_fraction(level_minus_ef, temperature):
    """Ionised fraction of a one-electron level of spin degeneracy 2 at ``level_minus_ef``
    (eV, E_level - EF): 1 / (1 + 2 exp(-(E_level - EF)/kT)), overflow-safe."""
    x = -np.asarray(level_minus_ef, dtype=float) / (KB_EV * float(temperature))
    return 0.5 * (1.0 - np.tanh(0.5 * (x + np.log(2.0))))


def frozen_fractions(st_freeze, phi):
    """(per cell (N-1,), per node (N,)) ionised fractions of the DX donors of ``st_freeze``
    (a structure at the freeze temperature) at potential ``phi`` (V).

    A cell's fraction is the mean of its two half cells, each at its node's potential (as
    the Poisson kernel weighs half cells); a sheet node's is the mean over its two half cells (weights wl, wr), each
    with the sheet's binding, as the Poisson kernel weighs sheets.  Cells and nodes that
    hold no DX donors get NaN (not frozen)."""
    c = st_freeze.cell
    phi = np.asarray(phi, dtype=float)
    T = st_freeze.temperature
    dx = c["dx"] > 0
    # the mean of the cell's two half cells, each at its node's potential (the Poisson
    # kernel's rule), so that the frozen charge of a cell is the charge it held at T_f
    level = c["ec_gamma"] - c["donor_binding"]
    f = 0.5 * (ionized_fraction(level - phi[:-1], T) + ionized_fraction(level - phi[1:], T))
    cell_f = np.where(dx, f, np.nan)
    m = st_freeze.mesh
    sheet_f = np.full(st_freeze.n_nodes, np.nan)
    for i in np.flatnonzero(st_freeze.sheet_dx):
        f, wsum = 0.0, 0.0
        for cc, wt in ((i - 1, m.wl[i]), (i, m.wr[i])):
            if 0 <= cc < c["ec_gamma"].size and wt > 0:
                f += wt * ionized_fraction(c["ec_gamma"][cc] - phi[i] - st_freeze.sheet_ed[i], T)
                wsum += wt
        sheet_f[i] = f / wsum
    return cell_f, sheet_f


def frozen_structure(st, fractions, freeze_temperature):
    """``st`` with the DX occupation frozen: ``fractions`` from :func:`frozen_fractions` on
    the same mesh (NaN: that cell's or node's DX centres stay in equilibrium)."""
    cell_f, sheet_f = (np.asarray(a, dtype=float) for a in fractions)
    if cell_f.shape != (st.n_nodes - 1,) or sheet_f.shape != (st.n_nodes,):
        raise ValueError("frozen DX fractions must be on the structure's mesh")
    for a in (cell_f, sheet_f):
        a.flags.writeable = False
    return replace(st, dx_frozen=(cell_f, sheet_f, float(freeze_temperature)))
