"""The other III-V families and the lattice/elastic/deformation-potential data: table values,
Vegard's law, quaternary interpolation, lattice matching, composition errors.

V2001 = Vurgaftman, Meyer and Ram-Mohan, J. Appl. Phys. 89, 5815 (2001) (values as stored in
the library, which recalls them from memory); VdW1989 = Van de Walle, Phys. Rev. B 39, 1871
(1989).  Each check value names its source beside it."""
import numpy as np
import pytest

from selfcon.errors import MaterialError
from selfcon.input import materials as M
from selfcon.input.materials.library import ALLOYS, BINARIES, PARAMETERS, QUATERNARIES

NEW_BINARIES = ("GaSb", "AlSb", "InSb", "GaP", "AlP")
NEW_TERNARIES = ("AlGaSb", "InGaSb", "InAsSb", "GaAsSb", "AlAsSb", "InGaP", "AlInP", "GaAsP")


def one(name, x=np.nan, T=0.0, y=None):
    p = M.cell_parameters(name, np.array([x]), T, y=None if y is None else np.array([y]))
    return {k: float(v[0]) for k, v in p.items()}


def varshni(eg0, alpha_mev, beta, T):
    """Varshni form, written out here: Eg(T) = Eg(0) - alpha T^2/(T + beta)."""
    return eg0 - alpha_mev * 1e-3 * T * T / (T + beta)


# ---------------------------------------------------------------- lattice, Vegard
def test_lattice_constants_at_300K_and_temperature():
    # V2001: GaAs a = 5.65325 A + 3.88e-5 A/K (T - 300 K)
    assert one("GaAs", T=300.0)["lattice"] == pytest.approx(0.565325, abs=1e-12)
    assert one("GaAs", T=77.0)["lattice"] == pytest.approx(0.565325 + 3.88e-6 * (77.0 - 300.0),
                                                           abs=1e-12)
    # V2001 (from memory): InAs 6.0583, InP 5.8687, GaSb 6.0959, AlSb 6.1355, InSb 6.4794,
    # GaP 5.4505, AlP 5.4672, AlAs 5.6611 A at 300 K
    for name, a in (("InAs", 6.0583), ("InP", 5.8687), ("GaSb", 6.0959), ("AlSb", 6.1355),
                    ("InSb", 6.4794), ("GaP", 5.4505), ("AlP", 5.4672), ("AlAs", 5.6611)):
        assert one(name, T=300.0)["lattice"] == pytest.approx(a / 10.0, abs=1e-12), name


@pytest.mark.parametrize("name", ["InGaAs", "AlGaAs", "InAlAs", "GaAsSb", "InGaP", "InAsP"])
def test_vegard_law_to_1e9(name):
    # Vegard's law (V2001 recommendation): a(x) = (1-x) a(end0) + x a(end1), at any T
    alloy = ALLOYS[name]
    for T in (4.2, 300.0):
        for x in (0.1, 0.37, 0.8):
            a0, a1 = one(alloy.end0, T=T)["lattice"], one(alloy.end1, T=T)["lattice"]
            assert one(name, x, T)["lattice"] == pytest.approx((1 - x) * a0 + x * a1, abs=1e-9)


def test_ingaas_lattice_matched_to_inp():
    # issue anchor: x = 0.532 +- 0.002 from the review's constants (GaAs 5.65325, InAs 6.0583,
    # InP 5.8687 A): x = (5.8687 - 5.65325)/(6.0583 - 5.65325) = 0.5319, by hand
    x, y = M.lattice_matched("InGaAs", "InP")
    assert y is None
    assert float(x[0]) == pytest.approx(0.532, abs=0.002)
    assert float(x[0]) == pytest.approx((5.8687 - 5.65325) / (6.0583 - 5.65325), abs=1e-9)
    # In0.52Al0.48As is the customary lattice-matched barrier on InP (common practice)
    assert float(M.lattice_matched("InAlAs", "InP")[0][0]) == pytest.approx(0.52, abs=0.005)
    # Ga0.51In0.49P on GaAs (common practice: In fraction 0.48-0.49)
    assert float(M.lattice_matched("InGaP", "GaAs")[0][0]) == pytest.approx(0.485, abs=0.01)


