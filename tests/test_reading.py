"""What a designer reads: the one number formatter, headings that state the run, the
command line's help and ``-q`` (README.md, "Numbers in the output" and "Command line")."""
import argparse
import json
import re

import pytest

from selfcon.output.numbers import SHEET_FLOOR_CM2, fmt, quantity_of


@pytest.mark.parametrize("value, quantity, expected", [
    (4.9412e11, "sheet", "4.94e11"),           # 3 significant digits (README, "Numbers in the output")
    (1.1e-138, "sheet", "0"),                  # below the 1e3 cm^-2 floor: noise, shown as 0
    (999.0, "sheet", "0"),                     # just below the floor
    (1000.0, "sheet", "1.00e3"),               # the floor itself is shown
    (0.1, "volume", "0"),                      # below 1 cm^-3
    (-17.84, "meV", "-17.8"),                  # one decimal in meV
    (0.100706, "nm", "0.101"),                 # 3 significant digits in nm (issue's mesh line)
    (9.77861, "nm", "9.78"),
    (3.17e-7, "residual", "3.2e-7"),           # 2 significant digits
    (-0.852, "V", "-0.852"),                   # three decimals in V
    (6.55e-30, "capacitance", "0"),            # below q x 1e3 cm^-2 = 1.6e-16 C/cm^2: noise
    (2.62e-7, "capacitance", "2.62e-7"),
    (1039.0, "nm", "1039"),                    # whole nanometres from 1000 nm up
    (None, "sheet", "–"), (float("nan"), "meV", "–"),
])
def test_formatter_rules(value, quantity, expected):
    # expected strings: the rules stated in selfcon/output/numbers.py, worked by hand
    assert fmt(value, quantity) == expected


def test_sign_and_rounded_zero():
    assert fmt(8.06, "meV", sign=True) == "+8.1"                  # by hand
    assert fmt(-0.04, "meV", sign=True) == "+0.0"                 # rounds to zero: no "-0.0"


@pytest.mark.parametrize("name, quantity", [
    ("channel_density_cm2", "sheet"), ("E0_minus_EF_eV", "eV"), ("ground_energy_meV", "meV"),
    ("threshold_V", "V"), ("centroid_nm", "nm"), ("donors_cm3", "volume"), ("title", "plain")])
def test_quantity_from_the_unit_suffix(name, quantity):
    assert quantity_of(name) == quantity                          # the SUFFIXES table


def _numbers(text):
    return [float(m) for m in re.findall(r"(?<![\w.])[-+]?\d+(?:\.\d+)?(?:e[-+]?\d+)(?![\w.])", text)]


def test_quiet_summary_has_no_number_below_meaning(hemt4_result, tmp_path, run_cli):
    """No sheet density below the floor in any printed line (the issue saw 1.03e-38 cm-2)."""
    path = tmp_path / "r.h5"
    hemt4_result.save(path)
    for argv in (("show", path, "-q"), ("show", path)):
        code, out, _ = run_cli(*argv)
        assert code == 0
        tiny = [v for v in _numbers(out) if 0 < abs(v) < SHEET_FLOOR_CM2]
        # the residual (V) is the one small number allowed: 'final residual X V'
        residual = float(re.search(r"final residual (\S+) V", out).group(1))
        assert all(v == residual for v in tiny), tiny


def test_occupied_rule_and_below_fermi(hemt4_result, tmp_path, run_cli):
    from selfcon.output.report import summary_figures
    fig = summary_figures(hemt4_result)
    # hemt_4K: one subband below E_F (E0 = -17.8 meV) and E1 (+2.8 meV, 2.5e6 cm^-2) under the 1e8 floor
    assert fig["below_fermi_subbands"] == 1
    assert fig["occupied_subbands"] == 1
    path = tmp_path / "r.h5"
    hemt4_result.save(path)
    out = run_cli("show", path, "-q").out
    assert "1 occupied subband (1 below E_F)" in out


