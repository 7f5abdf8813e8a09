"""Deck reader: validation, located one-line errors, overrides, canonical TOML.

Check values here are the deck contract itself (README.md "Deck reference" and selfcon/input/deck.py's
docstring): "analytic" in the sense that they follow from the rules, no physics data.
"""
import dataclasses
import math
import pathlib
import tomllib

import pytest

from selfcon.input.deck import (KEYS, Deck, DeckError, deck_reference, dumps_toml, load_deck,
                          parse_override)


@pytest.fixture
def deck(good_deck_text):
    return load_deck(good_deck_text)


# --- a good deck -------------------------------------------------------------

def test_good_deck_values_and_defaults(good_deck_text, deck):
    assert isinstance(deck, Deck)
    assert deck.title == "test HEMT"
    assert deck.temperature == 4.2
    assert (deck.surface.kind, deck.surface.barrier, deck.surface.bias) == ("schottky", 0.8, 0.0)
    # [substrate] left out -> ohmic (documented default of selfcon/deck.py)
    assert (deck.substrate.kind, deck.substrate.barrier) == ("ohmic", None)
    assert [l.name for l in deck.layers] == ["cap", "barrier", "channel"]
    assert [l.index for l in deck.layers] == [0, 1, 2]
    b = deck.layer("barrier")
    assert (b.material, b.x_top, b.x_bottom, b.thickness, b.sheet_donors) == \
        ("AlGaAs", 0.3, 0.3, 40.0, 4e12)
    assert deck.layers[0].x_top is None and deck.layers[0].donors == 0.0
    assert deck.total_thickness == 150.0          # 10 + 40 + 100 nm
    assert deck.layer_bounds() == ((0.0, 10.0), (10.0, 50.0), (50.0, 150.0))
    assert deck.physics.carriers == ("electron", "heavy_hole", "light_hole")
    assert deck.physics.ionization == "thermal"
    assert deck.quantum.regions == ((10.0, 150.0),) and deck.quantum.states == 4
    assert (deck.mesh.step, deck.mesh.fine, deck.mesh.bulk_step, deck.mesh.growth) == \
        (0.5, None, None, None)
    s = deck.solver
    assert (s.method, s.tolerance, s.max_iterations, s.charge_tolerance, s.mixing, s.history) == \
        ("predictor-corrector", 1e-6, 100, 1e-6, None, 6)
    assert deck.text == good_deck_text and deck.path is None
    # the [[layer]] header lines of good_deck_text (counted by hand: lines 8, 13, 20)
    assert [l.line for l in deck.layers] == [8, 13, 20]


def test_deck_is_immutable(good_deck_text, deck):
    with pytest.raises(dataclasses.FrozenInstanceError):
        deck.temperature = 300.0
    with pytest.raises(dataclasses.FrozenInstanceError):
        deck.layers[0].thickness = 1.0
    assert isinstance(deck.layers, tuple)
    assert hash(deck) == hash(load_deck(good_deck_text))


def test_round_trip_and_hash(deck):
    text = deck.to_toml()
    again = load_deck(text)
    assert again == deck
    assert again.to_toml() == text                    # canonical form is a fixed point
    assert again.hash() == deck.hash()
    assert len(deck.hash()) == 64 and int(deck.hash(), 16) >= 0
    # a different deck hashes differently
    assert deck.with_overrides(["temperature=4.3"]).hash() != deck.hash()


def test_round_trip_with_everything(good_deck_text):
    text = good_deck_text.replace('x = 0.3', 'x = [0.1, 0.3]') + '''
[substrate]
contact = "pinned"
barrier = 0.7

[material.MyBarrier]
base = "AlGaAs"
x = 0.33
electron_mass = 0.0919
band_gap = 1.9

[physics]
carriers = ["electron"]
ionization = "full"

[mesh]
step = 0.3
fine = 0.1
bulk_step = 5
growth = 1.2

[solver]
method = "anderson"
mixing = 0.3
history = 4
'''
    d = load_deck(text.replace('"AlGaAs"\nx = [0.1', '"MyBarrier"\nx = [0.1'))
    assert d.layers[1].material == "MyBarrier"
    assert (d.layers[1].x_top, d.layers[1].x_bottom) == (0.1, 0.3) and d.layers[1].graded
    assert d.material("MyBarrier").params.get("electron_mass") == 0.0919
    assert d.material("MyBarrier").params.as_dict() == {"band_gap": 1.9, "electron_mass": 0.0919}
    assert d.material("GaAs") is None                 # library materials are not deck-local
    assert d.mesh.bulk_step == 5.0 and isinstance(d.mesh.bulk_step, float)
    again = load_deck(d.to_toml())
    assert again == d and again.hash() == d.hash()


