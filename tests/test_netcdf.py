"""netCDF-4-compatible files (named dimension scales in every group) and the xarray readers.

Three files: a result (the I/O test result of test_results), a real bias sweep (3 points of
inputs/design/gated_delta_10K.toml) and a 2 x 3 grid study run with the queue's stand-in
job.  Each is checked with h5py alone (every variable declared, attributes present, every
axis attached to the coordinate of its declared dimension in its own group), then opened
with xarray: no phony dimensions, coordinates present, values and units as h5py reads them.
"""
import subprocess
import sys
import textwrap
import warnings
from pathlib import Path

import h5py
import numpy as np
import pytest

import selfcon
from selfcon.output.netcdf import NOT_A_VARIABLE
from selfcon.output.schema import DIMS, RESULT, SWEEP, TABLE

ROOT = Path(__file__).resolve().parents[1]
GATED = ROOT / "inputs" / "design" / "gated_delta_10K.toml"
HEMT = ROOT / "inputs" / "hemt_4K.toml"


@pytest.fixture(scope="module")
def result_h5(tmp_path_factory, make_result):
    path = tmp_path_factory.mktemp("result") / "r.h5"
    make_result().save(path)
    return path


@pytest.fixture(scope="module")
def sweep_file(tmp_path_factory):
    from selfcon.design.sweep import sweep_bias
    path = tmp_path_factory.mktemp("sweep") / "cv.h5"
    sw = sweep_bias(selfcon.load_deck(GATED), np.array([-0.8, -0.7, -0.6]))
    sw.save(path)
    return path


def _study(tmp_path, body):
    study = tmp_path / "study.toml"
    study.write_text(f'deck = "{HEMT.as_posix()}"\n' + textwrap.dedent(body))
    from selfcon.batch.runner import run_study
    code, counts, out = run_study(study, workers=1, job_fn="selfcon.batch.worker:sleepy_job")
    assert code == 0, counts
    return out


GRID_2X3 = """
mode = "grid"
[[vary]]
path = "layer.spacer.thickness"
values = [20.0, 10.0]
[[vary]]
path = "layer.doping.sheet_donors"
values = [1e12, 3e12, 2e12]
"""


@pytest.fixture(scope="module")
def grid_dir(tmp_path_factory):
    return _study(tmp_path_factory.mktemp("grid"), GRID_2X3)


# --------------------------------------------------------------------------- with h5py alone

def check_netcdf_layout(path, layout):
    """Every dataset is declared in ``layout`` (or is a coordinate of a declared dimension),
    carries units, long_name and description, and each of its axes is attached to exactly
    one dimension scale: the coordinate named by the declared dimension, in its own group."""
    seen = []
    with h5py.File(path, "r") as f:
        assert f.attrs["schema"] == layout.schema

        def visit(name, obj):
            if not isinstance(obj, h5py.Dataset):
                return
            seen.append(name)
            for key in ("units", "long_name", "description"):
                assert key in obj.attrs, (name, key)
            group, _, short = name.rpartition("/")
            if obj.attrs.get("CLASS") == b"DIMENSION_SCALE":
                d = DIMS[short]
                hidden = short in layout.hidden.get(group, ())
                assert obj.ndim == 1, name
                assert obj.attrs["NAME"].startswith(NOT_A_VARIABLE.encode()) if hidden else \
                    obj.attrs["NAME"] == short.encode(), name
                assert obj.attrs["units"] == d.units and obj.attrs["long_name"] == d.long_name, name
                return
            v = layout.require(name)
            assert obj.ndim == len(v.dims), name
            if v.units is not None:
                assert obj.attrs["units"] == v.units, name
            assert obj.attrs["long_name"] == v.long_name, name
            for axis, dim in enumerate(v.dims):
                scales = list(obj.dims[axis].values())
                assert len(scales) == 1, (name, axis)
                assert scales[0].name == f"/{group}/{dim}" if group else f"/{dim}", (name, scales[0].name)
                assert scales[0].shape[0] == obj.shape[axis], name
        f.visititems(visit)
    return seen


def test_result_h5_is_netcdf_shaped(result_h5):
    seen = check_netcdf_layout(result_h5, RESULT)
    for path in ("profile/z", "mesh/z", "subbands/electron/z", "subbands/electron/state", "convergence/iteration",
                 "layer", "layer_table/layer", "layer_table/material", "mesh/region", "mesh/side"):
        assert path in seen, path
    with h5py.File(result_h5, "r") as f:
        assert np.array_equal(f["profile/z"][()], f["mesh/z"][()])
        assert [x.decode() for x in f["layer"][()]] == ["cap", "barrier", "channel"]
        assert list(f["convergence/iteration"][()]) == [1, 2, 3, 4]
        table = f["layers"][()]
        for column in table.dtype.names:                   # /layer_table holds the columns of /layers
            a, b = table[column], f[f"layer_table/{column}"][()]
            if a.dtype.kind == "S":
                assert [x.decode() for x in a] == [x.decode() for x in b], column
            else:
                assert np.array_equal(a, b, equal_nan=True), column


