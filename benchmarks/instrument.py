"""Benchmark: design a whole 52-bar instrument on all cores, certified in 3D as the command does.

Run from the repository root:
``python benchmarks/instrument.py [--jobs N] [--fidelity beam|plane|solid] [--file F]
[--profile P]``.

Instrument: ``examples/workshop-marimba-4oct.toml`` (A2 to C7, Honduras rosewood: 1:4:10 up to
B4, 1:4 to F#5, the fundamental above), model fidelity ``solid`` (the default of ``design``
and ``instrument``: 2D pre-correction, the p-version 3D certifier, torsion and lateral modes
judged in 3D); ``--fidelity beam`` or ``plane`` for the cheaper models, and ``--file
examples/workshop-marimba-three-partials.toml`` for the stress test (E2 to G6, 1:4:10 on every
bar). No files are written. Each bar runs as the ``instrument`` command runs it
(``tonewright.instrument_run.design_with_restarts``): bars grow outward from one head per two
octaves, each starting from its neighbour's design (``tonewright.scheduling``); a bar whose
torsion or lateral mode binds is designed again narrower (the file's ``max_narrowing``); seeds
``seed, seed + 1, ...`` (the file's ``attempts``) until one meets its target; then the
certified solve of the written part. Bars are spread over a process pool, one BLAS thread each.

Prints the wall time (targets on a 2-core machine: under 30 s with the beam model, under 10
min certified in 3D), the bars that meet their targets, and where the time goes: per-bar
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

from tonewright.instrument import load_instrument, plan_instrument  # noqa: E402
from tonewright.instrument_run import BarJob, design_with_restarts  # noqa: E402
from tonewright.scheduling import neighbour_parents, run_in_parent_order  # noqa: E402

EXAMPLE = _HERE.parent / "examples" / "workshop-marimba-4oct.toml"
TARGET_S = {"beam": 30.0, "plane": 600.0, "solid": 600.0}


def _init() -> None:
    threadpool_limits(limits=1, user_api="blas")


def design_bar(job: tuple[dict, int, str, float], parent: dict | None) -> dict:
    """One bar as the command designs it (``instrument_run.design_with_restarts``: the
    neighbour's design polished first, a narrower width where a torsion or lateral mode
    binds, seeds until met, then the certified solve), no files written."""
    part, attempts, fidelity, narrowing = job
    start = parent["start"] if parent is not None else None
    t0 = time.perf_counter()
    bar_job = BarJob(
        note=part["target"]["fundamental"],
        folder="",
        part=part,
        design_fp="",
        redo_design=True,
        shop=None,
        shop_fp=None,
        fidelity=fidelity,
        attempts=attempts,
        max_narrowing=narrowing,
    )
    report = design_with_restarts(bar_job, start)
    return {
        "note": bar_job.note,
        "seconds": time.perf_counter() - t0,
        "solves": report.solves,
        "met": report.converged,
        "seed": report.seed,
        "narrowed": "narrowed" in report.message,
        "why": "" if report.converged else f"{report.message} | {'; '.join(report.binding)}",
        "warm": start is not None,
        "start": report.start_variables(),
    }


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--jobs", type=int, default=os.cpu_count() or 1)
    parser.add_argument("--attempts", type=int, default=None, help="default: the file's")
    parser.add_argument(
        "--profile", default="file", help="a profile forced on every bar; 'file' keeps the file's"
    )
    parser.add_argument("--file", type=Path, default=EXAMPLE)
    parser.add_argument("--fidelity", choices=("beam", "plane", "solid"), default="solid")
    args = parser.parse_args()

    spec, base = load_instrument(args.file)
    plan = plan_instrument(spec, base)
    attempts = args.attempts or plan.attempts
    parts = []
    for b in plan.bars:
        part = dict(b.part)
        if args.profile != "file":
            part["target"] = {**part["target"], "profile": args.profile}
        parts.append((part, attempts, args.fidelity, plan.max_narrowing))

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
        state += ", narrowed" if r["narrowed"] else ""
        how = "from neighbour" if r["warm"] else "searched"
        print(f"  {r['note']:>4}: {r['seconds']:6.2f} s, {r['solves']:5d} solves, {how}, {state}")
        if r["why"]:
            print(f"        {r['why']}")
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
