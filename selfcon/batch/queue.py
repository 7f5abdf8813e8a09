"""The job queue: one SQLite file (WAL mode) in the study's output folder.

Only the coordinator writes (it holds ``coordinator.lock`` while it runs); the
workers never see the database.  Status values:

    queued -> running -> done | not_converged | failed
    retired: a job that is no longer part of the study (kept, never run)

A claim is a single ``UPDATE ... WHERE status = 'queued' ... RETURNING`` so it
is atomic even if another writer appeared.  Keep the folder on a local disk:
SQLite's locking is unreliable on network file systems.
"""
from __future__ import annotations

import fcntl
import json
import os
import sqlite3
import time
from contextlib import contextmanager
from pathlib import Path

from selfcon.errors import SelfconEnvironmentError, StudyError

SCHEMA_VERSION = 1
STATUSES = ("queued", "running", "done", "not_converged", "failed", "retired")
FINISHED = ("done", "not_converged", "failed")

_SCHEMA = """
CREATE TABLE IF NOT EXISTS meta (key TEXT PRIMARY KEY, value TEXT NOT NULL);
CREATE TABLE IF NOT EXISTS jobs (
    id           INTEGER PRIMARY KEY,
    study_index  INTEGER,
    deck_hash    TEXT NOT NULL UNIQUE,
    deck_text    TEXT NOT NULL,
    varied       TEXT NOT NULL,
    status       TEXT NOT NULL DEFAULT 'queued'
                 CHECK (status IN ('queued','running','done','not_converged','failed','retired')),
    attempts     INTEGER NOT NULL DEFAULT 0,
    error        TEXT,
    message      TEXT,
    neighbour    INTEGER,
    queued_at    REAL,
    started_at   REAL,
    finished_at  REAL,
    seconds      REAL,
    result_path  TEXT,
    iterations   INTEGER,
    converged    INTEGER,
    warm_start   INTEGER NOT NULL DEFAULT 0,
    prev_status  TEXT,
    summary      TEXT,
    result_sha256 TEXT,
    start        TEXT
);
CREATE INDEX IF NOT EXISTS jobs_status ON jobs(status, study_index);
"""


def db_path(out_dir) -> Path:
    return Path(out_dir) / "queue.sqlite"


def connect(out_dir, *, readonly=False) -> sqlite3.Connection:
    """Open (``readonly=False``: create) the queue of ``out_dir``.  A damaged database or one
    the system will not let us use is a SelfconEnvironmentError (exit 4, see queue_failure)."""
    path = db_path(out_dir)
    con = None
    try:
        if readonly:
            if not path.is_file():
                raise StudyError("no queue here (queue.sqlite missing)", file=str(out_dir))
            # with no write-ahead log left (no coordinator running, none killed) the file is read
            # as immutable, so looking creates no -wal/-shm files in the folder
            wal = path.with_name(path.name + "-wal")
            mode = "ro" if wal.exists() else "ro&immutable=1"
            from urllib.request import pathname2url
            con = sqlite3.connect(f"file:{pathname2url(str(path))}?mode={mode}", uri=True, timeout=30)
            con.execute("SELECT COUNT(*) FROM jobs").fetchone()       # a damaged file fails here
        else:
            Path(out_dir).mkdir(parents=True, exist_ok=True)
            con = sqlite3.connect(path, timeout=30, isolation_level=None)   # autocommit; explicit BEGINs
            con.execute("PRAGMA journal_mode=WAL")
            con.execute("PRAGMA synchronous=NORMAL")
            con.executescript(_SCHEMA)
            _add_columns(con)
            con.execute("INSERT OR IGNORE INTO meta VALUES ('schema_version', ?)", (str(SCHEMA_VERSION),))
    except (sqlite3.DatabaseError, OSError) as exc:
        if con is not None:
            con.close()
        raise queue_failure(out_dir, exc) from None
    con.row_factory = sqlite3.Row
    return con


