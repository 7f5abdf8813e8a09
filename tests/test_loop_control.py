"""The loop's contract (issue 10, item 3): status codes and messages, the progress
callback (iteration record, the older two-argument form, StopIteration), ``method`` as a
name, a class or an instance, and an immutable Structure with caches in the workspace."""
import dataclasses
import warnings

import numpy as np
import pytest

import selfcon
from selfcon.solver import control as C
from selfcon.solver.loop import IterationRecord
from selfcon.solver.mixers import Anderson, Linear, Mixer, PredictorCorrector


# --------------------------------------------------------------------------- statuses and messages

def test_every_status_has_a_message_and_none_points_below():
    # messages end up in result files and logs, where there is nothing "below" (issue 10)
    assert set(C.MESSAGES) == set(C.Status)
    for status in C.Status:
        for mixer in (PredictorCorrector(), Linear(), Anderson()):
            text = C.message(status, mixer, iterations=7, residual=1e-3, tolerance=1e-6, detail="x")
            assert "below" not in text and "{" not in text
    assert [int(s) for s in C.Status] == [0, 1, 2, 3, 4, 5, 6]   # documented codes (Result.status)


@pytest.mark.parametrize("status", list(C.Status))
def test_advice_never_suggests_the_method_already_used(status):
    # a predictor-corrector deck is never told to try predictor-corrector; the others are,
    # where switching can help (the status table of selfcon/solver/control.py)
    assert "predictor-corrector" not in C.advice(status, PredictorCorrector())
    if status in (C.Status.MAX_ITERATIONS, C.Status.DIVERGED, C.Status.OSCILLATING, C.Status.NO_PROGRESS):
        assert "predictor-corrector" in C.advice(status, Linear())


def test_not_converged_result_has_its_status(hemt4_deck):
    r = selfcon.solve(hemt4_deck, max_iterations=2)
    assert r.status == C.Status.MAX_ITERATIONS == 1 and not r.success
    assert r.summary["status"] == 1
    assert "predictor-corrector" not in r.message          # the deck uses it already
    assert all("figures below" not in w for w in r.warnings)
    ok = selfcon.solve(hemt4_deck)
    assert ok.status == C.Status.CONVERGED == 0 and ok.success


def test_status_survives_the_file(hemt4_deck, tmp_path):
    r = selfcon.solve(hemt4_deck, max_iterations=1)
    r.save(tmp_path / "r.h5")
    back = selfcon.load_result(tmp_path / "r.h5")
    assert back.status == C.Status.MAX_ITERATIONS and back.message == r.message


class _Scripted(Mixer):
    """Mixer stand-in for the control tests: steps by r, damps ``damps`` times."""
    name = "scripted"
    predictor = True

    def __init__(self, damps=0):
        self.damps = damps

    def update(self, x, r):
        return x + r

    def damp(self):
        self.damps -= 1
        return self.damps >= 0


def _feed(control, residuals, n=5):
    """Run the control on a scripted residual sequence; returns the potentials it hands back."""
    phi = np.zeros(n)
    out = []
    for k, res in enumerate(residuals, 1):
        control.record(IterationRecord(k, res, float("nan"), 1, 1.0, 0.0, control.tol, control.max_iter))
        phi = control.step(phi, np.full(n, res))
        out.append(phi)
        if not control.running:
            break
    return out


def test_non_finite_residual_is_divergence_back_at_the_best_iterate():
    c = C.Control(_Scripted(), tol=1e-6, charge_tol=1e-6, max_iter=50)
    out = _feed(c, [1e-2, 5e-3, float("nan")])
    assert c.status == C.Status.DIVERGED and "non-finite" in c.message
    # the best iterate is the one whose residual was 5e-3: phi after one step of 1e-2
    np.testing.assert_array_equal(out[-1], np.full(5, 1e-2))


def test_thousandfold_growth_is_divergence():
    c = C.Control(_Scripted(damps=100), tol=1e-6, charge_tol=1e-6, max_iter=50)
    _feed(c, [1e-2, 1.0, 20.0])                # 20 V > 1000 x the first residual
    assert c.status == C.Status.DIVERGED and "1000x" in c.message


def test_oscillation_without_damping_left_stops():
    c = C.Control(_Scripted(damps=0), tol=1e-6, charge_tol=1e-6, max_iter=50)
    _feed(c, [1e-2, 1.2e-2] * 10)             # up and down by 1.2x: no growth damping, no decrease
    assert c.status == C.Status.OSCILLATING and len(c.history) == C.OSCILLATION_WINDOW


def test_persistent_growth_at_the_smallest_factor_is_no_progress():
    # growing 1.6x per iteration; the mixer can damp 10 times: 8 growth damps (iterations
    # 2-9), 2 oscillation damps (8, 9), then iteration 10 is the 9th growth with none left
    c = C.Control(_Scripted(damps=10), tol=1e-6, charge_tol=1e-6, max_iter=50)
    _feed(c, [1e-2 * 1.6 ** k for k in range(20)])
    assert c.status == C.Status.NO_PROGRESS and "no stable solution" in c.message
    assert len(c.history) == C.MAX_GROWTHS + 2


