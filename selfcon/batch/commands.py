"""`selfcon batch` and `selfcon queue` (registered into the main CLI by selfcon.cli)."""
from __future__ import annotations

import json
import sys
from pathlib import Path

from selfcon.errors import StudyError

BATCH_HELP = """Run a study (a base deck plus variations) as queued jobs; rerunning resumes.

The output folder (--out) must be new, empty, or the folder of this same study (the study
file and base deck recorded in its queue): nothing else is ever written into.

Exit codes: 0 every job done, 3 some jobs not converged or failed, 130 interrupted (rerun to
continue), 2 bad study, deck or output folder, 4 the environment failed (disk full,
permissions, corrupt queue.sqlite, scheduler), 1 internal error."""


def register(subparsers):
    import argparse
    b = subparsers.add_parser("batch", help="run a study of many decks (resumable job queue)",
                              description=BATCH_HELP, formatter_class=argparse.RawDescriptionHelpFormatter)
    b.add_argument("study", help="study file (TOML)")
    b.add_argument("--workers", "-j", type=int, default=None, help="worker processes (default: CPU count)")
    b.add_argument("--out", "-o", default=None,
                   help="output folder: new, empty, or this study's earlier one (default: beside the study, "
                        "named after it)")
    b.add_argument("--scheduler", default=None,
                   help="Dask: 'local' starts a LocalCluster on 127.0.0.1, or tcp://HOST:PORT of a running one")
    b.add_argument("--retries", type=int, default=2,
                   help="attempts beyond the first for a job that failed or lost its worker (default 2)")
    b.add_argument("--memory-limit", default="4GiB", help="memory per Dask worker of --scheduler local")
    b.add_argument("--quiet", "-q", action="store_true", help="only the final summary line")
    b.set_defaults(func=batch_command)

    qp = subparsers.add_parser("queue", help="inspect or requeue the jobs of a study folder")
    qs = qp.add_subparsers(dest="queue_command", metavar="status|list|retry")
    qs.required = True
    s = qs.add_parser("status", help="counts per status")
    s.add_argument("outdir")
    s.add_argument("--json", action="store_true")
    s.set_defaults(func=queue_status)
    li = qs.add_parser("list", help="one line per job")
    li.add_argument("outdir")
    li.add_argument("--status", default=None, help="comma-separated statuses to show")
    li.add_argument("--json", action="store_true")
    li.set_defaults(func=queue_list)
    r = qs.add_parser("retry", help="requeue finished jobs (attempts reset); rerun `selfcon batch` to run them")
    r.add_argument("outdir")
    r.add_argument("--status", default="failed", help="statuses to requeue (default: failed)")
    r.add_argument("--id", type=int, action="append", default=[], help="a job id (repeatable)")
    r.set_defaults(func=queue_retry)


def batch_command(args) -> int:
    from selfcon.batch.runner import run_study
    if args.workers is not None and args.workers < 1:
        raise StudyError("must be >= 1", key="--workers")
    if args.retries < 0:
        raise StudyError("must be >= 0", key="--retries")
    code, counts, out_dir = run_study(args.study, workers=args.workers, out=args.out, scheduler=args.scheduler,
                                      retries=args.retries, quiet=args.quiet, memory_limit=args.memory_limit)
    from selfcon.batch.runner import _fmt_counts
    tail = {0: "", 3: "  (see table.csv)", 130: "  (interrupted: rerun to continue)"}.get(code, "")
    print(f"{out_dir}: {_fmt_counts(counts)}{tail}")
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
