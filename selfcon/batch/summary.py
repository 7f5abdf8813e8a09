"""The table's summary figures of one Result, computed in the worker beside the result's
file image (the Result itself never travels back to the coordinator)."""
from __future__ import annotations


def summarize(result) -> dict:
    """The table's summary figures of one Result (NaN where the result has none)."""
    s = result.summary or {}
    nan = float("nan")

    def num(x):
        try:
            return float(x)
        except (TypeError, ValueError):
            return nan

    out = {
        "electron_sheet_density_cm2": num(s.get("electron_sheet_density_cm2", nan)),
        "hole_sheet_density_cm2": num(s.get("hole_sheet_density_cm2", nan)),
    }
    el = result.subbands.get("electron") if result.subbands else None
    main = result.main_channel if result.channels else None
    if main is not None:                               # the main channel's own figures
        idx = [c.get("name") for c in result.channels].index(main["name"])
        own = sorted((float(e) for sb in result.subbands.values()
                      for e, c in zip(sb.energy, sb.channel) if c == idx),
                     reverse=main["carrier"] == "hole")
        out["channel_density_cm2"] = float(main["sheet_density"])
        out["E0_eV"] = own[0] if own else nan
        out["E1_eV"] = own[1] if len(own) > 1 else nan
    elif result.channels == [] and "main_channel" in s:  # a solve without any channel
        out.update(channel_density_cm2=0.0, E0_eV=nan, E1_eV=nan)
    elif el is not None and len(el.energy):            # results of earlier versions
        out["channel_density_cm2"] = num(s.get("channel_electron_sheet_density_cm2", sum(el.occupation)))
        out["E0_eV"] = float(el.energy[0])
        out["E1_eV"] = float(el.energy[1]) if len(el.energy) > 1 else nan
    else:
        out.update(channel_density_cm2=0.0 if el is not None else nan, E0_eV=nan, E1_eV=nan)
    out["E1_minus_E0_eV"] = num(s.get("E1_minus_E0_eV", nan))
    out["E0_minus_EF_eV"] = num(s.get("E0_minus_EF_eV", nan))
    out["warnings"] = len(result.warnings or [])
    holes = [result.subbands[b].energy for b in ("heavy_hole", "light_hole")
             if result.subbands and b in result.subbands and len(result.subbands[b].energy)]
    out["hole_E0_eV"] = float(max(e[0] for e in holes)) if holes else nan
    out["residual_V"] = num(result.residual)
    return out
