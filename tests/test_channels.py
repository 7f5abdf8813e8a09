"""Channel analysis on arrays built for the purpose (selfcon.output.channels).

Every check value names its source: densities are Gaussians whose 1e-3 points are at
|z - z0| = 2 sigma sqrt(ln 1000) (analytic); states are box sines, orthonormal under the
trapezoid sum on a uniform mesh (discrete sine transform orthogonality, analytic).
"""
import math

import numpy as np
import pytest

from selfcon.output import channels as chx
from selfcon.model.mesh import half_widths

H = 0.5
Z = np.arange(0.0, 100.0 + H / 2, H)
W = half_widths(Z)[3]
KT = 0.01          # eV


def gauss(z0, peak, sigma=np.sqrt(2.0)):
    return peak * np.exp(-((Z - z0) / sigma) ** 2 / 2)


def two_wells(barrier=0.2):
    """u = 0 in [20, 30] and [60, 70], 0.2 eV outside, ``barrier`` between the wells."""
    u = np.full(Z.size, 0.2)
    u[(Z >= 20) & (Z <= 30)] = 0.0
    u[(Z >= 60) & (Z <= 70)] = 0.0
    u[(Z > 30) & (Z < 60)] = barrier
    return u


def box(a, b, n):
    """sqrt(2/L) sin(n pi (z-a)/L) on [a, b], zero elsewhere (nm^-1/2)."""
    L = b - a
    inside = (Z >= a) & (Z <= b)
    return np.where(inside, np.sqrt(2 / L) * np.sin(n * np.pi * (Z - a) / L), 0.0)


# --------------------------------------------------------------------------- the occupied rule

def test_occupied_rule():
    # rule of the README: >= 1 % of the channel's sheet density and >= 1e8 cm^-2
    assert chx.occupied([2e9, 9e8, 5e7], 1e11).tolist() == [True, False, False]
    assert chx.occupied([5e7, 2e8], 1e9).tolist() == [False, True]
    assert chx.occupied(1e9, 1e11)            # exactly 1 %: occupied ("at least")


# --------------------------------------------------------------------------- detection

def test_basins_split_at_maxima_and_flat_tops():
    u = np.array([0, 1, 2, 1, 0, 1, 2, 2, 2, 1, 0], float)
    # a peak at node 2; a flat top on nodes 6..8 is split at its middle node 7
    assert chx.basins(u) == [(0, 2), (3, 7), (8, 10)]
    assert chx.basins(np.zeros(5)) == [(0, 4)]


def test_detect_two_wells_at_the_thousandth_points():
    # sigma = sqrt(2): density > 1e-3 of the peak for |z - z0| < 2 sqrt(ln 1000) = 5.257 nm,
    # so on the 0.5 nm mesh the runs are [20, 30] and [60, 70] (analytic)
    d = gauss(25, 1e18) + gauss(65, 5e17) + gauss(90, 1e10)     # the last: 3.5e3 cm^-2 < floor
    got = chx.detect(Z, W, two_wells(), d, "electron", KT)
    assert [(Z[a], Z[b]) for a, b in got] == [(20.0, 30.0), (60.0, 70.0)]


@pytest.mark.parametrize("barrier, merged", [(0.015, True), (0.03, False)])
def test_detect_merges_below_2kT(barrier, merged):
    # 2 kT = 20 meV: a 15 meV barrier merges the wells, 30 meV keeps them apart
    d = gauss(25, 1e18) + gauss(65, 5e17)
    got = chx.detect(Z, W, two_wells(barrier), d, "electron", KT)
    if merged:
        assert [(Z[a], Z[b]) for a, b in got] == [(20.0, 70.0)]
    else:
        assert len(got) == 2


def test_detect_holes_sit_in_valence_band_maxima():
    ev = -two_wells()           # holes: the valence band edge is highest in the wells
    d = gauss(25, 1e18) + gauss(65, 5e17)
    got = chx.detect(Z, W, ev, d, "hole", KT)
    assert [(Z[a], Z[b]) for a, b in got] == [(20.0, 30.0), (60.0, 70.0)]


# --------------------------------------------------------------------------- attribution, densities

def layers():
    return [chx.LayerSpan("top", 0, 20), chx.LayerSpan("well", 20, 30),
            chx.LayerSpan("middle", 30, 60), chx.LayerSpan("layer3", 60, 70, named=False),
            chx.LayerSpan("buffer", 70, 100)]


