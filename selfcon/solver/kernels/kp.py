"""Numba kernels of the multiband hole eigensolve (selfcon.solver.kp): Sturm counts and
bisection on a Hermitian band matrix.

The matrix is given in upper band storage ``ab`` (u + 1, m): ``ab[u + i - j, j] = a[i, j]``
for ``max(0, j - u) <= i <= j`` (scipy.linalg.eig_banded's ``lower=False`` layout).

**Sturm count** (:func:`sturm_count`): the number of eigenvalues below x is the number of
negative pivots of the factorisation A - x I = L D L^H (Sylvester's law of inertia; the
band version of the count of Golub and Van Loan, Matrix Computations, section 8.4).  L is
unit lower triangular with the band's width, so one count costs O(m u^2) and no pivoting
is done; a zero pivot is replaced by a tiny negative one, as LAPACK's dstebz does.

**Bisection** (:func:`lowest_eigenvalues`): the k lowest eigenvalues to an absolute
tolerance, every count narrowing the brackets of all k (eigenvalues of any multiplicity
come out once per copy).  Linear in m.

**Block products** (:func:`block_apply`): a real symmetric block-tridiagonal matrix times a
block of vectors, the products of the reduced basis (selfcon.solver.kp.reduced_dispersion);
:func:`line_residuals` the residuals of its states at every k_par of a line in one call,
:func:`forward_norms` their norms through the banded Cholesky factor of the resolvent,
:func:`cholesky_solve` the resolvent applied to a block of vectors (the basis' corrections).

**Small dense eigenproblems** (:func:`tridiagonal_lowest`): the lowest pairs of the reduced
basis' matrices of every k_par of a line from their tridiagonal forms (LAPACK's dsytrd), by
the tridiagonal eigensolver of selfcon/solver/kernels/eigen.py and the back-transformation,
in one call (scipy.linalg.eigh's bisection and inverse iteration took 3x longer per matrix
of 64).

Arrays in, arrays out; nothing here is compiled at import time.
"""
import numba
import numpy as np

from selfcon.solver.kernels.eigen import eigenpairs_in_brackets, guided_brackets, lowest_brackets


@numba.njit(cache=True)
def sturm_count(ab, x):
    """Number of eigenvalues below ``x`` of the Hermitian band matrix ``ab`` (upper storage):
    the negative pivots of :func:`ldl_band`."""
    _, d = ldl_band(ab, x)
    count = 0
    for j in range(d.size):
        if d[j] < 0.0:
            count += 1
    return count


@numba.njit(cache=True)
def lowest_eigenvalues(ab, k, lo, hi, tol, probes):
    """The ``k`` lowest eigenvalues of the Hermitian band matrix ``ab`` by bisection, each to
    ``tol``; ``lo`` must lie below the spectrum and at least k eigenvalues below ``hi``.
    ``probes``: points counted first (guesses of the eigenvalues, e.g. those of a nearby
    k_par, plus and minus a margin); like every count they only narrow the brackets, so
    poor guesses cost counts, never correctness.  Returns (centres (k,), half widths (k,))
    of the final brackets, ascending."""
    lower = np.full(k, lo)
    upper = np.full(k, hi)
    for x in probes:
        if x <= lo or x >= hi:
            continue
        _narrow(lower, upper, x, sturm_count(ab, x))
    # each pass halves every open bracket at once: the midpoints of the distinct brackets
    # wider than tol counted side by side (sturm_counts: independent factorisations, a few
    # times the throughput of one), as many passes as the widest bracket needs halvings
    xs = np.empty(k)
    counts = np.empty(k, dtype=np.int64)
    while True:
        n = 0
        for i in range(k):
            if upper[i] - lower[i] > tol and (n == 0 or lower[i] != lower[i - 1]
                                                or upper[i] != upper[i - 1]):
                xs[n] = 0.5 * (lower[i] + upper[i])
                n += 1
        if n == 0:
            break
        sturm_counts(ab, xs[:n], counts[:n])
        for p in range(n):
            _narrow(lower, upper, xs[p], counts[p])
    return 0.5 * (lower + upper), 0.5 * (upper - lower)


