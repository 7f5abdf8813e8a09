"""Exceptions.  Bad input is an exception with a location; non-convergence is not
an exception at all (it is a Result with converged=False)."""


class SelfconInputError(ValueError):
    """Bad user input (deck, study, override, command option).  CLI exit code 2.

    ``str(err)`` is one line: ``FILE:LINE: KEY: what is wrong (allowed: ...)``,
    with the parts that are unknown left out.
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
    """A deck (TOML) or a --set override is invalid."""


class MaterialError(SelfconInputError):
    """A material name, composition or parameter is invalid or missing."""


class StudyError(SelfconInputError):
    """A study file is invalid."""


class ResultFileError(SelfconInputError):
    """A result file cannot be read (missing, not a selfcon result, newer schema)."""


#: exit code of an environment or file-system failure (lost or unreachable scheduler,
#: worker-version mismatch, disk full, ...): not the user's input, not a bug
EXIT_ENVIRONMENT = 4


class SelfconEnvironmentError(RuntimeError):
    """The environment failed, not the input and not the code: a lost or unreachable
    scheduler, workers running another selfcon, a full disk.  CLI exit code 4.

    ``str(err)`` is one line saying what failed and where.
    """
