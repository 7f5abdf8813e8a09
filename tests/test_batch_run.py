"""End to end: studies through the local pool and Dask, with killed workers and a killed coordinator."""
import csv
import json
import math
import os
import signal
import sqlite3
import subprocess
import sys
import textwrap
import time
from pathlib import Path

import h5py
import pytest

from selfcon.batch.runner import run_study
from selfcon.batch.study import expand, load_study

#: a 4-layer GaAs/AlGaAs heterojunction at 77 K on a coarse mesh: one solve well under a second
BASE = """
title = "batch test heterojunction {words}"
temperature = 77.0
[surface]
contact = "schottky"
barrier = 0.7
bias = 0.0
[substrate]
contact = "pinned"
barrier = 0.75
[[layer]]
name = "barrier"
material = "AlGaAs"
x = 0.3
thickness = 50.0
[[layer]]
name = "doping"
material = "AlGaAs"
x = 0.3
thickness = 2.0
sheet_donors = 2e12
[[layer]]
name = "spacer"
material = "AlGaAs"
x = 0.3
thickness = 15.0
[[layer]]
name = "channel"
material = "GaAs"
thickness = 100.0
acceptors = 1e14
[physics]
carriers = ["electron"]
[quantum]
regions = [[55.0, 130.0]]
states = 3
[mesh]
step = {step}
[solver]
max_iterations = 80
"""

GRID = """
deck = "base.toml"
[[vary]]
path = "layer.spacer.thickness"
values = [10.0, 15.0, 20.0]
[[vary]]
path = "layer.doping.sheet_donors"
from = 2e12
to = 5e12
points = 4
"""

#: the command line under test (`python -m selfcon`; SELFCON_TEST_CLI=selfcon.batch tests the batch commands alone)
CLI = os.environ.get("SELFCON_TEST_CLI", "selfcon")
REAL = os.environ.get("SELFCON_TEST_BATCH_JOB") is None
ENV = dict(os.environ)
if not REAL:
    ENV["SELFCON_BATCH_JOB"] = os.environ["SELFCON_TEST_BATCH_JOB"]


def make(tmp_path, study=GRID, *, step=2.0, words="", name="study.toml"):
    (tmp_path / "base.toml").write_text(BASE.format(step=step, words=words))
    p = tmp_path / name
    p.write_text(textwrap.dedent(study))
    return p


def read_table(out):
    with open(Path(out) / "table.csv", newline="") as fh:
        return list(csv.DictReader(fh))


def db(out):
    con = sqlite3.connect(Path(out) / "queue.sqlite")
    con.row_factory = sqlite3.Row
    return con


def run(study, **kw):
    kw.setdefault("job_fn", None if REAL else ENV["SELFCON_BATCH_JOB"])
    return run_study(study, **kw)


def cli(*args, **kw):
    return subprocess.Popen([sys.executable, "-m", CLI, *args], env=ENV, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, **kw)


def descendants(pid):
    """{pid: (ppid, cmdline)} of every process below ``pid`` (from /proc)."""
    procs = {}
    for d in os.listdir("/proc"):
        if d.isdigit():
            try:
                stat = Path(f"/proc/{d}/stat").read_text()
                ppid = int(stat.rsplit(")", 1)[1].split()[1])
                cmd = Path(f"/proc/{d}/cmdline").read_bytes().replace(b"\0", b" ").decode(errors="replace")
            except OSError:
                continue
            procs[int(d)] = (ppid, cmd)
    out, todo = {}, [pid]
    while todo:
        p = todo.pop()
        for c, (pp, cmd) in procs.items():
            if pp == p and c not in out:
                out[c] = (pp, cmd)
                todo.append(c)
    return out


def pool_workers(coordinator_pid):
    """Worker processes of the coordinator's process pool (forkserver or spawn children)."""
    ds = descendants(coordinator_pid)
    out = []
    for pid, (ppid, cmd) in ds.items():
        parent_cmd = ds.get(ppid, (None, ""))[1]
        if "spawn_main" in cmd or ("forkserver" in parent_cmd and "forkserver" in cmd):
            out.append(pid)
    return out


