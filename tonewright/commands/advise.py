"""``tonewright advise FILE``: what to cut next on a half-finished bar, from a tap.

FILE is the part as it is now: its [bar] profile holds the thickness measured with calipers
(or it is a design's part.toml / result.json), and its [target] table says what to tune to.
The measured partials come from a recording (``--wav``) or are typed in (``--partials``).
The numerics are in ``tonewright.advise``.
"""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Annotated, Any

import numpy as np
import typer
from rich import box
from rich.console import Console
from rich.table import Table

from tonewright.advise import CENTS_PER_LN, Advice, Step, advise
from tonewright.audio import read_tap
from tonewright.cli_support import atomic_write_bytes, guarded, parse_partials
from tonewright.errors import InputError
from tonewright.forward import Bar, Material
from tonewright.optimizer import Goal
from tonewright.partfile import PartFile, load_part
from tonewright.tap import find_partials
from tonewright.tuning import resolve

__all__ = ["CAUTION", "advice_payload", "goals_of", "map_figure", "register"]

CAUTION = (
    "Material cannot be put back: cut no deeper than advised, tap after each step and run "
    "advise again with the new measurements. Use guards and dust extraction (many tonewood "
    "dusts are sensitisers), eye and hearing protection; on a CNC, check the program in a "
    "simulator and air-cut first; follow your machine's manual and local practice."
)
DEFAULT_MIN_SHARE = 0.2  # minimum thickness, as a share of the blank, when the file gives none
PALETTE = ("#1b6f8a", "#c0392b", "#7b4fa0", "#5a8f29", "#b5651d", "#444444")


def goals_of(part_file: PartFile, base: Path | None) -> tuple[Goal, ...]:
    """The tuned partials of the file's [target] table, in Hz."""
    if part_file.target is None:
        raise InputError("the part file has no [target] table: say what to tune to")
    spec = part_file.material_spec(base)
    coeff = spec.temp_coeff_cents_per_K if spec is not None else None
    target = resolve(part_file.target, material_temp_coeff=coeff)
    if target.kind == "strike":
        raise InputError(
            f"target.profile {target.name!r} is a strike-note target (chimes, tubes); advise "
            "tunes the partials of a bar: give ratios, cents, notes or a partials profile"
        )
    return tuple(Goal(p.family, p.order, p.f_hz, p.tolerance_cents) for p in target.partials)


def _min_thickness(part_file: PartFile, option_mm: float | None) -> float:
    t0 = part_file.bar.thickness
    if option_mm is not None:
        if not (math.isfinite(option_mm) and 0 < option_mm * 1e-3 < t0):
            raise InputError(
                f"--min-thickness {option_mm:g}: give mm above 0 and under the blank thickness "
                f"{t0 * 1e3:g} mm"
            )
        return option_mm * 1e-3
    table = part_file.design
    value = table.min_thickness if table.min_thickness is not None else DEFAULT_MIN_SHARE * t0
    if value >= t0:
        raise InputError(
            f"design.min_thickness {value * 1e3:g} mm must be under the blank thickness "
            f"{t0 * 1e3:g} mm"
        )
    return value


def _measure(
    wav: Path | None, partials: str | None, count: int, fmin: float
) -> tuple[np.ndarray, np.ndarray | None, list[str]]:
    if (wav is None) == (partials is None):
        raise InputError("--wav/--partials: give one of them (a recording, or typed Hz)")
    if partials is not None:
        return parse_partials(partials), None, []
    if not 1 <= count <= 50:
        raise InputError(f"--count {count}: give 1 to 50 partials")
    recording = read_tap(wav)
    tap = find_partials(recording.samples, recording.rate, count=count, fmin=fmin)
    if not tap.partials:
        raise InputError(f"--wav {wav}: no partials found in the recording")
    f = np.array([p.frequency_hz for p in tap.partials])
    sd = CENTS_PER_LN * np.array([p.frequency_uncertainty_hz for p in tap.partials]) / f
    sd = np.where(np.isfinite(sd) & (sd > 0), sd, np.nan)
    return f, sd, [*recording.warnings, *tap.warnings]


# ---------------------------------------------------------------------------------------------
# Output


def _mm(v: float, digits: int = 3) -> float:
    return round(float(v) * 1e3, digits)


def _rows(goals, f_hz, cents) -> list[dict[str, Any]]:
    return [
        {"partial": g.label, "hz": round(float(f), 4), "cents": round(float(c), 3)}
        for g, f, c in zip(goals, f_hz, cents, strict=True)
    ]


def _step_json(i: int, step: Step, goals) -> dict[str, Any]:
    cut = step.cut
    return {
        "step": i,
        "positions_mm": [_mm(x, 2) for x in cut.positions_m],
        "windows_mm": [[_mm(a, 2), _mm(b, 2)] for a, b in cut.windows_m],
        "depth_mm": _mm(cut.depth_m),
        "length_mm": _mm(cut.length_m, 2),
        "tool_width_mm": _mm(cut.width_m, 2),
        "eased_edge_mm": _mm(min(cut.ramp_m, 0.25 * cut.width_m), 2),
        "serves": step.serves,
        "predicted": _rows(goals, step.predicted_hz, step.predicted_cents),
        "thinnest_after_mm": _mm(step.thinnest_m),
    }


