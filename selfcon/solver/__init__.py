"""Stage 3, solver: Schrödinger and Poisson iterated to agreement.

Owns the numba kernels (:mod:`selfcon.solver.kernels`: arrays in, arrays out), the
BenDaniel–Duke eigen-solve (:mod:`~selfcon.solver.schrodinger`), carrier statistics
(:mod:`~selfcon.solver.statistics`), the nonlinear Poisson solve
(:mod:`~selfcon.solver.poisson`), the charge model that joins a structure and its
subbands into one Poisson problem (:mod:`~selfcon.solver.charge`), the mixers
(:mod:`~selfcon.solver.mixers`) and the loop itself (:mod:`~selfcon.solver.loop`), which
returns a plain ``LoopOutcome``; the output stage turns that into a ``Result``.

May import: the foundation modules, ``selfcon.input`` and ``selfcon.model``.
"""
