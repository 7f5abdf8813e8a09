"""Stage 3, solver: Schrödinger and Poisson iterated to agreement.

Owns the numba kernels (:mod:`selfcon.solver.kernels`: arrays in, arrays out), the
BenDaniel–Duke eigen-solve (:mod:`~selfcon.solver.schrodinger`), carrier statistics
(:mod:`~selfcon.solver.statistics`), the nonlinear Poisson solve
(:mod:`~selfcon.solver.poisson`), the mixers (:mod:`~selfcon.solver.mixers`), and the loop:
:mod:`~selfcon.solver.loop` (``run_loop``, one screen) calls the named steps of
:mod:`~selfcon.solver.steps` (which also join a structure and its subbands into one
Poisson problem, and keep the solve's caches in a ``Workspace``) under the convergence
control of :mod:`~selfcon.solver.control`, and returns a plain ``LoopOutcome``; the
output stage turns that into a ``Result``.

May import: the foundation modules, ``selfcon.input`` and ``selfcon.model``.
"""
