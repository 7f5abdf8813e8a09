"""HDF5 result files (DESIGN.md §4): layout, units, round trip, atomic writes.

``make_result`` builds a small, physically meaningless but well-formed Result.
It is for I/O tests only (test_cli and test_plot import it too); physics checks
use real solves.
"""
import json
import os
import shutil
import subprocess
import sys

import numpy as np
import pytest

from selfcon.output import result as results
from selfcon.errors import ResultFileError
from selfcon.output.result import Result, Subbands


def make_result(n=41, converged=True):
    """A hand-made Result on an n-node mesh over 40 nm, three layers, two bands (I/O tests only)."""
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

# DESIGN.md §4 datasets: path -> (shape as a function of N, k, iterations; units)
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


def plain_read(path):
    """Read a result file in a fresh interpreter that imports only h5py (no selfcon)."""
    proc = subprocess.run([sys.executable, "-c", PLAIN_READER, str(path)], capture_output=True, text=True,
                          cwd=os.path.dirname(str(path)), timeout=120)
    assert proc.returncode == 0, proc.stderr
    return json.loads(proc.stdout)


def check_layout(info, bands):
    """Every §4 path exists with its shape and units (for any result file)."""
    N, iters, paths = info["N"], info["iterations"], info["paths"]
    assert info["selfcon_imported"] is False
    root = info["root"]
    assert root["schema"] == "selfcon.result" and root["schema_version"] == 1   # DESIGN.md §4
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


def test_layout_readable_with_plain_h5py(tmp_path):
    r = make_result()
    out = tmp_path / "r.h5"
    results.save_result(r, out)
    info = plain_read(out)
    check_layout(info, ["electron", "heavy_hole"])
    assert info["layer_names"] == ["cap", "barrier", "channel"]
    assert info["root"]["deck_hash"] == "abc123" and info["root"]["wall_time_s"] == 0.25
    assert info["summary"]["warnings"] == r.warnings
    assert info["paths"]["convergence/newton_steps"]["shape"] == [4]
    assert info["paths"]["convergence/seconds"]["units"] == "s"


def test_h5dump_lists_the_layout(tmp_path):
    h5dump = shutil.which("h5dump")
    if h5dump is None:
        pytest.skip("h5dump not installed (Debian package hdf5-tools)")
    out = tmp_path / "r.h5"
    results.save_result(make_result(), out)
    proc = subprocess.run([h5dump, "-H", str(out)], capture_output=True, text=True, timeout=60)
    assert proc.returncode == 0, proc.stderr
    text = proc.stdout
    for group in ("mesh", "profile", "subbands", "convergence", "summary", "electron", "heavy_hole"):
        assert f'GROUP "{group}"' in text, group
    for name in ("z", "conduction_band", "electron_density", "layer_index", "layers", "energy",
                 "wavefunction", "residual"):
        assert f'DATASET "{name}"' in text, name
    assert 'ATTRIBUTE "units"' in text and 'ATTRIBUTE "schema_version"' in text


def _tree(path):
    """Every dataset and attribute of a file as (dtype, bytes), so NaN compares equal to NaN."""
    import h5py
    items = {}
    with h5py.File(path, "r") as f:
        def grab(name, obj):
            attrs = {k: (v if isinstance(v, (str, bytes)) else (str(np.asarray(v).dtype), np.asarray(v).tolist()
                         if np.asarray(v).dtype.kind in "OSU" else np.asarray(v).tobytes()))
                     for k, v in obj.attrs.items()}
            entry = {"attrs": attrs}
            if isinstance(obj, h5py.Dataset):
                entry["dtype"] = str(obj.dtype)
                entry["data"] = obj[()].tobytes()
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


def assert_results_equal(a: Result, b: Result):
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


def test_round_trip_exact(tmp_path):
    r = make_result()
    results.save_result(r, tmp_path / "a.h5")
    back = results.load_result(tmp_path / "a.h5")
    assert_results_equal(r, back)
    back.save(tmp_path / "b.h5")
    assert _tree(tmp_path / "a.h5") == _tree(tmp_path / "b.h5")


