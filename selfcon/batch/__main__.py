"""`python -m selfcon.batch batch|queue ...`: the batch commands on their own (same as `selfcon batch`)."""
import argparse
import sys

from selfcon.errors import EXIT_ENVIRONMENT, SelfconEnvironmentError, SelfconInputError
from selfcon.batch.commands import register


def main(argv=None):
    parser = argparse.ArgumentParser(prog="python -m selfcon.batch")
    sub = parser.add_subparsers(dest="command", required=True)
    register(sub)
    args = parser.parse_args(argv)
    try:
        return args.func(args)
    except SelfconInputError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 2
    except SelfconEnvironmentError as exc:
        print(f"error: {exc}", file=sys.stderr)
        return EXIT_ENVIRONMENT


if __name__ == "__main__":
    sys.exit(main())
