"""Full-size (1:1) paper template of the bar's side view, tiled over A4/Letter pages.

Every page carries: the part of the side view that falls in its window (outline, undercut,
blank, node marks with tolerance, holes, a millimetre ruler along the bar), a frame to trim
along, alignment crosshairs in each overlap strip, a page label ("page 2 of 3, align with
page 1"), a 100 mm scale bar, the print-at-100 % note and the cautions.

Tiling: the printable window of a sheet is ``w = paper width - 2 margins`` wide; page ``i``
shows bar coordinates ``[x0 + i (w - overlap), x0 + i (w - overlap) + w]``, so neighbours share
an ``overlap``-wide strip holding the crosshairs that must coincide when the pages are taped
together. Side-view coordinates are those of :mod:`tonewright.shop.part` in millimetres (top
face up, undercut at the bottom).
"""

from __future__ import annotations

import math
import textwrap
from dataclasses import dataclass

import numpy as np
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from matplotlib.patches import Circle, Rectangle

from tonewright.errors import InputError
from tonewright.shop.cautions import PRINT_SCALE_NOTE, cautions_for
from tonewright.shop.pages import new_page, page_size_mm, pdf_bytes, stable_rc, svg_bytes
from tonewright.shop.part import MISSED_MARK, ShopPart

__all__ = ["TileLayout", "template_layout", "template_pdf", "template_svgs"]

MARGIN_MM = 10.0  # clear of the unprintable edge of ordinary printers
HEADER_MM = 16.0
FOOTER_MM = 24.0
SCALE_BAR_MM = 100.0
_PT_PER_MM = 72.0 / 25.4
# World content reaches this far below the blank's bottom face and above its top face.
_BELOW_MM, _ABOVE_MM = 24.0, 21.0
_SIDE_MM = 12.0  # room left and right of the bar ends


def _lw(mm: float) -> float:
    return mm * _PT_PER_MM


@dataclass(frozen=True)
class TileLayout:
    """Where each page's window falls along the bar (all millimetres)."""

    page_w: float
    page_h: float
    window: tuple[float, float, float, float]  # x, y, width, height of the content window
    world_y0: float  # bar height at the window's lower edge
    starts: tuple[float, ...]  # bar x at each page window's left edge
    overlap: float

    @property
    def n_pages(self) -> int:
        return len(self.starts)


def template_layout(
    part: ShopPart, paper: str = "A4", orientation: str = "landscape", overlap_mm: float = 15.0
) -> TileLayout:
    """Page size, content window and the bar range each page shows."""
    W, H = page_size_mm(paper, orientation)
    win_x, win_w = MARGIN_MM, W - 2 * MARGIN_MM
    win_y, win_h = MARGIN_MM + FOOTER_MM, H - 2 * MARGIN_MM - FOOTER_MM - HEADER_MM
    T = part.blank_thickness_m * 1000.0
    L = part.length_m * 1000.0
    need_h = T + _BELOW_MM + _ABOVE_MM
    if need_h > win_h:
        raise InputError(
            f"orientation: {orientation!r} {paper} leaves {win_h:.0f} mm for a {need_h:.0f} mm "
            "tall view; use landscape or a larger paper"
        )
    if not (5.0 <= overlap_mm <= win_w / 3):
        raise InputError(f"overlap_mm: {overlap_mm!r} must lie in [5, {win_w / 3:.0f}] mm")
    lo, hi = -_SIDE_MM, L + _SIDE_MM
    span = hi - lo
    step = win_w - overlap_mm
    n = 1 if span <= win_w else math.ceil((span - overlap_mm) / step)
    x0 = lo if n > 1 else 0.5 * (lo + hi - win_w)  # left-aligned tiles; one page: centred
    world_y0 = 0.5 * (-_BELOW_MM + T + _ABOVE_MM) - 0.5 * win_h
    return TileLayout(
        page_w=W,
        page_h=H,
        window=(win_x, win_y, win_w, win_h),
        world_y0=world_y0,
        starts=tuple(x0 + i * step for i in range(n)),
        overlap=overlap_mm,
    )


