"""Target-seeking: the value of one deck parameter that makes a summary quantity hit a target.

    tr = tune(deck, "layer.spacer.thickness", "ns", 3e11, (5.0, 60.0))
    tr.value, tr.achieved, tr.solves

A bracketing root finder (``scipy.optimize.brentq``) drives full self-consistent
solves of ``deck.with_overrides({path: x})``.  Each solve starts from the converged
potential of the evaluated point nearest in ``x`` (warm start), passed as
``(z, phi)`` so that it is interpolated onto the new mesh when ``x`` is a
thickness.  A warm-started solve that does not converge is retried from a cold start.

Quantities (``QUANTITIES``): ``ns`` the main channel's sheet density (cm^-2, its own
carriers: electrons, or holes in a hole channel), ``ns_total`` electrons in the whole stack
(cm^-2), ``e10`` E1 - E0 of the main channel's own subbands (eV), ``e0f`` its E0 - EF (eV,
in the carrier's own sense: negative when the ground subband is occupied),
``doping_charge`` electrons taken back by the doping layers (free plus bound on neutral
donors, cm^-2), ``doping_free`` free electrons in the doping layers (cm^-2), or any numeric
key of ``Result.summary``.  ``ns:NAME``, ``e10:NAME`` and ``e0f:NAME`` are the same figures
of the channel called NAME (selfcon.output.channels; ``selfcon run`` lists the channels).
The main channel is the first ``[[channel]]`` of the deck, else the one holding most
carriers of the majority kind.
"""
from __future__ import annotations

import math
import os
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from selfcon.errors import DeckError, SelfconInputError
from selfcon.output.numbers import fmt

if TYPE_CHECKING:
    from selfcon.input.deck import Deck


class TuneError(SelfconInputError):
    """The tuning problem is ill posed (unknown quantity, target outside the bracket, ...)."""


#: short name -> (description, units, function(result, structure) -> float)
def _summary(key):
    return lambda r, st: float(r.summary[key])


def _doping(bound):
    def f(r, st):
        from selfcon.output.diagnostics import doping_layer_electrons
        return doping_layer_electrons(r, st, bound=bound)
    return f


#: per-channel quantities: short name -> (description, units, /channels field)
CHANNEL_QUANTITIES = {
    "ns": ("sheet density of the channel", "cm^-2", "sheet_density"),
    "e10": ("E1 - E0 of the channel's own subbands", "eV", "spacing"),
    "e0f": ("E0 - EF of the channel (carrier's own sense: negative = occupied)", "eV", "ground_energy"),
}


def _main(field, fallback):
    """A figure of the main channel (summary key ``fallback`` for results without /channels)."""
    def f(r, st):
        if not r.channels:
            return float(r.summary[fallback])
        main = r.main_channel
        return float(main[field]) if main is not None else (0.0 if field == "sheet_density" else math.nan)
    return f


def _channel(name, field):
    """A figure of the channel ``name``; where it is gone (an auto-detected channel emptied
    below the detection floor) its sheet density is 0 and its other figures undefined."""
    def f(r, st):
        row = r.channel(name)
        if row is None:
            return 0.0 if field == "sheet_density" else math.nan
        return float(row[field])
    return f


QUANTITIES = {
    "ns": ("sheet density of the main channel", "cm^-2",
           _main("sheet_density", "channel_electron_sheet_density_cm2")),
    "ns_total": ("electrons in the whole stack", "cm^-2", _summary("electron_sheet_density_cm2")),
    "e10": ("E1 - E0 of the main channel's own subbands", "eV", _main("spacing", "E1_minus_E0_eV")),
    "e0f": ("E0 - EF of the main channel, below (-, occupied) or above (+) EF", "eV",
            _main("ground_energy", "E0_minus_EF_eV")),
    "doping_charge": ("electrons in the doping layers (free + on neutral donors)", "cm^-2", _doping(True)),
    "doping_free": ("free electrons in the doping layers", "cm^-2", _doping(False)),
}


@dataclass
class TuneResult:
    path: str
    quantity: str
    target: float
    value: float                     # the parameter value found (deck units)
    achieved: float                  # the quantity at that value
    bracket: tuple[float, float]
    ends: tuple[float, float]        # the quantity at the bracket ends
    solves: int
    converged: bool                  # root finder converged and the final solve converged
    message: str
    evaluations: list[tuple[float, float]] = field(default_factory=list)   # (x, quantity) in order
    result: Any = None               # the Result at ``value``
    units: str = ""

    @property
    def success(self) -> bool:
        return self.converged


