"""Bad decks shared by the deck tests and the CLI tests (``selfcon check DECK`` -> exit 2).

``BAD_DECKS`` rows: ``(id, toml_text, expected_key_substring, expected_line_or_None)``.
``expected_key_substring`` is None when the error has no key (TOML syntax errors).
The expected line is the 1-based line of the offending text, found by a plain
substring search in the fixture itself (``_line``), not by selfcon's locator.

Only tests/conftest.py imports this module; tests take the ``good_deck_text``, ``good_deck``,
``bad_deck`` and ``bad_deck_table`` fixtures it defines.
"""

GOOD_DECK = '''\
title = "test HEMT"
temperature = 4.2

[surface]
contact = "schottky"
barrier = 0.8

[[layer]]
name = "cap"
material = "GaAs"
thickness = 10.0

[[layer]]
name = "barrier"
material = "AlGaAs"
x = 0.3
thickness = 40.0
sheet_donors = 4e12

[[layer]]
name = "channel"
material = "GaAs"
thickness = 100.0

[quantum]
regions = [[10.0, 150.0]]
states = 4
'''

_SURFACE = '[surface]\ncontact = "schottky"\nbarrier = 0.8\n'
_LAYERS = GOOD_DECK[GOOD_DECK.index("[[layer]]"):GOOD_DECK.index("[quantum]")]


def _line(text, needle, nth=1):
    """1-based line number of the nth line containing ``needle``."""
    seen = 0
    for n, line in enumerate(text.splitlines(), 1):
        if needle in line:
            seen += 1
            if seen == nth:
                return n
    raise AssertionError(f"{needle!r} not in fixture")


def _swap(old, new, count=1):
    assert old in GOOD_DECK, old
    return GOOD_DECK.replace(old, new, count)


def _case(id_, text, key, needle=None, nth=1):
    return (id_, text, key, None if needle is None else _line(text, needle, nth))


