"""Study files: parsing, checks with the offending key, expansion into decks."""
import json
import math
import textwrap

import pytest

from selfcon.batch.study import base_value, expand, load_study
from selfcon.input.deck import load_deck
from selfcon.errors import StudyError

BASE = """
title = "study test base"
temperature = 77.0
[surface]
contact = "schottky"
barrier = 0.7
bias = 0.0
[substrate]
contact = "ohmic"
[[layer]]
name = "barrier"
material = "AlGaAs"
x = 0.3
thickness = 30.0
[[layer]]
name = "doping"
material = "AlGaAs"
x = 0.3
thickness = 2.0
sheet_donors = 2e12
[[layer]]
name = "spacer"
material = "AlGaAs"
x = 0.3
thickness = 15.0
[[layer]]
name = "channel"
material = "GaAs"
thickness = 100.0
acceptors = 1e15
[quantum]
states = 3
[mesh]
step = 2.0
"""


@pytest.fixture
def folder(tmp_path):
    (tmp_path / "base.toml").write_text(BASE)
    return tmp_path


def write(folder, text, name="s.toml"):
    p = folder / name
    p.write_text(textwrap.dedent(text))
    return p


def test_grid_expands_every_combination_in_order(folder):
    p = write(folder, """
        deck = "base.toml"
        [[vary]]
        path = "layer.spacer.thickness"
        values = [10.0, 15.0, 20.0]
        [[vary]]
        path = "surface.bias"
        from = -0.3
        to = 0.0
        points = 4
    """)
    jobs = expand(load_study(p))
    assert len(jobs) == 12                                   # 3 x 4 (analytic: product of the list lengths)
    assert jobs[0].values == {"layer.spacer.thickness": 10.0, "surface.bias": -0.3}
    assert jobs[5].values == {"layer.spacer.thickness": 15.0, "surface.bias": -0.2}   # row-major, last axis fastest
    assert len({j.deck_hash for j in jobs}) == 12
    d = load_deck(jobs[5].deck_text)
    assert d.layer("spacer").thickness == 15.0
    assert math.isclose(d.surface.bias, -0.2)


def test_log_range_and_zip(folder):
    p = write(folder, """
        deck = "base.toml"
        mode = "zip"
        [[vary]]
        path = "layer.doping.sheet_donors"
        from = 1e11
        to = 1e13
        points = 3
        scale = "log"
        [[vary]]
        path = "temperature"
        values = [4.0, 77.0, 300.0]
    """)
    jobs = expand(load_study(p))
    # analytic: log-spaced 1e11, 1e12, 1e13 paired element by element with the temperatures
    assert [j.values["layer.doping.sheet_donors"] for j in jobs] == [1e11, 1e12, 1e13]
    assert [j.values["temperature"] for j in jobs] == [4.0, 77.0, 300.0]


def test_fixed_overrides_apply_to_every_job(folder):
    p = write(folder, """
        deck = "base.toml"
        [fixed]
        "solver.max_iterations" = 7
        [[vary]]
        path = "layer.0.x"
        values = [0.25, 0.3]
    """)
    jobs = expand(load_study(p))
    assert all(load_deck(j.deck_text).solver.max_iterations == 7 for j in jobs)
    assert load_deck(jobs[0].deck_text).layers[0].x_top == 0.25


def test_sample_mode_is_reproducible_and_centred_on_base(folder):
    text = """
        deck = "base.toml"
        mode = "sample"
        samples = 400
        seed = 11
        [[vary]]
        path = "layer.spacer.thickness"
        distribution = "normal"
        relative_sigma = 0.1
        [[vary]]
        path = "layer.barrier.x"
        distribution = "uniform"
        low = 0.28
        high = 0.32
    """
    a = expand(load_study(write(folder, text)))
    b = expand(load_study(write(folder, text, "t.toml")))
    assert [j.values for j in a] == [j.values for j in b]
    assert [j.deck_hash for j in a] == [j.deck_hash for j in b]
    t = [j.values["layer.spacer.thickness"] for j in a]
    mean = sum(t) / len(t)
    sd = math.sqrt(sum((x - mean) ** 2 for x in t) / (len(t) - 1))
    # statistics of 400 normal draws (common practice): mean within ~4 standard errors, sd within 15 %
    assert abs(mean - 15.0) < 4 * 1.5 / math.sqrt(400)
    assert 1.5 * 0.85 < sd < 1.5 * 1.15
    x = [j.values["layer.barrier.x"] for j in a]
    assert 0.28 <= min(x) and max(x) <= 0.32
    c = expand(load_study(write(folder, text.replace("seed = 11", "seed = 12"), "u.toml")))
    assert [j.values for j in c] != [j.values for j in a]


def test_sample_relative_half_width_and_absolute_sigma(folder):
    p = write(folder, """
        deck = "base.toml"
        mode = "sample"
        samples = 50
        seed = 1
        [[vary]]
        path = "layer.doping.sheet_donors"
        distribution = "uniform"
        relative_half_width = 0.1
        [[vary]]
        path = "temperature"
        distribution = "normal"
        sigma = 0.5
    """)
    jobs = expand(load_study(p))
    nd = [j.values["layer.doping.sheet_donors"] for j in jobs]
    assert 1.8e12 <= min(nd) and max(nd) <= 2.2e12          # analytic: 2e12 +- 10 %
    assert all(abs(j.values["temperature"] - 77.0) < 5 * 0.5 for j in jobs)   # 5 sigma (common practice)


