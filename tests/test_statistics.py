"""Statistics kernels: Fermi-Dirac integrals, 2D occupation, ionisation."""
import math

import numpy as np
import pytest
from scipy import integrate, special

from selfcon import constants as C
from selfcon.solver import statistics as st
from selfcon.solver.kernels import statistics as ks


def _fd_quad(eta, j):
    """Normalised F_j by scipy quad of the defining integral, substituting t = u^2
    (smooth integrand, also for j = -1/2): F_j = (2/Gamma(j+1)) int u^(2j+1)/(1+e^(u^2-eta)) du."""
    f = lambda u: u ** (2 * j + 1) * special.expit(eta - u * u)
    top = math.sqrt(max(eta, 0.0) + 60.0)
    pts = [math.sqrt(eta)] if eta > 0 else None
    val, _ = integrate.quad(f, 0.0, top, points=pts, epsabs=0.0, epsrel=1e-13, limit=400)
    return 2.0 * val / math.gamma(j + 1)


ETAS = np.concatenate([np.linspace(-50, 100, 76), [-1.0, -0.999, -1.001, 31.999, 32.0, 32.001,
                                                   0.0, 0.5, 7.5, 15.3]])


def test_fermi_half_vs_quad():
    # reference: scipy.integrate.quad of the defining integral; target 1e-10 relative (issue 3)
    got = st.fermi_half(ETAS)
    ref = np.array([_fd_quad(e, 0.5) for e in ETAS])
    assert np.max(np.abs(got / ref - 1.0)) < 1e-10


def test_fermi_half_deriv_vs_quad():
    # reference: scipy.integrate.quad of F_{-1/2}'s defining integral, 1e-10 relative
    got = st.fermi_half_deriv(ETAS)
    ref = np.array([_fd_quad(e, -0.5) for e in ETAS])
    assert np.max(np.abs(got / ref - 1.0)) < 1e-10


def test_fermi_half_limits():
    # analytic limits: F -> e^eta (eta -> -inf); degenerate limit with the first Sommerfeld
    # correction F -> eta^1.5/Gamma(5/2) (1 + pi^2/(8 eta^2)) (next term ~ eta^-4)
    assert ks.fermi_half(-40.0) == pytest.approx(math.exp(-40.0), rel=1e-15)
    assert ks.fermi_half(1e4) == pytest.approx(
        1e6 / (0.75 * math.sqrt(math.pi)) * (1 + math.pi ** 2 / 8e8), rel=1e-14)
    assert ks.fermi_half(-1e6) == 0.0 and ks.fermi_mhalf(-1e6) == 0.0
    assert np.isfinite(ks.fermi_half(1e7)) and np.isfinite(ks.fermi_mhalf(1e7))


def test_scalar_and_array_agree():
    # consistency of the scalar kernel and its array wrapper
    e = np.array([-3.0, 0.2, 12.0, 40.0])
    assert np.array_equal(ks.fermi_half_array(e), np.array([ks.fermi_half(x) for x in e]))


def test_log1pexp_safe():
    # analytic: ln(1+e^x) -> x for x >> 0, -> e^x for x << 0; no overflow at +-1000
    assert ks.log1pexp(1000.0) == 1000.0
    assert ks.log1pexp(-1000.0) == 0.0
    assert ks.log1pexp(-30.0) == pytest.approx(math.exp(-30.0), rel=1e-14)
    assert ks.log1pexp(0.0) == pytest.approx(math.log(2.0), rel=1e-15)
    assert np.all(np.isfinite(st.log1pexp(np.array([-1e308, 1e308]))))


def test_dos2d_gaas_number():
    # textbook 2D DOS m*/(pi hbar^2) for m* = 0.067, from CODATA constants directly,
    # and the trade's number 2.80e10 cm^-2 meV^-1 (issue 3, "textbook 2D density of states")
    m = 0.067 * C.M0
    dos_si = m / (math.pi * C.HBAR ** 2)                    # J^-1 m^-2
    dos_cm2_mev = dos_si * C.Q * 1e-3 * 1e-4               # cm^-2 meV^-1
    assert dos_cm2_mev == pytest.approx(2.80e10, rel=0.01)
    # low T: one subband 10 meV below EF holds dos * 10 meV
    kT = C.KB_EV * 0.1
    ns = ks.subband_density(np.array([-0.010]), np.array([st.dos2d(0.067)]), kT, 1)[0]
    assert ns * C.CM2_PER_NM2 == pytest.approx(dos_cm2_mev * 10.0, rel=1e-9)


