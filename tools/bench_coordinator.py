"""Benchmark of the batch coordinator alone: no-op jobs through the SELFCON_BATCH_JOB seam.

    python tools/bench_coordinator.py [--sizes 1000,10000,100000] [--dask-sizes 1000,10000]
                                      [--noop-seconds 0] [--workers 2] [--dask-workers 8] [--out bench-results]

The job function is selfcon.batch.worker:noop_job, which waits $SELFCON_NOOP_SECONDS and returns
the packed outcome of one small synthetic result, so what is measured is the coordinator's own
work per job: claiming from the SQLite queue, handing jobs to the executor, writing each result
file (fsync'ed), finishing rows, and the tables (every 30 s and at the end).  The study is a
grid on inputs/hemt_4K.toml, so expanding it (one validated deck per job) is real work too.

Each case runs in a fresh process (the coordinator), so its peak memory is its own
(ru_maxrss; the workers are other processes).  Reported per case:
  rate_jobs_per_s     steady state: jobs finished per second between the first and the last
                      completion (targets: >= 1000 local pool, >= 200 Dask LocalCluster of 8)
  run_us_per_job      the run (from the queue being ready to the end, tables included) / jobs
  setup_us_per_job    expanding the study and filling the queue / jobs
  peak_rss_MB         the coordinator's peak resident memory
and the memory that a backlog of --backlog-tasks waiting Dask tasks costs at the coordinator
and at a separate `dask scheduler` process.
Flat per-job costs from 1e3 to 1e5 jobs are the scaling target: the steady-state cost per job
(1 / rate) at the largest size over the smallest (steady_cost_ratio).  Writes a rich table and
bench-results/coordinator.json.  The targets are reported, not enforced.
"""
from __future__ import annotations

import argparse
import json
import os
import resource
import shutil
import sqlite3
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
NOOP = "selfcon.batch.worker:noop_job"
TARGETS = {"local": 1000.0, "dask": 200.0}


def write_study(folder, jobs):
    """A grid of about ``jobs`` decks: spacer thickness x doping on the demo HEMT deck."""
    a = 10 if jobs <= 1000 else 100
    b = max(1, round(jobs / a))
    p = Path(folder) / "study.toml"
    p.write_text(f'deck = "{ROOT / "inputs" / "hemt_4K.toml"}"\n'
                 f'[[vary]]\npath = "layer.spacer.thickness"\nfrom = 10.0\nto = 30.0\npoints = {a}\n'
                 f'[[vary]]\npath = "layer.doping.sheet_donors"\nfrom = 1e12\nto = 5e12\npoints = {b}\n')
    return p


def child(args):
    """One case, in this process: prints a JSON line."""
    sys.path.insert(0, str(ROOT))
    from selfcon.batch import queue as q
    from selfcon.batch.runner import Coordinator, final_tables
    from selfcon.batch.study import expand, load_study
    work = Path(args.work)
    study = write_study(work, args.jobs)
    out = work / "out"
    t0 = time.perf_counter()
    s = load_study(study)
    specs = expand(s)
    con = q.connect(out)
    q.set_meta(con, study_file=str(study), paths=s.paths, mode=s.mode, continuation=False, along=None)
    q.sync(con, specs, retries=2)
    n = len(specs)
    del specs
    t1 = time.perf_counter()
    opts = {}
    if args.executor == "dask":
        opts = dict(scheduler="local", memory_limit="1GiB")
    coord = Coordinator(out, workers=args.workers, job_fn=NOOP, executor_options=opts)
    counts = coord.run(con)
    final_tables(con, out)
    t2 = time.perf_counter()
    fin = [r[0] for r in con.execute("SELECT finished_at FROM jobs WHERE status = 'done' ORDER BY finished_at")]
    con.close()
    rate = (len(fin) - 1) / (fin[-1] - fin[0]) if len(fin) > 1 and fin[-1] > fin[0] else float("nan")
    print(json.dumps({"executor": args.executor, "jobs": n, "done": counts["done"], "rate_jobs_per_s": rate,
                      "run_us_per_job": (t2 - t1) / n * 1e6, "setup_us_per_job": (t1 - t0) / n * 1e6,
                      "peak_rss_MB": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0,
                      "files": len(list((out / "jobs").glob("*.h5")))}))


