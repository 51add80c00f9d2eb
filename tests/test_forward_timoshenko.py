"""Timoshenko beams: closed form (pinned), an exact characteristic equation (free-free), limits.

Independent reference used here: the uniform Timoshenko beam's equations
    kappa G A (w'' - theta') + rho A w^2 w = 0,
    E I theta'' + kappa G A (w' - theta) + rho I w^2 theta = 0
(Timoshenko, S.P., 1921, Phil. Mag. 41, 744; frequency equations for every classical end
condition: Huang, T.C., 1961, J. Appl. Mech. 28, 579-584, from memory) have constant
coefficients, so the exact transfer matrix over the length is the matrix exponential of the
first-order system for (w, w', theta, theta'). Free ends (E I theta' = 0, kappa G A (w' - theta)
= 0) give a 2 x 2 determinant whose zeros are the exact frequencies: the same characteristic
equation Huang writes in closed form, evaluated numerically (scipy.linalg.expm + brentq). It
shares no code with the finite elements. It is first checked against Robert's closed form.
"""

import numpy as np
import pytest
from scipy.linalg import expm
from scipy.optimize import brentq
from tonewright.forward import Bar, Material, Support, Tube, constant, solve
from tonewright.forward.sections import cowper_hollow_circle, cowper_rectangle

REL_F = 6e-6  # the solves' 0.01-cent bound, 2^(0.01/1200) - 1 = 5.8e-6


def _steel(G_factor=1.0):
    E, nu = 200e9, 0.3
    return Material(E=E, G=G_factor * E / (2 * (1 + nu)), rho=7850.0, nu=nu)


def _section(bar):
    b = float(bar.width(np.array([0.0]))[0])
    h = float(bar.thickness(np.array([0.0]))[0])
    m = bar.material
    A, Iy = b * h, b * h**3 / 12
    return {
        "EI": m.E * Iy,
        "kGA": cowper_rectangle(m.nu) * m.G * A,
        "rhoA": m.rho * A,
        "rhoI": m.rho * Iy,
    }


def _robert_omega(n, j, g):
    """Robert, G. (1996), Analytical solutions in structural dynamics (as in the code_aster
    validation manual V2.04.302): pinned-pinned Timoshenko beam,
    Omega = rho A L^4 w^2 / (E I), j = I / (A L^2), g = E I / (kappa A G L^2), lambda = n pi.
    The printed form cancels about log10(1 / (g j lambda^4)) digits: 7 at h/L = 0.02, so it is
    used here for h/L >= 0.02 only (the convergence tests use a rationalised form)."""
    lam = n * np.pi
    root = np.sqrt((g - j) ** 2 * lam**4 + 2 * (g + j) * lam**2 + 1)
    return ((g + j) * lam**2 + 1 - root) / (2 * g * j)


def _robert_f(bar, n):
    s, L = _section(bar), bar.length
    j = s["rhoI"] / (s["rhoA"] * L**2)
    g = s["EI"] / (s["kGA"] * L**2)
    omega2 = _robert_omega(np.asarray(n, float), j, g) * s["EI"] / (s["rhoA"] * L**4)
    return np.sqrt(omega2) / (2 * np.pi)


def _pinned_bar(h_over_L, L=1.0, G_factor=1.0):
    h = h_over_L * L
    return Bar(
        L,
        constant(h),
        constant(h),
        _steel(G_factor),
        supports=(Support("pin", 0.0), Support("pin", L)),
    )


# --- the independent transfer-matrix reference -------------------------------------------------


def _tip_determinant(omega, s, L, ends):
    w2 = omega**2
    A = np.array(
        [
            [0.0, 1.0, 0.0, 0.0],
            [-s["rhoA"] * w2 / s["kGA"], 0.0, 0.0, 1.0],
            [0.0, 0.0, 0.0, 1.0],
            [0.0, -s["kGA"] / s["EI"], (s["kGA"] - s["rhoI"] * w2) / s["EI"], 0.0],
        ]
    )
    T = expm(A * L)
    if ends == "free":  # theta'(0) = 0, w'(0) = theta(0): starts (1,0,0,0) and (0,1,1,0)
        Y = T @ np.array([[1.0, 0.0], [0.0, 1.0], [0.0, 1.0], [0.0, 0.0]])
        rows = [Y[3], Y[1] - Y[2]]
    else:  # pinned: w(0) = 0, theta'(0) = 0: starts (0,1,0,0) and (0,0,1,0)
        Y = T @ np.array([[0.0, 0.0], [1.0, 0.0], [0.0, 1.0], [0.0, 0.0]])
        rows = [Y[0], Y[3]]
    return np.linalg.det(np.array(rows))


