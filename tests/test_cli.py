"""The command line (README, "Command line"): exit codes, messages, --set, --json, show/export/materials.

Most cases call ``cli.main(argv)`` in-process (fast); a few go through a real
subprocess (``python -m selfcon``) to see exactly what a shell sees.
"""
import csv
import json
import shutil
import sys

import h5py
import numpy as np
import pytest
from pathlib import Path

from selfcon import cli


# --------------------------------------------------------------------------- check and bad decks

def test_check_good_deck(run_cli, good_deck):
    code, out, err = run_cli("check", str(good_deck))
    assert code == 0, err
    for word in ("cap", "barrier", "channel", "AlGaAs", "nodes", "quantum region"):
        assert word in out, word


def test_check_json_mesh_stats(run_cli, good_deck):
    code, out, _ = run_cli("check", str(good_deck), "--json")
    assert code == 0
    fig = json.loads(out)
    assert [L["name"] for L in fig["layers"]] == ["cap", "barrier", "channel"]
    m = fig["mesh"]
    assert m["nodes"] > 10 and 0 < m["min_step_nm"] <= m["max_step_nm"]
    assert m["thickness_nm"] == pytest.approx(150.0)          # 10 + 40 + 100 nm in GOOD_DECK


def _assert_one_line_error(code, err, key, line):
    assert code == 2, err
    assert "Traceback" not in err
    lines = err.strip().splitlines()
    assert len(lines) == 1, err
    assert lines[0].startswith("selfcon: error: ")
    if key is not None:
        assert key in lines[0], (key, lines[0])
    if line is not None:
        assert f":{line}:" in lines[0], (line, lines[0])


def test_bad_deck_check_exit_2(run_cli, tmp_path, bad_deck):
    case_id, text, key, line = bad_deck
    deck = tmp_path / f"{case_id}.toml"
    deck.write_text(text)
    code, out, err = run_cli("check", str(deck))
    _assert_one_line_error(code, err, key, line)
    assert str(deck) in err


@pytest.mark.bad_decks("toml_syntax", "unknown_layer_key", "unknown_material")
def test_bad_deck_check_exit_2_subprocess(run_sub, tmp_path, bad_deck):
    _, text, key, line = bad_deck
    deck = tmp_path / "bad.toml"
    deck.write_text(text)
    proc = run_sub("check", str(deck))
    _assert_one_line_error(proc.returncode, proc.stderr, key, line)
    assert proc.stdout == ""


_UNIT_AND_ALLOY_MISTAKES = {
    "thickness_in_metres": "less than half a monolayer; thicknesses are in nm",
    "x_on_binary": "GaAs is a binary",
    "x_on_local_binary": "based on the binary GaAs",
    "x_on_local_material_of_binary": "based on the binary GaAs"}


@pytest.mark.bad_decks(*_UNIT_AND_ALLOY_MISTAKES)
def test_run_refuses_unit_and_alloy_mistakes_and_writes_nothing(run_cli, tmp_path, bad_deck):
    # issue 12: a thickness in metres and x on a binary are exit 2 naming the key, no file
    case_id, text, key, line = bad_deck
    deck = tmp_path / "bad.toml"
    deck.write_text(text)
    code, out, err = run_cli("run", str(deck), "-o", str(tmp_path / "out.h5"))
    _assert_one_line_error(code, err, key, line)
    assert _UNIT_AND_ALLOY_MISTAKES[case_id] in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["bad.toml"]


def test_missing_deck_file_exit_2(run_cli, tmp_path):
    code, _, err = run_cli("check", str(tmp_path / "nope.toml"))
    _assert_one_line_error(code, err, None, None)
    assert "no such deck file" in err