def test_continuation_neighbours_follow_the_axis(folder):
    p = write(folder, """
        deck = "base.toml"
        continuation = true
        along = "surface.bias"
        [[vary]]
        path = "surface.bias"
        values = [0.0, -0.1, -0.2]
        [[vary]]
        path = "layer.spacer.thickness"
        values = [10.0, 20.0]
    """)
    jobs = expand(load_study(p))
    for j in jobs:
        if j.values["surface.bias"] == 0.0:
            assert j.neighbour is None
        else:
            nb = jobs[j.neighbour].values
            assert nb["layer.spacer.thickness"] == j.values["layer.spacer.thickness"]
            assert round(nb["surface.bias"] - j.values["surface.bias"], 9) == 0.1


def test_rejected_value_becomes_a_failed_job_not_a_study_error(folder):
    p = write(folder, """
        deck = "base.toml"
        [[vary]]
        path = "layer.spacer.thickness"
        values = [10.0, -5.0]
    """)
    jobs = expand(load_study(p))
    assert jobs[0].error is None
    assert jobs[1].error and "thickness" in jobs[1].error


def test_base_value_lookup():
    data = {"temperature": 4.0, "layer": [{"name": "a", "thickness": 3.0}], "surface": {"bias": 0.1}}
    assert base_value(data, "layer.a.thickness") == 3.0
    assert base_value(data, "layer.0.thickness") == 3.0
    assert base_value(data, "surface.bias") == 0.1
    with pytest.raises(KeyError):
        base_value(data, "layer.b.thickness")


BAD = [
    ('deck = "base.toml"\nmode = "cube"\n[[vary]]\npath = "temperature"\nvalues = [1.0]\n', "mode", "grid"),
    ('deck = "base.toml"\n', "vary", None),
    ('mode = "grid"\n[[vary]]\npath = "temperature"\nvalues = [1.0]\n', "deck", None),
    ('deck = "base.toml"\n[[vary]]\npath = "temperature"\nvalues = [4.0]\n[[vary]]\npath = "surface.bias"\n'
     'values = "0.1"\n', "vary[1].values", None),
    ('deck = "base.toml"\n[[vary]]\npath = "temperature"\nfrom = 4.0\nto = 77.0\n', "vary[0].points", None),
    ('deck = "base.toml"\n[[vary]]\npath = "temperature"\nvalues = [4.0]\nsigma = 1.0\n', "vary[0].sigma",
     "values"),
    ('deck = "base.toml"\n[[vary]]\npath = "temperature"\nfrom = 0.0\nto = 7.0\npoints = 3\nscale = "log"\n',
     "vary[0].from", None),
    ('deck = "base.toml"\n[[vary]]\npath = "temperature"\nfrom = 1.0\nto = 7.0\npoints = 3\nscale = "cubic"\n',
     "vary[0].scale", "log"),
    ('deck = "base.toml"\nmode = "sample"\nsamples = 3\n[[vary]]\npath = "temperature"\ndistribution = "normal"\n'
     'sigma = 1.0\n', "seed", None),
    ('deck = "base.toml"\nmode = "sample"\nsamples = 3\nseed = 1\n[[vary]]\npath = "temperature"\n'
     'distribution = "poisson"\n', "vary[0].distribution", "normal"),
    ('deck = "base.toml"\nmode = "zip"\n[[vary]]\npath = "temperature"\nvalues = [4.0, 5.0]\n[[vary]]\n'
     'path = "surface.bias"\nvalues = [0.0]\n', "vary", None),
    ('deck = "base.toml"\n[[vary]]\npath = "temperature"\nvalues = [4.0, 4.0]\n', "vary[0].values", None),
    ('deck = "base.toml"\nsurprise = 1\n[[vary]]\npath = "temperature"\nvalues = [4.0]\n', "surprise", None),
    ('deck = "base.toml"\ncontinuation = true\nalong = "temperature"\n[[vary]]\npath = "surface.bias"\n'
     'values = [0.0]\n', "along", "surface.bias"),
]


@pytest.mark.parametrize("text,key,allowed", BAD)
def test_invalid_study_names_file_and_key(folder, text, key, allowed):
    p = write(folder, text)
    with pytest.raises(StudyError) as err:
        expand(load_study(p))
    assert err.value.key == key
    assert err.value.file == str(p)
    if allowed:
        assert allowed in str(err.value.allowed)


@pytest.mark.parametrize("path", ["layer.nope.thickness", "layer.spacer.thicknes", "solver.speed", "material.X.x",
                                  "layer.9.x"])
def test_bad_deck_path_is_caught_at_expansion(folder, path):
    p = write(folder, f'deck = "base.toml"\n[[vary]]\npath = "{path}"\nvalues = [1.0, 2.0]\n')
    with pytest.raises(StudyError) as err:
        expand(load_study(p))
    assert err.value.key == "vary[0].path"
    assert path in str(err.value)


def test_missing_base_deck(folder):
    p = write(folder, 'deck = "nothere.toml"\n[[vary]]\npath = "temperature"\nvalues = [1.0]\n')
    with pytest.raises(StudyError) as err:
        expand(load_study(p))
    assert err.value.key == "deck"


def test_toml_syntax_error_names_file(folder):
    p = write(folder, 'deck = "base.toml\n')
    with pytest.raises(StudyError) as err:
        load_study(p)
    assert str(p) in str(err.value)


def test_varied_values_are_json_round_trippable(folder):
    p = write(folder, 'deck = "base.toml"\n[[vary]]\npath = "surface.contact"\nvalues = ["schottky", "pinned"]\n')
    jobs = expand(load_study(p))
    assert [json.loads(json.dumps(j.values))["surface.contact"] for j in jobs] == ["schottky", "pinned"]
