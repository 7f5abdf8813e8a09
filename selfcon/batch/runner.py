"""The coordinator: expands the study, syncs the queue, feeds an executor, writes every file.

It is the only process that touches the output folder: the workers get deck
text (and a warm-start potential) and hand back a Result.  Crash safety comes
from the order of writes: a result file is written atomically first, then the
job row is marked finished in one statement; a coordinator killed in between
leaves a job 'running' that the next run requeues (its file is simply
rewritten).  Ctrl-C once: stop submitting and let the running jobs finish;
twice (or SIGTERM): requeue the running jobs and stop now.  Exit code 130.
"""
from __future__ import annotations

import concurrent.futures as cf
import json
import math
import os
import signal
import sqlite3
import sys
from pathlib import Path

from selfcon.batch import queue as q
from selfcon.batch.executors import DIED, make_executor
from selfcon.batch.study import default_out_dir, expand, load_study
from selfcon.batch.worker import resolve
from selfcon.errors import SelfconEnvironmentError

DEFAULT_JOB = "selfcon.batch.worker:run_job"
#: test/benchmark seam: the job function, as "module:function"
JOB_ENV = "SELFCON_BATCH_JOB"

SUMMARY_COLUMNS = [
    # name, units, description
    ("electron_sheet_density_cm2", "cm-2", "electrons per area in the whole stack"),
    ("hole_sheet_density_cm2", "cm-2", "holes per area in the whole stack"),
    ("channel_density_cm2", "cm-2", "electrons per area in the channel layer (the layer holding most)"),
    ("E0_eV", "eV", "lowest electron subband energy, relative to EF"),
    ("E1_eV", "eV", "second electron subband energy, relative to EF"),
    ("E1_minus_E0_eV", "eV", "subband spacing E1 - E0"),
    ("E0_minus_EF_eV", "eV", "lowest electron subband relative to EF (negative: occupied)"),
    ("hole_E0_eV", "eV", "highest hole subband energy (electron energy), relative to EF"),
    ("residual_V", "V", "last max |dphi| of the self-consistent loop"),
    ("warnings", "1", "number of design warnings of the solve (see the job's result file)"),
]


def summarize(result) -> dict:
    """The table's summary figures of one Result (NaN where the result has none)."""
    s = result.summary or {}
    nan = float("nan")

    def num(x):
        try:
            return float(x)
        except (TypeError, ValueError):
            return nan

    out = {
        "electron_sheet_density_cm2": num(s.get("electron_sheet_density_cm2", nan)),
        "hole_sheet_density_cm2": num(s.get("hole_sheet_density_cm2", nan)),
    }
    el = result.subbands.get("electron") if result.subbands else None
    if el is not None and len(el.energy):
        out["channel_density_cm2"] = float(sum(el.occupation))
        out["E0_eV"] = float(el.energy[0])
        out["E1_eV"] = float(el.energy[1]) if len(el.energy) > 1 else nan
    else:
        out.update(channel_density_cm2=0.0 if el is not None else nan, E0_eV=nan, E1_eV=nan)
    if "channel_electron_sheet_density_cm2" in s:      # electrons in the channel layer itself
        out["channel_density_cm2"] = num(s["channel_electron_sheet_density_cm2"])
    out["E1_minus_E0_eV"] = num(s.get("E1_minus_E0_eV", nan))
    out["E0_minus_EF_eV"] = num(s.get("E0_minus_EF_eV", nan))
    out["warnings"] = len(result.warnings or [])
    holes = [result.subbands[b].energy for b in ("heavy_hole", "light_hole")
             if result.subbands and b in result.subbands and len(result.subbands[b].energy)]
    out["hole_E0_eV"] = float(max(e[0] for e in holes)) if holes else nan
    out["residual_V"] = num(result.residual)
    return out


# --------------------------------------------------------------------------- progress

class _Plain:
    def __init__(self, quiet, stream=None):
        self.quiet = quiet
        self.stream = stream or sys.stderr

    def start(self, total, counts):
        self.total = total
        if not self.quiet:
            print(f"batch: {total} jobs, {_fmt_counts(counts)}", file=self.stream, flush=True)

    def event(self, line, counts):
        if not self.quiet:
            finished = sum(counts[s] for s in q.FINISHED)
            print(f"[{finished:>{len(str(self.total))}}/{self.total}] {line}", file=self.stream, flush=True)

    def note(self, line):
        if not self.quiet:
            print(line, file=self.stream, flush=True)

    def stop(self):
        pass


