"""The design loop's fast forward path (``forward.pattern``) against the full route.

Evidence: (1) on the same mesh it gives the eigenvalues of ``modal.assemble_family`` +
``modal.lowest_modes`` to rounding, with and without the symmetric/antisymmetric split; (2) the
evaluator's fast path is within the stated 0.01 cent of ``forward.solve`` converged to 1e-4
cent, on a shallow and a deep cut; (3) its vectors are eigenvectors, M-normalised, so the
analytic Jacobian stays right. The split is exact because the mirror map commutes with K and M
(a structural invariant of a symmetric bar, checked here, not assumed).
"""

from __future__ import annotations

import numpy as np
import pytest
from tonewright.forward import Bar, Hole, Material, Support, constant, solve
from tonewright.forward.modal import assemble_family, discretise, lowest_modes, section_coefficients
from tonewright.forward.pattern import family_pattern, pattern_matrices, pattern_modes
from tonewright.optimizer import BarUndercut, Clearance, Evaluator, Goal

ROSEWOOD = Material(E=24e9, G=1.512e9, rho=1010.0, nu=0.476)  # library values, Pa and kg/m^3
FAMILIES = {"bending": 4, "lateral": 3, "torsion": 3}


def _space(symmetric: bool = True, holes=(), supports=()) -> BarUndercut:
    blank = Bar(0.40, constant(0.055), constant(0.022), ROSEWOOD, holes=holes, supports=supports)
    return BarUndercut(
        blank, 0.022, control_points=5, symmetric=symmetric, min_thickness=0.004, end_keep=0.02
    )


def _cents(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    return 1200 * np.log2(np.sqrt(a) / np.sqrt(b))


@pytest.mark.parametrize(
    "symmetric, holes, supports",
    [
        (True, (), ()),
        (
            True,
            (Hole(0.09, 0.005), Hole(0.31, 0.005)),
            (Support("spring", 0.09, 500.0), Support("spring", 0.31, 500.0)),
        ),
        (False, (), ()),
        (True, (Hole(0.09, 0.005),), ()),  # one hole: not symmetric, so never split
    ],
)
def test_pattern_equals_assembled_route_on_the_same_mesh(symmetric, holes, supports):
    space = _space(symmetric, holes, supports)
    rng = np.random.default_rng(3)
    u0 = space.start()
    part0 = space.part(u0)
    disc = discretise(part0, elements=4, degree=7, max_breakpoint_nodes=0)
    c0 = section_coefficients(part0, disc.quad.x)
    expect_split = symmetric and len(holes) != 1
    for fam, count in FAMILIES.items():
        pattern = family_pattern(part0, disc, fam, c0, symmetric=symmetric)
        assert pattern.symmetric == expect_split
        for _ in range(3):  # other designs on the same pattern
            u = rng.uniform(0.0, 1.0, space.n)
            part = space.part(u)
            c = section_coefficients(part, disc.quad.x)
            system = assemble_family(part, disc, fam, c)
            lam_ref = lowest_modes(system, count)[0]
            lam, _ = pattern_modes(pattern, c, count)
            # rounding only: the two routes sum the same products in another order
            assert np.max(np.abs(_cents(lam, lam_ref))) < 1e-6
            K, M = pattern_matrices(pattern, c)
            scale = np.abs(system.K).max()
            assert np.allclose(K, system.K, atol=1e-10 * scale)
            assert np.allclose(M, system.M, atol=1e-10 * np.abs(system.M).max())


def test_pattern_vectors_are_m_normalised_eigenvectors():
    space = _space()
    part = space.part(space.start())
    disc = discretise(part, elements=4, degree=7, max_breakpoint_nodes=0)
    c = section_coefficients(part, disc.quad.x)
    pattern = family_pattern(part, disc, "bending", c, symmetric=True)
    lam, vec = pattern_modes(pattern, c, 4, vectors=True)
    K, M = pattern_matrices(pattern, c)
    assert np.allclose(vec.T @ M @ vec, np.eye(4), atol=1e-9)
    residual = K @ vec - M @ vec * lam
    assert np.max(np.abs(residual)) < 1e-7 * np.max(np.abs(K @ vec))
    # and every mode below a frequency in one call, as the clearance asks
    below = lam[2] * 1.0001
    lam_b, _ = pattern_modes(pattern, c, 1, below_lam=below)
    assert lam_b.size == 3 and np.allclose(lam_b, lam[:3], rtol=1e-10)


@pytest.mark.parametrize("u", [None, np.array([0.95, 0.9, 0.5, 0.9, 0.1])])
def test_evaluator_fast_path_within_its_accuracy_of_the_full_solve(u):
    space = _space()
    goals = [Goal("bending", k + 1, 440.0 * r) for k, r in enumerate((1, 4, 10))]
    clearance = Clearance(("torsion", "lateral"), lambda f: 0.1 * f)
    ev = Evaluator(space, goals, clearance)
    u = space.start() if u is None else u
    fast = ev.evaluate(u, shapes=False)
    ref = solve(space.part(u), FAMILIES, tol_cents=1e-4)
    for fam in FAMILIES:
        f_ref = np.array([m.frequency_hz for m in ref.family(fam)])
        f = fast.family_hz[fam]
        k = min(f.size, f_ref.size)
        # the stated accuracy of the design loop: 0.01 cent (the degree is chosen for 0.005)
        assert np.max(np.abs(1200 * np.log2(f[:k] / f_ref[:k]))) < 0.01
    shaped = ev.evaluate(u, jacobian=True)
    assert np.allclose(shaped.achieved_hz, fast.achieved_hz, rtol=1e-12)


def test_fixed_mesh_pattern_unchanged_by_use():
    """The cached supports matrices are never written into by BLAS (beta = 1, c = base)."""
    cords = (Support("spring", 0.09, 500.0), Support("spring", 0.31, 500.0))
    space = _space(holes=(), supports=cords)
    part = space.part(space.start())
    disc = discretise(part, elements=4, degree=7, max_breakpoint_nodes=0)
    c = section_coefficients(part, disc.quad.x)
    pattern = family_pattern(part, disc, "bending", c, symmetric=True)
    before = [b.K_supports.copy() for b in pattern.blocks]
    first = pattern_modes(pattern, c, 4)[0]
    second = pattern_modes(pattern, c, 4)[0]
    assert np.array_equal(first, second)
    assert all(np.array_equal(a, b.K_supports) for a, b in zip(before, pattern.blocks, strict=True))


@pytest.mark.parametrize("EI", [0.0, 2e-4])  # a flexible string, and a stiff steel core
def test_string_pattern_keeps_its_elements(EI):
    """A stiff string keeps its C1 elements in the pattern's support-only part, so the split
    pattern gives the assembled route's modes (a flexible string: C0 elements)."""
    from tonewright.forward import String

    s = String(
        0.65, 60.0, constant(0.004), constant(EI), (Support("pin", 0.0), Support("pin", 0.65))
    )
    disc = discretise(s, elements=4, degree=6)
    c = section_coefficients(s, disc.quad.x)
    pattern = family_pattern(s, disc, "transverse", c, symmetric=True)
    lam_ref = lowest_modes(assemble_family(s, disc, "transverse", c), 4)[0]
    lam, _ = pattern_modes(pattern, c, 4)
    assert np.max(np.abs(_cents(lam, lam_ref))) < 1e-6
