"""The multiband hole model in the self-consistent loop (physics.hole_model = kp4 | kp6):
the deck key, the k_par integral of the hole density, and solves of a GaAs 2DHG.

Every reference value names its source beside it.  Meshes are small.
"""
from pathlib import Path

import numpy as np
import pytest

import selfcon
from selfcon.constants import DOS2D_PER_M0
from selfcon.errors import DeckError
from selfcon.model.mesh import Mesh
from selfcon.solver import kp

def hole_deck(inputs_dir, tmp_path, model="kp6"):
    """inputs/design/2dhg_4K.toml (a Be-delta-doped 15 nm GaAs well, 4 K) with ``model`` holes
    and a smaller quantum region (spacer, well, some lower barrier) and fewer states."""
    text = (inputs_dir / "design" / "2dhg_4K.toml").read_text()
    text = text.replace('carriers = ["electron", "heavy_hole", "light_hole"]',
                        f'carriers = ["electron", "heavy_hole", "light_hole"]\nhole_model = "{model}"')
    text = text.replace("regions = [[45.0, 120.0]]", "regions = [[55.0, 100.0]]")
    text = text.replace("states = 8", "states = 4")
    p = tmp_path / f"hole_{model}.toml"
    p.write_text(text)
    return selfcon.load_deck(p)


def test_deck_key_and_its_canonical_text(inputs_dir, tmp_path):
    deck = hole_deck(inputs_dir, tmp_path, "kp4")
    assert deck.physics.hole_model == "kp4"
    assert deck.get("physics.hole_model") == "kp4"
    plain = deck.with_overrides({"physics.hole_model": "parabolic"})
    assert plain.physics.hole_model == "parabolic"
    assert selfcon.load_deck(inputs_dir / "design" / "2dhg_4K.toml").physics.hole_model == "parabolic"


def test_wurtzite_stacks_refuse_the_cubic_model(inputs_dir):
    deck = selfcon.load_deck(inputs_dir / "algan_gan_hemt.toml").with_overrides(
        {"physics.hole_model": "kp6"})
    with pytest.raises(DeckError) as err:
        selfcon.build_structure(deck)
    assert err.value.key == "physics.hole_model"


def test_spherical_bands_give_the_parabolic_density():
    """With g2 = g3 = 0 and uniform Luttinger parameters every band is parabolic with the mass
    1/g1 along z and in the plane (analytic: H = g1 k^2 on the diagonal), so each eigenstate
    holds (m/(2 pi hbar^2)) kT ln(1 + exp((E - EF)/kT)) holes; the annulus quadrature
    (piecewise linear in k^2) is exact for a parabola."""
    z = np.linspace(0.0, 30.0, 121)
    mesh = Mesh.from_nodes(z)
    zc = 0.5 * (z[1:] + z[:-1])
    ev = np.where((zc > 10) & (zc < 20), 0.0, -0.2)
    one = np.ones(zc.size)
    mat = kp.KpMaterial(5.0 * one, 0 * one, 0 * one, 0.34 * one, ev, 0 * one, 0 * one, 0 * one,
                        0 * one, 0 * one)
    kT, efp = 0.0259, -0.01
    phi = np.zeros(z.size)
    k_top = kp.fermi_sea_top(mesh.h, mesh.w, mat, phi, 4, efp, kT)
    kg, E, dens, _ = kp.region_dispersion(mesh.h, mesh.w, mat, phi, 4, 8, efp, kT, k_top)
    en, dos, weight, state = kp.annulus_states(kg, E, dens)
    sheets = kp.annulus_sheets(en, dos, state, 8, efp, kT)
    m = 1.0 / 5.0
    ref = 0.5 * DOS2D_PER_M0 * m * kT * np.logaddexp(0.0, (E[:, 0] - efp) / kT)   # analytic
    assert np.allclose(sheets, ref, rtol=1e-5)
    # and the density profile integrates to the same sheet
    w = mesh.w
    p = weight @ (dos * kT * np.logaddexp(0.0, (en - efp) / kT))
    assert float(np.dot(w, p)) == pytest.approx(float(ref.sum()), rel=1e-5)


