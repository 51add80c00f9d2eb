"""Tests of the orthotropic material, the 3-D solid model and the mode classifier.

Evidence tiers: an independent general FE library (scikit-fem) on the same discrete problem;
published closed forms (Euler-Bernoulli table, Timoshenko beam equations, Saint-Venant torsion
with the Timoshenko & Goodier series, Rayleigh's rod with lateral inertia); structural
invariants (symmetry, rigid modes, mass, nested refinement, scaling laws); input validation.
"""

from __future__ import annotations

import numpy as np
import pytest
import scipy.linalg as sla
from hypothesis import given
from hypothesis import strategies as st
from scipy.linalg import expm
from scipy.optimize import brentq
from tonewright.acoustics.pitch import cents
from tonewright.forward.geometry import PiecewiseLinear, constant
from tonewright.forward.orthotropic import (
    Orthotropic,
    OrthotropicConstants,
    bar_axes,
    compliance_lrt,
    compliance_matrix,
    isotropic,
    plane_stress_xz,
    stiffness_matrix,
)
from tonewright.forward.solid import (
    SolidMesh,
    _mirror_grid,
    assemble_solid,
    graded_stations,
    node_grid,
    reentrant_kinks,
    solid_convergence,
    solid_modes,
)

# Invented demo material shaped like Wood Handbook ratios (E_L/G_LT ~ 13); aluminium 6061-T6
# typical values (Aluminum Association, Aluminum Standards and Data; from memory).
WOOD = Orthotropic(20e9, 2.2e9, 1.2e9, 1.6e9, 1.5e9, 0.4e9, 0.37, 0.45, 0.6, 1000.0)
AL_E, AL_NU, AL_RHO = 68.9e9, 0.33, 2700.0
ALUMINIUM = isotropic(AL_E, AL_NU, AL_RHO)
# the demo undercut bar: 400 x 55 x 22 mm, undercut to 7 mm between 160 and 240 mm
STATIONS_MM = np.array([[0, 22], [120, 22], [160, 7], [240, 7], [280, 22], [400, 22]], float)
UNDERCUT = PiecewiseLinear(STATIONS_MM[:, 0] / 1000, STATIONS_MM[:, 1] / 1000)
L, B, T0 = 0.4, 0.055, 0.022

# Euler-Bernoulli free-free beta_n L (Thomson, Theory of Vibration with Applications, App. D,
# Tables D.1-D.2, further digits derived)
EB_FREE = np.array([4.73004074, 7.85320462, 10.99560784, 14.13716549, 17.27875966])


# ---------------------------------------------------------------------------------------------
# Independent oracle: the Timoshenko beam by transfer matrices (exact for a uniform beam)
def timoshenko_free_free(
    L: float, EI: float, kGA: float, rhoA: float, rhoI: float, n: int, ends: str = "free"
) -> np.ndarray:
    """First n natural frequencies (Hz) of a uniform Timoshenko beam.

    Timoshenko (1921), Phil. Mag. 41, 744-746: state (w, psi, M, Q) with w' = psi + Q / kGA,
    psi' = M / EI, M' = -Q - rho I omega^2 psi, Q' = -rho A omega^2 w; y(L) = expm(A L) y(0).
    Free ends: M = Q = 0; pinned ends: w = M = 0. Roots of the 2x2 determinant by bisection.
    """
    rows, cols = ([2, 3], [0, 1]) if ends == "free" else ([0, 2], [1, 3])

    def det(omega: float) -> float:
        A = np.array(
            [
                [0.0, 1.0, 0.0, 1.0 / kGA],
                [0.0, 0.0, 1.0 / EI, 0.0],
                [0.0, -rhoI * omega**2, 0.0, -1.0],
                [-rhoA * omega**2, 0.0, 0.0, 0.0],
            ]
        )
        S = expm(A * L)[np.ix_(rows, cols)]
        return float(np.linalg.det(S / np.abs(S).max()))

    omega_eb = np.sqrt(EI / rhoA) / L**2
    grid = omega_eb * np.linspace(0.5, ((n + 1.5) * np.pi) ** 2, 300 * n)  # roots ~50 steps apart
    d = np.array([det(o) for o in grid])
    roots = [
        brentq(det, grid[i], grid[i + 1], xtol=1e-13 * grid[i])
        for i in np.flatnonzero(np.sign(d[:-1]) != np.sign(d[1:]))[:n]
    ]
    return np.array(roots) / (2.0 * np.pi)


