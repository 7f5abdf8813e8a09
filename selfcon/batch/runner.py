"""The coordinator: expands the study, syncs the queue, feeds an executor, writes every file.

It is the only process that touches the output folder (with the table processes it
starts): the workers get deck text (and a warm-start potential) and hand back the
result's HDF5 file image and the table's figures.  Crash safety comes
from the order of writes: a result file is written atomically first, then its
row is marked finished (in one transaction with the others written meanwhile); a
coordinator killed in between
leaves a job 'running' that the next run requeues (its file is simply
rewritten).  Ctrl-C once: stop submitting and let the running jobs finish;
twice (or SIGTERM): requeue the running jobs and stop now.  Exit code 130.
"""
from __future__ import annotations

import collections
import contextlib
import concurrent.futures as cf
import json
import logging
import math
import os
import queue
import signal
import sqlite3
import sys
import time
from pathlib import Path

from selfcon.batch import logs
from selfcon.batch import queue as q
from selfcon.batch import verify
from selfcon.batch.executors import DEFAULT_BACKLOG, make_executor
from selfcon.batch.study import default_out_dir, expand, load_study
from selfcon.batch.summary import summarize  # noqa: F401  (the table's figures; computed in the workers)
from selfcon.batch.worker import resolve
from selfcon.errors import SelfconEnvironmentError
from selfcon.output.schema import TABLE, TABLE_SUMMARY

log = logging.getLogger("selfcon.batch")

DEFAULT_JOB = "selfcon.batch.worker:run_job"
#: test/benchmark seam: the job function, as "module:function"
JOB_ENV = "SELFCON_BATCH_JOB"
#: seconds between two rewrites of table.csv / table.h5 during a run (and once at its end)
TABLE_INTERVAL = 30.0
#: threads writing result files (each file is fsync'ed: parallel writes overlap the waits)
WRITER_THREADS = 8
#: results waiting for their file to be written before no more jobs are sent (bounds the memory)
MAX_PENDING_WRITES = 4 * WRITER_THREADS

#: the summary figures of each job: (name, units, description), declared in selfcon/output/schema.py
SUMMARY_COLUMNS = [(name, units, desc) for name, units, _, desc in TABLE_SUMMARY]


# --------------------------------------------------------------------------- progress

class BatchProgress:
    """The coordinator's progress: job counts on the one progress display
    (selfcon.output.progress): a bar with done/total and ETA on a terminal, one line per
    finished job elsewhere, nothing when quiet."""

    def __init__(self, quiet, stream=None):
        from selfcon.output.progress import ProgressDisplay, progress_mode
        self.display = ProgressDisplay(progress_mode(quiet, stream), counted=True, stream=stream)
        self.total = 0

    @property
    def wants_lines(self):
        return self.display.wants_lines

    def start(self, total, counts):
        self.total = total
        self.display.start(total, format_counts(counts), completed=_finished(counts),
                           line=f"batch: {total} jobs, {format_counts(counts)}")

    def event(self, line, counts):
        finished = _finished(counts)
        self.display.update(finished, format_counts(counts),
                            line=f"[{finished:>{len(str(self.total))}}/{self.total}] {line}")

    def note(self, line):
        self.display.note(line)

    def warn(self, line):
        """A line that must be seen even with --quiet (above the bar, or on stderr)."""
        if self.display.mode == "off":
            print(line, file=sys.stderr)
        else:
            self.display.note(line)

    def stop(self):
        self.display.stop()


def _finished(counts):
    return sum(counts.get(s, 0) for s in q.FINISHED)


def format_counts(c):
    """Job counts as text: "12 done, 1 failed, 2 running" (the statuses that occur, in
    this order: done, not converged, failed, running, queued)."""
    parts = [f"{c[s]} {s.replace('_', ' ')}" for s in ("done", "not_converged", "failed", "running", "queued")
             if c.get(s)]
    return ", ".join(parts) or "nothing to do"


def make_progress(quiet):
    """The progress shown by ``selfcon batch`` (quiet: nothing)."""
    return BatchProgress(quiet)


# --------------------------------------------------------------------------- coordinator

class _Signals:
    """SIGINT once -> stop submitting; twice or SIGTERM -> abandon running jobs."""

    def __init__(self):
        self.stopping = False
        self.abandon = False
        self._old = {}

    def _handler(self, signum, frame):
        if signum == signal.SIGTERM or self.stopping:
            self.abandon = True
        self.stopping = True

    def __enter__(self):
        for s in (signal.SIGINT, signal.SIGTERM):
            try:
                self._old[s] = signal.signal(s, self._handler)
            except ValueError:       # not the main thread
                pass
        return self

    def __exit__(self, *exc):
        for s, h in self._old.items():
            signal.signal(s, h)


