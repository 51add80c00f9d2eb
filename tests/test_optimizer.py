"""Inverse design: sensitivities, tuned bars re-checked independently, limits, repeatability.

Targets are trade facts: marimba bars are tuned 1:4:10, xylophone bars 1:3:6 (Fletcher &
Rossing, *The Physics of Musical Instruments*, 2nd ed., ch. 19, from memory; common practice).
Every design is re-checked with ``forward.solve`` on the part as written to file (1 mm
stations, a different mesh and an accuracy-controlled refinement), not with the optimizer's own
fixed mesh.
"""

from __future__ import annotations

import numpy as np
import pytest
from tonewright.acoustics.pitch import strike_note_hz
from tonewright.forward import Bar, Material, String, Tube, constant, solve
from tonewright.forward.modal import assemble_family, discretise, lowest_modes, section_coefficients
from tonewright.optimizer import (
    BarUndercut,
    Clearance,
    Evaluator,
    Goal,
    SearchSettings,
    StringDensity,
    TubeDesign,
    design,
    eigenvalue_gradients,
    mac,
)
from tonewright.optimizer.search import polish

ROSEWOOD = Material(E=24e9, G=1.512e9, rho=1010.0, nu=0.476)  # library values, Pa and kg/m^3
ALUMINIUM = Material(E=68.9e9, G=26e9, rho=2700.0, nu=0.33)  # Aluminum Association, 6061-T6


def _bar(material: Material, L=0.40, b=0.05, t0=0.022) -> Bar:
    return Bar(L, constant(b), constant(t0), material)


def _goals(f0: float, ratios, tols=(0.5, 1.0, 2.0)) -> list[Goal]:
    return [Goal("bending", k + 1, f0 * r, tols[k]) for k, r in enumerate(ratios)]


def _station_bar(space: BarUndercut, u: np.ndarray) -> Bar:
    """The design as written to a part file: linear between 1 mm stations."""
    from tonewright.forward import PiecewiseLinear

    L = space.length(u)
    x = np.linspace(0.0, L, int(np.ceil(L / 1e-3)) + 1)
    h = space.blank_thickness - space.depth_and_jacobian(u, x)[0]
    return Bar(L, space.blank.width, PiecewiseLinear(x, h), space.blank.material)


def _check_independently(space: BarUndercut, u: np.ndarray, goals: list[Goal]) -> np.ndarray:
    bar = _station_bar(space, u)
    result = solve(bar, {"bending": len(goals)}, tol_cents=0.01, degree=6, initial_elements=10)
    assert result.converged
    f = np.array([result.frequency("bending", g.order) for g in goals])
    return 1200 * np.log2(f / np.array([g.f_hz for g in goals]))


# --- sensitivities ---------------------------------------------------------------------------


@pytest.mark.parametrize("family", ["bending", "torsion", "lateral", "axial"])
def test_eigenvalue_gradients_match_finite_differences(family):
    # Fox & Kapoor (1968): d lambda = phi^T (dK - lambda dM) phi; checked against central
    # differences of the same discrete eigenproblem. Step 1e-3 balances truncation (h^2) and
    # the eigen-solver's rounding; 1e-5 relative agreement is far below any tuning effect.
    space = BarUndercut(_bar(ROSEWOOD), 0.022, min_thickness=0.004, end_keep=0.02)
    u = np.array([0.6, 0.9, 0.3, 0.1, 0.05])
    part = space.part(u)
    disc = discretise(part, elements=4, degree=8)

    def eig(v):
        p = space.part(v)
        system = assemble_family(p, disc, family, section_coefficients(p, disc.quad.x))
        lam, vec = lowest_modes(system, 3)
        return lam, vec, system

    lam, vec, system = eig(u)
    grad = eigenvalue_gradients(system, lam, vec, space.coefficient_jacobian(u, part, disc.quad.x))
    h = 1e-3
    fd = np.empty_like(grad)
    for k in range(u.size):
        up, dn = u.copy(), u.copy()
        up[k] += h
        dn[k] -= h
        fd[:, k] = (eig(up)[0] - eig(dn)[0]) / (2 * h)
    assert np.max(np.abs(grad - fd)) < 1e-5 * np.max(np.abs(grad))


