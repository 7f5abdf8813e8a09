"""Resume verifies: a finished job whose result file is truncated, overwritten with garbage or
deleted goes back to the queue (on resume and with `selfcon queue verify`), the reason is
logged, every other job and file stays as it was, and study-summary counts only the jobs
it really used.  Jobs run through the ``sleepy_job`` stand-in (selfcon/batch/worker.py):
the queue machinery is under test, not the solver.
"""
from __future__ import annotations

import csv
import json
import sqlite3
import textwrap
from pathlib import Path

import numpy as np
import pytest

from selfcon.batch.runner import run_study

JOB = "selfcon.batch.worker:sleepy_job"

BASE = """
title = "verify test"
temperature = 77.0
[surface]
contact = "schottky"
barrier = 0.7
[[layer]]
name = "channel"
material = "GaAs"
thickness = 100.0
"""

STUDY = """
deck = "base.toml"
[[vary]]
path = "layer.channel.thickness"
values = [100.0, 110.0, 120.0, 130.0, 140.0, 150.0]
"""


@pytest.fixture
def study(tmp_path):
    (tmp_path / "base.toml").write_text(BASE)
    p = tmp_path / "study.toml"
    p.write_text(textwrap.dedent(STUDY))
    out = tmp_path / "out"
    code, counts, _ = run_study(p, workers=2, out=out, job_fn=JOB, warm=False)
    assert code == 0 and counts["done"] == 6
    return p, out


def statuses(out):
    con = sqlite3.connect(Path(out) / "queue.sqlite")
    rows = dict(con.execute("SELECT id, status FROM jobs"))
    errors = dict(con.execute("SELECT id, error FROM jobs"))
    con.close()
    return rows, errors


def damage(out):
    """Truncate job 1's file, fill job 2's with random bytes, delete job 3's; leave a stray
    temporary file of an interrupted write.  Returns the bytes of the untouched files."""
    jobs = Path(out) / "jobs"
    f1 = jobs / "1.h5"
    f1.write_bytes(f1.read_bytes()[:1000])
    f2 = jobs / "2.h5"
    f2.write_bytes(np.random.default_rng(5).bytes(f2.stat().st_size))
    (jobs / "3.h5").unlink()
    (jobs / ".7.h5.0a1b2c3d.tmp").write_bytes(b"half a file")
    return {k: (jobs / f"{k}.h5").read_bytes() for k in (4, 5, 6)}


def test_queue_verify_requeues_truncated_garbage_and_deleted(study, run_cli):
    _, out = study
    kept = damage(out)
    code, stdout, err = run_cli("queue", "verify", out)
    assert code == 0, err
    assert f"{out}: 6 finished jobs checked, 3 requeued" in stdout
    assert "job 1: jobs/1.h5 changed after it was written" in stdout     # its sha256 differs from the queue's
    assert "job 2: jobs/2.h5 changed after it was written" in stdout
    assert "job 3: jobs/3.h5 is missing" in stdout
    st, errors = statuses(out)
    assert st == {1: "queued", 2: "queued", 3: "queued", 4: "done", 5: "done", 6: "done"}
    assert errors[3] == "jobs/3.h5 is missing"
    assert not (out / "jobs" / ".7.h5.0a1b2c3d.tmp").exists()             # the stray temporary file
    for k, data in kept.items():
        assert (out / "jobs" / f"{k}.h5").read_bytes() == data            # nothing else changed
    with open(out / "table.csv", newline="") as fh:                      # the table says so too
        table = {int(r["job"]): r["status"] for r in csv.DictReader(fh)}
    assert table == st
    code, stdout, _ = run_cli("queue", "verify", out, "--json")          # a second look: nothing more
    assert code == 0 and json.loads(stdout)["requeued"] == [] and json.loads(stdout)["checked"] == 3


def test_resume_verifies_and_reruns_only_the_damaged(study, tmp_path):
    p, out = study
    kept = damage(out)
    log = tmp_path / "run.log"
    code, counts, _ = run_study(p, workers=2, out=out, job_fn=JOB, warm=False, log_file=log)
    assert code == 0 and counts["done"] == 6 and counts["queued"] == 0
    text = log.read_text()
    assert "job 3 requeued: jobs/3.h5 is missing" in text
    assert "verify: 6 finished jobs checked, 3 requeued" in text
    from selfcon.output.result import load_result, verify_result_file
    for k in (1, 2, 3):
        assert verify_result_file(out / "jobs" / f"{k}.h5") == "ok"
        assert load_result(out / "jobs" / f"{k}.h5").converged
    for k, data in kept.items():
        assert (out / "jobs" / f"{k}.h5").read_bytes() == data            # not run again
    assert not (out / "jobs" / ".7.h5.0a1b2c3d.tmp").exists()


def test_job_without_a_recorded_digest_is_checked_by_its_own_checksum(study, run_cli):
    # a queue written before digests were recorded: the file's own checksum decides
    import h5py
    _, out = study
    con = sqlite3.connect(out / "queue.sqlite")
    con.execute("UPDATE jobs SET result_sha256 = NULL")
    con.commit()
    con.close()
    with h5py.File(out / "jobs" / "4.h5", "r+") as f:
        f["profile/potential"][0] += 1e-6
    code, stdout, _ = run_cli("queue", "verify", out)
    assert code == 0
    assert "1 requeued" in stdout and "job 4: jobs/4.h5: checksum mismatch" in stdout
    assert statuses(out)[0][4] == "queued"


def test_study_summary_counts_only_the_jobs_it_used(study, run_cli):
    from selfcon.design import summarize_study
    _, out = study
    (out / "jobs" / "3.h5").unlink()
    (out / "jobs" / "5.h5").write_bytes(b"\0" * 4096)
    s = summarize_study(out)
    assert s.n_done == 4 and s.n_total == 6
    assert s.skipped == {"result file missing": 1, "result file not an HDF5 file": 1}
    # the statistics are over the four jobs used: thicknesses 100, 110, 130, 150 (the study above)
    assert s.parameter_stats["layer.channel.thickness"]["mean"] == pytest.approx(122.5, rel=1e-12)
    head = s.lines()[0]
    assert head.startswith(f"{out}: 4 of 6 jobs used (6 done; 2 skipped: 1 result file missing, "
                           "1 result file not an HDF5 file;")
    code, stdout, err = run_cli("study-summary", out, "--json")
    assert code == 0, err
    assert json.loads(stdout)["skipped"] == {"result file missing": 1, "result file not an HDF5 file": 1}
