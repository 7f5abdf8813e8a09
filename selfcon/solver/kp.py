"""Multiband valence subbands: the 4x4 / 6x6 Luttinger-Kohn Hamiltonian of a (001) quantum
well on the finite-volume mesh, its lowest hole states at any in-plane wave vector, and the
in-plane dispersion.

**Hamiltonian.**  The 6x6 Luttinger-Kohn Hamiltonian with the Pikus-Bir strain terms of
S. L. Chuang, *Physics of Optoelectronic Devices* (Wiley 1995), chapter 4, in his basis
|3/2,3/2>, |3/2,1/2>, |3/2,-1/2>, |3/2,-3/2>, |1/2,1/2>, |1/2,-1/2> (the first four alone
are the 4x4 model, ``kp4``; all six are ``kp6``).  It is built from its cartesian form
(Dresselhaus, Kip and Kittel, Phys. Rev. 98, 368 (1955)) on the p-like states X, Y, Z
times spin, in units of hbar^2/2m0 and on the electron energy scale::

    <X|H|X> = L kx^2 + M (ky^2 + kz^2),   <X|H|Y> = N kx ky   (and cyclic)
    L = -(g1 + 4 g2),  M = -(g1 - 2 g2),  N = -6 g3                (Luttinger's g1, g2, g3)

then turned into the J basis with the unitary U of the basis above (``basis()``); the
spin-orbit split-off states sit Delta below the Gamma8 edge.  The strain terms are the same
form with k_i k_j -> eps_ij and the Bir-Pikus constants l = a_v + 2 b, m = a_v - b,
n = sqrt(3) d (Chuang's sign of a_v, as in selfcon/model/strain.py), so that at k = 0 the
heavy, light and split-off edges are those of selfcon.model.strain.zincblende_001_shifts.

**Operator ordering** at interfaces (z-dependent parameters): Burt's exact envelope-function
ordering (M. G. Burt, J. Phys.: Condens. Matter 4, 6651 (1992)) in the form of B. A. Foreman,
Phys. Rev. B 48, 4964 (1993): kz^2 terms are kz A(z) kz; the kx kz coupling of X and Z splits
as kx (N+ kz + kz N-) with N- = M - 1 (the free-electron term; the Gamma25' remote bands
neglected, Foreman's approximation) and N+ = N - N-.  So the operator is::

    H = kz A(z) kz + G(z) kz + kz G(z)^+ + C(z; kx, ky) + Ev(z) - phi(z)

with A, G, C per cell.  In the bulk this is the symmetric Luttinger-Kohn matrix.

**Discretisation** on the nonuniform finite-volume mesh (selfcon/model/mesh.py): one
parameter set per cell, nodes on every interface, the dual-cell integral of each term
(kz A kz: the usual flux difference; G kz + kz G^+: the mid-cell flux (psi_i + psi_i+1)/2 and
the cell gradient, which gives the off-diagonal block -i (G + G^+)/2 and the interface term
-i (G^+ - G)/2 on the diagonal; C, Ev and phi lumped on the dual cells).  Every term is
Hermitian block by block, so the matrix is Hermitian on any mesh.  With psi = 0 at the
region's end nodes and the lumped dual widths W, B = W^-1/2 H W^-1/2 is a Hermitian
block-tridiagonal matrix (blocks of 4 or 6), stored as a band of half-width 2 nb - 1.

**Eigensolve** (:func:`lowest_states`): the lowest eigenvalues of the hole kinetic operator
-B by bisection on Sturm counts of the band matrix (the negative pivots of its L D L^H
factorisation, selfcon/solver/kernels/kp.py, O(N nb^2) per count), then the eigenvectors by
inverse iteration with the banded LU (LAPACK zgbtrf/zgbtrs, O(N nb^2)); states closer than
DEGENERATE (Kramers pairs) are found together, as a block, and separated by Rayleigh-Ritz.
Linear in the nodes.  (The banded reduction to tridiagonal form of LAPACK's zhbevx, behind
scipy.linalg.eig_banded, costs O(N^2 nb): measured quadratic, so it is not used.)

**In-plane directions.**  ``direction`` is an angle from [100] in the (001) plane, or
``"axial"``: the axial approximation (the warping term of R averaged, g2, g3 -> (g2 + g3)/2
in R only; Chuang 1995), under which E(k) does not depend on the direction.

Units: nm, nm^-1, eV.  Energies on the electron scale (holes: higher is lower kinetic energy).
"""
from __future__ import annotations

