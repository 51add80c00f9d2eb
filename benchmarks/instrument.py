"""Benchmark: design a whole 52-bar instrument on all cores, tuning three partials on every bar.

Run from the repository root:
``python benchmarks/instrument.py [--jobs N] [--fidelity beam|plane] [--file F] [--profile P]``.

Instrument: ``examples/workshop-marimba-three-partials.toml`` (E2 to G6, Honduras rosewood,
``marimba-1-4-10`` on every bar; blanks proportioned so that three partials can be tuned with
every torsion and lateral mode outside the partials' critical bands), model fidelity ``beam``
(no 2D/3D correction) unless ``--fidelity plane``, no files written. Each bar runs as the
``instrument`` command runs it: bars grow outward from one head per two octaves, each starting
from its neighbour's design (``tonewright.scheduling``); seeds ``seed, seed + 1, ...`` (the
file's ``attempts``) until one meets its target, then an independent accuracy-controlled solve
of the written part (``tonewright.design.certify``). Bars are spread over a process pool, one
BLAS thread each.

Prints the wall time (targets on a 2-core, 24 GiB machine: under 30 s with the beam model, under
10 min with the 2D correction), the bars that meet their targets, and where the time goes: per-bar
times, forward solves, the cost of one forward solve and the share spent on bars that missed.
"""

from __future__ import annotations

import argparse
import multiprocessing
import os
import statistics
import sys
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

# Run as a script, this file's folder leads sys.path and benchmarks/forward.py would shadow the
# ``forward`` package: drop that folder before importing it.
_HERE = Path(__file__).resolve().parent
sys.path[:] = [p for p in sys.path if Path(p or ".").resolve() != _HERE]

from threadpoolctl import threadpool_limits  # noqa: E402

from tonewright.design import build_problem, design_report  # noqa: E402
from tonewright.instrument import load_instrument, plan_instrument  # noqa: E402
from tonewright.partfile import parse_part  # noqa: E402
from tonewright.scheduling import neighbour_parents, run_in_parent_order  # noqa: E402

EXAMPLE = _HERE.parent / "examples" / "workshop-marimba-three-partials.toml"
TARGET_S = {"beam": 30.0, "plane": 600.0, "solid": 600.0}


def _init() -> None:
    threadpool_limits(limits=1, user_api="blas")


def design_bar(job: tuple[dict, int, str], parent: dict | None) -> dict:
    """One bar as the command designs it: the neighbour's design polished first, seeds until
    met, then the certified solve."""
    part, attempts, fidelity = job
    start = parent["start"] if parent is not None else None
    t0 = time.perf_counter()
    solves, met, seed_used, variables = 0, False, None, None
    for k in range(attempts):
        problem = build_problem(parse_part(part), seed=1 + k)
        report = design_report(problem, fidelity=fidelity, start=start if k == 0 else None)
        solves += report.solves
        # one status: met once the certifying model and the written part's solve agree
        met = report.converged
        seed_used, variables = 1 + k, report.start_variables()
        if met:
            break
    return {
        "note": part["target"]["fundamental"],
        "seconds": time.perf_counter() - t0,
        "solves": solves,
        "met": met,
        "seed": seed_used,
        "warm": start is not None,
        "start": variables,
    }


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--jobs", type=int, default=os.cpu_count() or 1)
    parser.add_argument("--attempts", type=int, default=None, help="default: the file's")
    parser.add_argument(
        "--profile", default="file", help="a profile forced on every bar; 'file' keeps the file's"
    )
    parser.add_argument("--file", type=Path, default=EXAMPLE)
    parser.add_argument("--fidelity", choices=("beam", "plane", "solid"), default="beam")
    args = parser.parse_args()

    spec, base = load_instrument(args.file)
    plan = plan_instrument(spec, base)
    attempts = args.attempts or plan.attempts
    parts = []
    for b in plan.bars:
        part = dict(b.part)
        if args.profile != "file":
            part["target"] = {**part["target"], "profile": args.profile}
        parts.append((part, attempts, args.fidelity))

    context = multiprocessing.get_context("fork" if sys.platform.startswith("linux") else "spawn")
    start = time.perf_counter()
    with ProcessPoolExecutor(args.jobs, mp_context=context, initializer=_init) as pool:
        runs = run_in_parent_order(pool, design_bar, parts, neighbour_parents(len(parts)))
    wall = time.perf_counter() - start

    met = [r for r in runs if r["met"]]
    seconds = [r["seconds"] for r in runs]
    solves = sum(r["solves"] for r in runs)
    missed_s = sum(r["seconds"] for r in runs if not r["met"])
    print(
        f"instrument benchmark: {args.file.name}, {len(runs)} bars, profile {args.profile}, "
        f"{args.fidelity} model, up to {attempts} seeds per bar, {args.jobs} workers"
    )
    for r in runs:
        state = f"met (seed {r['seed']})" if r["met"] else "MISSED"
        how = "from neighbour" if r["warm"] else "searched"
        print(f"  {r['note']:>4}: {r['seconds']:6.2f} s, {r['solves']:5d} solves, {how}, {state}")
    print(f"wall time: {wall:.1f} s (target < {TARGET_S[args.fidelity]:.0f} s)")
    print(f"bars meeting their targets: {len(met)} of {len(runs)}")
    print(
        f"per bar: median {statistics.median(seconds):.2f} s, max {max(seconds):.2f} s, "
        f"sum {sum(seconds):.1f} s of worker time"
    )
    print(
        f"forward solves: {solves} in all, {sum(seconds) / max(solves, 1) * 1e3:.1f} ms each "
        "on average (search, polish and certification included)"
    )
    print(f"worker time on bars that missed: {missed_s:.1f} s ({missed_s / sum(seconds):.0%})")


if __name__ == "__main__":
    main()
