"""The tool sizes the blanks: instruments given only a range, a material, profiles and a stock
list.

Evidence: every bar the schedule proposes is designed by the full search and certified by an
independent accuracy-controlled solve (slow test: a two-octave xylophone, every bar met, no
unwanted mode in a band); the keyboard rules are structural (widths and thicknesses never
increase toward the treble, steps bounded, octaves sharing a thickness when asked); an
impossible request is reported before any search with the limit that binds. Xylophone bars
are tuned 1:3 in the lower range, the fundamental alone at the top (Fletcher, N. H. &
Rossing, T. D., 1998, *The Physics of Musical Instruments*, 2nd ed., ch. 19, from memory;
common practice).
"""

from __future__ import annotations

import csv
import io
import time
from pathlib import Path

import numpy as np
import pytest
from typer.testing import CliRunner

from tonewright.cli import app
from tonewright.errors import InputError
from tonewright.instrument import parse_instrument, plan_instrument
from tonewright.instrument_run import blanks_csv

REPO = Path(__file__).resolve().parents[1]
EXAMPLE = REPO / "examples" / "workshop-xylophone-stock.toml"
RUNNER = CliRunner()

ONE_OCTAVE = {
    "title": "Stock test",
    "lowest": "C5",
    "highest": "B5",
    "material": "african-padauk",
    "attempts": 1,
    "profile": [{"from": "C5", "to": "B5", "profile": "xylophone-1-3"}],
    "stock": {
        "thicknesses": [18, 20, 22],
        "width_range": [30, 50],
        "width_step": 5,
        "length_range": [150, 500],
        "max_width_step": 5,
    },
    "design": {"control_points": 4, "end_keep": 10, "min_thickness": 5, "budget": 300},
}


def _rows(text: str) -> list[dict[str, str]]:
    return list(csv.DictReader(io.StringIO(text)))


@pytest.fixture(scope="module")
def octave_plan():
    return plan_instrument(parse_instrument(ONE_OCTAVE))


def test_schedule_follows_the_keyboard_rules(octave_plan):
    s = octave_plan.schedule
    assert len(s) == 12 and all(c.reachable for c in s)
    w = np.array([c.width for c in s])
    t = np.array([c.thickness for c in s])
    L = np.array([c.length for c in s])
    assert np.all(np.diff(w) <= 1e-12) and np.all(np.diff(t) <= 1e-12)  # never grow to treble
    assert np.all(np.abs(np.diff(w)) <= 0.005 + 1e-12)  # max_width_step
    assert np.all(np.diff(L) < 0)  # bars shorten toward the treble
    stock_w = {0.030, 0.035, 0.040, 0.045, 0.050}
    assert {round(v, 6) for v in w} <= stock_w
    assert {round(v, 6) for v in t} <= {0.018, 0.020, 0.022}
    # each bar's part table carries the chosen sizes, and every choice is explained
    for bar, c in zip(octave_plan.bars, s, strict=True):
        assert bar.part["bar"]["width"] == pytest.approx(c.width * 1e3)
        assert "mm" in c.thickness_reason and "mm" in c.width_reason
    rows = _rows(blanks_csv(octave_plan))
    assert [r["note"] for r in rows] == [b.note for b in octave_plan.bars]


def test_octaves_share_a_thickness_when_asked():
    raw = dict(ONE_OCTAVE, lowest="A4", highest="D5")
    raw["profile"] = [{"from": "A4", "to": "D5", "profile": "xylophone-1-3"}]
    raw["stock"] = dict(ONE_OCTAVE["stock"], share_thickness="octave", widths=[40])
    del raw["stock"]["width_range"], raw["stock"]["width_step"]
    plan = plan_instrument(parse_instrument(raw))
    by_octave: dict[str, set[float]] = {}
    for c in plan.schedule:
        by_octave.setdefault(c.note[-1], set()).add(c.thickness)
    assert all(len(v) == 1 for v in by_octave.values())


def test_stock_table_errors_name_the_field():
    bad = dict(ONE_OCTAVE, stock={"thicknesses": [20], "widths": [40], "width_range": [30, 50]})
    with pytest.raises(InputError, match="widths"):
        parse_instrument(bad)
    both = dict(ONE_OCTAVE, anchor=[{"note": "C5", "length": 300, "width": 40, "thickness": 20}])
    with pytest.raises(InputError, match="one of the three"):
        parse_instrument(both)


def test_stock_too_thin_for_1_4_10_at_c3_is_reported_in_seconds(tmp_path):
    raw = """
title = "Thin stock"
lowest = "C3"
highest = "D3"
material = "honduras-rosewood"
attempts = 1
[[profile]]
from = "C3"
to = "D3"
profile = "marimba-1-4-10"
[stock]
thicknesses = [10, 12]
widths = [60]
length_range = [300, 520]
[design]
min_thickness = 6
end_keep = 15
"""
    path = tmp_path / "thin.toml"
    path.write_text(raw, encoding="utf-8")
    t0 = time.perf_counter()
    result = RUNNER.invoke(
        app,
        [
            "instrument",
            str(path),
            "--out",
            str(tmp_path / "o"),
            "--jobs",
            "1",
            "--no-shop",
            "--fidelity",
            "beam",
        ],
    )
    elapsed = time.perf_counter() - t0
    assert result.exit_code == 1, result.output
    assert elapsed < 60.0  # a screen per bar, no search (a search of three bars takes minutes)
    rows = _rows((tmp_path / "o" / "blanks.csv").read_text())
    assert all(r["reachable"] == "no" for r in rows)
    assert all("minimum thickness (6 mm)" in r["binding"] for r in rows)
    assert all("mm thick" in r["nearest_blank"] for r in rows)
    summary = _rows((tmp_path / "o" / "summary.csv").read_text())
    assert all(r["status"] == "missed" for r in summary)
    assert all("minimum thickness" in r["message"] for r in summary)


@pytest.mark.slow
def test_two_octave_xylophone_from_stock_meets_every_bar(tmp_path):
    out = tmp_path / "run"
    result = RUNNER.invoke(
        app,
        [
            "instrument",
            str(EXAMPLE),
            "--out",
            str(out),
            "--jobs",
            "1",
            "--no-shop",
            "--fidelity",
            "beam",
        ],
    )
    assert result.exit_code == 0, result.output
    summary = _rows((out / "summary.csv").read_text())
    assert len(summary) == 25 and all(r["status"] == "met" for r in summary)
    for r in summary:  # no unwanted mode in a band
        if r["gap_hz"]:
            assert float(r["gap_hz"]) >= float(r["keep_clear_hz"]) or float(r["gap_hz"]) <= 3.0
    blanks = _rows((out / "blanks.csv").read_text())
    w = [float(r["width_mm"]) for r in blanks]
    t = [float(r["thickness_mm"]) for r in blanks]
    assert all(a >= b for a, b in np.c_[w[:-1], w[1:]])
    assert all(a >= b for a, b in np.c_[t[:-1], t[1:]])
    assert (out / "blanks.png").is_file() and (out / "blanks.svg").is_file()