class _Rich:
    def __init__(self):
        from rich.console import Console
        from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeRemainingColumn
        self.console = Console(stderr=True)
        self.progress = Progress(TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(),
                                 TextColumn("ETA"), TimeRemainingColumn(), console=self.console, transient=False)

    def start(self, total, counts):
        self.progress.start()
        self.task = self.progress.add_task(_fmt_counts(counts), total=total,
                                           completed=sum(counts[s] for s in q.FINISHED))

    def event(self, line, counts):
        self.progress.update(self.task, completed=sum(counts[s] for s in q.FINISHED),
                             description=_fmt_counts(counts))

    def note(self, line):
        self.progress.console.print(line)

    def stop(self):
        self.progress.stop()


def _fmt_counts(c):
    parts = [f"{c[s]} {s.replace('_', ' ')}" for s in ("done", "not_converged", "failed", "running", "queued")
             if c.get(s)]
    return ", ".join(parts) or "nothing to do"


def make_progress(quiet):
    if not quiet and sys.stderr.isatty():
        try:
            return _Rich()
        except Exception:
            pass
    return _Plain(quiet)


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
    def __init__(self, out_dir, *, workers, scheduler=None, retries=2, job_fn=None, progress=None,
                 memory_limit="4GiB", warm=True):
        self.out_dir = Path(out_dir)
        self.jobs_dir = self.out_dir / "jobs"
        self.workers = workers
        self.scheduler = scheduler
        self.retries = retries
        self.job_spec = job_fn or os.environ.get(JOB_ENV) or DEFAULT_JOB
        self.fn = resolve(self.job_spec)
        self.progress = progress or _Plain(True)
        self.memory_limit = memory_limit
        self.warm = warm
        self.potentials = {}          # job id -> (z, phi) of converged results, for continuation
        self.along = None             # the continuation axis (a deck path), set by run()
        self.suspects = set()         # jobs in flight when a worker died
        self.interrupted = False
        self.fatal = None             # a SelfconEnvironmentError that stops the run (disk full, ...)
        self.writer = cf.ThreadPoolExecutor(max_workers=2, thread_name_prefix="selfcon-write")
        self.pending = {}             # write future -> (job id, path, result, outcome, warm, varied)

    # -- bits -----------------------------------------------------------------
    def _potential(self, con, job_id):
        """(z, phi) of a finished job, from memory or its result file; None if unavailable."""
        if job_id in self.potentials:
            return self.potentials[job_id]
        row = con.execute("SELECT status, converged, result_path FROM jobs WHERE id = ?", (job_id,)).fetchone()
        if row is None or row["status"] != "done" or not row["result_path"]:
            return None
        try:
            import h5py
            with h5py.File(self.out_dir / row["result_path"], "r") as f:
                pair = (f["mesh/z"][()], f["profile/potential"][()])
        except Exception:
            return None
        self.potentials[job_id] = pair
        return pair

    def _along_value(self, con, job_id):
        row = con.execute("SELECT varied, neighbour FROM jobs WHERE id = ?", (job_id,)).fetchone()
        if row is None:
            return None, None
        return json.loads(row["varied"]).get(self.along), row["neighbour"]

    def _initial(self, con, neighbour, job_id=None):
        """Warm start from the neighbour along the continuation axis, extrapolated linearly
        through the neighbour's own neighbour when both are done (selfcon.solver.loop.extrapolate_potential)."""
        if neighbour is None:
            return None
        first = self._potential(con, neighbour)
        if first is None:
            return None
        from selfcon.solver.loop import extrapolate_potential
        value = None
        points = [(first[0], first[1], None)]
        if job_id is not None and self.along is not None:
            value, _ = self._along_value(con, job_id)
            v1, nn = self._along_value(con, neighbour)
            second = self._potential(con, nn) if nn is not None else None
            if second is not None and value is not None and v1 is not None:
                v2, _ = self._along_value(con, nn)
                points = [(first[0], first[1], v1), (second[0], second[1], v2)]
        return extrapolate_potential(points, value)

    def _handle(self, con, job_id, kind, payload):
        row = con.execute("SELECT attempts, varied FROM jobs WHERE id = ?", (job_id,)).fetchone()
        varied = ", ".join(f"{k}={v:.6g}" if isinstance(v, float) else f"{k}={v}"
                           for k, v in json.loads(row["varied"]).items())
        if kind == "died":
            self.suspects.add(job_id)
            if row["attempts"] > self.retries:
                q.finish(con, job_id, status="failed", error=f"{DIED} ({row['attempts']} attempts)")
                return f"job {job_id} failed: {DIED} ({row['attempts']} attempts)  {varied}"
            q.requeue(con, job_id, count_attempt=True, error=DIED)
            return f"job {job_id} requeued: {DIED} (attempt {row['attempts']})  {varied}"
        warm = job_id in self._warm_started
        self._warm_started.discard(job_id)
        if not payload.get("ok"):
            q.finish(con, job_id, status="failed", seconds=payload.get("seconds"), error=payload.get("error"))
            first = (payload.get("error") or "").splitlines()[:1]
            return f"job {job_id} failed: {first[0] if first else '?'}  {varied}"
        result = payload["result"]
        rel = f"jobs/{job_id}.h5"
        self.jobs_dir.mkdir(parents=True, exist_ok=True)
        # the file is written by a writer thread (fsync is slow); the row is finished once it is on disk
        fut = self.writer.submit(self._save, result, self.out_dir / rel, payload.get("image"))
        self.pending[fut] = (job_id, rel, result, payload, warm, varied)
        return None

    @staticmethod
    def _save(result, path, image=None):
        from selfcon.output.result import save_image, save_result
        if image is not None:
            save_image(image, path, force=True)
        else:
            save_result(result, path, force=True)

    def _finalize(self, con, fut):
        job_id, rel, result, payload, warm, varied = self.pending.pop(fut)
        exc = fut.exception()
        if isinstance(exc, (SelfconEnvironmentError, OSError)):
            # the folder cannot take the file (disk full, permissions): not the job's fault.  The
            # job goes back to the queue uncharged and the run stops (exit 4); rerun when fixed.
            q.requeue(con, job_id, count_attempt=False, error=None)
            if self.fatal is None:
                self.fatal = (exc if isinstance(exc, SelfconEnvironmentError) else
                              SelfconEnvironmentError.from_os_error(exc, "cannot write", self.out_dir / rel))
                self.progress.note(f"stopping: {self.fatal}; job {job_id} requeued, rerun when fixed")
            return None
        if exc is not None:
            q.finish(con, job_id, status="failed", seconds=payload.get("seconds"),
                     error=f"cannot write {rel}: {type(exc).__name__}: {exc}")
            return f"job {job_id} failed: cannot write {rel}: {exc}"
        status = "done" if result.converged else "not_converged"
        q.finish(con, job_id, status=status, seconds=payload.get("seconds"), message=result.message,
                 result_path=rel, iterations=int(result.iterations), converged=result.converged,
                 summary=summarize(result), warm_start=warm)
        if result.converged and self.continuation:
            self.potentials[job_id] = (result.z, result.profile["potential"])
        secs = payload.get("seconds")
        tail = f" {secs:.2f} s" if secs is not None else ""
        return f"job {job_id} {status.replace('_', ' ')}: {result.iterations} it{tail}  {varied}"

    def _drain_writes(self, con, timeout=0.0):
        if not self.pending:
            return
        done, _ = cf.wait(list(self.pending), timeout=timeout)
        for fut in done:
            line = self._finalize(con, fut)
            self.progress.event(line, q.counts(con))

    def _claim(self, con, in_flight):
        """Next job to submit, keeping a suspect (a job seen when a worker died) alone in the pool."""
        if in_flight & self.suspects:
            return None
        queued_suspects = [r[0] for r in con.execute(
            f"SELECT id FROM jobs WHERE status = 'queued' AND id IN ({','.join(map(str, self.suspects)) or '-1'})")]
        if queued_suspects:
            if in_flight:
                row = q.claim(con, exclude=self.suspects)
                return row
            return q.claim_id(con, queued_suspects[0])
        return q.claim(con)

    # -- main loop ------------------------------------------------------------
    def run(self, con, *, continuation=False, along=None):
        self.continuation = continuation
        self.along = along
        self._warm_started = set()
        counts = q.counts(con)
        total = sum(counts.values()) - counts["retired"]
        self.progress.start(total, counts)
        if counts["queued"] == 0:
            self.progress.stop()
            return counts
        with _Signals() as sig:
            if self.warm and self.job_spec == DEFAULT_JOB:
                self._warm_up(con)
            if sig.stopping:
                self.interrupted = True
                self.progress.stop()
                return q.counts(con)
            ex = make_executor(self.scheduler, self.workers, self.fn, memory_limit=self.memory_limit)
            try:
                self._loop(con, ex, sig)
            finally:
                if sig.abandon:
                    ex.shutdown(cancel=True)
                else:
                    ex.shutdown()
                self._drain_writes(con, timeout=None)
                self.writer.shutdown(wait=True)
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
        row = q.claim(con)
        if row is None:
            return
        self.progress.note(f"warming the solver with job {row['id']} in the coordinator")
        self._submit_local(con, row)

    def _submit_local(self, con, row):
        initial = self._initial(con, row["neighbour"], row["id"])
        if initial is not None:
            self._warm_started.add(row["id"])
        line = self._handle(con, row["id"], "ok", self.fn(row["deck_text"], initial))
        if line:
            self.progress.event(line, q.counts(con))
        self._drain_writes(con, timeout=None)

    def _loop(self, con, ex, sig):
        while True:
            if sig.abandon:
                for job in ex.in_flight:
                    q.requeue(con, job, count_attempt=False, error=None)
                self.progress.note("interrupted: running jobs requeued; rerun the command to continue")
                return
            if not sig.stopping and self.fatal is None:
                in_flight = ex.in_flight
                while len(in_flight) < ex.capacity + 1:
                    row = self._claim(con, in_flight)
                    if row is None:
                        break
                    initial = self._initial(con, row["neighbour"], row["id"])
                    if initial is not None:
                        self._warm_started.add(row["id"])
                    ex.submit(row["id"], row["attempts"], row["deck_text"], initial)
                    in_flight = ex.in_flight
            elif ex.in_flight and not getattr(self, "_said_stop", False):
                self._said_stop = True
                self.progress.note(f"interrupted: waiting for {len(ex.in_flight)} running jobs "
                                   "(Ctrl-C again to requeue them and stop now)")
            if not ex.in_flight:
                had_writes = bool(self.pending)
                self._drain_writes(con, timeout=None)
                if sig.stopping or self.fatal is not None or not had_writes:
                    return                  # (finished writes may free a continuation chain)
                continue
            for job, kind, payload in ex.poll(0.05 if self.pending else 0.2):
                line = self._handle(con, job, kind, payload)
                if line:
                    self.progress.event(line, q.counts(con))
            self._drain_writes(con)


