"""The Result of one solve and its file (schema "selfcon.result", version 1; README.md, "Result file (HDF5)").

The file is the :class:`Result` written out, readable with plain h5py, HDF5's own
tools, MATLAB, Julia, and netCDF readers (h5netcdf, xarray, netCDF-C).  Its layout,
every variable with its units, long_name, description and dimensions, is declared in
:mod:`selfcon.output.schema` (README.md, "Result file (HDF5)", shows it).  Attributes::

    /           schema, schema_version, selfcon_version, created, title, temperature_K,
                converged, iterations, residual_V, message, deck, the provenance keys
                (numpy_version, ..., deck_hash, wall_time_s) and provenance_keys (their names)
    /summary    Result.summary, with warnings (array of strings) = Result.warnings;
                a loaded Result has summary["warnings"] == warnings

Each group holds its own coordinate variables (``/mesh/z``, ``/profile/z``,
``/subbands/<band>/z`` and ``state``, ``/channels/channel``, ``/transitions/transition``,
``/interfaces/interface``,
``/convergence/iteration``, ``/layer``, ...), as
netCDF-4 dimension scales.  Writing is atomic: a temporary file in the target folder,
flushed and fsync'ed, then ``os.replace``.  Any failure removes the temporary file and
leaves an existing output untouched.
"""
from __future__ import annotations

import datetime as _dt
import os
from pathlib import Path

import numpy as np

from selfcon.errors import ResultFileError
from selfcon.output import checksum
from selfcon.output.files import atomic_write as _atomic_write
from selfcon.output.netcdf import Group, set_attrs
from selfcon.output.schema import (CHANNEL_FIELDS, DIMS, INTERFACE_FIELDS, RESULT, ROOT_ATTRS, SCHEMA,
                                   SCHEMA_VERSION, SUBBAND_FIELDS, TRANSITION_FIELDS, KP_FIELDS)
from dataclasses import dataclass, field
from typing import Any


@dataclass
class Subbands:
    """Bound states of one band in all quantum regions, ordered by energy."""

    energy: np.ndarray          # (k,) eV relative to EF (hole states in electron energy)
    occupation: np.ndarray      # (k,) cm^-2
    wavefunction: np.ndarray    # (N, k) nm^-1/2, zero outside its region
    in_plane_mass: np.ndarray   # (k,) m0
    region: np.ndarray          # (k,) int, index of the quantum region holding the state
    degeneracy: np.ndarray      # (k,) valley degeneracy used for the occupation (spin excluded)
    channel: np.ndarray = None  # (k,) int, index into Result.channels, -1 for none
    bound: np.ndarray = None    # (k,) bool, below the band edge at both region ends

    def __post_init__(self):
        k = np.asarray(self.energy).size
        if self.channel is None:
            self.channel = np.full(k, -1, dtype=np.int64)
        if self.bound is None:
            self.bound = np.ones(k, dtype=bool)