def test_round_trip_via_public_api(tmp_path):
    import selfcon
    r = make_result(converged=False)
    r.save(tmp_path / "a.h5")
    back = selfcon.load_result(tmp_path / "a.h5")
    assert back.converged is False and back.status == 1
    assert_results_equal(r, back)


def test_record_residual_that_differs_is_kept(tmp_path):
    r = make_result()
    r.record["residual"] = r.residual_history * 2.0
    results.save_result(r, tmp_path / "a.h5")
    back = results.load_result(tmp_path / "a.h5")
    assert np.array_equal(back.record["residual"], r.record["residual"])
    assert np.array_equal(back.residual_history, r.residual_history)


def test_newer_schema_is_a_clear_error(tmp_path):
    import h5py
    out = tmp_path / "r.h5"
    results.save_result(make_result(), out)
    with h5py.File(out, "r+") as f:
        f.attrs["schema_version"] = np.int64(2)
    with pytest.raises(ResultFileError, match=r"schema_version 2.*newer.*upgrade"):
        results.load_result(out)


def test_not_a_result_file(tmp_path):
    import h5py
    other = tmp_path / "other.h5"
    with h5py.File(other, "w") as f:
        f["x"] = np.arange(3)
    with pytest.raises(ResultFileError, match="not a selfcon result"):
        results.load_result(other)
    text = tmp_path / "deck.toml"
    text.write_text("title = 'x'\n")
    with pytest.raises(ResultFileError, match="not an HDF5 file"):
        results.load_result(text)
    with pytest.raises(ResultFileError, match="no such result file"):
        results.load_result(tmp_path / "missing.h5")


def test_existing_output_needs_force(tmp_path):
    out = tmp_path / "r.h5"
    results.save_result(make_result(), out)
    with pytest.raises(ResultFileError, match="--force"):
        results.save_result(make_result(converged=False), out)
    assert results.load_result(out).converged is True
    results.save_result(make_result(converged=False), out, force=True)
    assert results.load_result(out).converged is False


def _boom(*args, **kwargs):
    raise RuntimeError("simulated crash while writing")


@pytest.mark.parametrize("where", ["subbands", "fsync", "replace"])
def test_crash_mid_write_leaves_nothing_behind(tmp_path, monkeypatch, where):
    out = tmp_path / "r.h5"
    fresh = tmp_path / "fresh.h5"
    results.save_result(make_result(converged=True), out)
    before = out.read_bytes()
    if where == "subbands":
        writers = tuple(_boom if w is results._write_subbands else w for w in results._WRITERS)
        monkeypatch.setattr(results, "_WRITERS", writers)
    elif where == "fsync":
        monkeypatch.setattr(results, "_fsync", _boom)
    else:
        monkeypatch.setattr(results.os, "replace", _boom)
    for target in (out, fresh):
        with pytest.raises(RuntimeError, match="simulated crash"):
            results.save_result(make_result(converged=False), target, force=True)
    monkeypatch.undo()
    assert out.read_bytes() == before                   # old file intact
    assert results.load_result(out).converged is True
    assert not fresh.exists()                           # nothing under the final name
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r.h5"]   # no temp file left


def test_missing_output_folder(tmp_path):
    with pytest.raises(ResultFileError, match="folder does not exist"):
        results.save_result(make_result(), tmp_path / "nope" / "r.h5")


def test_file_image_built_in_memory_is_the_same_file(tmp_path):
    # batch workers build the HDF5 image in memory; the coordinator only writes the bytes
    from selfcon.output.result import load_result, result_image, save_image, save_result
    r = make_result()
    save_result(r, tmp_path / "direct.h5")
    save_image(result_image(r), tmp_path / "image.h5")
    assert_results_equal(load_result(tmp_path / "direct.h5"), load_result(tmp_path / "image.h5"))
    assert_results_equal(r, load_result(tmp_path / "image.h5"))
    with pytest.raises(ResultFileError, match="--force"):
        save_image(result_image(r), tmp_path / "image.h5")
    assert not [p for p in tmp_path.iterdir() if p.name.startswith(".")]     # no temp files left