from typing import NamedTuple

import numpy as np

from selfcon.constants import HBAR2_2M0

__all__ = ["KpMaterial", "MODELS", "basis", "cartesian_blocks", "bulk_matrix",
           "assemble_blocks", "band_matrix", "dense_matrix", "lowest_banded", "lowest_states",
           "DEGENERATE"]

#: hole model name -> number of bands
MODELS = {"kp4": 4, "kp6": 6}
#: eigenvalues closer than this (eV) are found together (Kramers pairs, symmetric wells)
DEGENERATE = 1e-7


class KpMaterial(NamedTuple):
    """Per-cell parameters of the Luttinger-Kohn model (arrays of one value per cell):
    Luttinger g1, g2, g3, the spin-orbit splitting ``delta`` (eV), the unstrained Gamma8
    edge ``ev`` (eV, electron scale), the deformation potentials ``av``, ``b``, ``d`` (eV,
    the signs of selfcon/model/strain.py) and the biaxial strain ``exx``, ``ezz``."""

    g1: np.ndarray
    g2: np.ndarray
    g3: np.ndarray
    delta: np.ndarray
    ev: np.ndarray
    av: np.ndarray
    b: np.ndarray
    d: np.ndarray
    exx: np.ndarray
    ezz: np.ndarray

    @classmethod
    def uniform(cls, g1, g2, g3, delta=0.34, ev=0.0, av=0.0, b=0.0, d=0.0, exx=0.0, ezz=0.0,
                cells=1):
        """One set of values for ``cells`` cells (a bulk crystal or a test)."""
        vals = [np.full(cells, float(v)) for v in (g1, g2, g3, delta, ev, av, b, d, exx, ezz)]
        return cls(*vals)

    def take(self, sl) -> "KpMaterial":
        return KpMaterial(*(np.asarray(a)[sl] for a in self))


def basis() -> np.ndarray:
    """(6, 6) unitary U: column j is the j-th J state of Chuang's basis in the cartesian
    basis (X up, Y up, Z up, X down, Y down, Z down)."""
    s2, s3, s6 = np.sqrt(2.0), np.sqrt(3.0), np.sqrt(6.0)
    X, Y, Z = 0, 1, 2
    U = np.zeros((6, 6), dtype=complex)
    up, dn = 0, 3
    # |3/2, 3/2> = -(X + iY) up / sqrt2
    U[X + up, 0], U[Y + up, 0] = -1 / s2, -1j / s2
    # |3/2, 1/2> = -[(X + iY) down - 2 Z up] / sqrt6
    U[X + dn, 1], U[Y + dn, 1], U[Z + up, 1] = -1 / s6, -1j / s6, 2 / s6
    # |3/2, -1/2> = [(X - iY) up + 2 Z down] / sqrt6
    U[X + up, 2], U[Y + up, 2], U[Z + dn, 2] = 1 / s6, -1j / s6, 2 / s6
    # |3/2, -3/2> = (X - iY) down / sqrt2
    U[X + dn, 3], U[Y + dn, 3] = 1 / s2, -1j / s2
    # |1/2, 1/2> = [(X + iY) down + Z up] / sqrt3
    U[X + dn, 4], U[Y + dn, 4], U[Z + up, 4] = 1 / s3, 1j / s3, 1 / s3
    # |1/2, -1/2> = [(X - iY) up - Z down] / sqrt3
    U[X + up, 5], U[Y + up, 5], U[Z + dn, 5] = 1 / s3, -1j / s3, -1 / s3
    return U


_U = basis()


def _spin(block3):
    """(..., 3, 3) orbital matrices -> (..., 6, 6) times the spin identity."""
    out = np.zeros(block3.shape[:-2] + (6, 6), dtype=complex)
    out[..., :3, :3] = block3
    out[..., 3:, 3:] = block3
    return out


def _to_j(block6, nb):
    """Cartesian (..., 6, 6) -> the first ``nb`` J states: U^+ H U."""
    u = _U[:, :nb]
    return np.einsum("ia,...ij,jb->...ab", u.conj(), block6, u)


