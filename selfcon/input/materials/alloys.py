"""Rules: temperature (Varshni), alloy interpolation with bowing, deck-local
materials, and the derived per-cell quantities.

Everything works on numpy arrays shaped like the per-cell alloy fraction x.
The intermediate form is a dict "primitives": the library's parameter names
(``band_gap``, ``electron_mass``, …; the gaps at 0 K) as arrays, plus
``eg_gamma``, ``eg_x``, ``eg_l``: the gaps at the temperature asked for, and
``lattice_t``: the lattice constant at that temperature (nm).  Quaternaries are
interpolated from the primitives of their ternaries (:func:`quaternary_primitives`).
:func:`derived` turns primitives into the per-cell keys the structure uses.
"""
import difflib

import numpy as np

from selfcon.errors import MaterialError
from selfcon.input.materials.library import (ALLOYS, BINARIES, BOWED, CRYSTAL, PARAMETERS,
                                             QUATERNARIES, WURTZITE_ONLY, anisotropic_dos_mass,
                                             material_hole_dos_masses, spherical_hh_mass_error,
                                             spherical_inverse_masses,
                                             wurtzite_hole_masses, wurtzite_valence_edges)

#: (valley suffix, gap key, alpha key, beta key)
VALLEYS = (
    ("gamma", "band_gap", "varshni_alpha", "varshni_beta"),
    ("x", "x_gap", "x_varshni_alpha", "x_varshni_beta"),
    ("l", "l_gap", "l_varshni_alpha", "l_varshni_beta"),
)

#: output key -> unit, for cell_parameters
OUTPUT_UNITS = {
    "eg_gamma": "eV", "eg_x": "eV", "eg_l": "eV", "vbo": "eV",
    "ec_gamma": "eV", "ec_x": "eV", "ec_l": "eV", "ev_hh": "eV", "ev_lh": "eV",
    "m_e": "m0", "g_x": "1", "m_x_l": "m0", "m_x_t": "m0", "m_l_l": "m0", "m_l_t": "m0",
    "gamma1": "1", "gamma2": "1", "gamma3": "1",
    "m_hh_z": "m0", "m_lh_z": "m0", "m_hh_par": "m0", "m_lh_par": "m0",
    "m_c_dos": "m0", "m_v_dos": "m0",
    "eps": "1", "donor_binding": "eV", "acceptor_binding": "eV", "delta_so": "eV",
    "m_hh_dos": "m0", "m_lh_dos": "m0",
    "lattice": "nm", "c11": "GPa", "c12": "GPa", "c44": "GPa",
    "ac": "eV", "av": "eV", "b_dp": "eV", "d_dp": "eV",
    "xi_x_gap": "eV", "xi_x_u": "eV", "xi_l_gap": "eV", "xi_l_u": "eV",
    # wurtzite: in-plane electron mass (zincblende: m_e), the crystal-field split-off hole,
    # and the constants of the c-plane strain and polarization (selfcon.model.strain,
    # selfcon.model.polarization); ev_ch of a zincblende cell is its split-off edge
    "m_e_par": "m0", "ev_ch": "eV", "m_ch_z": "m0", "m_ch_par": "m0", "m_ch_dos": "m0",
    "wurtzite": "1", "lattice_c": "nm", "c13": "GPa", "c33": "GPa", "e31": "C/m^2",
    "e33": "C/m^2", "psp": "C/m^2", "delta_cr": "eV", "va1": "1", "va2": "1", "va3": "1",
    "va4": "1", "da1": "eV", "da2": "eV", "dd1": "eV", "dd2": "eV", "dd3": "eV", "dd4": "eV",
}

#: the temperature of the tabulated lattice constants (a(T) = a(T_LATTICE) + da/dT (T - T_LATTICE))
T_LATTICE = 300.0

#: what a deck-local material without ``base`` gets when an optional group is absent
#: (documented in DEVELOPERS.md via cell_parameters' docstring)
FILL_VALLEY_OFFSET = 10.0   # eV: absent X/L valley sits this far above the Γ edge
FILL_MASS = 1.0             # m0: absent X/L masses; absent Luttinger -> γ1 = 1, γ2 = γ3 = 0

_REQUIRED_NO_BASE = ("band_gap", "valence_band_offset", "electron_mass", "permittivity")
#: what a deck-local material without base must give when its layer is strained
_REQUIRED_STRAIN = ("lattice_constant", "elastic_c11", "elastic_c12", "deformation_ac",
                    "deformation_av", "deformation_b")