def test_classical_and_default_regions(good_deck_text):
    d = load_deck(good_deck_text.replace("regions = [[10.0, 150.0]]", "regions = []"))
    assert d.quantum.regions == ()
    assert load_deck(d.to_toml()).quantum.regions == ()
    d = load_deck(good_deck_text.replace("regions = [[10.0, 150.0]]\n", ""))
    assert d.quantum.regions is None                  # None = the whole stack
    assert load_deck(d.to_toml()).quantum.regions is None


def test_ints_accepted_for_floats_and_unnamed_layers(good_deck_text):
    d = load_deck(good_deck_text.replace("thickness = 40.0", "thickness = 40")
                  .replace('name = "channel"\n', ""))
    assert d.layers[1].thickness == 40.0 and isinstance(d.layers[1].thickness, float)
    assert d.layers[2].name == "layer2"               # default name layer<index>
    assert d.layer("layer2") is d.layers[2]


def test_load_from_path(good_deck_text, tmp_path):
    p = tmp_path / "hemt.toml"
    p.write_text(good_deck_text)
    for arg in (p, str(p)):
        d = load_deck(arg)
        assert d.path == str(p) and d == load_deck(good_deck_text)
    with pytest.raises(DeckError) as e:
        load_deck(str(tmp_path / "missing.toml"))
    assert "missing.toml" in str(e.value) and e.value.file == str(tmp_path / "missing.toml")
    with pytest.raises(DeckError):
        load_deck(pathlib.Path(tmp_path))             # a directory


def test_errors_name_the_file(good_deck_text, tmp_path):
    p = tmp_path / "bad.toml"
    p.write_text(good_deck_text.replace("thickness = 10.0", "thickness = 0.0"))
    with pytest.raises(DeckError) as e:
        load_deck(p)
    assert str(e.value).startswith(f"{p}:11: layer[0].thickness: ")


# --- bad decks -----------------------------------------------------------------

def test_bad_deck(bad_deck):
    _, text, key, line = bad_deck
    with pytest.raises(DeckError) as e:
        load_deck(text)
    msg = str(e.value)
    assert "\n" not in msg
    assert msg.startswith("<deck>")
    if key is None:
        assert e.value.key is None and "TOML syntax" in msg
    else:
        assert key in e.value.key and key in msg
    assert e.value.line == line
    if line is not None:
        assert msg.startswith(f"<deck>:{line}: ")


def test_bad_deck_list_is_broad(bad_deck_table):
    BAD_DECKS = bad_deck_table
    assert len({row[0] for row in BAD_DECKS}) == len(BAD_DECKS) >= 15


@pytest.mark.parametrize("old,new,hint", [
    ("thickness = 40.0", "thicknes = 40.0", "did you mean 'thickness'?"),
    ('material = "AlGaAs"', 'material = "AlGaAS"', "did you mean 'AlGaAs'?"),
    ('material = "AlGaAs"', 'material = "algaas"', "did you mean 'AlGaAs'?"),   # case-insensitive
    ("temperature = 4.2", "temprature = 4.2", "did you mean 'temperature'?"),
    ('contact = "schottky"', 'contact = "Schottky"', "did you mean 'schottky'?"),
])
def test_did_you_mean(good_deck_text, old, new, hint):
    with pytest.raises(DeckError) as e:
        load_deck(good_deck_text.replace(old, new))
    assert hint in str(e.value)


def test_unknown_key_lists_allowed_keys(good_deck_text):
    with pytest.raises(DeckError) as e:
        load_deck(good_deck_text.replace("thickness = 40.0", "thicknes = 40.0"))
    assert "thickness" in e.value.allowed and "sheet_donors" in e.value.allowed
    assert "(allowed: name, material, x, thickness," in str(e.value)


