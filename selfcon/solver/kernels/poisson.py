"""Nonlinear Poisson kernels (numba): finite volumes on a nonuniform mesh, Newton with a
tridiagonal (Thomas) solve.  Arrays in, arrays out; nothing compiled at import.

The arrays travel in named bundles (selfcon/solver/kernels/bundles.py): ``grid`` (Grid:
h, wl, wr), ``mat`` (Material: the classical charge model), ``q`` (Quantum: the subband
part), ``bounds`` (Boundaries) and ``opts`` (NewtonOptions).  The names below are their
fields.

Mesh (DEVELOPERS.md, "Conventions", finite volumes): nodes i = 0..N-1, cells c = 0..N-2 of
width h[c], half-cell widths wl[i] = h[i-1]/2 (0 at i = 0), wr[i] = h[i]/2 (0 at i = N-1),
w = wl + wr.
Material data is per cell; every cell is one material.

Charge model at node i, potential phi_i (V), densities nm^-3, in units of q.  Fermi levels
(eV, electron energy scale): efn of the electrons, efp of the holes (quasi-Fermi levels: they
differ when the gate metal, not the channel, sets the minority carrier's level); the dopant
levels are occupied with EF = 0, the contacted carrier's level:
  each half cell c in {i-1, i} is evaluated with ITS OWN parameters at phi_i:
    Ec = ec0[c] - phi_i, Ev = ev0[c] - phi_i,
    n_c = nc[c] F_{1/2}((efn - Ec)/kT), p_c = nv[c] F_{1/2}((Ev - efp)/kT),
    Nd+_c = nd[c]/(1 + 2 exp((Ed - Ec)/kT)), Na-_c = na[c]/(1 + 4 exp((Ev + Ea)/kT))
    (or Nd+ = nd, Na- = na with full ionisation; a binding energy of -inf is a dopant
    without a bound state, fully ionised);
  classical node density = (wl * x_{i-1} + wr * x_i) / w.
  Sheets (nm^-2 at the node): ionised fraction = the wl/wr-weighted mean of the two
  half cells' fractions (each with its cell's Ec and the sheet's own binding energy
  sheet_ed[i], sheet_ea[i]); contributes s f / w.
  Quantum part (predictor-corrector of Trellakis et al., J. Appl. Phys. 81, 7880 (1997)):
    n_q,i = sum_k psi2[i,k] dos_e[k] kT ln(1 + exp((efn - E_k + dphi_i)/kT)),
    p_q,i = sum_k psi2h[i,k] dos_h[k] kT ln(1 + exp((E_k - dphi_i - efp)/kT)),  dphi = phi - phi_ref,
  i.e. the subbands move rigidly with the local potential change, so d rho_i / d phi_i is
  local (the Jacobian stays tridiagonal).  qshift scales dphi: 1 is the predictor, 0 holds the
  quantum density frozen at phi_ref (the Poisson pass of classic mixing schemes).
  Mixing of the two: n_i = cls_e[i] n_classical,i + (1 - cls_e[i]) n_q,i (same for holes
  with cls_h); masks are 1 for classical nodes, 0 for quantum ones (fractions allowed).
  Further conduction valleys v (X, L; rows of ec0_v, nc_v, shape (V, N-1), V may be 0)
  are classical everywhere and added to n after the masks: n_v = nc_v F_{1/2}((phi - ec0_v + efn)/kT).
  Further valence bands w (rows of ev0_v, nv_v, shape (W, N-1), W may be 0: the light hole of
  a strained layer at its own edge, the heavy hole being ev0, nv) are part of the classical
  hole density, p_w = nv_v F_{1/2}((ev0_v - phi - efp)/kT), and so take the hole mask cls_h.
  rho_i = p_i - n_i + Nd+_i - Na-_i + sheet_fixed_i / w_i, the last term the fixed sheets
  (bound polarization charge, nm^-2 at the node; it does not depend on phi).

Equation at node i (V nm^-1 x eps_r, integrated over the dual cell):
  R_i = eps[i](phi_{i+1}-phi_i)/h[i] - eps[i-1](phi_i-phi_{i-1})/h[i-1] + Q_EPS0 rho_i w_i = 0.
Boundaries: kind 0 Dirichlet (phi = value), kind 1 zero field (the outer flux term is
absent, i.e. the half-cell balance).  The FV boundary flux eps dphi/dz at an end is defined
by the same half-cell balance (fv_boundary_flux), so Gauss's law
  eps dphi/dz |_L - eps dphi/dz |_0 = -Q_EPS0 sum_i rho_i w_i
holds to the Newton residual.

Damping rule: the Newton step is scaled uniformly (direction kept) so that
max_i |dphi_i| <= max_step (V), then halved until the residual norm ||R||_2 decreases
(backtracking line search, at most 50 halvings); a step already below tol is accepted.
Near the solution full steps pass, so convergence is quadratic.
Convergence: max |applied step| < tol (V).
"""
import math

