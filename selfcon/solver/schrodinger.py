"""Bound states of the 1D BenDaniel–Duke equation on a nonuniform finite-volume mesh.

    -d/dz( hbar^2 / (2 m(z)) dpsi/dz ) + V(z) psi = E psi,   psi = 0 at both ends.

Discretisation (see selfcon/solver/kernels/schrodinger.py): one mass per cell, potential
at nodes (dual-cell averages), lumped mass matrix W = diag(w), symmetrised into a
real symmetric tridiagonal matrix B = W^{-1/2} A W^{-1/2}.  The lowest k eigenpairs
of B come from selfcon/solver/kernels/eigen.py: bisection on Sturm counts at several
shifts per pass, inverse iteration, and a symmetric orthogonalisation inside clusters of
close eigenvalues (superlattice minibands, tunnel-split doublets).  Its cost is O(N k) for
separated states and O(N c^2) for a cluster of c; no N x N array is ever formed.
``EigenWorkspace(method="lapack")`` keeps LAPACK bisection (dstebz) plus inverse
iteration (dstein), whose re-orthogonalisation spans every state within 1e-3 ||B|| and
so grows as N k^2 once states cluster: the baseline of ``tools/bench.py eigen``.  LAPACK's
dstemr (multiple relatively robust representations) is not used: scipy's wrapper
allocates an N x N eigenvector array, and called directly on the 100-period
superlattice it stops with an internal error (INFO = 22) for k >= 100.  DEVELOPERS.md,
"The eigen-solve", has the measurements.

Units: nm, eV, masses in m0.
"""
import math

import numpy as np

from selfcon.constants import HBAR2_2M0  # noqa: F401  (documented unit of the operator)
from selfcon.model.mesh import half_widths
from selfcon.solver.kernels import load

__all__ = ["EIGEN_METHODS", "EigenWorkspace", "solve_region", "solve_region_state", "solve_region_window", "refine_region_state", "count_below",
           "bound_states", "bound_states_cells",
           "in_plane_mass", "in_plane_weights", "thermal_in_plane_energy"]


def _kernels():
    """kernels/schrodinger.py, imported on first use (selfcon.solver.kernels.load)."""
    return load("schrodinger")


def _eigen_kernels():
    """(eigenpairs_in_brackets, guided_brackets, lowest_brackets) of kernels/eigen.py."""
    eig = load("eigen")
    return eig.eigenpairs_in_brackets, eig.guided_brackets, eig.lowest_brackets


#: the eigen-solvers of :class:`EigenWorkspace`
EIGEN_METHODS = ("clustered", "lapack")
#: the method of a workspace created without one (tools/bench.py switches it to time the
#: baseline inside whole solves)
DEFAULT_METHOD = "clustered"


