"""Wurtzite nitrides (issue 15): GaN, AlN, InN and their alloys, c-plane strain, polarization
sheets in Poisson, the 2DEG of AlGaN/GaN HEMTs and the nitride design warnings.

Every check value names its source beside it.  The band parameters are those of Vurgaftman
and Meyer, J. Appl. Phys. 94, 3675 (2003) ("VM 2003"), the spontaneous polarization that of
Ambacher et al., J. Phys.: Condens. Matter 14, 3399 (2002) ("Ambacher 2002"), both recalled
from memory (as the library says); the tests retype the published numbers rather than read
them back from the library, so that a transcription slip in either shows.
"""
from __future__ import annotations

import math
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest

import selfcon
from selfcon.constants import C_M2_PER_NM2, CM2_PER_NM2, CM3_PER_NM3, Q, Q_EPS0
from selfcon.errors import SelfconInputError
from selfcon.input import materials as M
from selfcon.model.structure import build_structure

ROOT = Path(__file__).resolve().parents[1]

#: VM 2003 wurtzite tables (from memory): Eg(0) eV, Varshni alpha meV/K, beta K, a and c in Å
VM = {"GaN": (3.510, 0.909, 830.0, 3.189, 5.185),
      "AlN": (6.25, 1.799, 1462.0, 3.112, 4.982),
      "InN": (0.78, 0.245, 624.0, 3.545, 5.703)}
#: VM 2003 (from memory): C13, C33 (GPa), e31, e33 (C/m^2); Ambacher 2002: P_sp (C/m^2)
PIEZO = {"GaN": (106.0, 398.0, -0.35, 1.27, -0.034),
         "AlN": (108.0, 373.0, -0.50, 1.79, -0.090),
         "InN": (92.0, 224.0, -0.57, 0.97, -0.042)}
#: Ambacher 2002 bowing of the spontaneous polarization, P = (1-x) P0 + x P1 + b x(1-x) C/m^2
PSP_BOWING = {"AlGaN": ("GaN", "AlN", 0.019), "InGaN": ("GaN", "InN", 0.038),
              "InAlN": ("AlN", "InN", 0.071)}


def one(name, x=None, T=300.0):
    p = M.cell_parameters(name, np.array([np.nan if x is None else x]), T)
    return {k: float(v[0]) for k, v in p.items()}


def deck_text(layers, *, surface='contact = "schottky"\nbarrier = 1.0', substrate='material = "GaN"',
              physics="", regions=None, extra=""):
    """A small nitride deck: ``layers`` as (name, material, x or None, thickness)."""
    out = ['title = "nitride test"', "temperature = 300.0", "[surface]", surface,
           "[substrate]", 'contact = "free"', substrate]
    for name, mat, x, t in layers:
        out += ["[[layer]]", f'name = "{name}"', f'material = "{mat}"', f"thickness = {t}"]
        if x is not None:
            out.append(f"x = {x}")
    if physics:
        out += ["[physics]", physics]
    if regions is not None:
        out += ["[quantum]", f"regions = {regions}", "states = 8"]
    return "\n".join(out + [extra]) + "\n"


def hemt(x, d, *, barrier=None, cap=0.0, physics="", channel=60.0, buffer=200.0, regions=True):
    """Al_x Ga_(1-x) N barrier of thickness d on GaN (relaxed substrate), free bottom."""
    layers = ([("cap", "GaN", None, cap)] if cap else []) + [
        ("barrier", "AlGaN", x, d), ("channel", "GaN", None, channel), ("buffer", "GaN", None, buffer)]
    phib = 0.84 + 1.3 * x if barrier is None else barrier
    top = cap + d + channel
    return selfcon.load_deck(deck_text(layers, surface=f'contact = "schottky"\nbarrier = {phib}',
                                       physics=physics, regions=f"[[0.0, {top}]]" if regions else None))


# ------------------------------------------------------------------ materials

