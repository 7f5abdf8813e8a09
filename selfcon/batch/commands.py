"""`selfcon batch` and `selfcon queue` (registered into the main CLI by selfcon.cli)."""
from __future__ import annotations

import argparse
import json
import os
import sys
from pathlib import Path

from selfcon.errors import StudyError

BATCH_HELP = """Run a study (a base deck plus variations) as queued jobs; rerunning resumes.

Where the jobs run: a pool of local worker processes (default, --workers); a Dask cluster
on this machine (--scheduler local); a running Dask scheduler (--scheduler tcp://HOST:PORT
or --scheduler-file FILE); or a SLURM/PBS/... cluster that selfcon starts itself with
dask-jobqueue from the site's Dask configuration (--cluster slurm) and grows and shrinks
between --min-workers and --max-workers.

The output folder (--out) must be new, empty, or the folder of this same study (the study
file and base deck recorded in its queue): nothing else is ever written into.

Exit codes: 0 every job done, 3 some jobs not converged or failed, 130 interrupted (rerun to
continue), 2 bad study, deck, option or output folder, 4 the environment failed (disk full,
permissions, corrupt queue.sqlite, Dask scheduler unreachable or lost, workers running another
selfcon), 1 internal error."""


def register(subparsers):
    import argparse
    b = subparsers.add_parser("batch", help="run a study of many decks (resumable job queue)",
                              description=BATCH_HELP, formatter_class=argparse.RawDescriptionHelpFormatter)
    b.add_argument("study", help="study file (TOML)")
    b.add_argument("--workers", "-j", type=int, default=None, help="worker processes (default: CPU count)")
    b.add_argument("--out", "-o", default=None,
                   help="output folder: new, empty, or this study's earlier one (default: beside the study, "
                        "named after it)")
    where = b.add_mutually_exclusive_group()
    where.add_argument("--scheduler", default=None,
                       help="Dask: 'local' starts a LocalCluster on 127.0.0.1, or tcp://HOST:PORT of a running one")
    where.add_argument("--scheduler-file", default=None, metavar="FILE",
                       help="Dask: connect to the scheduler that wrote FILE (dask scheduler --scheduler-file FILE)")
    from selfcon.batch.executors import DEFAULT_BACKLOG, JOBQUEUE_CLASSES
    where.add_argument("--cluster", default=None, choices=sorted(JOBQUEUE_CLASSES), metavar="KIND",
                       help="start a dask-jobqueue cluster of KIND (" + ", ".join(sorted(JOBQUEUE_CLASSES)) +
                       ") from the Dask configuration (jobqueue.yaml) and adapt it to the study")
    b.add_argument("--min-workers", type=int, default=0, help="--cluster: workers kept even when idle (default 0)")
    b.add_argument("--max-workers", type=int, default=None,
                   help="--cluster: most workers (single-threaded processes) asked for "
                        "(default: the processes of one batch job, i.e. jobqueue.KIND.cores)")
    b.add_argument("--backlog", type=float, default=DEFAULT_BACKLOG,
                   help="Dask: tasks kept queued at the scheduler, as a multiple of its threads (or of "
                        f"--max-workers), so an adaptive cluster sees the work (default {DEFAULT_BACKLOG:g})")
    b.add_argument("--numba-cache", default=None, metavar="DIR",
                   help="compiled-kernel cache shared by the coordinator and every worker (sets "
                        "NUMBA_CACHE_DIR; default: $NUMBA_CACHE_DIR if set)")
    b.add_argument("--log", default=None, metavar="FILE",
                   help="append a line per job event (with times), and Dask's own lines, to FILE")
    b.add_argument("--retries", type=int, default=2,
                   help="attempts beyond the first for a job that failed or lost its worker (default 2)")
    b.add_argument("--memory-limit", default="4GiB", help="memory per Dask worker of --scheduler local")
    b.add_argument("--job-timeout", type=float, default=None, metavar="SECONDS",
                   help="wall-clock limit of one job: past it its worker process is stopped and the job "
                        "requeued, the attempt counted (local pool and Dask; default: no limit)")
    b.add_argument("--scheduler-timeout", type=float, default=None, metavar="SECONDS",
                   help="Dask: seconds to reach the scheduler and to wait for a lost one, and for a first "
                        "worker, before stopping with exit 4 (default 60; a first worker of --cluster: 1800)")
    b.add_argument("--quiet", "-q", action="store_true", help="only the final summary line")
    b.add_argument("--json", action="store_true",
                   help="no progress; print one JSON object (folder, exit code, job counts, tables) and nothing else")
    from selfcon.solver.threads import add_argument as add_threads
    add_threads(b, batch=True)
    b.set_defaults(func=batch_command)

    qp = subparsers.add_parser("queue", help="inspect or requeue the jobs of a study folder")
    qs = qp.add_subparsers(dest="queue_command", metavar="status|list|retry|verify",
                           help="what to do with the queue")
    qs.required = True
    s = qs.add_parser("status", help="counts per status")
    s.add_argument("outdir", metavar="OUTDIR", help="the study's output folder (holding queue.sqlite)")
    s.add_argument("--json", action="store_true", help="print the counts as one JSON object")
    s.set_defaults(func=queue_status)
    li = qs.add_parser("list", help="one line per job")
    li.add_argument("outdir", metavar="OUTDIR", help="the study's output folder (holding queue.sqlite)")
    li.add_argument("--status", default=None, help="comma-separated statuses to show")
    li.add_argument("--json", action="store_true", help="print the jobs as a JSON list")
    li.set_defaults(func=queue_list)
    r = qs.add_parser("retry", help="requeue finished jobs (attempts reset); rerun `selfcon batch` to run them")
    r.add_argument("outdir", metavar="OUTDIR", help="the study's output folder (holding queue.sqlite)")
    r.add_argument("--status", default="failed", help="statuses to requeue (default: failed)")
    r.add_argument("--id", type=int, action="append", default=[], help="a job id (repeatable)")
    r.set_defaults(func=queue_retry)
    v = qs.add_parser("verify", help="check every finished job's result file; requeue the missing or damaged",
                      description="Check the result file of every finished job against the sha256 recorded in "
                                  "the queue when it was written (or, for older jobs, against its own checksum). "
                                  "A job whose file is missing, unreadable or changed goes back to the queue "
                                  "(the reason in its error column); rerun `selfcon batch STUDY.toml` to run it. "
                                  "The tables are rewritten. `selfcon batch` does the same on every resume.")
    v.add_argument("outdir", metavar="OUTDIR", help="the study's output folder (holding queue.sqlite)")
    v.add_argument("--json", action="store_true", help="print {checked, requeued: [{id, reason}]} as JSON")
    v.set_defaults(func=queue_verify)