@dataclass
class Result:
    """Outcome of :func:`selfcon.solve`.  ``converged = False`` is a result, not an error.

    Profiles are per node in output units (``profile["electron_density"]`` in cm^-3,
    ``profile["conduction_band"]`` in eV relative to EF, ``profile["electric_field"]`` in
    V/cm), ``subbands[band]`` holds the bound states, ``layers`` one row per layer with its
    sheet densities, ``summary`` the headline figures (README.md, "Result file (HDF5)"),
    ``warnings`` the design warnings.  ``save(path)`` writes the HDF5 file and
    :func:`selfcon.load_result` reads it back.

    Examples
    --------
    >>> import selfcon
    >>> result = selfcon.solve("inputs/hemt_4K.toml")
    >>> result.converged, int(result.status), result.summary["channel_layer"]
    (True, 0, 'channel')
    >>> [row["name"] for row in result.layers]
    ['cap', 'barrier', 'doping', 'spacer', 'channel', 'buffer']
    >>> result.z.shape == result.profile["electron_density"].shape
    True
    >>> bool(result.subbands["electron"].energy[0] < 0)      # the lowest subband lies below EF
    True
    """

    title: str
    temperature: float
    converged: bool
    iterations: int
    residual: float                     # V, last max |dphi|
    message: str
    deck_text: str
    z: np.ndarray                       # (N,) nm
    profile: dict[str, np.ndarray]      # keys of PROFILE_FIELDS, each (N,)
    layer_index: np.ndarray             # (N,) int
    layers: list[dict[str, Any]]        # rows: name, material, x_top, x_bottom, top_nm, bottom_nm,
                                        #       electron_sheet_density_cm2, hole_sheet_density_cm2, ...
    subbands: dict[str, Subbands]
    residual_history: np.ndarray        # (iterations,) V
    summary: dict[str, Any]             # /summary attributes (floats, ints, strings)
    warnings: list[str] = field(default_factory=list)
    provenance: dict[str, Any] = field(default_factory=dict)
    record: dict[str, np.ndarray] = field(default_factory=dict)   # per-iteration: residual, charge_residual,
                                                                   # newton_steps, seconds, damping
    regions_nm: list[tuple[float, float]] = field(default_factory=list)
    channels: list[dict[str, Any]] = field(default_factory=list)   # rows of /channels, top first
    transitions: dict[str, np.ndarray] = field(default_factory=dict)  # /transitions columns
    #: /subbands/hole_kp variables (physics.hole_model kp4 | kp6), name -> array; {} otherwise
    hole_kp: dict[str, np.ndarray] = field(default_factory=dict)
    interfaces: dict[str, np.ndarray] = field(default_factory=dict)   # /interfaces columns

    @property
    def main_channel(self) -> dict | None:
        """The row of the main channel in :attr:`channels` (None without channels).

        The main channel is the first ``[[channel]]`` of the deck, else the one found holding
        the most carriers; the summary figures are its figures.

        Examples
        --------
        >>> import selfcon
        >>> result = selfcon.solve("inputs/hemt_4K.toml")
        >>> result.main_channel["layer"], result.main_channel["carrier"]
        ('channel', 'electron')
        """
        return next((c for c in self.channels if c.get("main")), None)

    def channel(self, name: str) -> dict | None:
        """The row of the channel called ``name`` (None if there is none).

        Parameters
        ----------
        name : str
            A channel name: a ``[[channel]]`` of the deck, or the layer name of a channel
            found in the solution.

        Returns
        -------
        dict or None
            Depth range (nm), carrier, sheet density (cm^-2), ground-state energy and
            spacing (eV), occupied subbands, centroid, in-plane mass, ...

        Examples
        --------
        >>> import selfcon
        >>> result = selfcon.solve("inputs/hemt_4K.toml")
        >>> row = result.channel("channel")
        >>> row["carrier"], row["occupied_subbands"]         # one subband at 4 K
        ('electron', 1)
        >>> result.channel("nowhere") is None
        True
        """
        return next((c for c in self.channels if c.get("name") == name), None)

    # SciPy-style status fields
    @property
    def success(self) -> bool:
        """``converged`` under SciPy's name.

        Examples
        --------
        >>> import selfcon
        >>> selfcon.solve("inputs/hemt_4K.toml", max_iterations=1).success
        False
        """
        return bool(self.converged)

    @property
    def status(self) -> int:
        """How the solve ended, a :class:`selfcon.solver.control.Status` (an int): 0
        ``CONVERGED``, 1 ``MAX_ITERATIONS``, 2 ``DIVERGED``, 3 ``OSCILLATING``, 4
        ``NO_PROGRESS``, 5 ``STOPPED`` (by the progress callback), 6 ``UNPHYSICAL`` (converged,
        but a sanity check of selfcon/output/sanity.py failed).  Stored as the summary
        attribute ``status``; a file without it gives 0 or 1 from ``converged``.

        Examples
        --------
        >>> import selfcon
        >>> short = selfcon.solve("inputs/hemt_4K.toml", max_iterations=1)
        >>> short.status.name, int(short.status)
        ('MAX_ITERATIONS', 1)
        """
        from selfcon.solver.control import Status
        code = (self.summary or {}).get("status")
        code = (0 if self.converged else 1) if code is None else int(code)
        try:
            return Status(code)
        except ValueError:              # a code from a newer selfcon
            return code

    @property
    def potential(self) -> np.ndarray:
        """The electrostatic potential phi (V) per node, ``profile["potential"]``.

        Band edges are ``Ec0 - phi``; pass ``(result.z, result.potential)`` as
        ``initial_potential`` to start another solve from this one.

        Examples
        --------
        >>> import selfcon
        >>> result = selfcon.solve("inputs/hemt_4K.toml")
        >>> result.potential.shape == result.z.shape
        True
        """
        return self.profile["potential"]

    def save(self, path: str | os.PathLike, *, force: bool = False) -> None:
        """Write the HDF5 result file atomically (see :func:`save_result`).

        Parameters
        ----------
        path : str or path-like
            The file to write; its folder must exist.
        force : bool, optional
            Replace an existing file (else that is a :class:`ResultFileError`).

        Raises
        ------
        ResultFileError
            ``path`` exists and ``force`` is False, or its folder does not exist.

        Examples
        --------
        >>> import h5py, selfcon
        >>> result = selfcon.solve("inputs/hemt_300K.toml")
        >>> result.save("hemt_300K.h5", force=True)
        >>> with h5py.File("hemt_300K.h5") as f:            # plain h5py reads it
        ...     print(f["profile/electron_density"].attrs["units"])
        cm-3
        """
        save_result(self, path, force=force)

    def to_xarray(self):
        """The result as an ``xarray.DataTree``: the result file's groups, with coordinates.

        Exactly what ``xarray.open_datatree(path, engine="h5netcdf")`` gives for the saved
        file (it is built from the same file image, in memory), less the compound
        ``/layers``, whose columns ``/layer_table`` holds one variable each.

        Returns
        -------
        xarray.DataTree
            One node per group (``profile``, ``subbands/electron``, ``layer_table``,
            ``convergence``, ``summary``, ...); coordinates ``z`` (nm), ``state``,
            ``layer``, ``iteration``, ...; every variable with ``units``, ``long_name``
            and ``description``; the file's attributes as the nodes' attributes.

        Raises
        ------
        ImportError
            xarray or h5netcdf missing: ``pip install "selfcon[xarray]"``.

        Examples
        --------
        >>> import selfcon
        >>> tree = selfcon.solve(selfcon.load_deck("inputs/hemt_4K.toml")).to_xarray()   # doctest: +SKIP
        >>> n = tree["profile"].electron_density.sel(z=30.0, method="nearest")           # doctest: +SKIP
        >>> n.attrs["units"]                                                             # doctest: +SKIP
        'cm-3'
        >>> tree["subbands/electron"].energy.sel(state=0)                                # doctest: +SKIP
        """
        import io
        xr = import_xarray()
        tree = xr.open_datatree(io.BytesIO(result_image(self)), engine="h5netcdf")
        try:
            tree.load()
        finally:
            tree.close()
        del tree["layers"]
        return tree

    def __repr__(self) -> str:  # keep reprs short: arrays are large
        ns = self.summary.get("electron_sheet_density_cm2", float("nan"))
        return (f"Result(title={self.title!r}, converged={self.converged}, iterations={self.iterations}, "
                f"residual={self.residual:.2e} V, n_s={ns:.4g} cm^-2, nodes={self.z.size})")