import numpy as np
from numba import njit

from selfcon.constants import Q_EPS0
from selfcon.solver.kernels.statistics import acceptor_ionized, donor_ionized, fermi_half, fermi_mhalf


#: below this reduced energy F_{1/2}(eta) = F_{-1/2}(eta) = e^eta (1 + O(e^eta)), O(e^-40) ~ 4e-18
_BOLTZMANN_ETA = -40.0
#: a subband more than 45 kT above the local Fermi level adds ln(1 + e^x) < 3e-20 of its DOS
_NEGLIGIBLE_X = -45.0
_NEGLIGIBLE_T = math.exp(_NEGLIGIBLE_X)
#: the factored occupancy (see _levels) is used while both factors lie within these bounds
#: (their product then neither overflows nor underflows); outside, the direct formula
_FACTOR_MAX = 1e150
_FACTOR_MIN = 1e-150


@njit(cache=True)
def _levels(q, mat):
    """exp((efn - E_k)/kT) of every electron subband and exp((E_k - efp)/kT) of every hole
    subband, once per kernel call: a node's occupancies are then these times the node's own
    exp(+-dphi/kT), ln(1 + e^x) = log1p(t) and 1/(1 + e^-x) = t/(1 + t) with t = e^x, one
    logarithm per state and node instead of an exponential and a logarithm (the many-state
    stacks spend most of a Poisson evaluation here)."""
    te = np.empty(q.ek.shape[0])
    for k in range(te.shape[0]):
        te[k] = math.exp((mat.efn - q.ek[k]) / mat.kT)
    th = np.empty(q.ekh.shape[0])
    for k in range(th.shape[0]):
        th[k] = math.exp((q.ekh[k] - mat.efp) / mat.kT)
    return te, th


@njit(cache=True, inline='always')
def _cell_terms(c, phi, mat, want_e=True, want_h=True, want_d=True, want_a=True):
    """Classical densities of cell c at potential phi and their d/dphi, plus the ionised
    fractions of the cell's donors and acceptors with d/dphi.  want_*: False skips a term
    the caller will not use (returned as 0): quantum nodes, undoped cells."""
    kT = mat.kT
    ec = mat.ec0[c] - phi
    ev = mat.ev0[c] - phi
    nc = mat.nc[c]
    nv = mat.nv[c]
    n = 0.0
    dn = 0.0
    if want_e and nc > 0.0:
        eta = (mat.efn - ec) / kT
        if eta < _BOLTZMANN_ETA:
            # deep non-degenerate limit: F_{1/2} = F_{-1/2} = e^eta to < 1e-17 relative;
            # also avoids the series' slow path when e^eta underflows (cold, wide gaps)
            n = nc * math.exp(eta)
            dn = n / kT
        else:
            n = nc * fermi_half(eta)
            dn = nc * fermi_mhalf(eta) / kT
    p = 0.0
    dp = 0.0
    if want_h and nv > 0.0:
        eta = (ev - mat.efp) / kT
        if eta < _BOLTZMANN_ETA:
            p = nv * math.exp(eta)
            dp = -p / kT
        else:
            p = nv * fermi_half(eta)
            dp = -nv * fermi_mhalf(eta) / kT
    if want_h:
        # further valence bands (a strained layer's light hole at its own edge)
        for v in range(mat.ev0_v.shape[0]):
            nvv = mat.nv_v[v, c]
            if nvv > 0.0:
                eta = (mat.ev0_v[v, c] - phi - mat.efp) / kT
                if eta < _BOLTZMANN_ETA:
                    x = nvv * math.exp(eta)
                    p += x
                    dp -= x / kT
                else:
                    p += nvv * fermi_half(eta)
                    dp -= nvv * fermi_mhalf(eta) / kT
    # d/dphi = -d/dEc = -d/dEv
    fd = 0.0
    dfd = 0.0
    fa = 0.0
    dfa = 0.0
    if want_d:
        fd, dfd = donor_ionized(1.0, ec, mat.ed[c], kT, mat.full)
    if want_a:
        fa, dfa = acceptor_ionized(1.0, ev, mat.ea[c], kT, mat.full)
    return n, dn, p, dp, fd, -dfd, fa, -dfa