def wait_done(out, n, timeout=120, proc=None):
    t0 = time.time()
    while time.time() - t0 < timeout:
        try:
            con = sqlite3.connect(f"file:{Path(out) / 'queue.sqlite'}?mode=ro", uri=True, timeout=5)
            k = con.execute("SELECT COUNT(*) FROM jobs WHERE status = 'done'").fetchone()[0]
            con.close()
            if k >= n:
                return k
        except sqlite3.Error:
            pass
        if proc is not None and proc.poll() is not None:
            raise AssertionError(f"coordinator ended early: {proc.communicate()}")
        time.sleep(0.05)
    raise AssertionError(f"fewer than {n} jobs done after {timeout} s")


def test_grid_3x4_with_two_local_workers(tmp_path):
    study = make(tmp_path)
    code, counts, out = run(study, workers=2)
    assert code == 0 and counts["done"] == 12
    rows = read_table(out)
    assert len(rows) == 12
    expected = [j.values for j in expand(load_study(study))]
    for row, want in zip(rows, expected):
        assert float(row["layer.spacer.thickness"]) == want["layer.spacer.thickness"]
        assert float(row["layer.doping.sheet_donors"]) == want["layer.doping.sheet_donors"]
        assert row["status"] == "done" and row["converged"] == "True"
        with h5py.File(out / row["result"], "r") as f:          # plain h5py, no selfcon
            assert f.attrs["converged"]
            assert f["profile/potential"].shape == f["mesh/z"].shape
    with h5py.File(out / "table.h5", "r") as f:
        t = f["table"]
        assert list(t["layer.spacer.thickness"][()]) == [w["layer.spacer.thickness"] for w in expected]
        assert [s.decode() for s in t["status"][()]] == ["done"] * 12
        assert t["E0_eV"].attrs["units"] == "eV"
    if REAL:
        def channel_layer_ns(row):          # electrons in the GaAs channel layer (plain h5py)
            with h5py.File(out / row["result"], "r") as f:
                t = f["layers"][()]
                return float(t["electron_sheet_density_cm2"][list(t["name"]).index(b"channel")])
        ns = {(float(r["layer.spacer.thickness"]), float(r["layer.doping.sheet_donors"])):
              channel_layer_ns(r) for r in rows}
        # more donors, more electrons in the channel; a thicker spacer, fewer (charge control,
        # Delagebeaudeuf & Linh 1982).  The channel layer's own electrons: the sheet's donors
        # are metallic at these doses (issue 12), so electrons the channel cannot take stay
        # at the sheet, and the stack's total no longer follows the spacer
        assert ns[(15.0, 5e12)] > ns[(15.0, 2e12)] > 0
        assert ns[(10.0, 5e12)] > ns[(20.0, 5e12)]
    # rerun: nothing to do, nothing recomputed
    con = db(out)
    before = {r["id"]: r["finished_at"] for r in con.execute("SELECT id, finished_at FROM jobs")}
    code2, counts2, _ = run(study, workers=2)
    assert code2 == 0 and counts2["done"] == 12
    assert before == {r["id"]: r["finished_at"] for r in con.execute("SELECT id, finished_at FROM jobs")}


def test_changed_study_adds_and_retires(tmp_path):
    study = make(tmp_path, GRID.replace("points = 4", "points = 2"))
    run(study, workers=1)
    con = db(tmp_path / "study")
    old = {r["id"]: r["finished_at"] for r in con.execute("SELECT id, finished_at FROM jobs")}
    study.write_text(GRID.replace("points = 4", "points = 2").replace("[10.0, 15.0, 20.0]", "[15.0, 20.0, 25.0]"))
    code, counts, out = run(study, workers=1)
    assert counts["done"] == 6 and counts["retired"] == 2
    kept = {r["id"]: r["finished_at"] for r in con.execute("SELECT id, finished_at FROM jobs WHERE status='done'")}
    assert sum(1 for i in kept if i in old and kept[i] == old[i]) == 4      # 15 and 20 nm kept as they were
    assert len(read_table(out)) == 6