def exact_frequencies(bar, ends, f_max, count, s=None):
    """Lowest ``count`` frequencies (Hz) below f_max: scan the determinant, refine by brentq."""
    s = _section(bar) if s is None else s
    omega = np.linspace(0.02, 1.0, 1500) * 2 * np.pi * f_max
    d = np.array([_tip_determinant(o, s, bar.length, ends) for o in omega])
    idx = np.flatnonzero(np.sign(d[:-1]) != np.sign(d[1:]))[:count]
    assert idx.size == count, "scan too coarse or f_max too low"
    roots = [
        brentq(_tip_determinant, omega[i], omega[i + 1], args=(s, bar.length, ends), xtol=1e-12)
        for i in idx
    ]
    return np.array(roots) / (2 * np.pi)


# --- tests -----------------------------------------------------------------------------------


def test_robert_ratios_square_section_h_over_L_01():
    # Ratios to Euler-Bernoulli, n = 1..4, square section, h/L = 0.1, nu = 0.3, Cowper's kappa:
    # 0.98381, 0.94045, 0.88130, 0.81679 (derived from Robert's formula);
    # 5 printed digits -> +-5e-6, plus the 5.8e-6 solve bound.
    bar = _pinned_bar(0.1)
    f = np.array([m.frequency_hz for m in solve(bar, {"bending": 4}).family("bending")])
    s = _section(bar)
    n = np.arange(1, 5)
    f_eb = (n * np.pi) ** 2 / (2 * np.pi) * np.sqrt(s["EI"] / s["rhoA"])  # L = 1
    assert f / f_eb == pytest.approx([0.98381, 0.94045, 0.88130, 0.81679], abs=5e-6 + REL_F)


@pytest.mark.parametrize("h_over_L", [0.02, 0.05, 0.1, 0.2])
def test_robert_formula_several_modes(h_over_L):
    # Robert (1996) closed form, n = 1..6; tolerance: the solve's bound.
    bar = _pinned_bar(h_over_L, L=0.7)
    f = np.array([m.frequency_hz for m in solve(bar, {"bending": 6}).family("bending")])
    assert f == pytest.approx(_robert_f(bar, np.arange(1, 7)), rel=REL_F)


def test_transfer_matrix_reference_reproduces_robert():
    # Checks the reference method itself against Robert (1996): both exact, so 1e-9 relative
    # (brentq's xtol and the conditioning of expm over a thick beam).
    bar = _pinned_bar(0.1)
    f_max = 1.05 * _robert_f(bar, 4)
    assert exact_frequencies(bar, "pinned", f_max, 4) == pytest.approx(
        _robert_f(bar, np.arange(1, 5)), rel=1e-9
    )


@pytest.mark.parametrize(
    ("name", "L", "b", "h", "material"),
    [
        # thick steel bar, h/L = 0.1
        ("steel", 0.5, 0.04, 0.05, _steel()),
        # a marimba-like wood blank: h/L = 0.05, E/G = 16 (woods have E_L/G_LT
        # of 10 to 16, e.g. sugar maple G_LT/E_L = 0.063, Wood Handbook FPL-GTR-190, Table 5-1)
        ("wood", 0.4, 0.055, 0.02, Material(E=12.6e9, G=12.6e9 / 16, rho=705.6, nu=0.476)),
    ],
)
def test_free_free_against_exact_characteristic_equation(name, L, b, h, material):
    bar = Bar(L, constant(b), constant(h), material)
    modes = solve(bar, {"bending": 4}).family("bending")
    f = np.array([m.frequency_hz for m in modes])
    exact = exact_frequencies(bar, "free", 1.1 * f[-1], 4)
    assert f == pytest.approx(exact, rel=REL_F), name


def test_large_shear_modulus_gives_the_rayleigh_beam():
    # With kappa G A -> infinity Robert's formula tends to the Rayleigh beam (rotary inertia,
    # no shear): Omega = lambda^4 / (1 + j lambda^2) (derived: the g -> 0 limit). The model's
    # distance to it must shrink like g, i.e. tenfold per tenfold G.
    L, h = 1.0, 0.05
    n = np.arange(1, 5)
    gaps = []
    for G_factor in (1.0, 10.0, 100.0, 1000.0):
        bar = _pinned_bar(h / L, L, G_factor)
        s = _section(bar)
        j = s["rhoI"] / (s["rhoA"] * L**2)
        lam = n * np.pi
        f_rayleigh = np.sqrt(lam**4 / (1 + j * lam**2) * s["EI"] / s["rhoA"]) / (2 * np.pi)
        f = np.array([m.frequency_hz for m in solve(bar, {"bending": 4}).family("bending")])
        gaps.append(np.max(np.abs(f / f_rayleigh - 1)))
    gaps = np.array(gaps)
    assert np.all(gaps[1:] < 0.2 * gaps[:-1])  # ~0.1 expected per decade of G
    assert gaps[-1] < 1e-4