#: columns added to the jobs table after its first version: (name, SQL type); a queue written
#: before gets them on its next writable connection (older rows hold NULL)
ADDED_COLUMNS = (("result_sha256", "TEXT"), ("start", "TEXT"))


def _add_columns(con) -> None:
    have = {r[1] for r in con.execute("PRAGMA table_info(jobs)")}
    for name, kind in ADDED_COLUMNS:
        if name not in have:
            con.execute(f"ALTER TABLE jobs ADD COLUMN {name} {kind}")


def has_column(con, name) -> bool:
    """True if the jobs table has column ``name`` (a read-only look at an older queue may not)."""
    return any(r[1] == name for r in con.execute("PRAGMA table_info(jobs)"))


#: files a study folder holds besides jobs/ and the tables; a folder holding only these is "ours"
QUEUE_FILES = ("queue.sqlite", "queue.sqlite-wal", "queue.sqlite-shm", "coordinator.lock")


def is_environment_failure(exc) -> bool:
    """True for SQLite errors that are the database file's or the system's fault (not a bug in
    the SQL): damaged file, disk full, read-only, I/O error, locked."""
    return isinstance(exc, (sqlite3.DatabaseError, OSError)) and not isinstance(
        exc, (sqlite3.IntegrityError, sqlite3.ProgrammingError, sqlite3.InterfaceError))


def queue_failure(out_dir, exc) -> SelfconEnvironmentError:
    """The SelfconEnvironmentError (exit 4) for a queue database that failed: what, where,
    and for a damaged file how to recover."""
    path = db_path(out_dir)
    if isinstance(exc, OSError):
        return SelfconEnvironmentError.from_os_error(exc, "cannot use the job queue", path)
    text = " ".join(str(exc).split()) or type(exc).__name__
    damaged = not isinstance(exc, sqlite3.OperationalError) or any(
        w in text.lower() for w in ("malformed", "not a database", "corrupt"))
    if damaged:
        return SelfconEnvironmentError(
            "corrupt job queue", path=path, reason=text,
            hint=f"to recover, move the folder {out_dir} aside (its jobs/*.h5 stay readable with "
                 "`selfcon show`) and rerun `selfcon batch` on the study: every job runs again")
    return SelfconEnvironmentError("cannot use the job queue", path=path, reason=text)


def check_out_folder(out_dir, study_file, base_deck, *, option="--out") -> None:
    """A study's output folder must be new, empty, or hold this study's own queue.

    The identity of a queue is the study file's path and its base deck's path (both
    resolved), stored in its meta table.  Anything else is refused (StudyError, exit 2)
    naming what is there; nothing in the folder is touched.  A queue from before the base
    deck was recorded matches on the study file alone."""
    out_dir = Path(out_dir)
    if not out_dir.exists():
        if out_dir.is_symlink():
            raise StudyError("is a dangling link; give a new or empty folder", file=str(out_dir), key=option)
        return
    if not out_dir.is_dir():
        raise StudyError("is a file, not a folder; give a new or empty folder", file=str(out_dir), key=option)
    try:
        entries = sorted(os.listdir(out_dir))
    except OSError as exc:
        raise SelfconEnvironmentError.from_os_error(exc, "cannot list folder", out_dir) from None
    if not [e for e in entries if e not in ("coordinator.lock",)]:
        return
    if "queue.sqlite" not in entries:
        shown = ", ".join(e + ("/" if (out_dir / e).is_dir() else "") for e in entries[:6])
        more = f" and {len(entries) - 6} more" if len(entries) > 6 else ""
        raise StudyError(f"folder is not empty and holds no study queue (it has {shown}{more}); "
                         "give a new or empty folder, or the folder of this study's earlier run",
                         file=str(out_dir), key=option)
    con = connect(out_dir, readonly=True)
    try:
        have_study = get_meta(con, "study_file")
        have_deck = get_meta(con, "base_deck")
    except sqlite3.DatabaseError as exc:
        raise queue_failure(out_dir, exc) from None
    finally:
        con.close()
    want_study, want_deck = str(Path(study_file).resolve()), str(Path(base_deck).resolve())
    if have_study == want_study and have_deck in (None, want_deck):
        return
    theirs = f"study {have_study!r}" + (f" with base deck {have_deck!r}" if have_deck else "")
    raise StudyError(f"holds the queue of another study ({theirs}), not of {want_study!r} with base deck "
                     f"{want_deck!r}; give a new or empty folder", file=str(out_dir), key=option)