@njit(cache=True)
def _log1pexp_expit(x):
    """(ln(1 + e^x), 1/(1 + e^-x)) from one exponential, safe for all x
    (same values as statistics.log1pexp and statistics.expit)."""
    e = math.exp(-abs(x))
    lg = math.log1p(e)
    if x > 0.0:
        return x + lg, 1.0 / (1.0 + e)
    return lg, e / (1.0 + e)


@njit(cache=True, inline='always')
def _node(i, phi_i, grid, mat, q, te, th):
    """Node densities n, p, Nd+, Na- (nm^-3) at phi_i, d rho/d phi and d(n + p)/d phi, the
    slope of the mobile density (te, th: _levels)."""
    wl = grid.wl[i]
    wr = grid.wr[i]
    w = wl + wr
    kT = mat.kT
    sheet_nd = mat.sheet_nd[i]
    sheet_na = mat.sheet_na[i]
    n = 0.0
    dn = 0.0
    p = 0.0
    dp = 0.0
    ndp = 0.0
    dndp = 0.0
    nam = 0.0
    dnam = 0.0
    fsd = 0.0
    dfsd = 0.0
    fsa = 0.0
    dfsa = 0.0
    nvl = 0.0
    dnvl = 0.0
    # classical carriers are not needed on fully quantum nodes (mask 0)
    want_e = q.cls_e[i] > 0.0
    want_h = q.cls_h[i] > 0.0
    for side in range(2):
        if side == 0:
            c = i - 1
            wt = wl
        else:
            c = i
            wt = wr
        if wt == 0.0:
            continue
        nd = mat.nd[c]
        na = mat.na[c]
        cn, cdn, cp, cdp, fd, dfd, fa, dfa = _cell_terms(
            c, phi_i, mat, want_e, want_h, nd != 0.0, na != 0.0)
        n += wt * cn
        dn += wt * cdn
        p += wt * cp
        dp += wt * cdp
        ndp += wt * nd * fd
        dndp += wt * nd * dfd
        nam += wt * na * fa
        dnam += wt * na * dfa
        # sheets: the half cell's band edge with the sheet's own binding energy
        if sheet_nd != 0.0:
            f, df = donor_ionized(1.0, mat.ec0[c] - phi_i, mat.sheet_ed[i], kT, mat.full)
            fsd += wt * f
            dfsd -= wt * df
        if sheet_na != 0.0:
            f, df = acceptor_ionized(1.0, mat.ev0[c] - phi_i, mat.sheet_ea[i], kT, mat.full)
            fsa += wt * f
            dfsa -= wt * df
        # further conduction valleys (X, L): classical everywhere, never masked
        for v in range(mat.ec0_v.shape[0]):
            ncv = mat.nc_v[v, c]
            if ncv > 0.0:
                eta = (phi_i - mat.ec0_v[v, c] + mat.efn) / kT
                if eta < _BOLTZMANN_ETA:
                    x = ncv * math.exp(eta)
                    nvl += wt * x
                    dnvl += wt * x / kT
                else:
                    nvl += wt * ncv * fermi_half(eta)
                    dnvl += wt * ncv * fermi_mhalf(eta) / kT
    n /= w
    dn /= w
    p /= w
    dp /= w
    # sheets: s * (wl f_l + wr f_r)/w is the ionised sheet; spread over the dual cell (/w)
    ndp = (ndp + sheet_nd * fsd / w) / w
    dndp = (dndp + sheet_nd * dfsd / w) / w
    nam = (nam + sheet_na * fsa / w) / w
    dnam = (dnam + sheet_na * dfsa / w) / w
    # quantum electrons / holes with rigidly shifted subbands
    qshift = q.qshift
    dphi = qshift * (phi_i - q.phi_ref[i])
    efn = mat.efn
    efp = mat.efp
    ce = q.cls_e[i]
    if ce < 1.0:
        nq = 0.0
        dnq = 0.0
        ek = q.ek
        dn_node = math.exp(dphi / kT)
        node_ok = _FACTOR_MIN < dn_node < _FACTOR_MAX
        for k in range(ek.shape[0]):
            a = q.psi2[i, k] * q.dos_e[k]
            if a != 0.0:
                f = te[k]
                if node_ok and _FACTOR_MIN < f < _FACTOR_MAX:
                    t = f * dn_node              # e^x, x = (efn + dphi - E_k)/kT
                    if t < _NEGLIGIBLE_T:        # ln(1 + e^x) < 3e-20: the subband is empty here
                        continue
                    lg = math.log1p(t)
                    sg = t / (1.0 + t)
                else:
                    x = (efn + dphi - ek[k]) / kT
                    if x < _NEGLIGIBLE_X:
                        continue
                    lg, sg = _log1pexp_expit(x)
                nq += a * kT * lg
                dnq += qshift * a * sg
        n = ce * n + (1.0 - ce) * nq
        dn = ce * dn + (1.0 - ce) * dnq
    ch = q.cls_h[i]
    if ch < 1.0:
        pq = 0.0
        dpq = 0.0
        ekh = q.ekh
        dp_node = math.exp(-dphi / kT)
        node_ok = _FACTOR_MIN < dp_node < _FACTOR_MAX
        for k in range(ekh.shape[0]):
            a = q.psi2h[i, k] * q.dos_h[k]
            if a != 0.0:
                f = th[k]
                if node_ok and _FACTOR_MIN < f < _FACTOR_MAX:
                    t = f * dp_node              # e^x, x = (E_k - dphi - efp)/kT
                    if t < _NEGLIGIBLE_T:
                        continue
                    lg = math.log1p(t)
                    sg = t / (1.0 + t)
                else:
                    x = (ekh[k] - dphi - efp) / kT
                    if x < _NEGLIGIBLE_X:
                        continue
                    lg, sg = _log1pexp_expit(x)
                pq += a * kT * lg
                dpq -= qshift * a * sg
        p = ch * p + (1.0 - ch) * pq
        dp = ch * dp + (1.0 - ch) * dpq
    n += nvl / w               # the X/L valleys, after the quantum/classical blend of Gamma
    dn += dnvl / w
    drho = dp - dn + dndp - dnam
    return n, p, ndp, nam, drho, dn + dp


