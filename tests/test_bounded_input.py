"""Bounded work on any input: the size and nesting limits of deck and study files, the mesh
node guard of `check` and `run`, and the line locator that stays linear in the deck's size.

Every hostile input exits 2 with one line naming the file, the key or limit and what is
allowed, and leaves nothing behind.  Nothing here is timed: the locator's linearity is
asserted by counting passes over the text (its speed is the "decks" row of tools/bench.py).
"""
from __future__ import annotations

import os

import numpy as np
import pytest

from selfcon.errors import DeckError, StudyError
from selfcon.input import deck as dk

HEAD = ['title = "many layers"', "temperature = 300", "[surface]", 'contact = "schottky"', "barrier = 0.8"]


def many_layers(n):
    """A deck of ``n`` 1 nm GaAs layers; layer i's ``[[layer]]`` header is on line 6 + 5 i."""
    lines = list(HEAD)
    for i in range(n):
        lines += ["[[layer]]", f'name = "l{i}"', 'material = "GaAs"', "thickness = 1.0", "donors = 1e16"]
    return "\n".join(lines) + "\n"


# --------------------------------------------------------------------------- size

@pytest.mark.skipif(not os.path.exists("/dev/zero"), reason="needs the zero device")
def test_zero_device_as_deck_is_refused_at_the_limit(run_cli, tmp_path):
    out = tmp_path / "zero.h5"
    before = sorted(tmp_path.iterdir())
    for cmd in (("check", "/dev/zero"), ("run", "/dev/zero", "-o", out)):
        code, stdout, err = run_cli(*cmd)
        assert code == 2, err                       # bad input (README.md, "Command line")
        assert "/dev/zero: larger than 16 MiB: not a deck file" in err   # the limit of MAX_INPUT_BYTES
        assert "Traceback" not in err
    assert sorted(tmp_path.iterdir()) == before     # nothing written
    assert dk.MAX_INPUT_BYTES == 16 * 2 ** 20       # the documented limit (README.md, "Limits")


def test_file_just_over_the_limit_is_refused_and_at_it_is_read(tmp_path):
    # a comment line of the exact size: TOML accepts it, so only the limit can refuse it
    at = tmp_path / "at.toml"
    at.write_bytes(b"#" + b"x" * (dk.MAX_INPUT_BYTES - 2) + b"\n")
    assert len(dk.read_input(at)) == dk.MAX_INPUT_BYTES
    over = tmp_path / "over.toml"
    over.write_bytes(b"#" + b"x" * (dk.MAX_INPUT_BYTES - 1) + b"\n")
    with pytest.raises(DeckError, match="larger than 16 MiB"):
        dk.read_input(over)
    with pytest.raises(StudyError, match="larger than 16 MiB: not a study file"):
        dk.read_input(over, what="study", error=StudyError)


@pytest.mark.skipif(not os.path.exists("/dev/zero"), reason="needs the zero device")
def test_zero_device_as_study_is_refused(run_cli, tmp_path):
    code, _, err = run_cli("batch", "/dev/zero", "--out", tmp_path / "study")
    assert code == 2 and "larger than 16 MiB: not a study file" in err    # README.md, "Limits"
    assert not (tmp_path / "study").exists()


# --------------------------------------------------------------------------- nesting

@pytest.mark.parametrize("text", [
    "a = " + "[" * 20000 + "]" * 20000 + "\n",             # deeper than Python's recursion limit
    "a = " + "{b = " * 3000 + "1" + "}" * 3000 + "\n",     # inline tables
    "a" + ".b" * 40 + " = 1\n",                            # dotted keys: no recursion in the parser
], ids=["arrays", "inline-tables", "dotted-keys"])
def test_deep_nesting_is_input_error_not_recursion(run_cli, tmp_path, text):
    p = tmp_path / "deep.toml"
    p.write_text(text)
    code, _, err = run_cli("check", p)
    assert code == 2, err
    assert f"{p}: nested deeper than 32 levels" in err                  # MAX_NESTING (README.md, "Limits")
    assert "RecursionError" not in err and "Traceback" not in err


def test_nesting_limit_is_exactly_32():
    # depth counts the document itself: "a = [[...]]" with k brackets is k + 1 deep (analytic)
    ok = "a = " + "[" * 31 + "]" * 31 + "\n"
    assert dk._depth(dk.parse_input(ok, "ok.toml")) == 32
    with pytest.raises(DeckError, match="nested deeper than 32"):
        dk.parse_input("a = " + "[" * 32 + "]" * 32 + "\n", "deep.toml")
    study = "deck = 'x.toml'\nv = " + "[" * 40 + "]" * 40 + "\n"
    with pytest.raises(StudyError, match="nested deeper than 32 levels of arrays and tables"):
        dk.parse_input(study, "s.toml", what="study", error=StudyError)


