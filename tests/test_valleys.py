"""X and L conduction valleys: classical electrons (3D density of states) when the deck asks."""
import math

import numpy as np
import pytest
from scipy.integrate import quad
from scipy.optimize import brentq

import selfcon
from selfcon.input import materials
from selfcon.errors import SelfconInputError

BULK_ALAS = """
title = "bulk n-AlAs"
temperature = 300.0
[surface]
contact = "ohmic"
[substrate]
contact = "ohmic"
[[layer]]
material = "AlAs"
thickness = 100.0
donors = 1e18
[physics]
carriers = ["electron", "x_electron", "l_electron"]
ionization = "full"
[quantum]
regions = []
"""

# CODATA 2018 (independent of selfcon.constants on purpose)
HBAR, M0, KB, Q = 1.054571817e-34, 9.1093837015e-31, 1.380649e-23, 1.602176634e-19


def nc_si(m_dos, T, valleys=1):
    """Effective density of states 2 g (m kT / 2 pi hbar^2)^(3/2) in cm^-3 (textbook)."""
    return valleys * 2.0 * (m_dos * M0 * KB * T / (2 * math.pi * HBAR**2)) ** 1.5 * 1e-6


def f_half(eta):
    """Normalised F_1/2 by scipy.integrate.quad of the defining integral."""
    val, _ = quad(lambda t: math.sqrt(t) / (1.0 + math.exp(min(t - eta, 700.0))), 0, max(eta, 0) + 60)
    return 2.0 / math.sqrt(math.pi) * val


def test_bulk_alas_electrons_sit_in_x_and_neutralise_the_donors():
    T = 300.0
    r = selfcon.solve(selfcon.load_deck(BULK_ALAS))
    assert r.converged
    p = materials.cell_parameters("AlAs", np.array([np.nan]), T)
    kT = KB * T / Q
    bands = [(float(p["ec_gamma"][0]), nc_si(float(p["m_e"][0]), T)),
             (float(p["ec_x"][0]), nc_si((p["m_x_l"][0] * p["m_x_t"][0] ** 2) ** (1 / 3), T, 3)),   # 3 X valleys
             (float(p["ec_l"][0]), nc_si((p["m_l_l"][0] * p["m_l_t"][0] ** 2) ** (1 / 3), T, 4))]   # 4 L valleys
    # independent neutrality: sum_v Nc_v F1/2((EF - Ev)/kT) = Nd, with EF measured from each edge
    def excess(ef):
        return sum(nc * f_half((ef - e) / kT) for e, nc in bands) - 1e18
    ef = brentq(excess, -2.0, 4.0, xtol=1e-12)
    n_x = bands[1][1] * f_half((ef - bands[1][0]) / kT)
    n_l = bands[2][1] * f_half((ef - bands[2][0]) / kT)
    i = r.z.size // 2
    assert r.profile["electron_density"][i] == pytest.approx(1e18, rel=1e-8)        # neutrality
    assert r.profile["x_electron_density"][i] == pytest.approx(n_x, rel=1e-6)
    assert r.profile["l_electron_density"][i] == pytest.approx(n_l, rel=1e-6)
    # X is the lowest valley of AlAs (Vurgaftman 2001: Eg_X 2.24 < Eg_L 2.46 < Eg_Gamma 3.099 eV at 0 K)
    assert r.profile["x_electron_density"][i] > 0.9e18
    # the X-edge profile sits the material's X-Gamma offset from the Gamma edge
    assert r.profile["conduction_band_x"][i] - r.profile["conduction_band"][i] == pytest.approx(
        bands[1][0] - bands[0][0], abs=1e-12)
    assert r.summary["x_electron_sheet_density_cm2"] == pytest.approx(n_x * 100e-7, rel=1e-3)
    assert r.warnings == []


def test_uncounted_valley_is_a_warning():
    r = selfcon.solve(selfcon.load_deck(BULK_ALAS.replace(', "x_electron", "l_electron"', "")))
    assert any("X valley" in w and "x_electron" in w for w in r.warnings)
    assert "x_electron_density" not in r.profile


def test_valleys_need_their_material_data():
    deck = BULK_ALAS.replace('material = "AlAs"', 'material = "Mine"') + """
[material.Mine]
band_gap = 2.0
valence_band_offset = -1.0
electron_mass = 0.1
permittivity = 11.0
"""
    with pytest.raises(SelfconInputError, match="x_gap"):
        selfcon.solve(selfcon.load_deck(deck))


def test_gauss_law_holds_with_valleys():
    deck = selfcon.load_deck(BULK_ALAS).with_overrides({"surface.contact": "schottky", "surface.barrier": 0.5})
    r = selfcon.solve(deck)
    assert r.converged
    assert r.summary["gauss_residual"] < 1e-8         # invariant (Gauss's law, FV fluxes)


def test_valley_density_is_the_dual_cell_average_of_both_half_cells():
    # the assembly's classical valley density (selfcon.output.assemble.valley_density) against
    # its definition evaluated directly: each half cell with its own edge and its node's
    # potential, F_1/2 of both halves, averaged with the dual widths -- on uniform layers,
    # where a node's two halves share their argument, and on a graded stretch, where not
    from selfcon.output.assemble import valley_density
    from selfcon.solver.statistics import fermi_half
    st = selfcon.build_structure(selfcon.load_deck("inputs/hemt_300K.toml"))
    m = st.mesh
    rng = np.random.default_rng(5)
    phi = np.linspace(-0.3, 0.4, st.n_nodes) + 0.01 * rng.normal(size=st.n_nodes)
    for edge in (np.asarray(st.cell["ec_x"], dtype=float),
                 np.asarray(st.cell["ec_x"], dtype=float) + np.where(rng.random(st.n_nodes - 1) < 0.2,
                                                                    rng.normal(0, 0.02, st.n_nodes - 1), 0.0)):
        nc = np.asarray(st.cell["nc_x"], dtype=float)
        efn = st.fermi_levels[0]
        left, right = np.zeros(m.n), np.zeros(m.n)
        left[1:] = nc * fermi_half((phi[1:] - edge + efn) / st.kT)
        right[:-1] = nc * fermi_half((phi[:-1] - edge + efn) / st.kT)
        assert np.array_equal(valley_density(st, phi, edge, nc), (m.wl * left + m.wr * right) / m.w)
