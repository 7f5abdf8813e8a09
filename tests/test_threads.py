"""Threads for the independent eigenproblems of one solve (selfcon/solver/threads.py).

The results must be the same bits for any thread count (README.md, "Threads"); the count
comes from --threads, $SELFCON_THREADS, $NUMBA_NUM_THREADS, then the default, in that
order (the order is the contract, README.md, "Threads")."""
import numpy as np
import pytest

import selfcon
from selfcon.errors import SelfconInputError
from selfcon.solver import threads as T


def wells_deck(periods=3):
    """Modulation-doped GaAs wells in Al0.3GaAs between free ends (the sheets' electrons stay
    in the stack), one quantum region per well, electrons and both hole bands: up to 9
    independent eigenproblems per iteration."""
    lines = ['title = "wells, one quantum region each"', "temperature = 77.0",
             '[surface]\ncontact = "free"', '[substrate]\ncontact = "free"']
    regions = []
    z = 0.0
    for p in range(periods):
        lines.append(f'[[layer]]\nname = "b{p}"\nmaterial = "AlGaAs"\nx = 0.3\nthickness = 12.0\n'
                     f'sheet_donors = 6e11')
        lines.append(f'[[layer]]\nname = "w{p}"\nmaterial = "GaAs"\nthickness = 8.0')
        regions.append(f"[{z + 8.0}, {z + 24.0}]")
        z += 20.0
    lines.append('[[layer]]\nname = "bottom"\nmaterial = "AlGaAs"\nx = 0.3\nthickness = 12.0')
    lines.append('[physics]\ncarriers = ["electron", "heavy_hole", "light_hole"]')
    lines.append(f'[quantum]\nregions = [{", ".join(regions)}]\nstates = 4')
    return "\n".join(lines) + "\n"


@pytest.fixture
def clean_threads(monkeypatch):
    monkeypatch.delenv(T.THREADS_ENV, raising=False)
    monkeypatch.delenv(T.NUMBA_ENV, raising=False)
    saved = dict(T._process)
    T.configure(None, worker=False)
    yield monkeypatch
    T._process.update(saved)


def test_precedence_of_the_thread_count(clean_threads):
    mp = clean_threads
    assert T.thread_count() == T.cores()                 # default: every core
    T.configure(worker=True)
    assert T.thread_count() == 1                         # a batch worker's default
    mp.setenv(T.NUMBA_ENV, "3")
    assert T.thread_count() == 3                         # NUMBA_NUM_THREADS beats the default
    mp.setenv(T.THREADS_ENV, "5")
    assert T.thread_count() == 5                         # SELFCON_THREADS beats NUMBA_NUM_THREADS
    T.configure(7)
    assert T.thread_count() == 7                         # --threads beats the environment
    assert T.thread_count(2) == 2                        # solve(threads=) beats all


@pytest.mark.parametrize("value", ["0", "-2", "two"])
def test_a_bad_thread_count_names_its_source(clean_threads, value):
    clean_threads.setenv(T.THREADS_ENV, value)
    with pytest.raises(SelfconInputError, match=r"\$SELFCON_THREADS: must be"):
        T.thread_count()
    with pytest.raises(SelfconInputError, match="--threads: must be >= 1"):
        T.configure(0)


def test_results_are_the_same_bits_for_any_thread_count(clean_threads):
    deck = selfcon.load_deck(wells_deck())
    results = {n: selfcon.solve(deck, threads=n) for n in (1, 2, 3)}
    one = results[1]
    assert one.converged
    assert one.iterations > 2
    # states in every region were solved; the sheets' electrons are all in the stack (Gauss)
    assert set(one.subbands["electron"].region.tolist()) == {0, 1, 2}
    assert one.summary["electron_sheet_density_cm2"] == pytest.approx(3 * 6e11, rel=1e-6)
    for n in (2, 3):
        other = results[n]
        assert other.iterations == one.iterations
        assert np.array_equal(other.potential, one.potential)
        for band, sb in one.subbands.items():
            assert np.array_equal(other.subbands[band].energy, sb.energy)
            assert np.array_equal(other.subbands[band].wavefunction, sb.wavefunction)


def test_run_all_keeps_the_order_of_the_tasks():
    assert T.run_all(lambda x: x * x, range(20), threads=4) == [x * x for x in range(20)]


def test_threads_option_of_the_commands(run_cli, tmp_path, inputs_dir):
    deck = inputs_dir / "hemt_4K.toml"
    r = run_cli("run", deck, "-o", tmp_path / "a.h5", "--threads", "0")
    assert r.code == 2 and "--threads: must be >= 1" in r.err and "Traceback" not in r.err
    assert not (tmp_path / "a.h5").exists()
    r = run_cli("sweep-bias", deck, "--from", "0", "--to", "-0.1", "--step", "0.05", "--threads", "-1")
    assert r.code == 2 and "--threads" in r.err
    r = run_cli("tune", deck, "--vary", "layer.spacer.thickness", "--target", "ns=3e11", "--threads", "0")
    assert r.code == 2 and "--threads" in r.err


def threads_job(deck_text, initial=None):
    """A stand-in batch job (the SELFCON_BATCH_JOB seam) that reports its thread count."""
    from selfcon.batch.worker import noop_job
    return dict(noop_job(deck_text, initial), message=f"threads={T.thread_count()}")


@pytest.mark.parametrize("threads, expected", [(None, 1), (3, 3)])
def test_batch_workers_take_threads_per_worker(clean_threads, tmp_path, threads, expected):
    """`batch --threads N` gives every worker N threads; without it a worker takes 1."""
    import csv

    from selfcon.batch import run_study
    (tmp_path / "base.toml").write_text(wells_deck(1))
    study = tmp_path / "study.toml"
    study.write_text('deck = "base.toml"\n[[vary]]\npath = "temperature"\nvalues = [77.0, 78.0]\n')
    code, counts, out = run_study(study, workers=1, threads=threads, job_fn="test_threads:threads_job",
                                  warm=False)
    assert code == 0
    with open(out / "table.csv", newline="") as f:
        messages = {row["message"] for row in csv.DictReader(f)}
    assert messages == {f"threads={expected}"}
    assert T.THREADS_ENV not in __import__("os").environ      # the coordinator's environment is restored
