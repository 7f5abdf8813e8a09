"""Numba kernels for the finite-volume BenDaniel–Duke eigenproblem.

Operator  -d/dz( hbar^2/(2 m(z)) d/dz ) + V(z)  on nodes z_0..z_{n-1}, cells
c = 0..n-2 of width h_c with one mass per cell, dual widths w_i.  Integrating
over the dual cell of node i gives the generalised problem  A psi = E W psi  with

    A_{i,i+1} = -HBAR2_2M0 / (m_i h_i)
    A_{i,i}   =  HBAR2_2M0 (1/(m_{i-1} h_{i-1}) + 1/(m_i h_i)) + V_i w_i
    W         =  diag(w)

The end nodes carry psi = 0 (Dirichlet) and are not unknowns.  With
u = W^{1/2} psi the problem becomes the standard symmetric tridiagonal one
B u = E u,  B = W^{-1/2} A W^{-1/2}; the kernels below build (d, e) of B and
turn eigenvectors u back into normalised wavefunctions.

Arrays in, arrays out; nothing here is compiled at import time.
"""
import numba
import numpy as np

from selfcon.constants import HBAR2_2M0


@numba.njit(cache=True, nogil=True)
def assemble_tridiagonal(h, w, v_node, inv_mass_cell, d, e):
    """Fill d (n-2,) and e (n-3,) of B = W^{-1/2} A W^{-1/2} for the interior nodes.

    h, inv_mass_cell: (n-1,) per cell; w, v_node: (n,) per node.  Interior
    unknown j corresponds to node i = j + 1.
    """
    n = w.shape[0]
    m = n - 2
    for j in range(m):
        i = j + 1
        gl = HBAR2_2M0 * inv_mass_cell[i - 1] / h[i - 1]
        gr = HBAR2_2M0 * inv_mass_cell[i] / h[i]
        d[j] = (gl + gr) / w[i] + v_node[i]
    for j in range(m - 1):
        i = j + 1
        e[j] = -HBAR2_2M0 * inv_mass_cell[i] / h[i] / np.sqrt(w[i] * w[i + 1])


@numba.njit(cache=True, nogil=True)
def all_finite(d, e):
    """True when every entry of d and e is finite (numpy's isfinite(d).all() and
    isfinite(e).all() in one call: every eigensolve checks its matrix)."""
    for i in range(d.shape[0]):
        if not np.isfinite(d[i]):
            return False
    for i in range(e.shape[0]):
        if not np.isfinite(e[i]):
            return False
    return True


@numba.njit(cache=True, nogil=True)
def largest_change(a, b):
    """max_i |a_i - b_i| of two arrays of one length >= 1, NaN when a difference is NaN: the
    value of numpy's max(abs(a - b)) (a maximum is exact) without its temporaries (every warm
    eigensolve asks for the change of its diagonal)."""
    m = 0.0
    for i in range(a.shape[0]):
        v = abs(a[i] - b[i])
        if v != v:
            return v
        if v > m:
            m = v
    return m


@numba.njit(cache=True, nogil=True)
def rows_to_wavefunctions(z, w, psi):
    """Eigenvectors of B as the rows of z (k, n-2) (the layout of
    selfcon/solver/kernels/eigen.py) -> psi (n, k) with psi = W^{-1/2} u.

    Ends are zero; each column is normalised to sum_i w_i psi_i^2 = 1 and its sign
    fixed so that the first node with |psi| > 1e-3 max|psi| is positive."""
    n = w.shape[0]
    k = z.shape[0]
    root = np.empty(n)
    for i in range(n):
        root[i] = np.sqrt(w[i])
    scale = np.empty(k)
    for s in range(k):
        norm2 = 0.0
        big = 0.0
        for j in range(n - 2):
            val = z[s, j] / root[j + 1]
            norm2 += w[j + 1] * val * val
            a = abs(val)
            if a > big:
                big = a
        sign = 1.0
        thresh = 1e-3 * big
        for j in range(n - 2):
            val = z[s, j] / root[j + 1]
            if abs(val) > thresh:
                if val < 0.0:
                    sign = -1.0
                break
        scale[s] = sign / np.sqrt(norm2) if norm2 > 0.0 else 0.0
    for s in range(k):
        psi[0, s] = 0.0
        psi[n - 1, s] = 0.0
    for j in range(n - 2):
        r = root[j + 1]
        row = psi[j + 1]
        for s in range(k):
            row[s] = (z[s, j] / r) * scale[s]


