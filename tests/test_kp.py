"""Checks of the multiband (Luttinger-Kohn) hole model, selfcon.solver.kp.

Every reference value names its source beside it.  Meshes are small (a few hundred nodes).
"""
import numpy as np
import pytest

from selfcon.constants import HBAR2_2M0
from selfcon.model.mesh import Mesh
from selfcon.model.strain import zincblende_001_shifts
from selfcon.solver import kp
from selfcon.solver.schrodinger import solve_region

# GaAs Luttinger parameters and spin-orbit splitting (Vurgaftman, Meyer and Ram-Mohan,
# J. Appl. Phys. 89, 5815 (2001)); the barrier values are Al0.3Ga0.7As-like, for the test only
GAAS = dict(g1=6.98, g2=2.06, g3=2.93, delta=0.341)
BARRIER = dict(g1=5.9, g2=1.6, g3=2.3, delta=0.33)
VBO = -0.15           # eV, the barrier's Gamma8 edge below the well's (test value)


def well(thick=(10.0, 10.0, 10.0), cells=(40, 40, 40), jitter=0.0, seed=3):
    """(mesh, KpMaterial) of barrier | GaAs | barrier, nodes on both interfaces."""
    rng = np.random.default_rng(seed)
    z = [0.0]
    for t, c in zip(thick, cells):
        wdt = 1.0 + jitter * (2 * rng.random(c) - 1)
        z.extend(z[-1] + t * np.cumsum(wdt) / wdt.sum())
    z = np.array(z)
    mesh = Mesh.from_nodes(z)
    zc = 0.5 * (z[1:] + z[:-1])
    inside = (zc > thick[0]) & (zc < thick[0] + thick[1])
    vals = {k: np.where(inside, GAAS[k], BARRIER[k]) for k in GAAS}
    zero = np.zeros(zc.size)
    mat = kp.KpMaterial(vals["g1"], vals["g2"], vals["g3"], vals["delta"],
                        np.where(inside, 0.0, VBO), zero, zero, zero, zero, zero)
    return mesh, mat


def luttinger_4x4(g1, g2, g3, k):
    """The closed-form 4x4 bulk dispersion (J. M. Luttinger, Phys. Rev. 102, 1030 (1956)),
    electron scale: E = -hbar^2/2m0 [g1 k^2 -+ 2 sqrt(g2^2 k^4 + 3 (g3^2 - g2^2) sum ki^2 kj^2)]."""
    kx, ky, kz = k
    k2 = kx * kx + ky * ky + kz * kz
    root = np.sqrt(g2 ** 2 * k2 ** 2 + 3 * (g3 ** 2 - g2 ** 2)
                   * (kx * kx * ky * ky + ky * ky * kz * kz + kz * kz * kx * kx))
    return HBAR2_2M0 * np.array([-(g1 * k2 + 2 * root), -(g1 * k2 - 2 * root)])


def chuang_6x6(g1, g2, g3, delta, k):
    """Chuang's 6x6 Luttinger-Kohn matrix written out (S. L. Chuang, Physics of Optoelectronic
    Devices (Wiley 1995), chapter 4; P, Q, R, S in hbar^2/2m0 units), unstrained, electron scale."""
    kx, ky, kz = k
    c = HBAR2_2M0
    P = c * g1 * (kx * kx + ky * ky + kz * kz)
    Q = c * g2 * (kx * kx + ky * ky - 2 * kz * kz)
    R = c * np.sqrt(3) * (-g2 * (kx * kx - ky * ky) + 2j * g3 * kx * ky)
    S = c * 2 * np.sqrt(3) * g3 * (kx - 1j * ky) * kz
    s2, s32 = np.sqrt(2), np.sqrt(1.5)
    Rc, Sc = np.conj(R), np.conj(S)
    H = np.array([
        [P + Q, -S, R, 0, -S / s2, s2 * R],
        [-Sc, P - Q, 0, R, -s2 * Q, s32 * S],
        [Rc, 0, P - Q, S, s32 * Sc, s2 * Q],
        [0, Rc, Sc, P + Q, -s2 * Rc, -Sc / s2],
        [-Sc / s2, -s2 * Q, s32 * S, -s2 * R, P + delta, 0],
        [s2 * Rc, s32 * Sc, s2 * Q, -S / s2, 0, P + delta]], dtype=complex)
    return -H


# ----------------------------------------------------------------------------- bulk

def test_basis_is_unitary_and_diagonalises_spin_orbit():
    """The J basis is the eigenbasis of L.S: +1/2 for J = 3/2, -1 for J = 1/2 (analytic)."""
    U = kp.basis()
    assert np.allclose(U.conj().T @ U, np.eye(6), atol=1e-14)
    eps = np.zeros((3, 3, 3))
    for a, b, c in ((0, 1, 2), (1, 2, 0), (2, 0, 1)):
        eps[a, b, c], eps[a, c, b] = 1, -1
    orb = [-1j * eps[i] for i in range(3)]                          # (L_i)_jk = -i eps_ijk
    pauli = [np.array([[0, 1], [1, 0]]), np.array([[0, -1j], [1j, 0]]), np.diag([1, -1])]
    ls = sum(np.kron(s / 2, li) for s, li in zip(pauli, orb))       # spin-major, as basis()
    assert np.allclose(U.conj().T @ ls @ U, np.diag([0.5] * 4 + [-1.0] * 2), atol=1e-14)


@pytest.mark.parametrize("direction", [(0, 0, 1), (1, 1, 0), (1, 2, 3)])
def test_bulk_kp4_matches_luttinger_closed_form(direction):
    d = np.array(direction, float) / np.linalg.norm(direction)
    m = kp.KpMaterial.uniform(**GAAS)
    for k in (0.05, 0.3, 1.0):
        e = np.linalg.eigvalsh(kp.bulk_matrix(m, k * d, 4))
        ref = luttinger_4x4(GAAS["g1"], GAAS["g2"], GAAS["g3"], k * d)   # Luttinger 1956
        assert np.allclose(e[[0, 2]], ref, rtol=1e-6, atol=0)            # pairs: Kramers
        assert np.allclose(e[[1, 3]], ref, rtol=1e-6, atol=0)


def test_bulk_kp6_along_001_matches_closed_form():
    """Along [001] the heavy hole is -(g1 - 2 g2) k^2 and the light and split-off holes are
    the 2x2 roots -P + (Q - D -+ sqrt(D^2 + 2 D Q + 9 Q^2))/2 with P = g1 k^2, Q = -2 g2 k^2
    (analytic, the same 2x2 as the strained edges of Chuang 1995)."""
    m = kp.KpMaterial.uniform(**GAAS)
    g1, g2, D = GAAS["g1"], GAAS["g2"], GAAS["delta"]
    for k in (0.05, 0.4, 1.5):
        e = np.sort(np.linalg.eigvalsh(kp.bulk_matrix(m, (0, 0, k), 6)))[::2]
        P, Q = HBAR2_2M0 * g1 * k * k, -2 * HBAR2_2M0 * g2 * k * k
        root = np.sqrt(D * D + 2 * D * Q + 9 * Q * Q)
        ref = np.sort([-HBAR2_2M0 * (g1 - 2 * g2) * k * k,
                       -P + 0.5 * (Q - D + root), -P + 0.5 * (Q - D - root)])
        assert np.allclose(e, ref, rtol=1e-6, atol=0)


