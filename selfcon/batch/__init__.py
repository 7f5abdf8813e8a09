"""Design studies as queued batch jobs (README.md, "Design studies").

    study.py      study TOML -> Study -> expand() -> one JobSpec (deck text + hash) per job
    queue.py      the SQLite job queue in the output folder (coordinator is the only writer)
    executors.py  local worker pool (default) and Dask distributed (LocalCluster, a scheduler, dask-jobqueue)
    worker.py     the pure job function run by the executors (deck text -> result file image + figures)
    summary.py    the table's summary figures of one Result (computed in the worker)
    runner.py     the coordinator: sync queue, feed the executor, write jobs/<id>.h5 and the tables
    logs.py       --log FILE: the batch loggers (and Dask's) to a file
    commands.py   `selfcon batch` and `selfcon queue`

Python use::

    from selfcon.batch import run_study
    code, counts, out_dir = run_study("inputs/studies/spacer_doping.toml", workers=2)

(see :func:`run_study` and :func:`load_study` for the details).

Stage 6 (beside ``selfcon.design``). May import: every lower stage, through the front
functions of :mod:`selfcon.api` for solving; never ``selfcon.design`` or the command line.
"""
from __future__ import annotations

import os
from pathlib import Path
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from selfcon.batch.study import Study


def run_study(study_file: str | os.PathLike, **options: Any) -> tuple[int, dict[str, int], Path]:
    """Run a study, or resume it: jobs already done in its output folder are not solved again.

    Parameters
    ----------
    study_file : str or path-like
        The study TOML (README.md, "Design studies").
    **options
        ``workers`` (default: one per core, at most one per job), ``out`` (output folder,
        default beside the study file), ``scheduler`` (``"local"`` or a Dask address),
        ``retries``, ``quiet``, ``progress``, ``memory_limit``; see
        :func:`selfcon.batch.runner.run_study`.

    Returns
    -------
    exit_code : int
        0 every job done, 3 some not converged or failed, 130 interrupted (rerun to continue).
    counts : dict
        Jobs per status (``done``, ``not_converged``, ``failed``, ``queued``, ``running``, ...).
    out_dir : pathlib.Path
        The folder holding ``queue.sqlite``, ``jobs/<id>.h5`` and ``table.csv``/``table.h5``.

    Raises
    ------
    StudyError
        A bad study file (exit 2 in the command line).

    Examples
    --------
    The spacer x doping map of the 4 K wafer, 24 solves on two worker processes:

    >>> from selfcon.batch import run_study
    >>> code, counts, out = run_study("inputs/studies/spacer_doping.toml", workers=2)  # doctest: +SKIP
    >>> code, counts["done"]                                                          # doctest: +SKIP
    (0, 24)
    """
    from selfcon.batch.runner import run_study as _run
    return _run(study_file, **options)


def load_study(path: str | os.PathLike) -> Study:
    """Read and check a study file (its base deck is read only when the study is expanded).

    Parameters
    ----------
    path : str or path-like
        The study TOML.

    Returns
    -------
    Study
        ``mode`` (grid, zip or sample), ``vary`` (one entry per varied deck path),
        ``fixed`` overrides, ``deck_file`` and the continuation settings;
        :func:`selfcon.batch.study.expand` turns it into one job per deck.

    Raises
    ------
    StudyError
        Bad TOML, an unknown key or an invalid value, with the file and key.

    Examples
    --------
    >>> from selfcon.batch import load_study
    >>> from selfcon.batch.study import expand
    >>> study = load_study("inputs/studies/spacer_doping.toml")
    >>> study.mode, study.paths
    ('grid', ['layer.spacer.thickness', 'layer.doping.sheet_donors'])
    >>> len(expand(study))         # 4 spacers x 6 doping levels
    24
    """
    from selfcon.batch.study import load_study as _load
    return _load(path)
