"""The job function the executors run: pure, picklable, no files, no database.

``run_job(deck_text, initial=None) -> outcome dict``::

    {"ok": True,  "result": Result, "image": bytes, "seconds": float, "pid": int}
    {"ok": False, "error": "DeckError: ...", "seconds": float, "pid": int}

``initial`` is ``None`` or a ``(z_nm, phi_V)`` pair (continuation warm start).
``image`` is the result's HDF5 file as bytes (selfcon.output.result.result_image): building it
is most of the cost of a result file, so it happens in the worker, in parallel; the
coordinator writes it to disk atomically.
A job whose solve does not converge is ``ok`` (the Result says converged =
False); only an exception is ``ok = False``.  A worker process that dies is the
executor's business, not this function's.
"""
from __future__ import annotations

import os
import signal
import time
import traceback


def _watch_parent(parent_pid, period=1.0):
    """Exit this worker when the coordinator process is gone (e.g. killed with SIGKILL).

    Pool workers hold both ends of their queue pipes, so they never see EOF when the
    coordinator dies; without this they would wait forever and compete with the
    rerun for the CPU."""
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


def init_worker(parent_pid=None):
    """Process-pool initializer: leave Ctrl-C to the coordinator, preload the solver, and
    exit when the coordinator ``parent_pid`` disappears."""
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


def run_job(deck_text, initial=None):
    """Solve one deck (TOML text); see the module docstring for the outcome."""
    t0 = time.perf_counter()
    try:
        from selfcon.input.deck import load_deck
        from selfcon.api import solve
        deck = load_deck(deck_text)
        if initial is not None:
            result = solve(deck, initial_potential=initial)
        else:
            result = solve(deck)
        # the HDF5 file image is built here, in parallel; the coordinator only writes the bytes.
        # "seconds" is the job's own work: the solve and building its result file.
        from selfcon.output.result import result_image
        image = result_image(result)
        return {"ok": True, "result": result, "image": image, "seconds": time.perf_counter() - t0,
                "pid": os.getpid()}
    except Exception as exc:  # the job failed; the worker lives on
        return {"ok": False, "error": _error_text(exc), "seconds": time.perf_counter() - t0, "pid": os.getpid()}


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


def sleepy_job(deck_text, initial=None):
    """Stand-in: behaviour from words in the deck title (``sleep=0.2``, ``raise=MSG``); returns a Result.

    Not converged when ``[solver] max_iterations`` is below the 3 "iterations" it
    takes (1 with a warm start); the potential carries the first layer thickness.
    """
    import tomllib
    t0 = time.perf_counter()
    data = tomllib.loads(deck_text)
    words = dict(w.partition("=")[::2] for w in str(data.get("title", "")).split())
    time.sleep(float(words.get("sleep", 0.0) or 0.0))
    if "raise" in words:
        return {"ok": False, "error": f"RuntimeError: {words['raise']}", "seconds": time.perf_counter() - t0,
                "pid": os.getpid()}
    maxit = int(data.get("solver", {}).get("max_iterations", 100))
    its = 3 if initial is None else 1
    thick = float(data.get("layer", [{}])[0].get("thickness", 0.0))
    result = synthetic_result(deck_text, iterations=min(its, maxit), converged=maxit >= its, phi0=thick)
    return {"ok": True, "result": result, "seconds": time.perf_counter() - t0, "pid": os.getpid()}


def noop_job(deck_text, initial=None):
    """Stand-in that does no work at all (queue overhead measurement)."""
    return {"ok": True, "result": synthetic_result(deck_text), "seconds": 0.0, "pid": os.getpid()}


def resolve(spec):
    """'module:function' -> the function (the job function is chosen by name so it pickles by reference)."""
    import importlib
    if callable(spec):
        return spec
    mod, _, name = spec.partition(":")
    return getattr(importlib.import_module(mod), name)
