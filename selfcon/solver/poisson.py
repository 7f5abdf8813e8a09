"""Nonlinear Poisson, Python side: the problem record, the solve front, densities,
neutral level, field and Gauss check.  The model and the discretisation are documented
in selfcon/kernels/poisson.py.

Units: nm, eV, V, K, nm^-3, nm^-2 (DEVELOPERS.md, "Conventions").  EF = 0, Ec = ec0 - phi, Ev = ev0 - phi.
Boundary kinds: DIRICHLET (phi fixed; schottky, pinned and ohmic contacts) and
ZERO_FIELD (free surface: no outer flux).
"""
from dataclasses import dataclass, field, replace

import numpy as np

from selfcon.constants import CM2_PER_NM2, KB_EV, Q_EPS0, NM_PER_CM
from selfcon.model.mesh import half_widths
from selfcon.solver.kernels import load
from selfcon.solver.kernels.bundles import Boundaries, Grid, Material, NewtonOptions, Quantum

DIRICHLET = 0
ZERO_FIELD = 1


def _f(a):
    return np.ascontiguousarray(a, dtype=float)


@dataclass(frozen=True)
class PoissonProblem:
    """Everything the Poisson kernels need.  Per-cell arrays have length N-1, per-node N.

    Cells: eps, ec0, ev0 (eV), nc, nv (nm^-3, effective DOS; 0 switches a carrier off),
    nd, na (nm^-3), ed, ea (binding energies, eV).  Nodes: sheet_nd, sheet_na (nm^-2) with
    their binding energies sheet_ed, sheet_ea (eV; default: those of the cell right of the
    node, the left one at the last node); sheet_fixed (nm^-2, fixed charge in units of q: bound
    polarization sheets).  efn, efp (eV, electron energy scale): the Fermi
    levels of electrons and holes (default 0; the dopant levels are always occupied with 0).
    Quantum part (predictor-corrector): cls_e, cls_h (N,) masks (1 classical, 0 quantum),
    psi2 (N, Ke) |psi|^2 (nm^-1), ek (Ke,) eV, dos_e (Ke,) nm^-2 eV^-1; psi2h, ekh, dos_h
    for holes (hole levels in electron energy); ec0_v, nc_v (V, N-1) further classical
    conduction valleys (X, L; V = 0 by default); ev0_v, nv_v (W, N-1) further classical
    valence bands (a strained layer's light hole; W = 0 by default, when ev0, nv hold both
    hole bands at one edge); phi_ref (N,) the potential the subbands
    belong to.  Boundaries: (kind, value) with kind DIRICHLET or ZERO_FIELD, value in V.
    """
    z: np.ndarray
    eps: np.ndarray
    ec0: np.ndarray
    ev0: np.ndarray
    nc: np.ndarray
    nv: np.ndarray
    nd: np.ndarray
    ed: np.ndarray
    na: np.ndarray
    ea: np.ndarray
    temperature: float
    sheet_nd: np.ndarray = None
    sheet_na: np.ndarray = None
    sheet_fixed: np.ndarray = None
    full_ionization: bool = False
    top: tuple = (ZERO_FIELD, 0.0)
    bottom: tuple = (ZERO_FIELD, 0.0)
    cls_e: np.ndarray = None
    cls_h: np.ndarray = None
    psi2: np.ndarray = None
    ek: np.ndarray = None
    dos_e: np.ndarray = None
    psi2h: np.ndarray = None
    ekh: np.ndarray = None
    dos_h: np.ndarray = None
    phi_ref: np.ndarray = None
    qshift: float = 1.0
    ec0_v: np.ndarray = None
    nc_v: np.ndarray = None
    ev0_v: np.ndarray = None
    nv_v: np.ndarray = None
    sheet_ed: np.ndarray = None
    sheet_ea: np.ndarray = None
    efn: float = 0.0
    efp: float = 0.0
    h: np.ndarray = field(init=False)
    wl: np.ndarray = field(init=False)
    wr: np.ndarray = field(init=False)
    w: np.ndarray = field(init=False)

    def __post_init__(self):
        set_ = lambda k, v: object.__setattr__(self, k, v)
        z = _f(self.z)
        N = z.shape[0]
        if N < 2 or np.any(np.diff(z) <= 0):
            raise ValueError("PoissonProblem: z must be increasing with at least 2 nodes")
        set_("z", z)
        for k in ("eps", "ec0", "ev0", "nc", "nv", "nd", "ed", "na", "ea"):
            a = _f(getattr(self, k))
            if a.shape != (N - 1,):
                raise ValueError(f"PoissonProblem: {k} must be per cell, shape ({N - 1},)")
            set_(k, a)
        for k in ("sheet_nd", "sheet_na", "sheet_fixed", "phi_ref"):
            a = getattr(self, k)
            set_(k, np.zeros(N) if a is None else _f(a))
        for k, cell in (("sheet_ed", self.ed), ("sheet_ea", self.ea)):
            a = getattr(self, k)
            set_(k, np.append(cell, cell[-1]) if a is None else _f(a))
        for k in ("sheet_nd", "sheet_na", "sheet_fixed", "phi_ref", "sheet_ed", "sheet_ea"):
            if getattr(self, k).shape != (N,):
                raise ValueError(f"PoissonProblem: {k} must be per node, shape ({N},)")
        set_("efn", float(self.efn))
        set_("efp", float(self.efp))
        for k in ("cls_e", "cls_h"):
            a = getattr(self, k)
            set_(k, np.ones(N) if a is None else _f(a))
        for k in ("ec0_v", "nc_v", "ev0_v", "nv_v"):   # further valleys / bands, (V, N-1)
            a = getattr(self, k)
            a = np.zeros((0, N - 1)) if a is None else _f(a).reshape(-1, N - 1)
            set_(k, a)
        if self.ec0_v.shape != self.nc_v.shape:
            raise ValueError("PoissonProblem: ec0_v and nc_v must have the same shape (valleys, N-1)")
        if self.ev0_v.shape != self.nv_v.shape:
            raise ValueError("PoissonProblem: ev0_v and nv_v must have the same shape (bands, N-1)")
        for p, e, d in (("psi2", "ek", "dos_e"), ("psi2h", "ekh", "dos_h")):
            if getattr(self, p) is None:
                set_(p, np.zeros((N, 0)))
                set_(e, np.zeros(0))
                set_(d, np.zeros(0))
            else:
                set_(p, _f(getattr(self, p)).reshape(N, -1))
                set_(e, _f(getattr(self, e)))
                set_(d, _f(getattr(self, d)))
        h, wl, wr, w = half_widths(z)
        set_("h", h)
        set_("wl", wl)
        set_("wr", wr)
        set_("w", w)
        set_("top", (int(self.top[0]), float(self.top[1])))
        set_("bottom", (int(self.bottom[0]), float(self.bottom[1])))

    @property
    def kT(self):
        return KB_EV * self.temperature

    def _copy(self):
        """A shallow copy, as copy.copy makes it, without its reduce protocol (every
        iteration makes one): the same fields, the arrays shared."""
        new = object.__new__(type(self))
        new.__dict__.update(self.__dict__)
        return new

    def with_quantum(self, *, phi_ref, cls_e=None, psi2=None, ek=None, dos_e=None,
                     cls_h=None, psi2h=None, ekh=None, dos_h=None):
        """Copy with the quantum (predictor) part replaced; omitted parts are kept."""
        # called every iteration: copy without re-running the validation of the
        # unchanged material arrays; check only the shapes of what is replaced.  The Grid,
        # Material and Boundaries bundles and the fixed-sheet density are made on this
        # problem first, so that every copy shares them (the loop's base problems are
        # copied once per iteration)
        self._grid_material()
        self.boundaries()
        self.fixed_density()
        new = self._copy()
        N = self.z.shape[0]
        set_ = lambda k, v: object.__setattr__(new, k, v)
        set_("phi_ref", _f(phi_ref))
        for k, v in (("cls_e", cls_e), ("cls_h", cls_h)):
            if v is not None:
                set_(k, _f(v))
        for p, e, d, (pv, ev, dv) in (("psi2", "ek", "dos_e", (psi2, ek, dos_e)),
                                      ("psi2h", "ekh", "dos_h", (psi2h, ekh, dos_h))):
            if pv is not None:
                pv = _f(pv).reshape(N, -1)
                ev, dv = _f(ev), _f(dv)
                if ev.shape != (pv.shape[1],) or dv.shape != ev.shape:
                    raise ValueError(f"PoissonProblem: {p}, {e}, {d} shapes disagree")
                set_(p, pv)
                set_(e, ev)
                set_(d, dv)
        if new.phi_ref.shape != (N,) or new.cls_e.shape != (N,) or new.cls_h.shape != (N,):
            raise ValueError("PoissonProblem: phi_ref, cls_e and cls_h must be per node")
        return new

    def with_valley_dos(self, nc_v):
        """Copy with the effective DOS rows of the further conduction valleys replaced (the
        same shape: quantum valley sets empty their cells inside quantum regions)."""
        nc_v = _f(nc_v)
        if nc_v.shape != self.nc_v.shape:
            raise ValueError("PoissonProblem: nc_v must keep its shape (valleys, N-1)")
        new = self._copy()
        object.__setattr__(new, "nc_v", nc_v)
        new.__dict__.pop("_fixed_bundles", None)      # its Material bundle holds nc_v
        return new

    def with_shift(self, qshift):
        """Copy with the predictor shift factor: 1 subbands follow dphi, 0 frozen density."""
        return replace(self, qshift=float(qshift))

    def with_boundaries(self, top=None, bottom=None):
        return replace(self, top=self.top if top is None else top,
                       bottom=self.bottom if bottom is None else bottom)

    def kernel_args(self):
        """The (Grid, Material, Quantum) bundles of the kernels (selfcon.solver.kernels.bundles).
        The Grid and Material bundles are made once and kept with the problem: the copies of
        :meth:`with_quantum` (one per iteration) share them, as they share their arrays."""
        fixed = self._grid_material()
        return (fixed[0], fixed[1],
                Quantum(self.cls_e, self.cls_h, self.psi2, self.ek, self.dos_e, self.psi2h,
                        self.ekh, self.dos_h, self.phi_ref, float(self.qshift)))

    def _grid_material(self):
        """(Grid, Material) of :meth:`kernel_args`, made once and kept in the problem."""
        fixed = self.__dict__.get("_fixed_bundles")
        if fixed is None:
            fixed = self.__dict__["_fixed_bundles"] = (
                Grid(self.h, self.wl, self.wr),
                Material(self.eps, self.ec0, self.ev0, self.nc, self.nv, self.nd, self.ed,
                         self.na, self.ea, self.sheet_nd, self.sheet_na, self.sheet_ed,
                         self.sheet_ea, self.sheet_fixed, self.ec0_v, self.nc_v, self.ev0_v,
                         self.nv_v, float(self.kT), bool(self.full_ionization), self.efn, self.efp))
        return fixed

    def fixed_density(self) -> np.ndarray:
        """The fixed sheets spread over their dual cells, sheet_fixed / w (nm^-3; read-only,
        made once and shared like the bundles)."""
        out = self.__dict__.get("_fixed_density")
        if out is None:
            out = self.__dict__["_fixed_density"] = self.sheet_fixed / self.w
            out.setflags(write=False)
        return out

    def boundaries(self):
        """The Boundaries bundle of the kernels (made once and kept, like the Grid and
        Material bundles: the boundaries of a problem and of its quantum copies never change)."""
        out = self.__dict__.get("_boundaries")
        if out is None:
            out = self.__dict__["_boundaries"] = Boundaries(int(self.top[0]), float(self.top[1]),
                                                             int(self.bottom[0]), float(self.bottom[1]))
        return out


