"""How many threads one solve uses, and the pool that runs its independent eigenproblems.

Every iteration of the loop solves one eigenproblem per quantum band and quantum region
(selfcon/solver/steps.py::solve_states); they share nothing, and their kernels release
the GIL (selfcon/solver/kernels/eigen.py, kernels/schrodinger.py), so a pool of threads
runs them side by side.  The answer does not depend on the thread count: each problem is
solved by the same code whatever thread runs it, and the results are put together in a
fixed order.

The count, first found first used (README.md, "Threads"):

1. ``threads=`` of :func:`selfcon.solve` (the ``--threads`` option of ``run``,
   ``sweep-bias`` and ``tune`` sets it for the whole process with :func:`configure`);
2. ``$SELFCON_THREADS`` (``selfcon batch --threads N`` hands N to every worker, local or
   Dask, with the jobs: selfcon/batch/worker.py::init_worker and ``run_task``);
3. ``$NUMBA_NUM_THREADS``;
4. 1 in a batch worker (a study already runs one worker per core), else every core
   this process may run on.
"""
from __future__ import annotations

import contextlib
import os
import threading

from selfcon.errors import SelfconInputError

THREADS_ENV = "SELFCON_THREADS"
NUMBA_ENV = "NUMBA_NUM_THREADS"

_process = {"threads": None, "worker": False}
_pools: dict = {}
_lock = threading.Lock()


def _check(value, key):
    try:
        n = int(str(value).strip())
    except (TypeError, ValueError):
        raise SelfconInputError(f"must be a whole number >= 1, got {value!r}", key=key) from None
    if n < 1:
        raise SelfconInputError(f"must be >= 1, got {n}", key=key)
    return n


def configure(threads: int | None = None, *, worker: bool | None = None) -> None:
    """Set this process's thread count (``--threads``; None: no setting) and whether it is
    a batch worker (whose default is 1 thread)."""
    _process["threads"] = None if threads is None else _check(threads, "--threads")
    if worker is not None:
        _process["worker"] = bool(worker)


def cores() -> int:
    """Cores this process may run on."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):
        return max(1, os.cpu_count() or 1)


def thread_count(requested: int | None = None) -> int:
    """The thread count of a solve: ``requested``, else the first of the process setting,
    ``$SELFCON_THREADS``, ``$NUMBA_NUM_THREADS``, the default (1 in a batch worker, else
    every core).  A malformed value raises :class:`SelfconInputError` naming its source."""
    if requested is not None:
        return _check(requested, "threads")
    if _process["threads"] is not None:
        return _process["threads"]
    for var in (THREADS_ENV, NUMBA_ENV):
        value = os.environ.get(var, "").strip()
        if value:
            return _check(value, f"${var}")
    return 1 if _process["worker"] else cores()


def add_argument(parser, *, batch: bool = False) -> None:
    """The ``--threads N`` option of ``run``, ``sweep-bias``, ``tune`` and ``batch``."""
    if batch:
        text = ("threads of each worker's solves, for the local pool and Dask workers alike "
                "(default: $SELFCON_THREADS, $NUMBA_NUM_THREADS, else 1)")
    else:
        text = ("threads for the independent eigenproblems of each iteration (bands, quantum "
                "regions); the result does not depend on it (default: $SELFCON_THREADS, "
                "$NUMBA_NUM_THREADS, else every core)")
    parser.add_argument("--threads", type=int, default=None, metavar="N", help=text)


def _pool(n):
    with _lock:
        pool = _pools.get(n)
        if pool is None:
            from concurrent.futures import ThreadPoolExecutor
            pool = _pools[n] = ThreadPoolExecutor(max_workers=n, thread_name_prefix="selfcon-eigen")
        return pool


def run_all(fn, tasks, threads: int = 1) -> list:
    """``[fn(t) for t in tasks]``, on up to ``threads`` threads, results in task order."""
    tasks = list(tasks)
    n = min(int(threads), len(tasks))
    if n <= 1:
        return [fn(t) for t in tasks]
    return list(_pool(n).map(fn, tasks))


_blas_setters: list | None = None


def _local_blas_setters() -> list:
    """``openblas_set_num_threads_local`` of the OpenBLAS builds numpy and scipy ship (OpenBLAS
    0.3.27 and later: the thread count of the calling thread only); [] where there is none."""
    global _blas_setters
    if _blas_setters is None:
        found = []
        try:
            import ctypes
            import glob

            import numpy
            import scipy
            for pkg in (numpy, scipy):
                libs = os.path.join(os.path.dirname(pkg.__file__), "..", pkg.__name__ + ".libs")
                for path in sorted(glob.glob(os.path.join(libs, "*openblas*"))):
                    fn = getattr(ctypes.CDLL(path), "openblas_set_num_threads_local", None)
                    if fn is not None:
                        fn.restype, fn.argtypes = ctypes.c_int, [ctypes.c_int]
                        found.append(fn)
        except (ImportError, OSError, AttributeError):
            found = []
        _blas_setters = found
    return _blas_setters


@contextlib.contextmanager
def one_blas_thread():
    """Dense linear algebra of the calling thread on one BLAS thread inside the block.  The
    small dense problems of the solver (selfcon/solver/kp.py's reduced basis) are far too
    small for BLAS's own threads: on a busy machine they spin and cost 10-40x the CPU time
    of the work.  A no-op where the BLAS has no thread-local setting."""
    setters = _local_blas_setters()
    old = [fn(1) for fn in setters]
    try:
        yield
    finally:
        for fn, value in zip(setters, old):
            fn(value)


__all__ = ["THREADS_ENV", "NUMBA_ENV", "configure", "cores", "thread_count", "run_all", "add_argument",
           "one_blas_thread"]
