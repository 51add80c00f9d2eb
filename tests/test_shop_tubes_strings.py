"""Tube cut sheets and string winding schedules."""

from __future__ import annotations

import csv
import io
import math

import numpy as np
import pytest
from scipy.integrate import quad

from tonewright.errors import InputError
from tonewright.shop.tubes_strings import (
    TubeCut,
    WoundString,
    tube_cut_list_csv,
    tube_cut_sheet,
    uniform_node_fraction,
    winding_schedule,
    winding_schedule_csv,
)

# Invented demo chimes (aluminium-like tubes from an imagined workshop set).
TUBES = [
    TubeCut(
        "C5", 0.612, 0.0254, 0.0016, 0.1372, 0.004, 0.001, "aluminium tube (demo)", 523.25, 524.0
    ),
    TubeCut("E5", 0.550, 0.0254, 0.0016, 0.1233),
]


def rows(text: str) -> list[dict[str, str]]:
    body = "\n".join(line for line in text.splitlines() if not line.startswith("#"))
    return list(csv.DictReader(io.StringIO(body)))


def test_uniform_node_fraction():
    # Free-free beam mode-1 node at 0.22416 L (derived from the exact mode
    # shape with beta L = 4.73004074, Thomson, Theory of Vibration, App. D, Table D.1).
    assert uniform_node_fraction() == pytest.approx(0.22416, abs=5e-6)
    # The root used satisfies cos x cosh x = 1 (to the 8 digits quoted).
    x = 4.73004074
    assert abs(math.cos(x) * math.cosh(x) - 1.0) < 1e-6


def test_tube_cut_list():
    r = rows(tube_cut_list_csv(TUBES, kerf_mm=2.0))
    assert [x["name"] for x in r] == ["C5", "E5"]
    assert r[0]["cut_length_mm"] == "612.0" and r[0]["hole_from_top_mm"] == "137.2"
    assert r[0]["hole_tolerance_mm"] == "1.0" and r[0]["hole_diameter_mm"] == "4.0"
    assert float(r[0]["uniform_node_mm"]) == pytest.approx(0.22416 * 612.0, abs=0.05)
    # cents = 1200 log2(f / f_target): 524.00 vs 523.25 Hz is +2.48 cents.
    assert r[0]["strike_cents_off"] == "+2.5" and r[1]["strike_cents_off"] == ""
    assert r[0]["strike_note"] == "C5 +2.5"  # 524 Hz at A4 = 440: C5 (523.25 Hz) + 2.5 cents
    text = tube_cut_list_csv(TUBES, kerf_mm=2.0)
    assert "stock needed: 1166 mm" in text  # 612 + 550 + 2 x 2 mm kerf
    assert "CAUTIONS" in text


def test_tube_sheet_text():
    text = tube_cut_sheet(TUBES)
    assert "cut length            612.0 mm" in text
    assert "centre 137.2 +- 1.0 mm from the top end" in text
    assert "Stock needed: 1166 mm" in text
    # metal tubes get metal cautions, not wood dust
    assert "deburr" in text and "tonewood" not in text
    assert "strike note           524.00 Hz (C5 +2.5 cents)" in text


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        ({"wall_m": 0.013}, "wall_m"),
        ({"node_from_top_m": 0.4}, "node_from_top_m"),
        ({"node_from_top_m": 0.001}, "node_from_top_m"),
        ({"hole_diameter_m": 0.02}, "hole_diameter_m"),
        ({"length_m": -1.0}, "length_m"),
        ({"node_tolerance_m": -0.001}, "node_tolerance_m"),
        ({"predicted_hz": 0.0}, "predicted_hz"),
        ({"name": ""}, "name"),
    ],
)
def test_tube_validation(kwargs, field):
    base = dict(
        name="T", length_m=0.6, outer_diameter_m=0.025, wall_m=0.0015, node_from_top_m=0.134
    )
    with pytest.raises(InputError, match=field):
        TubeCut(**{**base, **kwargs})


def test_tube_list_validation():
    with pytest.raises(InputError, match="tubes"):
        tube_cut_sheet([])
    with pytest.raises(InputError, match="kerf_mm"):
        tube_cut_list_csv(TUBES, kerf_mm=-1)


# --- strings --------------------------------------------------------------------------------
def wrap_linear_density(
    wrap_diameter_m: float, wrap_density_kg_m3: float, core_diameter_m: float, pitch_m: float
) -> float:
    """Added linear density (kg/m) of a single-layer helical wrap at ``pitch_m``: the forward
    relation the winding schedule inverts (wire mass per turn over the pitch)."""
    D = core_diameter_m + wrap_diameter_m
    mu_wire = wrap_density_kg_m3 * math.pi * wrap_diameter_m**2 / 4
    return mu_wire * math.hypot(math.pi * D, pitch_m) / pitch_m