@pytest.mark.parametrize("name", ["GaN", "AlN", "InN"])
def test_binary_gap_varshni_and_lattice(name):
    eg0, alpha, beta, a, c = VM[name]
    for T in (0.0, 300.0):
        p = one(name, T=T)
        # Varshni: Eg(T) = Eg(0) - alpha T^2 / (T + beta), VM 2003's form and numbers
        assert p["eg_gamma"] == pytest.approx(eg0 - alpha * 1e-3 * T * T / (T + beta), abs=1e-12)
    assert one(name)["lattice"] == pytest.approx(a / 10.0, abs=1e-12)      # a at 300 K, nm
    assert one(name)["lattice_c"] == pytest.approx(c / 10.0, abs=1e-12)
    assert M.crystal(name) == "wurtzite" and M.crystal("GaAs") == "zincblende"


def test_alloy_gap_bowing():
    # VM 2003 gap bowing (from memory): AlGaN 0.7, InGaN 1.4, InAlN 2.5 eV
    for name, (e0, e1, _), b in (("AlGaN", PSP_BOWING["AlGaN"], 0.7),
                                 ("InGaN", PSP_BOWING["InGaN"], 1.4),
                                 ("InAlN", PSP_BOWING["InAlN"], 2.5)):
        for x in (0.1, 0.3, 0.5):
            want = (1 - x) * one(e0)["eg_gamma"] + x * one(e1)["eg_gamma"] - b * x * (1 - x)
            assert one(name, x)["eg_gamma"] == pytest.approx(want, abs=1e-12), (name, x)


def test_spontaneous_polarization_is_nonlinear():
    # Ambacher 2002: P_sp(x) = (1-x) P0 + x P1 + b x(1-x) with the binaries -0.034 (GaN),
    # -0.090 (AlN), -0.042 (InN) C/m^2 and b above
    for name, (e0, e1, b) in PSP_BOWING.items():
        for x in np.linspace(0.0, 1.0, 11):
            want = (1 - x) * PIEZO[e0][4] + x * PIEZO[e1][4] + b * x * (1 - x)
            assert one(name, x)["psp"] == pytest.approx(want, abs=1e-12), (name, x)


def test_wurtzite_hole_masses_chuang_chang():
    # Chuang and Chang, Phys. Rev. B 54, 2491 (1996), k = 0 masses, with VM 2003's GaN
    # A1..A4 = -7.21, -0.44, 6.68, -3.46, crystal field 10 meV, spin-orbit 17 meV (from memory)
    a1, a2, a3, a4, dcr, dso = -7.21, -0.44, 6.68, -3.46, 0.010, 0.017
    d2 = dso / 3
    half = (dcr - d2) / 2
    root = math.sqrt(half ** 2 + 2 * d2 ** 2)
    f_lh = (half + root) / (2 * root)
    p = one("GaN")
    assert p["m_hh_z"] == pytest.approx(-1 / (a1 + a3), rel=1e-12)           # 1.887 m0 along c
    assert p["m_hh_par"] == pytest.approx(-1 / (a2 + a4), rel=1e-12)          # in the c plane
    assert p["m_lh_z"] == pytest.approx(-1 / (a1 + f_lh * a3), rel=1e-12)
    assert p["m_lh_par"] == pytest.approx(-1 / (a2 + f_lh * a4), rel=1e-12)
    assert p["m_ch_z"] == pytest.approx(-1 / (a1 + (1 - f_lh) * a3), rel=1e-12)
    # the edges: heavy hole on top of GaN (crystal field > 0), E_hh - E_lh from the same model
    assert p["ev_hh"] - p["ev_lh"] == pytest.approx(dcr + d2 - (half + root), abs=1e-12)
    # AlN: a negative crystal field (-169 meV, VM 2003) puts the Z-like light hole on top
    q = one("AlN")
    assert q["ev_lh"] > q["ev_hh"] and q["m_lh_z"] < 0.5 < q["m_lh_par"]


def test_describe_lists_wurtzite_parameters_only():
    rows = {r["parameter"]: r for r in M.describe("GaN")}
    assert "spontaneous_polarization" in rows and "luttinger_gamma1" not in rows
    assert "Ambacher" in rows["spontaneous_polarization"]["source"]
    assert all(r["source"] for r in rows.values())
    zb = {r["parameter"] for r in M.describe("GaAs")}
    assert "piezo_e31" not in zb and "luttinger_gamma1" in zb


