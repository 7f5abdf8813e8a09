"""The SQLite job queue: sync (add / keep / retire / requeue), atomic claims, retries, read-only views."""
import sqlite3
import threading

import pytest

from selfcon.batch import queue as q
from selfcon.batch.study import JobSpec
from selfcon.errors import StudyError


def specs(names, neighbours=None):
    return [JobSpec(i, {"p": n}, f"deck {n}", f"hash-{n}", (neighbours or {}).get(i)) for i, n in enumerate(names)]


@pytest.fixture
def con(tmp_path):
    c = q.connect(tmp_path)
    yield c
    c.close()


def test_wal_mode_and_schema(con, tmp_path):
    assert con.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    cols = {r[1] for r in con.execute("PRAGMA table_info(jobs)")}
    for c in ("id", "deck_text", "deck_hash", "varied", "status", "attempts", "error", "queued_at", "started_at",
              "finished_at", "seconds", "result_path", "iterations", "summary"):
        assert c in cols


def test_sync_adds_keeps_retires_and_revives(con):
    assert q.sync(con, specs("abc"), retries=2)["added"] == 3
    row = q.claim(con)
    q.finish(con, row["id"], status="done", seconds=1.0)
    c = q.sync(con, specs("abc"), retries=2)
    assert (c["added"], c["kept"]) == (0, 3)
    assert q.counts(con)["done"] == 1
    c = q.sync(con, specs("bd"), retries=2)          # the study changed: a, c leave; d is new
    assert (c["added"], c["retired"]) == (1, 2)
    st = {r["deck_hash"]: r["status"] for r in q.rows(con, include_retired=True)}
    assert st == {"hash-a": "retired", "hash-b": "queued", "hash-c": "retired", "hash-d": "queued"}
    q.sync(con, specs("abd"), retries=2)              # a comes back: its done result is kept
    st = {r["deck_hash"]: r["status"] for r in q.rows(con, include_retired=True)}
    assert st["hash-a"] == "done" and st["hash-c"] == "retired"
    assert [r["deck_hash"] for r in q.rows(con)] == ["hash-a", "hash-b", "hash-d"]   # study order


def test_stale_running_jobs_are_requeued_without_counting(con):
    q.sync(con, specs("ab"), retries=2)
    row = q.claim(con)
    assert row["attempts"] == 1
    c = q.sync(con, specs("ab"), retries=2)           # as after a coordinator that was killed
    assert c["requeued"] == 1
    r = con.execute("SELECT status, attempts FROM jobs WHERE id = ?", (row["id"],)).fetchone()
    assert (r["status"], r["attempts"]) == ("queued", 0)


def test_failed_jobs_retried_up_to_the_limit(con):
    q.sync(con, specs("a"), retries=1)
    for attempt in (1, 2):
        row = q.claim(con)
        assert row["attempts"] == attempt
        q.finish(con, row["id"], status="failed", error="boom")
        q.sync(con, specs("a"), retries=1)
    # attempts 2 > retries 1: stays failed
    assert q.counts(con)["failed"] == 1 and q.claim(con) is None
    assert q.retry(con) == 1                          # `selfcon queue retry` resets the attempts
    assert q.claim(con)["attempts"] == 1


def test_claim_waits_for_neighbour(con):
    q.sync(con, specs("abc", neighbours={1: 0, 2: 1}), retries=2)
    a = q.claim(con)
    assert a["deck_text"] == "deck a"
    assert q.claim(con) is None                       # b needs a finished first
    q.finish(con, a["id"], status="done")
    b = q.claim(con)
    assert b["deck_text"] == "deck b" and b["neighbour"] == a["id"]


def test_claims_are_atomic_across_connections(tmp_path):
    con = q.connect(tmp_path)
    q.sync(con, [JobSpec(i, {"i": i}, f"d{i}", f"h{i}") for i in range(200)], retries=0)
    con.close()
    got = []
    lock = threading.Lock()

    def grab():
        c = q.connect(tmp_path)
        while True:
            try:
                row = q.claim(c)
            except sqlite3.OperationalError:      # busy: try again
                continue
            if row is None:
                break
            with lock:
                got.append(row["id"])
        c.close()

    threads = [threading.Thread(target=grab) for _ in range(4)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert sorted(got) == list(range(1, 201))         # every job claimed exactly once


def test_requeue_counts_attempt_only_when_asked(con):
    q.sync(con, specs("a"), retries=2)
    r = q.claim(con)
    q.requeue(con, r["id"], count_attempt=True, error="worker process died")
    r = q.claim(con)
    assert r["attempts"] == 2
    q.requeue(con, r["id"], count_attempt=False)
    assert con.execute("SELECT attempts FROM jobs").fetchone()[0] == 1


def test_invalid_job_spec_is_failed_at_once_and_not_retried(con):
    bad = JobSpec(0, {"p": -1}, "# rejected", "invalid-x", None, "DeckError: thickness must be > 0")
    q.sync(con, [bad], retries=5)
    assert q.counts(con)["failed"] == 1
    q.sync(con, [bad], retries=5)
    assert q.counts(con)["failed"] == 1 and q.retry(con) == 0
    assert "thickness" in q.rows(con)[0]["error"]


def test_lock_excludes_a_second_coordinator(tmp_path):
    with q.CoordinatorLock(tmp_path):
        with pytest.raises(StudyError):
            q.CoordinatorLock(tmp_path).acquire()
    q.CoordinatorLock(tmp_path).acquire().release()   # free again


def test_readonly_view_of_missing_queue(tmp_path):
    with pytest.raises(StudyError):
        q.connect(tmp_path / "nothing", readonly=True)