# --------------------------------------------------------------------------- tables

def table_columns(con):
    return ["job"] + q.get_meta(con, "paths", []) + ["status", "attempts", "converged", "iterations"] + \
        [c[0] for c in SUMMARY_COLUMNS] + ["seconds", "warm_start", "result", "message"]


def table_rows(con):
    paths = q.get_meta(con, "paths", [])
    out = []
    for r in q.rows(con):
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
        row.update(seconds=r["seconds"], warm_start=bool(r["warm_start"]), result=r["result_path"] or "",
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


def _write_table_h5(con, tmp, cols, rows):
    import h5py
    import numpy as np
    paths = q.get_meta(con, "paths", [])
    units = {c[0]: c[1] for c in SUMMARY_COLUMNS}
    desc = {c[0]: c[2] for c in SUMMARY_COLUMNS}
    desc.update(job="job id (jobs/<id>.h5)", status="queued | running | done | not_converged | failed",
                attempts="attempts made", converged="1 converged, 0 not, -1 no result",
                iterations="self-consistent iterations (-1: no result)", seconds="time in the worker: the solve and building its result file",
                warm_start="1 if started from a neighbour's potential", result="result file, relative to the folder",
                message="solver message or error text (first line)")
    units.update(seconds="s")
    with h5py.File(tmp, "w") as f:
        f.attrs["schema"] = "selfcon.batch_table"
        f.attrs["schema_version"] = 1
        f.attrs["columns"] = cols
        f.attrs["study"] = str(q.get_meta(con, "study_file", ""))
        g = f.create_group("table")
        g.attrs["columns"] = cols
        for c in cols:
            vals = [r[c] for r in rows]
            if c in paths:
                if all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in vals):
                    data = np.array(vals, dtype=float)
                else:
                    data = np.array([json.dumps(v) if not isinstance(v, str) else v for v in vals], dtype=object)
                u, d = "deck units", f"varied deck path {c}"
            elif c in ("job", "attempts"):
                data, u, d = np.array(vals, dtype=np.int64), "1", desc[c]
            elif c == "iterations":
                data, u, d = np.array([-1 if v is None else v for v in vals], dtype=np.int64), "1", desc[c]
            elif c in ("converged", "warm_start"):
                data = np.array([-1 if v is None else int(v) for v in vals], dtype=np.int8)
                u, d = "1", desc[c]
            elif c in ("status", "result", "message"):
                data, u, d = np.array(vals, dtype=object), "", desc[c]
            else:
                data = np.array([math.nan if v is None else v for v in vals], dtype=float)
                u, d = units.get(c, "1"), desc.get(c, c)
            if data.dtype == object:
                ds = g.create_dataset(c, data=data.astype(str).tolist() if len(data) else [],
                                      dtype=h5py.string_dtype("utf-8"), shape=(len(data),))
            else:
                ds = g.create_dataset(c, data=data)
            ds.attrs["units"] = u
            ds.attrs["description"] = d