@pytest.mark.parametrize("direction", [(1, 1, 0), (1, 0, 0), (1, 2, 3)])
def test_bulk_kp6_matches_chuangs_matrix(direction):
    """The cartesian construction equals Chuang's written-out 6x6 in its eigenvalues (his
    matrix, transcribed in this test)."""
    d = np.array(direction, float) / np.linalg.norm(direction)
    m = kp.KpMaterial.uniform(**GAAS)
    for k in (0.1, 0.7):
        ours = np.linalg.eigvalsh(kp.bulk_matrix(m, k * d, 6))
        ref = np.linalg.eigvalsh(chuang_6x6(GAAS["g1"], GAAS["g2"], GAAS["g3"], GAAS["delta"], k * d))
        assert np.allclose(ours, ref, rtol=1e-6, atol=1e-12)


# GaP Luttinger parameters of the 2001 review (Vurgaftman, Meyer and Ram-Mohan, J. Appl. Phys.
# 89, 5815 (2001)): gamma1 - 2 gamma3 < 0, a bulk heavy hole curving the wrong way along [111]
GAP = dict(g1=4.05, g2=0.49, g3=2.93, delta=0.08)


def _plane(use, theta):
    """Unit wave vector at the polar angle ``theta`` from [001] in ``use``'s plane."""
    (cx, sy), _ = kp.CURVATURE_USES[use]
    return np.array([np.sin(theta) * cx, np.sin(theta) * sy, np.cos(theta)])


def _hole_curvatures(mat, d, nb, axial=False, k=1e-3):
    """Hole-wise inverse masses (1/m0) of the bulk matrix's bands at small k along d: the
    Gamma8 (top four) eigenvalues, -E / (hbar^2 k^2 / 2m0), ascending, one per Kramers pair."""
    e = np.sort(np.linalg.eigvalsh(kp.bulk_matrix(mat, k * d, nb, axial=axial)))[::-1][:4]
    return np.sort(-e / (HBAR2_2M0 * k * k))[::2]


@pytest.mark.parametrize("nb", [4, 6])
@pytest.mark.parametrize("gam", [GAAS, GAP], ids=["GaAs", "GaP"])
def test_zone_centre_masses_along_001_110_111_against_the_bulk_matrix(nb, gam):
    """Heavy- and light-hole inverse masses g1 -+ 2 g2 [001], g1 -+ sqrt(g2^2 + 3 g3^2) [110],
    g1 -+ 2 g3 [111] (Dresselhaus, Kip and Kittel, Phys. Rev. 98, 368 (1955), in Luttinger's
    parameters) against the dense diagonalisation of the model's own bulk 4x4 / 6x6 at
    k = 1e-3 nm^-1 (kp6: the split-off coupling changes them by O(k^2 hbar^2/2m0 / Delta))."""
    g1, g2, g3 = gam["g1"], gam["g2"], gam["g3"]
    m = kp.KpMaterial.uniform(**gam)
    closed = {(0, 0, 1): (g1 - 2 * g2, g1 + 2 * g2),
              (1, 1, 0): (g1 - np.sqrt(g2 ** 2 + 3 * g3 ** 2), g1 + np.sqrt(g2 ** 2 + 3 * g3 ** 2)),
              (1, 1, 1): (g1 - 2 * g3, g1 + 2 * g3)}
    for d, (hh, lh) in closed.items():
        d = np.array(d, float) / np.linalg.norm(d)
        assert np.allclose(_hole_curvatures(m, d, nb), [hh, lh], rtol=1e-5, atol=1e-6)
    # the function the warning takes, at the named directions of its planes
    for use, theta, d in (("line_100", 0.0, (0, 0, 1)), ("line_100", np.pi / 4, (1, 1, 0)),
                          ("line_110", np.arctan(np.sqrt(2.0)), (1, 1, 1)),
                          ("line_110", np.pi / 2, (1, 1, 0))):
        hh, lh = kp.zone_centre_inverse_masses(g1, g2, g3, use, np.array([theta]))
        assert np.allclose([hh[0], lh[0]], closed[d], rtol=1e-12)


def test_gap_heavy_hole_masses_and_the_linearised_110_form():
    """GaP (2001 review): m_hh = +0.326 m0 along [001] (1/(g1 - 2 g2) = 1/3.07), -0.954 m0
    along [110] (1/(g1 - sqrt(g2^2 + 3 g3^2)) = 1/-1.0485), -0.552 m0 along [111]
    (1/(g1 - 2 g3) = 1/-1.81): arithmetic on the closed forms, checked on the bulk 4x4.  The
    linearised [110] form 1/(g1 - (g2 + 3 g3)/2) = -1.69 m0 is not the bulk band's mass (it
    equals the exact one only for g2 = g3)."""
    m = kp.KpMaterial.uniform(**GAP)
    hh = {d: 1.0 / _hole_curvatures(m, np.array(d, float) / np.linalg.norm(d), 4)[0]
          for d in ((0, 0, 1), (1, 1, 0), (1, 1, 1))}
    assert hh[(0, 0, 1)] == pytest.approx(1 / 3.07, rel=1e-5)            # arithmetic
    assert hh[(1, 1, 0)] == pytest.approx(1 / -1.0485096, rel=1e-5)      # arithmetic
    assert hh[(1, 1, 1)] == pytest.approx(1 / -1.81, rel=1e-5)           # arithmetic
    linear = 1 / (GAP["g1"] - 0.5 * (GAP["g2"] + 3 * GAP["g3"]))         # -1.69 m0
    assert abs(hh[(1, 1, 0)] - linear) > 0.5


@pytest.mark.parametrize("use", list(kp.CURVATURE_USES))
def test_zone_centre_masses_of_every_plane_against_the_bulk_matrix(use):
    """At any polar angle of each use's plane (the axial model: any azimuth too, it is
    isotropic in the plane) the closed forms of zone_centre_inverse_masses equal the model's
    own bulk 4x4 at small k (analytic: the eigenvalues P -+ sqrt(Q^2 + |R|^2 + |S|^2))."""
    axial = kp.CURVATURE_USES[use][1]
    thetas = np.linspace(0.0, np.pi / 2, 13)
    for gam in (GAAS, GAP):
        m = kp.KpMaterial.uniform(**gam)
        hh, lh = kp.zone_centre_inverse_masses(gam["g1"], gam["g2"], gam["g3"], use, thetas)
        for t, a, b in zip(thetas, hh, lh):
            d = _plane(use, t)
            if axial:                          # any azimuth: rotate the in-plane part by 0.4 rad
                d = np.array([d[0] * np.cos(0.4), d[0] * np.sin(0.4), d[2]])
            assert np.allclose(_hole_curvatures(m, d, 4, axial=axial), [a, b], rtol=1e-5, atol=1e-6)


@pytest.mark.parametrize("use", list(kp.CURVATURE_USES))
def test_large_k_curvatures_are_the_6x6_far_beyond_the_split_off_gap(use):
    """At k = 100 nm^-1 (hbar^2 k^2 / 2m0 = 381 eV >> Delta) the 6x6 bands' -E / (hbar^2 k^2/2m0)
    are the spin-free kinetic eigenvalues of large_k_inverse_masses (each twice: spin) to
    Delta / 381 eV; along [110] GaP's lowest is g1 + g2 - 3 g3 = -4.25 and along [111]
    g1 - 2 g3 = -1.81 (analytic: L k_i^2 + M (k^2 - k_i^2), N k_i k_j)."""
    axial = kp.CURVATURE_USES[use][1]
    k = 100.0
    m = kp.KpMaterial.uniform(**GAP)
    thetas = np.linspace(0.0, np.pi / 2, 7)
    far = kp.large_k_inverse_masses(GAP["g1"], GAP["g2"], GAP["g3"], use, thetas)
    for t, ref in zip(thetas, far):
        e = np.sort(-np.linalg.eigvalsh(kp.bulk_matrix(m, k * _plane(use, t), 6, axial=axial))
                    / (HBAR2_2M0 * k * k))
        assert np.allclose(e[::2], np.sort(ref), atol=1e-3)
    d110 = kp.large_k_inverse_masses(4.05, 0.49, 2.93, "line_110", np.array([np.pi / 2]))[0]
    assert d110.min() == pytest.approx(4.05 + 0.49 - 3 * 2.93, abs=1e-12)             # -4.25
    d111 = kp.large_k_inverse_masses(4.05, 0.49, 2.93, "line_110", np.array([np.arctan(np.sqrt(2.0))]))[0]
    assert d111.min() == pytest.approx(4.05 - 2 * 2.93, abs=1e-12)                     # -1.81


