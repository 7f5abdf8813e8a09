"""Shared fixtures of the test suite (pytest finds them by name; no test module imports another).

Decks
    ``inputs_dir``          the shipped decks folder, ``inputs/``
    ``good_deck_text``      a valid three-layer HEMT deck as TOML text (tests/bad_decks.py)
    ``good_deck``           the same deck written to ``tmp_path/good.toml``
    ``bad_deck``            one malformed deck per test case: a test that takes this argument is
                            parametrized over every row of tests/bad_decks.py (``BadDeck`` tuples);
                            ``@pytest.mark.bad_decks("id", ...)`` narrows it to the named rows
    ``bad_deck_table``      all rows, for tests about the table itself
Results
    ``make_result``         factory of a small hand-made, well-formed ``Result`` (I/O tests only)
    ``result_file``         ``make_result()`` saved to ``tmp_path/fake.h5``
    ``hemt4_deck``          ``inputs/hemt_4K.toml`` loaded (session)
    ``hemt4_result``        that deck solved once per session to tolerance 1e-9; read it, never
                            modify it (every test that takes it sees the same object)
File checks
    ``plain_read``          read a result file in a fresh interpreter that imports only h5py
    ``check_layout``        every documented dataset of a result file exists with shape and units
    ``h5_tree``             every dataset and attribute of a file as comparable bytes
    ``assert_results_equal``  two Results field by field, dtypes included, NaN equal to NaN
Command line
    ``run_cli``             ``run_cli(*argv) -> (code, stdout, stderr)`` through ``selfcon.cli.main``
    ``run_sub``             ``run_sub(*argv, cwd=, env=)`` through ``python -m selfcon`` (a real process)
"""
from __future__ import annotations

import json
import os
import subprocess
import sys
from pathlib import Path
from typing import NamedTuple

import numpy as np
import pytest

# tests/ is on sys.path while pytest imports this file (its default "prepend" import mode),
# so the data module beside it imports by name; test modules use the fixtures below instead.
from bad_decks import BAD_DECKS, GOOD_DECK

ROOT = Path(__file__).resolve().parent.parent


def pytest_configure(config):
    config.addinivalue_line("markers", "bad_decks(*ids): run a `bad_deck` test on these rows of "
                                       "tests/bad_decks.py only")


# --------------------------------------------------------------------------- decks

class BadDeck(NamedTuple):
    id: str
    text: str
    key: str | None      # substring of the key the error must name (None: a TOML syntax error)
    line: int | None     # 1-based line the error must point at (None: no line)


def pytest_generate_tests(metafunc):
    if "bad_deck" in metafunc.fixturenames:
        rows = [BadDeck(*row) for row in BAD_DECKS]
        mark = metafunc.definition.get_closest_marker("bad_decks")
        if mark is not None:
            wanted = set(mark.args)
            unknown = wanted - {r.id for r in rows}
            assert not unknown, f"no such rows in tests/bad_decks.py: {sorted(unknown)}"
            rows = [r for r in rows if r.id in wanted]
        metafunc.parametrize("bad_deck", rows, ids=[r.id for r in rows])


@pytest.fixture(scope="session")
def bad_deck_table():
    return [BadDeck(*row) for row in BAD_DECKS]


@pytest.fixture(scope="session")
def inputs_dir():
    return ROOT / "inputs"


@pytest.fixture(scope="session")
def good_deck_text():
    return GOOD_DECK


@pytest.fixture
def good_deck(tmp_path):
    p = tmp_path / "good.toml"
    p.write_text(GOOD_DECK)
    return p


@pytest.fixture(scope="session")
def hemt4_deck(inputs_dir):
    import selfcon
    return selfcon.load_deck(inputs_dir / "hemt_4K.toml")


@pytest.fixture(scope="session")
def hemt4_result(hemt4_deck):
    """inputs/hemt_4K.toml solved once to 1e-9 V: shared by every test that only reads it."""
    import selfcon
    return selfcon.solve(hemt4_deck, tolerance=1e-9)


# --------------------------------------------------------------------------- hand-made results

