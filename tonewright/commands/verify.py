"""``tonewright verify FILE``: check a bar (or a design's result.json) with the 3D solid model.

Modes up to 20 % above the highest target partial (or the beam model's fourth bending mode
when the file has no target), each named from its shape, compared with the beam model in cents,
with a warning where an unwanted mode lies in a target partial's critical band. The check is
``tonewright.fidelity.verify_part``; this command parses, calls and prints.
"""

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
from tonewright.fidelity import MESHES, verify_part
from tonewright.partfile import load_part

__all__ = ["print_verification", "register"]


def print_verification(console: Console, payload: dict, name: str) -> None:
    table = Table(title=f"3D check of {name}", box=box.SIMPLE_HEAD)
    for col in ("family", "n", "3D Hz", "beam Hz", "beam - 3D (cents)", "nodes (mm)"):
        table.add_column(col, justify="left" if col in ("family", "nodes (mm)") else "right")
    for m in payload["modes"]:
        table.add_row(
            m["family"],
            str(m["order"]),
            f"{m['frequency_hz']:.2f}",
            "" if m["beam_hz"] is None else f"{m['beam_hz']:.2f}",
            "" if m["beam_minus_3d_cents"] is None else f"{m['beam_minus_3d_cents']:+.1f}",
            ", ".join(f"{x:.1f}" for x in m["nodes_mm"]),
        )
    console.print(table)
    for r in payload["targets"]:
        state = "ok" if r["within"] else "OFF"
        shown = (
            "missing"
            if r["solid_hz"] is None
            else f"{r['solid_hz']:.2f} Hz, {r['error_cents']:+.2f} cents"
        )
        console.print(
            f"  target {r['family']} {r['order']} {r['target_hz']:.2f} Hz: {shown} ({state})"
        )
    for w in payload["warnings"]:
        console.print(f"  warning: {w}")
    console.print(f"  mesh {payload['mesh']['name']}, {payload['mesh']['dofs']} unknowns")


def register(app: typer.Typer) -> None:
    @app.command("verify")
    @guarded
    def verify(
        file: Annotated[Path, typer.Argument(help="Part file (.toml) or design result (.json).")],
        mesh: Annotated[
            str, typer.Option(help="coarse (~1 cent), standard (<0.5 cent), fine.")
        ] = "standard",
        as_json: Annotated[bool, typer.Option("--json", help="Print JSON on stdout.")] = False,
    ) -> None:
        """Check a bar with the 3D solid model: modes by family, against the beam and target."""
        if mesh not in MESHES:
            raise InputError(f"--mesh {mesh!r}: choose coarse, standard or fine")
        part_file, base = load_part(file)
        if not as_json:
            typer.echo("solving the 3D model (about a minute on the standard mesh)...", err=True)
        payload = verify_part(part_file, base, part_file.design, mesh)
        if as_json:
            typer.echo(json.dumps(payload, indent=2))
            return
        print_verification(Console(), payload, file.name)
        if payload["targets"] and not all(r["within"] for r in payload["targets"]):
            raise typer.Exit(code=1)
