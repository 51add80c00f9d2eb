"""Dimensioned shop drawing of one bar on a single sheet (PDF and SVG).

Contents: side view (outline, blank, undercut, holes, node lines, station numbers) and plan
view (width, node lines with tolerance bands, holes as hidden lines, grain arrow) at a standard
reduction (1:1, 1:2, 1:2.5, 1:4, 1:5 or 1:10, the largest that fits); overall dimensions, node
positions with tolerance; tables of stations (position, thickness to leave, depth of cut from
the blank's bottom face), nodes and holes, and partials (target, predicted and their
difference in cents, ``1200 log2(f_pred / f_target)``); material, grain, notes, cautions and
this tool's title block. Coordinates are those of :mod:`tonewright.shop.part`.
"""

from __future__ import annotations

import math
import textwrap
from dataclasses import dataclass

import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from matplotlib.patches import Circle, FancyArrowPatch, Rectangle

from tonewright import __version__
from tonewright.acoustics.pitch import cents
from tonewright.errors import InputError
from tonewright.shop.cautions import cautions_for
from tonewright.shop.pages import new_page, page_size_mm, pdf_bytes, stable_rc, svg_bytes
from tonewright.shop.part import MISSED_MARK, ShopPart

__all__ = ["drawing_pdf", "drawing_scale", "drawing_svg"]

MARGIN_MM = 10.0
_PT_PER_MM = 72.0 / 25.4
_SCALES = ((1.0, "1:1"), (0.5, "1:2"), (0.4, "1:2.5"), (0.25, "1:4"), (0.2, "1:5"), (0.1, "1:10"))
_ROW_MM = 3.0  # table row height at 6 pt
_TB_W, _TB_H = 100.0, 36.0  # title block
_INK = "black"
_NODE = "#1f4e79"
_TOL = "#c9dced"


_LABEL_PT = 4.2  # station labels under the side view
# DejaVu Sans digits and the point are under 0.64 em wide; the gap keeps labels apart.
_CHAR_EM, _LABEL_GAP_MM = 0.64, 0.8


def _lw(mm: float) -> float:
    return mm * _PT_PER_MM


def _label_mm(x_mm: float) -> str:
    return f"{x_mm:.0f}" if abs(x_mm - round(x_mm)) < 0.05 else f"{x_mm:.1f}"


def station_labels(
    stations_m: tuple[float, ...], corners_m: tuple[float, ...], length_m: float, scale: float
) -> list[tuple[str, float]]:
    """``(text, x mm)`` of the station labels that fit without touching, at ``scale`` (paper
    mm per bar mm): the ends and corners first, then multiples of 50 mm, then the rest."""
    width_mm = _CHAR_EM * _LABEL_PT * 25.4 / 72.0  # one character on paper

    def rank(x_m: float) -> int:
        if x_m in (0.0, length_m) or any(abs(x_m - c) < 1e-6 for c in corners_m):
            return 0
        return 1 if abs(x_m * 1000.0 / 50.0 - round(x_m * 1000.0 / 50.0)) < 1e-6 else 2

    placed: list[tuple[float, float, str, float]] = []
    for x_m in sorted(stations_m, key=lambda v: (rank(v), v)):
        text = _label_mm(x_m * 1000.0)
        centre = scale * x_m * 1000.0
        half = 0.5 * len(text) * width_mm + _LABEL_GAP_MM
        if all(centre + half <= lo or centre - half >= hi for lo, hi, _, _ in placed):
            placed.append((centre - half, centre + half, text, x_m * 1000.0))
    return [(text, x) for _, _, text, x in sorted(placed)]


def drawing_scale(
    part: ShopPart, paper: str = "A4", orientation: str = "landscape"
) -> tuple[float, str]:
    """The largest standard reduction at which both views fit the sheet."""
    W, H = page_size_mm(paper, orientation)
    L = part.length_m * 1000.0
    T = part.blank_thickness_m * 1000.0
    B = part.width_m * 1000.0
    avail_w = W - 2 * MARGIN_MM - 40.0
    avail_h = 0.5 * (H - 2 * MARGIN_MM) - 40.0
    for s, label in _SCALES:
        if s * L <= avail_w and s * (T + B) <= avail_h:
            return s, label
    raise InputError(
        f"paper: the bar does not fit {paper} {orientation} even at 1:10; use a larger paper"
    )


