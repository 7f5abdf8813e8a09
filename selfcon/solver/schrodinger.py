"""Bound states of the 1D BenDaniel–Duke equation on a nonuniform finite-volume mesh.

    -d/dz( hbar^2 / (2 m(z)) dpsi/dz ) + V(z) psi = E psi,   psi = 0 at both ends.

Discretisation (see selfcon/kernels/schrodinger.py): one mass per cell, potential
at nodes (dual-cell averages), lumped mass matrix W = diag(w), symmetrised into a
real symmetric tridiagonal matrix B = W^{-1/2} A W^{-1/2}.  The lowest k eigenpairs
of B come from LAPACK bisection (dstebz) plus inverse iteration (dstein): both
are O(N) per eigenpair, dstein re-orthogonalises eigenvectors whose eigenvalues
are close (tunnel-split doublets), and no N x N array is ever formed.  Measured
with tools/bench_eigen.py.  (The multiple-relatively-robust-representations
driver dstemr is *not* used: scipy allocates an N x N eigenvector array for it,
which makes it quadratic in N.)

Units: nm, eV, masses in m0.
"""
import numpy as np

from selfcon.constants import HBAR2_2M0  # noqa: F401  (documented unit of the operator)
from selfcon.model.mesh import half_widths

__all__ = ["EigenWorkspace", "solve_region", "count_below", "bound_states", "bound_states_cells",
           "in_plane_mass", "in_plane_states"]


def _kernels():
    # imported lazily so that `import selfcon.solver.schrodinger` compiles nothing
    from selfcon.solver.kernels import schrodinger
    return schrodinger


class EigenWorkspace:
    """Reusable buffers for repeated solves on the same sub-mesh size.

    The self-consistent loop solves the same region ~20 times per run; passing one
    workspace avoids re-allocating the tridiagonal arrays and re-looking-up the
    LAPACK routines.  A workspace silently resizes itself if the mesh size changes.
    """

    def __init__(self, n_nodes=0):
        from scipy.linalg import get_lapack_funcs
        probe = np.zeros(1)
        self._stebz, self._stein = get_lapack_funcs(("stebz", "stein"), (probe, probe))
        self.n = -1
        self.resize(n_nodes)

    def resize(self, n_nodes):
        n_nodes = int(n_nodes)
        if n_nodes == self.n:
            return
        self.n = n_nodes
        m = max(n_nodes - 2, 0)
        self.d = np.empty(m)
        self.e = np.empty(max(m - 1, 0))

    def eigh(self, k):
        """Lowest k eigenpairs of the tridiagonal (self.d, self.e): (values (k,), vectors (m, k))."""
        m = self.d.size
        if m == 1:
            return self.d.copy(), np.ones((1, 1))
        # range=2 (by index), il..iu 1-based; abstol 0 -> LAPACK default eps*|B|;
        # order 'B' (by block) is what dstein expects.
        nfound, w, iblock, isplit, info = self._stebz(self.d, self.e, 2, 0.0, 1.0, 1, k, 0.0, "B")
        if info != 0:
            raise RuntimeError(f"tridiagonal bisection (LAPACK dstebz) failed, info={info}")
        w = w[:nfound]  # dstein takes m = len(w); iblock/isplit stay full length
        v, info = self._stein(self.d, self.e, w, iblock, isplit)
        if info != 0:
            raise RuntimeError(f"inverse iteration (LAPACK dstein) failed to converge, info={info}")
        order = np.argsort(w, kind="stable")
        return w[order], v[:, order]


def count_below(d, e, x) -> int:
    """Number of eigenvalues below ``x`` of the symmetric tridiagonal matrix with diagonal
    ``d`` and off-diagonal ``e`` (Sturm sequence count: the negative pivots of the LDL^T
    factorisation of T - x I; Golub and Van Loan, Matrix Computations, section 8.4)."""
    count = 0
    q = 1.0
    tiny = 1e-300
    for i in range(d.size):
        q = d[i] - x - (e[i - 1] * e[i - 1] / q if i > 0 else 0.0)
        if q == 0.0:
            q = -tiny
        if q < 0.0:
            count += 1
    return count


