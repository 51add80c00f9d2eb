"""``tonewright shop FILE --out DIR``: templates, drawings, DXF, cut table and G-code for a
part file or a design's result.json (tubes: a cut sheet; strings: a winding schedule)."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Annotated, Literal

import numpy as np
import typer

from tonewright.cli_support import atomic_write_text, guarded, prepare_out_dir
from tonewright.errors import InputError
from tonewright.forward import Bar, String, Tube, families_of, solve
from tonewright.partfile import PartFile, load_part
from tonewright.shop import (
    Cutter,
    GcodeOptions,
    ShopOptions,
    ShopPart,
    TubeCut,
    WoundString,
    tube_cut_list_csv,
    tube_cut_sheet,
    winding_schedule_csv,
    write_all,
)

__all__ = ["register", "shop_part_from"]


def _partials(file: Path, modal) -> tuple[tuple[str, float | None, float], ...]:
    """Target and predicted partials: from a result.json when given, else the model's."""
    if file.suffix.lower() == ".json":
        rows = json.loads(file.read_text(encoding="utf-8")).get("partials", [])
        return tuple(
            (f"{r['family']} {r['order']}", r.get("target_hz"), r["achieved_hz"]) for r in rows
        )
    bending = [m for m in modal.modes if m.family in ("bending", "transverse")][:3]
    return tuple((f"{m.family} {m.order}", None, m.frequency_hz) for m in bending)


def shop_part_from(file: Path) -> tuple[PartFile, object, ShopPart | None, object]:
    """Load a part or result file; for bars build the ShopPart the drawings need."""
    part_file, base = load_part(file)
    part = part_file.to_part(base)
    counts = dict.fromkeys(families_of(part), 0)
    counts["transverse" if isinstance(part, String) else "bending"] = 3
    modal = solve(part, counts, tol_cents=0.01, theory=part_file.model.theory)
    if not isinstance(part, Bar):
        return part_file, part, None, modal
    bar = part_file.bar
    if bar.width_profile:
        raise InputError("bar.width_profile: shop outputs draw bars of constant width only")
    x = np.linspace(0.0, bar.length, 2)
    if bar.profile:
        x = np.array([p[0] for p in bar.profile])
        if x[0] > 0:
            x = np.concatenate([[0.0], x])
        if x[-1] < bar.length:
            x = np.concatenate([x, [bar.length]])
    h = part.thickness(x)
    nodes = modal.family("bending")[0].nodes_m
    spec = part_file.material_spec(base)
    holes = tuple(
        (
            hole.x,
            hole.diameter,
            hole.height
            if hole.height is not None
            else 0.5 * float(part.thickness(np.array([hole.x]))[0]),
        )
        for hole in part.holes
    )
    shop = ShopPart(
        title=part_file.title or file.stem,
        length_m=bar.length,
        width_m=bar.width,
        blank_thickness_m=bar.thickness,
        stations_x_m=tuple(float(v) for v in x),
        stations_thickness_m=tuple(float(v) for v in h),
        holes=holes,
        node_positions_m=tuple(nodes),
        node_tolerance_m=0.5e-3,
        material_name=spec.name if spec else "",
        partials=_partials(file, modal),
        notes=(f"Model: {part_file.model.theory} beam, {modal.message}.",),
    )
    return part_file, part, shop, modal


def register(app: typer.Typer) -> None:
    @app.command("shop")
    @guarded
    def shop_cmd(
        file: Annotated[Path, typer.Argument(help="Part file (.toml) or design result (.json).")],
        out: Annotated[Path, typer.Option("--out", "-o", help="Folder for the shop files.")],
        paper: Annotated[str, typer.Option(help="A4, A3, Letter or Tabloid.")] = "A4",
        orientation: Annotated[str, typer.Option(help="landscape or portrait.")] = "landscape",
        spacing: Annotated[float, typer.Option(help="Cut-table station spacing, mm.")] = 5.0,
        cutter: Annotated[
            Literal["ball", "flat"], typer.Option(help="Router cutter end.")
        ] = "ball",
        cutter_diameter: Annotated[float, typer.Option(help="Cutter diameter, mm.")] = 6.0,
        leave_stock: Annotated[float, typer.Option(help="Stock left for hand tuning, mm.")] = 0.5,
        stepdown: Annotated[float, typer.Option(help="Roughing step-down, mm.")] = 2.0,
        feed: Annotated[float, typer.Option(help="Cutting feed, mm/min.")] = 1000.0,
        plunge: Annotated[float, typer.Option(help="Plunge feed, mm/min.")] = 300.0,
        rpm: Annotated[float, typer.Option(help="Spindle speed, rev/min.")] = 16000.0,
        no_gcode: Annotated[
            bool, typer.Option("--no-gcode", help="Skip the router program.")
        ] = False,
        force: Annotated[
            bool, typer.Option("--force", help="Replace files already in --out.")
        ] = False,
    ) -> None:
        """Write what a maker takes to the bench: 1:1 template, drawing, DXF, cuts, G-code."""
        if not 0.5 <= spacing <= 100:
            raise InputError(f"--spacing {spacing}: give 0.5 to 100 mm")
        part_file, part, shop, modal = shop_part_from(file)
        if shop is not None:
            gcode = None
            if not no_gcode:
                gcode = GcodeOptions(
                    cutter=Cutter(cutter, cutter_diameter),
                    spindle_rpm=rpm,
                    feed_mm_min=feed,
                    plunge_mm_min=plunge,
                    stepdown_mm=stepdown,
                    leave_stock_mm=leave_stock,
                )
            options = ShopOptions(
                paper=paper, orientation=orientation, station_spacing_mm=spacing, gcode=gcode
            )
            written = write_all(shop, out, options, force=force)
        elif isinstance(part, Tube):
            nodes = modal.family("bending")[0].nodes_m
            cut = TubeCut(
                name=part_file.title or file.stem,
                length_m=part.length,
                outer_diameter_m=part_file.tube.outer_diameter,
                wall_m=part_file.tube.wall,
                node_from_top_m=nodes[0],
                node_tolerance_m=0.5e-3,
                material_name=(part_file.material_spec(None).name if part_file.material else ""),
                predicted_hz=modal.frequency("bending", 1),
            )
            names = ["tube_cut_sheet.txt", "tube_cut_list.csv"]
            out = prepare_out_dir(out, names, force=force)
            atomic_write_text(out / names[0], tube_cut_sheet([cut]), overwrite=True)
            atomic_write_text(out / names[1], tube_cut_list_csv([cut]), overwrite=True)
            written = [out / n for n in names]
        else:
            s = part_file.string
            if not s.density_profile:
                raise InputError("string: a winding schedule needs density_profile stations")
            x, mu = np.array(s.density_profile).T
            core_mu = float(mu.min())
            wound = WoundString(
                title=part_file.title or file.stem,
                length_m=s.length,
                stations_x_m=tuple(x),
                linear_density_kg_m=tuple(mu),
                core_diameter_m=np.sqrt(4 * core_mu / (np.pi * 7850.0)),
                core_density_kg_m3=7850.0,
                wrap_diameter_m=0.3e-3,
                wrap_density_kg_m3=8960.0,
            )
            out = prepare_out_dir(out, ["winding_schedule.csv"], force=force)
            atomic_write_text(
                out / "winding_schedule.csv", winding_schedule_csv(wound), overwrite=True
            )
            written = [out / "winding_schedule.csv"]
        for path in written:
            typer.echo(str(path))
