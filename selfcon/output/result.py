"""The Result of one solve and its file: the HDF5 layout of README.md, "Result file (HDF5)" (schema "selfcon.result", version 1).

The file is the :class:`selfcon.output.result.Result` written out, readable with plain
h5py, HDF5's own tools, MATLAB or Julia.  Every dataset carries ``units``
(UDUNITS-style strings: ``nm``, ``eV``, ``V``, ``V/cm``, ``cm-3``, ``cm-2``,
``nm-1/2``, ``m0``, ``s``, ``1``) and ``description`` attributes.

Layout (README.md, "Result file (HDF5)"; + marks additions to the first layout)::

    /                       attrs: schema, schema_version, selfcon_version, created, title,
                                   temperature_K, converged, iterations, residual_V, message, deck,
                                   + provenance keys (numpy_version, ..., deck_hash, wall_time_s),
                                   + provenance_keys (names of the provenance attributes)
    /mesh/z                 (N,)
    /mesh/quantum_regions + (R, 2) nm, [top, bottom] of each quantum region
    /profile/<field>        (N,)   every key of Result.profile, plus layer_index
    /layers                 compound table, one row per layer
    /subbands/<band>/energy, occupation, in_plane_mass (k,), wavefunction (N, k),
                     + region, degeneracy, channel, bound (k,)
    /channels/<field> +     (C,) one entry per channel (schema.CHANNEL_FIELDS)
    /transitions/<field> +  (T,) every e_n - hh_m / e_n - lh_m pair (schema.TRANSITION_FIELDS)
    /convergence/residual   (iterations,)
    /convergence/<name> +   per-iteration record (charge_residual, newton_steps, seconds, damping, ...)
    /summary                attrs: Result.summary, with warnings (array of strings) = Result.warnings;
                            a loaded Result has summary["warnings"] == warnings

Writing is atomic: a temporary file in the target folder, flushed and fsync'ed,
then ``os.replace``.  Any failure removes the temporary file and leaves an
existing output untouched.
"""
from __future__ import annotations

import datetime as _dt
import os
from pathlib import Path

import numpy as np

from selfcon.errors import ResultFileError
from selfcon.output.files import atomic_write as _atomic_write
from selfcon.output.schema import (CHANNEL_FIELDS, EXTRA_PROFILE_FIELDS, LAYER_DESCRIPTIONS,
                                   LAYER_UNITS, PROFILE_FIELDS, RECORD_FIELDS, ROOT_ATTRS, SCHEMA,
                                   SCHEMA_VERSION, SUBBAND_FIELDS, TRANSITION_FIELDS,
                                   guess_units)
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
        ``NO_PROGRESS``, 5 ``STOPPED`` (by the progress callback).  Stored as the summary
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

    def __repr__(self) -> str:  # keep reprs short: arrays are large
        ns = self.summary.get("electron_sheet_density_cm2", float("nan"))
        return (f"Result(title={self.title!r}, converged={self.converged}, iterations={self.iterations}, "
                f"residual={self.residual:.2e} V, n_s={ns:.4g} cm^-2, nodes={self.z.size})")


_STR = None  # h5py.string_dtype(), set lazily


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


def _dataset(group, name, data, units, description):
    ds = group.create_dataset(name, data=np.asarray(data), track_order=True)
    ds.attrs["units"] = units
    ds.attrs["description"] = description
    return ds


def utc_now() -> str:
    """Now as ISO 8601 UTC, seconds resolution: 2024-05-01T12:00:00Z (the ``created``
    stamp of every file selfcon writes)."""
    now = _dt.datetime.now(_dt.timezone.utc).replace(microsecond=0)
    return now.isoformat().replace("+00:00", "Z")


def _write_root(f, result: Result) -> None:
    from selfcon.version import __version__
    prov = dict(result.provenance or {})
    created = prov.get("created") or utc_now()
    a = f.attrs
    a["schema"] = SCHEMA
    a["schema_version"] = np.int64(SCHEMA_VERSION)
    a["selfcon_version"] = str(prov.get("selfcon_version", __version__))
    a["created"] = str(created)
    a["title"] = str(result.title)
    a["temperature_K"] = np.float64(result.temperature)
    a["converged"] = np.bool_(result.converged)
    a["iterations"] = np.int64(result.iterations)
    a["residual_V"] = np.float64(result.residual)
    a["message"] = str(result.message)
    a["deck"] = str(result.deck_text)
    keys = []
    for key, value in prov.items():
        if (key in ROOT_ATTRS and key not in ("selfcon_version", "created")) or key == "provenance_keys":
            raise ValueError(f"provenance key {key!r} collides with a root attribute of the result file")
        a[key] = _attr_value(value)
        keys.append(key)
    a["provenance_keys"] = np.array(keys, dtype=_STR)


def _write_mesh(f, result: Result) -> None:
    g = f.create_group("mesh", track_order=True)
    g.attrs["description"] = "finite-volume mesh; every profile is aligned with /mesh/z"
    _dataset(g, "z", result.z, "nm", "node depth, z = 0 at the top surface, growing into the wafer")
    regions = np.asarray(result.regions_nm, dtype=np.float64).reshape(-1, 2)
    _dataset(g, "quantum_regions", regions, "nm",
             "[top, bottom] of each quantum region; states are solved there, classical densities elsewhere")


