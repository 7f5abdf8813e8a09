"""Continuation falls back: a job that a poor extrapolated start does not converge tries the
nearest neighbour's potential, then a cold start, before it is failed; the start that won is
in the outcome and in the table's ``start`` column.

The failing starts are constructed on inputs/hemt_4K.toml: a potential of NaN (the solve
raises) and one with a 100 V bump (it needs more iterations than the limit set here), beside
the deck's own converged potential (one iteration) and the cold start (the deck's own count).
"""
from __future__ import annotations

import csv
import json

import numpy as np
import pytest

import selfcon
from selfcon.batch.worker import Starts, run_job


@pytest.fixture(scope="module")
def hemt():
    deck = selfcon.load_deck("inputs/hemt_4K.toml")
    r = selfcon.solve(deck)
    assert r.converged
    z, phi = r.z, r.profile["potential"]
    bump = (z, phi + 100.0 * np.sin(np.pi * z / z[-1]))
    broken = (z, np.full_like(phi, np.nan))
    return deck, r.iterations, (z, phi), bump, broken


def _deck_text(deck, max_iterations):
    return deck.with_overrides({"solver.max_iterations": max_iterations}).to_toml()


def test_neighbour_start_when_the_extrapolation_fails(hemt):
    deck, n_cold, exact, bump, _ = hemt
    text = _deck_text(deck, n_cold - 1)                # too few for the cold start and the bump
    out = run_job(text, Starts((("extrapolated", bump), ("neighbour", exact), ("cold", None))))
    assert out["ok"] and out["converged"] and out["start"] == "neighbour"
    assert out["iterations"] <= 2                      # it starts at the answer
    assert "(from the neighbour start; before: extrapolated start: not converged after" in out["message"]


def test_cold_start_when_both_warm_starts_fail(hemt):
    deck, n_cold, _, bump, broken = hemt
    text = _deck_text(deck, n_cold)                    # exactly what the cold start needs
    probe = selfcon.solve(selfcon.load_deck(text), initial_potential=bump)
    assert not probe.converged                         # the constructed failure holds on this solver
    out = run_job(text, Starts((("extrapolated", broken), ("neighbour", bump), ("cold", None))))
    assert out["ok"] and out["converged"] and out["start"] == "cold" and out["iterations"] == n_cold
    assert "extrapolated start: RuntimeError" in out["message"]
    assert "neighbour start: not converged" in out["message"]


def test_no_start_converges_keeps_the_last_result(hemt):
    deck, n_cold, _, bump, broken = hemt
    text = _deck_text(deck, 2)
    out = run_job(text, Starts((("extrapolated", broken), ("neighbour", bump), ("cold", None))))
    assert out["ok"] and not out["converged"] and out["start"] == "cold"
    assert out["message"].startswith("not converged after 2 iterations")
    only = run_job(text, Starts((("extrapolated", broken),)))
    assert not only["ok"] and "RuntimeError" in only["error"]          # nothing else to try: failed


def test_nan_potential_fails_fast_instead_of_hanging(hemt):
    # the bisection eigensolver never narrows an interval around NaN: the solve must raise at
    # once (as LAPACK's dstebz does), so a broken start falls back instead of hanging a worker
    deck, _, _, _, broken = hemt
    with pytest.raises(RuntimeError, match="non-finite entries"):
        selfcon.solve(deck, initial_potential=broken)


def test_plain_initial_potential_is_one_start(hemt):
    deck, _, exact, _, _ = hemt
    out = run_job(deck.to_toml(), exact)
    assert out["converged"] and out["start"] == "neighbour"
    assert run_job(deck.to_toml())["start"] == "cold"


def test_table_has_the_start_of_each_job(tmp_path):
    # continuation along a stand-in study: the first job starts cold, the others from neighbours
    from selfcon.batch.runner import run_study
    (tmp_path / "base.toml").write_text('title = "t"\ntemperature = 77.0\n[surface]\ncontact = "schottky"\n'
                                        'barrier = 0.7\n[[layer]]\nname = "c"\nmaterial = "GaAs"\n'
                                        'thickness = 50.0\n')
    study = tmp_path / "s.toml"
    study.write_text('deck = "base.toml"\ncontinuation = true\n[[vary]]\npath = "surface.bias"\n'
                     'values = [0.0, -0.1, -0.2]\n')
    code, counts, out = run_study(study, workers=1, job_fn="selfcon.batch.worker:sleepy_job", warm=False)
    assert code == 0
    with open(out / "table.csv", newline="") as fh:
        starts = [r["start"] for r in csv.DictReader(fh)]
    assert starts == ["cold", "neighbour", "neighbour"]    # the stand-in reports no start of its own
    import h5py
    with h5py.File(out / "table.h5", "r") as f:
        assert [s.decode() if isinstance(s, bytes) else s for s in f["table/start"][()]] == starts
        assert f["table/start"].attrs["long_name"] == "start"
    assert json.loads(json.dumps(counts))["done"] == 3
