"""Torsion and axial modes of uniform bars, and bending of round tubes, against closed forms."""

import numpy as np
import pytest
from tonewright.forward import Bar, Material, Support, Tube, constant, solve

REL_F = 6e-6  # the solves' 0.01-cent bound, 2^(0.01/1200) - 1 = 5.8e-6

# Aluminium 6061-T6, Aluminum Association typical values (Aluminum Standards and Data; from
# memory).
ALUMINIUM = Material(E=68.9e9, G=26e9, rho=2700.0, nu=0.33)
# Cartridge brass C26000 (E 110-117 GPa, nu 0.31-0.34; Copper Development Association data,
# from memory); isotropic G.
BRASS = Material(E=110e9, G=110e9 / (2 * 1.33), rho=8530.0, nu=0.33)


@pytest.mark.parametrize(
    ("b_over_h", "k_table"),
    # Timoshenko & Goodier, Theory of Elasticity, torsion of rectangular bars, J = k b h^3
    # printed to 3 digits.
    [(1.0, 0.141), (2.0, 0.229), (2.5, 0.249), (4.0, 0.281)],
)
def test_torsion_of_rectangular_bar(b_over_h, k_table):
    L, h = 0.35, 0.012
    b = b_over_h * h
    bar = Bar(L, constant(b), constant(h), ALUMINIUM)
    modes = solve(bar, {"torsion": 3}).family("torsion")
    # Uniform free-free torsion: f_n = (n / 2L) sqrt(G J / (rho I_p)), I_p = b h (b^2 + h^2)/12
    # (Saint-Venant torsion, standard). Solve for the k the model implies and compare with the
    # table:
    # half a unit in the 3rd digit, 5e-4 (the model's J is the series, converged far beyond).
    Ip = b * h * (b * b + h * h) / 12
    for m in modes:
        k_model = (
            (2 * L * m.frequency_hz / m.order) ** 2 * ALUMINIUM.rho * Ip / (ALUMINIUM.G * b * h**3)
        )
        assert k_model == pytest.approx(k_table, abs=5e-4)
    f = np.array([m.frequency_hz for m in modes])
    assert f / f[0] == pytest.approx([1.0, 2.0, 3.0], rel=2 * REL_F)  # harmonic series
    # the twisting mode's node of a free-free bar is at the middle (symmetry)
    assert modes[0].nodes_m == pytest.approx((L / 2,), abs=1e-6 * L)  # shape accuracy


def test_torsion_constant_does_not_depend_on_which_side_is_wider():
    # J of a b x h rectangle is symmetric in b and h (Timoshenko & Goodier, b >= h by
    # convention); a bar standing on its edge twists at the same frequency (solve bound x 2).
    flat = Bar(0.3, constant(0.04), constant(0.01), ALUMINIUM)
    edge = Bar(0.3, constant(0.01), constant(0.04), ALUMINIUM)
    f_flat = solve(flat, {"torsion": 1}).frequency("torsion", 1)
    f_edge = solve(edge, {"torsion": 1}).frequency("torsion", 1)
    assert f_edge == pytest.approx(f_flat, rel=2 * REL_F)


def test_axial_free_free():
    # f_n = n / (2L) sqrt(E / rho): the longitudinal modes of a free rod (closed form).
    L = 0.5
    bar = Bar(L, constant(0.03), constant(0.01), ALUMINIUM)
    f = [m.frequency_hz for m in solve(bar, {"axial": 4}).family("axial")]
    c = np.sqrt(ALUMINIUM.E / ALUMINIUM.rho)
    assert f == pytest.approx(np.arange(1, 5) * c / (2 * L), rel=REL_F)


def test_axial_clamped_free():
    # f_n = (2n - 1) / (4L) sqrt(E / rho): a rod held at one end (closed form, quarter waves).
    L = 0.5
    bar = Bar(L, constant(0.03), constant(0.01), ALUMINIUM, supports=(Support("clamp", 0.0),))
    f = [m.frequency_hz for m in solve(bar, {"axial": 3}).family("axial")]
    c = np.sqrt(ALUMINIUM.E / ALUMINIUM.rho)
    assert f == pytest.approx((2 * np.arange(1, 4) - 1) * c / (4 * L), rel=REL_F)


def _chime(L=1.2, Do=0.0254, wall=0.0016):
    return Tube(L, constant(Do), constant(wall), BRASS)


def test_tube_bending_uses_I_not_polar_J():
    # A free tube follows the free-free beam with I = pi (Do^4 - Di^4)/64 and
    # A = pi (Do^2 - Di^2)/4 (standard section formulas); the frequent mistake uses J = 2 I,
    # which puts every partial sqrt(2) (600 cents) sharp.
    L, Do, wall = 1.2, 0.0254, 0.0016
    Di = Do - 2 * wall
    Iy = np.pi * (Do**4 - Di**4) / 64
    A = np.pi * (Do**2 - Di**2) / 4
    beta_l = np.array([4.73004074, 7.85320462, 10.99560784])  # Thomson, App. D, Table D.1
    f_right = beta_l**2 / (2 * np.pi * L**2) * np.sqrt(BRASS.E * Iy / (BRASS.rho * A))
    f_wrong = np.sqrt(2) * f_right
    res = solve(_chime(L, Do, wall), {"bending": 3}, theory="euler-bernoulli")
    f = np.array([m.frequency_hz for m in res.family("bending")])
    assert f == pytest.approx(f_right, rel=REL_F)
    assert np.all(np.abs(1200 * np.log2(f / f_wrong)) > 599)
    # Chimes hang at the first mode's node, 0.224 L (trade; 0.22416 L derived from the exact shape).
    nodes = np.array(res.family("bending")[0].nodes_m) / L
    assert nodes == pytest.approx([0.22416, 1 - 0.22416], abs=6e-6)


def test_tube_torsion_and_axial():
    # Circular tube: J = I_p, so f_n = n / (2L) sqrt(G / rho) for torsion and
    # n / (2L) sqrt(E / rho) axially (closed forms).
    L = 1.2
    res = solve(_chime(L), {"torsion": 2, "axial": 2})
    f_tor = [m.frequency_hz for m in res.family("torsion")]
    f_ax = [m.frequency_hz for m in res.family("axial")]
    n = np.array([1, 2])
    assert f_tor == pytest.approx(n / (2 * L) * np.sqrt(BRASS.G / BRASS.rho), rel=REL_F)
    assert f_ax == pytest.approx(n / (2 * L) * np.sqrt(BRASS.E / BRASS.rho), rel=REL_F)
