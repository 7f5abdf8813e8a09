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
inverse iteration with the same band factorisation (O(N nb^2)); states closer than
DEGENERATE (Kramers pairs) are found together, as a block, and separated by Rayleigh-Ritz.
Linear in the nodes.  (The banded reduction to tridiagonal form of LAPACK's zhbevx, behind
scipy.linalg.eig_banded, costs O(N^2 nb): measured quadratic, so it is not used.)

**Symmetry splits** (used by :func:`lowest_states`, same eigenvalues to rounding).  At
k_par = 0 the matrix decouples exactly (:func:`zone_centre`): heavy holes alone, a scalar
tridiagonal problem for the electron eigensolver (selfcon/solver/kernels/eigen.py), and
light holes with the split-off holes of the same J_z sign, a two-component band problem;
each level is a Kramers pair of equal energy.  At k_par != 0, in the axial approximation
and along [100] and [110] with warping, a unitary T (:func:`split_transform`, the split of
Broido and Sham, Phys. Rev. B 31, 888 (1985), found numerically as the symmetry commuting
with every term) turns the matrix into two decoupled halves of 2 or 3 components, real in
the phases chosen; each half has half the size and about half the band width, so a Sturm
count costs about a tenth.  Where a check finds the blocks not decoupled (to SPLIT_TOL of
their largest entry) the whole matrix is solved.

**Reduced basis** (:func:`reduced_dispersion`: the loop's k_par grid, and the [100] and
[110] lines of the result).  Each half is H(k) = B0 + k B1 + k^2 B2 along the line; it is
expanded in its zone-centre states plus their first- and second-order corrections through
the resolvent (B0 - sigma)^-1, so every k_par is a dense eigenproblem of ~64 instead of a
band problem of 3 N.  Every state's residual is checked (its energy error estimated as
r^T (B0 - sigma)^-1 r) and a k_par above BASIS_TOL (0.05 meV) is solved whole; the block
solver stays the reference and the fallback.  DEVELOPERS.md, "How to use the multiband hole
model", has the measured errors.

**In-plane directions.**  ``direction`` is an angle from [100] in the (001) plane, or
``"axial"``: the axial approximation (the warping term of R averaged, g2, g3 -> (g2 + g3)/2
in R only; Chuang 1995), under which E(k) does not depend on the direction.