def test_top_level_key_after_a_table_gets_a_hint(good_deck_text):
    with pytest.raises(DeckError) as e:
        load_deck(good_deck_text + "title = \"late\"\n")
    assert e.value.key == "quantum.title" and "top-level key" in str(e.value)


def test_error_messages_carry_units(good_deck_text):
    cases = {"thickness = 10.0": ("thickness = -1", ">= 0.1 nm"),   # half a monolayer, issue 12
             "temperature = 4.2": ("temperature = 2000", "[0.01, 1000] K"),
             "sheet_donors = 4e12": ("sheet_donors = -1", "cm^-2"),
             'thickness = 40.0': ('thickness = "x"', "number (nm)")}
    for old, (new, unit) in cases.items():
        with pytest.raises(DeckError) as e:
            load_deck(good_deck_text.replace(old, new))
        assert unit in str(e.value), str(e.value)


def test_non_finite_numbers_refused(good_deck_text):
    with pytest.raises(DeckError) as e:
        load_deck(good_deck_text.replace("thickness = 40.0", "thickness = inf"))
    assert "finite" in str(e.value) and e.value.line == 17


# --- overrides -------------------------------------------------------------------

def test_parse_override():
    assert parse_override("layer.spacer.thickness=12") == ("layer.spacer.thickness", 12)
    assert parse_override(" surface.bias = -0.2 ") == ("surface.bias", -0.2)
    assert parse_override("surface.contact=ohmic") == ("surface.contact", "ohmic")  # bare string
    assert parse_override('title="a = b"') == ("title", "a = b")
    assert parse_override("layer.2.x=[0, 0.3]") == ("layer.2.x", [0, 0.3])
    assert parse_override("physics.carriers=[\"electron\"]") == ("physics.carriers", ["electron"])
    assert parse_override("title=My run") == ("title", "My run")
    for bad in ("thickness", "=3", "a..b=1", "layer.x=", "title=[1, 2", 'title="open'):
        with pytest.raises(DeckError) as e:
            parse_override(bad)
        assert "\n" not in str(e.value)


def test_overrides_by_name_index_and_nested(good_deck_text, deck):
    d = deck.with_overrides(["layer.barrier.thickness=50", "layer.1.x=[0, 0.3]",
                             "surface.bias=-0.2", "temperature=300", "solver.method=anderson",
                             "physics.carriers=[\"electron\"]"])
    assert d.layer("barrier").thickness == 50.0
    assert (d.layers[1].x_top, d.layers[1].x_bottom) == (0.0, 0.3)   # (x on the GaAs cap: refused)
    assert d.surface.bias == -0.2 and d.temperature == 300.0
    assert d.solver.method == "anderson" and d.physics.carriers == ("electron",)
    # the original is untouched, the new text is the canonical one
    assert deck.layer("barrier").thickness == 40.0 and deck.text == good_deck_text
    assert d.text == d.to_toml() and load_deck(d.text) == d
    # dict form, chained, and via load_deck
    e = d.with_overrides({"layer.2.donors": 1e15, "mesh.step": 0.25})
    assert e.layers[2].donors == 1e15 and e.mesh.step == 0.25 and e.layer("barrier").thickness == 50
    assert load_deck(good_deck_text, overrides=["layer.barrier.thickness=50", "layer.1.x=[0, 0.3]",
                                           "surface.bias=-0.2", "temperature=300",
                                           "solver.method=anderson",
                                           "physics.carriers=[\"electron\"]"]) == d


def test_override_material_creates_key(good_deck_text):
    d = load_deck(good_deck_text + '\n[material.MyBarrier]\nbase = "AlGaAs"\nx = 0.3\n')
    e = d.with_overrides(["material.MyBarrier.electron_mass=0.09"])
    assert e.material("MyBarrier").params.get("electron_mass") == 0.09
    assert d.material("MyBarrier").params.get("electron_mass") is None


def test_override_can_fix_an_incomplete_deck(good_deck_text):
    text = good_deck_text.replace("temperature = 4.2\n", "")
    assert load_deck(text, overrides=["temperature=77"]).temperature == 77.0


