"""Band diagram of a Result: selfcon's own figure design (matplotlib, headless).

Two panels sharing the depth axis:

* top: conduction and valence band edges (eV, relative to EF), the layers as
  tinted bands (one tint family per material, alternating shades so neighbouring
  layers of one material stay distinct) named along the top edge, EF as a
  dash-dot line, and each bound state as a level spanning its classically allowed
  extent with |psi|^2 drawn on it (filled, scaled per band);
* bottom: electron, hole, ionised donor and ionised acceptor densities (cm^-3)
  on a log scale, over the same layer tints.

No pyplot and no global state: a bare :class:`matplotlib.figure.Figure` is
rendered by the Agg/SVG/PDF canvas chosen from the file extension.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np

from selfcon.errors import SelfconInputError

DEFAULT_SIZE = (1200, 900)     # pixels
DPI = 100
FORMATS = {".png": "png", ".svg": "svg", ".pdf": "pdf"}

# selfcon palette: pairs of light tints (shade A, shade B) per material, in order of first appearance
LAYER_TINTS = (
    ("#f4ead2", "#ebdcb8"),    # sand
    ("#dcecdf", "#c9e2ce"),    # sage
    ("#e2e4f3", "#d0d4ec"),    # mist blue
    ("#f3e0e6", "#ead0d9"),    # blush
    ("#e3eeee", "#cfe3e3"),    # glacier
    ("#ece6da", "#ded5c4"),    # linen
)
EDGE_COLOURS = {"conduction_band": "#17365d", "valence_band": "#8a3b12"}
FERMI_COLOUR = "#2e7d4f"
BAND_COLOURS = {"electron": "#2f6fb8", "heavy_hole": "#c4572a", "light_hole": "#b88a10",
                "x2_electron": "#1d8a7a", "x4_electron": "#6a9c3c", "l_electron": "#7a4fa0"}
DENSITY_STYLE = {
    "electron_density": ("#17365d", "-", "electrons n"),
    "hole_density": ("#8a3b12", "-", "holes p"),
    "ionized_donors": ("#3f7f3a", "--", "ionised donors N$_D^+$"),
    "ionized_acceptors": ("#6b4a9b", "--", "ionised acceptors N$_A^-$"),
}
#: X and L conduction-band edges are drawn where they lie less than this above the Gamma edge (eV)
VALLEY_SHOWN = 0.3
VALLEY_STYLE = {
    "conduction_band_x": ("#4f7fb0", (0, (5, 2)), "X-valley edge"),
    "conduction_band_l": ("#7aa3c8", (0, (1.5, 1.5)), "L-valley edge"),
}
BAND_NAMES = {"electron": "electron states", "heavy_hole": "heavy-hole states", "light_hole": "light-hole states",
              "x2_electron": "X/Δ states (axis along z)", "x4_electron": "X/Δ states (axis in plane)",
              "l_electron": "L-valley states"}

#: per band: occupied states plus this many empty ones above them are drawn, at most MAX_STATES_DRAWN
EMPTY_STATES_DRAWN = 2
MAX_STATES_DRAWN = 8


def auto_depth(result) -> tuple[float, float]:
    """Default depth range: the whole stack, unless a thick bottom layer would crowd the quantum regions.

    Then the view ends a little below the last quantum region (and below the channel layer), so
    the wells are wide enough to read; the axis label says the stack continues.
    """
    z = np.asarray(result.z)
    top, bottom = float(z[0]), float(z[-1])
    ends = [b for _, b in result.regions_nm]
    if result.layers:
        dens = [float(r.get("electron_sheet_density_cm2", 0) or 0) + float(r.get("hole_sheet_density_cm2", 0) or 0)
                for r in result.layers]
        i = int(np.argmax(dens))
        if dens[i] > 0:
            ends.append(float(result.layers[i].get("bottom_nm", bottom)))
    if not ends:
        return top, bottom
    focus = max(ends)
    view = focus + 0.25 * (focus - top)
    if view < 0.6 * bottom:
        return top, view
    return top, bottom


def _allowed_span(z, edge, energy, sign, region):
    """[z0, z1] where the state is classically allowed (electrons: Ec <= E; holes: Ev >= E) in its region."""
    inside = (z >= region[0]) & (z <= region[1])
    ok = inside & ((edge <= energy) if sign > 0 else (edge >= energy))
    if not np.any(ok):
        return region
    zz = z[ok]
    return float(zz.min()), float(zz.max())


def _states_to_draw(sb, band, result):
    """The states of ``band`` drawn: every occupied one (the one rule of selfcon.output.channels)
    plus EMPTY_STATES_DRAWN above them, at most MAX_STATES_DRAWN; returns (indices, occupied)."""
    from selfcon.output.channels import occupied_states
    occ = np.asarray(occupied_states(band, result.subbands, result.channels), dtype=bool)
    n_occ = int(np.sum(occ))
    last = int(np.flatnonzero(occ).max()) + 1 if n_occ else 0
    count = min(np.asarray(sb.energy).size, last + EMPTY_STATES_DRAWN, MAX_STATES_DRAWN)
    return list(range(count)), n_occ


def _layer_patches(ax, result, x0, x1, with_labels, fontsize):
    tint_of = {}
    last_material, shade = None, 0
    bounds = []
    for row in result.layers:
        mat = str(row.get("material", ""))
        if mat not in tint_of:
            tint_of[mat] = LAYER_TINTS[len(tint_of) % len(LAYER_TINTS)]
        shade = 1 - shade if mat == last_material else 0
        last_material = mat
        a, b = float(row["top_nm"]), float(row["bottom_nm"])
        bounds.append((a, b))
        if b <= x0 or a >= x1:
            continue
        ax.axvspan(max(a, x0), min(b, x1), color=tint_of[mat][shade], zorder=0, linewidth=0)
        if a > x0:
            ax.axvline(a, color="#9a9a9a", linewidth=0.6, zorder=0.5)
        if with_labels:
            mid = 0.5 * (max(a, x0) + min(b, x1))
            frac = (min(b, x1) - max(a, x0)) / (x1 - x0)
            name = str(row.get("name", ""))
            label = name if frac > 0.06 else name[:10]
            ax.text(mid, 0.985, label, transform=ax.get_xaxis_transform(), ha="center", va="top",
                    rotation=0 if frac > 0.02 * max(len(label), 1) else 90, fontsize=fontsize,
                    color="#3a3a3a", zorder=5, clip_on=True)
    return bounds


def _tex_sci(v: float, quantity: str = "sheet") -> str:
    """4.11e11 -> '$4.11\\times10^{11}$' (mathtext), digits and floor of selfcon.output.numbers."""
    from selfcon.output.numbers import fmt
    text = fmt(v, quantity)
    if "e" not in text:
        return text
    mant, exp = text.split("e")
    return f"${mant}\\times10^{{{int(exp)}}}$"


def _state_support(z, psi2, region, frac=1e-3):
    """[z0, z1] where |psi|^2 exceeds ``frac`` of its peak (the drawn extent of the curve)."""
    peak = float(psi2.max()) if psi2.size else 0.0
    ok = (psi2 > frac * peak) & (z >= region[0]) & (z <= region[1]) if peak > 0 else np.zeros_like(z, bool)
    if not np.any(ok):
        return region
    zz = z[ok]
    return float(zz.min()), float(zz.max())


#: the profile of the band edge each valley set's states are drawn against (the lowest X edge
#: for both X/Delta sets: the file keeps one X profile)
VALLEY_EDGE = {"x2_electron": "conduction_band_x", "x4_electron": "conduction_band_x",
               "l_electron": "conduction_band_l"}


def _band_edge(result, band, ec, ev):
    """(sign, edge at the nodes) of a band's states: Ec for the Gamma electrons, the valley's
    own edge for the X/Delta and L sets, Ev for holes."""
    key = VALLEY_EDGE.get(band)
    if key is not None and key in result.profile:
        return +1, np.asarray(result.profile[key], dtype=float)
    return (+1, ec) if band.endswith("electron") else (-1, ev)


def _draw_states(ax, result, z, ec, ev, span, regions, bands=None):
    """Levels and |psi|^2 of the drawn states of ``bands`` (default: all) on ``ax``.

    Returns the legend patches (one per band: how many are occupied, how many more exist than
    are drawn) and the drawn states as (band, index, energy, z0, z1, amplitude, occupied)."""
    from selfcon.output.channels import occupied_states
    from matplotlib.patches import Patch
    handles, drawn = [], []
    for band, sb in result.subbands.items():
        if bands is not None and band not in bands:
            continue
        idx, n_occ = _states_to_draw(sb, band, result)
        if not idx:
            continue
        occ = np.asarray(occupied_states(band, result.subbands, result.channels), dtype=bool)
        sign, edge = _band_edge(result, band, ec, ev)
        colour = BAND_COLOURS.get(band, "#555555")
        e = np.asarray(sb.energy)[idx]
        gaps = np.diff(np.sort(e))
        step = float(np.median(gaps)) if gaps.size else 0.05 * span
        amp = float(np.clip(0.7 * step, 0.03 * span, 0.10 * span))
        psi2 = np.asarray(sb.wavefunction)[:, idx] ** 2
        peak = float(psi2.max()) if psi2.size else 0.0
        if peak <= 0:
            continue
        for j, k in enumerate(idx):
            r = int(sb.region[k]) if k < len(sb.region) else 0
            region = regions[r] if 0 <= r < len(regions) else regions[0]
            a, b = _allowed_span(z, edge, e[j], sign, region)
            c0, c1 = _state_support(z, psi2[:, j], region)
            occupied = bool(occ[k])
            ax.hlines(e[j], a, b, colors=colour, linewidth=1.4 if occupied else 0.9,
                      linestyles="-" if occupied else ":", zorder=4)
            mask = (z >= c0) & (z <= c1)
            zz, w = z[mask], psi2[mask, j] / peak * amp
            ax.fill_between(zz, e[j], e[j] + sign * w, color=colour, alpha=0.35 if occupied else 0.15,
                            linewidth=0, zorder=3.5)
            ax.plot(zz, e[j] + sign * w, color=colour, linewidth=0.9, alpha=0.9 if occupied else 0.5, zorder=4)
            drawn.append((band, k, e[j], c0, c1, amp, occupied))
        more = int(np.asarray(sb.energy).size) - len(idx)
        label = f"{BAND_NAMES.get(band, band)}: {n_occ} occupied" + (f", +{more} more not drawn" if more else "")
        handles.append(Patch(facecolor=colour, alpha=0.5, label=label))
    return handles, drawn


#: label column of the close-up: gap between labels in units of the label height
LABEL_GAP = 1.25


def _label_levels(ax, items, fs):
    """Name each drawn level in a column right of ``ax`` (outside the frame, so a label never
    covers a band edge, a level or another label), joined to its level by a thin leader line.

    ``items``: (energy, text, colour, z_end) per level; call after the axis limits are final."""
    if not items:
        return []
    fig = ax.figure
    height_px = ax.get_window_extent().height or 1.0
    gap = LABEL_GAP * fs * 0.75 * fig.dpi / 72.0 / height_px          # label height in axes fraction
    to_axes = ax.transAxes.inverted()
    pos = [(float(to_axes.transform(ax.transData.transform((ze, e)))[1]), i)
           for i, (e, _, _, ze) in enumerate(items)]
    pos.sort()
    ys = [min(max(y, gap / 2), 1 - gap / 2) for y, _ in pos]
    for k in range(1, len(ys)):                                         # push up to keep a gap
        ys[k] = max(ys[k], ys[k - 1] + gap)
    over = ys[-1] - (1 - gap / 2)
    if over > 0:                                                        # the column fits: shift it down
        ys = [y - over for y in ys]
        for k in range(len(ys) - 2, -1, -1):
            ys[k] = min(ys[k], ys[k + 1] - gap)
    out = []
    for (_, i), y in zip(pos, ys):
        e, text, colour, ze = items[i]
        out.append(ax.annotate(text, xy=(ze, e), xycoords="data", xytext=(1.04, y), textcoords="axes fraction",
                               ha="left", va="center", fontsize=fs * 0.75, color=colour, annotation_clip=False,
                               arrowprops={"arrowstyle": "-", "color": colour, "linewidth": 0.6,
                                           "alpha": 0.7, "shrinkA": 1, "shrinkB": 0}))
    return out


def _quantum_strip(ax, result, x0, x1):
    """The quantum regions as a shaded strip along the bottom of ``ax`` (outside them the
    carriers are classical, which is where a density may step)."""
    for a, b in result.regions_nm:
        lo, hi = max(float(a), x0), min(float(b), x1)
        if hi > lo:
            ax.axvspan(lo, hi, ymin=0.0, ymax=QUANTUM_STRIP, facecolor=QUANTUM_COLOUR, alpha=0.55,
                       linewidth=0, zorder=1.5)


def _quantum_handle():
    from matplotlib.patches import Patch
    return Patch(facecolor=QUANTUM_COLOUR, alpha=0.55, label="quantum region (strip): Schrödinger inside")


#: the quantum-region strip: height as a fraction of the panel, colour
QUANTUM_STRIP = 0.035
QUANTUM_COLOUR = "#7d6aa8"


#: occupied states listed on the figures card
CARD_STATES = 5


def _figures_card(ax, result, fs):
    """Bottom-right panel: the headline figures as a small text card."""
    from selfcon.output.report import sci, summary_figures
    fig = summary_figures(result)
    ax.set_axis_off()
    from selfcon.output.numbers import fmt
    from selfcon.output.report import occupied_text, state_label
    lines = [("converged" if fig["converged"] else "NOT CONVERGED") + f" · {fig['iterations']} iterations",
             f"residual {fmt(fig['residual_V'], 'residual')} V"]
    lines.append(f"n total  {sci(fig['total']['electron_sheet_density_cm2'])} cm⁻²")
    if sci(fig["total"]["hole_sheet_density_cm2"]) != "0":
        lines.append(f"p total  {sci(fig['total']['hole_sheet_density_cm2'])} cm⁻²")
    ch = fig.get("channel")
    if ch:
        lines.append(f"channel  {ch.get('name', ch['layer'])}  {sci(ch['sheet_density_cm2'])} cm⁻²")
        v = ch.get("ef_minus_ec_meV", ch.get("ev_minus_ef_meV"))
        if v is not None:
            lines.append(("E_F − Ec,min" if ch["carrier"] == "electron" else "Ev,max − E_F")
                         + f"  {fmt(v, 'meV', sign=True)} meV")
    occ = [r for r in fig["subbands"] if r["occupied"]]
    lines.append(occupied_text(fig))
    for r in occ[:CARD_STATES]:
        lines.append(f"{state_label(r['band'], r['index'])}  {fmt(r['energy_meV'], 'meV', sign=True)} meV  "
                     f"{sci(r['occupation_cm2'])} cm⁻²")
    if len(occ) > CARD_STATES:
        lines.append(f"… {len(occ) - CARD_STATES} more occupied")
    if fig["warnings"]:
        lines.append(f"{len(fig['warnings'])} warning(s): see selfcon show")
    ax.text(0.04, 0.96, "\n".join(lines), transform=ax.transAxes, va="top", ha="left", fontsize=fs * 0.8,
            family="monospace", color="#222222" if fig["converged"] else "#a01010",
            bbox={"boxstyle": "round,pad=0.6", "facecolor": "#f7f7f4", "edgecolor": "#c8c8c0"})


WINDOW_COLOUR = "#777777"
#: columns of the figure's legend
LEGEND_COLUMNS = 4


def _focus_bands(result) -> tuple[str, ...]:
    """The bands of the close-up: the main channel's carrier (holes: heavy and light hole),
    else the band holding the most subband carriers."""
    main = result.main_channel if result.channels else None
    carrier = main.get("carrier") if main is not None else None
    if carrier is None:
        occ = {b: float(np.sum(sb.occupation)) for b, sb in result.subbands.items()}
        if not occ:
            return ()
        carrier = "electron" if max(occ, key=occ.get).endswith("electron") else "hole"
    bands = tuple(b for b in result.subbands if b.endswith("electron")) if carrier == "electron" \
        else ("heavy_hole", "light_hole")
    bands = tuple(b for b in bands if b in result.subbands)
    # of several electron bands (quantum valleys: Gamma, X/Delta, L) those holding carriers:
    # the empty Gamma states of a Si well lie 1.6 eV above its Delta2 subbands
    held = tuple(b for b in bands if float(np.sum(result.subbands[b].occupation)) > 0.0)
    return held if len(bands) > 2 and held else bands


#: eV: heavy- and light-hole edges further apart than this are drawn as two lines
HOLE_SPLIT_SHOWN = 1e-3


#: a multiband hole state is drawn in the dispersion panel when it holds at least this (cm^-2)
KP_DRAWN_CM2 = 1e8


def _draw_hole_dispersion(ax, result, fs):
    """The in-plane dispersion of the occupied multiband hole states (/subbands/hole_kp) on
    ``ax``: each state's E(k_par) in the axial approximation (solid) and along [100] and [110]
    (thin dashed and dotted: the warping), EF as a grey line."""
    h = result.hole_kp
    k = np.asarray(h["k_parallel"], dtype=float)
    occ = np.asarray(h["occupation"], dtype=float)
    ax.clear()
    shown = np.flatnonzero(occ >= KP_DRAWN_CM2)
    if shown.size == 0:
        shown = np.arange(min(2, occ.size))
    colour = BAND_COLOURS["heavy_hole"]
    for j, i in enumerate(shown):
        alpha = 1.0 if j < 2 else 0.6
        ax.plot(k, 1e3 * np.asarray(h["dispersion"][i]), color=colour, linewidth=1.4, alpha=alpha,
                label="axial" if j == 0 else None)
        ax.plot(k, 1e3 * np.asarray(h["dispersion_100"][i]), color=colour, linewidth=0.8,
                linestyle="--", alpha=alpha, label="[100]" if j == 0 else None)
        ax.plot(k, 1e3 * np.asarray(h["dispersion_110"][i]), color=colour, linewidth=0.8,
                linestyle=":", alpha=alpha, label="[110]" if j == 0 else None)
    ax.axhline(0.0, color="#888888", linewidth=0.8)
    ax.set_xlabel("k$_\\parallel$ (nm$^{-1}$)", fontsize=fs * 0.9)
    ax.set_ylabel("E − E$_F$ (meV)", fontsize=fs * 0.9)
    ax.set_title(f"hole subbands E(k$_\\parallel$): {shown.size} occupied", fontsize=fs * 0.85)
    ax.tick_params(labelsize=fs * 0.8)
    ax.legend(loc="lower left", fontsize=fs * 0.7, framealpha=0.9)


def draw_band_diagram(fig, result, depth=None):
    """Draw the band diagram on a matplotlib Figure; returns the axes (bands, densities, close-up, card)."""
    from selfcon.output.numbers import fmt
    from selfcon.output.report import state_label
    z = np.asarray(result.z, dtype=float)
    ec = np.asarray(result.profile["conduction_band"], dtype=float)
    ev = np.asarray(result.profile["valence_band"], dtype=float)
    if depth is None:
        x0, x1 = auto_depth(result)
    elif depth == "full":
        x0, x1 = float(z[0]), float(z[-1])
    else:
        x0, x1 = float(depth[0]), float(depth[1])
    width_px = fig.get_figwidth() * fig.dpi
    fs = float(np.clip(width_px / 110.0, 7.0, 13.0))

    gs = fig.add_gridspec(2, 2, height_ratios=[3, 2], width_ratios=[2.4, 1])
    top = fig.add_subplot(gs[0, 0])
    bottom = fig.add_subplot(gs[1, 0], sharex=top)
    zoom = fig.add_subplot(gs[0, 1])
    card = fig.add_subplot(gs[1, 1])
    view = (z >= x0) & (z <= x1)
    if not np.any(view):
        view = np.ones_like(z, dtype=bool)

    # --- band diagram: band edges, EF, states
    _layer_patches(top, result, x0, x1, True, fs * 0.85)
    lo = float(min(ev[view].min(), 0.0))
    hi = float(max(ec[view].max(), 0.0))
    span = max(hi - lo, 1e-3)
    top.plot(z, ec, color=EDGE_COLOURS["conduction_band"], linewidth=2.0, label="conduction band E$_c$", zorder=3)
    top.plot(z, ev, color=EDGE_COLOURS["valence_band"], linewidth=2.0, label="valence band E$_v$", zorder=3)
    top.axhline(0.0, color=FERMI_COLOUR, linestyle="-.", linewidth=1.3, label="Fermi level E$_F$ = 0", zorder=2)
    # strained layers: the heavy- and light-hole edges split; the lower one, thin and dotted
    if "heavy_hole_band" in result.profile and "light_hole_band" in result.profile:
        hh = np.asarray(result.profile["heavy_hole_band"], dtype=float)
        lh = np.asarray(result.profile["light_hole_band"], dtype=float)
        split = np.abs(hh - lh) > HOLE_SPLIT_SHOWN
        if np.any(view & split):
            top.plot(z, np.where(split, np.minimum(hh, lh), np.nan), color=EDGE_COLOURS["valence_band"],
                     linestyle=":", linewidth=1.1, label="lower hole edge (strain-split)", zorder=2.5)
    # X and L edges, thin, wherever they come within VALLEY_SHOWN eV of the Gamma edge in view
    for key, (colour, style, label) in VALLEY_STYLE.items():
        if key not in result.profile:
            continue
        edge = np.asarray(result.profile[key], dtype=float)
        near = view & (edge - ec < VALLEY_SHOWN)
        if np.any(near):
            top.plot(z, np.where(edge - ec < VALLEY_SHOWN + 0.2, edge, np.nan), color=colour,
                     linestyle=style, linewidth=1.1, label=label, zorder=2.5)
    regions = list(result.regions_nm) or [(float(z[0]), float(z[-1]))]
    handles_extra, drawn = _draw_states(top, result, z, ec, ev, span, regions)
    _quantum_strip(top, result, x0, x1)
    top.set_ylim(lo - 0.06 * span, hi + 0.14 * span)     # headroom for the layer names
    top.set_ylabel("energy relative to E$_F$ (eV)", fontsize=fs)
    top.tick_params(labelbottom=False)

    # --- close-up of the main channel's carrier (holes: both hole bands)
    window_handle = None
    focus = _focus_bands(result)
    mine = [d for d in drawn if d[0] in focus]
    if mine:
        shown = [d for d in mine if d[6]] or mine[:1]
        c0 = min(d[3] for d in shown)
        c1 = max(d[4] for d in shown)
        pad = 0.15 * max(c1 - c0, 1.0)
        c0, c1 = max(c0 - pad, float(z[0])), min(c1 + pad, float(z[-1]))
        sign = +1 if any(b.endswith("electron") for b in focus) else -1
        # the edge the focused states sit on: the lowest (electrons) or highest (holes) of theirs
        edges = [_band_edge(result, b, ec, ev)[1] for b in focus]
        edge = np.minimum.reduce(edges) if sign > 0 else np.maximum.reduce(edges)
        inwin = (z >= c0) & (z <= c1)
        energies = [d[2] for d in mine]
        amp = max(d[5] for d in mine)
        if sign > 0:
            zlo = min(float(edge[inwin].min()), 0.0, min(energies))
            zhi = max(max(energies) + amp, 0.0)
        else:
            zhi = max(float(edge[inwin].max()), 0.0, max(energies))
            zlo = min(min(energies) - amp, 0.0)
        zspan = max(zhi - zlo, 1e-3)
        _layer_patches(zoom, result, c0, c1, False, fs)
        zoom.plot(z, edge, color=EDGE_COLOURS["conduction_band" if sign > 0 else "valence_band"], linewidth=2.0,
                  zorder=3)
        zoom.axhline(0.0, color=FERMI_COLOUR, linestyle="-.", linewidth=1.3, zorder=2)
        _, zdrawn = _draw_states(zoom, result, z, ec, ev, zspan * 2.0, regions, bands=focus)
        _quantum_strip(zoom, result, c0, c1)
        zoom.set_xlim(c0, c1)
        zoom.set_ylim(zlo - 0.12 * zspan, zhi + 0.12 * zspan)
        names = " and ".join(BAND_NAMES.get(b, b) for b in focus if any(d[0] == b for d in zdrawn))
        zoom.set_title(f"close-up: {names}", fontsize=fs * 0.85)
        zoom.set_xlabel("depth z (nm)", fontsize=fs * 0.85)
        zoom.tick_params(labelsize=fs * 0.8)
        zoom_labels = [(d[2], f"{state_label(d[0], d[1])} {fmt(d[2] * 1e3, 'meV', sign=True)} meV",
                        BAND_COLOURS.get(d[0], "#555555"), min(d[4], c1)) for d in zdrawn]
        top.axvspan(c0, c1, ymin=0, ymax=1, facecolor="none", edgecolor=WINDOW_COLOUR, linewidth=0.8,
                    linestyle="--", zorder=2.5)
        from matplotlib.patches import Patch
        window_handle = Patch(facecolor="none", edgecolor=WINDOW_COLOUR, linestyle="--",
                              label="close-up window (panel on the right)")
    else:
        zoom_labels = []
        zoom.set_axis_off()
        zoom.text(0.5, 0.5, "no bound states", ha="center", va="center", transform=zoom.transAxes,
                  fontsize=fs * 0.9, color="#666666")
    band_handles = top.get_legend_handles_labels()[0] + handles_extra + [_quantum_handle()] + (
        [window_handle] if window_handle else [])

    # --- densities, log scale
    _layer_patches(bottom, result, x0, x1, False, fs)
    vmax = 0.0
    for name in DENSITY_STYLE:
        if name in result.profile:
            vals = np.asarray(result.profile[name], dtype=float)[view]
            if vals.size:
                vmax = max(vmax, float(np.nanmax(vals)))
    floor = max(1e8, vmax * 1e-9) if vmax > 0 else 1e8
    for name, (colour, style, label) in DENSITY_STYLE.items():
        if name not in result.profile:
            continue
        vals = np.asarray(result.profile[name], dtype=float)
        if not np.any(vals[view] > floor):
            continue
        # values under the floor are drawn just below the axis, so spikes (delta sheets) stay whole lines
        bottom.plot(z, np.maximum(vals, floor * 0.1), color=colour, linestyle=style, linewidth=1.6, label=label)
    bottom.set_yscale("log")
    bottom.set_ylim(floor, max(vmax, floor * 10) * 3.0)
    bottom.set_ylabel("density (cm$^{-3}$)", fontsize=fs)
    _quantum_strip(bottom, result, x0, x1)
    # one legend for every line and shading of the figure, below the panels (it covers no data)
    handles = band_handles + bottom.get_legend_handles_labels()[0]
    fig.legend(handles=handles, loc="outside lower center", ncol=LEGEND_COLUMNS, fontsize=fs * 0.72,
               frameon=False, handlelength=2.4, columnspacing=1.6)
    more = f"   (stack continues to {z[-1]:g} nm)" if x1 < z[-1] - 1e-9 else ""
    bottom.set_xlabel(f"depth z (nm){more}", fontsize=fs)
    bottom.set_xlim(x0, x1)
    for ax in (top, bottom):
        ax.tick_params(labelsize=fs * 0.9)
        ax.grid(True, which="major", color="#ffffff", linewidth=0.8, alpha=0.7, zorder=1)
    _figures_card(card, result, fs)
    if getattr(result, "hole_kp", None):
        _draw_hole_dispersion(zoom, result, fs)
    elif zoom_labels:
        fig.draw_without_rendering()            # the final layout: the label column needs the panel's height
        _label_levels(zoom, zoom_labels, fs)

    from selfcon.output.heading import heading_lines
    head = heading_lines(result)
    bits = [head[1]]
    main = result.main_channel if result.channels else None
    if main is not None:
        sym = "n$_s$" if main.get("carrier") == "electron" else "p$_s$"
        bits.append(f"{sym} = {_tex_sci(float(main.get('sheet_density', 0.0)))} cm$^{{-2}}$ in '{main.get('name')}'")
    else:
        ns = result.summary.get("electron_sheet_density_cm2")
        if isinstance(ns, (int, float)):
            bits.append(f"n$_s$ = {_tex_sci(ns)} cm$^{{-2}}$")
    bits.append(f"{result.iterations} iterations" + ("" if result.converged else " — NOT CONVERGED"))
    lines = [head[0], "   ·   ".join(bits)] + head[2:]
    fig.suptitle("\n".join(lines), fontsize=fs * 1.05,
                 color="#222222" if result.converged else "#a01010")
    return top, bottom, zoom, card


def plot_result(result, path, size=None, depth=None, dpi: int = DPI, *, force: bool = True) -> Path:
    """Write the band diagram of ``result`` to ``path`` (.png, .svg or .pdf), atomically.

    ``size``: (width, height) in pixels (default 1200 x 900; at ``dpi`` for vector formats).
    ``depth``: (top, bottom) in nm, "full", or None for :func:`auto_depth`.
    ``force``: False refuses to replace an existing file (SelfconInputError).
    """
    path = Path(path)
    fmt = FORMATS.get(path.suffix.lower())
    if fmt is None:
        raise SelfconInputError(f"unknown figure format {path.suffix or '(none)'!r}", file=str(path),
                                allowed=", ".join(FORMATS))
    w, h = size or DEFAULT_SIZE
    from matplotlib.figure import Figure
    fig = Figure(figsize=(w / dpi, h / dpi), dpi=dpi, layout="constrained")
    draw_band_diagram(fig, result, depth=depth)
    from selfcon.output.files import atomic_write
    atomic_write(path, lambda tmp: fig.savefig(tmp, format=fmt, dpi=dpi,
                                               metadata=None if fmt != "png" else {"Software": "selfcon"}),
                 force=force)
    return path


def _drawn_texts(fig):
    """Every text artist a drawn figure shows: titles, labels, tick labels of the ticks in
    view, legend entries, annotations and free texts (visible, non-empty)."""
    from matplotlib.text import Text
    hidden = set()
    for ax in fig.axes:
        for axis in ax._axis_map.values():
            shown = set(axis._update_ticks())             # the ticks matplotlib draws (inside the view)
            for tick in axis.get_major_ticks() + axis.get_minor_ticks():
                if tick not in shown:
                    hidden.update((id(tick.label1), id(tick.label2)))
    return [t for t in fig.findobj(Text)
            if t.get_visible() and t.get_text().strip() and id(t) not in hidden]


def figure_layout(fig) -> dict:
    """The layout of ``fig`` as drawn by the Agg renderer: pixel size, legend entries, every
    visible text's string and bounding box, and every framed axes' box (pixels from the
    bottom-left corner). The layout tests (tests/test_figure_layout.py) compare it with the
    committed records in tests/layouts/ and check that no two texts overlap and no text
    crosses an axes frame."""
    from matplotlib.backends.backend_agg import FigureCanvasAgg
    from matplotlib.text import Text
    canvas = FigureCanvasAgg(fig)
    canvas.draw()
    renderer = canvas.get_renderer()

    def box(bb):
        return [round(float(bb.x0), 1), round(float(bb.y0), 1), round(float(bb.x1), 1), round(float(bb.y1), 1)]

    legends = list(fig.legends) + [ax.get_legend() for ax in fig.axes if ax.get_legend() is not None]
    return {"size_px": [int(round(fig.get_figwidth() * fig.dpi)), int(round(fig.get_figheight() * fig.dpi))],
            "legend": [t.get_text() for lg in legends for t in lg.get_texts()],
            "frames": [box(ax.get_window_extent(renderer)) for ax in fig.axes if ax.axison and ax.get_visible()],
            # Text's own extent: an annotation's leader line is no text
            "texts": [{"text": t.get_text(), "bbox": box(Text.get_window_extent(t, renderer))}
                      for t in _drawn_texts(fig)]}


def layout_faults(layout: dict, tolerance: float = 0.5) -> list[str]:
    """What is wrong with a :func:`figure_layout`: texts that run off the figure, pairs of
    texts whose boxes overlap, texts that cross an axes frame (partly inside, partly
    outside). [] for a clean figure."""
    def overlap(a, b):
        return (min(a[2], b[2]) - max(a[0], b[0]) > tolerance) and (min(a[3], b[3]) - max(a[1], b[1]) > tolerance)

    def inside(a, f):
        return a[0] >= f[0] - tolerance and a[1] >= f[1] - tolerance and a[2] <= f[2] + tolerance \
            and a[3] <= f[3] + tolerance

    faults = []
    texts = layout["texts"]
    w, h = layout["size_px"]
    for a in texts:
        x0, y0, x1, y1 = a["bbox"]
        if x0 < -tolerance or y0 < -tolerance or x1 > w + tolerance or y1 > h + tolerance:
            faults.append(f"{a['text']!r} runs off the figure ({w} x {h} px)")
    for i, a in enumerate(texts):
        for b in texts[i + 1:]:
            if overlap(a["bbox"], b["bbox"]):
                faults.append(f"{a['text']!r} overlaps {b['text']!r}")
        for f in layout["frames"]:
            if overlap(a["bbox"], f) and not inside(a["bbox"], f):
                faults.append(f"{a['text']!r} crosses the axes frame {f}")
    return faults