def _make_result(n=41, converged=True):
    """A hand-made Result on an n-node mesh over 40 nm, three layers, two bands (I/O tests only)."""
    from selfcon.output.result import Result, Subbands
    z = np.linspace(0.0, 40.0, n)
    layer_index = np.where(z < 10.0, 0, np.where(z < 20.0, 1, 2)).astype(np.int64)
    layer_index[-1] = 2
    ec = 0.3 - 0.01 * z + 0.25 * (layer_index == 1)
    profile = {
        "conduction_band": ec,
        "valence_band": ec - 1.5,
        "potential": 0.01 * z,
        "electric_field": np.full(n, -1e5),
        "electron_density": 1e17 * np.exp(-((z - 30.0) / 4.0) ** 2),
        "hole_density": np.full(n, 1e3),
        "ionized_donors": np.where(layer_index == 1, 1e18, 0.0),
        "ionized_acceptors": np.zeros(n),
    }
    psi = np.zeros((n, 2))
    inside = z >= 20.0
    psi[inside, 0] = np.sin(np.pi * (z[inside] - 20.0) / 20.0)
    psi[inside, 1] = np.sin(2 * np.pi * (z[inside] - 20.0) / 20.0)
    psi /= np.sqrt(np.sum(psi ** 2, axis=0) * (z[1] - z[0]))
    electron = Subbands(energy=np.array([-0.012, 0.020]), occupation=np.array([4.1e11, 1.0e3]),
                        wavefunction=psi, in_plane_mass=np.array([0.067, 0.067]),
                        region=np.array([0, 0], dtype=np.int64), degeneracy=np.array([1, 1], dtype=np.int64))
    hole = Subbands(energy=np.array([-1.6]), occupation=np.array([0.0]), wavefunction=psi[:, :1].copy(),
                    in_plane_mass=np.array([0.11]), region=np.array([0], dtype=np.int64),
                    degeneracy=np.array([1], dtype=np.int64))
    layers = [
        {"name": "cap", "material": "GaAs", "x_top": float("nan"), "x_bottom": float("nan"), "top_nm": 0.0, "bottom_nm": 10.0,
         "electron_sheet_density_cm2": 0.0, "hole_sheet_density_cm2": 0.0},
        {"name": "barrier", "material": "AlGaAs", "x_top": 0.3, "x_bottom": 0.3, "top_nm": 10.0,
         "bottom_nm": 20.0, "electron_sheet_density_cm2": 1.0e9, "hole_sheet_density_cm2": 0.0},
        {"name": "channel", "material": "GaAs", "x_top": 0.0, "x_bottom": 0.0, "top_nm": 20.0,
         "bottom_nm": 40.0, "electron_sheet_density_cm2": 4.1e11, "hole_sheet_density_cm2": 0.0},
    ]
    history = np.array([1e-1, 1e-3, 1e-5, 1e-7])
    return Result(
        title="three-layer test stack — ünïcode ok", temperature=4.2, converged=converged,
        iterations=history.size, residual=float(history[-1]),
        message="converged" if converged else "maximum iterations reached",
        deck_text='title = "t"\ntemperature = 4.2\n', z=z, profile=profile, layer_index=layer_index,
        layers=layers, subbands={"electron": electron, "heavy_hole": hole}, residual_history=history,
        summary={"electron_sheet_density_cm2": 4.11e11, "hole_sheet_density_cm2": 0.0,
                 "donor_sheet_density_cm2": 1.0e12, "gauss_residual": 1e-9, "occupied_subbands": 1,
                 "channel_layer": "channel", "ef_minus_ec_channel_eV": 0.0123, "E1_minus_E0_eV": float("nan"),
                 "warnings": ["charge left in a doping layer: barrier holds 1e+09 cm-2"]},
        warnings=["charge left in a doping layer: barrier holds 1e+09 cm-2"],
        provenance={"selfcon_version": "0.1.0", "numpy_version": np.__version__, "deck_hash": "abc123",
                    "wall_time_s": 0.25, "created": "2024-01-02T03:04:05Z"},
        record={"residual": history.copy(), "seconds": np.array([0.1, 0.05, 0.05, 0.05]),
                "newton_steps": np.array([5, 3, 2, 1], dtype=np.int64)},
        regions_nm=[(20.0, 40.0)],
    )


@pytest.fixture(scope="session")
def make_result():
    """``make_result(n=41, converged=True)``: a small, physically meaningless but well-formed Result.

    For I/O tests only (files, tables, figures); physics checks use real solves."""
    return _make_result


@pytest.fixture
def result_file(tmp_path):
    from selfcon.output.result import save_result
    p = tmp_path / "fake.h5"
    save_result(_make_result(), p)
    return p


# --------------------------------------------------------------------------- result files

