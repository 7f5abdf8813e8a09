"""Benchmark of the study runner (selfcon.batch).

    python tools/bench_batch.py [--deck inputs/hemt_4K.toml] [--jobs 12] [--points 20] [--out bench-results]

Measures, on the example deck:
  1. throughput (jobs/s) of a spacer x doping grid with 1 and 2 local workers (target: 2 workers >= 1.7x),
     in the steady state: completions per second from each worker's first finished job (which
     carries the worker's start-up: spawn, imports, numba cache load) to the last one.  The fixed
     start-up of a whole run (coordinator warm-up, pool start, table) is reported beside it;
  2. the queue's own overhead per job (claim, hand-off, writing the file, database, table) against
     the median job time (solve + building its result file, both in the worker), from the 1-worker run: the time between the first and last job finishing,
     less the solve times of those jobs (target < 5 %);
  3. iterations per job along a 20-point gate-bias sweep, cold vs continuation (target: at most half).
Writes a rich table and bench-results/batch.json.  Exit code 1 if the 1- and 2-worker tables, or the
cold and continuation answers, disagree; the targets are reported, not enforced.
"""
from __future__ import annotations

import argparse
import csv
import json
import math
import os
import shutil
import sqlite3
import statistics
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]


def table(out):
    with open(Path(out) / "table.csv", newline="") as fh:
        return list(csv.DictReader(fh))


def timings(out):
    con = sqlite3.connect(Path(out) / "queue.sqlite")
    rows = con.execute("SELECT finished_at, seconds FROM jobs WHERE status IN ('done','not_converged') "
                       "ORDER BY finished_at").fetchall()
    con.close()
    return rows


def steady_rate(out, workers):
    """Jobs per second between each worker's first completion and the last completion."""
    fin = [f for f, _ in timings(out)]
    k = min(workers, len(fin) - 1)
    if len(fin) - k < 2:
        return float("nan")
    return (len(fin) - k) / (fin[-1] - fin[k - 1])


def write_study(folder, name, deck, body):
    p = Path(folder) / name
    p.write_text(f'deck = "{Path(deck).resolve()}"\n' + body)
    return p


def run(study, out, workers, job):
    from selfcon.batch.runner import run_study
    t0 = time.perf_counter()
    code, counts, _ = run_study(study, workers=workers, out=out, quiet=True, job_fn=job)
    return time.perf_counter() - t0, code, counts


