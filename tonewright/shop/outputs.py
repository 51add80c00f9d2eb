"""Write every shop output for one bar into a folder, atomically, refusing to overwrite."""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path

from tonewright.cli_support import atomic_write_bytes, prepare_out_dir
from tonewright.errors import InputError
from tonewright.shop.cuttable import cut_table_csv
from tonewright.shop.drawing import drawing_pdf, drawing_svg
from tonewright.shop.dxf import dxf_text
from tonewright.shop.gcode import GcodeOptions, undercut_gcode
from tonewright.shop.pages import page_size_mm
from tonewright.shop.part import ShopPart
from tonewright.shop.template import template_layout, template_pdf, template_svgs

__all__ = ["ShopOptions", "output_names", "render_all", "write_all"]


@dataclass(frozen=True)
class ShopOptions:
    """What to produce and how. ``gcode=None`` skips the router program."""

    paper: str = "A4"
    orientation: str = "landscape"
    overlap_mm: float = 15.0
    drawing_paper: str | None = None  # None: same as ``paper``
    station_spacing_mm: float = 5.0
    gcode: GcodeOptions | None = field(default_factory=GcodeOptions)

    def __post_init__(self) -> None:
        page_size_mm(self.paper, self.orientation)
        if self.drawing_paper is not None:
            page_size_mm(self.drawing_paper, self.orientation)
        if self.gcode is not None and not isinstance(self.gcode, GcodeOptions):
            raise InputError(f"gcode: {self.gcode!r} must be GcodeOptions or None")


def output_names(part: ShopPart, options: ShopOptions | None = None) -> list[str]:
    """The file names ``render_all`` produces, without rendering anything."""
    opt = options or ShopOptions()
    stem = part.file_stem
    n = template_layout(part, opt.paper, opt.orientation, opt.overlap_mm).n_pages
    names = [f"{stem}_template.pdf"]
    names += [f"{stem}_template_p{i}of{n}.svg" for i in range(1, n + 1)]
    names += [f"{stem}_drawing.pdf", f"{stem}_drawing.svg", f"{stem}.dxf", f"{stem}_cuts.csv"]
    if opt.gcode is not None:
        names.append(f"{stem}_undercut.nc")
    return names


def render_all(part: ShopPart, options: ShopOptions | None = None) -> dict[str, bytes]:
    """Every output in memory, keyed by file name (nothing is written)."""
    opt = options or ShopOptions()
    pages = template_svgs(part, opt.paper, opt.orientation, opt.overlap_mm)
    paper = opt.drawing_paper or opt.paper
    data = [
        template_pdf(part, opt.paper, opt.orientation, opt.overlap_mm),
        *pages,
        drawing_pdf(part, paper, opt.orientation),
        drawing_svg(part, paper, opt.orientation),
        dxf_text(part).encode("utf-8"),
        cut_table_csv(part, opt.station_spacing_mm).encode("utf-8"),
    ]
    if opt.gcode is not None:
        data.append(undercut_gcode(part, opt.gcode).encode("ascii"))
    return dict(zip(output_names(part, opt), data, strict=True))


def write_all(
    part: ShopPart, out_dir: Path | str, options: ShopOptions | None = None, *, force: bool = False
) -> list[Path]:
    """Check the folder, render everything (so an error leaves no partial set), then write
    each file atomically. Existing files are only replaced with ``force=True``."""
    out = Path(out_dir)
    if out.exists():  # refuse early, before the slow part
        prepare_out_dir(out, output_names(part, options), force=force)
    files = render_all(part, options)
    out = prepare_out_dir(out, list(files), force=force)
    paths = []
    for name, payload in files.items():
        path = out / name
        atomic_write_bytes(path, payload, overwrite=force)
        paths.append(path)
    return paths