class Coordinator:
    """Feeds an executor from the queue and turns its events into files and rows.

    Its cost per job is constant: claims and finishes go to SQLite in batches, the
    counts are kept in memory, result files are written by a pool of writer threads
    (each file is fsync'ed; the row is finished only once the file is on disk), and the
    tables are rewritten at most every ``table_interval`` seconds and at the end.
    Short jobs travel several to a task (:meth:`_chunk`).  A job whose worker died
    (a *suspect*) runs again alone, on a worker of its own, while the others carry on.
    """

    def __init__(self, out_dir, *, workers, retries=2, job_fn=None, progress=None, warm=True,
                 table_interval=TABLE_INTERVAL, executor_options=None, job_timeout=None):
        self.out_dir = Path(out_dir)
        self.jobs_dir = self.out_dir / "jobs"
        self.workers = workers
        self.retries = retries
        self.job_spec = job_fn or os.environ.get(JOB_ENV) or DEFAULT_JOB
        self.fn = resolve(self.job_spec)
        self.progress = progress or BatchProgress(True)
        self.warm = warm
        self.table_interval = table_interval
        self.executor_options = dict(executor_options or {})
        self.job_timeout = job_timeout  # seconds of wall clock a job may run (None: no limit)
        self.timed_out = {}             # job id -> seconds it had run when its worker was stopped
        self._last_timeout_check = 0.0
        self.along = None             # the continuation axis (a deck path), set by run()
        self.continuation = False
        self.suspects = set()         # jobs whose worker died under them: they run alone
        self.interrupted = False
        self.fatal = None             # a SelfconEnvironmentError that stops the run (disk full, ...)
        self.writer = cf.ThreadPoolExecutor(max_workers=WRITER_THREADS, thread_name_prefix="selfcon-write")
        self.pending = {}             # job id -> (outcome, warm): files being written
        self.written = queue.SimpleQueue()   # (job id, exception or None), from the writer threads
        self.counts = None            # status -> count, kept in memory during the run
        self.mean_seconds = None      # running mean of a job's own time (sizes the chunks)
        self.warm_started = set()
        self._potentials = collections.OrderedDict()   # small cache: job id -> (z, phi)
        self._last_table = time.monotonic()
        self._table_proc = None       # the process writing the tables now, if any

    # -- bits -----------------------------------------------------------------
    def _potential(self, con, job_id):
        """(z, phi) of a finished converged job, read from its result file; None if unavailable."""
        if job_id in self._potentials:
            self._potentials.move_to_end(job_id)
            return self._potentials[job_id]
        row = con.execute("SELECT status, result_path FROM jobs WHERE id = ?", (job_id,)).fetchone()
        if row is None or row["status"] != "done" or not row["result_path"]:
            return None
        try:
            import h5py
            with h5py.File(self.out_dir / row["result_path"], "r") as f:
                pair = (f["mesh/z"][()], f["profile/potential"][()])
        except Exception:
            return None
        self._potentials[job_id] = pair
        while len(self._potentials) > 64:
            self._potentials.popitem(last=False)
        return pair

    def _along_value(self, con, job_id):
        row = con.execute("SELECT varied, neighbour FROM jobs WHERE id = ?", (job_id,)).fetchone()
        if row is None:
            return None, None
        return json.loads(row["varied"]).get(self.along), row["neighbour"]

    def _initial(self, con, neighbour, job_id=None):
        """Warm start from the neighbour along the continuation axis, extrapolated linearly
        through the neighbour's own neighbour when both are done (selfcon.solver.loop.extrapolate_potential)."""
        if neighbour is None or not self.continuation:
            return None
        first = self._potential(con, neighbour)
        if first is None:
            return None
        from selfcon.batch.worker import Starts
        from selfcon.solver.loop import extrapolate_potential
        starts = [("neighbour", first), ("cold", None)]
        if job_id is not None and self.along is not None:
            value, _ = self._along_value(con, job_id)
            v1, nn = self._along_value(con, neighbour)
            second = self._potential(con, nn) if nn is not None else None
            if second is not None and value is not None and v1 is not None:
                v2, _ = self._along_value(con, nn)
                guess = extrapolate_potential([(first[0], first[1], v1), (second[0], second[1], v2)], value)
                starts.insert(0, ("extrapolated", guess))
        # the job falls back from one start to the next until one converges (worker.run_job)
        return Starts(starts)

    def _varied(self, con, job_id):
        row = con.execute("SELECT varied FROM jobs WHERE id = ?", (job_id,)).fetchone()
        return _fmt_varied(row["varied"]) if row else ""

    def _move(self, old, new, n=1):
        self.counts[old] -= n
        self.counts[new] += n

    def _event(self, line, level=logging.INFO):
        log.log(level, line)
        self.progress.event(line, self.counts)

    def _handle(self, con, job_id, kind, payload):
        """One executor event; a finished job's file goes to the writer threads."""
        if kind == "died" and job_id in self.timed_out:
            payload = (f"ran {self.timed_out.pop(job_id):.0f} s, past --job-timeout "
                       f"{self.job_timeout:g} s: its worker was stopped")
        if kind in ("died", "suspect", "lost"):
            if kind != "lost":
                self.suspects.add(job_id)
            row = con.execute("SELECT attempts FROM jobs WHERE id = ?", (job_id,)).fetchone()
            attempts = row["attempts"]
            if kind == "died" and attempts > self.retries:
                q.finish(con, job_id, status="failed", error=f"{payload} ({attempts} attempts)")
                self._move("running", "failed")
                self._event(f"job {job_id} failed: {payload} ({attempts} attempts)  {self._varied(con, job_id)}",
                            logging.WARNING)
                return
            q.requeue(con, job_id, count_attempt=(kind == "died"), error=payload)
            self._move("running", "queued")
            what = {"died": f"attempt {attempts} counted; it runs alone next",
                    "suspect": "attempt not counted; it runs alone next", "lost": "attempt not counted"}[kind]
            self._event(f"job {job_id} requeued: {payload} ({what})  {self._varied(con, job_id)}", logging.WARNING)
            return
        self.suspects.discard(job_id)
        warm = job_id in self.warm_started
        self.warm_started.discard(job_id)
        secs = payload.get("seconds")
        if secs is not None:
            self.mean_seconds = secs if self.mean_seconds is None else 0.9 * self.mean_seconds + 0.1 * secs
        if not payload.get("ok"):
            q.finish(con, job_id, status="failed", seconds=secs, error=payload.get("error"))
            self._move("running", "failed")
            first = (payload.get("error") or "").splitlines()[:1]
            self._event(f"job {job_id} failed: {first[0] if first else '?'}  {self._varied(con, job_id)}",
                        logging.WARNING)
            return
        self.pending[job_id] = (payload, warm)
        self.writer.submit(self._save, job_id, payload, self.out_dir / f"jobs/{job_id}.h5")

    def _save(self, job_id, payload, path):
        """Writer thread: the result file, atomically (fsync'ed); packs a bare Result first."""
        try:
            import hashlib
            from selfcon.output.result import save_image
            if "image" not in payload:          # a seam job function that returned a Result
                from selfcon.batch.worker import pack
                secs = payload.get("seconds")
                payload.update(pack(payload.pop("result")), seconds=secs)
            # the digest of the bytes on disk goes into the queue: a resume compares it (batch/verify.py)
            payload["sha256"] = hashlib.sha256(payload["image"]).hexdigest()
            save_image(payload["image"], path, force=True)
        except BaseException as exc:
            self.written.put((job_id, exc))
        else:
            payload.pop("image", None)          # written: the bytes need not stay in memory
            self.written.put((job_id, None))

    def _drain_writes(self, con, timeout=0.0):
        """Finish, in one transaction, every job whose file is on disk.  ``timeout``: 0 takes
        what is written now; seconds: wait that long for a first file; None: wait for all."""
        if not self.pending:
            return
        done = []
        if timeout is None:
            while len(done) < len(self.pending):
                done.append(self.written.get())
        else:
            try:
                done.append(self.written.get(timeout=timeout) if timeout > 0 else self.written.get_nowait())
                while True:
                    done.append(self.written.get_nowait())
            except queue.Empty:
                pass
        if not done:
            return
        items, lines = [], []
        for job_id, exc in done:
            payload, warm = self.pending.pop(job_id)
            rel = f"jobs/{job_id}.h5"
            if isinstance(exc, (SelfconEnvironmentError, OSError)):
                # the folder cannot take the file (disk full, permissions): not the job's fault.  The
                # job goes back to the queue uncharged and the run stops (exit 4); rerun when fixed.
                q.requeue(con, job_id, count_attempt=False, error=None)
                self._move("running", "queued")
                if self.fatal is None:
                    self.fatal = (exc if isinstance(exc, SelfconEnvironmentError) else
                                  SelfconEnvironmentError.from_os_error(exc, "cannot write", self.out_dir / rel))
                    self.progress.note(f"stopping: {self.fatal}; job {job_id} requeued, rerun when fixed")
                    log.error("stopping: %s; job %d requeued", self.fatal, job_id)
                continue
            if exc is not None:
                items.append(dict(job_id=job_id, status="failed", seconds=payload.get("seconds"),
                                  error=f"cannot write {rel}: {type(exc).__name__}: {exc}"))
                lines.append((f"job {job_id} failed: cannot write {rel}: {exc}", logging.ERROR))
                continue
            status = "done" if payload["converged"] else "not_converged"
            items.append(dict(job_id=job_id, status=status, seconds=payload.get("seconds"),
                              message=payload.get("message"), result_path=rel, iterations=payload["iterations"],
                              converged=payload["converged"], summary=payload.get("summary"),
                              warm_start=warm and payload.get("start", "neighbour") != "cold",
                              start=payload.get("start") or ("neighbour" if warm else "cold"),
                              result_sha256=payload.get("sha256")))
            secs = payload.get("seconds")
            tail = f" {secs:.2f} s" if secs is not None else ""
            lines.append((f"job {job_id} {status.replace('_', ' ')}: {payload['iterations']} it{tail}",
                          logging.INFO))
        q.finish_many(con, items)
        for it, (line, level) in zip(items, lines):
            self._move("running", it["status"])
            if getattr(self.progress, "wants_lines", True) or log.isEnabledFor(level):
                line = f"{line}  {self._varied(con, it['job_id'])}"
            self._event(line, level)

    def _chunk(self, ex, queued):
        """Jobs per task: enough that a task takes about ``ex.chunk_target`` seconds (1 until a
        job has finished), never more than a fair share of what is left to do."""
        if self.mean_seconds is None or self.continuation:
            return 1
        k = int(ex.chunk_target / max(self.mean_seconds, 1e-6))
        fair = math.ceil(queued / (2 * max(1, ex.parallelism)))
        return max(1, min(k, ex.max_chunk, fair))

    def _submit(self, con, ex):
        """Fill the executor: suspects alone, one per free worker; then chunks of the others."""
        if self.suspects:
            running = ex.in_flight
            waiting = sorted(i for i in self.suspects if i not in running)
            for job_id in waiting:
                if ex.slots(alone=True) <= 0:
                    break
                row = q.claim_id(con, job_id)
                if row is None:
                    continue
                self._move("queued", "running")
                ex.submit([self._job(con, row)], alone=True)
        if len(self.pending) >= MAX_PENDING_WRITES:     # the disk is behind: results wait in the workers
            return
        if hasattr(ex, "prefetch"):
            ex.prefetch = self.mean_seconds is not None and self.mean_seconds < 0.01
        slots = ex.slots()
        while slots > 0 and self.counts["queued"] > 0:
            k = self._chunk(ex, self.counts["queued"])
            rows = q.claim_many(con, k, exclude=self.suspects)
            if not rows:
                break
            self._move("queued", "running", len(rows))
            ex.submit([self._job(con, r) for r in rows])
            slots -= 1

    def _job(self, con, row):
        initial = self._initial(con, row["neighbour"], row["id"])
        if initial is not None:
            self.warm_started.add(row["id"])
        return (row["id"], row["deck_text"], initial)

    def _tables(self, con, wait=False):
        """table.csv and table.h5, at most every ``table_interval`` seconds during the run, each
        time by a process of its own (reading the queue through a read-only connection): the
        tables of 1e5 jobs take seconds to write, and the coordinator must not stop for them.
        ``wait``: only wait for a table process still running (the run is ending)."""
        if self._table_proc is not None:
            if self._table_proc.is_alive() and not wait:
                return
            kind, message = _end_table_process(self._table_proc)
            self._table_proc = None
            if kind == "environment" and self.fatal is None:
                self.fatal = SelfconEnvironmentError(message)
                self.progress.note(f"stopping: {self.fatal}")
                log.error("stopping: %s", self.fatal)
            elif kind == "bug":
                log.error("table process: %s", message)
        if wait or self.fatal is not None or time.monotonic() - self._last_table < self.table_interval:
            return
        self._table_proc = _start_table_process(self.out_dir)
        self._last_table = time.monotonic()

    # -- main loop ------------------------------------------------------------
    def run(self, con, *, continuation=False, along=None):
        self.continuation = continuation
        self.along = along
        self.counts = q.counts(con)
        total = sum(self.counts.values()) - self.counts["retired"]
        self.progress.start(total, self.counts)
        log.info("study %s: %d jobs, %s", self.out_dir, total, format_counts(self.counts))
        if self.counts["queued"] == 0:
            self.progress.stop()
            return q.counts(con)
        self.jobs_dir.mkdir(parents=True, exist_ok=True)
        with _Signals() as sig:
            try:
                ex = make_executor(self.job_spec, self.workers, **self.executor_options)
            except BaseException:
                self.progress.stop()
                raise
            try:
                if self.warm and self.job_spec == DEFAULT_JOB and not sig.stopping:
                    self._warm_up(con)
                self._loop(con, ex, sig)
            except BaseException:
                # an environment failure (or a bug): nothing in flight stays 'running'
                for job in ex.in_flight:
                    q.requeue(con, job, count_attempt=False, error=None)
                sig.abandon = True
                raise
            finally:
                ex.shutdown(cancel=sig.abandon)
                self._drain_writes(con, timeout=None)
                self.writer.shutdown(wait=True)
                self._tables(con, wait=True)
                self.progress.stop()
            self.interrupted = sig.stopping
        return q.counts(con)

    def _warm_up(self, con):
        """Fill the numba cache before workers start (else every worker compiles on its own)."""
        from selfcon.batch.worker import warm_up
        try:
            if warm_up():
                return
        except Exception as exc:   # warm-up is an optimisation only
            self.progress.note(f"warm-up failed ({type(exc).__name__}: {exc}); workers compile on their own")
            return

    def _loop(self, con, ex, sig):
        said_stop = False
        while True:
            if sig.abandon:
                for job in ex.in_flight:
                    q.requeue(con, job, count_attempt=False, error=None)
                self.progress.note("interrupted: running jobs requeued; rerun the command to continue")
                log.warning("interrupted: %d running jobs requeued", ex.busy)
                return
            if not sig.stopping and self.fatal is None:
                self._submit(con, ex)
            elif ex.busy and not said_stop:
                said_stop = True
                self.progress.note(f"interrupted: waiting for {ex.busy} running jobs "
                                   "(Ctrl-C again to requeue them and stop now)")
                log.warning("interrupted: waiting for %d running jobs", ex.busy)
            if ex.busy:
                for job, kind, payload in ex.poll(0.005 if self.pending else 0.2):
                    self._handle(con, job, kind, payload)
                self._drain_writes(con)
            elif self.pending:
                # nothing runs: wait for a file (its job may free a continuation chain, or room
                # for more results); when stopping, for all of them
                self._drain_writes(con, timeout=None if sig.stopping else 0.2)
            elif (self.counts["queued"] and not sig.stopping and self.fatal is None
                  and getattr(ex, "waiting", lambda: False)()):
                time.sleep(0.2)     # jobs wait for an executor that cannot take them now (a lost
                continue            # scheduler): it raises once its time-out has passed
            else:
                return          # nothing runs, nothing is being written, nothing more to send
            self._tables(con)
            if self.job_timeout:
                self._stop_overdue(ex)

    def _stop_overdue(self, ex):
        """Kill the worker of every job running longer than ``job_timeout`` (a hung or stopped
        worker holds its job forever otherwise); the executor reports it "died": the attempt
        counts and the job runs again, alone, until --retries is used up."""
        now = time.time()
        if now - self._last_timeout_check < min(1.0, self.job_timeout / 4):
            return
        self._last_timeout_check = now
        watch = getattr(ex, "watch", None)      # Dask: ask the scheduler which tasks run now
        if watch is not None:
            watch()
        for job_id, started in ex.in_flight.items():
            if started is None or job_id in self.timed_out or now - started <= self.job_timeout:
                continue
            if ex.kill_job(job_id):
                self.timed_out[job_id] = now - started
                log.warning("job %d ran %.0f s, past --job-timeout %g s: stopping its worker",
                            job_id, now - started, self.job_timeout)


