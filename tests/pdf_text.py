"""Text of a rendered PDF with the box of every line (pdfminer.six), for tests of the sheets.

pdfminer.six is a dev dependency; a test that needs it skips (with the reason) without it.
"""

from __future__ import annotations

import io
import itertools
from dataclasses import dataclass

import pytest


@dataclass(frozen=True)
class TextLine:
    page: int
    text: str
    x0: float
    y0: float
    x1: float
    y1: float  # PDF points

    def overlaps(self, other: TextLine, slack: float = 0.2) -> bool:
        """The two boxes share area (beyond ``slack`` points, which glyph boxes may touch by)."""
        return (
            self.page == other.page
            and min(self.x1, other.x1) - max(self.x0, other.x0) > slack
            and min(self.y1, other.y1) - max(self.y0, other.y0) > slack
        )


def pdf_lines(pdf: bytes) -> list[TextLine]:
    """Every text line of every page, split into words' runs as the PDF places them."""
    layout = pytest.importorskip("pdfminer.layout", reason="pdfminer.six is not installed")
    high = pytest.importorskip("pdfminer.high_level", reason="pdfminer.six is not installed")
    params = layout.LAParams(char_margin=0.5, line_margin=0.05, word_margin=0.1)
    out = []
    for p, page in enumerate(high.extract_pages(io.BytesIO(pdf), laparams=params)):
        for box in page:
            if not isinstance(box, layout.LTTextContainer):
                continue
            for line in box:
                if isinstance(line, layout.LTTextLine) and line.get_text().strip():
                    out.append(
                        TextLine(p, line.get_text().strip(), line.x0, line.y0, line.x1, line.y1)
                    )
    return out


def overlapping(lines: list[TextLine]) -> list[tuple[str, str]]:
    """Pairs of text lines whose boxes overlap: overprinted labels."""
    return [(a.text, b.text) for a, b in itertools.combinations(lines, 2) if a.overlaps(b)]
