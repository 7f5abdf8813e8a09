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
def vectors_to_wavefunctions(u, w, psi):
    """u (n-2, k) eigenvectors of B -> psi (n, k) with psi = W^{-1/2} u.

    Ends are zero; each column is normalised to sum_i w_i psi_i^2 = 1 and its sign
    fixed so that the first node with |psi| > 1e-3 max|psi| is positive.
    """
    n = w.shape[0]
    k = u.shape[1]
    for s in range(k):
        psi[0, s] = 0.0
        psi[n - 1, s] = 0.0
        norm2 = 0.0
        big = 0.0
        for j in range(n - 2):
            val = u[j, s] / np.sqrt(w[j + 1])
            psi[j + 1, s] = val
            norm2 += w[j + 1] * val * val
            a = abs(val)
            if a > big:
                big = a
        sign = 1.0
        thresh = 1e-3 * big
        for i in range(1, n - 1):
            if abs(psi[i, s]) > thresh:
                if psi[i, s] < 0.0:
                    sign = -1.0
                break
        scale = sign / np.sqrt(norm2) if norm2 > 0.0 else 0.0
        for i in range(1, n - 1):
            psi[i, s] *= scale


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
