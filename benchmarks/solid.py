"""Speed and accuracy of the 3D model that certifies bar designs, against the 27-node model
and a converged reference, and the time of a 3D-certified design, in one run.

Run from the repository root: ``python benchmarks/solid.py`` (``--quick`` skips the 27-node
runs, ``--no-design`` the design timings, ``--case trapezoid`` runs one bar).

Forward solves (bending 1-4, torsion 1-3, lateral 1-2; errors in cents against the same
p-version model at degrees (10, 8, 7) on the same elements, with three geometric layers at
re-entrant corners; on the trapezoid that reference is within 0.05 cent of scikit-fem's
Richardson limit, ``benchmarks/trapezoid_reference.py``):
- "arch": 400 x 60 x 22 mm test wood, a smooth sin^2 undercut 14 mm deep (60-340 mm);
- "trapezoid": 400 x 55 x 22 mm test wood, cut to 7 mm with straight tapers (sharp corners);
- "demo": the beam-model design of ``examples/workshop-marimba-c4.toml`` (rosewood).
The certifier is ``tonewright.fidelity.CERTIFY_MESH`` on ``certifier_ends`` (the cut's kinks,
no element over an eighth of the bar); the 27-node model is ``forward.solid`` at its standard
mesh; the 2D profile model is timed beside them.

Designs: the demo bar designed with the default fidelity (2D pre-correction, then the 3D
certifier) against ``--beam-only`` in the same run, and the 3D errors of the beam-only and
2D-only designs (what the certifier catches).

Times are wall-clock medians on whatever else the machine is doing: read the ratios.
"""

from __future__ import annotations

import argparse
import sys
import time
from pathlib import Path

# run as a script, this folder heads sys.path and its forward.py would shadow the package
sys.path[:] = [p for p in sys.path if Path(p or ".").resolve() != Path(__file__).resolve().parent]

import numpy as np  # noqa: E402
from threadpoolctl import threadpool_limits  # noqa: E402
from tonewright.acoustics.pitch import cents  # noqa: E402
from tonewright.forward.geometry import PiecewiseLinear  # noqa: E402
from tonewright.forward.orthotropic import Orthotropic  # noqa: E402
from tonewright.forward.plane import PlaneMesh, plane_modes  # noqa: E402
from tonewright.forward.psolid import PMesh, psolid_convergence, psolid_modes  # noqa: E402
from tonewright.forward.solid import match_modes, solid_modes  # noqa: E402

from tonewright.design import build_problem, certify_3d, design_report  # noqa: E402
from tonewright.fidelity import CERTIFY_MESH, certifier_ends  # noqa: E402
from tonewright.partfile import load_part  # noqa: E402

ROOT = Path(__file__).resolve().parents[1]
DEMO = ROOT / "examples" / "workshop-marimba-c4.toml"
WOOD = Orthotropic(20e9, 2.2e9, 1.2e9, 1.6e9, 1.5e9, 0.4e9, 0.37, 0.45, 0.6, 1000.0)
WANTED = {"bending": 4, "torsion": 3, "lateral": 2}
REFERENCE = PMesh(nx=1, px=10, py=8, pz=7, corner_layers=3)


def _median_time(fn, repeats: int):
    times, out = [], None
    for _ in range(repeats):
        start = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - start)
    return out, float(np.median(times))


def _arch():
    x = np.linspace(0.0, 0.4, 401)
    inside = (x > 0.06) & (x < 0.34)
    h = 0.022 - 0.014 * np.where(inside, np.sin(np.pi * (x - 0.06) / 0.28) ** 2, 0.0)
    bar = dict(length=0.4, width=0.06, blank_thickness=0.022, thickness=PiecewiseLinear(x, h))
    return bar, WOOD, np.array([0.06, 0.34])  # the cut's ends: the curvature jumps there


def _trapezoid():
    mm = np.array([[0, 22], [120, 22], [160, 7], [240, 7], [280, 22], [400, 22]], float)
    th = PiecewiseLinear(mm[:, 0] / 1000, mm[:, 1] / 1000)
    bar = dict(length=0.4, width=0.055, blank_thickness=0.022, thickness=th)
    return bar, WOOD, np.zeros(0)


def _demo():
    part_file, base = load_part(DEMO)
    problem = build_problem(part_file, base)
    report = design_report(problem, fidelity="beam")
    u = np.array([v for _, v in report.variables])
    part = problem.space.part(u)
    bar = dict(
        length=part.length,
        width=part_file.bar.width,
        blank_thickness=part_file.bar.thickness,
        thickness=part.thickness,
    )
    material = part_file.material_spec(base).to_solid(problem.table.thickness_axis)
    return bar, material, problem.space.kinks(u)


def _wanted(result) -> list:
    return [m for m in result.modes if m.order <= WANTED.get(m.family, 0)]


