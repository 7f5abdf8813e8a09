"""Convergence control of the self-consistent loop: how each iteration is judged, how the
loop ends, and what it tells the user.

:class:`Control` watches the residual max |phi_out - phi| of every iteration and decides:

* **converged** when the residual is below ``tolerance`` and the mobile sheet charge
  stopped moving (relative change below ``charge_tolerance``);
* **damp** the mixer when the residual grew by more than ``GROWTH_FACTOR`` over the
  previous one (Anderson and linear mixing are not monotone: smaller rises are normal);
  after a run of good steps a mixer with ``relax()`` grows its factor back;
* **backtrack** to the best iterate so far when the residual exceeds
  ``BACKTRACK_FACTOR`` times the best one, and take a damped step from there;
* **oscillating** when the last ``OSCILLATION_WINDOW`` residuals neither halved nor
  trended down: damp and backtrack, or stop when nothing is left to damp;
* **diverged** when the residual is not finite or exceeds ``DIVERGENCE_FACTOR`` times the
  first one; **no progress** when it keeps growing at the smallest mixing factor;
* **max iterations**, or **stopped** when the progress callback raised ``StopIteration``.

Every ending has a :class:`Status` (SciPy style: 0 is success, ``Result.status``) and a
message built from the :data:`MESSAGES` table, with advice that fits the mixer in use
(never "try predictor-corrector" to a deck that already uses it).  Messages are written
to the result file and printed by the command line, so they refer to nothing "below".

It also sets the accuracy of each inner Poisson solve (:meth:`Control.poisson_settings`):
inexact Newton, a little tighter than the current outer residual.
"""
from __future__ import annotations

import enum
import math

import numpy as np

#: a residual above this multiple of the previous one damps the mixer
GROWTH_FACTOR = 1.5
#: a residual above this multiple of the best one so far sends the loop back to the best iterate
BACKTRACK_FACTOR = 10.0
#: a residual above this multiple of the first one (or of 1 mV) is divergence
DIVERGENCE_FACTOR = 1e3
#: growths tolerated at the smallest mixing factor before the loop gives up
MAX_GROWTHS = 8
#: residuals looked at by the oscillation test
OSCILLATION_WINDOW = 8

POISSON_TOL = 1e-10       # V, inner Newton tolerance of the final passes
START_TOL = 1e-6          # V, the classical starting solution needs no more
POISSON_MAX_ITER = 200
#: inner Newton tolerance as a fraction of the last outer residual (capped by START_TOL);
#: the first pass, whose residual is not known yet, solves to FIRST_PASS_TOL
INNER_FACTOR = 0.1
FIRST_PASS_TOL = 1e-3
#: the first predictor pass from the classical start also ends on a full Newton step right
#: after a full one and below this fraction of it (selfcon.solver.kernels.poisson.
#: poisson_newton, opts.settle): the quadratic phase, where a further step would be smaller
#: by this fraction again, well inside the inexact-Newton margin of INNER_FACTOR times the
#: first outer residual; saves the trial assembly (and the further step) at the pass's end.
#: Not from a given potential (continuation, warm start): its first pass starts close, and
#: one point of the gate sweep of README.md then took an iteration more (3 -> 4)
FIRST_PASS_SETTLE = INNER_FACTOR


class Status(enum.IntEnum):
    """How a solve ended: ``Result.status`` (0 is success, as in SciPy's solvers).

    ``CONVERGED`` 0: potential and mobile charge within tolerance.
    ``MAX_ITERATIONS`` 1: ``solver.max_iterations`` reached first.
    ``DIVERGED`` 2: the residual became non-finite or grew 1000-fold.
    ``OSCILLATING`` 3: the residual oscillates without decreasing, even damped.
    ``NO_PROGRESS`` 4: the residual keeps growing at the smallest mixing factor.
    ``STOPPED`` 5: the progress callback raised ``StopIteration``.
    ``UNPHYSICAL`` 6: the loop converged but the result failed a physical sanity check
    (``selfcon/output/sanity.py``): Gauss's law, band edges, densities or field.
    """

    CONVERGED = 0
    MAX_ITERATIONS = 1
    DIVERGED = 2
    OSCILLATING = 3
    NO_PROGRESS = 4
    STOPPED = 5
    UNPHYSICAL = 6