class EigenWorkspace:
    """Reusable buffers for repeated solves on the same sub-mesh size.

    The self-consistent loop solves the same region ~20 times per run; passing one
    workspace avoids re-allocating the tridiagonal arrays.  A workspace silently resizes
    itself if the mesh size changes.  ``method``: ``"clustered"`` (selfcon/solver/kernels/
    eigen.py) or ``"lapack"`` (dstebz + dstein, the baseline the benchmark compares
    against); default :data:`DEFAULT_METHOD`.  Workspaces are not shared between threads: each
    (band, region) of a solve owns one.
    """

    def __init__(self, n_nodes=0, method=None):
        method = DEFAULT_METHOD if method is None else method
        if method not in EIGEN_METHODS:
            raise ValueError(f"EigenWorkspace: method must be one of {EIGEN_METHODS}, got {method!r}")
        self.method = method
        self._stebz = self._stein = None
        self._kept = None          # (k, d, e, lo, hi, ||T||) of the last levels() call
        #: (d, eigenvalues and the lower bound of the next one) of the last clustered eigh:
        #: the guesses of a warm solve (solve_region(..., warm=last), the loop's next iteration)
        self.last = None
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

    def eigh(self, k, first=1, guess=None, delta=0.0):
        """Eigenpairs ``first``..``k`` (1-based, lowest first) of the tridiagonal (self.d,
        self.e), by default the lowest k: (values, vectors (m, k - first + 1)).  The
        clustered solver takes the lowest k; a window above them (one state of the
        non-parabolic iteration, selfcon/solver/nonparabolic.py) is LAPACK's.  ``guess``
        (ascending) and ``delta``: the clustered bisection starts with Sturm counts at
        guess_j -+ delta (kernels/eigen.py::guided_brackets), the same states by the same
        convergence criterion from narrower brackets."""
        m = self.d.size
        if not _kernels().all_finite(self.d, self.e):
            # a NaN or infinite potential (a diverged step, a broken starting potential): the
            # bisection would never narrow its intervals, so stop here, as LAPACK's dstebz does
            raise RuntimeError("the Hamiltonian has non-finite entries (the potential holds NaN or "
                               "inf): no eigenstates")
        if m == 1:
            return self.d.copy(), np.ones((1, 1))
        if self.method == "clustered" and first == 1:
            eigenpairs_in_brackets, guided_brackets, lowest_brackets = _eigen_kernels()
            w = np.empty(k)
            z = np.empty((k, m))
            kept, self._kept = self._kept, None
            if (kept is not None and kept[0] == k and np.array_equal(kept[1], self.d)
                    and np.array_equal(kept[2], self.e)):
                lo, hi, tnorm = kept[3], kept[4], kept[5]
            else:
                # lowest_eigenpairs in its two halves (the same bits), keeping the brackets
                nb = min(k + 1, m)
                lo, hi = np.empty(nb), np.empty(nb)
                if guess is not None:
                    tnorm, _ = guided_brackets(self.d, self.e, k, np.ascontiguousarray(guess, dtype=float),
                                               float(delta), lo, hi)
                else:
                    tnorm, _ = lowest_brackets(self.d, self.e, k, lo, hi)
            eigenpairs_in_brackets(self.d, self.e, k, lo, hi, tnorm, w, z)
            # the energies and, when there is one, the lower bound of the first state not
            # asked for: the guesses of a warm solve (warm_guess) bracket it too, so that the
            # top state's gap to it is known at once
            if lo.size > k:
                ext = np.empty(k + 1)
                ext[:k] = w
                ext[k] = lo[k]
            else:
                ext = w.copy()
            self.last = (self.d.copy(), ext)
            return w, z.T
        if self._stebz is None:
            from scipy.linalg import get_lapack_funcs
            probe = np.zeros(1)
            self._stebz, self._stein = get_lapack_funcs(("stebz", "stein"), (probe, probe))
        # range=2 (by index), il..iu 1-based; abstol 0 -> LAPACK default eps*|B|;
        # order 'B' (by block) is what dstein expects.
        nfound, w, iblock, isplit, info = self._stebz(self.d, self.e, 2, 0.0, 1.0, first, k, 0.0, "B")
        if info != 0:
            raise RuntimeError(f"tridiagonal bisection (LAPACK dstebz) failed, info={info}")
        w = w[:nfound]  # dstein takes m = len(w); iblock/isplit stay full length
        v, info = self._stein(self.d, self.e, w, iblock, isplit)
        if info != 0:
            raise RuntimeError(f"inverse iteration (LAPACK dstein) failed to converge, info={info}")
        order = np.argsort(w, kind="stable")
        return w[order], v[:, order]


    def levels(self, k, guess=None, delta=0.0):
        """The k lowest eigenvalues of the tridiagonal (self.d, self.e), lowest first, without
        vectors.  The clustered solver returns its bisection brackets' midpoints (within
        1e-4 of the gap to the neighbours of the final energies) and keeps the brackets, so
        that eigh(k) of the same matrix continues from them: the same states as eigh(k)
        alone (with the same ``guess`` and ``delta``), without bisecting twice.  LAPACK's
        path solves in full (the baseline)."""
        m = self.d.size
        if self.method != "clustered" or m < 2:
            return self.eigh(k)[0]
        if not _kernels().all_finite(self.d, self.e):
            return self.eigh(k)[0]          # raises, as eigh does
        _, guided_brackets, lowest_brackets = _eigen_kernels()
        nb = min(k + 1, m)
        lo, hi = np.empty(nb), np.empty(nb)
        if guess is None:
            tnorm, _ = lowest_brackets(self.d, self.e, k, lo, hi)
        else:
            tnorm, _ = guided_brackets(self.d, self.e, k, np.ascontiguousarray(guess, dtype=float),
                                       float(delta), lo, hi)
        self._kept = (k, self.d.copy(), self.e.copy(), lo, hi, tnorm)
        return 0.5 * (lo[:k] + hi[:k])