def test_shipped_decks_are_far_inside_the_limits(inputs_dir):
    import glob
    for f in glob.glob(str(inputs_dir / "**" / "*.toml"), recursive=True):
        text = dk.read_input(f)
        assert dk._depth(dk.parse_input(text, f)) <= 4          # the depth a deck needs (deck.py)


# --------------------------------------------------------------------------- line locator

def test_locator_reads_a_10000_layer_deck_once():
    n = 10000
    text = many_layers(n)
    dk._line_index.cache_clear()
    dk._locate.cache_clear()
    lines = [dk._locate(text, f"layer[{i}].thickness") for i in range(n)]
    assert lines == [6 + 5 * i + 3 for i in range(n)]         # the text above: thickness is 3 below the header
    info = dk._line_index.cache_info()
    assert (info.misses, info.hits) == (1, n - 1)             # one pass over the text for all n keys


def test_layer_lines_of_a_large_deck_through_load_deck():
    n = 2000
    deck = dk.load_deck(many_layers(n))
    assert [L.line for L in deck.layers] == [6 + 5 * i for i in range(n)]   # the text above
    err = deck.error("layer[1999].donors", "x")
    assert err.line == 6 + 5 * 1999 + 4


def test_error_in_a_late_layer_names_its_line(run_cli, tmp_path):
    text = many_layers(3000).replace('name = "l2999"\nmaterial = "GaAs"', 'name = "l2999"\nmaterial = "GaAz"')
    p = tmp_path / "late.toml"
    p.write_text(text)
    code, _, err = run_cli("check", p)
    assert code == 2
    assert f"{p}:{6 + 5 * 2999 + 2}: layer[2999].material: unknown material 'GaAz'" in err   # the text above


# --------------------------------------------------------------------------- mesh guard

THICK = """title = "thick"
temperature = 300
[surface]
contact = "schottky"
barrier = 0.8
[[layer]]
name = "bulk"
material = "GaAs"
thickness = 10000.0
donors = 1e16
[mesh]
step = 1e-3
"""


def test_mesh_guard_refuses_ten_million_nodes(run_cli, tmp_path):
    deck = tmp_path / "thick.toml"
    deck.write_text(THICK)
    out = tmp_path / "thick.h5"
    for cmd in (("check", deck), ("run", deck, "-o", out)):
        code, _, err = run_cli(*cmd)
        assert code == 2, err
        # 10 µm at 1e-3 nm steps in the default quantum region (the whole stack): 1e7 cells,
        # plus the few graded ones at both ends (analytic)
        assert f"{deck}:12: mesh.step: the mesh would have 10,000,0" in err
        assert "nodes, about 9 GB of memory, above the limit of 2,000,000 nodes" in err   # 900 B/node (mesh.py)
        assert "--max-nodes" in err
    assert not out.exists()


def test_max_nodes_option(run_cli, inputs_dir):
    deck = inputs_dir / "hemt_4K.toml"
    code, _, err = run_cli("check", deck, "--max-nodes", "100")
    assert code == 2 and "above the limit of 100 nodes" in err
    code, _, err = run_cli("check", deck, "--max-nodes", "nan")
    assert code == 2 and "--max-nodes: must be >= 2" in err
    code, out, err = run_cli("check", deck, "--json")
    assert code == 0, err


def test_node_count_equals_the_mesh_built(inputs_dir):
    import glob
    import selfcon
    from selfcon.model.mesh import count_nodes, graded_count, graded_steps
    from selfcon.model.structure import build_structure, key_nodes
    for f in sorted(glob.glob(str(inputs_dir / "*.toml")))[:6]:
        deck = selfcon.load_deck(f)
        st = build_structure(deck)
        ms = deck.mesh
        n = count_nodes(st.z[key_nodes(st)], st.regions_nm, step=ms.step, fine=ms.fine,
                        bulk_step=ms.bulk_step, growth=ms.growth)
        assert n == st.n_nodes, f                       # the mesh build_mesh made (exact)
    rng = np.random.default_rng(7)
    for _ in range(2000):
        length, fine = 10 ** rng.uniform(-1, 4), 10 ** rng.uniform(-3, 0)
        cap, growth = fine * 10 ** rng.uniform(0, 3), 1 + 10 ** rng.uniform(-3, 0)
        assert graded_count(length, fine, cap, growth) == graded_steps(length, fine, cap, growth).size