def well_levels(occ):
    """Electron states: A1, A2 in well A, B1 in well B, C spread equally over both."""
    a1, a2, b1 = box(20, 30, 1), box(20, 30, 2), box(60, 70, 1)
    c = (a1 + b1) / np.sqrt(2.0)
    psi = np.column_stack([a1, b1, a2, c])
    energy = np.array([-0.02, -0.015, 0.01, 0.05])
    return chx.Levels("electron", energy, np.asarray(occ, float), psi, np.array([0.067, 0.067, 0.068, 0.07]))


def electron_profile(lv, classical, edge=None):
    dens = (lv.psi ** 2) @ lv.occupation * 1e7 + classical
    return chx.CarrierProfile(edge=two_wells() if edge is None else edge, density=dens, classical=classical)


def test_attribution_densities_and_balance():
    lv = well_levels([3e11, 1e11, 5e9, 5e7])
    # classical carriers: a bump in well A, and 3.5e7 cm^-2 (below the 1e8 floor) in a shallow
    # third well of its own (80-90 nm, 0.1 eV): no channel, so classical outside every channel
    edge = two_wells()
    edge[(Z >= 80) & (Z <= 90)] = 0.1
    cl = gauss(25, 1e15) + gauss(85, 1e14)
    an = chx.analyse(Z, W, KT, {"electron": electron_profile(lv, cl, edge)}, [lv], layers())
    assert [c.name for c in an.channels] == ["well", "electron2"]     # layer3 has a default name
    a, b = an.channels
    # A1, A2 -> well A; B1 -> well B; C has half its |psi|^2 in each: no channel (share not > 1/2;
    # it holds 5e7 cm^-2, below the 1e8 that would make the wells one coupled channel)
    assert an.attribution["electron"].tolist() == [0, 1, 0, -1]
    cl_a = float(np.dot(W[a.i0:a.i1 + 1], cl[a.i0:a.i1 + 1])) / 1e7
    assert a.sheet_density == pytest.approx(3e11 + 5e9 + cl_a, rel=1e-12)
    assert b.sheet_density == pytest.approx(1e11, rel=1e-12)
    assert an.unattributed["electron"] == pytest.approx(5e7)
    total = float(np.dot(W, electron_profile(lv, cl, edge).density)) / 1e7
    inside = np.zeros(Z.size, bool)
    for c in an.channels:
        inside[c.i0:c.i1 + 1] = True
    assert an.classical_outside["electron"] == pytest.approx(float(np.dot(W[~inside], cl[~inside])) / 1e7)
    assert an.classical_outside["electron"] > 0.99 * 3.5449e7     # the third well's 1e14 * sqrt(2 pi) * sqrt(2) nm
    assert an.total["electron"] == pytest.approx(total, rel=1e-12)
    assert abs(an.balance("electron")) < 1e-9 * total
    # own figures: E1 - E0 from the channel's own states; one state -> NaN
    assert a.ground_energy == pytest.approx(-0.02) and a.spacing == pytest.approx(0.03)
    assert math.isnan(b.spacing) and b.ground_energy == pytest.approx(-0.015)
    assert a.occupied_subbands == 2 and b.occupied_subbands == 1
    assert a.in_plane_mass == pytest.approx(0.067)
    assert a.centroid_nm == pytest.approx(25.0, abs=1e-9)     # symmetric density about 25 nm
    assert an.main == 0                                          # the most electrons


def test_tail_beyond_a_barrier_top_is_no_channel():
    # a well state whose tail reaches past a barrier top into a lower plateau, with a bump
    # there: the bump's run holds only a neighbour's tail, no carriers of its own -> no channel
    u = np.full(Z.size, 0.3)
    u[(Z >= 20) & (Z <= 30)] = 0.0
    u[(Z > 31) & (Z < 60)] = 0.1
    psi = np.where((Z >= 20) & (Z <= 30), np.cos(np.pi * (Z - 25) / 12), 0.0)
    tail = np.cos(np.pi * 5 / 12) * np.exp(-0.3 * (Z - 30)) * (1 + 30 * np.exp(-((Z - 40) / 2) ** 2))
    psi = psi + np.where(Z > 30, tail, 0.0)
    psi /= np.sqrt(np.dot(W, psi ** 2))
    lv = chx.Levels("electron", np.array([-0.01]), np.array([1e12]), psi[:, None], np.array([0.067]))
    dens = psi ** 2 * 1e12 * 1e7
    raw = chx.detect(Z, W, u, dens, "electron", KT)
    assert len(raw) == 2                          # the bump forms a run of its own ...
    assert chx.drop_tails(raw, W, dens, [lv]) == raw[:1]
    prof = chx.CarrierProfile(edge=u, density=dens, classical=np.zeros(Z.size))
    an = chx.analyse(Z, W, KT, {"electron": prof}, [lv], layers())
    assert len(an.channels) == 1                  # ... but it is nobody's channel
    assert an.channels[0].sheet_density == pytest.approx(1e12)
    assert abs(an.balance("electron")) < 1e-3


