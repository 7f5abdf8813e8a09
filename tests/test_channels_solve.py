"""Channels, every band's states and interband transitions of real solves (the decks of
inputs/design/).  Every check value names its source beside it.
"""
import math
import tomllib
from pathlib import Path

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.optimize import brentq

import selfcon
from selfcon.constants import HBAR2_2M0
from selfcon.input.deck import dumps_toml
from selfcon.model.structure import build_structure
from selfcon.model.mesh import half_widths

DESIGN = Path(__file__).resolve().parents[1] / "inputs" / "design"


def solve(deck):
    st = build_structure(deck)
    return selfcon.solve(deck, structure=st), st


def without_channel_tables(path):
    """The deck's text with its [[channel]] tables removed (auto-detection only)."""
    data = tomllib.loads(path.read_text())
    data.pop("channel", None)
    return dumps_toml(data)


def node_edge(st, r, key="ec_gamma"):
    """The loop's band edge at the nodes: dual-cell average of the cell edge, minus phi."""
    return st.node_average(st.cell[key]) - r.profile["potential"]


def windowed_levels(r, st, top, bottom, key="ec_gamma", mass="m_e", n=3):
    """An independent selfcon.bound_states solve between two depths at the converged potential."""
    z = r.z
    i0, i1 = int(np.argmin(abs(z - top))), int(np.argmin(abs(z - bottom)))
    e, _ = selfcon.bound_states(z[i0:i1 + 1], node_edge(st, r, key)[i0:i1 + 1], st.cell[mass][i0:i1], n)
    return e


# --------------------------------------------------------------------------- two wells

@pytest.fixture(scope="module")
def two_wells():
    return solve(selfcon.load_deck(without_channel_tables(DESIGN / "two_channel_4K.toml")))


def test_two_wells_channels_named_after_their_layers(two_wells):
    r, _ = two_wells
    assert r.converged
    assert [c["name"] for c in r.channels] == ["well_upper", "well_lower"]
    assert all(c["carrier"] == "electron" and c["sheet_density"] > 1e11 for c in r.channels)
    # without [[channel]] tables nothing says the second well is intended: it is parasitic
    # (holding more than 1 % of the main channel); test_named_channels_of_the_deck: no warning
    assert r.main_channel["name"] == "well_upper"
    w = [x for x in r.warnings if x.startswith("parasitic channel")]
    assert len(w) == 1 and "'well_lower'" in w[0]


def test_two_wells_sheet_densities_add_up(two_wells):
    # sum of channel densities + subbands in no channel + classical carriers outside every
    # channel = integral of n dz (of the profile the loop converged on), to 1e-6
    r, _ = two_wells
    z = r.z
    w = half_widths(z)[3]
    n = r.profile["electron_density"]
    total = float(np.dot(w, n)) / 1e7
    in_channel = np.zeros(z.size, bool)
    for c in r.channels:
        in_channel |= (z >= c["top_nm"] - 1e-9) & (z <= c["bottom_nm"] + 1e-9)
    quantum = np.zeros(z.size, bool)
    for a, b in r.regions_nm:
        quantum |= (z >= a - 1e-9) & (z <= b + 1e-9)
    classical_out = float(np.dot(w[~in_channel & ~quantum], n[~in_channel & ~quantum])) / 1e7
    sb = r.subbands["electron"]
    unattributed = float(sb.occupation[sb.channel < 0].sum())
    channels = sum(c["sheet_density"] for c in r.channels)
    assert abs(channels + unattributed + classical_out - total) <= 1e-6 * total


@pytest.mark.parametrize("name, top, bottom", [("well_upper", 49.5, 102.0), ("well_lower", 102.0, 154.5)])
def test_two_wells_own_spacing_against_windowed_solve(two_wells, name, top, bottom):
    # E1 - E0 of each channel = that of an independent bound_states solve of its well alone
    # at the converged potential, windowed at the midpoints of the barriers around it
    # (spacers 42-57 and 147-162 nm, middle barrier 72-132 nm), to 0.1 meV
    r, st = two_wells
    e = windowed_levels(r, st, top, bottom)
    c = r.channel(name)
    assert abs(c["spacing"] - (e[1] - e[0])) < 1e-4
    assert abs(c["ground_energy"] - e[0]) < 1e-4


