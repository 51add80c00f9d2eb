"""``tonewright sound FILE --out WAV``: hear a part before cutting it.

Solves the modes of a part file or design result, works out how strongly a mallet strike at a
chosen point excites each one and how long it rings (``tonewright.preview``), and writes the
sum of decaying partials (``tonewright.synth.modal_strike``) as a 24-bit WAV.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Annotated

import numpy as np
import typer
from rich import box
from rich.console import Console
from rich.table import Table

from tonewright.acoustics.pitch import hz_to_note
from tonewright.audio import write_wav
from tonewright.cli_support import guarded
from tonewright.errors import InputError
from tonewright.forward import Bar, String, solve
from tonewright.partfile import load_part
from tonewright.preview import PreviewMode, excited_families, mallet_contact_s, preview_modes
from tonewright.synth import half_sine_spectrum, modal_strike, t60_from_decay
from tonewright.units import parse_position

__all__ = ["register", "render_preview"]

MODE_COUNTS = {"bending": 12, "torsion": 6, "transverse": 24}
AUDIBLE_HZ = 20_000.0  # highest partial worth synthesising (upper limit of hearing)
NYQUIST_MARGIN = 0.45  # keep partials below this fraction of the sample rate
SILENT_DB = -80.0  # a mode this far below the strongest is listed as not excited
DEFAULT_OFFSET_M = 5e-3  # players strike a little off the centre line (brief; common practice)


def _position(text: str | None, default: float, what: str) -> float:
    return default if text is None else parse_position(text, what)


def render_preview(
    modes: tuple[PreviewMode, ...],
    contact_s: float,
    rate: int,
    duration_s: float,
) -> tuple[np.ndarray, list[tuple[PreviewMode, float]], list[PreviewMode]]:
    """Samples, the modes played with their level in dB (strongest 0), and the silent ones."""
    top = min(AUDIBLE_HZ, NYQUIST_MARGIN * rate)
    audible = [m for m in modes if m.frequency_hz < top]
    if not audible:
        raise InputError(f"--rate {rate}: every partial lies above {top:g} Hz")
    f = np.array([m.frequency_hz for m in audible])
    a = np.array([m.amplitude for m in audible])
    level = np.abs(a * half_sine_spectrum(f, contact_s))
    if not np.max(level) > 0:
        raise InputError("the strike excites none of the modes: move --strike-at off the nodes")
    db = 20.0 * np.log10(np.maximum(level, 1e-300) / np.max(level))
    played = [(m, float(d)) for m, d in zip(audible, db, strict=True) if d > SILENT_DB]
    silent = [m for m, d in zip(audible, db, strict=True) if d <= SILENT_DB]
    keep = db > SILENT_DB
    samples = modal_strike(
        f[keep],
        a[keep],
        np.array([m.decay_s for m in audible])[keep],
        rate=rate,
        duration_s=duration_s,
        mallet_contact_s=contact_s,
    )
    return samples, played, silent


def _table(played: list[tuple[PreviewMode, float]], title: str) -> Table:
    table = Table(title=title, box=box.SIMPLE_HEAD, title_justify="left")
    for name in ("family", "n", "Hz", "note", "cents", "level dB", "T60 s"):
        table.add_column(name, justify="left" if name in ("family", "note") else "right")
    for m, db in sorted(played, key=lambda p: p[0].frequency_hz):
        note, off = hz_to_note(m.frequency_hz)
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


def register(app: typer.Typer) -> None:
    """Add the ``sound`` command to ``app``."""

    @app.command("sound")
    @guarded
    def sound(
        file: Annotated[Path, typer.Argument(help="Part file (.toml) or design result (.json).")],
        out: Annotated[Path, typer.Option(help="WAV file to write (24-bit).")],
        strike_at: Annotated[
            str | None, typer.Option(help="Strike position from the left end, mm (centre).")
        ] = None,
        strike_offset: Annotated[
            str | None,
            typer.Option(help="Strike distance from the centre line across the width, mm (5)."),
        ] = None,
        listen_at: Annotated[
            str | None, typer.Option(help="Listening point under the bar, mm (0.4 L).")
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
    ) -> None:
        """Write what a strike on the part would sound like, and list the partials used."""
        if out.exists() and not force:
            raise InputError(f"--out {out} exists already; pass --force to replace it")
        if not (math.isfinite(duration) and 0.2 <= duration <= 30.0):
            raise InputError(f"--duration {duration:g}: give 0.2 to 30 s")
        if not 8000 <= rate <= 192_000:
            raise InputError(f"--rate {rate}: give 8000 to 192000 Hz")
        contact = mallet_contact_s(mallet)
        part_file, base = load_part(file)
        part = part_file.to_part(base)
        L = part.length

        eta = loss_factor
        if eta is None:
            if isinstance(part, String):
                spec = part_file.material_spec(base)
                if spec is None:
                    raise InputError(
                        "--loss-factor: this string has no material; give its loss factor"
                    )
                eta = spec.loss_factor
            else:
                eta = part.material.loss_factor
        if not (math.isfinite(eta) and 0.0 < eta < 1.0):
            raise InputError(f"--loss-factor {eta:g}: give a value between 0 and 1")

        x_s = _position(strike_at, 0.5 * L, "--strike-at")
        x_l = _position(listen_at, 0.4 * L, "--listen-at")
        if isinstance(part, Bar):
            quarter = 0.25 * float(part.width(np.array([x_s]))[0])
            y_s = _position(strike_offset, min(DEFAULT_OFFSET_M, quarter), "--strike-offset")
            y_l = _position(listen_offset, y_s, "--listen-offset")
        else:
            y_s = y_l = 0.0

        counts = {fam: MODE_COUNTS[fam] for fam in excited_families(part)}
        result = solve(
            part, counts, tol_cents=part_file.model.tolerance_cents, theory=part_file.model.theory
        )
        modes = preview_modes(part, result, (x_s, y_s), (x_l, y_l), eta)
        samples, played, silent = render_preview(modes, contact, rate, duration)
        write_wav(out, samples, rate, overwrite=force)

        console = Console(highlight=False)
        title = (
            f"{part_file.title or file.stem}: strike at {x_s * 1e3:.1f} mm"
            + (f", {y_s * 1e3:.1f} mm off centre" if isinstance(part, Bar) else "")
            + f"; listening at {x_l * 1e3:.1f} mm; mallet contact {contact * 1e3:g} ms"
        )
        console.print(_table(played, title))
        if silent:
            names = ", ".join(f"{m.family} {m.order}" for m in silent)
            console.print(f"not excited (strike or listening point at a node): {names}")
        console.print(f"wrote {out} ({duration:g} s, {rate} Hz, 24-bit)")
        if not result.converged:
            typer.echo(f"warning: {result.message}", err=True)
