"""Mixers know no physics: tested on a toy linear fixed-point problem x = A x + b,
whose solution numpy.linalg.solve((I - A), b) is the reference (numpy)."""
import numpy as np
import pytest

from selfcon.solver.mixers import available_methods, get_mixer


def toy_problem(n=12, seed=3, contraction=0.6):
    rng = np.random.default_rng(seed)
    q, _ = np.linalg.qr(rng.normal(size=(n, n)))
    eig = rng.uniform(-contraction, contraction, size=n)
    A = q @ np.diag(eig) @ q.T          # symmetric, spectral radius < 1: g(x) = Ax + b contracts
    b = rng.normal(size=n)
    x_ref = np.linalg.solve(np.eye(n) - A, b)   # reference: numpy.linalg.solve
    return A, b, x_ref


def iterate(mixer, A, b, n_iter=400, tol=1e-10):
    x = np.zeros(b.size)
    for k in range(n_iter):
        r = A @ x + b - x
        if np.max(np.abs(r)) < tol:
            return x, k
        x = mixer.update(x, r)
    return x, n_iter


@pytest.mark.parametrize("name", available_methods())
def test_every_mixer_reaches_linear_solution(name):
    A, b, x_ref = toy_problem()
    mixer = get_mixer(name, mixing=0.5)
    x, k = iterate(mixer, A, b)
    assert k < 400
    np.testing.assert_allclose(x, x_ref, atol=1e-8)


def test_anderson_converges_within_n_plus_one_on_linear_problem():
    # Anderson mixing with full history is equivalent to GMRES on a linear problem and
    # terminates in at most n+1 steps (Walker and Ni, SIAM J. Numer. Anal. 49, 1715, 2011).
    n = 8
    A, b, x_ref = toy_problem(n=n, contraction=0.9)
    mixer = get_mixer("anderson", mixing=1.0, history=n + 2)
    x, k = iterate(mixer, A, b, tol=1e-9)
    assert k <= n + 2
    np.testing.assert_allclose(x, x_ref, atol=1e-7)


def test_anderson_beats_linear_on_slow_problem():
    A, b, x_ref = toy_problem(n=20, contraction=0.95)
    _, k_lin = iterate(get_mixer("linear", mixing=1.0), A, b, n_iter=5000)
    _, k_and = iterate(get_mixer("anderson", mixing=1.0, history=8), A, b, n_iter=5000)
    assert k_and * 5 < k_lin


def test_unknown_method_and_option_are_named():
    with pytest.raises(ValueError, match="allowed: predictor-corrector"):
        get_mixer("broyden")
    with pytest.raises(ValueError, match="history"):
        get_mixer("linear", history=3)


def test_update_does_not_modify_inputs():
    for name in available_methods():
        m = get_mixer(name)
        x = np.ones(5)
        r = np.full(5, 0.1)
        m.update(x, r)
        m.update(x + r, r * 0.5)
        assert np.all(x == 1.0) and np.all(r == 0.1)


def test_damp_reduces_the_step():
    for name in available_methods():
        m = get_mixer(name)
        f0 = m.factor
        assert m.damp()
        assert m.factor < f0


def test_predictor_corrector_extrapolates_when_the_loop_asks():
    """With a history the predictor-corrector step is Anderson's (the same formula): on a
    slow linear problem (contraction 0.95) it reaches numpy.linalg.solve's answer in far
    fewer steps than the plain step; a history given to the constructor wins over the
    loop's suggestion, and suggesting 0 restores the plain step."""
    from selfcon.solver.mixers import PredictorCorrector
    A, b, x_ref = toy_problem(n=20, contraction=0.95)
    _, k_plain = iterate(PredictorCorrector(), A, b, n_iter=5000)
    acc = PredictorCorrector()
    acc.suggest_history(8)
    x, k_acc = iterate(acc, A, b, n_iter=5000)
    np.testing.assert_allclose(x, x_ref, atol=1e-8)
    assert k_acc * 5 < k_plain
    # the same steps as the Anderson mixer of the same history and factor
    and8 = get_mixer("anderson", mixing=1.0, history=8)
    acc.reset()
    x1, x2 = np.zeros(b.size), np.zeros(b.size)
    for _ in range(6):
        x1 = acc.update(x1, A @ x1 + b - x1)
        x2 = and8.update(x2, A @ x2 + b - x2)
    assert np.array_equal(x1, x2)
    acc.suggest_history(0)
    assert acc.update(np.zeros(3), np.ones(3)).tolist() == [1.0, 1.0, 1.0]   # x + r
    fixed = PredictorCorrector(history=2)
    fixed.suggest_history(0)
    assert fixed.history == 2


def test_the_loop_accelerates_the_multiband_holes_only(inputs_dir):
    """The loop asks the predictor-corrector for its extrapolation (loop.ACCELERATED_HISTORY)
    when physics.hole_model is kp4 / kp6, and for the plain step otherwise (so the quoted
    results of the other decks keep their bits)."""
    import selfcon
    from selfcon.solver.loop import ACCELERATED_HISTORY
    from selfcon.solver.mixers import PredictorCorrector
    deck = selfcon.load_deck(inputs_dir / "hemt_4K.toml")
    mixer = PredictorCorrector()
    mixer.suggest_history(5)
    assert selfcon.solve(deck, method=mixer, max_iterations=1) is not None
    assert mixer.history == 0
    assert ACCELERATED_HISTORY > 0
