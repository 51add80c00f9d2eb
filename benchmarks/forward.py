"""Speed of ``forward.solve`` against a straightforward dense baseline.

Run from the repository root: ``python benchmarks/forward.py``.

Part: the 400 mm undercut F4 bar of ``examples/workshop-f4-bar.toml``, free-free (its cords and
holes removed, so that both methods model exactly the same bar). Wanted: 4 vertical bending
modes, the first torsion and the first lateral mode, each converged to 0.01 cent.

Ours: ``forward.solve(part, counts, tol_cents=0.01)`` (hierarchical p-elements, error estimated
from the degree p - 1 subspace, mesh bisected until every mode is within tolerance).

Baseline, written here the obvious way:
- a uniform mesh of N two-node elements; section properties (A, I_y, I_z, J, I_p) evaluated
  once per element at its midpoint;
- bending and lateral: the two-node Timoshenko element with interdependent interpolation
  (Friedman, Z. & Kosmatka, J.B., 1993, "An improved two-node Timoshenko beam finite element",
  Computers & Structures 47(3), 473-481): cubic deflection and quadratic rotation shape
  functions that solve the static homogeneous Timoshenko equations, with phi = 12 E I /
  (kappa G A l^2); stiffness and consistent mass integrated from those shape functions by
  4-point Gauss quadrature (exact for these polynomials; the stiffness is checked against the
  element's closed form below);
- torsion: linear elements, K_e = G J / l [[1, -1], [-1, 1]], M_e = rho I_p l / 6 [[2, 1], [1, 2]];
- a Python loop over elements scatters each element matrix into dense global matrices, solved
  with ``scipy.linalg.eigh`` (lowest eigenpairs by ``subset_by_index``); the rigid-body modes
  (2 in bending and lateral, 1 in torsion) are dropped;
- N doubles from 10 until every one of the six frequencies changes by less than 0.01 cent.

Its frequencies converge like h^2 (the element's shear strain is constant per element and the
torsion element is linear), so it needs a few thousand elements: expect about two minutes.

The design loop's forward solve (first table): what the optimizer needs per design is the
four bending eigenvalues on a fixed mesh, nothing else. Two routes, each on the mesh that puts
all four within 0.01 cent of a reference solve converged to 1e-4 cent:
- ours: ``forward.pattern.pattern_modes`` (cached assembly pattern, symmetric/antisymmetric
  split, eigenvalues only), plus the section coefficients at the quadrature points;
- scikit-fem (a general-purpose FE library, https://scikit-fem.readthedocs.io): the same
  Timoshenko energy with cubic Lagrange elements for both deflection and rotation
  (``ElementLinePp(3) * ElementLinePp(3)``), assembled with ``BilinearForm`` (coefficients
  evaluated at its quadrature points), free-free, solved by dense ``scipy.linalg.eigh``
  (lowest six, two rigid modes dropped). Its uniform mesh doubles from 10 elements (the
  profile stations stay on element boundaries).

BLAS is limited to one thread for both (``threadpoolctl``), so the comparison measures the
methods, not the machine's core count. ``--skip-baseline`` leaves out the two-minute
two-node baseline of the second table.
"""

from __future__ import annotations

import dataclasses
import statistics
import sys
import time
from collections.abc import Callable
from pathlib import Path
from typing import TypeVar

# Run as a script, this file's folder leads sys.path and its name would shadow the ``forward``
# package: drop that folder before importing it.
_HERE = Path(__file__).resolve().parent
sys.path[:] = [p for p in sys.path if Path(p or ".").resolve() != _HERE]

import numpy as np  # noqa: E402
import scipy.linalg  # noqa: E402
from threadpoolctl import threadpool_limits  # noqa: E402
from tonewright.forward import Bar, solve  # noqa: E402
from tonewright.forward.modal import discretise, section_coefficients  # noqa: E402
from tonewright.forward.pattern import family_pattern, pattern_modes  # noqa: E402
from tonewright.forward.sections import cowper_rectangle, rectangle_section  # noqa: E402

from tonewright.partfile import load_part  # noqa: E402

EXAMPLE = _HERE.parent / "examples" / "workshop-f4-bar.toml"
COUNTS = {"bending": 4, "torsion": 1, "lateral": 1}
TOL_CENTS = 0.01
OURS_REPEATS = 21
BASELINE_REPEATS = 1  # about 2 minutes and 1 GB: it ends on dense 5000 x 5000 eigenproblems

T = TypeVar("T")
FloatOrArray = float | np.ndarray

_GAUSS_X, _GAUSS_W = np.polynomial.legendre.leggauss(4)
_XI = 0.5 * (_GAUSS_X + 1.0)  # Gauss points on [0, 1]
_WXI = 0.5 * _GAUSS_W