# --------------------------------------------------------------------------- front function

def run_study(study_file, *, workers=None, out=None, scheduler=None, retries=2, quiet=True, job_fn=None,
              progress=None, memory_limit="4GiB", warm=True):
    """Run (or resume) a study.  Returns ``(exit_code, counts, out_dir)``.

    exit code: 0 every job done, 3 some not converged or failed, 130 interrupted.
    """
    study = load_study(study_file)
    out_dir = Path(out) if out else default_out_dir(study_file)
    # the folder is checked before anything is computed or written: new, empty, or this study's own
    q.check_out_folder(out_dir, study_file, study.deck_file,
                       option="--out" if out else "--out (default: beside the study)")
    _check_writable_folder(out_dir)
    jobs = expand(study)
    if workers is None:
        workers = max(1, min(len(jobs), os.cpu_count() or 1))
    try:
        out_dir.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise SelfconEnvironmentError.from_os_error(exc, "cannot create the study folder", out_dir) from None
    lock = q.CoordinatorLock(out_dir).acquire()
    try:
        return _run_locked(study, study_file, jobs, out_dir, workers=workers, scheduler=scheduler,
                           retries=retries, quiet=quiet, job_fn=job_fn, progress=progress,
                           memory_limit=memory_limit, warm=warm)
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


