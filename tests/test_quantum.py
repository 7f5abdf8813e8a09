"""Checks of the BenDaniel–Duke bound-state solver (selfcon.solver.schrodinger).

Every reference value names its source beside it.  Meshes are small; the whole
file runs in a few seconds.
"""
import numpy as np
import pytest
from scipy.optimize import brentq
from scipy.special import ai_zeros

from selfcon.constants import HBAR2_2M0
from selfcon.model.mesh import half_widths
from selfcon.solver.schrodinger import (EigenWorkspace, bound_states, bound_states_cells,
                                        in_plane_mass, in_plane_weights, solve_region,
                                        thermal_in_plane_energy)

# GaAs-like well / Al0.3Ga0.7As-like barrier used throughout (values for the test
# only; the physics checks below hold for any masses and depth).
M_W, M_B = 0.067, 0.092     # m0
V0 = 0.25                   # eV
L_W = 10.0                  # nm


# ----------------------------------------------------------------------------- helpers

def layered_mesh(thicknesses, h, rng=None, grade=0.0, jitter=0.0):
    """Nodes with every interface on a node.  Per layer: ~thickness/h cells, either
    uniform, randomly sized (jitter in [0, 1): widths uniform in [1-jitter, 1+jitter]
    times the mean; a *fixed* random pattern is passed in via rng), or smoothly graded
    (grade in [0, 1): s -> s - grade sin(2 pi s)/(2 pi), fine at both layer ends)."""
    z = [0.0]
    for t in thicknesses:
        nc = max(int(round(t / h)), 1)
        if jitter and rng is not None:
            widths = 1.0 + jitter * (2.0 * rng.random(nc) - 1.0)
            s = np.concatenate([[0.0], np.cumsum(widths)]) / widths.sum()
        else:
            s = np.linspace(0.0, 1.0, nc + 1)
        if grade:
            s = s - grade * np.sin(2 * np.pi * s) / (2 * np.pi)
        z.extend(z[-1] + t * s[1:])
    return np.array(z)


def bisect_cells(z, times):
    """Split every cell of z into 2**times equal cells (nested refinement)."""
    for _ in range(times):
        mid = 0.5 * (z[:-1] + z[1:])
        z = np.insert(z, np.arange(1, z.size), mid)
    return z


def well_cells(z, barrier):
    """Per-cell band edge and mass of barrier | well | barrier with the well at [barrier, barrier+L_W]."""
    zc = 0.5 * (z[:-1] + z[1:])
    inside = (zc > barrier) & (zc < barrier + L_W)
    return np.where(inside, 0.0, V0), np.where(inside, M_W, M_B)


def bdd_finite_well_levels(v0=V0, width=L_W, mw=M_W, mb=M_B):
    """Roots of the BenDaniel–Duke matching conditions (psi and psi'/m continuous) for a
    symmetric square well with infinitely thick barriers (analytic, solved with
    scipy.optimize.brentq).  Even: (k/mw) tan(kL/2) = kappa/mb; odd: -(k/mw) cot(kL/2) =
    kappa/mb, written with sin/cos so that they have no poles."""
    def k(E):
        return np.sqrt(mw * E / HBAR2_2M0)

    def kap(E):
        return np.sqrt(mb * (v0 - E) / HBAR2_2M0)

    def f_even(E):
        return k(E) / mw * np.sin(k(E) * width / 2) - kap(E) / mb * np.cos(k(E) * width / 2)

    def f_odd(E):
        return k(E) / mw * np.cos(k(E) * width / 2) + kap(E) / mb * np.sin(k(E) * width / 2)

    grid = np.linspace(1e-12, v0 * (1 - 1e-12), 20001)
    roots = []
    for f, parity in ((f_even, 0), (f_odd, 1)):
        y = f(grid)
        for i in np.nonzero(np.sign(y[:-1]) != np.sign(y[1:]))[0]:
            roots.append((brentq(f, grid[i], grid[i + 1], xtol=1e-15, rtol=1e-15), parity))
    roots.sort()
    return np.array([r[0] for r in roots]), [r[1] for r in roots]