def test_sweep_file_is_netcdf_shaped(sweep_file):
    seen = check_netcdf_layout(sweep_file, SWEEP)
    for path in ("bias", "sheet_density/bias", "layers/bias", "layers/layer", "subbands/electron/bias",
                 "profile/z", "profile/bias", "analysis/end"):
        assert path in seen, path


def test_study_table_is_netcdf_shaped(grid_dir):
    check_netcdf_layout(grid_dir / "table.h5", TABLE)
    with h5py.File(grid_dir / "table.h5", "r") as f:
        t = f["table"]
        assert t["layer.spacer.thickness"].attrs["units"] == "nm"          # deck reference: layer.thickness nm
        assert t["layer.doping.sheet_donors"].attrs["units"] == "cm-2"     # deck reference: cm^-2
        assert f.attrs["mode"] == "grid"
        assert [p.decode() if isinstance(p, bytes) else p for p in f.attrs["varied_paths"]] == \
            ["layer.spacer.thickness", "layer.doping.sheet_donors"]


def test_netcdf_c_reads_named_dimensions(result_h5):
    # the netCDF-C library itself (the netCDF4 package of the test extra)
    import netCDF4
    with netCDF4.Dataset(result_h5) as d:
        assert d["profile"]["potential"].dimensions == ("z",)
        assert d["subbands"]["electron"]["wavefunction"].dimensions == ("z", "state")
        assert list(d["layer_table"]["material"][:]) == ["GaAs", "AlGaAs", "GaAs"]


# --------------------------------------------------------------------------- with xarray

def _open_tree(path):
    import xarray as xr
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        tree = xr.open_datatree(path, engine="h5netcdf")
        tree.load()
        tree.close()
    assert not [w for w in caught if "phony" in str(w.message)], [str(w.message) for w in caught]
    return tree


def _compare_with_h5py(tree, path, skip=()):
    """Every variable of every node equals the h5py read of its dataset; units come through."""
    checked = 0
    with h5py.File(path, "r") as f:
        for node in tree.subtree:
            ds = node.to_dataset(inherit=False)
            for name, var in ds.variables.items():
                p = f"{node.path.strip('/')}/{name}".lstrip("/")
                if p in skip:
                    continue
                assert not any(d.startswith("phony_dim") for d in var.dims), p
                h = f[p]
                want = h[()]
                if h.dtype.kind in "OS":
                    want = np.array([x.decode() if isinstance(x, bytes) else x for x in np.ravel(want)])
                    assert [str(x) for x in np.ravel(var.values)] == list(want), p
                else:
                    assert np.array_equal(var.values, want, equal_nan=want.dtype.kind == "f"), p
                assert var.attrs.get("units") == h.attrs["units"], p
                checked += 1
    return checked


def test_result_opens_in_xarray_with_coordinates(result_h5):
    tree = _open_tree(result_h5)
    assert _compare_with_h5py(tree, result_h5, skip=("layers",)) > 40
    prof = tree["profile"].to_dataset()
    assert "z" in prof.coords and prof.sizes["z"] == 41
    with h5py.File(result_h5, "r") as f:
        z, phi = f["mesh/z"][()], f["profile/potential"][()]
        k = int(np.argmin(np.abs(z - 12.3)))
        assert prof.potential.sel(z=12.3, method="nearest").item() == phi[k]
        psi = f["subbands/electron/wavefunction"][()]
    sb = tree["subbands/electron"].to_dataset()
    assert sb.wavefunction.sel(z=12.3, method="nearest").sel(state=1).item() == psi[k, 1]
    assert tree["profile"].electron_density.attrs["units"] == "cm-3"
    assert tree["layer_table"].to_dataset().material.sel(layer="barrier").item() == "AlGaAs"
    assert list(tree["convergence"].to_dataset().iteration.values) == [1, 2, 3, 4]


def test_to_xarray_is_the_file_view(result_h5):
    r = selfcon.load_result(result_h5)
    tree = r.to_xarray()
    assert "layers" not in tree.to_dataset()                # the compound table: see /layer_table
    assert _compare_with_h5py(tree, result_h5) > 40
    assert tree.attrs["title"] == r.title and tree["summary"].attrs["channel_layer"] == "channel"


