"""Cut table CSV: rows agree with the profile; every round station and corner is present."""

from __future__ import annotations

import csv
import io

import numpy as np
import pytest
from shop_demo import demo_part

from tonewright.errors import InputError
from tonewright.shop.cuttable import cut_table_csv, cut_table_rows
from tonewright.shop.part import ShopPart


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
    # Every round station and every corner of the profile is listed, and labelled.
    corners = np.asarray(part.corners_m()) * 1000
    grid = np.arange(0.0, part.length_m * 1000 + 1e-9, spacing)
    for v in np.concatenate((corners, grid)):
        assert np.min(np.abs(x - v)) < 0.006
    assert {r["kind"] for r in rows} == {"corner", "grid"}
    assert sum(r["kind"] == "corner" for r in rows) == corners.size
    # Nothing else: a maker reads round stations, not the design's sampling.
    ends = [0.0, part.length_m * 1000]
    assert len(rows) == len(set(np.round(np.concatenate((corners, grid, ends)), 6)))


def test_corners_are_where_the_cut_starts_ends_and_is_thinnest():
    part = demo_part()
    corners = np.asarray(part.corners_m()) * 1000
    # the demo arch runs from 90 to 290 mm and is thinnest at its middle (190 mm); the cut's
    # first station with any depth is 100 mm, so the cut starts at the station before it
    assert corners[0] == pytest.approx(90.0) and corners[-1] == pytest.approx(290.0)
    assert np.min(np.abs(corners - 190.0)) < 1e-6


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


def test_a_metal_bar_gets_metal_cautions():
    from dataclasses import replace

    from tonewright.shop.dxf import dxf_text

    metal = replace(demo_part(), caution_kind="metal")
    for text in (cut_table_csv(metal), dxf_text(metal)):
        assert "deburr" in text and "tonewood" not in text
    assert "tonewood" in cut_table_csv(demo_part())  # a wooden bar keeps the wood cautions
    with pytest.raises(InputError, match="caution_kind"):
        replace(demo_part(), caution_kind="glass")


def test_a_step_is_two_rows_at_its_edge():
    # a stepped cut as a design writes it: each edge as two stations 2 um apart
    e = 1e-6
    x = (0.0, 0.1 - e, 0.1 + e, 0.2 - e, 0.2 + e, 0.3)
    t = (0.02, 0.02, 0.015, 0.015, 0.02, 0.02)
    part = ShopPart("steps", 0.3, 0.04, 0.02, x, t)
    rows = [r for r in cut_table_rows(part, 10.0) if r[3] == "corner"]
    assert [(round(r[0], 3), round(r[1], 3)) for r in rows] == [
        (100.0, 20.0),
        (100.0, 15.0),
        (200.0, 15.0),
        (200.0, 20.0),
    ]
