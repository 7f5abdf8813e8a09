"""Summaries of a Result for people (rich tables) and for scripts (one JSON object).

:func:`summary_figures` computes every headline figure once; the rich table of
:func:`print_summary`, the plain lines of :func:`plain_summary` and the JSON of
``selfcon run --json`` / ``selfcon show --json`` are all views of that one dict.
Its ``summary`` entry is exactly the ``/summary`` group of the result file
(attributes, including ``warnings``).
"""
from __future__ import annotations

import json
import math
from typing import Any

import numpy as np

# "occupied": the one rule of selfcon.output.channels (>= 1 % of its channel and >= 1e8 cm^-2)
from selfcon.output.channels import (BAND_CARRIER, OCCUPIED_CM2, OCCUPIED_FRACTION, STATE_LABEL,  # noqa: E402
                                     occupied_states)  # noqa: E402
from selfcon.output.heading import heading_lines, override_list
from selfcon.output.numbers import fmt

BAND_LABELS = {"electron": "electron", "heavy_hole": "heavy hole", "light_hole": "light hole",
               "x2_electron": "X/Δ along z", "x4_electron": "X/Δ in plane", "l_electron": "L valleys"}
#: bands listed only when a result has them (physics.quantum_valleys)
OPTIONAL_BANDS = ("x2_electron", "x4_electron", "l_electron")