def advice_payload(
    advice: Advice, start: Material, title: str, min_thickness: float, warnings: list[str]
) -> dict[str, Any]:
    """The JSON form of the advice (mm, Hz, cents, GPa); ``start`` is the file's material."""
    cal, plan, goals = advice.calibration, advice.plan, advice.goals
    tmap = plan.tuning_map
    short = plan.shortening
    return {
        "part": title,
        "measured": [
            {
                "frequency_hz": round(p.frequency_hz, 4),
                "mode": None if p.family is None else p.label,
                "model_hz": None if p.family is None else round(p.model_hz, 4),
                "residual_cents": None if p.family is None else round(p.residual_cents, 3),
            }
            for p in cal.partials
        ],
        "material": {
            "E_GPa": round(cal.E / 1e9, 5),
            "G_GPa": round(cal.G / 1e9, 5),
            "G_fitted": cal.G_fitted,
            "density_kg_m3": start.rho,
            "E_change_percent": round(100.0 * (cal.E / start.E - 1.0), 3),
            "G_change_percent": round(100.0 * (cal.G / start.G - 1.0), 3),
            "rms_cents": round(cal.rms_cents, 3),
        },
        "partials": [
            {
                "partial": g.label,
                "target_hz": round(g.f_hz, 4),
                "tolerance_cents": g.tolerance_cents,
                "now_hz": round(float(f), 4),
                "now_cents": round(float(c), 3),
                "from": "measured" if m else "model",
            }
            for g, f, c, m in zip(
                goals, plan.start_hz, plan.start_cents, advice.measured, strict=True
            )
        ],
        "steps": [_step_json(i + 1, s, goals) for i, s in enumerate(plan.steps)],
        "status": plan.status,
        "message": plan.message,
        "flat": list(plan.flat),
        "shortening": None
        if short is None
        else {
            "trim_each_end_mm": _mm(short.trim_m, 2),
            "new_length_mm": _mm(short.length_m, 2),
            "predicted": _rows(goals, short.predicted_hz, short.predicted_cents),
        },
        "min_thickness_mm": _mm(min_thickness),
        "tuning_map": {
            "tool_width_mm": _mm(tmap.width_m, 2),
            "positions_mm": [_mm(x, 2) for x in tmap.positions_m],
            "cents_per_0_1_mm": {
                label: [round(float(v), 4) for v in row]
                for label, row in zip(tmap.labels, tmap.cents_per_tenth_mm, strict=True)
            },
        },
        "notes": list(plan.notes),
        "warnings": warnings,
        "caution": CAUTION,
    }


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
            "depth, length and thinnest in mm; partials after the step in cents from target",
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
        plan.add_column("thinnest", justify="right")
        for s in payload["steps"]:
            each = s["tool_width_mm"]
            length = f"2 x {each:g}" if len(s["windows_mm"]) == 2 else f"{s['length_mm']:g}"
            plan.add_row(
                str(s["step"]),
                _where(s, length_mm),
                f"{s['depth_mm']:.3f}",
                length,
                *[f"{r['cents']:+.2f}" for r in s["predicted"]],
                f"{s['thinnest_after_mm']:.2f}",
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
    ) -> None:
        """Plan the next small cuts toward the target from a tap on a half-finished bar."""
        part_file, base = load_part(file)
        if part_file.bar is None:
            raise InputError(
                f"{file.name}: advise works on bars; this file holds a [{part_file.kind}]"
            )
        goals = goals_of(part_file, base)
        if not (math.isfinite(step_depth) and 0.0 < step_depth <= 3.0):
            raise InputError(f"--step-depth {step_depth:g}: give mm above 0 and at most 3")
        if not 1 <= steps <= 10:
            raise InputError(f"--steps {steps}: give 1 to 10 steps")
        length_mm = part_file.bar.length * 1e3
        if not (math.isfinite(tool_width) and 2.0 <= tool_width <= length_mm / 3.0):
            raise InputError(
                f"--tool-width {tool_width:g}: give mm from 2 to a third of the bar length "
                f"({length_mm / 3.0:.0f} mm)"
            )
        h_min = _min_thickness(part_file, min_thickness)
        if plot is not None and plot.exists() and not force:
            raise InputError(f"--plot {plot} exists already; pass --force to replace it")
        f, sd, warnings = _measure(wav, partials, count, fmin)
        bar: Bar = part_file.to_part(base)
        thinnest_now = float(np.min(bar.thickness(np.linspace(0.0, bar.length, 2001))))
        if thinnest_now < h_min:
            warnings.append(
                f"the bar is already {thinnest_now * 1e3:.2f} mm thick somewhere, under the "
                f"minimum thickness {h_min * 1e3:g} mm: no cut is planned there"
            )
        advice = advise(
            bar,
            goals,
            f,
            sd,
            width=tool_width * 1e-3,
            max_step_depth=step_depth * 1e-3,
            min_thickness=h_min,
            steps=steps,
            symmetric=not one_sided,
            theory=part_file.model.theory,
        )
        warnings += list(advice.calibration.warnings)
        title = part_file.title or file.stem
        payload = advice_payload(advice, bar.material, title, h_min, warnings)
        if plot is not None:
            from tonewright.plots import figure_bytes

            fig = map_figure(advice, bar.length)
            atomic_write_bytes(plot, figure_bytes(fig, "png"), overwrite=force)
        if as_json:
            typer.echo(json.dumps(payload, indent=2))
        else:
            _print(Console(highlight=False), payload, length_mm)
            if plot is not None:
                Console(highlight=False).print(f"wrote {plot}")
        for w in warnings:
            typer.echo(f"warning: {w}", err=True)
