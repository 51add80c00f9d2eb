"""``tonewright design FILE --out DIR``: find the undercut (or length, wall, density) that puts
a part's partials on its target, then write the part, a result file and figures."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer
from rich import box
from rich.console import Console
from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn
from rich.table import Table

from tonewright.cli_support import guarded
from tonewright.design import DesignReport, build_problem, design_report
from tonewright.design_files import (
    OUTPUTS,
    check_out_dir,
    summary_text,
    tail_lines,
    unwanted_lines,
    write_design,
)
from tonewright.errors import InputError
from tonewright.optimizer import exit_code
from tonewright.partfile import load_part

__all__ = ["OUTPUTS", "print_report", "register"]

STAGE_NAMES = {"search": "searching", "polish": "polishing", "correct": "checking 2D/3D"}


def print_report(console: Console, report: DesignReport, out: Path) -> None:
    table = Table(title="Design result", box=box.SIMPLE_HEAD)
    for name in ("partial", "target Hz", "achieved Hz", "error (cents)", "tolerance", "by"):
        table.add_column(name, justify="right" if name != "partial" else "left")
    for p in report.partials:
        table.add_row(
            p.label,
            f"{p.target_hz:.2f}",
            f"{p.achieved_hz:.2f}",
            f"{p.error_cents:+.3f}",
            f"{p.tolerance_cents:g}",
            p.certified_by,
        )
    console.print(table)
    for line in unwanted_lines(report):
        console.print(line, markup=False)
    console.print("  " + summary_text(report.summary), markup=False)
    if report.nodes_mm:
        console.print("  mode-1 nodes (mm): " + ", ".join(f"{x:.1f}" for x in report.nodes_mm))
    verdict = (
        "[green]meets the target[/green]" if report.converged else "[red]target out of reach[/red]"
    )
    console.print(f"{verdict}: {report.message}")
    for line in tail_lines(report, out):
        console.print(line, markup=False)


def register(app: typer.Typer) -> None:
    @app.command("design")
    @guarded
    def design_cmd(
        file: Annotated[
            Path, typer.Argument(help="Part file with [target] (and [design]) tables.")
        ],
        out: Annotated[Path, typer.Option("--out", "-o", help="Folder for the results.")],
        seed: Annotated[
            int | None, typer.Option("--seed", help="Random seed (runs repeat).")
        ] = None,
        force: Annotated[
            bool, typer.Option("--force", help="Replace results already in --out.")
        ] = False,
        fidelity: Annotated[
            str | None,
            typer.Option(
                help="Model that certifies a bar: solid (default: 3D, torsion and lateral "
                "modes included), plane (2D profile, bending only) or beam."
            ),
        ] = None,
        beam_only: Annotated[
            bool,
            typer.Option(
                "--beam-only",
                help="Skip the 2D/3D correction (fast; can be tens of cents off in 3D).",
            ),
        ] = False,
    ) -> None:
        """Design the undercut (or length, wall, density) that meets a target profile."""
        if seed is not None and seed < 0:
            raise InputError(f"--seed {seed}: give a whole number 0 or more")
        if fidelity is not None and fidelity not in ("beam", "plane", "solid"):
            raise InputError(f"--fidelity {fidelity!r}: choose beam, plane or solid")
        part_file, base = load_part(file)
        problem = build_problem(part_file, base, seed)
        check_out_dir(out, force=force)  # refuse before the search, not after it
        budget = problem.table.budget
        with Progress(
            TextColumn("[bold]{task.description}"),
            BarColumn(),
            TextColumn("{task.fields[info]}"),
            TimeElapsedColumn(),
            console=Console(stderr=True),
            transient=True,
        ) as bar:
            task = bar.add_task("searching", total=budget, info="")

            def progress(stage: str, solves: int, worst: float) -> None:
                bar.update(
                    task,
                    completed=min(solves, budget),
                    description=STAGE_NAMES.get(stage, stage),
                    info=f"{solves} solves, worst partial {worst:.2f} cents",
                )

            report = design_report(problem, progress, "beam" if beam_only else fidelity)
        write_design(report, out, force=force)
        print_report(Console(), report, out)
        code = exit_code(report.status)
        if code:
            raise typer.Exit(code=code)
