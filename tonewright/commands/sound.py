"""``tonewright sound FILE --out WAV``: hear a part before cutting it.

Solves the modes of a part file or design result, works out how strongly a mallet strike at a
chosen point excites each one and how long it rings (``tonewright.acoustics.preview``), and
writes the sum of decaying partials (``tonewright.acoustics.synth.modal_strike``) as a 24-bit
WAV. The workflow is ``tonewright.bench.preview_sound``.
"""

from __future__ import annotations

from pathlib import Path
from typing import Annotated

import typer
from rich import box
from rich.console import Console
from rich.table import Table

from tonewright.acoustics import t60_from_decay
from tonewright.acoustics.pitch import hz_to_note, strike_note_hz
from tonewright.acoustics.preview import PreviewMode
from tonewright.audio import write_wav
from tonewright.bench import SoundReport, SoundRequest, preview_sound
from tonewright.cli_support import check_a4, guarded
from tonewright.errors import InputError
from tonewright.forward import Bar, Tube

__all__ = ["register"]


def _table(played: tuple[tuple[PreviewMode, float], ...], title: str, a4_hz: float) -> Table:
    table = Table(title=title, box=box.SIMPLE_HEAD, title_justify="left")
    for name in ("family", "n", "Hz", "note", "cents", "level dB", "T60 s"):
        table.add_column(name, justify="left" if name in ("family", "note") else "right")
    for m, db in sorted(played, key=lambda p: p[0].frequency_hz):
        note, off = hz_to_note(m.frequency_hz, a4_hz)
        table.add_row(
            m.family,
            str(m.order),
            f"{m.frequency_hz:.2f}",
            note,
            f"{off:+.1f}",
            f"{db:.1f}",
            f"{float(t60_from_decay(m.decay_s)):.2f}",
        )
    return table


def _print(report: SoundReport, out: Path, a4_hz: float) -> None:
    console = Console(highlight=False)
    (x_s, y_s), (x_l, _) = report.strike, report.listen
    title = (
        f"{report.title}: strike at {x_s * 1e3:.1f} mm"
        + (f", {y_s * 1e3:.1f} mm off centre" if isinstance(report.part, Bar) else "")
        + f"; listening at {x_l * 1e3:.1f} mm; mallet contact {report.contact_s * 1e3:g} ms"
    )
    console.print(_table(report.played, title, a4_hz))
    console.print(f"model: {report.model}")
    if isinstance(report.part, Tube):
        bending = [m.frequency_hz for m in report.modal.family("bending")]
        if len(bending) >= 4:
            f = strike_note_hz(bending)
            note, off = hz_to_note(f, a4_hz)
            console.print(f"strike note (an octave below bending 4): {f:.2f} Hz, {note} {off:+.1f}")
    console.print(
        f"notes in equal temperament at A4 = {a4_hz:g} Hz; T60: seconds for a partial to fall "
        "by 60 dB"
    )
    if report.silent:
        names = ", ".join(f"{m.family} {m.order}" for m in report.silent)
        console.print(f"not excited (strike or listening point at a node): {names}")
    console.print(f"wrote {out} ({report.duration_s:g} s, {report.sound.rate} Hz, 24-bit)")
    if not report.modal.converged:
        typer.echo(f"warning: {report.modal.message}", err=True)


def register(app: typer.Typer) -> None:
    """Add the ``sound`` command to ``app``."""

    @app.command("sound")
    @guarded
    def sound(
        file: Annotated[Path, typer.Argument(help="Part file (.toml) or design result (.json).")],
        out: Annotated[Path, typer.Option(help="WAV file to write (24-bit).")],
        strike_at: Annotated[
            str | None,
            typer.Option(
                help="Strike position from the left end, mm (a bar: its centre; a tube: 3 % of "
                "its length from the top end; a string: 1/8 of its length)."
            ),
        ] = None,
        strike_offset: Annotated[
            str | None,
            typer.Option(help="Strike distance from the centre line across the width, mm (5)."),
        ] = None,
        listen_at: Annotated[
            str | None,
            typer.Option(help="Listening point along the part, mm (0.4 L; a tube: 0.97 L)."),
        ] = None,
        listen_offset: Annotated[
            str | None, typer.Option(help="Listening point off the centre line, mm (as struck).")
        ] = None,
        mallet: Annotated[
            str, typer.Option(help="soft, medium, hard, or a contact time in ms.")
        ] = "medium",
        duration: Annotated[float, typer.Option(help="Length of the sound, s.")] = 3.0,
        rate: Annotated[int, typer.Option(help="Sample rate, Hz.")] = 44100,
        loss_factor: Annotated[
            float | None, typer.Option(help="Override the material's loss factor.")
        ] = None,
        force: Annotated[
            bool, typer.Option("--force", help="Replace an existing --out file.")
        ] = False,
        a4: Annotated[
            float, typer.Option("--a4", help="Pitch reference A4 in Hz for the note names.")
        ] = 440.0,
        model: Annotated[
            str,
            typer.Option(
                help="auto: a bar rings at the certifying 3D model's frequencies, struck as "
                "its mode shapes say; beam: the beam model's (fast)."
            ),
        ] = "auto",
    ) -> None:
        """Write what a strike on the part would sound like, and list the partials used."""
        check_a4(a4)
        if out.exists() and not force:
            raise InputError(f"--out {out} exists already; pass --force to replace it")
        request = SoundRequest(
            file=file,
            strike_at=strike_at,
            strike_offset=strike_offset,
            listen_at=listen_at,
            listen_offset=listen_offset,
            mallet=mallet,
            duration_s=duration,
            rate=rate,
            loss_factor=loss_factor,
            model=model,
        )
        report = preview_sound(request)
        write_wav(out, report.sound.samples, report.sound.rate, overwrite=force)
        _print(report, out, a4)