def test_named_channels_of_the_deck():
    r, _ = solve(selfcon.load_deck(DESIGN / "two_channel_4K.toml"))
    assert [(c["name"], c["named"], c["main"]) for c in r.channels] == [("upper", True, True),
                                                                         ("lower", True, False)]
    assert r.summary["main_channel"] == "upper"
    assert r.summary["channel_electron_sheet_density_cm2"] == r.channels[0]["sheet_density"]
    assert r.summary["channel.lower.sheet_density_cm2"] == r.channels[1]["sheet_density"]
    assert r.warnings == []            # a clean demo design; named channels are never parasitic


# --------------------------------------------------------------------------- inverted HEMT

@pytest.fixture(scope="module")
def inverted():
    return solve(selfcon.load_deck(DESIGN / "inverted_4K.toml"))


def test_inverted_main_channel_spacing_from_its_own_states(inverted):
    r, st = inverted
    assert r.summary["main_channel"] == "channel" and r.channel("buffer") is not None
    sb = r.subbands["electron"]
    own = sb.energy[sb.channel == [c["name"] for c in r.channels].index("channel")]
    assert r.summary["E1_minus_E0_eV"] == pytest.approx(own[1] - own[0], abs=1e-12)
    # the stack's two lowest states are the channel's E0 and the buffer's E0: not the spacing
    assert abs((sb.energy[1] - sb.energy[0]) - r.summary["E1_minus_E0_eV"]) > 0.03
    # independent solve of the channel alone, from the top barrier's midpoint (50 nm) to the
    # donor sheet (116 nm) that closes the spacer below it, at the converged potential: 0.1 meV
    e = windowed_levels(r, st, 50.0, 116.0)
    assert abs(r.summary["E1_minus_E0_eV"] - (e[1] - e[0])) < 1e-4


def test_inverted_buffer_channel_is_parasitic(inverted):
    r, _ = inverted
    w = [x for x in r.warnings if x.startswith("parasitic channel")]
    assert len(w) == 1 and "'buffer'" in w[0]


# --------------------------------------------------------------------------- the undoped well

def bdd_levels(v0, width, mw, mb, n):
    """The n lowest roots of the BenDaniel–Duke matching conditions of a symmetric square
    well with thick barriers (psi and psi'/m continuous): even k tan(kL/2)/mw = kappa/mb,
    odd -k cot(kL/2)/mw = kappa/mb (analytic, roots by scipy.optimize.brentq)."""
    def k(e):
        return math.sqrt(e * mw / HBAR2_2M0)

    def kappa(e):
        return math.sqrt((v0 - e) * mb / HBAR2_2M0)

    def even(e):
        x = k(e) * width / 2
        return math.sin(x) / mw * k(e) - math.cos(x) * kappa(e) / mb

    def odd(e):
        x = k(e) * width / 2
        return -math.cos(x) / mw * k(e) - math.sin(x) * kappa(e) / mb

    roots = []
    grid = np.linspace(1e-9, v0 * (1 - 1e-9), 4000)
    for f in (even, odd):
        vals = [f(e) for e in grid]
        for a, b, fa, fb in zip(grid[:-1], grid[1:], vals[:-1], vals[1:]):
            if fa * fb < 0:
                roots.append(brentq(f, a, b, xtol=1e-14))
    return sorted(roots)[:n]


def envelope(e, v0, width, mw, mb):
    """Normalised even envelope of a BDD level: cos(kz) inside |z| < L/2, matched exponential
    outside (analytic); returns psi(z) with z from the well centre."""
    k = math.sqrt(e * mw / HBAR2_2M0)
    kap = math.sqrt((v0 - e) * mb / HBAR2_2M0)
    c = math.cos(k * width / 2)
    norm = width / 2 + math.sin(k * width) / (2 * k) + c * c / kap
    a = 1 / math.sqrt(norm)

    def psi(z):
        if abs(z) <= width / 2:
            return a * math.cos(k * z)
        return a * c * math.exp(-kap * (abs(z) - width / 2))
    return psi