_LUTTINGER = ("luttinger_gamma1", "luttinger_gamma2", "luttinger_gamma3")
#: the stored hole DOS masses (0: not stored) and the sign of 2 gamma_bar in the inverse of
#: each one's spherical estimate, gamma1 -/+ 2 gamma_bar
HOLE_DOS_KEYS = (("hole_dos_mass_hh", -1.0), ("hole_dos_mass_lh", +1.0))


def varshni(eg0, alpha, beta, temperature):
    """Eg(T) = Eg(0) - alpha T^2 / (T + beta); with beta = 0 this is Eg(0) - alpha T."""
    t = np.asarray(temperature, dtype=float)
    den = t + beta
    safe = np.where(den > 0.0, den, 1.0)
    return eg0 - np.where(den > 0.0, alpha * t * t / safe, 0.0)


# ---------------------------------------------------------------- library
def _suggest(name, choices):
    lower = {c.lower(): c for c in choices}
    close = difflib.get_close_matches(name.lower(), list(lower), n=1, cutoff=0.5)
    return f"; did you mean {lower[close[0]]!r}?" if close else ""


def unknown_material(name, local_names=()):
    allowed = tuple(BINARIES) + tuple(ALLOYS) + tuple(QUATERNARIES) + tuple(local_names)
    return MaterialError(f"unknown material {name!r}{_suggest(str(name), allowed)}",
                         key="material", allowed=", ".join(allowed))


def check_x(name, x):
    """x for a library alloy: every cell finite and in [0, 1]."""
    bad = ~np.isfinite(x)
    if bad.any():
        raise MaterialError(f"{name} is an alloy and needs the alloy fraction x "
                            f"({ALLOYS[name].meaning_of_x})", key="x", allowed="0 <= x <= 1")
    out = (x < 0.0) | (x > 1.0)
    if out.any():
        raise MaterialError(f"alloy fraction x = {float(x[out][0]):g} of {name} is outside [0, 1]",
                            key="x", allowed="0 <= x <= 1")


def lattice_at(prim, temperature):
    """a(T) = a(300 K) + da/dT (T - 300 K), the linear form of the review's tables."""
    return prim["lattice_constant"] + prim["lattice_expansion"] * (float(temperature) - T_LATTICE)


def binary_primitives(name, shape, temperature):
    prim = {k: np.full(shape, v.value, dtype=float) for k, v in BINARIES[name].items()}
    # 1 for a wurtzite crystal (the alloy rules keep it: both ends of an alloy share it)
    prim["wurtzite"] = np.full(shape, 1.0 if CRYSTAL.get(name) == "wurtzite" else 0.0)
    for suffix, gap, alpha, beta in VALLEYS:
        prim["eg_" + suffix] = varshni(prim[gap], prim[alpha], prim[beta], temperature)
    prim["lattice_t"] = lattice_at(prim, temperature)
    return prim


def bowing_value(bow, x):
    return bow.c0 + bow.c1 * x


def alloy_primitives(name, x, temperature):
    """Endpoints at T, then P(x) = (1-x) P0 + x P1 - x(1-x) C(x) (C = 0: linear)."""
    alloy = ALLOYS[name]
    x = np.asarray(x, dtype=float)
    check_x(name, x)
    p0 = binary_primitives(alloy.end0, x.shape, temperature)
    p1 = binary_primitives(alloy.end1, x.shape, temperature)
    prim = {k: (1.0 - x) * p0[k] + x * p1[k] for k in p0}
    blend_hole_dos_masses(prim, [p0, p1], [1.0 - x, x], 1.0)
    bowed_keys = {key: key for key in BOWED}
    for suffix, gap, _, _ in VALLEYS:      # the gap at T bows like the gap at 0 K
        bowed_keys["eg_" + suffix] = gap
    for key, bkey in bowed_keys.items():
        bow = alloy.bowing[bkey]
        if bow.c0 or bow.c1:
            prim[key] = prim[key] - x * (1.0 - x) * bowing_value(bow, x)
    return prim