# --- drawing primitives (page millimetres) -------------------------------------------------
def _arrow(ax: Axes, p0: tuple[float, float], p1: tuple[float, float]) -> None:
    ax.add_patch(
        FancyArrowPatch(
            p0,
            p1,
            arrowstyle="<|-|>",
            mutation_scale=4.0,
            shrinkA=0,
            shrinkB=0,
            lw=_lw(0.13),
            color=_INK,
        )
    )


def _dim_h(ax: Axes, x0: float, x1: float, y: float, feature_y: float, text: str) -> None:
    """Horizontal dimension at height ``y`` with extension lines from ``feature_y``."""
    sign = 1.0 if y > feature_y else -1.0
    for x in (x0, x1):
        ax.plot([x, x], [feature_y + sign * 1.0, y + sign * 1.5], color=_INK, lw=_lw(0.1))
    _arrow(ax, (x0, y), (x1, y))
    ax.text(0.5 * (x0 + x1), y + 0.6, text, ha="center", va="bottom", fontsize=6)


def _dim_v(ax: Axes, y0: float, y1: float, x: float, feature_x: float, text: str) -> None:
    """Vertical dimension at ``x`` with extension lines from ``feature_x``."""
    sign = 1.0 if x > feature_x else -1.0
    for y in (y0, y1):
        ax.plot([feature_x + sign * 1.0, x + sign * 1.5], [y, y], color=_INK, lw=_lw(0.1))
    _arrow(ax, (x, y0), (x, y1))
    ax.text(
        x + sign * 1.2,
        0.5 * (y0 + y1),
        text,
        ha="left" if sign > 0 else "right",
        va="center",
        fontsize=6,
        rotation=0,
    )


@dataclass(frozen=True)
class _Table:
    title: str
    header: tuple[str, ...]
    rows: tuple[tuple[str, ...], ...]
    widths: tuple[float, ...]  # column widths (mm); text right-aligned except column 0

    @property
    def width(self) -> float:
        return sum(self.widths)

    @property
    def height(self) -> float:
        return (len(self.rows) + 2) * _ROW_MM + 1.0


@dataclass(frozen=True)
class _Notes:
    lines: tuple[str, ...]
    width: float = 62.0

    @property
    def height(self) -> float:
        return 3.5 + 2.6 * len(self.lines) + 1.0


def _notes_box(notes: list[str], width: float = 62.0) -> _Notes:
    chars = int(width / 1.15)  # ~1.15 mm per character at 5.3 pt
    return _Notes(tuple(ln for n in notes for ln in textwrap.wrap(n, chars)), width)


def _draw_notes(ax: Axes, n: _Notes, x: float, top: float) -> None:
    ax.text(x, top, "Notes", fontsize=6.5, fontweight="bold", va="top")
    ax.text(x, top - 3.5, "\n".join(n.lines), fontsize=5.3, va="top", linespacing=1.3)


def _draw_table(ax: Axes, t: _Table, x: float, top: float) -> None:
    ax.text(x, top, t.title, fontsize=6.5, fontweight="bold", va="top")
    y = top - _ROW_MM - 0.3
    edges = np.concatenate(([0.0], np.cumsum(t.widths))) + x
    for j, h in enumerate(t.header):
        ax.text(
            edges[j] if j == 0 else edges[j + 1] - 0.5,
            y,
            h,
            fontsize=5.2,
            va="top",
            ha="left" if j == 0 else "right",
            color="0.25",
        )
    y -= _ROW_MM
    ax.plot([x, x + t.width], [y + 0.4, y + 0.4], color=_INK, lw=_lw(0.13))
    for i, row in enumerate(t.rows):
        if i % 2 == 1:
            ax.add_patch(Rectangle((x, y - _ROW_MM + 0.4), t.width, _ROW_MM, color="0.94", lw=0))
        for j, cell in enumerate(row):
            ax.text(
                edges[j] if j == 0 else edges[j + 1] - 0.5,
                y - 0.2,
                cell,
                fontsize=5.8,
                va="top",
                ha="left" if j == 0 else "right",
            )
        y -= _ROW_MM