def test_bulk_curvatures_name_the_worst_direction_of_each_use():
    """GaP (2001 review): the [100] line reaches [101], g1 - sqrt(g2^2 + 3 g3^2) = -1.05; the
    [110] line reaches [111], g1 - 2 g3 = -1.81; the loop's axial model is worst off the axes,
    at the vertex of its quadratic in sin^2 theta (a dense scan of angles finds the same value);
    kp6 adds g1 + g2 - 3 g3 = -4.25 far from the zone centre (arithmetic).  GaAs: all positive,
    its smallest the kp6 far value g1 + g2 - 3 g3 = +0.25 (arithmetic)."""
    got = {(c.use, c.regime): c for c in kp.bulk_curvatures(4.05, 0.49, 2.93, 6)}
    c = got["line_100", "zone centre"]
    assert (c.direction, c.combination, c.band) == ("[101]", "gamma1 - sqrt(gamma2^2 + 3 gamma3^2)", "heavy hole")
    assert c.inverse_mass == pytest.approx(4.05 - np.sqrt(0.49 ** 2 + 3 * 2.93 ** 2), abs=1e-12)
    c = got["line_110", "zone centre"]
    assert (c.direction, c.combination) == ("[111]", "gamma1 - 2 gamma3")
    assert c.inverse_mass == pytest.approx(-1.81, abs=1e-12)
    dense = kp.zone_centre_inverse_masses(4.05, 0.49, 2.93, "loop", np.linspace(0, np.pi / 2, 200001))[0]
    assert got["loop", "zone centre"].inverse_mass == pytest.approx(dense.min(), abs=1e-9)
    assert got["loop", "zone centre"].inverse_mass < -1.2                                # -1.26
    for use in ("line_100", "line_110"):
        assert got[use, "large k"].combination == "gamma1 + gamma2 - 3 gamma3"
        assert got[use, "large k"].inverse_mass == pytest.approx(-4.25, abs=1e-12)
    assert {(c.use, c.regime) for c in kp.bulk_curvatures(4.05, 0.49, 2.93, 4)} == {
        (u, "zone centre") for u in kp.CURVATURE_USES}                                 # kp4: no far regime
    gaas = kp.bulk_curvatures(6.98, 2.06, 2.93, 6)
    assert min(c.inverse_mass for c in gaas) == pytest.approx(6.98 + 2.06 - 3 * 2.93, abs=1e-12)


def test_bulk_k0_edges_follow_the_strain_module():
    """At k = 0 a strained crystal's heavy, light and split-off edges are those of
    selfcon.model.strain.zincblende_001_shifts (the closed form of Chuang 1995)."""
    for exx in (-0.014, 0.01):                    # In0.2GaAs on GaAs-like; tensile
        ezz = -2 * 5.38 / 11.88 * exx             # C12/C11 of GaAs (Vurgaftman et al. 2001)
        m = kp.KpMaterial.uniform(**GAAS, av=1.16, b=-2.0, d=-4.8, exx=exx, ezz=ezz)
        e = np.sort(np.linalg.eigvalsh(kp.bulk_matrix(m, (0, 0, 0), 6)))[::-2]
        s = zincblende_001_shifts(exx, ezz, ac=-7.17, av=1.16, b=-2.0, delta_so=0.341,
                                  x_gap=0.0, x_u=0.0, l_gap=0.0)
        top = sorted([float(s["ev_hh"]), float(s["ev_lh"])], reverse=True)
        assert e[:2] == pytest.approx(top, abs=1e-12)
        assert e[2] == pytest.approx(float(s["ev_so"]) - 0.341, abs=1e-12)


# ----------------------------------------------------------------------------- the well

@pytest.mark.parametrize("nb", [4, 6])
def test_well_matrix_is_hermitian_and_block_solver_equals_eigh(nb):
    """Nonuniform mesh, interfaces with every parameter jumping, k_par off axis: the
    assembled matrix is Hermitian to rounding; the banded solver's eigenpairs equal
    numpy.linalg.eigh of the same matrix to 1e-10 (reference: numpy/LAPACK)."""
    mesh, mat = well(cells=(15, 25, 15), jitter=0.4)
    phi = 0.02 * mesh.z / mesh.z[-1]                       # a field: no inversion symmetry
    for kx, ky in ((0.0, 0.0), (0.21, 0.08)):
        d, u = kp._interior_hole_blocks(mesh.h, mesh.w, mat, phi, kx, ky, nb, False)
        H = kp.dense_matrix(d, u)
        assert np.abs(H - H.conj().T).max() <= 1e-14 * np.abs(H).max()
        ref, vref = np.linalg.eigh(H)
        vals, vecs = kp.lowest_banded(kp.band_matrix(d, u), 10)
        assert np.allclose(vals, ref[:10], atol=1e-10, rtol=0)
        # eigenvectors up to phase: projectors onto each eigenvalue's space agree
        assert np.abs(H @ vecs - vecs * vals).max() < 1e-10
        proj = vecs @ vecs.conj().T
        assert np.abs(proj - vref[:, :10] @ vref[:, :10].conj().T).max() < 1e-8


def test_kp4_at_zero_k_is_two_single_band_problems():
    """k_par = 0: the 4x4 model decouples into heavy holes with m_z = 1/(g1 - 2 g2) and light
    holes with 1/(g1 + 2 g2) (analytic); the single-band solver gives the same levels."""
    mesh, mat = well()
    e, psi = kp.lowest_states(mesh.h, mesh.w, mat, np.zeros(mesh.n), 0.0, 0.0, 4, 8)
    v = -_node_average(mesh, mat.ev)                   # hole kinetic edge per node
    hh, _ = solve_region(mesh.h, mesh.w, v, mat.g1 - 2 * mat.g2, 4)
    lh, _ = solve_region(mesh.h, mesh.w, v, mat.g1 + 2 * mat.g2, 4)
    single = np.sort(np.concatenate([hh, lh]))[:4]
    ours = -e[::2][:4]                                 # Kramers pairs
    assert np.allclose(e[::2], e[1::2], atol=1e-10)
    assert np.allclose(ours, single, atol=1e-4)        # 0.1 meV (issue); in fact ~1e-12


def _node_average(mesh, cell):
    out = np.zeros(mesh.n)
    out[1:] += mesh.wl[1:] * cell
    out[:-1] += mesh.wr[:-1] * cell
    return out / mesh.w