_STR = None  # h5py.string_dtype(), set lazily


def import_xarray():
    """xarray with its h5netcdf engine, or a clear ImportError naming the extra (the one
    place the xarray readers, here and in :mod:`selfcon.output.readers`, import it)."""
    try:
        import h5netcdf  # noqa: F401
        import xarray
    except ImportError as exc:
        raise ImportError(f"reading selfcon files into xarray needs xarray and h5netcdf "
                          f"(pip install 'selfcon[xarray]'): {exc}") from None
    return xarray


def _h5py():
    import h5py
    global _STR
    if _STR is None:
        _STR = h5py.string_dtype("utf-8")
    return h5py


# --------------------------------------------------------------------------- writing

def _attr_value(value):
    """A Python/numpy value as an HDF5-attribute-friendly value (strings as UTF-8 vlen)."""
    if isinstance(value, (bool, np.bool_)):
        return np.bool_(value)
    if isinstance(value, str):
        return value
    if isinstance(value, (int, np.integer)):
        return np.int64(value)
    if isinstance(value, (float, np.floating)):
        return np.float64(value)
    if value is None:
        return "None"
    if isinstance(value, (list, tuple, np.ndarray)):
        arr = np.asarray(value)
        if arr.dtype.kind in "USO":
            return np.array([str(v) for v in arr.ravel()], dtype=_STR).reshape(arr.shape)
        return arr
    raise TypeError(f"cannot store attribute value of type {type(value).__name__}")


def utc_now() -> str:
    """Now as ISO 8601 UTC, seconds resolution: 2024-05-01T12:00:00Z (the ``created``
    stamp of every file selfcon writes)."""
    now = _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0)
    return now.isoformat().replace("+00:00", "Z")


