"""The self-consistent loop against closed forms, invariants and its own contract."""
from pathlib import Path

import numpy as np
import pytest

import selfcon
from selfcon.constants import CM2_PER_NM2, DOS2D_PER_M0, KB_EV
from selfcon.solver.mixers import available_methods

INPUTS = Path(__file__).resolve().parent.parent / "inputs"


@pytest.fixture(scope="module")
def hemt4():
    return selfcon.load_deck(INPUTS / "hemt_4K.toml")


# hemt4_result (inputs/hemt_4K.toml solved to 1e-9 V, shared per session) is in conftest.py


@pytest.fixture(scope="module")
def hemt300():
    return selfcon.load_deck(INPUTS / "hemt_300K.toml")


# A small symmetric double well: two 8 nm GaAs wells, a 2.5 nm Al0.3GaAs barrier,
# donor sheets on both sides, equal pinned boundaries -> mirror-symmetric problem,
# with both tunnel-split states occupied.
DOUBLE_WELL = """
title = "double well"
temperature = 10.0
[surface]
contact = "pinned"
barrier = 0.5
[substrate]
contact = "pinned"
barrier = 0.5
[[layer]]
name = "outer_top"
material = "AlGaAs"
x = 0.3
thickness = 40.0
sheet_donors = 3e12
[[layer]]
name = "spacer_top"
material = "AlGaAs"
x = 0.3
thickness = 15.0
[[layer]]
name = "well_a"
material = "GaAs"
thickness = 8.0
[[layer]]
name = "tunnel"
material = "AlGaAs"
x = 0.3
thickness = 2.5
[[layer]]
name = "well_b"
material = "GaAs"
thickness = 8.0
[[layer]]
name = "spacer_bottom"
material = "AlGaAs"
x = 0.3
thickness = 15.0
[[layer]]
name = "outer_bottom"
material = "AlGaAs"
x = 0.3
thickness = 40.0
sheet_donors = 3e12
[physics]
carriers = ["electron"]
[quantum]
regions = [[45.0, 83.5]]
states = 6
[mesh]
step = 0.25
"""

# p-type modulation doping: a carbon-like acceptor sheet in Al0.5GaAs above a GaAs channel.
P_CHANNEL = """
title = "2D hole gas"
temperature = 4.0
[surface]
contact = "pinned"
barrier = 1.0
[substrate]
contact = "pinned"
barrier = 0.9
[[layer]]
name = "cap"
material = "GaAs"
thickness = 5.0
[[layer]]
name = "barrier"
material = "AlGaAs"
x = 0.5
thickness = 30.0
[[layer]]
name = "doping"
material = "AlGaAs"
x = 0.5
thickness = 4.0
sheet_acceptors = 4e12
[[layer]]
name = "spacer"
material = "AlGaAs"
x = 0.5
thickness = 15.0
[[layer]]
name = "channel"
material = "GaAs"
thickness = 60.0
[[layer]]
name = "buffer"
material = "GaAs"
thickness = 300.0
[quantum]
regions = [[40.0, 130.0]]
"""


def test_low_temperature_single_subband_follows_2d_dos(hemt4_result):
    r = hemt4_result
    assert r.converged
    e = r.subbands["electron"]
    kT = KB_EV * 4.0
    assert e.energy[0] < -20 * kT < 0 < e.energy[1]          # one subband below EF
    # n_0 = (m*/pi hbar^2)(EF - E0) (textbook 2D density of states, T -> 0)
    n0_expected = DOS2D_PER_M0 * e.in_plane_mass[0] * (0.0 - e.energy[0]) * CM2_PER_NM2
    assert e.occupation[0] == pytest.approx(n0_expected, rel=1e-6)
    # about 2.8e10 cm^-2 per meV for m* = 0.067 (textbook value)
    assert DOS2D_PER_M0 * 0.067 * CM2_PER_NM2 * 1e-3 == pytest.approx(2.8e10, rel=0.01)
    # in-plane mass slightly above the GaAs value (barrier penetration into heavier AlGaAs)
    assert 0.067 <= e.in_plane_mass[0] < 0.070


def test_sum_of_occupations_equals_integrated_density(hemt4_result):
    r = hemt4_result
    w = np.gradient(r.z)  # not used for the exact check below
    z = r.z
    wd = np.zeros_like(z)
    wd[1:] += 0.5 * np.diff(z)
    wd[:-1] += 0.5 * np.diff(z)
    (a, b), = r.regions_nm
    inside = (z > a) & (z < b)
    n_in = np.sum(r.profile["electron_density"][inside] * wd[inside]) * 1e-7  # cm^-3 * nm -> cm^-2
    assert n_in == pytest.approx(r.subbands["electron"].occupation.sum(), rel=1e-9)  # invariant
    assert w.size == z.size


