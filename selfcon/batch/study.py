"""Study files: a base deck plus variations, expanded into one deck per job.

A study is a TOML file of our own design::

    deck = "../hemt_4K.toml"      # base deck, relative to this file
    mode = "grid"                 # grid (every combination, default) | zip | sample
    continuation = false          # warm-start each job from its neighbour along `along`
    along = "surface.bias"        # the grid axis to follow (default: the last [[vary]])

    [fixed]                       # overrides applied to every job
    "solver.max_iterations" = 200

    [[vary]]
    path = "layer.spacer.thickness"
    values = [10.0, 20.0, 30.0]   # an explicit list, or a range:

    [[vary]]
    path = "layer.doping.sheet_donors"
    from = 1e12                   # inclusive
    to = 1e13                     # inclusive
    points = 4
    scale = "log"                 # linear (default) | log

Sample mode (growth tolerances) draws ``samples`` decks with ``seed``; every
``[[vary]]`` then names a distribution centred on the base deck's value::

    mode = "sample"
    samples = 100
    seed = 2024
    [[vary]]
    path = "layer.spacer.thickness"
    distribution = "normal"       # normal | uniform
    relative_sigma = 0.05         # or sigma = 1.0 (absolute, deck units)
    [[vary]]
    path = "layer.barrier.x"
    distribution = "uniform"
    low = 0.28                    # absolute bounds, or relative_half_width = 0.05
    high = 0.32

Expansion (``expand``) applies the overrides to the base deck, so a deck path
that does not exist is reported at once, with the study file and the key.
"""
from __future__ import annotations

import hashlib
import itertools
import json
import math
import tomllib
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from selfcon.errors import DeckError, SelfconInputError, StudyError

MODES = ("grid", "zip", "sample")
SCALES = ("linear", "log")
DISTRIBUTIONS = ("normal", "uniform")
TOP_KEYS = ("deck", "mode", "continuation", "along", "samples", "seed", "fixed", "vary", "title")
VARY_KEYS = {
    "grid": ("path", "values", "from", "to", "points", "scale"),
    "sample": ("path", "distribution", "sigma", "relative_sigma", "low", "high", "relative_half_width"),
}
VARY_KEYS["zip"] = VARY_KEYS["grid"]


@dataclass
class Vary:
    path: str
    values: list[Any] = field(default_factory=list)      # grid / zip (sample: filled at expansion)
    distribution: str | None = None
    params: dict[str, float] = field(default_factory=dict)


@dataclass
class Study:
    file: Path
    deck_file: Path
    mode: str
    vary: list[Vary]
    fixed: dict[str, Any]
    samples: int = 0
    seed: int | None = None
    continuation: bool = False
    along: str | None = None
    title: str = ""

    @property
    def paths(self) -> list[str]:
        return [v.path for v in self.vary]


@dataclass
class JobSpec:
    """One expanded job, as the queue stores it."""

    index: int                        # position in the study (table order)
    values: dict[str, Any]            # varied path -> value
    deck_text: str
    deck_hash: str
    neighbour: int | None = None      # index of the job to warm-start from (continuation)
    error: str | None = None          # the overrides do not make a valid deck (job is failed at once)


def _err(study_file, key, message, allowed=None):
    return StudyError(message, file=str(study_file), key=key, allowed=allowed)


def _number(study_file, key, value, *, positive=False):
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise _err(study_file, key, f"must be a number, got {value!r}")
    if not math.isfinite(value):
        raise _err(study_file, key, f"must be finite, got {value!r}")
    if positive and value <= 0:
        raise _err(study_file, key, f"must be > 0, got {value!r}")
    return value


def load_study(path) -> Study:
    """Read and check a study file (without touching the base deck)."""
    from selfcon.input.deck import parse_input, read_input
    path = Path(path)
    text = read_input(path, what="study", error=StudyError)
    return parse_study(parse_input(text, str(path), what="study", error=StudyError), path)


def _close(word, choices):
    import difflib
    m = difflib.get_close_matches(word, choices, n=1)
    return f"; did you mean {m[0]!r}?" if m else ""