def demo_bar() -> Bar:
    part_file, base = load_part(EXAMPLE)
    return dataclasses.replace(part_file.to_part(base), holes=(), supports=())


# ---------------------------------------------------------------------------------------------
# Baseline


def timoshenko_shapes(le: float, phi: float) -> tuple[np.ndarray, ...]:
    """Friedman & Kosmatka (1993) shape functions at the Gauss points, dofs (w1, t1, w2, t2).

    Returns deflection N_w, its x-derivative, rotation N_t and its x-derivative, each (4, 4).
    """
    x, c = _XI[:, None], 1.0 / (1.0 + phi)
    one, zero = np.ones_like(x), np.zeros_like(x)
    Nw = c * np.hstack(
        [
            2 * x**3 - 3 * x**2 - phi * x + 1 + phi,
            le * (x**3 - (2 + phi / 2) * x**2 + (1 + phi / 2) * x),
            -(2 * x**3 - 3 * x**2 - phi * x),
            le * (x**3 - (1 - phi / 2) * x**2 - phi / 2 * x),
        ]
    )
    dNw = (c / le) * np.hstack(
        [
            6 * x**2 - 6 * x - phi * one,
            le * (3 * x**2 - (4 + phi) * x + (1 + phi / 2) * one),
            -(6 * x**2 - 6 * x - phi * one),
            le * (3 * x**2 - (2 - phi) * x - phi / 2 * one),
        ]
    )
    Nt = c * np.hstack(
        [
            6 / le * (x**2 - x),
            3 * x**2 - (4 + phi) * x + (1 + phi) * one,
            -6 / le * (x**2 - x),
            3 * x**2 - (2 - phi) * x + zero,
        ]
    )
    dNt = (c / le) * np.hstack(
        [6 / le * (2 * x - 1), 6 * x - (4 + phi), -6 / le * (2 * x - 1), 6 * x - (2 - phi)]
    )
    return Nw, dNw, Nt, dNt


def timoshenko_element(
    le: float, EI: FloatOrArray, kGA: FloatOrArray, rhoA: FloatOrArray, rhoI: FloatOrArray
) -> tuple[np.ndarray, np.ndarray]:
    """Element stiffness and consistent mass of the interdependent-interpolation element.

    Coefficients: one value per element, or values at the 4 Gauss points (then the shape
    functions use phi of their mean).
    """
    EI, kGA, rhoA, rhoI = (np.broadcast_to(c, _XI.shape) for c in (EI, kGA, rhoA, rhoI))
    phi = 12.0 * EI.mean() / (kGA.mean() * le * le)
    Nw, dNw, Nt, dNt = timoshenko_shapes(le, phi)
    w = _WXI * le
    gamma = dNw - Nt
    K = (dNt.T * (w * EI)) @ dNt + (gamma.T * (w * kGA)) @ gamma
    M = (Nw.T * (w * rhoA)) @ Nw + (Nt.T * (w * rhoI)) @ Nt
    return K, M


def _closed_form_stiffness(le: float, EI: float, phi: float) -> np.ndarray:
    """Friedman & Kosmatka (1993) element stiffness in closed form (self-check only)."""
    a, b, c = (4 + phi) * le * le, (2 - phi) * le * le, 6 * le
    return (
        EI
        / ((1 + phi) * le**3)
        * np.array([[12, c, -12, c], [c, a, -c, b], [-12, -c, 12, -c], [c, b, -c, a]])
    )


def _coefficients(bar: Bar, x: np.ndarray) -> dict[str, np.ndarray]:
    m = bar.material
    s = rectangle_section(bar.width(x), bar.thickness(x))
    return {
        "EIy": m.E * s["Iy"],
        "EIz": m.E * s["Iz"],
        "kGA": cowper_rectangle(m.nu) * m.G * s["A"],
        "rhoA": m.rho * s["A"],
        "rhoIy": m.rho * s["Iy"],
        "rhoIz": m.rho * s["Iz"],
        "GJ": m.G * s["J"],
        "rhoIp": m.rho * s["Ip"],
    }