def test_gauss_law_and_neutrality(hemt4_result):
    r = hemt4_result
    # Gauss's law with the finite-volume boundary fluxes (invariant), converged to 1e-9 V
    assert r.summary["gauss_residual"] < 1e-6
    s = r.summary
    # the layer table partitions the total exactly (invariant)
    assert sum(L["electron_sheet_density_cm2"] for L in r.layers) == pytest.approx(
        s["electron_sheet_density_cm2"], rel=1e-12)
    # donors minus acceptors minus electrons is the charge the surface gate holds (> 0 here)
    assert s["donor_sheet_density_cm2"] > s["electron_sheet_density_cm2"]


@pytest.mark.parametrize("method", available_methods())
@pytest.mark.parametrize("deck_name", ["hemt_4K.toml", "hemt_300K.toml"])
def test_every_method_reaches_the_same_answer(method, deck_name):
    deck = selfcon.load_deck(INPUTS / deck_name)
    ref = selfcon.solve(deck)
    r = selfcon.solve(deck, method=method, max_iterations=400)
    assert r.converged, r.message
    ns_ref = ref.summary["electron_sheet_density_cm2"]
    assert r.summary["electron_sheet_density_cm2"] == pytest.approx(ns_ref, rel=1e-4)
    np.testing.assert_allclose(r.potential, ref.potential, atol=2e-5)


def test_predictor_corrector_iterations(hemt4, hemt300):
    # issue 3 target: <= 15 iterations to 1e-6 V from the default start
    for deck in (hemt4, hemt300):
        r = selfcon.solve(deck)
        assert r.converged and r.iterations <= 15


def test_mesh_halving_changes_ns_little(hemt4):
    a = selfcon.solve(hemt4)
    b = selfcon.solve(hemt4.with_overrides({"mesh.step": 0.25}))
    ns_a = a.summary["electron_sheet_density_cm2"]
    ns_b = b.summary["electron_sheet_density_cm2"]
    assert abs(ns_a - ns_b) / ns_b < 1e-3                      # issue 3: 0.1 %
    assert b.z.size > a.z.size


def test_region_cut_does_not_matter(hemt4):
    a = selfcon.solve(hemt4)
    b = selfcon.solve(hemt4.with_overrides({"quantum.regions": [[20.0, 260.0]]}))
    ns_a = a.summary["electron_sheet_density_cm2"]
    ns_b = b.summary["electron_sheet_density_cm2"]
    assert ns_b == pytest.approx(ns_a, rel=2e-3)
    assert b.subbands["electron"].energy[0] == pytest.approx(a.subbands["electron"].energy[0], abs=2e-4)


def test_double_well_has_tunnel_split_symmetric_and_antisymmetric_states():
    r = selfcon.solve(selfcon.load_deck(DOUBLE_WELL))
    assert r.converged
    e = r.subbands["electron"]
    z = r.z
    centre = 40 + 15 + 8 + 1.25
    psi0 = e.wavefunction[:, 0]
    psi1 = e.wavefunction[:, 1]
    mirror0 = np.interp(2 * centre - z, z, psi0)
    mirror1 = np.interp(2 * centre - z, z, psi1)
    sel = (z > centre - 20) & (z < centre + 20)
    c0 = np.dot(psi0[sel], mirror0[sel]) / np.dot(psi0[sel], psi0[sel])
    c1 = np.dot(psi1[sel], mirror1[sel]) / np.dot(psi1[sel], psi1[sel])
    assert c0 > 0.99          # symmetric (even) ground state
    assert c1 < -0.99         # antisymmetric (odd) first excited state
    split = e.energy[1] - e.energy[0]
    assert 1e-3 < split < 3e-2   # a few meV through a 2.5 nm Al0.3GaAs barrier (order of magnitude, from memory)
    # both states below EF and populated; by mirror symmetry (invariant) the wells hold equal charge
    assert e.energy[1] < 0 and e.occupation[1] > 1e11
    rows = {L["name"]: L["electron_sheet_density_cm2"] for L in r.layers}
    assert rows["well_a"] == pytest.approx(rows["well_b"], rel=1e-6)


def test_p_type_modulation_doping_gives_heavy_hole_2dhg():
    r = selfcon.solve(selfcon.load_deck(P_CHANNEL))
    assert r.converged, r.message
    s = r.summary
    assert s["hole_sheet_density_cm2"] > 1e11
    assert s["electron_sheet_density_cm2"] < 1e3
    hh = r.subbands["heavy_hole"].energy
    lh = r.subbands["light_hole"].energy
    # hole levels in electron energy: the highest is the lowest hole state; heavy holes lie
    # closest to the band edge because of their larger mass along [001] (common practice)
    assert hh[0] > lh[0]
    assert r.subbands["heavy_hole"].occupation[0] > r.subbands["light_hole"].occupation[0]
    assert s["channel_layer"] == "channel"


