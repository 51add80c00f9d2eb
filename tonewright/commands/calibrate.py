"""``tonewright calibrate``: Young's and shear moduli of a blank from a tap, as a material file.

The blank is a uniform bar given by a part file (its [bar] table, supports and material) or by
``--length/--width/--thickness``; its density comes from ``--mass`` (weighed) or
``--density``. The measured partials come from a recording (``--wav``) or are typed in
(``--partials``). The numerics are in ``tonewright.calibrate``.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Annotated, Any

import numpy as np
import tomli_w
import typer
from rich import box
from rich.console import Console
from rich.table import Table

from tonewright.audio import read_tap
from tonewright.calibrate import CENTS_PER_LN, Calibration, calibrate_bar
from tonewright.cli_support import atomic_write_text, guarded, parse_partials
from tonewright.errors import InputError
from tonewright.forward.geometry import Bar, constant
from tonewright.materials import MaterialSpec, MaterialTable, list_materials, load_material
from tonewright.partfile import load_part
from tonewright.tap import find_partials
from tonewright.units import parse_length

__all__ = [
    "Blank",
    "blank_from_options",
    "blank_from_part_file",
    "material_toml",
    "payload",
    "register",
]

# Densities outside this range are unit slips (grams vs kilograms, cm vs mm), not materials:
# balsa is about 100 kg/m^3, tungsten about 19300 (common practice, no source).
DENSITY_RANGE = (50.0, 25000.0)
MIN_SLENDERNESS = 4.0  # a beam model needs a blank this many times longer than wide and thick


@dataclass(frozen=True)
class Blank:
    """A uniform bar to calibrate: geometry (m), holes and supports, starting material, base."""

    bar: Bar
    volume_m3: float
    start: MaterialSpec
    base: str | None  # library name whose ratios the calibrated material keeps
    theory: str = "timoshenko"


def _volume(length: float, width: float, thickness: float, hole_diameters: list[float]) -> float:
    # holes go through the width
    return length * width * thickness - sum(width * math.pi * d * d / 4.0 for d in hole_diameters)


def _check_slender(length: float, width: float, thickness: float) -> None:
    if length < MIN_SLENDERNESS * max(width, thickness):
        raise InputError(
            f"length {length * 1e3:g} mm: too short for a beam model of a {width * 1e3:g} x "
            f"{thickness * 1e3:g} mm section; the blank must be at least {MIN_SLENDERNESS:g} "
            "times as long as it is wide and thick"
        )


def _start_material(name: str | None, fallback: MaterialSpec | None) -> tuple[MaterialSpec, str]:
    if name is not None:
        return load_material(name), name
    if fallback is None:
        raise InputError(
            "--material: give the library material the blank is made of "
            f"({', '.join(list_materials())})"
        )
    return fallback, fallback.key


def blank_from_part_file(path: Path, material: str | None) -> Blank:
    """A blank from a part file: a [bar] of uniform width and thickness (holes allowed)."""
    part_file, base_dir = load_part(path)
    if part_file.bar is None:
        raise InputError(f"{path.name}: calibration needs a [bar] blank, got a [{part_file.kind}]")
    table = part_file.bar
    for name, stations, uniform in (
        ("profile", table.profile, table.thickness),
        ("width_profile", table.width_profile, table.width),
    ):
        if stations and any(abs(y - uniform) > 1e-9 for _, y in stations):
            raise InputError(
                f"{path.name}: bar.{name} varies; calibration needs a blank of uniform section "
                "(remove the profile, or calibrate before cutting)"
            )
    _check_slender(table.length, table.width, table.thickness)
    part = part_file.to_part(base_dir)
    if material is not None:
        start, base = load_material(material), material
    else:
        start = part_file.material_spec(base_dir)
        raw = part_file.material
        if isinstance(raw, str) and raw in list_materials():
            base = raw
        elif isinstance(raw, MaterialTable) and raw.base is not None:
            base = raw.base
        else:
            base = None
    volume = _volume(table.length, table.width, table.thickness, [h.diameter for h in table.holes])
    return Blank(part, volume, start, base, part_file.model.theory)


def blank_from_options(
    length: str | None, width: str | None, thickness: str | None, material: str | None
) -> Blank:
    """A free-free blank from typed dimensions (bare numbers are mm)."""
    given = {"--length": length, "--width": width, "--thickness": thickness}
    missing = [k for k, v in given.items() if v is None]
    if missing:
        raise InputError(
            f"{', '.join(missing)}: give a part file, or all of --length, --width, --thickness"
        )
    L = parse_length(length, "--length")
    b = parse_length(width, "--width")
    h = parse_length(thickness, "--thickness")
    _check_slender(L, b, h)
    start, base = _start_material(material, None)
    bar = Bar(L, constant(b), constant(h), start.to_beam())
    return Blank(bar, _volume(L, b, h, []), start, base)


def _density(blank: Blank, mass_g: float | None, density: float | None) -> float:
    if mass_g is not None and density is not None:
        raise InputError("--mass and --density: give one of them, not both")
    if mass_g is None and density is None:
        raise InputError(
            "--mass: weigh the blank and give its mass in grams (or give --density in kg/m^3)"
        )
    if mass_g is not None:
        if not (math.isfinite(mass_g) and mass_g > 0):
            raise InputError(f"--mass {mass_g:g}: give the blank's mass in grams, above zero")
        rho = mass_g * 1e-3 / blank.volume_m3
        what = f"--mass {mass_g:g} g over {blank.volume_m3 * 1e6:.5g} cm^3"
    else:
        if not (math.isfinite(density) and density > 0):
            raise InputError(f"--density {density:g}: give kg/m^3, above zero")
        rho, what = density, f"--density {density:g}"
    lo, hi = DENSITY_RANGE
    if not lo <= rho <= hi:
        raise InputError(
            f"{what} gives a density of {rho:.4g} kg/m^3, outside {lo:g}..{hi:g}; "
            "check the units (grams, millimetres)"
        )
    return rho


def _finite(value: float, digits: int = 6) -> float | None:
    return float(f"{value:.{digits}g}") if math.isfinite(value) else None


def payload(cal: Calibration, blank: Blank, mass_g: float | None, out: Path | None) -> dict:
    """The JSON form of a calibration (GPa, kg/m^3, Hz, cents; null: not determined)."""
    b = blank.bar
    return {
        "E_GPa": _finite(cal.E / 1e9),
        "E_sd_GPa": _finite(cal.E_sd / 1e9, 3),
        "G_GPa": _finite(cal.G / 1e9),
        "G_sd_GPa": _finite(cal.G_sd / 1e9, 3),
        "G_fitted": cal.G_fitted,
        "density_kg_m3": _finite(cal.rho),
        "poisson": blank.start.nu,
        "loss_factor": _finite(cal.loss_factor, 3),
        "rms_cents": _finite(cal.rms_cents, 3),
        "base": blank.base,
        "blank": {
            "length_mm": round(b.length * 1e3, 4),
            "width_mm": round(float(b.width(np.array([0.0]))[0]) * 1e3, 4),
            "thickness_mm": round(float(b.thickness(np.array([0.0]))[0]) * 1e3, 4),
            "mass_g": mass_g,
        },
        "partials": [
            {
                "frequency_hz": round(p.frequency_hz, 6),
                "mode": None if p.family is None else p.label,
                "model_hz": _finite(p.model_hz, 9),
                "residual_cents": _finite(p.residual_cents, 3),
                "loss_factor": _finite(p.loss_factor, 3),
            }
            for p in cal.partials
        ],
        "model_modes": [
            {"mode": f"{fam} {k}", "frequency_hz": round(f, 4)} for fam, k, f in cal.model_modes
        ],
        "warnings": list(cal.warnings),
        "message": cal.message,
        "out": None if out is None else str(out),
    }


def _describe_blank(blank: Blank, mass_g: float | None) -> str:
    b = blank.bar
    dims = [b.length, float(b.width(np.array([0.0]))[0]), float(b.thickness(np.array([0.0]))[0])]
    text = " x ".join(f"{d * 1e3:g}" for d in dims) + " mm blank"
    return text + (f" of {mass_g:g} g" if mass_g is not None else "")


def material_toml(cal: Calibration, blank: Blank, name: str, mass_g: float | None) -> str:
    """A material file that ``load_material_file`` reads (moduli GPa, density kg/m^3)."""
    modes = ", ".join(p.label for p in cal.identified)
    e_sd = f" +- {cal.E_sd / 1e9:.2g}" if math.isfinite(cal.E_sd) else ""
    g_text = (
        f"G {cal.G / 1e9:.4g}{f' +- {cal.G_sd / 1e9:.2g}' if math.isfinite(cal.G_sd) else ''} "
        "GPa fitted"
        if cal.G_fitted
        else "G kept at the base material's G/E ratio (no torsional or third bending partial)"
    )
    note = (
        f"Calibrated from a tap on a {_describe_blank(blank, mass_g)}: {modes}; "
        f"E {cal.E / 1e9:.5g}{e_sd} GPa; {g_text}; rms residual {cal.rms_cents:.2f} cent."
    )
    table: dict[str, Any] = {"name": name, "note": note}
    if blank.base is not None:
        table["base"] = blank.base
    table["E"] = float(f"{cal.E / 1e9:.6g}")
    table["G"] = float(f"{cal.G / 1e9:.6g}")
    table["density"] = float(f"{cal.rho:.6g}")
    table["poisson"] = blank.start.nu
    if math.isfinite(cal.loss_factor):
        table["loss_factor"] = float(f"{cal.loss_factor:.3g}")
        table["note"] += (
            " Loss factor from the recorded decays (median over bending partials; includes "
            "support and radiation losses, so an upper bound)."
        )
    header = (
        "# Material calibrated from a tap by tonewright. Moduli in GPa, density in kg/m^3.\n"
        "# 'base' carries the library material's orthotropic ratios over.\n"
    )
    return header + tomli_w.dumps(table)


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
        if file is not None:
            if any(v is not None for v in (length, width, thickness)):
                raise InputError(
                    "--length/--width/--thickness: give either a part file or the dimensions"
                )
            blank = blank_from_part_file(file, material)
        else:
            blank = blank_from_options(length, width, thickness, material)
        rho = _density(blank, mass, density)
        start = blank.start
        blank = replace(
            blank,
            bar=replace(
                blank.bar,
                material=replace(start.to_beam(), rho=rho),
            ),
        )
        if (wav is None) == (partials is None):
            raise InputError("--wav/--partials: give one of them (a recording, or typed Hz)")
        if not 0.1 <= tolerance <= 300:
            raise InputError(f"--tolerance {tolerance:g}: give 0.1 to 300 cents")
        if sd_cents is not None and not (math.isfinite(sd_cents) and sd_cents > 0):
            raise InputError(f"--sd-cents {sd_cents:g}: give a positive number of cents")
        if out is not None and out.exists() and not force:
            raise InputError(f"--out {out} exists already; pass --force to replace it")
        warnings: list[str] = []
        if wav is not None:
            if sd_cents is not None:
                raise InputError("--sd-cents: only for --partials; a recording gives its own")
            if not 1 <= count <= 50:
                raise InputError(f"--count {count}: give 1 to 50 partials")
            recording = read_tap(wav)
            tap = find_partials(recording.samples, recording.rate, count=count, fmin=fmin)
            warnings += [*recording.warnings, *tap.warnings]
            if not tap.partials:
                raise InputError(f"--wav {wav}: no partials found in the recording")
            f = np.array([p.frequency_hz for p in tap.partials])
            sd = CENTS_PER_LN * np.array([p.frequency_uncertainty_hz for p in tap.partials]) / f
            decay = np.array([p.decay_s for p in tap.partials])
            decay = np.where(np.isfinite(decay) & (decay > 0), decay, np.nan)
        else:
            f = parse_partials(partials)
            sd = None if sd_cents is None else np.full(f.size, sd_cents)
            decay = None
        cal = calibrate_bar(blank.bar, f, sd, decay, theory=blank.theory, tolerance_cents=tolerance)
        warnings += list(cal.warnings)
        if out is not None:
            label = name or f"{blank.base or 'material'} (calibrated)"
            atomic_write_text(out, material_toml(cal, blank, label, mass), overwrite=force)
        result = payload(cal, blank, mass, out)
        result["warnings"] = warnings
        if as_json:
            typer.echo(json.dumps(result, indent=2))
        else:
            console = Console(highlight=False)
            title = f"{_describe_blank(blank, mass)}, density {rho:.1f} kg/m^3"
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
        for w in warnings:
            typer.echo(f"warning: {w}", err=True)