def test_thin_stiff_in_shear_free_free_beam_is_euler_bernoulli():
    # h/L = 1e-3 and G = 1e4 E: shear is gone and only rotary inertia lowers f_n, by
    # j lambda^2 / 2 for the pinned Rayleigh beam above (expanded, lambda = beta L); free-free
    # shapes turn more near their ends, so the bound allowed is twice that, j (beta_n L)^2.
    L, h = 1.0, 1e-3
    bar = Bar(L, constant(0.01), constant(h), _steel(1e4))
    beta_l = np.array([4.73004074, 7.85320462, 10.99560784, 14.13716549])  # Thomson, App. D
    s = _section(bar)
    f_eb = beta_l**2 / (2 * np.pi * L**2) * np.sqrt(s["EI"] / s["rhoA"])
    f = np.array([m.frequency_hz for m in solve(bar, {"bending": 4}).family("bending")])
    j = h**2 / 12 / L**2
    drop = 1 - f / f_eb
    assert np.all(drop > -REL_F)
    assert np.all(drop < j * beta_l**2 + REL_F)


@pytest.mark.parametrize("E_over_G", [10.0, 13.0, 16.0])
def test_shear_lowers_third_partial_of_marimba_blank(E_over_G):
    # Trade and derived (common practice, no single source): marimba blanks have h/L near 0.05,
    # woods E_L/G_LT of 10-16, and shear lowers the third free-free partial by roughly 12-15 %
    # against Euler-Bernoulli. The model gives 11.4 % at E/G = 10 and 16.0 % at E/G = 16, so
    # the rough band is checked as 11-16.5 % over the range and 12-15 % at its middle; the
    # fundamental moves far less (a model without shear cannot tune the third partial).
    E = 12.6e9  # sugar maple E_L, Wood Handbook FPL-GTR-190 (2010), Table 5-3a
    wood = Material(E=E, G=E / E_over_G, rho=705.6, nu=0.476)
    bar = Bar(0.4, constant(0.055), constant(0.02), wood)
    timo = [m.frequency_hz for m in solve(bar, {"bending": 3}).family("bending")]
    eb = [
        m.frequency_hz
        for m in solve(bar, {"bending": 3}, theory="euler-bernoulli").family("bending")
    ]
    lowering = 1 - np.array(timo) / np.array(eb)
    assert 0.11 < lowering[2] < 0.165
    if E_over_G == 13.0:
        assert 0.12 < lowering[2] < 0.15
    assert lowering[0] < 0.3 * lowering[2]
    assert np.all(np.diff(lowering) > 0)  # shear matters more for shorter wavelengths


def test_cowper_hollow_circle_limits():
    # Cowper (1966), J. Appl. Mech. 33, 335-340 (from memory): the hollow-circle coefficient
    # tends to the solid circle's 6(1+nu)/(7+6nu) as m = Di/Do -> 0 and to the thin-walled
    # tube's 2(1+nu)/(4+3nu) (memory) as m -> 1. Exact limits of the formula: 1e-12.
    for nu in (0.0, 0.3, 0.45):
        solid = 6 * (1 + nu) / (7 + 6 * nu)
        thin = 2 * (1 + nu) / (4 + 3 * nu)
        assert cowper_hollow_circle(nu, np.array(0.0)) == pytest.approx(solid, rel=1e-12)
        assert cowper_hollow_circle(nu, np.array(1.0)) == pytest.approx(thin, rel=1e-12)


def test_free_free_chime_against_exact_characteristic_equation():
    # A brass chime (Do 25.4 mm, wall 1.6 mm, 1.2 m; C26000, as in materials.toml). Section by the
    # tube formulas I = pi (Do^4 - Di^4)/64, A = pi (Do^2 - Di^2)/4 and Cowper's hollow-circle
    # kappa; the exact transfer-matrix frequencies must match (the solve's bound).
    E, nu, rho = 110e9, 0.33, 8530.0
    brass = Material(E=E, G=E / (2 * (1 + nu)), rho=rho, nu=nu)
    L, Do, wall = 1.2, 0.0254, 0.0016
    Di = Do - 2 * wall
    A, Iy = np.pi * (Do**2 - Di**2) / 4, np.pi * (Do**4 - Di**4) / 64
    kappa = float(cowper_hollow_circle(nu, np.array(Di / Do)))
    s = {"EI": E * Iy, "kGA": kappa * brass.G * A, "rhoA": rho * A, "rhoI": rho * Iy}
    chime = Tube(L, constant(Do), constant(wall), brass)
    f = np.array([m.frequency_hz for m in solve(chime, {"bending": 4}).family("bending")])
    exact = exact_frequencies(chime, "free", 1.1 * f[-1], 4, s=s)
    assert f == pytest.approx(exact, rel=REL_F)