#: above this many jobs the final tables too are written by a process of their own (their
#: memory, some 2 kB per job, stays out of the coordinator)
TABLE_PROCESS_ROWS = 20000


def _table_process(out_dir, msg):
    """A table process (see Coordinator._tables): write the tables; on failure send
    ("environment", line) for a failing disk or queue, ("bug", text) otherwise."""
    try:
        con = q.connect(out_dir, readonly=True)
        try:
            write_tables(con, out_dir)
        finally:
            con.close()
    except (SelfconEnvironmentError, OSError, sqlite3.DatabaseError) as exc:
        if isinstance(exc, OSError):
            exc = SelfconEnvironmentError.from_os_error(exc, "cannot write the tables in", out_dir)
        msg.send(("environment", str(exc)))
    except Exception as exc:
        msg.send(("bug", f"{type(exc).__name__}: {exc}"))
    finally:
        msg.close()


def _start_table_process(out_dir):
    import multiprocessing
    ctx = multiprocessing.get_context("forkserver" if "forkserver" in multiprocessing.get_all_start_methods()
                                      else "spawn")
    msg, child = ctx.Pipe(duplex=False)
    proc = ctx.Process(target=_table_process, args=(str(out_dir), child), name="selfcon-tables", daemon=True)
    proc.start()
    child.close()
    proc.selfcon_msg = msg
    return proc