def _write_profile(f, result: Result) -> None:
    g = f.create_group("profile", track_order=True)
    g.attrs["description"] = "profiles at the nodes of /mesh/z; energies relative to EF = 0 eV"
    for name, data in result.profile.items():
        if name in PROFILE_FIELDS:
            units, desc = PROFILE_FIELDS[name]
        elif name in EXTRA_PROFILE_FIELDS:
            units, desc = EXTRA_PROFILE_FIELDS[name]
        else:
            units, desc = guess_units(name), f"profile {name}"
        _dataset(g, name, data, units, desc)
    _dataset(g, "layer_index", result.layer_index, *EXTRA_PROFILE_FIELDS["layer_index"])


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


def _write_layers(f, result: Result) -> None:
    table = _layer_table(result.layers)
    names = list(table.dtype.names or ())
    ds = f.create_dataset("layers", data=table, track_order=True)
    ds.attrs["units"] = np.array([LAYER_UNITS.get(n, guess_units(n)) for n in names], dtype=_STR)
    ds.attrs["columns"] = np.array(names, dtype=_STR)
    ds.attrs["column_descriptions"] = np.array([LAYER_DESCRIPTIONS.get(n, n.replace("_", " ")) for n in names],
                                               dtype=_STR)
    ds.attrs["description"] = ("one row per deck layer, top to bottom; 'units' and 'column_descriptions' "
                               "list one entry per column, in column order")


def _write_subbands(f, result: Result) -> None:
    g = f.create_group("subbands", track_order=True)
    g.attrs["description"] = "bound states per band, ordered by energy"
    for band, sb in result.subbands.items():
        gb = g.create_group(band, track_order=True)
        for name, (units, desc) in SUBBAND_FIELDS.items():
            value = getattr(sb, name)
            if name == "bound":
                value = np.asarray(value, dtype=np.int8)
            _dataset(gb, name, value, units, desc)


def _column(name, values):
    """A /channels or /transitions column as an HDF5-ready array (strings as UTF-8)."""
    if name in ("name", "carrier", "layer", "hole_band"):
        h5py = _h5py()
        data = [str(v).encode("utf-8") for v in values]
        length = max([len(b) for b in data] + [1])       # fixed length: byte-identical rewrites
        return np.array(data, dtype=h5py.string_dtype("utf-8", length))
    if name in ("occupied_subbands", "main", "named", "electron_state", "hole_state"):
        return np.asarray([int(v) for v in values], dtype=np.int64)
    return np.asarray(values, dtype=np.float64)


def _write_channels(f, result: Result) -> None:
    g = f.create_group("channels", track_order=True)
    g.attrs["description"] = ("channels: depth intervals where one carrier kind is confined, one entry "
                              "per channel along the 'channel' dimension, top first")
    for name, (units, desc) in CHANNEL_FIELDS.items():
        _dataset(g, name, _column(name, [row.get(name) for row in result.channels]), units, desc)


def _write_transitions(f, result: Result) -> None:
    g = f.create_group("transitions", track_order=True)
    g.attrs["description"] = ("interband transitions: every electron - heavy-hole and electron - "
                              "light-hole pair of the stored states, along the 'transition' dimension")
    t = result.transitions or {}
    for name, (units, desc) in TRANSITION_FIELDS.items():
        _dataset(g, name, _column(name, t.get(name, [])), units, desc)


def _write_convergence(f, result: Result) -> None:
    g = f.create_group("convergence", track_order=True)
    g.attrs["description"] = "history of the self-consistent loop, one entry per iteration"
    history = np.asarray(result.residual_history)
    _dataset(g, "residual", history, *RECORD_FIELDS["residual"])
    record_keys = []
    for key, values in (result.record or {}).items():
        values = np.asarray(values)
        if key == "residual" and values.shape == history.shape and values.dtype == history.dtype \
                and np.array_equal(values, history, equal_nan=values.dtype.kind == "f"):
            record_keys.append(key)        # same data as /convergence/residual
            continue
        name = "record_residual" if key == "residual" else key
        units, desc = RECORD_FIELDS.get(key, (guess_units(key), f"per-iteration record {key}"))
        _dataset(g, name, values, units, desc)
        record_keys.append(key)
    g.attrs["record_keys"] = np.array(record_keys, dtype=_STR)


def _write_summary(f, result: Result) -> None:
    g = f.create_group("summary", track_order=True)      # attributes: figures only (no description)
    for key, value in (result.summary or {}).items():
        if key != "warnings":          # Result.warnings is the one source of the warnings attribute
            g.attrs[key] = _attr_value(value)
    g.attrs["warnings"] = np.array([str(w) for w in result.warnings], dtype=_STR)


_WRITERS = (_write_root, _write_mesh, _write_profile, _write_layers, _write_subbands,
            _write_channels, _write_transitions, _write_convergence, _write_summary)


def _write_file(path: str, result: Result) -> None:
    h5py = _h5py()
    with h5py.File(path, "w", track_order=True) as f:
        for write in _WRITERS:
            write(f, result)
        f.flush()


def save_result(result: Result, path, *, force: bool = False) -> None:
    """Write ``result`` to ``path`` (HDF5, README.md "Result file (HDF5)") atomically.

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
        z = _need(f, "mesh/z", path)[()]
        regions = f["mesh/quantum_regions"][()] if "mesh/quantum_regions" in f else np.zeros((0, 2))
        gp = _need(f, "profile", path)
        profile = {name: gp[name][()] for name in gp if name != "layer_index"}
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
        for band, gb in _need(f, "subbands", path).items():
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
            subbands=subbands, residual_history=history, summary=summary, warnings=warnings,
            provenance=provenance, record=record,
            regions_nm=[(float(t), float(b)) for t, b in np.asarray(regions).reshape(-1, 2)],
            channels=channels, transitions=transitions,
        )
