"""ShopPart: one failing input per validation rule, and the geometry helpers."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from shop_demo import demo_part

from tonewright.errors import InputError
from tonewright.shop.part import ShopPart

GOOD = dict(
    title="test bar",
    length_m=0.3,
    width_m=0.04,
    blank_thickness_m=0.02,
    stations_x_m=(0.0, 0.1, 0.15, 0.2, 0.3),
    stations_thickness_m=(0.02, 0.02, 0.01, 0.02, 0.02),
    holes=((0.066, 0.004, 0.01),),
    node_positions_m=(0.066, 0.234),
    node_tolerance_m=0.001,
    partials=(("f1", 440.0, 441.0), ("f2", None, 1700.0)),
)


def make(**changes) -> ShopPart:
    return ShopPart(**{**GOOD, **changes})


def test_good_part_and_helpers():
    p = make()
    # Linear interpolation between stations: halfway between 0.10 (20 mm) and 0.15 (10 mm).
    assert p.thickness_m(0.125) == pytest.approx(0.015)
    assert p.depth_m(0.15) == pytest.approx(0.01)
    assert p.min_thickness_m == pytest.approx(0.01)
    assert isinstance(p.stations_x_m, tuple) and p.stations_x_m[-1] == 0.3
    assert p.file_stem == "test_bar"
    with pytest.raises(dataclasses.FrozenInstanceError):
        p.title = "other"  # type: ignore[misc]


def test_notes_text_becomes_lines_and_lists_become_tuples():
    p = make(
        notes="one line",
        stations_x_m=[0.0, 0.3],
        stations_thickness_m=[0.02, 0.02],
        holes=(),
        node_positions_m=[],
    )
    assert p.notes == ("one line",)
    assert p.stations_x_m == (0.0, 0.3)


def test_end_stations_snap_to_exact_ends():
    p = make(stations_x_m=(1e-12, 0.1, 0.15, 0.2, 0.3 - 1e-12))
    assert p.stations_x_m[0] == 0.0 and p.stations_x_m[-1] == 0.3


@pytest.mark.parametrize(
    ("changes", "field"),
    [
        ({"title": "  "}, "title"),
        ({"length_m": 0.0}, "length_m"),
        ({"length_m": float("nan")}, "length_m"),
        ({"width_m": -0.04}, "width_m"),
        ({"blank_thickness_m": "thick"}, "blank_thickness_m"),
        ({"stations_x_m": (0.0,), "stations_thickness_m": (0.02,)}, "stations_x_m"),
        ({"stations_thickness_m": (0.02, 0.02)}, "stations_thickness_m"),
        ({"stations_x_m": (0.0, 0.15, 0.1, 0.2, 0.3)}, "stations_x_m"),
        ({"stations_x_m": (0.01, 0.1, 0.15, 0.2, 0.3)}, "stations_x_m"),
        ({"stations_x_m": (0.0, 0.1, 0.15, 0.2, 0.29)}, "stations_x_m"),
        ({"stations_thickness_m": (0.02, 0.02, 0.0, 0.02, 0.02)}, r"stations_thickness_m\[2\]"),
        ({"stations_thickness_m": (0.02, 0.021, 0.01, 0.02, 0.02)}, r"stations_thickness_m\[1\]"),
        ({"holes": ((0.001, 0.004, 0.01),)}, r"holes\[0\] x"),
        ({"holes": ((0.066, 0.0, 0.01),)}, r"holes\[0\] diameter"),
        ({"holes": ((0.066, 0.004, 0.001),)}, r"holes\[0\] height"),  # breaks the bottom
        ({"holes": ((0.066, 0.004, 0.019),)}, r"holes\[0\] height"),  # breaks the top
        ({"holes": ((0.066, 0.004),)}, r"holes\[0\]"),
        ({"node_positions_m": (0.31,)}, r"node_positions_m\[0\]"),
        ({"node_tolerance_m": -0.001}, "node_tolerance_m"),
        ({"partials": (("f1", 440.0, 0.0),)}, "predicted_hz"),
        ({"partials": (("f1", -1.0, 440.0),)}, "target_hz"),
        ({"partials": (("f1", 440.0),)}, r"partials\[0\]"),
        ({"partials": (("f1", "high", 440.0),)}, "target_hz"),
        ({"node_tolerance_m": "loose"}, "node_tolerance_m"),
        ({"notes": (1, 2)}, "notes"),
        ({"material_name": 3}, "material_name"),
    ],
)
def test_each_rule_rejects_bad_input(changes, field):
    with pytest.raises(InputError, match=field) as err:
        make(**changes)
    assert "\n" not in str(err.value)  # one line, for the command line
    assert isinstance(err.value, ValueError)


def test_demo_part_is_the_documented_bar():
    p = demo_part()
    # Invented demo: 380 x 50 x 20 mm, undercut to 6 mm at the centre.
    assert (p.length_m, p.width_m, p.blank_thickness_m) == (0.38, 0.05, 0.02)
    assert p.min_thickness_m == pytest.approx(0.006)
    assert p.thickness_m(0.19) == pytest.approx(0.006)
    assert np.all(np.diff(p.stations_x_m) > 0)