def _write_root(f, result: Result) -> None:
    from selfcon.version import __version__
    prov = dict(result.provenance or {})
    created = prov.get("created") or utc_now()
    items = [("schema", SCHEMA), ("schema_version", np.int64(SCHEMA_VERSION)),
             ("selfcon_version", str(prov.get("selfcon_version", __version__))), ("created", str(created)),
             ("title", str(result.title)), ("temperature_K", np.float64(result.temperature)),
             ("converged", np.bool_(result.converged)), ("iterations", np.int64(result.iterations)),
             ("residual_V", np.float64(result.residual)), ("message", str(result.message)),
             ("deck", str(result.deck_text))]
    keys = []
    for key, value in prov.items():
        if (key in ROOT_ATTRS and key not in ("selfcon_version", "created")) or key == "provenance_keys":
            raise ValueError(f"provenance key {key!r} collides with a root attribute of the result file")
        items.append((key, _attr_value(value)))
        keys.append(key)
    items.append(("provenance_keys", np.array(keys, dtype=_STR)))
    set_attrs(f, items)


def _write_mesh(f, result: Result) -> None:
    g = Group.create(f, "mesh", RESULT)
    g.coord("z", result.z)
    g.var("quantum_regions", np.asarray(result.regions_nm, dtype=np.float64).reshape(-1, 2))


def _write_profile(f, result: Result) -> None:
    g = Group.create(f, "profile", RESULT)
    g.coord("z", result.z)
    for name, data in result.profile.items():
        g.var(name, data)
    g.var("layer_index", result.layer_index)


def _layer_table(layers):
    """Rows (dicts) -> numpy structured array with fixed-length UTF-8 strings and float/int numbers."""
    h5py = _h5py()
    columns: list[str] = []
    for row in layers:
        for key in row:
            if key not in columns:
                columns.append(key)
    fields = []
    for key in columns:
        values = [row.get(key) for row in layers]
        present = [v for v in values if v is not None]
        if present and all(isinstance(v, str) for v in present):
            length = max([len(v.encode("utf-8")) for v in present] + [1])
            fields.append((key, h5py.string_dtype("utf-8", length)))
        elif present and all(isinstance(v, (bool, np.bool_)) for v in present):
            fields.append((key, np.bool_))
        elif present and all(isinstance(v, (int, np.integer)) and not isinstance(v, (bool, np.bool_))
                             for v in present):
            fields.append((key, np.int64))
        else:
            fields.append((key, np.float64))
    table = np.zeros(len(layers), dtype=fields)
    for i, row in enumerate(layers):
        for key, dt in fields:
            v = row.get(key)
            if np.dtype(dt).kind == "S":
                table[key][i] = (v or "").encode("utf-8")
            elif v is None:
                table[key][i] = np.nan if np.dtype(dt).kind == "f" else 0
            else:
                table[key][i] = v
    return table


def _layer_column(name: str):
    return RESULT.require(f"layer_table/{name}")


def _write_layers(f, result: Result) -> None:
    table = _layer_table(result.layers)
    names = list(table.dtype.names or ())
    columns = [_layer_column(n) for n in names]
    layer_names = [str(row.get("name", i)) for i, row in enumerate(result.layers)]
    root = Group(f, "", RESULT)
    root.coord("layer", layer_names)         # dimension only (schema: /channels/layer is a variable)
    ds = root.var("layers", table, units=np.array([c.units for c in columns], dtype=_STR))
    set_attrs(ds, [("columns", np.array(names, dtype=_STR)),
                   ("column_descriptions", np.array([c.description for c in columns], dtype=_STR))])
    g = Group.create(f, "layer_table", RESULT)
    g.coord("layer", layer_names)
    for name in names:
        column = table[name]
        if column.dtype.kind == "S":
            column = [x.decode("utf-8") for x in column]
        g.var(name, column)