def test_inaln_lattice_matched_to_gan():
    # Vegard with VM 2003's a: x = (a_AlN - a_GaN) / (a_AlN - a_InN) = 0.077 / 0.433 = 0.1778
    x, _ = M.lattice_matched("InAlN", "GaN")
    assert float(x[0]) == pytest.approx((3.112 - 3.189) / (3.112 - 3.545), abs=1e-9)


# ------------------------------------------------------------------ strain and polarization

def closed_form_sigma(x):
    """sigma (C/m^2) at Al_x Ga_(1-x) N on relaxed GaN, metal face: Ambacher 2002,
    sigma = P_sp(GaN) - P_sp(x) - P_pz(x), P_pz = 2 eps (e31 - e33 C13/C33), eps = (a_GaN - a)/a,
    every constant linear in x but P_sp (bowed)."""
    lin = lambda i: (1 - x) * PIEZO["GaN"][i] + x * PIEZO["AlN"][i]  # noqa: E731
    a = (1 - x) * VM["GaN"][3] + x * VM["AlN"][3]
    eps = (VM["GaN"][3] - a) / a
    psp = lin(4) + 0.019 * x * (1 - x)
    ppz = 2 * eps * (lin(2) - lin(3) * lin(0) / lin(1))
    return PIEZO["GaN"][4] - psp - ppz


@pytest.mark.parametrize("x", [0.1, 0.2, 0.3, 0.4])
def test_sheet_at_algan_on_gan_matches_closed_form(x):
    st = build_structure(hemt(x, 10.0, regions=False))
    first, second = st.interfaces()               # barrier/channel, channel/buffer
    sigma = first["sigma_nm2"] * C_M2_PER_NM2     # the 2DEG side
    assert sigma == pytest.approx(closed_form_sigma(x), rel=1e-6)
    assert sigma > 0 and second["sigma_nm2"] == 0.0       # GaN on GaN
    assert st.sheet_fixed[0] == 0.0 and st.sheet_fixed[-1] == 0.0   # the two ends carry none


def test_sheet_at_x03_against_the_quoted_value():
    # Ambacher 2002 (their figure of the polarization-induced sheet charge of AlGaN/GaN
    # against x) reads about 1.5e13 cm^-2 at x = 0.3, metal face on relaxed GaN: from memory,
    # uncertain, hence +-10 %
    st = build_structure(hemt(0.3, 10.0, regions=False))
    assert st.interfaces()[0]["sigma_nm2"] * CM2_PER_NM2 == pytest.approx(1.5e13, rel=0.10)


def test_polarity_and_factor():
    base = build_structure(hemt(0.3, 10.0, regions=False)).interfaces()[0]["sigma_nm2"]
    nface = build_structure(hemt(0.3, 10.0, regions=False, physics='polarity = "nitrogen"'))
    half = build_structure(hemt(0.3, 10.0, regions=False, physics="polarization = 0.5"))
    off = build_structure(hemt(0.3, 10.0, regions=False, physics="polarization = 0"))
    assert nface.interfaces()[0]["sigma_nm2"] == pytest.approx(-base, rel=1e-14)   # sign flips
    assert half.interfaces()[0]["sigma_nm2"] == pytest.approx(0.5 * base, rel=1e-14)
    assert not np.any(off.sheet_fixed)
    # a zincblende stack has no polarization at all
    assert not np.any(build_structure(selfcon.load_deck(ROOT / "inputs" / "hemt_4K.toml")).sheet_fixed)


def test_graded_layer_bound_charge_sums_to_the_step():
    # a graded AlGaN layer: the bound charge spreads over its nodes (rho_b = -dP_z/dz); the
    # total between two unstrained GaN layers is zero (telescoping sum: analytic)
    text = deck_text([("top", "GaN", None, 5.0), ("graded", "AlGaN", "[0.0, 0.3]", 20.0),
                      ("bottom", "GaN", None, 50.0)])
    st = build_structure(selfcon.load_deck(text))
    assert abs(np.sum(st.sheet_fixed)) < 1e-14
    inner = st.sheet_fixed[(st.z > 5.0 + 1e-9) & (st.z < 25.0 - 1e-9)]
    assert np.count_nonzero(inner) > 5 and np.all(inner <= 0)   # P_z grows with x: negative bulk charge