def _two_band_lh_so(mesh, mat, n):
    """Light and split-off holes at k_par = 0 as an independent 2x2 finite-volume problem:
    hole kinetic operator kz A kz with A = [[g1 + 2 g2, 2 sqrt2 g2], [2 sqrt2 g2, g1]] hbar^2/2m0
    (the |3/2,1/2>, |1/2,1/2> block of Chuang's matrix at kx = ky = 0: P - Q, P, and the
    coupling sqrt2 Q, Q = -2 g2 kz^2), the split-off edge Delta below."""
    h, w = mesh.h, mesh.w
    m = mesh.n - 2
    H = np.zeros((2 * mesh.n, 2 * mesh.n))
    s2 = np.sqrt(2.0)
    for c in range(mesh.n - 1):
        A = HBAR2_2M0 * np.array([[mat.g1[c] + 2 * mat.g2[c], 2 * s2 * mat.g2[c]],
                                  [2 * s2 * mat.g2[c], mat.g1[c]]]) / h[c]
        edge = -np.array([mat.ev[c], mat.ev[c] - mat.delta[c]]) * h[c] / 2
        for i, j, sg in ((c, c, 1), (c + 1, c + 1, 1), (c, c + 1, -1), (c + 1, c, -1)):
            H[2 * i:2 * i + 2, 2 * j:2 * j + 2] += sg * A
        H[2 * c:2 * c + 2, 2 * c:2 * c + 2] += np.diag(edge)
        H[2 * c + 2:2 * c + 4, 2 * c + 2:2 * c + 4] += np.diag(edge)
    H = H[2:-2, 2:-2]
    s = np.repeat(1 / np.sqrt(w[1:-1]), 2)
    assert H.shape[0] == 2 * m
    return np.linalg.eigvalsh(s[:, None] * H * s[None, :])[:n]


def test_kp6_at_zero_k_heavy_holes_exact_light_holes_against_a_2x2_solve():
    mesh, mat = well()
    e, psi = kp.lowest_states(mesh.h, mesh.w, mat, np.zeros(mesh.n), 0.0, 0.0, 6, 8)
    levels = -e[::2]
    v = -_node_average(mesh, mat.ev)
    hh, _ = solve_region(mesh.h, mesh.w, v, mat.g1 - 2 * mat.g2, 4)   # analytic decoupling
    lhso = _two_band_lh_so(mesh, mat, 4)                              # independent 2x2 solve
    assert np.allclose(np.sort(levels), np.sort(np.concatenate([hh, lhso]))[:4], atol=1e-9)
    # the split-off coupling moves the first light hole off its kp4 level (by ~0.6 meV here)
    e4, _ = kp.lowest_states(mesh.h, mesh.w, mat, np.zeros(mesh.n), 0.0, 0.0, 4, 8)
    assert abs(lhso[0] + e4[2]) > 1e-4


def test_heavy_and_light_hole_have_opposite_in_plane_curvature():
    """Near k_par = 0 the first heavy hole moves away from the gap and the first light hole
    towards it in a GaAs well (the light-hole anticrossing, D. A. Broido and L. J. Sham,
    Phys. Rev. B 31, 888 (1985))."""
    mesh, mat = well()
    for nb in (4, 6):
        e0 = -kp.lowest_states(mesh.h, mesh.w, mat, np.zeros(mesh.n), 0.0, 0.0, nb, 4)[0]
        e1 = -kp.lowest_states(mesh.h, mesh.w, mat, np.zeros(mesh.n), 0.04, 0.0, nb, 4)[0]
        assert e1[0] > e0[0] + 1e-4          # hh1: hole energy rises with k
        assert e1[2] < e0[2] - 1e-4          # lh1: falls


def test_spin_degeneracy_in_a_symmetric_well_and_splitting_in_a_field():
    """Inversion symmetry keeps every level doubly degenerate at any k_par (Kramers plus
    inversion, analytic); a field splits them at k_par != 0 and not at k_par = 0."""
    mesh, mat = well()
    e, _ = kp.lowest_states(mesh.h, mesh.w, mat, np.zeros(mesh.n), 0.1, 0.05, 6, 6)
    assert np.allclose(e[::2], e[1::2], atol=1e-9)
    tilt = 0.03 * mesh.z / mesh.z[-1]
    e0, _ = kp.lowest_states(mesh.h, mesh.w, mat, tilt, 0.0, 0.0, 6, 6)
    assert np.allclose(e0[::2], e0[1::2], atol=1e-9)
    e1, _ = kp.lowest_states(mesh.h, mesh.w, mat, tilt, 0.1, 0.0, 6, 6)
    assert np.abs(e1[::2] - e1[1::2]).max() > 1e-5


def test_axial_approximation_is_isotropic_and_the_full_model_warps():
    """Axial: E(k) the same along [100] and [110] (by construction of the approximation,
    Chuang 1995); without it GaAs (g2 != g3) warps."""
    mesh, mat = well()
    k = 0.15
    a100 = kp.lowest_states(mesh.h, mesh.w, mat, np.zeros(mesh.n), k, 0, 4, 4, axial=True)[0]
    a110 = kp.lowest_states(mesh.h, mesh.w, mat, np.zeros(mesh.n), k / np.sqrt(2),
                            k / np.sqrt(2), 4, 4, axial=True)[0]
    assert np.allclose(a100, a110, atol=1e-10)
    f100 = kp.lowest_states(mesh.h, mesh.w, mat, np.zeros(mesh.n), k, 0, 4, 4)[0]
    f110 = kp.lowest_states(mesh.h, mesh.w, mat, np.zeros(mesh.n), k / np.sqrt(2),
                            k / np.sqrt(2), 4, 4)[0]
    assert np.abs(f100 - f110).max() > 1e-4


@pytest.mark.parametrize("nb", [4, 6])
def test_symmetry_splits_give_the_whole_matrix_eigenpairs(nb):
    """k_par = 0 as its decoupled problems, [100] axial and warped, [110] warped as the two
    Broido-Sham halves: the same eigenvalues as the whole matrix solved by the block solver
    to 1e-10 (reference: kp.lowest_banded, itself checked against numpy eigh above), and
    eigenvectors of the whole matrix (residual 1e-9, internal consistency check)."""
    mesh, mat = well(cells=(15, 25, 15), jitter=0.4)
    phi = 0.02 * mesh.z / mesh.z[-1]
    s = 1.0 / np.sqrt(mesh.w[1:-1])
    for kx, ky, axial in ((0.0, 0.0, True), (0.2, 0.0, True), (0.2, 0.0, False), (0.15, 0.15, False)):
        d, u = kp._interior_hole_blocks(mesh.h, mesh.w, mat, phi, kx, ky, nb, axial)
        if kx == 0.0:
            assert kp.zone_centre(d, u, nb, 8) is not None
        else:
            sp = kp.split_transform(nb, kx / np.hypot(kx, ky), ky / np.hypot(kx, ky), axial)
            assert sp is not None and sp[1] and kp.split_blocks(d, u, *sp) is not None
        ref, _ = kp.lowest_banded(kp.band_matrix(d, u), 8)
        e, psi = kp.lowest_states(mesh.h, mesh.w, mat, phi, kx, ky, nb, 8, axial=axial)
        assert np.allclose(-e, ref, atol=1e-10, rtol=0)
        H = kp.dense_matrix(d, u)
        x = (psi[1:-1] / s[:, None, None]).reshape(-1, 8)
        assert np.abs(H @ x + x * e).max() < 1e-9