def cartesian_blocks(mat: KpMaterial, kx: float, ky: float, *, axial: bool = False):
    """Per-cell (A, G, C) in the cartesian basis, each (cells, 3, 3), in hbar^2/2m0 units
    times nm^-2 for C: H = kz A kz + G kz + kz G^+ + C (module docstring).  C holds the
    in-plane kinetic terms only (no strain, no edges)."""
    g1, g2, g3 = (np.asarray(a, float) for a in (mat.g1, mat.g2, mat.g3))
    n = g1.size
    L, M, N = -(g1 + 4 * g2), -(g1 - 2 * g2), -6.0 * g3
    n_minus = M - 1.0
    n_plus = N - n_minus
    A = np.zeros((n, 3, 3))
    A[:, 0, 0] = M
    A[:, 1, 1] = M
    A[:, 2, 2] = L
    G = np.zeros((n, 3, 3))
    G[:, 0, 2], G[:, 1, 2] = n_plus * kx, n_plus * ky
    G[:, 2, 0], G[:, 2, 1] = n_minus * kx, n_minus * ky
    kp2 = kx * kx + ky * ky
    iso = 0.5 * (L + M) * kp2
    if axial:             # the warping part of R averaged: g2, g3 -> (g2 + g3)/2 there
        gbar = 0.5 * (g2 + g3)
        aniso, nxy = -3.0 * gbar * (kx * kx - ky * ky), -6.0 * gbar * kx * ky
    else:
        aniso, nxy = 0.5 * (L - M) * (kx * kx - ky * ky), N * kx * ky
    C = np.zeros((n, 3, 3))
    C[:, 0, 0] = iso + aniso
    C[:, 1, 1] = iso - aniso
    C[:, 0, 1] = C[:, 1, 0] = nxy
    C[:, 2, 2] = M * kp2
    return A, G, C


def _local_blocks(mat: KpMaterial, nb: int):
    """Per-cell (cells, nb, nb) k-independent part in the J basis (eV): the edges (Gamma8 at
    ev, split-off at ev - delta) and the biaxial strain (Bir-Pikus, module docstring)."""
    av, b = np.asarray(mat.av, float), np.asarray(mat.b, float)
    exx, ezz = np.asarray(mat.exx, float), np.asarray(mat.ezz, float)
    lp, mp = av + 2.0 * b, av - b
    S = np.zeros((av.size, 3, 3))
    S[:, 0, 0] = lp * exx + mp * (exx + ezz)
    S[:, 1, 1] = lp * exx + mp * (exx + ezz)
    S[:, 2, 2] = lp * ezz + mp * (2.0 * exx)
    out = _to_j(_spin(S), nb)
    ev = np.asarray(mat.ev, float)
    for j in range(nb):
        out[:, j, j] += ev - (np.asarray(mat.delta, float) if j >= 4 else 0.0)
    return out


def bulk_matrix(mat: KpMaterial, k, nb: int = 6, *, axial: bool = False) -> np.ndarray:
    """The bulk (nb, nb) Hamiltonian (eV, electron scale) of the first cell of ``mat`` at the
    wave vector ``k`` = (kx, ky, kz) in nm^-1."""
    kx, ky, kz = (float(v) for v in k)
    one = mat.take(slice(0, 1))
    A, G, C = cartesian_blocks(one, kx, ky, axial=axial)
    kin = A * kz * kz + (G + np.swapaxes(G, -1, -2)) * kz + C
    return (HBAR2_2M0 * _to_j(_spin(kin), nb) + _local_blocks(one, nb))[0]