def parse_study(data: dict, path: Path) -> Study:
    for key in data:
        if key not in TOP_KEYS:
            hint = _close(key, TOP_KEYS)
            from selfcon.input.deck import TOP_KEYS as DECK_KEYS
            if not hint and key in DECK_KEYS:
                hint = ("; this file is a deck (a study names its deck with 'deck = \"FILE\"'): "
                        "solve it with `selfcon run FILE`")
            raise _err(path, key, f"unknown key{hint}", ", ".join(TOP_KEYS))
    if "deck" not in data:
        raise _err(path, "deck", "missing: the base deck file, relative to the study file")
    if not isinstance(data["deck"], str) or not data["deck"]:
        raise _err(path, "deck", "must be a file name (string)")
    deck_file = (path.parent / data["deck"]).resolve()
    mode = data.get("mode", "grid")
    if mode not in MODES:
        raise _err(path, "mode", f"unknown mode {mode!r}", " | ".join(MODES))

    fixed = data.get("fixed", {})
    if not isinstance(fixed, dict):
        raise _err(path, "fixed", "must be a table of PATH = VALUE overrides")
    for k, v in fixed.items():
        if isinstance(v, dict):
            raise _err(path, f"fixed.{k}", "quote dotted paths: \"layer.spacer.thickness\" = 20.0")

    raw = data.get("vary", [])
    if not isinstance(raw, list) or not raw or not all(isinstance(r, dict) for r in raw):
        raise _err(path, "vary", "needs at least one [[vary]] table")
    vary = []
    seen = set()
    for i, r in enumerate(raw):
        key = f"vary[{i}]"
        allowed = VARY_KEYS[mode]
        for k in r:
            if k not in allowed:
                raise _err(path, f"{key}.{k}", f"not allowed in {mode} mode{_close(k, allowed)}", ", ".join(allowed))
        p = r.get("path")
        if not isinstance(p, str) or not p:
            raise _err(path, f"{key}.path", "missing: a deck path such as \"layer.spacer.thickness\"")
        if p in seen:
            raise _err(path, f"{key}.path", f"{p!r} is varied twice")
        if p in fixed:
            raise _err(path, f"{key}.path", f"{p!r} is also in [fixed]")
        seen.add(p)
        if mode == "sample":
            vary.append(_parse_sample_vary(path, key, r))
        else:
            vary.append(Vary(p, _parse_values(path, key, r, mode)))

    samples, seed = 0, None
    if mode == "sample":
        if "samples" not in data:
            raise _err(path, "samples", "missing: the number of decks to draw in sample mode")
        samples = data["samples"]
        if isinstance(samples, bool) or not isinstance(samples, int) or samples < 1:
            raise _err(path, "samples", f"must be a whole number >= 1, got {samples!r}")
        if "seed" not in data:
            raise _err(path, "seed", "missing: sample mode needs a seed so the draws can be repeated")
        seed = data["seed"]
        if isinstance(seed, bool) or not isinstance(seed, int) or seed < 0:
            raise _err(path, "seed", f"must be a whole number >= 0, got {seed!r}")
    else:
        for k in ("samples", "seed"):
            if k in data:
                raise _err(path, k, "only used in sample mode", "mode = \"sample\"")
    if mode == "zip":
        lengths = {len(v.values) for v in vary}
        if len(lengths) > 1:
            raise _err(path, "vary", "zip mode needs lists of equal length, got "
                       + ", ".join(f"vary[{i}]: {len(v.values)}" for i, v in enumerate(vary)))

    continuation = data.get("continuation", False)
    if not isinstance(continuation, bool):
        raise _err(path, "continuation", "must be true or false")
    along = data.get("along")
    if along is not None:
        if not continuation:
            raise _err(path, "along", "only used with continuation = true")
        if along not in seen:
            raise _err(path, "along", f"{along!r} is not a varied path", ", ".join(v.path for v in vary))
    if continuation:
        if mode == "sample":
            raise _err(path, "continuation", "needs a grid or zip axis, not sample mode", "mode = \"grid\" | \"zip\"")
        along = along or vary[-1].path
    title = data.get("title", "")
    if not isinstance(title, str):
        raise _err(path, "title", "must be a string")
    return Study(path, deck_file, mode, vary, dict(fixed), samples, seed, continuation, along, title)


