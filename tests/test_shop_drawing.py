"""Dimensioned drawing: scale, dimensions and tables against the part; cents; determinism."""

from __future__ import annotations

import math
import re
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from shop_demo import demo_part
from tonewright.acoustics.pitch import cents

from tonewright.errors import InputError
from tonewright.shop.drawing import drawing_pdf, drawing_scale, drawing_svg
from tonewright.shop.part import ShopPart

SVG = "{http://www.w3.org/2000/svg}"


@pytest.fixture(scope="module")
def demo_svg():
    return ET.fromstring(drawing_svg(demo_part()))


def texts(root: ET.Element) -> list[str]:
    return ["".join(t.itertext()) for t in root.iter(f"{SVG}text")]


def test_cents_definition():
    # An octave is 1200 cents and an equal-tempered semitone 100 (Ellis, A.J. (1885),
    # "On the musical scales of various nations", J. Soc. Arts 33: the cent defined).
    assert cents(880.0, 440.0) == pytest.approx(1200.0)
    assert cents(440.0 * 2 ** (1 / 12), 440.0) == pytest.approx(100.0)
    assert cents(440.0, 880.0) == pytest.approx(-1200.0)


def test_scale_and_outline_size(demo_svg):
    s, label = drawing_scale(demo_part())
    assert (s, label) == (0.5, "1:2")  # 380 mm does not fit 1:1 on A4 landscape, 1:2 does
    vb = [float(v) for v in demo_svg.attrib["viewBox"].split()]
    mm = float(demo_svg.attrib["width"].removesuffix("mm")) / vb[2]
    group = demo_svg.find(f".//{SVG}g[@id='drawing-outline']")
    d = group.find(f"{SVG}path").attrib["d"]
    pts = np.array([float(v) for v in re.findall(r"-?\d+\.?\d*", d)]).reshape(-1, 2) * mm
    assert pts[1, 0] - pts[0, 0] == pytest.approx(0.5 * 380.0, abs=1e-4)
    depth_on_paper = pts[:, 1].max() - pts[:, 1].min()  # SVG y down: top edge is the min
    assert depth_on_paper == pytest.approx(0.5 * 20.0, abs=1e-4)
    assert any("1:2 on A4 landscape" in t for t in texts(demo_svg))


def test_dimensions_and_tables(demo_svg):
    part = demo_part()
    t = texts(demo_svg)
    joined = " | ".join(t)
    for dim in ("380.0", "20.0", "50.0"):
        assert dim in t  # overall length, blank thickness, width
    for i, n in enumerate(part.node_positions_m, start=1):
        assert f"node {i}: {n * 1000:.1f} \u00b1 {part.node_tolerance_m * 1000:.1f}" in t
    # Every round station over the cut (5 mm fit) and every corner: x (a corner starred),
    # thickness to leave, depth of cut from the blank bottom.
    T = part.blank_thickness_m * 1000
    corners = part.corners_m()
    for x in part.round_stations_m(5.0, cut_only=True):
        th = float(part.thickness_m(x)) * 1000
        star = "*" if any(abs(x - c) < 1e-6 for c in corners) else ""
        assert f"{x * 1000:.1f}{star}" in t and f"{th * 1000 / 1000:.2f}" in t
        assert f"{T - th:.2f}" in t
    assert any("every 5" in v for v in t)
    for _label, target, pred in part.partials:
        assert f"{pred:.2f}" in t
        assert f"{1200 * math.log2(pred / target):+.1f}" in t
    assert part.material_name in joined and part.grain_note in joined
    assert "CAUTIONS" in joined and "tonewright" in joined
    assert "thinnest: leave 6.00 at x = 190.0" in joined


def test_a_dense_profile_is_tabled_at_round_stations():
    # a design's fine sampling (0.19 mm) is no table: rows are at round stations only
    x = np.linspace(0.0, 0.38, 2001)
    t = 0.02 - 0.014 * np.sin(np.pi * x / 0.38) ** 2
    part = ShopPart("dense", 0.38, 0.05, 0.02, tuple(x), tuple(t))
    root = ET.fromstring(drawing_svg(part))
    values = texts(root)
    assert re.search(r"Stations every (5|10) mm over", " ".join(values))
    rows = [v for v in values if re.fullmatch(r"\d+\.\d\*?", v)]
    corners = {f"{c * 1000:.1f}" for c in part.corners_m()}  # also labelled on the side view
    round_rows = [v for v in rows if not v.endswith("*") and v not in corners]
    assert round_rows and all(float(v) % 5 == 0 for v in round_rows)
    assert "190.0*" in rows  # the thinnest point is a corner
    assert len(rows) < 100


def test_small_and_large_papers():
    long_bar = ShopPart("long", 1.1, 0.06, 0.025, (0.0, 0.55, 1.1), (0.025, 0.015, 0.025))
    assert drawing_scale(long_bar, "A4", "landscape")[1] == "1:5"
    assert drawing_scale(long_bar, "A3", "landscape")[1] == "1:4"
    with pytest.raises(InputError, match="paper"):
        drawing_scale(long_bar, "B5")


def test_pdf_is_one_page_and_byte_stable():
    pdf = drawing_pdf(demo_part())
    assert len(re.findall(rb"/Type /Page\b", pdf)) == 1
    assert pdf == drawing_pdf(demo_part())
