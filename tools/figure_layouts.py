"""Layout records of the figures a designer puts in a report (README.md, "Command line").

    python tools/figure_layouts.py            # rewrite tests/layouts/*.json
    python tools/figure_layouts.py --check    # compare; exit 1 naming what moved

Each record (selfcon.output.plot.figure_layout) holds the pixel size, the legend entries and
every text's string and bounding box. tests/test_figure_layout.py draws the same figures,
checks that no two texts overlap and none crosses an axes frame, and compares them with the
committed records, so a change that moves or renames any text shows in review.

The figures: the band diagrams of inputs/hemt_4K.toml, inputs/hemt_300K.toml and the design
decks overdoped_300K, 2dhg_4K and two_channel_4K; a C-V sweep of hemt_4K (0 to -0.3 V); the
study-summary figures of a sampled tolerance study and of a two-path grid study, both built
from analytic tables (no solve).
"""
from __future__ import annotations

import json
import sys
from pathlib import Path

import numpy as np

ROOT = Path(__file__).resolve().parent.parent
RECORDS = ROOT / "tests" / "layouts"
DECKS = {"hemt_4K": "inputs/hemt_4K.toml", "hemt_300K": "inputs/hemt_300K.toml",
         "overdoped_300K": "inputs/design/overdoped_300K.toml", "2dhg_4K": "inputs/design/2dhg_4K.toml",
         "two_channel_4K": "inputs/design/two_channel_4K.toml"}
#: bounding boxes may move this much (pixels) between machines before a record differs
TOLERANCE_PX = 3.0


def band_diagram(deck: str):
    import selfcon
    from matplotlib.figure import Figure
    from selfcon.output.plot import DEFAULT_SIZE, DPI, draw_band_diagram
    result = selfcon.solve(selfcon.load_deck(ROOT / deck))
    fig = Figure(figsize=(DEFAULT_SIZE[0] / DPI, DEFAULT_SIZE[1] / DPI), dpi=DPI, layout="constrained")
    draw_band_diagram(fig, result)
    return fig


def cv_sweep():
    import selfcon
    from selfcon.design.sweep import bias_points, sweep_bias, sweep_figure
    sw = sweep_bias(selfcon.load_deck(ROOT / DECKS["hemt_4K"]), bias_points(0.0, -0.3, 0.1))
    return sweep_figure(sw)


def _analytic_study(grid: bool):
    """A study table with known, linear answers (no solve): n_s and E1 - E0 over the paths."""
    from selfcon.design.tolerance import summarize_table
    if grid:
        t, d = np.meshgrid([10.0, 20.0, 30.0], [2e12, 3e12, 4e12])
        params = {"layer.spacer.thickness": t.ravel(), "layer.doping.sheet_donors": d.ravel()}
    else:
        rng = np.random.default_rng(11)
        params = {"layer.spacer.thickness": rng.normal(20.0, 0.4, 24),
                  "layer.doping.donors": rng.normal(1e18, 5e16, 24),
                  "layer.doping.x": rng.normal(0.3, 0.01, 24)}
    t = params["layer.spacer.thickness"]
    second = params["layer.doping.sheet_donors"] if grid else params["layer.doping.donors"] * 2e-6
    ns = 3e11 - 8e9 * (t - 20.0) + 0.1 * (second - second.mean())
    e10 = 0.03 + 4e-14 * (ns - 3e11)
    return summarize_table(list(params), {"channel_density_cm2": ns, "E1_minus_E0_eV": e10}, params,
                           folder="grid_study" if grid else "tolerance_study")


def tolerance_study():
    from selfcon.design.tolerance import summary_figure
    return summary_figure(_analytic_study(grid=False))


def grid_study():
    from selfcon.design.tolerance import summary_figure
    return summary_figure(_analytic_study(grid=True))


def figures():
    """(name, build) of every recorded figure; ``build()`` returns the drawn Figure."""
    out = [(name, (lambda d=deck: band_diagram(d))) for name, deck in DECKS.items()]
    return out + [("cv_sweep", cv_sweep), ("tolerance_study", tolerance_study), ("grid_study", grid_study)]


def differences(record: dict, layout: dict, tolerance: float = TOLERANCE_PX) -> list[str]:
    """How ``layout`` differs from the committed ``record`` ([] when it matches)."""
    out = []
    if record["size_px"] != layout["size_px"]:
        out.append(f"size {layout['size_px']} != {record['size_px']}")
    if record["legend"] != layout["legend"]:
        out.append(f"legend {layout['legend']} != {record['legend']}")
    old = [t["text"] for t in record["texts"]]
    new = [t["text"] for t in layout["texts"]]
    if old != new:
        out.append(f"texts added {sorted(set(new) - set(old))}, removed {sorted(set(old) - set(new))}"
                   if set(old) != set(new) else "texts reordered")
        return out
    for a, b in zip(record["texts"], layout["texts"]):
        if max(abs(x - y) for x, y in zip(a["bbox"], b["bbox"])) > tolerance:
            out.append(f"{b['text']!r} moved: {a['bbox']} -> {b['bbox']}")
    return out


def main(argv) -> int:
    from regen_options import parse_args    # tools/regen_options.py (run as a script: tools/ is on sys.path)
    from selfcon.output.plot import figure_layout
    check = parse_args(argv, __doc__).check
    RECORDS.mkdir(parents=True, exist_ok=True)
    bad = 0
    for name, build in figures():
        layout = figure_layout(build())
        path = RECORDS / f"{name}.json"
        if check:
            diff = differences(json.loads(path.read_text()), layout) if path.is_file() else ["no record"]
            for d in diff:
                print(f"{path.name}: {d}")
            bad += bool(diff)
        else:
            path.write_text(json.dumps(layout, indent=1, ensure_ascii=False) + "\n", encoding="utf-8")
            print(f"wrote {path.relative_to(ROOT)}")
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
