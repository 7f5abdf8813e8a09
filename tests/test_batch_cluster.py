"""The cluster path of `selfcon batch`: the Dask backlog, worker versions, --scheduler-file,
dask-jobqueue job scripts, the log file, a local pool that survives a dead worker, periodic
tables, and the local path without Dask installed.

Dask clusters here run in this process (processes=False) wherever the check allows: they
start in about a second.  No check depends on timing; waits have generous time-outs only."""
import csv
import json
import os
import re
import sqlite3
import subprocess
import sys
import textwrap
import threading
import time
from pathlib import Path

import pytest

from selfcon.batch.runner import run_study
from selfcon.version import __version__

ROOT = Path(__file__).resolve().parent.parent
SLEEPY = "selfcon.batch.worker:sleepy_job"

#: a deck the stand-in jobs read (they never solve it); valid, so the study expands
DECK = """
title = "cluster test"
temperature = 77.0
[surface]
contact = "schottky"
barrier = 0.7
[[layer]]
name = "barrier"
material = "AlGaAs"
x = 0.3
thickness = 30.0
[[layer]]
name = "channel"
material = "GaAs"
thickness = 50.0
"""


def make_study(tmp_path, values, path="layer.barrier.thickness", name="study.toml"):
    (tmp_path / "base.toml").write_text(DECK)
    p = tmp_path / name
    p.write_text(f'deck = "base.toml"\n[[vary]]\npath = "{path}"\nvalues = {json.dumps(values)}\n')
    return p


def statuses(out):
    con = sqlite3.connect(f"file:{Path(out) / 'queue.sqlite'}?mode=ro", uri=True)
    rows = con.execute("SELECT id, status, attempts, error FROM jobs ORDER BY id").fetchall()
    con.close()
    return rows


def local_cluster(**kw):
    from distributed import LocalCluster
    kw.setdefault("n_workers", 1)
    return LocalCluster(threads_per_worker=1, processes=False, protocol="tcp://", host="127.0.0.1",
                        dashboard_address=":0", **kw)


# --------------------------------------------------------------------------- Dask

#: the job of the backlog test waits for this (the in-process Dask worker runs it in a thread)
RELEASE = threading.Event()


def blocking_job(deck_text, initial=None):
    from selfcon.batch.worker import noop_job
    RELEASE.wait(120)
    return noop_job(deck_text, initial)


def test_dask_scheduler_holds_threads_plus_the_backlog(tmp_path):
    # issue: with a LocalCluster, while at least the backlog of jobs remains queued, the scheduler
    # holds at least the configured backlog of tasks (threads 1 + ceil(3 x 1) = 4 here)
    pytest.importorskip("distributed")
    study = make_study(tmp_path, [10.0 + i for i in range(30)])
    RELEASE.clear()
    result = {}
    with local_cluster() as cluster:
        th = threading.Thread(target=lambda: result.update(r=run_study(
            study, scheduler=cluster.scheduler_address, backlog=3, job_fn="test_batch_cluster:blocking_job")))
        th.start()
        try:
            deadline = time.time() + 60
            while time.time() < deadline and len(cluster.scheduler.tasks) < 4:
                time.sleep(0.05)
            time.sleep(0.3)                   # would the coordinator send more than it should?
            held = len(cluster.scheduler.tasks)
            queued = sum(1 for r in statuses(tmp_path / "study") if r[1] == "queued")
        finally:
            RELEASE.set()
            th.join(120)
    assert queued >= 3 and queued == 30 - held       # the backlog is held while jobs remain queued
    assert held == 1 + 3
    code, counts, _ = result["r"]
    assert code == 0 and counts["done"] == 30


def test_scheduler_file_connects_to_the_cluster_that_wrote_it(tmp_path):
    pytest.importorskip("distributed")
    study = make_study(tmp_path, [10.0, 20.0, 30.0, 40.0])
    sched = tmp_path / "scheduler.json"
    with local_cluster(n_workers=2, scheduler_kwargs={"scheduler_file": str(sched)}) as cluster:
        assert json.loads(sched.read_text())["address"] == cluster.scheduler_address
        code, counts, out = run_study(study, scheduler_file=str(sched), job_fn=SLEEPY)
        ran_there = "selfcon-job" in cluster.scheduler.task_prefixes
    assert code == 0 and counts["done"] == 4
    assert ran_there                                  # the tasks went to that scheduler
    assert sorted(p.name for p in (out / "jobs").glob("*.h5")) == ["1.h5", "2.h5", "3.h5", "4.h5"]


