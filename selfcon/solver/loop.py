"""The self-consistent Schrödinger–Poisson loop: :func:`run_loop`, one screen of named steps.

The steps live in :mod:`selfcon.solver.steps` (with the workspace they share), the
convergence control in :mod:`selfcon.solver.control`, the mixers in
:mod:`selfcon.solver.mixers`.  With the predictor–corrector coupling (Trellakis et al.,
J. Appl. Phys. 81, 7880, 1997) the Poisson pass lets the quantum density follow the
potential, n(z) = sum_k |psi_k(z)|^2 D_k kT ln(1 + exp((EF - E_k + dphi(z))/kT)), so the
loop converges in a handful of iterations; classic mixers get the frozen quantum density.

Non-convergence is an outcome (``status`` and ``message``), never an exception.  The
front function ``selfcon.solve`` (selfcon/api.py) builds the structure, runs this loop
and hands the :class:`LoopOutcome` to the output stage, which builds the ``Result``.
"""
from __future__ import annotations

import inspect
import os
import sys
import time
import warnings
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np

from selfcon.model.structure import Structure
from selfcon.solver.control import Control, Status
from selfcon.solver.kp import MODELS
from selfcon.solver.steps import (Workspace, charge_residual, first_counts, initial_guess,
                                  poisson_pass, solve_states, update_exchange)

#: the depth of the predictor-corrector's extrapolation (selfcon.solver.mixers.anderson_step)
#: with the multiband holes (physics.hole_model kp4 / kp6): the rigid-shift predictor leaves
#: out how the multiband states polarise in the field, a dipole mode across the well that the
#: plain step damps by only ~0.5 per iteration at 4 K.  Measured on 2dhg_kp6_4K: 14 -> 7
#: iterations (20 K: 11 -> 7; 77 K: 6 -> 6; ingaas_hole_well_kp 6 -> 5), and the answer is
#: closer to a 1e-10 V solve (p_s 9e-7 instead of 1e-5 relative).  Depths 2-4 do alike; other
#: hole models keep the plain step (0), so their quoted results do not move, and so does a
#: solve with exchange-correlation (V_xc follows the density one iteration behind: the
#: extrapolated kp4 2DHG with LDA oscillated, tests/test_exchange.py).
ACCELERATED_HISTORY = 3


@dataclass(frozen=True)
class IterationRecord:
    """One iteration of the loop, as the progress callback receives it and the result's
    ``/convergence`` group stores it."""

    iteration: int            # 1, 2, ...
    residual: float           # V, max |phi_out - phi|
    charge_residual: float    # relative change of the mobile sheet charge (NaN: not evaluated yet)
    newton_steps: int         # Newton steps of the Poisson pass
    damping: float            # the mixer's factor in this iteration
    seconds: float            # wall time of the iteration
    tolerance: float          # V, the loop's tolerance on ``residual``
    max_iterations: int


@dataclass(frozen=True)
class LoopOutcome:
    """What the loop hands to the output stage."""

    phi: np.ndarray           # V, the final potential
    states: dict              # band -> selfcon.solver.steps.BandStates at phi
    status: Status
    message: str
    iterations: tuple         # IterationRecord of every iteration
    classical_steps: int      # Newton steps of the classical start
    method: str               # the mixer's name
    workspace: Workspace      # the solve's caches (densities at phi are ready in it)

    @property
    def converged(self) -> bool:
        return self.status == Status.CONVERGED

    @property
    def boundaries(self):
        return self.workspace.bc


def run_loop(st: Structure, bc, mixer, *, phi0=None, tol=1e-6, charge_tol=1e-6, max_iter=100,
             progress=None, threads=None) -> LoopOutcome:
    """Iterate Schrödinger and Poisson on ``st`` with boundary conditions ``bc`` until the
    potential and the mobile charge stop moving; ``mixer`` proposes each next potential.
    ``progress(record)`` is called after every iteration (see :func:`progress_callback`).
    ``threads``: for the eigenproblems of each iteration (selfcon.solver.threads.thread_count;
    None: the process setting, the environment, the default)."""
    ws = Workspace(st, bc, threads)
    control = Control(mixer, tol=tol, charge_tol=charge_tol, max_iter=max_iter,
                      cold_start=phi0 is None)
    notify = progress_callback(progress)
    suggest = getattr(mixer, "suggest_history", None)
    if suggest is not None:
        suggest(ACCELERATED_HISTORY if st.hole_model in MODELS and st.exchange_correlation == "none"
                else 0)
    mixer.reset()
    phi, classical_steps = initial_guess(ws, phi0)
    if phi0 is None:
        first_counts(ws)           # the counts an earlier solve's first iteration settled on
    states, states_phi = {}, None
    while control.running:
        started = time.perf_counter()
        xc_change = update_exchange(ws, phi, states, states_phi)   # 0 for a Hartree solve
        states, states_phi = solve_states(ws, phi), phi
        if phi0 is None and not control.history:
            first_counts(ws, keep=True)
        phi_out, newton_steps = poisson_pass(ws, phi, states, predictor=mixer.predictor,
                                             **control.poisson_settings())
        r = phi_out - phi
        res = float(np.abs(r).max()) if r.size else 0.0
        if xc_change > res and len(control.history) > 0:
            res = xc_change          # exchange-correlation still moving: not converged yet
        cres = charge_residual(ws, phi, phi_out, states) if control.needs_charge_check(res) else float("nan")
        record = IterationRecord(len(control.history) + 1, res, cres, newton_steps, mixer.factor,
                                 time.perf_counter() - started, control.tol, control.max_iter)
        control.record(record)
        if notify is not None:
            try:
                notify(record)
            except StopIteration as stop:
                control.stop(str(stop))
        phi = control.step(phi, r)
    if phi is not states_phi:            # phi moved after the last eigensolve: states at the final phi
        states = solve_states(ws, phi)
    return LoopOutcome(phi=phi, states=states, status=control.status, message=control.message,
                       iterations=tuple(control.history), classical_steps=classical_steps,
                       method=str(getattr(mixer, "name", type(mixer).__name__)), workspace=ws)


