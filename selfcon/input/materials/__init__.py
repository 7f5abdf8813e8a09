"""Material library: binaries, alloys, deck-local materials.

    names()                      library names (binaries, ternaries, then quaternaries)
    is_alloy(name)               True for a library alloy (ternary or quaternary)
    kind(name, local_defs=())    "binary" | "ternary" | "quaternary" | "standalone" (a deck-local
                                 material without base), following base chains
    crystal(name, local_defs=()) "zincblende" | "wurtzite" (GaN, AlN, InN and their alloys), following
                                 base chains; a deck-local material without base is zincblende
    lattice_matched(name, target, x=None, y=None, ...)
                                 the composition of ``name`` lattice-matched to ``target``
    describe(name, x=None, temperature=None, local_defs=())
                                 rows {parameter, value, unit, source} for `selfcon materials`
    cell_parameters(name, x, temperature, local_defs=(), needs=frozenset(), y=None)
                                 per-cell arrays (keys: OUTPUT_UNITS)

Data with sources: :mod:`selfcon.input.materials.library`.  Rules (Varshni, bowing,
deck-local materials): :mod:`selfcon.input.materials.alloys`.  May import: numpy, the
foundation modules (``selfcon.errors``) and its own modules; never ``selfcon.model`` or a
later stage.

How to add a material parameter
-------------------------------
A new library number that the physics or the result needs, e.g. a thermal conductivity:

1. ``library.py``: declare it in ``PARAMETERS`` (``key: (unit, meaning)``; the key is
   also the deck key ``material.NAME.key``) and give every binary in ``BINARIES`` a
   ``Value(value, unit, source)`` for it, with its source (tests/test_materials.py
   checks that every value has a unit and a source).  Ternaries interpolate linearly
   between their end binaries; for a bowed parameter add the key to ``BOWED`` and a
   ``Bowing`` to every alloy.  Quaternaries follow from their ternaries.
2. ``selfcon/input/deck.py``: declare the deck key in ``MATERIAL_PARAMS``
   (``key: _p(unit, doc)``) so that a deck's ``[material.NAME]`` may set it, and run
   ``python tools/deck_reference.py`` (README deck reference).  A deck-local material
   without ``base`` must then give it, or gets the default you add in
   ``alloys.standalone_primitives``.
3. ``alloys.py``: list it in ``OUTPUT_UNITS`` (``key: unit``): :func:`cell_parameters`
   then hands it through under its own name, per cell (or compute a derived quantity
   from it in ``alloys.derived`` under a key of its own).  To have it in the
   :class:`~selfcon.model.structure.Structure`, add the key to
   ``selfcon.model.structure.MATERIAL_KEYS``: ``structure.cell[key]`` is then the per-cell
   array (convert it there if its unit is not an internal one: nm, eV, nm^-3).
4. To report it in the result file as a profile at the nodes (each node takes the
   value of the cell to its right, like the band edges), declare it in
   ``selfcon/output/schema.py`` beside the other profiles,
   ``_r("profile/<key>", units, long_name, description, dims=("z",))``, and add the key
   to ``MATERIAL_PROFILES`` there.  The writer, the reader, the CSV export and the
   README layout table (``python tools/file_layout.py``; a test checks it) take it from
   there.
5. Check the values in tests/test_materials.py against the tables you used (quote each
   value and its source).  tests/test_recipes.py follows steps 1, 3 and 4 for a
   throwaway parameter; in a running process (a test) call
   ``selfcon.model.structure.clear_material_cache()`` after changing the library.
"""
import numpy as np

from selfcon.errors import MaterialError
from selfcon.input.materials import alloys as _rules
from selfcon.input.materials.library import (ALLOY_RULES, ALLOYS, BINARIES, CRYSTAL,  # noqa: F401
                                             PARAMETERS, QUATERNARIES, WURTZITE_ONLY,
                                             ZINCBLENDE_ONLY, Bowing, Value)