@dataclass
class PoissonSolution:
    phi: np.ndarray
    steps: int
    converged: bool
    update: float                      # last max |step| (V)
    history: np.ndarray = None         # max |step| of each Newton step (V)
    start: "Densities" = None          # densities at the starting point (start_densities=True)


def solve_poisson(problem, phi0, *, tol=1e-9, max_iter=200, max_step=0.3, backtrack=True,
                  start_densities=False, settle=0.0):
    """Newton solve; returns PoissonSolution (never raises on non-convergence).

    tol: V on max |Newton step|; max_step: V, the step is scaled so that no node moves
    more than this in one step (direction kept); backtrack=False: no residual check of
    the step (see selfcon.solver.kernels.poisson.poisson_newton).  start_densities=True:
    ``solution.start`` holds the :class:`Densities` at ``phi0`` (with the Dirichlet values
    imposed), the same as :func:`densities` gives, from the first Jacobian assembly, with
    ``start.mobile_slope`` d(n + p)/d phi there (the charge check's linear estimate,
    selfcon.solver.steps.charge_residual).  settle > 0: the solve also ends, converged,
    on a full Newton step right after a full one and below settle times it
    (NewtonOptions.settle; the quadratic phase reached)."""
    poisson_newton = load("poisson").poisson_newton     # imported on first use
    hist = np.zeros(max_iter)
    opts = NewtonOptions(float(tol), int(max_iter), float(max_step), bool(backtrack), False,
                         float(settle))
    args = (_f(phi0), *problem.kernel_args(), problem.boundaries(), opts, hist)
    if start_densities:
        out = np.empty((5, problem.z.shape[0]))
        phi, steps, conv, upd = poisson_newton(*args, out)
        start = Densities(out[0], out[1], out[2], out[3], problem.fixed_density(), out[4])
    else:
        phi, steps, conv, upd = poisson_newton(*args)
        start = None
    return PoissonSolution(phi, int(steps), bool(conv), float(upd), hist[:steps].copy(), start)


