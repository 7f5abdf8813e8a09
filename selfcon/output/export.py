"""CSV tables of a Result: profile.csv (one row per node), subbands.csv (one row per state),
channels.csv (one row per channel) and transitions.csv (one row per e_n - hh_m / e_n - lh_m pair);
on request wavefunctions.csv (one row per node: z and psi of every state, columns named as in
the summary's tables, E0, HH0, LH1, ...).

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
from selfcon.output.schema import DIMS, RESULT

PROFILE_CSV = "profile.csv"
SUBBANDS_CSV = "subbands.csv"
CHANNELS_CSV = "channels.csv"
TRANSITIONS_CSV = "transitions.csv"
#: every table ``export_csv`` writes, in order
TABLES = (PROFILE_CSV, SUBBANDS_CSV, CHANNELS_CSV, TRANSITIONS_CSV)
WAVEFUNCTIONS_CSV = "wavefunctions.csv"


def _num(v) -> str:
    if isinstance(v, (int, np.integer)):
        return str(int(v))
    return repr(float(v))


def _units(path):
    """Units of a result-file variable, from its declaration (selfcon/output/schema.py)."""
    return RESULT.require(path).units


def tables(wavefunctions: bool = False) -> tuple[str, ...]:
    """The file names :func:`export_csv` writes."""
    return TABLES + ((WAVEFUNCTIONS_CSV,) if wavefunctions else ())


def export_csv(result, dirpath, *, force: bool = True, wavefunctions: bool = False) -> list[Path]:
    """Write the tables of :data:`TABLES` into ``dirpath`` (created if missing); returns their paths.

    With ``force=False`` existing tables are not overwritten (SelfconInputError).
    ``wavefunctions``: also write ``wavefunctions.csv``, ``z [nm]`` and the normalised
    envelope psi [nm-1/2] of every state (columns ``E0``, ``HH0``, ``LH0``, ...; a state
    is zero outside its quantum region).
    """
    folder = Path(dirpath)
    if folder.exists() and not folder.is_dir():
        raise SelfconInputError("is a file, expected a folder for the CSV tables", file=str(folder))
    targets = [folder / name for name in tables(wavefunctions)]
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
            w.writerow([f"z [{DIMS['z'].units}]"] + [f"{n} [{_units('profile/' + n)}]" for n in names]
                       + [f"layer_index [{_units('profile/layer_index')}]", "layer"])
            cols = [np.asarray(result.profile[n]) for n in names]
            for i, z in enumerate(np.asarray(result.z)):
                li = int(result.layer_index[i])
                w.writerow([_num(z)] + [_num(c[i]) for c in cols] + [str(li), layer_names[li] if 0 <= li < len(
                    layer_names) else ""])

    def subbands(tmp):
        with open(tmp, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            units = {n: _units(f"subbands/<band>/{n}") for n in ("energy", "occupation", "in_plane_mass")}
            w.writerow(["band", "index"] + [f"{n} [{u}]" for n, u in units.items()]
                       + ["region", "degeneracy", "channel", "bound"])
            names = [str(c.get("name", "")) for c in result.channels]
            for band, sb in result.subbands.items():
                for k in range(np.asarray(sb.energy).size):
                    c = int(sb.channel[k])
                    w.writerow([band, k, _num(sb.energy[k]), _num(sb.occupation[k]), _num(sb.in_plane_mass[k]),
                                int(sb.region[k]), _num(sb.degeneracy[k]), names[c] if 0 <= c < len(names) else "",
                                int(bool(sb.bound[k]))])

    def channels(tmp):
        from selfcon.output.schema import CHANNEL_FIELDS
        fields = list(CHANNEL_FIELDS)
        with open(tmp, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow([f if CHANNEL_FIELDS[f][0] == "1" and f in ("name", "carrier", "layer")
                        else f"{f} [{CHANNEL_FIELDS[f][0]}]" for f in fields])
            for row in result.channels:
                w.writerow([row.get(f) if isinstance(row.get(f), str) else
                            int(row.get(f)) if isinstance(row.get(f), (bool, np.bool_)) else _num(row.get(f, np.nan))
                            for f in fields])

    def transitions(tmp):
        t = result.transitions or {}
        with open(tmp, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(["electron_state", "hole_band", "hole_state",
                        f"energy [{_units('transitions/energy')}]", f"overlap [{_units('transitions/overlap')}]"])
            for row in zip(*(t.get(k, []) for k in ("electron_state", "hole_band", "hole_state", "energy",
                                                    "overlap"))):
                w.writerow([int(row[0]), str(row[1]), int(row[2]), _num(row[3]), _num(row[4])])

    def waves(tmp):
        from selfcon.output.report import state_label
        unit = _units("subbands/<band>/wavefunction")
        cols, head = [], [f"z [{DIMS['z'].units}]"]
        for band, sb in result.subbands.items():
            psi = np.asarray(sb.wavefunction, dtype=float).reshape(np.asarray(result.z).size, -1)
            for k in range(psi.shape[1]):
                head.append(f"{state_label(band, k)} [{unit}]")
                cols.append(psi[:, k])
        with open(tmp, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(head)
            for i, z in enumerate(np.asarray(result.z)):
                w.writerow([_num(z)] + [_num(c[i]) for c in cols])

    # each table atomically (temporary file, fsync, rename): an interrupted or failed export
    # leaves an existing table as it was
    for target, fill in zip(targets, (profile, subbands, channels, transitions, waves)):
        atomic_write(target, fill, force=force)
    return targets