def solve_region_state(h_cell, w, v_node, inv_mass_cell, index: int, workspace=None):
    """The single state number ``index`` (0 = lowest) of :func:`solve_region`'s problem:
    (energy eV, psi (n,)), by bisection for that one eigenvalue and inverse iteration
    (O(n); the energy iteration of selfcon.solver.nonparabolic calls it per state)."""
    e, psi = solve_region_window(h_cell, w, v_node, inv_mass_cell, index, 1, workspace)
    return float(e[0]), psi[:, 0]


def assembled(h_cell, w, v_node, inv_mass_cell, workspace=None):
    """The symmetric tridiagonal form of :func:`solve_region`'s problem, written into
    ``workspace`` (an :class:`EigenWorkspace`, made or resized to the n = w.size nodes):
    (workspace, the kernels module)."""
    n = w.size
    if workspace is None:
        workspace = EigenWorkspace(n)
    else:
        workspace.resize(n)
    kern = _kernels()
    kern.assemble_tridiagonal(np.ascontiguousarray(h_cell, dtype=float), w,
                              np.ascontiguousarray(v_node, dtype=float),
                              np.ascontiguousarray(inv_mass_cell, dtype=float),
                              workspace.d, workspace.e)
    return workspace, kern


def refine_region_state(h_cell, w, v_node, inv_mass_cell, index: int, psi_guess, workspace=None):
    """State number ``index`` of :func:`solve_region`'s problem by Rayleigh-quotient iteration
    from a nearby wavefunction ``psi_guess`` (n,) (the same state at a slightly different
    Hamiltonian): (energy eV, psi (n,)), or None when the iteration does not settle on that
    state (a Sturm count checks the index); O(n), no bisection."""
    n = w.size
    workspace, kern = assembled(h_cell, w, v_node, inv_mass_cell, workspace)
    u = np.asarray(psi_guess, dtype=float)[1:-1] * np.sqrt(w[1:-1])
    norm = float(np.sqrt(np.dot(u, u)))
    if not np.isfinite(norm) or norm == 0.0:
        return None
    u = np.ascontiguousarray(u / norm)
    energy, ok = kern.refine_eigenpair(workspace.d, workspace.e, int(index), u)
    if not ok:
        return None
    psi = np.empty((n, 1))
    kern.rows_to_wavefunctions(u[None, :], w, psi)
    return float(energy), psi[:, 0]


def solve_region_window(h_cell, w, v_node, inv_mass_cell, first: int, count: int, workspace=None):
    """States ``first`` .. ``first + count - 1`` (0 = lowest) of :func:`solve_region`'s
    problem, solved together so that close ones come out orthogonal: (energies (count,) eV,
    psi (n, count))."""
    n = w.size
    workspace, kern = assembled(h_cell, w, v_node, inv_mass_cell, workspace)
    energies, u = workspace.eigh(first + count, first=first + 1)
    psi = np.empty((n, energies.size))
    wavefunctions(kern, u, w, psi)
    return energies, psi


def count_below(d, e, x) -> int:
    """Number of eigenvalues below ``x`` of the symmetric tridiagonal matrix with diagonal
    ``d`` and off-diagonal ``e`` (Sturm sequence count: the negative pivots of the LDL^T
    factorisation of T - x I; Golub and Van Loan, Matrix Computations, section 8.4).
    The count is the kernel's (selfcon/solver/kernels/schrodinger.py, the check of the
    nonparabolic refinement): a pass over the matrix in Python took 0.1-0.25 ms a call."""
    return int(_kernels().sturm_count(np.ascontiguousarray(d, dtype=float),
                                       np.ascontiguousarray(e, dtype=float), float(x)))


