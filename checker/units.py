"""The one table of units. Convert once, at the edge.

Inside couplint, geometry is in millimetres and physics in SI units (F, V,
ohm, Hz, s). A quantity in a YAML file (rules, stackup) is a string
``"<number> <unit>"``: ``10 mV``, ``100 kohm``, ``35 um``. A bare number is
refused wherever a unit is needed (``max_noise: 10`` could be 10 V or
10 mV: the quiet reading is the dangerous one); only a plain ratio, and 0,
which is 0 in every unit, go without. ``parse_quantity`` turns a quantity
into the internal unit and rejects a missing or unknown unit with a message
that lists the accepted ones.
"""

from __future__ import annotations

import math
import re

from .describe import describe_value, shorten

#: kind -> {unit: factor to the internal unit}; internal units are mm for
#: length, F for capacitance, V for voltage, Hz, s, ohm and degrees.
UNITS: dict[str, dict[str, float]] = {
    "length": {"mm": 1.0, "um": 1e-3, "mil": 0.0254, "in": 25.4},
    "capacitance": {"pF": 1e-12, "fF": 1e-15, "nF": 1e-9},
    "voltage": {"V": 1.0, "mV": 1e-3},
    "frequency": {"Hz": 1.0, "kHz": 1e3, "MHz": 1e6, "GHz": 1e9},
    "time": {"s": 1.0, "ns": 1e-9, "ps": 1e-12},
    "resistance": {"ohm": 1.0, "kohm": 1e3, "Mohm": 1e6},
    "angle": {"deg": 1.0},
    "ratio": {"": 1.0},
}

#: The unit a quantity is shown in, per kind (messages, examples).
DEFAULT_UNIT: dict[str, str] = {
    "length": "mm",
    "capacitance": "pF",
    "voltage": "V",
    "frequency": "MHz",
    "time": "ns",
    "resistance": "ohm",
    "angle": "deg",
    "ratio": "",
}

_QUANTITY = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*([A-Za-z]*)\s*$")


class UnitError(ValueError):
    """A quantity string that cannot be read; the message says why."""


def parse_quantity(value: object, kind: str) -> float:
    """Return ``value`` in the internal unit of ``kind``.

    >>> parse_quantity("10 mil", "length")
    0.254
    >>> parse_quantity("100 kohm", "resistance")
    100000.0
    >>> parse_quantity(0.5, "ratio")
    0.5
    >>> parse_quantity(10, "voltage")
    Traceback (most recent call last):
    ...
    checker.units.UnitError: a voltage needs its unit: write '10 V' or '10 mV' (accepted: V, mV)
    """
    table = UNITS[kind]
    # as written, shortened (repr of a 5 000-digit integer is refused by Python itself)
    shown = describe_value(value) if isinstance(value, int) else shorten(repr(value), 60)
    if isinstance(value, bool):
        raise UnitError(f"expected a {kind}, got {shown}")
    if isinstance(value, (int, float)):
        number, unit, written = _float(value, kind, shown), None, shorten(f"{value:g}", 30)
    elif isinstance(value, str):
        m = _QUANTITY.match(value)
        if not m:
            raise UnitError(f"expected a {kind} like '{_example(kind)}', got {shown}")
        number, unit, written = _float(m.group(1), kind, shown), m.group(2) or None, shorten(m.group(1), 30)
    else:
        raise UnitError(f"expected a {kind} like '{_example(kind)}', got {shown}")
    if unit is None:
        if kind == "ratio" or number == 0:
            unit = DEFAULT_UNIT[kind]
        else:
            raise UnitError(needs_unit(kind, written))
    if unit not in table:
        accepted = ", ".join(u for u in table if u) or "no unit"
        raise UnitError(f"unknown {kind} unit {shorten(unit, 20)!r} (accepted: {accepted})")
    if not math.isfinite(number):
        raise UnitError(f"{kind} must be a finite number, got {shown}")
    value = number * table[unit]
    if not math.isfinite(value):  # 1e308 MHz: finite as written, not once in Hz
        raise UnitError(f"{kind} far too large, got {shown}")
    return round(value, 15) if kind == "length" else value


def _float(text: int | float | str, kind: str, shown: str) -> float:
    """``float(text)``; an integer beyond the float range is a UnitError."""
    try:
        return float(text)
    except OverflowError:
        raise UnitError(f"{kind} far too large, got {shown}") from None


def needs_unit(kind: str, written: str) -> str:
    """The message for a bare number where a ``kind`` needs its unit."""
    units = [u for u in UNITS[kind] if u]
    first_two = " or ".join(f"'{written} {u}'" for u in units[:2])
    return f"a {kind} needs its unit: write {first_two} (accepted: {', '.join(units)})"


def _example(kind: str) -> str:
    unit = DEFAULT_UNIT[kind]
    return f"1 {unit}".strip()