def test_tunnel_coupled_bilayer_is_one_channel():
    # symmetric and antisymmetric states of two wells, each half in either well: the wells
    # share their subbands (a 0.2 eV barrier keeps them apart by the band edge alone)
    a, b = box(20, 30, 1), box(60, 70, 1)
    psi = np.column_stack([(a + b) / np.sqrt(2), (a - b) / np.sqrt(2)])
    lv = chx.Levels("electron", np.array([-0.02, -0.019]), np.array([2e11, 1.5e11]), psi, np.array([0.067] * 2))
    prof = electron_profile(lv, np.zeros(Z.size))
    assert len(chx.detect(Z, W, prof.edge, prof.density, "electron", KT)) == 2
    an = chx.analyse(Z, W, KT, {"electron": prof}, [lv], layers())
    assert [(Z[c.i0], Z[c.i1]) for c in an.channels] == [(20.5, 69.5)]
    assert an.channels[0].sheet_density == pytest.approx(3.5e11)
    assert an.channels[0].spacing == pytest.approx(0.001)          # the tunnel splitting


def test_named_channels_replace_overlapping_auto_ones_and_come_first():
    lv = well_levels([3e11, 1e11, 5e9, 5e7])
    ehole = chx.Levels("heavy_hole", np.array([-0.5]), np.array([2e10]), box(60, 70, 1)[:, None],
                       np.array([0.1]))
    hole_prof = chx.CarrierProfile(edge=-0.6 - two_wells(), density=(box(60, 70, 1) ** 2) * 2e10 * 1e7,
                                   classical=np.zeros(Z.size))
    profiles = {"electron": electron_profile(lv, np.zeros(Z.size)), "hole": hole_prof}
    req = [chx.Request("lower", "electron", 60.0, 70.0)]
    an = chx.analyse(Z, W, KT, profiles, [lv, ehole], layers(), req)
    names = [(c.name, c.carrier) for c in an.channels]
    # the named electron channel replaces the auto one in [60, 70]; the hole channel there stays
    assert ("lower", "electron") in names and ("hole1", "hole") in names and ("well", "electron") in names
    assert len(names) == 3
    assert an.main_channel.name == "lower"                    # the first [[channel]] is the main one
    assert an.by_name("lower").sheet_density == pytest.approx(1e11)
    assert an.by_name("hole1").sheet_density == pytest.approx(2e10)
    assert an.attribution["heavy_hole"].tolist() == [names.index(("hole1", "hole"))]


def test_main_channel_is_the_largest_of_the_majority_kind():
    lv = well_levels([1e10, 3e10, 0, 0])
    hole_lv = chx.Levels("heavy_hole", np.array([-0.5]), np.array([1e10]), box(20, 30, 1)[:, None],
                         np.array([0.1]))
    profiles = {"electron": electron_profile(lv, np.zeros(Z.size)),
                "hole": chx.CarrierProfile(edge=-0.6 - two_wells(),
                                           density=(box(20, 30, 1) ** 2) * 1e10 * 1e7,
                                           classical=np.zeros(Z.size))}
    an = chx.analyse(Z, W, KT, profiles, [lv, hole_lv], layers())
    # electrons 4e10 in channels > holes 1e10: the electron channel with most (3e10, lower well)
    assert an.main_channel.carrier == "electron" and an.main_channel.top_nm > 50
    # two channels in one named layer (an electron and a hole channel in 'well'): numbered names
    assert sorted(c.name for c in an.channels) == ["electron1", "electron2", "hole1"]