def test_max_iterations_is_counted_by_the_control():
    c = C.Control(_Scripted(damps=100), tol=1e-9, charge_tol=1e-6, max_iter=3)
    _feed(c, [1e-2, 5e-3, 2e-3, 1e-3])
    assert c.status == C.Status.MAX_ITERATIONS and len(c.history) == 3


# --------------------------------------------------------------------------- progress callback

def test_progress_receives_an_iteration_record(hemt4_deck):
    seen = []
    r = selfcon.solve(hemt4_deck, progress=seen.append)
    assert all(isinstance(x, IterationRecord) for x in seen)
    assert [x.iteration for x in seen] == list(range(1, r.iterations + 1))
    np.testing.assert_array_equal([x.residual for x in seen], r.residual_history)
    np.testing.assert_array_equal([x.newton_steps for x in seen], r.record["newton_steps"])
    assert seen[0].tolerance == hemt4_deck.solver.tolerance
    with pytest.raises(dataclasses.FrozenInstanceError):
        seen[0].residual = 0.0


def test_two_argument_progress_still_works_with_a_deprecation_warning(hemt4_deck):
    seen = []
    with pytest.warns(DeprecationWarning, match="IterationRecord"):
        r = selfcon.solve(hemt4_deck, progress=lambda it, res: seen.append((it, res)))
    assert seen == [(k + 1, float(v)) for k, v in enumerate(r.residual_history)]
    with warnings.catch_warnings():
        warnings.simplefilter("error")           # the record form warns about nothing
        selfcon.solve(hemt4_deck, progress=lambda record: None)


def test_stop_iteration_in_the_callback_stops_cleanly(hemt4_deck):
    def stop_at_two(record):
        if record.iteration == 2:
            raise StopIteration("enough for a preview")
    r = selfcon.solve(hemt4_deck, progress=stop_at_two)
    assert not r.converged and r.status == C.Status.STOPPED
    assert r.iterations == 2 and "stopped by the progress callback" in r.message
    assert "enough for a preview" in r.message
    assert np.all(np.isfinite(r.potential)) and r.subbands["electron"].energy.size > 0


# --------------------------------------------------------------------------- method

def test_method_by_name_class_or_instance_gives_the_same_answer(hemt4_deck):
    by_name = selfcon.solve(hemt4_deck, method="anderson", max_iterations=300)
    by_class = selfcon.solve(hemt4_deck, method=Anderson, max_iterations=300)
    by_instance = selfcon.solve(hemt4_deck, method=Anderson(mixing=0.1, history=6), max_iterations=300)
    assert by_name.converged and by_name.summary["method"] == "anderson"
    for r in (by_class, by_instance):
        # the same mixer with the same (default) options: the same iterates (invariant)
        assert r.iterations == by_name.iterations and r.summary["method"] == "anderson"
        np.testing.assert_array_equal(r.potential, by_name.potential)


def test_an_unregistered_mixer_class_can_be_passed():
    from selfcon.solver.mixers import available_methods

    class Halves(Mixer):                       # not registered: only solve(method=...) knows it
        name = "halves"

        def update(self, x, r):
            return x + 0.5 * r
    deck = selfcon.load_deck(_SMALL)
    r = selfcon.solve(deck, method=Halves, max_iterations=300)
    ref = selfcon.solve(deck)
    assert r.converged and "halves" not in available_methods()
    # the same fixed point whatever the mixer (invariant of the self-consistent problem)
    assert r.summary["electron_sheet_density_cm2"] == pytest.approx(
        ref.summary["electron_sheet_density_cm2"], rel=1e-5)


def test_a_bad_method_is_named():
    with pytest.raises(TypeError, match="Mixer subclass"):
        selfcon.solve(selfcon.load_deck(_SMALL), method=3.5)
    with pytest.raises(ValueError, match="unknown solver method"):
        selfcon.solve(selfcon.load_deck(_SMALL), method="no-such-mixer")


# --------------------------------------------------------------------------- immutable structure

def test_structure_is_frozen_and_reusable():
    deck = selfcon.load_deck(_SMALL)
    st = selfcon.build_structure(deck)
    assert not hasattr(st, "extras")
    with pytest.raises(dataclasses.FrozenInstanceError):
        st.temperature = 1.0
    a = selfcon.solve(deck, structure=st)
    b = selfcon.solve(deck, structure=st)          # no cache of the first solve leaks in
    np.testing.assert_array_equal(a.potential, b.potential)
    assert a.iterations == b.iterations


_SMALL = """
title = "small heterojunction"
temperature = 77.0
[surface]
contact = "schottky"
barrier = 0.7
[substrate]
contact = "ohmic"
[[layer]]
material = "AlGaAs"
x = 0.3
thickness = 20.0
sheet_donors = 2e12
[[layer]]
material = "GaAs"
thickness = 60.0
donors = 1e15
[physics]
carriers = ["electron"]
[mesh]
step = 1.0
"""
