"""Bias sweeps: charge-control slope, C-V consistency, threshold and the sweep file."""
import json
import math
from pathlib import Path

import h5py
import numpy as np
import pytest

import selfcon
from selfcon.constants import EPS0, Q
from selfcon.design import sweep as sw_mod
from selfcon.design.sweep import sweep_bias

DECK = Path(__file__).resolve().parents[1] / "inputs" / "design" / "gated_delta_10K.toml"
DL_DELTA_D_NM = 8.0   # Delagebeaudeuf and Linh, IEEE Trans. Electron Devices 29, 955 (1982): dd ~ 80 A (from memory)


@pytest.fixture(scope="module")
def coarse():
    deck = selfcon.load_deck(DECK)
    return sweep_bias(deck, np.round(np.arange(-0.9, -0.499, 0.1), 6))


@pytest.fixture(scope="module")
def fine():
    deck = selfcon.load_deck(DECK)
    return sweep_bias(deck, np.round(np.arange(-0.9, -0.499, 0.05), 6))


def test_charge_control_slope(fine):
    a = fine.analysis
    assert fine.all_converged
    assert a["linear_well_conditioned"]
    d = a["gate_channel_distance_nm"]
    assert d == pytest.approx(5 * 12.048 / 12.9 + 31.0, rel=0.02)   # analytic: 5 nm GaAs cap + 31 nm AlGaAs, eps-weighted
    eps = a["barrier_permittivity"]
    model = eps * EPS0 / (Q * (d + DL_DELTA_D_NM) * 1e-9) / 1e4      # cm^-2/V, D&L 1982 charge-control slope
    assert a["linear_slope_cm2_per_V"] == pytest.approx(model, rel=0.15)
    assert 3.0 < a["delta_d_nm"] < 12.0                               # D&L 1982: dd a few nm


def test_capacitance_matches_finer_grid_and_series_picture(coarse, fine):
    # consistency: dQ/dV at the common interior points of the linear region
    for v in (-0.7, -0.6):
        c1 = coarse.capacitance[np.argmin(np.abs(coarse.bias - v))]
        c2 = fine.capacitance[np.argmin(np.abs(fine.bias - v))]
        assert c1 == pytest.approx(c2, rel=0.03)                      # same derivative, half the step
    a = fine.analysis
    c_series = a["barrier_permittivity"] * EPS0 / ((a["gate_channel_distance_nm"] + DL_DELTA_D_NM) * 1e-9) / 1e4
    w0, w1 = a["linear_window_V"]
    inside = (fine.bias > w0) & (fine.bias < w1)
    assert np.any(inside)
    for c in fine.capacitance[inside]:
        assert c == pytest.approx(c_series, rel=0.15)                 # series capacitor eps/(d + dd), D&L 1982
        assert c == pytest.approx(a["linear_capacitance_F_cm2"], rel=0.05)   # the gate charge goes to the channel


def test_thresholds_are_consistent(fine):
    a = fine.analysis
    vt, vc = a["threshold_extrapolated_V"], a["threshold_crossing_V"]
    assert -0.95 < vt < -0.8
    # the 1e10 crossing lies above the extrapolated zero and between the two points that bracket it
    assert vc > vt
    below = fine.bias[fine.channel_density < 1e10].max()
    above = fine.bias[fine.channel_density >= 1e10].min()
    assert below < vc < above


def test_continuation_uses_fewer_iterations(fine):
    assert fine.warm_start[1:].all()
    cold = selfcon.solve(selfcon.load_deck(DECK, overrides=["surface.bias=-0.6"]))
    k = int(np.argmin(np.abs(fine.bias + 0.6)))
    assert fine.iterations[k] <= cold.iterations


def test_linear_window_on_analytic_line():
    v = np.linspace(-1, 1, 21)
    n = np.where(v > -0.5, 2e12 * (v + 0.5), 0.0) + np.where(v > 0.5, -1.5e12 * (v - 0.5), 0.0)
    lin = sw_mod.linear_window(v, n)
    assert lin["well_conditioned"]
    assert -lin["intercept"] / lin["slope"] == pytest.approx(-0.5)      # analytic
    assert lin["slope"] == pytest.approx(2e12)                          # analytic
    assert sw_mod.threshold_crossing(v, np.maximum(n, 1.0), 1e11) == pytest.approx(-0.45, abs=0.05)


