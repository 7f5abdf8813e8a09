"""The cluster path of `selfcon batch`: exit code 4, Dask backlog, versions, scheduler file, job scripts."""
import pytest

from selfcon import cli
from selfcon.errors import EXIT_ENVIRONMENT, SelfconEnvironmentError


def test_environment_failure_is_exit_4_with_one_line(monkeypatch, capsys):
    # exit code 4 is the contract of the reliability issue: environment failure, not input (2), not a bug (1)
    def boom(args):
        raise SelfconEnvironmentError("scheduler tcp://127.0.0.1:9 lost\nsecond line")
    parser = cli.build_parser()
    monkeypatch.setattr(cli, "build_parser", lambda: parser)
    parser._subparsers._group_actions[0].choices["materials"].set_defaults(func=boom)
    assert EXIT_ENVIRONMENT == 4
    assert cli.main(["materials"]) == 4
    err = capsys.readouterr().err
    assert err.strip() == "selfcon: error: scheduler tcp://127.0.0.1:9 lost second line"
    assert "Traceback" not in err