def _rss_mb(pid="self"):
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith("VmRSS:"):
            return int(line.split()[1]) / 1024.0
    return float("nan")


def backlog_memory(tasks):
    """Memory of ``tasks`` waiting Dask tasks (one job each) at the coordinator and at the
    scheduler (a `dask scheduler` process with no workers, so every task stays queued)."""
    import gc
    sys.path.insert(0, str(ROOT))
    from selfcon.batch.executors import DaskPool
    from selfcon.batch.study import expand, load_study
    work = Path(tempfile.mkdtemp(prefix="bench_backlog_"))
    sched_file = work / "scheduler.json"
    sched = subprocess.Popen([sys.executable, "-m", "distributed.cli.dask_scheduler", "--host", "127.0.0.1",
                              "--port", "0", "--no-dashboard", "--scheduler-file", str(sched_file)],
                             stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    try:
        t0 = time.time()
        while not sched_file.exists() and time.time() - t0 < 60:
            time.sleep(0.1)
        time.sleep(0.5)
        specs = expand(load_study(write_study(work, tasks)))[:tasks]
        jobs = [(i + 1, s.deck_text, None) for i, s in enumerate(specs)]
        deck_bytes = sum(len(s.deck_text) for s in specs) / len(specs)
        del specs
        pool = DaskPool(NOOP, scheduler_file=str(sched_file), backlog=0)
        gc.collect()
        c0, s0 = _rss_mb(), _rss_mb(sched.pid)
        for j in jobs:
            pool.submit([j])
        time.sleep(2.0)                       # the scheduler has taken them all
        gc.collect()
        c1, s1 = _rss_mb(), _rss_mb(sched.pid)
        pool.shutdown(cancel=True)
    finally:
        sched.terminate()
        sched.wait(30)
        shutil.rmtree(work, ignore_errors=True)
    return {"tasks": tasks, "deck_bytes": deck_bytes, "coordinator_MB": c1 - c0, "scheduler_MB": s1 - s0,
            "coordinator_kB_per_task": (c1 - c0) * 1024 / tasks, "scheduler_kB_per_task": (s1 - s0) * 1024 / tasks}


def run_case(executor, jobs, workers, noop_seconds):
    work = Path(tempfile.mkdtemp(prefix="bench_coord_"))
    try:
        env = dict(os.environ, SELFCON_NOOP_SECONDS=str(noop_seconds))
        p = subprocess.run([sys.executable, __file__, "--child", "--executor", executor, "--jobs", str(jobs),
                            "--workers", str(workers), "--work", str(work)],
                           capture_output=True, text=True, env=env, cwd=ROOT)
        if p.returncode != 0:
            raise SystemExit(f"{executor} {jobs}: exit {p.returncode}\n{p.stderr[-2000:]}")
        return json.loads(p.stdout.strip().splitlines()[-1])
    finally:
        shutil.rmtree(work, ignore_errors=True)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--sizes", default="1000,10000,100000", help="study sizes with the local pool")
    ap.add_argument("--dask-sizes", default="1000,10000", help="study sizes through a Dask LocalCluster ('' none)")
    ap.add_argument("--workers", type=int, default=2, help="local pool workers")
    ap.add_argument("--dask-workers", type=int, default=8, help="LocalCluster workers")
    ap.add_argument("--noop-seconds", type=float, default=0.0, help="each no-op job's duration")
    ap.add_argument("--out", default="bench-results")
    ap.add_argument("--backlog-tasks", type=int, default=4000,
                    help="waiting Dask tasks whose memory is measured (0: skip)")
    ap.add_argument("--child", action="store_true", help=argparse.SUPPRESS)
    ap.add_argument("--executor", default="local", help=argparse.SUPPRESS)
    ap.add_argument("--jobs", type=int, default=1000, help=argparse.SUPPRESS)
    ap.add_argument("--work", default=None, help=argparse.SUPPRESS)
    ap.add_argument("--child-backlog", type=int, default=0, help=argparse.SUPPRESS)
    args = ap.parse_args(argv)
    if args.child:
        return child(args)
    if args.child_backlog:
        print(json.dumps(backlog_memory(args.child_backlog)))
        return 0

    cases = [("local", int(n), args.workers) for n in args.sizes.split(",") if n.strip()]
    cases += [("dask", int(n), args.dask_workers) for n in args.dask_sizes.split(",") if n.strip()]
    results = []
    for executor, n, w in cases:
        r = run_case(executor, n, w, args.noop_seconds)
        r["workers"] = w
        r["target_jobs_per_s"] = TARGETS[executor]
        r["target_met"] = bool(r["rate_jobs_per_s"] >= TARGETS[executor])
        results.append(r)
        print(f"{executor:5s} {r['jobs']:>7d} jobs: {r['rate_jobs_per_s']:8.0f} jobs/s  run {r['run_us_per_job']:7.0f} us/job"
              f"  setup {r['setup_us_per_job']:6.0f} us/job  peak {r['peak_rss_MB']:6.0f} MB", file=sys.stderr)
    # scaling: per-job run cost at the largest size over the smallest, per executor
    scaling = {}
    for ex in ("local", "dask"):
        rs = [r for r in results if r["executor"] == ex]
        if len(rs) >= 2:
            small, big = min(rs, key=lambda r: r["jobs"]), max(rs, key=lambda r: r["jobs"])
            scaling[ex] = {"from_jobs": small["jobs"], "to_jobs": big["jobs"],
                           # steady-state cost per job (1 / rate) at the largest size over the smallest
                           "steady_cost_ratio": small["rate_jobs_per_s"] / big["rate_jobs_per_s"],
                           "run_cost_ratio": big["run_us_per_job"] / small["run_us_per_job"],
                           "setup_cost_ratio": big["setup_us_per_job"] / small["setup_us_per_job"]}
    backlog = None
    if args.backlog_tasks > 0 and args.dask_sizes.strip():
        p = subprocess.run([sys.executable, __file__, "--child-backlog", str(args.backlog_tasks)],
                           capture_output=True, text=True, cwd=ROOT)
        if p.returncode != 0:
            raise SystemExit(f"backlog memory: exit {p.returncode}\n{p.stderr[-2000:]}")
        backlog = json.loads(p.stdout.strip().splitlines()[-1])
    res = {"cpu_count": os.cpu_count(), "noop_seconds": args.noop_seconds, "cases": results, "scaling": scaling,
           "backlog_memory": backlog}
    Path(args.out).mkdir(parents=True, exist_ok=True)
    (Path(args.out) / "coordinator.json").write_text(json.dumps(res, indent=2))

    from rich.console import Console
    from rich.table import Table
    t = Table(title=f"selfcon batch coordinator, no-op jobs of {args.noop_seconds:g} s ({os.cpu_count()} CPUs)")
    for c in ("executor", "workers", "jobs", "jobs/s (steady)", "target", "run us/job", "setup us/job", "peak MB"):
        t.add_column(c, justify="right")
    for r in results:
        t.add_row(r["executor"], str(r["workers"]), str(r["jobs"]), f"{r['rate_jobs_per_s']:.0f}",
                  f">= {r['target_jobs_per_s']:.0f} {'ok' if r['target_met'] else 'MISSED'}",
                  f"{r['run_us_per_job']:.0f}", f"{r['setup_us_per_job']:.0f}", f"{r['peak_rss_MB']:.0f}")
    con = Console()
    con.print(t)
    for ex, s in scaling.items():
        con.print(f"{ex}: per-job cost at {s['to_jobs']} jobs / at {s['from_jobs']}: steady state "
                  f"{s['steady_cost_ratio']:.2f}x, whole run {s['run_cost_ratio']:.2f}x, setup {s['setup_cost_ratio']:.2f}x")
    if backlog:
        con.print(f"Dask backlog of {backlog['tasks']} waiting tasks (decks of {backlog['deck_bytes']:.0f} B): "
                  f"coordinator {backlog['coordinator_MB']:.1f} MB ({backlog['coordinator_kB_per_task']:.1f} kB/task), "
                  f"scheduler {backlog['scheduler_MB']:.1f} MB ({backlog['scheduler_kB_per_task']:.1f} kB/task)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