def solve_region(h_cell, w, v_node, inv_mass_cell, n_states, workspace=None, below=None):
    """Lowest ``n_states`` states on a sub-mesh with psi = 0 at its two end nodes.

    h_cell, inv_mass_cell: (n-1,) cell widths (nm) and inverse masses (1/m0);
    w, v_node: (n,) dual widths (nm) and node potential (eV, already dual-averaged).
    Returns (energies (k,) eV ascending, psi (n, k) in nm^-1/2 with
    sum_i w_i psi_i^2 = 1); k = min(n_states, n-2).  ``below``: only the states with an
    energy below it (a Sturm count decides how many; none costs no eigensolve).  No input
    checking here beyond shapes: this is the inner-loop call; use :func:`bound_states`
    for checked input.
    """
    h_cell = np.ascontiguousarray(h_cell, dtype=float)
    w = np.ascontiguousarray(w, dtype=float)
    v_node = np.ascontiguousarray(v_node, dtype=float)
    inv_mass_cell = np.ascontiguousarray(inv_mass_cell, dtype=float)
    n = w.size
    if v_node.size != n or h_cell.size != n - 1 or inv_mass_cell.size != n - 1:
        raise ValueError(f"solve_region: shape mismatch (w {w.size}, v_node {v_node.size}, "
                         f"h_cell {h_cell.size}, inv_mass_cell {inv_mass_cell.size}); "
                         "node arrays need n values and cell arrays n-1")
    m = max(n - 2, 0)
    k = min(int(n_states), m)
    if k <= 0:
        return np.empty(0), np.zeros((n, 0))
    if workspace is None:
        workspace = EigenWorkspace(n)
    else:
        workspace.resize(n)
    kern = _kernels()
    kern.assemble_tridiagonal(h_cell, w, v_node, inv_mass_cell, workspace.d, workspace.e)
    if below is not None:
        k = min(k, count_below(workspace.d, workspace.e, float(below)))
        if k <= 0:
            return np.empty(0), np.zeros((n, 0))
    energies, u = workspace.eigh(k)
    psi = np.empty((n, k))
    kern.vectors_to_wavefunctions(np.ascontiguousarray(u), w, psi)
    return energies, psi


def _check_mesh(z):
    z = np.asarray(z, dtype=float)
    if z.ndim != 1 or z.size < 3:
        raise ValueError(f"z_nm must be a 1-D array of at least 3 nodes (got shape {z.shape})")
    if not np.all(np.isfinite(z)):
        raise ValueError("z_nm contains non-finite values")
    h = np.diff(z)
    if np.any(h <= 0.0):
        bad = int(np.argmax(h <= 0.0))
        raise ValueError(f"z_nm must be strictly increasing (z[{bad + 1}] = {z[bad + 1]!r} "
                         f"<= z[{bad}] = {z[bad]!r})")
    return z, h


def _check_states(n_states):
    if isinstance(n_states, bool) or not isinstance(n_states, (int, np.integer)):
        raise ValueError(f"n_states must be an integer >= 1 (got {n_states!r})")
    if n_states < 1:
        raise ValueError(f"n_states must be >= 1 (got {n_states})")
    return int(n_states)


def _check_array(name, a, sizes, what):
    a = np.asarray(a, dtype=float)
    if a.ndim != 1 or a.size not in sizes:
        raise ValueError(f"{name} must be {what} (got shape {a.shape})")
    if not np.all(np.isfinite(a)):
        raise ValueError(f"{name} contains non-finite values")
    return a


def _mass_to_cells(mass_m0, n):
    m = _check_array("mass_m0", mass_m0, (n - 1, n),
                     f"per cell ({n - 1},) or per node ({n},)")
    if np.any(m <= 0.0):
        raise ValueError(f"mass_m0 must be positive (min {m.min()!r})")
    if m.size == n:
        m = 0.5 * (m[:-1] + m[1:])
    return m


def bound_states(z_nm, band_edge_eV, mass_m0, n_states):
    """Lowest ``n_states`` BenDaniel–Duke states of a band edge given per node.

    z_nm (N,) strictly increasing node positions in nm; band_edge_eV (N,) the
    potential at the nodes (at an interface node give the dual-cell average, or
    use :func:`bound_states_cells`); mass_m0 per cell (N-1,) or per node (N,)
    (node masses are averaged onto cells, m_c = (m_c + m_{c+1})/2).
    psi = 0 at z[0] and z[-1].  Returns (energies_eV (k,), psi (N, k)), k =
    min(n_states, N-2), psi normalised so that sum_i w_i psi_i^2 = 1 (w the dual
    widths) and signed so its first significant lobe is positive.
    """
    z, h = _check_mesh(z_nm)
    n = z.size
    k = _check_states(n_states)
    v = _check_array("band_edge_eV", band_edge_eV, (n,), f"per node ({n},)")
    m_cell = _mass_to_cells(mass_m0, n)
    return solve_region(h, half_widths(z)[3], v, 1.0 / m_cell, k)


def bound_states_cells(z_nm, band_edge_cell_eV, mass_cell_m0, n_states):
    """As :func:`bound_states` with the band edge and mass given per cell (N-1,).

    The node potential is the dual-cell average V_i = (h_{i-1} V_{i-1} + h_i V_i) /
    (h_{i-1} + h_i): at an interface node the step is shared by its two half cells,
    which keeps the error of a step potential O(h^2).
    """
    z, h = _check_mesh(z_nm)
    n = z.size
    k = _check_states(n_states)
    v_cell = _check_array("band_edge_cell_eV", band_edge_cell_eV, (n - 1,), f"per cell ({n - 1},)")
    m_cell = _check_array("mass_cell_m0", mass_cell_m0, (n - 1,), f"per cell ({n - 1},)")
    if np.any(m_cell <= 0.0):
        raise ValueError(f"mass_cell_m0 must be positive (min {m_cell.min()!r})")
    v_node = np.empty(n)
    _kernels().dual_average(h, v_cell, v_node)
    return solve_region(h, half_widths(z)[3], v_node, 1.0 / m_cell, k)


