"""Figures for designs: the side profile with its nodes, and the spectrum against the targets.

Figures are returned as bytes (PNG or SVG) so callers write them atomically; SVG output is
byte-stable (fixed hash salt, no dates).
"""

from __future__ import annotations

import io
from collections.abc import Sequence

import matplotlib
import matplotlib.ticker

matplotlib.use("Agg")
import matplotlib.pyplot as plt
import numpy as np

__all__ = [
    "FAMILY_STYLE",
    "density_figure",
    "figure_bytes",
    "profile_figure",
    "shape_figure",
    "spectrum_figure",
]

# this tool's own palette: partial families by hue, targets in black
FAMILY_STYLE = {
    "bending": "#1b6f8a",
    "lateral": "#b5651d",
    "torsion": "#7b4fa0",
    "axial": "#5a8f29",
    "transverse": "#1b6f8a",
}


def figure_bytes(fig, fmt: str) -> bytes:
    buf = io.BytesIO()
    with plt.rc_context({"svg.hashsalt": "tonewright", "svg.fonttype": "none"}):
        fig.savefig(buf, format=fmt, dpi=150, metadata={"Date": None} if fmt == "svg" else None)
    plt.close(fig)
    return buf.getvalue()


def profile_figure(
    x_mm: np.ndarray,
    thickness_mm: np.ndarray,
    blank_mm: float,
    nodes_mm: Sequence[float],
    holes: Sequence[tuple[float, float, float]] = (),
    title: str = "",
):
    """Side view (not to scale vertically): flat top, undercut bottom, mode-1 nodes."""
    fig, ax = plt.subplots(figsize=(9, 3.2))
    top = np.full_like(x_mm, blank_mm)
    bottom = blank_mm - thickness_mm
    ax.fill_between(x_mm, bottom, top, color="#d9c3a5", edgecolor="#5b4630", linewidth=1.0)
    for i, xn in enumerate(nodes_mm):
        ax.axvline(
            xn,
            color="#1b6f8a",
            linestyle="--",
            linewidth=1.0,
            label="mode-1 node" if i == 0 else None,
        )
        ax.annotate(
            f"{xn:.1f}",
            (xn, blank_mm),
            textcoords="offset points",
            xytext=(2, 4),
            fontsize=8,
            color="#1b6f8a",
        )
    for xh, d, zh in holes:
        ax.add_patch(
            plt.Circle((xh, blank_mm - zh), d / 2, fill=False, color="#333333", linewidth=0.8)
        )
    ax.set_xlabel("position along the bar (mm)")
    ax.set_ylabel("height (mm)")
    ax.set_xlim(x_mm[0] - 5, x_mm[-1] + 5)
    ax.set_ylim(-0.1 * blank_mm, 1.35 * blank_mm)
    ax.set_title(title or "Side profile (undercut facing down)")
    ax.legend(loc="upper right", fontsize=8, frameon=False)
    ax.grid(alpha=0.25)
    fig.tight_layout()
    return fig


def spectrum_figure(
    modes: Sequence[tuple[str, int, float]],
    targets: Sequence[tuple[str, float, float]],
    title: str = "",
    second: Sequence[tuple[str, int, float]] = (),
    second_label: str = "",
):
    """Computed modes as stems by family, target partials as black lines with tolerance;
    ``second`` (e.g. the beam model's modes beside the certifying model's) as short grey
    dashed stems with a cross, labelled ``second_label``."""
    fig, ax = plt.subplots(figsize=(9, 3.2))
    for i, (_family, _order, f) in enumerate(second):
        ax.vlines(f, 0, 0.35, color="#888888", linestyle="--", linewidth=1.0)
        ax.plot(
            [f],
            [0.35],
            marker="x",
            color="#888888",
            markersize=4,
            label=(second_label or "second model") if i == 0 else None,
        )
    seen = set()
    for family, order, f in modes:
        if family == "strike":  # the pitch a chime is heard at, fitted to bending 4-6
            ax.vlines(f, 0, 1.3, color="black", linewidth=2.4, label="strike note (model)")
            ax.annotate("strike", (f, 1.3), textcoords="offset points", xytext=(2, 2), fontsize=7)
            continue
        color = FAMILY_STYLE.get(family, "#555555")
        label = family if family not in seen else None
        seen.add(family)
        height = 1.0 if family in ("bending", "transverse") else 0.6
        ax.vlines(f, 0, height, color=color, linewidth=2.0, label=label)
        ax.annotate(
            f"{family[0].upper()}{order}",
            (f, height),
            textcoords="offset points",
            xytext=(2, 2),
            fontsize=7,
            color=color,
        )
    for i, (label, f, _tol) in enumerate(targets):
        ax.axvline(
            f, color="black", linestyle=":", linewidth=1.0, label="target" if i == 0 else None
        )
        ax.annotate(label, (f, 1.12), fontsize=7, rotation=90, va="bottom", ha="right")
    freqs = [f for *_, f in modes] + [f for _, f, _ in targets]
    if max(freqs) / min(freqs) > 2.5:  # a log axis labelled at 1-2-5 steps
        ax.set_xscale("log")
        ax.xaxis.set_major_locator(matplotlib.ticker.LogLocator(base=10, subs=(1.0, 2.0, 5.0)))
        ax.xaxis.set_major_formatter(matplotlib.ticker.FuncFormatter(lambda v, _: f"{v:g}"))
        ax.xaxis.set_minor_formatter(matplotlib.ticker.NullFormatter())
    lo, hi = min(freqs), max(freqs)
    pad = (hi / lo) ** 0.06 if hi > lo else 1.1
    ax.set_xlim(lo / pad, hi * pad)
    ax.set_ylim(0, 1.6)
    ax.set_yticks([])
    ax.set_xlabel("frequency (Hz)")
    ax.set_title(title or "Partials against targets")
    ax.legend(loc="upper left", fontsize=8, frameon=False, ncol=5)
    ax.grid(alpha=0.25, which="both", axis="x")
    fig.tight_layout()
    return fig


def density_figure(x_mm: np.ndarray, density_g_m: np.ndarray, nodes_mm: Sequence[float] = ()):
    """A string's designed linear density along its length (g/m), with mode-1 nodes."""
    fig, ax = plt.subplots(figsize=(9, 3.2))
    ax.fill_between(x_mm, 0.0, density_g_m, color="#d9c3a5", edgecolor="#5b4630", linewidth=1.0)
    for xn in nodes_mm:
        ax.axvline(xn, color="#1b6f8a", linestyle="--", linewidth=0.8)
    ax.set_xlabel("position along the string (mm)")
    ax.set_ylabel("linear density (g/m)")
    ax.set_ylim(0.0, 1.15 * float(np.max(density_g_m)))
    ax.set_title("Designed linear density (core plus winding)")
    ax.grid(alpha=0.25)
    fig.tight_layout()
    return fig


def shape_figure(x_mm: np.ndarray, shape: np.ndarray, nodes_mm: Sequence[float]):
    """The first mode shape of a tube or string along its length, with its nodes."""
    fig, ax = plt.subplots(figsize=(9, 3.2))
    ax.plot(x_mm, shape, color="#1b6f8a")
    for xn in nodes_mm:
        ax.axvline(xn, color="#1b6f8a", linestyle="--", linewidth=0.8)
    ax.axhline(0, color="black", linewidth=0.5)
    ax.set_xlabel("position (mm)")
    ax.set_ylabel("first mode shape")
    fig.tight_layout()
    return fig