def test_subband_density_electrons_holes():
    # analytic: n_k = D kT ln(1+exp(-E/kT)); holes mirror with E -> -E
    kT = 0.025
    e = np.array([-0.05, 0.0, 0.05])
    d = np.array([1.0, 2.0, 3.0])
    n = ks.subband_density(e, d, kT, 1)
    p = ks.subband_density(-e, d, kT, -1)
    assert np.allclose(n, d * kT * np.log1p(np.exp(-e / kT)), rtol=1e-14)
    assert np.allclose(n, p, rtol=1e-15)
    # no overflow at 0.1 K with meV-scale energies
    kT = C.KB_EV * 0.1
    n = ks.subband_density(np.array([-1.0, 1.0]), np.array([1.0, 1.0]), kT, 1)
    assert n[0] == pytest.approx(1.0, rel=1e-14) and n[1] == 0.0


@pytest.mark.parametrize("T", [0.1, 4.2, 77.0, 300.0, 600.0])
def test_ionisation_safe_and_limits(T):
    # common practice: g = 2 donors, g = 4 acceptors; finite from 0.1 K to 600 K
    kT = C.KB_EV * T
    for ec in (-2.0, -0.01, 0.0, 0.005, 0.01, 2.0):
        f, d = ks.donor_ionized(1.0, ec, 0.006, kT, False)
        assert np.isfinite(f) and np.isfinite(d) and 0.0 <= f <= 1.0 and d >= 0.0
        g, dg = ks.acceptor_ionized(1.0, -ec, 0.026, kT, False)
        assert np.isfinite(g) and np.isfinite(dg) and 0.0 <= g <= 1.0 and dg <= 0.0
    # analytic: donor level at EF (Ec = Ed) -> 1/(1+2) ionised; acceptor level at EF -> 1/5
    assert ks.donor_ionized(1.0, 0.006, 0.006, kT, False)[0] == pytest.approx(1 / 3, rel=1e-14)
    assert ks.acceptor_ionized(1.0, -0.026, 0.026, kT, False)[0] == pytest.approx(1 / 5, rel=1e-14)
    assert ks.donor_ionized(1.0, 0.0, 0.006, kT, True) == (1.0, 0.0)


def test_ionisation_derivative():
    # d(Nd+)/dEc and d(Na-)/dEv against central differences (analytic derivative check)
    kT = 0.01
    for x in (-0.03, 0.0, 0.02):
        h = 1e-6
        num = (ks.donor_ionized(2.0, x + h, 0.01, kT, False)[0]
               - ks.donor_ionized(2.0, x - h, 0.01, kT, False)[0]) / (2 * h)
        assert ks.donor_ionized(2.0, x, 0.01, kT, False)[1] == pytest.approx(num, rel=1e-6)
        num = (ks.acceptor_ionized(2.0, x + h, 0.01, kT, False)[0]
               - ks.acceptor_ionized(2.0, x - h, 0.01, kT, False)[0]) / (2 * h)
        assert ks.acceptor_ionized(2.0, x, 0.01, kT, False)[1] == pytest.approx(num, rel=1e-6)


@pytest.mark.parametrize("sign", [1, -1])
def test_shifted_subband_profile(sign):
    # the predictor density of the exchange-correlation update: sum_k w_ik D_k kT ln(1 +
    # exp(sign (EF - E_k + shift_i)/kT)) on the listed nodes, zero elsewhere (definition,
    # against numpy's logaddexp)
    rng = np.random.default_rng(3)
    n, k, kT, fermi = 40, 6, 0.0259, 0.013
    weight = rng.random((n, k))
    weight[:5] = 0.0
    energy = sign * rng.uniform(-0.1, 0.2, k) - 1.5 * (sign < 0)
    dos = rng.uniform(1.0, 3.0, k)
    shift = rng.uniform(-0.02, 0.02, n)
    rows = np.arange(3, 35)
    got = ks.subband_profile(weight, energy, dos, shift, rows, sign, fermi, kT)
    x = sign * (fermi - energy[None, :] + shift[:, None]) / kT
    want = np.sum(weight * kT * np.logaddexp(0.0, x) * dos[None, :], axis=1)
    assert np.allclose(got[rows], want[rows], rtol=1e-14, atol=0.0)
    assert np.all(np.delete(got, rows) == 0.0)