def check_xy(name, x, y):
    """x and y of a library quaternary: every cell finite, in [0, 1] (x + y <= 1 for the
    one-sublattice kind)."""
    q = QUATERNARIES[name]
    for key, v, meaning in (("x", x, q.meaning_of_x), ("y", y, q.meaning_of_y)):
        if (~np.isfinite(v)).any():
            raise MaterialError(f"{name} is a quaternary and needs {key} ({meaning}); or give "
                                "lattice_matched and one of x, y", key=key,
                                allowed="0 <= " + key + " <= 1")
        out = (v < 0.0) | (v > 1.0)
        if out.any():
            raise MaterialError(f"{key} = {float(v[out][0]):g} of {name} is outside [0, 1]",
                                key=key, allowed=f"0 <= {key} <= 1")
    if q.kind == "one-sublattice":
        over = x + y > 1.0 + 1e-12
        if over.any():
            i = int(np.flatnonzero(over)[0])
            raise MaterialError(f"x + y = {float(x[i] + y[i]):g} of {name} exceeds 1 "
                                f"({q.meaning_of_x})", key="y", allowed="x + y <= 1")


def _blend(parts, weights, den):
    """sum_k w_k P_k / den over every primitive key (the hole DOS masses by
    :func:`blend_hole_dos_masses`)."""
    out = {}
    for key in parts[0]:
        acc = 0.0
        for p, w in zip(parts, weights):
            acc = acc + w * p[key]
        out[key] = acc / den
    blend_hole_dos_masses(out, parts, weights, den)
    return out


def blend_hole_dos_masses(out, parts, weights, den):
    """The stored hole DOS masses of a mixture of ``parts`` (primitives) with ``weights``
    (sum: ``den``), into ``out``.  Where a part that stores a mass (> 0) has a weight, the
    inverse masses are interpolated, 1/m = sum_k w_k / m_k / den, each part without a stored
    mass taking its spherical estimate 1/m_k = gamma1 -/+ 2 gamma_bar.  The Luttinger
    parameters are inverse masses that the alloys interpolate linearly (ALLOY_RULES), so
    this is the same rule: it equals the spherical estimate of the interpolated Luttinger
    parameters where no part stores a mass, and a heavy stored mass cannot dominate the way
    it would if the masses were interpolated.  Elsewhere the mass stays 0 (not stored), and
    derived() takes the spherical estimate from the interpolated Luttinger parameters, the
    bits of an alloy of ends that store none."""
    shape = np.shape(out["luttinger_gamma1"])
    for key, sign in HOLE_DOS_KEYS:
        if not any(p[key].any() for p in parts):     # the common case: nothing stored
            out[key] = np.zeros(shape)
            continue
        stored = np.zeros(shape, dtype=bool)
        inv = 0.0
        for p, w in zip(parts, weights):
            has = p[key] > 0.0
            stored = stored | (has & (np.asarray(w) > 0.0))
            spherical = spherical_inverse_masses(p["luttinger_gamma1"], p["luttinger_gamma2"],
                                                 p["luttinger_gamma3"])[0 if sign < 0 else 1]
            safe = np.where(has, p[key], 1.0)
            inv = inv + w * np.where(has, 1.0 / safe, spherical)
        with np.errstate(divide="ignore", invalid="ignore"):
            out[key] = np.where(stored, den / inv, 0.0)