def test_elastic_and_deformation_potentials():
    g = one("GaAs")
    # V2001 GaAs: C11 = 1221, C12 = 566, C44 = 600 (units of 0.1 GPa) -> GPa
    assert (g["c11"], g["c12"], g["c44"]) == (122.1, 56.6, 60.0)
    # V2001 GaAs: a_c = -7.17 eV, |a_v| = 1.16 eV, b = -2.0 eV, d = -4.8 eV
    assert (g["ac"], g["av"], g["b_dp"], g["d_dp"]) == (-7.17, 1.16, -2.0, -4.8)
    # sign convention of a_v (VdW1989): the gap potential is a = a_c - a_v = -8.33 eV for GaAs
    assert g["ac"] - g["av"] == pytest.approx(-8.33, abs=1e-12)
    # InGaAs a_c bowing 2.61 eV (V2001, from memory): a_c(x) = (1-x)(-7.17) + x(-5.08) - 2.61 x(1-x)
    x = 0.2
    assert one("InGaAs", x)["ac"] == pytest.approx(-7.17 * 0.8 - 5.08 * 0.2 - 2.61 * 0.16, abs=1e-12)
    # every zincblende binary: a compressed crystal has a wider gap (a < 0) and positive
    # C11 > C12 (the wurtzite nitrides have their own potentials: tests/test_nitrides.py)
    for name in (n for n in BINARIES if M.crystal(n) == "zincblende"):
        b = one(name)
        assert b["ac"] - b["av"] < 0 and b["c11"] > b["c12"] > 0, name


# ---------------------------------------------------------------- new binaries
# (name, Eg0, alpha meV/K, beta K, valley of the lowest gap at 300 K, that gap at 300 K by the
# Varshni form, and the room-temperature gap of common practice with a tolerance)
GAPS = [
    ("GaSb", ("gamma", 0.812, 0.417, 140.0), 0.726, 0.01),    # common practice: 0.726 eV
    ("AlSb", ("x", 1.696, 0.39, 140.0), 1.615, 0.02),         # common practice: ~1.6 eV indirect
    ("InSb", ("gamma", 0.235, 0.32, 170.0), 0.17, 0.01),      # common practice: 0.17 eV
    ("GaP", ("x", 2.35, 0.5771, 372.0), 2.26, 0.02),          # common practice: 2.26 eV indirect
    ("AlP", ("x", 2.52, 0.318, 588.0), 2.45, 0.05),           # common practice: ~2.45-2.5 eV
]


@pytest.mark.parametrize("name,gap,room,tol", GAPS)
def test_new_binary_gaps_0K_and_300K(name, gap, room, tol):
    valley, eg0, alpha, beta = gap
    key = "eg_" + valley
    assert one(name, T=0.0)[key] == pytest.approx(eg0, abs=1e-12)              # V2001 table
    at300 = one(name, T=300.0)[key]
    assert at300 == pytest.approx(varshni(eg0, alpha, beta, 300.0), abs=1e-12)  # Varshni, by hand
    assert at300 == pytest.approx(room, abs=tol)                                # common practice
    # the lowest conduction valley at 300 K is the one named (direct or indirect)
    p = one(name, T=300.0)
    assert min(("gamma", "x", "l"), key=lambda v: p["eg_" + v]) == valley