def progress_callback(progress):
    """The loop's view of a progress callable.

    ``progress(record)`` receives an :class:`IterationRecord` after every iteration.
    A callable taking two required positional arguments, ``progress(iteration,
    residual)`` (the form before the record existed), is detected by its signature and
    still called that way, with a DeprecationWarning.  Raising ``StopIteration`` in the
    callback ends the loop at that iteration (status ``STOPPED``, not converged)."""
    if progress is None:
        return None
    if not callable(progress):
        raise TypeError(f"progress must be callable, got {type(progress).__name__}")
    if _required_positional(progress) >= 2:
        warnings.warn("progress callbacks taking (iteration, residual) are deprecated: take one "
                      "argument, an IterationRecord (record.iteration, record.residual, ...)",
                      DeprecationWarning, stacklevel=_outside_stacklevel())
        return lambda record: progress(record.iteration, record.residual)
    return progress


def _required_positional(fn) -> int:
    try:
        sig = inspect.signature(fn)
    except (TypeError, ValueError):          # some builtins: assume the record form
        return 1
    kinds = (inspect.Parameter.POSITIONAL_ONLY, inspect.Parameter.POSITIONAL_OR_KEYWORD)
    return sum(1 for p in sig.parameters.values() if p.kind in kinds and p.default is p.empty)


_PACKAGE = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))


def _outside_stacklevel() -> int:
    """stacklevel that attributes a warning to the first caller outside selfcon (so that
    Python's default filters show it to the user's script)."""
    level, frame = 2, sys._getframe(2)
    while frame is not None and os.path.abspath(frame.f_code.co_filename).startswith(_PACKAGE):
        frame = frame.f_back
        level += 1
    return level


def extrapolate_potential(previous: Sequence[tuple[np.ndarray, np.ndarray, float]],
                          value: float) -> tuple[np.ndarray, np.ndarray] | None:
    """Continuation guess at parameter ``value`` from converged neighbours.

    With one neighbour its potential is returned; with two on the same mesh and distinct
    values, the linear (secant) extrapolation phi_1 + (v - v_1)/(v_1 - v_2) (phi_1 - phi_2),
    whose error is second order in the step, so the loop starts much closer.

    Parameters
    ----------
    previous : sequence of (z_nm, phi_V, parameter_value)
        Up to two converged solutions, nearest first (more are ignored).
    value : float
        The parameter value (e.g. the gate bias in V) of the next solve.

    Returns
    -------
    (z_nm, phi_V) or None
        For ``solve(..., initial_potential=...)``; None when ``previous`` is empty.

    Examples
    --------
    >>> import numpy as np
    >>> from selfcon.api import extrapolate_potential
    >>> z = np.array([0.0, 10.0, 20.0])
    >>> at_0 = (z, np.array([0.0, 0.25, 0.5]), 0.0)           # (z, phi, gate bias)
    >>> at_1 = (z, np.array([0.0, 0.5, 1.0]), -0.5)
    >>> zz, phi = extrapolate_potential([at_1, at_0], -1.0)     # secant: one more step
    >>> phi.tolist()
    [0.0, 0.75, 1.5]
    >>> extrapolate_potential([], -1.0) is None
    True
    """
    if not previous:
        return None
    z1, p1, v1 = previous[0]
    if len(previous) < 2:
        return (z1, p1)
    z2, p2, v2 = previous[1]
    try:
        v, v1f, v2f = float(value), float(v1), float(v2)
    except (TypeError, ValueError):
        return (z1, p1)
    if (np.shape(z1) != np.shape(z2) or not np.allclose(z1, z2, rtol=0, atol=1e-9)
            or v1f == v2f or not np.isfinite(v - v1f)):
        return (z1, p1)
    t = (v - v1f) / (v1f - v2f)
    return (z1, np.asarray(p1) + t * (np.asarray(p1) - np.asarray(p2)))


__all__ = ["run_loop", "LoopOutcome", "IterationRecord", "progress_callback",
           "extrapolate_potential"]
