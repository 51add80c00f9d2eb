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
from tonewright.fidelity import MESHES, VERIFY_MODELS, verify_part
from tonewright.partfile import load_part

__all__ = ["print_verification", "register"]


def print_verification(console: Console, payload: dict, name: str) -> None:
    table = Table(title=f"3D check of {name}", box=box.SIMPLE_HEAD)
    estimated = any("error_cents" in m for m in payload["modes"])
    cols = ["family", "n", "3D Hz"] + (["3D error (cents)"] if estimated else [])
    cols += ["beam Hz", "beam - 3D (cents)", "nodes (mm)"]
    for col in cols:
        table.add_column(col, justify="left" if col in ("family", "nodes (mm)") else "right")
    for m in payload["modes"]:
        row = [m["family"], str(m["order"]), f"{m['frequency_hz']:.2f}"]
        if estimated:
            e = m.get("error_cents")
            row.append("" if e is None else f"<{e:.2g}")
        row += [
            "" if m["beam_hz"] is None else f"{m['beam_hz']:.2f}",
            "" if m["beam_minus_3d_cents"] is None else f"{m['beam_minus_3d_cents']:+.1f}",
            ", ".join(f"{x:.1f}" for x in m["nodes_mm"]),
        ]
        table.add_row(*row)
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
    info = payload["mesh"]
    line = f"  model: {payload['model']}; mesh {info['name']}, {info['dofs']} unknowns"
    if info.get("max_error_cents") is not None:
        line += f"; error estimate under {info['max_error_cents']:.2g} cent"
    console.print(line)


def register(app: typer.Typer) -> None:
    @app.command("verify")
    @guarded
    def verify(
        file: Annotated[Path, typer.Argument(help="Part file (.toml) or design result (.json).")],
        model: Annotated[
            str,
            typer.Option(
                help="psolid: the p-version 3D model that certifies designs (about a second, "
                "with an error estimate per mode); hex27: the 27-node 3D model, a slow "
                "independent cross-check."
            ),
        ] = "psolid",
        mesh: Annotated[
            str,
            typer.Option(help="hex27 only: coarse (~1 cent), standard (<0.5 cent), fine."),
        ] = "standard",
        as_json: Annotated[bool, typer.Option("--json", help="Print JSON on stdout.")] = False,
    ) -> None:
        """Check a bar with the 3D solid model: modes by family, against the beam and target."""
        if model not in VERIFY_MODELS:
            raise InputError(f"--model {model!r}: choose psolid or hex27")
        if mesh not in MESHES:
            raise InputError(f"--mesh {mesh!r}: choose coarse, standard or fine")
        part_file, base = load_part(file)
        if not as_json:
            wait = "a few seconds" if model == "psolid" else "about a minute, standard mesh"
            typer.echo(f"solving the 3D model ({wait})...", err=True)
        payload = verify_part(part_file, base, part_file.design, mesh, model)
        if as_json:
            typer.echo(json.dumps(payload, indent=2))
            return
        print_verification(Console(), payload, file.name)
        if payload["targets"] and not all(r["within"] for r in payload["targets"]):
            raise typer.Exit(code=1)
