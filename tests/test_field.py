"""The electric field a result reports, against a closed form.

A fully depleted n layer under a Schottky gate, with a zero-field (free) bottom: with full
ionisation and no free carriers left, Gauss's law gives exactly the depletion-approximation
field of a layer depleted to the bottom, W = L,

    E(z) = -q N (W - z) / (eps0 eps_r)       (Sze & Ng, Physics of Semiconductor Devices,
                                              3rd ed., 2007, the depletion approximation:
                                              |E| = q N (W - x)/eps_s, pointing to the metal)

and the finite-volume potential of a uniform charge is exactly quadratic at the nodes, so
the reported field must match to the Newton tolerance at every node, ends included.
"""
import h5py
import numpy as np

import selfcon

Q = 1.602176634e-19          # C (CODATA 2018, exact)
EPS0 = 8.8541878128e-14      # F/cm (CODATA 2018)
N_D = 1e17                   # cm^-3
L_NM = 50.0

DEPLETED = f"""
title = "fully depleted n-GaAs layer"
temperature = 77.0
[surface]
contact = "schottky"
barrier = 0.8
[substrate]
contact = "free"
[[layer]]
material = "GaAs"
thickness = {L_NM}
donors = {N_D:g}
[physics]
carriers = ["electron"]
ionization = "full"
[mesh]
step = 1.0
"""


def test_field_in_the_result_is_the_depletion_field(tmp_path):
    deck = selfcon.load_deck(DEPLETED)
    st = selfcon.build_structure(deck)
    r = selfcon.solve(deck, structure=st, tolerance=1e-10)
    assert r.converged, r.message
    # no free carriers to speak of: the layer is depleted to the bottom (else the case is void)
    assert r.summary["electron_sheet_density_cm2"] < 1e-6 * N_D * L_NM * 1e-7
    eps_r = float(st.cell["eps"][0])
    z_cm = r.z * 1e-7
    expected = -Q * N_D * (L_NM * 1e-7 - z_cm) / (EPS0 * eps_r)         # V/cm, towards the gate
    field = r.profile["electric_field"]
    assert np.ptp(r.z[1:] - r.z[:-1]) > 0                                 # a graded (nonuniform) mesh
    np.testing.assert_allclose(field, expected, rtol=1e-6, atol=1e-6 * abs(expected[0]))
    # the file holds the same numbers, in V/cm (read back with plain h5py)
    r.save(tmp_path / "depleted.h5")
    with h5py.File(tmp_path / "depleted.h5", "r") as f:
        ds = f["profile/electric_field"]
        assert ds.attrs["units"] == "V/cm"
        np.testing.assert_allclose(ds[()], expected, rtol=1e-6, atol=1e-6 * abs(expected[0]))


def test_field_gradient_is_numpys():
    """The field's derivative (selfcon.solver.poisson._gradient2) takes numpy.gradient's
    edge_order=2 formulas term by term: the same bits on nonuniform and uniform meshes
    (numpy itself is the reference)."""
    from selfcon.solver.poisson import _gradient2
    rng = np.random.default_rng(3)
    for n in (3, 4, 7, 300):
        for x in (np.cumsum(rng.uniform(0.05, 2.0, n)), np.arange(n) * 0.25, np.linspace(0.0, 37.0, n)):
            f = rng.normal(size=n) * 10.0 ** rng.integers(-4, 4)
            assert np.array_equal(_gradient2(f, x), np.gradient(f, x, edge_order=2))