def bdd_outside_probability(E, parity, v0=V0, width=L_W, mw=M_W, mb=M_B):
    """Probability in the barriers of the analytic BenDaniel–Duke state (analytic):
    psi = cos(kz) or sin(kz) inside, A exp(-kappa(|z|-L/2)) outside, A = psi(L/2)."""
    k = np.sqrt(mw * E / HBAR2_2M0)
    kap = np.sqrt(mb * (v0 - E) / HBAR2_2M0)
    a = width / 2
    if parity == 0:
        edge2, inside = np.cos(k * a) ** 2, a + np.sin(2 * k * a) / (2 * k)
    else:
        edge2, inside = np.sin(k * a) ** 2, a - np.sin(2 * k * a) / (2 * k)
    outside = edge2 / kap          # 2 * edge^2 / (2 kappa), both sides
    return outside / (outside + inside)


def observed_orders(hs, errs):
    """Pairwise orders log(e1/e2)/log(h1/h2) and the least-squares slope of log e vs log h."""
    hs, errs = np.asarray(hs, float), np.abs(np.asarray(errs, float))
    pair = np.log(errs[:-1] / errs[1:]) / np.log(hs[:-1] / hs[1:])
    fit = np.polyfit(np.log(hs), np.log(errs), 1)[0]
    return pair, fit


def assert_second_order(hs, errs, label):
    pair, fit = observed_orders(hs, errs)
    print(f"{label}: h = {np.round(hs, 5).tolist()}  |err| = {np.abs(errs).tolist()}  "
          f"pairwise order = {np.round(pair, 3).tolist()}  fitted order = {fit:.3f}")
    # common practice: a second-order scheme shows 1.8 < p < 2.2 once in the asymptotic range
    assert 1.8 < fit < 2.2, f"{label}: fitted order {fit:.3f} (pairwise {pair})"
    assert np.all((pair > 1.8) & (pair < 2.2)), f"{label}: pairwise orders {pair}"


def w_of(z):
    return half_widths(z)[3]


# ----------------------------------------------------------------------------- infinite well

def infinite_well_exact(n, mass, width):
    # textbook: E_n = n^2 pi^2 hbar^2 / (2 m L^2)
    return HBAR2_2M0 / mass * (n * np.pi / width) ** 2


def test_infinite_well_levels_1e4_relative():
    z = np.linspace(0.0, L_W, 1001)                     # h = 0.01 nm
    E, psi = bound_states(z, np.zeros_like(z), np.full(z.size - 1, M_W), 3)
    exact = infinite_well_exact(np.arange(1, 4), M_W, L_W)
    np.testing.assert_allclose(E, exact, rtol=1e-4)


def test_infinite_well_richardson_on_coarse_meshes():
    # Richardson on h and h/2 (error ~ h^2) recovers the textbook levels much better than 1e-4
    exact = infinite_well_exact(np.arange(1, 5), M_W, L_W)
    E1 = bound_states(np.linspace(0, L_W, 101), np.zeros(101), np.full(100, M_W), 4)[0]
    E2 = bound_states(np.linspace(0, L_W, 201), np.zeros(201), np.full(200, M_W), 4)[0]
    np.testing.assert_allclose((4 * E2 - E1) / 3, exact, rtol=1e-5)


def test_infinite_well_order_on_random_mesh():
    rng = np.random.default_rng(7)
    coarse = layered_mesh([L_W], 0.4, rng=rng, jitter=0.6)
    exact = infinite_well_exact(np.arange(1, 3), M_W, L_W)
    hs, errs = [], []
    for r in range(4):
        z = bisect_cells(coarse, r)
        E = bound_states(z, np.zeros_like(z), np.full(z.size - 1, M_W), 2)[0]
        hs.append(np.diff(z).max())
        errs.append(E[1] - exact[1])
    assert_second_order(hs, errs, "infinite well, random mesh, E2")


