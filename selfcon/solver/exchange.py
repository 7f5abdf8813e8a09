"""Local-density exchange–correlation potential of a carrier gas (physics.exchange_correlation).

The potential energy a carrier feels from the exchange and correlation holes of the other
carriers of its kind, as a function of their local density n(z), in the local effective
atomic units of the host: the effective Bohr radius a* = 4 pi eps hbar^2 / (m* e^2) =
a_0 eps_r / m* and the effective Rydberg Ry* = e^2 / (8 pi eps a*) = Ry m* / eps_r^2.  With the
density parameter r_s = (4 pi a*^3 n / 3)^(-1/3) and x = r_s / A:

    V_xc = -(2 / (pi alpha r_s)) Ry* [1 + B x ln(1 + 1/x)],   alpha = (4 / (9 pi))^(1/3).

The first term alone is the Kohn–Sham exchange potential -(e^2 / 4 pi eps) (3 n / pi)^(1/3);
the second is correlation, -C ln(1 + A / r_s) Ry* with C = 2 B / (pi alpha A).

Parametrizations (``FORMS``, the deck's values):

* ``lda``: Hedin and Lundqvist, J. Phys. C 4, 2064 (1971), A = 21, B = 0.7734
  (C = 0.045 Ry), in the form used for GaAs heterojunctions by Stern and Das Sarma,
  Phys. Rev. B 30, 840 (1984).
* ``lda-gl``: Gunnarsson and Lundqvist, Phys. Rev. B 13, 4274 (1976), A = 11.4,
  B = 0.6213 (their 0.0545 r_s ln(1 + 11.4 / r_s)).

The potential enters the Schrödinger equation of the carrier only (Poisson keeps the
Hartree potential).  The self-consistent loop (selfcon/solver/steps.py::update_exchange)
takes n(z) of the carrier at the current potential from the previous iteration's subbands
(the predictor density) and re-solves the states with it; the predictor's Poisson Jacobian
carries no dV_xc/dn (tools/bench.py, row "xc", shows the iteration count it costs).

Units: densities in nm^-3, masses in m0, eps relative, energies in eV.
"""
from __future__ import annotations

import math

import numpy as np

from selfcon.constants import BOHR_RADIUS_NM, RYDBERG_EV

#: (4 / (9 pi))^(1/3): k_F = 1 / (alpha r_s a*)
ALPHA = (4.0 / (9.0 * math.pi)) ** (1.0 / 3.0)
#: deck value -> (A, B, source) of the correlation factor 1 + B x ln(1 + 1/x), x = r_s / A
FORMS = {
    "lda": (21.0, 0.7734, "Hedin and Lundqvist, J. Phys. C 4, 2064 (1971), as used by Stern "
                          "and Das Sarma, Phys. Rev. B 30, 840 (1984)"),
    "lda-gl": (11.4, 0.0545 * 11.4, "Gunnarsson and Lundqvist, Phys. Rev. B 13, 4274 (1976)"),
}

__all__ = ["ALPHA", "FORMS", "effective_bohr_radius", "effective_rydberg", "density_parameter",
           "exchange_potential", "xc_potential"]


def effective_bohr_radius(mass, eps):
    """a* = a_0 eps_r / m* in nm (mass in m0, eps relative)."""
    return BOHR_RADIUS_NM * np.asarray(eps, dtype=float) / np.asarray(mass, dtype=float)


def effective_rydberg(mass, eps):
    """Ry* = Ry m* / eps_r^2 in eV (mass in m0, eps relative)."""
    eps = np.asarray(eps, dtype=float)
    return RYDBERG_EV * np.asarray(mass, dtype=float) / (eps * eps)


def density_parameter(n, mass, eps):
    """1 / r_s = (4 pi a*^3 n / 3)^(1/3) (dimensionless; 0 where n = 0).  The inverse is
    returned so that an empty region needs no special case."""
    a = effective_bohr_radius(mass, eps)
    n = np.clip(np.asarray(n, dtype=float), 0.0, None)
    return np.cbrt(4.0 * math.pi * a ** 3 * n / 3.0)


def exchange_potential(n, mass, eps):
    """Exchange part alone, -(2 / (pi alpha r_s)) Ry*, in eV (<= 0)."""
    return _exchange(density_parameter(n, mass, eps), mass, eps)


def _exchange(inv_rs, mass, eps):
    """:func:`exchange_potential` from 1 / r_s (:func:`density_parameter`) already made."""
    return -2.0 / (math.pi * ALPHA) * inv_rs * effective_rydberg(mass, eps)


def xc_potential(n, mass, eps, form: str = "lda"):
    """Exchange–correlation potential energy (eV, <= 0) of carriers of density ``n`` (nm^-3)
    in a host of effective mass ``mass`` (m0) and relative permittivity ``eps``; arrays
    broadcast.  ``form``: a key of :data:`FORMS`.

    Examples
    --------
    >>> from selfcon.solver.exchange import xc_potential, exchange_potential
    >>> n = 1e-3                                  # nm^-3 = 1e18 cm^-3
    >>> round(float(exchange_potential(n, 0.067, 12.9)), 5)
    -0.01101
    >>> bool(xc_potential(n, 0.067, 12.9) < exchange_potential(n, 0.067, 12.9))
    True
    """
    try:
        a_const, b_const, _ = FORMS[form]
    except KeyError:
        raise ValueError(f"unknown exchange-correlation form {form!r}; allowed: "
                         f"{', '.join(FORMS)}") from None
    inv_rs = density_parameter(n, mass, eps)
    # B x ln(1 + 1/x) with 1/x = A / r_s; -> B as n -> 0 (x ln(1 + 1/x) -> 1)
    y = a_const * inv_rs
    with np.errstate(divide="ignore", invalid="ignore"):
        corr = np.where(y > 0.0, b_const * np.log1p(y) / np.where(y > 0.0, y, 1.0), b_const)
    return _exchange(inv_rs, mass, eps) * (1.0 + corr)        # 1 / r_s made once