def test_heading_names_every_override(tmp_path, run_cli, inputs_dir):
    out_h5 = tmp_path / "r.h5"
    code, out, _ = run_cli("run", inputs_dir / "hemt_4K.toml", "-o", out_h5, "-q",
                           "--set", "temperature=77", "--set", "layer.spacer.thickness=15",
                           "--set", "surface.bias=-0.1")
    assert code == 0
    lines = out.splitlines()
    # the deck's title says "20 nm spacer, 4 K": it is shown as the deck's, followed by what changed
    assert lines[0].startswith("deck title: ") and "4 K" in lines[0]
    assert lines[1] == "T = 77 K, gate bias -0.100 V"
    assert lines[2] == ("set: temperature = 77 K (deck: 4); spacer.thickness = 15 nm (deck: 20); "
                        "surface.bias = -0.1 V (deck: 0)")
    # the same heading from the file, and in the JSON
    assert run_cli("show", out_h5, "-q").out.splitlines()[:3] == lines[:3]
    fig = json.loads(run_cli("show", out_h5, "--json").out)
    assert fig["heading"] == lines[:3] and len(fig["overrides"]) == 3


def test_heading_without_overrides(hemt4_result):
    from selfcon.output.heading import heading_lines
    assert heading_lines(hemt4_result) == [hemt4_result.title, "T = 4 K, gate bias 0 V"]   # the deck


def test_figure_title_states_the_run(tmp_path, run_cli, inputs_dir):
    from matplotlib.figure import Figure

    import selfcon
    from selfcon.output.plot import draw_band_diagram
    deck = selfcon.load_deck(inputs_dir / "hemt_4K.toml", overrides=["temperature=77"])
    r = selfcon.solve(deck)
    fig = Figure(figsize=(12, 9), dpi=100, layout="constrained")
    draw_band_diagram(fig, r)
    title = fig._suptitle.get_text()
    assert title.startswith("deck title: ")
    assert "T = 77 K" in title and "set: temperature = 77 K (deck: 4)" in title
    assert "4 K" not in title.split("\n", 1)[1]          # only the deck's own title says 4 K


def _parsers():
    from selfcon.cli import _all_parsers, build_parser
    return _all_parsers(build_parser())


def test_every_option_and_positional_has_help():
    missing = [f"{p.prog} {a.option_strings or a.dest}" for p in _parsers() for a in p._actions
               if not a.help]
    assert missing == []


def test_every_command_takes_short_quiet():
    commands = [p for p in _parsers()
                if not any(isinstance(a, argparse._SubParsersAction) for a in p._actions)]
    assert len(commands) >= 10
    for p in commands:
        action = p._option_string_actions.get("-q")
        assert action is not None and "--quiet" in action.option_strings, p.prog


def test_study_table_drops_duplicates_constants_and_warning_counts():
    import numpy as np

    from selfcon.design.tolerance import summarize_table
    t = np.array([18.0, 19.0, 20.0, 21.0, 22.0])
    e0 = -0.01 + 0.001 * (t - 20)                                   # analytic, a linear table
    q = {"E0_eV": e0, "electron_E0_eV": e0.copy(), "E0_minus_EF_eV": e0.copy(),   # one figure, three names
         "hole_sheet_density_cm2": np.full(5, 1e-294),             # no spread
         "warnings": np.array([0, 1, 0, 1, 1.0]),                  # a count of warnings
         "channel_density_cm2": 3e11 - 1e10 * (t - 20)}
    s = summarize_table(["layer.spacer.thickness"], q, {"layer.spacer.thickness": t})
    assert s.table_quantities() == ["E0_eV", "channel_density_cm2"]
    text = "\n".join(s.lines())
    assert "1.2586e-294" not in text and "e-294" not in text
    assert "3.00e11" in text                                       # the sheet-density rule: 3 digits


def test_materials_is_one_compact_table_with_footnotes(run_cli):
    code, out, _ = run_cli("materials", "AlGaAs", "--x", "0.3")
    assert code == 0
    lines = out.splitlines()
    assert len(lines) < 120                          # the issue counted 202 lines before (328 with --x 0.3)
    head = "\n".join(lines[:20])
    for name in ("eg_gamma", "m_e", "ec_gamma"):      # the values a designer looks for come first
        assert re.search(rf"│ {name}\s", head), name
    rows = [l for l in lines if l.startswith("│") and "[" in l]
    cited = {int(n) for l in rows for n in re.findall(r"\[(\d+)\] │$", l)}
    notes = [l for l in lines if re.match(r"^\[\d+\] ", l)]
    assert cited == set(range(1, len(notes) + 1))    # every footnote cited
    from selfcon.cli import material_rows
    from selfcon.input import materials
    _, texts = material_rows(materials.describe("AlGaAs", x=0.3))
    assert len(texts) == len(notes) == len(set(texts))  # every source once
    assert sum("Vurgaftman, Meyer and Ram-Mohan" in l for l in lines) < 10   # not on every row