def test_non_convergence_is_a_result_not_an_exception(hemt4):
    r = selfcon.solve(hemt4, max_iterations=2)
    assert r.converged is False and r.status == 1 and not r.success
    assert "not converged" in r.message and "max_iterations" in r.message
    assert r.iterations == 2 and r.residual_history.size == 2


def test_warm_start_converges_at_once(hemt4, hemt4_result):
    r = selfcon.solve(hemt4, initial_potential=hemt4_result.potential)
    assert r.converged and r.iterations <= 2
    r2 = selfcon.solve(hemt4, initial_potential=(hemt4_result.z, hemt4_result.potential))
    assert r2.converged and r2.iterations <= 2


def test_a_structure_solved_again_starts_from_its_kept_classical_start(hemt4):
    # the classical start is kept with the structure (steps.initial_guess): a second solve of
    # the same structure skips the nested Newton solves and gives the same bits as a solve of
    # a freshly built one
    st = selfcon.build_structure(hemt4)
    first = selfcon.solve(hemt4, structure=st)
    again = selfcon.solve(hemt4, structure=st)
    fresh = selfcon.solve(hemt4, structure=selfcon.build_structure(hemt4))
    for r in (again, fresh):
        assert np.array_equal(r.potential, first.potential)
        assert np.array_equal(r.subbands["electron"].energy, first.subbands["electron"].energy)
        assert r.iterations == first.iterations
    from selfcon.model.structure import derived
    assert len(derived(st, "classical_start", dict)) == 1


def test_charge_check_takes_the_change_to_first_order(hemt4):
    # after a predictor pass the charge check estimates the change of the mobile charge from
    # the slope of the pass's first assembly (steps.charge_residual); against the predicted
    # density evaluated at phi_out (steps.mobile_sheets) the two differ at second order only:
    # measured 3.4e-4 relative at the 1.3 mV step of the second pass here (a wrong slope, a
    # missing term or weight, is off at order 1); the loop checks only at steps < its tolerance
    from selfcon.solver import steps
    from selfcon.solver.control import START_TOL
    st = selfcon.build_structure(hemt4)
    ws = steps.Workspace(st, steps.boundary_conditions(st))
    phi, _ = steps.initial_guess(ws)
    for _ in range(2):                   # two loop passes from the classical start
        states = steps.solve_states(ws, phi)
        phi_out, _ = steps.poisson_pass(ws, phi, states, predictor=True, tol=START_TOL, max_newton=1,
                                        backtrack=False)
        phi_prev, phi = phi, phi_out
    phi = phi_prev
    linear = steps.charge_residual(ws, phi, phi_out, states)
    ws._slope = None                     # the same check by evaluating the density at phi_out
    exact = steps.charge_residual(ws, phi, phi_out, states)
    step = float(np.max(np.abs(phi_out - phi)))
    assert 0.0 < step < 1e-2 and exact > 0.0
    assert abs(linear - exact) <= 1e-2 * exact


@pytest.mark.parametrize("name", ["hemt_300K.toml", "phemt_double_delta.toml"])
def test_a_structure_solved_again_asks_its_first_count_at_once(name):
    # the count of states the first iteration settles on from the classical start is kept
    # with the structure (steps.first_counts): a second solve asks for it at once instead of
    # probing it up from quantum.states, with the same bits as the first solve
    from selfcon.model.structure import derived
    deck = selfcon.load_deck(INPUTS / name)
    st = selfcon.build_structure(deck)
    first = selfcon.solve(deck, structure=st)
    kept = derived(st, "first_counts", dict)
    assert len(kept) == 1
    counts = next(iter(kept.values()))
    assert counts and all(n > st.states for n in counts.values())      # grew in iteration 1
    again = selfcon.solve(deck, structure=st)
    assert np.array_equal(again.potential, first.potential) and again.iterations == first.iterations
    for band, sb in first.subbands.items():
        assert np.array_equal(again.subbands[band].energy, sb.energy)


@pytest.mark.parametrize("start, grown", [(2, 64), (10, 40), (40, 40)])
def test_a_settled_count_is_solved_outright_with_the_same_states(hemt300, start, grown):
    # once a region's count of states settled, band_region_states solves that count at once
    # instead of probing it on the energies first; the states are the same bits, whether the
    # count then grows (start 2 -> 64 and 10 -> 40 states at 300 K) or stays (40)
    from selfcon.solver import schrodinger, steps
    st = selfcon.build_structure(hemt300)
    phi = np.asarray(selfcon.solve(hemt300, structure=st).potential, dtype=float)
    got = [steps.band_region_states(st, phi, "electron", 0, schrodinger.EigenWorkspace(), start,
                                    probe_first=probe_first) for probe_first in (True, False)]
    assert got[0][5] == got[1][5] == grown
    for a, b in zip(*got):
        assert np.array_equal(a, b)