#: the mixers of kp_solves (the default predictor-corrector, as instances to look at)
MIXERS: dict = {}


@pytest.fixture(scope="module")
def kp_solves(inputs_dir, tmp_path_factory):
    from selfcon.solver.mixers import PredictorCorrector
    tmp = tmp_path_factory.mktemp("kp")
    MIXERS.update({m: PredictorCorrector() for m in ("parabolic", "kp4")})
    return {m: selfcon.solve(hole_deck(inputs_dir, tmp, m), method=MIXERS[m]) for m in ("parabolic", "kp4")}


def test_2dhg_with_kp4_converges_and_keeps_gauss(kp_solves):
    """The 2DHG deck converges with the multiband holes in <= 15 iterations (the issue's
    demand; 14 with the plain predictor-corrector step, 7 measured with the loop's
    extrapolation for the multiband holes, selfcon.solver.loop.ACCELERATED_HISTORY, so
    <= 9 here) and Gauss's law holds to the loop's tolerance (analytic)."""
    from selfcon.solver.loop import ACCELERATED_HISTORY
    r = kp_solves["kp4"]
    assert r.converged and r.iterations <= 9
    assert MIXERS["kp4"].history == ACCELERATED_HISTORY and MIXERS["parabolic"].history == 0
    assert r.summary["gauss_residual"] < 1e-6
    # the hole sheet is fed by the acceptor sheet: 2e12 less what the gate and the substrate
    # take; the parabolic model of the same deck holds the same charge to ~10 % (the charge is
    # set by electrostatics; the subband masses move it only through the quantum capacitance)
    ps_kp = r.summary["hole_sheet_density_cm2"]
    ps_par = kp_solves["parabolic"].summary["hole_sheet_density_cm2"]
    assert 1e11 < ps_kp < 3e12
    assert ps_kp == pytest.approx(ps_par, rel=0.15)


def test_hole_kp_datasets_in_the_file(kp_solves, tmp_path):
    """/subbands/hole_kp is written as schema.py declares it and read back unchanged."""
    r = kp_solves["kp4"]
    h = r.hole_kp
    n, m = h["dispersion"].shape
    assert m == kp.K_POINTS and h["k_parallel"][0] == 0.0
    assert h["wavefunction"].shape == (r.z.size, n, 4)
    path = tmp_path / "kp.h5"
    r.save(path)
    back = selfcon.load_result(path)
    assert set(back.hole_kp) == set(h)
    for key, arr in h.items():
        assert np.array_equal(np.asarray(back.hole_kp[key]), np.asarray(arr), equal_nan=True), key
    import h5py
    with h5py.File(path, "r") as f:
        g = f["subbands/hole_kp"]
        assert g["dispersion"].attrs["units"] == "eV"
        assert "axial" in g["dispersion"].attrs["direction"]
        assert g["dispersion_110"].attrs["direction"] == "[110]"
        assert g["k_parallel"].attrs["units"] == "nm-1"
    # a parabolic result has no such group
    assert kp_solves["parabolic"].hole_kp == {}
    # netCDF-C and xarray read the group with its named dimensions
    import netCDF4
    with netCDF4.Dataset(path) as d:
        g = d["subbands/hole_kp"]
        assert g["dispersion"].dimensions == ("kp_state", "k_parallel")
        assert g["wavefunction"].dimensions == ("z", "kp_state", "component")
        assert np.allclose(g["k_parallel"][:], h["k_parallel"])
    tree = back.to_xarray()
    assert tree["subbands/hole_kp"].to_dataset()["dispersion"].dims == ("kp_state", "k_parallel")