@pytest.fixture(scope="module")
def optical():
    return solve(selfcon.load_deck(DESIGN / "optical_well.toml"))


def well_parameters(st, r, edge, mass, sign):
    z_c = 0.5 * (st.z[:-1] + st.z[1:])
    well = int(np.argmin(abs(z_c - 35.0)))
    barrier = int(np.argmin(abs(z_c - 15.0)))
    phi = float(np.mean(r.profile["potential"]))
    v0 = sign * (st.cell[edge][barrier] - st.cell[edge][well])
    return v0, st.cell[mass][well], st.cell[mass][barrier], st.cell[edge][well] - phi


@pytest.mark.parametrize("band, edge, mass, sign", [("electron", "ec_gamma", "m_e", 1),
                                                     ("heavy_hole", "ev_hh", "m_hh_z", -1),
                                                     ("light_hole", "ev_lh", "m_lh_z", -1)])
def test_optical_well_levels_against_bdd(optical, band, edge, mass, sign):
    r, st = optical
    assert r.converged and np.ptp(r.profile["potential"]) < 1e-9      # undoped: flat bands
    v0, mw, mb, floor = well_parameters(st, r, edge, mass, sign)
    exact = bdd_levels(v0, 10.0, mw, mb, 1)[0]
    sb = r.subbands[band]
    got = sign * (sb.energy[0] - floor)              # confinement energy of e1 / hh1 / lh1
    assert abs(got - exact) < 1e-4                   # 0.1 meV
    assert np.all(sb.occupation == 0.0) and np.all(sb.bound)
    assert np.all(sb.channel == -1) and r.channels == []


def test_optical_well_e1_hh1_overlap_against_analytic_envelopes(optical):
    r, st = optical
    ve, mwe, mbe, fe = well_parameters(st, r, "ec_gamma", "m_e", 1)
    vh, mwh, mbh, fh = well_parameters(st, r, "ev_hh", "m_hh_z", -1)
    ee = bdd_levels(ve, 10.0, mwe, mbe, 1)[0]
    eh = bdd_levels(vh, 10.0, mwh, mbh, 1)[0]
    pe, ph = envelope(ee, ve, 10.0, mwe, mbe), envelope(eh, vh, 10.0, mwh, mbh)
    inner = quad(lambda z: pe(z) * ph(z), -5, 5)[0] + 2 * quad(lambda z: pe(z) * ph(z), 5, 40)[0]
    t = r.transitions
    k = np.flatnonzero((t["electron_state"] == 0) & (t["hole_band"] == "heavy_hole") & (t["hole_state"] == 0))
    assert k.size == 1
    assert abs(t["overlap"][k[0]] - inner ** 2) < 1e-3
    # e1 - hh1 energy: the gap plus both confinement energies (analytic levels above)
    assert t["energy"][k[0]] == pytest.approx((fe + ee) - (fh - eh), abs=2e-4)
    # every e_n - hh_m and e_n - lh_m pair is listed
    sb = r.subbands
    assert t["energy"].size == sb["electron"].energy.size * (sb["heavy_hole"].energy.size
                                                           + sb["light_hole"].energy.size)