def assemble_blocks(h, w, mat: KpMaterial, phi_node, kx: float, ky: float, nb: int, *,
                    axial: bool = False):
    """Diagonal (n, nb, nb) and upper (n-1, nb, nb) blocks of the integrated finite-volume
    operator W B (electron energies times nm) on the nodes of a sub-mesh (all nodes, ends
    included); ``h`` (n-1,) cell widths, ``w`` (n,) dual widths, ``mat`` per cell,
    ``phi_node`` (n,) V."""
    h = np.asarray(h, float)
    n = h.size + 1
    A3, G3, C3 = cartesian_blocks(mat, kx, ky, axial=axial)
    A = HBAR2_2M0 * _to_j(_spin(A3), nb)
    G = HBAR2_2M0 * _to_j(_spin(G3.astype(complex)), nb)
    C = HBAR2_2M0 * _to_j(_spin(C3), nb) + _local_blocks(mat, nb)
    Gh = np.conj(np.swapaxes(G, -1, -2))
    K, D = G + Gh, Gh - G
    hh = h[:, None, None]
    diag = np.zeros((n, nb, nb), dtype=complex)
    # kz A kz: flux differences
    diag[:-1] += A / hh
    diag[1:] += A / hh
    upper = -A / hh
    # G kz + kz G^+: central flux and the interface term
    upper = upper - 0.5j * K
    diag[:-1] += -0.5j * D
    diag[1:] += 0.5j * D
    # in-plane kinetic terms, edges, strain: lumped on the half cells
    diag[:-1] += 0.5 * hh * C
    diag[1:] += 0.5 * hh * C
    idx = np.arange(nb)
    diag[:, idx, idx] -= (np.asarray(w, float) * np.asarray(phi_node, float))[:, None]
    return diag, upper


def _interior_hole_blocks(h, w, mat, phi_node, kx, ky, nb, axial):
    """Blocks of the hole kinetic operator -B = -W^-1/2 H W^-1/2 on the interior nodes."""
    diag, upper = assemble_blocks(h, w, mat, phi_node, kx, ky, nb, axial=axial)
    w = np.asarray(w, float)
    s = 1.0 / np.sqrt(w[1:-1])
    d = -diag[1:-1] * (s[:, None, None] ** 2)
    u = -upper[1:-1] * (s[:-1, None, None] * s[1:, None, None])
    return d, u


def band_matrix(diag, upper) -> np.ndarray:
    """Upper band storage (scipy.linalg.eig_banded, ``lower=False``) of the Hermitian
    block-tridiagonal matrix with blocks ``diag`` (m, nb, nb) and ``upper`` (m-1, nb, nb)."""
    m, nb = diag.shape[0], diag.shape[1]
    u = 2 * nb - 1
    ab = np.zeros((u + 1, m * nb), dtype=complex)
    a, b = np.triu_indices(nb)
    for p in range(m):
        ab[u + a - b, p * nb + b] = diag[p, a, b]
    if m > 1:
        aa, bb = np.meshgrid(np.arange(nb), np.arange(nb), indexing="ij")
        aa, bb = aa.ravel(), bb.ravel()
        rows = u + aa - nb - bb
        for p in range(m - 1):
            ab[rows, (p + 1) * nb + bb] = upper[p, aa, bb]
    return ab


def dense_matrix(diag, upper) -> np.ndarray:
    """The same matrix as a dense (m nb, m nb) array (tests and small checks)."""
    m, nb = diag.shape[0], diag.shape[1]
    H = np.zeros((m * nb, m * nb), dtype=complex)
    for p in range(m):
        H[p * nb:(p + 1) * nb, p * nb:(p + 1) * nb] = diag[p]
    for p in range(m - 1):
        H[p * nb:(p + 1) * nb, (p + 1) * nb:(p + 2) * nb] = upper[p]
        H[(p + 1) * nb:(p + 2) * nb, p * nb:(p + 1) * nb] = upper[p].conj().T
    return H


def _to_general_band(ab, u):
    """Upper Hermitian band storage -> LAPACK general band storage (kl = ku = u) with the u
    extra rows zgbtrf needs for its fill-in."""
    m = ab.shape[1]
    g = np.zeros((3 * u + 1, m), dtype=complex)
    # upper part: a[i, j] (i <= j) at ab[u + i - j, j] -> g[2u + i - j, j]
    g[u:2 * u + 1, :] = ab
    # lower part: a[j + r, j] = conj(a[j, j + r]) -> g[2u + r, j]
    for r in range(1, u + 1):
        g[2 * u + r, :m - r] = np.conj(ab[u - r, r:])
    return g


def _band_apply(ab, x):
    """The Hermitian band matrix ``ab`` (upper storage) times the columns of ``x``."""
    u = ab.shape[0] - 1
    y = ab[u].real[:, None] * x
    for off in range(1, u + 1):          # ab[u - off, j] = a[j - off, j]
        row = ab[u - off, off:][:, None]
        y[:-off] += row * x[off:]
        y[off:] += np.conj(row) * x[:-off]
    return y