def baseline_frequencies(bar: Bar, n: int) -> dict[str, np.ndarray]:
    """The six wanted frequencies (Hz) on a uniform mesh of n two-node elements."""
    le = bar.length / n
    c = _coefficients(bar, (np.arange(n) + 0.5) * le)  # section at each element's midpoint
    out = {}
    for family, suffix, count in (("bending", "y", 4), ("lateral", "z", 1)):
        K = np.zeros((2 * n + 2, 2 * n + 2))
        M = np.zeros_like(K)
        for e in range(n):
            Ke, Me = timoshenko_element(
                le, c["EI" + suffix][e], c["kGA"][e], c["rhoA"][e], c["rhoI" + suffix][e]
            )
            K[2 * e : 2 * e + 4, 2 * e : 2 * e + 4] += Ke
            M[2 * e : 2 * e + 4, 2 * e : 2 * e + 4] += Me
        lam = scipy.linalg.eigh(K, M, subset_by_index=(0, count + 1), eigvals_only=True)
        out[family] = np.sqrt(lam[2:]) / (2 * np.pi)  # two rigid modes dropped
    K = np.zeros((n + 1, n + 1))
    M = np.zeros_like(K)
    N = np.column_stack([1.0 - _XI, _XI])  # linear shape functions at the Gauss points
    k1 = np.array([[1.0, -1.0], [-1.0, 1.0]]) / le
    for e in range(n):
        GJ = np.broadcast_to(c["GJ"][e], _XI.shape)
        rhoIp = np.broadcast_to(c["rhoIp"][e], _XI.shape)
        K[e : e + 2, e : e + 2] += np.dot(_WXI, GJ) * k1
        M[e : e + 2, e : e + 2] += (N.T * (_WXI * le * rhoIp)) @ N
    lam = scipy.linalg.eigh(K, M, subset_by_index=(0, 1), eigvals_only=True)
    out["torsion"] = np.sqrt(lam[1:]) / (2 * np.pi)  # one rigid rotation dropped
    return out


def _flat(freqs: dict[str, np.ndarray]) -> np.ndarray:
    return np.concatenate([freqs[f] for f in COUNTS])


def baseline_converged(bar: Bar) -> tuple[dict[str, np.ndarray], int]:
    """Double the mesh until all six frequencies move by less than TOL_CENTS.

    Starts at 10 elements, so the profile stations (multiples of 40 mm on the 400 mm bar) stay
    on element boundaries at every level: started at 8, the kinks fall inside elements and the
    frequencies wander by several cents from one level to the next.
    """
    n = 10
    previous = baseline_frequencies(bar, n)
    while True:
        n *= 2
        current = baseline_frequencies(bar, n)
        change = np.abs(1200 * np.log2(_flat(current) / _flat(previous)))
        if np.all(change < TOL_CENTS):
            return current, n
        previous = current


def _self_check() -> None:
    le, EI, kGA, rhoA, rhoI = 0.01, 40.0, 5e5, 0.4, 2e-6
    K, _ = timoshenko_element(le, EI, kGA, rhoA, rhoI)
    expected = _closed_form_stiffness(le, EI, 12 * EI / (kGA * le * le))
    assert np.allclose(K, expected, rtol=1e-10, atol=1e-10 * np.abs(expected).max())


# ---------------------------------------------------------------------------------------------


def _median_time(fn: Callable[[], T], repeats: int) -> tuple[float, float, T]:
    """Median wall-clock and CPU seconds per call (CPU time is immune to other jobs' load)."""
    wall, cpu, result = [], [], None
    for _ in range(repeats):
        t0, c0 = time.perf_counter(), time.process_time()
        result = fn()
        wall.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
    return statistics.median(wall), statistics.median(cpu), result


# ---------------------------------------------------------------------------------------------
# The design loop's solve: four bending eigenvalues on a fixed mesh

LOOP_MODES = 4


def _hz(lam: np.ndarray) -> np.ndarray:
    return np.sqrt(np.maximum(lam, 0.0)) / (2 * np.pi)


def _cents_off(f: np.ndarray, ref: np.ndarray) -> float:
    return float(np.max(np.abs(1200 * np.log2(f / ref))))


def ours_loop_route(bar: Bar, reference: np.ndarray):
    """The lowest degree on the default 4-element mesh that is within TOL_CENTS, and a
    per-design solve on it: coefficients at the points, then eigenvalues from the pattern."""
    for degree in range(4, 13):
        disc = discretise(bar, elements=4, degree=degree)
        coef = section_coefficients(bar, disc.quad.x)
        pattern = family_pattern(bar, disc, "bending", coef, symmetric=True)

        def one_design(disc=disc, pattern=pattern) -> np.ndarray:
            c = section_coefficients(bar, disc.quad.x)
            return _hz(pattern_modes(pattern, c, LOOP_MODES)[0])

        if _cents_off(one_design(), reference) < TOL_CENTS:
            size = sum(b.size for b in pattern.blocks)
            return one_design, f"{disc.n_elements} elements of degree {degree}, {size} dofs" + (
                " (split by symmetry)" if pattern.symmetric else ""
            )
    raise RuntimeError("no degree up to 12 reached the tolerance")


