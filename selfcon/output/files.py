"""Output files: the rules every command's outputs obey, and the one atomic writer.

Rules (README.md, "Output files"), checked by :func:`check_outputs` before any work starts:

* an output must not exist, unless ``--force`` is given;
* an output is never an input of the same command, even with ``--force``;
* two outputs of one command are never the same file;
* a file output named like a folder (``-o results/``, an existing folder) is refused
  with its own message;
* a result file ends in ``.h5`` or ``.hdf5``, a figure in ``.png``, ``.svg`` or ``.pdf``;
  ``--force`` does not lift that (it is how ``-o deck.toml --force`` would destroy a deck);
* the folder of an output exists (else bad input, exit 2) and is writable (else the
  environment failed, exit 4).

Writing (:func:`atomic_write`): a temporary file beside the target, created with the
user's umask like any other file, filled, fsync'ed, then renamed over the target.  A
failure (a full disk, a lost permission) removes the temporary file, leaves an existing
target as it was, and is a :class:`selfcon.errors.SelfconEnvironmentError` saying what
and where (exit 4).
"""
from __future__ import annotations

import os
import secrets
from dataclasses import dataclass
from pathlib import Path

from selfcon.errors import SelfconEnvironmentError, SelfconInputError

RESULT_SUFFIXES = (".h5", ".hdf5")
FIGURE_SUFFIXES = (".png", ".svg", ".pdf")

#: what each kind of output is called in messages
_KIND_NAME = {"result": "result file", "figure": "figure", "folder": "folder", "file": "file"}


@dataclass(frozen=True)
class Output:
    """One output of a command.

    ``kind``: "result" (HDF5, .h5/.hdf5), "figure" (.png/.svg/.pdf), "file" (any name) or
    "folder" (a folder the command writes ``files`` into; it may exist, the files may not).
    ``option``: the option naming it (``-o``, ``--plot``, ``--csv``), for messages.
    ``raw``: the text the user typed (a trailing ``/`` marks a folder), default ``str(path)``.
    """

    path: Path
    kind: str
    option: str
    raw: str | None = None
    files: tuple = ()

    def targets(self) -> list[Path]:
        """The files this output writes."""
        if self.kind == "folder":
            return [Path(self.path) / f for f in self.files]
        return [Path(self.path)]


def output(path, kind, option, files=()) -> Output:
    """An :class:`Output` from the text the user gave (``str`` or path)."""
    raw = os.fspath(path)
    return Output(Path(raw), kind, option, raw, tuple(files))


def same_file(a, b) -> bool:
    """True when ``a`` and ``b`` name the same file (links and ``..`` resolved), existing or not."""
    a, b = Path(a), Path(b)
    try:
        if a.exists() and b.exists():
            return os.path.samefile(a, b)
    except OSError:
        pass
    return os.path.realpath(a) == os.path.realpath(b)


def _folder_of(path: Path) -> Path:
    return path.parent if str(path.parent) else Path(".")


def _names_folder(o: Output) -> bool:
    raw = o.raw if o.raw is not None else str(o.path)
    return raw.endswith(("/", os.sep)) or Path(o.path).is_dir()