@contextmanager
def transaction(con):
    con.execute("BEGIN IMMEDIATE")
    try:
        yield con
    except BaseException:
        con.execute("ROLLBACK")
        raise
    else:
        con.execute("COMMIT")


class CoordinatorLock:
    """An exclusive flock on OUTDIR/coordinator.lock; released by the OS if the process dies."""

    def __init__(self, out_dir):
        self.path = Path(out_dir) / "coordinator.lock"
        self.fd = None

    def acquire(self):
        self.path.parent.mkdir(parents=True, exist_ok=True)
        fd = os.open(self.path, os.O_RDWR | os.O_CREAT, 0o644)
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            os.close(fd)
            raise StudyError("another selfcon batch is running on this folder", file=str(self.path.parent)) from None
        os.ftruncate(fd, 0)
        os.write(fd, f"{os.getpid()}\n".encode())
        self.fd = fd
        return self

    def release(self):
        if self.fd is not None:
            fcntl.flock(self.fd, fcntl.LOCK_UN)
            os.close(self.fd)
            self.fd = None

    def __enter__(self):
        return self.acquire()

    def __exit__(self, *exc):
        self.release()


def set_meta(con, **items):
    with transaction(con):
        for k, v in items.items():
            con.execute("INSERT INTO meta VALUES (?, ?) ON CONFLICT(key) DO UPDATE SET value = excluded.value",
                        (k, json.dumps(v)))


def get_meta(con, key, default=None):
    row = con.execute("SELECT value FROM meta WHERE key = ?", (key,)).fetchone()
    return json.loads(row[0]) if row else default


def sync(con, jobs, *, retries) -> dict:
    """Bring the queue in line with the expanded study.

    New decks are added as queued; decks already done or not_converged are kept;
    failed jobs with attempts <= retries are requeued; jobs left 'running' by a
    coordinator that died are requeued; jobs no longer in the study are retired.
    Returns counts of what changed.
    """
    now = time.time()
    counts = dict(added=0, kept=0, requeued=0, retired=0, revived=0)
    with transaction(con):
        existing = {r["deck_hash"]: r for r in con.execute("SELECT id, deck_hash, status, attempts FROM jobs")}
        hash_to_id = {}
        for spec in jobs:
            row = existing.get(spec.deck_hash)
            varied = json.dumps(spec.values)
            if row is None:
                status = "failed" if spec.error else "queued"
                cur = con.execute(
                    "INSERT INTO jobs (study_index, deck_hash, deck_text, varied, status, error, queued_at, "
                    "finished_at) VALUES (?, ?, ?, ?, ?, ?, ?, ?)",
                    (spec.index, spec.deck_hash, spec.deck_text, varied, status, spec.error, now,
                     now if spec.error else None))
                hash_to_id[spec.deck_hash] = cur.lastrowid
                counts["added"] += 1
                continue
            hash_to_id[spec.deck_hash] = row["id"]
            con.execute("UPDATE jobs SET study_index = ?, varied = ? WHERE id = ?", (spec.index, varied, row["id"]))
            st = row["status"]
            if spec.error:
                con.execute("UPDATE jobs SET status = 'failed', error = ? WHERE id = ?", (spec.error, row["id"]))
                counts["kept"] += 1
            elif st == "retired":
                # back in the study: a finished result is still valid; anything else runs again
                con.execute("UPDATE jobs SET status = CASE WHEN prev_status IN ('done', 'not_converged') "
                            "THEN prev_status ELSE 'queued' END, "
                            "attempts = CASE WHEN prev_status IN ('done', 'not_converged') THEN attempts ELSE 0 END, "
                            "queued_at = ? WHERE id = ?", (now, row["id"]))
                counts["revived"] += 1
            elif st == "running":
                # left over by a coordinator that was killed: that attempt never finished
                con.execute("UPDATE jobs SET status = 'queued', attempts = MAX(attempts - 1, 0), started_at = NULL "
                            "WHERE id = ?", (row["id"],))
                counts["requeued"] += 1
            elif st == "failed" and not spec.error and row["attempts"] <= retries:
                con.execute("UPDATE jobs SET status = 'queued', queued_at = ? WHERE id = ?", (now, row["id"]))
                counts["requeued"] += 1
            else:
                counts["kept"] += 1
        wanted = set(hash_to_id)
        for h, row in existing.items():
            if h not in wanted and row["status"] != "retired":
                con.execute("UPDATE jobs SET prev_status = CASE WHEN status = 'running' THEN 'queued' ELSE status END, "
                            "status = 'retired', study_index = NULL WHERE id = ?", (row["id"],))
                counts["retired"] += 1
        for spec in jobs:
            nb = hash_to_id[jobs[spec.neighbour].deck_hash] if spec.neighbour is not None else None
            con.execute("UPDATE jobs SET neighbour = ? WHERE id = ?", (nb, hash_to_id[spec.deck_hash]))
    return counts


