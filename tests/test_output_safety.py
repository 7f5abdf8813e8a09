"""No file is ever overwritten unasked, and a failing environment is exit 4 (README.md, "Output files"
and "Command line").  Every case asserts the exit code, the message, and that nothing that
existed before changed (byte for byte) and nothing new appeared.

The expected behaviour is the rule list of README "Output files" (the contract); the
environment failures are injected as OSError(ENOSPC) / OSError(EACCES) at the write layer
(selfcon.output.files), plus one real read-only folder (skipped as root, who may write anyway).
"""
import errno
import os
import sqlite3
import stat
import textwrap
from pathlib import Path

import pytest

from selfcon import api, cli
from selfcon.errors import EXIT_ENVIRONMENT, EXIT_INPUT, EXIT_OK, SelfconEnvironmentError
from selfcon.output import files
from selfcon.output.result import load_result, save_result


def snapshot(folder):
    """Every file under ``folder`` -> its bytes (hidden temporary files included)."""
    out = {}
    for p in sorted(Path(folder).rglob("*")):
        if p.is_file():
            out[str(p.relative_to(folder))] = p.read_bytes()
    return out


@pytest.fixture
def fake_solve(monkeypatch, make_result):
    """`run` without the physics: these tests are about files (api.solve returns a hand-made Result)."""
    calls = []

    def solve(deck, **kw):
        calls.append(deck)
        return make_result()
    monkeypatch.setattr(api, "solve", solve)
    return calls


def assert_refused(res, code, *words):
    assert res.code == code, res.err
    lines = res.err.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("selfcon: error: "), res.err
    assert "Traceback" not in res.err
    for w in words:
        assert w in lines[0], (w, lines[0])


# --------------------------------------------------------------------------- run

def test_run_output_equal_to_plot_is_refused(run_cli, good_deck, fake_solve):
    d = good_deck.parent
    before = snapshot(d)
    res = run_cli("run", good_deck, "-o", d / "x.png", "--plot", d / "x.png")
    assert_refused(res, EXIT_INPUT, "x.png")
    assert snapshot(d) == before and not fake_solve


def test_two_outputs_same_file_even_with_force(run_cli, good_deck, fake_solve):
    d = good_deck.parent
    (d / "same.h5").write_bytes(b"precious")
    before = snapshot(d)
    # a figure can never be .h5, so two outputs on one file show as a bad figure name or as the
    # duplicate; either way nothing is written
    res = run_cli("run", good_deck, "-o", d / "same.h5", "--plot", d / "sub" / ".." / "same.h5", "--force")
    assert_refused(res, EXIT_INPUT, "same")
    assert "same file" in res.err
    assert snapshot(d) == before and not fake_solve


def test_run_output_onto_the_deck_refused_even_with_force(run_cli, good_deck, fake_solve):
    d = good_deck.parent
    before = snapshot(d)
    res = run_cli("run", good_deck, "-o", good_deck, "--force")
    assert_refused(res, EXIT_INPUT, str(good_deck), "input", "even with --force")
    assert snapshot(d) == before and not fake_solve


def test_run_output_onto_the_deck_through_a_link(run_cli, good_deck, fake_solve):
    d = good_deck.parent
    (d / "alias.h5").symlink_to(good_deck)
    before = snapshot(d)
    res = run_cli("run", good_deck, "-o", d / "alias.h5", "--force")
    assert_refused(res, EXIT_INPUT, "input")
    assert snapshot(d) == before and not fake_solve


@pytest.mark.parametrize("name", ["out.toml", "out.png", "out", "out.h5.txt"])
def test_result_needs_h5_suffix_force_or_not(run_cli, good_deck, fake_solve, name):
    d = good_deck.parent
    before = snapshot(d)
    for extra in ((), ("--force",)):
        res = run_cli("run", good_deck, "-o", d / name, *extra)
        assert_refused(res, EXIT_INPUT, ".h5 or .hdf5")
    assert snapshot(d) == before and not fake_solve


@pytest.mark.parametrize("name", ["r.h5", "r.hdf5", "R.HDF5"])
def test_result_suffixes_accepted(run_cli, good_deck, fake_solve, name):
    res = run_cli("run", good_deck, "-o", good_deck.parent / name, "--quiet")
    assert res.code == EXIT_OK, res.err
    assert load_result(good_deck.parent / name).converged