def test_strained_edges_of_algan_on_gan_by_hand():
    # Chuang-Chang c-plane strain with VM 2003 potentials (from memory): a1, a2, D1..D4 =
    # GaN -4.9, -11.3, -3.7, 4.5, 8.2, -4.1; AlN -3.4, -11.8, -17.1, 7.9, 8.8, -3.9 (eV),
    # a_cz = a1 + D1, a_ct = a2 + D2; every constant linear in x
    x = 0.3
    st = build_structure(hemt(x, 10.0, regions=False))
    c = int(np.flatnonzero(st.cell_layer == 0)[0])
    lin = lambda g, a: (1 - x) * g + x * a  # noqa: E731
    a = lin(3.189, 3.112)
    exx = (3.189 - a) / a
    ezz = -2 * lin(106, 108) / lin(398, 373) * exx
    assert st.cell["eps_xx"][c] == pytest.approx(exx, rel=1e-12)
    assert st.cell["eps_zz"][c] == pytest.approx(ezz, rel=1e-12)
    d1, d2, d3, d4 = lin(-3.7, -17.1), lin(4.5, 7.9), lin(8.2, 8.8), lin(-4.1, -3.9)
    dec = (lin(-4.9, -3.4) + d1) * ezz + 2 * (lin(-11.3, -11.8) + d2) * exx
    unstrained = one("AlGaN", x)
    assert st.cell["ec_gamma"][c] - unstrained["ec_gamma"] == pytest.approx(dec, abs=1e-12)
    # heavy hole: Delta1 + Delta2 + theta + lambda moves by theta + lambda
    dhh = d1 * ezz + 2 * d2 * exx + d3 * ezz + 2 * d4 * exx
    assert st.cell["ev_hh"][c] - unstrained["ev_hh"] == pytest.approx(dhh, abs=1e-12)
    # the GaN channel on GaN: unstrained
    g = int(np.flatnonzero(st.cell_layer == 1)[0])
    assert st.cell["eps_xx"][g] == 0.0 and st.cell["ec_gamma"][g] == pytest.approx(one("GaN")["ec_gamma"])


# ------------------------------------------------------------------ bad input: exit 2

@pytest.mark.parametrize("layers, substrate, physics, key, words", [
    ([("b", "AlGaN", 0.3, 20.0), ("c", "GaN", None, 100.0)], "", "", "substrate.material",
     "lattice it grows on"),
    ([("b", "AlGaN", 0.3, 20.0), ("c", "GaAs", None, 100.0)], 'material = "GaN"', "",
     "layer[1].material", "not modelled"),
    ([("b", "AlGaN", 0.3, 20.0), ("c", "GaN", None, 100.0)], 'material = "GaAs"', "",
     "substrate.material", "zincblende"),
    ([("b", "AlGaAs", 0.3, 20.0), ("c", "GaAs", None, 100.0)], 'material = "GaN"', "",
     "substrate.material", "wurtzite"),
    ([("b", "AlGaN", 0.3, 20.0), ("c", "GaN", None, 100.0)], 'material = "GaN"',
     'carriers = ["electron", "x_electron"]', "physics.carriers", "no X or L"),
])
def test_refused_stacks_exit_2(tmp_path, layers, substrate, physics, key, words):
    text = deck_text(layers, substrate=substrate, physics=physics)
    with pytest.raises(SelfconInputError) as err:
        build_structure(selfcon.load_deck(text))
    assert key in str(err.value) and words in str(err.value)
    path = tmp_path / "bad.toml"
    path.write_text(text)
    r = subprocess.run([sys.executable, "-m", "selfcon", "check", str(path)], capture_output=True,
                       text=True)
    assert r.returncode == 2 and key in r.stderr and "Traceback" not in r.stderr