#: status -> message template; fields: iterations, residual (V), tolerance (V), detail, advice
MESSAGES = {
    Status.CONVERGED: "converged in {iterations} iterations (max |dphi| = {residual:.2e} V)",
    Status.MAX_ITERATIONS: "not converged after {iterations} iterations (max |dphi| = {residual:.2e} V, "
                           "tolerance {tolerance:.1e} V); {advice}",
    Status.DIVERGED: "diverged after {iterations} iterations: {detail}; {advice}",
    Status.OSCILLATING: "stopped after {iterations} iterations: the residual oscillates without "
                        "decreasing even at the smallest mixing factor; {advice}",
    Status.NO_PROGRESS: "stopped after {iterations} iterations: the residual keeps growing even at "
                        "the smallest mixing factor; the structure may have no stable solution "
                        "here; {advice}",
    Status.STOPPED: "stopped by the progress callback after {iterations} iterations "
                    "(max |dphi| = {residual:.2e} V){detail}",
    Status.UNPHYSICAL: "the loop settled in {iterations} iterations, but the result is "
                       "unphysical: {detail}",
}

_PC = 'solver.method = "predictor-corrector"'


def advice(status: Status, mixer) -> str:
    """What to try after ``status`` with ``mixer``: depends on whether the mixer already
    uses the predictor Poisson pass."""
    pc = bool(getattr(mixer, "predictor", False))
    if status == Status.MAX_ITERATIONS:
        return ("raise solver.max_iterations, or lower solver.mixing if the residual stalls" if pc
                else f"raise solver.max_iterations or try {_PC} (usually 5 to 15 iterations)")
    if status == Status.DIVERGED:
        return ("try a smaller solver.mixing, and check that the contacts and doping admit a "
                "solution" if pc else f"try {_PC} or a smaller solver.mixing")
    if status == Status.OSCILLATING:
        return "try a smaller solver.mixing" + ("" if pc else f" or {_PC}")
    if status == Status.NO_PROGRESS:
        from selfcon.solver.mixers import available_methods
        others = [m for m in available_methods() if m != getattr(mixer, "name", None)]
        return ("try another solver.method (" + ", ".join(others) + ")") if pc else f"try {_PC}"
    return ""


def message(status: Status, mixer, *, iterations: int, residual: float, tolerance: float,
            detail: str = "") -> str:
    """The one-line message of a finished loop (from :data:`MESSAGES`)."""
    return MESSAGES[status].format(iterations=iterations, residual=residual, tolerance=tolerance,
                                   detail=detail, advice=advice(status, mixer))