@njit(cache=True)
def node_densities(phi, grid, mat, q):
    """Node densities at phi: (n, p, nd_plus, na_minus, drho_dphi), each (N,), nm^-3
    (dopant sheets included as s/w).  rho = p - n + nd_plus - na_minus + sheet_fixed / w (the
    fixed sheets are not among the returned densities: the caller adds them).
    grid, mat, q: the Grid, Material and Quantum bundles (selfcon.solver.kernels.bundles)."""
    N = phi.shape[0]
    n = np.empty(N)
    p = np.empty(N)
    ndp = np.empty(N)
    nam = np.empty(N)
    drho = np.empty(N)
    te, th = _levels(q, mat)
    for i in range(N):
        n[i], p[i], ndp[i], nam[i], drho[i], _ = _node(i, phi[i], grid, mat, q, te, th)
    return n, p, ndp, nam, drho


@njit(cache=True)
def fv_boundary_flux(phi, h, eps, rho, w):
    """FV fluxes D = eps_r dphi/dz (V/nm) at z[0] and z[N-1], from the half-cell balances
    D_0 = eps[0](phi1-phi0)/h0 + Q_EPS0 rho_0 w_0 and
    D_L = eps[-1](phi_N-1 - phi_N-2)/h[-1] - Q_EPS0 rho_N-1 w_N-1."""
    N = phi.shape[0]
    d0 = eps[0] * (phi[1] - phi[0]) / h[0] + Q_EPS0 * rho[0] * w[0]
    dl = eps[N - 2] * (phi[N - 1] - phi[N - 2]) / h[N - 2] - Q_EPS0 * rho[N - 1] * w[N - 1]
    return d0, dl


