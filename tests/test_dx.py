"""Si DX centres (issue 16): layer.donor_species = "Si-DX", the dark cool-down and the
illuminated state.

Sources of the check values:
* the DX level: E_DX = E_L - 0.15 eV, a one-electron level of spin degeneracy 2 (Chand et al.,
  Phys. Rev. B 30, 4481 (1984), from memory; selfcon.model.dopants.DX_MODEL), so its
  ionised fraction is 1 / (1 + 2 exp((EF - E_DX)/kT)) (Fermi-Dirac occupancy of a level of
  degeneracy 2, the closed form; kB = 8.617333262e-5 eV/K, CODATA);
* the dark sheet density: about 3e11 cm^-2 at 4 K for a Si-doped (1e18 cm^-3) Al0.3GaAs /
  GaAs heterojunction with a 20 nm spacer, cooled in the dark (rising to some 5e11 after
  illumination; the persistent photoconductivity reviewed by Mooney, J. Appl. Phys. 67, R1
  (1990), from memory), within +-30 %.
"""
import numpy as np
import pytest

import selfcon
from selfcon.errors import DeckError

KB = 8.617333262e-5          # eV/K (CODATA, exact ratio)
CHAND_BELOW_L = 0.15         # eV, Chand et al. 1984 (from memory)

WAFER = '''
title = "Si-doped Al0.3GaAs heterojunction, 20 nm spacer"
temperature = 4.2
[surface]
contact = "pinned"
barrier = 0.7
[substrate]
contact = "pinned"
barrier = 0.75
[[layer]]
name = "cap"
material = "GaAs"
thickness = 10.0
donors = 1e18
[[layer]]
name = "doped"
material = "AlGaAs"
x = 0.3
thickness = 50.0
donors = 1e18
[[layer]]
name = "spacer"
material = "AlGaAs"
x = 0.3
thickness = 20.0
[[layer]]
name = "channel"
material = "GaAs"
thickness = 500.0
acceptors = 1e14
[quantum]
regions = [[40.0, 200.0]]
'''


def _closed_form(level_minus_ef, temperature):
    return 1.0 / (1.0 + 2.0 * np.exp(-level_minus_ef / (KB * temperature)))


def test_deck_keys_are_checked():
    base = selfcon.load_deck(WAFER)
    assert base.layer("doped").donor_species == "shallow"                   # default, as before
    dx = base.with_overrides(["layer.doped.donor_species=Si-DX", "layer.doped.dx_freeze_temperature=120"])
    assert dx.layer("doped").donor_species == "Si-DX" and dx.layer("doped").dx_freeze_temperature == 120.0
    assert "dx_freeze_temperature = 120.0" in dx.to_toml()
    assert "donor_species" not in base.to_toml()                            # unchanged text and hash
    with pytest.raises(DeckError, match="Si-DX donors only"):
        base.with_overrides({"layer.doped.dx_state": "ionized"})
    with pytest.raises(DeckError, match="AlGaAs and GaAs only"):
        selfcon.load_deck(WAFER.replace('name = "doped"\nmaterial = "AlGaAs"\nx = 0.3',
                                        'name = "doped"\nmaterial = "InAlAs"\nx = 0.52'),
                          {"layer.doped.donor_species": "Si-DX"})
    with pytest.raises(DeckError, match="exclude each other"):
        base.with_overrides({"layer.doped.donor_species": "Si-DX", "layer.doped.dx_state": "ionized",
                             "layer.doped.dx_freeze_temperature": 100.0})
    with pytest.raises(DeckError, match="ionization"):
        base.with_overrides({"layer.doped.donor_species": "Si-DX", "physics.ionization": "full"})
    with pytest.raises(DeckError, match="unknown value"):
        base.with_overrides({"layer.doped.donor_species": "DX"})