@numba.njit(cache=True)
def sturm_counts(ab, xs, counts):
    """:func:`sturm_count` at every point of ``xs`` into ``counts``: the factorisations of
    :func:`ldl_band`, by its arithmetic in the same order (the same pivots, the same counts),
    run side by side (the innermost loop over the points: each factorisation is a chain of
    dependent steps, and independent chains fill the processor's pipelines)."""
    u = ab.shape[0] - 1
    m = ab.shape[1]
    n = xs.size
    lw = np.empty((m, max(u, 1), n), dtype=ab.dtype)
    d = np.empty((m, n))
    s = np.empty(n, dtype=ab.dtype)
    sr = np.empty(n)
    tiny = 1e-300
    for p in range(n):
        counts[p] = 0
    for j in range(m):
        oj = j - u
        i0 = max(0, oj)
        for i in range(i0, j):
            a = np.conj(ab[u + i - j, j])
            oi = i - u
            for p in range(n):
                s[p] = a
            for kk in range(max(i0, oi), i):
                for p in range(n):
                    s[p] -= lw[j, kk - oj, p] * d[kk, p] * np.conj(lw[i, kk - oi, p])
            for p in range(n):
                lw[j, i - oj, p] = s[p] / d[i, p]
        for p in range(n):
            sr[p] = ab[u, j].real - xs[p]
        for i in range(i0, j):
            for p in range(n):
                v = lw[j, i - oj, p]
                sr[p] -= (v.real * v.real + v.imag * v.imag) * d[i, p]
        for p in range(n):
            x = sr[p]
            if x == 0.0:
                x = -tiny
            d[j, p] = x
            if x < 0.0:
                counts[p] += 1


@numba.njit(cache=True)
def _narrow(lower, upper, x, c):
    """Narrow every bracket by one count: ``c`` eigenvalues lie below ``x``, so the c lowest
    brackets end at or below x and the others start at or above it (in place)."""
    for t in range(lower.size):
        if t < c:
            if x < upper[t]:
                upper[t] = x
        elif x > lower[t]:
            lower[t] = x


@numba.njit(cache=True)
def ldl_band(ab, x):
    """The factorisation A - x I = L D L^H of the Hermitian band matrix ``ab`` without
    pivoting (as :func:`sturm_count`): (lw (m, u) with lw[j, i - j + u] = L[j, i], d (m,))."""
    u = ab.shape[0] - 1
    m = ab.shape[1]
    lw = np.zeros((m, max(u, 1)), dtype=ab.dtype)
    d = np.zeros(m)
    tiny = 1e-300
    for j in range(m):
        oj = j - u
        i0 = max(0, oj)
        for i in range(i0, j):
            s = np.conj(ab[u + i - j, j])
            oi = i - u
            for k in range(max(i0, oi), i):
                s -= lw[j, k - oj] * d[k] * np.conj(lw[i, k - oi])
            lw[j, i - oj] = s / d[i]
        s = ab[u, j].real - x
        for i in range(i0, j):
            v = lw[j, i - oj]
            s -= (v.real * v.real + v.imag * v.imag) * d[i]
        if s == 0.0:
            s = -tiny
        d[j] = s
    return lw, d


@numba.njit(cache=True)
def ldl_solve(lw, d, b):
    """x = (L D L^H)^-1 b for the columns of ``b`` (m, r), from :func:`ldl_band`."""
    m, r = b.shape
    u = lw.shape[1]
    x = b.copy()
    for c in range(r):
        for j in range(m):                       # L y = b
            oj = j - u
            s = x[j, c]
            for i in range(max(0, oj), j):
                s -= lw[j, i - oj] * x[i, c]
            x[j, c] = s
        for j in range(m):
            x[j, c] /= d[j]
        for j in range(m - 1, -1, -1):           # L^H x = y / d
            s = x[j, c]
            for i in range(j + 1, min(m, j + u + 1)):
                s -= np.conj(lw[i, j - (i - u)]) * x[i, c]
            x[j, c] = s
    return x


