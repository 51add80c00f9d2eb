"""Structural invariants of the forward model, on random parts (hypothesis, profile "ci").

Evidence: the matrix facts any conforming Ritz discretisation must satisfy (symmetric K and M,
positive-definite M, rigid-body null space), the Courant-Fischer min-max theorem (adding mass
lowers, adding stiffness raises, enlarging the trial space lowers every ordered eigenvalue;
Courant, R. & Hilbert, D., 1953, *Methods of Mathematical Physics*, vol. 1, ch. VI), the
dimensional scaling of the Euler-Bernoulli beam (f ~ h / L^2 sqrt(E / rho), independent of the
width), and trade facts (a central undercut flattens the fundamental; drilling the suspension
holes flattens a bar: common practice, no source).
"""

import dataclasses

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from threadpoolctl import threadpool_limits
from tonewright.forward import (
    Bar,
    Hole,
    Material,
    PiecewiseLinear,
    Support,
    constant,
    families_of,
    hole_centre_height,
    solve,
)
from tonewright.forward.modal import (
    assemble_family,
    discretise,
    hole_data,
    lowest_modes,
    section_coefficients,
)

from tonewright.partfile import parse_part


@pytest.fixture(autouse=True, scope="module")
def _one_blas_thread():
    # Small dense eigenproblems: extra BLAS threads only contend with other work here.
    with threadpool_limits(1):
        yield


@st.composite
def bars(draw, holes=True):
    """A random bar: blank, material, a central undercut with ramps, maybe one hole."""
    L = draw(st.floats(0.15, 0.6))
    b = draw(st.floats(0.02, 0.07))
    h = draw(st.floats(0.008, 0.03))
    E = draw(st.floats(5e9, 80e9))
    material = Material(
        E=E, G=E / draw(st.floats(2.5, 16.0)), rho=draw(st.floats(500.0, 9000.0)), nu=0.3
    )
    depth = draw(st.floats(0.0, 0.7))  # fraction of h removed at the centre
    half = draw(st.floats(0.05, 0.35))  # half-length of the flat of the arch, fraction of L
    ramp = draw(st.floats(0.02, 0.1))
    x = np.array([0.0, 0.5 - half - ramp, 0.5 - half, 0.5 + half, 0.5 + half + ramp, 1.0]) * L
    y = h * np.array([1.0, 1.0, 1 - depth, 1 - depth, 1.0, 1.0])
    hole = ()
    if holes and draw(st.booleans()):
        hole = (Hole(draw(st.floats(0.12, 0.3)) * L, draw(st.floats(0.1, 0.4)) * h),)
    return Bar(L, constant(b), PiecewiseLinear(x, y), material, holes=hole)


def _system(part, disc, family):
    return assemble_family(part, disc, family, section_coefficients(part, disc.quad.x))


@given(
    bar=bars(),
    theory=st.sampled_from(["timoshenko", "euler-bernoulli"]),
    elements=st.integers(1, 6),
    degree=st.integers(2, 8),
    clamp=st.booleans(),
)
def test_matrices_symmetric_and_mass_positive_definite(bar, theory, elements, degree, clamp):
    if clamp:
        bar = dataclasses.replace(bar, supports=(Support("clamp", 0.0),))
    disc = discretise(bar, elements=elements, degree=degree, theory=theory)
    for family in families_of(bar):
        s = _system(bar, disc, family)
        # symmetric to rounding (assembly adds the same products in both triangles)
        assert np.allclose(s.K, s.K.T, rtol=0, atol=1e-13 * np.abs(s.K).max())
        assert np.allclose(s.M, s.M.T, rtol=0, atol=1e-13 * np.abs(s.M).max())
        np.linalg.cholesky(s.M)  # raises unless M is positive definite
        # K positive semidefinite: x^T K x >= 0 for random x (energy), to rounding
        x = np.random.default_rng(0).standard_normal((s.K.shape[0], 4))
        assert np.all(np.einsum("ij,ij->j", x, s.K @ x) >= -1e-12 * np.abs(s.K).max())


@settings(max_examples=20)
@given(bar=bars(), theory=st.sampled_from(["timoshenko", "euler-bernoulli"]))
def test_rigid_modes_are_dropped_exactly(bar, theory):
    # Free-free: bending and lateral have two rigid motions (w = a + b x), torsion and axial
    # one; lowest_modes must drop exactly those and nothing else.
    disc = discretise(bar, elements=4, degree=6, theory=theory)
    for family, rigid in (("bending", 2), ("lateral", 2), ("torsion", 1), ("axial", 1)):
        s = _system(bar, disc, family)
        assert s.n_rigid == rigid
        lam_all, _ = lowest_modes(dataclasses.replace(s, n_rigid=0), rigid + 2)
        scale = lam_all[rigid]
        assert scale > 0
        assert np.all(np.abs(lam_all[:rigid]) < 1e-7 * scale)  # the rigid motions: lam = 0
        assert lam_all[rigid] > 1e-3 * lam_all[rigid + 1]  # and nothing else near zero
        lam, vec = lowest_modes(s, 2)
        assert lam == pytest.approx(lam_all[rigid:], rel=1e-9)
        assert vec.T @ s.M @ vec == pytest.approx(np.eye(2), abs=1e-9)  # M-orthonormal
    # One pin leaves one rigid rotation in bending.
    pinned = dataclasses.replace(bar, supports=(Support("pin", 0.3 * bar.length),))
    disc = discretise(pinned, elements=4, degree=6, theory=theory)
    assert _system(pinned, disc, "bending").n_rigid == 1


