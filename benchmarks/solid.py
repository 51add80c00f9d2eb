"""Speed and mesh error of the 3-D solid and 2-D side-profile models.

Run from the repository root: ``python -m benchmarks.solid`` (or ``python benchmarks/solid.py``).

The test bar is the invented demo: 400 x 55 x 22 mm, undercut to 7 mm between 160 and 240 mm
with straight 40 mm tapers, wood-like orthotropic material (E_L = 20 GPa, rho = 1000 kg/m^3).
Modes up to ~20 % above the 4th vertical bending partial are compared.

3-D mesh error is estimated per mode from two partial refinements, since the discretisation
errors of a tensor-product mesh add up direction by direction:

- across the width: ny 4 -> 6 at the default x-z mesh; error ~ change / (1 - (4/6)^4), the
  O(h^4) rate measured for this direction;
- along the length and through the thickness: (nx, nz) (96, 8) -> (144, 12) at ny = 2; error ~
  change / (1 - (96/144)^1.63), the rate 2 lambda set by the re-entrant corners of the thin
  flat (lambda = 0.81, Williams 1952), slower and so more cautious than O(h^4).

2-D mesh error is measured against a 768 x 24 reference of the same model. ``--quick`` skips
the two refined 3-D runs. Times are wall-clock on whatever else the machine is doing.
"""

from __future__ import annotations

import argparse
import sys
import time
from dataclasses import replace
from pathlib import Path

# run as a script, this folder heads sys.path and its forward.py would shadow the package
sys.path[:] = [p for p in sys.path if Path(p or ".").resolve() != Path(__file__).resolve().parent]

import numpy as np  # noqa: E402
from tonewright.acoustics.pitch import cents  # noqa: E402
from tonewright.forward.geometry import PiecewiseLinear  # noqa: E402
from tonewright.forward.orthotropic import Orthotropic  # noqa: E402
from tonewright.forward.plane import PlaneMesh, plane_modes  # noqa: E402
from tonewright.forward.solid import SolidMesh, solid_modes  # noqa: E402
from tonewright.forward.solid import match_modes as match  # noqa: E402

WOOD = Orthotropic(20e9, 2.2e9, 1.2e9, 1.6e9, 1.5e9, 0.4e9, 0.37, 0.45, 0.6, 1000.0)
STATIONS_MM = np.array([[0, 22], [120, 22], [160, 7], [240, 7], [280, 22], [400, 22]], float)
BAR = dict(
    length=0.4,
    width=0.055,
    blank_thickness=0.022,
    thickness=PiecewiseLinear(STATIONS_MM[:, 0] / 1000, STATIONS_MM[:, 1] / 1000),
    material=WOOD,
)


def timed(fn, *args, **kwargs):
    start = time.perf_counter()
    out = fn(*args, **kwargs)
    return out, time.perf_counter() - start


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="skip the refined 3-D runs")
    args = parser.parse_args()

    mesh = SolidMesh()
    base, t3 = timed(solid_modes, **BAR, count=11, mesh=mesh)
    b4 = base.family_hz("bending")[3]
    fmax = 1.2 * b4
    keep = base.f_hz <= fmax
    print(f"3-D mesh {mesh}")
    print(f"3-D: {base.n_dof} dofs (two half-width problems), {t3:.1f} s, {base.message}")
    print(f"modes up to 1.2 x bending 4 = {fmax:.0f} Hz: {int(keep.sum())}")

    err = np.full(base.f_hz.shape, np.nan)
    if not args.quick:
        wide, ty = timed(solid_modes, **BAR, count=13, mesh=replace(mesh, ny=6))
        err_y = cents(base.f_hz, match(base.modes, wide.modes)) / (1 - (4 / 6) ** 4)
        lo = replace(mesh, ny=2)
        coarse, t_lo = timed(solid_modes, **BAR, count=13, mesh=lo)
        fine, t_hi = timed(solid_modes, **BAR, count=13, mesh=replace(lo, nx=144, nz=12))
        err_xz = cents(match(base.modes, coarse.modes), match(base.modes, fine.modes)) / (
            1 - (96 / 144) ** 1.63
        )
        err = np.abs(err_y) + np.abs(err_xz)
        print(f"refined runs: ny=6 {ty:.0f} s, ny=2 {t_lo:.0f} s, (144, 2, 12) {t_hi:.0f} s")
        print(f"{'mode':>12} {'f (Hz)':>10} {'ratio':>7} {'err_y':>7} {'err_xz':>7} {'est.':>6}")
        for i, m in enumerate(base.modes):
            if not keep[i]:
                continue
            print(
                f"{m.family:>9} {m.order:2d} {m.f_hz:10.3f} {m.f_hz / base.f_hz[0]:7.3f}"
                f" {err_y[i]:+7.3f} {err_xz[i]:+7.3f} {err[i]:6.3f}"
            )
        worst = float(np.nanmax(err[keep]))
        verdict = "meets" if worst < 0.5 else "MISSES"
        print(f"3-D estimated mesh error: max {worst:.2f} cent ({verdict} the 0.5-cent goal)")

    plane_mesh = PlaneMesh()
    plane_modes(**BAR, count=6, mesh=plane_mesh)  # warm-up
    runs = [timed(plane_modes, **BAR, count=6, mesh=plane_mesh) for _ in range(5)]
    plane, t2 = runs[0][0], float(np.median([t for _, t in runs]))
    ref = plane_modes(**BAR, count=6, mesh=PlaneMesh(768, 24))
    e2 = cents(plane.f_hz, ref.f_hz)
    print(f"2-D mesh {plane_mesh}")
    print(f"2-D: {plane.n_dof} dofs, median {1000 * t2:.0f} ms per solve (6 modes)")
    print(f"2-D mesh error vs 768 x 24: max {np.abs(e2).max():.3f} cent")
    solid_bend = base.family_hz("bending")[:4]
    print(
        "2-D minus 3-D, bending 1-4 (cents): "
        + ", ".join(f"{d:+.1f}" for d in cents(plane.family_hz("bending")[:4], solid_bend))
    )


if __name__ == "__main__":
    main()
