"""Length parsing: numbers are mm, strings carry units, everything comes out in metres."""

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from pydantic import BaseModel, ValidationError

from tonewright.errors import InputError
from tonewright.units import Length, PositionLength, format_mm, parse_length, parse_position

CI = settings(deadline=None, derandomize=True, database=None, max_examples=200)

# The inch is exactly 25.4 mm: international yard and pound agreement (1959), NIST SP 811.
INCH = 0.0254


class _Part(BaseModel):
    length: Length
    hole_x: PositionLength = 0.0


def test_bare_number_is_millimetres():
    assert parse_length(400) == pytest.approx(0.4, rel=1e-15)
    assert parse_length(15.75) == pytest.approx(0.01575, rel=1e-15)
    assert parse_length("400") == pytest.approx(0.4, rel=1e-15)  # a string without unit too


@pytest.mark.parametrize(
    ("text", "metres"),
    [
        ("400 mm", 0.4),
        ("40 cm", 0.4),
        ("0.4 m", 0.4),
        ("0.4m", 0.4),
        ("15.75 in", 15.75 * INCH),
        ('15.75"', 15.75 * INCH),
        ("3/4 in", 0.75 * INCH),
        ("1 3/4 in", 1.75 * INCH),
        ("2 inches", 2 * INCH),
        ("  12.5 MM ", 0.0125),
        ("1e2 mm", 0.1),
    ],
)
def test_units(text, metres):
    # 1e-12 relative: only floating-point rounding of one multiplication is allowed.
    assert parse_length(text) == pytest.approx(metres, rel=1e-12)


@CI
@given(st.floats(min_value=1e-3, max_value=1e5, allow_nan=False, allow_infinity=False))
def test_same_length_in_every_unit(mm):
    # Writing one length in mm, cm, m or as a bare number gives the same metres; the decimal
    # repr of mm/10 and mm/1000 carries at most a few ulps of error, hence rel=1e-12.
    expected = mm * 1e-3
    for text in (mm, f"{mm!r} mm", f"{mm / 10!r} cm", f"{mm / 1000!r} m"):
        assert parse_length(text) == pytest.approx(expected, rel=1e-12)
    assert parse_length(f"{mm!r} in") == pytest.approx(mm * INCH, rel=1e-12)


@pytest.mark.parametrize(
    ("value", "fragment"),
    [
        (-5, "must be positive"),
        ("-5 mm", "must be positive"),
        (0, "must be positive"),
        ("0 in", "must be positive"),
        (float("nan"), "not a finite number"),
        ("nan mm", "not a finite number"),
        ("inf m", "not a finite number"),
        ("12 ft", "allowed units: mm, cm, m, in"),
        ("12 furlongs", "allowed units"),
        ("twelve mm", "cannot read"),
        ("", "cannot read"),
        ("3/0 in", "cannot read the number"),
        (True, "expected a length"),
        ([1, 2], "expected a number"),
    ],
)
def test_bad_lengths_name_field_and_rule(value, fragment):
    with pytest.raises(InputError) as info:
        parse_length(value, field="bar.thickness")
    assert str(info.value).startswith("bar.thickness: ")
    assert fragment in str(info.value)


def test_pydantic_types():
    part = _Part(length="15.75 in", hole_x="0 mm")
    assert part.length == pytest.approx(15.75 * INCH, rel=1e-12)
    assert part.hole_x == 0.0
    with pytest.raises(ValidationError, match="allowed units"):
        _Part(length="3 cubits")
    with pytest.raises(ValidationError, match="must be positive"):
        _Part(length=0)
    with pytest.raises(ValidationError, match="zero or positive"):
        _Part(length=10, hole_x=-1)


def test_position_allows_zero_only():
    assert parse_position(0) == 0.0
    assert parse_position("12 cm") == pytest.approx(0.12, rel=1e-12)
    with pytest.raises(InputError, match=r"hole\.x: .*zero or positive"):
        parse_position("-1 mm", field="hole.x")


@pytest.mark.parametrize(
    ("metres", "text"),
    [(0.01575, "15.75 mm"), (0.4, "400 mm"), (0.0, "0 mm"), (-1e-9, "0 mm"), (0.0125, "12.5 mm")],
)
def test_format_mm(metres, text):
    assert format_mm(metres) == text


@CI
@given(st.floats(min_value=1e-5, max_value=10.0, allow_nan=False))
def test_format_then_parse_round_trip(metres):
    # format_mm rounds to `digits` decimals of a mm: the round trip is exact to half of that.
    back = parse_length(format_mm(metres, digits=4))
    assert math.isclose(back, metres, abs_tol=0.5e-7 + 1e-15)