@numba.njit(cache=True)
def band_apply(ab, x):
    """The Hermitian band matrix ``ab`` (upper storage) times the columns of ``x`` (m, r)."""
    u = ab.shape[0] - 1
    m, r = x.shape
    y = np.zeros((m, r), dtype=x.dtype)
    for c in range(r):
        for j in range(m):
            y[j, c] += ab[u, j].real * x[j, c]
            for off in range(1, min(u, j) + 1):
                a = ab[u - off, j]                  # a[j - off, j]
                y[j - off, c] += a * x[j, c]
                y[j, c] += np.conj(a) * x[j - off, c]
    return y


@numba.njit(cache=True)
def orthonormalise(x, prev):
    """The columns of ``x`` made orthonormal and orthogonal to the (orthonormal) columns of
    ``prev``, by modified Gram-Schmidt applied twice."""
    m, r = x.shape
    q = x.copy()
    if m == 0 or r == 0:
        return q
    zero = q[0, 0] * 0.0                     # 0 of the arrays' type (real or complex)
    for _ in range(2):
        for c in range(r):
            for p in range(prev.shape[1]):
                s = zero
                for i in range(m):
                    s += np.conj(prev[i, p]) * q[i, c]
                for i in range(m):
                    q[i, c] -= s * prev[i, p]
            for p in range(c):
                s = zero
                for i in range(m):
                    s += np.conj(q[i, p]) * q[i, c]
                for i in range(m):
                    q[i, c] -= s * q[i, p]
            nrm = 0.0
            for i in range(m):
                nrm += q[i, c].real ** 2 + q[i, c].imag ** 2
            nrm = np.sqrt(nrm)
            for i in range(m):
                q[i, c] /= nrm
    return q


@numba.njit(cache=True, nogil=True)
def block_apply(d, u, x):
    """The real symmetric block-tridiagonal matrix with diagonal blocks ``d`` (m, q, q) and
    upper blocks ``u`` (m-1, q, q) times the columns of ``x`` (m, q, r): y (m, q, r)."""
    m, q, r = x.shape
    y = np.empty((m, q, r))
    block_apply_into(d, u, x, y, 0)
    return y


@numba.njit(cache=True, nogil=True)
def block_apply_into(d, u, x, y, col):
    """:func:`block_apply` of ``x`` (m, q, r) written into the columns ``col .. col + r`` of
    ``y`` (m, q, R), so that several products share one array (one matrix product projects
    them all).  Each entry summed in a local row from zero, in the same order (the same
    bits); the local row keeps the innermost loop free of possible aliasing, so the compiler
    vectorises it."""
    m, q, r = x.shape
    row = np.empty(r)
    for i in range(m):
        for a in range(q):
            row[:] = 0.0
            for b in range(q):
                c = d[i, a, b]
                for s in range(r):
                    row[s] += c * x[i, b, s]
                if i + 1 < m:
                    c = u[i, a, b]
                    for s in range(r):
                        row[s] += c * x[i + 1, b, s]
                if i > 0:
                    c = u[i - 1, b, a]
                    for s in range(r):
                        row[s] += c * x[i - 1, b, s]
            for s in range(r):
                y[i, a, col + s] = row[s]