def test_each_spin_branch_holds_its_fermi_circle(kp_solves):
    """Each state's holes against an independent quadrature of its own axial E(k): a cubic
    spline through the grid (scipy.interpolate.CubicSpline) integrated with the Fermi function
    on 20001 points, n = int k dk / (2 pi) f (one spin branch; reference scipy), to 1 %; and
    against its Fermi circle k_F^2 / (4 pi) (analytic at T = 0; 8 %: at 4 K kT is comparable to
    the energy steps of this flat heavy-hole band near EF).  The asymmetric well splits the
    two branches of the ground pair (spin_splitting > 0)."""
    from scipy.interpolate import CubicSpline
    r = kp_solves["kp4"]
    h = r.hole_kp
    occ = np.asarray(h["occupation"]) / 1e14                       # nm^-2
    k = np.asarray(h["k_parallel"])
    kk = np.linspace(0.0, k[-1], 20001)
    kT = 8.617333262e-5 * r.temperature                            # eV (CODATA k_B)
    for i in np.flatnonzero(occ > 1e-6):
        e = CubicSpline(k, h["dispersion"][i])(kk)
        f = 0.5 * (1.0 + np.tanh(0.5 * e / kT))                    # hole occupation, EF = 0
        assert occ[i] == pytest.approx(np.trapezoid(kk * f, kk) / (2 * np.pi), rel=0.01)
    kf = np.asarray(h["k_fermi"])
    for i in np.flatnonzero(np.isfinite(kf)):
        assert occ[i] == pytest.approx(kf[i] ** 2 / (4 * np.pi), rel=0.08)
    assert h["spin_splitting"][0] > 1e-4


def test_gaas_2dhg_mass_at_the_fermi_level(kp_solves):
    """The heavy-hole ground pair of a GaAs 2DHG of ~3e11 cm^-2: its density-of-states mass at
    EF (the mean of the two spin branches) lies in the measured 0.3-0.5 m0 (cyclotron masses of
    GaAs 2D holes, H. L. Stormer et al., Phys. Rev. Lett. 51, 126 (1983), from memory), some
    three times the parabolic model's 1/(g1 + g2) = 0.11 m0 (GaAs g1 = 6.98, g2 = 2.06,
    Vurgaftman et al. 2001)."""
    h = kp_solves["kp4"].hole_kp
    p_s = kp_solves["kp4"].summary["hole_sheet_density_cm2"]
    assert 1e11 < p_s < 4e11
    m_pair = 0.5 * (h["mass_fermi"][0] + h["mass_fermi"][1])
    assert 0.3 <= m_pair <= 0.5
    assert m_pair > 2.5 / (6.98 + 2.06)


@pytest.mark.slow
def test_gaas_2dhg_mass_rises_with_density(inputs_dir, tmp_path):
    """The pair mass at EF grows with the density (the heavy-hole band flattens away from
    k = 0 by its coupling to the light hole; the trend of Stormer et al. 1983, from memory)."""
    masses = []
    for sheet in ("1.5e12", "3.0e12"):
        hole_deck(inputs_dir, tmp_path, "kp4")
        path = tmp_path / "hole_kp4.toml"
        path.write_text(path.read_text().replace("sheet_acceptors = 3.0e12",
                                                 f"sheet_acceptors = {sheet}"))
        r = selfcon.solve(selfcon.load_deck(path))
        h = r.hole_kp
        masses.append((r.summary["hole_sheet_density_cm2"],
                       0.5 * (h["mass_fermi"][0] + h["mass_fermi"][1])))
    (p1, m1), (p2, m2) = masses
    assert p1 < p2 and m1 < m2


def test_plot_draws_the_hole_dispersion(kp_solves):
    from matplotlib.figure import Figure
    from selfcon.output.plot import draw_band_diagram
    fig = Figure(figsize=(12, 9), dpi=100)
    _, _, panel, _ = draw_band_diagram(fig, kp_solves["kp4"])
    assert "hole subbands" in panel.get_title()
    labels = [ln.get_label() for ln in panel.get_lines()]
    assert {"axial", "[100]", "[110]"} <= set(labels)


def test_headings_name_the_hole_model(kp_solves):
    from selfcon.output.heading import conditions
    assert "4x4 Luttinger-Kohn holes" in conditions(kp_solves["kp4"])
    assert "Luttinger" not in conditions(kp_solves["parabolic"])