@dataclass
class Densities:
    """Node densities in nm^-3 (sheets spread as s/w), charge
    rho = p - n + nd_plus - na_minus + fixed (``fixed``: the fixed sheets, bound polarization
    charge, spread as s/w; 0 without).  ``mobile_slope``: d(n + p)/d phi in nm^-3 V^-1, where
    the evaluation gave it (None otherwise)."""
    n: np.ndarray
    p: np.ndarray
    nd_plus: np.ndarray
    na_minus: np.ndarray
    fixed: np.ndarray = 0.0
    mobile_slope: np.ndarray = None

    @property
    def rho(self):
        return self.p - self.n + self.nd_plus - self.na_minus + self.fixed


def densities(problem, phi):
    from selfcon.solver.kernels.poisson import node_densities
    n, p, ndp, nam, _ = node_densities(_f(phi), *problem.kernel_args())
    return Densities(n, p, ndp, nam, problem.fixed_density())


def total_charge(problem, phi):
    """FV integral of rho (nm^-2, units of q), sheets included."""
    return float(np.sum(densities(problem, phi).rho * problem.w))


def neutral_potential(ec0, ev0, nc, nv, nd, ed, na, ea, kT, full_ionization=False, valleys=(),
                      holes=(), efn=0.0, efp=0.0):
    """phi (V) at which bulk material with these (one cell's) parameters is neutral.

    rho(phi) = p - n + Nd+ - Na- decreases strictly with phi; a bracket around the band
    gap is widened until rho changes sign, then brentq (xtol 1e-13 V).  ``valleys``: further
    conduction valleys (edge, effective DOS); ``holes``: further valence bands (edge, DOS);
    ``efn``, ``efp``: the electrons' and holes' Fermi levels (eV; dopants occupied with 0),
    the same charge model as the kernels."""
    from scipy.optimize import brentq
    from selfcon.solver.kernels import statistics as ks
    full = bool(full_ionization)

    def rho(phi):
        ec = ec0 - phi
        ev = ev0 - phi
        n = nc * ks.fermi_half((efn - ec) / kT) if nc > 0 else 0.0
        p = nv * ks.fermi_half((ev - efp) / kT) if nv > 0 else 0.0
        for ecv, ncv in valleys:           # further conduction valleys (X, L)
            if ncv > 0:
                n += ncv * ks.fermi_half((phi - ecv + efn) / kT)
        for evv, nvv in holes:             # further valence bands (strained light hole)
            if nvv > 0:
                p += nvv * ks.fermi_half((evv - phi - efp) / kT)
        return (p - n + ks.donor_ionized(nd, ec, ed, kT, full)[0]
                - ks.acceptor_ionized(na, ev, ea, kT, full)[0])

    lo, hi = min(ec0, ev0) - 0.5, max(ec0, ev0) + 0.5
    for _ in range(60):
        if rho(lo) > 0:
            break
        lo -= 1.0 + (hi - lo)
    for _ in range(60):
        if rho(hi) < 0:
            break
        hi += 1.0 + (hi - lo)
    r_lo, r_hi = rho(lo), rho(hi)
    if not (r_lo > 0 > r_hi):
        # an end where rho is exactly 0 lies so far out that every density underflowed: the
        # carriers present cannot neutralise this material (an undoped layer with electrons
        # only); a far end would be a band edge ~1e18 eV from the Fermi level
        raise ValueError("neutral_potential: no carriers can neutralise this material "
                         "(an undoped or compensated layer without the carrier of the other "
                         "sign, or nc and nv both zero with net doping)")
    return brentq(rho, lo, hi, xtol=1e-13, rtol=4 * np.finfo(float).eps, maxiter=500)