@pytest.mark.parametrize("nb, angle", [(6, None), (4, None), (6, np.pi / 4)])
def test_reduced_basis_agrees_with_the_whole_block_solve(nb, angle):
    """Internal consistency check: the reduced-basis dispersion (kp.reduced_dispersion) of an
    asymmetric well equals the block solver's (kp.dispersion) to 0.05 meV at every k_par
    (the tolerance the issue states), and the hole density of the k_par integral to 1e-3
    relative; its own error estimate stays below BASIS_TOL (no k_par fell back)."""
    mesh, mat = well(cells=(30, 60, 30), jitter=0.3)
    phi = 0.04 * mesh.z / mesh.z[-1]
    k_grid = np.linspace(0.0, 0.35, 12)
    n = 8
    ref = kp.dispersion(mesh.h, mesh.w, mat, phi, nb, n, k_grid, angle=angle)
    got = kp.reduced_dispersion(mesh.h, mesh.w, mat, phi, nb, n, k_grid, angle=angle)
    assert got is not None
    assert np.abs(got[0] - ref[0]).max() <= 5e-5
    efp, kT = float(ref[0][0, 0]) - 0.01, 0.002       # a 10 meV deep Fermi sea
    dens = []
    for E, d in ((ref[0], ref[1]), (got[0], got[1])):
        en, dos, wt, _ = kp.annulus_states(k_grid, E, d)
        dens.append(wt @ (dos * kT * np.logaddexp(0.0, (en - efp) / kT)))
    assert np.sum(mesh.w * np.abs(dens[1] - dens[0])) <= 1e-3 * np.sum(mesh.w * dens[0])


def test_a_kept_basis_reused_at_a_nearby_potential_gives_the_same_states():
    """Internal consistency check: the basis kept in ``cache`` at one potential and reused at
    a potential 0.5 mV away (within BASIS_REUSE) gives the energies of the whole block solve
    there to 0.05 meV, as a basis built there does."""
    mesh, mat = well(cells=(30, 60, 30), jitter=0.3)
    phi = 0.04 * mesh.z / mesh.z[-1]
    k_grid = np.linspace(0.0, 0.35, 12)
    cache = {}
    kp.reduced_dispersion(mesh.h, mesh.w, mat, phi, 6, 8, k_grid, cache=cache)
    kept = next(iter(cache.values()))[1]
    moved = phi + 5e-4 * np.sin(mesh.z / 7.0)
    assert np.abs(moved - phi).max() <= kp.BASIS_REUSE
    got = kp.reduced_dispersion(mesh.h, mesh.w, mat, moved, 6, 8, k_grid, cache=cache)
    assert next(iter(cache.values()))[1] is kept                 # reused, not rebuilt
    ref = kp.dispersion(mesh.h, mesh.w, mat, moved, 6, 8, k_grid)
    assert np.abs(got[0] - ref[0]).max() <= 5e-5
    # 4 mV away, near the edge of BASIS_REUSE: reused if it passes the check, else rebuilt;
    # either way the whole solve's energies to 0.05 meV
    far = phi + 4e-3 * np.sin(mesh.z / 7.0)
    assert np.abs(far - phi).max() <= kp.BASIS_REUSE
    got = kp.reduced_dispersion(mesh.h, mesh.w, mat, far, 6, 8, k_grid, cache=cache)
    ref = kp.dispersion(mesh.h, mesh.w, mat, far, 6, 8, k_grid)
    assert np.abs(got[0] - ref[0]).max() <= 5e-5


def test_reduced_basis_gives_the_same_bits_on_two_threads():
    """The two halves on two threads: the same arrays, bit for bit (each half is solved by
    the same code whatever thread runs it)."""
    mesh, mat = well(cells=(30, 60, 30), jitter=0.3)
    phi = 0.04 * mesh.z / mesh.z[-1]
    k_grid = np.linspace(0.0, 0.35, 12)
    one = kp.reduced_dispersion(mesh.h, mesh.w, mat, phi, 6, 8, k_grid, threads=1)
    two = kp.reduced_dispersion(mesh.h, mesh.w, mat, phi, 6, 8, k_grid, threads=2)
    for a, b in zip(one, two):
        assert np.array_equal(a, b)


def test_line_residuals_kernel_is_the_block_product_at_each_k():
    """Internal consistency check: kernels/kp.py::line_residuals (every k of a line in one
    call) gives the bits of block_apply of H(k) = (Z + phi) + k B1 + k^2 B2 at each k less
    psi theta, the products it replaced."""
    from selfcon.solver.kernels.kp import block_apply, line_residuals
    rng = np.random.default_rng(7)
    m, q, nk, r = 9, 3, 4, 2
    sym = lambda x: 0.5 * (x + np.swapaxes(x, 1, 2))
    dz, d1, d2 = (sym(rng.normal(size=(m, q, q))) for _ in range(3))
    uz, u1, u2 = (rng.normal(size=(m - 1, q, q)) for _ in range(3))
    phi = rng.normal(size=m)
    k_grid = np.array([0.0, 0.1, 0.25, 0.4])
    psi = rng.normal(size=(m, q, nk, r))
    theta = rng.normal(size=(nk, r))
    got = line_residuals(dz, uz, d1, u1, d2, u2, phi, k_grid, psi, theta)
    d0 = dz + phi[:, None, None] * np.eye(q)
    for j, k in enumerate(k_grid):
        p = np.ascontiguousarray(psi[:, :, j, :])
        ref = block_apply(d0 + k * d1 + (k * k) * d2, uz + k * u1 + (k * k) * u2, p) - p * theta[j]
        assert np.array_equal(got[:, j, :], ref.reshape(m * q, r))


def test_block_apply_into_is_the_dense_product_in_its_columns():
    """kernels/kp.py::block_apply_into (several block products written into one array, which
    the basis build projects by one matrix product) against the dense block-tridiagonal
    matrix times x (numpy), in its columns only, and block_apply's bits there."""
    from selfcon.solver.kernels.kp import block_apply, block_apply_into
    rng = np.random.default_rng(5)
    m, q, r = 7, 3, 4
    d = rng.normal(size=(m, q, q))
    d = 0.5 * (d + np.swapaxes(d, 1, 2))
    u = rng.normal(size=(m - 1, q, q))
    x = rng.normal(size=(m, q, r))
    dense = np.zeros((m * q, m * q))
    for i in range(m):
        dense[i * q:(i + 1) * q, i * q:(i + 1) * q] = d[i]
        if i + 1 < m:
            dense[i * q:(i + 1) * q, (i + 1) * q:(i + 2) * q] = u[i]
            dense[(i + 1) * q:(i + 2) * q, i * q:(i + 1) * q] = u[i].T
    y = np.full((m, q, 3 * r), 7.0)
    block_apply_into(d, u, x, y, r)
    assert np.allclose(y[:, :, r:2 * r].reshape(m * q, r), dense @ x.reshape(m * q, r),
                       rtol=0, atol=1e-12)
    assert np.all(y[:, :, :r] == 7.0) and np.all(y[:, :, 2 * r:] == 7.0)
    assert np.array_equal(y[:, :, r:2 * r], block_apply(d, u, x))