def test_study_and_deck_swapped_name_the_right_command(run_cli, tmp_path):
    # a study handed to `run`/`check`, or a deck handed to `batch`: exit 2, one line naming
    # the command the file is for, and nothing written
    root = Path(__file__).resolve().parent.parent
    study = root / "inputs" / "design" / "tolerance_hall.toml"
    for cmd in ("run", "check"):
        code, _, err = run_cli(cmd, study, *(("-o", tmp_path / "r.h5") if cmd == "run" else ()))
        _assert_one_line_error(code, err, None, None)
        assert "this file is a study" in err and "selfcon batch FILE" in err
    code, _, err = run_cli("batch", root / "inputs" / "hemt_4K.toml", "-o", tmp_path / "st")
    _assert_one_line_error(code, err, None, None)
    assert "this file is a deck" in err and "selfcon run FILE" in err
    assert not any(tmp_path.iterdir())


def test_usage_errors_exit_2(run_cli):
    assert run_cli("run")[0] == 2                     # missing DECK
    assert run_cli("frobnicate")[0] == 2              # unknown command
    assert run_cli("plot", "x.h5")[0] == 2            # -o is required
    code, out, _ = run_cli("--help")
    assert code == 0 and "run" in out and "materials" in out


def test_set_reaches_layers_by_name_and_index(run_cli, good_deck):
    code, out, err = run_cli("check", str(good_deck), "--json", "--set", "layer.channel.thickness=55",
                             "--set", "layer.1.x=0.25", "--set", "temperature=77",
                             "--set", "quantum.regions=[[10.0, 100.0]]")
    assert code == 0, err
    fig = json.loads(out)
    assert fig["layers"][2]["thickness_nm"] == 55.0
    assert fig["layers"][1]["x_top"] == 0.25
    assert fig["temperature_K"] == 77.0
    assert fig["mesh"]["thickness_nm"] == pytest.approx(10 + 40 + 55)


@pytest.mark.parametrize("override, key, allowed", [
    ("layer.chanel.thickness=5", "layer.chanel", "cap, barrier, channel"),
    ("layer.7.thickness=5", "layer.7", "0, 1, 2"),
    ("layer.cap.thikness=5", "thikness", "thickness"),
])
def test_set_bad_path_lists_choices(run_cli, good_deck, override, key, allowed):
    code, _, err = run_cli("check", str(good_deck), "--set", override)
    _assert_one_line_error(code, err, key, None)
    assert "allowed" in err and allowed in err


# --------------------------------------------------------------------------- run (plumbing)

def test_run_existing_output_needs_force(run_cli, good_deck, tmp_path):
    out = tmp_path / "good.h5"
    out.write_bytes(b"precious")
    code, _, err = run_cli("run", str(good_deck))
    _assert_one_line_error(code, err, None, None)
    assert "--force" in err and str(out) in err
    assert out.read_bytes() == b"precious"


def test_run_internal_error_exit_1(run_cli, good_deck, monkeypatch):
    from selfcon import api

    def broken(deck, **options):
        raise RuntimeError("the loop fell over")
    monkeypatch.setattr(api, "solve", broken)
    monkeypatch.delenv("SELFCON_DEBUG", raising=False)
    code, out, err = run_cli("run", str(good_deck), "--quiet")
    assert code == 1
    assert "internal error: RuntimeError: the loop fell over" in err
    assert "SELFCON_DEBUG=1" in err and "Traceback" not in err
    assert not good_deck.with_suffix(".h5").exists()
    monkeypatch.setenv("SELFCON_DEBUG", "1")
    code, out, err = run_cli("run", str(good_deck), "--quiet")
    assert code == 1 and "Traceback" in err


def test_run_bad_plot_extension_exit_2_before_solving(run_cli, good_deck, monkeypatch):
    from selfcon import api
    monkeypatch.setattr(api, "solve", lambda *a, **k: pytest.fail("solve must not run"))
    code, _, err = run_cli("run", str(good_deck), "--plot", "fig.bmp")
    _assert_one_line_error(code, err, None, None)
    assert ".png" in err


# --------------------------------------------------------------------------- show / plot / export / materials