@pytest.mark.parametrize("shape", ["spline", "arch", "steps"])
def test_residual_jacobian_matches_finite_differences(shape):
    space = BarUndercut(_bar(ROSEWOOD), 0.022, shape=shape, min_thickness=0.004, end_keep=0.02)
    ev = Evaluator(space, _goals(261.63, (1, 4, 10)))
    u = np.full(space.n, 0.45)
    J = ev.evaluate(u, jacobian=True).jacobian
    h = 1e-4
    fd = np.empty_like(J)
    for k in range(u.size):
        up, dn = u.copy(), u.copy()
        up[k] += h
        dn[k] -= h
        fd[:, k] = (ev.evaluate(up).residuals - ev.evaluate(dn).residuals) / (2 * h)
    assert np.max(np.abs(J - fd)) < 1e-4 * np.max(np.abs(J))


def test_length_derivative_and_free_length_design():
    space = BarUndercut(
        _bar(ROSEWOOD), 0.022, min_thickness=0.004, end_keep=0.02, length_range=(0.34, 0.46)
    )
    goals = _goals(293.66, (1, 4, 10))
    ev = Evaluator(space, goals)
    u = np.full(space.n, 0.5)
    J = ev.evaluate(u, jacobian=True).jacobian
    up, dn = u.copy(), u.copy()
    up[-1] += 1e-4
    dn[-1] -= 1e-4
    fd = (ev.evaluate(up).residuals - ev.evaluate(dn).residuals) / 2e-4
    assert np.allclose(J[:, -1], fd, rtol=1e-4)
    # a shorter bar sounds higher: the length derivative of every partial is negative
    assert np.all(J[:, -1] < 0)


def test_mac_identifies_identical_and_orthogonal_shapes():
    # Allemang & Brown (1982): MAC = 1 for the same shape (any scale), 0 for orthogonal ones
    x = np.linspace(0, np.pi, 200)
    a = np.column_stack([np.sin(x), np.sin(2 * x)])
    m = mac(a, -3.0 * a)
    assert np.allclose(np.diag(m), 1.0) and np.allclose(m[0, 1], 0.0, atol=1e-12)


# --- designs ---------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("material", "f0", "ratios", "blank"),
    [
        (ROSEWOOD, 261.63, (1, 4, 10), (0.40, 0.05, 0.022)),  # C4 marimba bar
        (ROSEWOOD, 523.25, (1, 3, 6), (0.30, 0.038, 0.022)),  # C5 xylophone bar
    ],
)
def test_wood_bar_designs_meet_targets_on_independent_check(material, f0, ratios, blank):
    space = BarUndercut(_bar(material, *blank), blank[2], min_thickness=0.004, end_keep=0.02)
    goals = _goals(f0, ratios)
    result = design(Evaluator(space, goals), SearchSettings(seed=3))
    assert result.converged, result.message
    errors = _check_independently(space, result.u, goals)
    # tolerances 0.5/1/2 cents; the written 1 mm stations may differ from the smooth design by
    # far less than 0.05 cent (linear interpolation error ~ h'' dx^2 / 8 ~ 2 um)
    assert np.all(np.abs(errors) <= np.array([g.tolerance_cents for g in goals]) + 0.05)


@pytest.mark.slow
@pytest.mark.parametrize(
    ("material", "f0", "ratios", "blank"),
    [
        (ROSEWOOD, 220.0, (1, 4, 10), (0.42, 0.055, 0.022)),
        (ALUMINIUM, 261.63, (1, 4, 10), (0.32, 0.038, 0.012)),
        (ALUMINIUM, 880.0, (1, 3, 6), (0.22, 0.032, 0.012)),
        (ROSEWOOD, 392.0, (1, 3, 6), (0.34, 0.04, 0.022)),
    ],
)
def test_more_designs_wood_and_aluminium(material, f0, ratios, blank):
    space = BarUndercut(_bar(material, *blank), blank[2], min_thickness=0.003, end_keep=0.015)
    goals = _goals(f0, ratios)
    result = design(Evaluator(space, goals), SearchSettings(seed=5))
    assert result.converged, result.message
    errors = _check_independently(space, result.u, goals)
    assert np.all(np.abs(errors) <= np.array([g.tolerance_cents for g in goals]) + 0.05)


