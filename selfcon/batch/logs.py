"""The study log: ``selfcon batch --log FILE``.

The batch code logs through the standard :mod:`logging` module, to the logger
``selfcon.batch`` (one line per job event: sent, done, not converged, failed,
requeued; plus the run's start and end).  :func:`to_file` sends those lines, and
Dask's own (the ``distributed`` logger), to a file, with timestamps, for as long as
a run lasts; while it does, Dask's lines go to the file only, not to the terminal.
Without a log file, :func:`dask_lines` turns Dask's warnings and errors into one line
each (``dask error: ...``, no traceback) handed to the progress display, which prints
them above its bar, never into it.
"""
from __future__ import annotations

import contextlib
import logging
from pathlib import Path

FORMAT = "%(asctime)s.%(msecs)03d %(levelname)-7s %(name)s: %(message)s"
DATEFMT = "%Y-%m-%d %H:%M:%S"

#: loggers whose lines go to the study log
LOGGERS = ("selfcon", "distributed")


class OneLine(logging.Handler):
    """A record as one line ``dask LEVEL: message (Exception: text)``, without its traceback,
    given to ``emit_line``."""

    def __init__(self, emit_line, level=logging.WARNING):
        super().__init__(level)
        self.emit_line = emit_line

    def emit(self, record):
        try:
            text = " ".join(record.getMessage().split())
            exc = record.exc_info[1] if record.exc_info else None
            if exc is not None:
                reason = " ".join(str(exc).split()) or type(exc).__name__
                text = f"{text} ({type(exc).__name__}: {reason})" if text else f"{type(exc).__name__}: {reason}"
            self.emit_line(f"dask {record.levelname.lower()}: {text[:300]}")
        except Exception:       # noqa: BLE001 - logging must never raise
            self.handleError(record)


@contextlib.contextmanager
def dask_lines(emit_line, level=logging.WARNING):
    """While the block runs, Dask's own lines (``distributed`` logger, ``level`` and above) go
    to ``emit_line`` as one formatted line each, instead of Dask's handlers on stderr."""
    lg = logging.getLogger("distributed")
    saved = _quiet_children("distributed")
    own = (list(lg.handlers), lg.propagate)
    for h in own[0]:
        lg.removeHandler(h)
    lg.propagate = False
    handler = OneLine(emit_line, level)
    lg.addHandler(handler)
    try:
        yield handler
    finally:
        lg.removeHandler(handler)
        for h in own[0]:
            lg.addHandler(h)
        lg.propagate = own[1]
        _restore(saved)


def load_dask() -> None:
    """Import Dask distributed now, if installed: importing it configures its loggers' handlers,
    which :func:`to_file` and :func:`dask_lines` must find in place to take them away."""
    try:
        import distributed  # noqa: F401
    except ImportError:          # the Dask path then says what to install (exit 2)
        pass


def _quiet_children(name):
    """Dask configures handlers of their own on some child loggers (``distributed.client``,
    ...), which print to stderr and do not propagate: take them away and let the lines
    propagate to ``name``, where ours waits.  Returns what to restore."""
    saved = []
    for child, lg in list(logging.root.manager.loggerDict.items()):
        if child.startswith(name + ".") and isinstance(lg, logging.Logger):
            saved.append((lg, list(lg.handlers), lg.propagate))
            for h in list(lg.handlers):
                lg.removeHandler(h)
            lg.propagate = True
    return saved


def _restore(saved):
    for lg, handlers, propagate in saved:
        for h in handlers:
            if h not in lg.handlers:
                lg.addHandler(h)
        lg.propagate = propagate


class FileLines(logging.Handler):
    """Appends formatted lines to a file.  Not a :class:`logging.StreamHandler` (as
    :class:`logging.FileHandler` is): a Dask LocalCluster made with ``silence_logs`` sets the
    level of every StreamHandler on the ``distributed`` logger to its own while it runs, which
    silenced the study log (the same handler serves ``selfcon``) for the whole run."""

    def __init__(self, path):
        super().__init__()
        self._file = logging.FileHandler(path, mode="a", encoding="utf-8", delay=False)

    def emit(self, record):
        try:
            self._file.stream.write(self.format(record) + "\n")
            self._file.flush()
        except Exception:       # noqa: BLE001 - logging must never raise
            self.handleError(record)

    def close(self):
        self._file.close()
        super().close()


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
    handler = FileLines(path)
    handler.setFormatter(logging.Formatter(FORMAT, DATEFMT))
    handler.setLevel(level)
    saved = []
    children = _quiet_children("distributed")
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
        _restore(children)
        handler.close()