def test_not_converged_and_failed_jobs_do_not_stop_the_others(tmp_path):
    study = make(tmp_path, """
        deck = "base.toml"
        [[vary]]
        path = "solver.max_iterations"
        values = [1, 80]
        [[vary]]
        path = "layer.spacer.thickness"
        values = [15.0, -3.0]
    """)
    code, counts, out = run(study, workers=2)
    assert code == 3
    rows = {(r["solver.max_iterations"], r["layer.spacer.thickness"]): r for r in read_table(out)}
    assert rows[("80", "15.0")]["status"] == "done"
    nc = rows[("1", "15.0")]
    assert nc["status"] == "not_converged" and nc["converged"] == "False" and nc["message"]
    assert Path(out / nc["result"]).is_file()                      # the result is still written, marked
    for k in (("1", "-3.0"), ("80", "-3.0")):
        assert rows[k]["status"] == "failed" and "thickness" in rows[k]["message"]


def test_deck_that_raises_is_failed_with_its_error(tmp_path):
    # an alloy fraction the deck rejects: failed with the deck's message, the other job runs
    study = make(tmp_path, 'deck = "base.toml"\n[[vary]]\npath = "layer.0.x"\nvalues = [0.3, 1.2]\n')
    code, counts, out = run(study, workers=2)
    assert code == 3 and counts["done"] == 1 and counts["failed"] == 1
    failed = [r for r in read_table(out) if r["status"] == "failed"][0]
    assert failed["layer.0.x"] == "1.2" and "must be in [0, 1]" in failed["message"]


def test_job_that_raises_in_the_worker_is_failed_with_its_error(tmp_path):
    # the worker-side path: a job function returning an exception (stand-in job, raise=boom in the title)
    study = make(tmp_path, 'deck = "base.toml"\n[[vary]]\npath = "title"\nvalues = ["fine", "raise=boom"]\n')
    code, counts, out = run_study(study, workers=2, job_fn="selfcon.batch.worker:sleepy_job")
    assert counts["done"] == 1 and counts["failed"] == 1
    failed = [r for r in read_table(out) if r["status"] == "failed"][0]
    assert failed["title"] == "raise=boom" and "RuntimeError: boom" in failed["message"]


def test_sample_mode_with_seed_gives_the_same_table(tmp_path):
    text = """
        deck = "base.toml"
        mode = "sample"
        samples = 6
        seed = 42
        [[vary]]
        path = "layer.spacer.thickness"
        distribution = "normal"
        relative_sigma = 0.1
        [[vary]]
        path = "layer.0.x"
        distribution = "uniform"
        low = 0.28
        high = 0.32
    """
    a = make(tmp_path, text, name="a.toml")
    b = make(tmp_path, text, name="b.toml")
    _, ca, oa = run(a, workers=2)
    _, cb, ob = run(b, workers=2)
    assert ca["done"] == cb["done"] == 6
    keep = ["layer.spacer.thickness", "layer.0.x", "status", "iterations", "electron_sheet_density_cm2", "E0_eV"]
    ta = [{k: r[k] for k in keep} for r in read_table(oa)]
    tb = [{k: r[k] for k in keep} for r in read_table(ob)]
    assert ta == tb
    assert len({r["layer.spacer.thickness"] for r in ta}) == 6


@pytest.mark.skipif(not REAL, reason="needs the real solver")
def test_continuation_same_answer_fewer_iterations(tmp_path):
    sweep = """
        deck = "base.toml"
        {cont}
        [[vary]]
        path = "surface.bias"
        from = 0.0
        to = -0.4
        points = 8
    """
    cold = make(tmp_path, sweep.format(cont=""), name="cold.toml")
    warm = make(tmp_path, sweep.format(cont="continuation = true"), name="warm.toml")
    _, cc, oc = run(cold, workers=1)
    _, cw, ow = run(warm, workers=1)
    assert cc["done"] == cw["done"] == 8
    rc, rw = read_table(oc), read_table(ow)
    for a, b in zip(rc, rw):
        # same self-consistent answer within the loop tolerance (1e-6 V on phi -> ~1e-5 relative on n_s)
        assert math.isclose(float(a["electron_sheet_density_cm2"]), float(b["electron_sheet_density_cm2"]),
                            rel_tol=1e-4, abs_tol=1e6)
        assert abs(float(a["E0_eV"]) - float(b["E0_eV"])) < 1e-4
    assert [r["warm_start"] for r in rw][1:] == ["True"] * 7
    assert sum(int(r["iterations"]) for r in rw[1:]) < sum(int(r["iterations"]) for r in rc[1:])