def test_summaries_list_the_multiband_hole_states(kp_solves):
    import io
    from rich.console import Console
    from selfcon.output.report import plain_summary, print_summary, summary_figures, to_json
    fig = summary_figures(kp_solves["kp4"])
    rows = fig["hole_kp"]
    h = kp_solves["kp4"].hole_kp
    assert [r["index"] for r in rows][:2] == [0, 1]
    assert rows[0]["occupation_cm2"] == pytest.approx(float(h["occupation"][0]))
    assert any(line.startswith("multiband holes: 2 occupied states") for line in plain_summary(fig))
    # the headline count includes the multiband subbands (Kramers pairs): the 2DHG's one
    # populated pair, below the holes' E_F at 4 K (a degenerate gas: common practice)
    assert fig["occupied_subbands"] == 1 and fig["below_fermi_subbands"] >= 1
    assert any("1 occupied subband (1 below E_F)" in line for line in plain_summary(fig))
    out = io.StringIO()
    print_summary(fig, Console(file=out, width=160))
    assert "Multiband hole states" in out.getvalue()
    to_json(fig)                                                   # JSON-ready
    assert summary_figures(kp_solves["parabolic"])["hole_kp"] == []


def test_the_hole_channel_holds_the_multiband_states(kp_solves):
    """With multiband holes the 2DHG's channel is a hole channel fed by the kp states: each state
    goes to the channel holding most of its k_par = 0 density sum_j |psi_j|^2, so the channel
    holds both spin branches of the ground pair, and its sheet density is their populations plus
    the classical holes inside it, the states' tails outside its interval included (the
    channel rule of selfcon/output/channels.py).  Checks: that sheet equals the integral of
    the hole density over all depths to 1e-6 relative (the invariant sum of occupations =
    integral of p dz, analytic; every hole of this deck sits in the one channel), and the
    integral over the channel's interval plus the tails (1.2 % here, from the k_par = 0
    shapes) to 1e-3 (the tails at k_par > 0 differ slightly); the main channel is the hole
    channel and /summary carries its figures; E0 is the ground pair's energy, E1 - E0 the gap
    to the next pair (both spin branches of a pair are one subband), the in-plane mass the
    mean of the pair's masses at EF (/subbands/hole_kp/mass_fermi, the pair mass of
    test_gaas_2dhg_mass_at_the_fermi_level)."""
    r = kp_solves["kp4"]
    h = r.hole_kp
    rows = [c for c in r.channels if c["carrier"] == "hole"]
    assert len(rows) == 1
    ch = rows[0]
    assert ch["main"] and r.summary["main_channel"] == ch["name"]
    assert 66.0 < ch["top_nm"] and ch["bottom_nm"] < 85.0          # the deck's well: 67-82 nm
    z = np.asarray(r.z)
    w = Mesh.from_nodes(z).w
    p = np.asarray(r.profile["hole_density"]) * 1e-7                # cm^-3 * cm/nm -> cm^-2 per nm
    inside = (z >= ch["top_nm"] - 1e-9) & (z <= ch["bottom_nm"] + 1e-9)
    # the states' tails outside the interval: their populations times the part of their k_par = 0
    # density outside (the k_par = 0 shape stands for all k_par: a 1e-3-level correction)
    dens = np.sum(np.asarray(h["wavefunction"]) ** 2, axis=2)        # (N, k)
    dens = dens / (w @ dens)
    tails = float(np.asarray(h["occupation"]) @ (w[~inside] @ dens[~inside]))
    assert ch["sheet_density"] == pytest.approx(float(w[inside] @ p[inside]) + tails, rel=1e-3)
    assert ch["sheet_density"] == pytest.approx(float(w @ p), rel=1e-6)
    assert ch["sheet_density"] == pytest.approx(r.summary["hole_sheet_density_cm2"], rel=1e-6)
    assert r.summary["channel_hole_sheet_density_cm2"] == pytest.approx(ch["sheet_density"], rel=1e-12)
    # its subband figures come from the kp states (rows 0, 1 the ground pair, 2, 3 the next)
    e = np.asarray(h["energy"])
    assert ch["ground_energy"] == pytest.approx(-(e[0] - r.summary["hole_fermi_level_eV"]), abs=1e-12)
    assert ch["spacing"] == pytest.approx(e[0] - e[2], abs=1e-12)
    assert ch["spacing"] > 1e-3                                      # not the 0 of a Kramers pair
    assert r.summary["E1_minus_E0_eV"] == ch["spacing"]
    assert r.summary["E0_minus_EF_eV"] == ch["ground_energy"]
    assert ch["occupied_subbands"] == 1                              # one pair holds the holes
    assert ch["in_plane_mass"] == pytest.approx(0.5 * (h["mass_fermi"][0] + h["mass_fermi"][1]), rel=1e-12)
    assert r.summary[f"channel.{ch['name']}.sheet_density_cm2"] == ch["sheet_density"]
    # /subbands/hole_kp/channel: the ground pair is the hole channel's (its index in /channels)
    j = [c["name"] for c in r.channels].index(ch["name"])
    assert list(np.asarray(h["channel"])[:2]) == [j, j]
    from selfcon.output.report import summary_figures
    assert summary_figures(r)["hole_kp"][0]["channel"] == ch["name"]