def _write_subbands(f, result: Result) -> None:
    top = Group.create(f, "subbands", RESULT)
    for band, sb in result.subbands.items():
        g = top.subgroup(band)
        g.coord("z", result.z)
        for v in RESULT.in_group(g.path):
            g.var(v.name, getattr(sb, v.name))
    if result.hole_kp:
        g = top.subgroup("hole_kp")
        g.coord("z", result.z)
        g.coord("k_parallel", result.hole_kp["k_parallel"])
        for name in KP_FIELDS:
            if name not in result.hole_kp:     # a result read from a file written before the field
                continue
            dsid = g.var(name, result.hole_kp[name])
            if name == "dispersion":
                set_attrs(dsid, [("direction", "axial approximation (any in-plane direction)")])
            elif name.startswith("dispersion_"):
                set_attrs(dsid, [("direction", f"[{name.rpartition('_')[2]}]")])


def _column(name, values):
    """A /channels, /transitions or /interfaces column as an array (text as str, flags and counts
    as int)."""
    v = RESULT.require(name)
    values = list(values)
    if v.name in ("name", "carrier", "layer", "hole_band", "upper", "lower"):
        return np.array([str(x) for x in values], dtype=object)
    if v.name in ("occupied_subbands", "main", "named", "electron_state", "hole_state"):
        return np.asarray([int(x) for x in values], dtype=np.int64)
    return np.asarray(values, dtype=np.float64)


def _write_channels(f, result: Result) -> None:
    g = Group.create(f, "channels", RESULT)
    g.coord("channel", len(result.channels))
    for v in RESULT.in_group("channels"):
        g.var(v.name, _column(v.path, [row.get(v.name) for row in result.channels]))


def _write_transitions(f, result: Result) -> None:
    g = Group.create(f, "transitions", RESULT)
    t = result.transitions or {}
    g.coord("transition", len(t.get("energy", [])))
    for v in RESULT.in_group("transitions"):
        g.var(v.name, _column(v.path, t.get(v.name, [])))


def _write_interfaces(f, result: Result) -> None:
    g = Group.create(f, "interfaces", RESULT)
    t = result.interfaces or {}
    g.coord("interface", len(t.get("depth_nm", [])))
    for v in RESULT.in_group("interfaces"):
        g.var(v.name, _column(v.path, t.get(v.name, [])))


def _write_convergence(f, result: Result) -> None:
    g = Group.create(f, "convergence", RESULT)
    history = np.asarray(result.residual_history)
    g.var("residual", history)
    record_keys = []
    for key, values in (result.record or {}).items():
        values = np.asarray(values)
        if key == "residual" and values.shape == history.shape and values.dtype == history.dtype \
                and np.array_equal(values, history, equal_nan=values.dtype.kind == "f"):
            record_keys.append(key)        # same data as /convergence/residual
            continue
        g.var("record_residual" if key == "residual" else key, values)
        record_keys.append(key)
    g.h5.attrs["record_keys"] = np.array(record_keys, dtype=_STR)


def _write_summary(f, result: Result) -> None:
    g = f.create_group("summary", track_order=True)      # attributes: figures only (no description)
    set_attrs(g, [(key, _attr_value(value)) for key, value in (result.summary or {}).items()
                  if key != "warnings"]            # Result.warnings is the one source of the warnings attribute
              + [("warnings", np.array([str(w) for w in result.warnings], dtype=_STR))])


_WRITERS = (_write_root, _write_mesh, _write_profile, _write_layers, _write_subbands,
            _write_channels, _write_transitions, _write_interfaces, _write_convergence, _write_summary)


def _write_file(path: str, result: Result) -> None:
    h5py = _h5py()
    with h5py.File(path, "w", track_order=True) as f:
        for write in _WRITERS:
            write(f, result)
        checksum.stamp(f)
        f.flush()


def save_result(result: Result, path, *, force: bool = False) -> None:
    """Write ``result`` to ``path`` (HDF5) atomically.

    Raises :class:`ResultFileError` if ``path`` exists and ``force`` is false, or if its
    folder does not exist.  On any failure the temporary file is removed and an existing
    ``path`` is left as it was.
    """
    atomic_write(path, lambda tmp: _write_file(tmp, result), force=force)


def atomic_write(path, fill, *, force: bool = False, error=ResultFileError) -> None:
    """:func:`selfcon.output.files.atomic_write` (the one writer), with result-file errors."""
    _atomic_write(path, fill, force=force, error=error)


def result_image(result: Result) -> bytes:
    """The complete HDF5 file of ``result`` as bytes, built in memory (no file is touched).

    Batch workers build the image (the costly part: ~100 attributes and ~20 datasets)
    in parallel; the coordinator only writes the bytes with :func:`save_image`.
    """
    import io
    h5py = _h5py()
    buf = io.BytesIO()
    with h5py.File(buf, "w", track_order=True) as f:
        for write in _WRITERS:
            write(f, result)
        checksum.stamp(f)
    return buf.getvalue()


