"""True-scale pages with matplotlib: paper sizes, page figures in millimetres, stable PDF/SVG.

A page is a figure of ``figsize = (w_mm / 25.4, h_mm / 25.4)`` inches whose single full-page
axes (``add_axes((0, 0, 1, 1))``) has limits ``[0, w_mm] x [0, h_mm]``: one data unit is one
millimetre on paper. Files are written without ``bbox_inches="tight"`` (which would crop and
rescale). SVG declares its width and height in millimetres (the viewBox stays in points, so one
user unit is 25.4/72 mm); ``svg.hashsalt`` is fixed and dates are left out of the metadata,
so the same input gives the same bytes.
"""

from __future__ import annotations

import io
import re
from collections.abc import Iterator, Sequence
from contextlib import contextmanager

import matplotlib as mpl
from matplotlib.axes import Axes
from matplotlib.backends.backend_pdf import PdfPages
from matplotlib.figure import Figure

from tonewright.errors import InputError

__all__ = ["PAPERS", "new_page", "page_size_mm", "pdf_bytes", "stable_rc", "svg_bytes"]

# ISO 216 A4/A3 and ANSI Letter/Tabloid (portrait width, height) in millimetres.
PAPERS: dict[str, tuple[float, float]] = {
    "A4": (210.0, 297.0),
    "A3": (297.0, 420.0),
    "Letter": (215.9, 279.4),
    "Tabloid": (279.4, 431.8),
}

_RC = {
    "svg.hashsalt": "tonewright",
    "svg.fonttype": "none",  # text stays text: searchable, small
    "pdf.fonttype": 42,
    "path.simplify": False,  # keep every vertex of the outlines
    "font.family": "DejaVu Sans",
    "font.size": 7.0,
    "axes.unicode_minus": False,
    "hatch.linewidth": 0.3,
}


@contextmanager
def stable_rc() -> Iterator[None]:
    """Settings shared by every page (deterministic output, true vertices)."""
    with mpl.rc_context(_RC):
        yield


def page_size_mm(paper: str, orientation: str) -> tuple[float, float]:
    """``(width, height)`` of the sheet as it lies on the table."""
    if paper not in PAPERS:
        raise InputError(f"paper: {paper!r} is not known; use one of {', '.join(PAPERS)}")
    if orientation not in ("portrait", "landscape"):
        raise InputError(f"orientation: {orientation!r} must be 'portrait' or 'landscape'")
    w, h = PAPERS[paper]
    return (w, h) if orientation == "portrait" else (h, w)


def new_page(w_mm: float, h_mm: float) -> tuple[Figure, Axes]:
    """A blank page whose axes span the sheet with limits in millimetres."""
    fig = Figure(figsize=(w_mm / 25.4, h_mm / 25.4))
    ax = fig.add_axes((0, 0, 1, 1))
    ax.set_xlim(0.0, w_mm)
    ax.set_ylim(0.0, h_mm)
    ax.set_axis_off()
    return fig, ax


def _mm(v: float) -> str:
    return f"{v:.4f}".rstrip("0").rstrip(".")


def svg_bytes(fig: Figure, w_mm: float, h_mm: float, title: str) -> bytes:
    """The page as SVG whose declared size is in millimetres (true scale in any viewer)."""
    buf = io.StringIO()
    fig.savefig(buf, format="svg", metadata={"Date": None, "Creator": "tonewright", "Title": title})
    text = buf.getvalue()
    text, n = re.subn(
        r'<svg([^>]*?) width="[\d.]+pt" height="[\d.]+pt"',
        rf'<svg\1 width="{_mm(w_mm)}mm" height="{_mm(h_mm)}mm"',
        text,
        count=1,
    )
    if n != 1:  # pragma: no cover - guards against a change in matplotlib's SVG header
        raise RuntimeError("could not set the SVG page size in millimetres")
    return text.encode("utf-8")


def pdf_bytes(figs: Sequence[Figure], title: str) -> bytes:
    """All pages in one PDF, without creation dates (byte-stable)."""
    buf = io.BytesIO()
    meta = {
        "Creator": "tonewright",
        "Producer": "tonewright",
        "Title": title,
        "CreationDate": None,
        "ModDate": None,
    }
    with PdfPages(buf, metadata=meta) as pdf:
        for fig in figs:
            pdf.savefig(fig)
    return buf.getvalue()
