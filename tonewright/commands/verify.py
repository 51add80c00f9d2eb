"""``tonewright verify FILE``: check a bar (or a design's result.json) with the 3D solid model.

Modes up to 20 % above the highest target partial (or the beam model's fourth bending mode
when the file has no target), each named from its shape, compared with the beam model in cents,
with a warning where an unwanted mode lies in a target partial's critical band.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Annotated

import numpy as np
import typer
from rich import box
from rich.console import Console
from rich.table import Table

from tonewright.acoustics.pitch import critical_bandwidth_hz
from tonewright.cli_support import guarded
from tonewright.errors import InputError
from tonewright.fidelity import COARSE_SOLID, check_bar, top_face_nodes
from tonewright.forward import Bar, solve
from tonewright.forward.solid import SolidMesh, solid_modes
from tonewright.partfile import load_part
from tonewright.tuning import resolve

__all__ = ["register", "verify_part"]

MESHES = {"coarse": COARSE_SOLID, "standard": SolidMesh(), "fine": SolidMesh().refined(1.5)}


def verify_part(file: Path, mesh: str = "standard") -> dict:
    """3D modes of a bar against the beam model and the target; a JSON-ready dict."""
    part_file, base = load_part(file)
    part = part_file.to_part(base)
    if not isinstance(part, Bar):
        raise InputError("verify: the 3D model is for bars; tubes and strings use 'modes'")
    check_bar(part)
    table = part_file.design
    spec = part_file.material_spec(base)
    material = spec.to_solid(table.thickness_axis)
    beam = solve(part, {"bending": 6, "lateral": 3, "torsion": 4, "axial": 1}, tol_cents=0.01)
    targets = []
    if part_file.target is not None:
        resolved = resolve(part_file.target, spec.temp_coeff_cents_per_K)
        targets = [p for p in resolved.partials if p.family != "strike"]
    top = 1.2 * (max(p.f_hz for p in targets) if targets else beam.frequency("bending", 4))
    bar = part_file.bar
    try:
        res = solid_modes(
            part.length,
            bar.width,
            bar.thickness,
            part.thickness,
            material,
            fmax_hz=top,
            mesh=MESHES[mesh],
        )
    except ValueError as exc:
        raise InputError(f"verify: {exc}") from None
    beam_hz = {(m.family, m.order): m.frequency_hz for m in beam.modes}
    modes = []
    for k, m in enumerate(res.modes):
        b = beam_hz.get((m.family, m.order))
        nodes = top_face_nodes(res.coords, res.shapes[k]) if m.family == "bending" else []
        modes.append(
            {
                "family": m.family,
                "order": m.order,
                "frequency_hz": round(float(m.f_hz), 4),
                "nodes_mm": [round(x * 1e3, 2) for x in nodes],
                "beam_hz": None if b is None else round(b, 4),
                "beam_minus_3d_cents": None
                if b is None
                else round(float(1200 * np.log2(b / m.f_hz)), 2),
                "share": round(float(m.share), 3),
            }
        )
    rows, warnings = [], []
    solid_hz = {(m["family"], m["order"]): m["frequency_hz"] for m in modes}
    for p in targets:
        f = solid_hz.get((p.family, p.order))
        err = None if f is None else float(1200 * np.log2(f / p.f_hz))
        rows.append(
            {
                "family": p.family,
                "order": p.order,
                "target_hz": p.f_hz,
                "solid_hz": f,
                "error_cents": None if err is None else round(err, 3),
                "tolerance_cents": p.tolerance_cents,
                "within": bool(err is not None and abs(err) <= p.tolerance_cents),
            }
        )
        band = 0.5 * table.clearance_bands * float(critical_bandwidth_hz(p.f_hz))
        for m in modes:
            if (m["family"], m["order"]) == (p.family, p.order) or m["family"] == p.family:
                continue
            gap = abs(m["frequency_hz"] - p.f_hz)
            if table.coincidence_hz < gap < band:
                warnings.append(
                    f"{m['family']} {m['order']} at {m['frequency_hz']:.1f} Hz is {gap:.1f} Hz "
                    f"from the {p.family} {p.order} target ({p.f_hz:.1f} Hz); "
                    f"keep {band:.0f} Hz clear"
                )
    if part.holes:
        warnings.append("the 3D model leaves out the suspension holes")
    return {
        "modes": modes,
        "targets": rows,
        "warnings": warnings,
        "mesh": {"name": mesh, "dofs": int(res.n_dof), "status": res.message},
        "model": "3D orthotropic solid, 27-node hexahedra; beam: Timoshenko",
    }


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
        if not as_json:
            typer.echo("solving the 3D model (about a minute on the standard mesh)...", err=True)
        payload = verify_part(file, mesh)
        if as_json:
            typer.echo(json.dumps(payload, indent=2))
            return
        console = Console()
        table = Table(title=f"3D check of {file.name}", box=box.SIMPLE_HEAD)
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
        if payload["targets"] and not all(r["within"] for r in payload["targets"]):
            raise typer.Exit(code=1)
