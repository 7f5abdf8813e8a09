"""The solver's numba kernels: arrays in, arrays out (DEVELOPERS.md, "Conventions").

Owns the compiled inner loops of stage 3: the finite-volume BenDaniel–Duke eigenproblem
(:mod:`~selfcon.solver.kernels.schrodinger`), the Fermi-Dirac integrals, subband
occupation and dopant ionisation (:mod:`~selfcon.solver.kernels.statistics`, with the
generated table :mod:`~selfcon.solver.kernels._fermi_table`) and the Newton solve of
nonlinear Poisson (:mod:`~selfcon.solver.kernels.poisson`), whose arrays travel in the
``typing.NamedTuple`` bundles of :mod:`~selfcon.solver.kernels.bundles`, and the node walk
of the result's channel detection (:mod:`~selfcon.solver.kernels.runs`).  Every kernel is
``@numba.njit(cache=True)``; importing a kernel module compiles nothing.

May import: numpy, numba, ``selfcon.constants`` and each other (this package's
:func:`load` also functools and importlib).  No objects, no files, no
other selfcon module: the Python glue of :mod:`selfcon.solver` (and the channel detection of
:mod:`selfcon.output.channels`) calls the kernels, each module through :func:`load`.
"""
import functools
import importlib


@functools.cache
def load(name: str):
    """The kernel module ``selfcon.solver.kernels.<name>``, imported on the first call and kept.

    The glue imports its kernels through this, not at its own import, so that importing
    selfcon loads no numba; and keeps them, since the loop asks for them several times per
    iteration (an import statement's machinery costs microseconds each time)."""
    return importlib.import_module(f"{__name__}.{name}")
