"""Material library: binaries, alloys, deck-local materials.

    names()                      library names (binaries, then alloys)
    is_alloy(name)               True for a library alloy
    describe(name, x=None, temperature=None, local_defs=())
                                 rows {parameter, value, unit, source} for `selfcon materials`
    cell_parameters(name, x, temperature, local_defs=(), needs=frozenset())
                                 per-cell arrays (keys: OUTPUT_UNITS)

Data with sources: :mod:`selfcon.input.materials.library`.  Rules (Varshni, bowing,
deck-local materials): :mod:`selfcon.input.materials.alloys`.  Imports numpy only.
"""
import numpy as np

from selfcon.errors import MaterialError
from selfcon.input.materials import alloys as _rules
from selfcon.input.materials.library import ALLOY_RULES, ALLOYS, BINARIES, PARAMETERS, Bowing, Value  # noqa: F401
from selfcon.input.materials.alloys import OUTPUT_UNITS, FILL_MASS, FILL_VALLEY_OFFSET  # noqa: F401

__all__ = ["names", "is_alloy", "describe", "cell_parameters", "PARAMETERS", "OUTPUT_UNITS",
           "NEEDS", "Value", "Bowing"]

#: the words ``needs`` understands
NEEDS = frozenset({"heavy_hole", "light_hole", "x_valley", "l_valley", "thermal_ionization"})
#: carrier names a deck may use for the X and L valleys; any other word in ``needs``
#: (e.g. "electron": Γ electrons need nothing optional) is ignored
_NEED_ALIASES = {"x_electron": "x_valley", "l_electron": "l_valley",
                 "thermal": "thermal_ionization"}


def names():
    """Library material names: binaries first, then alloys."""
    return tuple(BINARIES) + tuple(ALLOYS)


def is_alloy(name):
    """True if ``name`` is a library alloy (needs x)."""
    return name in ALLOYS


def _local_map(local_defs):
    """Deck-local definitions by name; accepts an iterable of defs or a mapping name -> def."""
    if local_defs is None:
        return {}
    if hasattr(local_defs, "values"):
        local_defs = local_defs.values()
    return {d.name: d for d in local_defs}


def _lookup_error(name, local):
    if name not in BINARIES and name not in ALLOYS and name not in local:
        raise _rules.unknown_material(name, local)


def cell_parameters(name, x, temperature, local_defs=(), needs=frozenset()):
    """Per-cell material arrays for one layer.

    ``x``: ndarray of alloy fractions per cell (ignored for binaries; NaN means
    "not given").  ``temperature`` in K.  ``local_defs``: deck-local materials
    (objects with ``.name``, ``.base``, ``.x``, ``.params`` = ((key, value), …)).
    Words of ``needs`` in NEEDS make optional groups of a base-less deck-local material
    required; when absent and not needed they are filled: X/L gaps
    FILL_VALLEY_OFFSET (10 eV) above the Γ gap with the Γ Varshni terms, X/L
    masses FILL_MASS (1 m0), Luttinger γ1 = 1, γ2 = γ3 = 0 (hole masses 1 m0),
    spin-orbit 0, dopant binding energies 0.  γ3 defaults to γ2.

    Returns a dict of float arrays shaped like ``x`` (keys and units:
    OUTPUT_UNITS).  Gaps at T: Varshni per binary, then alloy bowing
    Eg(x, T) = (1-x) Eg0(T) + x Eg1(T) - x(1-x) C(x).  Raises MaterialError.
    """
    x = np.array(x, dtype=float, ndmin=1, copy=True)
    t = float(temperature)
    if not np.isfinite(t) or t < 0.0:
        raise MaterialError(f"temperature must be >= 0 K, got {temperature!r}", key="temperature")
    needs = frozenset(_NEED_ALIASES.get(w, w) for w in needs) & NEEDS   # others ("electron"): no-op
    local = _local_map(local_defs)
    _lookup_error(name, local)
    prim = _rules.resolve(name, x, t, local, needs)
    _rules.validate(name, prim)
    return _rules.derived(prim)