def save_image(image: bytes, path, *, force: bool = False) -> None:
    """Write a file image from :func:`result_image` to ``path``, atomically like save_result."""
    def fill(tmp):
        with open(tmp, "wb") as fh:
            fh.write(image)
            fh.flush()
    atomic_write(path, fill, force=force)


# --------------------------------------------------------------------------- reading

def _py(value):
    """HDF5 attribute value -> plain Python (str, bool, int, float, list)."""
    if isinstance(value, bytes):
        return value.decode("utf-8")
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, np.floating):
        return float(value)
    if isinstance(value, np.ndarray):
        if value.dtype.kind in "OSU":
            return [v.decode("utf-8") if isinstance(v, bytes) else str(v) for v in value.ravel()]
        return value.tolist()
    return value


def _strings(value) -> list[str]:
    if value is None:
        return []
    return [v.decode("utf-8") if isinstance(v, bytes) else str(v) for v in np.asarray(value).ravel()]


def _need(f, name, path):
    if name not in f:
        raise ResultFileError(f"incomplete result file: {name} is missing", file=str(path))
    return f[name]


def load_result(path) -> Result:
    """Read a result file written by :func:`save_result` back into a :class:`Result`.

    A missing, foreign or damaged (truncated, overwritten) file is a :class:`ResultFileError`
    (bad input, exit 2); a file the system will not let us read is a
    :class:`selfcon.errors.SelfconEnvironmentError` (exit 4)."""
    path = Path(path)
    if not path.exists():
        raise ResultFileError("no such result file", file=str(path))
    if path.is_dir():
        raise ResultFileError("is a folder, expected a result file", file=str(path))
    try:
        return _read_result(path)
    except ResultFileError:
        raise
    except PermissionError as exc:
        from selfcon.errors import SelfconEnvironmentError
        raise SelfconEnvironmentError.from_os_error(exc, "cannot read", path) from None
    except (OSError, KeyError, ValueError, TypeError, IndexError, AttributeError, RuntimeError) as exc:
        # h5py reports a truncated or scribbled-over file as OSError/KeyError from deep inside
        raise ResultFileError(f"damaged result file, cannot be read ({type(exc).__name__}: "
                              f"{' '.join(str(exc).split())[:160]})", file=str(path)) from None


def _check_sum(f, path) -> None:
    """Refuse a file whose contents do not match its checksum (selfcon/output/checksum.py);
    warn about a file written before checksums existed."""
    state = checksum.verify(f)
    if state == "mismatch":
        raise ResultFileError("damaged result file: its contents do not match the checksum written "
                              "with it (the file changed after it was written); solve the deck again",
                              file=str(path))
    if state == "missing":
        import warnings
        from selfcon.errors import UncheckedResultWarning
        warnings.warn(f"{path}: written before result files carried a checksum; read without "
                      "verifying it", UncheckedResultWarning, stacklevel=4)


def verify_result_file(path) -> str:
    """Check a result file without building a Result: ``"ok"``, ``"unchecked"`` (readable, no
    checksum: written before checksums existed), or the reason it is damaged or not ours
    (missing, not HDF5, truncated, checksum mismatch).  Never raises for a bad file."""
    path = Path(path)
    if not path.is_file():
        return "missing" if not path.exists() else "not a file"
    h5py = _h5py()
    try:
        if not h5py.is_hdf5(str(path)):
            return "not an HDF5 file"
        with h5py.File(path, "r") as f:
            if _py(f.attrs.get("schema")) != SCHEMA:
                return "not a selfcon result file"
            state = checksum.verify(f)
    except Exception as exc:           # h5py reports a truncated or scribbled file in many ways
        return f"unreadable ({type(exc).__name__}: {' '.join(str(exc).split())[:120]})"
    return {"ok": "ok", "missing": "unchecked", "mismatch": "checksum mismatch"}[state]