def test_new_binary_offsets_and_masses():
    # V2001 valence band offsets (InSb = 0) and Γ masses (from memory)
    table = {"GaSb": (-0.03, 0.039), "AlSb": (-0.41, 0.14), "InSb": (0.0, 0.0135),
             "GaP": (-1.27, 0.13), "AlP": (-1.74, 0.22)}
    for name, (vbo, me) in table.items():
        for T in (0.0, 300.0):
            p = one(name, T=T)
            assert p["vbo"] == vbo and p["m_e"] == me, name
            assert p["ec_gamma"] == pytest.approx(vbo + p["eg_gamma"], abs=1e-12)
    # V2001 GaSb Luttinger parameters 13.4, 4.7: m_hh along [001] = 1/(13.4 - 9.4) = 0.25 m0
    assert one("GaSb")["m_hh_z"] == pytest.approx(0.25, abs=1e-12)


def test_broken_gap_and_type_ii_alignments():
    # InAs/GaSb is broken-gap: the InAs Γ edge lies about 0.15 eV below the GaSb valence edge
    # at low temperature (common practice; V2001 offsets give -0.173 - (-0.03) = -0.143 eV)
    inas, gasb, alsb = one("InAs", T=4.2), one("GaSb", T=4.2), one("AlSb", T=4.2)
    assert inas["ec_gamma"] - gasb["ev_hh"] == pytest.approx(-0.15, abs=0.02)
    # InAs/AlSb: the lowest AlSb conduction edge (X; AlSb is indirect) lies about 1.35 eV
    # above the InAs edge (common practice; V2001 offsets give 1.46 eV) and the pair is type II
    # (staggered): the AlSb valence edge lies above the InAs one
    assert min(alsb["ec_gamma"], alsb["ec_x"], alsb["ec_l"]) == alsb["ec_x"]
    assert 1.3 < alsb["ec_x"] - inas["ec_gamma"] < 1.5
    assert alsb["ev_hh"] > inas["ev_hh"]
    # In0.49GaP/GaAs is type I with roughly 0.1-0.2 eV in the conduction and 0.3-0.4 eV in
    # the valence band (common practice, from memory)
    x = float(M.lattice_matched("InGaP", "GaAs")[0][0])
    ingap, gaas = one("InGaP", x, 300.0), one("GaAs", T=300.0)
    assert 0.08 < ingap["ec_gamma"] - gaas["ec_gamma"] < 0.25
    assert 0.25 < gaas["ev_hh"] - ingap["ev_hh"] < 0.42


# ---------------------------------------------------------------- lattice-matched points on InP
@pytest.mark.parametrize("T", [0.0, 300.0])
def test_lattice_matched_points_on_inp(T):
    # In0.53GaAs: by hand from V2001 (GaAs 1.519 eV, 0.5405 meV/K, 204 K; InAs 0.417 eV,
    # 0.276 meV/K, 93 K; bowing 0.477 eV; VBO -0.80, -0.59, bowing -0.38; masses 0.067,
    # 0.026, bowing 0.0091)
    x = 0.53
    ga, ina = varshni(1.519, 0.5405, 204.0, T), varshni(0.417, 0.276, 93.0, T)
    p = one("InGaAs", x, T)
    assert p["eg_gamma"] == pytest.approx((1 - x) * ga + x * ina - x * (1 - x) * 0.477, abs=1e-12)
    assert p["vbo"] == pytest.approx(-0.80 * (1 - x) - 0.59 * x + 0.38 * x * (1 - x), abs=1e-12)
    assert p["m_e"] == pytest.approx(0.067 * (1 - x) + 0.026 * x - 0.0091 * x * (1 - x), abs=1e-12)
    # common practice: In0.53GaAs gap 0.81 eV at low temperature, 0.74 eV at room temperature
    assert p["eg_gamma"] == pytest.approx(0.74 if T else 0.81, abs=0.015)
    # In0.52AlAs: V2001 AlAs 3.099 eV, 0.885 meV/K, 530 K; bowing 0.70 eV; VBO bowing -0.64;
    # mass 0.15, bowing 0.049
    x = 0.52
    al = varshni(3.099, 0.885, 530.0, T)
    q = one("InAlAs", x, T)
    assert q["eg_gamma"] == pytest.approx((1 - x) * al + x * ina - x * (1 - x) * 0.70, abs=1e-12)
    assert q["vbo"] == pytest.approx(-1.33 * (1 - x) - 0.59 * x + 0.64 * x * (1 - x), abs=1e-12)
    assert q["m_e"] == pytest.approx(0.15 * (1 - x) + 0.026 * x - 0.049 * x * (1 - x), abs=1e-12)
    # common practice: the In0.53GaAs/In0.52AlAs conduction offset is about 0.5 eV
    assert q["ec_gamma"] - p["ec_gamma"] == pytest.approx(0.52, abs=0.06)


