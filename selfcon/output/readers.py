"""xarray readers of the files the design and batch commands write.

* :func:`open_sweep` — a bias-sweep file (``selfcon sweep-bias -o cv.h5``) as an
  ``xarray.Dataset`` on the ``bias`` dimension;
* :func:`open_study` — a study folder's ``table.h5`` as an ``xarray.Dataset``: a grid
  study on one dimension per varied deck path, other studies on ``job``.

They read with h5py and take every variable's name, dimensions and units from the
declarations in :mod:`selfcon.output.schema`, so files written before the files had
dimension scales read the same.  (A result file has :meth:`Result.to_xarray`.)
Both need the ``xarray`` extra.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np

from selfcon.errors import ResultFileError
from selfcon.output.result import import_xarray
from selfcon.output.schema import DIMS, SWEEP, TABLE

_ATTRS = ("units", "long_name", "description")


def _text(v):
    return v.decode("utf-8") if isinstance(v, bytes) else v


def _plain(v):
    """An HDF5 attribute value as plain Python (str, number, bool, list of those)."""
    if isinstance(v, np.ndarray):
        return [_plain(x) for x in v.tolist()] if v.dtype.kind in "OSU" else v.tolist()
    if isinstance(v, np.generic):
        return v.item()
    return _text(v)


def _strings(arr) -> np.ndarray:
    return np.array([_text(x) for x in np.asarray(arr).ravel()], dtype=str).reshape(np.shape(arr))


def _values(ds) -> np.ndarray:
    data = ds[()]
    return _strings(data) if ds.dtype.kind in "OS" else data


def _attrs(ds, decl=None) -> dict:
    """units, long_name, description of a dataset (the declaration's where an older file has none)."""
    out = {}
    for key in _ATTRS:
        if key in ds.attrs:
            out[key] = _text(ds.attrs[key])
        elif decl is not None and getattr(decl, key, None) is not None:
            out[key] = getattr(decl, key)
    return out


def _dim_attrs(dim: str, **over) -> dict:
    d = DIMS[dim]
    return {"units": d.units, "long_name": d.long_name, "description": d.description, **over}


def _open(path, schema, what):
    import h5py
    path = Path(path)
    if not path.is_file():
        raise ResultFileError(f"no such {what}", file=str(path))
    if not h5py.is_hdf5(str(path)):
        raise ResultFileError(f"not an HDF5 file (expected a selfcon {what})", file=str(path))
    f = h5py.File(path, "r")
    found = _text(f.attrs.get("schema"))
    if found != schema:
        f.close()
        raise ResultFileError(f"not a selfcon {what} (schema={found!r}, expected {schema!r})", file=str(path))
    return f


def open_sweep(path):
    """A bias-sweep file as an ``xarray.Dataset`` on the ``bias`` dimension.

    Variables are the file's, named as in :data:`selfcon.output.schema.SWEEP` (``flat``):
    ``channel_density``, ``layer_electrons`` (bias, layer), ``subband_energy``
    (bias, band, state; NaN where a band has fewer states), ``potential`` (bias, z),
    ``gate_charge``, ``capacitance``, and the analysis figures as 0-d variables
    (``threshold_extrapolated``, ``linear_window`` (end), ...).  Every variable keeps its
    ``units``, ``long_name`` and ``description``; the file's root attributes (title,
    deck, channel_layer, ...) are the dataset's attributes.

    Examples
    --------
    >>> cv = selfcon.open_sweep("cv.h5")                                   # doctest: +SKIP
    >>> cv.channel_density.sel(bias=-0.6, method="nearest")                # doctest: +SKIP
    >>> cv.subband_energy.sel(band="electron", state=0).plot()             # doctest: +SKIP
    >>> cv.layer_electrons.sel(layer="doping")                             # doctest: +SKIP
    """
    xr = import_xarray()
    f = _open(path, SWEEP.schema, "bias-sweep file")
    with f:
        coords = {"bias": ("bias", f["bias"][()], _attrs(f["bias"], DIMS["bias"]))}
        if "mesh/z" in f:
            coords["z"] = ("z", f["mesh/z"][()], _attrs(f["mesh/z"], DIMS["z"]))
        if "layers/name" in f:
            coords["layer"] = ("layer", _values(f["layers/name"]), _dim_attrs("layer"))
        data_vars = {}
        bands = {}
        for v in SWEEP.vars.values():
            if not v.flat:
                continue
            if "<" in v.group:
                top = v.group.split("/")[0]
                for band in (f[top] if top in f else {}):
                    p = f"{top}/{band}/{v.name}"
                    if p in f:
                        bands.setdefault(v.flat, {})[band] = (f[p][()], _attrs(f[p], v))
                continue
            if v.path in f:
                ds = f[v.path]
                data_vars[v.flat] = (v.dims, _values(ds), _attrs(ds, v))
        for flat, per_band in bands.items():
            names = list(per_band)
            k = max(a.shape[1] for a, _ in per_band.values())
            stack = np.full((coords["bias"][1].size, len(names), k), np.nan)
            for j, name in enumerate(names):
                a = per_band[name][0]
                stack[:, j, :a.shape[1]] = a
            attrs = dict(per_band[names[0]][1])
            attrs["description"] = attrs.get("description", "").replace("(bias, state)", "(bias, band, state)")
            data_vars[flat] = (("bias", "band", "state"), stack, attrs)
            coords.setdefault("band", ("band", np.array(names), {"long_name": "band", "units": "1",
                                                                   "description": "band of the subbands"}))
            if "state" not in coords or coords["state"][1].size < k:
                coords["state"] = ("state", np.arange(k), _dim_attrs("state"))
        if any("end" in dims for dims, _, _ in data_vars.values()):
            coords["end"] = ("end", np.array(DIMS["end"].labels), _dim_attrs("end"))
        attrs = {k: _plain(v) for k, v in f.attrs.items()}
    return xr.Dataset(data_vars, coords, attrs)


def open_study(folder):
    """A study's table (``FOLDER/table.h5``, written by ``selfcon batch``) as an ``xarray.Dataset``.

    A grid study is reshaped onto one dimension per varied deck path, the dimension and
    its coordinate named by the path (``layer.spacer.thickness``), with the path's unit;
    ``job`` is then a variable (-1 where a grid point has no job).  Zip and sample studies
    stay on the ``job`` dimension, with the varied paths as coordinates along it.  Points
    missing from a grid are NaN (numbers), -1 (counts and flags) or "" (text).

    Examples
    --------
    >>> t = selfcon.open_study("inputs/studies/spacer_doping")             # doctest: +SKIP
    >>> t.electron_sheet_density_cm2.sel({"layer.spacer.thickness": 20.0})  # doctest: +SKIP
    >>> t.E0_eV.plot(x="layer.doping.sheet_donors", hue="layer.spacer.thickness")  # doctest: +SKIP
    """
    xr = import_xarray()
    folder = Path(folder)
    f = _open(folder / "table.h5", TABLE.schema, "study table")
    with f:
        if "table" not in f:
            raise ResultFileError("table.h5 has no /table group", file=str(folder / "table.h5"))
        g = f["table"]
        cols = [_text(c) for c in g.attrs["columns"]]
        mode = _text(f.attrs.get("mode", ""))
        if "varied_paths" in f.attrs:
            paths = [_text(p) for p in np.atleast_1d(f.attrs["varied_paths"])]
        else:       # tables written before the attribute: varied columns said "deck units"
            paths = [c for c in cols if _text(g[c].attrs.get("units", "")) == "deck units"]
        job = g["job"][()]
        columns = {}
        for c in cols:
            if c != "job":
                ds = g[c]
                decl = None if c in paths else TABLE.vars.get(f"table/{c}")
                columns[c] = (_values(ds), _attrs(ds, decl))
        attrs = {k: _plain(v) for k, v in f.attrs.items()}
    if mode != "grid" or not paths:
        data_vars = {c: ("job", a, at) for c, (a, at) in columns.items() if c not in paths}
        coords = {"job": ("job", job, _dim_attrs("job"))}
        coords.update({p: ("job", *columns[p]) for p in paths})
        return xr.Dataset(data_vars, coords, attrs)
    return _grid(xr, folder, paths, job, columns, attrs)


def _axis(values: np.ndarray) -> np.ndarray:
    """The distinct values of a varied column: sorted numbers, or text in order of appearance."""
    if values.dtype.kind in "fiu":
        return np.unique(values)
    return np.array(list(dict.fromkeys(values.tolist())), dtype=values.dtype)


def _grid(xr, folder, paths, job, columns, attrs):
    axes = [_axis(columns[p][0]) for p in paths]
    index = tuple(np.searchsorted(ax, columns[p][0]) if ax.dtype.kind in "fiu"
                  else np.array([ax.tolist().index(v) for v in columns[p][0].tolist()], dtype=int)
                  for p, ax in zip(paths, axes))
    shape = tuple(ax.size for ax in axes)
    flat = np.ravel_multi_index(index, shape) if job.size else np.zeros(0, int)
    if np.unique(flat).size != flat.size:
        raise ResultFileError("grid study table has two jobs at the same point", file=str(folder / "table.h5"))

    def spread(values: np.ndarray) -> np.ndarray:
        kind = values.dtype.kind
        fill = np.nan if kind == "f" else (-1 if kind in "iu" else "")
        out = np.full(shape, fill, dtype=values.dtype if kind != "U" else object)
        out[index] = values
        return out.astype(str) if kind == "U" else out

    data_vars = {"job": (paths, spread(job), _dim_attrs("job"))}
    data_vars.update({c: (paths, spread(a), at) for c, (a, at) in columns.items() if c not in paths})
    coords = {p: (p, ax, columns[p][1]) for p, ax in zip(paths, axes)}
    return xr.Dataset(data_vars, coords, attrs)