def requeue_stale(con):
    """Jobs left 'running' (coordinator killed) go back to 'queued'."""
    with transaction(con):
        n = con.execute("UPDATE jobs SET status = 'queued', attempts = MAX(attempts - 1, 0), started_at = NULL "
                        "WHERE status = 'running'").rowcount
    return n


def claim(con, *, exclude=()):
    """Atomically take the next runnable queued job (its neighbour, if any, finished) -> Row or None."""
    excl = ",".join(str(int(i)) for i in exclude) or "-1"
    row = con.execute(
        f"""UPDATE jobs SET status = 'running', attempts = attempts + 1, started_at = ?
            WHERE id = (SELECT j.id FROM jobs j
                        WHERE j.status = 'queued' AND j.id NOT IN ({excl})
                          AND (j.neighbour IS NULL OR
                               (SELECT n.status FROM jobs n WHERE n.id = j.neighbour)
                               IN ('done', 'not_converged', 'failed', 'retired'))
                        ORDER BY j.study_index LIMIT 1)
              AND status = 'queued'
            RETURNING id, deck_text, neighbour, attempts, varied""",
        (time.time(),)).fetchone()
    return row


def claim_many(con, n, *, exclude=()):
    """Atomically take up to ``n`` runnable queued jobs, in study order -> list of Rows (one statement)."""
    excl = ",".join(str(int(i)) for i in exclude) or "-1"
    rows = con.execute(
        f"""UPDATE jobs SET status = 'running', attempts = attempts + 1, started_at = ?
            WHERE id IN (SELECT j.id FROM jobs j
                         WHERE j.status = 'queued' AND j.id NOT IN ({excl})
                           AND (j.neighbour IS NULL OR
                                (SELECT n.status FROM jobs n WHERE n.id = j.neighbour)
                                IN ('done', 'not_converged', 'failed', 'retired'))
                         ORDER BY j.study_index LIMIT ?)
              AND status = 'queued'
            RETURNING id, deck_text, neighbour, attempts, varied, study_index""",
        (time.time(), int(n))).fetchall()
    return sorted(rows, key=lambda r: (r["study_index"] is None, r["study_index"] or 0))


def claim_id(con, job_id):
    """Atomically take one given queued job -> Row or None."""
    return con.execute(
        "UPDATE jobs SET status = 'running', attempts = attempts + 1, started_at = ? "
        "WHERE id = ? AND status = 'queued' RETURNING id, deck_text, neighbour, attempts, varied",
        (time.time(), job_id)).fetchone()