def test_ionised_fraction_against_the_closed_form_in_bulk():
    # a thick Si-DX doped Al0.3GaAs layer between two ohmic contacts at 200 K: neutral bulk,
    # EF near the deep level, so the fraction is neither 0 nor 1
    deck = selfcon.load_deck('''
temperature = 200.0
[surface]
contact = "ohmic"
[[layer]]
name = "bulk"
material = "AlGaAs"
x = 0.3
thickness = 400.0
donors = 1e17
donor_species = "Si-DX"
[physics]
carriers = ["electron"]
[quantum]
regions = []
''')
    r = selfcon.solve(deck)
    assert r.converged
    i = int(np.argmin(np.abs(r.z - 200.0)))
    level = r.profile["conduction_band_l"][i] - CHAND_BELOW_L           # E_DX - EF, EF = 0
    expected = _closed_form(level, 200.0)
    assert 0.05 < expected < 0.95
    assert r.profile["ionized_donors"][i] / 1e17 == pytest.approx(expected, rel=1e-6)


@pytest.fixture(scope="module")
def wafer_results():
    deck = selfcon.load_deck(WAFER)
    over = {"shallow": {}, "dx": {"layer.doped.donor_species": "Si-DX"},
            "dark": {"layer.doped.donor_species": "Si-DX", "layer.doped.dx_freeze_temperature": 150.0},
            "lit": {"layer.doped.donor_species": "Si-DX", "layer.doped.dx_state": "ionized"}}
    return {k: selfcon.solve(deck.with_overrides(v)) for k, v in over.items()}


def _channel_ns(r):
    return next(L for L in r.layers if L["name"] == "channel")["electron_sheet_density_cm2"]


def test_equilibrium_ionised_fraction_at_the_converged_fermi_level(wafer_results):
    r = wafer_results["dx"]
    assert r.converged
    # every node of the doped layer's inside: closed form with E_DX from the L edge of the result
    z = r.z
    inside = (z > 12.0) & (z < 58.0)
    level = r.profile["conduction_band_l"][inside] - CHAND_BELOW_L
    expected = 1e18 * _closed_form(level, 4.2)
    got = r.profile["ionized_donors"][inside]
    assert np.allclose(got, expected, rtol=1e-6, atol=1e-6 * 1e18)
    assert np.any((expected > 0.05e18) & (expected < 0.95e18))          # EF at the level somewhere


def test_dark_sheet_density_against_published_value_and_below_shallow(wafer_results):
    dark, shallow = wafer_results["dark"], wafer_results["shallow"]
    assert dark.converged and shallow.converged
    ns_dark = _channel_ns(dark)
    assert ns_dark == pytest.approx(3e11, rel=0.30)             # Mooney 1990 review, from memory
    assert ns_dark < _channel_ns(shallow)
    assert any("dark cool-down" in w and "Chand" in w for w in dark.warnings)


def test_dark_cooldown_keeps_the_occupation_of_the_freeze_temperature(wafer_results):
    # the same wafer solved at 150 K (the freeze temperature): its DX ionised charge is what the
    # 4 K dark state keeps, although the 4 K equilibrium would ionise a different amount
    deck = selfcon.load_deck(WAFER, {"layer.doped.donor_species": "Si-DX", "temperature": 150.0})
    warm = selfcon.solve(deck)
    nd_warm = next(L for L in warm.layers if L["name"] == "doped")["ionized_donor_sheet_density_cm2"]
    dark = wafer_results["dark"]
    nd_dark = next(L for L in dark.layers if L["name"] == "doped")["ionized_donor_sheet_density_cm2"]
    nd_eq = next(L for L in wafer_results["dx"].layers
                 if L["name"] == "doped")["ionized_donor_sheet_density_cm2"]
    assert nd_dark == pytest.approx(nd_warm, rel=2e-3)
    assert nd_eq != pytest.approx(nd_dark, rel=2e-3)


def test_illuminated_state_ionises_every_dx_centre(wafer_results):
    lit = wafer_results["lit"]
    inside = (lit.z > 10.5) & (lit.z < 59.5)
    assert np.allclose(lit.profile["ionized_donors"][inside], 1e18, rtol=1e-12)
    assert _channel_ns(lit) > _channel_ns(wafer_results["dark"])
    assert any("illuminated" in w for w in lit.warnings)
