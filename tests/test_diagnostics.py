"""Design warnings: each one triggered by a deck built to trigger it, none on a clean design.

Thresholds are our own choices documented in selfcon/diagnostics.py ("common practice"
for the DX-centre regime of Si in AlGaAs above x ~ 0.2).
"""
from pathlib import Path

import numpy as np
import pytest

import selfcon
from selfcon.output import diagnostics as dg
from selfcon.model.structure import build_structure

DESIGN = Path(__file__).resolve().parents[1] / "inputs" / "design"
HALL = DESIGN / "hall_wafer_77K.toml"
EXAMPLES = Path(__file__).resolve().parents[1] / "inputs"


def solve(deck):
    st = build_structure(deck)
    return selfcon.solve(deck, structure=st), st


@pytest.fixture(scope="module")
def clean():
    return solve(selfcon.load_deck(HALL))


def kinds(result, st):
    return {name for name, fn in dg.CHECKS.items() if fn(result, st)}


def test_clean_design_has_no_warning(clean):
    r, st = clean
    assert r.converged
    assert kinds(r, st) == set()          # our clean demo design (fully depleted doping layer)
    assert r.warnings == []               # the solve ran design_warnings and found nothing
    assert r.summary["warnings"] == []


def test_not_converged():
    deck = selfcon.load_deck(HALL, overrides=["solver.max_iterations=1"])
    r, st = solve(deck)
    assert not r.converged
    w = dg.check_not_converged(r, st)
    assert len(w) == 1 and "not converged" in w[0]
    assert any("not converged" in x for x in r.warnings)


def test_parallel_conduction():
    # 1.5e18 cm^-3 over 25 nm = 3.75e12 cm^-2: more than the channel and surface can take.
    # (Over 40 nm, with the donors metallic above the Mott density (issue 12), the doping
    # layer holds more electrons than the channel and is itself taken as the channel.)
    deck = selfcon.load_deck(HALL, overrides=["layer.doping.donors=1.5e18", "layer.doping.thickness=25"])
    r, st = solve(deck)
    w = dg.check_parallel_conduction(r, st)
    assert len(w) == 1 and "'doping'" in w[0]
    n_dop = r.layers[1]["electron_sheet_density_cm2"]
    assert n_dop > dg.PARALLEL_FRACTION * r.summary["channel_electron_sheet_density_cm2"]
    assert dg.doping_layer_electrons(r, st) == pytest.approx(n_dop)


def test_dx_centre_regime():
    # the gated delta-doped deck at 10 K, zero bias: the sheet is only partly ionised (EF at the donor level)
    r, st = solve(selfcon.load_deck(DESIGN / "gated_delta_10K.toml"))
    w = dg.check_dx_centres(r, st)
    assert len(w) == 1 and "DX" in w[0] and "'doping'" in w[0]
    # the same deck with x = 0.15 is below the DX regime (x <= 0.2, common practice)
    low_x = selfcon.load_deck(DESIGN / "gated_delta_10K.toml",
                              overrides=["layer.doping.x=0.15", "layer.barrier.x=0.15", "layer.spacer.x=0.15"])
    r2, st2 = solve(low_x)
    assert dg.check_dx_centres(r2, st2) == []


def test_dx_window_is_50_meV_at_low_T_and_3kT_when_hot():
    assert dg.dx_window(4.2) == pytest.approx(0.050)                    # our stated choice
    assert dg.dx_window(300.0) == pytest.approx(3 * 8.617333262e-5 * 300.0)   # 3 kT (kB CODATA)


def test_region_cut():
    # the channel starts at 58 nm; a region from 60 nm cuts through the 2DEG
    deck = selfcon.load_deck(HALL, overrides=["quantum.regions=[[60.0, 140.0]]"])
    r, st = solve(deck)
    w = dg.check_region_cut(r, st)
    assert len(w) >= 1 and "top end" in w[0] and "electrons" in w[0]


def test_buffer_carriers():
    # a doped buffer on an ohmic substrate: 1e16 cm^-3 neutral electrons over the last 100 nm = 1e11 cm^-2
    deck = selfcon.load_deck(HALL, overrides=["layer.buffer.donors=1e16"])
    deck = deck.with_overrides({"substrate.contact": "ohmic", "substrate.barrier": None})
    r, st = solve(deck)
    w = dg.check_buffer_carriers(r, st)
    assert len(w) == 1 and "bottom contact" in w[0]


def test_second_subband():
    # a 30 nm GaAs well doped from both sides with 3e12 cm^-2 each at 4 K: several subbands below EF
    text = """
title = "double-side doped wide well"
temperature = 4.0
[surface]
contact = "pinned"
barrier = 0.7
[substrate]
contact = "pinned"
barrier = 0.7
[[layer]]
name = "top"
material = "AlGaAs"
x = 0.3
thickness = 40.0
[[layer]]
name = "d1"
material = "AlGaAs"
x = 0.3
thickness = 2.0
sheet_donors = 4e12
[[layer]]
name = "s1"
material = "AlGaAs"
x = 0.3
thickness = 8.0
[[layer]]
name = "well"
material = "GaAs"
thickness = 30.0
[[layer]]
name = "s2"
material = "AlGaAs"
x = 0.3
thickness = 8.0
[[layer]]
name = "d2"
material = "AlGaAs"
x = 0.3
thickness = 2.0
sheet_donors = 4e12
[[layer]]
name = "bottom"
material = "AlGaAs"
x = 0.3
thickness = 60.0
[physics]
carriers = ["electron"]
[quantum]
regions = [[30.0, 110.0]]
states = 6
[mesh]
step = 1.0
"""
    r, st = solve(selfcon.load_deck(text))
    w = dg.check_second_subband(r, st)
    assert len(w) == 1 and "second electron subband" in w[0]
    assert r.subbands["electron"].energy[1] < 0          # E1 below EF: the definition of "occupied" at 4 K