def can_neutralise(problem, c) -> bool:
    """Whether the mobile carriers of ``problem`` can make cell c neutral: electrons need
    net donors (Nd > Na), holes net acceptors, an undoped or exactly compensated cell both.
    (At a potential far from the gap every dopant is ionised and the carriers of one sign
    vanish, so rho tends to Nd - Na plus the carriers of the other sign.)"""
    p = problem
    electrons = p.nc[c] > 0 or bool(np.any(p.nc_v[:, c] > 0))
    holes = p.nv[c] > 0 or bool(np.any(p.nv_v[:, c] > 0))
    net = p.nd[c] - p.na[c]
    return (electrons and net > 0) or (holes and net < 0) or (electrons and holes)


def cell_neutral_potential(problem, c):
    """neutral_potential for cell c of a problem."""
    p = problem
    valleys = [(p.ec0_v[v, c], p.nc_v[v, c]) for v in range(p.ec0_v.shape[0])]
    holes = [(p.ev0_v[v, c], p.nv_v[v, c]) for v in range(p.ev0_v.shape[0])]
    return neutral_potential(p.ec0[c], p.ev0[c], p.nc[c], p.nv[c], p.nd[c], p.ed[c], p.na[c],
                             p.ea[c], p.kT, p.full_ionization, valleys, holes, p.efn, p.efp)