def jsonable(value):
    """``value`` made JSON-safe, recursively: numpy scalars -> Python numbers, NaN and inf ->
    None, arrays and tuples -> lists, dict keys -> strings (every JSON selfcon prints)."""
    if isinstance(value, dict):
        return {str(k): jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [jsonable(v) for v in value]
    if isinstance(value, np.ndarray):
        return [jsonable(v) for v in value.tolist()]
    if isinstance(value, (np.bool_, bool)):
        return bool(value)
    if isinstance(value, np.integer):
        return int(value)
    if isinstance(value, (float, np.floating)):
        v = float(value)
        return v if math.isfinite(v) else None
    return value


def _meV(v):
    v = float(v) * 1e3
    return v if math.isfinite(v) else None


def channel_rows(result) -> list[dict]:
    """Every channel of the result (/channels), figures in display units (meV, cm^-2)."""
    out = []
    for row in result.channels or []:
        out.append({"name": str(row.get("name", "")), "carrier": str(row.get("carrier", "")),
                    "top_nm": float(row.get("top_nm", math.nan)),
                    "bottom_nm": float(row.get("bottom_nm", math.nan)),
                    "sheet_density_cm2": float(row.get("sheet_density", 0.0)),
                    "ground_energy_meV": _meV(row.get("ground_energy", math.nan)),
                    "spacing_meV": _meV(row.get("spacing", math.nan)),
                    "occupied_subbands": int(row.get("occupied_subbands", 0)),
                    "centroid_nm": float(row.get("centroid_nm", math.nan)),
                    "in_plane_mass_m0": float(row.get("in_plane_mass", math.nan)),
                    "layer": str(row.get("layer", "")), "named": bool(row.get("named", False)),
                    "main": bool(row.get("main", False))})
    return out


def channel_figures(result) -> dict | None:
    """The main channel (selfcon.output.channels): its name, the layer holding most of its
    carriers, carrier kind, sheet density, band-edge extremum relative to EF and own subband
    figures.  Returns ``{"name", "layer", "index", "carrier", "sheet_density_cm2",
    "ef_minus_ec_meV" | "ev_minus_ef_meV", "ground_energy_meV", "spacing_meV",
    "occupied_subbands"}``, or None without channels.  A result without /channels (an older
    file) falls back to the layer holding most electrons (or holes).
    """
    if not result.layers:
        return None
    s = result.summary
    names = [str(row.get("name", i)) for i, row in enumerate(result.layers)]
    main = result.main_channel if result.channels else None
    if result.channels:
        if main is None:
            return None
        layer = str(main.get("layer", ""))
        out = {"name": str(main["name"]), "layer": layer,
               "index": names.index(layer) if layer in names else None, "carrier": str(main["carrier"]),
               "sheet_density_cm2": float(main["sheet_density"]),
               "ground_energy_meV": _meV(main.get("ground_energy", math.nan)),
               "spacing_meV": _meV(main.get("spacing", math.nan)),
               "occupied_subbands": int(main.get("occupied_subbands", 0))}
        if main["carrier"] == "electron":
            out["ef_minus_ec_meV"] = _meV(s.get("ef_minus_ec_channel_eV", math.nan))
        else:
            out["ev_minus_ef_meV"] = _meV(s.get("ev_minus_ef_channel_eV", math.nan))
        return out
    names = [str(row.get("name", i)) for i, row in enumerate(result.layers)]
    if s.get("channel_layer") in names:             # the solver's own figures (/summary)
        i = names.index(s["channel_layer"])
        n_i = float(result.layers[i].get("electron_sheet_density_cm2", 0.0) or 0.0)
        p_i = float(result.layers[i].get("hole_sheet_density_cm2", 0.0) or 0.0)
        electrons = float(s.get("electron_sheet_density_cm2", 0.0) or 0.0) > 0.0
        if electrons and "ef_minus_ec_channel_eV" in s:
            return {"layer": names[i], "index": i, "carrier": "electron", "sheet_density_cm2": n_i,
                    "ef_minus_ec_meV": _meV(s["ef_minus_ec_channel_eV"])}
        if not electrons and "ev_minus_ef_channel_eV" in s:
            return {"layer": names[i], "index": i, "carrier": "hole", "sheet_density_cm2": p_i,
                    "ev_minus_ef_meV": _meV(s["ev_minus_ef_channel_eV"])}
    idx = np.asarray(result.layer_index)
    for carrier, key in (("electron", "electron_sheet_density_cm2"), ("hole", "hole_sheet_density_cm2")):
        dens = np.array([float(row.get(key, 0.0) or 0.0) for row in result.layers])
        if dens.size == 0 or not np.any(dens > OCCUPIED_CM2):
            continue
        i = int(np.argmax(dens))
        mask = idx == i
        out = {"layer": str(result.layers[i].get("name", i)), "index": i, "carrier": carrier,
               "sheet_density_cm2": float(dens[i])}
        if carrier == "electron":
            ec = np.asarray(result.profile["conduction_band"])[mask]
            out["ef_minus_ec_meV"] = float(-ec.min() * 1e3) if ec.size else None
        else:
            ev = np.asarray(result.profile["valence_band"])[mask]
            out["ev_minus_ef_meV"] = float(ev.max() * 1e3) if ev.size else None
        return out
    return None


def subband_rows(result) -> list[dict]:
    """Every bound state: band, index (0 = lowest), energy relative to EF (meV), population (cm^-2)."""
    rows = []
    fermi = {"electron": float(result.summary.get("electron_fermi_level_eV", 0.0) or 0.0),
             "hole": float(result.summary.get("hole_fermi_level_eV", 0.0) or 0.0)}
    for band, sb in result.subbands.items():
        occupied = occupied_states(band, result.subbands, result.channels)
        hole = BAND_CARRIER.get(band, "electron") == "hole"
        ef = fermi["hole" if hole else "electron"]
        names = [str(c.get("name", "")) for c in result.channels]
        for k in range(np.asarray(sb.energy).size):
            ch = int(sb.channel[k])
            rows.append({"band": band, "index": k, "energy_meV": float(sb.energy[k]) * 1e3,
                         "occupation_cm2": float(sb.occupation[k]),
                         "in_plane_mass_m0": float(sb.in_plane_mass[k]), "region": int(sb.region[k]),
                         "channel": names[ch] if 0 <= ch < len(names) else None,
                         "bound": bool(sb.bound[k]), "occupied": bool(occupied[k]),
                         # below E_F in the carrier's own sense (a hole level above the holes' E_F)
                         "below_fermi": bool(float(sb.energy[k]) > ef if hole else float(sb.energy[k]) < ef)})
    return rows


#: states listed per band in the summary (further occupied ones are listed too)
LOWEST_STATES = 3
#: transitions listed in the summary: among the lowest LOWEST_STATES states of each band,
#: with an overlap of at least this (the others are in /transitions)
TRANSITION_MIN_OVERLAP = 1e-3
SUMMARY_TRANSITIONS = 6


def state_label(band: str, index: int) -> str:
    """E0, HH1, LH0, ...: the label of a state in tables (0-based, as /subbands)."""
    return STATE_LABEL.get(band, band) + str(index)


def listed_states(rows) -> list[dict]:
    """The subband rows the summary lists: per band its lowest LOWEST_STATES states and
    every further occupied one."""
    return [r for r in rows if r["index"] < LOWEST_STATES or r["occupied"]]


def transition_rows(result) -> list[dict]:
    """The strongest low transitions: between the lowest LOWEST_STATES electron states and the
    lowest LOWEST_STATES states of each hole band, overlap >= TRANSITION_MIN_OVERLAP, lowest
    energy first, at most SUMMARY_TRANSITIONS."""
    t = result.transitions or {}
    if not len(t.get("energy", [])):
        return []
    out = []
    for ei, band, hi, en, ov in zip(t["electron_state"], t["hole_band"], t["hole_state"], t["energy"],
                                    t["overlap"]):
        if ei < LOWEST_STATES and hi < LOWEST_STATES and ov >= TRANSITION_MIN_OVERLAP:
            out.append({"electron_state": int(ei), "hole_band": str(band), "hole_state": int(hi),
                        "label": f"{state_label('electron', int(ei))}-{state_label(str(band), int(hi))}",
                        "energy_eV": float(en), "wavelength_nm": 1239.841984 / float(en) if en > 0 else None,
                        "overlap": float(ov)})
    out.sort(key=lambda r: r["energy_eV"])
    return out[:SUMMARY_TRANSITIONS]


#: the single-band hole rows a multiband result leaves out of the subband table
HOLE_ROWS = ("heavy_hole", "light_hole")
#: multiband hole states listed in summaries: the occupied ones (>= this, cm^-2) and at least
#: the lowest pair
KP_LISTED_CM2 = 1e8


def hole_kp_rows(result) -> list[dict]:
    """The multiband hole states of a result (/subbands/hole_kp) a summary lists: every state
    holding at least KP_LISTED_CM2, and at least the lowest pair; [] for parabolic holes."""
    h = getattr(result, "hole_kp", None) or {}
    if not h:
        return []
    occ = np.asarray(h["occupation"], dtype=float)
    names = [str(c.get("name", "")) for c in result.channels]
    keep = np.flatnonzero(occ >= KP_LISTED_CM2)
    if keep.size < 2:
        keep = np.arange(min(2, occ.size))
    rows = []
    for i in keep:
        i = int(i)
        ch = int(h["channel"][i]) if "channel" in h else -1
        rows.append({"index": i, "energy_meV": 1e3 * float(h["energy"][i]),
                     "channel": names[ch] if 0 <= ch < len(names) else None,
                     "occupation_cm2": float(occ[i]),
                     "mass_band_edge_m0": float(h["mass_band_edge"][i]),
                     "mass_fermi_m0": float(h["mass_fermi"][i]),
                     "k_fermi_nm": float(h["k_fermi"][i]),
                     "spin_splitting_meV": 1e3 * float(h["spin_splitting"][i])})
    return rows


def summary_figures(result, output: str | None = None) -> dict[str, Any]:
    """The headline figures of a result as one plain dict (JSON-ready)."""
    layers = [{"index": i, "name": str(row.get("name", i)), "material": str(row.get("material", "")),
               "electron_sheet_density_cm2": float(row.get("electron_sheet_density_cm2", 0.0) or 0.0),
               "hole_sheet_density_cm2": float(row.get("hole_sheet_density_cm2", 0.0) or 0.0)}
              for i, row in enumerate(result.layers)]
    summary = dict(result.summary)
    summary["warnings"] = list(result.warnings)
    total_n = summary.get("electron_sheet_density_cm2", sum(r["electron_sheet_density_cm2"] for r in layers))
    total_p = summary.get("hole_sheet_density_cm2", sum(r["hole_sheet_density_cm2"] for r in layers))
    subbands = subband_rows(result)
    occupied = sum(1 for r in subbands if r["occupied"])
    below = sum(1 for r in subbands if r["below_fermi"])
    kp = getattr(result, "hole_kp", None) or {}
    if kp:             # multiband holes: their subbands are Kramers pairs (rows 2p, 2p + 1)
        occupied += sum(int(c.get("occupied_subbands", 0)) for c in result.channels
                        if c.get("carrier") == "hole")
        ef_h = float(summary.get("hole_fermi_level_eV", 0.0))
        below += int(np.sum(np.asarray(kp["energy"], dtype=float)[0::2] > ef_h))
    figures = {
        "title": result.title,
        "heading": heading_lines(result),
        "overrides": override_list(result),
        "converged": bool(result.converged),
        "message": result.message,
        "iterations": int(result.iterations),
        "residual_V": float(result.residual),
        "wall_time_s": result.provenance.get("wall_time_s"),
        "temperature_K": float(result.temperature),
        "output": output,
        "total": {"electron_sheet_density_cm2": total_n, "hole_sheet_density_cm2": total_p},
        "layers": layers,
        "occupied_subbands": occupied,
        "below_fermi_subbands": below,
        "subbands": subbands,
        "channel": channel_figures(result),
        "channels": channel_rows(result),
        "transitions": transition_rows(result),
        "hole_kp": hole_kp_rows(result),
        "warnings": list(result.warnings),
        "summary": summary,
    }
    return jsonable(figures)


def to_json(figures: dict) -> str:
    return json.dumps(jsonable(figures), indent=2, ensure_ascii=False)


# --------------------------------------------------------------------------- formatting

def sci(value, digits=3) -> str:
    """A sheet density in cm^-2 by the one rule of selfcon.output.numbers (below 1e3 -> '0')."""
    return fmt(value, "sheet")


def _status_line(fig) -> str:
    wall = fig.get("wall_time_s")
    wall_s = f", {fmt(wall, 's')} s" if isinstance(wall, (int, float)) else ""
    state = "converged" if fig["converged"] else "NOT converged"
    return (f"{state}: {fig['iterations']} iterations, final residual {fmt(fig['residual_V'], 'residual')} V"
            f"{wall_s}")


def _channel_line(fig) -> str | None:
    ch = fig.get("channel")
    if not ch:
        return ("no channel: no carrier kind is confined anywhere (each holds less than 1e8 cm-2)"
                if fig.get("layers") else None)
    name = ch.get("name", ch["layer"])
    where = f"in layer '{ch['layer']}'" if ch.get("layer") else ""
    if ch.get("index") is not None and "name" not in ch:           # an older result file
        where = f"(layer {ch['index']})"
    if ch["carrier"] == "electron":
        v = ch.get("ef_minus_ec_meV")
        head = f"main channel '{name}' {where}: n_s = {sci(ch['sheet_density_cm2'])} cm-2"
        edge = f", E_F - Ec,min = {fmt(v, 'meV', sign=True)} meV" if v is not None else ""
    else:
        v = ch.get("ev_minus_ef_meV")
        head = f"main channel '{name}' {where} (holes): p_s = {sci(ch['sheet_density_cm2'])} cm-2"
        edge = f", Ev,max - E_F = {fmt(v, 'meV', sign=True)} meV" if v is not None else ""
    sub = ""
    if ch.get("ground_energy_meV") is not None:
        sub = f", E0 - E_F = {fmt(ch['ground_energy_meV'], 'meV', sign=True)} meV"
        if ch.get("spacing_meV") is not None:
            sub += f", E1 - E0 = {fmt(ch['spacing_meV'], 'meV')} meV"
    return " ".join((head + edge + sub).split())


def occupied_text(fig) -> str:
    """``2 occupied subbands (1 below E_F)``: the one "occupied" rule of selfcon.output.channels
    (>= 1 % of its channel and >= 1e8 cm-2) and how many levels lie below the Fermi level."""
    n, below = fig["occupied_subbands"], fig.get("below_fermi_subbands", 0)
    return f"{n} occupied subband{'' if n == 1 else 's'} ({below} below E_F)"


def plain_summary(fig) -> list[str]:
    """A few plain lines (for --quiet): heading, status, total densities, channel, warnings."""
    lines = list(fig.get("heading") or [fig["title"]])
    lines += [_status_line(fig),
              f"total sheet density: electrons {sci(fig['total']['electron_sheet_density_cm2'])} cm-2, "
              f"holes {sci(fig['total']['hole_sheet_density_cm2'])} cm-2, {occupied_text(fig)}"]
    ch = _channel_line(fig)
    if ch:
        lines.append(ch)
    kp_line = _hole_kp_line(fig)
    if kp_line:
        lines.append(kp_line)
    if fig.get("output"):
        lines.append(f"result written to {fig['output']}")
    lines.extend(f"warning: {w}" for w in fig["warnings"])
    return lines


def _hole_kp_line(fig) -> str | None:
    """``multiband holes: 2 occupied states, the first at E - E_F = +2.8 meV with m(E_F) = 0.67
    m0``, or None for parabolic holes."""
    rows = fig.get("hole_kp") or []
    if not rows:
        return None
    n = sum(1 for r in rows if r["occupation_cm2"] >= KP_LISTED_CM2)
    r = rows[0]
    return (f"multiband holes: {n} occupied state{'' if n == 1 else 's'} (one spin branch each), "
            f"the first at E - E_F = {fmt(r['energy_meV'], 'meV', sign=True)} meV with in-plane mass "
            f"{fmt(r['mass_fermi_m0'], 'mass')} m0 at E_F")


def print_summary(fig, console) -> None:
    """The run summary as rich tables on ``console`` (no colour codes when it is not a terminal)."""
    from rich.table import Table
    from rich.text import Text

    head = list(fig.get("heading") or [fig["title"]])
    console.print(Text(head[0], style="bold"))
    for line in head[1:]:
        console.print(line)
    console.print(Text(_status_line(fig), style="green" if fig["converged"] else "bold red"))
    if not fig["converged"] and fig.get("message"):
        console.print(Text(fig["message"], style="red"))

    t = Table(title="Sheet density per layer", title_justify="left", show_footer=True)
    t.add_column("#", justify="right", footer="")
    t.add_column("layer", footer="total")
    t.add_column("material", footer="")
    t.add_column("electrons (cm⁻²)", justify="right",
                 footer=sci(fig["total"]["electron_sheet_density_cm2"]))
    t.add_column("holes (cm⁻²)", justify="right", footer=sci(fig["total"]["hole_sheet_density_cm2"]))
    ch = fig.get("channel") or {}
    for row in fig["layers"]:
        style = "bold" if ch and row["index"] == ch.get("index") else None
        t.add_row(str(row["index"]), row["name"], row["material"], sci(row["electron_sheet_density_cm2"]),
                  sci(row["hole_sheet_density_cm2"]), style=style)
    console.print(t)

    if fig.get("channels"):
        c = Table(title="Channels (* main; E0 - E_F in the carrier's own sense: negative = occupied)",
                  title_justify="left")
        c.add_column("channel")
        c.add_column("carrier")
        c.add_column("depth (nm)", justify="right")
        c.add_column("sheet density (cm⁻²)", justify="right")
        c.add_column("E0 - E_F (meV)", justify="right")
        c.add_column("E1 - E0 (meV)", justify="right")
        c.add_column("occupied", justify="right")
        c.add_column("m∥ (m0)", justify="right")
        for r in fig["channels"]:
            c.add_row(r["name"] + (" *" if r["main"] else ""), r["carrier"],
                      f"{fmt(r['top_nm'], 'nm')}–{fmt(r['bottom_nm'], 'nm')}", sci(r["sheet_density_cm2"]),
                      fmt(r["ground_energy_meV"], "meV", sign=True), fmt(r["spacing_meV"], "meV"),
                      str(r["occupied_subbands"]), fmt(r["in_plane_mass_m0"], "mass"),
                      style="bold" if r["main"] else None)
        console.print(c)

    s = Table(title=f"Subbands (lowest {LOWEST_STATES} per band and every occupied one)", title_justify="left")
    s.add_column("state")
    s.add_column("band")
    s.add_column("E - E_F (meV)", justify="right")
    s.add_column("population (cm⁻²)", justify="right")
    s.add_column("channel")
    s.add_column("m∥ (m0)", justify="right")
    listed = listed_states(fig["subbands"])
    for band in BAND_LABELS:
        rows = [r for r in listed if r["band"] == band]
        if not rows and (band in OPTIONAL_BANDS or (fig.get("hole_kp") and band in HOLE_ROWS)):
            continue           # multiband holes: listed in their own table below
        if not rows:
            s.add_row("–", BAND_LABELS[band], "none bound", "", "", "")
        for r in rows:
            s.add_row(state_label(band, r["index"]), BAND_LABELS[band], fmt(r["energy_meV"], "meV", sign=True),
                      sci(r["occupation_cm2"]), r.get("channel") or "–", fmt(r["in_plane_mass_m0"], "mass"),
                      style="bold" if r["occupied"] else None)
    console.print(s)
    console.print(f"{occupied_text(fig)}; occupied: at least {OCCUPIED_FRACTION:.0%} of its channel's "
                  f"carriers and at least {OCCUPIED_CM2:.0e} cm-2".replace("e+0", "e"))

    if fig.get("hole_kp"):
        k = Table(title="Multiband hole states (/subbands/hole_kp; one spin branch each)",
                  title_justify="left")
        for col in ("state", "E - E_F (meV)", "population (cm⁻²)", "channel", "m∥ at k=0 (m0)",
                    "m∥ at E_F (m0)", "k_F (nm⁻¹)", "spin splitting (meV)"):
            k.add_column(col, justify="left" if col == "state" else "right")
        for r in fig["hole_kp"]:
            k.add_row(f"H{r['index']}", fmt(r["energy_meV"], "meV", sign=True), sci(r["occupation_cm2"]),
                      r.get("channel") or "–",
                      fmt(r["mass_band_edge_m0"], "mass"), fmt(r["mass_fermi_m0"], "mass"),
                      fmt(r["k_fermi_nm"], "plain"), fmt(r["spin_splitting_meV"], "plain"))
        console.print(k)

    if fig.get("transitions"):
        t = Table(title="Interband transitions (overlap ≥ 0.001; all pairs in /transitions)",
                  title_justify="left")
        t.add_column("pair")
        t.add_column("energy (eV)", justify="right")
        t.add_column("wavelength (nm)", justify="right")
        t.add_column("overlap |⟨e|h⟩|²", justify="right")
        for r in fig["transitions"]:
            t.add_row(r["label"], fmt(r["energy_eV"], "eV"), fmt(r["wavelength_nm"], "nm"),
                      fmt(r["overlap"], "fraction"))
        console.print(t)
    line = _channel_line(fig)
    if line:
        console.print(line)
    if fig.get("output"):
        console.print(f"result written to {fig['output']}")
    for w in fig["warnings"]:
        console.print(Text(f"warning: {w}", style="yellow"))
