"""Tolerance summaries: statistics and regression of a study table."""
import csv
import shutil
from pathlib import Path

import numpy as np
import pytest

import selfcon
from selfcon.design.tolerance import summarize_study, summarize_table

DESIGN = Path(__file__).resolve().parents[1] / "inputs" / "design"
HALL = DESIGN / "hall_wafer_77K.toml"
NS = "channel_electron_sheet_density_cm2"


def _solve_table(overrides_list):
    deck = selfcon.load_deck(HALL)
    rows = []
    for ov in overrides_list:
        r = selfcon.solve(deck.with_overrides(ov))
        assert r.converged
        rows.append((r.summary[NS], r.summary["E1_minus_E0_eV"]))
    return np.array(rows)


def test_zero_spread_gives_zero_std():
    # the same deck three times (zero growth spread): deterministic solves
    y = _solve_table([{"layer.spacer.thickness": 20.0}] * 3)
    params = {"layer.spacer.thickness": np.full(3, 20.0), "layer.doping.donors": np.full(3, 1e18)}
    s = summarize_table(list(params), {NS: y[:, 0], "e10": y[:, 1]}, params)
    assert s.stats[NS]["std"] == 0.0                                # exact: identical results
    assert s.stats["e10"]["std"] == 0.0
    assert s.stats[NS]["p5"] == s.stats[NS]["p95"] == s.stats[NS]["mean"]
    assert all(v == 0.0 for v in s.sensitivity[NS].values())


def test_spread_on_one_parameter_only():
    rng = np.random.default_rng(7)
    t = 20.0 * (1 + 0.02 * rng.standard_normal(6))                   # 2 % spacer spread (our assumption)
    tol = 10 ** rng.uniform(-8, -7, 6)                               # an irrelevant parameter: solver tolerance
    y = _solve_table([{"layer.spacer.thickness": float(a), "solver.tolerance": float(b)} for a, b in zip(t, tol)])
    params = {"layer.spacer.thickness": t, "solver.tolerance": tol, "layer.doping.donors": np.full(6, 1e18)}
    s = summarize_table(list(params), {NS: y[:, 0]}, params)
    assert s.sensitivity[NS]["layer.doping.donors"] == 0.0           # no spread: no sensitivity
    assert abs(s.standardized[NS]["solver.tolerance"]) < 0.02        # zero within noise
    assert s.standardized[NS]["layer.spacer.thickness"] == pytest.approx(-1.0, abs=0.02)
    # the regression slope equals a central finite difference (analytic derivative of a smooth function)
    lo, hi = _solve_table([{"layer.spacer.thickness": 19.5}, {"layer.spacer.thickness": 20.5}])[:, 0]
    assert s.sensitivity[NS]["layer.spacer.thickness"] == pytest.approx((hi - lo) / 1.0, rel=0.05)
    assert s.r_squared[NS] > 0.999


def test_regression_on_an_exact_linear_table():
    rng = np.random.default_rng(1)
    a = rng.normal(10, 0.2, 50)
    b = rng.normal(1e18, 5e16, 50)
    y = 3.0 * a - 2e-18 * b + 1.0                                     # analytic coefficients
    s = summarize_table(["a", "b"], {"y": y}, {"a": a, "b": b})
    assert s.sensitivity["y"]["a"] == pytest.approx(3.0, rel=1e-9)
    assert s.sensitivity["y"]["b"] == pytest.approx(-2e-18, rel=1e-9)
    assert s.r_squared["y"] == pytest.approx(1.0)
    assert s.stats["y"]["p50"] == pytest.approx(np.median(y))        # numpy percentile


def test_study_summary_reads_a_runner_table(tmp_path, capsys):
    # a table laid out as selfcon.batch.runner.write_tables writes it (CSV only)
    cols = ["job", "layer.spacer.thickness", "status", "attempts", "converged", "iterations",
            "electron_sheet_density_cm2", "E0_eV", "seconds", "warm_start", "result", "message"]
    rows = []
    for i, t in enumerate([18.0, 19.0, 20.0, 21.0, 22.0]):
        rows.append([i, t, "done", 1, True, 5, 3e11 - 1e10 * (t - 20), -0.01 + 0.001 * (t - 20), 0.1, False, "", ""])
    rows.append([5, 30.0, "failed", 3, "", "", "", "", "", False, "", "boom"])
    with open(tmp_path / "table.csv", "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(cols)
        w.writerows(rows)
    s = summarize_study(tmp_path)
    assert s.n_done == 5 and s.n_total == 6
    assert s.paths == ["layer.spacer.thickness"]
    assert s.sensitivity["electron_sheet_density_cm2"]["layer.spacer.thickness"] == pytest.approx(-1e10)  # analytic
    from selfcon.cli import main
    assert main(["study-summary", str(tmp_path), "--plot", str(tmp_path / "s.png")]) == 0
    out = capsys.readouterr().out
    assert "electron_sheet_density_cm2" in out and (tmp_path / "s.png").is_file()
    assert main(["study-summary", str(tmp_path / "nothing")]) == 2
    assert main(["study-summary", str(tmp_path), "--quantity", "bogus"]) == 2


@pytest.mark.slow
def test_shipped_study_through_the_batch_runner(tmp_path):
    """A reduced copy of inputs/design/tolerance_hall.toml, 6 samples on 2 workers."""
    from selfcon.batch.runner import run_study
    shutil.copy(HALL, tmp_path / HALL.name)
    text = (DESIGN / "tolerance_hall.toml").read_text().replace("samples = 40", "samples = 6")
    (tmp_path / "tol.toml").write_text(text)
    code, counts, out = run_study(tmp_path / "tol.toml", workers=2, out=tmp_path / "out")
    assert code == 0 and counts["done"] == 6
    s = summarize_study(out)
    assert s.n_done == 6
    assert NS in s.quantities and s.stats[NS]["std"] > 0
    assert len(s.paths) == 5
