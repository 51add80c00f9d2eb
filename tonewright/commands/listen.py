"""``listen``: measure the partials of a recorded tap on a bar or chime.

The workflow (read, check, analyse) is ``tonewright.bench.listen_to_tap``; this module parses
the options and prints the report.
"""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Annotated

import typer
from rich import box
from rich.console import Console
from rich.table import Table

from tonewright.acoustics import t60_from_decay
from tonewright.acoustics.pitch import hz_to_note
from tonewright.bench import TapReport, listen_to_tap
from tonewright.cli_support import check_a4, guarded

__all__ = ["listen", "register"]


def _finite(value: float) -> float | None:
    """JSON has no NaN: an undetermined value is null."""
    return value if math.isfinite(value) else None


def _payload(report: TapReport, a4_hz: float = 440.0) -> dict:
    out: dict = {
        "a4_hz": a4_hz,
        # one decay measure everywhere: T60, the time the level takes to fall by 60 dB
        "partials": [
            {
                "frequency_hz": round(p.frequency_hz, 6),
                "note": hz_to_note(p.frequency_hz, a4_hz)[0],
                "cents": round(hz_to_note(p.frequency_hz, a4_hz)[1], 3),
                "level_db": round(p.level_db, 2),
                "t60_s": _finite(round(float(t60_from_decay(p.decay_s)), 4)),
                "uncertainty_hz": _finite(float(f"{p.frequency_uncertainty_hz:.3g}")),
            }
            for p in report.result.partials
        ],
    }
    if report.kind == "chime":
        out["strike_hz"] = None if report.strike_hz is None else round(report.strike_hz, 6)
    out["warnings"] = list(report.warnings)
    return out


def _table(report: TapReport, title: str, a4_hz: float = 440.0) -> Table:
    table = Table(title=title, box=box.SIMPLE_HEAD, title_justify="left")
    for name in ("#", "Hz", "± Hz", "note", "cents", "level dB", "T60 s", "ratio"):
        table.add_column(name, justify="left" if name == "note" else "right")
    partials = report.result.partials
    f1 = partials[0].frequency_hz if partials else math.nan
    for i, p in enumerate(partials, start=1):
        note, off = hz_to_note(p.frequency_hz, a4_hz)
        table.add_row(
            str(i),
            f"{p.frequency_hz:.3f}",
            f"{p.frequency_uncertainty_hz:.2g}",
            note,
            f"{off:+.1f}",
            f"{p.level_db:.1f}",
            f"{float(t60_from_decay(p.decay_s)):.2f}",
            f"{p.frequency_hz / f1:.3f}",
        )
    return table


@guarded
def listen(
    wav: Annotated[Path, typer.Argument(help="Recording of one strike (WAV).")],
    json_out: Annotated[
        bool, typer.Option("--json", help="Print the partials as JSON on stdout.")
    ] = False,
    count: Annotated[
        int | None, typer.Option("--count", help="Keep only the N strongest partials.")
    ] = None,
    kind: Annotated[
        str, typer.Option("--kind", help="bar, or chime to add the strike note.")
    ] = "bar",
    fmin: Annotated[float, typer.Option("--fmin", help="Lowest frequency searched, Hz.")] = 20.0,
    fmax: Annotated[
        float | None, typer.Option("--fmax", help="Highest frequency searched, Hz.")
    ] = None,
    a4: Annotated[
        float, typer.Option("--a4", help="Pitch reference A4 in Hz for the note names.")
    ] = 440.0,
) -> None:
    """Measure the partials of a recorded tap: frequency, note, level and T60 decay."""
    check_a4(a4)
    report = listen_to_tap(wav, count=count, kind=kind, fmin=fmin, fmax=fmax)
    if json_out:
        typer.echo(json.dumps(_payload(report, a4), indent=2))
        return
    result = report.result
    title = (
        f"{report.name}: {len(result.partials)} partial(s), {report.rate} Hz, "
        f"strike at {result.onset_s:.3f} s, {result.analysed_s:.2f} s analysed"
    )
    console = Console(highlight=False)
    console.print(_table(report, title, a4))
    if report.strike_hz is not None:
        note, off = hz_to_note(report.strike_hz, a4)
        console.print(f"strike note: {report.strike_hz:.2f} Hz ({note} {off:+.1f} cents)")
    console.print(
        f"notes in equal temperament at A4 = {a4:g} Hz; T60: seconds for a partial to fall by 60 dB"
    )
    for w in report.warnings:
        typer.echo(f"warning: {w}", err=True)


def register(app: typer.Typer) -> None:
    """Add the ``listen`` command to ``app``."""
    app.command("listen")(listen)
