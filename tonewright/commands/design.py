"""``tonewright design FILE --out DIR``: find the undercut (or length, wall, density) that puts
a part's partials on its target, then write the part, a result file and figures."""

from __future__ import annotations

import json
from collections.abc import Mapping
from pathlib import Path
from typing import Annotated, Any

import numpy as np
import tomli_w
import typer
from rich import box
from rich.console import Console
from rich.progress import BarColumn, Progress, TextColumn, TimeElapsedColumn
from rich.table import Table

from tonewright.cli_support import atomic_write_bytes, atomic_write_text, guarded, prepare_out_dir
from tonewright.design import (
    achieved,
    build_problem,
    certify,
    fidelity_of,
    part_table,
    run_design,
)
from tonewright.errors import InputError
from tonewright.forward import Bar
from tonewright.partfile import load_part, parse_part
from tonewright.plots import figure_bytes, profile_figure, spectrum_figure

__all__ = ["OUTPUTS", "UNWANTED_CAVEAT", "register", "write_design"]

OUTPUTS = ["part.toml", "result.json", "profile.png", "profile.svg", "spectrum.png", "spectrum.svg"]

CAUTION = (
    "Before cutting: material cannot be put back. Rough-cut a few cents sharp, tap, and "
    "approach the target in small steps. Use guards and dust extraction (many tonewood dusts "
    "are sensitisers), eye and hearing protection, and follow your machine's manual."
)


# measured with 'verify' on demo-sized bars 50 and 60 mm wide: the beam's first two torsion
# modes 162-304 cents below the 3D model's, its lateral modes 79-145 cents above (README)
UNWANTED_CAVEAT = (
    "beam model; on an undercut bar its torsion and lateral modes can be 80-300 cents off, "
    "so check them in 3D with 'tonewright verify' before cutting"
)


UNWANTED_3D = "3D model: the beam's modes scaled to the 3D solve of this very design"


def _unwanted_model(outcome) -> str:
    """Which model judged the clearance of the unwanted modes in this outcome."""
    if outcome.stages and outcome.stages[-1][0].model == "solid":
        if outcome.stages[-1][1].steps[-1].clear is not None:
            return UNWANTED_3D
    return UNWANTED_CAVEAT


def _json_ready(obj: Any) -> Any:
    if isinstance(obj, dict):
        return {k: _json_ready(v) for k, v in obj.items()}
    if isinstance(obj, list | tuple):
        return [_json_ready(v) for v in obj]
    if isinstance(obj, np.floating | np.integer):
        return obj.item()
    return obj


