"""Strings: the harmonic series, a light touch, stiffness (Fletcher, Young), a point mass."""

import numpy as np
import pytest
from scipy.optimize import brentq
from tonewright.forward import String, Support, constant, solve

REL_F = 6e-6  # the solves' 0.01-cent bound, 2^(0.01/1200) - 1 = 5.8e-6

# Steel music wire (structural steel design values, ANSI/AISC 360-16, from memory): E = 200 GPa,
# rho = 7850 kg/m^3.
E_STEEL, RHO_STEEL = 200e9, 7850.0


def _pins(L):
    return (Support("pin", 0.0), Support("pin", L))


def _ideal(L=0.65, T=70.0, mu=4e-4, extra=()):
    return String(L, T, constant(mu), supports=(*_pins(L), *extra))


def _f0(s):
    """Fundamental of the ideal string, (1 / 2L) sqrt(T / mu)."""
    return np.sqrt(s.tension / float(s.linear_density(np.array([0.0]))[0])) / (2 * s.length)


def test_ideal_string_harmonic_series():
    # f_n = n / (2L) sqrt(T / mu), the harmonic series of the ideal string (Fletcher, N.H. &
    # Rossing, T.D. (1998), The Physics of Musical Instruments, 2nd ed., ch. 2; from memory).
    s = _ideal()
    f = [m.frequency_hz for m in solve(s, {"transverse": 8}).modes]
    assert f == pytest.approx(np.arange(1, 9) * _f0(s), rel=REL_F)


def test_ideal_string_nodes():
    # sin(n pi x / L): nodes at k L / n (closed form). 1e-6 L: mode shapes converge like the
    # square root of the eigenvalue error, so nodes are good to about 1e-7 L at 0.01 cent.
    s = _ideal()
    for m in solve(s, {"transverse": 5}).modes:
        expected = np.arange(1, m.order) * s.length / m.order
        assert m.nodes_m == pytest.approx(expected, abs=1e-6 * s.length)


def test_light_touch_at_the_middle_leaves_only_even_harmonics():
    # Trade, common practice, no source: touching a string lightly at its middle (the harmonic
    # at the 12th fret) silences the odd modes and leaves 2 f1, 4 f1, ... Held at L/2 the two
    # halves ring alone, so each even harmonic appears twice (once per half).
    s = _ideal()
    touched = _ideal(extra=(Support("touch", s.length / 2),))
    res = solve(touched, {"transverse": 6})
    assert res.converged
    ratios = np.array([m.frequency_hz for m in res.modes]) / _f0(s)
    assert ratios == pytest.approx([2, 2, 4, 4, 6, 6], rel=REL_F)
    # nothing anywhere near an odd harmonic
    assert np.min(np.abs(ratios[:, None] - np.array([1.0, 3.0, 5.0]))) > 0.9


def _stiff(L=0.5, T=600.0, d=1e-3, supports=None):
    mu = RHO_STEEL * np.pi * d**2 / 4
    EI = E_STEEL * np.pi * d**4 / 64
    supports = _pins(L) if supports is None else supports
    return String(L, T, constant(mu), constant(EI), supports=supports)


def _fletcher_B(s, d=1e-3):
    # B = pi^3 E d^4 / (64 T L^2): Fletcher, H. (1964), "Normal vibration frequencies of a stiff
    # piano string", J. Acoust. Soc. Am. 36, 203-209 (citation details from memory).
    return np.pi**3 * E_STEEL * d**4 / (64 * s.tension * s.length**2)


def test_stiff_string_pinned_ends_fletcher():
    # Pinned (hinged) ends: f_n = n F0 sqrt(1 + B n^2) exactly (Fletcher 1964; derived: w = sin
    # (n pi x / L) solves EI w'''' - T w'' = mu w^2 w), where F0 = (1/2L) sqrt(T/mu) is the
    # fundamental of the same string WITHOUT stiffness. The real fundamental is therefore
    # f1 = F0 sqrt(1 + B); writing f_n = n f1 sqrt(1 + B n^2) with the measured f1 is off by
    # sqrt(1 + B) (here 0.56 cent) and is checked below NOT to be what the model does.
    s = _stiff()
    B = _fletcher_B(s)
    n = np.arange(1, 9)
    f = np.array([m.frequency_hz for m in solve(s, {"transverse": 8}).modes])
    F0 = _f0(s)
    assert f == pytest.approx(n * F0 * np.sqrt(1 + B * n**2), rel=REL_F)
    wrong = n * f[0] * np.sqrt(1 + B * n**2)
    assert np.all(np.abs(1200 * np.log2(f[1:] / wrong[1:])) > 0.5)