@numba.njit(cache=True, nogil=True)
def line_residuals(dz, uz, d1, u1, d2, u2, phi, k_grid, psi, theta):
    """Residuals H(k) psi - psi theta of states along a line of k_par, every k in one call:
    H(k) the real symmetric block-tridiagonal matrix with diagonal blocks (dz + phi) + k d1 +
    k^2 d2 (``phi`` (m,) on the diagonal) and upper blocks uz + k u1 + k^2 u2 (each (m, q, q)
    and (m-1, q, q)); ``psi`` (m, q, nk, r) the states of each k, ``theta`` (nk, r) their
    values.  Returns (m q, nk, r), each entry summed in :func:`block_apply`'s order; the
    (k, state) pairs, contiguous in psi and in the result, run as one innermost loop (the
    matrix entry of each pair's k formed there), which the compiler vectorises."""
    m, q, nk, r = psi.shape
    L = nk * r
    out = np.zeros((m * q, L))
    pf = psi.reshape(m, q, L)
    kk = np.empty(L)
    k2 = np.empty(L)
    for j in range(nk):
        for s in range(r):
            kk[j * r + s] = k_grid[j]
            k2[j * r + s] = k_grid[j] * k_grid[j]
    th = theta.reshape(L)
    for i in range(m):
        for a in range(q):
            o = out[i * q + a]
            for b in range(q):
                c0 = dz[i, a, b] + (phi[i] if a == b else 0.0)
                e1 = d1[i, a, b]
                e2 = d2[i, a, b]
                x = pf[i, b]
                for t in range(L):
                    o[t] += ((c0 + kk[t] * e1) + k2[t] * e2) * x[t]
                if i + 1 < m:
                    c0 = uz[i, a, b]
                    e1 = u1[i, a, b]
                    e2 = u2[i, a, b]
                    x = pf[i + 1, b]
                    for t in range(L):
                        o[t] += ((c0 + kk[t] * e1) + k2[t] * e2) * x[t]
                if i > 0:
                    c0 = uz[i - 1, b, a]
                    e1 = u1[i - 1, b, a]
                    e2 = u2[i - 1, b, a]
                    x = pf[i - 1, b]
                    for t in range(L):
                        o[t] += ((c0 + kk[t] * e1) + k2[t] * e2) * x[t]
            x = pf[i, a]
            for t in range(L):
                o[t] -= x[t] * th[t]
    return out.reshape(m * q, nk, r)


@numba.njit(cache=True, nogil=True)
def line_matrices(P0, P1, P2, k_grid, out):
    """out[j] = P0 + k_j P1 + k_j^2 P2 for every k_j of ``k_grid`` (nk, K, K): numpy's
    broadcast expression with the same operations in the same order (the same bits) in one
    pass, without its three temporaries."""
    K = P0.shape[0]
    for j in range(k_grid.size):
        k = k_grid[j]
        k2 = k * k
        for a in range(K):
            for b in range(K):
                out[j, a, b] = P0[a, b] + k * P1[a, b] + k2 * P2[a, b]


@numba.njit(cache=True, nogil=True)
def tridiagonal_lowest(d, e, refl, tau, want, theta, coef):
    """The lowest ``want`` eigenpairs of symmetric matrices given by their reduction to
    tridiagonal form T = Q^T A Q (LAPACK dsytrd with the lower triangle, one per row of the
    inputs): ``d`` (nk, K) and ``e`` (nk, K-1) the diagonal and subdiagonal of T, ``refl``
    (nk, K, K) the reflectors (row i holds v(i+2:) of H(i) = I - tau_i v v^T, v(i+1) = 1 and
    v(:i+1) = 0: dsytrd's output array transposed), ``tau`` (nk, K-1).  The pairs of T from
    the tridiagonal eigensolver of selfcon/solver/kernels/eigen.py (its bisection brackets,
    then eigenpairs_in_brackets, as its lowest_eigenpairs), the vectors turned back by
    Q = H(0) H(1) ... H(K-2).  Fills ``theta`` (nk, want) ascending and
    ``coef`` (nk, K, want), one orthonormal eigenvector per column.  From the third matrix on
    (the k_par of a line, in order) the bisection starts with Sturm counts at the previous
    matrix's values -+ twice the largest step of the last two (eigen.py::guided_brackets: a
    guess only narrows brackets, a poor one costs counts, never correctness)."""
    nk, K = d.shape
    w = np.empty(want)
    z = np.empty((want, K))
    nbk = min(want + 1, K)
    lo = np.empty(nbk)
    hi = np.empty(nbk)
    for j in range(nk):
        if j < 2:
            tnorm, _ = lowest_brackets(d[j], e[j], want, lo, hi)
        else:
            step = 0.0
            for r in range(want):
                step = max(step, abs(theta[j - 1, r] - theta[j - 2, r]))
            tnorm, _ = guided_brackets(d[j], e[j], want, theta[j - 1], 2.0 * step + 1e-9, lo, hi)
        eigenpairs_in_brackets(d[j], e[j], want, lo, hi, tnorm, w, z)
        for i in range(K - 2, -1, -1):
            t = tau[j, i]
            if t == 0.0:
                continue
            for r in range(want):
                s = z[r, i + 1]
                for p in range(i + 2, K):
                    s += refl[j, i, p] * z[r, p]
                s *= t
                z[r, i + 1] -= s
                for p in range(i + 2, K):
                    z[r, p] -= s * refl[j, i, p]
        for r in range(want):
            theta[j, r] = w[r]
            for p in range(K):
                coef[j, p, r] = z[r, p]


