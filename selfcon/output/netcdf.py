"""Writing the variables declared in :mod:`selfcon.output.schema` as netCDF-4-compatible HDF5.

Every variable gets ``units``, ``long_name`` and ``description`` attributes from its
declaration, and each of its dimensions is attached to the coordinate variable of
that name *in the same group* (an HDF5 dimension scale), so h5netcdf, netCDF-C and
xarray see named dimensions with coordinates instead of ``phony_dim_N``.  The files
stay plain HDF5: h5py reads them as before.

    g = Group.create(f, "profile", RESULT)
    g.coord("z", z_nm)
    g.var("potential", phi)

Index and label dimensions (``state``, ``iteration``, ``side``, ...) get their
coordinate on first use; the others (``z``, ``layer``, ``bias``, ``job``) must be given
with :meth:`Group.coord` before a variable uses them.

Numbers and strings are written with h5py's low-level calls: the same datasets and
attributes as its high-level ones (attribute creation order tracked, as with
``track_order=True``), at about half the cost; batch workers build every result file.
"""
from __future__ import annotations

import numpy as np

from selfcon.output.schema import DIMS, Layout

_LOW = None      # low-level handles, made on first use (h5py is imported lazily)
#: the NAME of a netCDF-4 dimension scale that is a dimension only (netCDF-C's convention)
NOT_A_VARIABLE = "This is a netCDF dimension but not a netCDF variable."


class _Low:
    def __init__(self):
        import h5py
        from h5py import h5a, h5d, h5ds, h5p, h5s, h5t
        from h5py._objects import ObjectID
        self.ObjectID = ObjectID
        self.h5py, self.h5a, self.h5d, self.h5ds, self.h5s, self.h5t = h5py, h5a, h5d, h5ds, h5s, h5t
        self.str_dtype = h5py.string_dtype("utf-8")
        self.str_type = h5t.py_create(self.str_dtype, logical=True)
        self.scalar = h5s.create(h5s.SCALAR)
        self.types = {}
        self.dcpl = h5p.create(h5p.DATASET_CREATE)
        self.dcpl.set_attr_creation_order(h5p.CRT_ORDER_TRACKED | h5p.CRT_ORDER_INDEXED)
        self.dcpl.set_obj_track_times(False)           # as h5py does: no timestamps, same bytes each time

    def type_of(self, dtype):
        t = self.types.get(dtype)
        if t is None:
            t = self.types[dtype] = self.h5t.py_create(dtype, logical=True)
        return t


def _low() -> _Low:
    global _LOW
    if _LOW is None:
        _LOW = _Low()
    return _LOW


def string_dtype():
    """h5py's variable-length UTF-8 string type (imports h5py on first use)."""
    return _low().str_dtype


def _wrap(oid):
    h5py = _low().h5py
    return h5py.Dataset(oid) if isinstance(oid, _low().h5d.DatasetID) else h5py.Group(oid)


def set_attrs(obj, items) -> None:
    """Set attributes of an HDF5 object (h5py object or low-level id): ``items`` is
    (name, value) pairs, stored as ``obj.attrs[name] = value`` would store them
    (str: variable-length UTF-8; Python and numpy floats and ints: 64-bit scalars),
    with low-level calls.  Other values, and names already present, go through
    ``obj.attrs``."""
    low = _low()
    oid = obj if isinstance(obj, low.ObjectID) else obj.id
    for name, value in items:
        if isinstance(value, str):
            data, tid = np.array(value, dtype=low.str_dtype), low.str_type
        elif isinstance(value, (float, np.floating, int, np.integer)) and not isinstance(value, (bool, np.bool_)):
            data = np.array(value, dtype="f8" if isinstance(value, (float, np.floating)) else "i8")
            tid = low.type_of(data.dtype)
        else:
            data = tid = None
        key = name.encode("utf-8")
        if tid is None or low.h5a.exists(oid, key):
            (_wrap(oid) if obj is oid else obj).attrs[name] = value
            continue
        low.h5a.create(oid, key, tid, low.scalar).write(data)


def _array(data, dtype=None):
    arr = np.asarray(data) if dtype is None else np.asarray(data, dtype=dtype)
    if arr.dtype.kind == "b":                   # netCDF has no boolean: flags are 0/1 bytes
        return arr.astype(np.int8)
    if arr.dtype.kind in "UO":
        arr = np.array([str(v) for v in arr.ravel()], dtype=_low().str_dtype).reshape(arr.shape)
    return arr


