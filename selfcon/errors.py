"""Exceptions and exit codes.  Bad input is an exception with a location; a failing
environment (disk, permissions, queue database, scheduler) is another; non-convergence
is not an exception at all (it is a Result with converged=False).

Exit codes of every command (README.md, "Command line"; ``selfcon --help``):
"""
import errno as _errno

#: 0 converged / command succeeded (also: the reader of stdout went away, e.g. ``| head``)
EXIT_OK = 0
#: 1 internal error: a bug in selfcon (SELFCON_DEBUG=1 shows the traceback)
EXIT_INTERNAL = 1
#: 2 bad input: deck, study, option, or a result file that is damaged or not selfcon's
EXIT_INPUT = 2
#: 3 not converged (or a result failed a sanity check): files are still written
EXIT_NOT_CONVERGED = 3
#: 4 the environment failed: disk full, permissions, read-only folder, corrupt queue,
#: lost or unreachable scheduler, worker-version mismatch
EXIT_ENVIRONMENT = 4
#: stopped by Ctrl-C / SIGTERM (128 + SIGINT); a batch reruns to continue
EXIT_INTERRUPTED = 130


class SelfconInputError(ValueError):
    """Bad user input (deck, study, override, command option).  CLI exit code 2.

    ``str(err)`` is one line: ``FILE:LINE: KEY: what is wrong (allowed: ...)``,
    with the parts that are unknown left out.  The parts are attributes too.

    Parameters
    ----------
    message : str
        What is wrong, with the value found.
    file, line, key, allowed : optional
        Where (file path, 1-based line, deck key path) and what would be accepted.

    Examples
    --------
    >>> from selfcon.errors import SelfconInputError
    >>> err = SelfconInputError("must be > 0 nm, got -5", file="wafer.toml", line=12,
    ...                         key="layer[3].thickness")
    >>> print(err)
    wafer.toml:12: layer[3].thickness: must be > 0 nm, got -5
    >>> isinstance(err, ValueError), err.key
    (True, 'layer[3].thickness')
    """

    def __init__(self, message, *, file=None, line=None, key=None, allowed=None):
        self.message = message
        self.file = file
        self.line = line
        self.key = key
        self.allowed = allowed
        super().__init__(self.format())

    def format(self):
        where = ""
        if self.file:
            where = str(self.file)
            if self.line:
                where += f":{self.line}"
            where += ": "
        elif self.line:
            where = f"line {self.line}: "
        key = f"{self.key}: " if self.key else ""
        allowed = f" (allowed: {self.allowed})" if self.allowed else ""
        return f"{where}{key}{self.message}{allowed}"


class DeckError(SelfconInputError):
    """A deck (TOML) or a --set override is invalid.

    Raised by :func:`selfcon.load_deck` and by ``Deck.error(key, message)``, which finds the
    key's line in the deck file.

    Examples
    --------
    >>> import selfcon
    >>> try:
    ...     selfcon.load_deck("inputs/hemt_4K.toml", overrides=["solver.method=newton"])
    ... except selfcon.DeckError as err:
    ...     print(err.line, err.key, "anderson" in str(err))
    None solver.method True
    """


class MaterialError(SelfconInputError):
    """A material name, composition or parameter is invalid or missing."""


class StudyError(SelfconInputError):
    """A study file is invalid."""


class ResultFileError(SelfconInputError):
    """A result file cannot be read (missing, not a selfcon result, newer schema)."""


class UncheckedResultWarning(UserWarning):
    """A result file was read without verifying it: it was written before result files
    carried a checksum (selfcon/output/checksum.py).  The command line prints it as
    ``selfcon: warning: ...``."""


class SelfconEnvironmentError(RuntimeError):
    """The environment failed, not the input and not the code: disk full, no permission,
    a read-only folder, a corrupt queue database, a lost or unreachable scheduler,
    workers running another selfcon.  CLI exit code 4 (:data:`EXIT_ENVIRONMENT`).

    ``str(err)`` is one line saying what failed and where, the system's reason, and
    (``hint``) how to recover when there is something to do:
    ``cannot write out/a.h5: No space left on device (ENOSPC)``.
    ``SelfconEnvironmentError("scheduler tcp://h:8786 lost")`` (message only) works too.
    """

    def __init__(self, message, *, path=None, reason=None, hint=None):
        self.message = message
        self.path = None if path is None else str(path)
        self.reason = reason
        self.hint = hint
        super().__init__(self.format())

    def format(self):
        where = f" {self.path}" if self.path else ""
        reason = f": {self.reason}" if self.reason else ""
        hint = f"; {self.hint}" if self.hint else ""
        return f"{self.message}{where}{reason}{hint}"

    @classmethod
    def from_os_error(cls, exc, action, path=None, hint=None):
        """``action`` (``"cannot write"``) + path + the OSError's reason with its errno name."""
        if path is None:
            path = getattr(exc, "filename", None)
        return cls(action, path=path, reason=os_reason(exc), hint=hint)


def os_reason(exc):
    """An OSError's reason as ``strerror (ENAME)``: ``No space left on device (ENOSPC)``."""
    code = getattr(exc, "errno", None)
    text = getattr(exc, "strerror", None) or str(exc) or type(exc).__name__
    name = _errno.errorcode.get(code) if isinstance(code, int) else None
    return f"{text} ({name})" if name else text
