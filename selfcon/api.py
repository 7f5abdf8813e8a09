"""The front functions: deck -> structure -> loop -> result, composed in one place.

``selfcon.solve`` and friends (exported from :mod:`selfcon`) live here.  This module sits
above the solver and output stages and below design, batch and the command line:

    deck (selfcon.input) -> Structure (selfcon.model) -> LoopOutcome (selfcon.solver)
        -> Result (selfcon.output)
"""
from __future__ import annotations

import os
import time
from collections.abc import Callable, Iterable, Mapping
from typing import TYPE_CHECKING, Any

from selfcon.input.deck import Deck
from selfcon.model.structure import Structure, build_structure, deck_structure
from selfcon.solver.loop import extrapolate_potential, run_loop
from selfcon.solver.mixers import make_mixer
from selfcon.solver.steps import boundary_conditions, interpolate_guess

if TYPE_CHECKING:
    import numpy as np
    from numpy.typing import ArrayLike

    from selfcon.output.result import Result

__all__ = ["load_deck", "build_structure", "solve", "solve_warm", "warm_up", "load_result",
           "bound_states", "extrapolate_potential"]


def load_deck(path_or_text: str | os.PathLike, overrides: Iterable[str] | Mapping[str, Any] = ()) -> Deck:
    """Read and validate a deck.

    Parameters
    ----------
    path_or_text : str or path-like
        A deck file, or the TOML text itself (README.md, "Deck reference").
    overrides : iterable of str or mapping, optional
        ``"PATH=VALUE"`` strings (as ``--set`` takes them) or a ``{path: value}`` dict;
        paths like ``temperature``, ``surface.bias``, ``layer.spacer.thickness``,
        ``layer.2.x``.

    Returns
    -------
    Deck
        Frozen and validated; ``deck.get(path)`` reads one value, ``deck.with_overrides``
        makes a changed copy.

    Raises
    ------
    selfcon.errors.DeckError
        Bad input, with the file, line and key.

    Examples
    --------
    >>> from selfcon.api import load_deck
    >>> deck = load_deck("inputs/hemt_4K.toml", overrides={"temperature": 77.0})
    >>> deck.temperature
    77.0
    >>> load_deck("inputs/hemt_4K.toml", overrides=["layer.spacr.thickness=5"])
    Traceback (most recent call last):
        ...
    selfcon.errors.DeckError: inputs/hemt_4K.toml: layer.spacr.thickness: no layer named 'spacr' (did you mean 'spacer'?) (allowed: cap, barrier, doping, spacer, channel, buffer)
    """
    from selfcon.input.deck import load_deck as _load
    return _load(path_or_text, overrides)


def load_result(path: str | os.PathLike) -> Result:
    """Read a result file written by :meth:`Result.save` back into a Result.

    Parameters
    ----------
    path : str or path-like
        An HDF5 result file (README.md, "Result file (HDF5)").

    Returns
    -------
    Result
        Equal to the saved one, field by field.

    Raises
    ------
    selfcon.errors.ResultFileError
        Missing, not HDF5, not a selfcon result, or written by a newer schema.

    Examples
    --------
    >>> from selfcon.api import load_deck, load_result, solve
    >>> solve(load_deck("inputs/hemt_300K.toml")).save("hemt_300K.h5", force=True)
    >>> result = load_result("hemt_300K.h5")
    >>> result.converged, result.temperature
    (True, 300.0)
    """
    from selfcon.output.result import load_result as _load
    return _load(path)


def bound_states(z_nm: ArrayLike, band_edge_eV: ArrayLike, mass_m0: ArrayLike,
                 n_states: int) -> tuple[np.ndarray, np.ndarray]:
    """Lowest ``n_states`` BenDaniel–Duke states of a 1D band edge, psi = 0 beyond both ends.

    The building block of the solver's quantum regions, usable on any band edge.

    Parameters
    ----------
    z_nm : array_like, (N,)
        Strictly increasing node positions (nm).
    band_edge_eV : array_like, (N,)
        The band edge at the nodes (eV); at an interface node give the dual-cell average.
    mass_m0 : array_like, (N,) or (N-1,)
        Effective mass per node (averaged onto cells) or per cell, in free-electron masses.
    n_states : int
        How many states (at most N-2).

    Returns
    -------
    energies : ndarray, (k,)
        eV, ascending.
    psi : ndarray, (N, k)
        nm^-1/2, normalised so that sum(w * psi**2) = 1 with the dual-cell widths w, signed
        so that the first lobe is positive.

    Raises
    ------
    ValueError
        Arrays of the wrong shape, a mesh that does not increase, a mass <= 0.

    See Also
    --------
    selfcon.solver.schrodinger.bound_states_cells : band edge and mass given per cell.

    Examples
    --------
    A 10 nm infinite well with m = 0.067: E_n = n^2 hbar^2 pi^2 / (2 m L^2), 56.12 and
    224.5 meV (analytic).

    >>> import numpy as np
    >>> from selfcon.api import bound_states
    >>> z = np.linspace(0.0, 10.0, 401)
    >>> energies, psi = bound_states(z, np.zeros(z.size), np.full(z.size, 0.067), 2)
    >>> [round(1e3 * float(e), 1) for e in energies]
    [56.1, 224.5]
    """
    from selfcon.solver.schrodinger import bound_states as _bs
    return _bs(z_nm, band_edge_eV, mass_m0, n_states)