def _dataset(group, name: str, arr: np.ndarray):
    """A new dataset ``name`` in ``group`` holding ``arr``; returns its low-level id."""
    low = _low()
    if arr.dtype.kind not in "fiuO":
        return group.create_dataset(name, data=arr, track_order=True).id     # compound, bool, ...
    space = low.scalar if arr.ndim == 0 else low.h5s.create_simple(arr.shape)
    dtype = low.str_dtype if arr.dtype.kind == "O" else arr.dtype
    dsid = low.h5d.create(group.id, name.encode("utf-8"), low.type_of(dtype), space, dcpl=low.dcpl)
    if arr.size:
        dsid.write(low.h5s.ALL, low.h5s.ALL, np.ascontiguousarray(arr))
    return dsid


class Group:
    """One group of a file being written, with the coordinate variables made so far."""

    def __init__(self, h5group, path: str, layout: Layout):
        self.h5 = h5group
        self.path = path
        self.layout = layout
        self.scales: dict = {}          # dim -> (low-level id, size)

    @classmethod
    def create(cls, parent, path: str, layout: Layout, *, description: str | None = None):
        """Create group ``path`` (from the file's root) under ``parent``, the file (``""``: the
        root itself); its description is the layout's, or ``description``."""
        h5 = parent if path == "" else parent.create_group(path, track_order=True)
        desc = description if description is not None else layout.group_description(path)
        if desc:
            set_attrs(h5, [("description", desc)])
        return cls(h5, path, layout)

    def subgroup(self, name: str):
        """Create the group ``name`` inside this one (e.g. ``subbands`` -> ``subbands/electron``)."""
        return Group.create(self.h5.file, f"{self.path}/{name}" if self.path else name, self.layout)

    def coord(self, dim: str, values=None):
        """Make the coordinate variable of ``dim`` in this group from ``values`` (for an
        index or label dimension: ``values`` is the size, or None); returns its values.
        A coordinate the layout declares dimension-only (``Layout.dimension_only``) is
        written with netCDF's "dimension but not a variable" name."""
        d = DIMS[dim]
        if dim in self.scales:
            raise ValueError(f"/{self.path}: coordinate {dim!r} made twice")
        if d.labels:
            values = list(d.labels)
        elif d.start is not None:
            values = np.arange(d.start, d.start + int(values), dtype=np.int64)
        elif values is None:
            raise ValueError(f"/{self.path}: coordinate {dim!r} needs its values")
        arr = _array(values)
        if arr.ndim != 1:
            raise ValueError(f"/{self.path}: coordinate {dim!r} must be one-dimensional")
        dsid = _dataset(self.h5, dim, arr)
        set_attrs(dsid, [("units", d.units), ("long_name", d.long_name), ("description", d.description)])
        hidden = dim in self.layout.hidden.get(self.path, ())
        name = f"{NOT_A_VARIABLE}{arr.shape[0]:10d}" if hidden else dim
        _low().h5ds.set_scale(dsid, name.encode("utf-8"))
        self.scales[dim] = (dsid, arr.shape[0])
        return arr

    def var(self, name: str, data, *, units=None, note: str = "", dtype=None) -> None:
        """Write the declared variable ``name`` of this group.

        ``units`` only for variables declared without units (set per file); ``note`` is
        appended to the declared description (``"; here: ..."``)."""
        path = f"{self.path}/{name}" if self.path else name
        v = self.layout.require(path)
        if (v.units is None) == (units is None):
            raise ValueError(f"{self.layout.schema}: {path!r}: units are "
                             + ("given by the writer" if v.units is None else "declared; do not pass them"))
        arr = _array(data, dtype)
        if arr.ndim != len(v.dims):
            raise ValueError(f"{self.layout.schema}: {path!r} has {arr.ndim} dimensions, declared {v.dims}")
        scales = []
        for axis, dim in enumerate(v.dims):
            if dim not in self.scales:
                if DIMS[dim].labels or DIMS[dim].start is not None:
                    self.coord(dim, arr.shape[axis])
                else:
                    raise ValueError(f"/{self.path}: give coordinate {dim!r} before {name!r}")
            scale, size = self.scales[dim]
            if size != arr.shape[axis]:
                raise ValueError(f"{self.layout.schema}: {path!r} has {arr.shape[axis]} along {dim!r}, "
                                 f"its coordinate {size}")
            scales.append(scale)
        dsid = _dataset(self.h5, name, arr)
        set_attrs(dsid, [("units", v.units if units is None else units), ("long_name", v.long_name),
                         ("description", v.description + (f"; here: {note}" if note else ""))])
        attach = _low().h5ds.attach_scale
        for axis, scale in enumerate(scales):
            attach(dsid, scale, axis)
        return dsid