def forward_report(name: str, bar: dict, material, kinks: np.ndarray, quick: bool) -> None:
    ends = certifier_ends(bar["length"], kinks)
    ref = psolid_modes(**bar, material=material, count=10, mesh=REFERENCE, element_ends=ends)
    top = 1.15 * max(m.f_hz for m in _wanted(ref))

    def certifier():
        return psolid_modes(
            **bar, material=material, count=8, mesh=CERTIFY_MESH, element_ends=ends, fmax_hz=top
        )

    fast, t_fast = _median_time(certifier, 3)
    modes = _wanted(fast)
    err = cents(np.array([m.f_hz for m in modes]), match_modes(tuple(modes), ref.modes))
    print(f"\n{name}: {len(ends) - 1} elements along x (+ corner grading where sharp)")
    print(
        f"  3D certifier {fast.mesh.px, fast.mesh.py, fast.mesh.pz}: "
        f"{fast.n_dof} unknowns, {t_fast:.2f} s (median of 3), worst error "
        f"{np.max(np.abs(err)):.3f} cent over {len(modes)} wanted modes"
    )
    _, t_plane = _median_time(
        lambda: plane_modes(**bar, material=material, count=6, mesh=PlaneMesh()), 3
    )
    conv = psolid_convergence(
        **bar, material=material, count=8, mesh=CERTIFY_MESH, element_ends=ends, fmax_hz=top
    )
    est = np.array(
        [
            e
            for m, e in zip(conv.result.modes, conv.error_cents, strict=True)
            if m.order <= WANTED.get(m.family, 0)
        ]
    )
    nested = np.array(
        [
            e
            for m, e in zip(conv.result.modes, conv.nested_cents, strict=True)
            if m.order <= WANTED.get(m.family, 0)
        ]
    )
    worst = np.max(np.abs(err))
    print(
        f"  error estimate (worst wanted mode): {np.nanmax(np.abs(est)):.3f} cent "
        f"({np.nanmax(np.abs(est)) / worst:.1f}x the true worst); nested change "
        f"{np.nanmax(np.abs(nested)):.3f} cent ({np.nanmax(np.abs(nested)) / worst:.1f}x)"
    )
    print(f"  2D profile model: {t_plane:.2f} s (bending only)")
    err_hex = None
    if not quick:
        hex27, t_hex = _median_time(lambda: solid_modes(**bar, material=material, count=12), 1)
        err_hex = cents(
            match_modes(tuple(modes), hex27.modes), match_modes(tuple(modes), ref.modes)
        )
        print(
            f"  27-node model (standard mesh): {hex27.n_dof} unknowns, {t_hex:.1f} s, "
            f"worst error {np.nanmax(np.abs(err_hex)):.3f} cent; "
            f"certifier {t_hex / t_fast:.0f}x faster"
        )
    print(f"  {'mode':>11} {'ref Hz':>10} {'p err':>7}" + ("" if quick else f" {'27n err':>8}"))
    for i, m in enumerate(modes):
        row = f"  {m.family:>8} {m.order:2d} {match_modes((m,), ref.modes)[0]:10.3f} {err[i]:+7.3f}"
        if err_hex is not None:
            row += f" {err_hex[i]:+8.3f}"
        print(row)


def design_timings() -> None:
    part_file, base = load_part(DEMO)
    problem = build_problem(part_file, base)
    print("\ndemo design (examples/workshop-marimba-c4.toml)")
    rows = {}
    for label, fidelity in (("beam only", "beam"), ("2D only", "plane"), ("default (3D)", None)):
        start = time.perf_counter()
        report = design_report(problem, fidelity=fidelity)
        elapsed = time.perf_counter() - start
        u = np.array([v for _, v in report.variables])
        conv = certify_3d(problem, u)
        f3 = [conv.result.family_hz(g.family)[g.order - 1] for g in problem.evaluator.goals]
        e3 = cents(np.array(f3), np.array([g.f_hz for g in problem.evaluator.goals]))
        rows[label] = elapsed
        claims = "meets" if report.converged else "misses"
        print(
            f"  {label:>13}: {elapsed:6.1f} s, {report.solves} beam solves, {claims} "
            f"({report.certified_by.split(';')[0]}); in 3D: "
            + ", ".join(f"{e:+.2f}" for e in e3)
            + " cents"
        )
    print(
        f"  3D certification costs {rows['default (3D)'] - rows['beam only']:.1f} s over the "
        f"beam-only design ({rows['default (3D)'] / rows['beam only']:.1f}x)"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="skip the 27-node runs")
    parser.add_argument("--no-design", action="store_true", help="skip the design timings")
    parser.add_argument("--design-only", action="store_true", help="only the design timings")
    parser.add_argument(
        "--case", choices=("arch", "trapezoid", "demo"), action="append", help="only these bars"
    )
    args = parser.parse_args()
    # one BLAS thread, as the command line runs (tonewright.cli_support.guarded): small dense
    # eigenproblems oversubscribe a shared machine otherwise
    with threadpool_limits(limits=1, user_api="blas"):
        if not args.design_only:
            for name, make in (("arch", _arch), ("trapezoid", _trapezoid), ("demo", _demo)):
                if args.case and name not in args.case:
                    continue
                bar, material, kinks = make()
                forward_report(name, bar, material, kinks, args.quick)
        if not args.no_design:
            design_timings()


if __name__ == "__main__":
    main()