def in_plane_mass(psi, w, mass_node):
    """Wavefunction-weighted in-plane mass per state: 1 / sum_i w_i psi_i^2 / m_i.

    psi (n, k), w (n,), mass_node (n,) in m0.  Returns (k,) in m0.  Divided by
    sum_i w_i psi_i^2 so that an unnormalised psi gives the same answer.
    """
    psi = np.asarray(psi, dtype=float)
    w = np.asarray(w, dtype=float)
    mass_node = np.asarray(mass_node, dtype=float)
    if psi.ndim == 1:
        psi = psi[:, None]
    p2 = psi * psi
    return (w @ p2) / ((w / mass_node) @ p2)


def thermal_in_plane_energy(x):
    """Mean in-plane kinetic energy of a 2D subband's carriers in units of kT, as a smooth
    function of x = (E_F - E)/kT: 1 in the non-degenerate limit (x -> -inf), x/2 + 1 in the
    degenerate one (the exact mean is -Li2(-e^x)/ln(1 + e^x), which goes as x/2 + pi^2/(6x));
    g(x) = 1 + ln(1 + e^x)/2 joins the two limits."""
    return 1.0 + 0.5 * np.logaddexp(0.0, x)


#: the in-plane coupling is applied between subbands split by less than about the thermal
#: in-plane energy / IN_PLANE_TAPER (a Gaussian taper in the splitting)
IN_PLANE_TAPER = 10.0


def in_plane_states(energies, psi, w, inv_mass_node, kT, fermi=0.0):
    """Subbands with their in-plane motion: near-degenerate states of different materials
    separated into the states of each material; well separated subbands left as they are.

    With a position-dependent mass the in-plane kinetic energy eps M (eps = hbar^2 k^2/2m0,
    M_ij = sum_z w psi_i psi_j / m(z) in 1/m0) couples the eigenstates of the z problem.  For
    well separated subbands the coupling is a small correction and the usual first-order
    masses 1/M_ii hold (:func:`in_plane_mass`).  Nearly degenerate states in different
    materials, though -- a level of a doping-sheet well in AlGaAs crossing a channel level
    in GaAs, split by tunnelling far less than the coupling at thermal k -- are the case of
    degenerate perturbation theory: the in-plane motion decides the basis, and each state
    stays in its own well with its own mass.  The z problem alone gives an arbitrary,
    potential-sensitive mixture there, whose density changes with the mixing through the
    per-state mass: a sensitivity the charge has in no real system, and one that stalls the
    self-consistent loop (the mixture swaps over a potential change of the tunnel splitting).

    The states are rotated to the eigenvectors of H = diag(E) + eps (M o S) at the thermal
    in-plane energy eps = kT g(x) / (tr M / k), x = (fermi - E_min)/kT
    (:func:`thermal_in_plane_energy`), with the taper S_ij = exp(-((E_i - E_j)/D)^2),
    D = kT g(x) / IN_PLANE_TAPER: within a group of levels closer than D the coupling is the
    full in-plane operator, so the result does not depend on how the eigensolver mixed them;
    between subbands split by much more than D it is absent, and they keep their eigenstates
    and first-order masses exactly.  Everything is smooth in the potential.

    energies (k,) eV on the carrier's kinetic scale (up = more energy), psi (n, k)
    normalised with w, inv_mass_node (n,) 1/m at the nodes, kT (eV), fermi (eV) the
    carrier's Fermi level on the same scale.  Returns (energies (k,) = <H_z> of each state,
    psi (n, k), in-plane masses (k,) = 1/<1/m>), lowest energy first.
    """
    e = np.asarray(energies, dtype=float)
    psi = np.asarray(psi, dtype=float)
    w = np.asarray(w, dtype=float)
    wm = w * np.asarray(inv_mass_node, dtype=float)
    norm = w @ (psi * psi)
    m = psi.T @ (wm[:, None] * psi)
    m = 0.5 * (m + m.T)
    if e.size < 2:
        return e.copy(), psi.copy(), norm / np.diag(m)
    thermal = kT * thermal_in_plane_energy((fermi - e.min()) / kT)      # eV
    eps = thermal * e.size / np.trace(m)
    de = (e[:, None] - e[None, :]) * (IN_PLANE_TAPER / thermal)
    h = eps * m * np.exp(-de * de)
    h[np.diag_indices_from(h)] += e
    _, u = np.linalg.eigh(h)
    e_new = (u * u).T @ e
    m_new = np.einsum("ik,ij,jk->k", u, m, u)
    order = np.argsort(e_new, kind="stable")
    return e_new[order], (psi @ u)[:, order], (norm.mean() / m_new)[order]