def test_show_and_json_match_hdf5_summary(run_cli, result_file):
    code, out, err = run_cli("show", str(result_file))
    assert code == 0, err
    assert "Sheet density per layer" in out and "channel" in out and "warning:" in out
    code, out, err = run_cli("show", str(result_file), "--json")
    assert code == 0, err
    fig = json.loads(out)
    with h5py.File(result_file, "r") as f:
        attrs = dict(f["summary"].attrs)
        layers = f["layers"][()]
    assert set(fig["summary"]) == set(attrs)
    for k, v in attrs.items():
        if k == "warnings":
            assert fig["summary"][k] == [w.decode() if isinstance(w, bytes) else w for w in v]
        elif isinstance(v, (bytes, str)):
            assert fig["summary"][k] == (v.decode() if isinstance(v, bytes) else v)
        elif np.isnan(v):
            assert fig["summary"][k] is None, k                  # JSON has no NaN: null
        else:
            assert fig["summary"][k] == v and type(fig["summary"][k]) is type(v.item()), k
    for row, h5row in zip(fig["layers"], layers):
        assert row["name"] == h5row["name"].decode()
        assert row["electron_sheet_density_cm2"] == h5row["electron_sheet_density_cm2"]
    # channel = layer holding most electrons ("channel", 4.1e11 cm-2 in make_result)
    assert fig["channel"]["layer"] == "channel"
    assert fig["occupied_subbands"] == 1


def test_show_rejects_non_result(run_cli, tmp_path, good_deck):
    code, _, err = run_cli("show", str(good_deck))
    _assert_one_line_error(code, err, None, None)
    assert "not an HDF5 file" in err


def _png_size(path):
    """(width, height) from the PNG IHDR chunk (PNG specification: bytes 16-24, big-endian)."""
    data = path.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    return int.from_bytes(data[16:20], "big"), int.from_bytes(data[20:24], "big")


@pytest.mark.parametrize("size_args, expected", [
    (["--size", "640x480"], (640, 480)),
    (["--width-px", "800", "--height-px", "500"], (800, 500)),
    ([], (1200, 900)),                                            # plot.DEFAULT_SIZE
])
def test_plot_png_of_asked_size(run_cli, tmp_path, result_file, size_args, expected):
    fig = tmp_path / "bands.png"
    code, _, err = run_cli("plot", str(result_file), "-o", str(fig), *size_args)
    assert code == 0, err
    assert fig.stat().st_size > 10_000
    assert _png_size(fig) == expected


@pytest.mark.parametrize("args", [["--size", "big"], ["--size", "10x10"], ["--size", "600x400", "--width-px", "5"],
                                  ["--depth", "50:10"]])
def test_plot_bad_options_exit_2(run_cli, tmp_path, result_file, args):
    code, _, err = run_cli("plot", str(result_file), "-o", str(tmp_path / "f.png"), *args)
    _assert_one_line_error(code, err, None, None)


def test_plot_unknown_format_exit_2(run_cli, tmp_path, result_file):
    code, _, err = run_cli("plot", str(result_file), "-o", str(tmp_path / "f.jpeg"))
    _assert_one_line_error(code, err, None, None)
    assert ".svg" in err


def test_export_csv(run_cli, make_result, tmp_path, result_file):
    out = tmp_path / "tables"
    code, _, err = run_cli("export", str(result_file), "--csv", str(out))
    assert code == 0, err
    r = make_result()
    with open(out / "profile.csv", newline="") as fh:
        rows = list(csv.reader(fh))
    header = rows[0]
    assert header[0] == "z [nm]" and "conduction_band [eV]" in header and "electron_density [cm-3]" in header
    assert "electric_field [V/cm]" in header and "layer_index [1]" in header
    assert len(rows) == 1 + r.z.size
    col = header.index("electron_density [cm-3]")
    assert np.array_equal([float(x[col]) for x in rows[1:]], r.profile["electron_density"])   # repr: exact
    assert rows[-1][-1] == "channel"
    with open(out / "subbands.csv", newline="") as fh:
        sub = list(csv.DictReader(fh))
    assert [s["band"] for s in sub] == ["electron", "electron", "heavy_hole"]
    assert float(sub[0]["energy [eV]"]) == r.subbands["electron"].energy[0]
    assert float(sub[0]["occupation [cm-2]"]) == 4.1e11 and sub[0]["region"] == "0"
    code, _, err = run_cli("export", str(result_file), "--csv", str(out))
    _assert_one_line_error(code, err, None, None)
    assert "--force" in err
    assert run_cli("export", str(result_file), "--csv", str(out), "--force")[0] == 0