def test_worker_of_another_selfcon_stops_the_study_before_any_job(tmp_path):
    # a worker whose selfcon reports another version: exit 4 with one clear line, no job started
    # (the worker's preload module stands in for another installation: it changes the version
    # that selfcon reports in that worker process only)
    pytest.importorskip("distributed")
    other = tmp_path / "other_selfcon.py"
    other.write_text('import selfcon.version\nselfcon.version.__version__ = "0.0.1+other"\n')
    study = make_study(tmp_path, [10.0, 20.0])
    sched = tmp_path / "scheduler.json"
    env = {k: v for k, v in os.environ.items() if k != "PYTHONPATH"}
    with local_cluster(n_workers=0, scheduler_kwargs={"scheduler_file": str(sched)}) as cluster:
        worker = subprocess.Popen([sys.executable, "-m", "distributed.cli.dask_worker", cluster.scheduler_address,
                                   "--nthreads", "1", "--no-nanny", "--no-dashboard", "--host", "127.0.0.1",
                                   "--preload", str(other)], env=env, stdout=subprocess.DEVNULL,
                                  stderr=subprocess.DEVNULL)
        try:
            deadline = time.time() + 120
            while time.time() < deadline and not cluster.scheduler.workers:
                time.sleep(0.1)
            assert cluster.scheduler.workers, "the worker did not join"
            r = subprocess.run([sys.executable, "-m", "selfcon", "batch", str(study), "--scheduler-file", str(sched)],
                               env=dict(env, SELFCON_BATCH_JOB=SLEEPY), capture_output=True, text=True, timeout=300)
        finally:
            worker.terminate()
            worker.wait(30)
    assert r.returncode == 4, r.stderr
    lines = [ln for ln in r.stderr.splitlines() if ln.startswith("selfcon: error:")]
    assert len(lines) == 1 and "Traceback" not in r.stderr
    assert "selfcon 0.0.1+other" in lines[0] and f"(coordinator: {__version__})" in lines[0]
    assert "no job was started" in lines[0]
    assert [(s, a) for _, s, a, _ in statuses(tmp_path / "study")] == [("queued", 0), ("queued", 0)]
    assert not list((tmp_path / "study").glob("jobs/*.h5"))


def test_slurm_job_script_from_the_dask_configuration(tmp_path):
    # dask-jobqueue's job_script() of the cluster --cluster slurm would start; nothing is submitted
    pytest.importorskip("dask_jobqueue")
    import dask
    from selfcon.batch.executors import jobqueue_cluster
    cache = tmp_path / "numba-cache"
    conf = {"jobqueue.slurm.cores": 8, "jobqueue.slurm.memory": "16GiB", "jobqueue.slurm.walltime": "02:00:00",
            "jobqueue.slurm.queue": "short",
            "jobqueue.slurm.scheduler-options": {"host": "127.0.0.1", "dashboard_address": ":0"}}
    with dask.config.set(conf):
        cluster = jobqueue_cluster("slurm", numba_cache_dir=str(cache))
        try:
            script = cluster.job_script()
            processes = cluster.selfcon_processes
        finally:
            cluster.close()
    # the SBATCH lines are dask-jobqueue's spelling of the configuration
    assert "#SBATCH --cpus-per-task=8" in script
    assert "#SBATCH --mem=16G" in script
    assert "#SBATCH -t 02:00:00" in script
    assert "#SBATCH -p short" in script
    assert re.search(r"--nthreads 1\b", script) and re.search(r"--nworkers 8\b", script) and processes == 8
    assert "export SELFCON_THREADS=1" in script
    assert f"export NUMBA_CACHE_DIR={cache}" in script
    # a worker retires before the walltime: 2 h - 6 min
    assert "--lifetime 6840s" in script


def test_cluster_without_configuration_is_bad_input(tmp_path):
    pytest.importorskip("dask_jobqueue")
    import dask
    from selfcon.batch.executors import jobqueue_cluster
    from selfcon.errors import StudyError
    with dask.config.set({"jobqueue.pbs.cores": None, "jobqueue.pbs.memory": None}):
        with pytest.raises(StudyError, match=r"jobqueue\.pbs\.cores is not set"):
            jobqueue_cluster("pbs")


# --------------------------------------------------------------------------- local pool

def test_dead_worker_charges_only_its_job_which_then_runs_alone(tmp_path):
    # one job kills its worker process every time: only it is charged, it runs alone after the
    # first death, it fails after --retries; the others are done at their first attempt
    titles = [f"job{i}" for i in range(10)]
    titles[3] = "die"
    study = make_study(tmp_path, titles, path="title")
    log = tmp_path / "study.log"
    code, counts, out = run_study(study, workers=2, retries=1, job_fn=SLEEPY, log_file=log)
    assert code == 3 and counts["done"] == 9 and counts["failed"] == 1
    rows = statuses(out)
    died = [r for r in rows if r[1] == "failed"]
    assert len(died) == 1 and died[0][2] == 2 and "killed by SIGKILL" in died[0][3]
    assert all(a == 1 for _, s, a, _ in rows if s == "done")
    text = log.read_text()
    job = died[0][0]
    assert re.search(rf"job {job} sent to worker \d+ \(pid \d+\) alone", text)     # the second attempt
    assert re.search(rf"job {job} requeued: worker process died \(killed by SIGKILL\)", text)