@settings(max_examples=25)
@given(
    a=st.floats(0.5, 2.0),
    c=st.floats(0.5, 2.0),
    w=st.floats(0.5, 2.0),
)
def test_euler_bernoulli_scaling_law(a, c, w):
    # f ~ (h / L^2) sqrt(E / rho) and independent of the width for a uniform bar
    # (f_n = (beta L)^2 / (2 pi L^2) sqrt(E h^2 / (12 rho)), Thomson, App. D). The discrete
    # problem is scale-invariant too (same relative mesh), so 1e-9 is rounding only.
    mat = Material(E=70e9, G=26e9, rho=2700.0)
    base = Bar(0.3, constant(0.04), constant(0.01), mat)
    scaled = Bar(0.3 * c, constant(0.04 * w), constant(0.01 * a), mat)
    f0 = [m.frequency_hz for m in solve(base, {"bending": 3}, theory="euler-bernoulli").modes]
    f1 = [m.frequency_hz for m in solve(scaled, {"bending": 3}, theory="euler-bernoulli").modes]
    assert np.array(f1) == pytest.approx(np.array(f0) * a / c**2, rel=1e-9)


_PART_IN_UNITS = {
    "mm": (
        "length = 406.4\nwidth = 50.8\nthickness = 19.05\n"
        "profile = [[0, 19.05], [101.6, 19.05], [152.4, 9.525], [254, 9.525], [304.8, 19.05],"
        " [406.4, 19.05]]\nholes = [{ at = 91.44, diameter = 6.35 }]"
    ),
    "m": (
        'length = "0.4064 m"\nwidth = "0.0508 m"\nthickness = "0.01905 m"\n'
        'profile = [[0, "0.01905 m"], ["0.1016 m", "0.01905 m"], ["0.1524 m", "0.009525 m"],'
        ' ["0.254 m", "0.009525 m"], ["0.3048 m", "0.01905 m"], ["0.4064 m", "0.01905 m"]]\n'
        'holes = [{ at = "0.09144 m", diameter = "0.00635 m" }]'
    ),
    "in": (
        'length = "16 in"\nwidth = "2 in"\nthickness = "3/4 in"\n'
        'profile = [[0, "3/4 in"], ["4 in", "3/4 in"], ["6 in", "3/8 in"], ["10 in", "3/8 in"],'
        ' ["12 in", "3/4 in"], ["16 in", "3/4 in"]]\n'
        'holes = [{ at = "3.6 in", diameter = "1/4 in" }]'
    ),
}


def test_same_bar_in_mm_m_and_inches_gives_the_same_modes():
    # 1 in = 25.4 mm exactly (international yard and pound agreement, 1959): the three files
    # describe one bar, so every frequency agrees to rounding (1e-9 relative).
    import tomllib

    results = {}
    for unit, body in _PART_IN_UNITS.items():
        raw = tomllib.loads(f'material = "sugar-maple"\n[bar]\n{body}\n')
        part = parse_part(raw).to_part()
        results[unit] = [m.frequency_hz for m in solve(part, {"bending": 3, "torsion": 1}).modes]
    assert results["m"] == pytest.approx(results["mm"], rel=1e-9)
    assert results["in"] == pytest.approx(results["mm"], rel=1e-9)


@settings(max_examples=20)
@given(bar=bars(), theory=st.sampled_from(["timoshenko", "euler-bernoulli"]))
def test_refinement_never_raises_an_eigenvalue(bar, theory):
    # Nested trial spaces (min-max): raising the degree on a fixed mesh (hierarchical bases),
    # and bisecting every element of a mesh whose edges are kept (here: a uniform bar without
    # interior mesh points, so the mesh of 2n elements contains that of n).
    for family in families_of(bar):
        disc = discretise(bar, elements=3, degree=4, theory=theory)
        finer = discretise(bar, elements=3, degree=5, theory=theory)
        assert np.array_equal(disc.edges, finer.edges)
        lo = lowest_modes(_system(bar, disc, family), 3)[0]
        hi = lowest_modes(_system(bar, finer, family), 3)[0]
        assert np.all(hi <= lo * (1 + 1e-10))
    uniform = Bar(
        bar.length, bar.width, constant(float(bar.thickness(np.array([0.0]))[0])), bar.material
    )
    for family in families_of(uniform):
        lams = []
        for n in (2, 4, 8):
            disc = discretise(uniform, elements=n, degree=3, theory=theory)
            lams.append(lowest_modes(_system(uniform, disc, family), 3)[0])
        assert np.all(np.diff(np.array(lams), axis=0) <= 1e-10 * lams[0])