def _run_locked(study, study_file, jobs, out_dir, *, workers, scheduler, retries, quiet, job_fn, progress,
                memory_limit, warm):
    con = q.connect(out_dir)
    try:
        q.set_meta(con, study_file=str(Path(study_file).resolve()), base_deck=str(study.deck_file),
                   paths=study.paths, mode=study.mode, continuation=study.continuation, along=study.along)
        changes = q.sync(con, jobs, retries=retries)
        prog = progress or make_progress(quiet)
        if changes["retired"] or changes["requeued"] or changes["revived"]:
            prog.note(f"queue: {changes['added']} new, {changes['kept']} kept, {changes['requeued']} requeued, "
                      f"{changes['retired']} retired, {changes['revived']} back in the study")
        coord = Coordinator(out_dir, workers=workers, scheduler=scheduler, retries=retries, job_fn=job_fn,
                            progress=prog, memory_limit=memory_limit, warm=warm)
        try:
            counts = coord.run(con, continuation=study.continuation, along=study.along)
        finally:
            try:
                write_tables(con, out_dir)
            except (SelfconEnvironmentError, OSError):
                if coord.fatal is None:       # the first failure is the one to report
                    raise
    finally:
        con.close()
    if coord.fatal is not None:
        raise coord.fatal
    if coord.interrupted and (counts["queued"] or counts["running"]):
        code = 130
    elif counts["not_converged"] or counts["failed"]:
        code = 3
    else:
        code = 0
    return code, counts, out_dir
