"""Mesh and structure: nodes on every interface/sheet/region end, coarse in bulk,
per-cell arrays equal to the material library values."""
import numpy as np
import pytest

import selfcon
from selfcon.model.mesh import build_mesh, graded_steps, uniform_mesh

DECK = """
title = "structure test"
temperature = 300.0
[surface]
contact = "schottky"
barrier = 0.8
[substrate]
contact = "ohmic"
[[layer]]
name = "cap"
material = "GaAs"
thickness = 7.3
[[layer]]
name = "graded"
material = "AlGaAs"
x = [0.0, 0.3]
thickness = 20.0
sheet_donors = 2e12
[[layer]]
name = "buffer"
material = "GaAs"
thickness = 1000.0
donors = 1e15
[quantum]
regions = [[0.0, 60.0]]
"""


def test_steps_fill_segment_and_grade():
    s = graded_steps(100.0, 0.1, 2.0, 1.2)
    assert s.sum() == pytest.approx(100.0, abs=1e-12)
    assert s.max() <= 2.0 + 1e-12 and s[0] < 0.11
    ratios = s[1:] / s[:-1]
    assert np.all(ratios < 1.2 + 1e-9) and np.all(ratios > 1 / 1.2 - 1e-9)


def test_structure_nodes_and_arrays():
    deck = selfcon.load_deck(DECK)
    st = selfcon.build_structure(deck)
    z = st.z
    for p in (0.0, 7.3, 17.3, 27.3, 60.0, 1027.3):       # interfaces, sheet centre, region end
        assert np.min(np.abs(z - p)) < 1e-12
    # a 1 um classical buffer must not cost thousands of nodes (issue 2)
    assert st.n_nodes < 1000
    # sheet density lands on the node at the layer centre, in nm^-2 (1 nm^-2 = 1e14 cm^-2)
    i = int(np.argmin(np.abs(z - 17.3)))
    assert st.sheet_donors[i] * 1e14 == pytest.approx(2e12)
    assert st.sheet_donors.sum() * 1e14 == pytest.approx(2e12)
    # graded layer: x linear in z, from 0 to 0.3
    sel = st.cell_layer == 1
    zc = 0.5 * (z[:-1] + z[1:])[sel]
    np.testing.assert_allclose(st.x_cell[sel], 0.3 * (zc - 7.3) / 20.0, atol=1e-12)
    # GaAs cells carry the GaAs Gamma edge: VBO + Eg(300 K) = -0.80 + 1.4225 eV (Vurgaftman 2001, Table I)
    assert st.cell["ec_gamma"][0] == pytest.approx(-0.80 + 1.519 - 5.405e-4 * 300**2 / (300 + 204), abs=1e-9)
    # donors converted to nm^-3 (1 nm^-3 = 1e21 cm^-3)
    assert st.cell["donors"][st.cell_layer == 2][0] * 1e21 == pytest.approx(1e15)
    # regions are node ranges whose ends are the region ends
    (i0, i1), = st.regions
    assert z[i0] == 0.0 and z[i1] == pytest.approx(60.0)
    # finite-volume dual widths add up to the stack
    assert st.mesh.w.sum() == pytest.approx(1027.3)


def test_uniform_mesh_has_key_points():
    m = uniform_mesh(100.0, 0.5, key_points=(10.25,))
    assert np.min(np.abs(m.z - 10.25)) < 1e-12
    assert m.z[0] == 0.0 and m.z[-1] == 100.0


def test_build_mesh_caps():
    m = build_mesh([0.0, 50.0, 550.0], [(0.0, 50.0)], step=0.5)
    h_q = m.h[m.z[:-1] < 50.0]
    h_b = m.h[m.z[:-1] >= 50.0]
    assert h_q.max() <= 0.5 + 1e-12
    assert h_b.max() > 2.0       # bulk classical part is coarse (bulk_step default 20 x step)
