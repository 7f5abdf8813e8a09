"""The figures a designer puts in a report: no two texts overlap, none crosses an axes frame
or runs off the figure (measured through matplotlib's Agg renderer), and each figure matches
its committed layout record in tests/layouts/ (tools/figure_layouts.py rewrites them)."""
import functools
import json
import runpy
from pathlib import Path

import pytest

from selfcon.output.plot import figure_layout, layout_faults

ROOT = Path(__file__).resolve().parents[1]
TOOL = runpy.run_path(str(ROOT / "tools" / "figure_layouts.py"))
FIGURES = dict(TOOL["figures"]())


@functools.lru_cache(maxsize=None)
def _layout(name):
    return figure_layout(FIGURES[name]())


@pytest.mark.parametrize("name", list(FIGURES))
def test_no_text_overlaps_or_crosses_a_frame(name):
    assert layout_faults(_layout(name)) == [], name


@pytest.mark.parametrize("name", list(FIGURES))
def test_layout_matches_the_committed_record(name):
    layout = _layout(name)
    record = json.loads((ROOT / "tests" / "layouts" / f"{name}.json").read_text(encoding="utf-8"))
    # a difference means a text moved, appeared or changed: look at the figure, then rerun
    # `python tools/figure_layouts.py` and commit the records
    assert TOOL["differences"](record, layout) == []


@pytest.mark.parametrize("name", list(TOOL["DECKS"]))
def test_band_diagram_legend_explains_shading_and_window(name):
    legend = _layout(name)["legend"]
    # the band diagram explains its shading and its close-up window (the issue saw neither)
    assert any(t.startswith("quantum region") for t in legend)
    assert any(t.startswith("close-up window") for t in legend)
    assert "Fermi level E$_F$ = 0" in legend


def test_hole_gas_figure_uses_the_tables_labels():
    layout = _layout("2dhg_4K")
    texts = [t["text"] for t in layout["texts"]]
    title = next(t for t in texts if "\n" in t and "K" in t)
    assert "p$_s$" in title and "n$_s$" not in title                    # the holes' headline
    labels = [t.split()[0] for t in texts if t[:2] in ("HH", "LH")]
    assert any(l.startswith("HH") for l in labels) and any(l.startswith("LH") for l in labels)
    assert not any(t.startswith("H0") for t in texts)                    # the table's names, not H0


def test_the_check_finds_what_it_looks_for():
    from matplotlib.figure import Figure
    fig = Figure(figsize=(4, 3), dpi=100)
    ax = fig.add_subplot()
    ax.text(0.5, 0.5, "hello")
    ax.text(0.52, 0.5, "world")                      # a few pixels to the right: overlaps 'hello'
    ax.text(0.85, 0.2, "across the frame")           # starts inside, ends outside the axes
    faults = layout_faults(figure_layout(fig))
    assert any("'hello' overlaps 'world'" in f for f in faults)
    assert any("'across the frame' crosses the axes frame" in f for f in faults)
