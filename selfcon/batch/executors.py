"""Where the jobs run: a local pool of worker processes (default) or a Dask cluster.

Both executors have one small interface, used only by the coordinator::

    ex.parallelism              jobs that can run at once (workers, or Dask threads)
    ex.chunk_target, ex.max_chunk   seconds of work per task, and a cap: the coordinator
                                sends several short jobs per task (see Coordinator._chunk)
    ex.slots(alone=False)       how many more tasks to submit now (alone: tasks that must
                                have a worker to themselves)
    ex.submit(jobs, alone=False)    jobs: [(job_id, deck_text, initial), ...], run in order
    ex.poll(timeout) -> [(job_id, kind, payload), ...]
    ex.busy                     how many jobs are in flight
    ex.in_flight                {job_id: time.time() it started, or None if not known}
    ex.kill_job(job_id)         stop the process running it (reported as "died")
    ex.watch()                  (DaskPool only) read the clocks of in_flight from the
                                scheduler; the coordinator calls it about once a second
                                when --job-timeout is set
    ex.shutdown(cancel=False)

Event kinds:

    "ok"    the job function returned; payload is its outcome (which may say the job failed)
    "died"     the process running this very job disappeared: the attempt counts, and the
               job runs alone from then on
    "suspect"  the job sat in a task of several jobs that Dask gave up on (which one killed
               its workers is unknown): requeued, not counted, and it runs alone from then on
    "lost"     the job had not started when its worker died: requeued, not counted

An environment failure (a worker of another selfcon, an unreachable scheduler) raises
:class:`selfcon.errors.SelfconEnvironmentError`.  Dask is imported only by :class:`DaskPool`.
"""
from __future__ import annotations

import collections
import logging
import math
import multiprocessing
import multiprocessing.connection as mpc
import os
import queue
import signal
import threading
import time
import uuid

from selfcon.errors import SelfconEnvironmentError, StudyError

log = logging.getLogger("selfcon.batch")

DIED = "worker process died"

#: tasks kept at the Dask scheduler beyond its threads, as a multiple of its threads (or of
#: --max-workers for an adaptive cluster): Dask's adaptive target is the queued work over
#: distributed.adaptive.target-duration (5 s), capped by the number of tasks, so a cluster
#: only grows to what it can see
DEFAULT_BACKLOG = 4.0

#: seconds to reach a Dask scheduler, to wait for a lost one to answer again, and for a first
#: worker to connect, before the study stops with exit 4 (``--scheduler-timeout``)
SCHEDULER_TIMEOUT = 60.0
#: ``--cluster`` without ``--scheduler-timeout``: seconds to wait for the batch system to start a
#: first worker (a busy queue holds batch jobs for minutes)
CLUSTER_WORKER_TIMEOUT = 1800.0

#: --cluster names and their dask-jobqueue classes
JOBQUEUE_CLASSES = {"slurm": "SLURMCluster", "pbs": "PBSCluster", "sge": "SGECluster", "lsf": "LSFCluster",
                    "htcondor": "HTCondorCluster", "oar": "OARCluster", "moab": "MoabCluster"}

#: environment of every batch job that dask-jobqueue submits (one thread per worker process;
#: the libraries' own variables too, since a Dask worker may load numpy before selfcon)
THREAD_VARIABLES = ("SELFCON_THREADS", "OMP_NUM_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS",
                    "NUMBA_NUM_THREADS")


def _death_message(exitcode):
    if exitcode is not None and exitcode < 0:
        try:
            name = signal.Signals(-exitcode).name
        except ValueError:
            name = f"signal {-exitcode}"
        return f"{DIED} (killed by {name})"
    return f"{DIED} (exit code {exitcode})"


# --------------------------------------------------------------------------- local pool

