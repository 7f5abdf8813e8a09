"""Nothing hangs: a stopped worker is freed by --job-timeout (local pool and Dask), a lost
Dask scheduler ends the run with exit 4 and a consistent queue, and a scheduler that no
worker ever joins (a cluster whose batch jobs never start) stops the study instead of
waiting forever.

Limits are injected small (1 to 3 s) so that each case takes seconds; no assertion is about
speed: the waits around them are generous time-outs that only keep a broken build from
hanging the suite.  Jobs run through the stand-in ``sleepy_job`` (selfcon/batch/worker.py).
"""
from __future__ import annotations

import json
import os
import re
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest

from selfcon.batch.runner import run_study
from selfcon.errors import SelfconEnvironmentError

SLEEPY = "selfcon.batch.worker:sleepy_job"

DECK = """
title = "hang test"
temperature = 77.0
[surface]
contact = "schottky"
barrier = 0.7
[[layer]]
name = "channel"
material = "GaAs"
thickness = 50.0
"""


def make_study(tmp_path, titles):
    (tmp_path / "base.toml").write_text(DECK)
    p = tmp_path / "study.toml"
    p.write_text(f'deck = "base.toml"\n[[vary]]\npath = "title"\nvalues = {json.dumps(titles)}\n')
    return p


def rows(out):
    con = sqlite3.connect(f"file:{Path(out) / 'queue.sqlite'}?mode=ro", uri=True)
    got = con.execute("SELECT id, status, attempts, error FROM jobs ORDER BY id").fetchall()
    con.close()
    return got


# --------------------------------------------------------------------------- --job-timeout

@pytest.mark.parametrize("where", ["local pool", "dask"])
def test_stopped_worker_is_freed_by_the_job_timeout(tmp_path, where):
    # job 2 stops its worker (SIGSTOP) on its first attempt: without a time limit it would hold
    # that worker forever.  The limit is far above what a stand-in job takes.  Local pool: two
    # worker processes, the stopped one is killed and replaced.  Dask: a LocalCluster of ONE
    # worker process (with a nanny): the coordinator sees the task running past the limit,
    # cancels it, has the scheduler drop the worker, and its nanny kills the stopped process
    # and starts a new one, which must run the rest (job 1's result, held by the stopped
    # worker, is recomputed there).  The limit only has to exceed what a stand-in job takes
    # through Dask; 1.5 s was once exceeded on a loaded 2-core machine (a flaky failure), so 3 s.
    if where == "dask":
        pytest.importorskip("distributed")
        where_opts, limit = dict(scheduler="local", workers=1, memory_limit="1GiB"), 3.0
    else:
        where_opts, limit = dict(workers=2), 2.5
    mark = tmp_path / "stopped-once"
    study = make_study(tmp_path, ["a", f"stop-once={mark}", "b", "c"])
    log = tmp_path / "run.log"
    code, counts, out = run_study(study, retries=1, job_fn=SLEEPY, job_timeout=limit, log_file=log, warm=False,
                                  **where_opts)
    assert code == 0 and counts["done"] == 4                 # README.md, "Command line"
    got = {r[0]: r[1:] for r in rows(out)}
    assert got[2][:2] == ("done", 2)                          # requeued once, the attempt counted
    assert all(got[k][:2] == ("done", 1) for k in (1, 3, 4))  # the others: one attempt each
    assert mark.exists()
    text = log.read_text()
    assert f"past --job-timeout {limit:g} s: stopping its worker" in text
    assert re.search(rf"job 2 requeued: ran \d+ s, past --job-timeout {limit:g} s: its worker was stopped "
                     r"\(attempt 1 counted", text)


def test_job_stopping_every_time_fails_after_its_retries(tmp_path):
    study = make_study(tmp_path, ["stop", "a"])
    code, counts, out = run_study(study, workers=1, retries=0, job_fn=SLEEPY, job_timeout=2.5, warm=False)
    assert code == 3 and counts["failed"] == 1 and counts["done"] == 1
    (_, status, attempts, error), second = rows(out)
    assert (status, attempts) == ("failed", 1) and "past --job-timeout 2.5 s: its worker was stopped" in error
    assert second[1:3] == ("done", 1)


def test_job_timeout_option_is_checked(run_cli, tmp_path):
    study = make_study(tmp_path, ["a"])
    for bad in ("0", "-1", "nan", "inf"):
        code, _, err = run_cli("batch", study, "--job-timeout", bad)
        assert code == 2 and "--job-timeout: must be a number of seconds > 0" in err
    assert not (tmp_path / "study").exists()


# --------------------------------------------------------------------------- Dask

def test_dask_job_stopping_every_time_fails_and_the_rest_completes(tmp_path):
    pytest.importorskip("distributed")
    study = make_study(tmp_path, ["stop", "a", "b"])
    code, counts, out = run_study(study, scheduler="local", workers=2, retries=0, job_fn=SLEEPY, job_timeout=3.0,
                                  warm=False, memory_limit="1GiB")
    assert code == 3 and counts["failed"] == 1 and counts["done"] == 2   # README.md, "Command line"
    (_, status, attempts, error), *rest = rows(out)
    assert (status, attempts) == ("failed", 1) and "past --job-timeout 3 s: its worker was stopped" in error
    assert [r[1] for r in rest] == ["done", "done"]


