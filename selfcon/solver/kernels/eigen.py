"""Numba kernels: the k lowest eigenpairs of a real symmetric tridiagonal matrix in O(m k)
work for well separated eigenvalues, with orthogonal vectors inside clusters.

    T = tridiag(e, d, e),  d (m,), e (m-1,);  the k lowest (lambda_j, u_j), u_j^T u_i = delta_ij.

Three stages, all arrays in and arrays out (``nogil``: regions and bands run in parallel
threads, selfcon/solver/steps.py::solve_states):

1. **Eigenvalues by bisection on Sturm counts** (Golub and Van Loan, Matrix Computations,
   4th ed. 2013, section 8.4.1; the safeguarded count of Kahan, with the tiny-pivot
   replacement of LAPACK's dlaebz).  A count costs one division per node on a dependency
   chain, so counts at ``LANES`` different shifts are evaluated in one pass over the
   matrix: the lanes are independent chains the processor overlaps.  Every count narrows
   the brackets of *all* wanted eigenvalues (the count is the number of eigenvalues below
   the shift), so the coarse separation is shared.  A bracket stops shrinking once its
   width is below ``GAP_FRACTION`` times the distance to its neighbours' brackets (inverse
   iteration from its midpoint then converges by that factor per step) or below the
   absolute floor ``2 eps ||T||`` (degenerate pairs).
2. **Vectors by inverse iteration** from the bracket midpoint: Gaussian elimination with
   partial pivoting of T - sigma I (tiny pivots replaced by eps ||T||, as LAPACK's dlagtf
   and dstein do), ``INVERSE_STEPS`` solves from a fixed pseudo-random start.  ``VLANES``
   vectors are computed together, their elimination chains interleaved node by node
   (each vector's arithmetic is the same as alone).
3. **Orthogonality inside clusters.**  Eigenvalues closer than ``CLUSTER_GAP`` ||T||
   (the absolute error eps ||T|| of a backward-stable solve over such a gap would exceed
   1e-12 in the vectors' overlap) form a cluster; its vectors, each computed on its own,
   are symmetrically orthogonalised (Loewdin, J. Chem. Phys. 18, 365, 1950: V <- G^{-1/2} V
   with the Gram matrix G, G^{-1/2} by Newton-Schulz), which changes each vector least and
   does not depend on an order.  If G is far from the identity (eigenvalues tunnel-split below the solver's
   resolution, so two solves return the same vector), that cluster is redone as LAPACK's
   dstein does: each iterate is orthogonalised against the cluster's earlier vectors
   before every solve (modified Gram-Schmidt, twice at the end).

Without a representation tree the cost of a cluster of c vectors is O(m c^2) (the Gram
matrix and its application); superlattice minibands are such clusters.  Eigenvalues are
finally the Rayleigh quotients of the vectors, kept inside their brackets.

The choice of this method over LAPACK's dstemr (multiple relatively robust
representations) and dstebz + dstein is measured in ``tools/bench.py eigen`` and recorded
in DEVELOPERS.md, "The eigen-solve".
"""
import numba
import numpy as np

#: shifts whose Sturm counts are evaluated together in one pass over the matrix
LANES = 8
#: a bracket is fine enough once narrower than this fraction of the gap to its neighbours
GAP_FRACTION = 1e-4
#: solves of inverse iteration per vector (the error falls by GAP_FRACTION per solve)
INVERSE_STEPS = 3
#: eigenvalues closer than CLUSTER_GAP * ||T|| have their vectors orthogonalised together
#: (eps ||T|| / gap <= 1e-12 for a backward-stable solve: 2.2e-16 / 2.2e-4)
CLUSTER_GAP = 2.2e-4
#: largest row sum of |G - I| of a cluster's Gram matrix G for the symmetric
#: orthogonalisation (its inverse square root converges); above it the cluster is
#: recomputed with Gram-Schmidt between the solves
GRAM_MIN = 0.5

_EPS = np.finfo(np.float64).eps
_SAFMIN = np.finfo(np.float64).tiny


