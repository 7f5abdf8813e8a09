"""selfcon: self-consistent Schrödinger–Poisson solutions for layered semiconductor structures.

Public API::

    deck = selfcon.load_deck("inputs/hemt_4K.toml")
    result = selfcon.solve(deck)
    result.save("hemt.h5")
    again = selfcon.load_result("hemt.h5")
    energies, psi = selfcon.bound_states(z_nm, band_edge_eV, mass_m0, n_states)

The front functions live in :mod:`selfcon.api`; the package is grouped by pipeline
stage (``input`` -> ``model`` -> ``solver`` -> ``output``, then ``design`` and
``batch``), see DEVELOPERS.md.  Importing selfcon compiles nothing and imports neither
numba, h5py nor matplotlib; they load on first use.
"""
from selfcon.version import __version__  # noqa: F401
from selfcon.errors import SelfconInputError, DeckError  # noqa: F401  (light modules)

__all__ = ["load_deck", "solve", "load_result", "bound_states", "build_structure",
           "Result", "Deck", "Mixer", "register_mixer", "SelfconInputError", "DeckError",
           "__version__"]


def load_deck(path_or_text, overrides=()):
    """Read and validate a deck (a path or TOML text); ``overrides`` are ``"PATH=VALUE"`` strings.

    See :func:`selfcon.api.load_deck`.
    """
    from selfcon.api import load_deck as _load
    return _load(path_or_text, overrides)


def solve(deck, **options):
    """Solve one deck self-consistently; returns a :class:`Result` (never raises on
    non-convergence).  See :func:`selfcon.api.solve`."""
    from selfcon.api import solve as _solve
    return _solve(deck, **options)


def build_structure(deck):
    """Turn a Deck into a Structure (mesh and per-cell/per-node arrays)."""
    from selfcon.api import build_structure as _build
    return _build(deck)


def load_result(path):
    """Read a result file written by :meth:`Result.save` back into a :class:`Result`."""
    from selfcon.api import load_result as _load
    return _load(path)


def bound_states(z_nm, band_edge_eV, mass_m0, n_states):
    """Lowest ``n_states`` BenDaniel–Duke states of a 1D band edge, psi = 0 beyond both ends.

    See :func:`selfcon.api.bound_states`.
    """
    from selfcon.api import bound_states as _bs
    return _bs(z_nm, band_edge_eV, mass_m0, n_states)


def __getattr__(name):
    if name == "Result":
        from selfcon.output.result import Result
        return Result
    if name == "Deck":
        from selfcon.input.deck import Deck
        return Deck
    if name in ("Mixer", "register_mixer"):
        from selfcon.solver import mixers
        return mixers.Mixer if name == "Mixer" else mixers.register
    raise AttributeError(f"module 'selfcon' has no attribute {name!r}")