def batch_command(args) -> int:
    from selfcon.batch.runner import run_study
    if args.workers is not None and args.workers < 1:
        raise StudyError("must be >= 1", key="--workers")
    if args.retries < 0:
        raise StudyError("must be >= 0", key="--retries")
    if args.threads is not None and args.threads < 1:
        raise StudyError(f"must be >= 1, got {args.threads}", key="--threads")
    if args.min_workers < 0:
        raise StudyError("must be >= 0", key="--min-workers")
    if args.max_workers is not None and args.max_workers < max(1, args.min_workers):
        raise StudyError(f"must be >= 1 and >= --min-workers ({args.min_workers})", key="--max-workers")
    if not (args.backlog >= 0):
        raise StudyError("must be >= 0", key="--backlog")
    if (args.min_workers or args.max_workers is not None) and not args.cluster:
        raise StudyError("only with --cluster", key="--min-workers" if args.min_workers else "--max-workers")
    for opt in ("job_timeout", "scheduler_timeout"):
        value = getattr(args, opt)
        if value is not None and not (0 < value < float("inf")):
            raise StudyError(f"must be a number of seconds > 0, got {value:g}", key="--" + opt.replace("_", "-"))
    if args.scheduler_file and not Path(args.scheduler_file).is_file():
        raise StudyError("no such file (start the scheduler with --scheduler-file first)",
                         key="--scheduler-file", file=args.scheduler_file)
    numba_cache = args.numba_cache or os.environ.get("NUMBA_CACHE_DIR") or None
    if numba_cache and not Path(numba_cache).is_dir():
        raise StudyError("not a folder", key="--numba-cache", file=numba_cache)
    code, counts, out_dir = run_study(args.study, workers=args.workers, out=args.out, scheduler=args.scheduler,
                                      scheduler_file=args.scheduler_file, cluster=args.cluster,
                                      min_workers=args.min_workers, max_workers=args.max_workers,
                                      backlog=args.backlog, retries=args.retries,
                                      quiet=args.quiet or args.json,
                                      memory_limit=args.memory_limit, log_file=args.log, numba_cache=numba_cache,
                                      threads=args.threads, job_timeout=args.job_timeout,
                                      scheduler_timeout=args.scheduler_timeout)
    if args.json:
        folder = Path(out_dir)
        print(json.dumps({"folder": str(folder), "exit_code": int(code), "counts": dict(counts),
                          "tables": [str(folder / t) for t in ("table.csv", "table.h5") if (folder / t).is_file()]}))
        return code
    from selfcon.batch.runner import format_counts
    tail = {0: "", 3: "  (see table.csv)", 130: "  (interrupted: rerun to continue)"}.get(code, "")
    print(f"{out_dir}: {format_counts(counts)}{tail}")
    return code