STATION_SPACINGS_MM = (5.0, 10.0, 20.0, 25.0, 50.0)


def table_stations_mm(part: ShopPart, spacing_mm: float) -> list[tuple[float, float, bool]]:
    """``(x, leave t, corner?)`` in mm at round stations over the cut plus the corners."""
    xs = part.round_stations_m(spacing_mm, cut_only=True)
    corners = part.corners_m()
    out = []
    for x in xs:
        corner = any(abs(x - c) < 1e-6 for c in corners)
        sides = part.thickness_sides_m(x) if corner else (float(part.thickness_m(x)),)
        out += [(x * 1000.0, t * 1000.0, corner) for t in sides]  # a step: both sides
    return out


def _station_tables(
    part: ShopPart, rows_per_block: int, max_blocks: int
) -> tuple[list[_Table], float]:
    """The station table at the finest round spacing that fits ``max_blocks`` blocks."""
    T = part.blank_thickness_m * 1000.0
    for spacing in STATION_SPACINGS_MM:
        stations = table_stations_mm(part, spacing)
        if len(stations) <= rows_per_block * max_blocks:
            break
    rows = [
        (f"{x:.1f}" + ("*" if corner else ""), f"{t:.2f}", f"{T - t:.2f}")
        for x, t, corner in stations
    ]
    per_block = math.ceil(len(rows) / math.ceil(len(rows) / rows_per_block))  # balanced
    blocks = [rows[k : k + per_block] for k in range(0, len(rows), per_block)]
    tables = [
        _Table(
            "Undercut (mm)" if b == 0 else "Undercut, continued",
            ("x", "leave t", "cut depth"),
            tuple(block),
            (14.0, 13.0, 15.0),
        )
        for b, block in enumerate(blocks)
    ]
    return tables, spacing


def _other_tables(part: ShopPart) -> list[_Table]:
    out = []
    if part.partials:
        rows = []
        for label, target, pred in part.partials:
            if target is None:
                rows.append((label, "-", f"{pred:.2f}", "-"))
            else:
                rows.append((label, f"{target:.2f}", f"{pred:.2f}", f"{cents(pred, target):+.1f}"))
        out.append(
            _Table(
                "Partials",
                ("partial", "target Hz", "model Hz", "cents"),
                tuple(rows),
                (11.0, 15.0, 15.0, 10.0),
            )
        )
    tol = part.node_tolerance_m * 1000.0
    rows = [
        (f"node {i}", f"{n * 1000:.1f}", f"\u00b1{tol:.1f}", "")
        for i, n in enumerate(part.node_positions_m, start=1)
    ]
    rows += [
        (f"hole {i}", f"{hx * 1000:.1f}", f"\u00d8{hd * 1000:.1f}", f"{hh * 1000:.1f}")
        for i, (hx, hd, hh) in enumerate(part.holes, start=1)
    ]
    if rows:
        out.append(
            _Table(
                "Nodes and holes (mm from the left end)",
                ("", "x", "tol. / \u00d8", "height*"),
                tuple(rows),
                (11.0, 13.0, 13.0, 14.0),
            )
        )
    return out