# ------------------------------------------------------------------ wrong-curving bulk holes

def barrier_deck(inputs_dir, tmp_path, model="kp4", composition='lattice_matched = "GaAs"'):
    """hole_deck with InGaP (lattice-matched to GaAs unless ``composition`` says otherwise) as
    spacer and lower barrier: both inside the quantum region."""
    text = (inputs_dir / "design" / "2dhg_4K.toml").read_text()
    text = text.replace('carriers = ["electron", "heavy_hole", "light_hole"]',
                        f'carriers = ["electron", "heavy_hole", "light_hole"]\nhole_model = "{model}"')
    text = text.replace("regions = [[45.0, 120.0]]", "regions = [[55.0, 100.0]]").replace("states = 8", "states = 4")
    parts = text.split("[[layer]]")
    for i, part in enumerate(parts):
        if 'name = "spacer"' in part or 'name = "lower_barrier"' in part:
            parts[i] = part.replace('material = "AlGaAs"\nx = 0.30', f'material = "InGaP"\n{composition}')
    p = tmp_path / f"ingap_{model}.toml"
    p.write_text("[[layer]]".join(parts))
    return p


def test_shipped_kp_decks_have_no_wrong_curving_layer(inputs_dir, kp_solves):
    """GaAs, Al0.3GaAs, In0.2GaAs, Ge and Si0.2Ge0.8 (2001 review's Luttinger parameters;
    Si/Ge from the library) curve the right way in every direction the models use: the
    smallest inverse mass of the layers of the three shipped multiband decks is positive, and
    the AlGaAs 2DHG solve with kp4 gets no such warning."""
    from selfcon.output import diagnostics as dg
    for name in ("2dhg_kp6_4K", "ingaas_hole_well_kp", "strained_ge_2dhg_4K"):
        st = selfcon.build_structure(selfcon.load_deck(inputs_dir / "design" / f"{name}.toml"))
        assert st.hole_model in ("kp4", "kp6")
        assert dg.kp_curvature_findings(st) == []
        nb = kp.MODELS[st.hole_model]
        for r in st.regions:
            g = np.stack([st.cell[k][r[0]:r[1]] for k in ("gamma1", "gamma2", "gamma3")], axis=1)
            low = min(c.inverse_mass for t in np.unique(g, axis=0) for c in kp.bulk_curvatures(*t, nb))
            assert low > 0.2               # GaAs far from the zone centre, g1 + g2 - 3 g3 = +0.25
    r = kp_solves["kp4"]                   # design_warnings ran on it with its structure
    assert r.hole_kp and not any("curves the wrong way" in w for w in r.warnings)