def _open(outdir):
    from selfcon.batch import queue as q
    if not Path(outdir).is_dir():
        raise StudyError("not a folder", file=str(outdir))
    return q.connect(outdir, readonly=True)


def queue_status(args) -> int:
    from selfcon.batch import queue as q
    con = _open(args.outdir)
    c = q.counts(con)
    total = sum(c.values()) - c["retired"]
    if args.json:
        print(json.dumps(dict(c, total=total)))
    else:
        print(f"{args.outdir}: {total} jobs  " + "  ".join(f"{s}={c[s]}" for s in q.STATUSES))
    con.close()
    return 0


def queue_list(args) -> int:
    from selfcon.batch import queue as q
    con = _open(args.outdir)
    statuses = tuple(s.strip() for s in args.status.split(",")) if args.status else None
    if statuses:
        bad = [s for s in statuses if s not in q.STATUSES]
        if bad:
            raise StudyError(f"unknown status {bad[0]!r}", key="--status", allowed=" | ".join(q.STATUSES))
    rows = q.rows(con, status=statuses)
    if args.json:
        out = [{"id": r["id"], "status": r["status"], "attempts": r["attempts"], "varied": json.loads(r["varied"]),
                "iterations": r["iterations"], "seconds": r["seconds"], "result": r["result_path"],
                "error": r["error"], "message": r["message"]} for r in rows]
        print(json.dumps(out, indent=1))
        con.close()
        return 0
    print(f"{'id':>5} {'status':<13} {'att':>3} {'iter':>5} {'seconds':>8}  varied / message")
    for r in rows:
        varied = " ".join(f"{k}={v:.6g}" if isinstance(v, float) else f"{k}={v}"
                          for k, v in json.loads(r["varied"]).items())
        note = (r["error"] or (r["message"] if r["status"] != "done" else "") or "").splitlines()
        secs = f"{r['seconds']:.2f}" if r["seconds"] is not None else "-"
        its = r["iterations"] if r["iterations"] is not None else "-"
        print(f"{r['id']:>5} {r['status']:<13} {r['attempts']:>3} {its:>5} {secs:>8}  {varied}"
              + (f"  | {note[0]}" if note else ""))
    con.close()
    return 0


def queue_retry(args) -> int:
    from selfcon.batch import queue as q
    if not (Path(args.outdir) / "queue.sqlite").is_file():
        raise StudyError("no queue here (queue.sqlite missing)", file=str(args.outdir))
    statuses = tuple(s.strip() for s in args.status.split(","))
    bad = [s for s in statuses if s not in q.FINISHED]
    if bad:
        raise StudyError(f"cannot requeue status {bad[0]!r}", key="--status", allowed=" | ".join(q.FINISHED))
    with q.CoordinatorLock(args.outdir):
        con = q.connect(args.outdir)
        n = q.retry(con, statuses=statuses, ids=tuple(args.id))
        con.close()
    print(f"{args.outdir}: {n} jobs requeued; run `selfcon batch STUDY.toml` to run them", file=sys.stdout)
    return 0


def queue_verify(args) -> int:
    from selfcon.batch import queue as q
    from selfcon.batch import verify
    from selfcon.batch.runner import write_tables
    if not (Path(args.outdir) / "queue.sqlite").is_file():
        raise StudyError("no queue here (queue.sqlite missing)", file=str(args.outdir))
    with q.CoordinatorLock(args.outdir):
        con = q.connect(args.outdir)
        try:
            removed = verify.clean_temporaries(args.outdir)
            bad, checked = verify.verify_jobs(con, args.outdir)
            if bad:
                write_tables(con, args.outdir)
        finally:
            con.close()
    if args.json:
        print(json.dumps({"checked": checked, "requeued": [{"id": j, "reason": why} for j, why in bad],
                          "temporary_files_removed": len(removed)}))
        return 0
    print(f"{args.outdir}: " + verify.summary_line(bad, checked)
          + ("; rerun `selfcon batch STUDY.toml` to run them again" if bad else ""))
    for j, why in bad:
        print(f"  job {j}: {why}")
    return 0