def _pool_main(task_r, result_w, job_spec, parent_pid, threads=None):
    """A local worker process: run the tasks sent on ``task_r``, send each job's outcome on ``result_w``.

    A reader thread takes tasks off the pipe as they come, so the coordinator never blocks
    sending one while this process is busy sending a large result back.  End of file on
    the task pipe (the coordinator is gone) ends the process at once."""
    from selfcon.batch.worker import init_worker, resolve, run_one
    init_worker(parent_pid, threads)
    fn = resolve(job_spec)
    inbox = queue.SimpleQueue()

    def reader():
        try:
            while True:
                inbox.put(task_r.recv())
        except (EOFError, OSError):
            os._exit(0)

    threading.Thread(target=reader, name="selfcon-tasks", daemon=True).start()
    _send(result_w, [])                      # ready: a job's clock (--job-timeout) starts from here
    while True:
        task = inbox.get()
        if task is None:
            return
        batch, sent = [], time.monotonic()
        for job_id, deck_text, initial in task:
            batch.append((job_id, run_one(fn, deck_text, initial)))
            if time.monotonic() - sent >= SEND_EVERY:
                _send(result_w, batch)
                batch, sent = [], time.monotonic()
        if batch:
            _send(result_w, batch)


#: a worker sends the outcomes of short jobs together, at most this many seconds late
SEND_EVERY = 0.02


def _send(conn, batch):
    try:
        conn.send(batch)
    except Exception:       # an outcome that does not pickle: send the others, and an error for it
        for job_id, out in batch:
            try:
                conn.send([(job_id, out)])
            except Exception as exc:
                conn.send([(job_id, {"ok": False, "error": f"cannot send the outcome: {type(exc).__name__}: {exc}",
                                     "seconds": out.get("seconds") if isinstance(out, dict) else None,
                                     "pid": os.getpid()})])


class _Slot:
    __slots__ = ("proc", "tx", "rx", "tasks", "alone", "started", "index", "ready")

    def __init__(self, index, proc, tx, rx):
        self.index, self.proc, self.tx, self.rx = index, proc, tx, rx
        self.tasks = collections.deque()     # lists of job ids, in the order sent; tasks[0][0] is running
        self.alone = False                   # the task it holds must have the process to itself
        self.started = None                  # when tasks[0][0] started (its predecessor's result came)
        self.ready = False                   # the process has started and loaded the job function


