"""The feasibility screen: impossible requests are reported before any search, in seconds,
with the limit that binds and a blank that would pass; reachable ones pass.

Evidence: the physics the screen rests on is a trade fact (a central undercut lowers the
fundamental and raises the partials' ratios; marimba bars are tuned 1:4:10: Fletcher, N. H. &
Rossing, T. D., 1998, *The Physics of Musical Instruments*, 2nd ed., ch. 19, from memory), and
the screen's verdict is checked against the full search: the bundled C4 example, which the
search meets, passes; a blank the search cannot tune fails, and the advised blank passes.
"""

from __future__ import annotations

import dataclasses
import json
import time
from pathlib import Path

import numpy as np
from tonewright.forward import Bar, Material, constant
from tonewright.optimizer import BarUndercut, Goal
from tonewright.optimizer.screen import screen_bar
from tonewright.optimizer.search import MISSED_UNREACHABLE
from typer.testing import CliRunner

from tonewright.cli import app
from tonewright.design import build_problem
from tonewright.partfile import load_part

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"
ROSEWOOD = Material(E=24e9, G=1.512e9, rho=1010.0, nu=0.476)  # library values, Pa and kg/m^3
C3 = 130.8128  # Hz, equal temperament, A4 = 440 Hz
runner = CliRunner()


def _space(L=0.50, t=0.012, t_min=0.006) -> BarUndercut:
    bar = Bar(L, constant(0.060), constant(t), ROSEWOOD)
    return BarUndercut(bar, t, min_thickness=t_min, end_keep=0.015)


def _goals(f1: float, ratios=(1, 4, 10)) -> list[Goal]:
    return [Goal("bending", k + 1, f1 * r) for k, r in enumerate(ratios)]


def test_the_bundled_example_passes_the_screen():
    pf, base = load_part(EXAMPLES / "workshop-marimba-c4.toml")
    problem = build_problem(pf, base)
    reach = screen_bar(problem.space, problem.evaluator.goals)
    assert reach.feasible, reach.message
    # the uncut blank sits above its note and the ratios are within the sweep's reach
    assert reach.uncut_hz[0] > 261.6 and reach.max_ratios[1] >= 10.0


def test_stock_too_thin_for_1_4_10_at_c3_names_the_minimum_thickness():
    space = _space()
    t0 = time.process_time()
    reach = screen_bar(space, _goals(C3))
    assert time.process_time() - t0 < 5.0  # seconds, not a search
    assert not reach.feasible
    assert any("minimum thickness (6 mm)" in b for b in reach.binding)
    assert "mm thick" in reach.advice
    # the advised blank passes the screen
    thick = float(reach.advice.split("passes: ")[1].split(" mm thick")[0]) * 1e-3
    long = float(reach.advice.split("and ")[1].split(" mm long")[0]) * 1e-3
    better = _space(L=long, t=thick)
    assert screen_bar(better, _goals(C3)).feasible


def test_a_blank_below_its_note_names_the_pitch():
    space = _space(L=0.60, t=0.012, t_min=0.003)
    reach = screen_bar(space, _goals(600.0, (1, 4)))
    assert not reach.feasible
    assert "below the goal fundamental" in reach.binding[0]
    assert "mm long" in reach.advice
    L_new = float(reach.advice.split("passes: ")[1].split(" mm long")[0]) * 1e-3
    assert L_new < 0.60
    moved = dataclasses.replace(space, blank=dataclasses.replace(space.blank, length=L_new))
    assert screen_bar(moved, _goals(600.0, (1, 4))).uncut_hz[0] > 600.0


def test_design_of_an_impossible_part_stops_before_the_search(tmp_path):
    path = tmp_path / "thin-c3.toml"
    path.write_text(
        'title = "Thin C3"\nmaterial = "honduras-rosewood"\n'
        "[bar]\nlength = 500\nwidth = 60\nthickness = 12\n"
        '[target]\nfundamental = "C3"\nprofile = "marimba-1-4-10"\n'
        "[design]\nmin_thickness = 6\nend_keep = 15\n",
        encoding="utf-8",
    )
    out = tmp_path / "o"
    result = runner.invoke(app, ["design", str(path), "--out", str(out), "--beam-only"])
    assert result.exit_code == 1, result.output
    payload = json.loads((out / "result.json").read_text())
    assert payload["status"] == MISSED_UNREACHABLE
    assert any("minimum thickness" in b for b in payload["binding_limits"])
    assert payload["design"]["forward_solves"] < 200  # a screen, not a search (budget 2000)
    # the written part is the uncut blank: nothing is advised to be cut
    assert np.isclose(payload["design"]["summary"]["max_depth_mm"], 0.0)


def test_a_stock_list_of_thicknesses_picks_the_thickest_that_passes(tmp_path):
    from tonewright.partfile import parse_part

    table = {
        "title": "C3 from stock",
        "material": "honduras-rosewood",
        "bar": {"length": 500, "width": 60, "thickness": 12},
        "target": {"fundamental": "C3", "profile": "marimba-1-4-10"},
        "design": {"min_thickness": 6, "end_keep": 15, "thickness": [10, 12, 18]},
    }
    problem = build_problem(parse_part(table))
    # 10 and 12 mm are too thin for 1:4:10 with 6 mm left (the test above), 18 mm is not
    assert np.isclose(problem.part_file.bar.thickness, 0.018)
    assert problem.space.blank_thickness == problem.part_file.bar.thickness
    assert screen_bar(problem.space, problem.evaluator.goals).feasible
    thin = dict(table, design=dict(table["design"], thickness=[10, 12]))
    problem = build_problem(parse_part(thin))
    assert problem.part_file.bar.thickness == 0.012  # the thickest; the screen reports it
    assert not screen_bar(problem.space, problem.evaluator.goals).feasible