**Bulk curvature** (:func:`bulk_curvatures`).  Which Luttinger parameters enter where: along
k_z the operator takes g1 and g2 (A: L = -(g1 + 4 g2), M = -(g1 - 2 g2)); the k_z k_par
coupling takes g3 (N = -6 g3, Chuang's S); the in-plane terms take g1, g2 (Q) and, in R, g2 and
g3 along [100] and [110] (warped) or gbar = (g2 + g3)/2 in the axial approximation.  The states
of a well mix every k_z with their k_par, so the loop (axial) reaches every polar angle from
[001], the [100] line the (010) plane ([001], [101]) and the [110] line the (1-10) plane
([001], [111], [110]).  A layer whose bulk hole band has an inverse mass <= 0 somewhere there
(GaP: g1 - 2 g3 = -1.81, m_hh[111] = -0.55 m0) has its valence band top away from Gamma in
the model: selfcon.output.diagnostics names it (design warning ``kp_hole_bands``).

Units: nm, nm^-1, eV.  Energies on the electron scale (holes: higher is lower kinetic energy).
"""
from __future__ import annotations

from typing import NamedTuple

import numpy as np

from selfcon.constants import HBAR2_2M0

__all__ = ["KpMaterial", "KpStates", "MODELS", "basis", "cartesian_blocks", "bulk_matrix",
           "assemble_blocks", "band_matrix", "dense_matrix", "lowest_banded", "lowest_states",
           "DEGENERATE", "region_material", "dispersion", "annulus_states", "annulus_sheets",
           "grid_top", "region_dispersion", "linked_states", "link_pairs", "LINK_POWER", "K_POINTS", "fermi_sea_top", "collect_states", "subband_figures", "along_direction",
           "split_transform", "split_blocks", "zone_centre", "ZONE_CENTRE_GROUPS", "SPLIT_TOL",
           "reduced_dispersion", "BASIS_LEVELS", "BASIS_SHIFT", "BASIS_TOL", "CURVATURE_USES",
           "Curvature", "bulk_curvatures", "zone_centre_inverse_masses", "large_k_inverse_masses"]

#: hole model name -> number of bands
MODELS = {"kp4": 4, "kp6": 6}
#: the brackets of guessed eigenvalues (lowest_banded's guess): +- this, eV
GUESS_MARGIN = 2e-3
#: eigenvalues closer than this (eV) are found together (Kramers pairs, symmetric wells,
#: small spin splittings); the bisection brackets are narrower (lowest_banded's tol)
DEGENERATE = 3e-5


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


def _orbital_basis(nb):
    """(3, 3, nb, nb): U^+ (E_ij x spin identity) U for the orbital unit matrices E_ij."""
    unit = np.zeros((3, 3, 3, 3))
    for i in range(3):
        for j in range(3):
            unit[i, j, i, j] = 1.0
    return _to_j(_spin(unit), nb)


_ORBITAL = {nb: _orbital_basis(nb) for nb in MODELS.values()}


def _orbital_to_j(block3, nb):
    """Cartesian orbital (..., 3, 3) times the spin identity -> the first ``nb`` J states (the
    same as _to_j(_spin(block3)), as one sum over the nine orbital entries)."""
    return np.einsum("...ij,ijab->...ab", np.asarray(block3, dtype=complex), _ORBITAL[nb])


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
    out = _orbital_to_j(S, nb)
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
    A = HBAR2_2M0 * _orbital_to_j(A3, nb)
    G = HBAR2_2M0 * _orbital_to_j(G3, nb)
    C = HBAR2_2M0 * _orbital_to_j(C3, nb) + _local_blocks(mat, nb)
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
    ab = np.zeros((u + 1, m * nb), dtype=np.result_type(diag, upper, float))   # real blocks: real
    a, b = np.triu_indices(nb)
    ab[(u + a - b)[None, :], np.arange(m)[:, None] * nb + b[None, :]] = diag[:, a, b]
    if m > 1:
        aa, bb = np.meshgrid(np.arange(nb), np.arange(nb), indexing="ij")
        aa, bb = aa.ravel(), bb.ravel()
        rows = u + aa - nb - bb
        ab[rows[None, :], np.arange(1, m)[:, None] * nb + bb[None, :]] = upper[:, aa, bb]
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


def _gershgorin(ab):
    """Bounds (lo, hi) of the spectrum of the Hermitian band matrix ``ab`` (upper storage):
    Gershgorin's discs, widened by 1."""
    u = ab.shape[0] - 1
    radius = np.abs(ab[:u]).sum(axis=0)
    for off in range(1, u + 1):
        radius[:-off] += np.abs(ab[u - off, off:])
    diag = ab[u].real
    return float(np.min(diag - radius)) - 1.0, float(np.max(diag + radius)) + 1.0


def lowest_banded(ab, n_states: int, rng_seed: int = 1, tol: float = 1e-5, lower=None,
                  guess=None):
    """Lowest ``n_states`` eigenpairs of the Hermitian band matrix ``ab`` (upper storage):
    (values (k,), vectors (m, k) orthonormal).  A real ``ab`` (a real symmetric matrix: the
    halves of the split and their zone-centre groups) is solved in real arithmetic, about
    three times faster, with real vectors.

    Eigenvalues bracketed by bisection on Sturm counts (selfcon/solver/kernels/kp.py) to
    ``tol``; the vectors of each group of brackets closer than DEGENERATE (Kramers pairs,
    small spin splittings) by block inverse iteration with the band L D L^H factorisation
    at the group's centre (the count's own, kernels/kp.py), then Rayleigh-Ritz in the block, whose values are returned (so they are exact
    to rounding, not to ``tol``).  ``lower``: a guess of a bound below the spectrum (checked
    by a count; Gershgorin's bound otherwise).  ``guess``: approximate eigenvalues (those of a
    nearby k_par), counted at +- GUESS_MARGIN first to narrow the brackets.  Linear in m."""
    from selfcon.solver.kernels import kp as kern
    u, m = ab.shape[0] - 1, ab.shape[1]
    k = int(min(n_states, m))
    if k <= 0:
        return np.empty(0), np.zeros((m, 0), dtype=complex)
    real = np.isrealobj(ab)                 # a real symmetric band: real arithmetic throughout
    ab = np.ascontiguousarray(ab, dtype=float if real else complex)
    lo, hi = _gershgorin(ab)
    diag = ab[u].real
    if lower is not None and lower > lo and kern.sturm_count(ab, float(lower)) == 0:
        lo = float(lower)
        step = 0.1
        while lo + step < hi:
            if kern.sturm_count(ab, lo + step) >= k:
                hi = lo + step
                break
            step *= 2.0
    probes = np.empty(0)
    if guess is not None:
        g = np.unique(np.round(np.asarray(guess, float)[np.isfinite(guess)] / tol) * tol)
        probes = np.sort(np.concatenate([g - GUESS_MARGIN, g + GUESS_MARGIN]))
    centre, _ = kern.lowest_eigenvalues(ab, k, lo, hi, tol, probes)
    scale = max(1.0, float(np.max(np.abs(diag))))
    rng = np.random.default_rng(rng_seed)
    vals = np.zeros(k)
    vecs = np.zeros((m, k), dtype=ab.dtype)
    groups = np.split(np.arange(k), np.flatnonzero(np.diff(centre) > DEGENERATE) + 1)
    done = 0
    for grp in groups:
        sigma = float(np.mean(centre[grp]))
        lw, dd = kern.ldl_band(ab, sigma)
        x = rng.standard_normal((m, grp.size))
        if not real:
            x = x + 1j * rng.standard_normal((m, grp.size))
        prev = np.ascontiguousarray(vecs[:, :done])
        for it in range(12):
            x = kern.orthonormalise(kern.ldl_solve(lw, dd, x), prev)
            hx = kern.band_apply(ab, x)
            small = x.conj().T @ hx
            theta, c = np.linalg.eigh(0.5 * (small + small.conj().T))
            x, hx = x @ c, hx @ c
            resid = np.abs(hx - x * theta).max()
            if it >= 1 and resid < 1e-13 * scale:
                break
        vals[done:done + grp.size] = theta
        vecs[:, done:done + grp.size] = x
        done += grp.size
    order = np.argsort(vals, kind="stable")
    return vals[order], vecs[:, order]


# --------------------------------------------------------------------------- symmetry splits

#: picks of the J states whose projections span each half of a Broido-Sham split (heavy,
#: light, split-off first); the first pick that makes the halves real is kept
_PICKS = {6: (((0, 2, 5), (3, 1, 4)), ((0, 1, 4), (3, 2, 5))),
          4: (((0, 2), (3, 1)), ((0, 1), (3, 2)))}
#: off-block and imaginary parts below this fraction of the largest entry count as zero
SPLIT_TOL = 1e-12
_SPLITS: dict = {}


def _generic_blocks(nb, c, s, axial):
    """Blocks of a well of four cells with random parameters at three k_par along (c, s): the
    matrices every symmetry of the model along that direction must commute with."""
    rng = np.random.default_rng(20260)
    cells = 4
    mat = KpMaterial(*(rng.uniform(0.5, 3.0, cells) for _ in range(4)), rng.uniform(-0.3, 0.3, cells),
                     *(rng.uniform(-3.0, 3.0, cells) for _ in range(3)),
                     rng.uniform(-0.02, 0.02, cells), rng.uniform(-0.02, 0.02, cells))
    h = rng.uniform(0.2, 0.5, cells)
    w = np.r_[h[0] / 2, (h[1:] + h[:-1]) / 2, h[-1] / 2]
    phi = rng.uniform(-0.1, 0.1, cells + 1)
    out = []
    for k in (0.0, 0.37, 1.3):
        d, u = assemble_blocks(h, w, mat, phi, k * c, k * s, nb, axial=axial)
        out += list(d) + list(u) + [x.conj().T for x in u]
    return out


def split_transform(nb: int, c: float, s: float, axial: bool):
    """The unitary (nb, nb) T that splits the Hamiltonian along the in-plane direction (c, s)
    = (cos, sin) of the angle from [100] into two decoupled halves, or None: (T, real).

    In the axial approximation (any direction), and along [100] and [110] with the warped
    Hamiltonian, the model has a symmetry that commutes with every term at every k_par along
    the direction (the split of D. A. Broido and L. J. Sham, Phys. Rev. B 31, 888 (1985),
    there for the 4x4 model): its two eigenspaces, each half of the J states, are the
    halves (2 + 2 for kp4, 3 + 3 for kp6).  It is found, not written out: the matrices that
    commute with the blocks of a well with random parameters at three k_par (the nullspace
    of a linear map, by SVD) are the identity and the symmetry; the eigenvectors of the
    symmetry, inside each half projected from the J states of ``_PICKS`` (heavy, light,
    split-off) and phased on a Hermitian combination, make the columns of T.  ``real``:
    with these phases every block of both halves is real (so are the halves' eigenvectors).
    Cached per (nb, direction, axial)."""
    key = (nb, round(float(c), 14), round(float(s), 14), bool(axial))
    if key in _SPLITS:
        return _SPLITS[key]
    from selfcon.solver.threads import one_blas_thread
    mats = _generic_blocks(nb, c, s, axial)
    eye = np.eye(nb)
    lin = np.vstack([np.kron(eye, m.T) - np.kron(m, eye) for m in mats])
    with one_blas_thread():
        _, sv, vh = np.linalg.svd(lin, full_matrices=False)
    null = vh[np.sum(sv > 1e-9 * sv[0]):].conj()
    result = None
    if null.shape[0] == 2:
        sym = [x.reshape(nb, nb) - np.trace(x.reshape(nb, nb)) / nb * eye for x in null]
        S = max(sym, key=lambda x: np.abs(x).max())
        Hs = S + S.conj().T
        if np.abs(Hs).max() < 1e-6 * np.abs(S).max():
            Hs = 1j * (S - S.conj().T)
        ev, vec = np.linalg.eigh(Hs)
        half = nb // 2
        herm = sum((j + 1.0) * m for j, m in enumerate(mats) if np.allclose(m, m.conj().T))
        scale = max(np.abs(m).max() for m in mats)
        if ev[half] - ev[half - 1] > 1e-6 * max(1.0, abs(ev).max()):
            best = None
            for picks in _PICKS[nb]:
                T = np.zeros((nb, nb), dtype=complex)
                for b, pick in enumerate(picks):
                    part = vec[:, b * half:(b + 1) * half]
                    proj = part @ part.conj().T
                    cols = np.stack([proj[:, j] / np.linalg.norm(proj[:, j]) for j in pick], axis=1)
                    sub = cols.conj().T @ herm @ cols
                    for j in range(1, half):
                        if abs(sub[0, j]) > 0:
                            cols[:, j] *= sub[0, j] / abs(sub[0, j])
                    T[:, b * half:(b + 1) * half] = cols
                if np.abs(T.conj().T @ T - eye).max() > 1e-10:
                    continue
                tr = [T.conj().T @ m @ T for m in mats]
                off = max(max(np.abs(x[:half, half:]).max(), np.abs(x[half:, :half]).max()) for x in tr)
                imag = max(np.abs(x.imag).max() for x in tr)
                if off > SPLIT_TOL * scale:
                    continue
                cand = (imag > SPLIT_TOL * scale, imag, T)
                if best is None or cand[:2] < best[:2]:
                    best = cand
            if best is not None:
                result = (best[2], not best[0])
    _SPLITS[key] = result
    return result


def split_blocks(d, u, T, real: bool):
    """The two decoupled halves of the blocks ``d`` (m, nb, nb), ``u`` (m-1, nb, nb) under
    :func:`split_transform`'s T: [(d_a, u_a), (d_b, u_b)] (real arrays when ``real``), or None
    when the blocks do not split (a material or term the symmetry does not hold for)."""
    nb = d.shape[1]
    half = nb // 2
    Th = T.conj().T
    dt = Th @ d @ T
    ut = Th @ u @ T
    scale = max(float(np.abs(d).max()), float(np.abs(u).max()) if u.size else 0.0, 1e-300)
    for x in (dt, ut):
        if x.size and max(np.abs(x[:, :half, half:]).max(), np.abs(x[:, half:, :half]).max()) > SPLIT_TOL * scale:
            return None
    if real:
        if max(np.abs(dt.imag).max(), np.abs(ut.imag).max() if ut.size else 0.0) > SPLIT_TOL * scale:
            return None
        dt, ut = dt.real, ut.real
    return [(np.ascontiguousarray(dt[:, sl, sl]), np.ascontiguousarray(ut[:, sl, sl]))
            for sl in (slice(0, half), slice(half, nb))]


#: the groups of J states the k_par = 0 matrix decouples into: heavy holes alone, and light
#: holes with the split-off holes of the same J_z sign (each with its Kramers partner)
ZONE_CENTRE_GROUPS = {4: (((0,), (3,)), ((1,), (2,))), 6: (((0,), (3,)), ((1, 4), (2, 5)))}


def _group_lowest(d, u, grp, k, lower):
    """Lowest ``k`` eigenpairs of the J states ``grp`` of the blocks: (values, vectors (m, g, k))."""
    from selfcon.solver.kernels.eigen import lowest_eigenpairs
    g = np.asarray(grp)
    dg = d[:, g][:, :, g]
    ug = u[:, g][:, :, g]
    m = dg.shape[0]
    k = min(k, m * g.size)
    if g.size == 1:
        w = np.empty(k)
        z = np.empty((k, m))
        lowest_eigenpairs(np.ascontiguousarray(dg[:, 0, 0].real), np.ascontiguousarray(ug[:, 0, 0].real),
                          k, w, z)
        return w, z.T.reshape(m, 1, k).astype(complex)
    vals, vecs = lowest_banded(band_matrix(dg, ug), k, lower=lower)
    return vals, vecs.reshape(m, g.size, vals.size)


def zone_centre(d, u, nb: int, n_states: int, lower=None):
    """The lowest ``n_states`` eigenpairs of the k_par = 0 blocks ``d``, ``u`` (hole kinetic
    operator, interior nodes) from the problems they decouple into (ZONE_CENTRE_GROUPS:
    heavy holes a scalar tridiagonal problem for selfcon/solver/kernels/eigen.py, light and
    split-off holes a two-component band problem): (values (k,), vectors (m nb, k)) as
    :func:`lowest_banded`, Kramers partners next to each other with equal values, or None if
    the blocks are not decoupled (then solve them whole)."""
    groups = ZONE_CENTRE_GROUPS[nb]
    scale = max(float(np.abs(d).max()), 1e-300)
    inside = np.zeros((nb, nb), dtype=bool)
    for pair in groups:
        for grp in pair:
            inside[np.ix_(grp, grp)] = True
    if max(np.abs(d[:, ~inside]).max(), np.abs(u[:, ~inside]).max() if u.size else 0.0) > SPLIT_TOL * scale:
        return None
    m = d.shape[0]
    levels = (n_states + 1) // 2
    vals, cols = [], []
    for first, partner in groups:
        e, v = _group_lowest(d, u, first, levels, lower)
        g, gp = np.asarray(first), np.asarray(partner)
        # the partner group is the first one up to the signs of its states (time reversal):
        # reuse its states where that holds to rounding, else solve it too
        sign = np.ones(g.size)
        for a in range(1, g.size):
            if np.vdot(d[:, g[0], g[a]], d[:, gp[0], gp[a]]).real < 0:
                sign[a] = -1.0
        same = all(np.abs(x[:, gp][:, :, gp] - sign[:, None] * x[:, g][:, :, g] * sign[None, :]).max()
                   <= SPLIT_TOL * scale for x in (d, u) if x.size)
        if same:
            ep, vp = e, v * sign[None, :, None]
        else:
            ep, vp = _group_lowest(d, u, partner, levels, lower)
        for j in range(min(e.size, ep.size)):
            for grp, vv, val in ((g, v[:, :, j], e[j]), (gp, vp[:, :, j], ep[j])):
                col = np.zeros((m, nb), dtype=complex)
                col[:, grp] = vv
                cols.append(col.reshape(-1))
                vals.append(val)
    vals = np.asarray(vals)
    order = np.argsort(vals, kind="stable")[:n_states]
    return vals[order], np.stack(cols, axis=1)[:, order]


def _split_lowest(halves, n_states, lower, guess):
    """Lowest ``n_states`` eigenpairs of a matrix given as its two decoupled halves (blocks of
    each), by :func:`lowest_banded` on each: (values (k,), [(half index, vectors (m h, k_h))])."""
    per = [min(n_states, (n_states + 1) // 2 + 1)] * 2
    while True:
        res = [lowest_banded(band_matrix(dh.astype(complex), uh.astype(complex)), per[b],
                             lower=lower, guess=guess) for b, (dh, uh) in enumerate(halves)]
        vals = np.concatenate([r[0] for r in res])
        src = np.concatenate([np.full(r[0].size, b) for b, r in enumerate(res)])
        idx = np.concatenate([np.arange(r[0].size) for r in res])
        order = np.argsort(vals, kind="stable")[:n_states]
        again = False
        for b, r in enumerate(res):
            taken = int(np.sum(src[order] == b))
            size = halves[b][0].shape[0] * halves[b][0].shape[1]
            if taken == r[0].size and r[0].size < min(n_states, size):   # it may hold more below
                per[b] = min(n_states, size)
                again = True
        if not again:
            return vals[order], src[order], idx[order], res


def lowest_states(h, w, mat: KpMaterial, phi_node, kx: float, ky: float, nb: int,
                  n_states: int, *, axial: bool = False, guess=None):
    """Hole states of a quantum region at the in-plane wave vector (kx, ky) nm^-1.

    ``h`` (n-1,) cell widths and ``mat`` per cell, ``w`` (n,) dual widths and ``phi_node``
    (n,) the potential (V) on the region's nodes, psi = 0 at its two end nodes.  Returns
    (energy (k,) eV on the electron scale, highest first, i.e. lowest hole energy first;
    psi (n, nb, k) complex in nm^-1/2 with sum_i w_i sum_b |psi_ib|^2 = 1).  ``guess``: the
    energies (electron scale) of a nearby k_par, to start the bisection from (lowest_banded)."""
    d, u = _interior_hole_blocks(h, w, mat, phi_node, kx, ky, nb, axial)
    # a guess of a bound below the hole spectrum: the lowest hole edge less a margin for the
    # strain shifts (checked by a Sturm count in lowest_banded)
    edge = -np.asarray(mat.ev, float) + 0.5 * (np.asarray(phi_node)[1:] + np.asarray(phi_node)[:-1])
    lower = float(np.min(edge)) - 0.3
    probes = None if guess is None else -np.asarray(guess, float)
    vals = None
    if kx == 0.0 and ky == 0.0:
        got = zone_centre(d, u, nb, n_states, lower=lower)
        if got is not None:
            vals, vecs = got
    if vals is None:
        norm = np.hypot(kx, ky)
        sp = split_transform(nb, kx / norm, ky / norm, axial) if norm > 0 else None
        halves = None if sp is None else split_blocks(d, u, *sp)
        if halves is None:
            vals, vecs = lowest_banded(band_matrix(d, u), n_states, lower=lower, guess=probes)
        else:
            vals, src, idx, res = _split_lowest(halves, n_states, lower, probes)
            T = sp[0]
            half = nb // 2
            m = d.shape[0]
            vecs = np.zeros((m, nb, vals.size), dtype=complex)
            for b in (0, 1):
                sel = np.flatnonzero(src == b)
                if sel.size:
                    vb = res[b][1][:, idx[sel]].reshape(m, half, sel.size)
                    vecs[:, :, sel] = np.einsum("ij,mjk->mik", T[:, b * half:(b + 1) * half], vb)
            vecs = vecs.reshape(m * nb, vals.size)
    n = np.asarray(w).size
    psi = np.zeros((n, nb, vals.size), dtype=complex)
    s = 1.0 / np.sqrt(np.asarray(w, float)[1:-1])
    psi[1:-1] = vecs.reshape(n - 2, nb, vals.size) * s[:, None, None]
    return -vals, psi



# --------------------------------------------------------------------------- reduced basis

#: zone-centre levels per decoupled group (heavy; light with split-off) of each half taken
#: into the reduced basis: this many, and at least the number of states wanted
BASIS_LEVELS = 8
#: the shift of the basis' resolvent below the lowest zone-centre hole level, eV
BASIS_SHIFT = 0.05
#: accepted estimate of a reduced-basis energy's error, eV (the k_par points above it are
#: solved whole); the estimate is r^T (B_0 - sigma)^-1 r of the state's residual r
BASIS_TOL = 5e-5
#: a kept basis is reused while the potential is within this of the one it was built at, V
#: (every state it gives is still checked against BASIS_TOL, and a failing basis is built
#: anew: this only decides when to try).  On the kp6 2dhg_4K solve the potential moves 17,
#: 2.0, 1.4, then < 0.5 mV per iteration; at 5 mV the bases of the 2.0 and 1.4 mV steps pass
#: the check (4 builds instead of 6, p_s within 4e-8); at 20 mV the 17 mV step passes too
#: but p_s moves 3e-6, so the reuse stays below that
BASIS_REUSE = 5e-3
#: the k_par-independent operators of this many (mesh, material, direction) are kept
LINE_CACHE_SIZE = 8
#: the two halves run on the solve's threads from this many region nodes on, one after the
#: other below: a half's share of a line is ~1 ms at 430 nodes, where the pool's hand-over
#: and the two threads' contention cost more than they save (kp6 2dhg_4K, 430 nodes, on the
#: shared 2-core machine: 2 threads wall +8 %, CPU +8 %; 1700 nodes wall -10 %, CPU +2..+7 %;
#: 3400 nodes wall -11 %, CPU +8 %)
HALF_THREADS_NODES = 1000
_LINE_CACHE: dict = {}


_BAND_CACHE: dict = {}


def _light_band(dz, uz, phin):
    """band_matrix of the light and split-off group (components 1..) of dz + phi, the zone-
    centre blocks of a half with the potential on their diagonal: the band of (dz, uz) kept
    per operator (the last LINE_CACHE_SIZE) and its diagonal row shifted, dz_aa + phi as the
    blocks' own sums (the same bits)."""
    key = ("light", id(dz))
    hit = _BAND_CACHE.get(key)
    if hit is None or hit[0] is not dz or hit[1] is not uz:
        if len(_BAND_CACHE) >= 2 * LINE_CACHE_SIZE:
            _BAND_CACHE.pop(next(iter(_BAND_CACHE)))
        hit = (dz, uz, np.ascontiguousarray(band_matrix(dz[:, 1:, 1:], uz[:, 1:, 1:])))
        _BAND_CACHE[key] = hit
    ab = hit[2].copy()
    ab[-1] += np.repeat(np.asarray(phin, float), dz.shape[1] - 1)
    return ab


def _shifted_cholesky(dz, uz, phin, sigma):
    """The banded Cholesky factor (LAPACK dpbtrf, lower band storage) of dz + phi - sigma
    (the block-tridiagonal (dz, uz) with phi on its diagonal, less sigma), as
    scipy.linalg.cholesky_banded(_band_lower(dz + phi I - sigma I, uz)) gives it, the same
    bits: the band of (dz, uz) is kept per operator (the last LINE_CACHE_SIZE) and only its
    diagonal row is shifted, (dz_aa + phi) - sigma as the blocks' own sums."""
    from scipy.linalg import lapack
    hit = _BAND_CACHE.get(id(dz))
    if hit is None or hit[0] is not dz or hit[1] is not uz:
        if len(_BAND_CACHE) >= 2 * LINE_CACHE_SIZE:
            _BAND_CACHE.pop(next(iter(_BAND_CACHE)))
        hit = (dz, uz, _band_lower(dz, uz))
        _BAND_CACHE[id(dz)] = hit
    ab = hit[2].copy()
    ab[0] = (ab[0] + np.repeat(phin, dz.shape[1])) - sigma
    c, info = lapack.dpbtrf(ab, lower=1, overwrite_ab=1)
    if info > 0:
        raise np.linalg.LinAlgError(f"{info}-th leading minor not positive definite")
    if info < 0:
        raise ValueError(f"illegal value in {-info}-th argument of dpbtrf")
    return c


def _band_lower(d, u):
    """Lower band storage (scipy.linalg.cholesky_banded) of the real symmetric
    block-tridiagonal matrix with blocks ``d`` (m, q, q), ``u`` (m-1, q, q)."""
    m, q = d.shape[0], d.shape[1]
    ab = np.zeros((2 * q, m * q))
    for a in range(q):
        for b in range(a + 1):
            ab[a - b, b::q] = d[:, a, b]
    for a in range(q):
        for b in range(q):
            ab[q + a - b, b:(m - 1) * q:q] = u[:, b, a]
    return ab


def _apply(d, u, x):
    """The real symmetric block-tridiagonal (d, u) times x (m, q, r) (kernels/kp.py)."""
    from selfcon.solver.kernels.kp import block_apply
    return block_apply(np.ascontiguousarray(d, dtype=float), np.ascontiguousarray(u, dtype=float),
                       np.ascontiguousarray(x, dtype=float))


def _line_operators(h, w, mat, nb, cx, sy, axial):
    """The real halves of the hole operator along the in-plane direction (cx, sy), split as
    H(k) = Z + phi + k B1 + k^2 B2 (Z at k = 0 and phi = 0; the potential only adds phi to
    the diagonal): (T, [(Z, B1, B2) per half, each a (d, u) pair]), or None where the
    model does not split into real halves.  Kept for the last LINE_CACHE_SIZE meshes and
    materials (the loop asks for the same ones every iteration)."""
    sp = split_transform(nb, cx, sy, axial)
    if sp is None or not sp[1]:
        return None
    key = (nb, cx, sy, axial, np.asarray(h, float).tobytes(), np.asarray(w, float).tobytes(),
           b"".join(np.asarray(a, float).tobytes() for a in mat))
    hit = _LINE_CACHE.get(key)
    if hit is not None:
        return hit
    zero = np.zeros(np.asarray(w).size)
    parts = []
    for kk in (0.0, 1.0, -1.0):
        d, u = _interior_hole_blocks(h, w, mat, zero, kk * cx, kk * sy, nb, axial)
        got = split_blocks(d, u, sp[0], True)
        if got is None:
            return None
        parts.append(got)
    halves = []
    for (dz, uz), (dp, up), (dm, um) in zip(*parts):
        halves.append(((dz, uz), (0.5 * (dp - dm), 0.5 * (up - um)),
                       (0.5 * (dp + dm) - dz, 0.5 * (up + um) - uz)))
    out = (sp[0], halves)
    if len(_LINE_CACHE) >= LINE_CACHE_SIZE:
        _LINE_CACHE.pop(next(iter(_LINE_CACHE)))
    _LINE_CACHE[key] = out
    return out


def reduced_dispersion(h, w, mat: KpMaterial, phi_node, nb: int, n_states: int, k_grid, *,
                       angle: float | None = None, cache: dict | None = None, threads: int = 1,
                       zone: dict | None = None, energies: bool = False, links: bool = False):
    """:func:`dispersion` from a reduced basis, or None where the model does not split into
    real halves (then use :func:`dispersion`): the axial approximation (``angle`` None), or
    the warped Hamiltonian along [100] and [110].

    Along such a line the matrix is two real halves (:func:`split_transform`), each
    H(k) = B0 + k B1 + k^2 B2 with B1, B2 fixed.  Each half is expanded in a basis made of
    (a) its zone-centre states, BASIS_LEVELS levels (at least ``n_states``) of each group
    that decouples at k = 0 (heavy; light with split-off; the two halves are the same
    matrix there, Kramers partners), and (b) the first and second order corrections of
    perturbation theory with the resolvent taken at a shift sigma below the spectrum,
    (B0 - sigma)^-1 B1 V, (B0 - sigma)^-1 B2 V and (B0 - sigma)^-1 B1 (B0 - sigma)^-1 B1 V
    (they carry the kinks the k-linear terms put at the interfaces, which zone-centre
    states alone converge to only slowly), orthonormalised.  B0, B1, B2 are projected
    once; every k is then a small dense symmetric eigenproblem.  Each state's residual
    r = H(k) psi - E psi is checked: r^T (B0 - sigma)^-1 r estimates the error of its energy
    (second order in r; r is orthogonal to the basis, which holds the low states), and
    every k where one exceeds BASIS_TOL is solved whole (:func:`lowest_states`), so the
    result is never the basis' alone when it is poor.  k = 0 is solved in the same basis,
    which holds the zone-centre states (exact to rounding in a basis built at this
    potential).  ``cache``: a dict the caller keeps for one region during one solve (the
    loop's Workspace); the basis is kept there and reused at the next potential, and built
    anew when a reused basis fails the check (the potential moves little from one
    iteration to the next, so the basis of the last one usually still fits).  ``zone``: a
    dict that calls at one potential share, its zone-centre states solved once (the
    k_par = 0 operator is the same in every direction).  ``energies``: the energies alone
    (densities and zone-centre states None: the warped lines of a result; the states are
    still formed and checked).  ``threads``:
    the two halves side by side where the region has HALF_THREADS_NODES nodes or more (the
    same bits for any count).  Same return
    as :func:`dispersion` (the states at k = 0 are those of the halves: each Kramers pair as
    the halves' two states)."""
    from selfcon.solver.threads import one_blas_thread
    k_grid = np.asarray(k_grid, float)
    if k_grid.size < 2 or k_grid[0] != 0.0:
        return None
    axial = angle is None
    cx, sy = (1.0, 0.0) if axial else (float(np.cos(angle)), float(np.sin(angle)))
    ops = _line_operators(h, w, mat, nb, cx, sy, axial)
    if ops is None:
        return None
    if np.asarray(w).size < HALF_THREADS_NODES:
        threads = 1
    with one_blas_thread():
        return _reduced_dispersion(h, w, mat, phi_node, nb, n_states, k_grid, cx, sy, axial, ops,
                                   cache, threads, zone, energies, links)


def _zone_centre_half(d0, u0, levels, light=None):
    """Zone-centre states of one real half (component 0 heavy holes alone, the others
    together): (values, vectors (m, q, n)) or None if they are not decoupled.  ``light``:
    the band of the others (:func:`_light_band`), made here if None."""
    from selfcon.solver.kernels.eigen import lowest_eigenpairs
    m, q = d0.shape[0], d0.shape[1]
    ev = np.empty(min(levels, m))
    zv = np.empty((ev.size, m))
    lowest_eigenpairs(np.ascontiguousarray(d0[:, 0, 0]), np.ascontiguousarray(u0[:, 0, 0]), ev.size, ev, zv)
    x = np.zeros((m, q, ev.size))
    x[:, 0, :] = zv.T
    if q == 1:
        return ev, x
    if max(np.abs(d0[:, 0, 1:]).max(), np.abs(u0[:, 0, 1:]).max(), np.abs(u0[:, 1:, 0]).max()) \
            > SPLIT_TOL * np.abs(d0).max():
        return None
    # a bound below the light and split-off holes for the bisection: the first heavy hole less
    # 0.5 eV (strain moves them apart by far less; checked by a Sturm count in lowest_banded)
    if light is None:
        light = band_matrix(d0[:, 1:, 1:], u0[:, 1:, 1:])
    el, vl = lowest_banded(light, min(levels, m * (q - 1)),
                           lower=float(ev[0]) - 0.5)
    flat = vl.reshape(-1, el.size)
    ph = flat[np.argmax(np.abs(flat), axis=0), np.arange(el.size)]       # real vectors up to a phase
    y = np.zeros((m, q, el.size))
    y[:, 1:, :] = (vl.reshape(m, q - 1, el.size) * (np.abs(ph) / ph)[None, None, :]).real
    return np.concatenate([ev, el]), np.concatenate([x, y], axis=2)


def _reduced_dispersion(h, w, mat, phi_node, nb, n_states, k_grid, cx, sy, axial, ops, cache,
                        threads, zone=None, energies=False, links=False):
    key = ("basis", nb, cx, sy, axial, n_states)
    kept = cache.get(key) if cache is not None else None
    phi_node = np.asarray(phi_node, float)
    fresh = kept is None or np.max(np.abs(phi_node - kept[0])) > BASIS_REUSE
    if fresh:
        basis = _build_basis(ops, phi_node, n_states, threads, zone)
        if basis is None:
            return None
    else:
        basis = kept[1]
    out = _in_basis(basis, ops, w, phi_node, nb, n_states, k_grid, threads, energies, links)
    if not fresh and out[3].any():           # the kept basis no longer fits: build it anew
        basis = _build_basis(ops, phi_node, n_states, threads, zone)
        if basis is None:
            return None
        out = _in_basis(basis, ops, w, phi_node, nb, n_states, k_grid, threads, energies, links)
    if cache is not None and (fresh or kept[1] is not basis):
        cache[key] = (phi_node.copy(), basis)
    out_E, out_d, psi0, bad = out[:4]
    for j in np.flatnonzero(bad):
        e, ps = lowest_states(h, w, mat, phi_node, k_grid[j] * cx, k_grid[j] * sy, nb, n_states,
                              axial=axial, guess=out_E[:, j])
        out_E[:, j] = np.nan
        out_E[:e.size, j] = e
        if energies:
            continue
        out_d[:, :, j] = 0.0
        out_d[:, :e.size, j] = np.sum(np.abs(ps) ** 2, axis=1)
        if j == 0:
            psi0 = ps
    if links:
        ln = out[4]
        eye = np.eye(n_states)
        for j in np.flatnonzero(bad):            # a whole solve's states: linked by their ranks
            ln[max(j - 1, 0):j + 1] = eye
        return out_E, out_d, psi0, ln
    return out_E, out_d, psi0


def _build_basis(ops, phi_node, n_states, threads=1, zone=None):
    """The reduced basis of each half at the potential ``phi_node`` (reduced_dispersion):
    [(q (m q, K) orthonormal, q^T (Z + phi) q, q^T B1 q, q^T B2 q, phi at the interior
    nodes)], or None.  ``zone``: a dict
    the zone-centre states are kept in with their potential, and taken from at the same
    potential (the k_par = 0 operator of every half is the same matrix, in every direction
    to rounding: the [100] and [110] lines of a result share one solve)."""
    import scipy.linalg as sla
    from selfcon.solver.kernels import kp as kern
    _, halves = ops
    (dz, uz), _, _ = halves[0]
    m, half = dz.shape[0], dz.shape[1]
    phin = np.asarray(phi_node, float)[1:-1]
    eye = np.eye(half)
    levels = max(BASIS_LEVELS, n_states)
    kept = None if zone is None else zone.get((half, levels))
    if kept is not None and np.array_equal(kept[0], phi_node):
        zc = kept[1]
    else:
        zc = _zone_centre_half(dz + phin[:, None, None] * eye, uz, levels,
                               light=_light_band(dz, uz, phin))
        if zc is None:                                  # (the same in both halves)
            return None
        if zone is not None:
            zone[(half, levels)] = (np.array(phi_node, float), zc)
    e_zc, V = zc
    sigma = float(e_zc.min()) - BASIS_SHIFT

    def build(b):
        (dz, uz), (d1, u1), (d2, u2) = halves[b]
        d0 = dz + phin[:, None, None] * eye
        chol = _shifted_cholesky(dz, uz, phin, sigma)

        def resolve(y):
            return kern.cholesky_solve(chol, y.reshape(m * half, -1)).reshape(m, half, -1)
        y1 = resolve(_apply(d1, u1, V))
        y2 = resolve(_apply(d2, u2, V))
        y3 = resolve(_apply(d1, u1, y1))
        q = _orthonormal_columns(np.concatenate([V, y1, y2, y3], axis=2).reshape(m * half, -1))
        K = q.shape[1]
        qv = q.reshape(m, half, K)
        # Z + phi at the build's potential, B1 and B2 applied into one array and projected
        # by one matrix product (about 0.6 of three products' time, the same bits)
        ops3 = ((d0, uz), (d1, u1), (d2, u2))
        y = np.empty((m, half, 3 * K))
        for s, (dd, uu) in enumerate(ops3):
            kern.block_apply_into(np.ascontiguousarray(dd, dtype=float),
                                  np.ascontiguousarray(uu, dtype=float), qv, y, s * K)
        x = q.T @ y.reshape(m * half, 3 * K)
        P = [0.5 * (x[:, s * K:(s + 1) * K] + x[:, s * K:(s + 1) * K].T) for s in range(3)]
        return (q, *P, phin)
    return _per_half(build, threads)


#: Cholesky QR is used while the columns' conditioning (the ratio of the extreme diagonal
#: entries of the first factor) stays above this; Householder QR below it
CHOLQR_RATIO = 1e-6


def _orthonormal_columns(X):
    """An orthonormal basis (n, K) of the columns of ``X`` (n, K0): Cholesky QR twice (the
    Gram matrix X^T X, its Cholesky factor R, X R^-1, and once more on the result; Fukaya et
    al., "CholeskyQR2", ScalA 2014: orthonormal to rounding where X is conditioned better
    than 1/sqrt(eps)), half the time of Householder QR on the reduced basis' tall blocks;
    Householder QR (numpy.linalg.qr, dropping the columns whose diagonal entry is below
    1e-10 of the largest: linearly dependent corrections) where the first factor shows
    poorer conditioning than CHOLQR_RATIO or the factorisation fails."""
    from scipy.linalg import blas, lapack
    Q = np.ascontiguousarray(X)
    for rnd in range(2):
        G = blas.dsyrk(1.0, Q.T)                  # the upper triangle of Q^T Q
        R, info = lapack.dpotrf(G, lower=0, clean=1)
        d = np.abs(np.diag(R))
        if info != 0 or not np.all(np.isfinite(d)) or (rnd == 0 and d.min() < CHOLQR_RATIO * d.max()):
            break
        # Q R^-1 as a product with the triangular inverse (K^3/3, small): the tall product
        # takes about half the time of the triangular solve on the C-ordered block, which
        # LAPACK's wrapper copied to Fortran order and back
        Rinv, info = lapack.dtrtri(R, lower=0)
        if info != 0:
            break
        Q = Q @ Rinv
    else:
        return Q
    q, r = np.linalg.qr(X)
    diag = np.abs(np.diag(r))
    return np.ascontiguousarray(q[:, diag > 1e-10 * diag.max()])


def _times_real(T, x):
    """The complex (p, q) matrix T times the real (m, q, r) stack x: (m, p, r) complex, as
    its real and imaginary parts (two real products instead of one complex one)."""
    x = np.ascontiguousarray(x)
    return np.matmul(T.real, x) + 1j * np.matmul(T.imag, x)


def _per_half(fn, threads):
    """[fn(0), fn(1)] for the two halves, on up to ``threads`` threads (selfcon.solver.threads;
    each on one BLAS thread): the same code whatever thread runs a half, so the same bits."""
    from selfcon.solver.threads import one_blas_thread, run_all

    def task(b):
        with one_blas_thread():
            return fn(b)
    return run_all(task, [0, 1], threads)


#: Ritz pairs of each half found per k_par: half the states asked for and this many more
#: (each Kramers pair has one state in each half; the spin splitting moves the lowest n of
#: the two halves apart by one or two), all of them where a half needs every one found
RITZ_MARGIN = 2
_SYTRD_WORK: dict = {}


def _sytrd_work(K):
    """LAPACK dsytrd's optimal work size for order K (asked once per K)."""
    if K not in _SYTRD_WORK:
        from scipy.linalg import lapack
        _SYTRD_WORK[K] = max(1, int(lapack.dsytrd_lwork(K, lower=1)[0]))
    return _SYTRD_WORK[K]


def _in_basis(basis, ops, w, phi_node, nb, n_states, k_grid, threads=1, energies=False,
              links=False):
    """The states of every k of ``k_grid`` in ``basis`` (:func:`_build_basis`): (E (n, m), dens
    (N, n, m), psi0 (N, nb, n), bad (m,) where an error estimate exceeds BASIS_TOL), as
    :func:`reduced_dispersion` returns them before the whole solves.  The eigenvalues of both
    halves decide which states are among the lowest n at some k; only those are formed and
    checked (about half of each half's).  ``energies``: dens and psi0 None (not formed).
    ``links``: a fifth item, :func:`_rank_links` of the states."""
    import scipy.linalg as sla
    from scipy.linalg import blas
    from selfcon.solver.kernels import kp as kern
    sytrd = sla.get_lapack_funcs("sytrd", dtype=float)
    T, halves = ops
    half = nb // 2
    m = halves[0][0][0].shape[0]
    n_nodes = m + 2
    nk = k_grid.size
    s2 = 1.0 / np.asarray(w, float)[1:-1]
    phin = np.asarray(phi_node, float)[1:-1]

    def ritz_of(b, want=None):
        q, Pb, P1, P2, phib = basis[b]
        K = q.shape[1]
        if np.array_equal(phin, phib):                     # at the build's potential
            P0 = Pb
        else:                                              # Pb + q^T (phi - phi_build) q
            # = q^T diag(dphi - c) q + c I with c the least change (q^T q = I to rounding:
            # an error of c * 1e-15 eV): a weight >= 0, so one symmetric rank-K update of
            # sqrt(weight) q (dsyrk, half the product's work) gives it
            dphi = phin - phib
            c = float(dphi.min())
            x = blas.dsyrk(1.0, (q * np.repeat(np.sqrt(dphi - c), half)[:, None]).T)
            P0 = Pb + (np.triu(x) + np.triu(x, 1).T)
            P0[np.diag_indices(K)] += c
        want = min(n_states // 2 + RITZ_MARGIN if want is None else want, n_states, K)
        th = np.empty((nk, want))
        cs = np.empty((nk, K, want))
        if K < 2:
            for j in range(nk):
                th[j], cs[j] = np.linalg.eigh(P0 + k_grid[j] * P1 + k_grid[j] ** 2 * P2)
            return th, cs
        # every k: LAPACK's reduction to tridiagonal form, then the lowest pairs and their
        # back-transformation in one kernel call (kernels/kp.py::tridiagonal_lowest)
        dd, ee, tau = np.empty((nk, K)), np.empty((nk, K - 1)), np.empty((nk, K - 1))
        refl = np.empty((nk, K, K))                   # P0 + k P1 + k^2 P2, each symmetric
        kern.line_matrices(P0, P1, P2, k_grid, refl)
        lwork = _sytrd_work(K)
        for j in range(nk):
            # refl[j].T is Fortran-ordered: dsytrd overwrites it in place with the reflectors,
            # so refl[j] then holds its output transposed, as tridiagonal_lowest takes it
            c, dd[j], ee[j], tau[j], info = sytrd(refl[j].T, lower=1, lwork=lwork, overwrite_a=1)
            if info != 0:
                raise np.linalg.LinAlgError(f"dsytrd failed (info {info})")
            if not np.shares_memory(c, refl[j]):
                refl[j] = c.T
        kern.tridiagonal_lowest(dd, ee, refl, tau, want, th, cs)
        return th, cs
    ritz = _per_half(ritz_of, threads)
    while True:
        # the lowest n of both halves at each k (hole kinetic scale): how many of each half
        vals = np.concatenate([t for t, _ in ritz], axis=1)                 # (nk, w0 + w1)
        src = np.concatenate([np.full(t.shape[1], b) for b, (t, _) in enumerate(ritz)])
        order = np.argsort(vals, axis=1, kind="stable")[:, :n_states]
        need = [int(np.max(np.sum(src[order] == b, axis=1))) for b in range(2)]
        # a half all of whose states are among the lowest n somewhere may hold more below
        short = [b for b in range(2) if need[b] == ritz[b][0].shape[1]
                 and need[b] < min(n_states, basis[b][0].shape[1])]
        if not short:
            break
        for b in short:
            ritz[b] = ritz_of(b, n_states)
    if links:
        ritz = [_unmix_crossings(th, cs) for th, cs in ritz]
        vals = np.concatenate([t for t, _ in ritz], axis=1)
    sigma = float(vals[0].min()) - BASIS_SHIFT

    def states_of(b):
        q = basis[b][0]
        (dz, uz), (d1, u1), (d2, u2) = halves[b]
        th, cs = ritz[b]
        nb_ = need[b]
        # the states of every k in one product, (m, half, nk, need), and their residuals in
        # one kernel call (kernels/kp.py)
        coef = np.ascontiguousarray(np.transpose(cs[:, :, :nb_], (1, 0, 2))).reshape(q.shape[1], -1)
        psi = (q @ coef).reshape(m, half, nk, nb_)
        res = kern.line_residuals(dz, uz, d1, u1, d2, u2, phin, k_grid, psi,
                                  np.ascontiguousarray(th[:, :nb_]))
        chol = _shifted_cholesky(dz, uz, phin, sigma)
        est = kern.forward_norms(chol, res.reshape(m * half, -1)).reshape(nk, -1)   # |L^-1 r|^2
        if energies:
            return np.any(est > BASIS_TOL, axis=1), -th[:, :nb_].T
        return (np.any(est > BASIS_TOL, axis=1), -th[:, :nb_].T,
                np.einsum("iajw,iajw->iwj", psi, psi) * s2[:, None, None],
                _times_real(T[:, b * half:(b + 1) * half], psi[:, :, 0, :]))
    parts = _per_half(states_of, threads)
    bad = parts[0][0] | parts[1][0]
    E = np.concatenate([x[1] for x in parts])
    order = np.argsort(-E, axis=0, kind="stable")[:n_states]      # lowest hole energy first
    got = order.shape[0]
    out_E = np.full((n_states, nk), np.nan)
    out_E[:got] = np.take_along_axis(E, order, 0)
    if energies:
        return out_E, None, None, bad
    dens = np.concatenate([x[2] for x in parts], axis=1)
    zero = [x[3] for x in parts]
    out_d = np.zeros((n_nodes, n_states, nk))
    # each k_par's chosen states by one gather of (state, k) columns (flat indices)
    flat = order * nk + np.arange(nk)[None, :]
    out_d[1:-1, :got] = dens.reshape(m, -1)[:, flat]
    psi0 = np.zeros((n_nodes, nb, got), dtype=complex)
    psi0[1:-1] = np.concatenate(zero, axis=2)[:, :, order[:, 0]] * np.sqrt(s2)[:, None, None]
    if links:
        return out_E, out_d, psi0, bad, _rank_links(ritz, [x[1].shape[0] for x in parts], order,
                                                    n_states)
    return out_E, out_d, psi0, bad


#: a pair of neighbouring states of one half whose gap at a k_par is below UNMIX_FULL of
#: their separation at the neighbouring k_par is taken apart into its unmixed states
#: (:func:`_unmix_crossings`); above UNMIX_NONE of it they stay the eigenstates; between, a
#: smooth part of the rotation
UNMIX_FULL = 0.1
UNMIX_NONE = 0.3


def _unmix_crossings(th, cs):
    """Ritz pairs (th (nk, w) ascending, cs (nk, K, w)) of one half with the states of a
    crossing that the k_par grid does not resolve taken apart.

    Two states of two wells coupled only by tunnelling cross as k_par varies; at a grid
    point near the crossing the eigenstates are mixtures of the two, and their mixing turns
    over within a change of the potential of the size of the (tiny) gap: the densities
    the k_par integral weights with jumped between the wells for a change of 1e-5 V.  At such
    a point (the gap of a neighbouring pair below UNMIX_FULL of the pair's separation at the
    neighbouring k_par: the grid does not resolve the anticrossing) the pair is rotated to
    the states that overlap the neighbouring k_par's states most purely (the rotation that
    maximises the sum of the fourth powers of the overlaps, in closed form), with the mean
    energies <psi|H|psi> of the rotated states; the rotation is scaled down smoothly to none
    at UNMIX_NONE.  Where no pair qualifies the pairs are returned as they are."""
    nk, w = th.shape
    if nk < 2 or w < 2:
        return th, cs
    gap = np.diff(th, axis=1)                                   # (nk, w - 1)
    near = np.full_like(gap, np.inf)
    near[1:] = np.minimum(near[1:], gap[:-1])
    near[:-1] = np.minimum(near[:-1], gap[1:])
    with np.errstate(divide="ignore", invalid="ignore"):
        rho = np.where(near > 0, gap / near, np.inf)
    part = np.clip((UNMIX_NONE - rho) / (UNMIX_NONE - UNMIX_FULL), 0.0, 1.0)
    part = part * part * (3.0 - 2.0 * part)                      # smooth step
    if not np.any(part > 0):
        return th, cs
    th, cs = th.copy(), cs.copy()
    for j, p in zip(*np.nonzero(part > 0)):
        nbr = np.concatenate([cs[jn] for jn in (j - 1, j + 1) if 0 <= jn < nk], axis=1)
        a = cs[j][:, p] @ nbr
        b = cs[j][:, p + 1] @ nbr
        u, v = a * a - b * b, 2.0 * a * b
        A, B, C = float(v @ v), float(u @ u), float(u @ v)
        theta = 0.25 * (np.arctan2(-C, 0.5 * (A - B)) + np.pi)
        theta = (theta + 0.25 * np.pi) % (0.5 * np.pi) - 0.25 * np.pi     # the least rotation
        theta *= part[j, p]
        c, s = np.cos(theta), np.sin(theta)
        x, y = cs[j][:, p].copy(), cs[j][:, p + 1].copy()
        cs[j][:, p], cs[j][:, p + 1] = c * x + s * y, c * y - s * x
        e0, e1 = th[j, p], th[j, p + 1]
        th[j, p], th[j, p + 1] = c * c * e0 + s * s * e1, s * s * e0 + c * c * e1
    return th, cs


def _rank_links(ritz, need, order, n_states):
    """(m - 1, n, n): |<i at k_j | l at k_j+1>|^2 of the states of energy ranks i and l at
    neighbouring k_par (``order``: the rank's row of the halves' states stacked, need[b] of
    half b).  The halves are orthogonal (0 across them); within a half the Ritz vectors of
    every k_par share one orthonormal basis, so the overlap is that of their coefficients."""
    nk = order.shape[1]
    got = order.shape[0]
    G = int(sum(need))
    ov = np.zeros((nk - 1, G, G))
    start = 0
    for b in range(2):
        cs = ritz[b][1][:, :, :need[b]]
        sl = slice(start, start + need[b])
        ov[:, sl, sl] = np.einsum("jkw,jkv->jwv", cs[:-1], cs[1:]) ** 2
        start += need[b]
    out = np.zeros((nk - 1, n_states, n_states))
    for j in range(nk - 1):
        out[j, :got, :got] = ov[j][np.ix_(order[:, j], order[:, j + 1])]
    return out


# --------------------------------------------------------------------------- regions and the loop

#: k_par points of the dispersion the hole density integrates (axial approximation)
K_POINTS = 16
#: eigenstates asked of a region at first (Kramers pairs count twice); grown while the top
#: state still holds charge, as the single-band states (selfcon.solver.steps)
FIRST_STATES = 8
#: the k grid reaches until every state's occupation at its end is below this
TAIL_OCCUPATION = 1e-7
#: the grid spans the Fermi sea plus this many kT (and at least MIN_WINDOW eV)
WINDOW_KT = 16.0
MIN_WINDOW = 0.01
#: annuli flatter than this (eV) are given this energy width (their DOS stays finite)
FLAT = 1e-9


class KpStates(NamedTuple):
    """The multiband hole states of the quantum regions at one potential.

    The charge: the k_par integral as pseudo-states the Poisson kernel sums like subbands
    (``energy``, ``dos``, ``weight``: see :func:`annulus_states`; :func:`collect_states` sums
    the two terms at each grid energy into one), ``quantum_nodes``.  The
    subbands: ``subband_energy`` (n,) at k_par = 0 (electron scale, lowest hole energy
    first), ``k_parallel`` (m,) nm^-1 per region, ``dispersion`` (n, m) eV (axial),
    ``psi0`` (N, nb, n) complex at k_par = 0, ``sheet`` (n,) nm^-2 held by each,
    ``subband_region`` (n,)."""

    band: str
    model: str
    energy: np.ndarray
    dos: np.ndarray
    weight: np.ndarray
    region: np.ndarray
    sign: int
    quantum_nodes: np.ndarray
    subband_energy: np.ndarray
    subband_region: np.ndarray
    k_parallel: np.ndarray
    dispersion: np.ndarray
    psi0: np.ndarray
    sheet: np.ndarray


def region_material(cell: dict, i0: int, i1: int) -> KpMaterial:
    """The per-cell Luttinger-Kohn parameters of the cells of nodes i0..i1 from a
    Structure's ``cell`` arrays (unstrained where the structure has no strain)."""
    sl = slice(i0, i1)
    zero = np.zeros(i1 - i0)

    def get(key):
        return np.asarray(cell[key][sl], float) if key in cell else zero
    return KpMaterial(get("gamma1"), get("gamma2"), get("gamma3"), get("delta_so"), get("vbo"),
                      get("av"), get("b_dp"), get("d_dp"), get("eps_xx"), get("eps_zz"))


def dispersion(h, w, mat: KpMaterial, phi_node, nb: int, n_states: int, k_grid, *,
               angle: float | None = None):
    """States of one region along a line of k_par: ``angle`` from [100] (radians), None for
    the axial approximation.  Returns (energies (n, m) electron scale, lowest hole energy
    first at each k; density |psi|^2 summed over the components (N_region, n, m);
    psi at the first k (N_region, nb, n))."""
    k_grid = np.asarray(k_grid, float)
    c, s = (1.0, 0.0) if angle is None else (np.cos(angle), np.sin(angle))
    n_nodes = np.asarray(w).size
    E = np.full((n_states, k_grid.size), np.nan)
    dens = np.zeros((n_nodes, n_states, k_grid.size))
    first = None
    for j, k in enumerate(k_grid):
        e, psi = lowest_states(h, w, mat, phi_node, k * c, k * s, nb, n_states, axial=angle is None,
                               guess=E[:, j - 1] if j else None)   # the previous k's levels
        got = e.size
        E[:got, j] = e
        dens[:, :got, j] = np.sum(np.abs(psi) ** 2, axis=1)
        if j == 0:
            first = psi
    return E, dens, first


def annulus_states(k_grid, E, dens):
    """The k_par integral of the hole density as pseudo-subbands (the stated quadrature).

    Between neighbouring grid points each state's energy is taken linear in k^2 (a
    parabola per annulus), so its 2D density of states there is constant,
    D = (k_b^2 - k_a^2) / (4 pi (eps_b - eps_a)) per state (spin is in the basis), and
    the holes of the annulus are exactly D kT [ln(1 + e^((E_a - EF)/kT)) - ln(1 + e^((E_b -
    EF)/kT))] (electron-scale energies E, holes fill from the top).  That is two subband
    terms of the Poisson kernel, one at E_a with +D and one at E_b with -D, each with the
    annulus-mean |psi|^2 of the state as its weight; the predictor shifts both with the
    local potential, so the predictor-corrector's density response is the same sum
    differentiated term by term.  A falling band (eps_b < eps_a) gives D < 0 and the same
    formula.  Returns (energy (K,), dos (K,) nm^-2 eV^-1, weight (N, K), state (K,))."""
    k2 = np.asarray(k_grid, float) ** 2
    n, m = E.shape
    ea, eb = E[:, :-1], E[:, 1:]
    de = ea - eb                                   # eps_b - eps_a (hole energies)
    de = np.where(np.abs(de) < FLAT, np.where(de >= 0, FLAT, -FLAT), de)
    D = np.diff(k2)[None, :] / (4.0 * np.pi) / de
    wbar = 0.5 * (dens[:, :, :-1] + dens[:, :, 1:])
    N = dens.shape[0]
    energy = np.concatenate([ea.ravel(), (ea - de).ravel()])
    dos = np.concatenate([D.ravel(), -D.ravel()])
    weight = np.concatenate([wbar.reshape(N, -1), wbar.reshape(N, -1)], axis=1)
    state = np.concatenate([np.repeat(np.arange(n), m - 1)] * 2)
    ok = np.isfinite(energy) & np.isfinite(dos)
    if ok.all():                                   # (no copies where every term is finite)
        return energy, dos, weight, state
    return energy[ok], dos[ok], weight[:, ok], state[ok]


def annulus_sheets(energy, dos, state, n, efp, kT):
    """Sheet density (nm^-2) of each of ``n`` states from its pseudo-subbands."""
    x = (np.asarray(energy) - efp) / kT
    lg = np.logaddexp(0.0, x)
    out = np.zeros(n)
    np.add.at(out, state, dos * kT * lg)
    return out


def grid_top(mat: KpMaterial, window: float) -> float:
    """k_par (nm^-1) where a hole of the heaviest in-plane mass of the region, estimated as
    1/(g1 - 2 gbar) with gbar = (g2 + g3)/2 and at most 2 m0, has ``window`` eV."""
    gbar = 0.5 * (np.asarray(mat.g2) + np.asarray(mat.g3))
    inv = np.asarray(mat.g1) - 2.0 * gbar
    m_heavy = float(np.max(1.0 / np.clip(inv, 0.5, None)))
    return float(np.sqrt(window * m_heavy / HBAR2_2M0))


def fermi_sea_top(h, w, mat, phi_node, nb, efp, kT) -> float:
    """The k_par (nm^-1) a grid must reach in one region: the Fermi sea above the first
    state at k_par = 0 plus WINDOW_KT kT (at least MIN_WINDOW), at the heavy mass of
    :func:`grid_top`."""
    top = _zone_centre_top(h, w, mat, phi_node, nb)
    if top is None:
        e0, _ = lowest_states(h, w, mat, phi_node, 0.0, 0.0, nb, 2)
        top = float(e0[0]) if e0.size else None
    depth = max(0.0, top - efp) if top is not None else 0.0
    return grid_top(mat, max(depth + WINDOW_KT * kT, MIN_WINDOW))


def _zone_centre_top(h, w, mat, phi_node, nb):
    """The first hole level at k_par = 0 (electron scale, eV) from the zone-centre groups of
    a real half (values only: the heavy holes' tridiagonal solve, and a Sturm-count bisection
    to 1e-9 eV of the light and split-off holes where one of them lies above it), or None."""
    from selfcon.solver.kernels import kp as kern
    from selfcon.solver.kernels.eigen import lowest_eigenpairs
    ops = _line_operators(h, w, mat, nb, 1.0, 0.0, True)
    if ops is None or np.asarray(w).size < 3:
        return None
    (dz, uz), _, _ = ops[1][0]
    q = dz.shape[1]
    d0 = dz + np.asarray(phi_node, float)[1:-1, None, None] * np.eye(q)
    ev, zv = np.empty(1), np.empty((1, d0.shape[0]))
    lowest_eigenpairs(np.ascontiguousarray(d0[:, 0, 0]), np.ascontiguousarray(uz[:, 0, 0]), 1, ev, zv)
    low = float(ev[0])
    if q > 1:
        if max(np.abs(d0[:, 0, 1:]).max(), np.abs(uz[:, 0, 1:]).max(), np.abs(uz[:, 1:, 0]).max()) \
                > SPLIT_TOL * np.abs(d0).max():
            return None
        ab = _light_band(dz, uz, np.asarray(phi_node, float)[1:-1])
        # a light or split-off level above the first heavy hole (one Sturm count says whether;
        # usually not, and then the heavy hole is the answer without a bisection)
        if kern.sturm_count(ab, low) > 0:
            lo, hi = _gershgorin(ab)
            centre, _ = kern.lowest_eigenvalues(ab, 1, lo, hi, 1e-9, np.empty(0))
            low = min(low, float(centre[0]))
    return -low


def region_dispersion(h, w, mat, phi_node, nb, n_states, efp, kT, k_top, cache=None, threads=1,
                      links=False):
    """The axial dispersion of one region on K_POINTS k_par values from 0 to ``k_top``,
    lengthened (x 1.5) until every state's hole occupation at the end is below
    TAIL_OCCUPATION.  Returns (k_grid, E, dens, psi0) as :func:`dispersion`, from
    :func:`reduced_dispersion` (``cache``: its kept basis; ``threads``: for its halves) where
    the model splits.  ``links``: a fifth item, the overlaps of the states at neighbouring
    k_par (m - 1, n, n) that :func:`linked_states` takes (the identity, linking by energy
    rank, where the whole solve gave the states: they carry no shared basis to overlap in)."""
    for _ in range(8):
        k_grid = np.linspace(0.0, k_top, K_POINTS)
        got = reduced_dispersion(h, w, mat, phi_node, nb, n_states, k_grid, cache=cache,
                                 threads=threads, links=links)
        if got is None:
            got = dispersion(h, w, mat, phi_node, nb, n_states, k_grid)
            if links:
                n = got[0].shape[0]
                got = got + (np.broadcast_to(np.eye(n), (k_grid.size - 1, n, n)).copy(),)
        E = got[0]
        last = E[:, -1]
        occ = 1.0 / (1.0 + np.exp(np.clip((efp - last[np.isfinite(last)]) / kT, -700, 700)))
        if occ.size == 0 or occ.max() < TAIL_OCCUPATION:
            break
        k_top *= 1.5
    return (k_grid,) + tuple(got)


#: the pairing of the states at neighbouring k_par in :func:`linked_states`: the overlaps
#: raised to this power, normalised per state (a higher power follows the dominant partner
#: more closely; the pairing stays a continuous function of the potential)
LINK_POWER = 4


def link_pairs(k_grid, E, links, efp, kT):
    """The pairs of :func:`linked_states`: (js, si, sl, coef, sheet): annulus, state at its
    start, state at its end, share x DOS (nm^-2 eV^-1) of every pair of non-zero share, and
    the sheet (nm^-2) by the state at the start."""
    k2 = np.asarray(k_grid, float) ** 2
    fin = np.isfinite(E)
    T = np.where(fin[:, :-1].T[:, :, None] & fin[:, 1:].T[:, None, :], links, 0.0) ** LINK_POWER
    rows = T.sum(axis=2, keepdims=True)
    T = np.divide(T, rows, out=np.zeros_like(T), where=rows > 0)
    js, si, sl = np.nonzero(T)
    ea, eb = E[si, js], E[sl, js + 1]
    de = ea - eb
    de = np.where(np.abs(de) < FLAT, np.where(de >= 0, FLAT, -FLAT), de)
    coef = T[js, si, sl] * (k2[js + 1] - k2[js]) / (4.0 * np.pi) / de
    x = np.logaddexp(0.0, (ea - efp) / kT) - np.logaddexp(0.0, (eb - efp) / kT)
    sheet = np.zeros(E.shape[0])
    np.add.at(sheet, si, kT * coef * x)
    return js, si, sl, coef, sheet


def linked_states(k_grid, E, dens, links, efp, kT, pairs=None):
    """The k_par integral of the hole density as pseudo-subbands at the grid energies, the
    states of neighbouring k_par paired by their overlap rather than by their energy rank.

    :func:`annulus_states` joins the i-th lowest state of k_a to the i-th lowest of k_b.
    Where two states of little overlap cross between them (a state of the channel and one
    of a second well, coupled only by tunnelling) that joins the states of two different
    wells, and when the crossing moves past a grid point as the potential changes, the
    annulus' weight |psi|^2 jumps from one well to the other: the hole density is not a
    continuous function of the potential and the self-consistent loop stalls.  Here the
    state i of k_a is joined to every state l of k_b with the share p_il = T_il^P / sum_l
    T_il^P of the overlaps T = ``links`` (:func:`region_dispersion`; P = LINK_POWER), each
    pair an annulus of :func:`annulus_states`' form (energy linear in k^2 from E_i(k_a) to
    E_l(k_b), the mean of the two |psi|^2 as weight): where the ranks keep their states
    (T the identity) it is :func:`annulus_states` exactly; at a crossing it follows each
    state; at a degeneracy the two pairings give the same energies.  The two terms at each
    grid energy are summed into one (as :func:`collect_states` does;
    kernels/kp.py::link_annuli).  ``pairs``: :func:`link_pairs` of them, if the caller has
    it.  Returns (energy (K,), dos (K,) ones, weight (N, K), sheet (n,) nm^-2 by the state
    at the start of each pair), K the finite grid energies in state-major order."""
    from selfcon.solver.kernels import kp as kern
    n, m = E.shape
    N = dens.shape[0]
    js, si, sl, coef, sheet = pairs if pairs is not None else link_pairs(k_grid, E, links, efp, kT)
    weight = np.zeros((N, n * m))
    kern.link_annuli(np.ascontiguousarray(dens, dtype=float), js, si, sl, coef, m, weight, 0, 0)
    ok = np.isfinite(E).ravel()
    if ok.all():
        return E.ravel(), np.ones(n * m), weight, sheet
    return E.ravel()[ok], np.ones(int(ok.sum())), weight[:, ok], sheet


def collect_states(n_nodes: int, model: str, regions, solved, efp: float, kT: float,
                   annuli=None, linked=None) -> KpStates:
    """One :class:`KpStates` from the regions' solves: ``regions`` [(r_idx, i0, i1)],
    ``solved`` [(k_grid, E, dens, psi0[, links])] on one k grid; ``annuli``: each region's
    :func:`annulus_states` of them where the caller has them already.  A region whose solve
    carries its links (not None) takes :func:`linked_states` instead (``linked``: their
    :func:`link_pairs` where the caller has them, None for the others)."""
    from selfcon.solver.kernels import kp as kern
    nb = MODELS[model]
    energy, dos, region, sub_e, sub_r, disp, psis, sheets = ([] for _ in range(8))
    qnodes = np.zeros(n_nodes, dtype=bool)
    k_grid = solved[0][0]
    if linked is None:
        linked = [link_pairs(sol[0], sol[1], sol[4], efp, kT)
                  if len(sol) > 4 and sol[4] is not None else None for sol in solved]
    if annuli is None:
        annuli = [annulus_states(*sol[:3]) if lk is None else None
                  for sol, lk in zip(solved, linked)]
    # the pseudo-subbands the Poisson kernel sums: where every annulus' end term lies at the
    # next grid energy (no flat annulus, every state at every k_par), the two terms at each
    # grid energy summed into one (kernels/kp.py::merge_annuli: the kernels sum weight * dos
    # * F(E - dphi), the same for both, so one term of weight w1 d1 + w2 d2 and dos 1 is the
    # same sum), about half the terms; else the annulus terms as they are (linked regions:
    # always summed, kernels/kp.py::link_annuli)
    merged, sizes = [], []
    for sol, an, lk in zip(solved, annuli, linked):
        E = sol[1]
        n, m = E.shape
        a = n * (m - 1)
        if lk is not None:
            merged.append(bool(np.all(np.isfinite(E))))
            sizes.append(int(np.isfinite(E).sum()))
            continue
        en = an[0]
        merged.append(m > 1 and en.size == 2 * a and np.array_equal(en[a:], E[:, 1:].ravel()))
        sizes.append(E.size if merged[-1] else en.size)
    weight = np.zeros((n_nodes, sum(sizes)))     # every region's block written once
    col = 0
    for (r_idx, i0, i1), sol, an, lk, mg, size in zip(regions, solved, annuli, linked, merged,
                                                      sizes):
        kg, E, dens, psi0 = sol[:4]
        qnodes[i0:i1 + 1] = True
        if lk is not None:
            if mg:                                   # straight into the columns
                kern.link_annuli(np.ascontiguousarray(dens, dtype=float), *lk[:4], E.shape[1],
                                 weight, i0, col)
                energy.append(E.ravel())
                dos.append(np.ones(size))
            else:
                en, d, wt, _ = linked_states(kg, E, dens, None, efp, kT, pairs=lk)
                weight[i0:i1 + 1, col:col + size] = wt
                energy.append(en)
                dos.append(d)
            sheets.append(lk[4])
        else:
            en, d, wt, state = an
            if mg:
                kern.merge_annuli(d, wt, E.shape[0], E.shape[1], weight, i0, col)
                energy.append(E.ravel())
                dos.append(np.ones(size))
            else:
                weight[i0:i1 + 1, col:col + size] = wt
                energy.append(en)
                dos.append(d)
            sheets.append(annulus_sheets(en, d, state, E.shape[0], efp, kT))
        col += size
        region.append(np.full(size, r_idx))
        sub_e.append(E[:, 0])
        sub_r.append(np.full(E.shape[0], r_idx))
        disp.append(E)
        p = np.zeros((n_nodes, nb, E.shape[0]), dtype=complex)
        p[i0:i1 + 1] = psi0
        psis.append(p)
    sub_e = np.concatenate(sub_e)
    order = np.argsort(-sub_e, kind="stable")          # lowest hole energy first
    return KpStates(band="hole_kp", model=model, energy=np.concatenate(energy),
                    dos=np.concatenate(dos), weight=weight,
                    region=np.concatenate(region), sign=-1, quantum_nodes=qnodes,
                    subband_energy=sub_e[order], subband_region=np.concatenate(sub_r)[order],
                    k_parallel=k_grid, dispersion=np.concatenate(disp)[order],
                    psi0=np.concatenate(psis, axis=2)[:, :, order],
                    sheet=np.concatenate(sheets)[order])


# --------------------------------------------------------------------------- subband figures

def _crossing(k2, eps, level):
    """(k^2 where eps(k^2), linear between grid points, first reaches ``level`` from below,
    index of that annulus); (NaN, -1) if it stays below or starts above."""
    if not np.isfinite(eps[0]) or eps[0] > level:
        return np.nan, -1
    for j in range(eps.size - 1):
        a, b = eps[j], eps[j + 1]
        if a <= level < b:
            return k2[j] + (level - a) / (b - a) * (k2[j + 1] - k2[j]), j
    return np.nan, -1


def subband_figures(k_grid, dispersion, efp: float) -> dict:
    """Per state of ``dispersion`` (n, m) (electron scale, states in the order of the rows):
    ``mass_band_edge`` and ``mass_fermi`` (m0: hbar^2 / (2 d eps / d k^2), the cyclotron and
    density-of-states mass hbar^2 k / (dE/dk) of the piecewise parabolic dispersion; hole
    energies eps = -E), ``k_fermi`` (nm^-1) and ``spin_splitting`` (eV) at EF of each Kramers
    pair (rows 2p, 2p+1), NaN where a state does not cross EF."""
    k2 = np.asarray(k_grid, float) ** 2
    eps = -np.asarray(dispersion, float)
    level = -efp
    n = eps.shape[0]
    slope0 = (eps[:, 1] - eps[:, 0]) / (k2[1] - k2[0])
    with np.errstate(divide="ignore", invalid="ignore"):
        m_edge = HBAR2_2M0 / slope0
    m_f = np.full(n, np.nan)
    k_f = np.full(n, np.nan)
    for i in range(n):
        kk, j = _crossing(k2, eps[i], level)
        if j >= 0:
            k_f[i] = np.sqrt(kk)
            m_f[i] = HBAR2_2M0 * (k2[j + 1] - k2[j]) / (eps[i, j + 1] - eps[i, j])
    split = np.full(n, np.nan)
    for p in range(0, n - 1, 2):
        kk, _ = _crossing(k2, eps[p], level)
        if np.isfinite(kk):
            split[p] = split[p + 1] = abs(float(np.interp(kk, k2, eps[p + 1]) - level))
    return {"mass_band_edge": m_edge, "mass_fermi": m_f, "k_fermi": k_f, "spin_splitting": split}


def along_direction(mesh, cell, regions, phi, hk: KpStates, angle: float, zone=None):
    """The dispersion of the states of ``hk`` along the in-plane direction ``angle`` (radians
    from [100]) with the full, warped Hamiltonian, on ``hk``'s k grid: (n, m) eV, rows in the
    order of ``hk``'s states (each region's states in energy order at every k).  ``zone``: a
    dict the calls of one result share (their zone-centre states, :func:`reduced_dispersion`)."""
    nb = MODELS[hk.model]
    out = np.full(hk.dispersion.shape, np.nan)
    for r in np.unique(hk.subband_region):
        rows = np.flatnonzero(hk.subband_region == r)
        i0, i1 = regions[int(r)]
        part = mesh.part(i0, i1)
        args = (part.h, part.w, region_material(cell, i0, i1), phi[i0:i1 + 1], nb, rows.size,
                hk.k_parallel)
        got = reduced_dispersion(*args, angle=angle, energies=True,
                                 zone=None if zone is None else zone.setdefault(int(r), {}))
        E = (got if got is not None else dispersion(*args, angle=angle))[0]
        out[rows] = E[:rows.size]
    return out


# --------------------------------------------------------------------------- bulk curvature

#: the bulk wave-vector directions each use of the model reaches, as a plane through [001]
#: (the states of a (001) well mix every k_z with their k_par): the loop's axial Hamiltonian
#: (any in-plane direction: the model is isotropic in the plane), and the warped output lines
#: along [100] (the (010) plane: [001], [101], [100]) and [110] (the (1-10) plane: [001],
#: [111], [110]).  Name -> (in-plane unit vector, axial).
CURVATURE_USES = {"loop": ((1.0, 0.0), True),
                  "line_100": ((1.0, 0.0), False),
                  "line_110": ((np.sqrt(0.5), np.sqrt(0.5)), False)}
#: the named directions of each use's plane: polar angle from [001] (radians) -> name
_NAMED = {"loop": {0.0: "[001]", np.pi / 2: "the (001) plane"},
          "line_100": {0.0: "[001]", np.pi / 4: "[101]", np.pi / 2: "[100]"},
          "line_110": {0.0: "[001]", float(np.arctan(np.sqrt(2.0))): "[111]", np.pi / 2: "[110]"}}
#: polar angles searched in each plane (plus the named ones and the axial model's extremum)
CURVATURE_ANGLES = 721


class Curvature(NamedTuple):
    """The smallest hole-wise band curvature of a bulk layer over the directions one use of
    the model reaches: ``inverse_mass`` (1/m0; the hole mass is its inverse: <= 0 means a band
    curving the wrong way, a valence band whose top is not at Gamma), ``band`` ("heavy hole",
    "light hole"; "top" far from the zone centre), ``direction`` (a name, or degrees from
    [001]), ``combination`` (its closed form in Luttinger's parameters, or "" off the named
    directions), ``regime``: "zone centre" (the Gamma8 masses, kp4 and kp6 alike) or "large k"
    (kp6 only: hole energies well beyond the split-off gap, where the 6x6 kinetic matrix is the
    spin-free 3x3 one of Dresselhaus, Kip and Kittel)."""

    use: str
    regime: str
    band: str
    inverse_mass: float
    direction: str
    combination: str


def _direction_name(use: str, theta: float) -> str:
    for t, name in _NAMED[use].items():
        if abs(theta - t) < 1e-9:
            return name
    return f"{np.degrees(theta):.0f} deg from [001]"


def zone_centre_inverse_masses(g1: float, g2: float, g3: float, use: str, theta):
    """Heavy- and light-hole inverse masses (1/m0, hole-wise) of the bulk 4x4 Luttinger
    Hamiltonian at small k along the polar angle ``theta`` (radians from [001]) of ``use``'s
    plane: (hh, lh) arrays.  The warped Hamiltonian (Dresselhaus, Kip and Kittel, Phys. Rev. 98,
    368 (1955), in Luttinger's parameters, Phys. Rev. 102, 1030 (1956)):
    1/m = g1 -+ sqrt(4 g2^2 + 12 (g3^2 - g2^2) u), u = (kx^2 ky^2 + ky^2 kz^2 + kz^2 kx^2)/k^4,
    so [001] g1 -+ 2 g2, [110] g1 -+ sqrt(g2^2 + 3 g3^2), [111] g1 -+ 2 g3.  The axial one
    (cartesian_blocks: g2 in Q, (g2 + g3)/2 in R, g3 in S): with t = sin^2 theta,
    1/m = g1 -+ sqrt(g2^2 (3 t - 2)^2 + 3 gbar^2 t^2 + 12 g3^2 t (1 - t)) (Q^2 + |R|^2 + |S|^2
    of the same eigenvalues P -+ sqrt(Q^2 + |R|^2 + |S|^2)).  tests/test_kp.py checks both
    against bulk_matrix."""
    s2 = np.sin(np.asarray(theta, float)) ** 2
    c2 = 1.0 - s2
    if CURVATURE_USES[use][1]:
        gbar = 0.5 * (g2 + g3)
        f = g2 * g2 * (3.0 * s2 - 2.0) ** 2 + 3.0 * gbar * gbar * s2 * s2 + 12.0 * g3 * g3 * s2 * c2
    else:
        (cx, sy), _ = CURVATURE_USES[use]
        kx2, ky2 = s2 * cx * cx, s2 * sy * sy
        u = kx2 * ky2 + (kx2 + ky2) * c2
        f = 4.0 * g2 * g2 + 12.0 * (g3 * g3 - g2 * g2) * u
    root = np.sqrt(np.maximum(f, 0.0))
    return g1 - root, g1 + root


def _axial_extremum(g1: float, g2: float, g3: float) -> float:
    """The polar angle (radians) where the axial f(t) of zone_centre_inverse_masses has its
    vertex (a quadratic in t = sin^2 theta), clipped to the plane."""
    gbar = 0.5 * (g2 + g3)
    a = 9.0 * g2 * g2 + 3.0 * gbar * gbar - 12.0 * g3 * g3
    b = 12.0 * (g3 * g3 - g2 * g2)
    t = 0.0 if a == 0.0 else min(max(-b / (2.0 * a), 0.0), 1.0)
    return float(np.arcsin(np.sqrt(t)))


def large_k_inverse_masses(g1: float, g2: float, g3: float, use: str, theta) -> np.ndarray:
    """(n, 3) hole-wise eigenvalues (1/m0) of the spin-free kinetic matrix of the model
    (cartesian_blocks: H = kz A kz + G kz + kz G^+ + C, the bulk k^2 part) along the polar
    angles ``theta`` of ``use``'s plane: the curvatures of the 6x6 bands at hole energies well
    beyond the split-off gap (the spin-orbit term is then negligible and spin only doubles
    them).  Warped: [001] g1 - 2 g2 (twice), g1 + 4 g2; [110] g1 + g2 -+ 3 g3, g1 - 2 g2;
    [111] g1 - 2 g3 (twice), g1 + 4 g3 (analytic: the eigenvalues of L k_i^2 + M (k^2 - k_i^2)
    on the diagonal and N k_i k_j off it)."""
    (cx, sy), axial = CURVATURE_USES[use]
    one = KpMaterial.uniform(g1, g2, g3)
    A = cartesian_blocks(one, 0.0, 0.0, axial=axial)[0][0]
    G1 = cartesian_blocks(one, cx, sy, axial=axial)[1][0]
    C1 = cartesian_blocks(one, cx, sy, axial=axial)[2][0]        # quadratic in k_par: C(s) = s^2 C1
    theta = np.asarray(theta, float)
    s, c = np.sin(theta)[:, None, None], np.cos(theta)[:, None, None]
    kin = A * c * c + (G1 + G1.T) * s * c + C1 * s * s
    return np.linalg.eigvalsh(-kin)


def _combination(values: dict, name: str, value: float) -> str:
    for text, v in values.get(name, ()):
        if abs(v - value) <= 1e-9 * max(1.0, abs(value)):
            return text
    return ""


def bulk_curvatures(g1: float, g2: float, g3: float, nb: int) -> list[Curvature]:
    """For each use of the model (CURVATURE_USES) and regime, the smallest hole-wise bulk
    band curvature (:class:`Curvature`) over the directions that use reaches: the Gamma8 heavy-
    and light-hole masses at the zone centre, and with ``nb`` = 6 the curvatures far from it.
    A layer whose Luttinger parameters give one <= 0 has a bulk valence band that curves the
    wrong way there (GaP of the 2001 review: g1 - 2 g3 = -1.81, a heavy-hole mass of -0.55 m0
    along [111]); selfcon.output.diagnostics names it."""
    g1, g2, g3 = float(g1), float(g2), float(g3)
    key = (g1, g2, g3, int(nb))
    if key in _CURVATURES:
        return _CURVATURES[key]
    s110, gbar = np.sqrt(g2 * g2 + 3.0 * g3 * g3), 0.5 * (g2 + g3)
    zone = {"[001]": [("gamma1 - 2 gamma2", g1 - 2 * g2), ("gamma1 + 2 gamma2", g1 + 2 * g2)],
            "[101]": [("gamma1 - sqrt(gamma2^2 + 3 gamma3^2)", g1 - s110),
                      ("gamma1 + sqrt(gamma2^2 + 3 gamma3^2)", g1 + s110)],
            "[110]": [("gamma1 - sqrt(gamma2^2 + 3 gamma3^2)", g1 - s110),
                      ("gamma1 + sqrt(gamma2^2 + 3 gamma3^2)", g1 + s110)],
            "[111]": [("gamma1 - 2 gamma3", g1 - 2 * g3), ("gamma1 + 2 gamma3", g1 + 2 * g3)],
            "the (001) plane": [("gamma1 - sqrt(gamma2^2 + 3 gammabar^2)",
                                 g1 - np.sqrt(g2 * g2 + 3 * gbar * gbar)),
                                ("gamma1 + sqrt(gamma2^2 + 3 gammabar^2)",
                                 g1 + np.sqrt(g2 * g2 + 3 * gbar * gbar))]}
    far = {"[001]": [("gamma1 - 2 gamma2", g1 - 2 * g2), ("gamma1 + 4 gamma2", g1 + 4 * g2)],
           "[101]": [("gamma1 + gamma2 - 3 gamma3", g1 + g2 - 3 * g3), ("gamma1 - 2 gamma2", g1 - 2 * g2)],
           "[110]": [("gamma1 + gamma2 - 3 gamma3", g1 + g2 - 3 * g3), ("gamma1 - 2 gamma2", g1 - 2 * g2)],
           "[111]": [("gamma1 - 2 gamma3", g1 - 2 * g3), ("gamma1 + 4 gamma3", g1 + 4 * g3)],
           "the (001) plane": [("gamma1 - (gamma2 + 3 gamma3)/2", g1 - 0.5 * (g2 + 3 * g3)),
                               ("gamma1 - 2 gamma2", g1 - 2 * g2)]}
    out = []
    for use in CURVATURE_USES:
        angles = np.linspace(0.0, np.pi / 2, CURVATURE_ANGLES)
        extra = list(_NAMED[use]) + ([_axial_extremum(g1, g2, g3)] if use == "loop" else [])
        angles = np.unique(np.concatenate([angles, extra]))
        hh, lh = zone_centre_inverse_masses(g1, g2, g3, use, angles)
        rows = [("zone centre", "heavy hole", hh), ("zone centre", "light hole", lh)]
        if nb == 6:
            rows.append(("large k", "top", large_k_inverse_masses(g1, g2, g3, use, angles).min(axis=1)))
        for regime in ("zone centre", "large k"):
            mine = [(float(v.min()), band, int(v.argmin())) for r, band, v in rows if r == regime]
            if not mine:
                continue
            value, band, i = min(mine)
            name = _direction_name(use, float(angles[i]))
            table = zone if regime == "zone centre" else far
            out.append(Curvature(use, regime, band, value, name, _combination(table, name, value)))
    if len(_CURVATURES) >= CURVATURE_CACHE_SIZE:       # a study sweeping compositions: stay small
        _CURVATURES.clear()
    _CURVATURES[key] = out
    return out


#: (g1, g2, g3, nb) -> bulk_curvatures; cleared when it holds this many
CURVATURE_CACHE_SIZE = 1024
_CURVATURES: dict = {}
