"""Heavy doping: Pearson-Bardeen binding energies and the Mott density (issue 12).

Closed forms: E(N) = E_0 (1 - (N/N_M)^(1/3)) below N_M, 0 above (Pearson and Bardeen,
Phys. Rev. 75, 865 (1949)); N_M^(1/3) a_B* = 0.26 (Mott's criterion, Mott, Can. J. Phys. 34,
1356 (1956); the constant of Edwards and Sigel, Phys. Rev. B 17, 2575 (1978), from memory),
a_B* = a_0 eps_r / m*, a_0 = 0.0529177210903 nm (CODATA 2018).
"""
import numpy as np
import pytest

import selfcon
from selfcon.model import dopants

A0 = 0.0529177210903            # nm, CODATA 2018
# GaAs: eps 12.9 (Sze and Ng 2007), m_e 0.067 (Vurgaftman et al. 2001), Si donor 5.8 meV
# (common practice): a_B* = 10.189 nm, N_M = (0.26/a_B*)^3 = 1.6618e16 cm^-3
N_M_GAAS = (0.26 / (A0 * 12.9 / 0.067)) ** 3 * 1e21      # cm^-3


def _deck(layers, temperature=4.0, carriers='["electron"]', ionization="thermal"):
    body = "".join(f'[[layer]]\nname = "l{i}"\nmaterial = "GaAs"\nthickness = 50.0\n{extra}\n'
                   for i, extra in enumerate(layers))
    return selfcon.load_deck(f'''
title = "dopants"
temperature = {temperature}
[surface]
contact = "free"
[substrate]
contact = "free"
{body}
[physics]
carriers = {carriers}
ionization = "{ionization}"
[quantum]
regions = []
[mesh]
step = 2.0
''')


def test_mott_density_closed_form():
    assert N_M_GAAS == pytest.approx(1.6618e16, rel=1e-4)          # hand value above
    assert dopants.mott_density(12.9, 0.067) * 1e21 == pytest.approx(N_M_GAAS, rel=1e-12)


def test_pearson_bardeen_binding_in_the_structure():
    dens = (1e14, 2e15, 1e16, 2e18)           # three below N_M = 1.66e16 cm^-3, one above
    st = selfcon.build_structure(_deck([f"donors = {d:g}" for d in dens]))
    got = [st.cell["donor_binding"][st.cell_layer == i][0] for i in range(len(dens))]
    for N, e in zip(dens[:3], got[:3]):
        assert e == pytest.approx(5.8e-3 * (1 - (N / N_M_GAAS) ** (1 / 3)), rel=1e-9)
    # by hand: 1e14 -> 5.8 meV (1 - 0.1818) = 4.745 meV; 1e16 -> 5.8 (1 - 0.8441) = 0.904 meV
    assert got[0] == pytest.approx(4.745e-3, abs=2e-6)
    assert got[2] == pytest.approx(0.904e-3, abs=2e-6)
    assert got[3] == 0.0                                   # above N_M: merged with the band


def test_acceptors_count_donors_too_and_use_the_valence_mass():
    # N = Nd + Na (compensation adds impurities); acceptor N_M from m_v = 0.5717 (the
    # spherical DOS mass, see test_materials): a_B* = 1.1941 nm, N_M = 1.0324e19 cm^-3
    st = selfcon.build_structure(_deck(["acceptors = 1e17\ndonors = 1e16"],
                                       carriers='["electron", "heavy_hole", "light_hole"]'))
    n_m = (0.26 / (A0 * 12.9 / 0.57169)) ** 3 * 1e21
    assert n_m == pytest.approx(1.0324e19, rel=1e-3)
    ea = st.cell["acceptor_binding"][0]
    assert ea == pytest.approx(26e-3 * (1 - (1.1e17 / n_m) ** (1 / 3)), rel=1e-4)
    assert st.cell["donor_binding"][0] == 0.0             # 1.1e17 > N_M of donors


def test_sheet_binding_uses_the_impurity_spacing():
    # a sheet s is given N = s^(3/2) (selfcon.model.dopants): 1e10 cm^-2 -> 1e15 cm^-3;
    # 3e12 cm^-2 -> 5.2e18 cm^-3, above N_M
    st = selfcon.build_structure(_deck(["sheet_donors = 1e10", "sheet_donors = 3e12"]))
    i1, i2 = np.flatnonzero(st.sheet_donors)
    assert st.sheet_ed[i1] == pytest.approx(5.8e-3 * (1 - (1e15 / N_M_GAAS) ** (1 / 3)), rel=1e-9)
    assert st.sheet_ed[i2] == 0.0


def test_n_plus_gaas_does_not_freeze_out_at_4K():
    # issue 12: 2e18 cm^-3 (above N_M = 1.7e16) at 4 K is metallic: n >= 0.9 Nd.  With the
    # dilute 5.8 meV level it froze out to 5.7e12 cm^-3.
    r = selfcon.solve(_deck(["donors = 2e18"] * 2))
    assert r.converged
    n = np.asarray(r.profile["electron_density"])
    assert n.min() >= 0.9 * 2e18
    assert np.asarray(r.profile["ionized_donors"]).min() == pytest.approx(2e18, rel=1e-12)


def test_dilute_donors_still_freeze_out():
    # 1e14 cm^-3 at 4 K, uncompensated: nondegenerate freeze-out n = sqrt(Nc Nd / 2)
    # exp(-E/2kT) with E = 4.745 meV (Pearson-Bardeen at 1e14, above) (common practice,
    # e.g. Sze and Ng 2007 ch. 1, the low-temperature limit)
    r = selfcon.solve(_deck(["donors = 1e14"] * 2))
    nc = 2.509e19 * (0.067 * 4.0 / 300.0) ** 1.5                 # cm^-3, Nc(T)
    kT = 8.617333262e-5 * 4.0
    expect = np.sqrt(nc * 1e14 / 2) * np.exp(-4.745e-3 / (2 * kT))
    n = float(np.median(r.profile["electron_density"]))
    assert n == pytest.approx(expect, rel=0.02)