def test_side_by_side_sturm_counts_and_the_bisection():
    """kernels/kp.py::sturm_counts (several factorisations side by side) gives sturm_count's
    counts at every point, on real and complex band matrices of several bandwidths; and
    lowest_eigenvalues (every open bracket halved in one pass of them) brackets the lowest
    eigenvalues of numpy.linalg.eigvalsh (LAPACK) to its tolerance, a degenerate pair too."""
    from selfcon.solver.kernels.kp import lowest_eigenvalues, sturm_count, sturm_counts
    rng = np.random.default_rng(3)
    for dtype in (float, complex):
        for u in (0, 1, 3):
            m = 40
            ab = rng.normal(size=(u + 1, m)).astype(dtype)
            if dtype is complex:
                ab = ab + 1j * rng.normal(size=(u + 1, m))
            ab[u] = ab[u].real
            xs = rng.uniform(-4.0, 4.0, 7)
            got = np.empty(7, dtype=np.int64)
            sturm_counts(ab, xs, got)
            assert [int(c) for c in got] == [sturm_count(ab, x) for x in xs]
            dense = np.zeros((m, m), dtype=dtype)
            for off in range(u + 1):
                for j in range(off, m):
                    dense[j - off, j] = ab[u - off, j]
            dense = np.triu(dense) + np.triu(dense, 1).conj().T
            ref = np.linalg.eigvalsh(dense)[:6]
            centre, half = lowest_eigenvalues(ab, 6, -50.0, 50.0, 1e-9, np.empty(0))
            assert np.all(half <= 1e-9) and np.all(np.abs(centre - ref) <= 1e-9)
    ab = np.zeros((2, 10))                  # diagonal 1, 1, 2, 3, ...: a degenerate lowest pair
    ab[1] = [1.0, 1.0] + list(range(2, 10))
    centre, _ = lowest_eigenvalues(ab, 3, -1.0, 20.0, 1e-10, np.empty(0))
    assert np.allclose(centre, [1.0, 1.0, 2.0], atol=1e-10, rtol=0)


def test_line_matrices_and_shifted_cholesky_give_the_numpy_bits():
    """kernels/kp.py::line_matrices is numpy's P0 + k P1 + k^2 P2 at every k, and
    kp._shifted_cholesky (the kept band of Z with its diagonal shifted) is
    scipy.linalg.cholesky_banded of the band of Z + phi - sigma, both bit for bit (the
    expressions they replaced); and the factor is that of the dense matrix (numpy)."""
    import scipy.linalg as sla
    from selfcon.solver.kernels.kp import line_matrices
    rng = np.random.default_rng(9)
    K, nk = 10, 5
    P0, P1, P2 = (0.5 * (x + x.T) for x in rng.normal(size=(3, K, K)))
    k_grid = np.linspace(0.0, 0.4, nk)
    out = np.empty((nk, K, K))
    line_matrices(P0, P1, P2, k_grid, out)
    kk = k_grid[:, None, None]
    assert np.array_equal(out, P0 + kk * P1 + (kk * kk) * P2)
    m, q = 12, 3
    dz = rng.normal(size=(m, q, q))
    dz = 0.5 * (dz + np.swapaxes(dz, 1, 2)) + 8.0 * np.eye(q)
    uz = 0.3 * rng.normal(size=(m - 1, q, q))
    phin = rng.normal(scale=0.1, size=m)
    sigma = -0.7
    for _ in range(2):                                  # built, then taken from the cache
        got = kp._shifted_cholesky(dz, uz, phin, sigma)
        d0 = dz + phin[:, None, None] * np.eye(q)
        ref = sla.cholesky_banded(kp._band_lower(d0 - sigma * np.eye(q), uz), lower=True,
                                  check_finite=False)
        assert np.array_equal(got, ref)
    dense = kp.dense_matrix(d0 - sigma * np.eye(q), uz).real
    L = np.linalg.cholesky(dense)
    band = np.zeros_like(got)
    for r in range(got.shape[0]):
        band[r, :m * q - r] = np.diag(L, -r)
    assert np.allclose(got, band, atol=1e-12, rtol=0)


def test_light_band_is_the_band_of_the_shifted_blocks():
    """kp._light_band (the kept band of the light and split-off blocks with the potential
    added to its diagonal row) is band_matrix of the blocks of Z + phi, bit for bit, when
    built and when taken from its cache."""
    rng = np.random.default_rng(4)
    m, q = 9, 3
    dz = rng.normal(size=(m, q, q))
    dz = 0.5 * (dz + np.swapaxes(dz, 1, 2))
    uz = rng.normal(size=(m - 1, q, q))
    for scale in (0.1, 0.2):
        phin = rng.normal(scale=scale, size=m)
        d0 = dz + phin[:, None, None] * np.eye(q)
        assert np.array_equal(kp._light_band(dz, uz, phin), kp.band_matrix(d0[:, 1:, 1:], uz[:, 1:, 1:]))


def test_tridiagonal_lowest_gives_the_lowest_eigenpairs():
    """kernels/kp.py::tridiagonal_lowest (LAPACK's dsytrd, then the tridiagonal eigensolver
    and the back-transformation) against numpy.linalg.eigh (LAPACK): the lowest values to
    1e-12 and the vectors as the same invariant subspaces, on random symmetric matrices and
    on one with a doubly degenerate lowest value."""
    from scipy.linalg import lapack
    from selfcon.solver.kernels.kp import tridiagonal_lowest
    rng = np.random.default_rng(11)
    K, want = 24, 6
    mats = [rng.normal(size=(K, K)) for _ in range(3)]
    mats = [0.5 * (a + a.T) for a in mats]
    q, _ = np.linalg.qr(rng.normal(size=(K, K)))
    vals = np.r_[-2.0, -2.0, np.linspace(-1.0, 3.0, K - 2)]
    mats.append((q * vals) @ q.T)
    d, e, tau = np.empty((4, K)), np.empty((4, K - 1)), np.empty((4, K - 1))
    refl = np.empty((4, K, K))
    for j, a in enumerate(mats):
        c, d[j], e[j], tau[j], info = lapack.dsytrd(a, lower=1)
        assert info == 0
        refl[j] = c.T
    theta, coef = np.empty((4, want)), np.empty((4, K, want))
    tridiagonal_lowest(d, e, refl, tau, want, theta, coef)
    for j, a in enumerate(mats):
        w, v = np.linalg.eigh(a)
        assert np.allclose(theta[j], w[:want], atol=1e-12, rtol=0)
        assert np.allclose(coef[j].T @ coef[j], np.eye(want), atol=1e-12)
        assert np.abs(a @ coef[j] - coef[j] * theta[j]).max() < 1e-11
        # the same subspace as numpy's vectors (the first want values are apart from the next)
        proj = v[:, :want] @ v[:, :want].T
        assert np.abs(proj @ coef[j] - coef[j]).max() < 1e-10


def test_forward_norms_is_the_banded_triangular_solve():
    """kernels/kp.py::forward_norms against scipy.linalg.solve_triangular on the dense factor
    of scipy.linalg.cholesky_banded: |L^-1 r|^2 of every column to 1e-12 relative; and
    kernels/kp.py::cholesky_solve against scipy.linalg.cho_solve_banded."""
    import scipy.linalg as sla
    from selfcon.solver.kernels.kp import cholesky_solve, forward_norms
    rng = np.random.default_rng(5)
    n, u, c = 40, 5, 7
    a = rng.normal(size=(n, n))
    a = (a + a.T) * (np.abs(np.subtract.outer(np.arange(n), np.arange(n))) <= u)
    a += 4.0 * (2 * u + 1) * np.eye(n)       # diagonally dominant: positive definite
    ab = np.zeros((u + 1, n))
    for off in range(u + 1):
        ab[off, :n - off] = np.diagonal(a, -off)
    chol = sla.cholesky_banded(ab, lower=True)
    L = np.zeros((n, n))
    for off in range(u + 1):
        L += np.diag(chol[off, :n - off], -off)
    r = rng.normal(size=(n, c))
    ref = np.sum(sla.solve_triangular(L, r, lower=True) ** 2, axis=0)
    assert np.allclose(forward_norms(chol, r), ref, rtol=1e-12, atol=0)
    # and the whole solve (L L^T)^-1 r against LAPACK's dpbtrs (scipy.linalg.cho_solve_banded)
    assert np.allclose(cholesky_solve(chol, r), sla.cho_solve_banded((chol, True), r),
                       rtol=1e-12, atol=1e-14)