def _read_result(path: Path) -> Result:
    h5py = _h5py()
    with open(path, "rb"):           # no permission shows here (PermissionError), not as "not HDF5"
        pass
    if not h5py.is_hdf5(str(path)):
        raise ResultFileError("not an HDF5 file (expected a selfcon result .h5)", file=str(path))
    with h5py.File(path, "r") as f:
        a = f.attrs
        schema = _py(a.get("schema"))
        if schema != SCHEMA:
            raise ResultFileError(f"not a selfcon result file (schema={schema!r}, expected {SCHEMA!r})",
                                  file=str(path))
        version = _py(a.get("schema_version"))
        if not isinstance(version, int):
            raise ResultFileError("result file has no valid schema_version", file=str(path))
        if version > SCHEMA_VERSION:
            raise ResultFileError(
                f"result file has schema_version {version}, newer than this selfcon reads "
                f"({SCHEMA_VERSION}); upgrade selfcon to read it", file=str(path))
        _check_sum(f, path)
        z = _need(f, "mesh/z", path)[()]
        regions = f["mesh/quantum_regions"][()] if "mesh/quantum_regions" in f else np.zeros((0, 2))
        gp = _need(f, "profile", path)
        profile = {name: gp[name][()] for name in gp if name != "layer_index" and name not in DIMS}
        layer_index = _need(f, "profile/layer_index", path)[()]
        table = _need(f, "layers", path)[()]
        layers = []
        for row in table:
            rec = {}
            for key in table.dtype.names:
                v = row[key]
                if isinstance(v, bytes):
                    rec[key] = v.decode("utf-8")
                else:
                    rec[key] = _py(v)
            layers.append(rec)
        subbands = {}
        hole_kp = {}
        for band, gb in _need(f, "subbands", path).items():
            if band == "hole_kp":       # the multiband holes: a layout of their own
                hole_kp = {name: gb[name][()] for name in KP_FIELDS + ("k_parallel",) if name in gb}
                continue
            fields = {name: gb[name][()] for name in SUBBAND_FIELDS if name in gb}   # older files: fewer
            if "bound" in fields:
                fields["bound"] = fields["bound"].astype(bool)
            subbands[band] = Subbands(**fields)
        channels = []
        if "channels" in f:
            gch = f["channels"]
            cols = {name: gch[name][()] for name in CHANNEL_FIELDS if name in gch}
            m = len(next(iter(cols.values()))) if cols else 0
            for i in range(m):
                row = {}
                for name, values in cols.items():
                    v = values[i]
                    row[name] = v.decode("utf-8") if isinstance(v, bytes) else _py(v)
                for flag in ("main", "named"):
                    if flag in row:
                        row[flag] = bool(row[flag])
                channels.append(row)
        transitions = {}
        if "transitions" in f:
            gt = f["transitions"]
            for name in TRANSITION_FIELDS:
                if name in gt:
                    v = gt[name][()]
                    transitions[name] = (np.array([x.decode("utf-8") if isinstance(x, bytes) else str(x)
                                                   for x in v], dtype=object) if name == "hole_band" else v)
        interfaces = {}
        if "interfaces" in f:              # files before the nitrides have none
            gi = f["interfaces"]
            for name in INTERFACE_FIELDS:
                if name in gi:
                    v = gi[name][()]
                    interfaces[name] = (np.array([x.decode("utf-8") if isinstance(x, bytes) else str(x)
                                                  for x in v], dtype=object)
                                        if name in ("upper", "lower") else v)
        gc = _need(f, "convergence", path)
        history = gc["residual"][()]
        record = {}
        for key in _strings(gc.attrs.get("record_keys")):
            name = "record_residual" if key == "residual" and "record_residual" in gc else key
            record[key] = gc[name][()]
        gs = _need(f, "summary", path)
        warnings = _strings(gs.attrs.get("warnings"))
        summary = {k: (list(warnings) if k == "warnings" else _py(v)) for k, v in gs.attrs.items()}
        provenance = {k: _py(a[k]) for k in _strings(a.get("provenance_keys"))}
        return Result(
            title=_py(a["title"]), temperature=_py(a["temperature_K"]), converged=_py(a["converged"]),
            iterations=_py(a["iterations"]), residual=_py(a["residual_V"]), message=_py(a["message"]),
            deck_text=_py(a["deck"]), z=z, profile=profile, layer_index=layer_index, layers=layers,
            subbands=subbands, hole_kp=hole_kp, residual_history=history, summary=summary, warnings=warnings,
            provenance=provenance, record=record,
            regions_nm=[(float(t), float(b)) for t, b in np.asarray(regions).reshape(-1, 2)],
            channels=channels, transitions=transitions, interfaces=interfaces,
        )