@numba.njit(cache=True, nogil=True)
def in_plane_sums(psi, w, mass_node, norm, harmonic, arithmetic):
    """Per state s of psi (n, k): norm_s = sum_i w_i psi_is^2, the harmonic in-plane mass
    norm_s / sum_i (w_i / m_i) psi_is^2 and the arithmetic one sum_i w_i m_i psi_is^2 / norm_s
    (selfcon.solver.schrodinger.in_plane_weights), in one pass over the rows of psi."""
    n, k = psi.shape
    inv = np.zeros(k)
    arith = np.zeros(k)
    for s in range(k):
        norm[s] = 0.0
    for i in range(n):
        wi = w[i]
        wm = wi / mass_node[i]
        ww = wi * mass_node[i]
        row = psi[i]
        for s in range(k):
            p2 = row[s] * row[s]
            norm[s] += wi * p2
            inv[s] += wm * p2
            arith[s] += ww * p2
    for s in range(k):
        harmonic[s] = norm[s] / inv[s]
        arithmetic[s] = arith[s] / norm[s]


@numba.njit(cache=True, nogil=True)
def splitting_exponents(e, spread, out):
    """out[i, j] = -((e_i - e_j) / spread)^2 (k, k): the exponents of the degeneracy weights
    exp(-((E_i - E_j)/D)^2) of selfcon.solver.schrodinger.in_plane_weights, whose exp numpy
    takes (numpy's own exp, as before: the same bits)."""
    k = e.shape[0]
    for i in range(k):
        for j in range(k):
            d = (e[i] - e[j]) / spread
            out[i, j] = -d * d


@numba.njit(cache=True, nogil=True)
def blended_states(psi, mass_node, s, harmonic, arithmetic, mass, weight):
    """The blend of selfcon.solver.schrodinger.in_plane_weights from the degeneracy weights
    s (k, k) (its diagonal is not read): c_s = 1 - prod_{j != s} (1 - s_sj), the product
    taken in the order of j (numpy.prod's order along a row; the diagonal's factor 1 is
    exact), mass_s = (1 - c_s) harmonic_s + c_s arithmetic_s and the density weights
    weight_is = psi_is^2 ((1 - c_s) + c_s m_i / arithmetic_s) (psi^2 itself where c_s = 0)."""
    n, k = psi.shape
    c = np.empty(k)
    for i in range(k):
        q = 1.0
        for j in range(k):
            if j != i:
                q *= 1.0 - s[i, j]
        c[i] = 1.0 - q
        mass[i] = (1.0 - c[i]) * harmonic[i] + c[i] * arithmetic[i]
    for i in range(n):
        row = psi[i]
        out = weight[i]
        mi = mass_node[i]
        for t in range(k):
            out[t] = row[t] * row[t] * ((1.0 - c[t]) + c[t] * mi / arithmetic[t])


@numba.njit(cache=True, nogil=True)
def place_columns(src, dst, row0, cols):
    """Rows row0 .. row0 + n_r - 1 of dst (N, K) <- one region's states src (n_r, k_r), each
    state in its column cols[s] of the band's energy order, zeros in the other columns (the
    states of other regions vanish on these rows): the caller need not zero dst first."""
    n, k = src.shape
    for i in range(n):
        a = src[i]
        b = dst[row0 + i]
        b[:] = 0.0
        for s in range(k):
            b[cols[s]] = a[s]


@numba.njit(cache=True, nogil=True)
def dual_average(h, f_cell, out):
    """Node values of a per-cell quantity: (h_{i-1} f_{i-1} + h_i f_i)/(h_{i-1} + h_i).

    End nodes take the value of their single cell.
    """
    n = h.shape[0] + 1
    out[0] = f_cell[0]
    out[n - 1] = f_cell[n - 2]
    for i in range(1, n - 1):
        out[i] = (h[i - 1] * f_cell[i - 1] + h[i] * f_cell[i]) / (h[i - 1] + h[i])


@numba.njit(cache=True)
def sturm_count(d, e, x):
    """Number of eigenvalues of the symmetric tridiagonal (d, e) below x (Sturm sequence)."""
    count = 0
    q = 1.0
    for i in range(d.shape[0]):
        if i == 0:
            q = d[0] - x
        else:
            q = d[i] - x - e[i - 1] * e[i - 1] / q
        if q == 0.0:
            q = -1e-300
        if q < 0.0:
            count += 1
    return count