def _draw_bar(ax: Axes, part: ShopPart) -> None:
    """The side view in bar coordinates (mm); everything clips to the page window."""
    L = part.length_m * 1000.0
    T = part.blank_thickness_m * 1000.0
    xs = np.asarray(part.stations_x_m) * 1000.0
    yb = part.bottom_surface_m(np.asarray(part.stations_x_m)) * 1000.0
    ax.fill_between(xs, 0.0, yb, color="0.85", lw=0, zorder=1)
    ax.add_patch(
        Rectangle((0, 0), L, T, fill=False, ls=(0, (4, 2)), lw=_lw(0.15), ec="0.45", zorder=2)
    )
    ox = np.concatenate(([0.0, L], xs[::-1], [0.0]))
    oy = np.concatenate(([T, T], yb[::-1], [T]))
    ax.plot(
        ox, oy, color="black", lw=_lw(0.3), gid="bar-outline", zorder=4, solid_joinstyle="miter"
    )
    # Round stations (every 10 mm over the cut, and the corners) as short ticks that start
    # clear of the outline, so the cut line itself stays one clean line to trace.
    ticks_m = np.asarray(part.round_stations_m(10.0, cut_only=True))
    tx = ticks_m * 1000.0
    ty = part.bottom_surface_m(ticks_m) * 1000.0
    ax.plot(
        np.column_stack((tx, tx, np.full(tx.size, np.nan))).ravel(),
        np.column_stack((ty - 0.8, ty - 2.3, np.full(tx.size, np.nan))).ravel(),
        color="0.35",
        lw=_lw(0.12),
        zorder=3,
        gid="station-ticks",
    )
    ax.plot(
        [L / 2, L / 2], [-2.0, T + 2.0], color="0.3", lw=_lw(0.15), ls=(0, (8, 2, 1, 2)), zorder=3
    )
    ax.text(L / 2, T + 2.5, "centre", ha="center", va="bottom", fontsize=5, clip_on=True)
    deepest = int(np.argmax(yb))
    if yb[deepest] > 1.0:
        ax.text(
            xs[deepest],
            0.5 * yb[deepest],
            "undercut: remove",
            ha="center",
            va="center",
            fontsize=5,
            color="0.25",
            clip_on=True,
            zorder=3,
        )
    ax.text(0.0, T + 2.5, "left end", ha="left", va="bottom", fontsize=5, clip_on=True)
    ax.text(L, T + 2.5, "right end", ha="right", va="bottom", fontsize=5, clip_on=True)

    tol = part.node_tolerance_m * 1000.0
    for i, n in enumerate(part.node_positions_m, start=1):
        xn = n * 1000.0
        if tol > 0:
            ax.add_patch(
                Rectangle((xn - tol, -2.0), 2 * tol, T + 4.0, color="#c9dced", lw=0, zorder=2)
            )
        ax.plot([xn, xn], [-2.0, T + 2.0], color="#1f4e79", lw=_lw(0.2), gid=f"node-{i}", zorder=5)
        ax.text(
            xn,
            T + 5.5,
            f"node {xn:.1f} \u00b1 {tol:.1f}",
            ha="center",
            va="bottom",
            fontsize=5,
            clip_on=True,
        )
    for i, (hx, hd, hh) in enumerate(part.holes, start=1):
        cx = hx * 1000.0
        cy = float(part.bottom_surface_m(hx)) * 1000.0 + hh * 1000.0
        r = hd * 500.0
        ax.add_patch(
            Circle((cx, cy), r, fill=False, lw=_lw(0.2), ec="black", zorder=6, gid=f"hole-{i}")
        )
        ax.plot(
            [cx - r - 1, cx + r + 1, np.nan, cx, cx],
            [cy, cy, np.nan, cy - r - 1, cy + r + 1],
            color="black",
            lw=_lw(0.1),
            zorder=6,
        )
        ax.text(
            cx,
            T + 9.0,
            f"hole \u00d8{hd * 1000:.1f}, centre {hh * 1000:.1f} above the bottom",
            ha="center",
            va="bottom",
            fontsize=4.5,
            clip_on=True,
        )

    # Ruler along the bar, 1 mm ticks, numbered every 10 mm.
    mm = np.arange(0, math.floor(L) + 1)
    length = np.where(mm % 10 == 0, 3.0, np.where(mm % 5 == 0, 2.0, 1.0))
    segs_x = np.column_stack((mm, mm, np.full(mm.size, np.nan))).ravel()
    segs_y = np.column_stack(
        (np.full(mm.size, -4.0), -4.0 - length, np.full(mm.size, np.nan))
    ).ravel()
    ax.plot(segs_x, segs_y, color="black", lw=_lw(0.1), zorder=3)
    ax.plot([0, L], [-4.0, -4.0], color="black", lw=_lw(0.1), zorder=3)
    for v in mm[mm % 10 == 0]:
        ax.text(v, -7.6, f"{v:d}", ha="center", va="top", fontsize=4, clip_on=True)
    ax.text(0.0, -12.0, "mm from the left end", ha="left", va="top", fontsize=4.5, clip_on=True)