def test_materials(run_cli):
    code, out, _ = run_cli("materials")
    assert code == 0 and "GaAs" in out and "AlGaAs" in out
    code, out, _ = run_cli("materials", "GaAs", "--json")
    assert code == 0
    rows = json.loads(out)["parameters"]
    gap = next(r for r in rows if r["parameter"] == "band_gap")
    assert gap["value"] == pytest.approx(1.519)      # Vurgaftman, Meyer, Ram-Mohan, JAP 89, 5815 (2001), GaAs Eg(0 K)
    assert all(r["source"] for r in rows)
    code, _, err = run_cli("materials", "Unobtainium")
    _assert_one_line_error(code, err, None, None)
    assert "GaAs" in err                              # the choices are listed


def test_extra_command_modules_are_required(monkeypatch):
    # the command modules always ship (issue 10: no fallback for them): a missing one is an error
    monkeypatch.setattr(cli, "EXTRA_COMMANDS", ("selfcon.no_such_module.commands",))
    with pytest.raises(ModuleNotFoundError):
        cli.build_parser()
    monkeypatch.setattr(cli, "EXTRA_COMMANDS", ("selfcon._test_broken_commands",))
    import types
    broken = types.ModuleType("selfcon._test_broken_commands")

    def register(sub):
        raise ValueError("broken register")
    broken.register = register
    monkeypatch.setitem(sys.modules, "selfcon._test_broken_commands", broken)
    with pytest.raises(ValueError, match="broken register"):
        cli.build_parser()


def test_extra_command_import_error_inside_module_raises(monkeypatch, tmp_path):
    pkg = tmp_path / "cli_extra_pkg"
    pkg.mkdir()
    (pkg / "__init__.py").write_text("")
    (pkg / "commands.py").write_text("import a_dependency_that_is_not_installed_xyz\n")
    monkeypatch.syspath_prepend(str(tmp_path))
    monkeypatch.setattr(cli, "EXTRA_COMMANDS", ("cli_extra_pkg.commands",))
    with pytest.raises(ModuleNotFoundError, match="a_dependency_that_is_not_installed_xyz"):
        cli.build_parser()


def test_python_m_selfcon_version(run_sub):
    proc = run_sub("--version")
    assert proc.returncode == 0 and proc.stdout.startswith("selfcon ")


# --------------------------------------------------------------------------- end to end on the shipped decks

EXAMPLES = Path(__file__).resolve().parent.parent / "inputs"


def assert_json_matches_summary(fig, h5path):
    """The --json object carries the /summary attributes exactly (NaN as null)."""
    with h5py.File(h5path, "r") as f:
        attrs = dict(f["summary"].attrs)
    assert set(fig["summary"]) == set(attrs)
    for k, v in attrs.items():
        got = fig["summary"][k]
        if k == "warnings":
            assert got == [w.decode() if isinstance(w, bytes) else w for w in v]
        elif isinstance(v, (bytes, str)):
            assert got == (v.decode() if isinstance(v, bytes) else v), k
        elif np.isnan(v):
            assert got is None, k
        else:
            assert got == v.item() and type(got) is type(v.item()), k


@pytest.fixture(scope="module")
def hemt_run(run_sub, tmp_path_factory):
    """One real `selfcon run` of inputs/hemt_4K.toml in a subprocess (stdout/stderr are pipes)."""
    d = tmp_path_factory.mktemp("hemt")
    deck = d / "hemt_4K.toml"
    shutil.copy(EXAMPLES / "hemt_4K.toml", deck)
    proc = run_sub("run", str(deck), "--json", "--plot", str(d / "bands.png"), cwd=d)
    return d, deck, proc