def test_main_channel_is_not_the_doping_layer_while_another_exists():
    # the upper well's layer holds donors (a modulation-doping layer that kept its electrons):
    # its 3e11 cm^-2 outnumber the undoped lower well's 1e11, yet the lower well is the main
    # channel and the upper one the parallel channel (the design rule of the main channel)
    lv = well_levels([3e11, 1e11, 0, 0])
    prof = {"electron": electron_profile(lv, np.zeros(Z.size))}
    plain = chx.analyse(Z, W, KT, prof, [lv], layers())
    assert plain.main_channel.name == "well"                       # the most electrons, no doping
    doped = [chx.LayerSpan(L.name, L.top_nm, L.bottom_nm, L.named,
                           feeds=("electron",) if L.name == "well" else ()) for L in layers()]
    an = chx.analyse(Z, W, KT, prof, [lv], doped)
    assert an.main_channel.top_nm > 50 and an.main_channel.sheet_density == pytest.approx(1e11)
    # acceptors feed holes, not electrons: the electron channel in that layer stays the main one
    p_doped = [chx.LayerSpan(L.name, L.top_nm, L.bottom_nm, L.named,
                             feeds=("hole",) if L.name == "well" else ()) for L in layers()]
    assert chx.analyse(Z, W, KT, prof, [lv], p_doped).main_channel.name == "well"
    # a doped channel that is the only one is the main channel
    lone = well_levels([3e11, 0, 0, 0])
    an = chx.analyse(Z, W, KT, {"electron": electron_profile(lone, np.zeros(Z.size))}, [lone], doped)
    assert [c.name for c in an.channels] == ["well"] and an.main_channel.name == "well"


# --------------------------------------------------------------------------- transitions

def test_transitions_box_states_orthonormal():
    e = chx.Levels("electron", np.array([0.1, 0.2]), np.zeros(2),
                   np.column_stack([box(20, 30, 1), box(20, 30, 2)]), np.ones(2))
    hh = chx.Levels("heavy_hole", np.array([-1.5, -1.55, -1.6]), np.zeros(3),
                    np.column_stack([box(20, 30, 1), box(20, 30, 2), box(20, 30, 3)]), np.ones(3))
    lh = chx.Levels("light_hole", np.array([-1.52]), np.zeros(1), box(20, 30, 1)[:, None], np.ones(1))
    t = chx.transitions([e, hh, lh], W)
    assert t["energy"].size == 2 * (3 + 1)
    for ei, band, hi, en, ov in zip(t["electron_state"], t["hole_band"], t["hole_state"], t["energy"],
                                    t["overlap"]):
        h = hh if band == "heavy_hole" else lh
        assert en == pytest.approx(e.energy[ei] - h.energy[hi])
        # same box sines: <n|m> = delta_nm (discrete sine orthogonality, exact up to rounding)
        assert ov == pytest.approx(1.0 if ei == hi else 0.0, abs=1e-12)
    assert set(t["hole_band"]) == {"heavy_hole", "light_hole"}


def test_a_negligible_peak_in_a_tail_claims_no_flank():
    """A channel's density decaying into a barrier with a spurious bump of 1e-24 of its peak far
    down the tail (the noise of a multiband hole tail): the bump's run stops where the density
    rises again, so it holds nothing, and the channel's interval ends where its tail falls below
    1e-3 of its peak (analytic: exp(-2 (z - 10)) < 1e-3 beyond z = 10 + ln(1000) / 2 = 13.5 nm)."""
    z = np.linspace(0.0, 60.0, 601)
    _, _, _, w = half_widths(z)
    dens = 1e18 * np.where(z < 10.0, np.exp(-(z - 10.0) ** 2), np.exp(-2.0 * (z - 10.0)))
    dens += 1e-6 * np.exp(-((z - 50.0) / 10.0) ** 2)       # the bump at 50 nm
    u = np.zeros(z.size)                                   # one flat basin, no barrier top
    runs = chx.candidate_runs(w, u, dens)
    assert len(runs) == 1
    assert z[runs[0][1]] == pytest.approx(10.0 + 0.5 * np.log(1000.0), abs=0.1)