def _draw_crosshairs(ax: Axes, layout: TileLayout, part: ShopPart) -> None:
    T = part.blank_thickness_m * 1000.0
    for i in range(layout.n_pages - 1):
        lo = layout.starts[i + 1]
        cx = lo + 0.5 * layout.overlap
        ax.add_patch(
            Rectangle(
                (lo, -_BELOW_MM + 1),
                layout.overlap,
                T + _BELOW_MM + _ABOVE_MM - 2,
                fill=False,
                hatch="////",
                ec="0.8",
                lw=0,
                zorder=0,
            )
        )
        for where, cy in (("top", T + 16.0), ("bottom", -19.0)):
            ax.plot(
                [cx - 4, cx + 4, np.nan, cx, cx],
                [cy, cy, np.nan, cy - 4, cy + 4],
                color="black",
                lw=_lw(0.15),
                gid=f"align-{i + 1}-{i + 2}-{where}",
                zorder=7,
            )
            ax.add_patch(Circle((cx, cy), 2.5, fill=False, lw=_lw(0.15), ec="black", zorder=7))
        ax.text(cx + 3, -19.0 + 2.8, f"{i + 1}|{i + 2}", fontsize=4.5, clip_on=True, zorder=7)


def _draw_page_furniture(ax: Axes, layout: TileLayout, part: ShopPart, i: int) -> None:
    H = layout.page_h
    wx, _, ww, _ = layout.window
    n = layout.n_pages
    # Frame = trim line around the whole printable area.
    top = H - MARGIN_MM
    ax.add_patch(
        Rectangle(
            (wx, MARGIN_MM), ww, top - MARGIN_MM, fill=False, lw=_lw(0.15), ec="0.5", ls=(0, (2, 2))
        )
    )
    ax.text(
        wx + 2,
        top - 2,
        # the title stops short of the missed-design band (about 1.9 mm a character)
        textwrap.shorten(
            f"{part.title} \u2013 full-size template, side view",
            int((0.53 if part.missed else 0.98) * ww / 1.9),
            placeholder=" ...",
        ),
        fontsize=8.5,
        fontweight="bold",
        va="top",
    )
    if n == 1:
        label = "page 1 of 1"
    elif i == 0:
        label = f"page 1 of {n}, align with page 2 (page 2 overlaps the hatched strip on the right)"
    else:
        label = (
            f"page {i + 1} of {n}, align with page {i}: trim this page along its left "
            f"frame line, lay it over page {i} and match the crosshairs"
        )
    ax.text(wx + 2, top - 7.0, label, fontsize=6.5, va="top", gid="page-label")
    ax.text(wx + 2, top - 11.0, PRINT_SCALE_NOTE, fontsize=6.5, va="top", fontweight="bold")
    if part.missed:
        ax.add_patch(Rectangle((wx + ww * 0.55, top - 9.5), ww * 0.45 - 1.0, 8.0, color="#b00020"))
        ax.text(
            wx + ww * 0.55 + 1.5,
            top - 5.5,
            "\n".join(textwrap.wrap(f"{MISSED_MARK}: {part.missed}", int(ww * 0.45 / 1.3))[:2]),
            fontsize=6,
            fontweight="bold",
            color="white",
            va="center",
            gid="missed-design",
        )

    # 100 mm scale bar: a solid bar with 10 mm ticks above it.
    sx, sy = wx + 4.0, MARGIN_MM + FOOTER_MM - 9.0
    ax.add_patch(Rectangle((sx, sy), SCALE_BAR_MM, 2.0, color="black", lw=0, gid="scale-bar"))
    ticks = np.arange(0.0, SCALE_BAR_MM + 1.0, 10.0)
    ax.plot(
        np.column_stack((sx + ticks, sx + ticks, np.full(ticks.size, np.nan))).ravel(),
        np.column_stack(
            (
                np.full(ticks.size, sy + 2.0),
                np.full(ticks.size, sy + 3.5),
                np.full(ticks.size, np.nan),
            )
        ).ravel(),
        color="black",
        lw=_lw(0.15),
    )
    for v in (0, 50, 100):
        ax.text(
            sx + v,
            sy + 4.0,
            f"{v}" + (" mm" if v == 100 else ""),
            ha="center",
            va="bottom",
            fontsize=5.5,
        )
    ax.text(
        sx + SCALE_BAR_MM + 4.0,
        sy + 1.0,
        "scale check: this bar must measure 100 mm",
        va="center",
        fontsize=6,
    )
    chars = int((ww - 4) / 1.05)  # ~1.05 mm per character at 5 pt
    text = "CAUTIONS: " + " ".join(cautions_for(part.caution_kind))
    lines = textwrap.wrap(text, width=chars)
    ax.text(wx + 2, sy - 2.5, "\n".join(lines), va="top", fontsize=5, linespacing=1.25)


