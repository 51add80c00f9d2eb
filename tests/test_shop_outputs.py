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


# ---------------------------------------------------------------------------------------------
# `tonewright shop` on a design's result: a missed design is refused unless accepted


def _result_json(tmp_path, converged: bool):
    import json

    part = {
        "title": "Trial bar G5",
        "material": "sugar-maple",
        "bar": {
            "length": 200.0,
            "width": 35.0,
            "thickness": 18.0,
            "profile": [[0.0, 18.0], [40.0, 18.0], [100.0, 9.0], [160.0, 18.0], [200.0, 18.0]],
        },
    }
    payload = {
        "part": part,
        "partials": [
            {"family": "bending", "order": 1, "target_hz": 783.99, "achieved_hz": 801.2},
        ],
        "converged": converged,
        "status": 0 if converged else 1,
        "message": "every partial within tolerance"
        if converged
        else "out of reach within the limits: bending 1 is +37.6 cents from its target",
    }
    path = tmp_path / "result.json"
    path.write_text(json.dumps(payload), encoding="utf-8")
    return path


def _shop(*args):
    from typer.testing import CliRunner

    from tonewright.cli import app

    return CliRunner().invoke(app, ["shop", *map(str, args)])


def test_shop_refuses_a_missed_design_and_says_how_to_override(tmp_path):
    result = _shop(_result_json(tmp_path, converged=False), "--out", tmp_path / "shop")
    assert result.exit_code == 1
    assert "misses its target" in result.stderr and "+37.6 cents" in result.stderr
    override = [line for line in result.stderr.splitlines() if "--accept-missed-design" in line]
    assert len(override) == 1  # one line saying how to override
    assert not (tmp_path / "shop").exists()  # nothing written


def test_an_accepted_missed_design_is_marked_on_every_sheet(tmp_path):
    result = _shop(
        _result_json(tmp_path, converged=False),
        "--out",
        tmp_path / "shop",
        "--accept-missed-design",
    )
    assert result.exit_code == 0, result.output
    assert "misses its target" in result.stderr  # the miss is printed first
    files = sorted((tmp_path / "shop").iterdir())
    kinds = {p.suffix for p in files}
    assert {".pdf", ".svg", ".dxf", ".csv", ".nc"} <= kinds
    for p in files:
        assert "missed_design" in p.name  # the file names say so too
        if p.suffix in (".svg", ".dxf", ".csv", ".nc"):
            assert "MISSED DESIGN" in p.read_text(encoding="utf-8"), p.name
        else:  # PDF: the title in the document's metadata
            assert b"MISSED DESIGN" in p.read_bytes(), p.name
    gcode = next(p for p in files if p.suffix == ".nc").read_text(encoding="ascii")
    header = gcode.split("G21")[0]  # before the first motion preamble
    assert "MISSED DESIGN" in header


def test_a_design_that_met_is_drawn_unmarked(tmp_path):
    result = _shop(_result_json(tmp_path, converged=True), "--out", tmp_path / "shop")
    assert result.exit_code == 0, result.output
    for p in (tmp_path / "shop").iterdir():
        if p.suffix in (".svg", ".dxf", ".csv", ".nc"):
            assert "MISSED DESIGN" not in p.read_text(encoding="utf-8"), p.name