BAD_DECKS = [
    _case("toml_syntax", _swap("thickness = 10.0", "thickness = = 10.0"), None, "= = 10.0"),
    _case("toml_duplicate_key", _swap("thickness = 10.0", "thickness = 10.0\nthickness = 12.0"),
          None, "thickness = 12.0"),
    _case("toml_unclosed_string", _swap('title = "test HEMT"', 'title = "test HEMT'), None,
          'title = "test HEMT'),
    _case("unknown_top_key", _swap("temperature = 4.2", "temprature = 4.2"), "temprature",
          "temprature"),
    _case("unknown_table", GOOD_DECK + "\n[solvr]\nmethod = \"anderson\"\n", "solvr", "[solvr]"),
    _case("unknown_layer_key", _swap("thickness = 40.0", "thicknes = 40.0"), "layer[1].thicknes",
          "thicknes = 40.0"),
    _case("wrong_type", _swap("thickness = 40.0", 'thickness = "forty"'), "layer[1].thickness",
          '"forty"'),
    _case("bool_as_number", _swap("barrier = 0.8", "barrier = true"), "surface.barrier",
          "barrier = true"),
    _case("zero_thickness", _swap("thickness = 10.0", "thickness = 0.0"), "layer[0].thickness",
          "thickness = 0.0"),
    _case("negative_thickness", _swap("thickness = 100.0", "thickness = -5.0"),
          "layer[2].thickness", "thickness = -5.0"),
    # a thickness typed in metres (20 nm as 2.0e-8): under 0.1 nm, half a GaAs monolayer
    # (a/2 = 0.283 nm, common practice), so a unit mistake
    _case("thickness_in_metres", _swap("thickness = 10.0", "thickness = 2.0e-8"),
          "layer[0].thickness", "thickness = 2.0e-8"),
    _case("x_on_binary", _swap('name = "cap"\nmaterial = "GaAs"',
                               'name = "cap"\nmaterial = "GaAs"\nx = 0.3'), "layer[0].x", "x = 0.3"),
    _case("x_on_local_binary", _swap('material = "AlGaAs"', 'material = "MyCap"') +
          '\n[material.MyCap]\nbase = "GaAs"\nelectron_mass = 0.07\n', "layer[1].x", "x = 0.3"),
    _case("x_on_local_material_of_binary",
          GOOD_DECK + '\n[material.MyCap]\nbase = "GaAs"\nx = 0.2\n', "material.MyCap.x",
          "x = 0.2"),
    _case("missing_thickness", _swap("thickness = 10.0\n", ""), "layer[0].thickness",
          "[[layer]]", 1),
    _case("x_out_of_range", _swap("x = 0.3", "x = 1.3"), "layer[1].x", "x = 1.3"),
    _case("graded_x_three_values", _swap("x = 0.3", "x = [0.0, 0.2, 0.3]"), "layer[1].x",
          "x = [0.0, 0.2, 0.3]"),
    _case("graded_x_negative_end", _swap("x = 0.3", "x = [0.3, -0.1]"), "layer[1].x",
          "x = [0.3, -0.1]"),
    _case("unknown_material", _swap('material = "AlGaAs"', 'material = "AlGaAS"'),
          "layer[1].material", '"AlGaAS"'),
    _case("duplicate_layer_names", _swap('name = "channel"', 'name = "cap"'), "layer[2].name",
          'name = "cap"', 2),
    _case("layer_name_all_digits", _swap('name = "channel"', 'name = "2"'), "layer[2].name",
          'name = "2"'),
    _case("empty_stack", 'title = "nothing"\ntemperature = 300\n\n' + _SURFACE, "layer"),
    _case("layer_not_array", 'temperature = 300\n' + _SURFACE +
          '\n[layer]\nmaterial = "GaAs"\nthickness = 10.0\n', "layer", "[layer]"),
    _case("missing_surface", _swap(_SURFACE, ""), "surface"),
    _case("bad_contact_kind", _swap('contact = "schottky"', 'contact = "shottky"'),
          "surface.contact", '"shottky"'),
    _case("barrier_missing_for_schottky", _swap("barrier = 0.8\n", ""), "surface.barrier",
          "[surface]"),
    _case("barrier_on_ohmic", GOOD_DECK + '\n[substrate]\ncontact = "ohmic"\nbarrier = 0.5\n',
          "substrate.barrier", "barrier = 0.5"),
    _case("bias_on_pinned", GOOD_DECK + '\n[substrate]\ncontact = "pinned"\nbarrier = 0.7\n'
          'bias = 1.0\n', "substrate.bias", "bias = 1.0"),
    _case("temperature_zero", _swap("temperature = 4.2", "temperature = 0"), "temperature",
          "temperature = 0"),
    _case("temperature_negative", _swap("temperature = 4.2", "temperature = -4.2"), "temperature",
          "temperature = -4.2"),
    # below the 0.01 K the statistics support (README.md, "Sanity checks")
    _case("temperature_ultra_low", _swap("temperature = 4.2", "temperature = 1e-4"), "temperature",
          "temperature = 1e-4"),
    _case("temperature_missing", _swap("temperature = 4.2\n", ""), "temperature"),
    _case("overlapping_regions", _swap("regions = [[10.0, 150.0]]",
                                       "regions = [[10.0, 60.0], [50.0, 150.0]]"),
          "quantum.regions[1]", "regions ="),
    _case("region_beyond_stack", _swap("[[10.0, 150.0]]", "[[10.0, 200.0]]"), "quantum.regions[0]",
          "regions ="),
    _case("states_zero", _swap("states = 4", "states = 0"), "quantum.states", "states = 0"),
    _case("states_not_integer", _swap("states = 4", "states = 2.5"), "quantum.states",
          "states = 2.5"),
    _case("unknown_solver_method", GOOD_DECK + '\n[solver]\nmethod = "newton"\n', "solver.method",
          'method = "newton"'),
    _case("unknown_carrier", GOOD_DECK + '\n[physics]\ncarriers = ["electron", "positron"]\n',
          "physics.carriers", "carriers ="),
    _case("unknown_exchange_correlation",
          GOOD_DECK + '\n[physics]\nexchange_correlation = "gga"\n',
          "physics.exchange_correlation", 'exchange_correlation = "gga"'),
    _case("nonparabolicity_not_boolean", GOOD_DECK + '\n[physics]\nnonparabolicity = "yes"\n',
          "physics.nonparabolicity", 'nonparabolicity = "yes"'),
    _case("unknown_hole_model", GOOD_DECK + '\n[physics]\nhole_model = "kp8"\n',
          "physics.hole_model", 'hole_model = "kp8"'),
    _case("mesh_fine_above_step", GOOD_DECK + "\n[mesh]\nstep = 0.5\nfine = 1.0\n", "mesh.fine",
          "fine = 1.0"),
    _case("negative_doping", _swap("sheet_donors = 4e12", "sheet_donors = -4e12"),
          "layer[1].sheet_donors", "sheet_donors = -4e12"),
    _case("doping_in_wrong_units", _swap("thickness = 100.0", "thickness = 100.0\ndonors = 1e24"),
          "layer[2].donors", "donors = 1e24"),
    _case("local_material_negative_mass",
          GOOD_DECK + '\n[material.MyBarrier]\nbase = "AlGaAs"\nx = 0.3\nelectron_mass = -0.09\n',
          "material.MyBarrier.electron_mass", "electron_mass = -0.09"),
    _case("local_material_unknown_param",
          GOOD_DECK + '\n[material.MyBarrier]\nbase = "AlGaAs"\nelectron_mas = 0.09\n',
          "material.MyBarrier.electron_mas", "electron_mas = 0.09"),
    _case("local_material_shadows_library",
          GOOD_DECK + '\n[material.GaAs]\nelectron_mass = 0.07\n', "material.GaAs",
          "[material.GaAs]"),
    # strained stacks and the other III-V families
    _case("unknown_substrate_material", GOOD_DECK + '\n[substrate]\nmaterial = "GaAz"\n',
          "substrate.material", 'material = "GaAz"'),
    _case("substrate_lattice_constant_with_material",
          GOOD_DECK + '\n[substrate]\nmaterial = "GaAs"\nlattice_constant = 0.565\n',
          "substrate.lattice_constant", "lattice_constant = 0.565"),
    _case("substrate_x_without_material", GOOD_DECK + '\n[substrate]\nx = 0.2\n', "substrate.x",
          "x = 0.2"),
    _case("substrate_alloy_without_x", GOOD_DECK + '\n[substrate]\nmaterial = "InGaAs"\n',
          "substrate.x", "[substrate]"),
    _case("y_on_a_ternary", _swap("x = 0.3", "x = 0.3\ny = 0.2"), "layer[1].y", "y = 0.2"),
    _case("quaternary_without_y", _swap('material = "AlGaAs"', 'material = "InGaAsP"'),
          "layer[1].y", "[[layer]]", 2),
    _case("lattice_matched_on_a_binary",
          _swap('thickness = 10.0', 'thickness = 10.0\nlattice_matched = "InP"'),
          "layer[0].lattice_matched", 'lattice_matched = "InP"'),
    _case("lattice_matched_unknown_target",
          _swap('x = 0.3', 'lattice_matched = "GaAz"'), "layer[1].lattice_matched",
          'lattice_matched = "GaAz"'),
    _case("lattice_matched_impossible",
          _swap('x = 0.3', 'lattice_matched = "InP"'), "layer[1].lattice_matched",
          'lattice_matched = "InP"'),
    _case("relaxed_not_boolean", _swap("thickness = 100.0", "thickness = 100.0\nrelaxed = 1"),
          "layer[2].relaxed", "relaxed = 1"),
    # P and As levels are given for the group-IV hosts only (Si, Ge, SiGe)
    _case("phosphorus_in_algaas", _swap("sheet_donors = 4e12", 'sheet_donors = 4e12\ndonor_species = "P"'),
          "layer[1].donor_species", 'donor_species = "P"'),
    _case("quantum_valleys_without_valleys", GOOD_DECK + "\n[physics]\nquantum_valleys = true\n",
          "physics.quantum_valleys", "quantum_valleys = true"),
    _case("quantum_valleys_not_boolean", GOOD_DECK + "\n[physics]\nquantum_valleys = 1\n",
          "physics.quantum_valleys", "quantum_valleys = 1"),
]