def saint_venant_torsion_hz(
    L: float, b: float, h: float, G: float, rho: float, n: int = 1
) -> float:
    """Torsion mode n of a free-free uniform b x h bar (b >= h): f = (n / 2 L) sqrt(G J /
    rho I_p), J = k b h^3 with k from the series of Timoshenko & Goodier, *Theory of
    Elasticity*, sec. 109 (the rectangle), I_p = b h (b^2 + h^2) / 12."""
    odd = np.arange(1, 400, 2)
    k = (1 - 192 / np.pi**5 * (h / b) * np.sum(np.tanh(odd * np.pi * b / (2 * h)) / odd**5)) / 3
    Ip = b * h * (b * b + h * h) / 12
    return float(n / (2 * L) * np.sqrt(G * k * b * h**3 / (rho * Ip)))


def cowper_rectangle(nu: float) -> float:
    """Shear coefficient of a rectangle, Cowper (1966), J. Appl. Mech. 33, 335-340."""
    return 10.0 * (1.0 + nu) / (12.0 + 11.0 * nu)


def test_oracle_reproduces_published_values():
    # EB limit (huge shear stiffness, no rotary inertia) gives Thomson's beta_n L
    E, rho, b = 200e9, 7850.0, 0.05
    EI, rhoA = E * b**4 / 12, rho * b * b
    f = timoshenko_free_free(1.0, EI, 1e6 * E * b * b, rhoA, 0.0, 5)
    beta_L = np.sqrt(2 * np.pi * f / np.sqrt(EI / rhoA))
    np.testing.assert_allclose(beta_L, EB_FREE, rtol=1e-7)  # root-finding tolerance
    # pinned-pinned worked example (closed form f_n = (n pi)^2 / (2 pi L^2) sqrt(EI / rhoA)):
    # 1 m, 50 x 50 mm steel
    f = timoshenko_free_free(1.0, EI, 1e6 * E * b * b, rhoA, 0.0, 3, ends="pinned")
    np.testing.assert_allclose(f, [114.44, 457.76, 1030.0], rtol=5e-5)  # 5 digits quoted
    # Robert, G. (1996), Analytical solutions in structural dynamics, closed form: square
    # section, h/L = 0.1, nu = 0.3
    nu, h = 0.3, 0.1
    G = E / (2 * (1 + nu))
    A, Iy = h * h, h**4 / 12
    f_t = timoshenko_free_free(
        1.0, E * Iy, cowper_rectangle(nu) * G * A, rho * A, rho * Iy, 4, "pinned"
    )
    f_eb = (np.arange(1, 5) * np.pi) ** 2 / (2 * np.pi) * np.sqrt(E * Iy / (rho * A))
    np.testing.assert_allclose(f_t / f_eb, [0.98381, 0.94045, 0.88130, 0.81679], atol=6e-6)


# ---------------------------------------------------------------------------------------------
# Orthotropic material
def test_isotropic_stiffness_is_lame():
    # C = lambda 1 1^T + 2 mu I on normal strains, mu on engineering shears (e.g. Timoshenko &
    # Goodier, Theory of Elasticity, 3rd ed., sec. 6)
    lam = AL_E * AL_NU / ((1 + AL_NU) * (1 - 2 * AL_NU))
    mu = AL_E / (2 * (1 + AL_NU))
    C = np.zeros((6, 6))
    C[:3, :3] = lam
    C[np.arange(3), np.arange(3)] += 2 * mu
    C[np.arange(3, 6), np.arange(3, 6)] = mu
    np.testing.assert_allclose(stiffness_matrix(ALUMINIUM), C, rtol=1e-12, atol=1e-3)


def test_isotropic_plane_stress():
    # E / (1 - nu^2) [[1, nu, 0], [nu, 1, 0], [0, 0, (1 - nu) / 2]] (textbook plane stress)
    expected = (
        AL_E / (1 - AL_NU**2) * np.array([[1, AL_NU, 0], [AL_NU, 1, 0], [0, 0, (1 - AL_NU) / 2]])
    )
    np.testing.assert_allclose(plane_stress_xz(ALUMINIUM), expected, rtol=1e-12, atol=1e-3)