from selfcon.input.materials.alloys import OUTPUT_UNITS, FILL_MASS, FILL_VALLEY_OFFSET  # noqa: F401

__all__ = ["names", "is_alloy", "kind", "crystal", "describe", "cell_parameters", "lattice_matched",
           "PARAMETERS", "OUTPUT_UNITS", "NEEDS", "Value", "Bowing"]

#: the words ``needs`` understands
NEEDS = frozenset({"heavy_hole", "light_hole", "x_valley", "l_valley", "thermal_ionization",
                   "strain"})
#: carrier names a deck may use for the X and L valleys; any other word in ``needs``
#: (e.g. "electron": Γ electrons need nothing optional) is ignored
_NEED_ALIASES = {"x_electron": "x_valley", "l_electron": "l_valley",
                 "thermal": "thermal_ionization"}


def names():
    """Library material names: binaries first, then ternaries, then quaternaries."""
    return tuple(BINARIES) + tuple(ALLOYS) + tuple(QUATERNARIES)


def is_alloy(name):
    """True if ``name`` is a library alloy (needs x; a quaternary also y)."""
    return name in ALLOYS or name in QUATERNARIES


def kind(name, local_defs=()):
    """"binary", "ternary", "quaternary" or "standalone" (deck-local without base), following
    deck-local base chains; None for an unknown name or a cycle."""
    local = _local_map(local_defs)
    seen = set()
    while name in local and name not in seen:
        seen.add(name)
        base = getattr(local[name], "base", None)
        if base is None:
            return "standalone"
        name = base
    if name in BINARIES:
        return "binary"
    if name in ALLOYS:
        return "ternary"
    if name in QUATERNARIES:
        return "quaternary"
    return None


def crystal(name, local_defs=()):
    """"zincblende" or "wurtzite": the crystal of ``name``, following deck-local base chains
    (a deck-local material without base, an unknown name or a cycle: "zincblende")."""
    local = _local_map(local_defs)
    seen = set()
    while name in local and name not in seen:
        seen.add(name)
        name = getattr(local[name], "base", None)
    return CRYSTAL.get(name, "zincblende")


def _not_applicable(key, crystal_name):
    """True for a parameter the crystal's model does not use (hidden by `selfcon materials`)."""
    return key in (ZINCBLENDE_ONLY if crystal_name == "wurtzite" else WURTZITE_ONLY)


def _local_map(local_defs):
    """Deck-local definitions by name; accepts an iterable of defs or a mapping name -> def."""
    if local_defs is None:
        return {}
    if hasattr(local_defs, "values"):
        local_defs = local_defs.values()
    return {d.name: d for d in local_defs}


def _lookup_error(name, local):
    if name not in BINARIES and name not in ALLOYS and name not in QUATERNARIES and name not in local:
        raise _rules.unknown_material(name, local)