class Control:
    """Judges every iteration of one loop and decides what comes next (see module docstring).

    ``record`` each iteration, then ``step`` returns the next potential; once ``status`` is
    set, ``step`` returns the potential the loop ends on (the best iterate after a failure)
    and :attr:`message` says what happened.
    """

    def __init__(self, mixer, *, tol: float, charge_tol: float, max_iter: int,
                 cold_start: bool = True):
        self.mixer = mixer
        #: the loop starts from the classical solution (not a given potential): the first
        #: predictor pass may end on the quadratic phase (FIRST_PASS_SETTLE)
        self.cold_start = bool(cold_start)
        self.tol = float(tol)
        self.charge_tol = float(charge_tol)
        self.max_iter = int(max_iter)
        self.history: list = []              # IterationRecord of every iteration
        self.status: Status | None = None if self.max_iter > 0 else Status.MAX_ITERATIONS
        self.detail = ""
        self._best = None                    # (residual, phi, r) of the best iterate
        self._growths = 0

    @property
    def running(self) -> bool:
        return self.status is None

    @property
    def converged(self) -> bool:
        return self.status == Status.CONVERGED

    @property
    def message(self) -> str:
        last = self.history[-1].residual if self.history else float("nan")
        return message(self.status, self.mixer, iterations=len(self.history), residual=last,
                       tolerance=self.tol, detail=self.detail)

    def poisson_settings(self) -> dict:
        """Keywords of the next Poisson pass (selfcon.solver.steps.poisson_pass).

        Inexact inner solves: the outer loop shrinks the residual ~10x per pass, so the
        Poisson pass need only be a little tighter than the current outer residual.  With
        the predictor the Poisson Jacobian already carries the subbands' response, so every
        pass after the first is one clamped Newton step without a trial evaluation (inexact
        Newton: the outer iteration counts of the example and design decks, the double well
        and the biased decks stay those of full passes; this control damps the step when the
        residual grows).  The first pass, from the classical start, stays a full backtracked
        solve to FIRST_PASS_TOL: a single step there cost some decks iterations and left
        one (gaas_alas_crossover_4K) unconverged.  Classic mixers need the true Poisson map."""
        h = self.history
        tol = FIRST_PASS_TOL if not h else min(max(INNER_FACTOR * h[-1].residual, POISSON_TOL), START_TOL)
        one_step = bool(self.mixer.predictor) and bool(h)
        out = {"tol": tol, "max_newton": 1 if one_step else POISSON_MAX_ITER, "backtrack": not one_step}
        if self.mixer.predictor and not h and self.cold_start:
            out["settle"] = FIRST_PASS_SETTLE
        return out

    def needs_charge_check(self, residual: float) -> bool:
        """The charge check only decides convergence: evaluate it once the potential is close."""
        return residual < self.tol

    def record(self, record) -> None:
        """Add the IterationRecord of the iteration just done."""
        self.history.append(record)

    def stop(self, reason: str = "") -> None:
        """End the loop at the current iterate (the progress callback raised StopIteration)."""
        self.status = Status.STOPPED
        self.detail = f": {reason}" if reason else ""

    def step(self, phi: np.ndarray, r: np.ndarray) -> np.ndarray:
        """Judge the last recorded iteration (potential ``phi``, residual ``r = phi_out - phi``)
        and return the next potential, or the one the loop ends on."""
        h = self.history
        res = h[-1].residual
        if self._best is None:
            self._best = (np.inf, phi.copy(), np.zeros_like(phi))
        if self.status is not None:                       # stopped by the callback
            return phi
        if not math.isfinite(res):
            return self._end(Status.DIVERGED, "the potential became non-finite")
        if res < self.tol and h[-1].charge_residual < max(self.charge_tol, 10 * self.tol):
            self.status = Status.CONVERGED                # (a NaN charge residual compares False)
            return phi
        if res < self._best[0]:
            self._best = (res, phi.copy(), r.copy())
        if len(h) > 1 and res > GROWTH_FACTOR * h[-2].residual:
            self._growths += 1
            if not self.mixer.damp() and self._growths > MAX_GROWTHS:
                return self._end(Status.NO_PROGRESS)
            if res > BACKTRACK_FACTOR * self._best[0]:
                phi, r = self._back()
        else:
            self._growths = max(0, self._growths - 1)
            relax = getattr(self.mixer, "relax", None)
            if relax is not None and len(h) > 2 and res < 0.5 * h[-2].residual:
                relax()
        if res > DIVERGENCE_FACTOR * max(h[0].residual, 1e-3):
            return self._end(Status.DIVERGED, f"max |dphi| grew above {DIVERGENCE_FACTOR:g}x its first value")
        if oscillating([x.residual for x in h]):
            if not self.mixer.damp():
                return self._end(Status.OSCILLATING)
            phi, r = self._back()
        phi = self.mixer.update(phi, r)
        if len(h) >= self.max_iter:
            self.status = Status.MAX_ITERATIONS
        return phi

    def _back(self):
        return self._best[1].copy(), self._best[2].copy()

    def _end(self, status: Status, detail: str = "") -> np.ndarray:
        self.status = status
        self.detail = detail
        return self._best[1]


def oscillating(residuals, window: int = OSCILLATION_WINDOW) -> bool:
    """True when the last ``window`` residuals neither fell by 2x nor trended down."""
    if len(residuals) < window:
        return False
    # the same comparisons as numpy's on the few floats (np.diff(r) > 0 is r[i+1] > r[i]),
    # without its per-call overhead: the loop asks every iteration
    r = [float(x) for x in residuals[-window:]]
    rises = sum(1 for a, b in zip(r, r[1:]) if b - a > 0)
    return bool(r[-1] > 0.5 * r[0] and rises >= window // 2 - 1)


__all__ = ["Status", "MESSAGES", "Control", "advice", "message", "oscillating"]
