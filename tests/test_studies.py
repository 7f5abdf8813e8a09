"""Every shipped study runs to completion with every job converged (issue 12).

The check value of each study is its own: all jobs converged (exit code 0).  The
growth-tolerance study (64 solves at 300 K) takes over a minute and is marked slow; the
sample that stalled at 3.3e-5 V before the in-plane treatment of near-degenerate subbands
(selfcon.solver.schrodinger.in_plane_weights) is solved in the default suite.
"""
import tomllib
from pathlib import Path

import pytest

import selfcon
from selfcon.batch.runner import run_study
from selfcon.batch.study import expand, load_study

INPUTS = Path(__file__).resolve().parents[1] / "inputs"
STUDIES = INPUTS / "studies"
SLOW = {"growth_tolerance"}          # over a minute on 2 cores


def _params():
    """Every study under inputs/ (a TOML with a top-level ``deck`` key, README "Design studies")."""
    out = []
    for f in sorted(INPUTS.rglob("*.toml")):
        if "deck" not in tomllib.loads(f.read_text(encoding="utf-8")):
            continue
        marks = [pytest.mark.slow] if f.stem in SLOW else []
        out.append(pytest.param(f, marks=marks, id=str(f.relative_to(INPUTS))))
    return out


@pytest.mark.parametrize("study", _params())
def test_every_study_job_converges(study, tmp_path):
    assert len(_params()) >= 5                   # the shipped set (the test is not vacuous)
    n_jobs = len(expand(load_study(study)))
    code, counts, _ = run_study(study, workers=2, out=tmp_path / study.stem, quiet=True)
    assert counts["done"] == n_jobs, counts
    assert code == 0


def test_growth_tolerance_job_15_converges():
    # issue 12: the growth-tolerance sample with spacer 18.63 nm, barrier x = 0.329 and sheet
    # 2.85e12 cm^-2 (job 15 when the wafer's dose was 3e12) stalled at 3.3e-5 V: a level of the
    # doping-sheet well in the AlGaAs crossed a channel level (split 0.09 meV) and their
    # mixture swapped over a potential change of that size.  The same deck still stalls
    # without selfcon.solver.schrodinger.in_plane_weights (checked when this test was written).
    deck = selfcon.load_deck(INPUTS / "hemt_300K.toml", overrides=[
        "layer.spacer.thickness=18.633293035228363", "layer.barrier.x=0.3289973221311932",
        "layer.doping.sheet_donors=2849556301428.239"])
    r = selfcon.solve(deck)
    assert r.converged, r.message
    assert r.summary["iterations"] <= 8          # the predictor's usual handful