def test_merge_runs_one_pass_equals_the_restarting_scan():
    # the docstring's definition, written out as the scan that restarts after every merge
    # (the reference), against the one-pass merge on random edges and runs
    from selfcon.output.channels import merge_runs

    def restarting(runs, u, kT, merge_kt):
        runs = [list(r) for r in sorted(runs)]
        merged = True
        while merged and len(runs) > 1:
            merged = False
            for j in range(len(runs) - 1):
                (a0, a1), (b0, b1) = runs[j], runs[j + 1]
                top = float(np.max(u[a1:b0 + 1]))
                floor = max(float(np.min(u[a0:a1 + 1])), float(np.min(u[b0:b1 + 1])))
                if top - floor < merge_kt * kT:
                    runs[j] = [a0, b1]
                    del runs[j + 1]
                    merged = True
                    break
        return [(int(a), int(b)) for a, b in runs]

    rng = np.random.default_rng(7)
    for _ in range(300):
        u = np.cumsum(rng.normal(0.0, 0.004, 400))
        cuts = np.sort(rng.choice(np.arange(1, 399), size=2 * int(rng.integers(1, 12)), replace=False))
        runs = [(int(a), int(b)) for a, b in zip(cuts[::2], cuts[1::2])]
        kT = float(rng.uniform(0.0003, 0.03))
        assert merge_runs(runs, u, kT, 2.0) == restarting(runs, u, kT, 2.0)


def test_basins_and_runs_equal_the_node_by_node_walk():
    # the docstrings' definitions written out node by node (the reference): basins cut at
    # each maximum (a flat top at its middle node), each run walked from its peak, highest
    # peak first, while the density stays above peak_fraction of the peak, does not rise
    # and enters no earlier run; against the array forms on random profiles with plateaus,
    # ties and empty stretches
    def walk_basins(u):
        n = u.size
        if n < 3:
            return [(0, n - 1)] if n else []
        d = np.diff(u)
        scale = max(float(np.max(np.abs(u))), 1.0)
        s = np.sign(np.where(np.abs(d) > 1e-12 * scale, d, 0.0))
        nz = np.flatnonzero(s)
        cuts = [(a + 1 + b) // 2 for a, b in zip(nz[:-1], nz[1:]) if s[a] > 0 and s[b] < 0]
        starts = [0] + [c + 1 for c in cuts]
        return [(int(a), int(b)) for a, b in zip(starts, cuts + [n - 1])]

    def walk_runs(w, u, dens, floor_cm2, peak_fraction):
        runs, taken = [], np.zeros(dens.size, dtype=bool)
        for a, b in walk_basins(u):
            seg = np.arange(a, b + 1)
            left = np.r_[-np.inf, dens[:-1]][seg]
            right = np.r_[dens[1:], -np.inf][seg]
            peaks = seg[(dens[seg] > 0) & (dens[seg] >= left) & (dens[seg] >= right)]
            for p in peaks[np.argsort(-dens[peaks], kind="stable")]:
                if taken[p]:
                    continue
                thr = peak_fraction * dens[p]
                i0 = i1 = int(p)
                while i0 > a and thr < dens[i0 - 1] <= dens[i0] and not taken[i0 - 1]:
                    i0 -= 1
                while i1 < b and thr < dens[i1 + 1] <= dens[i1] and not taken[i1 + 1]:
                    i1 += 1
                taken[i0:i1 + 1] = True
                if float(np.dot(w[i0:i1 + 1], dens[i0:i1 + 1])) / 1e7 >= floor_cm2:
                    runs.append((i0, i1))
        return sorted(runs)

    rng = np.random.default_rng(11)
    for trial in range(2000):
        n = int(rng.integers(1, 60))
        u = [rng.normal(size=n), np.round(rng.normal(size=n), 1),
             np.cumsum(rng.choice([-1.0, 0.0, 0.0, 1.0], size=n))][trial % 3]
        dens = np.abs(rng.normal(size=n)) * 10 ** rng.uniform(10, 18)
        if trial % 2:
            dens = np.round(dens / 1e16) * 1e16                      # ties and zeros
        dens[rng.random(n) < 0.2] = 0.0
        w = rng.uniform(0.1, 1.0, size=n)
        pf, floor = [1e-3, 0.1, 0.5][trial % 3], [0.0, 1e3, 1e8, 1e10][trial % 4]
        assert chx.basins(u) == walk_basins(u)
        assert chx.candidate_runs(w, u, dens, floor_cm2=floor, peak_fraction=pf) == \
            walk_runs(w, u, dens, floor, pf)