def test_parallel_onset_interpolates():
    v = np.array([0.0, 0.1, 0.2, 0.3])
    ch = np.full(4, 1e12)
    dop = np.array([0.0, 0.0, 2e10, 4e10])        # 1 % of 1e12 = 1e10 reached halfway between 0.1 and 0.2
    onset, kind = sw_mod.parallel_onset(v, dop, ch, 0.01)
    assert kind == "between" and onset == pytest.approx(0.15)          # analytic linear interpolation


def test_bias_points():
    assert sw_mod.bias_points(0.0, -0.3, 0.1) == pytest.approx([0.0, -0.1, -0.2, -0.3])
    assert sw_mod.bias_points(0.0, 0.25, 0.1) == pytest.approx([0.0, 0.1, 0.2, 0.25])
    with pytest.raises(selfcon.SelfconInputError):
        sw_mod.bias_points(0.0, 1.0, 0.0)


def test_sweep_file_and_cli(tmp_path):
    from selfcon.cli import main
    out = tmp_path / "cv.h5"
    fig = tmp_path / "cv.png"
    rc = main(["sweep-bias", str(DECK), "--from", "-0.8", "--to", "-0.6", "--step", "0.1", "-o", str(out),
               "--plot", str(fig), "--quiet"])
    assert rc == 0
    assert fig.stat().st_size > 1000
    assert sorted(p.name for p in tmp_path.iterdir()) == ["cv.h5", "cv.png"]      # no temporary left behind
    with h5py.File(out, "r") as f:
        assert f.attrs["schema"] == "selfcon.bias_sweep"
        missing = []

        def visit(name, obj):
            if isinstance(obj, h5py.Dataset) and not {"units", "description"} <= set(obj.attrs):
                missing.append(name)
        f.visititems(visit)
        assert missing == []
        assert f["bias"][()] == pytest.approx([-0.8, -0.7, -0.6])
        assert f["layers/electrons"].shape == (3, 6)
        assert f["capacitance"].attrs["units"] == "F/cm2"


def test_cli_rejects_bad_options(tmp_path, capsys):
    from selfcon.cli import main
    assert main(["sweep-bias", str(DECK), "--from", "0", "--to", "1", "--step", "0"]) == 2
    assert "--step" in capsys.readouterr().err
    ohmic = tmp_path / "ohmic.toml"
    ohmic.write_text(DECK.read_text().replace('contact = "schottky"', 'contact = "pinned"').replace(
        "bias = 0.0\n", ""))
    assert main(["sweep-bias", str(ohmic), "--from", "0", "--to", "0.1", "--step", "0.1"]) == 2
    assert "schottky" in capsys.readouterr().err


def test_cli_json(capsys):
    from selfcon.cli import main
    assert main(["sweep-bias", str(DECK), "--from", "-0.7", "--to", "-0.6", "--step", "0.1", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert data["channel_layer"] == "channel"
    assert len(data["bias_V"]) == 2 and all(c > 0 for c in data["capacitance_F_cm2"])
    _ = math


def test_sweep_table_states_what_was_run(capsys):
    # issue 13: a sweep's text output, like the run summary, says the temperature and each
    # --set override with the deck's own value, and titles an overridden deck "deck title: ..."
    from selfcon.cli import main
    deck = selfcon.load_deck(DECK)
    assert main(["sweep-bias", str(DECK), "--from", "-0.6", "--to", "-0.6", "--step", "0.1",
                 "--set", "temperature=12"]) == 0
    out = capsys.readouterr().out.splitlines()
    assert out[0] == f"deck title: {deck.title}"
    assert out[1].startswith("T = 12 K")
    assert out[2] == f"set: temperature = 12 K (deck: {deck.temperature:g})"