def _parse_values(path, key, r, mode="grid"):
    has_list = "values" in r
    rng_keys = [k for k in ("from", "to", "points", "scale") if k in r]
    if has_list and rng_keys:
        raise _err(path, f"{key}.{rng_keys[0]}", "give either values = [...] or from/to/points, not both")
    if has_list:
        values = r["values"]
        if not isinstance(values, list) or not values:
            raise _err(path, f"{key}.values", "must be a non-empty list")
        if any(isinstance(v, dict) for v in values):
            raise _err(path, f"{key}.values", "must be a list of numbers, strings, booleans or lists")
        if mode == "grid" and len({json.dumps(v) for v in values}) != len(values):
            raise _err(path, f"{key}.values", "has repeated values (each would be the same job)")
        return list(values)
    missing = [k for k in ("from", "to", "points") if k not in r]
    if missing:
        raise _err(path, f"{key}.{missing[0]}" if rng_keys else f"{key}.values",
                   "missing: give values = [...] or from, to and points", "values | from + to + points [+ scale]")
    lo = _number(path, f"{key}.from", r["from"])
    hi = _number(path, f"{key}.to", r["to"])
    n = r["points"]
    if isinstance(n, bool) or not isinstance(n, int) or n < 1:
        raise _err(path, f"{key}.points", f"must be a whole number >= 1, got {n!r}")
    scale = r.get("scale", "linear")
    if scale not in SCALES:
        raise _err(path, f"{key}.scale", f"unknown scale {scale!r}", " | ".join(SCALES))
    if n == 1:
        return [float(lo)]
    if lo == hi:
        raise _err(path, f"{key}.to", "equals from: every point would be the same job")
    if scale == "log":
        if lo <= 0 or hi <= 0:
            raise _err(path, f"{key}.from", "log scale needs from and to > 0")
        a, b = math.log10(lo), math.log10(hi)
        return [_tidy(10 ** (a + (b - a) * k / (n - 1))) for k in range(n)]
    return [_tidy(lo + (hi - lo) * k / (n - 1)) for k in range(n)]


def _tidy(x):
    """Range points rounded to 12 significant digits (4e12, not 4000000000000.001)."""
    return float(f"{x:.12g}")


def _parse_sample_vary(path, key, r):
    p = r["path"]
    dist = r.get("distribution")
    if dist not in DISTRIBUTIONS:
        raise _err(path, f"{key}.distribution", f"missing or unknown distribution {dist!r}", " | ".join(DISTRIBUTIONS))
    if dist == "normal":
        given = [k for k in ("sigma", "relative_sigma") if k in r]
        wrong = [k for k in ("low", "high", "relative_half_width") if k in r]
        if wrong:
            raise _err(path, f"{key}.{wrong[0]}", "not used by a normal distribution", "sigma | relative_sigma")
        if len(given) != 1:
            raise _err(path, f"{key}.sigma", "give exactly one of sigma (absolute) or relative_sigma",
                       "sigma | relative_sigma")
        return Vary(p, [], dist, {given[0]: _number(path, f"{key}.{given[0]}", r[given[0]], positive=True)})
    wrong = [k for k in ("sigma", "relative_sigma") if k in r]
    if wrong:
        raise _err(path, f"{key}.{wrong[0]}", "not used by a uniform distribution", "low + high | relative_half_width")
    if "relative_half_width" in r:
        if "low" in r or "high" in r:
            raise _err(path, f"{key}.low", "give low + high or relative_half_width, not both")
        return Vary(p, [], dist, {"relative_half_width": _number(path, f"{key}.relative_half_width",
                                                                  r["relative_half_width"], positive=True)})
    if "low" not in r or "high" not in r:
        raise _err(path, f"{key}.low", "a uniform distribution needs low and high, or relative_half_width",
                   "low + high | relative_half_width")
    lo = _number(path, f"{key}.low", r["low"])
    hi = _number(path, f"{key}.high", r["high"])
    if hi <= lo:
        raise _err(path, f"{key}.high", f"must be greater than low ({lo!r})")
    return Vary(p, [], dist, {"low": lo, "high": hi})


# --------------------------------------------------------------------------- base values

def base_value(deck_data: dict, path: str):
    """Value of a deck path in the parsed base deck TOML, or raise KeyError (see
    :func:`selfcon.input.deck.get_path`)."""
    from selfcon.input.deck import get_path
    return get_path(deck_data, path)


# --------------------------------------------------------------------------- expansion

