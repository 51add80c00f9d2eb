"""Lengths as people write them in part files, turned into metres.

A bare number means millimetres (the workshop unit). A string carries its unit:
``"400 mm"``, ``"40 cm"``, ``"0.4 m"``, ``"15.75 in"``, ``'15.75"'``, ``"3/4 in"``,
``"1 3/4 in"``. A string without a unit is millimetres too. The inch is exactly 25.4 mm
(international yard and pound agreement, 1959).

Use the annotated types in pydantic models:

- :data:`Length`: a strictly positive, finite length (thicknesses, widths, bar lengths);
- :data:`PositionLength`: a finite length that may be zero (positions measured from an end).

Both hand the model a float in metres.
"""

from __future__ import annotations

import math
import re
from fractions import Fraction
from typing import Annotated

from pydantic import BeforeValidator

from tonewright.errors import InputError

__all__ = [
    "ALLOWED_UNITS",
    "Length",
    "PositionLength",
    "format_mm",
    "parse_length",
    "parse_position",
]

# Metres per unit; aliases map onto the same factor.
_METRES_PER_UNIT: dict[str, float] = {
    "mm": 1e-3,
    "cm": 1e-2,
    "m": 1.0,
    "in": 0.0254,
    "inch": 0.0254,
    "inches": 0.0254,
    '"': 0.0254,
}

ALLOWED_UNITS = 'mm, cm, m, in (or ")'
"""Human-readable list of accepted units, quoted in error messages."""

_NUMBER = r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?"
_FRACTION = r"[+-]?\d+\s*/\s*\d+"
_MIXED = r"[+-]?\d+\s+\d+\s*/\s*\d+"
_LENGTH_RE = re.compile(
    rf"^\s*(?P<num>{_MIXED}|{_FRACTION}|{_NUMBER}|nan|inf|infinity)\s*(?P<unit>[A-Za-z\"]*)\s*$",
    re.IGNORECASE,
)


def _number(text: str) -> float:
    """Decimal, simple fraction ("3/4") or mixed number ("1 3/4") as a float."""
    text = text.strip()
    sign = -1.0 if text.startswith("-") else 1.0
    body = text.lstrip("+-").strip()
    if "/" in body:
        parts = body.split()
        whole = Fraction(int(parts[0])) if len(parts) == 2 else Fraction(0)
        num, den = "".join(parts[-1:]).split("/")
        if int(den) == 0:
            raise ValueError("zero denominator")
        return sign * float(whole + Fraction(int(num), int(den)))
    return sign * float(body)


def _to_metres(value: object) -> float:
    """Any accepted spelling of a length -> metres (sign and finiteness not yet checked)."""
    if isinstance(value, bool):
        raise ValueError(f"expected a length, got {value!r}")
    if isinstance(value, int | float):
        return float(value) * 1e-3
    if not isinstance(value, str):
        raise ValueError(f"expected a number (mm) or a string with a unit, got {value!r}")
    match = _LENGTH_RE.match(value)
    if match is None:
        raise ValueError(f"cannot read {value!r} as a length; write e.g. '400 mm' or '15.75 in'")
    unit = match["unit"].lower() or "mm"
    if unit not in _METRES_PER_UNIT:
        raise ValueError(
            f"unknown unit {match['unit']!r} in {value!r}; allowed units: {ALLOWED_UNITS}"
        )
    try:
        number = _number(match["num"])
    except ValueError:
        raise ValueError(f"cannot read the number in {value!r}") from None
    return number * _METRES_PER_UNIT[unit]


def _checked(value: object, *, allow_zero: bool) -> float:
    metres = _to_metres(value)
    if not math.isfinite(metres):
        raise ValueError(f"length {value!r} is not a finite number")
    if metres < 0 or (metres == 0 and not allow_zero):
        allowed = "zero or positive" if allow_zero else "positive"
        raise ValueError(f"length {value!r} must be {allowed} (units: {ALLOWED_UNITS})")
    return metres


def _positive_length(value: object) -> float:
    return _checked(value, allow_zero=False)


def _position_length(value: object) -> float:
    return _checked(value, allow_zero=True)


Length = Annotated[float, BeforeValidator(_positive_length)]
"""Strictly positive length; numbers are mm, strings carry a unit; yields metres."""

PositionLength = Annotated[float, BeforeValidator(_position_length)]
"""Like :data:`Length` but zero is allowed (a position measured from an end)."""


def parse_length(value: float | str, field: str = "length") -> float:
    """A strictly positive length in metres; bad input raises InputError naming ``field``."""
    try:
        return _checked(value, allow_zero=False)
    except ValueError as exc:
        raise InputError(f"{field}: {exc}") from None


def parse_position(value: float | str, field: str = "position") -> float:
    """A length in metres that may be zero; bad input raises InputError naming ``field``."""
    try:
        return _checked(value, allow_zero=True)
    except ValueError as exc:
        raise InputError(f"{field}: {exc}") from None


def format_mm(metres: float, digits: int = 2) -> str:
    """Metres as a millimetre string with at most ``digits`` decimals: 0.01575 -> '15.75 mm'."""
    text = f"{metres * 1e3:.{digits}f}"
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    if text in ("-0", ""):
        text = "0"
    return f"{text} mm"