def test_override_none_removes_a_key(deck):
    d = deck.with_overrides({"surface.contact": "ohmic", "surface.barrier": None})
    assert d.surface.kind == "ohmic" and d.surface.barrier is None


@pytest.mark.parametrize("item,key,allowed", [
    ("layer.spacr.thickness=1", "layer.spacr.thickness", ("cap", "barrier", "channel")),
    ("layer.3.thickness=1", "layer.3.thickness", ("0", "1", "2")),
    ("layer.cap.thicknes=1", "layer.cap.thicknes", ("name", "material", "x", "thickness")),
    ("surface.bais=1", "surface.bais", ("contact", "barrier", "bias")),
    ("surfac.bias=1", "surfac.bias", ("surface", "substrate", "layer", "temperature")),
    ("material.Nope.band_gap=1", "material.Nope.band_gap", ()),
    ("temperature.value=1", "temperature.value", ()),
    ("layer.cap=1", "layer.cap", ("cap", "barrier", "channel")),
])
def test_bad_override_path_lists_choices(deck, item, key, allowed):
    with pytest.raises(DeckError) as e:
        deck.with_overrides([item])
    assert e.value.key == key and "\n" not in str(e.value)
    assert set(allowed) <= set(e.value.allowed)
    if allowed:
        assert f"{allowed[0]}" in str(e.value).partition("(allowed: ")[2]


def test_bad_override_value_is_not_located_in_the_file(deck):
    with pytest.raises(DeckError) as e:
        deck.with_overrides(["layer.cap.thickness=-3"])
    assert e.value.key == "layer[0].thickness" and e.value.line is None
    assert "override" in str(e.value)
    with pytest.raises(DeckError) as e:
        deck.with_overrides(["temperature=hot"])
    assert "must be a number (K)" in str(e.value)


# --- lookups and helpers for other modules --------------------------------------------

def test_layer_lookup_errors(deck):
    assert deck.layer(1) is deck.layer("barrier")
    with pytest.raises(DeckError) as e:
        deck.layer("chanel")
    assert "did you mean 'channel'?" in str(e.value)
    with pytest.raises(DeckError):
        deck.layer(3)


def test_line_of_and_error(deck):
    assert deck.line_of("layer[1].x") == 16           # good_deck_text line 16: x = 0.3
    assert deck.line_of("quantum.regions[0]") == 26
    assert deck.line_of("surface") == 4
    assert deck.line_of("temperature") == 2
    assert deck.line_of("layer[2].donors") == 20      # absent key -> its [[layer]] header
    err = deck.error("layer[1].x", "AlGaAs needs x")
    assert isinstance(err, DeckError) and str(err) == "<deck>:16: layer[1].x: AlGaAs needs x"


def test_material_def_location(good_deck_text):
    d = load_deck(good_deck_text + '\n[material.MyBarrier]\nbase = "AlGaAs"\n')
    m = d.material("MyBarrier")
    assert (m.file, m.line) == ("<deck>", 29)         # good_deck_text has 27 lines + blank + header


def test_deck_reference_documents_every_key():
    rows = deck_reference()
    paths = {r[0] for r in rows}
    assert "same keys as surface" in next(r[4] for r in rows if r[0] == "substrate")
    for table, keys in KEYS.items():
        if table == "substrate":
            continue
        for k in keys:
            p = k if table == "" else (f"material.NAME.{k}" if table == "material"
                                       else f"{table}.{k}")
            assert p in paths, p
    for path, type_, unit, default, doc in rows:
        assert type_ and unit and default is not None and doc, path
    row = {r[0]: r for r in rows}
    assert row["layer.thickness"][2] == "nm" and row["layer.donors"][2] == "cm^-3"
    assert row["layer.sheet_donors"][2] == "cm^-2" and row["temperature"][2] == "K"