def _end_table_process(proc):
    """Wait for a table process -> (None, None) if it wrote the tables, else (kind, message)."""
    proc.join()
    try:
        kind, message = proc.selfcon_msg.recv()
    except EOFError:
        kind, message = (None, None) if proc.exitcode == 0 else ("bug", f"exit code {proc.exitcode}")
    proc.selfcon_msg.close()
    return kind, message


def final_tables(con, out_dir):
    """The tables at the end of a run: in this process for a small study, else by a table
    process (whose failure to write is a SelfconEnvironmentError; a bug there is redone here)."""
    if con.execute("SELECT COUNT(*) FROM jobs").fetchone()[0] > TABLE_PROCESS_ROWS:
        kind, message = _end_table_process(_start_table_process(out_dir))
        if kind is None:
            return
        if kind == "environment":
            raise SelfconEnvironmentError(message)
    write_tables(con, out_dir)


def _fmt_varied(text):
    return ", ".join(f"{k}={v:.6g}" if isinstance(v, float) else f"{k}={v}" for k, v in json.loads(text).items())


# --------------------------------------------------------------------------- tables

#: the queue columns a table is made of (never the deck text: the table of 1e5 jobs stays fast)
TABLE_SOURCE = ("id", "varied", "summary", "status", "attempts", "converged", "iterations", "seconds",
                "warm_start", "start", "result_path", "error", "message")