def test_every_band_reported_whatever_the_carriers():
    # the loop solves electrons only; the result still has hh and lh states (zero occupation),
    # the same as with every carrier counted (pinned ends: an undoped stack needs no carriers)
    pinned = ["surface.contact=pinned", "surface.barrier=0.9", "substrate.contact=pinned",
              "substrate.barrier=0.9", "mesh.step=0.5"]
    every, _ = solve(selfcon.load_deck(DESIGN / "optical_well.toml", pinned))
    r, _ = solve(selfcon.load_deck(DESIGN / "optical_well.toml", pinned + ['physics.carriers=["electron"]']))
    assert set(r.subbands) == {"electron", "heavy_hole", "light_hole"}
    for band in ("heavy_hole", "light_hole"):
        assert np.all(r.subbands[band].occupation == 0.0)
        assert np.allclose(r.subbands[band].energy, every.subbands[band].energy, atol=1e-9)
        assert r.subbands[band].energy.size >= 1
    assert r.summary["heavy_hole_E0_eV"] == pytest.approx(every.summary["heavy_hole_E0_eV"], abs=1e-9)


# --------------------------------------------------------------------------- the 2DHG

def test_2dhg_main_channel_is_the_hole_well():
    r, _ = solve(selfcon.load_deck(DESIGN / "2dhg_4K.toml"))
    main = r.main_channel
    assert main["name"] == "well" and main["carrier"] == "hole"
    assert r.summary["channel_hole_sheet_density_cm2"] == main["sheet_density"] > 1e11
    # its sheet density is its hole subbands' population (no classical holes in the region)
    own = sum(float(r.subbands[b].occupation[r.subbands[b].channel == 0].sum())
              for b in ("heavy_hole", "light_hole"))
    assert main["sheet_density"] == pytest.approx(own, rel=1e-9)
    # E0 - EF in the holes' own sense: the top hole subband lies above EF (occupied) -> negative
    top = max(float(r.subbands[b].energy[0]) for b in ("heavy_hole", "light_hole"))
    assert r.summary["E0_minus_EF_eV"] == pytest.approx(-top) and top > 0


def test_channels_and_transitions_round_trip(optical, two_wells, tmp_path):
    for r, _ in (optical, two_wells):
        r.save(tmp_path / "r.h5", force=True)
        back = selfcon.load_result(tmp_path / "r.h5")
        assert back.channels == r.channels
        for key, v in r.transitions.items():
            assert list(back.transitions[key]) == list(v)
        for band, sb in r.subbands.items():
            assert np.array_equal(back.subbands[band].channel, sb.channel)
            assert np.array_equal(back.subbands[band].bound, sb.bound)


# --------------------------------------------------------------------------- where the main channel's figures go

def test_summary_lists_channels_and_three_states_per_band(inverted):
    from rich.console import Console
    from selfcon.output.report import print_summary, summary_figures
    r, _ = inverted
    fig = summary_figures(r)
    assert fig["channel"]["name"] == "channel" and fig["channel"]["carrier"] == "electron"
    assert [c["name"] for c in fig["channels"]] == ["channel", "buffer"]
    assert fig["channel"]["spacing_meV"] == pytest.approx(1e3 * r.summary["E1_minus_E0_eV"])
    console = Console(record=True, width=140)
    print_summary(fig, console)
    text = console.export_text()
    assert "buffer" in text and "Channels" in text
    # heavy and light holes have no bound state in this stack: listed as such, not left out
    assert text.count("none bound") == 2


def test_study_table_columns_are_the_main_channels(inverted):
    from selfcon.batch.summary import summarize
    r, _ = inverted
    row = summarize(r)
    sb = r.subbands["electron"]
    own = sb.energy[sb.channel == 0]             # /channels row 0 is 'channel', the main one
    assert r.channels[0]["name"] == "channel" and r.channels[0]["main"]
    assert row["channel_density_cm2"] == r.channels[0]["sheet_density"]
    assert (row["E0_eV"], row["E1_eV"]) == (own[0], own[1])
    assert row["E1_minus_E0_eV"] == pytest.approx(own[1] - own[0])