# ----------------------------------------------------------------------------- finite well

@pytest.fixture(scope="module")
def finite_well():
    barrier = 60.0                                       # >> decay length of the top level (~8 nm)
    z = layered_mesh([barrier, L_W, barrier], 0.05)      # 0.05 nm mesh, interfaces on nodes
    v, m = well_cells(z, barrier)
    E, psi = bound_states_cells(z, v, m, 6)
    return dict(z=z, v=v, m=m, E=E, psi=psi, barrier=barrier)


def test_finite_well_matches_bdd_matching_roots(finite_well):
    exact, _ = bdd_finite_well_levels()
    E = finite_well["E"]
    bound = E[E < V0]
    assert bound.size == exact.size == 3               # number of bound states (brentq roots)
    np.testing.assert_allclose(bound, exact, atol=1e-4, rtol=0)


def test_finite_well_levels_below_infinite_well(finite_well):
    exact, _ = bdd_finite_well_levels()
    E = finite_well["E"][: exact.size]
    # analytic: a finite well's n-th level lies below the infinite well's n-th level
    assert np.all(E < infinite_well_exact(np.arange(1, exact.size + 1), M_W, L_W))


def test_finite_well_outside_probability(finite_well):
    z, psi, b = finite_well["z"], finite_well["psi"], finite_well["barrier"]
    exact, parity = bdd_finite_well_levels()
    h = np.diff(z)
    zc = 0.5 * (z[:-1] + z[1:])
    out_cells = (zc < b) | (zc > b + L_W)
    p_out = [np.sum(h[out_cells] * 0.5 * (psi[:-1, s] ** 2 + psi[1:, s] ** 2)[out_cells])
             for s in range(exact.size)]
    p_out = np.array(p_out)
    assert np.all(p_out > 0.01)                         # analytic: evanescent tails carry weight
    assert np.all(np.diff(p_out) > 0)                   # analytic: grows with n (kappa shrinks)
    ref = np.array([bdd_outside_probability(E, p) for E, p in zip(exact, parity)])
    np.testing.assert_allclose(p_out, ref, rtol=2e-3)   # analytic BDD wavefunction, above


def test_finite_well_order_uniform_step_on_node_and_mass_jump():
    barrier = 20.0
    exact, _ = bdd_finite_well_levels()
    hs, e0, e1 = [], [], []
    for h in (0.2, 0.1, 0.05, 0.025):
        z = layered_mesh([barrier, L_W, barrier], h)
        v, m = well_cells(z, barrier)
        E = bound_states_cells(z, v, m, 2)[0]
        hs.append(h)
        e0.append(E[0] - exact[0])
        e1.append(E[1] - exact[1])
    assert_second_order(hs, e0, "finite well, uniform, E1")
    assert_second_order(hs, e1, "finite well, uniform, E2")


def test_finite_well_order_random_mesh():
    barrier = 20.0
    exact, _ = bdd_finite_well_levels()
    rng = np.random.default_rng(2024)
    coarse = layered_mesh([barrier, L_W, barrier], 0.4, rng=rng, jitter=0.6)
    hs, errs = [], []
    for r in range(4):
        z = bisect_cells(coarse, r)
        v, m = well_cells(z, barrier)
        E = bound_states_cells(z, v, m, 1)[0]
        hs.append(np.diff(z).max())
        errs.append(E[0] - exact[0])
    assert_second_order(hs, errs, "finite well, random mesh (jitter 60%), E1")


def test_finite_well_order_graded_mesh():
    barrier = 20.0
    exact, _ = bdd_finite_well_levels()
    hs, errs = [], []
    for h in (0.4, 0.2, 0.1, 0.05):
        z = layered_mesh([barrier, L_W, barrier], h, grade=0.8)   # cell ratio 9:1, fine at interfaces
        v, m = well_cells(z, barrier)
        E = bound_states_cells(z, v, m, 2)[0]
        hs.append(np.diff(z).max())
        errs.append(E[1] - exact[1])
    assert_second_order(hs, errs, "finite well, graded mesh, E2")