def table_columns(con):
    return ["job"] + q.get_meta(con, "paths", []) + ["status", "attempts", "converged", "iterations"] + \
        [c[0] for c in SUMMARY_COLUMNS] + ["seconds", "warm_start", "start", "result", "message"]


def table_rows(con):
    paths = q.get_meta(con, "paths", [])
    out = []
    for r in q.rows(con, columns=TABLE_SOURCE):
        varied = json.loads(r["varied"])
        summ = json.loads(r["summary"]) if r["summary"] else {}
        row = {"job": r["id"]}
        for p in paths:
            row[p] = varied.get(p)
        row.update(status=r["status"], attempts=r["attempts"],
                   converged=None if r["converged"] is None else bool(r["converged"]),
                   iterations=r["iterations"])
        for name, _, _ in SUMMARY_COLUMNS:
            row[name] = summ.get(name, float("nan"))
        row.update(seconds=r["seconds"], warm_start=bool(r["warm_start"]), start=r["start"] or "",
                   result=r["result_path"] or "",
                   message=(r["error"] or r["message"] or "").splitlines()[0] if (r["error"] or r["message"]) else "")
        out.append(row)
    return out


def write_tables(con, out_dir):
    """table.csv and table.h5 in the output folder, one row per (non-retired) job, atomically."""
    import csv
    out_dir = Path(out_dir)
    cols = table_columns(con)
    rows = table_rows(con)
    from selfcon.output.files import atomic_write

    def fill(tmp):
        with open(tmp, "w", newline="", encoding="utf-8") as fh:
            w = csv.writer(fh)
            w.writerow(cols)
            for r in rows:
                w.writerow(["" if r[c] is None else (repr(r[c]) if isinstance(r[c], float) else r[c]) for c in cols])
    atomic_write(out_dir / "table.csv", fill, force=True)
    atomic_write(out_dir / "table.h5", lambda tmp: _write_table_h5(con, tmp, cols, rows), force=True)


