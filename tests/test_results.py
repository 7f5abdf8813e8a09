"""HDF5 result files (README, "Result file (HDF5)"): layout, units, round trip, atomic writes.

The ``make_result`` fixture (tests/conftest.py) builds a small, physically meaningless but
well-formed Result, for I/O tests only; physics checks use real solves.
"""
import json
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

from selfcon.output import result as results
from selfcon.output import files
from selfcon.errors import ResultFileError


def test_layout_readable_with_plain_h5py(make_result, plain_read, check_layout, tmp_path):
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


# what `h5dump -H` lists (groups, datasets, attributes), read with h5py alone in a fresh interpreter
HEADER_READER = r'''
import json, sys
import h5py
groups, datasets, attributes = [], [], set(h5py.File(sys.argv[1], "r").attrs)
def visit(name, obj):
    (datasets if isinstance(obj, h5py.Dataset) else groups).append(name.rsplit("/", 1)[-1])
    attributes.update(obj.attrs)
h5py.File(sys.argv[1], "r").visititems(visit)
print(json.dumps({"groups": groups, "datasets": datasets, "attributes": sorted(attributes),
                  "selfcon_imported": any(m.startswith("selfcon") for m in sys.modules)}))
'''


def test_header_lists_the_layout_with_h5py_alone(make_result, tmp_path):
    # the check `h5dump -H` made, with h5py only (CI installs Python packages only)
    out = tmp_path / "r.h5"
    results.save_result(make_result(), out)
    proc = subprocess.run([sys.executable, "-c", HEADER_READER, str(out)], capture_output=True, text=True,
                          timeout=120)
    assert proc.returncode == 0, proc.stderr
    head = json.loads(proc.stdout)
    assert head["selfcon_imported"] is False
    for group in ("mesh", "profile", "subbands", "convergence", "summary", "electron", "heavy_hole",
                  "layer_table"):
        assert group in head["groups"], group
    for name in ("z", "conduction_band", "electron_density", "layer_index", "layers", "energy",
                 "wavefunction", "residual", "iteration", "state"):
        assert name in head["datasets"], name
    for attr in ("units", "long_name", "description", "schema_version", "DIMENSION_LIST", "CLASS"):
        assert attr in head["attributes"], attr


def test_file_written_before_dimension_scales_still_loads(make_result, assert_results_equal):
    # tests/data/result_before_scales.h5: make_result(n=21) saved by the writer of commit 0ee4a81,
    # which wrote no dimension scales, long_name or /layer_table
    import h5py
    old = Path(__file__).resolve().parent / "data" / "result_before_scales.h5"
    with h5py.File(old, "r") as f:
        assert "layer_table" not in f and "z" not in f["profile"]
        assert "DIMENSION_LIST" not in f["profile/potential"].attrs
    from selfcon.errors import UncheckedResultWarning
    with pytest.warns(UncheckedResultWarning, match="written before result files carried a checksum"):
        back = results.load_result(old)                      # and says it cannot verify it
    want = make_result(n=21)
    want.provenance["numpy_version"] = "2.4.6"              # as stored in the file
    assert_results_equal(want, back)
    tree = back.to_xarray()                                  # and it converts like a new one
    assert np.array_equal(tree["profile"]["z"].values, want.z)


def test_undeclared_dataset_is_refused(make_result, tmp_path):
    r = make_result()
    r.profile["made_up_field"] = np.zeros_like(r.z)
    with pytest.raises(KeyError, match=r"profile/made_up_field.*selfcon/output/schema.py"):
        results.save_result(r, tmp_path / "r.h5")
    assert list(tmp_path.iterdir()) == []                   # nothing half-written


def test_round_trip_exact(make_result, h5_tree, assert_results_equal, tmp_path):
    r = make_result()
    results.save_result(r, tmp_path / "a.h5")
    back = results.load_result(tmp_path / "a.h5")
    assert_results_equal(r, back)
    back.save(tmp_path / "b.h5")
    assert h5_tree(tmp_path / "a.h5") == h5_tree(tmp_path / "b.h5")


def test_round_trip_via_public_api(make_result, assert_results_equal, tmp_path):
    import selfcon
    r = make_result(converged=False)
    r.save(tmp_path / "a.h5")
    back = selfcon.load_result(tmp_path / "a.h5")
    assert back.converged is False and back.status == 1
    assert_results_equal(r, back)


def test_record_residual_that_differs_is_kept(make_result, tmp_path):
    r = make_result()
    r.record["residual"] = r.residual_history * 2.0
    results.save_result(r, tmp_path / "a.h5")
    back = results.load_result(tmp_path / "a.h5")
    assert np.array_equal(back.record["residual"], r.record["residual"])
    assert np.array_equal(back.residual_history, r.residual_history)


def test_newer_schema_is_a_clear_error(make_result, tmp_path):
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


def test_existing_output_needs_force(make_result, tmp_path):
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
def test_crash_mid_write_leaves_nothing_behind(make_result, tmp_path, monkeypatch, where):
    out = tmp_path / "r.h5"
    fresh = tmp_path / "fresh.h5"
    results.save_result(make_result(converged=True), out)
    before = out.read_bytes()
    if where == "subbands":
        writers = tuple(_boom if w is results._write_subbands else w for w in results._WRITERS)
        monkeypatch.setattr(results, "_WRITERS", writers)
    elif where == "fsync":
        monkeypatch.setattr(files, "_fsync", _boom)       # the one atomic writer
    else:
        monkeypatch.setattr(files.os, "replace", _boom)
    for target in (out, fresh):
        with pytest.raises(RuntimeError, match="simulated crash"):
            results.save_result(make_result(converged=False), target, force=True)
    monkeypatch.undo()
    assert out.read_bytes() == before                   # old file intact
    assert results.load_result(out).converged is True
    assert not fresh.exists()                           # nothing under the final name
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r.h5"]   # no temp file left


def test_missing_output_folder(make_result, tmp_path):
    with pytest.raises(ResultFileError, match="folder does not exist"):
        results.save_result(make_result(), tmp_path / "nope" / "r.h5")


def test_file_image_built_in_memory_is_the_same_file(make_result, assert_results_equal, tmp_path):
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