def _title_block(
    ax: Axes, part: ShopPart, x: float, y: float, scale_label: str, sheet: str
) -> None:
    w, h = _TB_W, _TB_H
    ax.add_patch(Rectangle((x, y), w, h, fill=False, lw=_lw(0.35), ec=_INK))
    ax.add_patch(Rectangle((x, y + h - 11.0), 3.0, 11.0, color=_NODE, lw=0))
    ax.text(
        x + 5.0,
        y + h - 2.2,
        "tonewright \u00b7 bar drawing",
        fontsize=5.2,
        va="top",
        color="0.35",
        style="italic",
    )
    ax.text(
        x + 5.0,
        y + h - 5.5,
        textwrap.shorten(part.title, 46),
        fontsize=8.5,
        fontweight="bold",
        va="top",
    )
    ax.plot([x, x + w], [y + h - 11.0] * 2, color=_INK, lw=_lw(0.2))
    # (label, value, full width?): the material and the certifying model get a whole row
    cells = [
        ("material", part.material_name or "not given", True),
        ("grain", textwrap.shorten(part.grain_note, 30), False),
        ("scale", f"{scale_label} on {sheet}", False),
        (
            "blank L x W x T (mm)",
            f"{part.length_m * 1000:.1f} x {part.width_m * 1000:.1f} x "
            f"{part.blank_thickness_m * 1000:.1f}",
            False,
        ),
        ("sheet", "1 of 1", False),
        ("partials certified by", part.certified_by or "not stated", True),
        ("made with", f"tonewright {__version__}", False),
        ("checked", "", False),
    ]
    rows: list[list[tuple[str, str, bool]]] = []
    for cell in cells:
        if cell[2] or not rows or len(rows[-1]) == 2 or rows[-1][0][2]:
            rows.append([cell])
        else:
            rows[-1].append(cell)
    row_h = (h - 11.0) / len(rows)
    for r, row in enumerate(rows):
        cy = y + h - 11.0 - (r + 1) * row_h
        for k, (label, value, full) in enumerate(row):
            cw = w if full else (w * 0.55 if k == 0 else w * 0.45)
            cx = x + (0.0 if k == 0 else w * 0.55)
            ax.add_patch(Rectangle((cx, cy), cw, row_h, fill=False, lw=_lw(0.1), ec="0.4"))
            ax.text(cx + 1.0, cy + row_h - 0.6, label, fontsize=4.0, color="0.4", va="top")
            size = (
                6.0
                if len(value) * 1.3 < cw - 2.0
                else max(4.0, 6.0 * (cw - 2.0) / (1.3 * len(value)))
            )
            ax.text(cx + 1.0, cy + 0.8, value, fontsize=size, va="bottom")


def _missed_banner(ax: Axes, part: ShopPart, x: float, y: float, width: float) -> None:
    """A red band across the sheet: this design misses its target."""
    ax.add_patch(Rectangle((x, y), width, 6.0, color="#b00020", lw=0, zorder=9))
    text = f"{MISSED_MARK}: {part.missed}"
    ax.text(
        x + 2.0,
        y + 3.0,
        textwrap.shorten(text, int(width / 1.6)),
        fontsize=7.5,
        fontweight="bold",
        color="white",
        va="center",
        zorder=10,
        gid="missed-design",
    )