# the reading code runs in a subprocess that imports only h5py and numpy (no selfcon)
PLAIN_READER = r'''
import json, sys
import h5py
f = h5py.File(sys.argv[1], "r")
N = f["mesh/z"].shape[0]
iters = int(f.attrs["iterations"])
out = {"root": {k: (v.decode() if isinstance(v, bytes) else (v.item() if hasattr(v, "item") and getattr(v, "ndim", 1) == 0 else str(v))) for k, v in f.attrs.items() if k != "deck"}}
paths = {}
def visit(name, obj):
    if isinstance(obj, h5py.Dataset):
        u = obj.attrs["units"]
        u = u.decode() if isinstance(u, bytes) else (u if isinstance(u, str) else [x.decode() if isinstance(x, bytes) else x for x in u])
        paths[name] = {"shape": list(obj.shape), "units": u, "description": bool(obj.attrs["description"])}
f.visititems(visit)
out["paths"] = paths
out["N"] = N
out["iterations"] = iters
out["layers_columns"] = list(f["layers"].dtype.names)
out["layer_names"] = [x.decode() for x in f["layers"]["name"]]
out["summary"] = {k: (v.item() if hasattr(v, "item") and getattr(v, "ndim", 1) == 0 else [x if isinstance(x, str) else x.decode() for x in v]) for k, v in f["summary"].attrs.items()}
out["selfcon_imported"] = any(m.startswith("selfcon") for m in sys.modules)
print(json.dumps(out))
'''

# the result file's datasets (README, "Result file (HDF5)"): path -> (shape as a function of N, k,
# iterations; units)
EXPECTED = {
    "mesh/z": ("N", "nm"),
    "profile/conduction_band": ("N", "eV"),
    "profile/valence_band": ("N", "eV"),
    "profile/potential": ("N", "V"),
    "profile/electric_field": ("N", "V/cm"),
    "profile/electron_density": ("N", "cm-3"),
    "profile/hole_density": ("N", "cm-3"),
    "profile/ionized_donors": ("N", "cm-3"),
    "profile/ionized_acceptors": ("N", "cm-3"),
    "profile/layer_index": ("N", "1"),
    "convergence/residual": ("I", "V"),
}
SUBBAND_EXPECTED = {"energy": ("k", "eV"), "occupation": ("k", "cm-2"), "wavefunction": ("Nk", "nm-1/2"),
                    "in_plane_mass": ("k", "m0"), "region": ("k", "1"), "degeneracy": ("k", "1")}


def _plain_read(path):
    """Read a result file in a fresh interpreter that imports only h5py (no selfcon)."""
    proc = subprocess.run([sys.executable, "-c", PLAIN_READER, str(path)], capture_output=True, text=True,
                          cwd=os.path.dirname(str(path)), timeout=120)
    assert proc.returncode == 0, proc.stderr
    return json.loads(proc.stdout)


def _check_layout(info, bands):
    """Every documented path exists with its shape and units (for any result file)."""
    N, iters, paths = info["N"], info["iterations"], info["paths"]
    assert info["selfcon_imported"] is False
    root = info["root"]
    assert root["schema"] == "selfcon.result" and root["schema_version"] == 1   # README, "Result file (HDF5)"
    for key in ("selfcon_version", "created", "title", "temperature_K", "converged", "iterations",
                "residual_V", "message"):
        assert key in root, key
    assert root["created"].endswith("Z") and "T" in root["created"]              # ISO 8601 UTC
    for path, (shape, units) in EXPECTED.items():
        assert path in paths, path
        assert paths[path]["units"] == units, path
        assert paths[path]["description"], path
        assert paths[path]["shape"] == ([N] if shape == "N" else [iters]), path
    assert "layers" in paths and paths["layers"]["shape"][0] == len(info["layer_names"])
    for col in ("name", "material", "x_top", "x_bottom", "top_nm", "bottom_nm",
                "electron_sheet_density_cm2", "hole_sheet_density_cm2"):
        assert col in info["layers_columns"], col
    assert len(paths["layers"]["units"]) == len(info["layers_columns"])
    for band in bands:
        k = paths[f"subbands/{band}/energy"]["shape"][0]
        for name, (shape, units) in SUBBAND_EXPECTED.items():
            p = paths[f"subbands/{band}/{name}"]
            assert p["units"] == units, (band, name)
            assert p["shape"] == ([N, k] if shape == "Nk" else [k]), (band, name)
    for key in ("electron_sheet_density_cm2", "hole_sheet_density_cm2", "donor_sheet_density_cm2",
                "gauss_residual", "warnings"):
        assert key in info["summary"], key