def test_helix_length_against_numerical_arc_length():
    # A wrap turn on a helix of diameter D and pitch p: the formula's length per turn,
    # sqrt((pi D)^2 + p^2), against arc length integrated numerically along
    # r(t) = (D/2 cos t, D/2 sin t, p t / 2 pi) - a different method.
    d_c, d_w, p, rho = 0.0005, 0.0004, 0.0007, 8900.0
    D = d_c + d_w

    def speed(t: float) -> float:
        return math.sqrt((D / 2) ** 2 + (p / (2 * math.pi)) ** 2)

    turn, _ = quad(speed, 0.0, 2 * math.pi)
    mu_expected = rho * math.pi * d_w**2 / 4 * turn / p
    assert wrap_linear_density(d_w, rho, d_c, p) == pytest.approx(mu_expected, rel=1e-12)


def demo_string() -> WoundString:
    # Invented: a 600 mm steel core 0.5 mm with copper wrap 0.4 mm, heavier in the middle.
    return WoundString(
        "demo string",
        0.6,
        (0.0, 0.2, 0.4, 0.6),
        (0.004, 0.008, 0.008, 0.002),
        0.0005,
        7850.0,
        0.0004,
        8900.0,
    )


def test_schedule_conserves_mass_and_reproduces_density():
    s = demo_string()
    segs = winding_schedule(s)
    mu_c = s.core_linear_density_kg_m

    def added(x: float) -> float:
        return float(np.interp(x, s.stations_x_m, s.linear_density_kg_m)) - mu_c

    for g in segs:
        exact, _ = quad(added, g.x0_m, g.x1_m)  # numerical integral of the target
        assert g.added_mass_kg == pytest.approx(exact, rel=1e-9)
        assert g.method == "wrap"
        # The wound wire's own mass is the added mass (length x wire density).
        wire_mu = s.wrap_density_kg_m3 * math.pi * s.wrap_diameter_m**2 / 4
        assert g.wire_length_m * wire_mu == pytest.approx(g.added_mass_kg, rel=1e-9)
        # Winding at that pitch gives the segment's mean added density.
        assert wrap_linear_density(
            s.wrap_diameter_m, s.wrap_density_kg_m3, s.core_diameter_m, g.pitch_m
        ) == pytest.approx(g.added_kg_m, rel=1e-12)
        assert g.pitch_m >= s.wrap_diameter_m  # a single layer: no tighter than close-wound


def test_schedule_csv():
    text = winding_schedule_csv(demo_string())
    r = rows(text)
    assert len(r) == 3 and r[0]["method"] == "wrap"
    assert sum(float(x["added_mass_g"]) for x in r) == pytest.approx(2.875, abs=1e-3)
    assert "CAUTIONS" in text


def test_bare_and_point_mass_segments():
    core_mu = 7850.0 * math.pi * 0.0005**2 / 4
    s = WoundString(
        "light",
        0.3,
        (0.0, 0.1, 0.2, 0.3),
        (core_mu, core_mu, core_mu * 1.05, core_mu * 1.05),
        0.0005,
        7850.0,
        0.0004,
        8900.0,
    )
    methods = [g.method for g in winding_schedule(s)]
    # 1st: the core alone; 2nd/3rd: less than a straight strand of wrap wire weighs.
    assert methods == ["bare", "point mass", "point mass"]


def test_schedule_refusals():
    heavy = WoundString("heavy", 0.3, (0.0, 0.3), (0.05, 0.05), 0.0005, 7850.0, 0.0002, 8900.0)
    with pytest.raises(InputError, match="wrap_diameter_m"):
        winding_schedule(heavy)  # 0.2 mm wire cannot add 50 g/m even close-wound
    light = WoundString("light", 0.3, (0.0, 0.3), (0.001, 0.001), 0.0005, 7850.0, 0.0004, 8900.0)
    with pytest.raises(InputError, match="below the bare core"):
        winding_schedule(light)
    with pytest.raises(InputError, match="stations_x_m"):
        WoundString("bad", 0.3, (0.0, 0.2), (0.004, 0.004), 0.0005, 7850.0, 0.0004, 8900.0)
    with pytest.raises(InputError, match="linear_density_kg_m"):
        WoundString("bad", 0.3, (0.0, 0.3), (0.004, -1.0), 0.0005, 7850.0, 0.0004, 8900.0)