def test_same_seed_same_result():
    space = BarUndercut(_bar(ROSEWOOD), 0.022, min_thickness=0.004, end_keep=0.02)
    goals = _goals(261.63, (1, 4, 10))
    a = design(Evaluator(space, goals), SearchSettings(seed=11))
    b = design(Evaluator(space, goals), SearchSettings(seed=11))
    assert np.array_equal(a.u, b.u) and a.solves == b.solves


def test_every_limit_is_honoured():
    L, t0 = 0.40, 0.022
    space = BarUndercut(
        _bar(ROSEWOOD, L=L, t0=t0),
        t0,
        min_thickness=0.008,
        max_depth=0.012,
        end_keep=0.03,
        node_zone=0.012,
        cutter_radius=0.03,
    )
    goals = _goals(300.0, (1, 4, 10), tols=(1, 3, 5))
    result = design(Evaluator(space, goals), SearchSettings(seed=2, budget=600))
    u = result.u
    x = np.linspace(0, L, 4001)
    depth = space.depth_and_jacobian(u, x)[0]
    assert depth.min() >= 0.0  # material is only removed
    assert depth.max() <= 0.012 + 1e-12  # max depth
    assert (t0 - depth).min() >= 0.008 - 1e-12  # min thickness
    e = space.cut_edge(L)
    assert np.all(depth[(x <= max(0.03, e)) | (x >= L - max(0.03, e))] == 0.0)  # ends, nodes
    nodes = solve(_station_bar(space, u), {"bending": 1}).family("bending")[0].nodes_m
    for xn in nodes:  # uncut zone of 12 mm around each mode-1 node of the designed bar
        assert np.all(depth[np.abs(x - xn) <= 0.006] == 0.0)
    # cutter: concave radius of the cut surface z = -depth(x) never below 30 mm
    assert space.curvature_margin(u) >= 0.0


def test_unreachable_target_is_reported_with_binding_limit():
    # a 22 mm blank cannot reach 1:4:10 when it may only be thinned to 18 mm
    space = BarUndercut(_bar(ROSEWOOD), 0.022, min_thickness=0.018, end_keep=0.02)
    goals = _goals(600.0, (1, 4, 10))
    result = design(Evaluator(space, goals), SearchSettings(seed=1, budget=300, restarts=1))
    assert not result.converged and result.status == 1
    assert "out of reach" in result.message
    assert any("minimum thickness" in b for b in result.binding)


def test_clearance_of_unwanted_modes_is_checked():
    # A known answer: goals set to the bar's own bending frequencies (every error 0), and a
    # keep-clear band (in the rule's place: half a critical bandwidth, Zwicker & Terhardt,
    # 1980) chosen from the computed gaps. A band wider than the first torsion mode's gap to
    # its nearest partial must make the verdict MISSED_UNWANTED naming that mode; a band
    # narrower than every gap must let the same design pass.
    from tonewright.optimizer.search import MET, MISSED_UNWANTED, verdict

    space = BarUndercut(_bar(ROSEWOOD, L=0.38, b=0.05), 0.022, min_thickness=0.0044, end_keep=0.02)
    u = np.full(space.n, 0.4)
    # a vanishing band: the torsion and lateral modes are solved, none can be inside a band
    none = Clearance(("torsion", "lateral"), lambda f: np.full_like(f, 1e-9), 3.0)
    plain = Evaluator(space, _goals(261.63, (1, 4, 10)), none).evaluate(u)
    goals = [Goal("bending", k + 1, f, 1.0) for k, f in enumerate(plain.achieved_hz)]
    f_t = plain.family_hz["torsion"][0]
    gap = float(np.min(np.abs(f_t - plain.achieved_hz)))
    assert gap > 3.0  # not a coincidence: the band decides
    wide = Clearance(("torsion", "lateral"), lambda f: np.full_like(f, 1.5 * gap), 3.0)
    held = verdict(Evaluator(space, goals, wide), u)
    assert held.status == MISSED_UNWANTED and not held.met
    assert "torsion mode 1" in held.message
    assert "clearance of unwanted modes" in held.binding
    ev = Evaluator(space, goals, wide).evaluate(u)
    for m in ev.unwanted:
        assert m.clear == (not (3.0 < m.gap_hz < m.band_hz))
    every_gap = [
        np.min(np.abs(f - plain.achieved_hz))
        for fam in ("torsion", "lateral")
        for f in plain.family_hz[fam]
    ]
    narrow_band = 0.5 * float(min(g for g in every_gap if g > 3.0))
    narrow = Clearance(("torsion", "lateral"), lambda f: np.full_like(f, narrow_band), 3.0)
    passed = verdict(Evaluator(space, goals, narrow), u)
    assert passed.status == MET, passed.message


