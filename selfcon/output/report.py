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
from selfcon.output.channels import OCCUPIED_CM2, occupied_states  # noqa: E402

BAND_LABELS = {"electron": "electron", "heavy_hole": "heavy hole", "light_hole": "light hole"}


def _clean(value):
    """JSON-safe: numpy scalars -> Python, NaN/inf -> None, arrays -> lists."""
    if isinstance(value, dict):
        return {str(k): _clean(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_clean(v) for v in value]
    if isinstance(value, np.ndarray):
        return [_clean(v) for v in value.tolist()]
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


def channel_figures(result) -> dict | None:
    """Where the carriers sit: the layer holding most electrons (or holes, if there are no electrons).

    Returns ``{"layer", "index", "carrier", "sheet_density_cm2", "ef_minus_ec_meV" | "ev_minus_ef_meV"}``
    with the band edge taken at its extremum inside that layer (EF = 0 eV), or None without carriers.
    """
    if not result.layers:
        return None
    s = result.summary
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
    for band, sb in result.subbands.items():
        occupied = occupied_states(band, result.subbands, result.channels)
        names = [str(c.get("name", "")) for c in result.channels]
        for k in range(np.asarray(sb.energy).size):
            ch = int(sb.channel[k])
            rows.append({"band": band, "index": k, "energy_meV": float(sb.energy[k]) * 1e3,
                         "occupation_cm2": float(sb.occupation[k]),
                         "in_plane_mass_m0": float(sb.in_plane_mass[k]), "region": int(sb.region[k]),
                         "channel": names[ch] if 0 <= ch < len(names) else None,
                         "bound": bool(sb.bound[k]), "occupied": bool(occupied[k])})
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
    figures = {
        "title": result.title,
        "converged": bool(result.converged),
        "message": result.message,
        "iterations": int(result.iterations),
        "residual_V": float(result.residual),
        "wall_time_s": result.provenance.get("wall_time_s"),
        "temperature_K": float(result.temperature),
        "output": output,
        "total": {"electron_sheet_density_cm2": total_n, "hole_sheet_density_cm2": total_p},
        "layers": layers,
        "occupied_subbands": sum(1 for r in subbands if r["occupied"]),
        "subbands": subbands,
        "channel": channel_figures(result),
        "warnings": list(result.warnings),
        "summary": summary,
    }
    return _clean(figures)


def to_json(figures: dict) -> str:
    return json.dumps(_clean(figures), indent=2, ensure_ascii=False)


# --------------------------------------------------------------------------- formatting

def sci(value, digits=3) -> str:
    """4.12e+11 -> '4.12e11'; 0 -> '0'; None -> '–'."""
    if value is None:
        return "–"
    v = float(value)
    if v == 0.0:
        return "0"
    if not math.isfinite(v):
        return str(v)
    mant, exp = f"{v:.{digits - 1}e}".split("e")
    return f"{mant}e{int(exp)}"


def _status_line(fig) -> str:
    wall = fig.get("wall_time_s")
    wall_s = f", {wall:.2f} s" if isinstance(wall, (int, float)) else ""
    state = "converged" if fig["converged"] else "NOT converged"
    return (f"{state}: {fig['iterations']} iterations, final residual {sci(fig['residual_V'])} V"
            f"{wall_s}")


def _channel_line(fig) -> str | None:
    ch = fig.get("channel")
    if not ch:
        return None
    if ch["carrier"] == "electron":
        v = ch.get("ef_minus_ec_meV")
        return (f"channel '{ch['layer']}' (layer {ch['index']}): E_F - Ec,min = "
                f"{v:+.1f} meV" if v is not None else f"channel '{ch['layer']}'")
    v = ch.get("ev_minus_ef_meV")
    return (f"hole channel '{ch['layer']}' (layer {ch['index']}): Ev,max - E_F = "
            f"{v:+.1f} meV" if v is not None else f"hole channel '{ch['layer']}'")


def plain_summary(fig) -> list[str]:
    """A few plain lines (for --quiet): status, total densities, channel, warnings."""
    lines = [_status_line(fig),
             f"total sheet density: electrons {sci(fig['total']['electron_sheet_density_cm2'])} cm-2, "
             f"holes {sci(fig['total']['hole_sheet_density_cm2'])} cm-2, "
             f"{fig['occupied_subbands']} occupied subband(s)"]
    ch = _channel_line(fig)
    if ch:
        lines.append(ch)
    if fig.get("output"):
        lines.append(f"result written to {fig['output']}")
    lines.extend(f"warning: {w}" for w in fig["warnings"])
    return lines


def print_summary(fig, console) -> None:
    """The run summary as rich tables on ``console`` (no colour codes when it is not a terminal)."""
    from rich.table import Table
    from rich.text import Text

    console.print(Text(fig["title"], style="bold"))
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

    occupied = [r for r in fig["subbands"] if r["occupied"]]
    if occupied:
        s = Table(title="Occupied subbands", title_justify="left")
        s.add_column("band")
        s.add_column("#", justify="right")
        s.add_column("E - E_F (meV)", justify="right")
        s.add_column("population (cm⁻²)", justify="right")
        s.add_column("m∥ (m0)", justify="right")
        for r in occupied:
            s.add_row(BAND_LABELS.get(r["band"], r["band"]), str(r["index"]), f"{r['energy_meV']:+.2f}",
                      sci(r["occupation_cm2"]), f"{r['in_plane_mass_m0']:.4g}")
        console.print(s)
    else:
        console.print("no occupied subband")
    line = _channel_line(fig)
    if line:
        console.print(line)
    if fig.get("output"):
        console.print(f"result written to {fig['output']}")
    for w in fig["warnings"]:
        console.print(Text(f"warning: {w}", style="yellow"))