class LocalPool:
    """Worker processes of our own, one pipe pair each (spawn/forkserver, never fork: numba and threads).

    The pool knows which job each process runs, so a process that dies charges only that
    job ("died"); the jobs queued behind it come back "lost" (not charged), a new process
    takes its place, and the other processes carry on.
    """

    chunk_target = 0.05
    max_chunk = 64

    def __init__(self, workers, job_spec, *, context=None, threads=None):
        self.workers = max(1, int(workers))
        self.job_spec = job_spec
        self.solve_threads = threads         # each worker's solves (selfcon.solver.threads); None: its default
        if context is None:
            context = "forkserver" if "forkserver" in multiprocessing.get_all_start_methods() else "spawn"
        self.context = multiprocessing.get_context(context)
        self.prefetch = False                # a second task per process (set by the coordinator for tiny jobs)
        self.closing = False
        self.respawns = 0
        self.slots_ = [self._spawn(i) for i in range(self.workers)]

    def _spawn(self, index):
        task_r, task_w = self.context.Pipe(duplex=False)
        result_r, result_w = self.context.Pipe(duplex=False)
        proc = self.context.Process(target=_pool_main,
                                    args=(task_r, result_w, self.job_spec, os.getpid(), self.solve_threads),
                                    name=f"selfcon-worker-{index}", daemon=True)
        proc.start()
        task_r.close()
        result_w.close()
        log.debug("worker %d started (pid %d)", index, proc.pid)
        return _Slot(index, proc, task_w, result_r)

    @property
    def parallelism(self):
        return self.workers

    @property
    def busy(self):
        """Jobs in flight (a count; cheaper than in_flight)."""
        return sum(len(t) for s in self.slots_ for t in s.tasks)

    @property
    def in_flight(self):
        out = {}
        for s in self.slots_:
            first = True
            for task in s.tasks:
                for job in task:
                    out[job] = s.started if first else None
                    first = False
        return out

    def worker_pids(self):
        return [s.proc.pid for s in self.slots_ if s.proc.is_alive()]

    def slots(self, alone=False):
        if alone:
            return sum(1 for s in self.slots_ if not s.tasks)
        depth = 2 if self.prefetch else 1
        return sum(depth - len(s.tasks) for s in self.slots_ if not s.alone and len(s.tasks) < depth)

    def submit(self, jobs, alone=False):
        if alone:
            free = [s for s in self.slots_ if not s.tasks]
        else:
            depth = 2 if self.prefetch else 1
            free = sorted((s for s in self.slots_ if not s.alone and len(s.tasks) < depth), key=lambda s: len(s.tasks))
        if not free:
            raise RuntimeError("submit without a free slot")
        s = free[0]
        if not s.tasks:
            s.started = time.time() if s.ready else None
        s.tasks.append([j[0] for j in jobs])
        s.alone = alone
        s.tx.send(list(jobs))
        for j in jobs:
            log.info("job %d sent to worker %d (pid %d)%s", j[0], s.index, s.proc.pid, " alone" if alone else "")

    def poll(self, timeout):
        busy = [s for s in self.slots_ if s.tasks]
        if not busy:
            return []
        by_conn = {s.rx: s for s in busy}
        by_sentinel = {s.proc.sentinel: s for s in busy}
        ready = mpc.wait(list(by_conn) + list(by_sentinel), timeout)
        out = []
        dead = set()
        for r in ready:
            s = by_conn.get(r)
            if s is not None:
                if not self._drain(s, out):
                    dead.add(s)
            else:
                dead.add(by_sentinel[r])
        for s in dead:
            self._drain(s, out)
            self._bury(s, out)
        return out

    def _drain(self, s, out):
        """Read every outcome waiting on ``s``'s pipe; False at end of file (the process is gone)."""
        try:
            while s.rx.poll():
                batch = s.rx.recv()
                if not s.ready:                 # the process's first message: it is ready
                    s.ready = True
                    if s.tasks:
                        s.started = time.time()
                for job_id, outcome in batch:
                    task = s.tasks[0]
                    task.remove(job_id)
                    if not task:
                        s.tasks.popleft()
                        if not s.tasks:
                            s.alone = False
                    s.started = time.time()
                    out.append((job_id, "ok", outcome))
        except (EOFError, OSError):
            return False
        return True

    def _bury(self, s, out):
        s.proc.join(timeout=5)
        message = _death_message(s.proc.exitcode)
        jobs = [j for task in s.tasks for j in task]
        if jobs:
            log.warning("worker %d (pid %d): %s while running job %d", s.index, s.proc.pid, message, jobs[0])
            out.append((jobs[0], "died", message))
            out.extend((j, "lost", f"{message} (not started)") for j in jobs[1:])
        for c in (s.tx, s.rx):
            try:
                c.close()
            except OSError:
                pass
        if not self.closing:
            self.respawns += 1
            self.slots_[s.index] = self._spawn(s.index)

    def kill_job(self, job_id):
        for s in self.slots_:
            if s.tasks and s.tasks[0][0] == job_id:
                try:
                    os.kill(s.proc.pid, signal.SIGKILL)
                except OSError:
                    pass
                return True
        return False

    def shutdown(self, cancel=False):
        self.closing = True
        for s in self.slots_:
            if cancel and s.proc.is_alive():
                try:
                    os.kill(s.proc.pid, signal.SIGTERM)
                except OSError:
                    pass
            else:
                try:
                    s.tx.send(None)
                except OSError:
                    pass
        deadline = time.time() + (5 if cancel else 30)
        for s in self.slots_:
            s.proc.join(timeout=max(0.1, deadline - time.time()))
            if s.proc.is_alive():
                s.proc.kill()
                s.proc.join(timeout=5)
            for c in (s.tx, s.rx):
                try:
                    c.close()
                except OSError:
                    pass


# --------------------------------------------------------------------------- Dask

def _walltime_seconds(text):
    """'HH:MM:SS', 'MM:SS', 'D-HH:MM:SS' or minutes -> seconds (None if unreadable)."""
    try:
        days = 0
        if "-" in str(text):
            d, text = str(text).split("-", 1)
            days = int(d)
        parts = [float(p) for p in str(text).split(":")]
    except (TypeError, ValueError):
        return None
    if len(parts) == 1:
        parts = [0.0, parts[0], 0.0]
    elif len(parts) == 2:
        parts = [0.0] + parts
    h, m, s = parts[-3:]
    return days * 86400 + h * 3600 + m * 60 + s