def test_per_node_band_edge_equals_cell_path_with_dual_average():
    z = layered_mesh([5.0, L_W, 5.0], 0.1, rng=np.random.default_rng(1), jitter=0.3)
    v, m = well_cells(z, 5.0)
    h = np.diff(z)
    v_node = np.concatenate([[v[0]], (h[:-1] * v[:-1] + h[1:] * v[1:]) / (h[:-1] + h[1:]), [v[-1]]])
    Ec, pc = bound_states_cells(z, v, m, 3)
    En, pn = bound_states(z, v_node, m, 3)
    np.testing.assert_allclose(En, Ec, rtol=0, atol=1e-14)
    np.testing.assert_allclose(pn, pc, rtol=0, atol=1e-10)


# ----------------------------------------------------------------------------- triangular / parabolic

def test_triangular_well_airy():
    field = 0.01                                         # eV/nm (10 kV/mm... 100 kV/cm)
    z = np.linspace(0.0, 60.0, 1501)                    # hard wall at 0, 15 Airy lengths deep
    E = bound_states(z, field * z, np.full(z.size - 1, M_W), 3)[0]
    a_n = np.abs(ai_zeros(3)[0])                         # scipy.special.ai_zeros
    exact = (HBAR2_2M0 / M_W) ** (1 / 3) * field ** (2 / 3) * a_n   # analytic (Airy functions)
    np.testing.assert_allclose(E, exact, rtol=1e-3)


def test_parabolic_well_uniform_and_graded():
    hw = 0.02                                            # eV, hbar*omega
    stiff = hw ** 2 * M_W / (2 * HBAR2_2M0)              # m omega^2 in eV/nm^2 (hbar^2/2m0 = HBAR2_2M0)
    exact = hw * (np.arange(4) + 0.5)                    # analytic: hbar omega (n + 1/2)
    for z in (np.linspace(-60.0, 60.0, 2401),
              -60.0 + layered_mesh([120.0], 0.1, grade=0.7)):
        E, psi = bound_states(z, 0.5 * stiff * z ** 2, np.full(z.size, M_W), 4)   # per-node mass path
        np.testing.assert_allclose(E, exact, rtol=2e-4)


# ----------------------------------------------------------------------------- double wells

def double_well(barrier_mid, h=0.05, outer=20.0, width=5.0):
    t = [outer, width, barrier_mid, width, outer]
    z = layered_mesh(t, h)
    edges = np.cumsum([0.0] + t)
    zc = 0.5 * (z[:-1] + z[1:])
    layer = np.searchsorted(edges, zc) - 1
    in_well = (layer == 1) | (layer == 3)
    return z, np.where(in_well, 0.0, V0), np.where(in_well, M_W, M_B)


def test_double_well_thin_barrier_parity_and_splitting():
    z, v, m = double_well(2.0)
    E, psi = bound_states_cells(z, v, m, 2)
    assert E[1] - E[0] > 1e-3                            # analytic: tunnel splitting > 0 (meV scale here)
    # analytic: symmetric potential -> ground state even, first excited state odd
    np.testing.assert_allclose(psi[:, 0], psi[::-1, 0], atol=1e-9)
    np.testing.assert_allclose(psi[:, 1], -psi[::-1, 1], atol=1e-9)
    mid = z.size // 2
    assert psi[mid, 0] > 0 and abs(psi[mid, 1]) < 1e-9  # even: no node; odd: node at centre


def test_double_well_splitting_decays_with_barrier_kappa():
    # analytic (WKB / tight binding): Delta E ~ exp(-kappa b), kappa = sqrt(m_b (V0 - E)) / hbar
    bs, splits, e0 = (6.0, 9.0), [], []
    for b in bs:
        z, v, m = double_well(b)
        E = bound_states_cells(z, v, m, 2)[0]
        splits.append(E[1] - E[0])
        e0.append(E.mean())
    kappa = np.sqrt(M_B * (V0 - np.mean(e0)) / HBAR2_2M0)
    slope = -np.log(splits[1] / splits[0]) / (bs[1] - bs[0])
    assert slope == pytest.approx(kappa, rel=0.02)