def kill_study(tmp_path):
    # enough jobs, each slow enough, that a kill lands mid-run
    study = GRID.replace("points = 4", "points = 6")
    return make(tmp_path, study, step=0.05 if REAL else 2.0, words="sleep=0.3")


def test_sigkill_one_worker_mid_run(tmp_path):
    study = kill_study(tmp_path)
    out = tmp_path / "study"
    proc = cli("batch", str(study), "--workers", "2")
    try:
        wait_done(out, 2, proc=proc)
        victims = pool_workers(proc.pid)
        assert victims, descendants(proc.pid)
        os.kill(victims[0], signal.SIGKILL)
        stdout, stderr = proc.communicate(timeout=180)
    finally:
        if proc.poll() is None:
            proc.kill()
    assert proc.returncode == 0, stderr
    rows = read_table(out)
    assert len(rows) == 18 and len({r["job"] for r in rows}) == 18
    assert all(r["status"] == "done" for r in rows)
    assert sorted((r["layer.spacer.thickness"], r["layer.doping.sheet_donors"]) for r in rows) == \
        sorted((str(j.values["layer.spacer.thickness"]), str(j.values["layer.doping.sheet_donors"]))
               for j in expand(load_study(study)))
    assert max(int(r["attempts"]) for r in rows) >= 2          # the in-flight jobs were requeued, counted


def test_sigkill_coordinator_then_resume(tmp_path):
    study = kill_study(tmp_path)
    out = tmp_path / "study"
    proc = cli("batch", str(study), "--workers", "2")
    try:
        wait_done(out, 4, proc=proc)
        proc.send_signal(signal.SIGKILL)
        proc.wait(timeout=30)
    finally:
        if proc.poll() is None:
            proc.kill()
    time.sleep(0.5)    # let orphaned pool workers notice the dead parent
    con = db(out)
    done_before = {r["id"]: r["finished_at"] for r in con.execute("SELECT id, finished_at FROM jobs "
                                                                  "WHERE status='done'")}
    assert 4 <= len(done_before) < 18
    con.close()
    again = cli("batch", str(study), "--workers", "2")
    stdout, stderr = again.communicate(timeout=180)
    assert again.returncode == 0, stderr
    con = db(out)
    assert con.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
    after = {r["id"]: r["finished_at"] for r in con.execute("SELECT id, finished_at FROM jobs WHERE status='done'")}
    assert len(after) == 18
    assert all(after[i] == t for i, t in done_before.items())     # done jobs were not recomputed
    assert len(read_table(out)) == 18
    # queue commands read the folder
    st = subprocess.run([sys.executable, "-m", CLI, "queue", "status", str(out), "--json"], env=ENV,
                        capture_output=True, text=True)
    assert st.returncode == 0 and json.loads(st.stdout)["done"] == 18
    li = subprocess.run([sys.executable, "-m", CLI, "queue", "list", str(out)], env=ENV,
                        capture_output=True, text=True)
    assert li.returncode == 0 and len(li.stdout.strip().splitlines()) == 19


def test_queue_retry_and_bad_study_exit_codes(tmp_path):
    study = make(tmp_path, 'deck = "base.toml"\n[[vary]]\npath = "layer.spacer.thickness"\nvalues = [15.0, -1.0]\n')
    code, counts, out = run(study, workers=1)
    assert counts["failed"] == 1
    r = subprocess.run([sys.executable, "-m", CLI, "queue", "retry", str(out), "--status", "done"],
                       env=ENV, capture_output=True, text=True)
    assert r.returncode == 0 and "1 jobs requeued" in r.stdout
    assert db(out).execute("SELECT COUNT(*) FROM jobs WHERE status='queued'").fetchone()[0] == 1
    bad = make(tmp_path, 'deck = "base.toml"\n[[vary]]\npath = "layer.nope.thickness"\nvalues = [1.0]\n',
               name="bad.toml")
    r = subprocess.run([sys.executable, "-m", CLI, "batch", str(bad)], env=ENV, capture_output=True, text=True)
    assert r.returncode == 2
    assert "vary[0].path" in r.stderr and "bad.toml" in r.stderr and "Traceback" not in r.stderr


