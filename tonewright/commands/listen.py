"""``listen``: measure the partials of a recorded tap on a bar or chime."""

from __future__ import annotations

import json
import math
from pathlib import Path
from typing import Annotated

import typer
from rich import box
from rich.console import Console
from rich.table import Table

from tonewright.acoustics.pitch import hz_to_note, strike_note_hz
from tonewright.audio import read_tap
from tonewright.cli_support import guarded
from tonewright.errors import InputError
from tonewright.tap import TapResult, find_partials

__all__ = ["listen", "register"]

KINDS = ("bar", "chime")


def _finite(value: float) -> float | None:
    """JSON has no NaN: an undetermined value is null."""
    return value if math.isfinite(value) else None


def _strike(result: TapResult) -> tuple[float | None, str | None]:
    """Strike note of a chime, or None and the reason it cannot be given."""
    try:
        return strike_note_hz(result.frequencies_hz), None
    except InputError as exc:
        return None, f"no strike note: {exc}"


def _payload(result: TapResult, kind: str, warnings: list[str]) -> dict:
    out: dict = {
        "partials": [
            {
                "frequency_hz": round(p.frequency_hz, 6),
                "level_db": round(p.level_db, 2),
                "decay_s": round(p.decay_s, 4),
                "uncertainty_hz": _finite(float(f"{p.frequency_uncertainty_hz:.3g}")),
            }
            for p in result.partials
        ]
    }
    if kind == "chime":
        strike, why = _strike(result)
        out["strike_hz"] = None if strike is None else round(strike, 6)
        if why:
            warnings.append(why)
    out["warnings"] = warnings
    return out


def _table(result: TapResult, title: str) -> Table:
    table = Table(title=title, box=box.SIMPLE_HEAD, title_justify="left")
    for name in ("#", "Hz", "± Hz", "note", "cents", "level dB", "decay s", "ratio"):
        table.add_column(name, justify="left" if name == "note" else "right")
    f1 = result.partials[0].frequency_hz if result.partials else math.nan
    for i, p in enumerate(result.partials, start=1):
        note, off = hz_to_note(p.frequency_hz)
        table.add_row(
            str(i),
            f"{p.frequency_hz:.3f}",
            f"{p.frequency_uncertainty_hz:.2g}",
            note,
            f"{off:+.1f}",
            f"{p.level_db:.1f}",
            f"{p.decay_s:.3f}",
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
) -> None:
    """Measure the partials of a recorded tap: frequency, note, level and decay."""
    if kind not in KINDS:
        raise InputError(f"--kind: got {kind!r}; choose one of {', '.join(KINDS)}")
    recording = read_tap(wav)
    result = find_partials(recording.samples, recording.rate, count=count, fmin=fmin, fmax=fmax)
    warnings = [*recording.warnings, *result.warnings]
    payload = _payload(result, kind, warnings)
    if json_out:
        typer.echo(json.dumps(payload, indent=2))
        return
    title = (
        f"{wav.name}: {len(result.partials)} partial(s), {recording.rate} Hz, "
        f"strike at {result.onset_s:.3f} s, {result.analysed_s:.2f} s analysed"
    )
    console = Console(highlight=False)
    console.print(_table(result, title))
    strike = payload.get("strike_hz")
    if strike is not None:
        note, off = hz_to_note(strike)
        console.print(f"strike note: {strike:.2f} Hz ({note} {off:+.1f} cents)")
    for w in payload["warnings"]:
        typer.echo(f"warning: {w}", err=True)


def register(app: typer.Typer) -> None:
    """Add the ``listen`` command to ``app``."""
    app.command("listen")(listen)