def close(a, b, rel=1e-4, abs_=1e-6):
    fa, fb = float(a), float(b)
    if math.isnan(fa) and math.isnan(fb):
        return True
    return math.isclose(fa, fb, rel_tol=rel, abs_tol=abs_)


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--deck", default=str(ROOT / "inputs" / "hemt_4K.toml"))
    ap.add_argument("--jobs", type=int, default=60, help="grid size for the throughput runs (even)")
    ap.add_argument("--points", type=int, default=20, help="points of the bias sweep")
    ap.add_argument("--out", default="bench-results")
    ap.add_argument("--job", default=None, help=argparse.SUPPRESS)   # stand-in job function (testing the tool)
    args = ap.parse_args(argv)

    from selfcon.api import warm_up
    warm_up()                                     # the numba cache is warm before any timing
    work = Path(tempfile.mkdtemp(prefix="bench_batch_"))
    problems = []
    try:
        half = max(1, args.jobs // 2)
        grid = write_study(work, "grid.toml", args.deck, f"""
[[vary]]
path = "layer.spacer.thickness"
values = [15.0, 25.0]
[[vary]]
path = "layer.doping.sheet_donors"
from = 1.5e12
to = 4.5e12
points = {half}
""")
        t1, _, c1 = run(grid, work / "w1", 1, args.job)
        t2, _, c2 = run(grid, work / "w2", 2, args.job)
        n = c1["done"] + c1["not_converged"]
        rows1, rows2 = table(work / "w1"), table(work / "w2")
        keys = ["electron_sheet_density_cm2", "E0_eV", "iterations", "status"]
        for a, b in zip(rows1, rows2):
            for k in keys:
                if (a[k] != b[k]) if k in ("status", "iterations") else not close(a[k], b[k], 1e-9, 1e-12):
                    problems.append(f"1- vs 2-worker tables differ at job {a['job']} {k}: {a[k]} vs {b[k]}")
        rate1, rate2 = steady_rate(work / "w1", 1), steady_rate(work / "w2", 2)
        tm = timings(work / "w1")
        solve = [s for _, s in tm]
        median_solve = statistics.median(solve)
        span = tm[-1][0] - tm[0][0]
        overhead = max(0.0, (span - sum(solve[1:])) / max(1, len(tm) - 1))

        sweep = f"""
[[vary]]
path = "surface.bias"
from = 0.0
to = -0.5
points = {args.points}
"""
        cold = write_study(work, "cold.toml", args.deck, sweep)
        warm = write_study(work, "warm.toml", args.deck, "continuation = true\n" + sweep)
        run(cold, work / "cold", 1, args.job)
        run(warm, work / "warm", 1, args.job)
        rc, rw = table(work / "cold"), table(work / "warm")
        it_cold = statistics.mean(int(r["iterations"]) for r in rc[1:])
        it_warm = statistics.mean(int(r["iterations"]) for r in rw[1:])
        for a, b in zip(rc, rw):
            if a["status"] != b["status"] or not close(a["electron_sheet_density_cm2"], b["electron_sheet_density_cm2"],
                                                       1e-4, 1e6) or not close(a["E0_eV"], b["E0_eV"], 0, 1e-4):
                problems.append(f"cold vs continuation differ at bias {a['surface.bias']}: "
                                f"n_s {a['electron_sheet_density_cm2']} vs {b['electron_sheet_density_cm2']}, "
                                f"E0 {a['E0_eV']} vs {b['E0_eV']}")
    finally:
        shutil.rmtree(work, ignore_errors=True)

    res = {
        "deck": str(Path(args.deck).name), "cpu_count": os.cpu_count(), "jobs": n,
        "jobs_per_s_1_worker": rate1, "jobs_per_s_2_workers": rate2, "speedup_2_workers": rate2 / rate1,
        "run_wall_s_1_worker": t1, "run_wall_s_2_workers": t2,
        "fixed_startup_s_1_worker": t1 - n / rate1, "fixed_startup_s_2_workers": t2 - n / rate2,
        "median_solve_s": median_solve, "queue_overhead_per_job_s": overhead,
        "queue_overhead_fraction": overhead / median_solve if median_solve > 0 else float("nan"),
        "sweep_points": args.points, "iterations_cold_mean": it_cold, "iterations_continuation_mean": it_warm,
        "continuation_ratio": it_warm / it_cold, "disagreements": problems,
    }
    targets = {"speedup_2_workers": (res["speedup_2_workers"] >= 1.7, ">= 1.7"),
               "queue_overhead_fraction": (res["queue_overhead_fraction"] < 0.05, "< 0.05"),
               "continuation_ratio": (res["continuation_ratio"] <= 0.5, "<= 0.5")}
    res["targets_met"] = {k: bool(v[0]) for k, v in targets.items()}
    Path(args.out).mkdir(parents=True, exist_ok=True)
    (Path(args.out) / "batch.json").write_text(json.dumps(res, indent=2))

    from rich.console import Console
    from rich.table import Table
    t = Table(title=f"selfcon batch benchmark ({res['deck']}, {os.cpu_count()} CPUs)")
    t.add_column("quantity")
    t.add_column("value", justify="right")
    t.add_column("target")
    fmt = {"jobs_per_s_1_worker": "{:.2f}", "jobs_per_s_2_workers": "{:.2f}", "speedup_2_workers": "{:.2f}x",
           "median_solve_s": "{:.3f} s", "queue_overhead_per_job_s": "{:.4f} s", "queue_overhead_fraction": "{:.1%}",
           "iterations_cold_mean": "{:.1f}", "iterations_continuation_mean": "{:.1f}", "continuation_ratio": "{:.2f}"}
    for k, f in fmt.items():
        ok = targets.get(k)
        t.add_row(k, f.format(res[k]), "" if ok is None else f"{ok[1]} {'ok' if ok[0] else 'MISSED'}")
    con = Console()
    con.print(t)
    for p in problems:
        con.print(f"[red]disagreement:[/red] {p}")
    return 1 if problems else 0


if __name__ == "__main__":
    sys.exit(main())