def finish(con, job_id, *, status, seconds=None, error=None, message=None, result_path=None,
           iterations=None, converged=None, summary=None, warm_start=False):
    assert status in FINISHED
    con.execute(
        "UPDATE jobs SET status = ?, finished_at = ?, seconds = ?, error = ?, message = ?, result_path = ?, "
        "iterations = ?, converged = ?, summary = ?, warm_start = ? WHERE id = ? AND status = 'running'",
        (status, time.time(), seconds, error, message, result_path, iterations,
         None if converged is None else int(bool(converged)),
         json.dumps(summary) if summary is not None else None, int(bool(warm_start)), job_id))


def finish_many(con, items):
    """Finish several running jobs in one transaction; ``items`` are dicts of :func:`finish`'s keywords
    plus ``job_id``."""
    now = time.time()
    with transaction(con):
        con.executemany(
            "UPDATE jobs SET status = ?, finished_at = ?, seconds = ?, error = ?, message = ?, result_path = ?, "
            "iterations = ?, converged = ?, summary = ?, warm_start = ?, result_sha256 = ?, start = ? "
            "WHERE id = ? AND status = 'running'",
            [(it["status"], now, it.get("seconds"), it.get("error"), it.get("message"), it.get("result_path"),
              it.get("iterations"), None if it.get("converged") is None else int(bool(it["converged"])),
              json.dumps(it["summary"]) if it.get("summary") is not None else None,
              int(bool(it.get("warm_start"))), it.get("result_sha256"), it.get("start"), it["job_id"])
             for it in items])


def requeue_damaged(con, bad) -> None:
    """Put finished jobs whose result file is missing or damaged back in the queue: ``bad`` is
    ``[(job_id, reason), ...]``; the reason is kept in ``error``, the attempts start again (the
    loss was not the job's fault) and the figures of the lost file are forgotten."""
    now = time.time()
    with transaction(con):
        con.executemany(
            "UPDATE jobs SET status = 'queued', attempts = 0, started_at = NULL, finished_at = NULL, "
            "seconds = NULL, result_path = NULL, result_sha256 = NULL, iterations = NULL, converged = NULL, "
            "summary = NULL, message = NULL, error = ?, queued_at = ? "
            "WHERE id = ? AND status IN ('done', 'not_converged')",
            [(reason, now, job_id) for job_id, reason in bad])


def requeue(con, job_id, *, count_attempt=True, error=None):
    """Put a running job back in the queue (worker died: the attempt counts; interrupted: it does not)."""
    con.execute(
        "UPDATE jobs SET status = 'queued', started_at = NULL, error = COALESCE(?, error), "
        "attempts = attempts - ? WHERE id = ? AND status = 'running'",
        (error, 0 if count_attempt else 1, job_id))


def counts(con) -> dict:
    out = {s: 0 for s in STATUSES}
    for status, n in con.execute("SELECT status, COUNT(*) FROM jobs GROUP BY status"):
        out[status] = n
    return out


def rows(con, *, status=None, include_retired=False, columns=None):
    sql = f"SELECT {', '.join(columns) if columns else '*'} FROM jobs"
    where, args = [], []
    if status:
        where.append(f"status IN ({','.join('?' * len(status))})")
        args += list(status)
    elif not include_retired:
        where.append("status != 'retired'")
    if where:
        sql += " WHERE " + " AND ".join(where)
    sql += " ORDER BY study_index IS NULL, study_index, id"
    return con.execute(sql, args).fetchall()


def retry(con, *, statuses=("failed",), ids=()):
    """Requeue finished jobs (attempts reset) -> number requeued."""
    now = time.time()
    with transaction(con):
        if ids:
            q = ",".join("?" * len(ids))
            n = con.execute(f"UPDATE jobs SET status = 'queued', attempts = 0, queued_at = ? "
                            f"WHERE id IN ({q}) AND status IN ('done','not_converged','failed') "
                            f"AND deck_hash NOT LIKE 'invalid-%'",
                            (now, *ids)).rowcount
        else:
            q = ",".join("?" * len(statuses))
            n = con.execute(f"UPDATE jobs SET status = 'queued', attempts = 0, queued_at = ? "
                            f"WHERE status IN ({q}) AND deck_hash NOT LIKE 'invalid-%'", (now, *statuses)).rowcount
    return n