@pytest.mark.parametrize("barrier_mid", [17.0, 40.0])
def test_double_well_thick_barrier_near_degenerate_pair_orthogonal(barrier_mid):
    # 17 nm: splitting ~1e-6 eV; 40 nm: ~5e-13 eV, about the eigenvalue resolution eps*|B| (degenerate)
    z, v, m = double_well(barrier_mid)
    E, psi = bound_states_cells(z, v, m, 4)
    w = w_of(z)
    gram = psi.T @ (w[:, None] * psi)
    # common practice: W-orthonormal eigenvectors of a symmetric pencil
    np.testing.assert_allclose(gram, np.eye(4), atol=1e-8)
    assert abs(gram[0, 1]) < 1e-8
    # each column is an eigenvector: residual of A psi = E W psi, computed independently here
    h = np.diff(z)
    g = HBAR2_2M0 / (m * h)
    zn = np.concatenate([[v[0]], (h[:-1] * v[:-1] + h[1:] * v[1:]) / (h[:-1] + h[1:]), [v[-1]]])
    for s in range(4):
        p = psi[:, s]
        ap = np.zeros_like(p)
        ap[1:-1] = (g[:-1] + g[1:]) * p[1:-1] - g[:-1] * p[:-2] - g[1:] * p[2:] + zn[1:-1] * w[1:-1] * p[1:-1]
        res = ap[1:-1] - E[s] * w[1:-1] * p[1:-1]
        assert np.linalg.norm(res / np.sqrt(w[1:-1])) < 1e-9
    if barrier_mid < 20:
        split = E[1] - E[0]
        assert 1e-7 < split < 1e-5                      # tunnel doublet resolved and positive
        # analytic: even/odd pair even when 1e-6 eV apart (vector error ~ eps |B| / split)
        np.testing.assert_allclose(psi[:, 0], psi[::-1, 0], atol=1e-6)
        np.testing.assert_allclose(psi[:, 1], -psi[::-1, 1], atol=1e-6)


# ----------------------------------------------------------------------------- discrete identities

def test_matches_dense_generalised_eigenproblem_small():
    # scipy.linalg.eigh on the assembled (A, W) pencil of a tiny random mesh
    from scipy.linalg import eigh
    rng = np.random.default_rng(3)
    z = np.cumsum(np.concatenate([[0.0], 0.1 + rng.random(40)]))
    v = rng.random(z.size) * 0.3
    m = 0.05 + rng.random(z.size - 1) * 0.1
    h = np.diff(z)
    w = w_of(z)
    g = HBAR2_2M0 / (m * h)
    A = np.diag(g[:-1] + g[1:] + v[1:-1] * w[1:-1]) - np.diag(g[1:-1], 1) - np.diag(g[1:-1], -1)
    ref_E, ref_V = eigh(A, np.diag(w[1:-1]))
    E, psi = bound_states(z, v, m, 5)
    np.testing.assert_allclose(E, ref_E[:5], rtol=1e-12, atol=1e-12)
    for s in range(5):
        # eigh's vectors are W-normalised: |<psi, v>_W| = 1 for the same state
        assert abs(abs(psi[1:-1, s] @ (w[1:-1] * ref_V[:, s])) - 1) < 1e-9


def test_normalisation_ends_and_sign():
    z, v, m = double_well(3.0, h=0.1)
    E, psi = bound_states_cells(z, v, m, 5)
    w = w_of(z)
    np.testing.assert_allclose(w @ psi ** 2, 1.0, rtol=1e-12)   # FV quadrature of |psi|^2
    assert np.all(psi[0] == 0) and np.all(psi[-1] == 0)          # Dirichlet ends
    for s in range(5):
        col = psi[:, s]
        first = np.argmax(np.abs(col) > 1e-3 * np.abs(col).max())
        assert col[first] > 0                                     # sign convention
    assert np.all(np.diff(E) > 0)


