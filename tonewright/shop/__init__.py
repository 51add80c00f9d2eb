"""Shop-floor outputs for a designed bar: full-size templates, dimensioned drawings, DXF, cut
tables, router G-code, and cut sheets for tubes and wound strings.

Everything starts from a validated :class:`ShopPart` (lengths in metres); outputs are in
millimetres and carry the shared cautions (:mod:`tonewright.shop.cautions`).
"""

from tonewright.shop.cautions import CAUTIONS, caution_lines
from tonewright.shop.cuttable import cut_table_csv, cut_table_rows
from tonewright.shop.drawing import drawing_pdf, drawing_svg
from tonewright.shop.dxf import dxf_text
from tonewright.shop.gcode import Cutter, GcodeOptions, plan_undercut, undercut_gcode
from tonewright.shop.outputs import ShopOptions, output_names, render_all, write_all
from tonewright.shop.part import ShopPart
from tonewright.shop.template import template_layout, template_pdf, template_svgs
from tonewright.shop.tubes_strings import (
    TubeCut,
    WoundString,
    tube_cut_list_csv,
    tube_cut_sheet,
    winding_schedule,
    winding_schedule_csv,
)

__all__ = [
    "CAUTIONS",
    "Cutter",
    "GcodeOptions",
    "ShopOptions",
    "ShopPart",
    "TubeCut",
    "WoundString",
    "caution_lines",
    "cut_table_csv",
    "cut_table_rows",
    "drawing_pdf",
    "drawing_svg",
    "dxf_text",
    "output_names",
    "plan_undercut",
    "render_all",
    "template_layout",
    "template_pdf",
    "template_svgs",
    "tube_cut_list_csv",
    "tube_cut_sheet",
    "undercut_gcode",
    "winding_schedule",
    "winding_schedule_csv",
    "write_all",
]
