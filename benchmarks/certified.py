"""Benchmark: one 3D check of the 400 mm demo-sized bar, and a 3D-certified design of it.

Run: python benchmarks/certified.py
Targets on a 2-core, 24 GiB machine: the 3D check under 2 minutes, the certified design under 5.
"""

from __future__ import annotations

import sys
import time
from pathlib import Path

_HERE = Path(__file__).resolve().parent
sys.path[:] = [p for p in sys.path if Path(p or ".").resolve() != _HERE]
_ROOT = _HERE.parent

import numpy as np  # noqa: E402
from threadpoolctl import threadpool_limits  # noqa: E402
from tonewright.acoustics.pitch import cents  # noqa: E402
from tonewright.forward.solid import SolidMesh, solid_modes  # noqa: E402

from tonewright.design import build_problem, run_design  # noqa: E402
from tonewright.partfile import load_part  # noqa: E402


def main() -> None:
    part_file, base = load_part(_ROOT / "examples" / "workshop-marimba-c4.toml")
    problem = build_problem(part_file, base)
    with threadpool_limits(limits=1, user_api="blas"):
        start = time.perf_counter()
        outcome = run_design(problem, fidelity="solid")
        t_design = time.perf_counter() - start
        part = problem.space.part(outcome.result.u)
        bar = part_file.bar
        material = part_file.material_spec(base).to_solid("T")
        start = time.perf_counter()
        res = solid_modes(
            part.length,
            bar.width,
            bar.thickness,
            part.thickness,
            material,
            fmax_hz=3200.0,
            mesh=SolidMesh(),
        )
        t_check = time.perf_counter() - start
    f = res.family_hz("bending")[:3]
    target = 261.6256 * np.array([1.0, 4.0, 10.0])
    print(
        f"bar: {part.length * 1e3:.0f} x {bar.width * 1e3:.0f} x {bar.thickness * 1e3:.0f} mm, "
        "honduras-rosewood, C4 at 1:4:10"
    )
    print(f"one 3D check (standard mesh, {res.n_dof} unknowns): {t_check:.1f} s (target < 120 s)")
    print(
        f"3D-certified design: {t_design:.1f} s (target < 300 s), met: {outcome.converged} "
        f"(status {outcome.status})"
    )
    print("3D errors after design (cents): " + ", ".join(f"{c:+.2f}" for c in cents(f, target)))
    for stage, corrected in outcome.stages:
        print(
            f"  stage {stage.label}: {len(corrected.steps)} checks, worst error per check: "
            + ", ".join(f"{np.max(np.abs(s.errors_cents)):.2f}" for s in corrected.steps)
        )


if __name__ == "__main__":
    main()
