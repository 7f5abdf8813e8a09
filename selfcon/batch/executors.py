"""Where the jobs run: a local process pool (default) or a Dask distributed cluster.

Both executors have the same small interface, used only by the coordinator::

    ex.capacity                 how many jobs to keep in flight
    ex.submit(job_id, attempt, *args)
    ex.poll(timeout) -> [(job_id, "ok", outcome) | (job_id, "died", message), ...]
    ex.in_flight                set of job ids submitted and not yet reported
    ex.shutdown(cancel=False)

"ok" means the job function returned (its outcome may still say the job
raised); "died" means the process running it disappeared (the job is
requeued by the coordinator, with its attempt counted).
"""
from __future__ import annotations

import concurrent.futures as cf
import multiprocessing
import os
import uuid
from concurrent.futures.process import BrokenProcessPool

DIED = "worker process died"


class LocalPool:
    """ProcessPoolExecutor with a spawn/forkserver context (never fork: numba and threads).

    A worker killed by a signal breaks the whole pool, failing every in-flight
    future; the pool is rebuilt and the in-flight jobs come back as "died".
    """

    def __init__(self, workers, fn, *, context=None, initializer=None):
        self.workers = max(1, int(workers))
        self.fn = fn
        if context is None:
            context = "forkserver" if "forkserver" in multiprocessing.get_all_start_methods() else "spawn"
        self.context = multiprocessing.get_context(context)
        self.initializer = initializer
        self.pool = None
        self.futures = {}            # future -> job id
        self.rebuilds = 0
        self._start()

    def _start(self):
        initargs = (os.getpid(),) if self.initializer is not None else ()
        self.pool = cf.ProcessPoolExecutor(max_workers=self.workers, mp_context=self.context,
                                           initializer=self.initializer, initargs=initargs)

    @property
    def capacity(self):
        return self.workers

    @property
    def in_flight(self):
        return set(self.futures.values())

    def worker_pids(self):
        procs = getattr(self.pool, "_processes", None) or {}
        return [p.pid for p in procs.values() if p.is_alive()]

    def submit(self, job_id, attempt, *args):
        try:
            fut = self.pool.submit(self.fn, *args)
        except BrokenProcessPool:
            self._rebuild()
            fut = self.pool.submit(self.fn, *args)
        self.futures[fut] = job_id

    def poll(self, timeout):
        if not self.futures:
            return []
        done, _ = cf.wait(list(self.futures), timeout=timeout, return_when=cf.FIRST_COMPLETED)
        out = []
        broken = False
        for fut in done:
            exc = fut.exception()
            if isinstance(exc, BrokenProcessPool):
                broken = True
                continue
            job = self.futures.pop(fut)
            if exc is None:
                out.append((job, "ok", fut.result()))
            else:   # the job function itself never raises; this is e.g. an unpicklable outcome
                out.append((job, "ok", {"ok": False, "error": f"{type(exc).__name__}: {exc}", "seconds": None}))
        if broken:
            # every future still pending is lost with the pool; harvest those that did finish
            cf.wait(list(self.futures), timeout=10)
            for fut, job in list(self.futures.items()):
                exc = fut.exception() if fut.done() else BrokenProcessPool()
                if exc is None:
                    out.append((job, "ok", fut.result()))
                else:
                    out.append((job, "died", DIED))
            self.futures.clear()
            self._rebuild()
        return out

    def _rebuild(self):
        try:
            self.pool.shutdown(wait=False, cancel_futures=True)
        except Exception:
            pass
        self.rebuilds += 1
        self._start()

    def shutdown(self, cancel=False):
        if self.pool is None:
            return
        if cancel:
            for fut in self.futures:
                fut.cancel()
            # the running jobs are abandoned: stop their processes
            for pid in self.worker_pids():
                try:
                    os.kill(pid, 15)
                except OSError:
                    pass
        self.pool.shutdown(wait=True, cancel_futures=cancel)
        self.pool = None


class DaskPool:
    """Dask distributed: ``address = "local"`` starts a LocalCluster, else connects to a scheduler.

    Tasks are submitted with ``pure=False`` and a per-attempt key, so a retried job
    is really recomputed; the scheduler reschedules tasks of a dead worker itself,
    and a task that killed too many workers comes back as "died".
    """

    def __init__(self, address, workers, fn, *, memory_limit="4GiB"):
        from distributed import Client, LocalCluster
        self.fn = fn
        self.cluster = None
        if address == "local":
            self.cluster = LocalCluster(n_workers=max(1, int(workers)), threads_per_worker=1, processes=True,
                                        host="127.0.0.1", scheduler_port=0, dashboard_address=None,
                                        memory_limit=memory_limit, silence_logs=40)
            self.client = Client(self.cluster)
        else:
            self.client = Client(address, timeout="30s")
        self.requested = workers
        self.futures = {}
        self._capacity = None

    @property
    def capacity(self):
        try:
            threads = sum(self.client.nthreads().values())
        except Exception:
            threads = 0
        if threads <= 0:
            threads = self.requested or 1
        return max(1, threads) + (1 if self.cluster is None else 0)

    @property
    def in_flight(self):
        return set(self.futures.values())

    def worker_pids(self):
        return list(self.client.run(os.getpid).values())

    def submit(self, job_id, attempt, *args):
        key = f"selfcon-job-{job_id}-attempt-{attempt}-{uuid.uuid4().hex[:8]}"
        fut = self.client.submit(self.fn, *args, key=key, pure=False, retries=0)
        self.futures[fut] = job_id

    def poll(self, timeout):
        if not self.futures:
            return []
        from distributed import wait
        try:
            wait(list(self.futures), timeout=timeout, return_when="FIRST_COMPLETED")
        except Exception:       # TimeoutError flavours differ across versions
            pass
        from distributed import KilledWorker
        out = []
        for fut in [f for f in self.futures if f.done()]:
            job = self.futures.pop(fut)
            if fut.status == "finished":
                try:
                    out.append((job, "ok", fut.result()))
                except Exception as exc:  # lost between done and fetch
                    out.append((job, "died", f"{DIED} ({type(exc).__name__})"))
                continue
            try:
                exc = fut.exception()
            except Exception as e:   # cancelled
                exc = e
            if isinstance(exc, KilledWorker) or fut.status == "cancelled":
                out.append((job, "died", DIED))
            else:
                out.append((job, "ok", {"ok": False, "error": f"{type(exc).__name__}: {exc}", "seconds": None}))
            fut.release()
        return out

    def shutdown(self, cancel=False):
        if cancel and self.futures:
            try:
                self.client.cancel(list(self.futures))
            except Exception:
                pass
        self.futures.clear()
        try:
            self.client.close()
        finally:
            if self.cluster is not None:
                self.cluster.close()


def make_executor(scheduler, workers, fn, *, memory_limit="4GiB"):
    if scheduler:
        return DaskPool(scheduler, workers, fn, memory_limit=memory_limit)
    from selfcon.batch.worker import init_worker
    return LocalPool(workers, fn, initializer=init_worker)