def write_design(
    file: Path,
    out: Path,
    seed: int | None,
    force: bool,
    console: Console,
    fidelity: str | None = None,
    start: Mapping[str, float] | None = None,
) -> int:
    """Run a design and write its outputs; returns the exit code (0 met, 1 out of reach).

    ``start``: the design variables of a similar part (``result.json``'s ``design.variables``,
    e.g. a neighbouring bar's) to polish first; ignored unless the variables are the same."""
    part_file, base = load_part(file)
    problem = build_problem(part_file, base, seed)
    fidelity = fidelity_of(problem, fidelity)
    names = list(problem.space.names())
    u0 = None
    if start is not None and list(start) == names:
        u0 = np.array([float(start[k]) for k in names])
    out = prepare_out_dir(out, OUTPUTS, force=force)
    with Progress(
        TextColumn("[bold]{task.description}"),
        BarColumn(),
        TextColumn("{task.fields[info]}"),
        TimeElapsedColumn(),
        console=Console(stderr=True),
        transient=True,
    ) as bar:
        task = bar.add_task("searching", total=problem.table.budget, info="")

        names = {"search": "searching", "polish": "polishing", "correct": "checking 2D/3D"}

        def progress(stage: str, solves: int, worst: float) -> None:
            bar.update(
                task,
                completed=min(solves, problem.table.budget),
                description=names.get(stage, stage),
                info=f"{solves} solves, worst partial {worst:.2f} cents",
            )

        outcome = run_design(problem, progress, fidelity, u0)
    result = outcome.result

    table = part_table(problem, result.u)
    written = parse_part(table, where="designed part")  # the file must be a valid part file
    part = written.to_part(base)
    modal = certify(problem, part)
    rows = achieved(problem, modal)
    certifier = f"beam model ({part_file.model.theory})"
    for r in rows:
        r["beam_hz"] = r["achieved_hz"]
        r["certified_by"] = certifier
    if outcome.stages:
        stage, corrected = outcome.stages[-1]
        last = corrected.steps[-1]
        for r, f in zip(rows, last.high_fidelity_hz, strict=True):
            r["achieved_hz"] = float(f)
            r["error_cents"] = float(1200 * np.log2(f / r["target_hz"]))
            r["certified_by"] = stage.label
    within = all(abs(r["error_cents"]) <= r["tolerance_cents"] for r in rows)
    converged = bool(outcome.converged and within)
    first = "bending" if modal.family("bending") else "transverse"
    nodes = [x * 1e3 for x in modal.family(first)[0].nodes_m]
    unwanted = [
        {
            "family": m.family,
            "order": m.order,
            "frequency_hz": m.f_hz,
            "nearest_partial": m.nearest_goal,
            "gap_hz": m.gap_hz,
            "keep_clear_hz": m.band_hz,
            "clear": m.clear,
        }
        for m in result.evaluation.unwanted
    ]
    message = outcome.message
    status = result.status if not outcome.stages else (0 if outcome.converged else 1)
    if outcome.converged and not within:
        message = "the certified solve of the written part misses the tolerance"
        status = 1
    payload = {
        "part": table,
        "partials": rows,
        "converged": converged,
        "status": status,
        "message": message,
        "binding_limits": list(result.binding),
        # partials are followed by order within their family and confirmed by shape (MAC)
        "modes_tracked_by_shape": bool(result.evaluation.mac_ok),
        "unwanted_modes": unwanted,
        "unwanted_modes_model": _unwanted_model(outcome),
        "mode1_nodes_mm": nodes,
        "design": {
            "variables": dict(zip(problem.space.names(), map(float, result.u), strict=True)),
            "summary": problem.space.describe(result.u),
            "seed": problem.table.seed,
            "forward_solves": result.solves,
        },
        "certified_by": (outcome.stages[-1][0].label if outcome.stages else certifier)
        + f"; beam model converged to {modal.max_error_cents:.2g} cent",
        "fidelity": fidelity,
        "corrections": [
            {
                "model": stage.label,
                "steps": [
                    {
                        "beam_hz": [float(v) for v in st.beam_hz],
                        "model_hz": [float(v) for v in st.high_fidelity_hz],
                        "errors_cents": [float(v) for v in st.errors_cents],
                    }
                    for st in corrected.steps
                ],
            }
            for stage, corrected in outcome.stages
        ],
        "caution": CAUTION,
    }
    atomic_write_text(
        out / "part.toml", _toml_header(payload) + tomli_w.dumps(_json_ready(table)), overwrite=True
    )
    atomic_write_text(
        out / "result.json", json.dumps(_json_ready(payload), indent=2), overwrite=True
    )
    _write_figures(out, problem, part, modal, rows, nodes)
    _print_summary(console, payload, out)
    return 0 if converged else 1


def _toml_header(payload: dict) -> str:
    state = "meets its target" if payload["converged"] else "DOES NOT meet its target"
    return (
        f"# Designed by tonewright: {state} ({payload['message']}).\n"
        f"# {payload['certified_by']}.\n"
        "# Lengths in mm. " + payload["caution"] + "\n\n"
    )


def _write_figures(out: Path, problem, part, modal, rows, nodes) -> None:
    modes = [(m.family, m.order, m.frequency_hz) for m in modal.modes]
    top = 1.35 * max(r["achieved_hz"] for r in rows)
    modes = [m for m in modes if m[2] <= top]
    targets = [
        (
            f"{r['family']} {r['order']}" if r["family"] != "strike" else "strike",
            r["target_hz"],
            r["tolerance_cents"],
        )
        for r in rows
    ]
    title = "Computed partials (stems) against targets (dotted)"
    for fmt in ("png", "svg"):
        fig = spectrum_figure(modes, targets, title=title)
        atomic_write_bytes(out / f"spectrum.{fmt}", figure_bytes(fig, fmt), overwrite=True)
    x = np.linspace(0.0, part.length, 801)
    if isinstance(part, Bar):
        t0 = problem.part_file.bar.thickness * 1e3
        h = part.thickness(x) * 1e3
        holes = [
            (
                hh.x * 1e3,
                hh.diameter * 1e3,
                (hh.height or 0.5 * float(part.thickness(np.array([hh.x]))[0])) * 1e3,
            )
            for hh in part.holes
        ]
        make = lambda: profile_figure(x * 1e3, h, t0, nodes, holes)  # noqa: E731
    else:
        shape = modal.modes[0].shape(x)
        make = lambda: _shape_figure(x * 1e3, shape, nodes)  # noqa: E731
    for fmt in ("png", "svg"):
        atomic_write_bytes(out / f"profile.{fmt}", figure_bytes(make(), fmt), overwrite=True)