def test_fewer_unknowns_than_states_and_workspace_reuse():
    z = np.linspace(0, 1, 5)                                       # 3 interior unknowns
    E, psi = bound_states(z, np.zeros(5), np.full(4, 0.1), 10)
    assert E.shape == (3,) and psi.shape == (5, 3)
    ws = EigenWorkspace()
    zb, v, m = double_well(2.0, h=0.1)
    h, w = np.diff(zb), w_of(zb)
    ref = solve_region(h, w, np.concatenate([[V0], 0.5 * (v[:-1] + v[1:]), [V0]]), 1 / m, 3)
    for _ in range(2):
        got = solve_region(h, w, np.concatenate([[V0], 0.5 * (v[:-1] + v[1:]), [V0]]), 1 / m, 3, ws)
        np.testing.assert_array_equal(got[0], ref[0])
        np.testing.assert_array_equal(got[1], ref[1])
    small = solve_region(np.full(3, 0.5), w_of(np.arange(4) * 0.5), np.zeros(4), np.full(3, 10.0), 5, ws)
    assert small[0].shape == (2,)                                 # workspace resized
    two = solve_region(np.ones(2), w_of(np.arange(3.0)), np.zeros(3), np.ones(2), 1, ws)
    # analytic: one unknown, E = HBAR2_2M0 (1/h + 1/h) / w / m
    assert two[0][0] == pytest.approx(2 * HBAR2_2M0)


def test_in_plane_mass():
    z = layered_mesh([20.0, L_W, 20.0], 0.05)
    v, m = well_cells(z, 20.0)
    E, psi = bound_states_cells(z, v, m, 3)
    w = w_of(z)
    h = np.diff(z)
    m_node = np.concatenate([[m[0]], (h[:-1] * m[:-1] + h[1:] * m[1:]) / (h[:-1] + h[1:]), [m[-1]]])
    mpar = in_plane_mass(psi, w, m_node)
    assert np.all((mpar > M_W) & (mpar < M_B)) and np.all(np.diff(mpar) > 0)   # more barrier weight for higher n
    np.testing.assert_allclose(mpar, 1 / ((w / m_node) @ psi ** 2), rtol=1e-12)  # definition
    # uniform mass -> that mass (definition)
    np.testing.assert_allclose(in_plane_mass(psi, w, np.full(z.size, 0.2)), 0.2, rtol=1e-12)


# ----------------------------------------------------------------------------- bad input

@pytest.mark.parametrize("args, match", [
    ((np.array([0.0, 1.0, 1.0, 2.0]), np.zeros(4), np.ones(3), 1), "strictly increasing"),
    ((np.array([0.0, 2.0, 1.0, 3.0]), np.zeros(4), np.ones(3), 1), "strictly increasing"),
    ((np.array([0.0, 1.0]), np.zeros(2), np.ones(1), 1), "at least 3"),
    ((np.array([0.0, 1.0, np.nan, 3.0]), np.zeros(4), np.ones(3), 1), "z_nm contains non-finite"),
    ((np.arange(4.0), np.array([0, np.inf, 0, 0]), np.ones(3), 1), "band_edge_eV contains non-finite"),
    ((np.arange(4.0), np.zeros(3), np.ones(3), 1), r"band_edge_eV must be per node \(4,\)"),
    ((np.arange(4.0), np.zeros(4), np.ones(5), 1), "mass_m0 must be per cell"),
    ((np.arange(4.0), np.zeros(4), np.array([1.0, -0.1, 1.0]), 1), "mass_m0 must be positive"),
    ((np.arange(4.0), np.zeros(4), np.array([1.0, 0.0, 1.0, 1.0]), 1), "mass_m0 must be positive"),
    ((np.arange(4.0), np.zeros(4), np.ones(3), 0), "n_states must be >= 1"),
    ((np.arange(4.0), np.zeros(4), np.ones(3), 1.5), "n_states must be an integer"),
])
def test_bad_input_raises_value_error(args, match):
    with pytest.raises(ValueError, match=match):
        bound_states(*args)


