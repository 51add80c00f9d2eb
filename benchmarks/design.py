"""Benchmark: design one marimba-style bar (400 mm wood blank, 1:4:10 at a fixed pitch,
three partials to within 0.1 cent in the model) and print the median time and forward solves.

Run: python benchmarks/design.py [--repeats N]
One BLAS thread (the tool's own setting); the target is a median under 0.5 s on one core.
"""

from __future__ import annotations

import argparse
import statistics
import sys
import time
from pathlib import Path

# Run as a script, this folder leads sys.path and benchmarks/forward.py would shadow the
# ``forward`` package: drop the folder before importing it.
_HERE = Path(__file__).resolve().parent
sys.path[:] = [p for p in sys.path if Path(p or ".").resolve() != _HERE]

import numpy as np  # noqa: E402
from threadpoolctl import threadpool_limits  # noqa: E402
from tonewright.forward import Bar, constant  # noqa: E402
from tonewright.optimizer import (  # noqa: E402
    MET,
    BarUndercut,
    Evaluator,
    Goal,
    SearchSettings,
    design,
)

from tonewright.materials import load_material  # noqa: E402


def one_design(seed: int) -> tuple[float, int, float, bool]:
    material = load_material("honduras-rosewood").to_beam()
    blank = Bar(0.400, constant(0.055), constant(0.022), material)
    space = BarUndercut(blank, 0.022, min_thickness=0.004, end_keep=0.02)
    f0 = 261.6256  # C4
    goals = [Goal("bending", k + 1, f0 * r, 0.1) for k, r in enumerate((1.0, 4.0, 10.0))]
    start = time.perf_counter()
    result = design(Evaluator(space, goals), SearchSettings(seed=seed))
    elapsed = time.perf_counter() - start
    worst = float(np.max(np.abs(result.evaluation.errors_cents)))
    return elapsed, result.solves, worst, result.status == MET


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--repeats", type=int, default=9)
    args = parser.parse_args()
    with threadpool_limits(limits=1, user_api="blas"):
        one_design(0)  # warm caches and imports
        runs = [one_design(seed) for seed in range(1, args.repeats + 1)]
    times = [r[0] for r in runs]
    solves = [r[1] for r in runs]
    print("design benchmark: 400 x 55 x 22 mm rosewood blank, C4 at 1:4:10, tolerance 0.1 cent")
    print("BLAS threads: 1")
    for seed, (t, n, worst, ok) in enumerate(runs, start=1):
        print(f"  seed {seed}: {t:6.3f} s, {n:4d} forward solves, worst {worst:.4f} cent, met={ok}")
    print(f"median time: {statistics.median(times):.3f} s (target < 0.5 s)")
    print(f"median forward solves: {statistics.median(solves):.0f}")
    print(f"all met: {all(r[3] for r in runs)}")


if __name__ == "__main__":
    main()
