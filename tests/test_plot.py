"""Band diagram figures: formats by extension, pixel size as asked, headless, depth window."""
import subprocess
import sys

import numpy as np
import pytest

from selfcon.errors import SelfconInputError
from selfcon.output.plot import DEFAULT_SIZE, auto_depth, draw_band_diagram, plot_result


def test_png_size_as_asked(make_result, tmp_path):
    import matplotlib.image as mpimg
    out = plot_result(make_result(), tmp_path / "b.png", size=(700, 520))
    img = mpimg.imread(out)
    assert img.shape[:2] == (520, 700)                 # (rows, columns) = (height, width)
    # not blank: the figure has many distinct colours (tints, curves, text)
    assert len(np.unique(img.reshape(-1, img.shape[-1]), axis=0)) > 50


def test_default_size(make_result, tmp_path):
    import matplotlib.image as mpimg
    img = mpimg.imread(plot_result(make_result(), tmp_path / "b.png"))
    assert img.shape[1::-1] == DEFAULT_SIZE


@pytest.mark.parametrize("suffix, magic", [(".svg", b"<svg"), (".pdf", b"%PDF-")])   # file-format signatures
def test_vector_formats_by_extension(make_result, tmp_path, suffix, magic):
    out = plot_result(make_result(), tmp_path / f"b{suffix}")
    head = out.read_bytes()[:4096]
    assert magic in head


def test_unknown_extension(make_result, tmp_path):
    with pytest.raises(SelfconInputError, match="unknown figure format"):
        plot_result(make_result(), tmp_path / "b.gif")
    assert not (tmp_path / "b.gif").exists()


def _figure_text(result):
    """Every text artist of the drawn band diagram: (string, colour as RGBA)."""
    from matplotlib.colors import to_rgba
    from matplotlib.figure import Figure
    from matplotlib.text import Text
    fig = Figure(figsize=(4, 3), dpi=100)
    draw_band_diagram(fig, result)
    return [(t.get_text(), to_rgba(t.get_color())) for t in fig.findobj(Text) if t.get_text()]


def test_not_converged_result_still_plots(make_result, tmp_path):
    out = plot_result(make_result(converged=False), tmp_path / "b.png", size=(400, 300))
    assert out.stat().st_size > 0
    # the figure itself says so: the title and the figures card, in red, and only when not converged
    texts = _figure_text(make_result(converged=False))
    flagged = [(s, c) for s, c in texts if "NOT CONVERGED" in s]
    assert len(flagged) >= 2, texts                          # suptitle and the card
    assert all(c[0] > 0.5 and c[1] < 0.2 and c[2] < 0.2 for _, c in flagged)   # a red: R high, G and B low
    assert not any("NOT CONVERGED" in s for s, _ in _figure_text(make_result(converged=True)))


def test_auto_depth_crops_a_thick_substrate(make_result):
    r = make_result(n=201)
    r.z = np.linspace(0.0, 1000.0, 201)                # channel layer 20-40 nm, then a thick buffer
    r.layers[2]["bottom_nm"] = 40.0
    r.layers.append(dict(r.layers[2], name="buffer", top_nm=40.0, bottom_nm=1000.0,
                         electron_sheet_density_cm2=0.0))
    top, bottom = auto_depth(r)
    assert top == 0.0 and 40.0 < bottom < 100.0        # quantum region ends at 40 nm; +25 %
    r.regions_nm = [(20.0, 900.0)]
    assert auto_depth(r) == (0.0, 1000.0)              # the region fills the stack: show all of it


def test_headless_without_pyplot(result_file, tmp_path):
    code = ("import sys\n"
            "from selfcon.output.result import load_result\n"
            "from selfcon.output.plot import plot_result\n"
            "plot_result(load_result(%r), %r)\n"
            "assert 'matplotlib.pyplot' not in sys.modules\n") % (str(result_file), str(tmp_path / "h.png"))
    env = {"PATH": "/usr/bin:/bin", "HOME": str(tmp_path)}       # no DISPLAY, no MPLBACKEND
    proc = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, timeout=120)
    assert proc.returncode == 0, proc.stderr
    assert (tmp_path / "h.png").stat().st_size > 0
