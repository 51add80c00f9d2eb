"""``tonewright shop FILE --out DIR``: templates, drawings, DXF, cut table and G-code for a
part file or a design's result.json (tubes: a cut sheet; strings: a winding schedule)."""

from __future__ import annotations

from pathlib import Path
from typing import Annotated, Literal

import typer

from tonewright.cli_support import (
    atomic_write_text,
    check_folder_possible,
    guarded,
    prepare_out_dir,
)
from tonewright.errors import InputError
from tonewright.forward import Tube
from tonewright.shop import (
    Cutter,
    GcodeOptions,
    ShopOptions,
    tube_cut_list_csv,
    tube_cut_sheet,
    winding_schedule_csv,
    write_all,
)
from tonewright.shop_run import (
    MISSED_MARK,
    load_shop_source,
    marked_missed,
    tube_cut_of,
    wound_string_of,
)

__all__ = ["ACCEPT_MISSED", "register"]

ACCEPT_MISSED = "--accept-missed-design"


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
        accept_missed: Annotated[
            bool,
            typer.Option(
                ACCEPT_MISSED,
                help="Draw a design that misses its target anyway (every sheet says so).",
            ),
        ] = False,
    ) -> None:
        """Write what a maker takes to the bench: 1:1 template, drawing, DXF, cuts, G-code."""
        if not 0.5 <= spacing <= 100:
            raise InputError(f"--spacing {spacing}: give 0.5 to 100 mm")
        check_folder_possible(out, f"--out {out}")  # before the solve, not after it
        source = load_shop_source(file)
        part_file, part, shop = source.part_file, source.part, source.shop
        missed = source.design is not None and not source.design.converged
        mark = ""
        if missed:
            typer.echo(f"this design misses its target: {source.design.message}", err=True)
            if not accept_missed:
                typer.echo(
                    f"refusing to write shop files for a missed design; pass {ACCEPT_MISSED} "
                    "to write them anyway, marked as a missed design",
                    err=True,
                )
                raise typer.Exit(code=1)
            mark = f" - {MISSED_MARK}"
            if shop is not None:
                shop = marked_missed(shop, source.design.message)
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
            cut = tube_cut_of(source, (part_file.title or file.stem) + mark, file)
            names = ["tube_cut_sheet.txt", "tube_cut_list.csv"]
            out = prepare_out_dir(out, names, force=force)
            atomic_write_text(out / names[0], tube_cut_sheet([cut]), overwrite=True)
            atomic_write_text(out / names[1], tube_cut_list_csv([cut]), overwrite=True)
            written = [out / n for n in names]
        else:
            wound = wound_string_of(part_file, (part_file.title or file.stem) + mark, file.parent)
            out = prepare_out_dir(out, ["winding_schedule.csv"], force=force)
            atomic_write_text(
                out / "winding_schedule.csv", winding_schedule_csv(wound), overwrite=True
            )
            written = [out / "winding_schedule.csv"]
        for path in written:
            typer.echo(str(path))