def quantity_function(name: str):
    """(function(result, structure) -> float, description, units) for a quantity name
    (``ns``, ``ns:NAME``, ..., or a summary key)."""
    short, sep, channel = name.partition(":")
    if sep and short in CHANNEL_QUANTITIES:
        desc, units, field = CHANNEL_QUANTITIES[short]
        if not channel:
            raise TuneError(f"{name!r} names no channel: write {short}:NAME", key="--target")
        return _channel(channel, field), f"{desc} {channel!r}", units
    if name in QUANTITIES:
        desc, units, fn = QUANTITIES[name]
        return fn, desc, units
    return _summary(name), f"summary figure {name}", ""


def _check_quantity(name, result):
    if name in QUANTITIES:
        return
    short, sep, channel = name.partition(":")
    if sep and short in CHANNEL_QUANTITIES:
        if result.channel(channel) is None:
            raise TuneError(f"unknown channel {channel!r} in {name!r}", key="--target",
                            allowed=", ".join(c["name"] for c in result.channels) or "no channel at all")
        return
    v = (result.summary or {}).get(name)
    numeric = [k for k, x in (result.summary or {}).items()
               if isinstance(x, (int, float)) and not isinstance(x, bool)]
    if v is None or isinstance(v, (bool, str, list)):
        raise TuneError(f"unknown quantity {name!r}", key="--target",
                        allowed=", ".join(list(QUANTITIES) + [f"{q}:NAME" for q in CHANNEL_QUANTITIES]
                                          + sorted(numeric)))


def path_value(deck, path: str):
    """Current value of a deck path (None if the deck leaves it at a default it does not write)."""
    return deck.get(path)


def path_units(path: str) -> str:
    from selfcon.input.deck import KEYS
    parts = path.split(".")
    table = parts[0] if len(parts) > 1 else ""
    key = parts[-1]
    spec = KEYS.get(table, {}).get(key) if table in KEYS else KEYS[""].get(key)
    if spec is None or spec.unit in ("-", ""):
        return ""
    return spec.unit