def cell_parameters(name, x, temperature, local_defs=(), needs=frozenset(), y=None):
    """Per-cell material arrays for one layer.

    ``x``: ndarray of alloy fractions per cell (ignored for binaries; NaN means
    "not given").  ``temperature`` in K.  ``local_defs``: deck-local materials
    (objects with ``.name``, ``.base``, ``.x``, ``.params`` = ((key, value), …)).
    Words of ``needs`` in NEEDS make optional groups of a base-less deck-local material
    required; when absent and not needed they are filled: X/L gaps
    FILL_VALLEY_OFFSET (10 eV) above the Γ gap with the Γ Varshni terms, X/L
    masses FILL_MASS (1 m0), Luttinger γ1 = 1, γ2 = γ3 = 0 (hole masses 1 m0),
    spin-orbit 0, dopant binding energies 0, lattice and elastic constants unknown (NaN),
    deformation potentials 0 (the word "strain" in ``needs`` makes lattice_constant,
    elastic_c11, elastic_c12, deformation_ac, deformation_av and deformation_b required).
    γ3 defaults to γ2; the hole DOS masses default to 0 (not stored: the spherical estimate
    from the Luttinger parameters, refused above 2 m0).  ``y``: second composition of a quaternary (NaN or None: not given).

    Returns a dict of float arrays shaped like ``x`` (keys and units: OUTPUT_UNITS; a
    library parameter listed there under its own name is handed through as it is).  Gaps at T: Varshni per binary, then alloy bowing
    Eg(x, T) = (1-x) Eg0(T) + x Eg1(T) - x(1-x) C(x).  Raises MaterialError.
    """
    x = np.array(x, dtype=float, ndmin=1, copy=True)
    if y is not None:
        y = np.broadcast_to(np.array(y, dtype=float, ndmin=1), x.shape).copy()
    t = float(temperature)
    if not np.isfinite(t) or t < 0.0:
        raise MaterialError(f"temperature must be >= 0 K, got {temperature!r}", key="temperature")
    needs = frozenset(_NEED_ALIASES.get(w, w) for w in needs) & NEEDS   # others ("electron"): no-op
    local = _local_map(local_defs)
    _lookup_error(name, local)
    prim = _rules.resolve(name, x, t, local, needs, y=y)
    _rules.validate(name, prim)
    out = _rules.derived(prim)
    for key in OUTPUT_UNITS:          # library parameters listed there: handed through as they are
        if key not in out and key in prim:
            out[key] = np.array(prim[key], dtype=float)
    return out


def _lattice_of(name, x, y, temperature, local):
    x = np.atleast_1d(np.asarray(x, dtype=float))
    yy = None if y is None else np.atleast_1d(np.asarray(y, dtype=float))
    return _rules.resolve(name, x, temperature, local, frozenset(), y=yy)["lattice_t"]


def lattice_matched(name, target, x=None, y=None, temperature=300.0, local_defs=()):
    """Composition ``(x, y)`` of ``name`` whose lattice constant equals ``target``'s at
    ``temperature`` (default 300 K, where wafers are specified).

    ``target``: a library binary name or a lattice constant in nm.  A ternary solves x (give
    neither); a quaternary solves the one of x, y that is not given.  x and y may be arrays
    (graded layers).  The lattice constant is linear in each composition (Vegard), so two
    evaluations fix it exactly.  Raises MaterialError (key "lattice_matched", "x" or "y").
    """
    local = _local_map(local_defs)
    _lookup_error(name, local)
    k = kind(name, local)
    if isinstance(target, str):
        if target not in BINARIES:
            raise MaterialError(f"cannot lattice-match to {target!r}: give a library binary",
                                key="lattice_matched", allowed=", ".join(BINARIES))
        a_t = float(_rules.lattice_at({kk: np.float64(v.value) for kk, v in BINARIES[target].items()},
                                      temperature))
        label = target
    else:
        a_t, label = float(target), f"a = {float(target):g} nm"
    if k == "ternary":
        if x is not None:
            raise MaterialError(f"{name}: lattice_matched solves x; leave x out", key="x")
        solve_for, fixed = "x", None
    elif k == "quaternary":
        if (x is None) == (y is None):
            raise MaterialError(f"{name}: with lattice_matched give exactly one of x and y "
                                "(the other is solved)", key="y" if x is not None else "x")
        solve_for, fixed = ("y", np.asarray(x, float)) if x is not None else ("x", np.asarray(y, float))
    else:
        raise MaterialError(f"{name} is a {k or 'unknown'} material: lattice_matched needs an "
                            "alloy whose composition it can choose", key="lattice_matched")
    fixed = None if fixed is None else np.atleast_1d(fixed)
    shape = (1,) if fixed is None else fixed.shape
    lo, hi = np.zeros(shape), np.ones(shape)
    if k == "quaternary" and QUATERNARIES.get(_base_library(name, local), None) is not None \
            and QUATERNARIES[_base_library(name, local)].kind == "one-sublattice":
        hi = 1.0 - fixed                         # x + y <= 1
    args = (lambda v: (v, fixed)) if solve_for == "x" else (lambda v: (fixed, v))
    a0 = _lattice_of(name, *args(lo), temperature, local)
    a1 = _lattice_of(name, *args(hi), temperature, local)
    with np.errstate(divide="ignore", invalid="ignore"):
        v = lo + (hi - lo) * (a_t - a0) / (a1 - a0)
    bad = ~np.isfinite(v) | (v < lo - 1e-9) | (v > hi + 1e-9)
    if bad.any():
        rng = f"{float(np.min(np.minimum(a0, a1))):.5f} to {float(np.max(np.maximum(a0, a1))):.5f} nm"
        raise MaterialError(f"{name} cannot be lattice-matched to {label} ({a_t:.5f} nm at "
                            f"{temperature:g} K): its lattice constant spans {rng} here",
                            key="lattice_matched")
    v = np.clip(v, lo, hi)
    xs, ys = args(v)
    return (xs if xs is not None else None), (ys if ys is not None else None)