def quaternary_primitives(name, x, y, temperature):
    """Primitives of a library quaternary from its ternaries (bowing included).

    Two mixed sublattices, A_x B_(1-x) C_y D_(1-y) (Glisson et al.):
      Q = [x(1-x)(y T_y1(x) + (1-y) T_y0(x)) + y(1-y)(x T_x1(y) + (1-x) T_x0(y))]
          / [x(1-x) + y(1-y)]
    Three elements on one sublattice, A_x B_y C_z D with z = 1-x-y (Williams et al.):
      Q = [x y T_AB(u) + y z T_BC(v) + x z T_AC(w)] / (xy + yz + xz),
    each ternary at the perpendicular projection of (x, y, z) onto its edge
    (A share x + z/2 on AB, and so on).  Both reduce to the ternaries on the edges and to
    the binaries at the corners, and to plain (bi)linear interpolation where no ternary bows.
    """
    q = QUATERNARIES[name]
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    check_xy(name, x, y)
    if q.kind == "two-sublattice":
        t = {e: alloy_primitives(q.edges[e], x if e.startswith("y") else y, temperature)
             for e in ("y=1", "y=0", "x=1", "x=0")}
        wx, wy = x * (1.0 - x), y * (1.0 - y)
        den = wx + wy
        corner = den <= 0.0
        den = np.where(corner, 1.0, den)
        wx = np.where(corner, 1.0, wx)          # at a corner x(1-x) = y(1-y) = 0: the edge
        prim = _blend([t["y=1"], t["y=0"], t["x=1"], t["x=0"]],
                      [wx * y, wx * (1.0 - y), wy * x, wy * (1.0 - x)], den)
        return _quaternary_gap_bowing(q, prim, x * (1.0 - x) * y * (1.0 - y))
    z = 1.0 - x - y
    share = {"A": x, "B": y, "C": z}
    parts, weights = [], []
    for pair in ("AB", "BC", "AC"):
        ternary, counted = q.edges[pair]
        p, r = pair[0], pair[1]
        other = ({"A", "B", "C"} - {p, r}).pop()
        frac = share[counted] + 0.5 * share[other]      # projection onto the edge
        parts.append(alloy_primitives(ternary, np.clip(frac, 0.0, 1.0), temperature))
        weights.append(share[p] * share[r])
    den = weights[0] + weights[1] + weights[2]
    corner = den <= 0.0
    if corner.any():
        binaries = [binary_primitives(q.corners[c], x.shape, temperature) for c in "ABC"]
        cw = [np.where(corner, share[c], 0.0) for c in "ABC"]
        parts += binaries
        weights = [np.where(corner, 0.0, w) for w in weights] + cw
        den = np.where(corner, 1.0, den)
    return _quaternary_gap_bowing(q, _blend(parts, weights, den), x * y * z)


def _quaternary_gap_bowing(q, prim, w):
    if q.gap_bowing:
        c = q.gap_bowing[0]
        prim["band_gap"] = prim["band_gap"] - c * w
        prim["eg_gamma"] = prim["eg_gamma"] - c * w
    return prim


# ---------------------------------------------------------------- deck-local
def local_params(d):
    """The parameters a deck-local material definition ``d`` sets: name -> value."""
    params = getattr(d, "params", ())
    if isinstance(params, dict):
        return dict(params)
    return {k: float(v) for k, v in params}


def _where(d):
    return {"file": getattr(d, "file", None), "line": getattr(d, "line", None)}


def _check_keys(d, params):
    for key in params:
        if key not in PARAMETERS:
            close = difflib.get_close_matches(key, list(PARAMETERS), n=1, cutoff=0.6)
            hint = f"; did you mean {close[0]!r}?" if close else ""
            raise MaterialError(f"unknown material parameter {key!r}{hint}",
                                key=f"material.{d.name}.{key}", allowed=", ".join(PARAMETERS),
                                **_where(d))


def apply_overrides(prim, params, temperature):
    """Override primitives by deck keys.  A new 0 K gap keeps the base's
    temperature shift unless the deck also gives a Varshni term, in which case
    the Varshni form is used with the given term(s) and the base's other one."""
    shape = prim["band_gap"].shape
    for suffix, gap, alpha, beta in VALLEYS:
        if not (gap in params or alpha in params or beta in params):
            continue
        old0, old_t = prim[gap], prim["eg_" + suffix]
        new0 = np.full(shape, params[gap]) if gap in params else old0
        if alpha in params or beta in params:
            a = np.full(shape, params[alpha]) if alpha in params else prim[alpha]
            b = np.full(shape, params[beta]) if beta in params else prim[beta]
            prim[alpha], prim[beta] = a, b
            prim["eg_" + suffix] = varshni(new0, a, b, temperature)
        else:
            prim["eg_" + suffix] = new0 + (old_t - old0)
        prim[gap] = new0
    skip = {k for v in VALLEYS for k in v[1:]}
    for key, value in params.items():
        if key not in skip:
            prim[key] = np.full(shape, float(value))
    if any(k in params for k in _LUTTINGER):
        # the base's stored hole DOS masses belong to the base's Luttinger parameters: with
        # new ones and no new mass, the spherical estimate of the new ones (checked by validate)
        for key, _ in HOLE_DOS_KEYS:
            if key not in params:
                prim[key] = np.zeros(shape)
    if "lattice_constant" in params or "lattice_expansion" in params:
        prim["lattice_t"] = lattice_at(prim, temperature)
    return prim


def _missing(d, param, why):
    return MaterialError(f"material {d.name!r} has no base and does not give {param!r}{why}",
                         key=f"material.{d.name}.{param}", **_where(d))