def test_substrate_lattice_constant_is_a_for_wurtzite():
    # [substrate] lattice_constant is the in-plane constant a on the c plane: a(GaN) = 0.3189 nm
    # (VM 2003, the VM table above) builds the same strain and sheets as material = "GaN", and
    # another a strains every layer to eps_xx = (a_sub - a)/a (biaxial strain, analytic)
    by_name = build_structure(hemt(0.3, 10.0, regions=False))
    layers = [("barrier", "AlGaN", 0.3, 10.0), ("channel", "GaN", None, 60.0), ("buffer", "GaN", None, 200.0)]
    by_a = build_structure(selfcon.load_deck(deck_text(layers, surface='contact = "schottky"\nbarrier = 1.23',
                                                       substrate="lattice_constant = 0.3189")))
    assert by_a.cell["eps_xx"] == pytest.approx(by_name.cell["eps_xx"], abs=1e-12)
    assert by_a.sheet_fixed == pytest.approx(by_name.sheet_fixed, abs=1e-15)
    wide = build_structure(selfcon.load_deck(deck_text(layers, substrate="lattice_constant = 0.3200")))
    gan = int(np.flatnonzero(wide.cell_layer == 1)[0])
    assert wide.cell["eps_xx"][gan] == pytest.approx((0.3200 - 0.3189) / 0.3189, rel=1e-9)


def test_relaxed_buffer_is_a_reference():
    # no [substrate] material, but a relaxed AlGaN buffer: the channel above takes its lattice
    text = deck_text([("c", "GaN", None, 20.0), ("buf", "AlGaN", 0.05, 200.0)], substrate="")
    text = text.replace('thickness = 200.0\nx = 0.05', 'thickness = 200.0\nx = 0.05\nrelaxed = true')
    st = build_structure(selfcon.load_deck(text))
    a_buf = 0.95 * 0.3189 + 0.05 * 0.3112
    assert st.strain.layers[0].eps_xx == pytest.approx((a_buf - 0.3189) / 0.3189, rel=1e-9)
    assert st.interfaces()[0]["sigma_nm2"] < 0        # GaN on AlGaN, metal face: negative sheet


# ------------------------------------------------------------------ the solved HEMT

def test_gauss_law_with_polarization_sheets():
    # Gauss's law on the finite-volume mesh, eps E|bottom - eps E|top = q/eps0 int rho dz with
    # the bound sheets in rho, from the result file's profiles (bound_charge included), to
    # 1e-8 of q sum |sigma| (analytic identity of the discretisation; solver tolerance 1e-8 V)
    from selfcon.solver import poisson as P
    from selfcon.solver.steps import boundary_conditions, classical_problem
    deck = hemt(0.3, 20.0, cap=3.0).with_overrides({"solver.tolerance": 1e-8})
    st = build_structure(deck)
    r = selfcon.solve(deck, structure=st)
    assert r.converged
    pr = r.profile
    rho = (pr["hole_density"] - pr["electron_density"] + pr["ionized_donors"]
           - pr["ionized_acceptors"] + pr["bound_charge"]) / CM3_PER_NM3
    prob = classical_problem(st, boundary_conditions(st))
    d0, dl = P.boundary_flux(prob, r.potential, rho)
    total = float(np.sum(rho * st.mesh.w))
    sheets = float(np.sum(np.abs(st.sheet_fixed)))
    assert abs((d0 - dl) - Q_EPS0 * total) / (Q_EPS0 * sheets) < 1e-8
    # the file's bound charge is the structure's sheets
    assert float(np.sum(pr["bound_charge"] * st.mesh.w)) / CM3_PER_NM3 == pytest.approx(
        float(np.sum(st.sheet_fixed)), abs=1e-12)


def ambacher_ns(st, phib):
    """n_s (cm^-2) of Ambacher et al., J. Appl. Phys. 87, 334 (2000):
    n_s = sigma/q - eps0 eps_b / (d q^2) (q phi_b + E_F - dEc), E_F = E0 + pi hbar^2 n_s / m*,
    E0 = (9 pi hbar q^2 n_s / (8 eps0 eps sqrt(8 m*)))^(2/3); sigma, eps_b, dEc (strained), the
    GaN eps and m* from the structure, solved for n_s by brentq."""
    from scipy.optimize import brentq
    hbar, m0, eps0 = 1.054571817e-34, 9.1093837015e-31, 8.8541878128e-12
    c, cl = st.cell, st.cell_layer
    ib = int(np.flatnonzero(cl == 0)[-1])
    dec = c["ec_gamma"][ib] - c["ec_gamma"][ib + 1]
    sigma = st.interfaces()[0]["sigma_nm2"] * 1e18
    eb, ec, m = c["eps"][ib], c["eps"][ib + 1], c["m_e"][ib + 1] * m0
    d = st.layers[0].bottom * 1e-9

    def f(ns):
        e0 = (9 * math.pi * hbar * Q ** 2 * ns / (8 * eps0 * ec * math.sqrt(8 * m))) ** (2 / 3) / Q
        ef = e0 + math.pi * hbar ** 2 * ns / m / Q
        return sigma - eps0 * eb / (d * Q) * (phib + ef - dec) - ns
    return brentq(f, 1e10, sigma) * 1e-4