def test_bad_input_cells():
    with pytest.raises(ValueError, match="band_edge_cell_eV must be per cell"):
        bound_states_cells(np.arange(4.0), np.zeros(4), np.ones(3), 1)
    with pytest.raises(ValueError, match="mass_cell_m0 must be positive"):
        bound_states_cells(np.arange(4.0), np.zeros(3), -np.ones(3), 1)


def test_public_entry_point():
    import selfcon
    z = np.linspace(0.0, L_W, 401)
    E, psi = selfcon.bound_states(z, np.zeros_like(z), np.full(z.size, M_W), 1)
    assert E[0] == pytest.approx(infinite_well_exact(1, M_W, L_W), rel=1e-4)   # textbook


def _two_material_pair():
    """Two non-overlapping normalised states: A in the left half (mass M_W), B in the right
    half (mass M_B) of a 40 nm mesh."""
    z = np.linspace(0.0, 40.0, 401)
    w = w_of(z)
    m_node = np.where(z < 20.0, M_W, M_B)
    a = np.where((z > 2) & (z < 18), np.sin(np.pi * (z - 2) / 16), 0.0)
    b = np.where((z > 22) & (z < 38), np.sin(np.pi * (z - 22) / 16), 0.0)
    a /= np.sqrt(w @ a ** 2)
    b /= np.sqrt(w @ b ** 2)
    return z, w, m_node, a, b


@pytest.mark.parametrize("theta", [0.0, 0.3, np.pi / 4, 1.1])
def test_in_plane_weights_make_degenerate_charge_independent_of_the_mixture(theta):
    # two degenerate states, A in the left half (mass M_W), B in the right (M_B), handed over
    # as any rotation of the pair: with equal occupation F the charge D(m_k) F weight_k summed
    # over the pair must be F m(z) (A^2 + B^2)/(pi hbar^2) for every mixture (analytic: the
    # density of a degenerate subspace is basis independent; degenerate perturbation theory in
    # the in-plane kinetic energy)
    z, w, m_node, a, b = _two_material_pair()
    c, s = np.cos(theta), np.sin(theta)
    psi = np.stack([c * a + s * b, -s * a + c * b], axis=1)
    mass, weight = in_plane_weights(np.array([0.1, 0.1]), psi, w, m_node, kT=0.0259)
    np.testing.assert_allclose(weight @ mass, m_node * (a ** 2 + b ** 2), rtol=1e-12, atol=1e-14)
    np.testing.assert_allclose(w @ weight, 1.0, rtol=1e-12)       # each weight integrates to 1
    # the unmixed pair keeps its own masses exactly (each state lies in one material)
    if theta == 0.0:
        np.testing.assert_allclose(mass, [M_W, M_B], rtol=1e-12)


def test_in_plane_weights_keep_well_split_subbands():
    # subbands split far beyond the thermal in-plane energy keep the first-order result:
    # the harmonic mass 1/<1/m> (in_plane_mass, the definition) and the weight |psi|^2
    z = layered_mesh([20.0, L_W, 20.0], 0.05)
    v, m = well_cells(z, 20.0)
    E, psi = bound_states_cells(z, v, m, 2)
    w = w_of(z)
    h = np.diff(z)
    m_node = np.concatenate([[m[0]], (h[:-1] * m[:-1] + h[1:] * m[1:]) / (h[:-1] + h[1:]), [m[-1]]])
    for kT in (0.00034, 0.0259):             # 4 K and 300 K
        mass, weight = in_plane_weights(E, psi, w, m_node, kT)
        np.testing.assert_allclose(mass, in_plane_mass(psi, w, m_node), rtol=1e-12)
        np.testing.assert_allclose(weight, psi ** 2, rtol=1e-12, atol=1e-15)