def test_dumps_toml_round_trips_awkward_values():
    data = {"s": 'quote " back \\ tab \t nl \n bell \x07 é', "i": -3, "f": 0.1 + 0.2,
            "tiny": 1e-300, "neg0": -0.0, "big": 1e22, "b": True, "nested": [[1.5, 2.0], []],
            "t": {"a": 1, "sub": {"b": "c"}}, "arr": [{"k": 1}, {"k": 2, "inner": {"z": 0.5}}],
            "weird key": 1}
    back = tomllib.loads(dumps_toml(data))
    assert back == data
    assert math.copysign(1.0, back["neg0"]) == -1.0
    assert dumps_toml(data) == dumps_toml(back)


# --- [[channel]] tables ---------------------------------------------------------

@pytest.fixture
def with_channels(good_deck_text):
    return lambda text: load_deck(good_deck_text + "\n" + text)


def test_channel_tables_names_indices_and_ranges(good_deck_text, with_channels):
    d = with_channels('[[channel]]\nname = "2deg"\ncarrier = "electron"\nlayers = ["channel"]\n'
                       '[[channel]]\nname = "upper"\ncarrier = "hole"\nlayers = ["0:1"]\n'
                       '[[channel]]\nname = "cap_e"\ncarrier = "electron"\nlayers = [0]\n')
    assert [(c.name, c.carrier, c.layers) for c in d.channels] == [
        ("2deg", "electron", (2,)), ("upper", "hole", (0, 1)), ("cap_e", "electron", (0,))]
    # GOOD_DECK has 27 lines, then a blank line: the first [[channel]] header is line 29
    assert d.channels[0].line == 29
    again = load_deck(d.to_toml())                  # canonical text keeps them (by layer name)
    assert again.channels == d.channels
    assert load_deck(good_deck_text).channels == ()


@pytest.mark.parametrize("body, key, words", [
    ('name = "a"\ncarrier = "electrons"\nlayers = [2]', "channel[0].carrier", "did you mean 'electron'"),
    ('name = "a"\ncarrier = "hole"\nlayers = ["chanel"]', "channel[0].layers", "did you mean 'channel'"),
    ('name = "a"\ncarrier = "hole"\nlayers = [3]', "channel[0].layers", "no layer 3"),
    ('name = "a"\ncarrier = "hole"\nlayers = ["2:0"]', "channel[0].layers", "runs upwards"),
    ('name = "a"\ncarrier = "hole"\nlayers = [0, 2]', "channel[0].layers", "contiguous"),
    ('name = "a"\ncarrier = "hole"\nlayers = []', "channel[0].layers", "non-empty"),
    ('name = "a"\ncarrier = "hole"', "channel[0].layers", "is required"),
    ('name = "electron2"\ncarrier = "hole"\nlayers = [1]', "channel[0].name", "reserved"),
    ('name = "a b"\ncarrier = "hole"\nlayers = [1]', "channel[0].name", "letters, digits"),
    ('name = "a"\ncarrier = "hole"\nlayer = [1]', "channel[0].layer", "did you mean 'layers'"),
])
def test_bad_channel_tables(body, key, words, with_channels):
    with pytest.raises(DeckError) as e:
        with_channels("[[channel]]\n" + body + "\n")
    assert e.value.key == key and words in str(e.value)
    assert e.value.line is not None                  # located in the deck file


def test_channels_of_one_carrier_may_not_share_a_layer(with_channels):
    with pytest.raises(DeckError, match="overlaps channel 'a'"):
        with_channels('[[channel]]\nname = "a"\ncarrier = "electron"\nlayers = ["1:2"]\n'
                       '[[channel]]\nname = "b"\ncarrier = "electron"\nlayers = ["channel"]\n')
    d = with_channels('[[channel]]\nname = "a"\ncarrier = "electron"\nlayers = ["1:2"]\n'
                       '[[channel]]\nname = "b"\ncarrier = "hole"\nlayers = ["channel"]\n')
    assert len(d.channels) == 2                      # another carrier may
    with pytest.raises(DeckError, match="duplicate channel name"):
        with_channels('[[channel]]\nname = "a"\ncarrier = "electron"\nlayers = [1]\n'
                       '[[channel]]\nname = "a"\ncarrier = "hole"\nlayers = [2]\n')


def test_channel_tables_are_not_overridden(good_deck_text):
    with pytest.raises(DeckError, match="cannot be set by an override"):
        load_deck(good_deck_text, ["channel.a.layers=[1]"])
