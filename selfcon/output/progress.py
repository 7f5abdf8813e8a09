"""Progress of long work, shown on stderr: the one display every command uses.

``selfcon run`` shows the iterations of one solve, ``selfcon batch`` the jobs of a study;
both go through :class:`ProgressDisplay`, which knows the three ways to show progress:

* ``"rich"``: a live bar (rich) on a terminal;
* ``"plain"``: one line per step, for pipes, logs and CI (no control codes);
* ``"off"``: nothing (``--quiet``).

:func:`progress_mode` picks one from ``--quiet`` and whether stderr is a terminal.  The
callers only say what the steps are: a fraction done and a short text, and optionally
the line a plain log should get.
"""
from __future__ import annotations

import sys

__all__ = ["ProgressDisplay", "progress_mode"]


def progress_mode(quiet: bool = False, stream=None) -> str:
    """``"off"`` when quiet, ``"rich"`` when ``stream`` (default stderr) is a terminal,
    else ``"plain"``."""
    if quiet:
        return "off"
    stream = sys.stderr if stream is None else stream
    return "rich" if getattr(stream, "isatty", lambda: False)() else "plain"


class ProgressDisplay:
    """A progress bar on a terminal, plain lines elsewhere, or nothing.

    ``counted``: the steps are countable items (jobs): the bar shows "done/total" and a
    time estimate; otherwise (iterations towards a tolerance) a spinner, ``label`` and the
    bar, with the text of the last step beside it.  ``transient``: the bar disappears when
    done.  Use as a context manager, or call :meth:`start` and :meth:`stop`.
    """

    def __init__(self, mode: str = "plain", *, label: str = "", counted: bool = False,
                 transient: bool = False, stream=None):
        if mode not in ("rich", "plain", "off"):
            raise ValueError(f"progress mode must be rich, plain or off, not {mode!r}")
        self.mode = mode
        self.label = label
        self.counted = counted
        self.transient = transient
        self.stream = stream
        self._bar = None
        self._task = None
        if mode == "rich":
            try:
                self._bar = self._make_bar()
            except Exception:            # no usable terminal after all: fall back to lines
                self.mode = "plain"

    @property
    def wants_lines(self) -> bool:
        """True when every step should be reported as a line of its own (plain mode)."""
        return self.mode == "plain"

    def _make_bar(self):
        from rich.console import Console
        from rich.progress import (BarColumn, MofNCompleteColumn, Progress, SpinnerColumn, TextColumn,
                                   TimeRemainingColumn)
        console = Console(file=self.stream or sys.stderr, highlight=False)
        if self.counted:
            columns = (TextColumn("{task.description}"), BarColumn(), MofNCompleteColumn(),
                       TextColumn("ETA"), TimeRemainingColumn())
        else:
            columns = (SpinnerColumn(), TextColumn(self.label), BarColumn(), TextColumn("{task.description}"))
        return Progress(*columns, console=console, transient=self.transient)

    def _print(self, line: str) -> None:
        print(line, file=self.stream or sys.stderr, flush=True)

    def start(self, total: float = 1.0, text: str = "", *, completed: float = 0.0,
              line: str | None = None) -> "ProgressDisplay":
        """Begin: ``total`` steps (1.0 for a fraction), ``completed`` of them done already;
        ``text`` beside the bar; ``line`` is printed in plain mode."""
        if self._bar is not None:
            self._bar.start()
            self._task = self._bar.add_task(text, total=total, completed=completed)
        elif self.mode == "plain" and line is not None:
            self._print(line)
        return self

    def update(self, completed: float, text: str | None = None, *, line: str | None = None) -> None:
        """One step: ``completed`` of the total done, ``text`` beside the bar; ``line`` is
        printed in plain mode."""
        if self._bar is not None and self._task is not None:
            if text is None:
                self._bar.update(self._task, completed=completed)
            else:
                self._bar.update(self._task, completed=completed, description=text)
        elif self.mode == "plain" and line is not None:
            self._print(line)

    def note(self, line: str) -> None:
        """A message that is not a step (shown above the bar, or as a line)."""
        if self._bar is not None:
            self._bar.console.print(line)
        elif self.mode == "plain":
            self._print(line)

    def stop(self) -> None:
        if self._bar is not None and self._task is not None:
            self._bar.stop()
            self._task = None

    def __enter__(self):
        return self.start()

    def __exit__(self, *exc):
        self.stop()
        return False