def standalone_primitives(d, params, shape, temperature, needs):
    """A deck-local material without base: required keys, optional groups filled."""
    for key in _REQUIRED_NO_BASE:
        if key not in params:
            raise _missing(d, key, " (required without base)")
    p = dict(params)
    p.setdefault("varshni_alpha", 0.0)
    p.setdefault("varshni_beta", 0.0)
    p.setdefault("spin_orbit", 0.0)
    # holes
    if "heavy_hole" in needs or "light_hole" in needs:
        for key in _LUTTINGER[:2]:
            if key not in p:
                raise _missing(d, key, " (needed for hole carriers)")
    else:
        p.setdefault("luttinger_gamma1", 1.0)
        p.setdefault("luttinger_gamma2", 0.0)
    p.setdefault("luttinger_gamma3", p["luttinger_gamma2"])   # spherical approximation
    for key, _ in HOLE_DOS_KEYS:
        p.setdefault(key, 0.0)          # not stored: the spherical estimate (checked by validate)
    # X and L valleys
    for valley, gap, mass_keys in (("x_valley", "x_gap", ("x_mass_long", "x_mass_trans")),
                                   ("l_valley", "l_gap", ("l_mass_long", "l_mass_trans"))):
        pre = gap[0]
        if valley in needs:
            for key in (gap,) + mass_keys:
                if key not in p:
                    raise _missing(d, key, f" (needed for the {valley.replace('_', ' ')})")
        if gap not in p:
            # far above Γ at every T: same Varshni terms as Γ, offset by FILL_VALLEY_OFFSET
            p[gap] = p["band_gap"] + FILL_VALLEY_OFFSET
            p.setdefault(f"{pre}_varshni_alpha", p["varshni_alpha"])
            p.setdefault(f"{pre}_varshni_beta", p["varshni_beta"])
        p.setdefault(f"{pre}_varshni_alpha", 0.0)
        p.setdefault(f"{pre}_varshni_beta", 0.0)
        for key in mass_keys:
            p.setdefault(key, FILL_MASS)
    p.setdefault("x_valleys", 3.0)      # a zincblende crystal's three X valleys
    # dopant levels
    for key in ("donor_binding", "acceptor_binding"):
        if "thermal_ionization" in needs and key not in p:
            raise _missing(d, key, " (needed for thermal ionization)")
        p.setdefault(key, 0.0)
    # lattice, elasticity, deformation potentials: needed only in a strained stack; else
    # the lattice and elastic constants are unknown (NaN) and the potentials 0
    if "strain" in needs:
        for key in _REQUIRED_STRAIN:
            if key not in p:
                raise _missing(d, key, " (needed in a strained stack: [substrate] material "
                                       "or lattice_constant, or a relaxed layer)")
    for key in ("lattice_constant", "elastic_c11", "elastic_c12", "elastic_c44"):
        p.setdefault(key, float("nan"))
    for key in ("lattice_expansion", "deformation_ac", "deformation_av", "deformation_b",
                "deformation_d", "x_deformation_gap", "x_deformation_u", "l_deformation_gap",
                "l_deformation_u"):
        p.setdefault(key, 0.0)
    # the wurtzite-only parameters: a standalone material is zincblende (no polarization)
    for key, same in (("lattice_constant_c", "lattice_constant"), ("elastic_c13", "elastic_c12"),
                      ("elastic_c33", "elastic_c11"), ("electron_mass_perp", "electron_mass")):
        p.setdefault(key, p[same])          # a cubic crystal's values for the [001] axis
    for key in WURTZITE_ONLY:
        p.setdefault(key, 0.0)
    prim = {k: np.full(shape, float(p[k])) for k in PARAMETERS}
    prim["wurtzite"] = np.zeros(shape)
    prim["lattice_t"] = lattice_at(prim, temperature)
    for suffix, gap, alpha, beta in VALLEYS:
        prim["eg_" + suffix] = varshni(prim[gap], prim[alpha], prim[beta], temperature)
    return prim


def _no_y(name, y, what):
    if y is not None and np.isfinite(y).any():
        raise MaterialError(f"{name} is {what}: it takes no second composition y (only "
                            "InGaAsP and AlGaInAs do)", key="y")


