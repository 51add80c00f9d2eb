"""Cut table CSV: rows agree with the profile; every breakpoint and grid station is present."""

from __future__ import annotations

import csv
import io

import numpy as np
import pytest
from shop_demo import demo_part

from tonewright.errors import InputError
from tonewright.shop.cuttable import cut_table_csv, cut_table_rows


def read(text: str) -> list[dict[str, str]]:
    body = "\n".join(line for line in text.splitlines() if not line.startswith("#"))
    return list(csv.DictReader(io.StringIO(body)))


@pytest.mark.parametrize("spacing", [5.0, 2.5, 7.0])
def test_rows_match_the_profile(spacing):
    part = demo_part()
    rows = read(cut_table_csv(part, spacing))
    x = np.array([float(r["station_mm"]) for r in rows])
    t = np.array([float(r["thickness_to_leave_mm"]) for r in rows])
    d = np.array([float(r["depth_of_cut_mm"]) for r in rows])
    T = part.blank_thickness_m * 1000
    assert np.all(np.diff(x) > 0)
    # Values printed to 0.01 mm: each within half a unit of the exact profile.
    assert np.allclose(t, part.thickness_m(x / 1000) * 1000, atol=0.005 + 1e-9)
    # Depth is measured from the blank's bottom face: thickness + depth = blank (two roundings).
    assert np.allclose(t + d, T, atol=0.01 + 1e-9)
    # Every design breakpoint and every grid station is listed, and labelled.
    design = np.asarray(part.stations_x_m) * 1000
    grid = np.arange(0.0, part.length_m * 1000 + 1e-9, spacing)
    for v in np.concatenate((design, grid)):
        assert np.min(np.abs(x - v)) < 0.006
    kinds = {r["kind"] for r in rows}
    assert kinds == {"design", "grid"}
    assert sum(r["kind"] == "design" for r in rows) == design.size


def test_straight_between_rows():
    # Because all breakpoints are rows, interpolating the table reproduces the profile.
    part = demo_part()
    rows = cut_table_rows(part, 5.0)
    x = np.array([r[0] for r in rows])
    t = np.array([r[1] for r in rows])
    mid = 0.5 * (x[1:] + x[:-1])
    assert np.allclose(np.interp(mid, x, t), part.thickness_m(mid / 1000) * 1000, atol=1e-9)


def test_header_defines_units_and_carries_cautions():
    text = cut_table_csv(demo_part())
    head = [line for line in text.splitlines() if line.startswith("#")]
    joined = " ".join(head)
    assert "millimetres" in joined
    assert "measured from the blank's bottom face" in joined
    assert "CAUTIONS" in joined and "sensitisers" in joined


@pytest.mark.parametrize("bad", [0.0, -5.0, 1000.0, float("nan")])
def test_bad_spacing(bad):
    with pytest.raises(InputError, match="spacing_mm"):
        cut_table_csv(demo_part(), bad)
