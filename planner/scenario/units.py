"""Quantities with units in scenario files.

A quantity field accepts a bare number, taken in the field's unit, or a text
``"<number> <unit>"`` whose unit is the field's own or one that converts to it
(``"30 min"`` for a field in hours, ``"2 weeks"`` for days). Anything else is a clear
error that names the expected unit.
"""

from __future__ import annotations

import math
import re

__all__ = ["parse_quantity", "CONVERSIONS", "UnitError"]

#: unit -> (dimension, factor to the dimension's base unit)
CONVERSIONS: dict[str, tuple[str, float]] = {
    "kg": ("mass", 1.0), "g": ("mass", 1e-3), "t": ("mass", 1e3),
    "s": ("duration", 1.0), "min": ("duration", 60.0), "h": ("duration", 3600.0),
    "day": ("age", 1.0), "week": ("age", 7.0),
    "-": ("ratio", 1.0), "%": ("ratio", 0.01),
}

_ALIASES = {
    "kgs": "kg", "kilogram": "kg", "kilograms": "kg", "grams": "g", "gram": "g",
    "tonne": "t", "tonnes": "t", "sec": "s", "second": "s", "seconds": "s",
    "mins": "min", "minute": "min", "minutes": "min", "hour": "h", "hours": "h", "hr": "h",
    "hrs": "h", "days": "day", "d": "day", "weeks": "week", "wk": "week", "percent": "%",
}

_PATTERN = re.compile(r"^\s*([-+]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")


class UnitError(ValueError):
    """A value whose unit does not fit the field."""


def _canonical(unit: str) -> str:
    u = unit.strip()
    low = u.lower()
    return _ALIASES.get(low, low if low in CONVERSIONS else u)


def parse_quantity(value, unit: str):
    """Return ``value`` as a number in ``unit``.

    Parameters
    ----------
    value : number or str
        A number (in ``unit``) or a text such as ``"6 kg"``.
    unit : str
        The unit the field is expressed in (e.g. ``"kg"``, ``"h"``, ``"day"``,
        ``"cages"``).
    """
    if isinstance(value, bool):
        raise UnitError(f"a number in {unit} is needed, not true/false")
    if isinstance(value, (int, float)):
        return value
    if not isinstance(value, str):
        return value  # let the type check report it
    m = _PATTERN.match(value)
    if not m:
        raise UnitError(f"a number in {unit} is needed (e.g. 12 or '12 {unit}'), not {value!r}")
    number = float(m.group(1))
    if not math.isfinite(number):
        raise UnitError("the number must be finite")
    given = m.group(2)
    if given == "":
        return number
    g, want = _canonical(given), _canonical(unit)
    if g == want or given == unit:
        return number
    if g in CONVERSIONS and want in CONVERSIONS and CONVERSIONS[g][0] == CONVERSIONS[want][0]:
        return number * CONVERSIONS[g][1] / CONVERSIONS[want][1]
    raise UnitError(f"wrong unit {given!r}: this quantity is in {unit} (write a plain number "
                    f"in {unit}, or '{m.group(1)} {unit}')")