def solve_region(h_cell, w, v_node, inv_mass_cell, n_states, workspace=None, below=None,
                 levels_only=False, embed=None, warm=None):
    """Lowest ``n_states`` states on a sub-mesh with psi = 0 at its two end nodes.

    h_cell, inv_mass_cell: (n-1,) cell widths (nm) and inverse masses (1/m0);
    w, v_node: (n,) dual widths (nm) and node potential (eV, already dual-averaged).
    Returns (energies (k,) eV ascending, psi (n, k) in nm^-1/2 with
    sum_i w_i psi_i^2 = 1); k = min(n_states, n-2).  ``below``: only the states with an
    energy below it (a Sturm count decides how many; none costs no eigensolve; the bisection
    starts from that count).
    ``levels_only``: (energies, None) without vectors (:meth:`EigenWorkspace.levels`; a
    following full solve of the same k continues from its brackets).  ``embed`` = (N, row0):
    psi is (N, k), the sub-mesh's rows row0 .. row0 + n - 1 written in place and zeros
    elsewhere (the full-mesh array of a region, without a copy).  ``warm``: the
    ``workspace.last`` of a clustered solve of the same problem at a nearby potential (the
    previous iteration of the loop), whose eigenvalues guide the bisection
    (:func:`warm_guess`).  No input checking here beyond shapes: this is the inner-loop
    call; use :func:`bound_states` for checked input.
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
    workspace, kern = assembled(h_cell, w, v_node, inv_mass_cell, workspace)
    if below is not None:
        k = min(k, count_below(workspace.d, workspace.e, float(below)))
        if k <= 0:
            return np.empty(0), np.zeros((n, 0))
    guess, delta = warm_guess(workspace, warm) if warm is not None else (None, 0.0)
    if guess is None and below is not None:
        # the k states asked for all lie below ``below``: the bisection starts with that count
        # (every bracket's top at ``below``), not with the whole Gershgorin interval
        guess = np.array([float(below)])
    if levels_only:
        return workspace.levels(k, guess=guess, delta=delta), None
    energies, u = workspace.eigh(k, guess=guess, delta=delta)
    if embed is None:
        psi = np.empty((n, k))
        wavefunctions(kern, u, w, psi)
        return energies, psi
    total, row0 = embed
    full = np.empty((total, k))
    if row0:
        full[:row0] = 0.0
    if row0 + n < total:
        full[row0 + n:] = 0.0
    wavefunctions(kern, u, w, full[row0:row0 + n])
    return energies, full


#: relative and absolute (eV) margins of the bracket half-width of a warm solve over the
#: largest change of the diagonal: the eigenvalues kept are Rayleigh quotients, within a few
#: eps ||B|| (~1e-14 eV) of the old matrix's own
WARM_MARGIN = (1e-6, 1e-10)


def warm_guess(workspace, last) -> tuple:
    """(guesses, delta) of a warm solve of the matrix in ``workspace`` from ``last``, the
    (diagonal, eigenvalues) of an earlier clustered solve (EigenWorkspace.last; after the
    eigenvalues the lower bound of the first one not asked for, when it had one): those
    values, and the largest change of the diagonal since plus WARM_MARGIN, which bounds
    how far each eigenvalue (and so each bound) moved (Weyl's inequality; the off-diagonal depends on the mesh
    and the masses alone, so between iterations only the diagonal changes).  (None, 0.0)
    when ``last`` is of a matrix of another size."""
    if workspace.method != "clustered" or last[0].shape != workspace.d.shape:
        return None, 0.0
    d_old, w_old = last
    change = float(_kernels().largest_change(workspace.d, d_old)) if d_old.size else 0.0
    if not math.isfinite(change):
        return None, 0.0
    rel, floor = WARM_MARGIN
    return w_old, change * (1.0 + rel) + floor


def wavefunctions(kern, u, w, psi):
    """psi (n, k) from the eigenvectors u (n-2, k) of B (kernels/schrodinger.py::
    rows_to_wavefunctions): the rows of the eigen kernel's (k, n-2) array are read as they
    are, any other layout through a contiguous copy of u.T."""
    kern.rows_to_wavefunctions(np.ascontiguousarray(u.T), w, psi)


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


def _thermal_scalar(x: float) -> float:
    """:func:`thermal_in_plane_energy` of one float, with the formula of numpy's logaddexp
    (ln 2 at 0, else the larger argument plus log1p(exp(-|x|)), libm's exp and log1p as
    numpy's scalar loop takes them): the same bits without a ufunc call."""
    if x == 0.0:
        return 1.0 + 0.5 * math.log(2.0)
    if x < 0.0:
        return 1.0 + 0.5 * math.log1p(math.exp(x))
    return 1.0 + 0.5 * (x + math.log1p(math.exp(-x)))


#: subbands closer than the thermal in-plane energy / IN_PLANE_TAPER count as degenerate
#: (a Gaussian weight in their splitting, see in_plane_weights)
IN_PLANE_TAPER = 10.0


def in_plane_weights(energies, psi, w, mass_node, kT, fermi=0.0, out=None):
    """In-plane (2D density-of-states) masses and density weights of subbands, such that the
    charge does not depend on how the eigensolver mixes nearly degenerate states.

    A subband's in-plane dispersion is hbar^2 k^2/2 <1/m> to first order in k^2, so an
    isolated subband has the harmonic mass m_h = 1/<1/m> (:func:`in_plane_mass`) and holds
    the charge D(m_h) F |psi|^2.  That rule depends on the mixture of two nearly degenerate
    states in different materials (a level of a doping-sheet well in AlGaAs crossing a
    channel level in GaAs): the eigensolver's mixture swaps over a potential change of
    their tunnel splitting, and with it the masses, so the charge jumps between the wells
    over a few microvolts, which stalls the self-consistent loop.  For degenerate states the
    in-plane motion itself decides (degenerate perturbation theory in hbar^2 k^2/2m(z)),
    and the charge that does not depend on the mixture is the local one,
    F m(z)/(pi hbar^2) sum |psi|^2: the arithmetic mass <m> with the density weight
    |psi|^2 m(z)/<m>.

    Each state k takes c_k = 1 - prod_j (1 - exp(-((E_k - E_j)/D)^2)), its degeneracy with
    the others on the scale D = kT g(x) / IN_PLANE_TAPER (g the mean in-plane kinetic energy
    in kT, :func:`thermal_in_plane_energy`, x = (fermi - E_min)/kT), and blends the two:
    mass (1 - c) m_h + c <m>, weight |psi|^2 ((1 - c) + c m(z)/<m>) (integral 1).  Isolated
    subbands (split far beyond D, every ordinary case) keep exactly the first-order result;
    degenerate ones the invariant local one; in between everything is smooth.  (A rotation
    of the states by the in-plane operator at one thermal k, tried first, moves the sharp
    mixing to another potential instead of removing it.)

    energies (k,) eV on the carrier's kinetic scale (up = more energy), psi (n, k) with
    sum_z w psi^2 = 1, mass_node (n,) in-plane mass at the nodes (m0), kT (eV), fermi (eV)
    the carrier's Fermi level on the same scale.  Returns (masses (k,) m0, weights (n, k));
    ``out``: a C-contiguous (n, k) array the weights are written into (and returned).
    """
    e = np.ascontiguousarray(energies, dtype=float)
    psi = np.ascontiguousarray(psi, dtype=float)
    if psi.ndim == 1:
        psi = psi[:, None]
    w = np.ascontiguousarray(w, dtype=float)
    m = np.ascontiguousarray(mass_node, dtype=float)
    kern = _kernels()
    k = psi.shape[1]
    norm, harmonic, arithmetic = np.empty(k), np.empty(k), np.empty(k)
    # one pass over the rows of psi (numba, no GIL): the thread of each (band, region) task
    # does this part of its work alongside the others (selfcon/solver/threads.py)
    kern.in_plane_sums(psi, w, m, norm, harmonic, arithmetic)
    if e.size >= 2:
        spread = kT * _thermal_scalar((fermi - float(e.min())) / kT) / IN_PLANE_TAPER
        s = np.empty((k, k))
        kern.splitting_exponents(e, spread, s)
        np.exp(s, out=s)              # numpy's exp, as the formula always took it
    else:
        s = np.zeros((k, k))          # one state: nothing to be degenerate with (c = 0)
    mass = np.empty(k)
    weight = np.empty_like(psi) if out is None else out
    # c, the masses and the weights in one pass (kernels/schrodinger.py::blended_states)
    kern.blended_states(psi, m, s, harmonic, arithmetic, mass, weight)
    return mass, weight
