"""Shop-floor cautions shared by every output (drawings, templates, DXF, cut tables, G-code).

The wording is this project's own. The points are common workshop practice (no single source):
guards and work holding, dust extraction (many tonewood dusts are sensitisers), eye and hearing
protection, simulating and air-cutting a program before cutting, following the machine's manual
and local practice, and never cutting deeper than the design.
"""

from __future__ import annotations

import textwrap

__all__ = ["CAUTIONS", "PRINT_SCALE_NOTE", "caution_lines", "comment_lines"]

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

PRINT_SCALE_NOTE = (
    "Print at 100 % / actual size (no 'fit to page'); check the 100 mm scale bar before use."
)


def caution_lines(width: int = 90) -> list[str]:
    """The cautions as plain lines no longer than ``width`` characters (first line a heading)."""
    lines = ["CAUTIONS:"]
    for item in CAUTIONS:
        wrapped = textwrap.wrap(item, width=width - 2)
        lines.append("- " + wrapped[0])
        lines.extend("  " + rest for rest in wrapped[1:])
    return lines


def comment_lines(prefix: str, width: int = 72) -> list[str]:
    """The cautions as comment lines starting with ``prefix`` (e.g. ``"# "``)."""
    return [prefix + line for line in caution_lines(width - len(prefix))]
