"""Convergence: h-rates of every element family, no shear locking, and the accuracy control.

A conforming Ritz discretisation of a smooth eigenproblem converges in the eigenvalue at twice
the rate of the energy norm: |lam_h - lam| ~ h^(2 (p - m + 1)) for shape functions of degree p
and an energy with derivatives of order m (Strang, G. & Fix, G.J., 1973, *An Analysis of the
Finite Element Method*, ch. 6, Theorem 6.1). Hence h^(2p) for the C0 families (axial, torsion:
m = 1) and h^(2(p-1)) for the C1 Euler-Bernoulli element (m = 2); for the cubic Hermite beam
that is slope 4, the slope scikit-fem's test_convergence_h2.py expects (3.9-4.1).
"""

import numpy as np
import pytest
from scipy.optimize import brentq
from threadpoolctl import threadpool_limits
from tonewright.forward import Bar, Material, Support, constant, solve
from tonewright.forward.modal import assemble_family, discretise, lowest_modes, section_coefficients
from tonewright.forward.sections import cowper_rectangle

from tonewright.partfile import load_part

STEEL = Material(E=200e9, G=200e9 / 2.6, rho=7850.0, nu=0.3)
ROOT = __import__("pathlib").Path(__file__).resolve().parents[1]


@pytest.fixture(autouse=True, scope="module")
def _one_blas_thread():
    # Small dense eigenproblems: extra BLAS threads only contend with other work here.
    with threadpool_limits(1):
        yield


def _lam(part, family, elements, degree, theory="timoshenko", count=4):
    disc = discretise(part, elements=elements, degree=degree, theory=theory)
    coef = section_coefficients(part, disc.quad.x)
    return lowest_modes(assemble_family(part, disc, family, coef), count)[0]


def _slope(elements, errors):
    """Least-squares slope of log(error) against log(h), h = L / elements."""
    return np.polyfit(np.log(1.0 / np.asarray(elements, float)), np.log(errors), 1)[0]


def _free_free_lam(bar, count):
    # Exact: cos x cosh x = 1 (Thomson, App. D; roots derived here), lam = (beta/L)^4 EI/rhoA.
    x = np.arange(1.0, 5.0 * count, 0.05)
    v = np.cos(x) * np.cosh(x) - 1
    idx = np.flatnonzero(np.sign(v[:-1]) != np.sign(v[1:]))[:count]
    beta_l = np.array([brentq(lambda t: np.cos(t) * np.cosh(t) - 1, x[i], x[i + 1]) for i in idx])
    h = float(bar.thickness(np.array([0.0]))[0])
    return (beta_l / bar.length) ** 4 * STEEL.E * h**2 / 12 / STEEL.rho


@pytest.mark.parametrize(("degree", "rate"), [(3, 4), (4, 6)])
def test_euler_bernoulli_c1_rate(degree, rate):
    bar = Bar(1.0, constant(0.02), constant(0.01), STEEL)
    exact = _free_free_lam(bar, 3)
    elements = [8, 16, 32, 64] if degree == 3 else [4, 8, 16]
    err = [(_lam(bar, "bending", n, degree, "euler-bernoulli", 3) / exact - 1)[2] for n in elements]
    assert np.all(np.array(err) > 0)  # Ritz: from above
    # rate 2 (p - 1); +-0.15 covers the pre-asymptotic bend of the coarsest mesh
    assert _slope(elements, err) == pytest.approx(rate, abs=0.15)


@pytest.mark.parametrize(("family", "degree"), [("torsion", 2), ("axial", 2), ("axial", 3)])
def test_c0_rate(family, degree):
    L = 1.0
    bar = Bar(L, constant(0.03), constant(0.01), STEEL)
    n = np.arange(1, 4)
    if family == "axial":  # f_n = n / (2L) sqrt(E / rho), free-free (closed form)
        exact = (n * np.pi / L) ** 2 * STEEL.E / STEEL.rho
    else:  # the model's own G J / (rho I_p) in the uniform closed form (torsion file checks J)
        c = section_coefficients(bar, np.array([0.0]))
        exact = (n * np.pi / L) ** 2 * c["GJ"][0] / c["rhoIp"][0]
    elements = [4, 8, 16, 32]
    err = [(_lam(bar, family, e, degree, count=3) / exact - 1)[2] for e in elements]
    assert np.all(np.array(err) > 0)
    assert _slope(elements, err) == pytest.approx(2 * degree, abs=0.15)  # as above