def test_tube_tuned_to_a_strike_note():
    # Tubular bells: the strike note lies an octave below mode 4 (Fletcher & Rossing, ch. 19,
    # from memory): one component, mode 4 over 2
    tube = Tube(1.2, constant(0.032), constant(0.0015), ALUMINIUM)
    target = 392.0  # G4
    comps = ((4, 2.0, 1.0),)
    goals = [Goal("strike", 1, target, 1.0, 1.0, comps)]
    space = TubeDesign(tube, (0.8, 1.8))
    result = design(Evaluator(space, goals), SearchSettings(seed=1))
    assert result.converged, result.message
    bar = space.part(result.u)
    modes = solve(bar, {"bending": 6}, tol_cents=0.01)
    f = [modes.frequency("bending", k) for k in range(1, 7)]
    assert abs(1200 * np.log2(strike_note_hz(f) / target)) < 1.0


def test_string_tuned_to_a_non_harmonic_profile():
    # 1 : 2.1 : 3.15 is not harmonic; a uniform string gives 1:2:3 (f_n = n/(2L) sqrt(T/mu),
    # the harmonic series of the ideal string, e.g. Fletcher & Rossing ch. 2)
    from tonewright.forward import Support

    s = String(0.65, 80.0, constant(1.2e-3), supports=(Support("pin", 0.0), Support("pin", 0.65)))
    f1 = 0.5 / 0.65 * np.sqrt(80.0 / 1.2e-3)
    goals = [Goal("transverse", k + 1, f1 * r, 1.0) for k, r in enumerate((1.0, 2.1, 3.15))]
    space = StringDensity(s, (0.3e-3, 6e-3), control_points=5, symmetric=False)
    result = design(Evaluator(space, goals), SearchSettings(seed=4))
    assert result.converged, result.message
    res = solve(space.part(result.u), {"transverse": 3}, tol_cents=0.01)
    f = np.array([res.frequency("transverse", k) for k in (1, 2, 3)])
    assert np.all(np.abs(1200 * np.log2(f / [g.f_hz for g in goals])) < 1.05)


# ---------------------------------------------------------------------------------------------
# Starting from a neighbour's design, and the polish at bounds and at the cutter's limit


def test_a_neighbours_design_is_polished_to_the_target_in_few_solves():
    # the next semitone up (6 % sharper) on a blank 3 % shorter: the C4 design, scaled, is
    # a start a few tens of cents off, which the polish alone brings within tolerance
    c4 = BarUndercut(_bar(ROSEWOOD), 0.022, min_thickness=0.004, end_keep=0.02)
    first = design(Evaluator(c4, _goals(261.63, (1, 4, 10))), SearchSettings(seed=3))
    assert first.converged
    cs4 = BarUndercut(_bar(ROSEWOOD, L=0.388), 0.022, min_thickness=0.004, end_keep=0.02)
    goals = _goals(277.18, (1, 4, 10))
    stages: list[str] = []
    warm = design(
        Evaluator(cs4, goals),
        SearchSettings(seed=3),
        progress=lambda stage, solves, worst: stages.append(stage),
        start=first.u,
    )
    # the polish alone, no global search
    assert warm.converged and warm.attempts == 1 and warm.solves <= 40
    assert stages and set(stages) == {"polish"}
    errors = _check_independently(cs4, warm.u, goals)
    assert np.all(np.abs(errors) <= np.array([g.tolerance_cents for g in goals]) + 0.05)