def lowest_banded(ab, n_states: int, rng_seed: int = 1, tol: float = 1e-8):
    """Lowest ``n_states`` eigenpairs of the Hermitian band matrix ``ab`` (upper storage):
    (values (k,), vectors (m, k) orthonormal).

    Eigenvalues bracketed by bisection on Sturm counts (selfcon/solver/kernels/kp.py) to
    ``tol``; the vectors of each group of brackets closer than DEGENERATE (Kramers pairs)
    by block inverse iteration with the banded LU at the group's centre, then
    Rayleigh-Ritz in the block, whose values are returned.  Linear in m."""
    from scipy.linalg import get_lapack_funcs
    from selfcon.solver.kernels import kp as kern
    u, m = ab.shape[0] - 1, ab.shape[1]
    k = int(min(n_states, m))
    if k <= 0:
        return np.empty(0), np.zeros((m, 0), dtype=complex)
    ab = np.ascontiguousarray(ab, dtype=complex)
    # Gershgorin bounds of the spectrum
    radius = np.abs(ab[:u]).sum(axis=0)
    radius_full = radius.copy()
    for off in range(1, u + 1):
        radius_full[:-off] += np.abs(ab[u - off, off:])
    diag = ab[u].real
    lo = float(np.min(diag - radius_full)) - 1.0
    hi = float(np.max(diag + radius_full)) + 1.0
    centre, _ = kern.lowest_eigenvalues(ab, k, lo, hi, tol)
    scale = max(1.0, float(np.max(np.abs(diag))))
    gbtrf, gbtrs = get_lapack_funcs(("gbtrf", "gbtrs"), (ab,))
    gen = _to_general_band(ab, u)
    rng = np.random.default_rng(rng_seed)
    vals = np.zeros(k)
    vecs = np.zeros((m, k), dtype=complex)
    groups = np.split(np.arange(k), np.flatnonzero(np.diff(centre) > DEGENERATE) + 1)
    done = 0
    for grp in groups:
        sigma = float(np.mean(centre[grp]))
        shifted = gen.copy()
        shifted[2 * u, :] -= sigma
        for attempt in range(4):
            lu, piv, info = gbtrf(shifted, u, u)
            if info == 0:
                break
            shifted[2 * u, :] -= 1e-13 * scale * 10 ** attempt
        x = rng.standard_normal((m, grp.size)) + 1j * rng.standard_normal((m, grp.size))
        prev = vecs[:, :done]
        for it in range(8):
            x, info = gbtrs(lu, u, u, x, piv)
            if done:
                x -= prev @ (prev.conj().T @ x)
            x, _ = np.linalg.qr(x)
            hx = _band_apply(ab, x)
            small = x.conj().T @ hx
            theta, c = np.linalg.eigh(0.5 * (small + small.conj().T))
            x, hx = x @ c, hx @ c
            resid = np.abs(hx - x * theta).max()
            if it >= 1 and resid < 1e-12 * scale:
                break
        vals[done:done + grp.size] = theta
        vecs[:, done:done + grp.size] = x
        done += grp.size
    order = np.argsort(vals, kind="stable")
    return vals[order], vecs[:, order]


def lowest_states(h, w, mat: KpMaterial, phi_node, kx: float, ky: float, nb: int,
                  n_states: int, *, axial: bool = False):
    """Hole states of a quantum region at the in-plane wave vector (kx, ky) nm^-1.

    ``h`` (n-1,) cell widths and ``mat`` per cell, ``w`` (n,) dual widths and ``phi_node``
    (n,) the potential (V) on the region's nodes, psi = 0 at its two end nodes.  Returns
    (energy (k,) eV on the electron scale, highest first, i.e. lowest hole energy first;
    psi (n, nb, k) complex in nm^-1/2 with sum_i w_i sum_b |psi_ib|^2 = 1)."""
    d, u = _interior_hole_blocks(h, w, mat, phi_node, kx, ky, nb, axial)
    vals, vecs = lowest_banded(band_matrix(d, u), n_states)
    n = np.asarray(w).size
    psi = np.zeros((n, nb, vals.size), dtype=complex)
    s = 1.0 / np.sqrt(np.asarray(w, float)[1:-1])
    psi[1:-1] = vecs.reshape(n - 2, nb, vals.size) * s[:, None, None]
    return -vals, psi