@pytest.mark.parametrize("temperature, says, never", [
    (4.0, "persistent photoconductivity", "no persistent photoconductivity"),
    (300.0, "no persistent photoconductivity at this temperature", "keep the occupation of the cool-down")])
def test_dx_warning_speaks_of_its_temperature(temperature, says, never):
    # DX capture/emission freeze below about 150 K (Mooney, J. Appl. Phys. 67, R1, 1990)
    from selfcon.output.diagnostics import dx_regime_text
    text = dx_regime_text(temperature)
    assert says in text and never not in text and f"{temperature:g} K" in text


def test_export_wavefunctions(hemt4_result, tmp_path, run_cli):
    import numpy as np
    path = tmp_path / "r.h5"
    hemt4_result.save(path)
    code, _, _ = run_cli("export", path, "--csv", tmp_path / "csv", "--wavefunctions", "-q")
    assert code == 0
    data = np.genfromtxt(tmp_path / "csv" / "wavefunctions.csv", delimiter=",", names=True)
    sb = hemt4_result.subbands["electron"]
    names = data.dtype.names
    assert names[0].startswith("z") and len(names) == 1 + sum(
        np.asarray(s.energy).size for s in hemt4_result.subbands.values())
    z, psi0 = data[names[0]], data[names[1]]
    assert np.allclose(psi0, np.asarray(sb.wavefunction)[:, 0])         # the file's own psi, E0
    assert np.trapezoid(psi0 ** 2, z) == pytest.approx(1.0, abs=2e-3)   # normalised (analytic norm 1)
    run_cli("export", path, "--csv", tmp_path / "csv2")                 # only on request
    assert not (tmp_path / "csv2" / "wavefunctions.csv").exists()


def test_first_readme_command_writes_into_an_ignored_folder_and_runs_twice(tmp_path, run_sub):
    import shutil
    from pathlib import Path
    root = Path(__file__).resolve().parents[1]
    line = next(l for l in (root / "README.md").read_text(encoding="utf-8").splitlines()
                if "pip install -e . &&" in l and "selfcon run" in l)
    command = line.split("pip install -e . && ", 1)[1]
    assert "/runs/" in (root / ".gitignore").read_text().splitlines()
    mkdir, run = command.split(" && ")
    assert mkdir == "mkdir -p runs"
    argv = run.split()[1:]
    assert all(a.startswith("runs/") for a in argv if a.endswith((".h5", ".png")))
    shutil.copytree(root / "inputs", tmp_path / "inputs")
    (tmp_path / "runs").mkdir()
    for _ in range(2):                                                  # twice: --force replaces
        r = run_sub(*argv, "-q", cwd=tmp_path)
        assert r.returncode == 0, r.stderr
    assert (tmp_path / "runs" / "hemt_4K.png").is_file()


def test_batch_json(tmp_path, run_cli, inputs_dir):
    import shutil
    shutil.copy(inputs_dir / "hemt_4K.toml", tmp_path / "base.toml")
    (tmp_path / "s.toml").write_text('title = "two spacers"\ndeck = "base.toml"\nmode = "grid"\n'
                                     '[[vary]]\npath = "layer.spacer.thickness"\nvalues = [20.0, 25.0]\n')
    code, out, _ = run_cli("batch", tmp_path / "s.toml", "--workers", "1", "--out", tmp_path / "o", "--json")
    assert code == 0
    d = json.loads(out)                                  # one JSON object and nothing else on stdout
    assert d["exit_code"] == 0 and d["counts"]["done"] == 2
    assert d["folder"] == str(tmp_path / "o") and str(tmp_path / "o" / "table.csv") in d["tables"]


def test_check_heading_names_overrides(run_cli, inputs_dir):
    code, out, _ = run_cli("check", inputs_dir / "hemt_4K.toml", "--set", "layer.spacer.thickness=15")
    assert code == 0
    assert out.startswith("deck title: ")                         # the deck's title may no longer be true
    assert "set: spacer.thickness = 15 nm (deck: 20)" in out     # the deck file says 20 nm
