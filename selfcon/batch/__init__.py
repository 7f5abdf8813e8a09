"""Design studies as queued batch jobs (README.md, "Design studies").

    study.py      study TOML -> Study -> expand() -> one JobSpec (deck text + hash) per job
    queue.py      the SQLite job queue in the output folder (coordinator is the only writer)
    executors.py  local process pool (default) and Dask distributed
    worker.py     the pure job function run by the executors (deck text -> Result)
    runner.py     the coordinator: sync queue, feed the executor, write jobs/<id>.h5 and the tables
    commands.py   `selfcon batch` and `selfcon queue`

Python use::

    from selfcon.batch import run_study
    code, counts, out_dir = run_study("inputs/studies/spacer_doping.toml", workers=2)

Stage 6 (beside ``selfcon.design``). May import: every lower stage, through the front
functions of :mod:`selfcon.api` for solving; never ``selfcon.design`` or the command line.
"""


def run_study(study_file, **options):
    """Run or resume a study; see :func:`selfcon.batch.runner.run_study`."""
    from selfcon.batch.runner import run_study as _run
    return _run(study_file, **options)


def load_study(path):
    from selfcon.batch.study import load_study as _load
    return _load(path)