def jobqueue_cluster(kind, *, numba_cache_dir=None, **overrides):
    """A dask-jobqueue cluster of ``kind`` (slurm, pbs, ...) from the site's Dask configuration
    (``jobqueue.yaml``, section ``jobqueue.<kind>``), with one single-threaded worker process per
    core, ``SELFCON_THREADS=1`` (and the usual BLAS/OpenMP/numba variables) and, if given,
    ``NUMBA_CACHE_DIR`` exported in every batch job, and a worker ``--lifetime`` ending 5 min
    (or 5 %) before the walltime.  Nothing is submitted: that is ``adapt()``'s business.
    """
    if kind not in JOBQUEUE_CLASSES:
        raise StudyError(f"unknown cluster kind {kind!r}", key="--cluster", allowed=" | ".join(JOBQUEUE_CLASSES))
    try:
        import dask
        import dask_jobqueue
    except ImportError as exc:
        raise StudyError(f"needs dask-jobqueue ({exc}); install selfcon[cluster]", key="--cluster") from None
    cls = getattr(dask_jobqueue, JOBQUEUE_CLASSES[kind])
    conf = dask.config.get(f"jobqueue.{kind}", default={}) or {}
    cores = overrides.get("cores", conf.get("cores"))
    for key in ("cores", "memory"):
        if overrides.get(key, conf.get(key)) in (None, ""):
            raise StudyError(f"jobqueue.{kind}.{key} is not set in the Dask configuration "
                             f"(e.g. ~/.config/dask/jobqueue.yaml, or DASK_CONFIG)", key="--cluster")
    prologue = list(overrides.pop("job_script_prologue", None) or conf.get("job-script-prologue") or [])
    prologue += [f"export {v}=1" for v in THREAD_VARIABLES]
    if numba_cache_dir:
        prologue.append(f"export NUMBA_CACHE_DIR={numba_cache_dir}")
    extra = list(overrides.pop("worker_extra_args", None) or conf.get("worker-extra-args") or [])
    walltime = _walltime_seconds(overrides.get("walltime", conf.get("walltime")))
    if walltime and walltime > 600 and not any(str(a).startswith("--lifetime") for a in extra):
        life = int(walltime - max(300, 0.05 * walltime))
        stagger = int(min(300, 0.1 * life))
        extra += ["--lifetime", f"{life}s", "--lifetime-stagger", f"{stagger}s"]
    kwargs = dict(processes=int(cores), job_script_prologue=prologue, worker_extra_args=extra)
    kwargs.update(overrides)
    try:
        cluster = cls(**kwargs)
    except (ValueError, TypeError) as exc:
        raise StudyError(f"dask-jobqueue refused the configuration of jobqueue.{kind}: {exc}",
                         key="--cluster") from None
    cluster.selfcon_processes = int(kwargs["processes"])     # workers per batch job
    return cluster


#: a fetched future whose value was lost
_NO_VALUE = object()


