"""Full-size template: true 1:1 scale in SVG and PDF, tiling, labels, determinism.

Scale is checked two ways: in the SVG from the declared millimetre size against the viewBox,
and in the PDF by rendering it with poppler's ``pdftoppm`` at 254 dpi (10 pixels per mm), an
independent renderer, and counting pixels.
"""

from __future__ import annotations

import re
import shutil
import subprocess
import xml.etree.ElementTree as ET

import numpy as np
import pytest
from shop_demo import demo_part

from tonewright.errors import InputError
from tonewright.shop.part import ShopPart
from tonewright.shop.template import template_layout, template_pdf, template_svgs

SVG = "{http://www.w3.org/2000/svg}"


def short_part() -> ShopPart:
    """A 200 mm bar that fits one landscape A4 page."""
    return ShopPart(
        title="short bar",
        length_m=0.2,
        width_m=0.035,
        blank_thickness_m=0.018,
        stations_x_m=(0.0, 0.04, 0.08, 0.1, 0.12, 0.16, 0.2),
        stations_thickness_m=(0.018, 0.018, 0.012, 0.009, 0.012, 0.018, 0.018),
        holes=((0.044, 0.004, 0.009), (0.156, 0.004, 0.009)),
        node_positions_m=(0.044, 0.156),
        node_tolerance_m=0.001,
    )


def mm_per_unit(root: ET.Element) -> tuple[float, float]:
    vb = [float(v) for v in root.attrib["viewBox"].split()]
    w_mm = float(root.attrib["width"].removesuffix("mm"))
    h_mm = float(root.attrib["height"].removesuffix("mm"))
    return w_mm / vb[2], h_mm / vb[3]


def path_points(root: ET.Element, gid: str) -> np.ndarray:
    group = root.find(f".//{SVG}g[@id='{gid}']")
    assert group is not None, gid
    d = group.find(f"{SVG}path").attrib["d"]
    nums = [float(v) for v in re.findall(r"-?\d+\.?\d*(?:e-?\d+)?", d)]
    return np.array(nums).reshape(-1, 2)


def texts(root: ET.Element) -> str:
    return " ".join("".join(t.itertext()) for t in root.iter(f"{SVG}text"))


def test_svg_scale_bar_is_100_mm():
    for svg in template_svgs(demo_part(), "A4", "portrait"):
        root = ET.fromstring(svg)
        assert root.attrib["width"] == "210mm" and root.attrib["height"] == "297mm"
        sx, sy = mm_per_unit(root)
        # pt user units: 25.4/72 mm each; 6-decimal viewBox -> ~1e-9 relative error.
        assert sx == pytest.approx(25.4 / 72, rel=1e-8) and sy == pytest.approx(sx, rel=1e-8)
        pts = path_points(root, "scale-bar")
        width_mm = (pts[:, 0].max() - pts[:, 0].min()) * sx
        assert width_mm == pytest.approx(100.0, abs=1e-4)  # 6-decimal coordinates


def test_svg_outline_is_the_bar_at_full_size():
    part = short_part()
    (svg,) = template_svgs(part, "A4", "landscape")
    root = ET.fromstring(svg)
    sx, _ = mm_per_unit(root)
    pts = path_points(root, "bar-outline") * sx
    pts[:, 1] *= -1  # SVG y runs down
    top = pts[:, 1].max()
    L = part.length_m * 1000
    # Outline: top edge, then the bottom surface from the right end back to the left.
    assert pts[1, 0] - pts[0, 0] == pytest.approx(L, abs=1e-4)
    bottom = pts[2:-1]
    x_rel = bottom[:, 0] - pts[0, 0]
    thickness = top - bottom[:, 1]
    assert np.allclose(x_rel[::-1], np.asarray(part.stations_x_m) * 1000, atol=1e-4)
    assert np.allclose(thickness[::-1], np.asarray(part.stations_thickness_m) * 1000, atol=1e-4)
    assert top - bottom[:, 1].max() == pytest.approx(part.min_thickness_m * 1000, abs=1e-4)


def test_tiling_overlap_and_labels():
    part = demo_part()
    layout = template_layout(part, "A4", "portrait", overlap_mm=15.0)
    pages = [ET.fromstring(s) for s in template_svgs(part, "A4", "portrait", 15.0)]
    # 380 mm bar + 24 mm margins on 190 mm windows stepping 175 mm: 3 pages.
    assert len(pages) == layout.n_pages == 3
    step = layout.window[2] - layout.overlap
    for i in range(len(pages) - 1):
        a, b = pages[i], pages[i + 1]
        sx, _ = mm_per_unit(a)
        for where in ("top", "bottom"):
            pa = path_points(a, f"align-{i + 1}-{i + 2}-{where}") * sx
            pb = path_points(b, f"align-{i + 1}-{i + 2}-{where}") * sx
            # The same crosshair sits exactly one step further left on the next page.
            assert np.allclose(pa[:, 0] - pb[:, 0], step, atol=1e-4)
            assert np.allclose(pa[:, 1], pb[:, 1], atol=1e-4)
    assert "page 1 of 3" in texts(pages[0])
    assert "page 2 of 3, align with page 1" in texts(pages[1])
    assert "page 3 of 3, align with page 2" in texts(pages[2])
    for page in pages:
        t = texts(page)
        assert "Print at 100 % / actual size" in t and "scale bar" in t
        assert "CAUTIONS" in t and "sensitisers" in t