def _robert_lam(bar, count):
    """Pinned Timoshenko beam, Robert, G. (1996) closed form, rationalised:
    Omega = 2 lambda^4 / (P + sqrt(P^2 - 4 g j lambda^4)), P = (g + j) lambda^2 + 1 (the same
    value, without the cancellation that ruins the printed form for thin beams)."""
    b = float(bar.width(np.array([0.0]))[0])
    h = float(bar.thickness(np.array([0.0]))[0])
    L, m = bar.length, bar.material
    A, Iy = b * h, b * h**3 / 12
    j = Iy / (A * L**2)
    g = m.E * Iy / (cowper_rectangle(m.nu) * A * m.G * L**2)
    lam = np.arange(1, count + 1) * np.pi
    P = (g + j) * lam**2 + 1
    omega = 2 * lam**4 / (P + np.sqrt(P**2 - 4 * g * j * lam**4))
    return omega * m.E * Iy / (m.rho * A * L**4)


def _pinned(h_over_L, L=1.0):
    return Bar(
        L,
        constant(0.05),
        constant(h_over_L * L),
        STEEL,
        supports=(Support("pin", 0.0), Support("pin", L)),
    )


def test_timoshenko_rate():
    # deflection of degree p + 1, rotation of degree p: eigenvalue error ~ h^(2p)
    bar = _pinned(0.1)
    exact = _robert_lam(bar, 3)
    elements = [4, 8, 16, 32]
    err = [(_lam(bar, "bending", e, 2, count=3) / exact - 1)[2] for e in elements]
    assert _slope(elements, err) == pytest.approx(4, abs=0.15)


@pytest.mark.parametrize(("elements", "degree"), [(4, 1), (2, 2), (4, 2), (2, 3)])
def test_no_shear_locking(elements, degree):
    # A locking element's error grows like (L/h)^2 as the beam thins; here the error on a
    # coarse mesh must stay the same from h/L = 0.1 to 1e-3 (within 30 %, the modes' mix of
    # shear and bending differs a little) and the thin beam reaches the Euler-Bernoulli limit.
    errors = []
    for h_over_L in (0.1, 1e-2, 1e-3):
        bar = _pinned(h_over_L)
        errors.append(_lam(bar, "bending", elements, degree, count=2) / _robert_lam(bar, 2) - 1)
    errors = np.array(errors)
    assert np.all(errors > -1e-12)
    assert np.all(errors[2] <= 1.3 * errors[0] + 1e-12)
    # Thin beam against Euler-Bernoulli (pinned: lam = (n pi / L)^4 EI / rhoA), with the
    # coarse-mesh error measured at h/L = 0.1 as allowance.
    thin = _pinned(1e-3)
    lam_eb = (np.arange(1, 3) * np.pi) ** 4 * STEEL.E * 1e-6 / 12 / STEEL.rho
    ratio = _lam(thin, "bending", elements, degree, count=2) / lam_eb
    assert np.all(np.abs(ratio - 1) <= 1.3 * errors[0] + 1e-5)


@pytest.fixture(scope="module")
def demo_bar():
    part_file, base = load_part(ROOT / "examples" / "workshop-f4-bar.toml")
    return part_file.to_part(base)


COUNTS = {"bending": 4, "lateral": 1, "torsion": 1, "axial": 1}


@pytest.mark.parametrize("theory", ["timoshenko", "euler-bernoulli"])
def test_accuracy_control_on_the_undercut_demo_bar(demo_bar, theory):
    # The demo bar as in the file: undercut, two drilled holes, two cords. Reference: 32
    # elements of degree 12 (about 30 x the solve's unknowns); it agrees with 16 elements of
    # degree 12 to 2e-5 cent, which is therefore the reference's own uncertainty here.
    res = solve(demo_bar, COUNTS, tol_cents=0.01, theory=theory)
    assert res.converged
    ref = {f: _lam(demo_bar, f, 32, 12, theory, k) for f, k in COUNTS.items()}
    check = {f: _lam(demo_bar, f, 16, 12, theory, k) for f, k in COUNTS.items()}
    noise = 2e-5
    for family, lam_ref in ref.items():
        assert np.all(600 * np.abs(np.log2(check[family] / lam_ref)) < noise)
        for mode, lam in zip(res.family(family), lam_ref, strict=True):
            true_cents = abs(1200 * np.log2(mode.frequency_hz / (np.sqrt(lam) / (2 * np.pi))))
            assert true_cents < 0.01
            assert true_cents <= abs(mode.error_cents) + noise  # the estimate bounds the error