# ---------------------------------------------------------------- quaternaries
def test_quaternary_edges_and_corners():
    # analytic property of the interpolation: on an edge the quaternary is its ternary,
    # at a corner its binary
    for T in (0.0, 300.0):
        for t in (0.0, 0.3, 1.0):
            assert one("InGaAsP", t, T, y=1.0)["eg_gamma"] == pytest.approx(one("InGaAs", t, T)["eg_gamma"], abs=1e-12)
            assert one("InGaAsP", t, T, y=0.0)["eg_gamma"] == pytest.approx(one("InGaP", t, T)["eg_gamma"], abs=1e-12)
            assert one("InGaAsP", 1.0, T, y=t)["vbo"] == pytest.approx(one("InAsP", t, T)["vbo"], abs=1e-12)
            assert one("InGaAsP", 0.0, T, y=t)["m_e"] == pytest.approx(one("GaAsP", t, T)["m_e"], abs=1e-12)
        # AlGaInAs (x = Al, y = Ga): z = 0 edge is AlGaAs at x; x = 0 edge is InGaAs (In = 1-y)
        assert one("AlGaInAs", 0.3, T, y=0.7)["eg_gamma"] == pytest.approx(one("AlGaAs", 0.3, T)["eg_gamma"], abs=1e-12)
        assert one("AlGaInAs", 0.0, T, y=0.47)["eg_gamma"] == pytest.approx(one("InGaAs", 0.53, T)["eg_gamma"], abs=1e-12)
        assert one("AlGaInAs", 0.48, T, y=0.0)["vbo"] == pytest.approx(one("InAlAs", 0.52, T)["vbo"], abs=1e-12)
        assert one("AlGaInAs", 1.0, T, y=0.0)["eg_x"] == pytest.approx(one("AlAs", T=T)["eg_x"], abs=1e-12)
        assert one("InGaAsP", 1.0, T, y=0.0)["eg_l"] == pytest.approx(one("InP", T=T)["eg_l"], abs=1e-12)


def test_quaternary_linear_parameters_are_bilinear():
    # Vegard for a quaternary, written out: a = xy a(InAs) + x(1-y) a(InP) + (1-x)y a(GaAs)
    # + (1-x)(1-y) a(GaP); Al_x Ga_y In_z As: a = x a(AlAs) + y a(GaAs) + z a(InAs)
    x, y, T = 0.7, 0.4, 300.0
    a = {n: one(n, T=T)["lattice"] for n in ("InAs", "InP", "GaAs", "GaP", "AlAs")}
    assert one("InGaAsP", x, T, y=y)["lattice"] == pytest.approx(
        x * y * a["InAs"] + x * (1 - y) * a["InP"] + (1 - x) * y * a["GaAs"]
        + (1 - x) * (1 - y) * a["GaP"], abs=1e-9)
    x, y = 0.2, 0.3
    assert one("AlGaInAs", x, T, y=y)["lattice"] == pytest.approx(
        x * a["AlAs"] + y * a["GaAs"] + (1 - x - y) * a["InAs"], abs=1e-9)


