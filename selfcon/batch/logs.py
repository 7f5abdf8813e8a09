"""The study log: ``selfcon batch --log FILE``.

The batch code logs through the standard :mod:`logging` module, to the logger
``selfcon.batch`` (one line per job event: sent, done, not converged, failed,
requeued; plus the run's start and end).  :func:`to_file` sends those lines, and
Dask's own (the ``distributed`` logger), to a file, with timestamps, for as long as
a run lasts; while it does, Dask's lines go to the file only, not to the terminal.
"""
from __future__ import annotations

import contextlib
import logging
from pathlib import Path

FORMAT = "%(asctime)s.%(msecs)03d %(levelname)-7s %(name)s: %(message)s"
DATEFMT = "%Y-%m-%d %H:%M:%S"

#: loggers whose lines go to the study log
LOGGERS = ("selfcon", "distributed")


@contextlib.contextmanager
def to_file(path, level=logging.INFO):
    """Append the lines of :data:`LOGGERS` at ``level`` and above to ``path`` while the block runs."""
    if path is None:
        yield None
        return
    path = Path(path)
    if path.parent and not path.parent.is_dir():
        from selfcon.errors import StudyError
        raise StudyError("folder of the log file does not exist", key="--log", file=str(path))
    handler = logging.FileHandler(path, mode="a", encoding="utf-8", delay=False)
    handler.setFormatter(logging.Formatter(FORMAT, DATEFMT))
    handler.setLevel(level)
    saved = []
    for name in LOGGERS:
        lg = logging.getLogger(name)
        saved.append((lg, lg.level, lg.propagate, list(lg.handlers)))
        if name != "selfcon":
            # Dask's own handlers (to stderr) step aside: its lines go to the file only
            for h in list(lg.handlers):
                lg.removeHandler(h)
            lg.propagate = False
        if lg.level == logging.NOTSET or lg.level > level:
            lg.setLevel(level)
        lg.addHandler(handler)
    try:
        yield handler
    finally:
        for lg, lvl, prop, handlers in saved:
            lg.removeHandler(handler)
            for h in handlers:
                if h not in lg.handlers:
                    lg.addHandler(h)
            lg.setLevel(lvl)
            lg.propagate = prop
        handler.close()
