"""selfcon: self-consistent Schrödinger–Poisson solutions for layered semiconductor structures.

Public API::

    deck = selfcon.load_deck("inputs/hemt_4K.toml")
    result = selfcon.solve(deck)
    result.save("hemt.h5")
    again = selfcon.load_result("hemt.h5")
    tree = again.to_xarray()                      # xarray.DataTree (the xarray extra)
    cv, table = selfcon.open_sweep("cv.h5"), selfcon.open_study("study_dir")
    energies, psi = selfcon.bound_states(z_nm, band_edge_eV, mass_m0, n_states)

The front functions live in :mod:`selfcon.api`; the package is grouped by pipeline
stage (``input`` -> ``model`` -> ``solver`` -> ``output``, then ``design`` and
``batch``), see DEVELOPERS.md.  Importing selfcon compiles nothing and imports neither
numba, h5py, matplotlib nor xarray; they load on first use.
"""
from __future__ import annotations

import os
from collections.abc import Iterable, Mapping
from typing import TYPE_CHECKING, Any

from selfcon.version import __version__  # noqa: F401
from selfcon.errors import SelfconInputError, DeckError  # noqa: F401  (light modules)

if TYPE_CHECKING:       # names for the type hints only: importing selfcon loads none of them
    import numpy as np
    from numpy.typing import ArrayLike

    from selfcon.input.deck import Deck
    from selfcon.model.structure import Structure
    from selfcon.output.result import Result

__all__ = ["load_deck", "solve", "load_result", "bound_states", "build_structure",
           "open_sweep", "open_study",
           "Result", "Deck", "Mixer", "register_mixer", "SelfconInputError", "DeckError",
           "__version__"]


def load_deck(path_or_text: str | os.PathLike, overrides: Iterable[str] | Mapping[str, Any] = ()) -> Deck:
    """Read and validate a deck.

    Parameters
    ----------
    path_or_text : str or path-like
        A deck file, or the TOML text itself (README.md, "Deck reference").
    overrides : iterable of str or mapping, optional
        ``"PATH=VALUE"`` strings (as ``--set`` takes them) or a ``{path: value}`` dict.

    Returns
    -------
    Deck
        Frozen and validated; ``deck.get("layer.spacer.thickness")`` reads one value.

    Raises
    ------
    DeckError
        Bad input, with the file, line and key (``selfcon`` exits 2 with it).

    See Also
    --------
    selfcon.api.load_deck : the same function, where it is implemented.

    Examples
    --------
    >>> import selfcon
    >>> deck = selfcon.load_deck("inputs/hemt_4K.toml", overrides=["layer.spacer.thickness=30"])
    >>> deck.get("layer.spacer.thickness")
    30.0
    """
    from selfcon.api import load_deck as _load
    return _load(path_or_text, overrides)


def solve(deck: Deck | str | os.PathLike, **options: Any) -> Result:
    """Solve one deck self-consistently (Schrödinger and Poisson to agreement).

    Parameters
    ----------
    deck : Deck, str or path-like
        A loaded deck, a deck file or TOML text.
    **options
        ``initial_potential``, ``progress``, ``structure``, ``method``, ``tolerance``,
        ``max_iterations``: see :func:`selfcon.api.solve`.

    Returns
    -------
    Result
        Never raises on non-convergence: ``result.converged`` is False and
        ``result.message`` says why and what to try.

    Examples
    --------
    >>> import selfcon
    >>> result = selfcon.solve(selfcon.load_deck("inputs/hemt_4K.toml"))
    >>> result.converged
    True
    >>> result.summary["electron_sheet_density_cm2"] > 1e11      # a 2DEG in the channel
    True
    """
    from selfcon.api import solve as _solve
    return _solve(deck, **options)


def build_structure(deck: Deck) -> Structure:
    """Turn a Deck into a Structure: the mesh and the per-cell arrays the solver uses.

    Parameters
    ----------
    deck : Deck
        A loaded deck (:func:`load_deck`).

    Returns
    -------
    Structure
        Frozen; internal units (nm, eV, nm^-3, nm^-2).  See
        :func:`selfcon.model.structure.build_structure`.

    Examples
    --------
    >>> import selfcon
    >>> st = selfcon.build_structure(selfcon.load_deck("inputs/hemt_4K.toml"))
    >>> [layer.name for layer in st.layers]
    ['cap', 'barrier', 'doping', 'spacer', 'channel', 'buffer']
    >>> float(st.z[-1])          # nm: 10 + 25 + 4 + 20 + 80 + 900, the deck's thicknesses
    1039.0
    """
    from selfcon.api import build_structure as _build
    return _build(deck)


def load_result(path: str | os.PathLike) -> Result:
    """Read a result file written by :meth:`Result.save` back into a :class:`Result`.

    Parameters
    ----------
    path : str or path-like
        An HDF5 result file (README.md, "Result file (HDF5)").

    Returns
    -------
    Result

    Raises
    ------
    ResultFileError
        Missing, not a selfcon result, or written by a newer schema.

    Examples
    --------
    >>> import selfcon
    >>> result = selfcon.solve(selfcon.load_deck("inputs/hemt_4K.toml"))
    >>> result.save("hemt_4K.h5", force=True)
    >>> again = selfcon.load_result("hemt_4K.h5")
    >>> again.summary["electron_sheet_density_cm2"] == result.summary["electron_sheet_density_cm2"]
    True
    """
    from selfcon.api import load_result as _load
    return _load(path)


