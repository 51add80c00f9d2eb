"""``tonewright advise FILE``: what to cut next on a half-finished bar, from a tap.

FILE is the part as it is now: its [bar] profile holds the thickness measured with calipers
(or it is a design's part.toml / result.json), and its [target] table says what to tune to.
The measured partials come from a recording (``--wav``) or are typed in (``--partials``).
The workflow is ``tonewright.bench.advise_bar``; the numerics are in
``tonewright.optimizer.cutplan``.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Annotated, Any

import numpy as np
import typer
from rich import box
from rich.console import Console
from rich.table import Table

from tonewright.bench import AdviseRequest, advise_bar, min_thickness_of
from tonewright.cli_support import atomic_write_bytes, check_a4, guarded
from tonewright.errors import InputError
from tonewright.optimizer import Advice
from tonewright.partfile import load_part

__all__ = ["map_figure", "register"]

PALETTE = ("#1b6f8a", "#c0392b", "#7b4fa0", "#5a8f29", "#b5651d", "#444444")


def _where(step: dict[str, Any], length_mm: float) -> str:
    pos = step["positions_mm"]
    if len(pos) == 1 and abs(pos[0] - 0.5 * length_mm) < 1e-6:
        return f"{pos[0]:g} mid"
    return " & ".join(f"{x:g}" for x in pos)


def _print(console: Console, payload: dict[str, Any], length_mm: float) -> None:
    measured = Table(title=f"{payload['part']}: tap", box=box.SIMPLE_HEAD, title_justify="left")
    for col in ("measured Hz", "identified as", "model Hz", "cents"):
        measured.add_column(col, justify="left" if col == "identified as" else "right")
    for p in payload["measured"]:
        known = p["mode"] is not None
        measured.add_row(
            f"{p['frequency_hz']:.2f}",
            p["mode"] or "unidentified",
            f"{p['model_hz']:.2f}" if known else "",
            f"{p['residual_cents']:+.2f}" if known else "",
        )
    console.print(measured)
    m = payload["material"]
    g_note = "fitted" if m["G_fitted"] else "G/E ratio of the file's material kept"
    console.print(
        f"material fitted on the current shape: E = {m['E_GPa']:.4g} GPa "
        f"({m['E_change_percent']:+.1f} % on the file's), G = {m['G_GPa']:.4g} GPa "
        f"({m['G_change_percent']:+.1f} %, {g_note}), density {m['density_kg_m3']:g} kg/m^3 "
        "as given"
    )
    now = Table(title="Partials now", box=box.SIMPLE_HEAD, title_justify="left")
    for col in ("partial", "target Hz", "now Hz", "cents", "tolerance", "from"):
        now.add_column(col, justify="left" if col in ("partial", "from") else "right")
    for p in payload["partials"]:
        now.add_row(
            p["partial"],
            f"{p['target_hz']:.2f}",
            f"{p['now_hz']:.2f}",
            f"{p['now_cents']:+.2f}",
            f"±{p['tolerance_cents']:g}",
            p["from"],
        )
    console.print(now)
    if payload["steps"]:
        plan = Table(
            title="Next cuts on the bottom face: where = window centres, mm from the left end; "
            "depth, length and thinnest in mm (thinnest: inside the step's windows, once cut); "
            "partials after the step in cents from target",
            box=box.SIMPLE_HEAD,
            title_justify="left",
            pad_edge=False,
        )
        plan.add_column("step", justify="right")
        plan.add_column("where", no_wrap=True)
        plan.add_column("depth", justify="right")
        plan.add_column("length", justify="right", no_wrap=True)
        for p in payload["partials"]:
            plan.add_column(p["partial"], justify="right")
        plan.add_column("thinnest in cut", justify="right")
        for s in payload["steps"]:
            each = s["tool_width_mm"]
            length = f"2 x {each:g}" if len(s["windows_mm"]) == 2 else f"{s['length_mm']:g}"
            plan.add_row(
                str(s["step"]),
                _where(s, length_mm),
                f"{s['depth_mm']:.3f}",
                length,
                *[f"{r['cents']:+.2f}" for r in s["predicted"]],
                f"{s['thinnest_in_window_after_mm']:.2f}",
            )
        console.print(plan)
    console.print(payload["message"])
    short = payload["shortening"]
    if short is not None:
        raised = ", ".join(f"{r['partial']} {r['cents']:+.1f}" for r in short["predicted"])
        console.print(
            f"option: trim {short['trim_each_end_mm']:.1f} mm from each end (new length "
            f"{short['new_length_mm']:.1f} mm): partials then at {raised} cents; the nodes "
            "move, so check the suspension holes"
        )
    for note in payload["notes"]:
        console.print(f"note: {note}")
    if "a4_hz" in payload:
        console.print(f"target notes in equal temperament at A4 = {payload['a4_hz']:g} Hz")
    console.print(f"caution: {payload['caution']}")


def map_figure(advice: Advice, length_m: float):
    """Tuning map (cents per 0.1 mm against position) above the profile with the steps."""
    import matplotlib.pyplot as plt

    tmap = advice.plan.tuning_map
    fig, (ax, ax2) = plt.subplots(
        2, 1, figsize=(9, 6), sharex=True, gridspec_kw={"height_ratios": [2, 1]}
    )
    x_mm = tmap.positions_m * 1e3
    for i, (label, row) in enumerate(zip(tmap.labels, tmap.cents_per_tenth_mm, strict=True)):
        ax.plot(x_mm, row, color=PALETTE[i % len(PALETTE)], label=label, marker=".", ms=3)
    ax.axhline(0.0, color="black", linewidth=0.6)
    ax.set_ylabel("cents per 0.1 mm removed")
    ax.set_title(
        f"Tuning map: removal over {tmap.width_m * 1e3:g} mm centred at each position "
        "(below zero: lowers the partial)"
    )
    ax.legend(loc="lower left", frameon=False)
    ax.grid(alpha=0.3)
    x = np.linspace(0.0, length_m, 1201)
    h_mm = advice.bar.thickness(x) * 1e3
    top = float(np.max(h_mm))
    # side view, top face up: the undercut shows on the bottom face, as on the bench
    ax2.fill_between(x * 1e3, 0.0, h_mm, color="#d9c7a8", label="bar now")
    marks: dict[tuple[float, float], list[str]] = {}
    for k, step in enumerate(advice.plan.steps):
        for a, b in step.cut.windows_m:
            marks.setdefault((a, b), []).append(str(k + 1))
    for (a, b), names in marks.items():
        ax2.axvspan(a * 1e3, b * 1e3, color=PALETTE[1], alpha=0.2)
        ax2.text(0.5 * (a + b) * 1e3, 1.1 * top, ", ".join(names), ha="center", va="center")
    ax2.set_ylim(top * 1.2, 0.0)  # depth grows downward
    ax2.set_ylabel("depth below the top face (mm)")
    ax2.set_title("planned steps (numbered) on the bottom face", fontsize=9)
    ax2.set_xlabel("position from the left end (mm)")
    fig.tight_layout()
    return fig


def register(app: typer.Typer) -> None:
    """Add the ``advise`` command to ``app``."""

    @app.command("advise")
    @guarded
    def advise_cmd(
        file: Annotated[
            Path,
            typer.Argument(help="The bar as it is now (measured profile) with its [target]."),
        ],
        wav: Annotated[Path | None, typer.Option(help="Recording of a tap on the bar.")] = None,
        partials: Annotated[
            str | None, typer.Option(help='Measured partials in Hz, e.g. "262.1,1049.5,2617".')
        ] = None,
        as_json: Annotated[bool, typer.Option("--json", help="Print the advice as JSON.")] = False,
        step_depth: Annotated[
            float, typer.Option("--step-depth", help="Deepest single step, mm.")
        ] = 0.5,
        steps: Annotated[int, typer.Option("--steps", help="Steps to plan ahead.")] = 3,
        tool_width: Annotated[
            float, typer.Option("--tool-width", help="Width of the tool's pass, mm.")
        ] = 20.0,
        min_thickness: Annotated[
            float | None,
            typer.Option(
                "--min-thickness",
                help="Thinnest the bar may become, mm (default: [design] min_thickness, or "
                "20 % of the blank).",
            ),
        ] = None,
        one_sided: Annotated[
            bool,
            typer.Option("--one-sided", help="Single cuts instead of symmetric pairs."),
        ] = False,
        plot: Annotated[
            Path | None, typer.Option("--plot", help="Write the tuning map as a PNG.")
        ] = None,
        force: Annotated[
            bool, typer.Option("--force", help="Replace an existing --plot file.")
        ] = False,
        count: Annotated[int, typer.Option(help="Strongest partials taken from --wav.")] = 12,
        fmin: Annotated[float, typer.Option(help="Lowest frequency searched in --wav, Hz.")] = 20.0,
        a4: Annotated[
            float | None,
            typer.Option(
                "--a4",
                help="Pitch reference A4 in Hz for the target's notes (default: the "
                "[target] table's a4_hz, else 440).",
            ),
        ] = None,
    ) -> None:
        """Plan the next small cuts toward the target from a tap on a half-finished bar."""
        part_file, base = load_part(file)
        if a4 is not None and part_file.target is not None:
            check_a4(a4)
            target = part_file.target.model_copy(update={"a4_hz": a4})
            part_file = part_file.model_copy(update={"target": target})
        if part_file.bar is None:
            raise InputError(
                f"{file.name}: advise works on bars; this file holds a [{part_file.kind}]"
            )
        if plot is not None and plot.exists() and not force:
            raise InputError(f"--plot {plot} exists already; pass --force to replace it")
        request = AdviseRequest(
            part_file=part_file,
            base=base,
            title=part_file.title or file.stem,
            min_thickness_m=min_thickness_of(part_file, min_thickness),
            wav=wav,
            partials=partials,
            step_depth_mm=step_depth,
            steps=steps,
            tool_width_mm=tool_width,
            one_sided=one_sided,
            count=count,
            fmin=fmin,
        )
        report = advise_bar(request)
        if plot is not None:
            from tonewright.plots import figure_bytes

            fig = map_figure(report.advice, report.advice.bar.length)
            atomic_write_bytes(plot, figure_bytes(fig, "png"), overwrite=force)
        if as_json:
            typer.echo(json.dumps(dict(report.payload), indent=2))
        else:
            _print(Console(highlight=False), dict(report.payload), report.length_mm)
            if plot is not None:
                Console(highlight=False).print(f"wrote {plot}")
        for w in report.warnings:
            typer.echo(f"warning: {w}", err=True)