def test_ingap_barrier_in_the_hole_region_is_named(inputs_dir, tmp_path):
    """Lattice-matched InGaP (x = 0.485, the 2001 review's gammas interpolated linearly:
    g1 4.549, g2 1.028, g3 2.528) has g1 - 2 g3 = -0.506 (arithmetic): the solve names both
    barrier layers, the closed form, the direction and what is unreliable; the line reaches
    the result file's warnings.  A result whose holes were solved in no region gets none."""
    import dataclasses
    from selfcon.output import diagnostics as dg
    deck = selfcon.load_deck(barrier_deck(inputs_dir, tmp_path))
    st = selfcon.build_structure(deck)
    r = selfcon.solve(deck, structure=st)
    assert r.converged
    lines = [w for w in r.warnings if "curves the wrong way" in w]
    assert len(lines) == 1
    line = lines[0]
    for part in ("layers 'spacer', 'lower_barrier'", "InGaP x = 0.485", "kp4 model",
                 "gamma1 - 2 gamma3 = -0.506 along [111]", "the [110] line",
                 "the loop's axial model", "are unreliable", "[material.NAME]"):
        assert part in line, part
    assert "gamma1 - sqrt(gamma2^2 + 3 gamma3^2)" not in line       # +0.054 along [101]: fine
    path = tmp_path / "ingap.h5"
    r.save(path)
    assert line in selfcon.load_result(path).warnings
    assert dg.check_kp_hole_bands(dataclasses.replace(r, hole_kp={}), st) == []
    assert dg.check_kp_hole_bands(r, st) == [line]


def test_warped_line_alone_and_the_far_regime_of_kp6(inputs_dir, tmp_path):
    """In0.6Ga0.4P (g1 4.668, g2 1.156, g3 2.432, linear in x): g1 - 2 g3 = -0.196 along [111]
    but the axial model's smallest zone-centre 1/m is +0.123 (arithmetic on the closed forms):
    with kp4 the line says the loop is unaffected and names the [110] line only.  With kp6 the
    6x6 far from the zone centre adds g1 + g2 - 3 g3 = -1.47 (arithmetic), which reaches the
    loop too.  In0.75Ga0.25P: kp4 is clean, kp6 is named for the far regime alone."""
    from selfcon.output import diagnostics as dg
    path = barrier_deck(inputs_dir, tmp_path, "kp4", "x = 0.6")
    found = dg.kp_curvature_findings(selfcon.build_structure(selfcon.load_deck(path)))
    assert len(found) == 1
    text = dg.kp_curvature_text(found[0])
    assert "gamma1 - 2 gamma3 = -0.196 along [111]" in text
    assert "the loop's axial model is unaffected (its smallest 1/m there is +0.123)" in text
    assert "warped [110] output line (/subbands/hole_kp/dispersion_110)" in text and "[100]" not in text
    kp6 = dg.kp_curvature_findings(selfcon.build_structure(
        selfcon.load_deck(path).with_overrides({"physics.hole_model": "kp6"})))
    text = dg.kp_curvature_text(kp6[0])
    assert "gamma1 + gamma2 - 3 gamma3 = -1.47 along [101] / [110]" in text
    assert "unaffected" not in text
    path = barrier_deck(inputs_dir, tmp_path, "kp4", "x = 0.75")
    assert dg.kp_curvature_findings(selfcon.build_structure(selfcon.load_deck(path))) == []
    kp6 = dg.kp_curvature_findings(selfcon.build_structure(
        selfcon.load_deck(path).with_overrides({"physics.hole_model": "kp6"})))
    assert {c.regime for c in kp6[0]["bad"]} == {"large k"}
    assert 'hole_model = "kp4"' in dg.kp_curvature_text(kp6[0])