def test_thermal_in_plane_energy_limits():
    # mean in-plane kinetic energy of a 2D Fermi gas / kT: 1 non-degenerate, x/2 degenerate
    # (analytic, Boltzmann and T = 0 limits); the smooth join used is 1 + ln(1 + e^x)/2
    assert thermal_in_plane_energy(-40.0) == pytest.approx(1.0, abs=1e-12)
    assert thermal_in_plane_energy(200.0) == pytest.approx(101.0, rel=1e-12)


def test_states_below_a_limit_by_sturm_count():
    # the finite well of the checks above: its bound levels from the BenDaniel-Duke roots
    # (analytic); asking for the states below V0 gives exactly those, and none below the
    # lowest level costs no eigensolve
    from selfcon.solver.schrodinger import count_below
    z = layered_mesh([30.0, L_W, 30.0], 0.1)
    v_cell, m_cell = well_cells(z, 30.0)
    h = np.diff(z)
    v_node = np.empty(z.size)
    from selfcon.solver.kernels import schrodinger as kern
    kern.dual_average(h, v_cell, v_node)
    exact, _ = bdd_finite_well_levels()
    e, psi = solve_region(h, w_of(z), v_node, 1.0 / m_cell, 20, below=V0)
    assert e.size == len(exact) and psi.shape == (z.size, len(exact))
    assert np.allclose(e, exact, atol=2e-4)
    e0, _ = solve_region(h, w_of(z), v_node, 1.0 / m_cell, 20, below=0.5 * exact[0])
    assert e0.size == 0
    # the Sturm count against a dense eigensolve (numpy.linalg.eigvalsh) of a small matrix
    rng = np.random.default_rng(3)
    d, off = rng.normal(size=12), rng.normal(size=11)
    ev = np.linalg.eigvalsh(np.diag(d) + np.diag(off, 1) + np.diag(off, -1))
    for x in (-3.0, -0.5, 0.0, 0.7, 4.0):
        assert count_below(d, off, x) == int(np.sum(ev < x))


def test_in_plane_weights_blend_as_the_docstring_says():
    # partly degenerate states (splittings of the order of the taper scale D): the masses and
    # weights of the numba kernels against the formula of in_plane_weights' docstring written
    # out in numpy (c_k = 1 - prod_j (1 - exp(-((E_k - E_j)/D)^2)), mass (1 - c) m_h + c <m>,
    # weight |psi|^2 ((1 - c) + c m(z)/<m>)), and on a row slice given as `out`
    from selfcon.solver.schrodinger import IN_PLANE_TAPER
    rng = np.random.default_rng(3)
    n, k = 40, 4
    psi = rng.normal(size=(n, k))
    w = rng.random(n) + 0.5
    m_node = 0.06 + 0.04 * rng.random(n)
    kT, fermi = 0.0066, 0.0
    e = np.array([-0.030, -0.028, -0.0255, -0.010])
    mass, weight = in_plane_weights(e, psi, w, m_node, kT, fermi)
    p2 = psi ** 2
    norm = w @ p2
    harmonic, arithmetic = norm / ((w / m_node) @ p2), ((w * m_node) @ p2) / norm
    spread = kT * thermal_in_plane_energy((fermi - e.min()) / kT) / IN_PLANE_TAPER
    s = np.exp(-((e[:, None] - e[None, :]) / spread) ** 2)
    np.fill_diagonal(s, 0.0)
    c = 1.0 - np.prod(1.0 - s, axis=1)
    assert 0.01 < c[0] < 0.99 and c[3] < 1e-12          # a real blend, and an isolated state
    np.testing.assert_allclose(mass, (1 - c) * harmonic + c * arithmetic, rtol=1e-13)
    np.testing.assert_allclose(weight, p2 * ((1 - c) + c * m_node[:, None] / arithmetic), rtol=1e-13)
    out = np.full((n + 6, k), np.nan)
    _, got = in_plane_weights(e, psi, w, m_node, kT, fermi, out=out[3:n + 3])
    assert got.base is out and np.array_equal(out[3:n + 3], weight) and np.isnan(out[:3]).all()