def test_existing_folder_as_output_has_its_own_message(run_cli, good_deck, fake_solve):
    d = good_deck.parent
    (d / "results").mkdir()
    before = snapshot(d)
    for arg in (f"{d / 'results'}/", str(d / "results"), str(d / "results.h5") + "/"):
        res = run_cli("run", good_deck, "-o", arg, "--force")
        assert_refused(res, EXIT_INPUT, "is a folder", "wants a result file name")
        assert "file exists" not in res.err
    assert snapshot(d) == before and not fake_solve


def test_existing_result_needs_force(run_cli, good_deck, fake_solve, make_result):
    d = good_deck.parent
    save_result(make_result(converged=False), d / "r.h5")
    before = snapshot(d)
    res = run_cli("run", good_deck, "-o", d / "r.h5")
    assert_refused(res, EXIT_INPUT, "exists; pass --force")
    assert snapshot(d) == before and not fake_solve
    assert run_cli("run", good_deck, "-o", d / "r.h5", "--force", "--quiet").code == EXIT_OK
    assert load_result(d / "r.h5").converged


def test_default_output_beside_the_deck_needs_force(run_cli, good_deck, fake_solve):
    d = good_deck.parent
    (d / "good.h5").write_bytes(b"an older result")
    before = snapshot(d)
    res = run_cli("run", good_deck)
    assert_refused(res, EXIT_INPUT, "good.h5", "default: beside the deck", "--force")
    assert snapshot(d) == before and not fake_solve