def test_reciprocity_and_axes():
    S = compliance_matrix(WOOD)  # default: R across the width (y), T through the thickness (z)
    np.testing.assert_array_equal(S, S.T)
    assert S[0, 1] == pytest.approx(-WOOD.nu_LR / WOOD.E_L)
    nu_RL = WOOD.nu_LR * WOOD.E_R / WOOD.E_L  # reciprocity nu_ij / E_i = nu_ji / E_j
    assert S[1, 0] == pytest.approx(-nu_RL / WOOD.E_R)
    a = bar_axes(WOOD)
    assert (a.E_z, a.G_xz, a.G_xy, a.nu_xz) == (WOOD.E_T, WOOD.G_LT, WOOD.G_LR, WOOD.nu_LT)
    flat = Orthotropic(**{**WOOD.__dict__, "thickness_axis": "R"})
    f = bar_axes(flat)
    assert (f.E_y, f.E_z, f.G_xz, f.G_xy) == (WOOD.E_T, WOOD.E_R, WOOD.G_LR, WOOD.G_LT)
    assert f.nu_yz == pytest.approx(WOOD.nu_RT * WOOD.E_T / WOOD.E_R)  # nu_TR
    # the same physical compliance, axes y and z swapped
    P = np.eye(6)[[0, 2, 1, 3, 5, 4]]
    np.testing.assert_allclose(compliance_matrix(flat), P @ S @ P.T, rtol=1e-12)


@given(
    E=st.lists(st.floats(0.3e9, 30e9), min_size=3, max_size=3),
    G=st.lists(st.floats(0.1e9, 5e9), min_size=3, max_size=3),
    s=st.lists(st.floats(-0.9, 0.9), min_size=3, max_size=3),
)
def test_valid_materials_give_spd_stiffness(E, G, s):
    # Poisson ratios scaled inside Lempriere's (1968) bound |nu_ij| < sqrt(E_i / E_j), then
    # kept only if the determinant condition also holds
    nu_LR = s[0] * np.sqrt(E[0] / E[1])
    nu_LT = s[1] * np.sqrt(E[0] / E[2])
    nu_RT = s[2] * np.sqrt(E[1] / E[2])
    nu_RL, nu_TL, nu_TR = nu_LR * E[1] / E[0], nu_LT * E[2] / E[0], nu_RT * E[2] / E[1]
    det = 1 - nu_LR * nu_RL - nu_RT * nu_TR - nu_LT * nu_TL - 2 * nu_RL * nu_TR * nu_LT
    args = (*E, *G, nu_LR, nu_LT, nu_RT, 500.0)
    if det <= 1e-6:
        with pytest.raises(ValueError, match="Poisson"):
            Orthotropic(*args)
        return
    m = Orthotropic(*args)
    C = stiffness_matrix(m)
    np.testing.assert_allclose(C, C.T, rtol=1e-12)
    assert np.linalg.eigvalsh(C).min() > 0
    np.testing.assert_allclose(C @ compliance_matrix(m), np.eye(6), atol=1e-8)


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"E_L": -1.0}, "E_L"),
        ({"G_RT": 0.0}, "G_RT"),
        ({"rho": float("nan")}, "rho"),
        ({"nu_LR": 4.0}, "Poisson"),  # beyond sqrt(E_L / E_R) = 3.0
        ({"nu_RT": float("inf")}, "nu_RT"),
        ({"thickness_axis": "L"}, "thickness_axis"),
    ],
)
def test_material_validation(kwargs, match):
    with pytest.raises(ValueError, match=match):
        Orthotropic(**{**WOOD.__dict__, **kwargs})


def test_constants_alone_and_with_density():
    # One dataclass holds the nine constants; the models' material adds rho and the sawing.
    nine = {k: v for k, v in WOOD.__dict__.items() if k not in ("rho", "thickness_axis")}
    constants = OrthotropicConstants(**nine)
    assert Orthotropic.from_constants(constants, WOOD.rho) == WOOD
    flat = Orthotropic.from_constants(constants, WOOD.rho, "R")
    assert flat.thickness_axis == "R" and isinstance(flat, OrthotropicConstants)
    np.testing.assert_array_equal(compliance_lrt(constants), compliance_lrt(WOOD))
    # scaling keeps the ratios (and, on the models' material, rho and the sawing)
    stiff = WOOD.scaled(2.0, 3.0)
    assert (stiff.E_T / stiff.E_L, stiff.G_RT / stiff.G_LT) == pytest.approx(
        (WOOD.E_T / WOOD.E_L, WOOD.G_RT / WOOD.G_LT), rel=1e-15
    )
    assert (stiff.E_L, stiff.G_LR, stiff.rho) == (2.0 * WOOD.E_L, 3.0 * WOOD.G_LR, WOOD.rho)
    with pytest.raises(ValueError, match="Poisson"):
        OrthotropicConstants(**{**nine, "nu_LR": 4.0})  # beyond sqrt(E_L / E_R) = 3.0
    with pytest.raises(ValueError, match="G_LT"):
        OrthotropicConstants(**{**nine, "G_LT": -1.0})