def _views(ax: Axes, part: ShopPart, s: float, x0: float, y_side: float, y_plan: float) -> None:
    L = part.length_m * 1000.0
    T = part.blank_thickness_m * 1000.0
    B = part.width_m * 1000.0
    xs = np.asarray(part.stations_x_m) * 1000.0
    yb = part.bottom_surface_m(np.asarray(part.stations_x_m)) * 1000.0

    def px(v: np.ndarray | float) -> np.ndarray | float:
        return x0 + s * np.asarray(v)

    # Side view.
    ax.fill_between(px(xs), y_side, y_side + s * yb, color="0.88", lw=0)
    ax.add_patch(
        Rectangle((x0, y_side), s * L, s * T, fill=False, lw=_lw(0.12), ec="0.45", ls=(0, (3, 1.5)))
    )
    ox = np.concatenate(([0.0, L], xs[::-1], [0.0]))
    oy = np.concatenate(([T, T], yb[::-1], [T]))
    ax.plot(
        px(ox),
        y_side + s * oy,
        color=_INK,
        lw=_lw(0.35),
        gid="drawing-outline",
        solid_joinstyle="miter",
    )
    ax.text(
        x0,
        y_side + s * T + 11.0,
        "SIDE VIEW (top face up; undercut below)",
        fontsize=6.5,
        fontweight="bold",
    )
    # Round stations (and the corners) ticked under the side view; their x labelled where
    # the labels fit side by side: ends and corners first, then every 50, then the rest.
    ticks = part.round_stations_m(10.0, cut_only=True)
    corners = part.corners_m()
    for xv in ticks:
        yv = float(part.bottom_surface_m(xv)) * 1000.0
        ax.plot(
            [px(xv * 1000.0)] * 2,
            [y_side + s * yv - 0.4, y_side + s * yv - 1.4],
            color=_INK,
            lw=_lw(0.1),
        )
    for text, at in station_labels(ticks, corners, part.length_m, s):
        ax.text(px(at), y_side - 1.5, text, fontsize=_LABEL_PT, ha="center", va="top", color="0.3")
    ax.text(x0 - 2, y_side - 1.5, "x mm", fontsize=_LABEL_PT, ha="right", va="top", color="0.3")
    _dim_h(ax, x0, px(L), y_side + s * T + 6.0, y_side + s * T, f"{L:.1f}")
    _dim_v(ax, y_side, y_side + s * T, x0 - 6.0, x0, f"{T:.1f}")
    i_min = int(np.argmin(part.stations_thickness_m))
    t_min = part.stations_thickness_m[i_min] * 1000.0
    ax.text(
        px(xs[i_min]),
        y_side - 4.6,
        f"thinnest: leave {t_min:.2f} at x = {xs[i_min]:.1f}",
        fontsize=5.5,
        va="top",
        ha="center",
    )

    # Plan view (looking down on the top face).
    ax.add_patch(Rectangle((x0, y_plan), s * L, s * B, fill=False, lw=_lw(0.35), ec=_INK))
    ax.text(x0, y_plan + s * B + 3.0, "PLAN VIEW (top face)", fontsize=6.5, fontweight="bold")
    _dim_v(ax, y_plan, y_plan + s * B, px(L) + 6.0, px(L), f"{B:.1f}")
    ax.add_patch(
        FancyArrowPatch(
            (px(0.3 * L), y_plan + 0.5 * s * B),
            (px(0.7 * L), y_plan + 0.5 * s * B),
            arrowstyle="<|-|>",
            mutation_scale=5,
            lw=_lw(0.2),
            color="0.35",
        )
    )
    grain_y = y_plan + 0.5 * s * B + 1.0 if s * B >= 12.0 else y_plan + s * B + 0.8
    ax.text(
        px(0.5 * L), grain_y, part.grain_note, ha="center", va="bottom", fontsize=5.5, color="0.25"
    )

    tol = part.node_tolerance_m * 1000.0
    dim_y = y_plan - 5.0
    for i, n in enumerate(part.node_positions_m, start=1):
        xn = n * 1000.0
        if tol > 0:
            for yy, hh in ((y_plan, s * B), (y_side, s * T)):
                ax.add_patch(
                    Rectangle(
                        (px(xn - tol), yy - 1.5),
                        max(2 * s * tol, 0.2),
                        hh + 3.0,
                        color=_TOL,
                        lw=0,
                        zorder=0,
                    )
                )
        for yy, hh in ((y_plan, s * B), (y_side, s * T)):
            ax.plot(
                [px(xn)] * 2,
                [yy - 2.0, yy + hh + 2.0],
                color=_NODE,
                lw=_lw(0.15),
                ls=(0, (6, 1.5, 1, 1.5)),
            )
        _dim_h(ax, x0, px(xn), dim_y, y_plan, f"node {i}: {xn:.1f} \u00b1 {tol:.1f}")
        dim_y -= 5.0
    for hx, hd, hh in part.holes:
        cx = px(hx * 1000.0)
        cy = y_side + s * (float(part.bottom_surface_m(hx)) + hh) * 1000.0
        ax.add_patch(Circle((cx, cy), s * hd * 500.0, fill=False, lw=_lw(0.2), ec=_INK))
        for e in (-0.5, 0.5):  # hidden lines of the cross hole in plan view
            ax.plot(
                [cx + e * s * hd * 1000.0] * 2,
                [y_plan, y_plan + s * B],
                color=_INK,
                lw=_lw(0.1),
                ls=(0, (2, 1)),
            )


