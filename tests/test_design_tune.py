"""Target-seeking by brentq over full solves."""
from pathlib import Path

import pytest

import selfcon
from selfcon.design.tune import TuneError, parse_target, tune

HALL = Path(__file__).resolve().parents[1] / "inputs" / "design" / "hall_wafer_77K.toml"


@pytest.fixture(scope="module")
def deck():
    return selfcon.load_deck(HALL)


@pytest.fixture(scope="module")
def ns20(deck):
    assert deck.layer("spacer").thickness == 20.0
    r = selfcon.solve(deck)
    assert r.converged
    return r.summary["channel_electron_sheet_density_cm2"]


def test_recovers_known_spacer(deck, ns20):
    tr = tune(deck, "layer.spacer.thickness", "ns", ns20, (5.0, 60.0))
    assert tr.converged
    assert tr.value == pytest.approx(20.0, abs=0.1)          # the deck's own value (known answer)
    assert tr.achieved == pytest.approx(ns20, rel=1e-3)
    assert tr.ends[0] > ns20 > tr.ends[1]                     # thinner spacer, more electrons (common practice)
    assert tr.solves <= 20


def test_target_outside_bracket(deck, ns20, capsys):
    with pytest.raises(TuneError) as exc:
        tune(deck, "layer.spacer.thickness", "ns", 1e13, (15.0, 25.0))
    msg = str(exc.value)
    assert "outside the range" in msg and "15" in msg and "25" in msg
    from selfcon.cli import main
    rc = main(["tune", str(HALL), "--vary", "layer.spacer.thickness", "--target", "ns=1e13",
               "--bracket", "15", "25", "--quiet"])
    assert rc == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1 and "outside the range" in err[0]


def test_cli_tunes_doping_for_e10(tmp_path, capsys):
    from selfcon.cli import main
    out = tmp_path / "tuned.h5"
    rc = main(["tune", str(HALL), "--vary", "layer.doping.donors", "--target", "ns=1.0e11",
               "--bracket", "8e17", "1.2e18", "-o", str(out), "--json"])
    assert rc == 0
    import json
    data = json.loads(capsys.readouterr().out)
    assert data["achieved"] == pytest.approx(1.0e11, rel=1e-3)
    assert 8e17 < data["value"] < 1.0e18                     # fewer donors than the deck's 1e18 give fewer electrons
    r = selfcon.load_result(out)
    assert r.summary["channel_electron_sheet_density_cm2"] == pytest.approx(1.0e11, rel=1e-3)


def test_bad_inputs(deck):
    with pytest.raises(TuneError):
        parse_target("ns")
    with pytest.raises(TuneError):
        parse_target("ns=lots")
    with pytest.raises(selfcon.DeckError):
        tune(deck, "layer.nosuch.thickness", "ns", 1e11, (5, 60))
    with pytest.raises(TuneError) as exc:
        tune(deck, "layer.spacer.thickness", "not_a_quantity", 1.0, (10, 30))
    assert "ns_total" in str(exc.value)
