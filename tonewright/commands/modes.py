"""``tonewright modes FILE``: the partials of a part, as a table or JSON."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Annotated

import typer
from rich import box
from rich.console import Console
from rich.table import Table

from tonewright.cli_support import guarded
from tonewright.errors import InputError
from tonewright.modes_report import modes_payload, solve_part, strike_payload

__all__ = ["register"]


def _table(payload: dict, title: str, node_rows: int) -> Table:
    table = Table(title=title, box=box.SIMPLE_HEAD)
    for name, justify in [
        ("family", "left"),
        ("n", "right"),
        ("Hz", "right"),
        ("ratio", "right"),
        ("note", "left"),
        ("cents", "right"),
        ("nodes (mm)", "left"),
    ]:
        table.add_column(name, justify=justify)
    for i, m in enumerate(payload["modes"]):
        nodes = ", ".join(f"{x:.1f}" for x in m["nodes_mm"]) if i < node_rows else ""
        table.add_row(
            m["family"],
            str(m["order"]),
            f"{m['frequency_hz']:.2f}",
            f"{m['ratio']:.3f}",
            m["note"],
            f"{m['cents']:+.1f}",
            nodes,
        )
    return table


def register(app: typer.Typer) -> None:
    @app.command("modes")
    @guarded
    def modes(
        file: Annotated[Path, typer.Argument(help="Part file (.toml) or design result (.json).")],
        count: Annotated[int, typer.Option("--count", "-n", help="Modes of each family.")] = 4,
        a4: Annotated[float, typer.Option("--a4", help="Pitch reference A4 in Hz.")] = 440.0,
        as_json: Annotated[bool, typer.Option("--json", help="Print JSON on stdout.")] = False,
        model: Annotated[
            str,
            typer.Option(
                help="auto: the 3D model that certifies designs for a bar of constant width "
                "(the beam otherwise); solid; beam (fast, labelled as such)."
            ),
        ] = "auto",
    ) -> None:
        """Compute the partials of a bar, tube or string: frequency, ratio, note and nodes."""
        if not 1 <= count <= 50:
            raise InputError(f"--count {count}: give 1 to 50 modes per family")
        if not 300.0 <= a4 <= 600.0:
            raise InputError(f"--a4 {a4}: give the pitch reference in Hz (e.g. 440 or 442)")
        solved = solve_part(file, count, model)
        result, title = solved.result, solved.title
        payload = modes_payload(result, a4)
        if solved.kind == "tube":
            payload["strike_note"] = strike_payload(result, a4)
        if as_json:
            typer.echo(json.dumps(payload, indent=2))
            return
        console = Console()
        console.print(_table(payload, title, node_rows=len(payload["modes"])))
        console.print(f"model: {result.model}" + "".join(f"; {n}" for n in result.notes))
        if "strike_note" in payload:
            s = payload["strike_note"]
            console.print(
                f"strike note (the pitch a chime is heard at, an octave below bending 4): "
                f"{s['frequency_hz']:.2f} Hz, {s['note']} {s['cents']:+.1f} cents",
                markup=False,
            )
        console.print(
            f"ratio: to the first bending (or string) mode; notes at A4 = {a4:g} Hz; "
            f"{result.message}.",
            markup=False,
        )
        console.print("notes: equal temperament, note name and cents from it", markup=False)
        if solved.a4_hz is not None and abs(solved.a4_hz - a4) > 1e-9:
            console.print(
                f"note: the part's [target] is referred to A4 = {solved.a4_hz:g} Hz; pass "
                f"--a4 {solved.a4_hz:g} to read the notes the same way",
                markup=False,
            )
        if not result.converged:
            raise typer.Exit(code=1)