def solve(deck: Deck | str | os.PathLike, *, initial_potential: Any = None,
          progress: Callable[..., Any] | None = None, structure: Structure | None = None,
          method: str | type | Any = None, tolerance: float | None = None,
          max_iterations: int | None = None, threads: int | None = None) -> Result:
    """Solve one deck self-consistently: Schrödinger and Poisson iterated to agreement.

    Parameters
    ----------
    deck : Deck, str or path-like
        A loaded deck, a deck file or TOML text.
    initial_potential : ndarray or (z_nm, phi_V), optional
        Start from this potential (V): on this deck's mesh, or as a pair to interpolate
        from another mesh (warm start, continuation).  Default: the classical solution.
    progress : callable, optional
        ``progress(record)`` after every iteration, with a
        :class:`selfcon.solver.loop.IterationRecord` (iteration, residual, charge
        residual, Newton steps, damping, seconds).  Raising ``StopIteration`` in it
        stops the loop (``status`` 5, not converged).  The older
        ``progress(iteration, residual_V)`` still works, with a DeprecationWarning.
    structure : Structure, optional
        ``build_structure(deck)`` done already (sweeps reuse it).
    method : str, Mixer subclass or Mixer instance, optional
        Override the deck's ``solver.method``: a registered mixer name, a
        :class:`selfcon.Mixer` subclass (given the deck's mixer options it declares) or
        an instance (used as it is).
    tolerance, max_iterations : optional
        Override the deck's ``solver.tolerance`` (V) and ``solver.max_iterations``.
    threads : int, optional
        Threads for the independent eigenproblems of each iteration (quantum bands and
        regions).  Default: ``--threads`` of the command line, ``$SELFCON_THREADS``,
        ``$NUMBA_NUM_THREADS``, else every core (1 in a batch worker).  The result does
        not depend on it, bit for bit.

    Returns
    -------
    Result
        Profiles, subbands, per-layer charge, the summary figures and design warnings.
        Non-convergence is not an exception: ``converged`` is False, ``status`` says how
        the loop ended (:class:`selfcon.solver.control.Status`) and ``message`` why and
        what to try.

    Raises
    ------
    selfcon.errors.DeckError
        Only for bad input (a deck given as a path or text that does not validate).
    selfcon.errors.SelfconInputError
        A thread count below 1 (``threads`` or the environment variables).

    Examples
    --------
    >>> from selfcon.api import load_deck, solve
    >>> result = solve(load_deck("inputs/hemt_4K.toml"))
    >>> result.converged, result.summary["channel_layer"]
    (True, 'channel')
    >>> short = solve(load_deck("inputs/hemt_4K.toml"), max_iterations=1)
    >>> short.converged, int(short.status), short.status.name
    (False, 1, 'MAX_ITERATIONS')
    """
    t0 = time.perf_counter()
    from selfcon.solver.threads import thread_count
    threads = thread_count(threads)          # a bad setting fails before any work
    if not isinstance(deck, Deck):
        deck = load_deck(deck)
    st = structure if structure is not None else deck_structure(deck)
    st, cooldown = _dark_cooldown(deck, st, threads)
    spec = deck.solver
    tol = float(tolerance if tolerance is not None else spec.tolerance)
    max_it = int(max_iterations if max_iterations is not None else spec.max_iterations)
    ctol = float(getattr(spec, "charge_tolerance", None) or 1e-6)
    mixer = make_mixer(method if method is not None else spec.method, spec)
    phi0 = interpolate_guess(st, initial_potential) if initial_potential is not None else None
    outcome = run_loop(st, boundary_conditions(st), mixer, phi0=phi0, tol=tol, charge_tol=ctol,
                       max_iter=max_it, progress=progress, threads=threads)
    from selfcon.output.assemble import build_result
    result = build_result(deck, st, outcome, wall_time=time.perf_counter() - t0)
    failed = [(tf, msg) for tf, ok, msg in cooldown if not ok]
    if failed and result.converged:
        tf, msg = failed[0]
        result.converged = False
        result.summary["converged"] = False
        result.message = (f"the dark cool-down solve at {tf:g} K (layer.dx_freeze_temperature) did "
                          f"not converge, so the frozen DX charge is not trusted: {msg}")
    return result


