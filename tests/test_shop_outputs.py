"""write_all: every output written atomically; existing files only replaced with force."""

from __future__ import annotations

import pytest

from tonewright.errors import InputError
from tonewright.shop import Cutter, GcodeOptions, ShopOptions, ShopPart, write_all
from tonewright.shop.cautions import CAUTIONS


def small_part() -> ShopPart:
    return ShopPart(
        title="Small Bar A5",
        length_m=0.2,
        width_m=0.035,
        blank_thickness_m=0.018,
        stations_x_m=(0.0, 0.04, 0.1, 0.16, 0.2),
        stations_thickness_m=(0.018, 0.018, 0.009, 0.018, 0.018),
        node_positions_m=(0.044, 0.156),
        node_tolerance_m=0.001,
    )


@pytest.fixture(scope="module")
def written(tmp_path_factory):
    out = tmp_path_factory.mktemp("shop")
    return out, write_all(small_part(), out)


def test_all_files_written(written):
    out, paths = written
    names = sorted(p.name for p in paths)
    assert names == sorted(
        [
            "small_bar_a5_template.pdf",
            "small_bar_a5_template_p1of1.svg",
            "small_bar_a5_drawing.pdf",
            "small_bar_a5_drawing.svg",
            "small_bar_a5.dxf",
            "small_bar_a5_cuts.csv",
            "small_bar_a5_undercut.nc",
        ]
    )
    assert all(p.parent == out and p.stat().st_size > 0 for p in paths)
    assert not list(out.glob(".*.tmp"))  # no temporary files left behind
    assert paths[0].read_bytes().startswith(b"%PDF")


def test_every_text_output_carries_the_cautions(written):
    _, paths = written
    key = "sensitisers"
    assert key in CAUTIONS[1]
    for p in paths:
        if p.suffix in (".csv", ".nc", ".dxf", ".svg"):
            assert key in p.read_text(encoding="utf-8"), p.name


def test_refuses_to_overwrite_then_force(written):
    out, paths = written
    before = {p: p.read_bytes() for p in paths}
    (out / "small_bar_a5_cuts.csv").write_text("user's own file")
    with pytest.raises(InputError, match="already holds"):
        write_all(small_part(), out, ShopOptions(gcode=None))
    assert (out / "small_bar_a5_cuts.csv").read_text() == "user's own file"
    write_all(small_part(), out, ShopOptions(gcode=None), force=True)
    assert (out / "small_bar_a5_cuts.csv").read_bytes() == before[out / "small_bar_a5_cuts.csv"]


def test_gcode_error_leaves_nothing(tmp_path):
    opt = ShopOptions(
        gcode=GcodeOptions(cutter=Cutter(diameter_mm=40.0, flute_length_mm=50.0), stepdown_mm=2.0)
    )
    with pytest.raises(InputError, match="too large"):
        write_all(small_part(), tmp_path / "new", opt)
    assert not (tmp_path / "new").exists()


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        ({"paper": "A5"}, "paper"),
        ({"orientation": "up"}, "orientation"),
        ({"gcode": "fast"}, "gcode"),
    ],
)
def test_option_validation(kwargs, field):
    with pytest.raises(InputError, match=field):
        ShopOptions(**kwargs)