def resolve(name, x, temperature, local, needs, chain=(), y=None):
    """Primitives of ``name`` (library or deck-local) on cells with fractions ``x`` (and
    ``y`` for quaternaries; None or NaN: not given)."""
    if name in chain:
        loop = " -> ".join(chain + (name,))
        raise MaterialError(f"deck-local materials form a cycle: {loop}",
                            key=f"material.{chain[0]}.base", **_where(local[chain[0]]))
    d = local.get(name)
    if d is None:
        if name in BINARIES:
            _no_y(name, y, "a binary")
            return binary_primitives(name, x.shape, temperature)
        if name in ALLOYS:
            _no_y(name, y, "a ternary (" + ALLOYS[name].meaning_of_x + ")")
            return alloy_primitives(name, x, temperature)
        if name in QUATERNARIES:
            yy = np.full(x.shape, np.nan) if y is None else np.asarray(y, dtype=float)
            return quaternary_primitives(name, x, yy, temperature)
        err = unknown_material(name, local)
        if chain:
            err = MaterialError(err.message, key=f"material.{chain[-1]}.base",
                                allowed=err.allowed, **_where(local[chain[-1]]))
        raise err
    if name in BINARIES or name in ALLOYS or name in QUATERNARIES:
        raise MaterialError(f"deck-local material {name!r} has the name of a library material; "
                            "give it its own name and base = " + repr(name),
                            key=f"material.{name}", **_where(d))
    params = local_params(d)
    _check_keys(d, params)
    base = getattr(d, "base", None)
    if base is None:
        _no_y(name, y, "a deck-local material without base")
        return standalone_primitives(d, params, x.shape, temperature, needs)
    fixed = {}
    for key, v in (("x", x), ("y", y)):
        dv = getattr(d, key, None)
        if dv is not None:
            given = np.isfinite(v) if v is not None else np.zeros(x.shape, dtype=bool)
            if given.any() and not np.allclose(v[given], dv, rtol=0.0, atol=1e-12):
                raise MaterialError(
                    f"material {name!r} fixes {key} = {dv:g}; the layer gives {key} = "
                    f"{float(v[given][0]):g} (leave the layer's {key} out or make it equal)",
                    key=f"material.{name}.{key}", **_where(d))
            fixed[key] = np.full(x.shape, float(dv))
    x = fixed.get("x", x)
    y = fixed.get("y", y)
    prim = resolve(base, x, temperature, local, needs, chain + (name,), y)
    return apply_overrides(prim, params, temperature)


# ---------------------------------------------------------------- derived
_CHECK_POSITIVE = (
    ("electron_mass", "electron_mass"), ("x_mass_long", "x_mass_long"),
    ("x_mass_trans", "x_mass_trans"), ("l_mass_long", "l_mass_long"),
    ("l_mass_trans", "l_mass_trans"), ("permittivity", "permittivity"),
    ("x_valleys", "x_valleys"),
)