def tune(deck: Deck | str | os.PathLike, path: str, target_name: str, target_value: float,
         bracket: tuple[float, float], *, xtol: float | None = None, rtol: float = 1e-10,
         maxiter: int = 60, progress: Callable[[float, float, Any], None] | None = None) -> TuneResult:
    """Find the deck value that gives a target figure: ``quantity(solve(deck with path = x)) == target``.

    Each trial is a full self-consistent solve (warm-started from the nearest earlier
    one); the root is bracketed and found with :func:`scipy.optimize.brentq`.

    Parameters
    ----------
    deck : Deck, str or path-like
        The design to tune.
    path : str
        The deck path to vary, as ``--set`` takes it (``layer.spacer.thickness``).
    target_name : str
        A name of :data:`QUANTITIES` (``ns``, ``ns_total``, ``e10``, ``e0f``,
        ``doping_charge``, ``doping_free``) or any numeric ``Result.summary`` key.
    target_value : float
        The value wanted, in the quantity's units (cm^-2, eV).
    bracket : (float, float)
        Two deck values of ``path`` (deck units) whose results lie on either side of the target.
    xtol, rtol, maxiter : optional
        Passed to :func:`scipy.optimize.brentq` (``xtol`` defaults to 1e-4 of the bracket).
    progress : callable, optional
        ``progress(x, quantity_value, result)`` after each solve.

    Returns
    -------
    TuneResult
        ``value`` (the deck value found), ``achieved``, ``ends`` (the quantity at the bracket
        ends), ``solves``, ``converged`` and the final ``result``.

    Raises
    ------
    TuneError
        The target lies outside the range reached at the bracket ends (exit 2 in the CLI).
    DeckError
        A bad path, or a bracket value the deck rejects.

    Examples
    --------
    Which spacer gives 2e11 cm^-2 in the channel of the 77 K Hall-bar wafer?

    >>> import selfcon
    >>> from selfcon.design import tune
    >>> wafer = selfcon.load_deck("inputs/design/hall_wafer_77K.toml")
    >>> found = tune(wafer, "layer.spacer.thickness", "ns", 2e11, (5.0, 60.0))
    >>> found.converged, round(found.achieved / 1e11, 3)
    (True, 2.0)
    >>> bool(5.0 < found.value < 60.0)
    True
    """
    from scipy.optimize import brentq

    from selfcon.input.deck import Deck, load_deck
    from selfcon.api import solve_warm
    from selfcon.model.structure import build_structure
    if not isinstance(deck, Deck):
        deck = load_deck(deck)
    a, b = (float(v) for v in bracket)
    if not (math.isfinite(a) and math.isfinite(b)) or a == b:
        raise TuneError(f"needs two different finite values, got {bracket!r}", key="--bracket")
    if a > b:
        a, b = b, a
    target_value = float(target_value)
    if not math.isfinite(target_value):
        raise TuneError(f"target must be finite, got {target_value!r}", key="--target")
    if xtol is None:
        xtol = 1e-4 * (b - a)
    fn, desc, units = quantity_function(target_name)
    # a bad path fails here, before any solve
    for x in (a, b):
        deck.with_overrides({path: x})

    cache: dict[float, tuple[float, Any]] = {}
    warm: list[tuple[float, tuple]] = []
    evals: list[tuple[float, float]] = []
    checked = [False]

    def evaluate(x: float) -> float:
        if x in cache:
            return cache[x][0] - target_value
        dk = deck.with_overrides({path: float(x)})
        st = build_structure(dk)
        guess = None
        if warm:
            xs = np.array([w[0] for w in warm])
            guess = warm[int(np.argmin(np.abs(xs - x)))][1]
        r, _ = solve_warm(dk, guess, structure=st)
        if not checked[0]:
            _check_quantity(target_name, r)
            checked[0] = True
        q = float(fn(r, st))
        if r.converged:
            warm.append((x, (r.z.copy(), r.profile["potential"].copy())))
        cache[x] = (q, r)
        evals.append((float(x), q))
        if progress is not None:
            progress(float(x), q, r)
        if not math.isfinite(q):
            raise TuneError(f"{target_name} is not defined at {path} = {x:g} ({desc}: {q}); "
                            "choose another bracket or quantity", key="--target")
        return q - target_value

    fa = evaluate(a)
    fb = evaluate(b)
    qa, qb = fa + target_value, fb + target_value
    unit = f" {units}" if units else ""
    if fa == 0.0 or fb == 0.0:
        x = a if fa == 0.0 else b
        root, ok, msg = x, True, "the target is met at a bracket end"
    elif fa * fb > 0:
        lo, hi = min(qa, qb), max(qa, qb)
        kind = "sheet" if units in ("cm^-2", "cm-2") else "plain"
        raise TuneError(f"target {target_name} = {fmt(target_value, kind)}{unit} is outside the range reached "
                        f"over the bracket: {target_name} = {fmt(qa, kind)}{unit} at {path} = {fmt(a)} and "
                        f"{fmt(qb, kind)}{unit} at {fmt(b)} (range {fmt(lo, kind)} to {fmt(hi, kind)}); "
                        "widen --bracket", key="--target")
    else:
        root, info = brentq(evaluate, a, b, xtol=xtol, rtol=rtol, maxiter=maxiter, full_output=True,
                            disp=False)
        ok = bool(info.converged)
        msg = (f"brentq converged in {info.iterations} iterations" if ok
               else f"brentq stopped: {info.flag}")
    evaluate(root)                          # cached unless brentq's answer is a new point
    q_root, r_root = cache[root]
    ok = ok and bool(r_root.converged)
    if not r_root.converged:
        msg += f"; the solve at the answer did not converge: {r_root.message}"
    return TuneResult(path=path, quantity=target_name, target=target_value, value=float(root), achieved=q_root,
                      bracket=(a, b), ends=(qa, qb), solves=len(evals), converged=ok, message=msg,
                      evaluations=evals, result=r_root, units=units)


def parse_target(text: str) -> tuple[str, float]:
    """``"ns=3e11"`` -> ("ns", 3e11)."""
    if not isinstance(text, str) or "=" not in text:
        raise TuneError(f"must be QUANTITY=VALUE, e.g. ns=3e11 or ns:NAME=3e11, got {text!r}",
                        key="--target", allowed=", ".join(QUANTITIES) + ", ns:NAME, e10:NAME, e0f:NAME, "
                        "or a summary key")
    name, _, val = text.partition("=")
    name = name.strip()
    try:
        value = float(val)
    except ValueError:
        raise TuneError(f"value {val.strip()!r} is not a number", key="--target") from None
    if not name:
        raise TuneError("missing quantity name", key="--target", allowed=", ".join(QUANTITIES))
    return name, value


_ = DeckError