def test_two_quantum_regions():
    deck = selfcon.load_deck(DOUBLE_WELL).with_overrides({"quantum.regions": [[45.0, 64.0], [64.5, 83.5]]})
    r = selfcon.solve(deck)
    assert r.converged
    e = r.subbands["electron"]
    assert set(e.region.tolist()) == {0, 1}
    # every state lives in exactly one region
    for k in range(e.energy.size):
        a, b = r.regions_nm[e.region[k]]
        outside = (r.z < a - 1e-9) | (r.z > b + 1e-9)
        assert np.all(e.wavefunction[outside, k] == 0.0)


def test_adaptive_damping_when_the_residual_grows(hemt4):
    # plain linear mixing with factor 1 overshoots at 4 K: the loop must halve the factor
    # instead of diverging, and end as a result with a message (issue 3, convergence control)
    deck = hemt4.with_overrides({"solver.mixing": 1.0})
    r = selfcon.solve(deck, method="linear", max_iterations=30)
    d = r.record["damping"]
    assert d[0] == 1.0 and d[-1] <= 0.125
    assert np.all(np.diff(d) <= 0)              # only ever damped in this run
    assert np.isfinite(r.residual) and r.residual < r.residual_history.max()
    assert not r.converged and "max_iterations" in r.message
    # Anderson recovers from the same bad start and converges
    r2 = selfcon.solve(deck, method="anderson", max_iterations=150)
    assert r2.converged
    assert r2.summary["electron_sheet_density_cm2"] == pytest.approx(
        selfcon.solve(hemt4).summary["electron_sheet_density_cm2"], rel=1e-4)


# ------------------------------------------------------------------ two free contacts
# Both ends free (zero field): Gauss's law (analytic) leaves the stack neutral as a whole,
# the electrons of the channel exactly the ionised donors of the sheet.  A 4 K
# modulation-doped stack used to start from one cell's neutral level, charged by the whole
# sheet, and the loop walked the band gap in clamped steps without converging.
FREE_4K = """
title = "modulation-doped stack, both ends free, 4 K"
temperature = 4.0
[surface]
contact = "free"
[substrate]
contact = "free"
[[layer]]
name = "cap"
material = "GaAs"
thickness = 10.0
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
sheet_donors = 5e11
[[layer]]
name = "spacer"
material = "AlGaAs"
x = 0.3
thickness = 20.0
[[layer]]
name = "channel"
material = "GaAs"
thickness = 300.0
[quantum]
regions = [[62.0, 160.0]]
"""


def test_two_free_contacts_give_a_neutral_stack_at_low_temperature():
    deck = selfcon.load_deck(FREE_4K)
    r = selfcon.solve(deck)
    assert r.converged, r.message
    s = r.summary
    donors = s["donor_sheet_density_cm2"]
    assert donors > 0.99 * 5e11                # the sheet is ionised: the electrons left it
    # neutral as a whole (analytic: zero field at both ends); the holes are negligible at 4 K
    net = donors + s["hole_sheet_density_cm2"] - s["electron_sheet_density_cm2"]
    assert abs(net) < 1e-6 * donors
    field = r.profile["electric_field"]
    assert abs(field[0]) < 1e-4 * np.abs(field).max() and abs(field[-1]) < 1e-4 * np.abs(field).max()
    assert r.main_channel["layer"] == "channel"


def test_neutral_flat_start_of_two_free_contacts():
    from selfcon.solver import poisson as P, steps
    st = selfcon.build_structure(selfcon.load_deck(FREE_4K))
    problem = steps.classical_problem(st)
    phi = steps.linear_start(st, steps.boundary_conditions(st))
    assert np.ptp(phi) == 0.0
    sheet = 5e11 * 1e-14                           # nm^-2
    assert abs(P.total_charge(problem, phi)) < 1e-9 * sheet
    # where no carrier the deck counts can balance the doping (acceptors, electrons only), the
    # first guess stays: there is no neutral flat potential to find
    p_only = selfcon.load_deck(FREE_4K.replace("sheet_donors = 5e11", "acceptors = 1e17")
                               + '[physics]\ncarriers = ["electron"]\n')
    st_p = selfcon.build_structure(p_only)
    prob_p = steps.classical_problem(st_p)
    assert steps.neutral_shift(prob_p, 0.123) == 0.123
