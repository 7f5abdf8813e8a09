"""The job function the executors run: pure, picklable, no files, no database.

``run_job(deck_text, initial=None) -> outcome dict``::

    {"ok": True,  "image": bytes, "converged": bool, "iterations": int, "message": str,
     "summary": {column: value}, "seconds": float, "pid": int}
    {"ok": False, "error": "DeckError: ...", "seconds": float, "pid": int}

``initial`` is ``None`` or a ``(z_nm, phi_V)`` pair (continuation warm start).
``image`` is the result's HDF5 file as bytes (selfcon.output.result.result_image): building it
is most of the cost of a result file, so it happens in the worker, in parallel; the
coordinator writes it to disk atomically.  The result travels once, as that image: the
table's figures (``summary``, :func:`selfcon.batch.summary.summarize`) are the only other
thing sent back, and the coordinator reads a continuation potential from the file.
A job whose solve does not converge is ``ok`` (``converged`` False); only an exception
is ``ok = False``.  A worker process that dies is the executor's business, not this
function's.  (A job function of the ``SELFCON_BATCH_JOB`` seam may still return
``{"ok": True, "result": Result}``: the coordinator then packs it itself, slowly.)

:func:`run_task` runs a list of jobs (a Dask task), after checking that this worker
runs the coordinator's selfcon (:func:`environment`).
"""
from __future__ import annotations

import os
import signal
import time
import traceback


def _watch_parent(parent_pid, period=1.0):
    """Exit this worker when the coordinator process is gone (e.g. killed with SIGKILL).

    A second guard beside the end of file on the task pipe (selfcon.batch.executors): a
    worker left behind would compete with the rerun for the CPU."""
    import threading

    def watch():
        while True:
            time.sleep(period)
            try:
                os.kill(parent_pid, 0)
            except ProcessLookupError:
                os._exit(0)
            except PermissionError:      # the pid exists (recycled by another user): keep going
                pass

    threading.Thread(target=watch, name="selfcon-parent-watch", daemon=True).start()