def electric_field(z, phi, coefficients=None):
    """E = -dphi/dz at the nodes in V/cm (z in nm, phi in V), the field a result reports.

    Second-order differences on the nonuniform mesh: inside, the three-point formula
    (hr s_left + hl s_right)/(hl + hr) of the two neighbouring cell slopes; at the two
    ends the one-sided three-point formula (numpy.gradient, edge_order=2); exact for a
    quadratic potential, i.e. a uniform charge (two nodes: the one slope).
    ``coefficients``: :func:`gradient_coefficients` of ``z`` if made already (they depend
    on the mesh alone; the result assembly keeps them with the structure)."""
    z = _f(z)
    phi = _f(phi)
    if z.size < 3:
        g = np.gradient(phi, z)
    else:
        g = _gradient2(phi, z, coefficients)
    return -g * NM_PER_CM


def gradient_coefficients(x):
    """The weights of :func:`_gradient2` on the nodes ``x`` (>= 3): ``(h,)`` for a uniform
    spacing, else the (a, b, c) arrays of the inside nodes and the (a, b, c) of each end,
    numpy.gradient's expressions of the steps."""
    dx = np.diff(x)
    if (dx == dx[0]).all():
        return (dx[0],)
    dx1, dx2 = dx[:-1], dx[1:]
    inside = (-(dx2) / (dx1 * (dx1 + dx2)), (dx2 - dx1) / (dx1 * dx2), dx1 / (dx2 * (dx1 + dx2)))
    dx1, dx2 = dx[0], dx[1]
    top = (-(2. * dx1 + dx2) / (dx1 * (dx1 + dx2)), (dx1 + dx2) / (dx1 * dx2),
           - dx1 / (dx2 * (dx1 + dx2)))
    dx1, dx2 = dx[-2], dx[-1]
    bottom = ((dx2) / (dx1 * (dx1 + dx2)), - (dx2 + dx1) / (dx1 * dx2),
              (2. * dx2 + dx1) / (dx2 * (dx1 + dx2)))
    return inside, top, bottom