def test_check_command_lists_wrong_curving_layers(inputs_dir, tmp_path, run_cli):
    """`selfcon check` shows the finding before any solve, and --json carries it."""
    import json
    path = barrier_deck(inputs_dir, tmp_path)
    code, out, _ = run_cli("check", path)
    assert code == 0 and "curves the wrong way" in " ".join(out.split())
    assert "kp4 multiband holes" in out
    code, out, _ = run_cli("check", "--json", path)
    fig = json.loads(out)
    (f,) = fig["kp_hole_bands"]
    assert f["layers"] == ["spacer", "lower_barrier"] and f["model"] == "kp4"
    assert any(c["combination"] == "gamma1 - 2 gamma3" and c["inverse_mass"] == pytest.approx(-0.506, abs=1e-3)
               for c in f["curvatures"])
    code, out, _ = run_cli("check", "--json", inputs_dir / "design" / "2dhg_kp6_4K.toml")
    assert json.loads(out)["kp_hole_bands"] == []


def test_two_wells_of_multiband_holes_converge(inputs_dir):
    """inputs/design/strained_ge_2dhg_4K.toml with a free surface and an ohmic substrate at
    4 K: the surface-side barrier by the acceptor sheet holds holes as well as the Ge channel,
    and states of the two wells cross within the k_par grid near the Fermi level.  Joined by
    their energy rank (the i-th lowest state of each k_par), a crossing that moves past a
    grid point moved half an annulus of holes between the wells, and the loop stalled at
    max |dphi| ~ 1e-4 V ('oscillates', 28 iterations at this mesh); linked by their overlap
    (selfcon.solver.kp.linked_states) it converges.  Check values: Gauss's law over the stack
    (analytic: zero field at the free surface, so the holes are the 1e12 cm^-2 ionised
    acceptors (ionization = "full") plus eps E / q at the substrate end, and no electrons),
    and the same stack with parabolic holes (its sheet is set by the same electrostatics:
    0.09 % apart here)."""
    import tomllib

    from selfcon.constants import EPS0, Q
    from selfcon.input.deck import dumps_toml
    data = tomllib.loads((inputs_dir / "design" / "strained_ge_2dhg_4K.toml").read_text())
    data["surface"] = {"contact": "free"}
    data["substrate"] = {"contact": "ohmic"}
    deck = selfcon.load_deck(dumps_toml(data), ["mesh.step=0.5"])
    assert deck.physics.hole_model == "kp4" and deck.temperature == 4.0
    r = selfcon.solve(deck)
    assert r.converged
    ps = r.summary["hole_sheet_density_cm2"]
    assert r.summary["electron_sheet_density_cm2"] < 1e-6 * ps
    eps_end = float(selfcon.build_structure(deck).cell["eps"][-1])
    leak = eps_end * EPS0 * 1e2 * float(r.profile["electric_field"][-1]) / Q * 1e-4   # cm^-2
    assert ps == pytest.approx(1e12 + leak, rel=1e-4)
    assert -0.2e12 < leak < 0.0                        # the substrate takes a few per cent
    plain = selfcon.solve(deck.with_overrides({"physics.hole_model": "parabolic"}))
    assert plain.converged
    assert r.iterations <= plain.iterations + 2          # 7 and 7 measured
    assert ps == pytest.approx(plain.summary["hole_sheet_density_cm2"], rel=0.01)


def test_whole_solve_fallback_links_by_rank_and_gives_the_same_answer(monkeypatch):
    # where the reduced basis is not used (kp.reduced_dispersion gives None) the region's
    # states come from the whole block solve, linked at neighbouring k_par by their energy
    # rank (identity links); both paths solve one model, the reduced one checked state by
    # state against 0.05 meV (kp.BASIS_TOL), so p_s agrees to ~1e-6 (measured 5e-7)
    path = Path(__file__).resolve().parents[1] / "inputs" / "design" / "2dhg_kp6_4K.toml"
    reduced = selfcon.solve(selfcon.load_deck(str(path), ["mesh.step=0.5"]))
    monkeypatch.setattr(kp, "reduced_dispersion", lambda *a, **k: None)
    whole = selfcon.solve(selfcon.load_deck(str(path), ["mesh.step=0.5"]))
    assert reduced.converged and whole.converged, whole.message
    assert whole.iterations <= reduced.iterations + 1
    ps = reduced.summary["hole_sheet_density_cm2"]
    assert abs(whole.summary["hole_sheet_density_cm2"] - ps) < 1e-5 * ps
