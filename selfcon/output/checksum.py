"""The checksum of a result file: the root attribute ``checksum = "sha256:<hex>"``.

It is the SHA-256 of every dataset's values and of the attributes of the root and of
every group (the summary figures, the deck, the convergence flags: data, not the
``units``/``long_name``/``description`` that every dataset repeats from
selfcon/output/schema.py, and not the root's ``checksum`` itself), in a fixed order:
objects by path, attributes by name, each value as its type, shape and bytes (strings as
UTF-8 with their lengths).  It is computed from the file itself, right after writing
and again on reading, so it says whether what is read is what was written: a damaged
byte in the data or in the structure that finds it is caught (a damaged structure
usually stops HDF5 itself first).

A file written before the checksum existed has no ``checksum`` attribute: it is read
with a warning (:class:`selfcon.errors.UncheckedResultWarning`), never refused.
"""
from __future__ import annotations

import hashlib

import numpy as np

#: the root attribute holding the checksum
ATTRIBUTE = "checksum"
#: the algorithm, written before the hex digest
PREFIX = "sha256:"
#: group attributes left out: the checksum itself, and the references of HDF5 dimension
#: scales (addresses inside the file; the scales they point to are hashed as datasets)
SKIPPED = frozenset({ATTRIBUTE, "DIMENSION_LIST", "REFERENCE_LIST"})


def _value(h, value) -> None:
    arr = np.asarray(value)
    shape = str(arr.shape).encode()
    if arr.dtype.names:                           # compound (the layer table): field by field
        h.update(b"C" + shape)
        for name in arr.dtype.names:
            h.update(b"F" + name.encode("utf-8"))
            _value(h, arr[name])
    elif arr.dtype.kind in "OSU":                 # strings (variable or fixed length)
        h.update(b"T" + shape)
        for x in arr.ravel():
            b = x if isinstance(x, bytes) else str(x).encode("utf-8")
            h.update(len(b).to_bytes(8, "little"))
            h.update(b)
    else:
        h.update(b"N" + arr.dtype.str.encode() + shape)
        h.update(np.ascontiguousarray(arr).tobytes())


def digest(f) -> str:
    """``"sha256:<hex>"`` of an open h5py File (or group): every dataset below it and the
    attributes of every group."""
    import h5py
    h = hashlib.sha256()
    objects = [("", f)]
    f.visititems(lambda name, obj: objects.append((name, obj)))
    objects.sort(key=lambda item: item[0])
    for path, obj in objects:
        h.update(b"\0P" + path.encode("utf-8"))
        if isinstance(obj, h5py.Dataset):
            _value(h, obj[()])
            continue
        for name in sorted(obj.attrs.keys()):
            if name in SKIPPED:
                continue
            h.update(b"\0A" + name.encode("utf-8"))
            _value(h, obj.attrs[name])
    return PREFIX + h.hexdigest()


def stamp(f) -> str:
    """Write the checksum of the open, writable file ``f`` into its root attribute; returns it."""
    value = digest(f)
    f.attrs[ATTRIBUTE] = value
    return value


def verify(f) -> str:
    """``"ok"`` when the file's contents match its checksum, ``"missing"`` for a file without
    one (written before checksums), ``"mismatch"`` when they differ (the file is damaged)."""
    stored = f.attrs.get(ATTRIBUTE)
    if stored is None:
        return "missing"
    if isinstance(stored, bytes):
        stored = stored.decode("utf-8", "replace")
    return "ok" if str(stored) == digest(f) else "mismatch"