def validate(name, prim):
    for key, label in _CHECK_POSITIVE:
        if not (prim[key] > 0.0).all():
            raise MaterialError(f"{label} of {name} must be positive, got {float(prim[key].min()):g}",
                                key=f"material.{name}.{key}")
    g1, g2, g3 = prim["luttinger_gamma1"], prim["luttinger_gamma2"], prim["luttinger_gamma3"]
    inv_hh, inv_lh = spherical_inverse_masses(g1, g2, g3)
    for den, text, key in (
            (g1 - 2 * g2, "gamma1 - 2 gamma2 (1/m_hh along z)", "luttinger_gamma2"),
            (g1 + 2 * g2, "gamma1 + 2 gamma2 (1/m_lh along z)", "luttinger_gamma2"),
            (g1 + g2, "gamma1 + gamma2 (1/m_hh in plane)", "luttinger_gamma2"),
            (g1 - g2, "gamma1 - gamma2 (1/m_lh in plane)", "luttinger_gamma2"),
            (inv_hh, "gamma1 - 2 (2 gamma2 + 3 gamma3)/5 (1/m_hh, density of states)",
             "luttinger_gamma3"),
            (inv_lh, "gamma1 + 2 (2 gamma2 + 3 gamma3)/5 (1/m_lh, density of states)",
             "luttinger_gamma3")):
        if not (den > 0.0).all():
            raise MaterialError(f"Luttinger parameters of {name} give {text} = "
                                f"{float(den.min()):g} <= 0 (a negative or infinite hole mass)",
                                key=f"material.{name}.{key}")
    err = spherical_hh_mass_error(name, g1, g2, g3, prim["hole_dos_mass_hh"])
    if err is not None:
        raise err
    for key in ("donor_binding", "acceptor_binding", "spin_orbit", "hole_dos_mass_hh",
                "hole_dos_mass_lh"):
        if (prim[key] < 0.0).any():
            raise MaterialError(f"{key} of {name} must not be negative",
                                key=f"material.{name}.{key}")
    for key in ("lattice_constant", "elastic_c11", "elastic_c12", "elastic_c44"):
        v = prim[key]
        if (np.isfinite(v) & ~(v > 0.0)).any():          # NaN: not given (unstrained use only)
            raise MaterialError(f"{key} of {name} must be positive, got {float(np.nanmin(v)):g}",
                                key=f"material.{name}.{key}")
    wz = prim.get("wurtzite", np.zeros(1)) > 0.5
    if wz.any():
        for key in ("electron_mass_perp", "elastic_c13", "elastic_c33", "lattice_constant_c"):
            v = prim[key][wz]
            if not (v > 0.0).all():
                raise MaterialError(f"{key} of {name} must be positive, got {float(np.min(v)):g}",
                                    key=f"material.{name}.{key}")
        masses = wurtzite_hole_masses(prim["valence_a1"], prim["valence_a2"], prim["valence_a3"],
                                      prim["valence_a4"], prim["crystal_field"], prim["spin_orbit"])
        for label, m in masses.items():
            if not (m[wz] > 0.0).all() or not np.isfinite(m[wz]).all():
                raise MaterialError(f"valence_a1..valence_a4 of {name} give the hole mass {label} = "
                                    f"{float(np.min(m[wz])):g} m0 (not positive)",
                                    key=f"material.{name}.valence_a1")
    if (np.isfinite(prim["lattice_t"]) & ~(prim["lattice_t"] > 0.0)).any():
        raise MaterialError(f"lattice_expansion of {name} makes the lattice constant negative at "
                            "this temperature", key=f"material.{name}.lattice_expansion")


def derived(prim):
    """Per-cell quantities from primitives, unstrained: ev_hh = ev_lh = vbo (the strain shifts
    of biaxially strained layers are added by selfcon.model.strain)."""
    g1, g2, g3 = prim["luttinger_gamma1"], prim["luttinger_gamma2"], prim["luttinger_gamma3"]
    vbo = prim["valence_band_offset"]
    m_hh_z, m_lh_z = 1.0 / (g1 - 2 * g2), 1.0 / (g1 + 2 * g2)
    m_hh_par, m_lh_par = 1.0 / (g1 + g2), 1.0 / (g1 - g2)   # axial approximation
    # bulk DOS masses: the material's stored ones (GaP and its alloys), else the spherical
    # average of the warped bands (Lipari and Baldereschi 1970), not the axial subband masses
    # (those give 0.25 m0 for GaAs, half the handbook value)
    m_hh, m_lh = material_hole_dos_masses(g1, g2, g3, prim["hole_dos_mass_hh"],
                                          prim["hole_dos_mass_lh"])
    out = {
        "eg_gamma": prim["eg_gamma"], "eg_x": prim["eg_x"], "eg_l": prim["eg_l"], "vbo": vbo,
        "ec_gamma": vbo + prim["eg_gamma"], "ec_x": vbo + prim["eg_x"], "ec_l": vbo + prim["eg_l"],
        "ev_hh": vbo.copy(), "ev_lh": vbo.copy(),
        "m_e": prim["electron_mass"],
        "m_x_l": prim["x_mass_long"], "m_x_t": prim["x_mass_trans"], "g_x": prim["x_valleys"],
        "m_l_l": prim["l_mass_long"], "m_l_t": prim["l_mass_trans"],
        "gamma1": g1, "gamma2": g2, "gamma3": g3,
        "m_hh_z": m_hh_z, "m_lh_z": m_lh_z, "m_hh_par": m_hh_par, "m_lh_par": m_lh_par,
        "m_c_dos": prim["electron_mass"].copy(),
        "m_v_dos": (m_hh ** 1.5 + m_lh ** 1.5) ** (2.0 / 3.0),
        "eps": prim["permittivity"],
        "donor_binding": prim["donor_binding"], "acceptor_binding": prim["acceptor_binding"],
        "delta_so": prim["spin_orbit"],
        "m_hh_dos": m_hh, "m_lh_dos": m_lh,
        "lattice": prim["lattice_t"], "c11": prim["elastic_c11"], "c12": prim["elastic_c12"],
        "c44": prim["elastic_c44"], "ac": prim["deformation_ac"], "av": prim["deformation_av"],
        "b_dp": prim["deformation_b"], "d_dp": prim["deformation_d"],
        "xi_x_gap": prim["x_deformation_gap"], "xi_x_u": prim["x_deformation_u"],
        "xi_l_gap": prim["l_deformation_gap"], "xi_l_u": prim["l_deformation_u"],
    }
    out.update(_wurtzite_derived(prim, out))
    return {k: np.array(v, dtype=float) for k, v in out.items()}