def test_single_page_when_it_fits():
    assert template_layout(short_part(), "A4", "landscape").n_pages == 1
    (svg,) = template_svgs(short_part(), "Letter", "landscape")
    root = ET.fromstring(svg)
    assert root.attrib["width"] == "279.4mm" and root.attrib["height"] == "215.9mm"
    assert "page 1 of 1" in texts(root)


def test_byte_stable():
    part = short_part()
    assert template_pdf(part) == template_pdf(part)
    assert template_svgs(part) == template_svgs(part)


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        ({"paper": "B5"}, "paper"),
        ({"orientation": "sideways"}, "orientation"),
        ({"overlap_mm": 1.0}, "overlap_mm"),
    ],
)
def test_bad_options(kwargs, field):
    with pytest.raises(InputError, match=field):
        template_layout(demo_part(), **kwargs)


def test_too_thick_for_the_page():
    tall = ShopPart("tall", 0.3, 0.05, 0.2, (0.0, 0.3), (0.2, 0.2))
    with pytest.raises(InputError, match="orientation"):
        template_layout(tall, "A4", "landscape")


def test_pdf_page_size_and_count():
    pdf = template_pdf(demo_part(), "A4", "landscape")
    boxes = re.findall(rb"/MediaBox \[\s*0 0 ([\d.]+) ([\d.]+)\s*\]", pdf)
    assert len(boxes) == 2
    for w, h in boxes:
        # PDF points are 1/72 inch (ISO 32000-1, 8.3.2.3): A4 landscape is 297 x 210 mm.
        assert float(w) * 25.4 / 72 == pytest.approx(297.0, abs=1e-3)
        assert float(h) * 25.4 / 72 == pytest.approx(210.0, abs=1e-3)


def _render_gray(pdf: bytes, tmp_path, page: int) -> np.ndarray:
    src = tmp_path / "t.pdf"
    src.write_bytes(pdf)
    subprocess.run(
        [
            "pdftoppm",
            "-r",
            "254",
            "-gray",
            "-f",
            str(page),
            "-l",
            str(page),
            str(src),
            str(tmp_path / "r"),
        ],
        check=True,
        timeout=60,
    )
    data = next(tmp_path.glob("r*.pgm")).read_bytes()
    m = re.match(rb"P5\s+(\d+)\s+(\d+)\s+(\d+)\s", data)
    w, h = int(m.group(1)), int(m.group(2))
    return np.frombuffer(data[m.end() :], dtype=np.uint8).reshape(h, w)


def _runs(row: np.ndarray) -> list[tuple[int, int]]:
    dark = np.concatenate(([0], (row < 128).astype(int), [0]))
    edges = np.flatnonzero(np.diff(dark))
    return list(zip(edges[::2], edges[1::2] - edges[::2], strict=True))


@pytest.mark.skipif(shutil.which("pdftoppm") is None, reason="poppler-utils not installed")
def test_pdf_renders_at_true_scale(tmp_path):
    part = short_part()
    img = _render_gray(template_pdf(part, "A4", "landscape"), tmp_path, 1)
    # 254 dpi = 10 px/mm: the page is 2970 x 2100 px.
    assert abs(img.shape[0] - 2100) <= 1 and abs(img.shape[1] - 2970) <= 1  # poppler rounds up
    # The scale bar: the only dark run about 1000 px long that is many rows (2 mm) thick.
    rows = [r for r in range(img.shape[0]) if any(900 < n < 1100 for _, n in _runs(img[r]))]
    assert len(rows) >= 15
    lengths = [n for r in rows for _, n in _runs(img[r]) if 900 < n < 1100]
    # +-3 px: anti-aliased edges (1 px each) plus placement rounding.
    assert np.median(lengths) == pytest.approx(1000, abs=3)
    # The bar's top edge: a dark run of L = 200 mm (2000 px) plus round/square line caps
    # of half the 0.3 mm line width at each end (about 3 px in all): allow +-5 px.
    longest = max(n for r in range(img.shape[0]) for _, n in _runs(img[r]))
    assert longest == pytest.approx(part.length_m * 10000, abs=5)