def test_ingaasp_lattice_matched_gap_against_measurement():
    # Nahory, Pollack, Johnston and Barns, Appl. Phys. Lett. 33, 659 (1978) (from memory):
    # InGaAsP lattice-matched to InP, Eg = 1.35 - 0.72 y + 0.12 y^2 eV at 300 K.  (The
    # quaternary gap bowing of the library is fitted to this curve, within 19 meV.)
    ys = np.linspace(0.0, 1.0, 9)
    x, y = M.lattice_matched("InGaAsP", "InP", y=ys)
    eg = M.cell_parameters("InGaAsP", x, 300.0, y=y)["eg_gamma"]
    assert np.max(np.abs(eg - (1.35 - 0.72 * ys + 0.12 * ys ** 2))) < 0.02
    # the lattice-matched compositions really match: a = a(InP) at 300 K (Vegard, 1e-9)
    a = M.cell_parameters("InGaAsP", x, 300.0, y=y)["lattice"]
    assert np.allclose(a, 0.58687, rtol=0.0, atol=1e-9)


def test_algainas_lattice_matched_to_inp():
    # Al_x Ga_y In_(1-x-y) As on InP: In stays near 0.52-0.53 for every x (Vegard with the
    # review's lattice constants, common practice); the gap rises from InGaAs to InAlAs
    xs = np.array([0.0, 0.1, 0.3, 0.45])
    x, y = M.lattice_matched("AlGaInAs", "InP", x=xs)
    assert np.all((1 - x - y > 0.515) & (1 - x - y < 0.535))
    eg = M.cell_parameters("AlGaInAs", x, 300.0, y=y)["eg_gamma"]
    assert np.all(np.diff(eg) > 0)


# ---------------------------------------------------------------- composition errors
def _err(fn, *args, match=None, key=None, **kw):
    with pytest.raises(MaterialError, match=match) as info:
        fn(*args, **kw)
    if key is not None:
        assert info.value.key == key
    return info.value


def test_composition_errors():
    _err(one, "InGaAs", 0.2, y=0.3, match="ternary", key="y")
    _err(one, "GaAs", y=0.3, match="binary", key="y")
    _err(one, "InGaAsP", 0.5, match="needs y", key="y")
    _err(one, "AlGaInAs", 0.6, y=0.5, match="exceeds 1", key="y")
    _err(one, "InGaAsP", 0.5, y=1.2, match="outside", key="y")
    _err(M.lattice_matched, "GaAs", "InP", match="lattice_matched", key="lattice_matched")
    _err(M.lattice_matched, "InGaAs", "Unobtainium", match="library binary", key="lattice_matched")
    _err(M.lattice_matched, "InGaAsP", "InP", match="exactly one", key="x")
    _err(M.lattice_matched, "InGaAsP", "InP", x=0.5, y=0.5, match="exactly one")
    _err(M.lattice_matched, "AlGaAs", "InP", match="cannot be lattice-matched", key="lattice_matched")


# ---------------------------------------------------------------- sources
def test_every_new_value_has_a_source():
    for name in NEW_BINARIES:
        assert set(BINARIES[name]) == set(PARAMETERS)
        for key, v in BINARIES[name].items():
            assert v.source.strip() and np.isfinite(v.value), (name, key)
    for name in NEW_TERNARIES:
        a = ALLOYS[name]
        assert a.end0 in BINARIES and a.end1 in BINARIES
        assert all(b.source.strip() for b in a.bowing.values())
        assert a.meaning_of_x.startswith("x = ")
    for q in QUATERNARIES.values():
        assert q.source.strip() and q.meaning_of_x.startswith("x = ")
        assert q.meaning_of_y.startswith("y = ")
    # the x convention: first-named element of the mixed sublattice (issue contract)
    assert ALLOYS["InGaP"].meaning_of_x.startswith("x = In")
    assert ALLOYS["GaAsSb"].meaning_of_x.startswith("x = As")
    rows = M.describe("InGaAsP", x=0.7, y=0.6, temperature=300.0)
    by = {r["parameter"]: r for r in rows}
    assert by["edge_y1"]["value"] == "InGaAs" and by["corner_x0_y0"]["value"] == "GaP"
    assert by["eg_gamma"]["value"] == pytest.approx(one("InGaAsP", 0.7, 300.0, y=0.6)["eg_gamma"])
    assert all(r["source"] for r in rows)