def path_units(path: str) -> str:
    """Units of a varied deck path (``layer.spacer.thickness`` -> ``nm``): its unit in the deck
    reference (selfcon.input.deck.deck_reference), spelled as in the files (``cm^-3`` ->
    ``cm-3``; ``-``, no unit -> ``1``)."""
    from selfcon.input.deck import deck_reference
    parts = path.split(".")
    if parts[0] == "layer" and len(parts) == 3:
        key = f"layer.{parts[2]}"
    elif parts[0] == "material" and len(parts) == 3:
        key = f"material.NAME.{parts[2]}"
    elif parts[0] == "substrate":
        key = "surface." + ".".join(parts[1:])
    else:
        key = path
    unit = {row[0]: row[2] for row in deck_reference()}.get(key, "-")
    return "1" if unit in ("-", "") else unit.replace("^", "")


def _write_table_h5(con, tmp, cols, rows):
    """table.h5: the table as netCDF-compatible HDF5, one variable per column on the ``job``
    dimension (declared in selfcon.output.schema.TABLE; varied columns take their path's unit)."""
    import h5py
    import numpy as np
    from selfcon.output.netcdf import Group, set_attrs
    paths = q.get_meta(con, "paths", [])
    with h5py.File(tmp, "w") as f:
        set_attrs(f, [("schema", TABLE.schema), ("schema_version", TABLE.version), ("columns", cols),
                      ("study", str(q.get_meta(con, "study_file", ""))),
                      ("mode", str(q.get_meta(con, "mode", ""))),
                      ("varied_paths", np.array(paths, dtype=h5py.string_dtype("utf-8")))])
        g = Group.create(f, "table", TABLE)
        set_attrs(g.h5, [("columns", cols)])
        g.coord("job", np.array([r["job"] for r in rows], dtype=np.int64))
        for c in cols:
            vals = [r[c] for r in rows]
            if c == "job":
                continue
            if c in paths:
                if all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in vals):
                    data = np.array(vals, dtype=float)
                else:
                    data = np.array([json.dumps(v) if not isinstance(v, str) else v for v in vals], dtype=object)
                g.var(c, data, units=path_units(c))
            elif c == "attempts":
                g.var(c, np.array(vals, dtype=np.int64))
            elif c == "iterations":
                g.var(c, np.array([-1 if v is None else v for v in vals], dtype=np.int64))
            elif c in ("converged", "warm_start"):
                g.var(c, np.array([-1 if v is None else int(v) for v in vals], dtype=np.int8))
            elif c in ("status", "start", "result", "message"):
                g.var(c, np.array(["" if v is None else str(v) for v in vals], dtype=object))
            else:
                g.var(c, np.array([math.nan if v is None else v for v in vals], dtype=float))