def test_log_file_has_a_timestamped_line_per_job_event(tmp_path):
    study = make_study(tmp_path, [10.0, 20.0, 30.0])
    log = tmp_path / "run.log"
    code, counts, out = run_study(study, workers=1, job_fn=SLEEPY, log_file=log)
    assert code == 0
    lines = log.read_text().splitlines()
    stamp = r"^\d{4}-\d\d-\d\d \d\d:\d\d:\d\d\.\d{3} "
    assert all(re.match(stamp, ln) for ln in lines), lines
    for job in (1, 2, 3):
        assert sum(bool(re.search(rf"job {job} sent to worker", ln)) for ln in lines) == 1
        assert sum(bool(re.search(rf"job {job} done: 3 it", ln)) for ln in lines) == 1
    assert "ended: 3 done (exit code 0)" in lines[-1]
    # a second run appends
    run_study(study, workers=1, job_fn=SLEEPY, log_file=log)
    assert len(log.read_text().splitlines()) > len(lines)


class _Watch:
    """Progress stand-in that reads table.csv at every job event; from the second event on it
    first waits for the file when ``wait`` (a table process was started by then)."""
    wants_lines = False

    def __init__(self, out, wait=False):
        self.out, self.wait = out, wait
        self.seen = []

    def start(self, total, counts):
        pass

    def event(self, line, counts):
        p = self.out / "table.csv"
        deadline = time.time() + (120 if self.wait and self.seen else 0)
        while not p.is_file() and time.time() < deadline:
            time.sleep(0.02)
        if p.is_file():
            with open(p, newline="") as fh:
                self.seen.append(sum(r["status"] == "done" for r in csv.DictReader(fh)))
        else:
            self.seen.append(None)

    def note(self, line):
        pass

    def stop(self):
        pass


def test_tables_are_rewritten_at_the_interval_not_after_every_job(tmp_path):
    titles = [f"job{i} sleep=0.05" for i in range(6)]
    study = make_study(tmp_path, titles, path="title")
    watch = _Watch(tmp_path / "study")
    run_study(study, workers=1, job_fn=SLEEPY, progress=watch, table_interval=3600)
    assert watch.seen == [None] * 6                                     # only at the end
    assert (tmp_path / "study" / "table.csv").is_file()
    study2 = make_study(tmp_path, titles, path="title", name="again.toml")
    watch = _Watch(tmp_path / "again", wait=True)
    run_study(study2, workers=1, job_fn=SLEEPY, progress=watch, table_interval=0)   # as often as it can
    during = [n for n in watch.seen if n is not None]
    assert during and min(during) < 6                                    # tables during the run, behind it


def test_local_pool_and_commands_work_without_dask(tmp_path):
    # the cluster extra is optional: with dask hidden, import selfcon, a local study, `materials`
    # and `batch --help` work, and --scheduler says what to install (exit 2)
    study = make_study(tmp_path, [10.0, 20.0])
    code = textwrap.dedent(f"""
        import json, sys
        class Hide:
            def find_spec(self, name, path=None, target=None):
                if name.split(".")[0] in ("dask", "distributed", "dask_jobqueue"):
                    raise ModuleNotFoundError(f"No module named {{name!r}}", name=name)
        sys.meta_path.insert(0, Hide())
        from selfcon import cli
        codes = [cli.main(["batch", {str(study)!r}, "--workers", "2", "-q"]),
                 cli.main(["materials", "GaAs"]),
                 cli.main(["batch", {str(study)!r}, "--scheduler", "local", "--out", {str(tmp_path / "d")!r}]),
                 cli.main(["batch", "--help"])]
        loaded = sorted(m for m in sys.modules if m.split(".")[0] in ("dask", "distributed", "dask_jobqueue"))
        print(json.dumps([codes, loaded]))
    """)
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300,
                       env=dict(os.environ, SELFCON_BATCH_JOB=SLEEPY))
    assert r.returncode == 0, r.stderr
    codes, loaded = json.loads(r.stdout.strip().splitlines()[-1])
    assert codes == [0, 0, 2, 0] and loaded == []
    assert "install selfcon[cluster]" in r.stderr
    assert [s for _, s, _, _ in statuses(tmp_path / "study")] == ["done", "done"]


def test_final_tables_of_a_large_study_come_from_a_table_process(tmp_path, monkeypatch):
    # above TABLE_PROCESS_ROWS jobs the tables are written by a process of their own: same files
    from selfcon.batch import runner
    study = make_study(tmp_path, [10.0, 20.0, 30.0])
    run_study(study, workers=1, job_fn=SLEEPY)
    out = tmp_path / "study"
    inproc = (out / "table.csv").read_bytes()
    (out / "table.csv").unlink()
    (out / "table.h5").unlink()
    monkeypatch.setattr(runner, "TABLE_PROCESS_ROWS", 0)
    from selfcon.batch import queue as q
    con = q.connect(out)
    try:
        runner.final_tables(con, out)
    finally:
        con.close()
    assert (out / "table.csv").read_bytes() == inproc and (out / "table.h5").is_file()