def test_polish_moves_a_variable_that_sits_a_rounding_error_off_its_bound():
    # scipy's dogbox treats a bound as active only when x equals it; 1e-15 inside used to
    # truncate every step to nothing, and the polish returned its start unchanged
    space = BarUndercut(_bar(ROSEWOOD), 0.022, min_thickness=0.004, end_keep=0.02)
    goals = _goals(261.63, (1, 4, 10))
    tuned = design(Evaluator(space, goals), SearchSettings(seed=3))
    ev = Evaluator(space, _goals(261.63 * 2 ** (15 / 1200), (1, 4, 10)))  # 15 cents sharper
    start = tuned.u.copy()
    start[3] = 1e-15  # the fourth control point: there the Gauss-Newton step points outward
    before = ev.evaluate(start).errors_cents
    u = polish(ev, start, SearchSettings(), None)
    after = ev.evaluate(u).errors_cents
    assert np.max(np.abs(before)) > 10.0
    assert np.max(np.abs(after)) < 0.01


def test_polish_pulls_a_cut_too_tight_for_the_cutter_back_within_it():
    # a 200 mm half-size blank with the 400 mm bar's design: the same scaled shape bends four
    # times as sharply, too sharply for a 40 mm cutter; the polish must restore the cutter
    big = BarUndercut(_bar(ROSEWOOD), 0.022, min_thickness=0.004, end_keep=0.02)
    tuned = design(Evaluator(big, _goals(261.63, (1, 4, 10))), SearchSettings(seed=3))
    small = BarUndercut(
        _bar(ROSEWOOD, L=0.20, b=0.025, t0=0.011),
        0.011,
        min_thickness=0.002,
        end_keep=0.01,
        cutter_radius=0.04,
    )
    assert small.curvature_margin(tuned.u) < 0
    ev = Evaluator(small, _goals(523.25, (1, 4, 10), tols=(1, 3, 5)))
    u = polish(ev, tuned.u, SearchSettings(), None)
    assert small.curvature_margin(u) >= 0.0


def test_a_miss_caused_by_the_clearance_names_it():
    # a 57 x 18 x 4 mm rosewood bar at C7 reaches 1:4:10 only with a torsion mode inside the
    # third partial's critical band (found by this project's own runs: without the clearance
    # the same search meets the target); the report must say so, not "no single limit"
    from tonewright.acoustics.pitch import critical_bandwidth_hz

    bar = Bar(0.057, constant(0.018), constant(0.004), ROSEWOOD)
    space = BarUndercut(bar, 0.004, min_thickness=0.0008, end_keep=0.003, control_points=6)
    goals = _goals(2093.0, (1, 4, 10), tols=(1, 3, 5))
    clear = Clearance(("torsion", "lateral"), lambda f: 0.5 * critical_bandwidth_hz(f), 3.0)
    settings = SearchSettings(seed=1, budget=300, restarts=1)
    free = design(Evaluator(space, goals), settings)
    assert free.converged
    held = design(Evaluator(space, goals, clear), settings)
    assert not held.converged
    assert any("clearance of unwanted modes" in b for b in held.binding), held.binding


def test_design_leaves_the_evaluator_unchanged_and_counts_in_its_log():
    # the objective is configuration (pycma's separation): a search may only change its log
    from tonewright.optimizer import EvaluationLog

    space = BarUndercut(_bar(ROSEWOOD), 0.022, min_thickness=0.004, end_keep=0.02)
    goals = _goals(261.63, (1, 4, 10))
    ev = Evaluator(space, goals)
    degree, before = ev.degree, ev.goals
    log = EvaluationLog()
    result = design(ev, SearchSettings(seed=3), log=log)
    assert result.converged
    assert ev.degree == degree and ev.goals == before and dict(ev.unwanted_scale) == {}
    assert log.solves == result.solves > 0
    with pytest.raises(AttributeError):
        ev.goals = ()
    sharper = ev.with_goals([Goal("bending", g.order, 2 * g.f_hz) for g in goals])
    assert sharper is not ev and ev.goals == before
    assert np.array_equal(sharper.partials_hz, ev.partials_hz)  # the clearance's reference
    assert ev.refined().degree == degree + 2 and ev.degree == degree