@numba.njit(cache=True, nogil=True)
def sturm_counts(d, e2, pivmin, x, counts):
    """counts[l] = number of eigenvalues of T below x[l], for LANES shifts in one pass.

    The pivots q_i = d_i - x - e_{i-1}^2 / q_{i-1} of the LDL^T factorisation of T - x I;
    a pivot of magnitude below pivmin is replaced by -pivmin (LAPACK dlaebz)."""
    m = d.shape[0]
    q = np.empty(LANES)
    c = np.zeros(LANES, dtype=np.int64)
    for lane in range(LANES):
        t = d[0] - x[lane]
        if abs(t) < pivmin:
            t = -pivmin
        q[lane] = t
        if t <= 0.0:
            c[lane] += 1
    for i in range(1, m):
        di = d[i]
        ei = e2[i - 1]
        for lane in range(LANES):
            t = (di - x[lane]) - ei / q[lane]
            if abs(t) < pivmin:
                t = -pivmin
            q[lane] = t
            c[lane] += t <= 0.0
    for lane in range(LANES):
        counts[lane] = c[lane]


@numba.njit(cache=True, nogil=True)
def _norm_and_pivmin(d, e):
    m = d.shape[0]
    gl = d[0]
    gu = d[0]
    emax = 0.0
    for i in range(m):
        r = 0.0
        if i > 0:
            r += abs(e[i - 1])
        if i < m - 1:
            r += abs(e[i])
            emax = max(emax, e[i] * e[i])
        gl = min(gl, d[i] - r)
        gu = max(gu, d[i] + r)
    tnorm = max(abs(gl), abs(gu))
    pivmin = _SAFMIN * max(1.0, emax)
    return gl, gu, tnorm, pivmin


@numba.njit(cache=True, nogil=True)
def _converged(lo, hi, j, nb, k, atol):
    width = hi[j] - lo[j]
    if width <= atol:
        return True
    gap = np.inf
    if j > 0:
        gap = lo[j] - hi[j - 1]
    if j + 1 < nb:
        gap = min(gap, lo[j + 1] - hi[j])
    return gap > 0.0 and width <= GAP_FRACTION * gap


@numba.njit(cache=True, nogil=True)
def lowest_brackets(d, e, k, lo, hi):
    """Brackets [lo_j, hi_j] of the k lowest eigenvalues (lo, hi of size >= min(k + 1, m)).

    Returns (||T|| as the Gershgorin bound, the absolute floor of the bracket widths).
    Brackets are refined until :func:`_converged`; bracket k (when it exists) is kept as
    a lower bound of the first unwanted eigenvalue, for the gap of the top wanted one."""
    e2, pivmin, tnorm, atol, nb = _start_brackets(d, e, k, lo, hi)
    _refine_brackets(d, e2, pivmin, k, nb, lo, hi, atol)
    return tnorm, atol


