"""``tonewright instrument FILE --out DIR``: design every bar of an instrument in parallel and
write each bar's design and shop files, a summary, plots, a cut list of blanks and the lengths
of the resonator tubes. The run itself (resuming, the worker pool, the bar folders) is
``tonewright.instrument_run``; this command parses, calls, prints and writes."""

from __future__ import annotations

from collections.abc import Sequence
from pathlib import Path
from typing import Annotated

import typer
from rich import box
from rich.console import Console
from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn
from rich.table import Table

from tonewright.cli_support import guarded
from tonewright.design import UNWANTED_CAVEAT
from tonewright.instrument_run import (
    CAUTION,
    FINGERPRINT,
    MANIFEST,
    BarRow,
    InstrumentReport,
    bar_fingerprint,
    cut_list_csv,
    plan_run,
    run_instrument,
    shop_fingerprint,
    summary_csv,
    write_instrument,
)

__all__ = [
    "FINGERPRINT",
    "MANIFEST",
    "bar_fingerprint",
    "cut_list_csv",
    "print_table",
    "register",
    "shop_fingerprint",
    "summary_csv",
]


def _fmt(value: float | None, digits: int) -> str:
    return "" if value is None else f"{value:.{digits}f}"


def _short(partial: dict) -> str:
    """ "B1" for bending 1, "S" for a strike note."""
    family = str(partial.get("family", "?"))
    return "S" if family == "strike" else f"{family[0].upper()}{partial.get('order', '')}"


def print_table(console: Console, rows: Sequence[BarRow]) -> None:
    """The summary, compact enough for 80 columns: full figures are in summary.csv."""
    table = Table(title="Instrument", box=box.SIMPLE_HEAD, padding=(0, 0, 0, 1), pad_edge=False)
    table.add_column("note", no_wrap=True)
    table.add_column("f1 Hz", justify="right", no_wrap=True)
    # one column per tuned partial, headed by its name (bars of a range tune 1 to 3 each)
    labels: list[str] = []
    for r in rows:
        for p in r.partials:
            name = _short(p)
            if name not in labels:
                labels.append(name)
    for name in labels:
        table.add_column(name, justify="right", no_wrap=True)
    for name in ("length", "deepest", "thinnest"):
        table.add_column(name, justify="right", no_wrap=True)
    table.add_column("nearest", no_wrap=True)
    table.add_column("status", no_wrap=True)
    for r in rows:
        nearest = ""
        if r.nearest_mode:
            m = r.nearest_mode
            nearest = f"{m['family'][0].upper()}{m['order']} {m['gap_hz']:.0f} Hz"
        colour = "green" if r.status == "met" else "red"
        cents = {_short(p): f"{p['error_cents']:+.1f}" for p in r.partials}
        table.add_row(
            r.note,
            f"{r.partials[0]['target_hz']:.2f}" if r.partials else "",
            *(cents.get(name, "") for name in labels),
            _fmt(r.length_mm, 1),
            _fmt(r.max_depth_mm, 1),
            _fmt(r.min_thickness_mm, 1),
            nearest,
            f"[{colour}]{r.status}[/{colour}]",
        )
    console.print(table)
    console.print(
        "  lengths in mm; B1, B2, ...: cents of each tuned bending partial from its target "
        "(empty: not tuned on that bar); nearest: the torsional "
        "(T) or lateral (L) mode nearest a tuned partial, and how far from it, by the "
        f"{UNWANTED_CAVEAT}"
    )
    for r in rows:
        if r.status != "met":
            console.print(f"  {r.note}: {r.message}")


def print_schedule(console: Console, report: InstrumentReport) -> None:
    """The blanks the tool chose from [stock], and why (nothing without a [stock] table)."""
    schedule = report.plan.schedule
    if not schedule:
        return
    table = Table(title="Blanks sized from stock (mm)", box=box.SIMPLE_HEAD, padding=(0, 0, 0, 1))
    for name in ("note", "length", "width", "thickness", "why"):
        table.add_column(name, justify="left" if name in ("note", "why") else "right")
    for c in schedule:
        why = c.explanation if c.reachable else "; ".join((*c.binding, c.advice))
        table.add_row(
            c.note,
            f"{c.length * 1e3:.1f}",
            f"{c.width * 1e3:.1f}",
            f"{c.thickness * 1e3:.1f}",
            why,
        )
    console.print(table)


def print_report(console: Console, report: InstrumentReport, out: Path) -> None:
    print_schedule(console, report)
    print_table(console, report.rows)
    console.print(
        f"{report.met} of {len(report.rows)} bars meet their targets; designed "
        f"{len(report.designed)}, reused {len(report.reused)}; wrote {out}"
    )
    if report.stale:
        console.print(f"  folders of bars no longer in the instrument: {', '.join(report.stale)}")
    console.print(f"  {CAUTION}")


def register(app: typer.Typer) -> None:
    @app.command("instrument")
    @guarded
    def instrument_cmd(
        file: Annotated[Path, typer.Argument(help="Instrument file (TOML).")],
        out: Annotated[Path, typer.Option("--out", "-o", help="Folder for the results.")],
        jobs: Annotated[
            int | None, typer.Option("--jobs", "-j", help="Bars designed at once (default: cores).")
        ] = None,
        shop: Annotated[
            bool, typer.Option("--shop/--no-shop", help="Draw templates, drawings, DXF, cuts.")
        ] = True,
        gcode: Annotated[
            bool, typer.Option("--gcode", help="Also write router G-code (6 mm ball end).")
        ] = False,
        paper: Annotated[str, typer.Option(help="Paper for templates: A4, A3, Letter...")] = "A4",
        fidelity: Annotated[
            str | None,
            typer.Option(help="Model that certifies each bar: beam, plane or solid."),
        ] = None,
        force: Annotated[
            bool, typer.Option("--force", help="Redo every bar and replace files in --out.")
        ] = False,
    ) -> None:
        """Design every bar of an instrument in parallel; resume where a run stopped."""
        run = plan_run(
            file,
            out,
            jobs=jobs,
            force=force,
            shop=shop,
            gcode=gcode,
            paper=paper,
            fidelity=fidelity,
            progress=lambda text: typer.echo(f"blanks: {text}", err=True),
        )
        with Progress(
            TextColumn("[bold]designing bars"),
            BarColumn(),
            MofNCompleteColumn(),
            TextColumn("{task.fields[info]}"),
            TimeElapsedColumn(),
            console=Console(stderr=True),
            transient=True,
        ) as bar:
            task = bar.add_task("bars", total=len(run.work), info="")
            try:
                report = run_instrument(
                    run, lambda note: bar.update(task, advance=1, info=f"last: {note}")
                )
            except KeyboardInterrupt:
                typer.echo(
                    "interrupted: finished bars are kept; run the same command again to continue",
                    err=True,
                )
                raise typer.Exit(code=130) from None
        write_instrument(report, Path(out))
        print_report(Console(), report, Path(out))
        if report.exit_code:
            raise typer.Exit(code=report.exit_code)