def check_outputs(outputs, inputs=(), *, force=False, error=SelfconInputError) -> None:
    """Refuse, before any work, outputs that would destroy something or cannot be written.

    ``outputs``: :class:`Output` records (None entries are skipped); ``inputs``: the files
    the command reads, as paths (input labels may be given as ``(path, label)`` pairs).
    Bad paths raise ``error`` (a SelfconInputError subclass, exit 2); an output folder that
    cannot be written raises SelfconEnvironmentError (exit 4).
    """
    outputs = [o for o in outputs if o is not None]
    labelled = []
    for item in inputs:
        if item is None:
            continue
        path, label = item if isinstance(item, tuple) else (item, "an input")
        labelled.append((Path(path), label))
    # 1. an output is never an input, --force or not
    for o in outputs:
        for target in o.targets():
            for path, label in labelled:
                if same_file(target, path):
                    raise error(f"is {label} of this command; an output never replaces an input, "
                                f"even with --force: give {o.option} another name", file=str(target),
                                key=o.option)
    # 2. no two outputs on one file
    seen = []
    for o in outputs:
        for target in o.targets():
            for other_option, other in seen:
                if same_file(target, other):
                    raise error(f"{o.option} and {other_option} name the same file; give each output "
                                "its own path", file=str(target), key=o.option)
            seen.append((o.option, target))
    for o in outputs:
        path = Path(o.path)
        # 3. the kind of path
        if o.kind == "folder":
            if path.exists() and not path.is_dir():
                raise error("is a file; this option wants a folder (created if missing)", file=str(path),
                            key=o.option)
        else:
            if _names_folder(o):
                example = {"result": "NAME.h5", "figure": "NAME.png"}.get(o.kind, "NAME")
                raise error(f"is a folder; {o.option} wants a {_KIND_NAME[o.kind]} name, e.g. "
                            f"{(path / example).as_posix()}", file=o.raw or str(path), key=o.option)
            if o.kind == "result" and path.suffix.lower() not in RESULT_SUFFIXES:
                raise error("a result file must end in .h5 or .hdf5 (--force does not change this)",
                            file=str(path), key=o.option, allowed=", ".join(RESULT_SUFFIXES))
            if o.kind == "figure" and path.suffix.lower() not in FIGURE_SUFFIXES:
                raise error(f"unknown figure format {path.suffix or '(none)'!r}", file=str(path), key=o.option,
                            allowed=", ".join(FIGURE_SUFFIXES))
        # 4. existing files need --force
        if not force:
            for target in o.targets():
                if target.exists() or target.is_symlink():
                    raise error("exists; pass --force to overwrite it", file=str(target), key=o.option)
        # 5. the folder: exists (a result or figure folder is never created for you) and writable
        if o.kind == "folder":
            folder = path
            while not folder.exists() and folder != _folder_of(folder):
                folder = _folder_of(folder)        # created with parents: the nearest existing one
            if not folder.is_dir():
                raise error("is inside a file, not a folder", file=str(path), key=o.option)
        else:
            folder = _folder_of(path)
            if not folder.is_dir():
                raise error("output folder does not exist" if not folder.exists()
                            else "output folder is a file", file=str(path), key=o.option)
        check_writable(folder)


def check_writable(folder) -> None:
    """SelfconEnvironmentError (exit 4) unless new files can be created in ``folder``."""
    folder = Path(folder)
    if not os.access(folder, os.W_OK | os.X_OK):
        import errno
        reason = os.strerror(errno.EACCES) + " (EACCES)"
        try:
            if os.statvfs(folder).f_flag & os.ST_RDONLY:
                reason = os.strerror(errno.EROFS) + " (EROFS)"
        except (OSError, AttributeError):
            pass
        raise SelfconEnvironmentError("cannot write into folder", path=folder, reason=reason)


# --------------------------------------------------------------------------- writing

def _create_temp(folder: Path, name: str) -> Path:
    """A new empty file ``.NAME.<random>.tmp`` in ``folder``, mode 0666 less the umask."""
    for _ in range(100):
        tmp = folder / f".{name}.{secrets.token_hex(4)}.tmp"
        try:
            fd = os.open(tmp, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
        except FileExistsError:
            continue
        os.close(fd)
        return tmp
    raise FileExistsError(f"no free temporary name in {folder}")


def _fsync(path) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


def atomic_write(path, fill, *, force: bool = False, error=SelfconInputError) -> None:
    """Create ``path`` atomically: ``fill(tmp)`` writes a temporary file in the same folder,
    which is fsync'ed and renamed over ``path``; on any failure it is removed and an
    existing ``path`` is left as it was.  Every selfcon output file is written this way.

    ``error`` is the SelfconInputError subclass raised for a bad or existing path (exit 2);
    an operating-system failure while writing (disk full, permission, read-only file
    system) is a SelfconEnvironmentError naming the path (exit 4).
    """
    path = Path(path)
    folder = _folder_of(path)
    if not folder.is_dir():
        raise error("output folder does not exist", file=str(path))
    if path.is_dir():
        raise error("output path is a folder", file=str(path))
    if path.exists() and not force:
        raise error("output file exists; pass --force (or force=True) to overwrite it", file=str(path))
    tmp = None
    try:
        tmp = _create_temp(folder, path.name)
        fill(str(tmp))
        _fsync(tmp)
        os.replace(tmp, path)
        tmp = None
    except OSError as exc:
        raise SelfconEnvironmentError.from_os_error(exc, "cannot write", path) from exc
    finally:
        if tmp is not None:
            try:
                os.unlink(tmp)
            except OSError:
                pass
    try:  # make the rename itself durable; not possible everywhere
        _fsync(folder)
    except OSError:
        pass


def save_figure(fig, path, *, force: bool = True, error=SelfconInputError, **savefig) -> Path:
    """``fig.savefig`` to ``path`` atomically; the format comes from the suffix."""
    path = Path(path)
    fmt = path.suffix.lower().lstrip(".")
    if "." + fmt not in FIGURE_SUFFIXES:
        raise error(f"unknown figure format {path.suffix or '(none)'!r}", file=str(path),
                    allowed=", ".join(FIGURE_SUFFIXES))
    atomic_write(path, lambda tmp: fig.savefig(tmp, format=fmt, **savefig), force=force, error=error)
    return path