def _base_library(name, local):
    seen = set()
    while name in local and name not in seen:
        seen.add(name)
        name = getattr(local[name], "base", None)
    return name


def _row(parameter, value, unit, source):
    return {"parameter": parameter, "value": value, "unit": unit, "source": source}


def _value_rows(table, prefix="", crystal_name="zincblende"):
    return [_row(prefix + k, v.value, v.unit, v.source) for k, v in table.items()
            if not _not_applicable(k, crystal_name)]


def _alloy_rows(name):
    a = ALLOYS[name]
    rows = [_row("composition", a.meaning_of_x, "", "selfcon convention (x counts the first-named "
                 "element of the mixed sublattice)"),
            _row("end_x0", a.end0, "", f"binary at x = 0; its values: selfcon materials {a.end0}"),
            _row("end_x1", a.end1, "", f"binary at x = 1; its values: selfcon materials {a.end1}")]
    rule = "P(x) = (1-x) P(x=0) + x P(x=1) - x(1-x) C(x)"
    cr = CRYSTAL.get(name, "zincblende")
    for key, b in a.bowing.items():
        if _not_applicable(key, cr):
            continue
        rows.append(_row(f"bowing.{key}", b.c0, b.unit, b.source + "; " + rule))
        if b.c1:
            rows.append(_row(f"bowing.{key}.per_x", b.c1, b.unit,
                             b.source + "; C(x) = c0 + c1 x, this is c1"))
    for key, src in ALLOY_RULES.items():
        if _not_applicable(key, cr):
            continue
        how = ("per end binary, then bowed" if "varshni" in key
               else "1/m linear" if key.startswith("hole_dos_mass") else "linear")
        rows.append(_row(f"rule.{key}", how, "", src))
    return rows


def _quaternary_rows(name):
    q = QUATERNARIES[name]
    rows = [_row("composition", q.meaning_of_x, "", "selfcon convention (x counts the first-named "
                 "element of the mixed sublattice)"),
            _row("composition_y", q.meaning_of_y, "", "selfcon convention")]
    if q.kind == "two-sublattice":
        for (cx, cy), b in q.corners.items():
            rows.append(_row(f"corner_x{cx}_y{cy}", b, "", f"binary at x = {cx}, y = {cy}"))
        for edge, t in q.edges.items():
            rows.append(_row(f"edge_{edge.replace('=', '')}", t, "",
                             f"ternary on the edge {edge}; its values: selfcon materials {t}"))
    else:
        for c, b in q.corners.items():
            rows.append(_row(f"corner_{c}", b, "", "binary of a pure composition"))
        for pair, (t, counted) in q.edges.items():
            rows.append(_row(f"edge_{pair}", t, "", f"ternary on the {pair} edge (its x counts "
                             f"{q.corners[counted]}); its values: selfcon materials {t}"))
    rows.append(_row("rule", "interpolated from the ternaries", "", q.source))
    if q.gap_bowing:
        w = "x(1-x) y(1-y)" if q.kind == "two-sublattice" else "x y (1-x-y)"
        rows.append(_row("bowing.band_gap.quaternary", q.gap_bowing[0], "eV",
                         q.gap_bowing[1] + f"; Eg -= C_Q {w}"))
    return rows