def _figures(part: ShopPart, layout: TileLayout) -> list[Figure]:
    figs = []
    wx, wy, ww, wh = layout.window
    W, H = layout.page_w, layout.page_h
    for i, start in enumerate(layout.starts):
        fig, page_ax = new_page(W, H)
        world = fig.add_axes((wx / W, wy / H, ww / W, wh / H))
        world.set_xlim(start, start + ww)
        world.set_ylim(layout.world_y0, layout.world_y0 + wh)
        world.set_axis_off()
        _draw_bar(world, part)
        _draw_crosshairs(world, layout, part)
        if i + 1 < layout.n_pages:  # where the next page's frame will lie
            edge = layout.starts[i + 1]
            world.plot(
                [edge, edge],
                [layout.world_y0, layout.world_y0 + wh],
                color="0.5",
                lw=_lw(0.15),
                ls=(0, (1, 1.5)),
            )
            world.text(
                edge - 1,
                layout.world_y0 + 1,
                f"page {i + 2} starts here",
                rotation=90,
                ha="right",
                va="bottom",
                fontsize=4.5,
                color="0.3",
                clip_on=True,
            )
        page_ax.set_zorder(2)
        _draw_page_furniture(page_ax, layout, part, i)
        figs.append(fig)
    return figs


def template_pdf(
    part: ShopPart, paper: str = "A4", orientation: str = "landscape", overlap_mm: float = 15.0
) -> bytes:
    """All template pages in one PDF at 1:1."""
    layout = template_layout(part, paper, orientation, overlap_mm)
    with stable_rc():
        return pdf_bytes(_figures(part, layout), f"{part.title} - full-size template")


def template_svgs(
    part: ShopPart, paper: str = "A4", orientation: str = "landscape", overlap_mm: float = 15.0
) -> list[bytes]:
    """One SVG per template page, each declared in millimetres at 1:1."""
    layout = template_layout(part, paper, orientation, overlap_mm)
    with stable_rc():
        figs = _figures(part, layout)
        return [
            svg_bytes(
                fig,
                layout.page_w,
                layout.page_h,
                f"{part.title} - full-size template, page {i + 1} of {len(figs)}",
            )
            for i, fig in enumerate(figs)
        ]