def _wurtzite_derived(prim, out):
    """The keys of the wurtzite model, and the wurtzite cells' own values of the shared keys
    (band edges split by the crystal field, anisotropic masses, DOS masses); zincblende
    cells keep theirs, with ev_ch their split-off edge vbo - Δso and m_ch = 1/γ1 (the
    simplest split-off mass, common practice)."""
    wz = prim.get("wurtzite", np.zeros_like(prim["band_gap"])) > 0.5
    vbo = prim["valence_band_offset"]
    g1 = prim["luttinger_gamma1"]
    new = {"m_e_par": prim["electron_mass"].copy(), "ev_ch": vbo - prim["spin_orbit"],
           "m_ch_z": 1.0 / g1, "m_ch_par": 1.0 / g1, "m_ch_dos": 1.0 / g1,
           "wurtzite": np.where(wz, 1.0, 0.0), "lattice_c": prim["lattice_constant_c"],
           "c13": prim["elastic_c13"], "c33": prim["elastic_c33"], "e31": prim["piezo_e31"],
           "e33": prim["piezo_e33"], "psp": prim["spontaneous_polarization"],
           "delta_cr": prim["crystal_field"], "va1": prim["valence_a1"],
           "va2": prim["valence_a2"], "va3": prim["valence_a3"], "va4": prim["valence_a4"],
           "da1": prim["deformation_a1"], "da2": prim["deformation_a2"],
           "dd1": prim["deformation_d1"], "dd2": prim["deformation_d2"],
           "dd3": prim["deformation_d3"], "dd4": prim["deformation_d4"]}
    if not wz.any():
        return new
    with np.errstate(invalid="ignore", divide="ignore"):
        e_hh, e_lh, e_ch = wurtzite_valence_edges(prim["crystal_field"], prim["spin_orbit"])
        top = np.maximum(e_hh, e_lh)
        m = wurtzite_hole_masses(prim["valence_a1"], prim["valence_a2"], prim["valence_a3"],
                                 prim["valence_a4"], prim["crystal_field"], prim["spin_orbit"])
        me_z, me_p = prim["electron_mass"], prim["electron_mass_perp"]
        dos = {b: anisotropic_dos_mass(m[f"m_{b}_par"], m[f"m_{b}_perp"]) for b in ("hh", "lh", "ch")}
        wz_vals = {
            # the valence edges relative to the top of the valence band (vbo) at k = 0
            "ev_hh": vbo + e_hh - top, "ev_lh": vbo + e_lh - top, "ev_ch": vbo + e_ch - top,
            # along c = along z (c-plane growth); perpendicular to c = in the growth plane
            "m_hh_z": m["m_hh_par"], "m_hh_par": m["m_hh_perp"],
            "m_lh_z": m["m_lh_par"], "m_lh_par": m["m_lh_perp"],
            "m_ch_z": m["m_ch_par"], "m_ch_par": m["m_ch_perp"],
            "m_e_par": me_p, "m_c_dos": anisotropic_dos_mass(me_z, me_p),
            "m_hh_dos": dos["hh"], "m_lh_dos": dos["lh"], "m_ch_dos": dos["ch"],
            "m_v_dos": (dos["hh"] ** 1.5 + dos["lh"] ** 1.5 + dos["ch"] ** 1.5) ** (2.0 / 3.0),
        }
    wz_vals["ec_gamma"] = vbo + prim["eg_gamma"]
    for k, v in wz_vals.items():
        base = new[k] if k in new else out[k]
        new[k] = np.where(wz, v, base)
    return new