def _tree(path):
    """Every dataset and attribute of a file as (dtype, bytes), so NaN compares equal to NaN;
    object references (dimension scales) as the path of the object they point to."""
    import h5py
    items = {}
    with h5py.File(path, "r") as f:
        def plain(v):
            if isinstance(v, h5py.Reference):
                return f[v].name
            if isinstance(v, (list, tuple, np.void)) or (isinstance(v, np.ndarray) and v.dtype.kind in "OV"):
                return [plain(x) for x in (v.tolist() if isinstance(v, np.ndarray) and v.dtype.kind == "V"
                                           else list(v))]
            return v

        def grab(name, obj):
            attrs = {}
            for k, v in obj.attrs.items():
                if isinstance(v, (str, bytes)):
                    attrs[k] = v
                else:
                    a = np.asarray(v)
                    attrs[k] = (str(a.dtype), plain(a) if a.dtype.kind in "OSUV" else a.tobytes())
            entry = {"attrs": attrs}
            if isinstance(obj, h5py.Dataset):
                entry["dtype"] = str(obj.dtype)
                entry["data"] = obj[()].tobytes() if obj.dtype.kind != "O" else plain(obj[()])
            items[name] = entry
        grab("/", f)
        f.visititems(grab)
    return items


def _same(x, y):
    """Equal values of equal types, NaN equal to NaN, recursing into lists, tuples and dicts."""
    if type(x) is not type(y):
        return False
    if isinstance(x, dict):
        return list(x) == list(y) and all(_same(x[k], y[k]) for k in x)
    if isinstance(x, (list, tuple)):
        return len(x) == len(y) and all(_same(u, v) for u, v in zip(x, y))
    if isinstance(x, float) and np.isnan(x):
        return bool(np.isnan(y))
    return x == y


def _assert_results_equal(a, b):
    for name in ("title", "temperature", "converged", "iterations", "residual", "message", "deck_text",
                 "layers", "summary", "warnings", "provenance", "regions_nm"):
        assert _same(getattr(a, name), getattr(b, name)), name
    for name in ("z", "layer_index", "residual_history"):
        x, y = getattr(a, name), getattr(b, name)
        assert x.dtype == y.dtype and np.array_equal(x, y), name
    assert list(a.profile) == list(b.profile)
    for k in a.profile:
        assert a.profile[k].dtype == b.profile[k].dtype and np.array_equal(a.profile[k], b.profile[k]), k
    assert list(a.subbands) == list(b.subbands)
    for band in a.subbands:
        for f in ("energy", "occupation", "wavefunction", "in_plane_mass", "region", "degeneracy"):
            x, y = getattr(a.subbands[band], f), getattr(b.subbands[band], f)
            assert x.dtype == y.dtype and x.shape == y.shape and np.array_equal(x, y), (band, f)
    assert list(a.record) == list(b.record)
    for k in a.record:
        assert a.record[k].dtype == b.record[k].dtype and np.array_equal(a.record[k], b.record[k], equal_nan=True), k


@pytest.fixture(scope="session")
def plain_read():
    return _plain_read


@pytest.fixture(scope="session")
def check_layout():
    return _check_layout


@pytest.fixture(scope="session")
def h5_tree():
    return _tree


@pytest.fixture(scope="session")
def assert_results_equal():
    return _assert_results_equal


# --------------------------------------------------------------------------- command line

class CliRun(NamedTuple):
    code: int
    out: str
    err: str


@pytest.fixture
def run_cli(capsys):
    """``run_cli(*argv) -> CliRun(code, out, err)``: ``selfcon.cli.main`` in this process (fast)."""
    from selfcon import cli

    def run(*argv):
        code = cli.main([str(a) for a in argv])
        out, err = capsys.readouterr()
        return CliRun(code, out, err)
    return run


def _run_sub(*argv, cwd=None, env=None):
    full_env = dict(os.environ)
    full_env.pop("SELFCON_DEBUG", None)
    full_env.update(env or {})
    return subprocess.run([sys.executable, "-m", "selfcon", *map(str, argv)], capture_output=True, text=True,
                          cwd=cwd, env=full_env, timeout=600)


@pytest.fixture(scope="session")
def run_sub():
    """``run_sub(*argv, cwd=None, env=None)``: ``python -m selfcon`` in a real process, as a shell runs it."""
    return _run_sub