def test_design_warnings_never_raise(monkeypatch):
    # a design that really warns: 1.5e18 cm^-3 over 25 nm (3.75e12 cm^-2) leaves electrons in the
    # doping layer (parallel conduction, as in test_parallel_conduction), stopped after one iteration
    deck = selfcon.load_deck(HALL, overrides=["layer.doping.donors=1.5e18", "layer.doping.thickness=25",
                                              "solver.max_iterations=1"])
    r, st = solve(deck)
    real = dg.design_warnings(r, st)
    assert any("not converged" in w for w in real)
    assert any("parallel conduction" in w and "'doping'" in w for w in real)
    assert not any("could not run" in w for w in real)
    assert real == r.warnings                 # the solve ran the same checks

    # a check that raises becomes one warning line naming it; the other checks still report
    def planted(result, structure, deck=None):
        raise ZeroDivisionError("planted fault")
    monkeypatch.setitem(dg.CHECKS, "planted", planted)
    out = dg.design_warnings(r, st)
    assert [w for w in out if "planted" not in w] == real
    bad = [w for w in out if "planted" in w]
    assert len(bad) == 1 and "could not run" in bad[0] and "ZeroDivisionError" in bad[0]

    # a structure without the arrays: the checks that need them report that, none raises
    class Broken:
        pass
    out = dg.design_warnings(r, Broken())
    assert all(isinstance(x, str) for x in out)
    assert any("could not run" in x and "AttributeError" in x for x in out)


def test_node_weights_integrate_exactly():
    z = np.array([0.0, 1.0, 3.0, 6.0])
    from selfcon.model.mesh import half_widths             # the one dual-cell rule
    assert half_widths(z)[3].sum() == pytest.approx(6.0)       # analytic: total length


def test_uncounted_valley_check_is_silent_on_the_cold_example(hemt4_result):
    # at 4 K the X and L edges of Al0.32GaAs stay far above EF in kT: no valley warning
    r = hemt4_result
    assert not any("valley" in w for w in r.warnings)


# --------------------------------------------------------------------------- channels (selfcon.output.channels)

def test_no_false_alarm_from_the_channels_own_tail():
    # the Hall wafer without its spacer: the 2DEG's own subband tail reaches into the doped
    # layer next to it.  The doping layer then holds more than 1 % of the channel's electrons
    # (a layer count would call it parallel conduction), but they are the channel's own.
    import tomllib
    from selfcon.input.deck import dumps_toml
    data = tomllib.loads(HALL.read_text())
    data["layer"] = [lay for lay in data["layer"] if lay["name"] != "spacer"]
    data["quantum"]["regions"] = [[8.0, 120.0]]
    r, st = solve(selfcon.load_deck(dumps_toml(data)))
    doping = next(row for row in r.layers if row["name"] == "doping")["electron_sheet_density_cm2"]
    assert doping > 0.01 * r.summary["channel_electron_sheet_density_cm2"]
    assert [c["name"] for c in r.channels] == ["channel"]
    assert dg.check_parasitic_channels(r, st) == [] and r.warnings == []


def test_holes_in_a_p_doped_layer_are_parallel_conduction():
    # the 2DHG deck with 2e19 cm^-3 acceptors over 20 nm (metallic, above the Mott density):
    # free holes in the doping layer; the well is named as the main channel
    deck = selfcon.load_deck(DESIGN / "2dhg_4K.toml")
    text = deck.to_toml() + '\n[[channel]]\nname = "2dhg"\ncarrier = "hole"\nlayers = ["well"]\n'
    deck = selfcon.load_deck(text, ["layer.doping.thickness=20", "layer.doping.acceptors=2e19",
                                    "layer.doping.sheet_acceptors=0"])
    r, st = solve(deck)
    assert r.main_channel["name"] == "2dhg"
    w = dg.check_parasitic_channels(r, st)
    assert len(w) == 1 and "holes" in w[0] and "parallel conduction through the doped layer 'doping'" in w[0]


def test_carriers_outside_quantum_regions():
    # the 4 K wafer with its quantum region ending where the channel begins: the whole 2DEG
    # is classical, outside every region
    r, st = solve(selfcon.load_deck(EXAMPLES / "hemt_4K.toml", ["quantum.regions=[[30.0, 60.0]]"]))
    w = dg.check_carriers_outside(r, st)
    assert len(w) == 1 and "electrons" in w[0] and "widen quantum.regions" in w[0]
    clean, st2 = solve(selfcon.load_deck(EXAMPLES / "hemt_4K.toml"))
    assert dg.check_carriers_outside(clean, st2) == []


def test_an_empty_named_main_channel_breaks_no_check():
    # a [[channel]] naming a layer with no carriers at all (holes in the cap): it is the
    # main channel with 0 cm^-2, and every other channel is parasitic next to it
    deck = selfcon.load_deck((EXAMPLES / "hemt_4K.toml").read_text()
                             + '\n[[channel]]\nname = "cap_holes"\ncarrier = "hole"\nlayers = ["cap"]\n')
    r, st = solve(deck)
    assert r.main_channel["name"] == "cap_holes" and r.main_channel["sheet_density"] == 0.0
    assert not any("could not run" in w for w in r.warnings)
    assert any(w.startswith("parasitic channel 'channel'") and "holds none" in w for w in r.warnings)