#: potentials of dark cool-down solves, (deck hash, mesh) -> (phi, converged, message): a bias
#: sweep cools the wafer once (the cool-down deck does not depend on the bias)
_COOLDOWNS: dict = {}


def _dark_cooldown(deck: Deck, st: Structure, threads: int | None = None):
    """``st`` with the occupation of its Si-DX layers frozen at their
    ``layer.dx_freeze_temperature`` (selfcon.solver.dx), and [(T_f, converged, message)] of
    the solves at the freeze temperatures.  The wafer is cooled with the gate unbiased
    (common practice); a layer whose freeze temperature is not above the run temperature
    stays in equilibrium."""
    temps = st.dx_freeze_temperatures
    if not temps or st.dx_frozen is not None:
        return st, []
    import numpy as np
    from selfcon.solver.dx import frozen_fractions, frozen_structure
    cell_f = np.full(st.n_nodes - 1, np.nan)
    sheet_f = np.full(st.n_nodes, np.nan)
    report = []
    for tf in temps:
        over = {"temperature": tf}
        if deck.surface.kind == "schottky":
            over["surface.bias"] = 0.0
        dk = deck.with_overrides(over)
        key = (dk.hash(), hash(st.z.tobytes()))
        if key not in _COOLDOWNS:
            stf = build_structure(dk, mesh=st.mesh)
            out = run_loop(stf, boundary_conditions(stf), make_mixer(dk.solver.method, dk.solver),
                           tol=float(dk.solver.tolerance), max_iter=int(dk.solver.max_iterations),
                           threads=threads)
            if len(_COOLDOWNS) > 16:
                _COOLDOWNS.clear()
            _COOLDOWNS[key] = (frozen_fractions(stf, out.phi), out.converged, out.message)
        (cf, sf), ok, msg = _COOLDOWNS[key]
        report.append((tf, ok, msg))
        layers = [L.index for L in st.layers if L.dx_freeze_temperature == tf]
        cells = np.isin(st.cell_layer, layers)
        nodes = np.isin(st.layer_index, layers)
        cell_f[cells] = cf[cells]
        sheet_f[nodes] = sf[nodes]
    return frozen_structure(st, (cell_f, sheet_f), max(temps)), report


def solve_warm(deck: Deck, initial_potential: Any, *,
               structure: Structure | None = None) -> tuple[Result, bool]:
    """Solve from a warm start; if that fails to converge, solve cold and keep the better.

    Used by continuation along bias sweeps and by target seeking.

    Parameters
    ----------
    deck : Deck
        The deck to solve.
    initial_potential : ndarray, (z_nm, phi_V) or None
        As for :func:`solve`; None makes this a cold solve.
    structure : Structure, optional
        ``build_structure(deck)`` done already.

    Returns
    -------
    result : Result
        The converged one if either converged, else the one with the smaller residual.
    warm_used : bool
        True when ``result`` came from the warm start.

    Examples
    --------
    Step the gate of the 4 K wafer by 50 mV, starting from the solution at zero bias:

    >>> from selfcon.api import load_deck, solve, solve_warm
    >>> deck = load_deck("inputs/hemt_4K.toml")
    >>> zero = solve(deck)
    >>> stepped, warm = solve_warm(deck.with_overrides({"surface.bias": -0.05}),
    ...                            (zero.z, zero.potential))
    >>> stepped.converged, warm
    (True, True)
    >>> bool(stepped.iterations <= zero.iterations)
    True
    """
    if initial_potential is not None:
        r = solve(deck, structure=structure, initial_potential=initial_potential)
        if r.converged:
            return r, True
        cold = solve(deck, structure=structure)
        return (cold, False) if (cold.converged or cold.residual < r.residual) else (r, True)
    return solve(deck, structure=structure), False



def warm_up() -> None:
    """Compile (or load from the numba cache) every kernel the loop uses, on a tiny deck.

    The first solve in a fresh process otherwise pays for it; the batch coordinator calls
    this once before it starts its workers so they all load the cache.

    Examples
    --------
    >>> from selfcon.api import warm_up
    >>> warm_up()
    """
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