@njit(cache=True)
def total_charge(rho, w):
    """FV integral sum_i rho_i w_i (nm^-2, units of q)."""
    s = 0.0
    for i in range(rho.shape[0]):
        s += rho[i] * w[i]
    return s


@njit(cache=True)
def thomas(a, b, c, d, cp, x):
    """Solve the tridiagonal system a[i] x[i-1] + b[i] x[i] + c[i] x[i+1] = d[i] (a[0], c[-1]
    ignored) into x, using cp as scratch.  No pivoting (the Poisson Jacobian is diagonally
    dominant).  d is overwritten."""
    N = b.shape[0]
    beta = b[0]
    cp[0] = c[0] / beta
    d[0] = d[0] / beta
    for i in range(1, N):
        beta = b[i] - a[i] * cp[i - 1]
        if i < N - 1:
            cp[i] = c[i] / beta
        d[i] = (d[i] - a[i] * d[i - 1]) / beta
    x[N - 1] = d[N - 1]
    for i in range(N - 2, -1, -1):
        x[i] = d[i] - cp[i] * x[i + 1]


@njit(cache=True)
def _assemble(phi, g, grid, mat, q, bounds, a, b, c, r, dens, te, th):
    """Fill the tridiagonal Jacobian (a, b, c) and r = -R at phi; return ||R||_2.
    g (N-1,): eps/h of every cell.  dens (4, N) receives the node densities n, p, Nd+,
    Na- of node_densities (a (4, 0) array: not wanted), a fifth row (5, N) also the slope
    d(n + p)/d phi of the mobile density; te, th: _levels."""
    N = phi.shape[0]
    keep = dens.shape[1] == N
    slope = keep and dens.shape[0] > 4
    for i in range(N):
        nn, pp, ndp, nam, drho, dmob = _node(i, phi[i], grid, mat, q, te, th)
        if keep:
            dens[0, i] = nn
            dens[1, i] = pp
            dens[2, i] = ndp
            dens[3, i] = nam
            if slope:
                dens[4, i] = dmob
        w = grid.wl[i] + grid.wr[i]
        res = Q_EPS0 * ((pp - nn + ndp - nam) * w + mat.sheet_fixed[i])
        diag = Q_EPS0 * drho * w
        if i < N - 1:
            res += g[i] * (phi[i + 1] - phi[i])
            diag -= g[i]
            c[i] = g[i]
        else:
            c[i] = 0.0
        if i > 0:
            res -= g[i - 1] * (phi[i] - phi[i - 1])
            diag -= g[i - 1]
            a[i] = g[i - 1]
        else:
            a[i] = 0.0
        b[i] = diag
        r[i] = -res
    if bounds.kind_top == 0:
        a[0] = 0.0
        b[0] = 1.0
        c[0] = 0.0
        r[0] = 0.0
    if bounds.kind_bottom == 0:
        a[N - 1] = 0.0
        b[N - 1] = 1.0
        c[N - 1] = 0.0
        r[N - 1] = 0.0
    s = 0.0
    for i in range(N):
        s += r[i] * r[i]
    return math.sqrt(s)