def test_tune_a_named_quantity_of_another_channel():
    from selfcon.design.tune import TuneError, tune
    deck = selfcon.load_deck(DESIGN / "inverted_4K.toml")
    tr = tune(deck, "layer.lower_barrier.thickness", "ns:buffer", 1.0e11, (35.0, 80.0), xtol=0.01)
    assert tr.converged
    # the tuned figure is the buffer channel's sheet density in the result at the answer
    assert tr.result.channel("buffer")["sheet_density"] == pytest.approx(tr.achieved)
    assert tr.achieved == pytest.approx(1.0e11, rel=2e-3)
    assert tr.result.main_channel["name"] == "channel"
    with pytest.raises(TuneError, match="unknown channel 'bufer'.*allowed: channel, buffer"):
        tune(deck, "layer.lower_barrier.thickness", "ns:bufer", 1.0e11, (35.0, 80.0))


def test_sweep_follows_the_main_channel_to_pinch_off():
    from selfcon.design.sweep import sweep_bias
    sw = sweep_bias(selfcon.load_deck(DESIGN / "inverted_4K.toml"), np.arange(-0.8, 0.01, 0.2),
                    keep_results=True)
    assert sw.channel == "channel" and sw.channel_layer == "channel"
    # at V = 0 the figure is the result's main channel; as the gate empties it, it falls
    # monotonically (at -0.8 V it holds less than the 1e8 cm^-2 detection floor: the
    # density integrated over the channel's interval is followed down)
    assert sw.channel_density[-1] == sw.results[-1].main_channel["sheet_density"]
    assert np.all(np.diff(sw.channel_density) > 0) and sw.channel_density[0] < 1e8