class DaskPool:
    """Dask distributed: a LocalCluster (``address="local"``), a running scheduler (``address``
    or ``scheduler_file``), or a dask-jobqueue cluster (``cluster="slurm"``, ...) that adapts
    between ``min_workers`` and ``max_workers``.

    Keeps ``threads + ceil(backlog * max(threads, max_workers))`` tasks at the scheduler.
    Every task has its own key (``pure=False``), so a retried job is really recomputed.
    Before any job runs the workers' selfcon and Python are compared with the coordinator's;
    every task checks again on the worker that runs it (workers that join later).
    """

    chunk_target = 0.5
    max_chunk = 256

    def __init__(self, job_spec, *, address=None, scheduler_file=None, cluster=None, workers=None,
                 memory_limit="4GiB", min_workers=0, max_workers=None, backlog=DEFAULT_BACKLOG,
                 numba_cache_dir=None, scheduler_timeout=None, threads=None):
        from selfcon.batch.worker import environment
        self.job_spec = job_spec
        self.solve_threads = threads        # each job's solves (selfcon.solver.threads); None: the worker's default
        self.backlog = float(backlog)
        self.cluster = None
        self.target_threads = 0
        self.expected = environment()
        self.timeout = float(scheduler_timeout or SCHEDULER_TIMEOUT)
        self.worker_timeout = float(scheduler_timeout or (CLUSTER_WORKER_TIMEOUT if cluster else SCHEDULER_TIMEOUT))
        self._silent_since = None            # time.monotonic() the scheduler stopped answering
        self._idle_since = None              # since when tasks wait and no worker is connected
        connect_timeout = self.timeout
        try:
            from distributed import Client, LocalCluster
        except ImportError as exc:
            raise StudyError(f"needs Dask distributed ({exc}); install selfcon[cluster]", key="--scheduler") from None
        where = scheduler_file or address or cluster
        try:
            if cluster:
                self.cluster = jobqueue_cluster(cluster, numba_cache_dir=numba_cache_dir)
                self.client = Client(self.cluster)
                top = max_workers if max_workers is not None else self.cluster.selfcon_processes
                self.cluster.adapt(minimum=int(min_workers or 0), maximum=int(top))
                self.target_threads = int(top)
                where = f"the {cluster} cluster's scheduler {self.cluster.scheduler_address}"
            elif address == "local":
                self.cluster = LocalCluster(n_workers=max(1, int(workers or 1)), threads_per_worker=1,
                                            processes=True, host="127.0.0.1", scheduler_port=0,
                                            dashboard_address=":0", memory_limit=memory_limit, silence_logs=40)
                self.client = Client(self.cluster)
                log.info("Dask LocalCluster of %d workers, dashboard %s", int(workers or 1), self.cluster.dashboard_link)
            elif scheduler_file:
                self.client = Client(scheduler_file=str(scheduler_file), timeout=f"{connect_timeout}s")
            else:
                self.client = Client(address, timeout=f"{connect_timeout}s")
        except (OSError, TimeoutError) as exc:
            self._close()
            raise SelfconEnvironmentError(f"cannot reach the Dask scheduler at {where}: "
                                          f"{type(exc).__name__}: {exc}") from None
        self.where = where
        self.tasks = {}                      # future -> [job ids]
        self._started = {}                   # future -> time.time() its task was seen running (--job-timeout)
        self._on = {}                        # future -> the worker it was seen running on
        self._timed_out = set()              # futures cancelled by kill_job
        self._busy = 0
        self.done = queue.SimpleQueue()      # futures, from their done callbacks (Dask's threads)
        self._fetcher = None                 # finished futures to gather (a thread: _fetch_loop)
        self._threads = (0.0, 0)
        try:
            self.check_versions()
        except BaseException:
            self._close()
            raise

    def check_versions(self):
        """Stop (SelfconEnvironmentError) if a connected worker runs another selfcon or Python."""
        from selfcon.batch.worker import environment, mismatch
        try:
            found = self.client.run(environment)
        except Exception as exc:       # the worker cannot even import selfcon.batch
            raise SelfconEnvironmentError(f"the Dask workers of {self.where} cannot run selfcon: "
                                          f"{type(exc).__name__}: {exc}") from None
        bad = {addr: mismatch(self.expected, env) for addr, env in found.items()}
        bad = {a: m for a, m in bad.items() if m}
        if bad:
            addr, m = next(iter(bad.items()))
            raise SelfconEnvironmentError(
                f"{len(bad)} of {len(found)} Dask workers run another version: {addr} has {m}; "
                "install the same selfcon on the workers (no job was started)")
        log.info("Dask: %d workers at %s, all with selfcon %s", len(found), self.where, self.expected["selfcon"])

    @property
    def threads(self):
        """Worker threads connected now (asked of the scheduler at most once a second)."""
        t, n = self._threads
        if time.monotonic() - t > 1.0:
            try:
                n = sum(self.client.nthreads().values())
            except Exception:
                pass
            self._threads = (time.monotonic(), n)
        return n

    @property
    def parallelism(self):
        return max(1, self.threads, self.target_threads)

    @property
    def wanted(self):
        """Tasks to keep at the scheduler: its threads plus the backlog."""
        threads = self.threads
        return threads + math.ceil(self.backlog * max(threads, self.target_threads, 1))

    @property
    def busy(self):
        return self._busy

    @property
    def in_flight(self):
        """Job ids sent -> when their task began running (a task's first job only, as the local
        pool's first job of a slot; the clock is read by :meth:`watch`, None before)."""
        return {j: (self._started.get(f) if i == 0 else None)
                for f, ids in self.tasks.items() for i, j in enumerate(ids)}

    def watch(self):
        """Start the clock of every task a worker has begun (for --job-timeout; called at most
        about once a second).  The scheduler knows which worker holds each task but not when
        it began, so a task's clock starts when it is first seen among the first ``nthreads``
        tasks its worker holds (a worker may hold more than it runs: Dask's worker-saturation),
        a second late at most.  A task that moved to another worker starts again."""
        if self.client.status != "running" or not self.tasks:
            return
        try:
            held = self.client.processing()
            nthreads = self.client.nthreads()
        except Exception:                    # the scheduler went away: _scheduler_answers says so
            return
        by_key = {f.key: f for f in self.tasks}
        order = {f: n for n, f in enumerate(self.tasks)}   # the order sent (the scheduler's, too)
        now = time.time()
        seen = set()
        for worker, keys in held.items():
            futs = [by_key[k] for k in keys if k in by_key]
            for f in futs:
                seen.add(f)
                if self._on.get(f) != worker:            # new here, or moved: not started yet
                    self._on[f] = worker
                    self._started.pop(f, None)
            futs.sort(key=lambda f: (self._started.get(f, now + 1), order[f]))
            for f in futs[:max(1, int(nthreads.get(worker, 1)))]:
                self._started.setdefault(f, now)
        for f in list(self._on):
            if f not in seen:                           # done, or back at the scheduler (its worker left)
                self._started.pop(f, None)
                self._on.pop(f, None)

    def slots(self, alone=False):
        if not self._scheduler_answers():
            return 0                         # nothing is sent to a scheduler that is gone
        return max(0, self.wanted - len(self.tasks))

    def waiting(self) -> bool:
        """True while jobs cannot be sent because the scheduler does not answer (the coordinator
        then waits instead of ending the run); raises once that has lasted ``timeout``."""
        return not self._scheduler_answers()

    def _scheduler_answers(self) -> bool:
        """True while the client is connected; a SelfconEnvironmentError (exit 4) once it has not
        been for ``timeout`` seconds, or has given up (closed)."""
        status = self.client.status
        if status == "running":
            self._silent_since = None
            return True
        now = time.monotonic()
        if self._silent_since is None:
            self._silent_since = now
            log.warning("the Dask scheduler at %s does not answer (client %s); waiting up to %g s",
                        self.where, status, self.timeout)
        if status in ("closed", "closing") or now - self._silent_since > self.timeout:
            raise SelfconEnvironmentError(
                f"lost the Dask scheduler at {self.where}: no answer for {now - self._silent_since:.0f} s "
                f"(--scheduler-timeout {self.timeout:g} s); the jobs it held go back to the queue, rerun "
                "`selfcon batch` once a scheduler runs")
        return False

    def _check_workers(self) -> None:
        """A SelfconEnvironmentError (exit 4) when tasks have waited ``worker_timeout`` seconds
        with no worker connected (a cluster whose batch jobs never start, workers that cannot
        reach the scheduler)."""
        if not self.tasks or self.threads > 0:
            self._idle_since = None
            return
        now = time.monotonic()
        if self._idle_since is None:
            self._idle_since = now
        elif now - self._idle_since > self.worker_timeout:
            raise SelfconEnvironmentError(
                f"no Dask worker connected to {self.where} in {now - self._idle_since:.0f} s "
                f"(--scheduler-timeout {self.worker_timeout:g} s); check that the workers start (the "
                "batch system's queue, jobqueue.yaml) and can reach the scheduler")

    def submit(self, jobs, alone=False):
        from selfcon.batch.worker import run_task
        ids = [j[0] for j in jobs]
        key = f"selfcon-job-{ids[0]}{'+' + str(len(ids) - 1) if len(ids) > 1 else ''}-{uuid.uuid4().hex[:12]}"
        fut = self.client.submit(run_task, self.job_spec, self.expected, list(jobs), key=key, pure=False, retries=0,
                                 threads=self.solve_threads)
        self.tasks[fut] = ids
        self._busy += len(ids)
        fut.add_done_callback(self.done.put)
        for j in ids:
            log.info("job %d sent to Dask as task %s", j, key)

    def poll(self, timeout):
        if not self.tasks:
            return []
        if not self._scheduler_answers():
            time.sleep(timeout)              # wait for it (never spin), up to the scheduler time-out
            return []
        self._check_workers()
        try:
            futs = [self.done.get(timeout=timeout)]
        except queue.Empty:
            self._scheduler_answers()
            return []
        while True:
            try:
                futs.append(self.done.get_nowait())
            except queue.Empty:
                break
        fetched = {}
        for item in futs:                   # a fetch thread's values, or done futures
            if isinstance(item, dict):
                fetched.update(item)
        futs = [f for f in futs if not isinstance(f, dict) and f in self.tasks]
        finished = [f for f in futs if f.status == "finished"]
        if finished:
            # fetched by a thread of its own: a result held by a worker that has since stopped
            # (SIGSTOP) waits until that worker is removed and the task recomputed, and the loop
            # (with its --job-timeout clocks) must not wait with it
            self._fetch_queue().put(finished)
        futs = [f for f in futs if f not in finished] + [f for f in fetched if f in self.tasks]
        values = {f: v for f, v in fetched.items() if v is not _NO_VALUE}
        out = []
        for f in futs:
            ids = self.tasks.pop(f)
            self._busy -= len(ids)
            if f in values:
                value = values[f]
                if "environment" in value:
                    self.tasks[f] = ids
                    self._busy += len(ids)
                    raise SelfconEnvironmentError(f"a Dask worker of {self.where} runs another version: "
                                                  f"{value['environment']}; install the same selfcon on the workers")
                out.extend((j, "ok", o) for j, o in value["outcomes"])
            elif f.status == "finished":
                out.extend((j, "lost", f"{DIED} (result lost)") for j in ids)
            else:
                out.extend(self._failed(f, ids))
            for book in (self._started, self._on):
                book.pop(f, None)
            self._timed_out.discard(f)
            f.release()
        return out

    def _fetch_queue(self):
        if self._fetcher is None:
            self._fetcher = queue.SimpleQueue()
            threading.Thread(target=self._fetch_loop, args=(self._fetcher,), name="selfcon-dask-fetch",
                             daemon=True).start()
        return self._fetcher

    def _fetch_loop(self, todo):
        """Fetch thread: gather finished futures' values; hand them to :meth:`poll` through the
        done queue as one dict (future -> value, or _NO_VALUE if it was lost meanwhile)."""
        while True:
            finished = todo.get()
            if finished is None:
                return
            values = {}
            try:
                values = dict(zip(finished, self.client.gather(finished)))
            except Exception:
                for f in finished:          # one was lost between done and fetch: fetch one by one
                    try:
                        values[f] = f.result()
                    except Exception:
                        pass
            self.done.put({f: values.get(f, _NO_VALUE) for f in finished})

    def _failed(self, f, ids):
        from distributed import KilledWorker
        try:
            exc = f.exception()
        except Exception as e:     # cancelled
            exc = e
        if f.status == "cancelled" and self.client.status != "running":
            # the scheduler went away: nobody's fault, and the run stops unless it comes back
            return [(j, "lost", f"{DIED} (the Dask scheduler was lost)") for j in ids]
        if f in self._timed_out:             # kill_job: past --job-timeout, the first job is charged
            return [(ids[0], "died", f"{DIED} (cancelled past --job-timeout)")] + \
                [(j, "suspect", f"{DIED} (in a task of {len(ids)} jobs)") for j in ids[1:]]
        if isinstance(exc, KilledWorker) or f.status == "cancelled":
            if len(ids) == 1:
                return [(ids[0], "died", f"{DIED} (Dask gave up on the task: {type(exc).__name__})")]
            return [(j, "suspect", f"{DIED} (in a task of {len(ids)} jobs)") for j in ids]
        if isinstance(exc, (ImportError, AttributeError)):
            raise SelfconEnvironmentError(f"a Dask worker of {self.where} cannot run the job function: "
                                          f"{type(exc).__name__}: {exc}")
        err = {"ok": False, "error": f"{type(exc).__name__}: {exc}", "seconds": None}
        return [(j, "ok", err) for j in ids]

    def kill_job(self, job_id):
        """Free the worker of the task whose first job is ``job_id`` (past --job-timeout): the
        task is cancelled (it comes back from :meth:`poll` as "died"), the scheduler drops the
        worker at once (nothing more is sent to it), and its nanny, if it has one, kills the
        process (a stopped one too) and starts a fresh worker in its place."""
        fut = next((f for f, ids in self.tasks.items() if ids[0] == job_id), None)
        worker = self._on.get(fut)
        if fut is None or worker is None or fut in self._timed_out:
            return False
        self._timed_out.add(fut)
        log.warning("job %d: cancelling its Dask task %s and removing worker %s", job_id, fut.key, worker)
        try:
            self.client.cancel([fut])
            self.client.run_on_scheduler(_worker_dropper(), worker, f"selfcon-job-timeout-{job_id}")
        except Exception as exc:             # the scheduler went away: _scheduler_answers says so
            log.warning("job %d: could not remove worker %s: %s: %s", job_id, worker, type(exc).__name__, exc)
        return True

    def worker_pids(self):
        return list(self.client.run(os.getpid).values())

    def _close(self):
        # a client whose scheduler is gone logs its failed reconnection as it closes: that loss
        # is reported already (one line, exit 4), so Dask's own account of it is not repeated
        quiet = logging.getLogger("distributed.client")
        level = quiet.level
        if getattr(self, "_silent_since", None) is not None:
            quiet.setLevel(logging.CRITICAL)
        try:
            for thing in (getattr(self, "client", None), self.cluster):
                if thing is not None:
                    try:
                        thing.close()
                    except Exception:
                        pass
        finally:
            quiet.setLevel(level)

    def shutdown(self, cancel=False):
        if self._fetcher is not None:
            self._fetcher.put(None)
        if cancel and self.tasks:
            try:
                self.client.cancel(list(self.tasks))
            except Exception:
                pass
        self.tasks.clear()
        self._busy = 0
        self._close()