@numba.njit(cache=True, nogil=True)
def guided_brackets(d, e, k, guess, delta, lo, hi):
    """:func:`lowest_brackets` of a matrix whose eigenvalues are known to lie near ``guess``
    (any length; the first k + 1 are used, the last of them may be a lower bound of the
    first eigenvalue not asked for): the Sturm counts at guess_j - delta and guess_j + delta
    come first, LANES at a time, then the bisection goes on as there.  Every count narrows the
    brackets by the same rule, whatever the guesses, so the brackets are as valid as
    lowest_brackets' and converge by the same criterion; with delta at least the change of
    every eigenvalue since the guesses (by Weyl's inequality, max |d_new - d_old| for a
    change of the diagonal alone) each wanted eigenvalue starts in a bracket of width
    2 delta instead of the Gershgorin interval.  Returns (||T||, the width floor)."""
    e2, pivmin, tnorm, atol, nb = _start_brackets(d, e, k, lo, hi)
    x = np.empty(LANES)
    counts = np.empty(LANES, dtype=np.int64)
    g = min(guess.shape[0], nb)
    total = 2 * g
    start = 0
    while start < total:
        n = min(LANES, total - start)
        for lane in range(n):
            p = start + lane
            x[lane] = guess[p // 2] - delta if p % 2 == 0 else guess[p // 2] + delta
        for lane in range(n, LANES):
            x[lane] = x[0]
        sturm_counts(d, e2, pivmin, x, counts)
        _narrow(lo, hi, nb, x, counts, n)
        start += n
    _refine_brackets(d, e2, pivmin, k, nb, lo, hi, atol)
    return tnorm, atol


@numba.njit(cache=True, nogil=True)
def _start_brackets(d, e, k, lo, hi):
    """Every bracket the Gershgorin interval (widened by LAPACK's fudge): (e^2, pivmin,
    ||T||, the width floor, the number of brackets nb = min(k + 1, m))."""
    m = d.shape[0]
    e2 = np.empty(max(m - 1, 0))
    for i in range(m - 1):
        e2[i] = e[i] * e[i]
    gl, gu, tnorm, pivmin = _norm_and_pivmin(d, e)
    atol = 2.0 * _EPS * max(tnorm, _SAFMIN)
    fudge = 2.1 * _EPS * tnorm + 2.0 * pivmin
    nb = min(k + 1, m)
    for j in range(nb):
        lo[j] = gl - fudge
        hi[j] = gu + fudge
    return e2, pivmin, tnorm, atol, nb


@numba.njit(cache=True, nogil=True)
def _narrow(lo, hi, nb, x, counts, n):
    """The brackets after the Sturm counts of the first n lanes: c = counts[l] eigenvalues
    lie below x[l], lambda_j < x[l] for j < c, lambda_j >= x[l] otherwise."""
    for lane in range(n):
        c = counts[lane]
        xv = x[lane]
        jj = c
        while jj < nb and lo[jj] < xv:
            lo[jj] = xv
            jj += 1
        jj = min(c, nb) - 1
        while jj >= 0 and hi[jj] > xv:
            hi[jj] = xv
            jj -= 1


@numba.njit(cache=True, nogil=True)
def _refine_brackets(d, e2, pivmin, k, nb, lo, hi, atol):
    """Bisection of the k lowest brackets until :func:`_converged`: each pass counts at
    the midpoints of up to LANES unconverged brackets (distinct ones, lowest first)."""
    x = np.empty(LANES)
    counts = np.empty(LANES, dtype=np.int64)
    first = 0
    while True:
        while first < k and _converged(lo, hi, first, nb, k, atol):
            first += 1
        if first >= k:
            break
        # up to LANES unconverged brackets with distinct midpoints, lowest first
        n = 0
        last_lo = np.nan
        last_hi = np.nan
        j = first
        while j < k and n < LANES:
            if not _converged(lo, hi, j, nb, k, atol) and not (lo[j] == last_lo and hi[j] == last_hi):
                x[n] = 0.5 * (lo[j] + hi[j])
                last_lo = lo[j]
                last_hi = hi[j]
                n += 1
            j += 1
        for lane in range(n, LANES):
            x[lane] = x[0]
        sturm_counts(d, e2, pivmin, x, counts)
        _narrow(lo, hi, nb, x, counts, n)


@numba.njit(cache=True, nogil=True)
def _factor(d, e, sigma, pert, u0, u1, u2, mult, swap):
    """T - sigma I = P L U with partial pivoting; U has two superdiagonals (u1, u2) and
    u0 holds the reciprocals of its diagonal."""
    m = d.shape[0]
    cd = d[0] - sigma
    cs = e[0] if m > 1 else 0.0
    for i in range(m - 1):
        sub = e[i]
        nd = d[i + 1] - sigma
        ns = e[i + 1] if i + 1 < m - 1 else 0.0
        if abs(cd) >= abs(sub):
            if abs(cd) < pert:
                cd = pert if cd >= 0.0 else -pert
            lm = sub / cd
            u0[i] = cd
            u1[i] = cs
            u2[i] = 0.0
            swap[i] = False
            mult[i] = lm
            cd = nd - lm * cs
            cs = ns
        else:
            lm = cd / sub
            u0[i] = sub
            u1[i] = nd
            u2[i] = ns
            swap[i] = True
            mult[i] = lm
            cd = cs - lm * nd
            cs = -lm * ns
    if abs(cd) < pert:
        cd = pert if cd >= 0.0 else -pert
    u0[m - 1] = cd
    for i in range(m):
        u0[i] = 1.0 / u0[i]          # the solves multiply by the reciprocal pivots


@numba.njit(cache=True, nogil=True)
def _solve(u0, u1, u2, mult, swap, b):
    """Overwrite b with (P L U)^{-1} b."""
    m = b.shape[0]
    for i in range(m - 1):
        if swap[i]:
            t = b[i]
            b[i] = b[i + 1]
            b[i + 1] = t
        b[i + 1] -= mult[i] * b[i]
    b[m - 1] = b[m - 1] * u0[m - 1]
    if m > 1:
        b[m - 2] = (b[m - 2] - u1[m - 2] * b[m - 1]) * u0[m - 2]
    for i in range(m - 3, -1, -1):
        b[i] = (b[i] - u1[i] * b[i + 1] - u2[i] * b[i + 2]) * u0[i]


@numba.njit(cache=True, nogil=True)
def _start(v, seed):
    """A fixed pseudo-random start vector in [-1, 1) (a 64-bit linear congruential
    generator, Knuth's MMIX constants): the same for every run and thread count."""
    s = np.uint64(seed) * np.uint64(2862933555777941757) + np.uint64(3037000493)
    for i in range(v.shape[0]):
        s = s * np.uint64(6364136223846793005) + np.uint64(1442695040888963407)
        v[i] = (np.float64(s >> np.uint64(11)) * (1.0 / 9007199254740992.0)) * 2.0 - 1.0


@numba.njit(cache=True, nogil=True)
def _normalise(v):
    s = 0.0
    for i in range(v.shape[0]):
        s += v[i] * v[i]
    s = np.sqrt(s)
    if s > 0.0:
        for i in range(v.shape[0]):
            v[i] /= s


@numba.njit(cache=True, nogil=True)
def _project_out(v, z, j0, j1):
    """v <- v - sum_{j0 <= j < j1} (z_j . v) z_j (modified Gram-Schmidt)."""
    m = v.shape[0]
    for j in range(j0, j1):
        s = 0.0
        for i in range(m):
            s += z[j, i] * v[i]
        for i in range(m):
            v[i] -= s * z[j, i]


@numba.njit(cache=True, nogil=True)
def _vector(d, e, sigma, pert, j, z, j0, work):
    """Inverse iteration for row j of z at shift sigma; with j0 < j the iterate is kept
    orthogonal to rows j0..j-1 of z (the cluster's earlier vectors)."""
    u0, u1, u2, mult, v = work[0], work[1], work[2], work[3], work[4]
    m = d.shape[0]
    swap = np.empty(m, dtype=np.bool_)
    _factor(d, e, sigma, pert, u0, u1, u2, mult, swap)
    _start(v, j + 1)
    for _ in range(INVERSE_STEPS):
        if j0 < j:
            _project_out(v, z, j0, j)
            _normalise(v)
        # each solve grows v by at most 1 / (eps ||T||) ~ 1e16: three stay far from overflow
        _solve(u0, u1, u2, mult, swap, v)
    _normalise(v)
    if j0 < j:
        _project_out(v, z, j0, j)
        _normalise(v)
        _project_out(v, z, j0, j)
        _normalise(v)
    for i in range(m):
        z[j, i] = v[i]


#: vectors computed together by inverse iteration (_vectors_together): their factorisations
#: and solves are independent dependency chains that the processor overlaps, as the lanes of
#: the Sturm counts are
VLANES = 4


@numba.njit(cache=True, nogil=True)
def _factor_lanes(d, e, sigma, pert, u0, u1, u2, mult, swap):
    """_factor for the VLANES shifts sigma at once, lane l in column l of the (m, VLANES)
    arrays; the same values as _factor lane by lane (the pivot choice as a select, and u0
    already the reciprocal pivots)."""
    m = d.shape[0]
    cd = np.empty(VLANES)
    cs = np.empty(VLANES)
    for lane in range(VLANES):
        cd[lane] = d[0] - sigma[lane]
        cs[lane] = e[0] if m > 1 else 0.0
    for i in range(m - 1):
        sub = e[i]
        ns = e[i + 1] if i + 1 < m - 1 else 0.0
        di = d[i + 1]
        for lane in range(VLANES):
            c = cd[lane]
            nd = di - sigma[lane]
            keep = abs(c) >= abs(sub)          # no row interchange
            if abs(c) < pert:
                cp = pert if c >= 0.0 else -pert
            else:
                cp = c
            piv = cp if keep else sub
            lm = (sub if keep else c) / piv
            u0[i, lane] = 1.0 / piv
            u1[i, lane] = cs[lane] if keep else nd
            u2[i, lane] = 0.0 if keep else ns
            swap[i, lane] = not keep
            mult[i, lane] = lm
            ncd = (nd - lm * cs[lane]) if keep else (cs[lane] - lm * nd)
            cs[lane] = ns if keep else -lm * ns
            cd[lane] = ncd
    for lane in range(VLANES):
        c = cd[lane]
        if abs(c) < pert:
            c = pert if c >= 0.0 else -pert
        u0[m - 1, lane] = 1.0 / c


@numba.njit(cache=True, nogil=True)
def _solve_lanes(u0, u1, u2, mult, swap, b):
    """_solve for the VLANES right-hand sides in the columns of b (m, VLANES)."""
    m = b.shape[0]
    for i in range(m - 1):
        for lane in range(VLANES):
            s = swap[i, lane]
            x = b[i, lane]
            y = b[i + 1, lane]
            top = y if s else x
            bot = x if s else y
            b[i, lane] = top
            b[i + 1, lane] = bot - mult[i, lane] * top
    for lane in range(VLANES):
        b[m - 1, lane] = b[m - 1, lane] * u0[m - 1, lane]
        if m > 1:
            b[m - 2, lane] = (b[m - 2, lane] - u1[m - 2, lane] * b[m - 1, lane]) * u0[m - 2, lane]
    for i in range(m - 3, -1, -1):
        for lane in range(VLANES):
            b[i, lane] = (b[i, lane] - u1[i, lane] * b[i + 1, lane]
                          - u2[i, lane] * b[i + 2, lane]) * u0[i, lane]


@numba.njit(cache=True, nogil=True)
def _start_lanes(v, j0):
    """Column l of v (m, VLANES) <- _start's vector of row j0 + l (seed j0 + l + 1)."""
    m = v.shape[0]
    s = np.empty(VLANES, dtype=np.uint64)
    for lane in range(VLANES):
        s[lane] = np.uint64(j0 + lane + 1) * np.uint64(2862933555777941757) + np.uint64(3037000493)
    for i in range(m):
        for lane in range(VLANES):
            x = s[lane] * np.uint64(6364136223846793005) + np.uint64(1442695040888963407)
            s[lane] = x
            v[i, lane] = (np.float64(x >> np.uint64(11)) * (1.0 / 9007199254740992.0)) * 2.0 - 1.0


@numba.njit(cache=True, nogil=True)
def _vectors_together(d, e, lo, hi, pert, k, z):
    """Rows 0..k-1 of z by inverse iteration from their bracket midpoints, VLANES at a time:
    for each row the same values as _vector without a cluster (the lanes past k repeat the
    last shift and are dropped)."""
    m = d.shape[0]
    u0 = np.empty((m, VLANES))
    u1 = np.empty((m, VLANES))
    u2 = np.empty((m, VLANES))
    mult = np.empty((m, VLANES))
    swap = np.empty((m, VLANES), dtype=np.bool_)
    v = np.empty((m, VLANES))
    sigma = np.empty(VLANES)
    for j0 in range(0, k, VLANES):
        nl = min(VLANES, k - j0)
        for lane in range(VLANES):
            j = j0 + min(lane, nl - 1)
            sigma[lane] = 0.5 * (lo[j] + hi[j])
        _factor_lanes(d, e, sigma, pert, u0, u1, u2, mult, swap)
        _start_lanes(v, j0)
        for _ in range(INVERSE_STEPS):
            _solve_lanes(u0, u1, u2, mult, swap, v)
        for lane in range(nl):
            t = 0.0
            for i in range(m):
                t += v[i, lane] * v[i, lane]
            t = np.sqrt(t)
            row = z[j0 + lane]
            if t > 0.0:
                for i in range(m):
                    row[i] = v[i, lane] / t
            else:
                for i in range(m):
                    row[i] = v[i, lane]


#: columns per block of the cluster products (the block of every cluster row stays in cache)
BLOCK = 512


@numba.njit(cache=True, nogil=True, fastmath={"reassoc", "contract"})
def _gram(b, g):
    """g = b b^T for the rows of b (c, m), summed block by block of BLOCK columns."""
    c, m = b.shape
    for a in range(c):
        for q in range(a + 1):
            g[a, q] = 0.0
    for i0 in range(0, m, BLOCK):
        i1 = min(i0 + BLOCK, m)
        for a in range(c):
            ra = b[a, i0:i1]
            for q in range(a + 1):
                rq = b[q, i0:i1]
                t = 0.0
                for i in range(i1 - i0):
                    t += ra[i] * rq[i]
                g[a, q] += t
    for a in range(c):
        for q in range(a):
            g[q, a] = g[a, q]


@numba.njit(cache=True, nogil=True, fastmath={"contract"})
def _apply(s, b, out):
    """out = s b for s (c, c) and b (c, m): four rows of out at a time, block by block."""
    c, m = b.shape
    acc = np.empty((4, BLOCK))
    for i0 in range(0, m, BLOCK):
        i1 = min(i0 + BLOCK, m)
        n = i1 - i0
        for a0 in range(0, c, 4):
            na = min(4, c - a0)
            acc[:, :] = 0.0
            for q in range(c):
                rq = b[q, i0:i1]
                if na == 4:
                    f0, f1, f2, f3 = s[a0, q], s[a0 + 1, q], s[a0 + 2, q], s[a0 + 3, q]
                    r0, r1, r2, r3 = acc[0], acc[1], acc[2], acc[3]
                    for i in range(n):
                        x = rq[i]
                        r0[i] += f0 * x
                        r1[i] += f1 * x
                        r2[i] += f2 * x
                        r3[i] += f3 * x
                else:
                    for r in range(na):
                        f = s[a0 + r, q]
                        ar = acc[r]
                        for i in range(n):
                            ar[i] += f * rq[i]
            for r in range(na):
                o = out[a0 + r, i0:i1]
                ar = acc[r]
                for i in range(n):
                    o[i] = ar[i]


@numba.njit(cache=True, nogil=True, fastmath={"contract"})
def _matmul(a, b, out):
    """out = a b for square (c, c) matrices."""
    c = a.shape[0]
    for i in range(c):
        row = out[i]
        for j in range(c):
            row[j] = 0.0
        for k in range(c):
            f = a[i, k]
            bk = b[k]
            for j in range(c):
                row[j] += f * bk[j]


@numba.njit(cache=True, nogil=True)
def _inverse_sqrt(g, z):
    """z = g^{-1/2} of a symmetric g near the identity, by the coupled Newton-Schulz
    iteration (Higham, Functions of Matrices, SIAM 2008, section 6.3):
    T = (3 I - Z Y)/2, Y <- Y T, Z <- T Z from Y = g, Z = I; quadratic once converging.
    False if g is too far from I (a row of |g - I| summing to GRAM_MIN or more)."""
    c = g.shape[0]
    for a in range(c):
        t = 0.0
        for b in range(c):
            t += abs(g[a, b] - (1.0 if a == b else 0.0))
        if t >= GRAM_MIN:
            return False
    y = g.copy()
    for a in range(c):
        for b in range(c):
            z[a, b] = 1.0 if a == b else 0.0
    t = np.empty((c, c))
    w = np.empty((c, c))
    for _ in range(60):
        _matmul(z, y, w)
        change = 0.0
        for a in range(c):
            for b in range(c):
                d = (1.0 if a == b else 0.0) - w[a, b]
                change = max(change, abs(d))
                t[a, b] = (1.0 if a == b else 0.0) + 0.5 * d
        if change <= 4.0 * _EPS:
            return True
        _matmul(y, t, w)
        y[:, :] = w
        _matmul(t, z, w)
        z[:, :] = w
    return False


@numba.njit(cache=True, nogil=True)
def _symmetric_orthogonalise(z, j0, j1):
    """Rows j0..j1-1 of z <- G^{-1/2} rows (Loewdin).  False if G is too far from I.

    Every product is a loop of our own rather than BLAS or LAPACK: a multithreaded BLAS
    called from several solver threads at once (or on a busy machine) oversubscribes the
    cores, and loops of our own give the same bits for any number of threads."""
    c = j1 - j0
    block = np.ascontiguousarray(z[j0:j1, :])
    g = np.empty((c, c))
    _gram(block, g)
    s = np.empty((c, c))
    if not _inverse_sqrt(g, s):
        return False
    out = np.empty_like(block)
    _apply(s, block, out)
    z[j0:j1, :] = out
    return True


@numba.njit(cache=True, nogil=True)
def _rayleigh(d, e, v):
    m = d.shape[0]
    s = 0.0
    for i in range(m):
        s += d[i] * v[i] * v[i]
    for i in range(m - 1):
        s += 2.0 * e[i] * v[i] * v[i + 1]
    return s


@numba.njit(cache=True, nogil=True)
def lowest_eigenpairs(d, e, k, w, z):
    """The k lowest eigenpairs of tridiag(e, d, e): w (k,) ascending, z (k, m) one
    orthonormal eigenvector per row.  Returns the number of clusters that needed the
    Gram-Schmidt fallback (0 in ordinary cases)."""
    m = d.shape[0]
    if m == 1:
        w[0] = d[0]
        z[0, 0] = 1.0
        return 0
    nb = min(k + 1, m)
    lo = np.empty(nb)
    hi = np.empty(nb)
    tnorm, atol = lowest_brackets(d, e, k, lo, hi)
    return eigenpairs_in_brackets(d, e, k, lo, hi, tnorm, w, z)


@numba.njit(cache=True, nogil=True)
def eigenpairs_in_brackets(d, e, k, lo, hi, tnorm, w, z):
    """The second half of :func:`lowest_eigenpairs` (m >= 2): the vectors and energies of
    the k lowest eigenvalues from their brackets lo, hi and ||T|| as :func:`lowest_brackets`
    left them (a caller that needed the eigenvalues first, to decide k, keeps them)."""
    m = d.shape[0]
    pert = _EPS * max(tnorm, _SAFMIN)
    work = np.empty((5, m))
    _vectors_together(d, e, lo, hi, pert, k, z)
    # clusters: runs of eigenvalues whose brackets are closer than CLUSTER_GAP ||T||
    fallbacks = 0
    gap_tol = CLUSTER_GAP * tnorm
    j0 = 0
    while j0 < k:
        j1 = j0 + 1
        while j1 < k and lo[j1] - hi[j1 - 1] < gap_tol:
            j1 += 1
        if j1 - j0 > 1 and not _symmetric_orthogonalise(z, j0, j1):
            fallbacks += 1
            for j in range(j0, j1):
                _vector(d, e, 0.5 * (lo[j] + hi[j]), pert, j, z, j0, work)
        j0 = j1
    for j in range(k):
        r = _rayleigh(d, e, z[j])
        w[j] = min(max(r, lo[j]), hi[j])
    return fallbacks