def test_existing_figure_needs_force(run_cli, good_deck, fake_solve):
    d = good_deck.parent
    (d / "bands.png").write_bytes(b"an older figure")
    before = snapshot(d)
    res = run_cli("run", good_deck, "-o", d / "r.h5", "--plot", d / "bands.png")
    assert_refused(res, EXIT_INPUT, "bands.png", "--plot", "--force")
    assert snapshot(d) == before and not fake_solve        # checked before the solve: r.h5 not written
    assert run_cli("run", good_deck, "-o", d / "r.h5", "--plot", d / "bands.png", "--force",
                   "--quiet").code == EXIT_OK
    assert (d / "bands.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_missing_output_folder(run_cli, good_deck, fake_solve):
    d = good_deck.parent
    before = snapshot(d)
    res = run_cli("run", good_deck, "-o", d / "nowhere" / "r.h5")
    assert_refused(res, EXIT_INPUT, "output folder does not exist")
    assert snapshot(d) == before and not fake_solve


# --------------------------------------------------------------------------- plot, export

def test_plot_existing_figure_needs_force(run_cli, result_file):
    d = result_file.parent
    (d / "f.svg").write_text("<svg>older</svg>")
    before = snapshot(d)
    res = run_cli("plot", result_file, "-o", d / "f.svg")
    assert_refused(res, EXIT_INPUT, "f.svg", "exists; pass --force")
    assert snapshot(d) == before
    assert run_cli("plot", result_file, "-o", d / "f.svg", "--force", "--quiet").code == EXIT_OK
    assert (d / "f.svg").read_text() != "<svg>older</svg>"


def test_plot_onto_its_input_refused(run_cli, result_file):
    d = result_file.parent
    alias = d / "alias.png"
    alias.symlink_to(result_file)
    before = snapshot(d)
    res = run_cli("plot", result_file, "-o", alias, "--force")
    assert_refused(res, EXIT_INPUT, "input")
    assert snapshot(d) == before


def test_export_existing_tables_need_force(run_cli, result_file):
    d = result_file.parent
    out = d / "csv"
    out.mkdir()
    (out / "subbands.csv").write_text("mine")
    before = snapshot(d)
    res = run_cli("export", result_file, "--csv", out)
    assert_refused(res, EXIT_INPUT, "subbands.csv", "--force")
    assert snapshot(d) == before
    assert run_cli("export", result_file, "--csv", out, "--force").code == EXIT_OK
    assert (out / "subbands.csv").read_text().startswith("band,index")


def test_export_into_a_file_refused(run_cli, result_file):
    d = result_file.parent
    (d / "notes.txt").write_text("keep")
    before = snapshot(d)
    res = run_cli("export", result_file, "--csv", d / "notes.txt", "--force")
    assert_refused(res, EXIT_INPUT, "is a file")
    assert snapshot(d) == before


def test_export_never_overwrites_its_input(run_cli, result_file):
    d = result_file.parent / "tables"
    d.mkdir()
    named = d / "profile.csv"                 # an HDF5 result that happens to be called profile.csv
    named.write_bytes(result_file.read_bytes())
    before = snapshot(result_file.parent)
    res = run_cli("export", named, "--csv", d, "--force")
    assert_refused(res, EXIT_INPUT, "input", "even with --force")
    assert snapshot(result_file.parent) == before


# --------------------------------------------------------------------------- design commands

def test_sweep_and_tune_never_write_onto_the_deck(run_cli, good_deck):
    d = good_deck.parent
    before = snapshot(d)
    res = run_cli("sweep-bias", good_deck, "--from", "0", "--to", "0.1", "--step", "0.1", "-o", good_deck,
                  "--force")
    assert_refused(res, EXIT_INPUT, "input")
    res = run_cli("tune", good_deck, "--vary", "layer.barrier.thickness", "--target", "ns=3e11", "-o",
                  good_deck, "--force")
    assert_refused(res, EXIT_INPUT, "input")
    res = run_cli("sweep-bias", good_deck, "--from", "0", "--to", "0.1", "--step", "0.1", "-o", d / "s.h5",
                  "--plot", d / "s.h5")
    assert_refused(res, EXIT_INPUT)
    assert snapshot(d) == before


def test_study_summary_figure_needs_force(run_cli, tmp_path):
    (tmp_path / "f.png").write_bytes(b"older")
    before = snapshot(tmp_path)
    res = run_cli("study-summary", tmp_path, "--plot", tmp_path / "f.png")
    assert_refused(res, EXIT_INPUT, "f.png", "--force")
    assert snapshot(tmp_path) == before


# --------------------------------------------------------------------------- batch --out

STUDY = """
deck = "base.toml"
[[vary]]
path = "layer.channel.thickness"
values = [100.0, 120.0]
"""


@pytest.fixture
def study(tmp_path, good_deck_text, monkeypatch):
    # stand-in jobs (no solve): these tests are about the folder, not the physics
    monkeypatch.setenv("SELFCON_BATCH_JOB", "selfcon.batch.worker:sleepy_job")
    (tmp_path / "base.toml").write_text(good_deck_text)
    p = tmp_path / "study.toml"
    p.write_text(textwrap.dedent(STUDY))
    return p


def test_batch_out_into_a_foreign_folder_refused(run_cli, study, tmp_path):
    out = tmp_path / "stuff"
    (out / "jobs").mkdir(parents=True)
    (out / "jobs" / "1.h5").write_bytes(b"somebody's result")
    (out / "table.csv").write_text("somebody's table")
    before = snapshot(tmp_path)
    res = run_cli("batch", study, "--out", out, "--workers", "1", "--quiet")
    assert_refused(res, EXIT_INPUT, str(out), "not empty", "jobs/", "table.csv")
    assert snapshot(tmp_path) == before


def test_batch_out_root_refused(run_cli, study, tmp_path):
    before = snapshot(tmp_path)
    res = run_cli("batch", study, "--out", "/", "--workers", "1", "--quiet")
    assert_refused(res, EXIT_INPUT, "not empty")
    assert not Path("/queue.sqlite").exists() and not Path("/coordinator.lock").exists()
    assert snapshot(tmp_path) == before


def test_batch_out_accepts_new_empty_and_its_own_folder_only(run_cli, study, tmp_path, good_deck_text):
    (tmp_path / "empty").mkdir()
    for out in (tmp_path / "new", tmp_path / "empty"):
        res = run_cli("batch", study, "--out", out, "--workers", "1", "--quiet")
        assert res.code == EXIT_OK, res.err
        assert (out / "queue.sqlite").is_file()
    # the same study again: resumes (nothing to do)
    assert run_cli("batch", study, "--out", tmp_path / "new", "--workers", "1", "--quiet").code == EXIT_OK
    # another study file into that folder: refused, naming the study that owns it
    other = tmp_path / "other.toml"
    other.write_text(study.read_text())
    before = snapshot(tmp_path / "new")
    res = run_cli("batch", other, "--out", tmp_path / "new", "--workers", "1", "--quiet")
    assert_refused(res, EXIT_INPUT, "another study", str(study.resolve()))
    # the same study file with another base deck: refused too
    (tmp_path / "base2.toml").write_text(good_deck_text)
    study.write_text(study.read_text().replace('"base.toml"', '"base2.toml"'))
    res = run_cli("batch", study, "--out", tmp_path / "new", "--workers", "1", "--quiet")
    assert_refused(res, EXIT_INPUT, "another study", "base.toml", "base2.toml")
    assert snapshot(tmp_path / "new") == before


def test_batch_out_file_refused(run_cli, study, tmp_path):
    before = snapshot(tmp_path)
    res = run_cli("batch", study, "--out", study, "--workers", "1", "--quiet")
    assert_refused(res, EXIT_INPUT, "is a file")
    assert snapshot(tmp_path) == before


def test_corrupt_queue_is_exit_4_with_recovery(run_cli, study, tmp_path):
    out = tmp_path / "study"
    assert run_cli("batch", study, "--workers", "1", "--quiet").code == EXIT_OK
    (out / "queue.sqlite").write_bytes(b"this is not a database at all" * 200)
    for name in ("queue.sqlite-wal", "queue.sqlite-shm"):
        (out / name).unlink(missing_ok=True)
    before = snapshot(tmp_path)
    for argv in (("batch", study, "--workers", "1", "--quiet"), ("queue", "status", out),
                 ("queue", "list", out), ("queue", "retry", out)):
        res = run_cli(*argv)
        assert_refused(res, EXIT_ENVIRONMENT, "corrupt job queue", "queue.sqlite", "to recover")
        assert snapshot(tmp_path) == before, argv


def test_job_file_write_fails_disk_full_stops_with_4_and_requeues(run_cli, study, tmp_path, monkeypatch):
    real = files._create_temp

    def full(folder, name):
        if Path(folder).name == "jobs":
            raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
        return real(folder, name)
    monkeypatch.setattr(files, "_create_temp", full)
    res = run_cli("batch", study, "--workers", "1", "--quiet")
    assert_refused(res, EXIT_ENVIRONMENT, "cannot write", "jobs/", "No space left on device (ENOSPC)")
    out = tmp_path / "study"
    con = sqlite3.connect(out / "queue.sqlite")
    rows = con.execute("SELECT status, attempts FROM jobs").fetchall()
    con.close()
    assert all(status in ("queued", "done") for status, _ in rows), rows      # no job charged as failed
    assert not [p for p in (out / "jobs").glob("*")] if (out / "jobs").exists() else True
    monkeypatch.setattr(files, "_create_temp", real)
    assert run_cli("batch", study, "--workers", "1", "--quiet").code == EXIT_OK   # the rerun finishes


# --------------------------------------------------------------------------- environment at the write layer

@pytest.mark.parametrize("code, name", [(errno.ENOSPC, "ENOSPC"), (errno.EACCES, "EACCES")])
def test_run_write_failure_is_exit_4_and_keeps_the_old_file(run_cli, good_deck, fake_solve, make_result,
                                                            monkeypatch, code, name):
    d = good_deck.parent
    save_result(make_result(converged=False), d / "r.h5")
    before = snapshot(d)
    from selfcon.output import result as results

    def fail(path, result):                   # half a file written, then the system says no
        Path(path).write_bytes(b"\x89HDF\r\n\x1a\n partial")
        raise OSError(code, os.strerror(code))
    monkeypatch.setattr(results, "_write_file", fail)
    res = run_cli("run", good_deck, "-o", d / "r.h5", "--force", "--quiet")
    assert_refused(res, EXIT_ENVIRONMENT, "cannot write", str(d / "r.h5"), f"({name})")
    assert snapshot(d) == before                    # old result intact, no temporary file left


@pytest.mark.parametrize("code, name", [(errno.ENOSPC, "ENOSPC"), (errno.EACCES, "EACCES")])
def test_figure_and_csv_write_failures_are_exit_4(run_cli, result_file, monkeypatch, code, name):
    d = result_file.parent

    def refuse(folder, base):
        raise OSError(code, os.strerror(code), str(Path(folder) / base))
    monkeypatch.setattr(files, "_create_temp", refuse)
    before = snapshot(d)
    res = run_cli("plot", result_file, "-o", d / "f.png")
    assert_refused(res, EXIT_ENVIRONMENT, "cannot write", "f.png", f"({name})")
    res = run_cli("export", result_file, "--csv", d / "csv")
    assert_refused(res, EXIT_ENVIRONMENT, "cannot write", "profile.csv", f"({name})")
    after = snapshot(d)
    assert after == before


def test_save_result_api_raises_environment_error(make_result, tmp_path, monkeypatch):
    def fsync(path):
        raise OSError(errno.EIO, os.strerror(errno.EIO))
    monkeypatch.setattr(files, "_fsync", fsync)
    with pytest.raises(SelfconEnvironmentError, match=r"cannot write .*r\.h5: .*\(EIO\)"):
        save_result(make_result(), tmp_path / "r.h5")
    assert list(tmp_path.iterdir()) == []


@pytest.mark.skipif(hasattr(os, "geteuid") and os.geteuid() == 0,
                    reason="root writes into read-only folders anyway")
def test_real_read_only_folder_is_exit_4_before_solving(run_cli, good_deck, fake_solve, tmp_path):
    ro = tmp_path / "ro"
    ro.mkdir()
    ro.chmod(stat.S_IRUSR | stat.S_IXUSR)
    try:
        res = run_cli("run", good_deck, "-o", ro / "r.h5")
        assert_refused(res, EXIT_ENVIRONMENT, "cannot write into folder", str(ro), "(EACCES)")
        assert not fake_solve and list(ro.iterdir()) == []
        # the write layer itself, without the early check
        with pytest.raises(SelfconEnvironmentError, match="Permission denied"):
            files.atomic_write(ro / "x.bin", lambda tmp: Path(tmp).write_bytes(b"x"))
    finally:
        ro.chmod(stat.S_IRWXU)


# --------------------------------------------------------------------------- damaged result files

@pytest.mark.parametrize("damage", ["truncated", "random", "foreign", "text"])
def test_damaged_or_foreign_result_is_exit_2(run_cli, result_file, damage):
    import h5py
    d = result_file.parent
    data = result_file.read_bytes()
    if damage == "truncated":
        result_file.write_bytes(data[: len(data) // 3])
    elif damage == "random":
        result_file.write_bytes(data[:8] + os.urandom(4096))
    elif damage == "foreign":
        result_file.unlink()
        with h5py.File(result_file, "w") as f:
            f["x"] = [1, 2, 3]
    else:
        result_file.write_text("title = 'a deck, not a result'\n")
    before = snapshot(d)
    for argv in (("show", result_file), ("plot", result_file, "-o", d / "f.png"),
                 ("export", result_file, "--csv", d / "csv")):
        res = run_cli(*argv)
        assert_refused(res, EXIT_INPUT, str(result_file))
        assert any(w in res.err for w in ("damaged", "not a selfcon result", "not an HDF5 file")), res.err
    assert snapshot(d) == before


# --------------------------------------------------------------------------- permissions of new files

@pytest.mark.parametrize("umask, mode", [(0o022, 0o644), (0o077, 0o600), (0o002, 0o664)])
def test_outputs_are_created_with_the_umask(make_result, tmp_path, umask, mode):
    old = os.umask(umask)
    try:
        save_result(make_result(), tmp_path / "r.h5")
        files.atomic_write(tmp_path / "t.csv", lambda tmp: Path(tmp).write_text("a,b\n"))
    finally:
        os.umask(old)
    # what `touch` or `open(..., "w")` would give (POSIX: 0666 & ~umask)
    assert stat.S_IMODE((tmp_path / "r.h5").stat().st_mode) == mode
    assert stat.S_IMODE((tmp_path / "t.csv").stat().st_mode) == mode
