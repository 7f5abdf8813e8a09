"""Exit codes that tell a script what happened (README.md, "Command line"): 0 ok, 1 a bug,
2 bad input, 3 not converged, 4 the environment failed, 130 interrupted; a closed stdout
ends quietly with 0.  Expected codes and texts come from that table (the contract)."""
import errno
import os
import re
import subprocess
import sys
from pathlib import Path

import pytest

from selfcon import cli
from selfcon.errors import (EXIT_ENVIRONMENT, EXIT_INPUT, EXIT_INTERNAL, EXIT_NOT_CONVERGED, EXIT_OK,
                            SelfconEnvironmentError)

ROOT = Path(__file__).resolve().parent.parent


def test_codes_are_the_documented_ones():
    # README's table (the user contract) fixes these numbers
    assert (EXIT_OK, EXIT_INTERNAL, EXIT_INPUT, EXIT_NOT_CONVERGED, EXIT_ENVIRONMENT) == (0, 1, 2, 3, 4)


def test_help_and_readme_list_every_code(capsys):
    with pytest.raises(SystemExit):
        cli.build_parser().parse_args(["--help"])
    out = capsys.readouterr().out
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    table = readme[readme.index("**Exit codes**"):]
    for code, meaning in cli.EXIT_CODES:
        assert re.search(rf"^\s+{code}\s+{re.escape(meaning[:30])}", out, re.M), (code, out)
        assert re.search(rf"^\| {code} \|", table, re.M), code


def test_environment_failure_is_one_line_with_reason():
    e = SelfconEnvironmentError.from_os_error(OSError(errno.ENOSPC, "No space left on device"), "cannot write",
                                         "out/a.h5")
    assert str(e) == "cannot write out/a.h5: No space left on device (ENOSPC)"


@pytest.mark.parametrize("exc, code", [
    (OSError(errno.ENOSPC, "No space left on device", "x.h5"), EXIT_ENVIRONMENT),
    (PermissionError(errno.EACCES, "Permission denied", "x.h5"), EXIT_ENVIRONMENT),
    (SelfconEnvironmentError("cannot reach the Dask scheduler", path="tcp://h:1", reason="timed out"), EXIT_ENVIRONMENT),
    (RuntimeError("a bug"), EXIT_INTERNAL),
])
def test_unexpected_os_errors_are_environment_bugs_are_1(run_cli, monkeypatch, exc, code):
    def boom(args):
        raise exc
    monkeypatch.setattr(cli, "cmd_materials", boom)
    got, out, err = run_cli("materials")
    assert got == code, err
    assert "Traceback" not in err and len(err.strip().splitlines()) <= 2
    if code == EXIT_ENVIRONMENT:
        assert err.startswith("selfcon: error: ") and len(err.strip().splitlines()) == 1
        assert "x.h5" in err or "tcp://h:1" in err


def test_broken_pipe_exits_0_quietly(result_file):
    """`selfcon show r.h5 | head -1`: the reader closes the pipe early."""
    path = result_file
    env = dict(os.environ)
    env.pop("SELFCON_DEBUG", None)
    proc = subprocess.Popen([sys.executable, "-m", "selfcon", "show", str(path)], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, env=env)
    proc.stdout.readline()
    proc.stdout.close()                       # like `head -1` exiting
    err = proc.stderr.read().decode()
    assert proc.wait(timeout=120) == 0, err
    assert err == ""