def skfem_loop_route(bar: Bar, reference: np.ndarray):
    """scikit-fem, cubic Lagrange w and theta, on the coarsest doubling mesh within TOL."""
    import skfem
    from skfem.helpers import dot

    m = bar.material
    kappa = cowper_rectangle(m.nu)
    element = skfem.ElementLinePp(3) * skfem.ElementLinePp(3)

    def section(x):
        s = rectangle_section(bar.width(x), bar.thickness(x))
        return s["A"], s["Iy"]

    @skfem.BilinearForm
    def stiffness(u, theta, v, eta, w):
        A, Iy = section(w.x[0])
        gamma_u, gamma_v = u.grad[0] - theta, v.grad[0] - eta
        return m.E * Iy * dot(theta.grad, eta.grad) + kappa * m.G * A * gamma_u * gamma_v

    @skfem.BilinearForm
    def mass(u, theta, v, eta, w):
        A, Iy = section(w.x[0])
        return m.rho * A * u * v + m.rho * Iy * theta * eta

    n = 10
    while n <= 2560:
        mesh = skfem.MeshLine(np.linspace(0.0, bar.length, n + 1))

        def one_design(mesh=mesh) -> np.ndarray:
            basis = skfem.Basis(mesh, element)
            K = stiffness.assemble(basis).toarray()
            M = mass.assemble(basis).toarray()
            lam = scipy.linalg.eigh(
                K, M, subset_by_index=(0, LOOP_MODES + 1), eigvals_only=True, check_finite=False
            )
            return _hz(lam[2:])

        if _cents_off(one_design(), reference) < TOL_CENTS:
            return one_design, f"{n} cubic elements, {2 * (3 * n + 1)} dofs"
        n *= 2
    raise RuntimeError("scikit-fem route did not reach the tolerance")


def loop_table(bar: Bar) -> None:
    ref = solve(bar, {"bending": LOOP_MODES}, tol_cents=1e-4)
    reference = np.array([mode.frequency_hz for mode in ref.family("bending")])
    ours, ours_mesh = ours_loop_route(bar, reference)
    lib, lib_mesh = skfem_loop_route(bar, reference)
    t_ours, c_ours, f_ours = _median_time(ours, 201)
    t_lib, c_lib, f_lib = _median_time(lib, 21)
    print("design-loop forward solve: 4 bending eigenvalues of the F4 demo bar, each within")
    print(f"{TOL_CENTS} cent of a reference solve converged to 1e-4 cent")
    print(
        f"ours (pattern):  {ours_mesh}; median {t_ours * 1e3:.3f} ms wall, "
        f"{c_ours * 1e3:.3f} ms CPU; worst {_cents_off(f_ours, reference):.4f} cent"
    )
    print(
        f"scikit-fem P3:   {lib_mesh}; median {t_lib * 1e3:.3f} ms wall, "
        f"{c_lib * 1e3:.3f} ms CPU; worst {_cents_off(f_lib, reference):.4f} cent"
    )
    ratio = f"{t_lib / t_ours:.0f}x wall, {c_lib / c_ours:.0f}x CPU"
    print(f"design-loop speed-up over scikit-fem: {ratio}")
    print()


def main() -> None:
    _self_check()
    bar = demo_bar()
    with threadpool_limits(1):
        loop_table(bar)
        if "--skip-baseline" in sys.argv[1:]:
            return
        solve(bar, COUNTS, tol_cents=TOL_CENTS)  # warm caches (basis polynomials)
        t_ours, c_ours, ours = _median_time(
            lambda: solve(bar, COUNTS, tol_cents=TOL_CENTS), OURS_REPEATS
        )
        t_base, c_base, (base, n_base) = _median_time(
            lambda: baseline_converged(bar), BASELINE_REPEATS
        )

    print("forward model benchmark: 400 mm undercut F4 demo bar, free-free (no cords, no holes)")
    print("BLAS limited to 1 thread (threadpoolctl) for both methods")
    print(f"wanted: {COUNTS}, each to {TOL_CENTS} cent")
    print(
        f"ours:     {ours.elements} elements of degree {ours.degree}, {ours.message}; "
        f"median {t_ours * 1e3:.1f} ms wall, {c_ours * 1e3:.1f} ms CPU over {OURS_REPEATS} solves"
    )
    print(
        f"baseline: uniform 2-node Timoshenko mesh reached {n_base} elements; "
        f"{t_base:.1f} s wall, {c_base:.1f} s CPU for the whole doubling loop "
        f"(median of {BASELINE_REPEATS} run(s))"
    )
    print(f"{'mode':<12}{'ours (Hz)':>14}{'baseline (Hz)':>16}{'baseline - ours (cents)':>26}")
    for family, count in COUNTS.items():
        for k in range(count):
            f_ours = ours.frequency(family, k + 1)
            f_base = base[family][k]
            print(
                f"{family + ' ' + str(k + 1):<12}{f_ours:>14.4f}{f_base:>16.4f}"
                f"{1200 * np.log2(f_base / f_ours):>+26.4f}"
            )
    print(f"speed-up: {t_base / t_ours:.0f}x wall-clock, {c_base / c_ours:.0f}x CPU time")


if __name__ == "__main__":
    main()
