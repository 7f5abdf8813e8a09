"""Resume verifies: every finished job's result file is checked before a study goes on.

A job is finished ("done" or "not_converged") only once its file was written; but the file
can be lost or damaged afterwards (deleted, truncated, overwritten, a disk error).  Such a
job goes back to the queue, with the reason in its ``error`` column and in the log, on
every resume (:func:`selfcon.batch.runner.run_study`) and with ``selfcon queue verify DIR``.

The check: the file must exist and its SHA-256 must equal the one the coordinator recorded
in the queue when it wrote the file (``jobs.result_sha256``: any changed byte counts).
A job finished by a selfcon that recorded no digest is checked by reading the file's own
checksum (selfcon/output/checksum.py; a file without one is accepted).

The coordinator also removes the temporary files (``.NAME.<hex>.tmp``) an interrupted
write left in the study folder: :func:`clean_temporaries`, run under the coordinator lock.
"""
from __future__ import annotations

import hashlib
import logging
import re
from pathlib import Path

from selfcon.batch import queue as q

log = logging.getLogger("selfcon.batch")

#: the temporary files of selfcon/output/files.py::atomic_write (``.NAME.<8 hex>.tmp``)
TEMPORARY = re.compile(r"^\..+\.[0-9a-f]{8}\.tmp$")


def file_sha256(path) -> str:
    """Hex SHA-256 of a file's bytes, read in 1 MiB blocks."""
    h = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def check_file(out_dir, rel, recorded) -> str | None:
    """Why the result file ``rel`` of a finished job cannot be trusted, or None when it can."""
    from selfcon.errors import os_reason
    from selfcon.output.result import verify_result_file
    if not rel:
        return "no result file recorded"
    path = Path(out_dir) / rel
    if not path.exists():
        return f"{rel} is missing"
    if not path.is_file():
        return f"{rel} is not a file"
    if recorded:
        try:
            digest = file_sha256(path)
        except OSError as exc:
            return f"{rel} cannot be read ({os_reason(exc)})"
        if digest != recorded:
            return f"{rel} changed after it was written (its sha256 is not the one recorded in the queue)"
        return None
    state = verify_result_file(path)
    return None if state in ("ok", "unchecked") else f"{rel}: {state}"


def verify_jobs(con, out_dir) -> tuple[list[tuple[int, str]], int]:
    """Check every finished job's file; requeue the ones that fail -> ``(requeued, checked)``,
    ``requeued`` being ``[(job_id, reason), ...]``."""
    sha = "result_sha256" if q.has_column(con, "result_sha256") else "NULL"
    rows = con.execute(f"SELECT id, result_path, {sha} AS sha FROM jobs "
                       "WHERE status IN ('done', 'not_converged') ORDER BY id").fetchall()
    bad = []
    for r in rows:
        reason = check_file(out_dir, r["result_path"], r["sha"])
        if reason is not None:
            bad.append((r["id"], reason))
            log.warning("job %d requeued: %s", r["id"], reason)
    if bad:
        q.requeue_damaged(con, bad)
    return bad, len(rows)


def clean_temporaries(out_dir) -> list[Path]:
    """Remove the temporary files an interrupted write left in the study folder and in its
    ``jobs/`` (call only while holding the coordinator lock) -> the files removed."""
    removed = []
    for folder in (Path(out_dir), Path(out_dir) / "jobs"):
        try:
            names = [e.name for e in folder.iterdir() if TEMPORARY.match(e.name)]
        except OSError:
            continue
        for name in names:
            try:
                (folder / name).unlink()
            except FileNotFoundError:
                continue
            removed.append(folder / name)
            log.info("removed %s, left by an interrupted write", folder / name)
    return removed


def summary_line(bad, checked) -> str:
    """One line: "24 finished jobs checked, 3 requeued (job 5: jobs/5.h5 is missing; ...)"."""
    line = f"{checked} finished jobs checked, {len(bad)} requeued"
    if bad:
        shown = "; ".join(f"job {j}: {why}" for j, why in bad[:3])
        line += f" ({shown}{'; ...' if len(bad) > 3 else ''})"
    return line