def test_csv_export_of_channels_and_transitions(optical, inverted, tmp_path):
    import csv
    from selfcon.output.export import export_csv
    r, _ = inverted
    paths = export_csv(r, tmp_path / "inv")
    assert [p.name for p in paths] == ["profile.csv", "subbands.csv", "channels.csv", "transitions.csv"]
    with open(tmp_path / "inv" / "channels.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    assert [(x["name"], x["main [1]"]) for x in rows] == [("channel", "1"), ("buffer", "0")]
    assert float(rows[1]["sheet_density [cm-2]"]) == r.channel("buffer")["sheet_density"]   # repr: exact
    with open(tmp_path / "inv" / "subbands.csv", newline="") as fh:
        sub = list(csv.DictReader(fh))
    assert [x["channel"] for x in sub[:2]] == ["channel", "buffer"]
    o, _ = optical
    export_csv(o, tmp_path / "ow")
    with open(tmp_path / "ow" / "transitions.csv", newline="") as fh:
        t = list(csv.DictReader(fh))
    assert len(t) == o.transitions["energy"].size
    assert float(t[0]["overlap [1]"]) == o.transitions["overlap"][0]


#: (sheets of 1.2e12 cm^-2: fully depleted; at 2e12 their donors, metallic above the Mott
#: density (issue 12), keep free electrons at the sheets, channels of their own)
GRADED = """
title = "V-graded AlGaAs well split over two layers, doped from both sides"
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
sheet_donors = 1.2e12
[[layer]]
name = "s1"
material = "AlGaAs"
x = 0.3
thickness = 10.0
[[layer]]
name = "grade_down"
material = "AlGaAs"
x = [0.2, 0.0]
thickness = 12.0
[[layer]]
name = "grade_up"
material = "AlGaAs"
x = [0.0, 0.2]
thickness = 12.0
[[layer]]
name = "s2"
material = "AlGaAs"
x = 0.3
thickness = 10.0
[[layer]]
name = "d2"
material = "AlGaAs"
x = 0.3
thickness = 2.0
sheet_donors = 1.2e12
[[layer]]
name = "bottom"
material = "AlGaAs"
x = 0.3
thickness = 60.0
[physics]
carriers = ["electron"]
[quantum]
regions = [[30.0, 110.0]]
[mesh]
step = 0.5
"""


def test_graded_well_split_over_two_layers_is_one_channel():
    # a V-graded well whose two halves are two layers: one channel holding (nearly) all the
    # electrons of the stack, not the half in the layer holding most
    r, _ = solve(selfcon.load_deck(GRADED))
    assert [c["name"] for c in r.channels] == ["electron1"]      # neither layer holds 90 %
    halves = [row["electron_sheet_density_cm2"] for row in r.layers if row["name"].startswith("grade")]
    assert min(halves) > 0.4 * sum(halves)                        # the well is split about evenly
    assert r.summary["channel_electron_sheet_density_cm2"] > 0.99 * r.summary["electron_sheet_density_cm2"]
    assert not any("bottom contact" in w or "parasitic" in w for w in r.warnings)


def test_study_summary_addresses_channels_like_tune(tmp_path):
    # a two-job study of the inverted stack; study-summary's ns, ns:buffer and e10:channel are
    # the main channel's column and the per-channel figures of each job's result file
    import h5py
    from selfcon.batch.runner import run_study
    from selfcon.design.tolerance import quantity_key, summarize_study
    assert quantity_key("ns") == "channel_density_cm2" and quantity_key("e0f") == "E0_minus_EF_eV"
    assert quantity_key("ns:buffer") == "channel.buffer.sheet_density_cm2"
    assert quantity_key("e10:channel") == "channel.channel.E1_minus_E0_eV"
    assert quantity_key("ns_total") == "ns_total" and quantity_key("ns:") == "ns:"
    (tmp_path / "study.toml").write_text(
        f'deck = "{(DESIGN / "inverted_4K.toml").as_posix()}"\nmode = "grid"\n'
        '[[vary]]\npath = "layer.lower_barrier.thickness"\nvalues = [40.0, 60.0]\n')
    code, counts, out = run_study(tmp_path / "study.toml", workers=1, out=tmp_path / "out")
    assert code == 0 and counts["done"] == 2
    s = summarize_study(out, quantities=["ns", "ns:buffer", "e10:channel"])
    files = sorted(out.rglob("*.h5"))
    got = []
    for f in files:
        if f.name.startswith("table"):
            continue
        with h5py.File(f, "r") as fh:
            a = fh["summary"].attrs
            got.append((float(a["channel_electron_sheet_density_cm2"]), float(a["channel.buffer.sheet_density_cm2"]),
                        float(a["channel.channel.E1_minus_E0_eV"])))
    assert sorted(zip(s.columns["ns"], s.columns["ns:buffer"], s.columns["e10:channel"])) == sorted(got)


# --------------------------------------------------------------------------- over-doped stacks

def test_overdoped_stack_reports_the_doping_layer_as_the_parallel_channel():
    # inputs/design/overdoped_300K.toml: its doping layer keeps more electrons than the GaAs
    # channel; the channel is still the main one and the doping layer the parallel channel
    r = selfcon.solve(selfcon.load_deck(str(DESIGN / "overdoped_300K.toml")))
    assert r.converged, r.message
    by = {c["name"]: c for c in r.channels}
    assert r.summary["main_channel"] == "channel" and by["channel"]["main"]
    parallel = [c for c in r.channels if c["layer"] == "doping"]
    assert len(parallel) == 1 and parallel[0]["sheet_density"] > by["channel"]["sheet_density"]
    assert any(w.startswith(f"parasitic channel {parallel[0]['name']!r}")
               and "parallel conduction through the doped layer 'doping'" in w for w in r.warnings)


def test_channel_density_falls_with_the_spacer_even_with_parallel_conduction():
    # common practice: a thicker spacer transfers fewer electrons into the channel.  At
    # 4e12 cm^-2 in the sheet the doping layer keeps more electrons than the channel from a
    # 20 nm spacer on; the main channel's n_s used to follow the doping layer's and rise
    ns = []
    for spacer in (10.0, 20.0, 30.0, 40.0):
        d = selfcon.load_deck(str(DESIGN.parent / "hemt_4K.toml"),
                              [f"layer.spacer.thickness={spacer}", "layer.doping.sheet_donors=4e12"])
        r = selfcon.solve(d)
        assert r.converged, r.message
        assert r.summary["channel_layer"] == "channel"
        ns.append(r.summary["channel_electron_sheet_density_cm2"])
    assert all(a > b for a, b in zip(ns, ns[1:])), ns