def _comparable(rows):
    keys = ["layer.spacer.thickness", "layer.doping.sheet_donors", "status", "iterations",
            "electron_sheet_density_cm2", "E0_eV", "E1_eV"]
    return [{k: r[k] for k in keys} for r in rows]


def test_dask_local_cluster_matches_the_pool(tmp_path):
    pytest.importorskip("distributed")
    study = make(tmp_path, GRID.replace("points = 4", "points = 2"))
    _, cp, op = run(study, workers=2, out=tmp_path / "pool")
    _, cd, od = run(study, workers=2, out=tmp_path / "dask", scheduler="local", memory_limit="2GiB")
    assert cp["done"] == cd["done"] == 6
    assert _comparable(read_table(op)) == _comparable(read_table(od))


#: a job function wrapping the real one (or the stand-in under test) that logs "start PID KEY" and
#: "end PID KEY" around each job, so a test can see which worker process holds which job
PROBE = """
import hashlib, importlib, os

def job(deck_text, initial=None):
    key = hashlib.sha256(deck_text.encode()).hexdigest()[:16]
    mod, _, name = os.environ["SELFCON_TEST_PROBE_INNER"].partition(":")
    inner = getattr(importlib.import_module(mod), name)
    with open(os.environ["SELFCON_TEST_PROBE_LOG"], "a") as fh:
        fh.write(f"start {os.getpid()} {key}\\n")
    out = inner(deck_text, initial)
    with open(os.environ["SELFCON_TEST_PROBE_LOG"], "a") as fh:
        fh.write(f"end {os.getpid()} {key}\\n")
    return out
"""


def probe_env(tmp_path):
    """ENV with the job function replaced by PROBE (importable from tmp_path by coordinator and workers)."""
    (tmp_path / "selfcon_test_probe.py").write_text(PROBE)
    log = tmp_path / "probe.log"
    env = dict(ENV, PYTHONPATH=os.pathsep.join(filter(None, [str(tmp_path), ENV.get("PYTHONPATH")])),
               SELFCON_TEST_PROBE_LOG=str(log),
               SELFCON_TEST_PROBE_INNER=ENV.get("SELFCON_BATCH_JOB", "selfcon.batch.worker:run_job"),
               SELFCON_BATCH_JOB="selfcon_test_probe:job")
    return env, log


def probe_jobs(log):
    """{pid: key of the job it is running now, or None}, from the probe log."""
    holding = {}
    for line in log.read_text().splitlines():
        what, pid, key = line.split()
        holding[int(pid)] = key if what == "start" else None
    return holding


def test_dask_worker_killed_mid_run_still_completes(tmp_path):
    pytest.importorskip("distributed")
    study = kill_study(tmp_path)
    out = tmp_path / "study"
    env, log = probe_env(tmp_path)
    proc = subprocess.Popen([sys.executable, "-m", CLI, "batch", str(study), "--workers", "2", "--scheduler",
                             "local", "--memory-limit", "2GiB"], env=env, stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True)
    try:
        wait_done(out, 2, proc=proc)
        workers = [p for p, (pp, cmd) in descendants(proc.pid).items()
                   if "spawn_main" in cmd and "resource_tracker" not in cmd]
        busy = {pid: key for pid, key in probe_jobs(log).items() if key is not None and pid in workers}
        assert busy, (workers, log.read_text())              # a worker process is inside a job right now
        victim, job = next(iter(busy.items()))
        os.kill(victim, signal.SIGKILL)
        stdout, stderr = proc.communicate(timeout=240)
    finally:
        if proc.poll() is None:
            proc.kill()
    assert proc.returncode == 0, stderr
    rows = read_table(out)
    assert len(rows) == 18 and all(r["status"] == "done" for r in rows)
    # no innocent job is charged: Dask reruns the dead worker's task elsewhere, so every job,
    # the one hit included, finished at its first attempt (README.md, "Design studies")
    assert [r["attempts"] for r in rows] == ["1"] * 18
    # the kill hit a running job: the victim never finished it, another worker ran it to the end
    events = [line.split() for line in log.read_text().splitlines()]
    assert ["end", str(victim), job] not in events
    assert any(e[0] == "end" and e[2] == job and e[1] != str(victim) for e in events)
