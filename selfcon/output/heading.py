"""Headings that say what was run: the temperature, the bias and every ``--set`` override.

The text summary, ``--quiet`` lines and the band diagram all start with
:func:`heading_lines` of the result, so a run with ``--set temperature=77`` never shows
only the deck's own title ("... 4 K"): whenever an override was applied, the title is
shown as ``deck title: ...`` and a line ``set: temperature = 77 K (deck: 4); spacer.thickness
= 15 nm (deck: 20)`` follows (README.md, "Command line").

The override notes are made once, at solve time, by :func:`override_notes` (which knows the
deck) and travel in the result's provenance as ``overrides`` (a root attribute of the file).
"""
from __future__ import annotations

import functools
import re

from selfcon.output.numbers import fmt

#: provenance key of the override notes (a root attribute of the result file)
OVERRIDES_KEY = "overrides"

_LAYER_KEY = re.compile(r"^layer\[(\d+)\]\.(\w+)$")


def _value_text(v, unit: str) -> str:
    if isinstance(v, bool) or v is None:
        return str(v).lower() if isinstance(v, bool) else "unset"
    if isinstance(v, (int, float)):
        text = re.sub(r"e([+-])0*(\d)", lambda m: "e" + m.group(1).replace("+", "") + m.group(2), f"{v:.6g}")
        return f"{text} {unit}" if unit and unit not in ("-", "1") else text
    if isinstance(v, (list, tuple)):
        return "[" + ", ".join(_value_text(x, "") for x in v) + "]" + (
            f" {unit}" if unit and unit not in ("-", "1") else "")
    return f'"{v}"' if isinstance(v, str) else str(v)


def _base_value(raw: dict, key: str):
    """The value of a canonical override key in the deck as written (None when unset)."""
    m = _LAYER_KEY.match(key)
    if m:
        layers = raw.get("layer") or []
        i = int(m.group(1))
        return layers[i].get(m.group(2)) if i < len(layers) and isinstance(layers[i], dict) else None
    node = raw
    for part in key.split("."):
        if not isinstance(node, dict) or part not in node:
            return None
        node = node[part]
    return node


def _spec(key: str):
    from selfcon.input.deck import KEYS
    m = _LAYER_KEY.match(key)
    if m:
        return KEYS["layer"].get(m.group(2))
    parts = key.split(".")
    if len(parts) == 1:
        return KEYS[""].get(parts[0])
    if parts[0] == "material" and len(parts) == 3:
        return KEYS["material"].get(parts[2])
    return KEYS.get(parts[0], {}).get(parts[-1])


@functools.lru_cache(maxsize=8)
def _deck_as_written(source: str) -> dict:
    """The TOML tables of a deck's text as written ({} if it does not parse), parsed once per
    text: every solve of an overridden deck (a study's points, a --set run) asks for its
    notes.  Shared: read only."""
    import tomllib
    try:
        return tomllib.loads(source) if source else {}
    except tomllib.TOMLDecodeError:
        return {}


def override_notes(deck) -> list[str]:
    """One note per override of ``deck`` (``--set`` or a study's varied value):
    ``spacer.thickness = 15 nm (deck: 20)``, layers by name; [] for a deck as written."""
    if not getattr(deck, "overrides", ()):
        return []
    raw = _deck_as_written(deck._source) if isinstance(deck._source, str) else {}
    notes = []
    for key, _ in deck.overrides:
        spec = _spec(key)
        unit = getattr(spec, "unit", "") if spec is not None else ""
        m = _LAYER_KEY.match(key)
        label = f"{deck.layers[int(m.group(1))].name}.{m.group(2)}" if m else key
        value = _effective(deck, key)
        base = _base_value(raw, key)
        if base is None and spec is not None:
            default = getattr(spec, "default", None)
            base_text = f"default {_value_text(default, '')}" if isinstance(default, (int, float, str)) \
                and not isinstance(default, bool) else "unset"
        else:
            base_text = _value_text(base, "")
        notes.append(f"{label} = {_value_text(value, unit)} (deck: {base_text})")
    return notes


def _effective(deck, key):
    m = _LAYER_KEY.match(key)
    return deck.get(f"layer.{m.group(1)}.{m.group(2)}" if m else key)


def override_list(result) -> list[str]:
    """The override notes a result file carries ([] for a deck run as written)."""
    notes = (result.provenance or {}).get(OVERRIDES_KEY)
    if notes is None:
        return []
    if isinstance(notes, str):
        return [notes] if notes else []
    return [str(n) for n in list(notes)]


def _contacts(result) -> dict:
    import tomllib
    try:
        return tomllib.loads(result.deck_text or "")
    except (tomllib.TOMLDecodeError, TypeError):
        return {}


def conditions(result) -> str:
    """``T = 77 K, gate bias -0.300 V`` (the bias of each contact that takes one), and the
    physics beyond Hartree and parabolic bands when the deck asks for it."""
    parts = [f"T = {fmt(result.temperature, 'K')} K"]
    deck = _contacts(result)
    for side, label in (("surface", "gate"), ("substrate", "back gate")):
        c = deck.get(side) or {}
        if c.get("contact") == "schottky" or (c.get("bias") not in (None, 0, 0.0)):
            bias = float(c.get("bias", 0.0) or 0.0)
            parts.append(f"{label} bias {fmt(bias, 'V', sign=True)} V")
    physics = deck.get("physics") or {}
    xc = physics.get("exchange_correlation", "none")
    if xc != "none":                        # beyond Hartree and parabolic bands: say so
        parts.append(XC_NAMES.get(xc, xc))
    if physics.get("nonparabolicity"):
        parts.append("nonparabolic Gamma electrons")
    holes = physics.get("hole_model", "parabolic")
    if holes in HOLE_MODEL_NAMES:
        parts.append(HOLE_MODEL_NAMES[holes])
    return ", ".join(parts)


#: how the heading names physics.hole_model (selfcon/solver/kp.py)
HOLE_MODEL_NAMES = {"kp4": "4x4 Luttinger-Kohn holes", "kp6": "6x6 Luttinger-Kohn holes"}


#: how the heading names physics.exchange_correlation (selfcon/solver/exchange.py)
XC_NAMES = {"lda": "LDA exchange-correlation (Hedin-Lundqvist)",
            "lda-gl": "LDA exchange-correlation (Gunnarsson-Lundqvist)"}


def heading_lines(result) -> list[str]:
    """The lines every summary and figure starts with: the title (``deck title: ...`` when
    overridden), the conditions (temperature, bias) and the overrides (``set: ...``)."""
    notes = override_list(result)
    title = str(result.title or "")
    lines = [f"deck title: {title}" if notes else title, conditions(result)]
    if notes:
        lines.append("set: " + "; ".join(notes))
    return lines