def test_lowest_banded_real_band_equals_the_complex_solve():
    """lowest_banded on a real symmetric band matrix (real arithmetic) gives the values of the
    same matrix solved as complex (the Hermitian path) to 1e-12 eV and real vectors spanning
    the same states; the light and split-off holes of a real half at k_par = 0."""
    mesh, mat = well(cells=(20, 30, 20))
    T, halves = kp._line_operators(mesh.h, mesh.w, mat, 6, 1.0, 0.0, True)
    (dz, uz), _, _ = halves[0]
    ab = kp.band_matrix(dz[:, 1:, 1:], uz[:, 1:, 1:])
    assert ab.dtype == float
    e_r, v_r = kp.lowest_banded(ab, 6)
    e_c, v_c = kp.lowest_banded(ab.astype(complex), 6)
    assert v_r.dtype == float
    assert np.allclose(e_r, e_c, atol=1e-12, rtol=0)
    overlap = np.abs(v_c.conj().T @ v_r)          # the same states (distinct values), any phase
    assert np.allclose(overlap, np.eye(6), atol=1e-8)


def test_warped_lines_share_their_zone_centre_states():
    """The [100] and [110] lines at one potential with a shared ``zone`` dict solve the
    zone-centre states once (the k_par = 0 operator of every half is the same matrix in every
    direction) and give the energies of separate solves to 1e-12 eV; asked for the energies
    alone, the same energies."""
    mesh, mat = well(cells=(30, 60, 30), jitter=0.3)
    phi = 0.04 * mesh.z / mesh.z[-1]
    k_grid = np.linspace(0.0, 0.35, 12)
    zone, first = {}, None
    for angle in (0.0, np.pi / 4):
        alone = kp.reduced_dispersion(mesh.h, mesh.w, mat, phi, 6, 8, k_grid, angle=angle)
        shared = kp.reduced_dispersion(mesh.h, mesh.w, mat, phi, 6, 8, k_grid, angle=angle, zone=zone)
        assert np.abs(shared[0] - alone[0]).max() <= 1e-12
        assert len(zone) == 1
        first = first or next(iter(zone.values()))
        assert next(iter(zone.values())) is first            # solved once, taken again
        # the energies alone (energies=True, the warped lines of a result): the same bits
        only = kp.reduced_dispersion(mesh.h, mesh.w, mat, phi, 6, 8, k_grid, angle=angle,
                                     energies=True)
        assert np.array_equal(only[0], alone[0]) and only[1] is None and only[2] is None


def test_orthonormal_columns_cholesky_qr_and_its_fallback():
    """kp._orthonormal_columns: on a tall block of columns of very different sizes (as the
    reduced basis' corrections, condition number ~1e5) Cholesky QR twice gives orthonormal
    columns (to 1e-14) spanning the block's columns as Householder QR's (numpy.linalg.qr);
    with a column that repeats another (rank deficient) the Householder path drops it."""
    rng = np.random.default_rng(4)
    n, K = 600, 24
    X = rng.standard_normal((n, K)) * np.logspace(0, 4, K)[None, :]
    q = kp._orthonormal_columns(X)
    assert q.shape == (n, K)
    assert np.abs(q.T @ q - np.eye(K)).max() < 1e-14
    ref, _ = np.linalg.qr(X)
    assert np.abs(ref @ (ref.T @ q) - q).max() < 1e-10         # the same column space
    Y = np.concatenate([X, X[:, :1]], axis=1)                    # one column twice
    q = kp._orthonormal_columns(Y)
    assert q.shape == (n, K)
    assert np.abs(q.T @ q - np.eye(K)).max() < 1e-14


def test_ritz_pairs_found_again_where_a_half_needs_them_all(monkeypatch):
    """With no margin (RITZ_MARGIN = 0: n/2 Ritz pairs per half) a half whose every pair is
    among the lowest n at some k_par is solved again for all n: the dispersion and densities
    equal the default's (n/2 + 2 pairs) to 1e-12."""
    mesh, mat = well(cells=(30, 60, 30), jitter=0.3)
    phi = 0.04 * mesh.z / mesh.z[-1]
    k_grid = np.linspace(0.0, 0.35, 12)
    ref = kp.reduced_dispersion(mesh.h, mesh.w, mat, phi, 6, 8, k_grid)
    monkeypatch.setattr(kp, "RITZ_MARGIN", 0)
    got = kp.reduced_dispersion(mesh.h, mesh.w, mat, phi, 6, 8, k_grid)
    assert np.allclose(got[0], ref[0], rtol=0, atol=1e-12)
    assert np.allclose(got[1], ref[1], rtol=0, atol=1e-12 * np.abs(ref[1]).max())


def test_collected_states_sum_the_annulus_terms_at_one_energy():
    """kp.collect_states hands the Poisson kernel one pseudo-subband per state and grid
    energy (the end of one annulus and the start of the next summed, kernels/kp.py::
    merge_annuli) where every end term lies at the next grid energy: the hole density with
    every level moved by a local potential change (the predictor's sum) equals that of
    annulus_states' terms to rounding of the terms' sizes, with about half the terms; with a
    flat annulus (narrower than FLAT) the annulus terms are kept as they are."""
    rng = np.random.default_rng(9)
    n, m, N = 4, 7, 30
    k_grid = np.linspace(0.0, 0.4, m)
    efp, kT = -0.012, 0.002
    dphi = 0.003 * rng.standard_normal(N)

    def density(en, dos, wt, size=False):
        x = (en[None, :] - dphi[:, None] - efp) / kT
        terms = wt * dos[None, :] * kT * np.logaddexp(0.0, x)
        return np.sum(np.abs(terms) if size else terms, axis=1)
    for flat in (False, True):
        E = -0.01 * rng.random((n, 1)) - np.cumsum(0.004 * rng.random((n, m)), axis=1)
        if flat:
            E[1, 3] = E[1, 2]
        dens = rng.random((N, n, m))
        solved = [(k_grid, E, dens, np.zeros((N, 6, n), dtype=complex))]
        hk = kp.collect_states(N, "kp6", [(0, 0, N - 1)], solved, efp, kT)
        en, dos, wt, _ = kp.annulus_states(k_grid, E, dens)
        scale = density(en, dos, wt, size=True)
        assert np.all(np.abs(density(hk.energy, hk.dos, hk.weight) - density(en, dos, wt)) <= 1e-14 * scale)
        assert hk.energy.size == (en.size if flat else n * m)


def _kernel_density(en, dos, wt, efp, kT):
    """The hole density the Poisson kernel sums from pseudo-subbands (no potential change)."""
    x = (en[None, :] - efp) / kT
    return np.sum(wt * dos[None, :] * kT * np.logaddexp(0.0, x), axis=1)


def test_linked_states_with_unit_links_are_the_annulus_terms():
    """With every state linked to the state of its own rank (the identity), linked_states is
    annulus_states summed at the grid energies: the same density to rounding and the same
    sheet per state (analytic: the same annuli)."""
    rng = np.random.default_rng(4)
    n, m, N = 4, 7, 30
    k_grid = np.linspace(0.0, 0.4, m)
    efp, kT = -0.012, 0.002
    E = -0.01 * rng.random((n, 1)) - np.cumsum(0.004 * rng.random((n, m)), axis=1)
    dens = rng.random((N, n, m))
    links = np.broadcast_to(np.eye(n), (m - 1, n, n))
    en, dos, wt, sheet = kp.linked_states(k_grid, E, dens, links, efp, kT)
    ea, da, wa, state = kp.annulus_states(k_grid, E, dens)
    ref = _kernel_density(ea, da, wa, efp, kT)
    assert en.size == n * m and np.array_equal(en, E.ravel())
    assert np.allclose(_kernel_density(en, dos, wt, efp, kT), ref, rtol=1e-12, atol=0)
    assert np.allclose(sheet, kp.annulus_sheets(ea, da, state, n, efp, kT), rtol=1e-12, atol=0)


