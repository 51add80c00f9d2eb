"""Shop-floor cautions shared by every output (drawings, templates, DXF, cut tables, G-code).

The wording is this project's own. The points are common workshop practice (no single source):
guards and work holding, dust extraction (many tonewood dusts are sensitisers), eye and hearing
protection, simulating and air-cutting a program before cutting, following the machine's manual
and local practice, and never cutting deeper than the design.
"""

from __future__ import annotations

import textwrap

__all__ = [
    "CAUTIONS",
    "METAL_CAUTIONS",
    "PRINT_SCALE_NOTE",
    "STRING_CAUTIONS",
    "caution_lines",
    "cautions_for",
    "comment_lines",
]

CAUTIONS: tuple[str, ...] = (
    "Keep guards in place and hold the work securely; keep hands clear of cutters and blades.",
    "Use dust extraction and a suitable respirator: many tonewood dusts (rosewoods and padauk "
    "among them) are sensitisers of skin and lungs.",
    "Wear eye and hearing protection.",
    "Check every machine program in a simulator and air-cut it (Z raised) before cutting wood.",
    "Follow the machine's manual and local practice; the operator decides what is safe.",
    "Remove no more material than the design gives (plus any leave-stock); tune by hand from "
    "sharp, measuring often: material taken off cannot be put back.",
)

# Metal tubes and wire (chimes, wound strings): sharp edges and swarf, metal dust and fluids,
# lead in some free-machining brasses (common workshop practice, no single source).
METAL_CAUTIONS: tuple[str, ...] = (
    "Clamp the work so it cannot spin or whip; keep hands clear of saws and cutters.",
    "Cut ends and swarf are sharp: deburr every cut end, and handle stock with gloves, never "
    "near a rotating tool.",
    "Use extraction or wet cutting for metal dust and fluid mist; some brasses contain lead: "
    "wash your hands after work and before eating.",
    "Wear eye and hearing protection.",
    "Follow the machine's manual and local practice; the operator decides what is safe.",
    "Remove no more than the design gives; cut long (or shallow) and tune in small steps: "
    "material taken off cannot be put back.",
)

STRING_CAUTIONS: tuple[str, ...] = (
    *METAL_CAUTIONS[:5],
    "A string under tension stores energy: wear eye protection and never lean over a string "
    "while bringing it up to tension.",
    "Wind no more mass than the schedule gives; weigh as you go: a heavy string cannot be "
    "made lighter without unwinding it.",
)


def cautions_for(kind: str) -> tuple[str, ...]:
    """The cautions for ``kind``: "wood" (bars; the default), "metal" (tubes), "string"."""
    return {"metal": METAL_CAUTIONS, "string": STRING_CAUTIONS}.get(kind, CAUTIONS)


PRINT_SCALE_NOTE = (
    "Print at 100 % / actual size (no 'fit to page'); check the 100 mm scale bar before use."
)


def caution_lines(width: int = 90, kind: str = "wood") -> list[str]:
    """The cautions as plain lines no longer than ``width`` characters (first line a heading)."""
    lines = ["CAUTIONS:"]
    for item in cautions_for(kind):
        wrapped = textwrap.wrap(item, width=width - 2)
        lines.append("- " + wrapped[0])
        lines.extend("  " + rest for rest in wrapped[1:])
    return lines


def comment_lines(prefix: str, width: int = 72, kind: str = "wood") -> list[str]:
    """The cautions as comment lines starting with ``prefix`` (e.g. ``"# "``)."""
    return [prefix + line for line in caution_lines(width - len(prefix), kind)]