def _row(parameter, value, unit, source):
    return {"parameter": parameter, "value": value, "unit": unit, "source": source}


def _value_rows(table, prefix=""):
    return [_row(prefix + k, v.value, v.unit, v.source) for k, v in table.items()]


def _alloy_rows(name):
    a = ALLOYS[name]
    rows = [_row("composition", a.meaning_of_x, "", "selfcon convention (first-named group-III "
                 "element)"),
            _row("end_x0", a.end0, "", f"binary at x = 0; its values: selfcon materials {a.end0}"),
            _row("end_x1", a.end1, "", f"binary at x = 1; its values: selfcon materials {a.end1}")]
    rule = "P(x) = (1-x) P(x=0) + x P(x=1) - x(1-x) C(x)"
    for key, b in a.bowing.items():
        rows.append(_row(f"bowing.{key}", b.c0, b.unit, b.source + "; " + rule))
        if b.c1:
            rows.append(_row(f"bowing.{key}.per_x", b.c1, b.unit,
                             b.source + "; C(x) = c0 + c1 x, this is c1"))
    for key, src in ALLOY_RULES.items():
        how = "per end binary, then bowed" if "varshni" in key else "linear"
        rows.append(_row(f"rule.{key}", how, "", src))
    return rows


def _computed_rows(name, x, temperature, local_defs):
    xs = np.array([np.nan if x is None else float(x)])
    t = 0.0 if temperature is None else float(temperature)
    vals = cell_parameters(name, xs, t, local_defs)
    where = f"T = {t:g} K" + ("" if x is None else f", x = {float(x):g}")
    src = f"computed at {where} from the values above (selfcon.input.materials.alloys rules)"
    return [_row(k, float(v[0]), OUTPUT_UNITS[k], src) for k, v in vals.items()]


def describe(name, x=None, temperature=None, local_defs=()):
    """Every stored value of ``name`` with unit and source, as rows
    ``{parameter, value, unit, source}``.  Alloys list their end binaries,
    bowing parameters and interpolation rules.  With ``x`` (alloys) or
    ``temperature`` the computed per-cell values are appended."""
    local = _local_map(local_defs)
    _lookup_error(name, local)
    rows = []
    seen = []
    current = name
    fixed_x = x
    while current in local:
        if current in seen:
            _rules.resolve(name, np.array([np.nan]), 0.0, local, frozenset())  # raises the cycle
        seen.append(current)
        d = local[current]
        src = f"deck-local [material.{current}]"
        if d.base is not None:
            rows.append(_row(f"{current}.base", d.base, "", src))
        if getattr(d, "x", None) is not None:
            rows.append(_row(f"{current}.x", float(d.x), "", src))
            if fixed_x is None:
                fixed_x = float(d.x)
        for key, value in _rules._def_params(d).items():
            unit = PARAMETERS.get(key, ("?",))[0]
            rows.append(_row(f"{current}.{key}", float(value), unit, src))
        if d.base is None:
            rows.append(_row(f"{current}.defaults", "see cell_parameters", "",
                             "absent optional parameters are filled (selfcon.input.materials."
                             "cell_parameters docstring)"))
            current = None
            break
        current = d.base
        if current not in local and current not in BINARIES and current not in ALLOYS:
            _rules.resolve(name, np.array([np.nan]), 0.0, local, frozenset())  # raises
    if current in BINARIES:
        rows += _value_rows(BINARIES[current])
    elif current in ALLOYS:
        rows += _alloy_rows(current)
    alloy_base = current in ALLOYS
    if seen or temperature is not None or (alloy_base and fixed_x is not None):
        if not alloy_base or fixed_x is not None:
            rows += _computed_rows(name, x, temperature, local_defs)
    return rows
