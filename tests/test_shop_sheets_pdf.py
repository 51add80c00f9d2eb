"""The printed sheets read right: text pulled out of the rendered PDFs (pdfminer.six) shows no
overprinted labels, round stations, the model that certified the partials and, on a design
that missed its target, the mark on every page."""

from __future__ import annotations

import io
import re

import numpy as np
import pytest
from matplotlib.figure import Figure
from pdf_text import overlapping, pdf_lines
from shop_demo import demo_part

from tonewright.shop.drawing import drawing_pdf
from tonewright.shop.part import MISSED_MARK, ShopPart
from tonewright.shop.template import template_layout, template_pdf
from tonewright.shop_run import marked_missed


def smooth_design() -> ShopPart:
    """A design-like part: a smooth cut sampled every 0.25 mm (as a design's file was)."""
    x = np.linspace(0.0, 0.4, 1601)
    u = np.clip((x - 0.06) / 0.28, 0.0, 1.0)
    t = 0.022 - 0.0136 * np.sin(np.pi * u) ** 2 * (1 - 0.15 * np.sin(2 * np.pi * u) ** 2)
    return ShopPart(
        "Smooth design",
        0.4,
        0.06,
        0.022,
        tuple(x),
        tuple(t),
        node_positions_m=(0.0829, 0.3171),
        node_tolerance_m=0.0005,
        material_name="Honduras rosewood (Dalbergia stevensonii), air-dry",
        partials=(("bending 1", 261.63, 261.58), ("bending 2", 1046.5, 1045.2)),
        certified_by="3D solid model (27-node hexahedra)",
    )


def test_the_checker_sees_an_overprint():
    # the test below can fail: two labels printed over each other are found
    fig = Figure(figsize=(3, 2))
    fig.text(0.2, 0.5, "10.3 15.4", fontsize=8)
    fig.text(0.22, 0.5, "20.5", fontsize=8)
    fig.text(0.2, 0.1, "apart", fontsize=8)
    buf = io.BytesIO()
    fig.savefig(buf, format="pdf")
    assert overlapping(pdf_lines(buf.getvalue())) == [("10.3 15.4", "20.5")]


@pytest.mark.parametrize("make", [demo_part, smooth_design])
def test_no_label_overprints_another(make):
    part = make()
    for pdf in (drawing_pdf(part), template_pdf(part)):
        assert overlapping(pdf_lines(pdf)) == []


def test_drawing_lists_round_stations_and_the_corners():
    part = smooth_design()
    texts = [line.text for line in pdf_lines(drawing_pdf(part))]
    rows = [t for t in texts if re.fullmatch(r"\d+\.\d\*?", t)]  # x column: one decimal
    corners = {f"{c * 1000:.1f}" for c in part.corners_m()}
    dims = {"400.0", "22.0", "60.0", "82.9", "317.1"}  # overall dimensions, node positions
    plain = [float(t) for t in rows if not t.endswith("*") and t not in corners | dims]
    # 1601 stations of the design become round ones: every 5 mm over the cut
    assert len(plain) > 20 and all(v % 5 == 0 for v in plain)
    assert {f"{c:.1f}*" for c in np.asarray(part.corners_m()) * 1000} <= set(rows)
    assert any("every 5 mm over the cut" in t for t in texts)
    # the side view labels x in mm at round stations, not station numbers
    assert {"100", "200", "300"} <= set(texts)


def test_the_certifying_model_is_named_and_the_material_whole():
    joined = " ".join(line.text for line in pdf_lines(drawing_pdf(smooth_design())))
    assert "3D solid model (27-node hexahedra)" in joined
    assert "Honduras rosewood (Dalbergia stevensonii), air-dry" in joined
    assert "timoshenko" not in joined.lower()


def test_a_missed_design_is_marked_on_every_page():
    part = marked_missed(smooth_design(), "bending 2 is +661.7 cents off")
    lines = pdf_lines(drawing_pdf(part))
    assert any(MISSED_MARK in line.text and "+661.7" in line.text for line in lines)
    tpl = pdf_lines(template_pdf(part))
    pages = template_layout(part).n_pages
    assert pages >= 2
    for page in range(pages):
        assert any(line.page == page and MISSED_MARK in line.text for line in tpl)
    assert overlapping(lines) == [] and overlapping(tpl) == []
    # a design that met carries no mark
    met = smooth_design()
    assert not any(MISSED_MARK in line.text for line in pdf_lines(drawing_pdf(met)))


def test_a_long_title_stops_short_of_the_missed_mark():
    from dataclasses import replace

    long = replace(
        smooth_design(), title="Workshop concert marimba, bar C4 of the lowest octave, rosewood"
    )
    part = marked_missed(long, "bending 2 is +661.7 cents off")
    for pdf in (template_pdf(part), drawing_pdf(part)):
        assert overlapping(pdf_lines(pdf)) == []
