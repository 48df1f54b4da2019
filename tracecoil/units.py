"""Length and other unit conversions.

Design files and the command line accept either plain numbers (in the unit
the key name carries, for example ``width_mm``) or strings with a unit such
as ``"0.15 mm"``, ``"6 mil"`` or ``"1 oz"`` (copper weight). Physics works in
SI; the single conversion from layout millimetres to metres happens in the
conductor model.
"""

from __future__ import annotations

import re

from .errors import SpecError

MM_PER_UNIT = {
    "mm": 1.0,
    "um": 1e-3,
    "µm": 1e-3,
    "cm": 10.0,
    "m": 1000.0,
    "mil": 0.0254,  # 1 mil = 0.001 inch = 0.0254 mm (exact by definition of the inch)
    "thou": 0.0254,
    "in": 25.4,
    "inch": 25.4,
}

# Copper weight to thickness: 1 oz/ft^2 = 305.15 g/m^2; with copper density
# 8960 kg/m^3 this is 34.1 um; boards are specified by the nominal 35 um
# (IPC-4562 nominal, from memory). We use the nominal value.
UM_PER_OZ = 35.0

_NUM_UNIT = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*([a-zA-Zµ]*)\s*$")

MM_PER_M = 1000.0


def _parse(value, field: str):
    if isinstance(value, bool):
        raise SpecError(f"{field} must be a number; got {value!r}")
    if isinstance(value, (int, float)):
        return float(value), ""
    if isinstance(value, str):
        m = _NUM_UNIT.match(value)
        if m:
            return float(m.group(1)), m.group(2)
    raise SpecError(f"{field} must be a number or a string such as '0.15 mm' or '6 mil'; got {value!r}")


def to_mm(value, field: str = "length") -> float:
    """Convert a length to millimetres.

    Plain numbers are taken as millimetres.

    >>> round(to_mm("6 mil"), 6)
    0.1524
    >>> to_mm(0.2)
    0.2
    """
    number, unit = _parse(value, field)
    if not unit:
        return number
    factor = MM_PER_UNIT.get(unit.lower()) if unit != "µm" else MM_PER_UNIT["µm"]
    if factor is None:
        raise SpecError(f"{field}: unknown length unit {unit!r} in {value!r}; use one of {', '.join(MM_PER_UNIT)}")
    return number * factor


def to_um(value, field: str = "thickness") -> float:
    """Convert a thickness to micrometres; plain numbers are micrometres.

    Accepts copper weights in ounces per square foot ("1 oz" = 35 um nominal).

    >>> to_um("1 oz")
    35.0
    >>> to_um("0.07 mm")
    70.0
    """
    number, unit = _parse(value, field)
    if not unit:
        return number
    if unit.lower() in ("oz", "ounce"):
        return number * UM_PER_OZ
    return to_mm(value, field) * 1000.0
