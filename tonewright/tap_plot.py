"""The picture of a tap: the spectrum of the analysed record, each found line labelled with
what it is, and (with an expected part) where the part's modes should be.

The spectrum is the magnitude of the Hann-windowed, 4x zero-padded DFT of the analysed record
in dB relative to its peak; found lines are marked at their fitted frequencies.
"""

from __future__ import annotations

import numpy as np

from tonewright.bench import TapReport
from tonewright.plots import FAMILY_STYLE, figure_bytes, plt

__all__ = ["tap_figure"]

NOT_BAR_COLOUR = "#8a8a8a"
FLOOR_DB = -90.0


def tap_figure(report: TapReport, fmt: str = "png") -> bytes:
    """PNG (or SVG) bytes of the labelled spectrum of ``report``'s analysed record."""
    res = report.result
    x = np.asarray(report.samples, float)
    a = round(res.onset_s * report.rate)
    n = max(16, round(res.analysed_s * report.rate))
    seg = x[a : a + n] - np.mean(x[a : a + n])
    spec = np.abs(np.fft.rfft(seg * np.hanning(seg.size), 4 * seg.size))
    f = np.fft.rfftfreq(4 * seg.size, 1.0 / report.rate)
    db = 20.0 * np.log10(spec / max(spec.max(), 1e-300) + 1e-12)
    top = max((p.frequency_hz for p in res.partials), default=f[-1])
    fmax = min(f[-1], 1.25 * top)
    keep = (f > 0) & (f <= fmax)

    fig, ax = plt.subplots(figsize=(10, 4.5))
    ax.plot(f[keep], np.maximum(db[keep], FLOOR_DB), color="#404040", lw=0.7)
    for label, hz in report.expected:
        if hz <= fmax:
            colour = FAMILY_STYLE.get(label.split()[0], "black")
            ax.axvline(hz, color=colour, ls=":", lw=1.0)
            ax.text(hz, FLOOR_DB + 3, label, rotation=90, fontsize=7, color=colour, va="bottom")
    for p, lab in zip(res.partials, report.labels, strict=False):
        colour = FAMILY_STYLE.get(lab.kind, NOT_BAR_COLOUR) if lab.from_bar else NOT_BAR_COLOUR
        level = float(np.interp(p.frequency_hz, f, db))
        ax.plot([p.frequency_hz], [level], "v", color=colour, ms=5)
        text = lab.text + (" (peak)" if p.method == "peak" else "")
        ax.annotate(
            f"{text}\n{p.frequency_hz:.1f} Hz",
            (p.frequency_hz, level),
            xytext=(0, 6),
            textcoords="offset points",
            rotation=90,
            fontsize=7,
            color=colour,
            ha="center",
            va="bottom",
        )
    ax.set_xscale("log")
    ax.set_xlim(max(10.0, 0.7 * min((p.frequency_hz for p in res.partials), default=20.0)), fmax)
    ax.set_ylim(FLOOR_DB, 40.0)
    ax.set_xlabel("frequency (Hz)")
    ax.set_ylabel("level (dB re peak)")
    title = f"{report.name}: strike at {res.onset_s:.3f} s, {res.analysed_s:.2f} s analysed"
    if report.expected:
        title += "; dotted: the expected part's modes, scaled to the tap"
    ax.set_title(title, fontsize=9)
    ax.grid(True, which="both", alpha=0.2)
    fig.tight_layout()
    return figure_bytes(fig, fmt)
