"""CSV tables of a Result: profile.csv (one row per node) and subbands.csv (one row per state).

Headers carry the units, ``z [nm]``, ``conduction_band [eV]``, ``electron_density [cm-3]``,
so a spreadsheet or ``numpy.genfromtxt(..., names=True)`` needs nothing else.
Numbers are written with Python's shortest round-trip repr, so no precision is lost.
"""
from __future__ import annotations

import csv
from pathlib import Path

import numpy as np

from selfcon.errors import SelfconInputError
from selfcon.output.files import atomic_write
from selfcon.output.schema import PROFILE_FIELDS

PROFILE_CSV = "profile.csv"
SUBBANDS_CSV = "subbands.csv"


def _num(v) -> str:
    if isinstance(v, (int, np.integer)):
        return str(int(v))
    return repr(float(v))


def _profile_units(name):
    from selfcon.output.schema import EXTRA_PROFILE_FIELDS, guess_units
    if name in PROFILE_FIELDS:
        return PROFILE_FIELDS[name][0]
    if name in EXTRA_PROFILE_FIELDS:
        return EXTRA_PROFILE_FIELDS[name][0]
    return guess_units(name)


def export_csv(result, dirpath, *, force: bool = True) -> list[Path]:
    """Write profile.csv and subbands.csv into ``dirpath`` (created if missing); returns the two paths.

    With ``force=False`` existing tables are not overwritten (SelfconInputError).
    """
    folder = Path(dirpath)
    if folder.exists() and not folder.is_dir():
        raise SelfconInputError("is a file, expected a folder for the CSV tables", file=str(folder))
    targets = [folder / PROFILE_CSV, folder / SUBBANDS_CSV]
    if not force:
        existing = [str(p) for p in targets if p.exists()]
        if existing:
            raise SelfconInputError("CSV table exists; pass --force to overwrite it", file=existing[0])
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        from selfcon.errors import SelfconEnvironmentError
        raise SelfconEnvironmentError.from_os_error(exc, "cannot create folder", folder) from None

    names = list(result.profile)
    layer_names = [str(row.get("name", i)) for i, row in enumerate(result.layers)]

    def profile(tmp):
        with open(tmp, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(["z [nm]"] + [f"{n} [{_profile_units(n)}]" for n in names] + ["layer_index [1]", "layer"])
            cols = [np.asarray(result.profile[n]) for n in names]
            for i, z in enumerate(np.asarray(result.z)):
                li = int(result.layer_index[i])
                w.writerow([_num(z)] + [_num(c[i]) for c in cols] + [str(li), layer_names[li] if 0 <= li < len(
                    layer_names) else ""])

    def subbands(tmp):
        with open(tmp, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(["band", "index", "energy [eV]", "occupation [cm-2]", "in_plane_mass [m0]", "region",
                        "degeneracy"])
            for band, sb in result.subbands.items():
                for k in range(np.asarray(sb.energy).size):
                    w.writerow([band, k, _num(sb.energy[k]), _num(sb.occupation[k]), _num(sb.in_plane_mass[k]),
                                int(sb.region[k]), _num(sb.degeneracy[k])])

    # each table atomically (temporary file, fsync, rename): an interrupted or failed export
    # leaves an existing table as it was
    atomic_write(targets[0], profile, force=force)
    atomic_write(targets[1], subbands, force=force)
    return targets
