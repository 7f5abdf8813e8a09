"""Results are checked before they are called converged, and the two causes of garbage seen
(issue "Never lose a file, never call garbage converged"): the ohmic neutral level of a
layer its carriers cannot neutralise, and the temperature range of the statistics."""
from __future__ import annotations

import numpy as np
import pytest

import selfcon
from selfcon.constants import KB_EV
from selfcon.model.structure import build_structure
from selfcon.solver import poisson as P

#: an undoped GaAs layer between a gate and an ohmic substrate, electrons only
UNDOPED_OHMIC = """
title = "undoped layer, ohmic substrate, electrons only"
temperature = {T}
[surface]
contact = "schottky"
barrier = 0.8
[substrate]
contact = "ohmic"
[[layer]]
name = "a"
material = "GaAs"
thickness = 100.0
[physics]
carriers = ["electron"]
[mesh]
step = 2.0
"""


@pytest.mark.parametrize("T", [300.0, 4.0])
def test_ohmic_level_of_an_undoped_layer_without_holes_is_the_intrinsic_level(T):
    deck = selfcon.load_deck(UNDOPED_OHMIC.format(T=T))
    result = selfcon.solve(deck)
    st = build_structure(deck)
    c = st.n_nodes - 2
    nc, nv = st.cell["nc"][c], st.cell["nv"][c]
    gap = st.cell["ec_gamma"][c] - st.cell["ev0"][c]
    kT = KB_EV * T
    # analytic: n = p (Boltzmann) gives Ec - EF = Eg/2 + (kT/2) ln(Nc/Nv)
    expected = 0.5 * gap + 0.5 * kT * np.log(nc / nv)
    ec_substrate = result.profile["conduction_band"][-1]
    assert ec_substrate == pytest.approx(expected, abs=1e-9)
    assert result.converged
    assert np.all(np.abs(result.profile["conduction_band"]) < 2.0)   # no 1e18 eV edges


def test_neutral_level_refuses_a_material_its_carriers_cannot_neutralise():
    # electrons only, undoped: rho = -n < 0 at every potential (analytic); it used to
    # return a bracket end ~1e18 V away
    with pytest.raises(ValueError, match="no carriers can neutralise"):
        P.neutral_potential(1.5, 0.0, 4e-4, 0.0, 0.0, 0.005, 0.0, 0.026, 0.0259)
