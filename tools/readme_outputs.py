"""The command outputs README.md quotes, produced by running the commands.

    python tools/readme_outputs.py            # rerun every quoted command, rewrite its output
    python tools/readme_outputs.py --check    # rerun and compare; exit 1 naming what differs

A quote is a fenced block marked ``console``: each line starting with ``$ `` is a command
(a trailing backslash continues it on the next line) and the lines up to the next command
are what it prints (stdout, then stderr). The commands run in-process (``selfcon.cli.main``)
in a temporary folder holding a copy of ``inputs/``, so they can write their files there.
Outputs are compared after replacing the patterns of ``MASKS`` (wall times, dates,
versions) and nothing else; tests/test_readme_outputs.py runs the same comparison.
"""
from __future__ import annotations

import contextlib
import io
import os
import re
import shlex
import shutil
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
README = ROOT / "README.md"
#: (pattern, replacement): the only differences a quoted output may show
MASKS = (
    (re.compile(r"\b\d+(?:\.\d+)? s\b"), "<seconds> s"),                          # wall times
    (re.compile(r"\b\d{4}-\d\d-\d\d(?:T\d\d:\d\d:\d\dZ)?"), "<date>"),             # dates, timestamps
    (re.compile(r"\bselfcon \d+\.\d+(?:\.\d+)?\S*"), "selfcon <version>"),         # versions
)
BLOCK = re.compile(r"```console\n(.*?)```", re.S)


def mask(text: str) -> str:
    for pattern, replacement in MASKS:
        text = pattern.sub(replacement, text)
    return "\n".join(line.rstrip() for line in text.strip("\n").splitlines())


def quotes(text: str) -> list[tuple[int, str, str, str]]:
    """(line number, command, its lines as written, quoted output) of every quoted command."""
    out = []
    for m in BLOCK.finditer(text):
        first = text.count("\n", 0, m.start(1)) + 1
        lines = m.group(1).splitlines()
        i = 0
        while i < len(lines):
            if not lines[i].startswith("$ "):
                raise ValueError(f"README.md:{first + i}: a console block starts with '$ ' commands")
            start, cmd, raw = first + i, lines[i][2:], [lines[i]]
            while cmd.endswith("\\"):
                i += 1
                cmd = cmd[:-1].rstrip() + " " + lines[i].strip()
                raw.append(lines[i])
            i += 1
            body = []
            while i < len(lines) and not lines[i].startswith("$ "):
                body.append(lines[i])
                i += 1
            out.append((start, cmd, "\n".join(raw), "\n".join(body)))
    return out


def run(command: str, folder: Path) -> str:
    """What ``command`` (``selfcon ...``) prints, stdout then stderr, run in ``folder``."""
    from selfcon.cli import main
    argv = shlex.split(command)
    if argv[0] != "selfcon":
        raise ValueError(f"only selfcon commands are quoted, not {argv[0]!r}")
    out, err = io.StringIO(), io.StringIO()
    here = os.getcwd()
    os.chdir(folder)
    try:
        with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
            main(argv[1:])
    finally:
        os.chdir(here)
    return out.getvalue() + err.getvalue()


def workspace() -> Path:
    folder = Path(tempfile.mkdtemp(prefix="selfcon-readme-"))
    shutil.copytree(ROOT / "inputs", folder / "inputs")
    return folder


def main(argv) -> int:
    from regen_options import parse_args    # tools/regen_options.py (run as a script: tools/ is on sys.path)
    check = parse_args(argv, __doc__).check
    text = README.read_text(encoding="utf-8")
    folder = workspace()
    bad, new = 0, text
    try:
        for line, cmd, raw, quoted in quotes(text):
            got = run(cmd, folder).rstrip("\n")
            if mask(got) == mask(quoted):
                continue
            if check:
                print(f"README.md:{line}: `{cmd}` prints something else now:\n{got}\n")
                bad += 1
            else:
                new = new.replace(f"{raw}\n{quoted}\n" if quoted else f"{raw}\n", f"{raw}\n{got}\n", 1)
                print(f"README.md:{line}: updated `{cmd}`")
    finally:
        shutil.rmtree(folder, ignore_errors=True)
    if not check and new != text:
        README.write_text(new, encoding="utf-8")
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