# --------------------------------------------------------------------------- front function

def run_study(study_file, *, workers=None, out=None, scheduler=None, scheduler_file=None, cluster=None,
              min_workers=0, max_workers=None, backlog=DEFAULT_BACKLOG, retries=2, quiet=True, job_fn=None,
              progress=None, memory_limit="4GiB", warm=True, log_file=None, numba_cache=None,
              table_interval=TABLE_INTERVAL, threads=None, job_timeout=None, scheduler_timeout=None):
    """Run (or resume) a study.  Returns ``(exit_code, counts, out_dir)``.

    Where the jobs run: the local process pool (``workers`` processes, default the CPU
    count); ``scheduler="local"`` a Dask LocalCluster of ``workers``; ``scheduler``
    (tcp://HOST:PORT) or ``scheduler_file`` a running Dask scheduler; ``cluster`` ("slurm",
    "pbs", ...) a dask-jobqueue cluster from the Dask configuration, adapting between
    ``min_workers`` and ``max_workers``.  ``log_file``: a line per job event, with times.
    ``threads``: threads of each worker's solves (selfcon.solver.threads; a worker's
    default is 1).
    ``job_timeout``: seconds a job may run before its worker is stopped and the job requeued
    (the attempt counts; local pool and Dask).  ``scheduler_timeout``: seconds to reach a Dask
    scheduler, and to wait for a lost one to come back, before exit 4 (default
    :data:`selfcon.batch.executors.SCHEDULER_TIMEOUT`).

    exit code: 0 every job done, 3 some not converged or failed, 130 interrupted.  An
    environment failure raises :class:`selfcon.errors.SelfconEnvironmentError` (exit 4).
    """
    study = load_study(study_file)
    out_dir = Path(out) if out else default_out_dir(study_file)
    # the folder is checked before anything is computed or written: new, empty, or this study's own
    q.check_out_folder(out_dir, study_file, study.deck_file,
                       option="--out" if out else "--out (default: beside the study)")
    _check_writable_folder(out_dir)
    if numba_cache:
        os.environ["NUMBA_CACHE_DIR"] = str(Path(numba_cache).resolve())
    jobs = expand(study)
    if workers is None:
        workers = max(1, min(len(jobs), os.cpu_count() or 1))
    options = {}
    if scheduler or scheduler_file or cluster:
        options = dict(scheduler=scheduler, scheduler_file=scheduler_file, cluster=cluster, memory_limit=memory_limit,
                       min_workers=min_workers, max_workers=max_workers, backlog=backlog,
                       scheduler_timeout=scheduler_timeout,
                       numba_cache_dir=os.environ.get("NUMBA_CACHE_DIR"))
    try:
        out_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise SelfconEnvironmentError.from_os_error(exc, "cannot create the study folder", out_dir) from None
    if threads is not None:
        options["threads"] = int(threads)                 # handed to every worker (executors)
    on_dask = bool(scheduler or scheduler_file or cluster)
    if on_dask:
        logs.load_dask()          # its loggers exist before they are redirected (batch/logs.py)
    lock = q.CoordinatorLock(out_dir).acquire()
    try:
        with logs.to_file(log_file):
            return _run_locked(study, study_file, jobs, out_dir, workers=workers, retries=retries, quiet=quiet,
                               dask_to_terminal=on_dask and log_file is None,
                               job_timeout=job_timeout,
                               job_fn=job_fn, progress=progress, warm=warm, table_interval=table_interval,
                               options=options)
    except sqlite3.DatabaseError as exc:
        if q.is_environment_failure(exc):
            raise q.queue_failure(out_dir, exc) from None
        raise
    finally:
        lock.release()


