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
from tonewright.cli_support import atomic_write_bytes, check_a4, guarded
from tonewright.errors import InputError

__all__ = ["listen", "register"]


def _finite(value: float) -> float | None:
    """JSON has no NaN: an undetermined value is null."""
    return value if math.isfinite(value) else None


def _payload(report: TapReport, a4_hz: float = 440.0) -> dict:
    labels = report.labels or (None,) * len(report.result.partials)
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
                # from the band's backward-integrated energy: no single exponential assumed
                "band_t60_s": _finite(round(p.band_t60_s, 4)),
                "uncertainty_hz": _finite(float(f"{p.frequency_uncertainty_hz:.3g}")),
                "mode": None if lab is None else lab.text,
                "method": p.method,
            }
            for p, lab in zip(report.result.partials, labels, strict=True)
        ],
        "identified_by": report.basis,
        "strikes_s": [round(t, 4) for t in report.result.strikes_s],
        "onset_s": round(report.result.onset_s, 4),
        "analysed_s": round(report.result.analysed_s, 4),
    }
    if report.expected:
        out["expected"] = [{"mode": m, "frequency_hz": round(f, 3)} for m, f in report.expected]
    if report.kind == "chime":
        out["strike_hz"] = None if report.strike_hz is None else round(report.strike_hz, 6)
        if report.strike is not None:
            out["strike_rule"] = report.strike.rule
            out["strike_modes_hz"] = {
                f"bending {k}": None if f is None else round(f, 4)
                for k, f in zip((4, 5, 6), report.strike.modes_hz, strict=True)
            }
    out["warnings"] = list(report.warnings)
    return out


def _table(report: TapReport, title: str, a4_hz: float = 440.0) -> Table:
    table = Table(title=title, box=box.SIMPLE_HEAD, title_justify="left")
    heads = ("#", "Hz", "± Hz", "note", "cents", "level dB", "T60 s", "band T60 s", "ratio", "mode")
    for name in heads:
        table.add_column(
            name, justify="left" if name in ("note", "mode") else "right", no_wrap=name == "mode"
        )
    partials = report.result.partials
    labels = report.labels or (None,) * len(partials)
    bars = [p for p, lab in zip(partials, labels, strict=True) if lab is None or lab.from_bar]
    f1 = (bars or partials)[0].frequency_hz if partials else math.nan
    for i, (p, lab) in enumerate(zip(partials, labels, strict=True), start=1):
        note, off = hz_to_note(p.frequency_hz, a4_hz)
        mode = "" if lab is None else lab.text
        if p.method == "peak":
            mode += " [spectral peak]"
        table.add_row(
            str(i),
            f"{p.frequency_hz:.3f}",
            f"{p.frequency_uncertainty_hz:.2g}",
            note,
            f"{off:+.1f}",
            f"{p.level_db:.1f}",
            f"{float(t60_from_decay(p.decay_s)):.2f}" if math.isfinite(p.decay_s) else "-",
            f"{p.band_t60_s:.2f}" if math.isfinite(p.band_t60_s) else "-",
            f"{p.frequency_hz / f1:.3f}",
            mode.strip(),
        )
    return table


@guarded
def listen(
    wav: Annotated[Path, typer.Argument(help="Recording of a strike (WAV, FLAC, OGG or MP3).")],
    json_out: Annotated[
        bool, typer.Option("--json", help="Print the partials as JSON on stdout.")
    ] = False,
    count: Annotated[
        int | None, typer.Option("--count", help="Keep only the N strongest partials.")
    ] = None,
    kind: Annotated[
        str, typer.Option("--kind", help="bar, or chime to add the strike note.")
    ] = "bar",
    fmin: Annotated[
        float | None,
        typer.Option(
            "--fmin",
            help="Lowest frequency searched, Hz (default 20, or half the part's lowest mode).",
        ),
    ] = None,
    fmax: Annotated[
        float | None, typer.Option("--fmax", help="Highest frequency searched, Hz.")
    ] = None,
    part: Annotated[
        Path | None,
        typer.Option("--part", help="Part file or result.json: name the lines by its modes."),
    ] = None,
    plot: Annotated[
        Path | None,
        typer.Option("--plot", help="Draw the labelled spectrum to this PNG (or .svg) file."),
    ] = None,
    force: Annotated[
        bool, typer.Option("--force", help="Replace an existing --plot file.")
    ] = False,
    a4: Annotated[
        float, typer.Option("--a4", help="Pitch reference A4 in Hz for the note names.")
    ] = 440.0,
) -> None:
    """Measure the partials of a recorded tap (frequency, note, level, T60 decay) and name them."""
    check_a4(a4)
    if plot is not None:
        if plot.suffix.lower() not in (".png", ".svg"):
            raise InputError(f"--plot {plot}: give a .png or .svg file name")
        if plot.exists() and not force:
            raise InputError(f"--plot {plot} exists already; pass --force to replace it")
    report = listen_to_tap(wav, count=count, kind=kind, fmin=fmin, fmax=fmax, part=part)
    if plot is not None:
        from tonewright.tap_plot import tap_figure  # matplotlib only when drawing

        atomic_write_bytes(plot, tap_figure(report, plot.suffix.lower()[1:]), overwrite=force)
    if json_out:
        typer.echo(json.dumps(_payload(report, a4), indent=2))
    else:
        result = report.result
        title = (
            f"{report.name}: {len(result.partials)} partial(s), {report.rate} Hz, "
            f"strike at {result.onset_s:.3f} s, {result.analysed_s:.2f} s analysed; "
            f"modes named from {report.basis}"
        )
        console = Console(highlight=False)
        if not console.is_terminal:
            console = Console(highlight=False, width=132)  # a file or a pipe: room for names
        console.print(_table(report, title, a4))
        if report.strike_hz is not None:
            note, off = hz_to_note(report.strike_hz, a4)
            console.print(
                f"strike note: {report.strike_hz:.2f} Hz ({note} {off:+.1f} cents), "
                f"{report.strike.rule}"
            )
        console.print(
            f"notes in equal temperament at A4 = {a4:g} Hz; T60: seconds for a partial to fall "
            "by 60 dB (from the fit); band T60: the same from the energy in its band over the "
            "first 25 dB, not assuming one exponential"
        )
    for w in report.warnings:
        typer.echo(f"warning: {w}", err=True)


def register(app: typer.Typer) -> None:
    """Add the ``listen`` command to ``app``."""
    app.command("listen")(listen)