@njit(cache=True)
def poisson_newton(phi0, grid, mat, q, bounds, opts, history, densities=None):
    """Newton solve of the nonlinear FV Poisson equation (see module docstring).

    phi0 (N,) initial guess (not modified); grid, mat, q, bounds, opts: the Grid,
    Material, Quantum, Boundaries and NewtonOptions bundles
    (selfcon.solver.kernels.bundles); history (>= opts.max_iter,) receives max |step| of
    each Newton step; ``densities`` (4, N), if given, receives the node densities n, p,
    Nd+, Na- at the starting point (phi0 with the Dirichlet values), exactly those of
    node_densities, which the first assembly computes anyway; a (5, N) array also the
    slope d(n + p)/d phi there (nm^-3 V^-1, the mobile part of the Jacobian's diagonal).
    Returns (phi, newton_steps, converged, max_update).
    Damping: step scaled to max |dphi| <= opts.max_step, then halved (up to 50 times)
    until ||R||_2 decreases (backtracking); a step already below opts.tol is taken as is
    (with opts.check_last False without evaluating the residual there: it ends the solve).
    opts.backtrack = False takes each (clamped) step without evaluating the residual at
    the new point: for callers with their own safeguard (the predictor passes of the outer
    loop, one step each, damped by the loop when its residual grows).  opts.settle > 0 (with
    backtracking): a full Newton step right after a full accepted one, smaller than
    opts.settle times that one, is taken without a trial evaluation and ends the solve as
    converged (the quadratic phase: the first predictor pass of the loop).
    Work arrays are allocated once per call, none inside the loop.
    """
    tol = opts.tol
    max_iter = opts.max_iter
    max_step = opts.max_step
    N = phi0.shape[0]
    phi = phi0.copy()
    if bounds.kind_top == 0:
        phi[0] = bounds.value_top
    if bounds.kind_bottom == 0:
        phi[N - 1] = bounds.value_bottom
    a = np.empty(N)
    b = np.empty(N)
    c = np.empty(N)
    r = np.empty(N)
    a2 = np.empty(N)
    b2 = np.empty(N)
    c2 = np.empty(N)
    r2 = np.empty(N)
    cp = np.empty(N)
    dx = np.empty(N)
    trial = np.empty(N)
    g = np.empty(N - 1)            # eps/h per cell
    for k in range(N - 1):
        g[k] = mat.eps[k] / grid.h[k]
    none = np.empty((4, 0))        # the trial assemblies keep no densities
    steps = 0
    converged = False
    upd = np.inf
    full = False               # the last step was a full Newton step, accepted (opts.settle)
    te, th = _levels(q, mat)
    if densities is None:
        norm = _assemble(phi, g, grid, mat, q, bounds, a, b, c, r, none, te, th)
    else:
        norm = _assemble(phi, g, grid, mat, q, bounds, a, b, c, r, densities, te, th)
    for it in range(max_iter):
        if not math.isfinite(norm):
            upd = np.nan
            break
        thomas(a, b, c, r, cp, dx)
        big = 0.0
        for i in range(N):
            v = abs(dx[i])
            if not v <= big:        # also catches NaN
                big = v
        steps = it + 1
        if not math.isfinite(big):
            upd = big
            break
        scale = 1.0
        if big > max_step:
            scale = max_step / big
        # opts.settle: right after a full Newton step (neither clamped nor halved) that was
        # accepted, a full step below settle times that one shows the quadratic phase (the
        # next would be ~ settle times smaller again): taken without a trial assembly, it
        # ends the solve
        settled = opts.settle > 0.0 and full and scale == 1.0 and big < opts.settle * upd
        if not opts.backtrack or (scale * big < tol and not opts.check_last) or settled:
            # a step below tol is accepted whatever the residual does (see below) and ends
            # the solve: unless asked, no trial assembly evaluates it
            for i in range(N):
                phi[i] += scale * dx[i]
            upd = scale * big
            history[it] = upd
            if upd < tol or settled:
                converged = True
                break
            if it + 1 < max_iter:
                norm = _assemble(phi, g, grid, mat, q, bounds, a, b, c, r, none, te, th)
            continue
        for _ in range(50):
            for i in range(N):
                trial[i] = phi[i] + scale * dx[i]
            new = _assemble(trial, g, grid, mat, q, bounds, a2, b2, c2, r2, none, te, th)
            if new < norm or scale * big < tol:
                break
            scale *= 0.5
        for i in range(N):
            phi[i] = trial[i]
            a[i] = a2[i]
            b[i] = b2[i]
            c[i] = c2[i]
            r[i] = r2[i]
        norm = new
        upd = scale * big
        history[it] = upd
        if upd < tol:
            converged = True
            break
        full = scale == 1.0
    return phi, steps, converged, upd