def _figure(part: ShopPart, paper: str, orientation: str) -> Figure:
    W, H = page_size_mm(paper, orientation)
    s, scale_label = drawing_scale(part, paper, orientation)
    L = part.length_m * 1000.0
    T = part.blank_thickness_m * 1000.0
    B = part.width_m * 1000.0
    fig, ax = new_page(W, H)
    fx0, fy0, fx1, fy1 = MARGIN_MM, MARGIN_MM, W - MARGIN_MM, H - MARGIN_MM
    ax.add_patch(Rectangle((fx0, fy0), fx1 - fx0, fy1 - fy0, fill=False, lw=_lw(0.5), ec=_INK))

    # Views: side view at the top, plan view under it, node dimensions under that.
    x0 = fx0 + 0.5 * (fx1 - fx0 - 40.0 - s * L) + 14.0
    y_side = fy1 - 18.0 - s * T - (7.0 if part.missed else 0.0)  # room for the banner
    y_plan = y_side - 12.0 - s * B
    _views(ax, part, s, x0, y_side, y_plan)
    n_dims = len(part.node_positions_m)
    tables_top = y_plan - 5.0 * n_dims - 6.0

    # Cautions along the bottom left, as many lines as the width needs.
    tb_x = fx1 - _TB_W
    caution_lines = textwrap.wrap(
        "CAUTIONS: " + " ".join(cautions_for(part.caution_kind)), int((tb_x - fx0 - 6.0) / 1.05)
    )
    caution_h = 2.2 * len(caution_lines) + 4.0
    ax.text(
        fx0 + 2.0,
        fy0 + caution_h - 2.0,
        "\n".join(caution_lines),
        fontsize=5,
        va="top",
        linespacing=1.25,
    )

    # Tables and notes flow in columns; columns over the title block stop above it.
    bottom_default = fy0 + caution_h

    def bottom_at(x_right: float) -> float:
        return fy0 + _TB_H + 3.0 if x_right > tb_x else bottom_default

    rows_fit = int((tables_top - bottom_default - 2 * _ROW_MM - 1.0) // _ROW_MM)
    if rows_fit < 3:
        raise InputError(
            f"paper: {paper} {orientation} leaves no room for the tables; use a larger paper"
        )
    others = _other_tables(part)
    fixed_notes = [
        "Cut depth is measured from the blank's bottom face; 'leave t' from the top face. "
        "Work to the numbers, not to a scaled print."
    ]
    if part.holes:
        fixed_notes.insert(0, "* hole centre height above the bar's bottom surface at that x.")
    placed: list[tuple[_Table | _Notes, float, float]] = []
    for max_blocks, user_notes in ((3, True), (2, True), (1, True), (3, False), (1, False)):
        stations, spacing = _station_tables(part, rows_fit, max_blocks)
        notes = list(fixed_notes)
        notes.insert(
            0,
            f"Stations every {spacing:g} mm over the cut, straight between rows; x* is a corner "
            "of the profile (where the cut starts or ends, the thinnest point, a step's edge: two "
            "rows, before and after it).",
        )
        notes += list(part.notes) if user_notes else ["Further notes: see the cut table (CSV)."]
        placed, ok = [], True
        cx, cy, col_w = fx0 + 2.0, tables_top, 0.0
        for item in [*stations, *others, _notes_box(notes)]:
            if cy - item.height < bottom_at(cx + item.width):
                cx, cy, col_w = cx + col_w + 5.0, tables_top, 0.0
            if cy - item.height < bottom_at(cx + item.width) or cx + item.width > fx1 - 2.0:
                ok = False
                break
            placed.append((item, cx, cy))
            cy -= item.height + 3.0
            col_w = max(col_w, item.width)
        if ok:
            break
    else:
        raise InputError(f"paper: {paper} {orientation} is too small for this bar's tables; use A3")
    for item, tx, ty in placed:
        if isinstance(item, _Table):
            _draw_table(ax, item, tx, ty)
        else:
            _draw_notes(ax, item, tx, ty)
    _title_block(ax, part, tb_x, fy0, scale_label, f"{paper} {orientation}")
    if part.missed:
        _missed_banner(ax, part, fx0, fy1 - 7.0, fx1 - fx0)
    return fig


def drawing_pdf(part: ShopPart, paper: str = "A4", orientation: str = "landscape") -> bytes:
    """The drawing as a one-page PDF (the sheet at true size, the bar at the stated scale)."""
    with stable_rc():
        return pdf_bytes([_figure(part, paper, orientation)], f"{part.title} - drawing")


def drawing_svg(part: ShopPart, paper: str = "A4", orientation: str = "landscape") -> bytes:
    """The drawing as SVG, sheet size declared in millimetres."""
    W, H = page_size_mm(paper, orientation)
    with stable_rc():
        return svg_bytes(_figure(part, paper, orientation), W, H, f"{part.title} - drawing")
