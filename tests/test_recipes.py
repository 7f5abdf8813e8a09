"""The two recipes of the contributor guide, followed for a throwaway case each, up to the
result file read back with plain h5py:

* "How to add a material parameter" (selfcon/input/materials/__init__.py, steps 1, 3, 4);
* "How to add a design warning" (selfcon/output/diagnostics.py, register_check).

Everything added is removed again (monkeypatch, unregister_check), so the rest of the suite
sees the library and the checks as shipped.
"""
import h5py
import numpy as np
import pytest

import selfcon
from selfcon.input.materials import alloys, library
from selfcon.model import structure as structure_module
from selfcon.output import diagnostics, schema

KEY = "recipe_probe"

DECK = """
title = "recipe probe"
temperature = 77.0
[surface]
contact = "schottky"
barrier = 0.7
[substrate]
contact = "ohmic"
[[layer]]
name = "barrier"
material = "AlGaAs"
x = 0.3
thickness = 20.0
sheet_donors = 2e12
[[layer]]
name = "channel"
material = "GaAs"
thickness = 60.0
donors = 1e15
[physics]
carriers = ["electron"]
[mesh]
step = 1.0
"""


@pytest.fixture
def probe_parameter(monkeypatch):
    """Steps 1, 3 and 4 of the material-parameter recipe, undone afterwards."""
    # 1. library: declare the parameter and give every binary a value with its source
    monkeypatch.setitem(library.PARAMETERS, KEY, ("1", "throwaway parameter of tests/test_recipes.py"))
    for name, table in library.BINARIES.items():
        value = 3.0 if name == "AlAs" else 1.0          # throwaway numbers, not physics
        monkeypatch.setitem(table, KEY, library.Value(value, "1", "tests/test_recipes.py, throwaway"))
    # 3. cell_parameters hands it through, the structure keeps it per cell
    monkeypatch.setitem(alloys.OUTPUT_UNITS, KEY, "1")
    monkeypatch.setattr(structure_module, "MATERIAL_KEYS", structure_module.MATERIAL_KEYS + (KEY,))
    # 4. the schema declares the profile and reports it
    schema.RESULT.declare("profile/" + KEY, "1", "recipe probe", "throwaway material parameter",
                          dims=("z",))
    monkeypatch.setattr(schema, "MATERIAL_PROFILES", schema.MATERIAL_PROFILES + (KEY,))
    structure_module.clear_material_cache()
    try:
        yield
    finally:
        del schema.RESULT.vars["profile/" + KEY]
        structure_module.clear_material_cache()


@pytest.fixture
def probe_warning():
    """The design-warning recipe: a check registered with register_check, unregistered after."""
    @diagnostics.register_check("recipe_probe")
    def check_recipe_probe(result, structure, deck=None):
        thick = [L for L in structure.layers if L.bottom - L.top > 50.0]
        return [f"recipe probe: layer {L.name!r} is {L.bottom - L.top:g} nm thick (limit 50 nm)"
                for L in thick]
    try:
        yield check_recipe_probe
    finally:
        diagnostics.unregister_check("recipe_probe")


def test_a_new_material_parameter_reaches_the_structure_and_the_file(probe_parameter, tmp_path):
    deck = selfcon.load_deck(DECK)
    st = selfcon.build_structure(deck)
    # AlGaAs x = 0.3 interpolates linearly between GaAs (x = 0) and AlAs (x = 1): 0.7 * 1 + 0.3 * 3
    # (the library's rule for a parameter without bowing, selfcon/input/materials/alloys.py)
    np.testing.assert_allclose(st.cell[KEY][st.cell_layer == 0], 1.6, rtol=1e-12)
    np.testing.assert_allclose(st.cell[KEY][st.cell_layer == 1], 1.0, rtol=1e-12)
    r = selfcon.solve(deck, structure=st)
    assert r.converged, r.message
    r.save(tmp_path / "probe.h5")
    with h5py.File(tmp_path / "probe.h5", "r") as f:          # plain h5py, no selfcon
        ds = f["profile/" + KEY]
        assert ds.attrs["units"] == "1" and ds.attrs["description"] == "throwaway material parameter"
        values = ds[()]
        layer = f["profile/layer_index"][()]
    np.testing.assert_allclose(values[layer == 0], 1.6, rtol=1e-12)
    np.testing.assert_allclose(values[layer == 1], 1.0, rtol=1e-12)


def test_the_parameter_is_gone_after_the_recipe_test():
    # the fixture undid every step: a plain solve has no such profile and no such key
    assert KEY not in library.PARAMETERS and KEY not in schema.MATERIAL_PROFILES
    assert KEY not in alloys.OUTPUT_UNITS and schema.RESULT.get("profile/" + KEY) is None
    assert KEY not in structure_module.MATERIAL_KEYS


def test_a_registered_warning_reaches_the_file_in_order(probe_warning, tmp_path):
    assert list(diagnostics.CHECKS)[-1] == "recipe_probe"        # listed after the shipped checks
    r = selfcon.solve(selfcon.load_deck(DECK))
    mine = [w for w in r.warnings if w.startswith("recipe probe")]
    assert mine == ["recipe probe: layer 'channel' is 60 nm thick (limit 50 nm)"]
    r.save(tmp_path / "warned.h5")
    with h5py.File(tmp_path / "warned.h5", "r") as f:
        stored = [w.decode() if isinstance(w, bytes) else str(w) for w in f["summary"].attrs["warnings"]]
    assert stored == r.warnings and mine[0] in stored


def test_register_check_keeps_the_order_and_refuses_duplicates():
    names = list(diagnostics.CHECKS)
    assert names[0] == "not_converged"                      # the order warnings are listed in

    @diagnostics.register_check("recipe_first", before="not_converged")
    def first(result, structure, deck=None):
        return []
    try:
        assert list(diagnostics.CHECKS) == ["recipe_first"] + names
        with pytest.raises(ValueError, match="already registered"):
            diagnostics.register_check("recipe_first")(first)
    finally:
        diagnostics.unregister_check("recipe_first")
    assert list(diagnostics.CHECKS) == names
