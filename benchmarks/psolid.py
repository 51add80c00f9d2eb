"""Speed and accuracy of the p-version solid model against the 27-node model, in one run.

Run from the repository root: ``python benchmarks/psolid.py`` (``--quick`` skips the
27-node runs).

Two invented 400 mm wood bars (E_L = 20 GPa, rho = 1000 kg/m^3, the test material):
- "arch": 60 mm wide, 22 mm blank, a smooth sin^2 undercut 14 mm deep between 60 and 340 mm
  (the kind of cut a design produces: no sharp corners);
- "trapezoid": 55 mm wide, undercut to 7 mm between 160 and 240 mm with straight 40 mm
  tapers (re-entrant corners, the hard case for any discretisation).

For each: the p-model at its default degrees with its nested error estimate (the same model
one degree lower), the 27-node model at its default mesh, and a reference (the p-model at
degrees (10, 8, 7)). Errors are in cents against the reference, for bending 1-4, torsion 1-3
and lateral 1-2. Times are wall-clock medians of three runs, on whatever else the machine is
doing, so the ratio of the two models' times in the same run is the figure to read.
"""

from __future__ import annotations

import argparse
import time

import numpy as np
from threadpoolctl import threadpool_limits
from tonewright.acoustics.pitch import cents
from tonewright.forward.geometry import PiecewiseLinear
from tonewright.forward.orthotropic import Orthotropic
from tonewright.forward.psolid import PMesh, psolid_convergence, psolid_modes
from tonewright.forward.solid import match_modes, solid_modes

WOOD = Orthotropic(20e9, 2.2e9, 1.2e9, 1.6e9, 1.5e9, 0.4e9, 0.37, 0.45, 0.6, 1000.0)
WANTED = {"bending": 4, "torsion": 3, "lateral": 2}
REFERENCE = PMesh(nx=4, px=10, py=8, pz=7)


def _arch() -> tuple[dict, np.ndarray]:
    x = np.linspace(0.0, 0.4, 401)
    inside = (x > 0.06) & (x < 0.34)
    h = 0.022 - 0.014 * np.where(inside, np.sin(np.pi * (x - 0.06) / 0.28) ** 2, 0.0)
    bar = dict(length=0.4, width=0.06, blank_thickness=0.022, thickness=PiecewiseLinear(x, h))
    return bar, np.array([0.06, 0.34])  # the cut's ends: curvature jumps there


def _trapezoid() -> tuple[dict, None]:
    mm = np.array([[0, 22], [120, 22], [160, 7], [240, 7], [280, 22], [400, 22]], float)
    bar = dict(
        length=0.4,
        width=0.055,
        blank_thickness=0.022,
        thickness=PiecewiseLinear(mm[:, 0] / 1000, mm[:, 1] / 1000),
    )
    return bar, None


def _median_time(fn, repeats: int):
    times, out = [], None
    for _ in range(repeats):
        start = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - start)
    return out, float(np.median(times))


def _wanted(result) -> list:
    return [m for m in result.modes if m.order <= WANTED.get(m.family, 0)]


def _report(name: str, bar: dict, ends, quick: bool) -> None:
    count = 10
    ref = psolid_modes(**bar, material=WOOD, count=count + 2, mesh=REFERENCE, element_ends=ends)
    fast, t_fast = _median_time(
        lambda: psolid_modes(**bar, material=WOOD, count=count, element_ends=ends), 3
    )
    conv, t_conv = _median_time(
        lambda: psolid_convergence(**bar, material=WOOD, count=count, element_ends=ends), 1
    )
    modes = _wanted(fast)
    f_fast = np.array([m.f_hz for m in modes])
    err_fast = cents(f_fast, match_modes(tuple(modes), ref.modes))
    print(f"\n{name}: p-model {fast.n_dof} unknowns, {t_fast:.2f} s (median of 3)")
    estimate = np.abs(conv.error_cents[[fast.modes.index(m) for m in modes]])
    print(
        f"  with the nested error estimate: {t_conv:.2f} s, estimate max {estimate.max():.3f} cent"
    )
    line = f"{'mode':>11} {'f (Hz)':>10} {'p err':>7}"
    if not quick:
        hex27, t_hex = _median_time(lambda: solid_modes(**bar, material=WOOD, count=count), 1)
        err_hex = cents(match_modes(tuple(modes), hex27.modes), f_fast) + err_fast
        print(f"  27-node model: {hex27.n_dof} unknowns, {t_hex:.1f} s")
        print(f"  speed-up of the p-model: {t_hex / t_fast:.0f}x")
        line += f" {'27n err':>8}"
    print(line)
    for i, m in enumerate(modes):
        row = f"{m.family:>8} {m.order:2d} {m.f_hz:10.3f} {err_fast[i]:+7.3f}"
        if not quick:
            row += f" {err_hex[i]:+8.3f}"
        print(row)
    print(f"  p-model worst error: {np.max(np.abs(err_fast)):.3f} cent")
    if not quick:
        print(f"  27-node worst error: {np.nanmax(np.abs(err_hex)):.3f} cent")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="skip the 27-node runs")
    args = parser.parse_args()
    with threadpool_limits(limits=1, user_api="blas"):
        for name, (bar, ends) in (("arch", _arch()), ("trapezoid", _trapezoid())):
            _report(name, bar, ends, args.quick)


if __name__ == "__main__":
    main()
