"""selfcon: self-consistent Schrödinger–Poisson solutions for layered semiconductor structures.

Public API (DESIGN.md §6)::

    deck = selfcon.load_deck("inputs/hemt_4K.toml")
    result = selfcon.solve(deck)
    result.save("hemt.h5")
    again = selfcon.load_result("hemt.h5")
    energies, psi = selfcon.bound_states(z_nm, band_edge_eV, mass_m0, n_states)

Importing selfcon compiles nothing and imports neither numba, h5py nor
matplotlib; they load on first use.
"""
__version__ = "0.1.0"

__all__ = ["load_deck", "solve", "load_result", "bound_states", "build_structure",
           "Result", "Deck", "SelfconInputError", "DeckError", "__version__"]

from .errors import SelfconInputError, DeckError  # noqa: E402  (light modules)


def load_deck(path_or_text, overrides=()):
    """Read and validate a deck (a path or TOML text); ``overrides`` are ``"PATH=VALUE"`` strings."""
    from .deck import load_deck as _load
    return _load(path_or_text, overrides)


def solve(deck, **options):
    """Solve one deck self-consistently; returns a :class:`Result` (never raises on non-convergence)."""
    from .scf import solve as _solve
    return _solve(deck, **options)


def build_structure(deck):
    """Turn a Deck into a Structure (mesh and per-cell/per-node arrays)."""
    from .structure import build_structure as _build
    return _build(deck)


def load_result(path):
    """Read a result file written by :meth:`Result.save` back into a :class:`Result`."""
    from .results import load_result as _load
    return _load(path)


def bound_states(z_nm, band_edge_eV, mass_m0, n_states):
    """Lowest ``n_states`` BenDaniel–Duke states of a 1D band edge, psi = 0 beyond both ends."""
    from .quantum import bound_states as _bs
    return _bs(z_nm, band_edge_eV, mass_m0, n_states)


def __getattr__(name):
    if name == "Result":
        from .result import Result
        return Result
    if name == "Deck":
        from .deck import Deck
        return Deck
    raise AttributeError(f"module 'selfcon' has no attribute {name!r}")
