"""Cut table: thickness to leave and depth of cut at regular stations along the bar (CSV).

Columns (millimetres, ``x`` from the bar's left end):

- ``thickness_to_leave_mm``: ``t(x)``, measured from the flat top face;
- ``depth_of_cut_mm``: ``T - t(x)``, measured from the blank's bottom face (the undercut face)
  up into the bar, ``T`` being the blank thickness.

Stations: every ``spacing_mm`` from 0 (``kind = grid``) plus the profile's corners
(``kind = corner``: where the cut starts and ends, its thinnest point, a step's edge; a step
gives two rows at its x, the thickness before and after it). Between
rows a smooth cut follows the curve of the template and the DXF, which carry every vertex.
"""

from __future__ import annotations

import math

import numpy as np

from tonewright.errors import InputError
from tonewright.shop.cautions import comment_lines
from tonewright.shop.part import ShopPart

__all__ = ["cut_table_csv", "cut_table_rows"]


def cut_table_rows(
    part: ShopPart, spacing_mm: float = 5.0
) -> list[tuple[float, float, float, str]]:
    """``(x_mm, thickness_to_leave_mm, depth_of_cut_mm, kind)`` rows in increasing ``x``."""
    L = part.length_m * 1000.0
    s = float(spacing_mm)
    if not math.isfinite(s) or s <= 0 or s > L:
        raise InputError(f"spacing_mm: {spacing_mm!r} must be > 0 and <= the bar length {L:g} mm")
    xs = np.asarray(part.round_stations_m(s)) * 1000.0
    corners = np.asarray(part.corners_m()) * 1000.0
    kinds = (
        ~np.any(np.abs(xs[:, None] - corners[None, :]) < 1e-3, axis=1)
        if corners.size
        else (np.ones(xs.size, bool))
    )
    T = part.blank_thickness_m * 1000.0
    t = part.thickness_m(xs / 1000.0) * 1000.0
    rows = []
    for x, ti, k in zip(xs, t, kinds, strict=True):
        sides = (ti,) if k else tuple(v * 1000.0 for v in part.thickness_sides_m(x / 1000.0))
        rows += [(float(x), float(v), float(T - v), "grid" if k else "corner") for v in sides]
    return rows


def cut_table_csv(part: ShopPart, spacing_mm: float = 5.0) -> str:
    """The cut table as CSV text with ``#`` comment lines (units, definitions, cautions)."""
    rows = cut_table_rows(part, spacing_mm)
    T = part.blank_thickness_m * 1000.0
    head = [
        f"# tonewright cut table: {part.title}",
        f"# material: {part.material_name or 'not given'}; {part.grain_note}",
        f"# blank {part.length_m * 1000:.2f} x {part.width_m * 1000:.2f} x {T:.2f} mm "
        "(length x width x thickness)",
        "# units: millimetres; station_mm from the left end of the bar",
        "# thickness_to_leave_mm: bar thickness measured from the flat top face",
        "# depth_of_cut_mm: material to remove, measured from the blank's bottom face "
        "(the undercut face) = blank thickness - thickness to leave",
        f"# stations every {spacing_mm:g} mm (kind = grid) plus the profile's corners "
        "(kind = corner: cut start and end, thinnest point, step edges);",
        "# between rows the cut follows the template's (and the DXF's) curve",
        *(f"# note: {n}" for n in part.notes),
        *comment_lines("# ", 90, part.caution_kind),
    ]
    lines = [*head, "station_mm,thickness_to_leave_mm,depth_of_cut_mm,kind"]
    lines += [f"{x:.2f},{t:.2f},{d:.2f},{k}" for x, t, d, k in rows]
    return "\n".join(lines) + "\n"