#: threads of the numerical libraries and of the solves of a selfcon process (1 in every batch
#: job that ``--cluster`` submits: one single-threaded worker per core; selfcon.solver.threads)
from selfcon.solver.threads import THREADS_ENV  # noqa: E402
THREAD_LIBRARY_VARIABLES = ("OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "NUMBA_NUM_THREADS")


def limit_threads():
    """Apply ``$SELFCON_THREADS`` to the BLAS/OpenMP/numba thread variables that are not set
    (effective in a process that has not loaded numpy yet, as a fresh pool worker)."""
    n = os.environ.get(THREADS_ENV, "").strip()
    if n.isdigit() and int(n) > 0:
        for var in THREAD_LIBRARY_VARIABLES:
            os.environ.setdefault(var, n)


def init_worker(parent_pid=None, threads=None):
    """Process-pool initializer: apply $SELFCON_THREADS, leave Ctrl-C to the coordinator, preload
    the solver, and exit when the coordinator ``parent_pid`` disappears.  A worker's solves
    take ``threads`` (``batch --threads``, also set as $SELFCON_THREADS so the libraries
    follow), else one thread (selfcon.solver.threads)."""
    if threads is not None:
        os.environ[THREADS_ENV] = str(int(threads))
    limit_threads()
    from selfcon.solver.threads import configure
    configure(threads, worker=True)
    if parent_pid is not None:
        _watch_parent(int(parent_pid))
    try:
        signal.signal(signal.SIGINT, signal.SIG_IGN)
    except (ValueError, OSError):     # not the main thread (e.g. a Dask worker thread)
        pass
    try:
        import selfcon.solver.loop  # noqa: F401  (imports numba; kernels load from the warmed cache)
    except Exception:
        pass


def _error_text(exc):
    from selfcon.errors import SelfconInputError
    if isinstance(exc, SelfconInputError):
        return f"{type(exc).__name__}: {exc}"
    tb = traceback.format_exception(type(exc), exc, exc.__traceback__)
    return f"{type(exc).__name__}: {exc}\n" + "".join(tb[-6:])


class Starts(tuple):
    """The starting potentials of one continuation job, tried in order until one converges:
    ``(label, initial)`` pairs, ``initial`` a (z_nm, phi_V) pair or None (the classical start).

    The coordinator sends ``Starts((("extrapolated", ...), ("neighbour", ...), ("cold", None)))``:
    the secant extrapolation through two neighbours, the nearest neighbour's own potential,
    then a cold start, so that a poor extrapolation never fails a job a plainer start solves."""


def starts_of(initial) -> list:
    """``initial`` as a list of ``(label, initial)``: a :class:`Starts` as it is, a potential as
    the neighbour's, None as the cold start."""
    if isinstance(initial, Starts):
        return list(initial)
    return [("neighbour" if initial is not None else "cold", initial)]


def run_job(deck_text, initial=None):
    """Solve one deck (TOML text); see the module docstring for the outcome.

    ``initial`` may be a :class:`Starts`: each start is tried until one converges (an
    exception of the solve counts as not converged); the outcome's ``start`` names the one
    whose result is kept (the last one tried when none converged) and its ``message`` the
    starts that failed before."""
    t0 = time.perf_counter()
    try:
        from selfcon.input.deck import load_deck
        from selfcon.api import solve
        from selfcon.errors import SelfconInputError
        deck = load_deck(deck_text)
        failed, result, error = [], None, None
        for label, guess in starts_of(initial):
            try:
                result = solve(deck, initial_potential=guess) if guess is not None else solve(deck)
            except SelfconInputError:
                raise                                   # bad input fails from any start
            except Exception as exc:                    # noqa: BLE001 - the next start may do
                error, result = exc, None
                failed.append(f"{label} start: {type(exc).__name__}: {exc}")
                continue
            if result.converged:
                break
            failed.append(f"{label} start: {result.message}")
        if result is None:
            raise error
        # the HDF5 file image is built here, in parallel; the coordinator only writes the bytes.
        # "seconds" is the job's own work: the solves and building its result file.
        out = pack(result)
        out["start"] = label
        if failed and result.converged:
            out["message"] = f"{out['message']} (from the {label} start; before: {'; '.join(failed)})"
        out["seconds"] = time.perf_counter() - t0
        return out
    except Exception as exc:  # the job failed; the worker lives on
        return {"ok": False, "error": _error_text(exc), "seconds": time.perf_counter() - t0, "pid": os.getpid()}


def pack(result) -> dict:
    """A successful outcome from a Result: its file image and the table's figures, not the Result."""
    from selfcon.batch.summary import summarize
    from selfcon.output.result import result_image
    return {"ok": True, "image": result_image(result), "converged": bool(result.converged),
            "iterations": int(result.iterations), "message": str(result.message or ""),
            "summary": summarize(result), "seconds": None, "pid": os.getpid()}


def run_one(fn, deck_text, initial):
    """``fn(deck_text, initial)``, with an exception of the job function itself turned into
    an ``ok = False`` outcome (the real job function never raises; a seam function may)."""
    try:
        return fn(deck_text, initial)
    except Exception as exc:
        return {"ok": False, "error": _error_text(exc), "seconds": None, "pid": os.getpid()}


# --------------------------------------------------------------------------- environment

def environment() -> dict:
    """What a worker runs, as compared by the coordinator before any job (and by every task)."""
    import sys
    from selfcon.version import __version__
    return {"selfcon": __version__, "python": "%d.%d" % sys.version_info[:2]}


def mismatch(expected: dict, found: dict) -> str | None:
    """One line saying how ``found`` differs from ``expected`` (None if it does not)."""
    diff = [f"{k} {found.get(k, 'missing')} (coordinator: {v})" for k, v in expected.items() if found.get(k) != v]
    return ", ".join(diff) or None


def _here():
    import socket
    return f"{socket.gethostname()} (pid {os.getpid()})"


def run_task(job_spec, expected, jobs, threads=None):
    """A Dask task: run ``jobs`` (a list of ``(job_id, deck_text, initial)``) one after the other.

    Returns ``{"environment": message}`` without running anything if this worker's
    selfcon or Python differs from the coordinator's ``expected``, else
    ``{"outcomes": [(job_id, outcome), ...]}``.
    """
    found = environment()
    bad = mismatch(expected, found)
    if bad:
        return {"environment": f"{_here()} has {bad}"}
    from selfcon.solver.threads import configure
    configure(threads, worker=True)      # batch --threads, else one thread per solve (a Dask worker)
    fn = resolve(job_spec)
    return {"outcomes": [(job_id, run_one(fn, deck_text, initial)) for job_id, deck_text, initial in jobs]}


def warm_up():
    """Compile (or load from the on-disk cache) the numba kernels in this process.

    Uses ``selfcon.api.warm_up()`` when the solver provides it; returns False if it
    does not (the coordinator then solves its first job in-process instead).
    """
    try:
        from selfcon import api as scf
    except ImportError:
        return False
    fn = getattr(scf, "warm_up", None)
    if fn is None:
        return False
    fn()
    return True


# --------------------------------------------------------------------------- stand-ins
# Tiny pure job functions with the same contract, used to measure the queue's
# own overhead (tools/bench_batch.py) and to test the queue machinery without
# solving anything.  The "deck" they read is the TOML text; they look at
# [solver] max_iterations (and a few optional keys of a [test] table).

def synthetic_result(deck_text, *, iterations=3, converged=True, phi0=0.0):
    """A small but complete Result (for stand-in jobs)."""
    import numpy as np
    from selfcon.output.result import Result, Subbands
    from selfcon.output.schema import PROFILE_FIELDS
    z = np.linspace(0.0, 50.0, 21)
    prof = {k: np.zeros_like(z) for k in PROFILE_FIELDS}
    prof["potential"] = phi0 + 0.01 * z
    energies = np.array([-0.05, 0.01])
    sub = Subbands(energy=energies, occupation=np.array([1e11, 0.0]), wavefunction=np.zeros((z.size, 2)),
                   in_plane_mass=np.array([0.067, 0.067]), region=np.zeros(2, int), degeneracy=np.ones(2))
    return Result(title="stand-in", temperature=4.2, converged=converged, iterations=iterations,
                  residual=1e-7 if converged else 1e-2,
                  message="converged" if converged else f"not converged after {iterations} iterations",
                  deck_text=deck_text, z=z, profile=prof, layer_index=np.zeros(z.size, int),
                  layers=[{"name": "stand-in", "material": "GaAs", "x_top": 0.0, "x_bottom": 0.0, "top_nm": 0.0,
                           "bottom_nm": 50.0, "electron_sheet_density_cm2": 1e11, "hole_sheet_density_cm2": 0.0}],
                  subbands={"electron": sub}, residual_history=np.full(iterations, 1e-3),
                  summary={"electron_sheet_density_cm2": 1e11, "hole_sheet_density_cm2": 0.0})


def _first_time(marker) -> bool:
    """True the first time a stand-in job asks with this marker file (it creates it)."""
    try:
        fd = os.open(marker, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o644)
    except FileExistsError:
        return False
    os.close(fd)
    return True


def sleepy_job(deck_text, initial=None):
    """Stand-in: behaviour from words in the deck title (``sleep=0.2``, ``raise=MSG``, ``die``: the
    worker process kills itself with SIGKILL; ``stop``: it stops itself with SIGSTOP;
    ``stop-once=FILE``: the same the first time only, FILE marking that it happened); returns
    an outcome like :func:`run_job`'s.

    Not converged when ``[solver] max_iterations`` is below the 3 "iterations" it
    takes (1 with a warm start); the potential carries the first layer thickness.
    """
    import tomllib
    t0 = time.perf_counter()
    if isinstance(initial, Starts):
        initial = initial[0][1]
    data = tomllib.loads(deck_text)
    words = dict(w.partition("=")[::2] for w in str(data.get("title", "")).split())
    time.sleep(float(words.get("sleep", 0.0) or 0.0))
    if "die" in words:
        os.kill(os.getpid(), signal.SIGKILL)
    if "stop" in words or ("stop-once" in words and _first_time(words["stop-once"])):
        os.kill(os.getpid(), signal.SIGSTOP)          # a stopped worker: only a time limit frees its job
    if "raise" in words:
        return {"ok": False, "error": f"RuntimeError: {words['raise']}", "seconds": time.perf_counter() - t0,
                "pid": os.getpid()}
    maxit = int(data.get("solver", {}).get("max_iterations", 100))
    its = 3 if initial is None else 1
    thick = float(data.get("layer", [{}])[0].get("thickness", 0.0))
    result = synthetic_result(deck_text, iterations=min(its, maxit), converged=maxit >= its, phi0=thick)
    out = pack(result)
    out["seconds"] = time.perf_counter() - t0
    return out


#: seconds a :func:`noop_job` waits (read once per process); tools/bench_batch.py sets it
NOOP_SECONDS_ENV = "SELFCON_NOOP_SECONDS"
_NOOP = {}


def noop_job(deck_text, initial=None):
    """Stand-in that does no work but wait ``$SELFCON_NOOP_SECONDS`` (default 0): the coordinator's
    own cost per job (queue, file write, tables) is what remains.

    Returns the outcome of one small synthetic result, packed once per process (a real
    worker builds its image while solving; here the image is the same every time).
    """
    if not _NOOP:
        _NOOP["outcome"] = pack(synthetic_result("title = \"no-op\"\n"))
        _NOOP["seconds"] = float(os.environ.get(NOOP_SECONDS_ENV, "0") or 0.0)
    wait = _NOOP["seconds"]
    if wait > 0:
        time.sleep(wait)
    return dict(_NOOP["outcome"], seconds=wait, pid=os.getpid())


def resolve(spec):
    """'module:function' -> the function (the job function is chosen by name so it pickles by reference)."""
    import importlib
    if callable(spec):
        return spec
    mod, _, name = spec.partition(":")
    return getattr(importlib.import_module(mod), name)