def _combinations(study: Study, deck_data: dict):
    """List of dicts path -> value, in table order."""
    if study.mode == "grid":
        return [dict(zip(study.paths, combo)) for combo in itertools.product(*(v.values for v in study.vary))]
    if study.mode == "zip":
        return [dict(zip(study.paths, combo)) for combo in zip(*(v.values for v in study.vary))]
    import numpy as np
    rng = np.random.default_rng(study.seed)
    columns = []
    for i, v in enumerate(study.vary):
        try:
            centre = base_value(deck_data, v.path)
        except KeyError as exc:
            raise _err(study.file, f"vary[{i}].path",
                       f"sample mode centres on the base deck's value, but {exc.args[0]}") from None
        if isinstance(centre, bool) or not isinstance(centre, (int, float)):
            raise _err(study.file, f"vary[{i}].path", f"base value {centre!r} is not a number")
        prm = v.params
        if v.distribution == "normal":
            sigma = prm.get("sigma", abs(centre) * prm.get("relative_sigma", 0.0))
            draws = rng.normal(centre, sigma, size=study.samples)
        else:
            if "relative_half_width" in prm:
                half = abs(centre) * prm["relative_half_width"]
                lo, hi = centre - half, centre + half
            else:
                lo, hi = prm["low"], prm["high"]
            draws = rng.uniform(lo, hi, size=study.samples)
        v.values = [float(x) for x in draws]
        columns.append(v.values)
    return [dict(zip(study.paths, combo)) for combo in zip(*columns)]


def _neighbours(study: Study, combos):
    """Continuation: index of the previous job along the `along` axis (others equal), or None."""
    out = [None] * len(combos)
    if not study.continuation:
        return out
    along = study.along
    if study.mode == "zip":
        return [None] + list(range(len(combos) - 1))
    order = [v.values for v in study.vary if v.path == along][0]
    position = {json.dumps(x): k for k, x in enumerate(order)}
    lookup = {}
    for i, c in enumerate(combos):
        key = tuple(json.dumps(c[p]) for p in study.paths if p != along)
        lookup[(key, position[json.dumps(c[along])])] = i
    for (key, k), i in lookup.items():
        if k > 0:
            out[i] = lookup[(key, k - 1)]
    return out


def load_base_deck(study: Study):
    """The base deck as a Deck, with the study's [fixed] overrides applied."""
    from selfcon.input.deck import load_deck
    if not study.deck_file.is_file():
        raise _err(study.file, "deck", f"base deck {str(study.deck_file)!r} not found")
    deck = load_deck(study.deck_file)
    if study.fixed:
        try:
            deck = deck.with_overrides(dict(study.fixed))
        except DeckError as exc:
            raise _err(study.file, "fixed", f"{exc}") from None
    return deck


def expand(study: Study) -> list[JobSpec]:
    """One JobSpec per job.  Raises StudyError for a deck path the base deck does not have."""
    deck = load_base_deck(study)
    deck_data = tomllib.loads(deck.to_toml())
    combos = _combinations(study, deck_data)
    # deck paths: probe each with the base value (or, if the base deck leaves it at its
    # default, with the first value of the study): a DeckError here is a bad path.
    for i, v in enumerate(study.vary):
        try:
            probe = base_value(deck_data, v.path)
        except KeyError:
            probe = combos[0][v.path]
        try:
            deck.with_overrides({v.path: probe})
        except SelfconInputError as exc:
            raise _err(study.file, f"vary[{i}].path", f"{v.path!r}: {exc}") from None
    neighbours = _neighbours(study, combos)
    jobs = []
    hashes = {}
    base_text = deck.to_toml()
    for i, values in enumerate(combos):
        try:
            d = deck.with_overrides(dict(values))
            # with overrides, the deck's text is its canonical TOML already (Deck.to_toml);
            # Deck.hash() is the sha256 of that text
            text = d.text if d.overrides else d.to_toml()
            h, error = hashlib.sha256(text.encode("utf-8")).hexdigest(), None
        except SelfconInputError as exc:
            # a value the deck rejects (e.g. a negative thickness): the job is recorded as failed
            overrides = json.dumps(values, sort_keys=True)
            text = f"# overrides rejected by the deck: {overrides}\n{base_text}"
            h = "invalid-" + hashlib.sha256(text.encode()).hexdigest()
            error = f"{type(exc).__name__}: {exc}"
        if h in hashes:
            raise _err(study.file, "vary", f"jobs {hashes[h]} and {i} give the same deck "
                       f"({json.dumps(combos[hashes[h]])} and {json.dumps(values)})")
        hashes[h] = i
        jobs.append(JobSpec(i, values, text, h, neighbours[i], error))
    return jobs


def default_out_dir(study_file) -> Path:
    p = Path(study_file)
    return p.parent / p.stem