def _computed_rows(name, x, temperature, local_defs, y=None):
    xs = np.array([np.nan if x is None else float(x)])
    ys = None if y is None else np.array([float(y)])
    t = 0.0 if temperature is None else float(temperature)
    vals = cell_parameters(name, xs, t, local_defs, y=ys)
    where = (f"T = {t:g} K" + ("" if x is None else f", x = {float(x):g}")
             + ("" if y is None else f", y = {float(y):g}"))
    src = f"computed at {where} from the values above (selfcon.input.materials.alloys rules)"
    hide = _WURTZITE_DERIVED if crystal(name, local_defs) != "wurtzite" else _ZINCBLENDE_DERIVED
    return [_row(k, float(v[0]), OUTPUT_UNITS[k], src) for k, v in vals.items() if k not in hide]


#: computed keys that only one crystal's model uses (hidden for the other by `selfcon materials`)
_WURTZITE_DERIVED = ("lattice_c", "c13", "c33", "e31", "e33", "psp", "delta_cr", "va1", "va2",
                     "va3", "va4", "da1", "da2", "dd1", "dd2", "dd3", "dd4", "m_ch_z",
                     "m_ch_par", "m_ch_dos")
_ZINCBLENDE_DERIVED = ("eg_x", "eg_l", "ec_x", "ec_l", "m_x_l", "m_x_t", "m_l_l", "m_l_t",
                       "gamma1", "gamma2", "gamma3", "ac", "av", "b_dp", "d_dp", "xi_x_gap",
                       "xi_x_u", "xi_l_gap", "xi_l_u")


def describe(name, x=None, temperature=None, local_defs=(), y=None):
    """Every stored value of ``name`` with unit and source, as rows
    ``{parameter, value, unit, source}``.  Alloys list their end binaries,
    bowing parameters and interpolation rules (quaternaries their ternaries).  With ``x``
    (alloys; ``y`` too for quaternaries) or ``temperature`` the computed per-cell values are
    appended."""
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
        for key, value in _rules.local_params(d).items():
            unit = PARAMETERS.get(key, ("?",))[0]
            rows.append(_row(f"{current}.{key}", float(value), unit, src))
        if d.base is None:
            rows.append(_row(f"{current}.defaults", "see cell_parameters", "",
                             "absent optional parameters are filled (selfcon.input.materials."
                             "cell_parameters docstring)"))
            current = None
            break
        current = d.base
        if (current not in local and current not in BINARIES and current not in ALLOYS
                and current not in QUATERNARIES):
            _rules.resolve(name, np.array([np.nan]), 0.0, local, frozenset())  # raises
    if current in BINARIES:
        rows += _value_rows(BINARIES[current], crystal_name=CRYSTAL.get(current, "zincblende"))
    elif current in ALLOYS:
        rows += _alloy_rows(current)
    elif current in QUATERNARIES:
        rows += _quaternary_rows(current)
    alloy_base = current in ALLOYS or current in QUATERNARIES
    fixed_y = y
    for d in (local[s] for s in seen):
        if fixed_y is None and getattr(d, "y", None) is not None:
            fixed_y = float(d.y)
    complete = fixed_x is not None and (current not in QUATERNARIES or fixed_y is not None)
    if seen or temperature is not None or (alloy_base and complete):
        if not alloy_base or complete:
            rows += _computed_rows(name, x, temperature, local_defs, y)
    return rows