def test_ns_against_ambacher_2000_over_barrier_thickness():
    x = 0.3
    phib = 0.84 + 1.3 * x       # Ambacher et al. 2000: Ni barrier on AlGaN, (0.84 + 1.3 x) eV
    for d in (10.0, 20.0, 30.0):
        deck = hemt(x, d, barrier=phib)
        st = build_structure(deck)
        r = selfcon.solve(deck, structure=st)
        assert r.converged
        ns = r.summary["electron_sheet_density_cm2"]
        assert ns == pytest.approx(ambacher_ns(st, phib), rel=0.10), d


def test_dns_dx_against_ambacher_2000_slope():
    d, out = 20.0, {}
    for x in (0.25, 0.35):
        phib = 0.84 + 1.3 * x
        deck = hemt(x, d, barrier=phib)
        st = build_structure(deck)
        out[x] = (selfcon.solve(deck, structure=st).summary["electron_sheet_density_cm2"],
                  ambacher_ns(st, phib))
    ours = (out[0.35][0] - out[0.25][0]) / 0.1
    formula = (out[0.35][1] - out[0.25][1]) / 0.1
    assert ours > 0 and ours == pytest.approx(formula, rel=0.20)


def test_threshold_voltage_by_sweep_bias_against_ambacher_2000():
    # the gate bias V lowers the barrier term of Ambacher et al. (2000): q phi_b -> q (phi_b - V)
    # in n_s = sigma/q - eps0 eps_b/(d q^2) (q phi_b + E_F - dEc) (ambacher_ns above); the
    # sweep's n_s(V), its charge-control slope and its linearly extrapolated threshold follow it
    # (the formula's degenerate E_F does not hold near pinch-off: n_s >= 1e12 cm^-2 only)
    from selfcon.design.sweep import sweep_bias
    x, d = 0.3, 20.0
    phib = 0.84 + 1.3 * x       # Ambacher et al. 2000: Ni barrier on AlGaN, (0.84 + 1.3 x) eV
    deck = hemt(x, d, barrier=phib)
    st = build_structure(deck)
    sw = sweep_bias(deck, np.arange(0.0, -5.01, -1.0))
    assert np.all(sw.converged)
    formula = np.array([ambacher_ns(st, phib - v) if v > -4.5 else np.nan for v in sw.bias])
    dense = formula >= 1e12
    assert dense.sum() >= 4
    assert sw.channel_density[dense] == pytest.approx(formula[dense], rel=0.10)
    a = sw.analysis
    lo, hi = a["linear_window_V"]
    inside = (sw.bias >= lo - 1e-9) & (sw.bias <= hi + 1e-9) & dense
    slope, intercept = np.polyfit(sw.bias[inside], formula[inside], 1)     # the formula's line
    assert a["linear_slope_cm2_per_V"] == pytest.approx(slope, rel=0.10)
    # 0.1 V: 4 % of the ~4.5 V swing from 0 V to the formula's threshold -intercept/slope
    assert abs(a["threshold_extrapolated_V"] - (-intercept / slope)) < 0.1
    # the 1e10 cm^-2 crossing lies between the last bias with a dense channel and the next one
    assert -5.0 < a["threshold_crossing_V"] < -4.0 and sw.channel_density[-1] < 1e10


