"""``tonewright calibrate``: Young's and shear moduli of a blank from a tap, as a material file.

The blank is a uniform bar given by a part file (its [bar] table, supports and material) or by
``--length/--width/--thickness``; its density comes from ``--mass`` (weighed) or
``--density``. The measured partials come from a recording (``--wav``) or are typed in
(``--partials``). The workflow is ``tonewright.bench.calibrate_blank``; the numerics are in
``tonewright.optimizer.calibration``.
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

from tonewright.bench import CalibrateRequest, CalibrationReport, calibrate_blank
from tonewright.cli_support import atomic_write_text, guarded
from tonewright.optimizer import Calibration

__all__ = ["register"]


def _table(cal: Calibration, title: str) -> Table:
    table = Table(title=title, box=box.SIMPLE_HEAD, title_justify="left")
    for col in ("measured Hz", "identified as", "model Hz", "cents", "loss factor"):
        table.add_column(col, justify="left" if col == "identified as" else "right")
    for p in cal.partials:
        table.add_row(
            f"{p.frequency_hz:.3f}",
            p.label,
            "" if p.family is None else f"{p.model_hz:.3f}",
            "" if p.family is None else f"{p.residual_cents:+.2f}",
            "" if not math.isfinite(p.loss_factor) else f"{p.loss_factor:.2g}",
        )
    return table


def _pm(value: float, sd: float, scale: float = 1e9) -> str:
    if math.isfinite(sd):
        return f"{value / scale:.4g} ± {sd / scale:.2g}"
    return f"{value / scale:.4g} (uncertainty not determined: as many partials as unknowns)"


def _print(report: CalibrationReport, out: Path | None) -> None:
    cal = report.calibration
    console = Console(highlight=False)
    title = f"{report.description}, density {cal.rho:.1f} kg/m^3"
    console.print(_table(cal, title))
    console.print(f"E = {_pm(cal.E, cal.E_sd)} GPa (along the grain or axis)")
    g_note = "" if cal.G_fitted else " (not measured: the base material's G/E ratio)"
    console.print(f"G = {_pm(cal.G, cal.G_sd)} GPa{g_note}; E/G = {cal.E / cal.G:.1f}")
    if math.isfinite(cal.loss_factor):
        console.print(f"loss factor = {cal.loss_factor:.2g} (median of bending partials)")
    unseen = [
        f"{fam} {k} {hz:.1f} Hz"
        for fam, k, hz in cal.model_modes
        if not any(p.family == fam and p.order == k for p in cal.partials)
    ]
    if unseen:
        console.print("model, not measured: " + ", ".join(unseen[:6]))
    console.print(cal.message + ".")
    if out is not None:
        console.print(f"wrote {out}")


def register(app: typer.Typer) -> None:
    """Add the ``calibrate`` command to ``app``."""

    @app.command("calibrate")
    @guarded
    def calibrate(
        file: Annotated[
            Path | None, typer.Argument(help="Part file of the blank (a bar of uniform section).")
        ] = None,
        length: Annotated[
            str | None, typer.Option(help="Blank length (mm, or with a unit).")
        ] = None,
        width: Annotated[str | None, typer.Option(help="Blank width (mm).")] = None,
        thickness: Annotated[
            str | None, typer.Option(help="Blank thickness, the struck direction (mm).")
        ] = None,
        mass: Annotated[float | None, typer.Option(help="Mass of the blank in grams.")] = None,
        density: Annotated[
            float | None, typer.Option(help="Density in kg/m^3 (or --mass).")
        ] = None,
        material: Annotated[
            str | None, typer.Option(help="Library material the blank is (starting values).")
        ] = None,
        wav: Annotated[Path | None, typer.Option(help="Recording of a tap on the blank.")] = None,
        partials: Annotated[
            str | None, typer.Option(help='Measured partials in Hz, e.g. "352.1,1290.5".')
        ] = None,
        sd_cents: Annotated[
            float | None,
            typer.Option("--sd-cents", help="Uncertainty of typed partials, cents."),
        ] = None,
        tolerance: Annotated[
            float, typer.Option(help="How far (cents) a partial may lie from its mode.")
        ] = 30.0,
        count: Annotated[int, typer.Option(help="Strongest partials taken from --wav.")] = 12,
        fmin: Annotated[float, typer.Option(help="Lowest frequency searched in --wav, Hz.")] = 20.0,
        out: Annotated[Path | None, typer.Option(help="Write a material file (.toml).")] = None,
        name: Annotated[str | None, typer.Option(help="Name written in the material file.")] = None,
        force: Annotated[
            bool, typer.Option("--force", help="Replace an existing --out file.")
        ] = False,
        as_json: Annotated[bool, typer.Option("--json", help="Print the fit as JSON.")] = False,
    ) -> None:
        """Fit E (and G) of a blank to its tap partials; optionally write a material file."""
        request = CalibrateRequest(
            file=file,
            length=length,
            width=width,
            thickness=thickness,
            mass=mass,
            density=density,
            material=material,
            wav=wav,
            partials=partials,
            sd_cents=sd_cents,
            tolerance=tolerance,
            count=count,
            fmin=fmin,
            out=out,
            name=name,
            force=force,
        )
        report = calibrate_blank(request)
        if out is not None and report.material_text is not None:
            atomic_write_text(out, report.material_text, overwrite=force)
        if as_json:
            typer.echo(json.dumps(dict(report.payload), indent=2))
        else:
            _print(report, out)
        for w in report.warnings:
            typer.echo(f"warning: {w}", err=True)