def test_isotropic_validation():
    with pytest.raises(ValueError, match="nu"):
        isotropic(70e9, 0.5, 2700.0)
    with pytest.raises(ValueError, match="E"):
        isotropic(0.0, 0.3, 2700.0)


# ---------------------------------------------------------------------------------------------
# Mesh
def test_mesh_follows_breakpoints_and_crowds_re_entrant_corners():
    assert reentrant_kinks(L, UNDERCUT) == pytest.approx([0.16, 0.24])  # thin flat's ends
    xe = graded_stations(L, UNDERCUT, 40, 2.0)
    for x in (0.12, 0.16, 0.24, 0.28):
        assert np.min(np.abs(xe - x)) < 1e-15
    size = np.diff(xe)
    i160 = int(np.argmin(np.abs(xe - 0.16)))
    # elements shrink toward the re-entrant corner at 160 mm, not toward the convex one at 120
    assert size[i160 - 1] < size[i160 - 2] and size[i160] < size[i160 + 1]
    assert xe.size == 41 and np.all(size > 0)


class _SmoothArch:
    """h(x) = 22 mm - 12 mm sin^2(pi x / L): a smooth cut, no breakpoints."""

    breakpoints = np.empty(0)

    def __call__(self, x):
        return 0.022 - 0.012 * np.sin(np.pi * np.asarray(x) / L) ** 2


def test_dense_stations_mesh_like_the_smooth_cut_they_sample():
    # a design written at 0.25 mm (1,601 stations) once made one element per station: the
    # standard 3D mesh then ran out of memory. Only real corners are element ends now.
    x = np.linspace(0.0, L, 1601)
    dense = PiecewiseLinear(x, _SmoothArch()(x))
    assert graded_stations(L, dense, 40, 2.0).size == 41
    # corners sampled densely still are element ends: the undercut's four, at 0.25 mm
    xs = np.linspace(0.0, L, 1601)
    corners = PiecewiseLinear(xs, UNDERCUT(xs))
    xe = graded_stations(L, corners, 40, 2.0)
    for c in (0.12, 0.16, 0.24, 0.28):
        assert np.min(np.abs(xe - c)) < 1e-12
    # the same answer as the smooth profile on the same mesh: the stations differ from the
    # curve by h'' dx^2 / 8 < 0.03 um, far below a cent
    mesh = SolidMesh(24, 2, 3)
    a = solid_modes(L, 0.05, 0.022, dense, WOOD, count=4, mesh=mesh).family_hz("bending")
    b = solid_modes(L, 0.05, 0.022, _SmoothArch(), WOOD, count=4, mesh=mesh).family_hz("bending")
    n = min(a.size, b.size, 3)
    assert n >= 2
    assert np.max(np.abs(1200 * np.log2(a[:n] / b[:n]))) < 0.05