def test_critical_barrier_thickness_ibbetson():
    # Ibbetson et al., Appl. Phys. Lett. 77, 250 (2000): Al0.34Ga0.66N on GaN, the 2DEG appears
    # at a barrier of about 3.5 nm, with the surface donor level 1.65 eV below Ec (from memory);
    # here: the surface pinned at 1.65 eV, tune for n_s = 1e10 cm^-2 (the shipped recipe)
    from selfcon.design import tune
    deck = selfcon.load_deck(ROOT / "inputs" / "design" / "critical_barrier_300K.toml")
    tr = tune(deck, "layer.barrier.thickness", "ns", 1e10, (1.0, 10.0))
    assert tr.value == pytest.approx(3.5, abs=1.5)


def test_hemt_converges_within_15_iterations():
    # issue 15's budget for a 1e13 cm^-2 nitride 2DEG at 300 K (predictor-corrector)
    r = selfcon.solve(selfcon.load_deck(ROOT / "inputs" / "algan_aln_gan_hemt.toml"))
    assert r.converged and r.iterations <= 15
    assert r.main_channel["sheet_density"] > 1e13


# ------------------------------------------------------------------ warnings, check, file

def test_cracking_warning_and_its_silence():
    thick = selfcon.solve(hemt(0.35, 30.0))
    lines = [w for w in thick.warnings if "channel cracking" in w]
    assert len(lines) == 1 and "'barrier'" in lines[0]
    thin = selfcon.solve(hemt(0.25, 15.0))
    assert not [w for w in thin.warnings if "cracking" in w]


def test_hole_accumulation_under_a_thick_cap():
    r = selfcon.solve(hemt(0.35, 20.0, cap=25.0, barrier=0.9))
    lines = [w for w in r.warnings if w.startswith("holes accumulate")]
    assert len(lines) == 1 and "'cap'/'barrier'" in lines[0]
    assert not [w for w in r.warnings if w.startswith("parasitic channel") and "holes" in w]


def test_design_decks_raise_their_warnings():
    nface = selfcon.solve(selfcon.load_deck(ROOT / "inputs" / "design" / "nface_hemt_300K.toml"))
    assert any(w.startswith("holes accumulate at the 'barrier'/'buffer'") for w in nface.warnings)
    back = selfcon.solve(selfcon.load_deck(ROOT / "inputs" / "design" / "back_barrier_on_gan_300K.toml"))
    para = [w for w in back.warnings if w.startswith("parasitic channel")]
    assert para and "'back_barrier'/'buffer' interface" in para[0]


def test_result_file_interfaces(tmp_path):
    r = selfcon.solve(selfcon.load_deck(ROOT / "inputs" / "algan_gan_hemt.toml"))
    path = tmp_path / "r.h5"
    r.save(path)
    back = selfcon.load_result(path)
    t = back.interfaces
    assert list(t["upper"]) == ["cap", "barrier", "channel"]
    assert t["sigma_cm2"][1] > 1e13 and t["sigma_cm2"][0] == pytest.approx(-t["sigma_cm2"][1])
    assert t["sigma_C_m2"] == pytest.approx(t["sigma_cm2"] * 1e4 * Q)
    import h5py
    with h5py.File(path) as f:
        assert f["interfaces/sigma_cm2"].attrs["units"] == "cm-2"
        assert f["interfaces/sigma_C_m2"].attrs["units"] == "C/m^2"
        assert f["profile/polarization"].attrs["units"] == "C/m^2"


def test_check_shows_the_sheets(tmp_path):
    r = subprocess.run([sys.executable, "-m", "selfcon", "check", "--json",
                        str(ROOT / "inputs" / "algan_gan_hemt.toml")], capture_output=True, text=True)
    assert r.returncode == 0
    import json
    fig = json.loads(r.stdout)
    pol = fig["polarization"]
    assert pol["polarity"] == "metal" and len(pol["interfaces"]) == 3
    assert pol["interfaces"][1]["sigma_cm2"] > 1e13
    assert fig["strain"]["criterion"] == "channel cracking"
    r = subprocess.run([sys.executable, "-m", "selfcon", "materials", "AlGaN", "--x", "0.3", "--on",
                        "GaN", "--json"], capture_output=True, text=True)
    fig = json.loads(r.stdout)
    rows = {row["quantity"]: row for row in fig["rows"]}
    assert rows["P_pz along [0001]"]["strained"] < 0     # tension: P_pz along -[0001], as P_sp
    assert fig["critical_thickness_nm"]["channel cracking"] > 10