def test_run_example_exit_0_json_and_default_output(hemt_run):
    d, deck, proc = hemt_run
    assert proc.returncode == 0, proc.stderr
    out = d / "hemt_4K.h5"                                   # default: beside the deck, same stem
    assert out.exists()
    fig = json.loads(proc.stdout)                           # stdout is the JSON object and nothing else
    assert fig["converged"] is True and fig["output"] == str(out)
    assert_json_matches_summary(fig, out)
    assert fig["channel"]["layer"] == "channel"             # the GaAs layer under the spacer holds the 2DEG
    assert fig["total"]["electron_sheet_density_cm2"] > 1e11  # a 3e12 cm-2 delta sheet 20 nm away: a real 2DEG
    # not a terminal: plain progress lines on stderr, no colour codes or spinners anywhere
    assert "iteration 1" in proc.stderr
    assert "\x1b" not in proc.stderr and "\x1b" not in proc.stdout


def test_run_example_file_layout_plain_h5py(plain_read, check_layout, hemt_run):
    d, _, proc = hemt_run
    assert proc.returncode == 0, proc.stderr
    info = plain_read(d / "hemt_4K.h5")
    check_layout(info, ["electron"])
    assert info["layer_names"] == ["cap", "barrier", "doping", "spacer", "channel", "buffer"]
    for key in ("numpy_version", "scipy_version", "numba_version", "h5py_version", "deck_hash", "wall_time_s"):
        assert key in info["root"], key


def test_run_example_round_trip(h5_tree, assert_results_equal, hemt_run, tmp_path):
    from selfcon import load_result
    d, _, proc = hemt_run
    first = load_result(d / "hemt_4K.h5")
    first.save(tmp_path / "again.h5")
    assert_results_equal(first, load_result(tmp_path / "again.h5"))
    assert h5_tree(d / "hemt_4K.h5") == h5_tree(tmp_path / "again.h5")


def test_run_example_plot(hemt_run):
    d, _, proc = hemt_run
    assert proc.returncode == 0, proc.stderr
    png = d / "bands.png"
    assert png.stat().st_size > 20_000 and _png_size(png) == (1200, 900)    # plot.DEFAULT_SIZE


def test_run_not_converged_exit_3(run_cli, tmp_path):
    deck = tmp_path / "hemt.toml"
    shutil.copy(EXAMPLES / "hemt_4K.toml", deck)
    out = tmp_path / "short.h5"
    code, stdout, err = run_cli("run", str(deck), "-o", str(out), "--quiet",
                                "--set", "solver.max_iterations=1")
    assert code == 3, err
    assert "not converged" in err and str(out) in err
    with h5py.File(out, "r") as f:                          # the result is written, and marked
        assert bool(f.attrs["converged"]) is False
        assert f.attrs["iterations"] == 1
        assert f["convergence/residual"].shape == (1,)


def test_run_set_reaches_the_solve(run_cli, tmp_path):
    """A thinner spacer puts more electrons in the channel (charge control: Delagebeaudeuf and Linh,
    IEEE Trans. Electron Devices 29, 955, 1982: n_s falls as the donor-channel distance grows)."""
    deck = tmp_path / "hemt.toml"
    shutil.copy(EXAMPLES / "hemt_4K.toml", deck)
    ns = {}
    for spacer in (10, 30):
        out = tmp_path / f"s{spacer}.h5"
        code, stdout, err = run_cli("run", str(deck), "-o", str(out), "--json",
                                    "--set", f"layer.spacer.thickness={spacer}", "--set", "layer.3.donors=0")
        assert code == 0, err
        ns[spacer] = json.loads(stdout)["total"]["electron_sheet_density_cm2"]
    assert ns[10] > ns[30] > 0


def test_run_then_show_and_export(run_cli, hemt_run, tmp_path):
    d, _, proc = hemt_run
    code, out, err = run_cli("show", str(d / "hemt_4K.h5"), "--json")
    assert code == 0, err
    assert_json_matches_summary(json.loads(out), d / "hemt_4K.h5")
    code, out, err = run_cli("export", str(d / "hemt_4K.h5"), "--csv", str(tmp_path / "csv"))
    assert code == 0, err
    assert (tmp_path / "csv" / "profile.csv").stat().st_size > 0