def bound_states(z_nm: ArrayLike, band_edge_eV: ArrayLike, mass_m0: ArrayLike,
                 n_states: int) -> tuple[np.ndarray, np.ndarray]:
    """Lowest ``n_states`` BenDaniel–Duke states of a 1D band edge, psi = 0 beyond both ends.

    Parameters
    ----------
    z_nm : array_like, (N,)
        Strictly increasing node positions (nm).
    band_edge_eV : array_like, (N,)
        The band edge at the nodes (eV).
    mass_m0 : array_like, (N,) or (N-1,)
        Effective mass per node or per cell (free-electron masses).
    n_states : int
        How many states (at most N-2).

    Returns
    -------
    energies : ndarray, (k,)
        eV, ascending.
    psi : ndarray, (N, k)
        nm^-1/2, normalised so that sum(w * psi**2) = 1 with the dual-cell widths w.

    See Also
    --------
    selfcon.solver.schrodinger.bound_states : the implementation, with its mesh rules.

    Examples
    --------
    A 10 nm infinite well of GaAs-like mass 0.067: E_n = n^2 hbar^2 pi^2 / (2 m L^2) =
    56.12 meV and 224.5 meV (analytic).

    >>> import numpy as np, selfcon
    >>> z = np.linspace(0.0, 10.0, 401)
    >>> energies, psi = selfcon.bound_states(z, np.zeros(z.size), np.full(z.size, 0.067), 2)
    >>> [round(1e3 * float(e), 1) for e in energies]
    [56.1, 224.5]
    >>> psi.shape
    (401, 2)
    """
    from selfcon.api import bound_states as _bs
    return _bs(z_nm, band_edge_eV, mass_m0, n_states)


def open_sweep(path: str | os.PathLike) -> Any:
    """Read a bias-sweep file into an ``xarray.Dataset`` on the ``bias`` dimension.

    Parameters
    ----------
    path : str or path-like
        A file written by ``selfcon sweep-bias -o FILE`` or ``BiasSweep.save``.

    Returns
    -------
    xarray.Dataset
        Coordinates ``bias`` (V), ``layer``, ``band``, ``state``, ``z`` (nm); variables
        such as ``channel_density`` (bias), ``layer_electrons`` (bias, layer),
        ``subband_energy`` (bias, band, state), ``potential`` (bias, z), ``capacitance``
        and the analysis figures (``threshold_extrapolated``, ...), each with ``units``,
        ``long_name`` and ``description`` (README.md, "Result file (HDF5)").

    Raises
    ------
    ResultFileError
        Not a bias-sweep file (missing, not HDF5, another schema).
    ImportError
        xarray or h5netcdf missing: ``pip install "selfcon[xarray]"``.

    See Also
    --------
    selfcon.output.readers.open_sweep : the same function, where it is implemented.

    Examples
    --------
    >>> import selfcon
    >>> from selfcon.design import sweep_bias
    >>> deck = selfcon.load_deck("inputs/design/gated_delta_10K.toml")
    >>> sweep_bias(deck, [-0.8, -0.7, -0.6]).save("cv.h5")                  # doctest: +SKIP
    >>> cv = selfcon.open_sweep("cv.h5")                                     # doctest: +SKIP
    >>> cv.sizes["bias"], cv.channel_density.attrs["units"]                  # doctest: +SKIP
    (3, 'cm-2')
    >>> cv.channel_density.sel(bias=-0.65, method="nearest")                 # doctest: +SKIP
    """
    from selfcon.output.readers import open_sweep as _open
    return _open(path)


def open_study(folder: str | os.PathLike) -> Any:
    """Read a study's table (``FOLDER/table.h5``) into an ``xarray.Dataset``.

    Parameters
    ----------
    folder : str or path-like
        The study's output folder (``selfcon batch STUDY.toml`` writes ``STUDY/table.h5``).

    Returns
    -------
    xarray.Dataset
        A grid study on one dimension per varied deck path, each named by the path and
        with its unit from the deck reference (``job`` is then a variable, -1 where a grid
        point has no job); zip and sample studies on the ``job`` dimension, the varied
        paths as coordinates along it.  One variable per table column, with units.

    Raises
    ------
    ResultFileError
        No study table in ``folder``, or not one written by selfcon.
    ImportError
        xarray or h5netcdf missing: ``pip install "selfcon[xarray]"``.

    See Also
    --------
    selfcon.output.readers.open_study : the same function, where it is implemented.

    Examples
    --------
    >>> import selfcon
    >>> from selfcon.batch import run_study
    >>> code, counts, out = run_study("inputs/studies/spacer_doping.toml", workers=2)  # doctest: +SKIP
    >>> t = selfcon.open_study(out)                                                    # doctest: +SKIP
    >>> dict(t.sizes)                                                                  # doctest: +SKIP
    {'layer.spacer.thickness': 4, 'layer.doping.sheet_donors': 6}
    >>> t.E0_eV.sel({"layer.spacer.thickness": 20.0})                                 # doctest: +SKIP
    """
    from selfcon.output.readers import open_study as _open
    return _open(folder)


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