@numba.njit(cache=True)
def _shifted_solve(d, e, mu, b, x):
    """x = (T - mu I)^-1 b for the symmetric tridiagonal T = (d, e), by Gaussian elimination
    with partial pivoting (U has two superdiagonals); a zero pivot is replaced by a tiny one
    (inverse iteration wants the near-singular solve)."""
    m = d.shape[0]
    a = np.empty(m)
    up = np.empty(m)
    up2 = np.zeros(m)
    low = np.empty(m)
    mult = np.empty(m)
    swap = np.zeros(m, dtype=np.bool_)
    scale = 0.0
    for i in range(m):
        a[i] = d[i] - mu
        up[i] = e[i] if i < m - 1 else 0.0
        low[i] = e[i] if i < m - 1 else 0.0
        scale = max(scale, abs(d[i]) + (abs(e[i]) if i < m - 1 else 0.0))
    tiny = 1e-16 * max(scale, 1e-300)
    for i in range(m):
        x[i] = b[i]
    for i in range(m - 1):
        if abs(a[i]) >= abs(low[i]):
            if a[i] == 0.0:
                a[i] = tiny
            f = low[i] / a[i]
            mult[i] = f
            a[i + 1] -= f * up[i]
            x[i + 1] -= f * x[i]
        else:
            swap[i] = True
            f = a[i] / low[i]
            mult[i] = f
            a[i] = low[i]
            t = up[i]
            up[i] = a[i + 1]
            a[i + 1] = t - f * a[i + 1]
            if i < m - 2:
                up2[i] = up[i + 1]
                up[i + 1] = -f * up[i + 1]
            t = x[i]
            x[i] = x[i + 1]
            x[i + 1] = t - f * x[i + 1]
    if a[m - 1] == 0.0:
        a[m - 1] = tiny
    x[m - 1] /= a[m - 1]
    if m > 1:
        x[m - 2] = (x[m - 2] - up[m - 2] * x[m - 1]) / a[m - 2]
    for i in range(m - 3, -1, -1):
        x[i] = (x[i] - up[i] * x[i + 1] - up2[i] * x[i + 2]) / a[i]


@numba.njit(cache=True)
def refine_eigenpair(d, e, index, u):
    """Rayleigh-quotient iteration on the symmetric tridiagonal (d, e) from the unit vector
    ``u`` (overwritten with the eigenvector).  Returns (eigenvalue, ok): ok only when the
    residual |T u - lambda u| fell below 1e-12 of the matrix scale and a Sturm count puts
    exactly ``index`` eigenvalues below lambda - 10 r and ``index + 1`` below lambda + 10 r
    (the state is the one asked for); otherwise the caller solves from scratch."""
    m = d.shape[0]
    scale = 0.0
    for i in range(m):
        scale = max(scale, abs(d[i]) + (abs(e[i]) if i < m - 1 else 0.0) +
                    (abs(e[i - 1]) if i > 0 else 0.0))
    y = np.empty(m)
    tu = np.empty(m)
    mu = 0.0
    res = np.inf
    for it in range(6):
        # Rayleigh quotient and residual of u
        mu = 0.0
        for i in range(m):
            s = d[i] * u[i]
            if i > 0:
                s += e[i - 1] * u[i - 1]
            if i < m - 1:
                s += e[i] * u[i + 1]
            tu[i] = s
            mu += u[i] * s
        res = 0.0
        for i in range(m):
            r = tu[i] - mu * u[i]
            res += r * r
        res = np.sqrt(res)
        if res <= 1e-12 * scale:
            break
        _shifted_solve(d, e, mu, u, y)
        nrm = 0.0
        for i in range(m):
            nrm += y[i] * y[i]
        nrm = np.sqrt(nrm)
        if not np.isfinite(nrm) or nrm == 0.0:
            return mu, False
        for i in range(m):
            u[i] = y[i] / nrm
    if res > 1e-12 * scale:
        return mu, False
    margin = 10.0 * res + 1e-14 * scale
    ok = (sturm_count(d, e, mu - margin) == index and sturm_count(d, e, mu + margin) == index + 1)
    return mu, ok
