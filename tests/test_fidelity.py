"""Designs right in a higher-fidelity model: the defect-correction loop, the 2D-certified demo,
and (slow) a marimba bar certified by the converged 3D model within 3 cents of 1:4:10.

The 2D and 3D models have their own outside checks (tests/test_plane.py, tests/test_solid.py:
closed forms, a scikit-fem cross-check, convergence); here they serve as the reference the
correction must meet. Marimba tuning 1:4:10 is common practice (Fletcher & Rossing, ch. 19,
from memory).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pytest

from forward import Bar, constant
from optimizer import BarUndercut, Evaluator, Goal, SearchSettings, corrected_design, design
from tonewright.design import build_problem, run_design
from tonewright.materials import load_material
from tonewright.partfile import load_part

EXAMPLES = Path(__file__).resolve().parents[1] / "examples"


def _space_and_goals():
    material = load_material("honduras-rosewood").to_beam()
    blank = Bar(0.40, constant(0.05), constant(0.022), material)
    space = BarUndercut(blank, 0.022, min_thickness=0.004, end_keep=0.02)
    goals = [Goal("bending", k + 1, 261.63 * r, 1.0) for k, r in enumerate((1, 4, 10))]
    return space, goals


def test_correction_meets_a_model_with_a_smooth_defect():
    # A stand-in "high-fidelity" model: the beam's own frequencies moved by a defect that
    # depends on the design (here on the central depth), as a real one does. The loop must
    # land that model on the goals, though the beam model alone misses them by ~40 cents.
    space, goals = _space_and_goals()
    ev = Evaluator(space, goals)
    start = design(ev, SearchSettings(seed=1))
    assert start.converged

    def high_fidelity(u, gs):
        f = Evaluator(space, gs, degree=ev.degree).evaluate(u).achieved_hz
        defect = np.array([-40.0, -60.0, -30.0]) * (1.0 + 0.3 * u[0])
        return f * 2.0 ** (defect / 1200.0)

    out = corrected_design(ev, start, high_fidelity)
    assert out.converged, out.message
    assert np.all(np.abs(out.steps[-1].errors_cents) <= 1.0)
    assert len(out.steps) <= 6
    assert np.max(np.abs(out.steps[0].errors_cents)) > 25.0  # the beam alone was well off
    assert ev.goals == tuple(goals)  # goals restored after the loop


def test_demo_is_certified_by_the_side_profile_model():
    part_file, base = load_part(EXAMPLES / "workshop-marimba-c4.toml")
    problem = build_problem(part_file, base)
    outcome = run_design(problem)
    assert outcome.fidelity == "plane" and outcome.converged, outcome.message
    stage, corrected = outcome.stages[-1]
    assert stage.model == "plane"
    tol = np.array([g.tolerance_cents for g in problem.evaluator.goals])
    assert np.all(np.abs(corrected.steps[-1].errors_cents) <= tol)
    # the beam model alone would have missed the 2D model by several cents or more
    assert np.max(np.abs(corrected.steps[0].errors_cents)) > 2.0


@pytest.mark.slow
def test_marimba_bar_certified_in_3d_within_3_cents():
    part_file, base = load_part(EXAMPLES / "workshop-marimba-c4.toml")
    problem = build_problem(part_file, base)
    outcome = run_design(problem, fidelity="solid")
    assert outcome.converged, outcome.message
    stage, corrected = outcome.stages[-1]
    assert stage.model == "solid" and stage.mesh.nx >= 96  # the converged (standard) mesh
    errors = corrected.steps[-1].errors_cents
    assert np.all(np.abs(errors) <= 3.0), errors
