"""The one number formatter of every text selfcon prints (README.md, "Numbers in the output").

Every table, ``--quiet`` line, sweep table, study summary and figure text box formats its
numbers here, so a number means the same wherever it is read:

* a **sheet density** (cm^-2) below ``SHEET_FLOOR_CM2`` = 1e3 cm^-2 shows as ``0``: that is
  one carrier in 1 mm x 0.1 mm, below anything a Hall or C-V measurement resolves, and the
  digits of such a number are solver noise (``1.1e-138``), not physics;
* a **volume density** (cm^-3) below ``VOLUME_FLOOR_CM3`` = 1 cm^-3 shows as ``0``;
* a **charge per area** (C/cm^2) or capacitance (F/cm^2) below q x 1e3 cm^-2 = 1.6e-16
  shows as ``0``;
* each quantity has fixed significant digits or decimals (``SPECS``): densities 3
  significant digits in the form ``4.94e11``; energies in meV one decimal, in eV four;
  lengths 3 significant digits (whole nanometres from 1000 nm up); potentials in V three decimals; residuals 2 significant
  digits; masses 4 significant digits.

:func:`fmt` formats one value of a named quantity; :func:`quantity_of` picks the quantity
from a column name's unit suffix (``_cm2``, ``_cm3``, ``_eV``, ``_meV``, ``_nm``, ``_V``,
``_K``), which is how the sweep and study tables format columns they do not know by name.
"""
from __future__ import annotations

import math
from typing import NamedTuple

#: cm^-2: sheet densities below this print as 0 (one carrier in 1 mm x 0.1 mm)
SHEET_FLOOR_CM2 = 1e3
#: cm^-3: volume densities below this print as 0
VOLUME_FLOOR_CM3 = 1.0
#: C/cm^2 (and F/cm^2 per volt): charges per area below the elementary charge times the
#: sheet floor, q * 1e3 cm^-2, print as 0
CHARGE_FLOOR_C_CM2 = 1.602176634e-19 * SHEET_FLOOR_CM2


class Spec(NamedTuple):
    """How one quantity prints: ``style`` "sci" (``digits`` significant, ``4.94e11``), "fixed"
    (``digits`` decimals), "general" (``digits`` significant, plain when short) or "length"
    (as general, but whole numbers from 10**digits up: ``1022``); values with magnitude
    below ``floor`` print as ``0``."""
    style: str
    digits: int
    floor: float = 0.0


SPECS = {
    "sheet": Spec("sci", 3, SHEET_FLOOR_CM2),         # cm^-2
    "volume": Spec("sci", 3, VOLUME_FLOOR_CM3),       # cm^-3
    "meV": Spec("fixed", 1),
    "eV": Spec("fixed", 4),
    "nm": Spec("length", 3),
    "V": Spec("fixed", 3),
    "K": Spec("general", 4),
    "s": Spec("general", 3),                          # wall time
    "residual": Spec("sci", 2),                       # V, a convergence measure
    "mass": Spec("general", 4),                       # m0
    "fraction": Spec("fixed", 3),                     # R^2, standardised coefficients, overlaps
    "capacitance": Spec("sci", 3, CHARGE_FLOOR_C_CM2),  # F/cm^2, C/cm^2
    "plain": Spec("general", 4),                      # anything else
}

#: column-name suffix -> quantity (longest suffix first)
SUFFIXES = (("_cm2", "sheet"), ("_cm-2", "sheet"), ("_cm3", "volume"), ("_cm-3", "volume"),
            ("_meV", "meV"), ("_eV", "eV"), ("_nm", "nm"), ("_V", "V"), ("_K", "K"),
            ("_m0", "mass"), ("_F_cm2", "capacitance"), ("_C_cm2", "capacitance"))


def quantity_of(name: str) -> str:
    """The quantity of a column or key name from its unit suffix (``plain`` when none)."""
    for suffix, q in sorted(SUFFIXES, key=lambda s: -len(s[0])):
        if name.endswith(suffix):
            return q
    return "plain"


def _sci(v: float, digits: int) -> str:
    mant, exp = f"{v:.{digits - 1}e}".split("e")
    return f"{mant}e{int(exp)}"


def fmt(value, quantity: str = "plain", *, sign: bool = False) -> str:
    """``value`` as text by the rule of ``quantity`` (a key of ``SPECS``).

    None and NaN print as ``–``; values below the quantity's floor as ``0``; ``sign`` adds
    ``+`` to positive numbers.

    Examples
    --------
    >>> fmt(4.9412e11, "sheet"), fmt(1.1e-138, "sheet"), fmt(-17.84, "meV", sign=True)
    ('4.94e11', '0', '-17.8')
    >>> fmt(0.100706, "nm"), fmt(9.77861, "nm"), fmt(3.17e-7, "residual")
    ('0.101', '9.78', '3.2e-7')
    """
    if value is None:
        return "–"
    try:
        v = float(value)
    except (TypeError, ValueError):
        return str(value)
    if math.isnan(v):
        return "–"
    if math.isinf(v):
        return ("+inf" if sign else "inf") if v > 0 else "-inf"
    spec = SPECS.get(quantity, SPECS["plain"])
    if v == 0.0 or abs(v) < spec.floor:
        return "0"
    plus = "+" if sign and v > 0 else ""
    if spec.style == "sci":
        return plus + _sci(v, spec.digits)
    if spec.style == "fixed":
        text = f"{v:.{spec.digits}f}"
        if float(text) == 0.0:
            text = text.lstrip("-")
            plus = "+" if sign else ""
        return plus + text
    if spec.style == "length" and abs(v) >= 10 ** spec.digits:
        return plus + f"{v:.0f}"                       # 1022 nm, never 1.02e3
    text = f"{v:.{spec.digits}g}"
    if "e" in text:
        return plus + _sci(v, spec.digits)
    return plus + text


def sheet(value) -> str:
    """A sheet density in cm^-2 (``fmt(value, "sheet")``)."""
    return fmt(value, "sheet")


def is_negligible_sheet(value) -> bool:
    """True when a sheet density prints as 0 (below ``SHEET_FLOOR_CM2``)."""
    try:
        return abs(float(value)) < SHEET_FLOOR_CM2
    except (TypeError, ValueError):
        return False