def _worker_dropper():
    """The function kill_job runs on the Dask scheduler, made here so that it travels by value
    (a scheduler started with ``dask scheduler`` need not have selfcon installed)."""

    async def drop(address, reason, dask_scheduler=None):
        # forget the worker now, then have its nanny kill the process (a stopped one too: the
        # nanny's kill waits about 2 s for a clean stop, then SIGKILLs) and start a new one; the
        # kill runs in the background so that the coordinator does not wait for it
        import asyncio

        from distributed.core import rpc
        ws = dask_scheduler.workers.get(address)
        if ws is None:
            return "already gone"
        nanny = ws.nanny
        await dask_scheduler.remove_worker(address=address, stimulus_id=reason, close=nanny is None)
        if not nanny:
            return "removed"

        async def kill():
            try:
                async with rpc(nanny, connection_args=dask_scheduler.connection_args) as n:
                    await n.kill(reason=reason, timeout=2)
            except Exception:
                pass

        pending = dask_scheduler.__dict__.setdefault("_selfcon_kills", set())
        task = asyncio.get_running_loop().create_task(kill())
        pending.add(task)                  # a reference, until it is done
        task.add_done_callback(pending.discard)
        return "removed; its nanny restarts it"

    return drop


def make_executor(job_spec, workers, *, scheduler=None, scheduler_file=None, cluster=None, threads=None,
                  **dask_options):
    if scheduler or scheduler_file or cluster:
        return DaskPool(job_spec, address=scheduler, scheduler_file=scheduler_file, cluster=cluster,
                        workers=workers, threads=threads, **dask_options)
    return LocalPool(workers, job_spec, threads=threads)
