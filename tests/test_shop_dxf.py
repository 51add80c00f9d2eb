"""DXF read back with ezdxf (an independent reader) and compared with the part's stations."""

from __future__ import annotations

import io

import ezdxf
import numpy as np
import pytest
from shop_demo import demo_part

from tonewright.shop.dxf import LAYERS, dxf_text


@pytest.fixture(scope="module")
def doc_and_part():
    part = demo_part()
    return ezdxf.read(io.StringIO(dxf_text(part))), part


def test_units_and_layers(doc_and_part):
    doc, _ = doc_and_part
    assert doc.header["$INSUNITS"] == 4  # 4 = millimetres in the DXF reference
    names = {layer.dxf.name for layer in doc.layers}
    assert set(LAYERS) <= names


def test_undercut_path_matches_stations(doc_and_part):
    doc, part = doc_and_part
    (path,) = doc.modelspace().query('LWPOLYLINE[layer=="UNDERCUT"]')
    pts = np.array([(p[0], p[1]) for p in path.get_points("xy")])
    x = np.asarray(part.stations_x_m) * 1000
    T = part.blank_thickness_m * 1000
    expected_y = T - np.asarray(part.stations_thickness_m) * 1000
    assert np.allclose(pts[:, 0], x, atol=1e-9)
    assert np.allclose(pts[:, 1], expected_y, atol=1e-9)
    assert not path.closed


def test_outline_is_closed_bar(doc_and_part):
    doc, part = doc_and_part
    outlines = doc.modelspace().query('LWPOLYLINE[layer=="OUTLINE"]')
    bar = next(p for p in outlines if p.dxf.linetype.upper() != "DASHED")
    pts = np.array([(p[0], p[1]) for p in bar.get_points("xy")])
    L, T = part.length_m * 1000, part.blank_thickness_m * 1000
    assert bar.closed
    assert np.allclose(pts[:2], [(0.0, T), (L, T)])
    # The thinnest point of the outline leaves the design's minimum thickness.
    assert T - pts[2:, 1].max() == pytest.approx(part.min_thickness_m * 1000)


def test_holes_and_nodes(doc_and_part):
    doc, part = doc_and_part
    msp = doc.modelspace()
    circles = list(msp.query('CIRCLE[layer=="HOLES"]'))
    assert len(circles) == len(part.holes)
    for c, (hx, hd, hh) in zip(circles, part.holes, strict=True):
        assert c.dxf.center.x == pytest.approx(hx * 1000)
        assert c.dxf.center.y == pytest.approx((part.depth_m(hx) + hh) * 1000)
        assert c.dxf.radius == pytest.approx(hd * 500)
    lines = [ln for ln in msp.query('LINE[layer=="NODES"]') if ln.dxf.linetype != "DASHED"]
    xs = sorted(round(ln.dxf.start.x, 6) for ln in lines)
    assert xs == sorted(round(n * 1000, 6) for n in part.node_positions_m)


def test_text_and_cautions(doc_and_part):
    doc, part = doc_and_part
    text = " ".join(t.dxf.text for t in doc.modelspace().query('TEXT[layer=="TEXT"]'))
    assert part.title in text and "CAUTIONS" in text and "dust extraction" in text


def test_byte_stable_and_global_option_restored():
    before = ezdxf.options.write_fixed_meta_data_for_testing
    assert dxf_text(demo_part()) == dxf_text(demo_part())
    assert ezdxf.options.write_fixed_meta_data_for_testing == before