@numba.njit(cache=True, nogil=True)
def _forward(ab, x):
    """x <- L^-1 x in place, row by row over all columns of ``x`` (n, c) at once; ``ab``
    (u + 1, n) a banded lower triangular L in lower band storage (``ab[i - j, j] = L[i, j]``,
    scipy.linalg.cholesky_banded's ``lower=True`` layout)."""
    u = ab.shape[0] - 1
    n, c = x.shape
    for i in range(n):
        for j in range(max(0, i - u), i):
            lij = ab[i - j, j]
            for s in range(c):
                x[i, s] -= lij * x[j, s]
        piv = ab[0, i]
        for s in range(c):
            x[i, s] /= piv


@numba.njit(cache=True, nogil=True)
def forward_norms(ab, r):
    """Squared norms of the columns of L^-1 r (``ab`` as :func:`_forward`, ``r`` (n, c)),
    all columns in one pass (LAPACK's dtbtrs solved them one by one)."""
    n, c = r.shape
    x = r.copy()
    _forward(ab, x)
    out = np.zeros(c)
    for i in range(n):
        for s in range(c):
            out[s] += x[i, s] * x[i, s]
    return out


@numba.njit(cache=True, nogil=True)
def cholesky_solve(ab, y):
    """(L L^T)^-1 y for the columns of ``y`` (n, c), ``ab`` the banded Cholesky factor L as
    :func:`_forward` takes it: forward and back substitution over all columns at once
    (LAPACK's dpbtrs behind scipy.linalg.cho_solve_banded solves them one by one)."""
    u = ab.shape[0] - 1
    n, c = y.shape
    x = y.copy()
    _forward(ab, x)
    for i in range(n - 1, -1, -1):
        for j in range(i + 1, min(n, i + u + 1)):
            lji = ab[j - i, i]
            for s in range(c):
                x[i, s] -= lji * x[j, s]
        piv = ab[0, i]
        for s in range(c):
            x[i, s] /= piv
    return x


@numba.njit(cache=True, nogil=True)
def link_annuli(dens, js, si, sl, coef, m, out, row0, col0):
    """The linked annulus pseudo-subbands of selfcon.solver.kp.linked_states summed at the grid
    energies: for every pair p (state si[p] at k_js[p], state sl[p] at the next k_par, share
    x DOS coef[p]) the pair's mean |psi|^2 (``dens`` (N, n, m)) times coef[p] / 2 is added to
    column col0 + si m + js of ``out`` (from row row0) and taken from column
    col0 + sl m + js + 1.  The columns must be zero or hold earlier terms."""
    N = dens.shape[0]
    P = js.size
    for z in range(N):
        for p in range(P):
            j = js[p]
            v = 0.5 * coef[p] * (dens[z, si[p], j] + dens[z, sl[p], j + 1])
            out[row0 + z, col0 + si[p] * m + j] += v
            out[row0 + z, col0 + sl[p] * m + j + 1] -= v


@numba.njit(cache=True, nogil=True)
def merge_annuli(dos, weight, n, m, out, row0, col0):
    """The annulus pseudo-subbands of selfcon.solver.kp.annulus_states (n states on m k_par
    points: the start terms of every (state, annulus) first, then their end terms, in the
    same order) with the two terms at each grid energy summed: column col0 + s m + j of
    ``out`` (from row row0) gets weight * dos of the start term of annulus j (j < m - 1) plus
    that of the end term of annulus j - 1 (j > 0), for the caller that has checked that each
    end term lies at the next grid energy."""
    N = weight.shape[0]
    a = m - 1
    half = n * a
    for i in range(N):
        for s in range(n):
            for j in range(m):
                v = 0.0
                if j < a:
                    t = s * a + j
                    v += weight[i, t] * dos[t]
                if j > 0:
                    t = half + s * a + j - 1
                    v += weight[i, t] * dos[t]
                out[row0 + i, col0 + s * m + j] = v