def _lam_pair(part_a, part_b, family="bending", count=3, theory="timoshenko"):
    """Eigenvalues of two parts on ONE discretisation (part_a's mesh, which holds every node
    part_b needs), so differences are the physics, not the mesh."""
    disc = discretise(part_a, elements=6, degree=6, theory=theory)
    return (
        lowest_modes(_system(part_a, disc, family), count)[0],
        lowest_modes(_system(part_b, disc, family), count)[0],
    )


@given(
    depth=st.floats(0.02, 0.3),
    half=st.floats(0.05, 0.2),
    theory=st.sampled_from(["timoshenko", "euler-bernoulli"]),
)
def test_small_central_undercut_lowers_the_fundamental(depth, half, theory):
    # Trade (common practice, no source): removing material at the centre lowers the
    # fundamental.
    L, h = 0.4, 0.022
    wood = Material(E=24e9, G=1.512e9, rho=1010.0, nu=0.476)  # library honduras-rosewood
    blank = Bar(L, constant(0.055), constant(h), wood)
    x = np.array([0.0, 0.5 - half - 0.05, 0.5 - half, 0.5 + half, 0.5 + half + 0.05, 1.0]) * L
    y = h * np.array([1.0, 1.0, 1 - depth, 1 - depth, 1.0, 1.0])
    cut = dataclasses.replace(blank, thickness=PiecewiseLinear(x, y))
    lam_cut, lam_blank = _lam_pair(cut, blank, theory=theory)
    assert lam_cut[0] < lam_blank[0]


@given(
    diameter=st.floats(0.002, 0.008),
    offset=st.floats(-0.003, 0.003),
)
def test_suspension_hole_at_the_node_flattens_the_bar(diameter, offset):
    # Trade (common practice, no source): drilling the suspension holes flattens a bar. The
    # hole goes at the computed first-mode node, at or near mid-thickness.
    L, h = 0.4, 0.022
    wood = Material(E=24e9, G=1.512e9, rho=1010.0, nu=0.476)
    blank = Bar(L, constant(0.055), constant(h), wood)
    node = solve(blank, {"bending": 1}).family("bending")[0].nodes_m[0]
    drilled = dataclasses.replace(blank, holes=(Hole(node, diameter, h / 2 + offset),))
    lam_drilled, lam_blank = _lam_pair(drilled, blank)
    assert lam_drilled[0] < lam_blank[0]


def test_hole_without_height_sits_at_local_mid_thickness():
    # The project's convention (no source): a hole given no height is drilled at half the local
    # thickness; a given height is kept as it is.
    assert hole_centre_height(None, 0.018) == 0.009
    assert hole_centre_height(0.004, 0.018) == 0.004
    wood = Material(E=12e9, G=0.8e9, rho=700.0)
    taper = PiecewiseLinear((0.0, 0.4), (0.024, 0.016))
    bar = Bar(0.4, constant(0.05), taper, wood, holes=(Hole(0.1, 0.004), Hole(0.3, 0.004, 0.005)))
    chord, z = hole_data(bar, np.array([0.1, 0.3]))
    assert z == pytest.approx([0.5 * float(taper(np.array([0.1]))[0]), 0.005], rel=1e-15)
    assert chord == pytest.approx([0.004, 0.004], rel=1e-12)


@given(bar=bars(holes=False), at=st.floats(0.0, 1.0), grams=st.floats(0.1, 500.0))
def test_point_mass_lowers_every_frequency(bar, at, grams):
    # min-max: M + m e e^T >= M, so every ordered eigenvalue falls or stays (the torsion family
    # does not see a mass on the axis and must stay exactly).
    x = at * bar.length
    loaded = dataclasses.replace(bar, supports=(Support("mass", x, grams * 1e-3),))
    for family in families_of(bar):
        lam_loaded, lam_free = _lam_pair(loaded, bar, family)
        assert np.all(lam_loaded <= lam_free * (1 + 1e-10))
        if family == "torsion":
            assert lam_loaded == pytest.approx(lam_free, rel=1e-10)


@given(bar=bars(holes=False), at=st.floats(0.0, 1.0), n_per_mm=st.floats(0.01, 1e4))
def test_spring_support_raises_or_keeps_every_frequency(bar, at, n_per_mm):
    # min-max: K + k e e^T >= K, so every ordered eigenvalue rises or stays (bounce modes are
    # dropped from the bottom, the same count with and without the spring).
    x = at * bar.length
    sprung = dataclasses.replace(bar, supports=(Support("spring", x, n_per_mm * 1e3),))
    for family in ("bending", "lateral"):
        lam_sprung, lam_free = _lam_pair(sprung, bar, family)
        assert np.all(lam_sprung >= lam_free * (1 - 1e-10))