def test_linked_states_follow_two_crossing_wells():
    """Two uncoupled wells (one node each) with a band linear in k^2 each, crossing between
    grid points: the i-th lowest state changes well at the crossing.  Linked by their
    overlap (1 within a well, 0 across), each well holds its own band's holes exactly
    (analytic: a band linear in k^2 has the constant DOS (k_b^2 - k_a^2) / (4 pi (eps_b -
    eps_a)), so its holes up to the grid end are D kT [ln(1 + e^(E(0)-EF)/kT) - ln(1 +
    e^(E(k_top)-EF)/kT)]), whichever grid point the crossing passes; joining the states
    by their rank (annulus_states) gives each well part of the other's band, and the
    well's density jumps as the crossing moves past a grid point."""
    m, kT, efp = 9, 3.4e-4, 0.0
    k_grid = np.linspace(0.0, 0.36, m)
    k2 = k_grid ** 2

    def wells(shift):
        bands = np.array([0.0052 - 0.15 * k2, 0.003 + shift - 0.06 * k2])    # eV, well 0 / 1
        order = np.argsort(-bands, axis=0, kind="stable")                   # rank -> well
        E = np.take_along_axis(bands, order, 0)
        dens = np.zeros((2, 2, m))
        dens[order, np.arange(2)[:, None], np.arange(m)[None, :]] = 1.0   # node = well
        links = np.array([(order[:, j][:, None] == order[:, j + 1][None, :]).astype(float)
                          for j in range(m - 1)])
        exact = []
        for b in bands:
            D = (k2[-1] - k2[0]) / (4.0 * np.pi * (b[0] - b[-1]))
            exact.append(D * kT * (np.logaddexp(0.0, (b[0] - efp) / kT)
                                   - np.logaddexp(0.0, (b[-1] - efp) / kT)))
        en, dos, wt, _ = kp.linked_states(k_grid, E, dens, links, efp, kT)
        ea, da, wa, _ = kp.annulus_states(k_grid, E, dens)
        return (_kernel_density(en, dos, wt, efp, kT), _kernel_density(ea, da, wa, efp, kT),
                np.array(exact))
    # the crossing at the grid point k_4 (0.3 meV above EF): 0.0052 - 0.15 k^2 = 0.003 + s - 0.06 k^2
    s4 = 0.0022 - 0.09 * k2[4]
    near = [wells(s4 + d) for d in (-1e-7, 1e-7)]
    for linked, _, exact in near + [wells(s4 + 2e-3), wells(s4 - 2e-3)]:
        assert np.allclose(linked, exact, rtol=1e-9, atol=0)
    # linked: each side equals its closed form (above), which moves by ~1e-4 of itself over
    # the 2e-7 eV step; ranked: a jump of several per cent of the well's density
    assert np.abs(near[0][0] - near[1][0]).max() < 2e-4 * near[0][2].max()
    assert np.abs(near[0][1] - near[1][1]).max() > 0.02 * near[0][2].max()


def _two_wells_ritz(g, shift, k):
    """Ritz pairs (ascending) of H(k) = [[e_C(k), g], [g, e_W(k)]] (hole kinetic scale, eV):
    two wells' states crossing near k = 0.15 nm^-1, coupled by g."""
    th, cs = [], []
    for kk in k:
        e, v = np.linalg.eigh(np.array([[0.002 + 0.15 * kk * kk, g], [g, 0.0047 + shift + 0.03 * kk * kk]]))
        th.append(e)
        cs.append(v)
    return np.array(th), np.array(cs)


def test_unresolved_crossing_is_taken_apart_and_a_wide_anticrossing_kept():
    """kp._unmix_crossings: two states coupled by 0.02 meV, their crossing 0.05 meV from a
    grid point (the eigenstates there mixed 11 %, the gap 0.064 meV against 1.0 and 1.1 meV
    at the neighbouring points): the pair at that point becomes the two wells' own states
    (to 1e-5 in probability; what remains is the neighbours' own mixing, ~(g / 1 meV)^2)
    with their own energies to 1e-4 meV (analytic: the diagonal of the 2x2 matrix);
    coupled by 2 meV (an anticrossing several grid steps wide) the eigenpairs are kept as
    they are."""
    k = np.linspace(0.0, 0.3, 11)
    kc2 = (0.0047 - 0.002) / (0.15 - 0.03)                  # the crossing's k^2
    j = int(np.argmin(np.abs(k * k - kc2)))
    shift = 0.12 * (kc2 - k[j] ** 2) + 5e-5                 # 0.05 meV from grid point j
    th, cs = _two_wells_ritz(2e-5, shift, k)
    assert 0.1 < float(np.min(np.abs(cs[j]) ** 2)) < 0.5
    th2, cs2 = kp._unmix_crossings(th, cs)
    assert np.min(np.max(np.abs(cs2[j]), axis=0) ** 2) > 1 - 1e-5
    own = sorted([0.002 + 0.15 * k[j] ** 2, 0.0047 + shift + 0.03 * k[j] ** 2])
    assert np.allclose(np.sort(th2[j]), own, rtol=0, atol=1e-7)
    far = [i for i in range(k.size) if abs(i - j) > 1]
    assert np.array_equal(th2[far], th[far]) and np.array_equal(cs2[far], cs[far])
    th, cs = _two_wells_ritz(2e-3, shift, k)
    th2, cs2 = kp._unmix_crossings(th, cs)
    assert np.array_equal(th2, th) and np.array_equal(cs2, cs)


def test_reduced_basis_same_bits_with_the_halves_on_two_threads(monkeypatch):
    """The halves on two threads from HALF_THREADS_NODES region nodes on (lowered here to
    the test's small well): the same arrays, bit for bit, as one after the other."""
    mesh, mat = well(cells=(30, 60, 30), jitter=0.3)
    phi = 0.04 * mesh.z / mesh.z[-1]
    k_grid = np.linspace(0.0, 0.35, 12)
    one = kp.reduced_dispersion(mesh.h, mesh.w, mat, phi, 6, 8, k_grid, threads=1)
    monkeypatch.setattr(kp, "HALF_THREADS_NODES", 0)
    calls = []
    real = kp._per_half
    monkeypatch.setattr(kp, "_per_half", lambda fn, threads: calls.append(threads) or real(fn, threads))
    two = kp.reduced_dispersion(mesh.h, mesh.w, mat, phi, 6, 8, k_grid, threads=2)
    assert calls and all(t == 2 for t in calls)
    for a, b in zip(one, two):
        assert np.array_equal(a, b)


def test_bulk_curvature_cache_stays_bounded(monkeypatch):
    """A study sweeping compositions keeps at most CURVATURE_CACHE_SIZE parameter sets, and a
    value computed again equals the kept one (the same arithmetic)."""
    monkeypatch.setattr(kp, "_CURVATURES", {})
    monkeypatch.setattr(kp, "CURVATURE_CACHE_SIZE", 2)
    first = kp.bulk_curvatures(4.05, 0.49, 2.93, 4)
    for g1 in (5.0, 6.0, 7.0):
        kp.bulk_curvatures(g1, 0.49, 2.93, 4)
        assert len(kp._CURVATURES) <= 2
    assert kp.bulk_curvatures(4.05, 0.49, 2.93, 4) == first