def test_stiff_string_young_inharmonicity():
    # Young, R.W. (1952), "Inharmonicity of plain wire piano strings", J. Acoust. Soc. Am. 24(3)
    # (details from memory): cents = 3.4e13 n^2 d^2 / (f^2 l^4), d and l in cm,
    # steel, f the fundamental, cents measured from n F0. The constant has 2 digits (+-1.5 %) and
    # the formula is the small-B limit (B n^2 / 2 < 0.3 % here): tolerance 2 %.
    s = _stiff()
    f = np.array([m.frequency_hz for m in solve(s, {"transverse": 3}).modes])
    n = np.arange(1, 4)
    cents = 1200 * np.log2(f / (n * _f0(s)))
    young = 3.4e13 * n**2 * (0.1) ** 2 / (f[0] ** 2 * (s.length * 100) ** 4)
    assert cents == pytest.approx(young, rel=0.02)


def _clamped_exact(s, count):
    """Exact clamped-clamped stiff string (derived here): on x in [-L/2, L/2], with
    k1^2, -k2^2 the roots of EI s^4 - T s^2 - mu w^2 = 0, a = k2 L/2, b = k1 L/2,
    symmetric modes: k1 cos a tanh b + k2 sin a = 0; antisymmetric: k1 sin a - k2 cos a tanh b = 0.
    """
    EI = float(s.bending_stiffness(np.array([0.0]))[0])
    mu = float(s.linear_density(np.array([0.0]))[0])
    T, L = s.tension, s.length

    def parts(omega):
        r = np.sqrt(T * T + 4 * EI * mu * omega**2)
        k1, k2 = np.sqrt((T + r) / (2 * EI)), np.sqrt((r - T) / (2 * EI))
        a, b = k2 * L / 2, k1 * L / 2
        return k1, k2, a, np.tanh(b)

    def sym(omega):
        k1, k2, a, tb = parts(omega)
        return k1 * np.cos(a) * tb + k2 * np.sin(a)

    def anti(omega):
        k1, k2, a, tb = parts(omega)
        return k1 * np.sin(a) - k2 * np.cos(a) * tb

    omega = np.linspace(0.2, count + 1.0, 4000) * 2 * np.pi * _f0(s)
    roots = []
    for g in (sym, anti):
        v = g(omega)
        for i in np.flatnonzero(np.sign(v[:-1]) != np.sign(v[1:])):
            roots.append(brentq(g, omega[i], omega[i + 1], xtol=1e-12))
    return np.sort(roots)[:count] / (2 * np.pi)


def test_stiff_string_clamped_ends():
    L = 0.5
    s = _stiff(L=L, supports=(Support("clamp", 0.0), Support("clamp", L)))
    f = np.array([m.frequency_hz for m in solve(s, {"transverse": 8}).modes])
    # exact characteristic equations (derived above): the solve's bound
    assert f == pytest.approx(_clamped_exact(s, 8), rel=REL_F)
    # Fletcher (1964) clamped-end approximation (memory):
    #   f_n ~ n F0 sqrt(1 + B n^2) (1 + 2 sqrt(B) / pi + 4 B / pi^2).
    # It drops terms of higher order in sqrt(B); 1e-4 is 150 times smaller than the end
    # correction 2 sqrt(B) / pi = 1.6e-2 being checked (B = 6.5e-4, n <= 8).
    B = _fletcher_B(s)
    n = np.arange(1, 9)
    approx = n * _f0(s) * np.sqrt(1 + B * n**2) * (1 + 2 * np.sqrt(B) / np.pi + 4 * B / np.pi**2)
    assert f == pytest.approx(approx, rel=1e-4)


@pytest.mark.parametrize("alpha", [0.1, 1.0, 10.0])
def test_point_mass_at_the_centre(alpha):
    # A point mass M = alpha mu L at the centre (derived): symmetric modes obey
    # cot x = alpha x with x = k L / 2, so f / F0 = 2 x / pi; antisymmetric modes (a node at the
    # mass) are unchanged at 2 F0, 4 F0.
    s = _ideal()
    mu = float(s.linear_density(np.array([0.0]))[0])
    loaded = _ideal(extra=(Support("mass", s.length / 2, alpha * mu * s.length),))
    res = solve(loaded, {"transverse": 4})
    assert res.converged
    ratios = np.array([m.frequency_hz for m in res.modes]) / _f0(s)

    def g(x):
        return np.cos(x) - alpha * x * np.sin(x)  # cot x = alpha x, times sin x

    x1 = brentq(g, 1e-9, np.pi / 2)
    x2 = brentq(g, np.pi, 1.5 * np.pi)
    expected = np.sort([2 * x1 / np.pi, 2.0, 2 * x2 / np.pi, 4.0])
    assert ratios == pytest.approx(expected, rel=REL_F)
    if alpha == 1.0:
        # f1 / f1_unloaded = 0.547705 (derived from cot x = x, 6 printed digits)
        assert ratios[0] == pytest.approx(0.547705, abs=5e-7 + REL_F)
