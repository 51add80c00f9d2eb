"""An independent reference for the straight-taper bar ("trapezoid" in ``benchmarks/solid.py``):
scikit-fem's 27-node Lagrange hexahedra on meshes graded toward the cut's corners, extrapolated
to zero mesh size, against the p-version model on a geometric corner mesh.

Run from the repository root: ``python benchmarks/trapezoid_reference.py`` (levels 2, 3, 4: about
15 minutes on one core; ``--levels 1 2 3`` takes 3). The limit printed is what
``tests/test_fidelity.py`` holds as ``TRAPEZOID_LIMIT_HZ``.

Method: the mesh at level k has 16 k elements along the length, power-graded (exponent 2) toward
every corner of the cut, 2 k across half the width and 2 k through the thickness (exponent 1.5
toward the cut face); the geometry x, y, z = t0 - h(x) (1 - s) is trilinear inside each element,
so exact. Both codes are Rayleigh-Ritz, so every frequency is an upper bound. The last three
levels give the rate r and the limit of f(k) = f + C k^-r (Richardson extrapolation).
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

sys.path[:] = [p for p in sys.path if Path(p or ".").resolve() != Path(__file__).resolve().parent]

import numpy as np  # noqa: E402
import skfem  # noqa: E402
from scipy.optimize import brentq  # noqa: E402
from scipy.sparse.linalg import eigsh  # noqa: E402
from skfem.helpers import dot, sym_grad  # noqa: E402
from threadpoolctl import threadpool_limits  # noqa: E402
from tonewright.acoustics.pitch import cents  # noqa: E402
from tonewright.forward.geometry import PiecewiseLinear  # noqa: E402
from tonewright.forward.orthotropic import Orthotropic, stiffness_matrix  # noqa: E402
from tonewright.forward.psolid import PMesh, psolid_modes  # noqa: E402

from tonewright.fidelity import certifier_ends  # noqa: E402

WOOD = Orthotropic(20e9, 2.2e9, 1.2e9, 1.6e9, 1.5e9, 0.4e9, 0.37, 0.45, 0.6, 1000.0)
STATIONS_MM = np.array([[0, 22], [120, 22], [160, 7], [240, 7], [280, 22], [400, 22]], float)
THICKNESS = PiecewiseLinear(STATIONS_MM[:, 0] / 1000, STATIONS_MM[:, 1] / 1000)
LENGTH, WIDTH, BLANK = 0.4, 0.055, 0.022
WANTED = {"bending": 4, "torsion": 3, "lateral": 2}
# elements per level along each piece of the profile, graded toward the corner ends
PIECES = ((0, 120, 3, False, True), (120, 160, 3, True, True), (160, 240, 4, True, True))
PIECES += ((240, 280, 3, True, True), (280, 400, 3, True, False))


def graded(a: float, b: float, n: int, left: bool, right: bool, power: float) -> np.ndarray:
    t = np.linspace(0.0, 1.0, n + 1)
    if left and right:
        u = np.where(t < 0.5, 0.5 * (2 * t) ** power, 1 - 0.5 * (2 * (1 - t)) ** power)
    elif left:
        u = t**power
    elif right:
        u = 1 - (1 - t) ** power
    else:
        u = t
    return a + (b - a) * u


def skfem_spectrum(level: int, count: int = 8) -> tuple[int, dict[str, np.ndarray]]:
    """Lowest ``count`` flexible frequencies per mid-width symmetry class, Hz."""
    xs = np.concatenate(
        [[0.0]] + [graded(a, b, n * level, lt, rt, 2.0)[1:] / 1000 for a, b, n, lt, rt in PIECES]
    )
    ys = np.linspace(0.0, 0.5 * WIDTH, 2 * level + 1)
    zs = graded(0.0, 1.0, 2 * level, True, False, 1.5)
    grid = skfem.MeshHex.init_tensor(xs, ys, zs)
    p = grid.p.copy()
    p[2] = BLANK - THICKNESS(p[0]) * (1.0 - p[2])
    element = skfem.ElementVector(skfem.ElementHex2())
    basis = skfem.Basis(skfem.MeshHex(p, grid.t), element, intorder=5)
    C = stiffness_matrix(WOOD)

    def voigt(e):
        return [e[0, 0], e[1, 1], e[2, 2], 2 * e[1, 2], 2 * e[0, 2], 2 * e[0, 1]]

    @skfem.BilinearForm
    def stiffness(u, v, w):
        eu, ev = voigt(sym_grad(u)), voigt(sym_grad(v))
        return sum(C[i, j] * ev[i] * eu[j] for i in range(6) for j in range(6) if C[i, j])

    @skfem.BilinearForm
    def mass(u, v, w):
        return WOOD.rho * dot(u, v)

    K, M = stiffness.assemble(basis).tocsc(), mass.assemble(basis).tocsc()
    plane = basis.get_dofs(lambda x: np.isclose(x[1], 0.5 * WIDTH))
    out = {}
    for name, held_components in (("symmetric", ("u^2",)), ("antisymmetric", ("u^1", "u^3"))):
        held = np.concatenate([plane.all(c) for c in held_components])
        free = np.setdiff1d(np.arange(basis.N), held)
        lam = eigsh(
            K[free][:, free],
            k=count + 3,
            M=M[free][:, free],
            sigma=-1e3,
            which="LM",
            return_eigenvectors=False,
        )
        out[name] = np.sqrt(np.clip(np.sort(lam)[3:], 0.0, None)) / (2 * np.pi)  # 3 rigid
    return basis.N, out


def richardson(levels: list[int], f: np.ndarray) -> tuple[float, float]:
    """Rate r and limit of f(k) = f + C k^-r through the last three levels."""
    (k1, k2, k3), (a, b, c) = levels[-3:], f[-3:]

    def gap(r: float) -> float:
        return (a - b) / (b - c) - (k1**-r - k2**-r) / (k2**-r - k3**-r)

    r = brentq(gap, 0.3, 15.0)
    return r, c - (b - c) / (k2**-r - k3**-r) * k3**-r


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--levels", type=int, nargs=3, default=[2, 3, 4])
    args = parser.parse_args()
    with threadpool_limits(limits=1, user_api="blas"):
        ends = certifier_ends(LENGTH, np.zeros(0))
        bar = (LENGTH, WIDTH, BLANK, THICKNESS, WOOD)
        start = time.perf_counter()
        mesh = PMesh(nx=1, nz=3, px=7, py=7, pz=7, corner_layers=3)
        p_ref = psolid_modes(*bar, count=10, mesh=mesh, element_ends=ends)
        print(
            f"p-version, 3 geometric corner layers, degree 7: {time.perf_counter() - start:.0f} s"
        )
        modes = tuple(m for m in p_ref.modes if m.order <= WANTED.get(m.family, 0))
        runs = []
        for level in args.levels:
            start = time.perf_counter()
            n, spectrum = skfem_spectrum(level)
            runs.append(spectrum)
            print(f"scikit-fem level {level}: {n} unknowns, {time.perf_counter() - start:.0f} s")
    print(
        f"  {'mode':>11} {'limit Hz':>10} {'rate':>5} {'finest-limit':>12} {'p-limit':>8} (cents)"
    )
    for m in modes:
        name = "symmetric" if m.family == "bending" else "antisymmetric"
        f = np.array([r[name][np.argmin(np.abs(r[name] - m.f_hz))] for r in runs])
        rate, limit = richardson(args.levels, f)
        print(
            f"  {m.family:>8} {m.order:2d} {limit:10.4f} {rate:5.2f} "
            f"{cents(f[-1], limit):+12.3f} {cents(m.f_hz, limit):+8.3f}"
        )


if __name__ == "__main__":
    main()