# ---------------------------------------------------------------------------------------------
# Independent assembly: scikit-fem, same elements and quadrature, on the same mapped mesh
def _skfem_matrices(X: np.ndarray, C: np.ndarray, rho: float):
    skfem = pytest.importorskip("skfem")
    from skfem.helpers import dot, sym_grad

    xv, yv = X[0::2, 0, 0, 0], X[0, 0::2, 0, 1]
    kv = np.arange(X.shape[2] // 2 + 1, dtype=float)
    mesh = skfem.MeshHex.init_tensor(xv, yv, kv)
    p = mesh.p.copy()
    p[2] = X[2 * np.searchsorted(xv, p[0]), 0, 2 * np.rint(p[2]).astype(int), 2]
    # a piecewise-linear profile makes every element trilinear, which MeshHex reproduces;
    # intorder=5 selects the same 3 x 3 x 3 Gauss rule as ours (the default, 7^3, is exact-er
    # on tapered elements and differs by the quadrature error)
    basis = skfem.Basis(
        skfem.MeshHex(p, mesh.t), skfem.ElementVector(skfem.ElementHex2()), intorder=5
    )

    def voigt(e):
        return [e[0, 0], e[1, 1], e[2, 2], 2 * e[1, 2], 2 * e[0, 2], 2 * e[0, 1]]

    @skfem.BilinearForm
    def stiffness(u, v, w):
        eu, ev = voigt(sym_grad(u)), voigt(sym_grad(v))
        return sum(C[i, j] * ev[i] * eu[j] for i in range(6) for j in range(6) if C[i, j])

    @skfem.BilinearForm
    def mass(u, v, w):
        return rho * dot(u, v)

    return stiffness.assemble(basis), mass.assemble(basis)


def _lowest(K, M, k):
    lam = sla.eigh(K.toarray(), M.toarray(), eigvals_only=True, subset_by_index=[0, k - 1])
    return np.sqrt(np.clip(lam, 0, None)) / (2 * np.pi)


def test_assembly_matches_scikit_fem_and_symmetry_split():
    mesh = SolidMesh(6, 1, 2, grade_x=2.0, grade_y=1.0, grade_z=1.5)
    X = _mirror_grid(node_grid(L, B, T0, UNDERCUT, mesh))
    C = stiffness_matrix(WOOD)
    K, M = assemble_solid(X, C, WOOD.rho)
    K_ref, M_ref = _skfem_matrices(X, C, WOOD.rho)
    f_own, f_ref = _lowest(K, M, 14), _lowest(K_ref, M_ref, 14)
    # same discrete problem, different code and dof numbering: agreement to round-off
    np.testing.assert_allclose(f_own[6:], f_ref[6:], rtol=1e-8)
    assert np.all(f_own[:6] < 1e-4 * f_own[6])  # six rigid-body modes
    # the half-width model with symmetric + antisymmetric conditions gives the same spectrum
    split = solid_modes(L, B, T0, UNDERCUT, WOOD, count=8, mesh=mesh)
    np.testing.assert_allclose(split.f_hz, f_own[6:14], rtol=1e-8)


# ---------------------------------------------------------------------------------------------
# Structural invariants
def test_matrices_symmetric_rigid_null_space_and_mass():
    X = node_grid(L, B, T0, UNDERCUT, SolidMesh(8, 2, 2))
    K, M = assemble_solid(X, stiffness_matrix(WOOD), WOOD.rho)
    assert abs(K - K.T).max() <= 1e-10 * abs(K).max()
    assert abs(M - M.T).max() <= 1e-12 * abs(M).max()
    np.linalg.cholesky(M.toarray())  # positive definite
    xyz = X.reshape(-1, 3)
    n = xyz.shape[0]
    rigid = [np.zeros((n, 3)) for _ in range(6)]
    for i in range(3):
        rigid[i][:, i] = 1.0  # translations
    for i, (a, b) in enumerate([(1, 2), (2, 0), (0, 1)]):  # rotations about x, y, z
        rigid[3 + i][:, a] = -xyz[:, b]
        rigid[3 + i][:, b] = xyz[:, a]
    scale = abs(K).max() * np.abs(xyz).max()
    for r in rigid:
        assert np.abs(K @ r.ravel()).max() < 1e-9 * scale
    # a unit translation carries the bar's mass: rho b/2 * int h dx (exact, piecewise linear)
    volume = 0.5 * B * np.trapezoid(STATIONS_MM[:, 1] / 1000, STATIONS_MM[:, 0] / 1000)
    assert rigid[2].ravel() @ (M @ rigid[2].ravel()) == pytest.approx(WOOD.rho * volume, rel=1e-12)


def test_refinement_never_raises_a_frequency():
    # nested uniform meshes: the coarse space is a subspace of the fine one, so by the min-max
    # principle no Rayleigh-Ritz eigenvalue can rise (Strang & Fix 1973, ch. 6)
    coarse = solid_modes(L, B, T0, constant(T0), WOOD, 8, mesh=SolidMesh(4, 1, 1, 1.0, 1.0, 1.0))
    fine = solid_modes(L, B, T0, constant(T0), WOOD, 8, mesh=SolidMesh(8, 2, 2, 1.0, 1.0, 1.0))
    assert np.all(fine.f_hz <= coarse.f_hz * (1 + 1e-10))


def test_square_section_lateral_equals_vertical():
    # an isotropic square bar looks the same turned by 90 degrees: lateral mode n = vertical n
    # when the full-width mesh (2 ny elements) matches the thickness mesh (nz elements)
    r = solid_modes(
        0.3, 0.02, 0.02, constant(0.02), ALUMINIUM, 8, mesh=SolidMesh(8, 1, 2, 1.0, 1.0, 1.0)
    )
    bend, lat = r.family_hz("bending"), r.family_hz("lateral")
    n = min(bend.size, lat.size)
    assert n >= 3
    np.testing.assert_allclose(bend[:n], lat[:n], rtol=1e-9)


def test_dense_and_arpack_solvers_agree():
    def dense(K, M, k, sigma):
        lam, vec = sla.eigh(K.toarray(), M.toarray(), subset_by_index=[0, k - 1])
        return lam, vec

    mesh = SolidMesh(6, 1, 1)
    a = solid_modes(L, B, T0, UNDERCUT, WOOD, 6, mesh=mesh)
    b = solid_modes(L, B, T0, UNDERCUT, WOOD, 6, mesh=mesh, solver=dense)
    np.testing.assert_allclose(a.f_hz, b.f_hz, rtol=1e-9)


def test_scaling_laws():
    # linear elasticity: all lengths x s gives f / s; moduli x a gives f sqrt(a); rho x r gives
    # f / sqrt(r) (dimensional analysis)
    mesh = SolidMesh(6, 1, 2)
    base = solid_modes(L, B, T0, UNDERCUT, WOOD, 6, mesh=mesh).f_hz
    s = 1.7
    big = PiecewiseLinear(s * UNDERCUT.x, s * UNDERCUT.y)
    scaled = solid_modes(s * L, s * B, s * T0, big, WOOD, 6, mesh=mesh).f_hz
    np.testing.assert_allclose(scaled, base / s, rtol=1e-8)
    d = dict(WOOD.__dict__)
    stiffer = Orthotropic(**{k: (4 * v if k[0] in "EG" else v) for k, v in d.items()})
    np.testing.assert_allclose(
        solid_modes(L, B, T0, UNDERCUT, stiffer, 6, mesh=mesh).f_hz, 2 * base, rtol=1e-8
    )
    heavier = Orthotropic(**{**d, "rho": 4 * WOOD.rho})
    np.testing.assert_allclose(
        solid_modes(L, B, T0, UNDERCUT, heavier, 6, mesh=mesh).f_hz, base / 2, rtol=1e-8
    )


def test_central_undercut_lowers_the_fundamental():
    # trade fact (common practice, no source): removing material at the centre lowers the
    # fundamental
    mesh = SolidMesh(12, 1, 2)
    blank = solid_modes(L, B, T0, constant(T0), WOOD, 4, mesh=mesh)
    cut = PiecewiseLinear([0.0, 0.15, 0.2, 0.25, 0.4], [T0, T0, 0.8 * T0, T0, T0])
    cut_bar = solid_modes(L, B, T0, cut, WOOD, 4, mesh=mesh)
    assert cut_bar.family_hz("bending")[0] < blank.family_hz("bending")[0]


# ---------------------------------------------------------------------------------------------
# Published closed forms
SLENDER = dict(length=0.4, width=0.02, blank_thickness=0.02)
SLENDER_MESH = SolidMesh(24, 3, 6, 1.0, 1.0, 1.0)


@pytest.fixture(scope="module")
def slender_aluminium():
    """A 400 x 20 x 20 mm aluminium bar (h/L = 0.05), fine enough across the section."""
    return solid_modes(
        **SLENDER, thickness=constant(0.02), material=ALUMINIUM, count=10, mesh=SLENDER_MESH
    )


def test_uniform_bar_bending_against_euler_bernoulli_and_timoshenko(slender_aluminium):
    b = h = 0.02
    A, Iy = b * h, b * h**3 / 12
    G = AL_E / (2 * (1 + AL_NU))
    f_eb = EB_FREE[:4] ** 2 / (2 * np.pi * 0.4**2) * np.sqrt(AL_E * Iy / (AL_RHO * A))
    f_cowper = timoshenko_free_free(
        0.4, AL_E * Iy, cowper_rectangle(AL_NU) * G * A, AL_RHO * A, AL_RHO * Iy, 4
    )
    f_56 = timoshenko_free_free(0.4, AL_E * Iy, 5 / 6 * G * A, AL_RHO * A, AL_RHO * Iy, 4)
    f = slender_aluminium.family_hz("bending")[:4]
    # (a) EB (Thomson's table) ignores shear and rotary inertia, so it lies above the solid;
    # the gap is that of the Timoshenko beam, within a fifth (3-D and shear-coefficient effects)
    gap_timo = cents(f_eb, f_cowper)
    gap_solid = cents(f_eb, f)
    assert np.all(gap_solid > 0)
    np.testing.assert_allclose(gap_solid, gap_timo, rtol=0.2)
    # (b) against Timoshenko with Cowper's kappa, modes 1-3: within twice the change that
    # swapping kappa for 5/6 makes (the beam theory's own uncertainty) plus 0.6 cent of mesh
    # error (measured: refining to 32 x 4 x 8 lowers modes 1-3 by 0.05, 0.21, 0.47 cent)
    tol = 2 * np.abs(cents(f_56, f_cowper))[:3] + 0.6
    assert np.all(np.abs(cents(f, f_cowper))[:3] < tol)
    # measured: +0.27, +1.00, +2.12 cents (tolerance 0.88, 1.63, 2.68)


def test_uniform_bar_torsion_against_saint_venant():
    b, h = 0.04, 0.02  # b/h = 2
    r = solid_modes(0.4, b, h, constant(h), ALUMINIUM, 12, mesh=SolidMesh(16, 3, 4, 1.0, 1.0, 1.0))
    # J = k b h^3 with the Timoshenko & Goodier series (Theory of Elasticity, torsion of
    # rectangular bars); its table gives k = 0.229 at b/h = 2
    G = AL_E / (2 * (1 + AL_NU))
    Ip = b * h * (b * b + h * h) / 12
    f1 = saint_venant_torsion_hz(0.4, b, h, G, AL_RHO)
    k = (2 * 0.4 * f1) ** 2 * AL_RHO * Ip / (G * b * h**3)
    assert k == pytest.approx(0.229, abs=5e-4)  # the table's 3 digits
    # the solid also carries warping stiffness that Saint-Venant torsion omits, raising f; at
    # L/b = 10 this is under 0.2 % for mode 1 (measured +1.2 cents on a fine mesh, +1.6 here)
    d = cents(r.family_hz("torsion")[0], f1)
    assert 0.0 < d < 3.5


def test_uniform_bar_axial_against_rod_with_lateral_inertia(slender_aluminium):
    # rod: f_n = n / (2 L) sqrt(E / rho); Rayleigh's lateral-inertia correction
    # f ~ f_n (1 - (n pi nu r_p / L)^2 / 2), r_p^2 = I_p / A (Rayleigh, The Theory of Sound,
    # vol. 1, sec. 157; Love, Mathematical Theory of Elasticity, sec. 278; from memory)
    f0 = 1 / (2 * 0.4) * np.sqrt(AL_E / AL_RHO)
    rp2 = 2 * 0.02**2 / 12
    f_rayleigh = f0 * (1 - 0.5 * (np.pi * AL_NU) ** 2 * rp2 / 0.4**2)
    fa = slender_aluminium.family_hz("axial")[0]
    assert cents(fa, f0) < -0.3  # lateral inertia lowers it (Rayleigh: by 0.39 cent)
    # the corrected formula is good to O((r_p/L)^4); measured -0.004 cent
    assert abs(cents(fa, f_rayleigh)) < 0.1


def test_classification_of_a_uniform_bar(slender_aluminium):
    r = slender_aluminium
    for family in ("bending", "lateral", "torsion", "axial"):
        modes = [m for m in r.modes if m.family == family]
        assert [m.order for m in modes] == list(range(1, len(modes) + 1))
        for m in modes:
            extra = 1 if family in ("bending", "lateral") else 0
            assert m.nodes == m.order + extra
            assert m.share > 0.9
    assert {m.family for m in r.modes} >= {"bending", "lateral", "torsion", "axial"}


def test_mode_one_nodes_near_0224_length():
    # free-free mode 1 nodes at 0.22416 L and 0.77584 L (derived, exact EB shapes); shear
    # moves them outward slightly for this h/L = 0.05 bar, hence 0.003 L
    r = solid_modes(L, B, T0, constant(T0), WOOD, 1, mesh=SolidMesh(24, 1, 2))
    X, U = r.coords, r.shapes[0]
    w = U[:, :, :, 2].mean(axis=(1, 2))  # section-average vertical displacement
    x = X[:, 0, 0, 0]
    crossings = []
    for i in np.flatnonzero(np.sign(w[:-1]) != np.sign(w[1:])):
        crossings.append(x[i] - w[i] * (x[i + 1] - x[i]) / (w[i + 1] - w[i]))
    np.testing.assert_allclose(np.array(crossings) / L, [0.22416, 0.77584], atol=3e-3)


# ---------------------------------------------------------------------------------------------
# Requests, results and validation
def test_fmax_returns_every_mode_below_it():
    mesh = SolidMesh(8, 1, 2)
    by_count = solid_modes(L, B, T0, UNDERCUT, WOOD, 12, mesh=mesh)
    fmax = 0.5 * (by_count.f_hz[8] + by_count.f_hz[9])
    by_f = solid_modes(L, B, T0, UNDERCUT, WOOD, count=2, fmax_hz=fmax, mesh=mesh)
    np.testing.assert_allclose(by_f.f_hz, by_count.f_hz[:9], rtol=1e-9)
    assert by_f.shapes.shape == (9, *by_f.coords.shape)


def test_undercut_bar_modes_are_named():
    r = solid_modes(L, B, T0, UNDERCUT, WOOD, 11, mesh=SolidMesh(24, 2, 3))
    names = [(m.family, m.order) for m in r.modes]
    # bending 1-4, torsion 1-4, lateral 1-2 and axial 1 lie below 4 kHz for this bar
    for name in [("bending", 4), ("torsion", 4), ("lateral", 2), ("axial", 1)]:
        assert name in names
    assert r.status == 0 and r.message == "converged"
    # shapes are mass-normalised over the full width
    m = np.asarray(node_grid(L, B, T0, UNDERCUT, SolidMesh(24, 2, 3)).shape)
    assert r.coords.shape[1] == 2 * m[1] - 1


def test_shapes_have_unit_modal_mass_over_the_full_width():
    mesh = SolidMesh(6, 1, 2)
    r = solid_modes(L, B, T0, UNDERCUT, WOOD, 6, mesh=mesh)
    K, M = assemble_solid(r.coords, stiffness_matrix(WOOD), WOOD.rho)
    phi = r.shapes.reshape(r.f_hz.size, -1).T
    np.testing.assert_allclose(phi.T @ (M @ phi), np.eye(r.f_hz.size), atol=1e-9)
    # and they are eigenvectors of the full-width problem: K phi = (2 pi f)^2 M phi
    lam = (2 * np.pi * r.f_hz) ** 2
    resid = K @ phi - (M @ phi) * lam
    assert np.abs(resid).max() < 1e-7 * np.abs(K @ phi).max()


def test_convergence_helper_matches_modes_by_family_and_order():
    conv = solid_convergence(L, B, T0, UNDERCUT, WOOD, count=5, mesh=SolidMesh(6, 1, 2))
    assert conv.fine.mesh == SolidMesh(9, 2, 3)
    assert conv.change_cents.shape == (5,)
    for m, d in zip(conv.coarse.modes, conv.change_cents, strict=True):
        f_fine = next(n.f_hz for n in conv.fine.modes if (n.family, n.order) == (m.family, m.order))
        assert d == pytest.approx(1200 * np.log2(m.f_hz / f_fine))
    assert conv.max_change_cents == pytest.approx(np.max(np.abs(conv.change_cents)))


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [
        ({"length": 0.0}, "length"),
        ({"width": -0.05}, "width"),
        ({"blank_thickness": float("nan")}, "blank_thickness"),
        ({"thickness": PiecewiseLinear([0.0, 0.4], [0.02, -0.001])}, "thickness"),
        ({"thickness": constant(0.03)}, "exceeds blank_thickness"),
        ({"count": 0}, "count"),
        ({"fmax_hz": -5.0}, "fmax_hz"),
        ({"material": "maple"}, "material"),
    ],
)
def test_input_validation(kwargs, match):
    args = dict(length=L, width=B, blank_thickness=T0, thickness=UNDERCUT, material=WOOD)
    args.update(kwargs)
    with pytest.raises(ValueError, match=match):
        solid_modes(**args, mesh=SolidMesh(4, 1, 1))


@pytest.mark.parametrize(
    ("kwargs", "match"),
    [({"nx": 0}, "nx"), ({"ny": 2.5}, "ny"), ({"nz": True}, "nz"), ({"grade_x": 0.5}, "grade_x")],
)
def test_mesh_validation(kwargs, match):
    with pytest.raises(ValueError, match=match):
        SolidMesh(**kwargs)


# ---------------------------------------------------------------------------------------------
# Convergence (the acceptance figures are printed by benchmarks/solid.py)
@pytest.mark.slow
def test_undercut_bar_converges():
    # a mesh and its 1.5x refinement: every mode of the 400 mm undercut bar below 4 kHz moves by
    # less than 0.1 % (1.7 cents); measured max 0.75 cent (bending 2), ~90 s on 2 busy cores
    conv = solid_convergence(L, B, T0, UNDERCUT, WOOD, count=11, mesh=SolidMesh(48, 3, 6))
    assert conv.max_change_cents < 1200 * np.log2(1.001)
    assert np.all(conv.change_cents > -0.05)  # refinement lowers (or keeps) every frequency