def _check_writable_folder(out_dir):
    """Exit 4 before any work when the study folder (or, if new, its nearest existing parent)
    cannot be written."""
    from selfcon.output.files import check_writable
    folder = Path(out_dir)
    while not folder.exists() and folder.parent != folder:
        folder = folder.parent
    check_writable(folder)


def _run_locked(study, study_file, jobs, out_dir, *, workers, retries, quiet, job_fn, progress, warm,
                table_interval, options, job_timeout=None, dask_to_terminal=False):
    con = q.connect(out_dir)
    try:
        q.set_meta(con, study_file=str(Path(study_file).resolve()), base_deck=str(study.deck_file),
                   paths=study.paths, mode=study.mode, continuation=study.continuation, along=study.along)
        changes = q.sync(con, jobs, retries=retries)
        del jobs[:]                       # the queue holds them now
        prog = progress or make_progress(quiet)
        if changes["retired"] or changes["requeued"] or changes["revived"]:
            line = (f"queue: {changes['added']} new, {changes['kept']} kept, {changes['requeued']} requeued, "
                    f"{changes['retired']} retired, {changes['revived']} back in the study")
            prog.note(line)
            log.info(line)
        # resume verifies: a finished job whose file is gone or changed runs again (batch/verify.py)
        removed = verify.clean_temporaries(out_dir)
        if removed:
            prog.note(f"removed {len(removed)} temporary files left by an interrupted write")
        bad, checked = verify.verify_jobs(con, out_dir)
        if bad:
            line = "verify: " + verify.summary_line(bad, checked)
            prog.note(line)
            log.warning(line)
        coord = Coordinator(out_dir, workers=workers, retries=retries, job_fn=job_fn, progress=prog, warm=warm,
                            table_interval=table_interval, executor_options=options, job_timeout=job_timeout)
        # without a log file, Dask's own lines reach the terminal as one line each, above the bar
        dask = logs.dask_lines(getattr(prog, "warn", prog.note)) if dask_to_terminal else contextlib.nullcontext()
        try:
            with dask:
                counts = coord.run(con, continuation=study.continuation, along=study.along)
        finally:
            try:
                final_tables(con, out_dir)
            except (SelfconEnvironmentError, OSError):
                if coord.fatal is None:       # the first failure is the one to report
                    raise
    finally:
        con.close()
    if coord.fatal is not None:
        log.error("study %s stopped: %s", out_dir, coord.fatal)
        raise coord.fatal
    if coord.interrupted and (counts["queued"] or counts["running"]):
        code = 130
    elif counts["not_converged"] or counts["failed"]:
        code = 3
    else:
        code = 0
    log.info("study %s ended: %s (exit code %d)", out_dir, format_counts(counts), code)
    return code, counts, out_dir
