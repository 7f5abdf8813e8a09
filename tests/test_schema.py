"""The file schema (selfcon/output/schema.py): one declaration per variable, UDUNITS units."""
import numpy as np
import pytest

from selfcon.output import schema
from selfcon.output.schema import DIMS, LAYOUTS, NOT_UDUNITS, RESULT


def _all_units():
    out = {d.units for d in DIMS.values()}
    for layout in LAYOUTS:
        out |= {v.units for v in layout.vars.values() if v.units is not None}
    return out - {""}          # "": the string columns of the sweep and table files, kept as written before


def test_every_declaration_is_complete():
    for layout in LAYOUTS:
        for v in layout.vars.values():
            assert v.long_name and v.description, v.path
            assert all(d in DIMS for d in v.dims), v.path
        for g in layout.groups:
            assert layout.group_description(g), g
    for d in DIMS.values():
        assert d.long_name and d.description and d.units, d.name


def test_units_are_udunits_strings():
    # the UDUNITS-2 library itself (through cf-units) parses every units string we write
    import cf_units
    for u in sorted(_all_units() - set(NOT_UDUNITS)):
        unit = cf_units.Unit(u)
        assert not unit.is_unknown() and not unit.is_no_unit(), u
    # and means by it what we mean (SI definitions: 1 cm^-3 = 1e6 m^-3, 1 V/cm = 100 V/m, 1 eV = 1.602e-19 J)
    assert cf_units.Unit("cm-3").convert(1.0, "m-3") == pytest.approx(1e6)
    assert cf_units.Unit("cm-2").convert(1.0, "m-2") == pytest.approx(1e4)
    assert cf_units.Unit("V/cm").convert(1.0, "V/m") == pytest.approx(100.0)
    assert cf_units.Unit("eV").convert(1.0, "J") == pytest.approx(1.602176634e-19, rel=1e-6)
    assert cf_units.Unit("F/cm2").convert(1.0, "F/m2") == pytest.approx(1e4)
    assert cf_units.Unit("cm-2/V").convert(1.0, "m-2 V-1") == pytest.approx(1e4)


def test_our_two_units_are_misread_by_udunits_as_the_readme_says():
    import cf_units
    assert set(NOT_UDUNITS) == {"m0", "nm-1/2"}
    assert cf_units.Unit("m0").is_dimensionless()                               # m^0 = 1, not a mass
    assert cf_units.Unit("nm-1/2").convert(1.0, "nm-1") == pytest.approx(0.5)    # nm^-1 / 2, not nm^-1/2


def test_table_units_of_varied_paths_come_from_the_deck_reference():
    from selfcon.batch.runner import path_units
    # units of the deck keys, README deck reference (selfcon/input/deck.py)
    assert path_units("layer.spacer.thickness") == "nm"
    assert path_units("layer.2.donors") == "cm-3"
    assert path_units("layer.doping.sheet_donors") == "cm-2"
    assert path_units("surface.bias") == "V"
    assert path_units("substrate.barrier") == "eV"
    assert path_units("temperature") == "K"
    assert path_units("material.MyBarrier.electron_mass") == "m0"
    assert path_units("material.MyBarrier.varshni_alpha") == "eV/K"
    assert path_units("layer.barrier.x") == "1"
    assert path_units("solver.max_iterations") == "1"


def test_lookup_patterns_and_refusals():
    assert RESULT.require("subbands/light_hole/energy").units == "eV"
    assert RESULT.get("subbands/electron/nope") is None
    with pytest.raises(KeyError, match="selfcon/output/schema.py"):
        RESULT.require("profile/nope")
    with pytest.raises(ValueError, match="already declared"):
        RESULT.declare("profile/potential", "V", "x", "y", dims=("z",))
    with pytest.raises(ValueError, match="undeclared dimension"):
        RESULT.declare("profile/never_written", "V", "x", "y", dims=("no_such_dim",))
    assert "profile/never_written" not in RESULT.vars


def test_one_declaration_reaches_writer_csv_and_xarray(make_result, tmp_path, monkeypatch):
    # adding a dataset is one declaration: the writer, the CSV export and the xarray view use it
    import h5py
    from selfcon.output.export import export_csv
    monkeypatch.setattr(RESULT, "vars", dict(RESULT.vars))
    monkeypatch.setattr(RESULT, "order", list(RESULT.order))
    RESULT.declare("profile/test_strain", "1", "test strain", "a throwaway profile for this test", dims=("z",))
    r = make_result()
    r.profile["test_strain"] = np.linspace(0.0, 1e-3, r.z.size)
    r.save(tmp_path / "r.h5")
    with h5py.File(tmp_path / "r.h5", "r") as f:
        ds = f["profile/test_strain"]
        assert (ds.attrs["units"], ds.attrs["long_name"]) == ("1", "test strain")
        assert ds.dims[0].keys() == ["z"]
    header = (export_csv(r, tmp_path / "csv")[0]).read_text().splitlines()[0]
    assert "test_strain [1]" in header
    tree = r.to_xarray()
    assert tree["profile"].test_strain.attrs["long_name"] == "test strain"


def test_schema_module_imports_nothing_of_selfcon():
    import ast
    import inspect
    tree = ast.parse(inspect.getsource(schema))
    names = [a.name for n in ast.walk(tree) if isinstance(n, ast.Import) for a in n.names]
    names += [n.module or "" for n in ast.walk(tree) if isinstance(n, ast.ImportFrom)]
    assert not [n for n in names if n.startswith("selfcon")]
