"""The options every tool that rewrites a committed file takes (deck_reference.py,
file_layout.py, readme_outputs.py, figure_layouts.py): ``--check`` compares and writes
nothing (exit 1 on a difference), ``--help`` prints the tool's first docstring line; an
unknown option is exit 2.  Nothing is written before the options are parsed."""
import argparse


def parse_args(argv, doc: str):
    ap = argparse.ArgumentParser(description=doc.splitlines()[0])
    ap.add_argument("--check", action="store_true",
                    help="compare with what is committed and write nothing; exit 1 on a difference")
    return ap.parse_args(argv)