def test_sweep_opens_in_xarray(sweep_file):
    tree = _open_tree(sweep_file)
    assert _compare_with_h5py(tree, sweep_file) > 30
    cv = selfcon.open_sweep(sweep_file)
    assert cv.sizes["bias"] == 3 and "bias" in cv.coords
    with h5py.File(sweep_file, "r") as f:
        bias = f["bias"][()]
        ch = f["sheet_density/channel"][()]
        e = f["subbands/electron/energy"][()]
        le = f["layers/electrons"][()]
        names = [x.decode() for x in f["layers/name"][()]]
        phi = f["profile/potential"][()]
        z = f["mesh/z"][()]
        vt = f["analysis/threshold_extrapolated"][()]
    assert np.array_equal(cv.bias.values, bias)
    assert cv.channel_density.sel(bias=-0.71, method="nearest").item() == ch[1]
    assert cv.channel_density.attrs["units"] == "cm-2"
    assert np.array_equal(cv.subband_energy.sel(band="electron").values[:, :e.shape[1]], e, equal_nan=True)
    assert cv.subband_energy.attrs["units"] == "eV"
    assert list(cv.layer.values) == names
    assert np.array_equal(cv.layer_electrons.sel(layer="channel").values, le[:, names.index("channel")])
    k = int(np.argmin(np.abs(z - 30.0)))
    assert np.array_equal(cv.potential.sel(z=30.0, method="nearest").values, phi[:, k])
    assert cv.threshold_extrapolated.item() == vt and cv.threshold_extrapolated.attrs["units"] == "V"
    assert list(cv.end.values) == ["low", "high"]
    assert cv.attrs["channel_layer"] == "channel"


def test_grid_study_opens_on_one_dimension_per_path(grid_dir):
    tree = _open_tree(grid_dir / "table.h5")
    assert _compare_with_h5py(tree, grid_dir / "table.h5") > 20
    t = selfcon.open_study(grid_dir)
    thick, donors = "layer.spacer.thickness", "layer.doping.sheet_donors"
    assert t[thick].dims == (thick,) and t[donors].dims == (donors,)
    assert dict(t.sizes) == {thick: 2, donors: 3}
    assert list(t[thick].values) == [10.0, 20.0] and list(t[donors].values) == [1e12, 2e12, 3e12]
    assert t[thick].attrs["units"] == "nm" and t[donors].attrs["units"] == "cm-2"
    assert t.E0_eV.dims == (thick, donors) and t.E0_eV.attrs["units"] == "eV"
    with h5py.File(grid_dir / "table.h5", "r") as f:
        g = f["table"]
        rows = zip(g["job"][()], g[thick][()], g[donors][()], g["iterations"][()],
                   [s.decode() for s in g["status"][()]])
        for job, a, b, its, status in rows:                 # each job sits at its own grid point
            point = t.sel({thick: a, donors: b})
            assert point.job.item() == job and point.iterations.item() == its and point.status.item() == status
    assert t.electron_sheet_density_cm2.sel({thick: 10.0}, method="nearest").sizes == {donors: 3}


def test_sample_study_is_indexed_by_job(tmp_path):
    out = _study(tmp_path, """
        mode = "sample"
        samples = 4
        seed = 3
        [[vary]]
        path = "layer.spacer.thickness"
        distribution = "normal"
        relative_sigma = 0.05
    """)
    t = selfcon.open_study(out)
    assert t.sizes == {"job": 4}
    assert t["layer.spacer.thickness"].dims == ("job",) and "layer.spacer.thickness" in t.coords
    with h5py.File(out / "table.h5", "r") as f:
        assert np.array_equal(t["layer.spacer.thickness"].values, f["table/layer.spacer.thickness"][()])
        assert np.array_equal(t.job.values, f["table/job"][()])


def test_readers_refuse_other_files(result_h5, tmp_path):
    with pytest.raises(selfcon.SelfconInputError, match="not a selfcon bias-sweep file"):
        selfcon.open_sweep(result_h5)
    with pytest.raises(selfcon.SelfconInputError, match="no such study table"):
        selfcon.open_study(tmp_path)


def test_import_selfcon_stays_light():
    # `import selfcon` and naming the readers import neither xarray, h5netcdf nor h5py
    code = ("import sys, selfcon; selfcon.open_sweep, selfcon.open_study; "
            "print(sorted(m for m in ('xarray', 'h5netcdf', 'h5py') if m in sys.modules))")
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stderr
    assert proc.stdout.strip() == "[]"


def test_solved_result_with_channels_and_transitions(hemt4_result, tmp_path):
    # a real solve: /channels (channel dimension) and /transitions (transition dimension) too;
    # /channels/layer is a variable of its own, not the layer coordinate
    path = tmp_path / "hemt.h5"
    hemt4_result.save(path)
    seen = check_netcdf_layout(path, RESULT)
    assert "channels/channel" in seen and "transitions/transition" in seen
    tree = _open_tree(path)
    assert _compare_with_h5py(tree, path, skip=("layers",)) > 50
    ch = tree["channels"].to_dataset()
    assert ch["layer"].dims == ("channel",) and ch.sizes["channel"] == len(hemt4_result.channels)
    assert list(ch["layer"].values) == [c["layer"] for c in hemt4_result.channels]
    assert tree["transitions"].to_dataset().energy.dims == ("transition",)
    assert list(tree["layer_table"].to_dataset().layer.values) == [row["name"] for row in hemt4_result.layers]