def _gradient2(f, x, coefficients=None):
    """numpy.gradient(f, x, edge_order=2) of 1-D float arrays of >= 3 values, by its own
    formulas term by term (so with its bits; a uniform spacing, all steps equal, takes its
    uniform ones), without its any-axis machinery: the result assembly asks for it once per
    solve (tests/test_field.py compares the two).  ``coefficients``: those of
    :func:`gradient_coefficients` for ``x``."""
    coef = gradient_coefficients(x) if coefficients is None else coefficients
    out = np.empty_like(f)
    if len(coef) == 1:
        h = coef[0]
        out[1:-1] = (f[2:] - f[:-2]) / (2. * h)
        out[0] = (-1.5 / h) * f[0] + (2. / h) * f[1] + (-0.5 / h) * f[2]
        out[-1] = (0.5 / h) * f[-3] + (-2. / h) * f[-2] + (1.5 / h) * f[-1]
        return out
    (a, b, c), top, bottom = coef
    out[1:-1] = a * f[:-2] + b * f[1:-1] + c * f[2:]
    a, b, c = top
    out[0] = a * f[0] + b * f[1] + c * f[2]
    a, b, c = bottom
    out[-1] = a * f[-3] + b * f[-2] + c * f[-1]
    return out


def boundary_flux(problem, phi, rho=None):
    """FV fluxes eps_r dphi/dz (V/nm) at the top and the bottom node, from the half-cell
    balances (consistent with the discretisation; zero at a converged ZERO_FIELD side).
    ``rho``: the node charge at ``phi`` if the caller has it already."""
    from selfcon.solver.kernels.poisson import fv_boundary_flux
    if rho is None:
        rho = densities(problem, phi).rho
    return fv_boundary_flux(_f(phi), problem.h, problem.eps, _f(rho), problem.w)


def boundary_field(problem, phi):
    """Electric field (V/cm) just inside the top and bottom boundaries, from the FV fluxes
    (E = -D/eps of the end cell)."""
    d0, dl = boundary_flux(problem, phi)
    return -d0 / problem.eps[0] * NM_PER_CM, -dl / problem.eps[-1] * NM_PER_CM


#: charge (cm^-2) below which the Gauss check compares with a fixed scale (see gauss_residual)
GAUSS_FLOOR_CM2 = 1e6


def gauss_residual(problem, phi, rho=None):
    """Relative violation of Gauss's law with the FV boundary fluxes.

    With E = -dphi/dz, d(eps E)/dz = Q_EPS0 rho, so
        eps E|_bottom - eps E|_top = Q_EPS0 * int rho dz      (sheets included).
    Returns |lhs - rhs| / max(|eps E_top|, |eps E_bottom|, Q_EPS0 int |rho| dz, floor): the
    violation relative to the boundary fluxes or the charge of the stack counted without
    sign, whichever is larger (a stack between two zero-field ends, whose charge is all
    carriers moved across a broken gap, has no boundary flux to compare with), the floor
    being the flux of GAUSS_FLOOR_CM2 of charge: in an uncharged stack (an undoped well
    between neutral contacts) the fluxes are round-off of phi, and their ratio would
    measure nothing.  ``rho``: the node charge at ``phi`` if the caller has it already.
    :func:`gauss_balance` gives the violation and the scale."""
    violation, scale = gauss_balance(problem, phi, rho)
    return violation / scale


def gauss_balance(problem, phi, rho=None) -> tuple[float, float]:
    """(|lhs - rhs|, the scale) of :func:`gauss_residual`, both fluxes eps_r E in V/nm (a
    sheet of s nm^-2 carries Q_EPS0 s): the violation itself, which the result reports in
    cm^-2 and the sanity check weighs against the precision of the potential."""
    if rho is None:
        rho = densities(problem, phi).rho
    d0, dl = boundary_flux(problem, phi, rho)
    lhs = (-dl) - (-d0)
    rhs = Q_EPS0 * float((rho * problem.w).sum())
    total = Q_EPS0 * float((np.abs(rho) * problem.w).sum())
    scale = max(abs(d0), abs(dl), total, Q_EPS0 * GAUSS_FLOOR_CM2 / CM2_PER_NM2)
    return abs(lhs - rhs), scale