def _shape_figure(x_mm, shape, nodes):
    import matplotlib.pyplot as plt

    fig, ax = plt.subplots(figsize=(9, 3.2))
    ax.plot(x_mm, shape, color="#1b6f8a")
    for xn in nodes:
        ax.axvline(xn, color="#1b6f8a", linestyle="--", linewidth=0.8)
    ax.axhline(0, color="black", linewidth=0.5)
    ax.set_xlabel("position (mm)")
    ax.set_ylabel("first mode shape")
    fig.tight_layout()
    return fig


def _print_summary(console: Console, payload: dict, out: Path) -> None:
    table = Table(title="Design result", box=box.SIMPLE_HEAD)
    for name in ("partial", "target Hz", "achieved Hz", "error (cents)", "tolerance", "by"):
        table.add_column(name, justify="right" if name != "partial" else "left")
    for r in payload["partials"]:
        label = "strike note" if r["family"] == "strike" else f"{r['family']} {r['order']}"
        table.add_row(
            label,
            f"{r['target_hz']:.2f}",
            f"{r['achieved_hz']:.2f}",
            f"{r['error_cents']:+.3f}",
            f"{r['tolerance_cents']:g}",
            r["certified_by"],
        )
    console.print(table)
    near = sorted(payload["unwanted_modes"], key=lambda m: m["gap_hz"] / m["keep_clear_hz"])[:3]
    if near:
        console.print(f"  unwanted modes ({payload['unwanted_modes_model']}):")
    in_3d = payload["unwanted_modes_model"].startswith("3D")
    for m in near:
        flag = ("clear in 3D" if in_3d else "clear in the beam model") if m["clear"] else "TOO NEAR"
        console.print(
            f"  {m['family']} {m['order']} at {m['frequency_hz']:.1f} Hz: "
            f"{m['gap_hz']:.1f} Hz from {m['nearest_partial']} "
            f"(keep {m['keep_clear_hz']:.0f} Hz clear): {flag}"
        )
    summary = payload["design"]["summary"]
    console.print("  " + ", ".join(f"{k.replace('_', ' ')} {v:.2f}" for k, v in summary.items()))
    if payload["mode1_nodes_mm"]:
        console.print(
            "  mode-1 nodes (mm): " + ", ".join(f"{x:.1f}" for x in payload["mode1_nodes_mm"])
        )
    verdict = (
        "[green]meets the target[/green]"
        if payload["converged"]
        else "[red]target out of reach[/red]"
    )
    console.print(f"{verdict}: {payload['message']}")
    if payload["binding_limits"]:
        console.print("  limits that bind: " + "; ".join(payload["binding_limits"]))
    console.print(
        f"  {payload['certified_by']}; {payload['design']['forward_solves']} forward solves"
    )
    console.print(f"  wrote {out}/part.toml, result.json, profile.png/svg, spectrum.png/svg")
    console.print(f"  {payload['caution']}")


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
            typer.Option(help="Model that certifies a bar: beam, plane (default) or solid (3D)."),
        ] = None,
        beam_only: Annotated[
            bool, typer.Option("--beam-only", help="Skip the 2D/3D correction (fast, rough).")
        ] = False,
    ) -> None:
        """Design the undercut (or length, wall, density) that meets a target profile."""
        if seed is not None and seed < 0:
            raise InputError(f"--seed {seed}: give a whole number 0 or more")
        if fidelity is not None and fidelity not in ("beam", "plane", "solid"):
            raise InputError(f"--fidelity {fidelity!r}: choose beam, plane or solid")
        code = write_design(file, out, seed, force, Console(), "beam" if beam_only else fidelity)
        if code:
            raise typer.Exit(code=code)