def _start(args, env=None):
    return subprocess.Popen([sys.executable, "-m", *args], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL,
                            env=env)


def _wait_for(cond, timeout, what):
    deadline = time.time() + timeout
    while time.time() < deadline:
        if cond():
            return
        time.sleep(0.1)
    raise AssertionError(f"{what} after {timeout} s")


def _done(out):
    try:
        con = sqlite3.connect(f"file:{Path(out) / 'queue.sqlite'}?mode=ro", uri=True, timeout=5)
        n = con.execute("SELECT COUNT(*) FROM jobs WHERE status = 'done'").fetchone()[0]
        con.close()
        return n
    except sqlite3.Error:
        return 0


def test_killed_scheduler_ends_the_run_with_exit_4(tmp_path):
    # a real `dask scheduler` process and one worker process; the scheduler is killed while jobs
    # run: the coordinator stops within --scheduler-timeout, exit 4, nothing left 'running'
    pytest.importorskip("distributed")
    sched_file = tmp_path / "scheduler.json"
    env = {k: v for k, v in os.environ.items() if k != "PYTHONPATH"}
    scheduler = _start(["distributed.cli.dask_scheduler", "--scheduler-file", str(sched_file), "--host",
                        "127.0.0.1", "--port", "0", "--dashboard-address", ":0"], env)
    worker = None
    try:
        _wait_for(sched_file.exists, 120, "no scheduler file")
        worker = _start(["distributed.cli.dask_worker", "--scheduler-file", str(sched_file), "--nthreads", "1",
                         "--no-nanny", "--no-dashboard", "--host", "127.0.0.1"], env)
        study = make_study(tmp_path, [f"job{i} sleep=0.3" for i in range(40)])
        out = tmp_path / "study"
        batch = subprocess.Popen([sys.executable, "-m", "selfcon", "batch", str(study), "--scheduler-file",
                                  str(sched_file), "--scheduler-timeout", "3", "--backlog", "0", "-q"],
                                 env=dict(env, SELFCON_BATCH_JOB=SLEEPY), stdout=subprocess.PIPE,
                                 stderr=subprocess.PIPE, text=True)
        try:
            _wait_for(lambda: _done(out) >= 1 or batch.poll() is not None, 180, "no job done")
            assert batch.poll() is None, batch.communicate()
            scheduler.send_signal(signal.SIGKILL)
            scheduler.wait(30)
            stdout, stderr = batch.communicate(timeout=120)
        finally:
            if batch.poll() is None:
                batch.kill()
                batch.wait(30)
    finally:
        for p in (worker, scheduler):
            if p is not None and p.poll() is None:
                p.kill()
                p.wait(30)
    assert batch.returncode == 4, stderr                      # environment failure (README.md, "Command line")
    lines = [ln for ln in stderr.splitlines() if ln.startswith("selfcon: error:")]
    assert len(lines) == 1 and "lost the Dask scheduler at" in lines[0] and "Traceback" not in stderr
    # Dask's own complaints come as one formatted line each ("dask error: ..."), never raw
    assert "distributed.client - ERROR" not in stderr, stderr
    assert not [ln for ln in stderr.splitlines() if ln[:1].isspace()]       # no traceback lines
    states = [r[1] for r in rows(out)]
    assert "running" not in states and states.count("done") >= 1
    assert all(a <= 1 for _, s, a, _ in rows(out) if s == "queued")     # lost jobs are not charged
    from selfcon.output.result import verify_result_file
    for job_id, status, _, _ in rows(out):
        if status == "done":
            assert verify_result_file(out / "jobs" / f"{job_id}.h5") == "ok"


def test_scheduler_without_workers_stops_the_study(tmp_path):
    # a scheduler no worker ever joins (for --cluster: batch jobs that never start) is exit 4
    # after --scheduler-timeout, the jobs back in the queue uncharged
    pytest.importorskip("distributed")
    from distributed import LocalCluster
    study = make_study(tmp_path, ["a", "b", "c"])
    with LocalCluster(n_workers=0, processes=False, protocol="tcp://", host="127.0.0.1",
                      dashboard_address=":0") as cluster:
        with pytest.raises(SelfconEnvironmentError, match=r"no Dask worker connected to .* in \d+ s "
                                                          r"\(--scheduler-timeout 1\.5 s\)"):
            run_study(study, scheduler=cluster.scheduler_address, job_fn=SLEEPY, scheduler_timeout=1.5)
    assert [(s, a) for _, s, a, _ in rows(tmp_path / "study")] == [("queued", 0)] * 3


def test_unreachable_scheduler_is_exit_4(run_cli, tmp_path):
    import socket
    pytest.importorskip("distributed")
    with socket.socket() as s:              # a port nothing listens on
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    study = make_study(tmp_path, ["a"])
    code, _, err = run_cli("batch", study, "--scheduler", f"tcp://127.0.0.1:{port}", "--scheduler-timeout", "1")
    assert code == 4 and f"cannot reach the Dask scheduler at tcp://127.0.0.1:{port}" in err
