"""The front functions: deck -> structure -> loop -> result, composed in one place.

``selfcon.solve`` and friends (exported from :mod:`selfcon`) live here.  This module sits
above the solver and output stages and below design, batch and the command line:

    deck (selfcon.input) -> Structure (selfcon.model) -> LoopOutcome (selfcon.solver)
        -> Result (selfcon.output)
"""
from __future__ import annotations

import time

from selfcon.input.deck import Deck
from selfcon.model.structure import Structure, build_structure
from selfcon.solver.loop import (_interpolate_guess, boundary_conditions, extrapolate_potential,
                                 make_mixer, run_loop)

__all__ = ["load_deck", "build_structure", "solve", "solve_warm", "warm_up", "load_result",
           "bound_states", "extrapolate_potential"]


def load_deck(path_or_text, overrides=()):
    """Read and validate a deck (a path or TOML text); ``overrides`` are ``"PATH=VALUE"``
    strings or a ``{path: value}`` dict.  Raises :class:`selfcon.errors.DeckError` (with file,
    line and key) on bad input."""
    from selfcon.input.deck import load_deck as _load
    return _load(path_or_text, overrides)


def load_result(path):
    """Read a result file back into a Result (see selfcon.output)."""
    from selfcon.output.result import load_result as _load
    return _load(path)


def bound_states(z_nm, band_edge_eV, mass_m0, n_states):
    """Lowest ``n_states`` BenDaniel–Duke states of a 1D band edge, psi = 0 beyond both ends."""
    from selfcon.solver.schrodinger import bound_states as _bs
    return _bs(z_nm, band_edge_eV, mass_m0, n_states)


def solve(deck, *, initial_potential=None, progress=None, structure: Structure | None = None,
          method: str | None = None, tolerance: float | None = None,
          max_iterations: int | None = None):
    """Solve one deck self-consistently and return a :class:`selfcon.output.result.Result`.

    ``deck``: a Deck, a path or TOML text.  ``initial_potential``: phi (V) on this
    deck's mesh, or ``(z_nm, phi_V)`` to interpolate from another mesh (warm
    start, continuation).  ``progress``: callable(iteration, residual_V).
    ``method``/``tolerance``/``max_iterations`` override the deck's [solver].
    """
    t0 = time.perf_counter()
    if not isinstance(deck, Deck):
        deck = load_deck(deck)
    st = structure if structure is not None else build_structure(deck)
    spec = deck.solver
    method = method or spec.method
    tol = float(tolerance if tolerance is not None else spec.tolerance)
    max_it = int(max_iterations if max_iterations is not None else spec.max_iterations)
    ctol = float(getattr(spec, "charge_tolerance", None) or 1e-6)
    mixer = make_mixer(method, spec)
    bc = boundary_conditions(st)
    phi0 = None
    if initial_potential is not None:
        phi0 = _interpolate_guess(st, initial_potential)
    loop = run_loop(st, bc, mixer, phi0=phi0, tol=tol, charge_tol=ctol, max_iter=max_it,
                    progress=progress)
    from selfcon.output.assemble import build_result
    return build_result(deck, st, bc, loop, wall_time=time.perf_counter() - t0, method=method)



def solve_warm(deck, initial_potential, *, structure: Structure | None = None):
    """Solve from a warm start; if that fails to converge, solve cold and keep the better.

    Returns ``(result, warm_used)``; with ``initial_potential=None`` it is a cold solve.
    Used by continuation along bias sweeps and by target seeking.
    """
    if initial_potential is not None:
        r = solve(deck, structure=structure, initial_potential=initial_potential)
        if r.converged:
            return r, True
        cold = solve(deck, structure=structure)
        return (cold, False) if (cold.converged or cold.residual < r.residual) else (r, True)
    return solve(deck, structure=structure), False



def warm_up():
    """Compile (or load from the numba cache) every kernel the loop uses, on a tiny deck."""
    from selfcon.input.deck import load_deck
    text = """
title = "warm-up"
temperature = 77.0
[surface]
contact = "schottky"
barrier = 0.7
[substrate]
contact = "ohmic"
[[layer]]
material = "AlGaAs"
x = 0.3
thickness = 10.0
sheet_donors = 1e12
[[layer]]
material = "GaAs"
thickness = 20.0
donors = 1e15
[mesh]
step = 2.0
"""
    solve(load_deck(text))


