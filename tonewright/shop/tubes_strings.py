"""Shop sheets for chimes (tube cut list with hanging holes) and loaded strings (winding schedule).

Tubes: the hanging hole goes at the computed mode-1 node, which the caller supplies (from the
forward model). For comparison the sheet also lists the node of a *uniform* free-free beam,
``x_n / L`` = the first zero of ``phi(x) = cosh bx + cos bx - s (sinh bx + sin bx)`` with
``s = (cosh bL - cos bL) / (sinh bL - sin bL)`` and ``bL = 4.73004074`` (the first root of
``cos x cosh x = 1``): 0.22416 (Thomson, *Theory of Vibration with Applications*, App. D).

Strings: the target linear density ``mu(x)`` (kg/m, piecewise linear between stations) is
made of a core wire plus a single-layer helical wrap. A wrap wire of diameter ``d_w`` and
density ``rho_w`` wound at pitch ``p`` around a core of diameter ``d_c`` lies on a helix of
diameter ``D = d_c + d_w``; each turn has length ``sqrt((pi D)^2 + p^2)`` (the unrolled
helix), so the added linear density is ``mu_w = rho_w (pi d_w^2 / 4) sqrt((pi D)^2 + p^2) / p``
and the pitch for a wanted ``mu_w`` is ``p = pi D / sqrt(k^2 - 1)``, ``k = mu_w / (rho_w pi
d_w^2 / 4)``. A single layer cannot be wound tighter than ``p = d_w`` (close-wound). Each
segment between stations gets the pitch of its mean added density, which gives the segment
its exact added mass.
"""

from __future__ import annotations

import csv
import io
import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
from scipy.optimize import brentq

from tonewright.acoustics.pitch import cents, hz_to_note
from tonewright.errors import InputError
from tonewright.shop.cautions import caution_lines, comment_lines
from tonewright.shop.part import _positive

__all__ = [
    "TubeCut",
    "WindingSegment",
    "WoundString",
    "tube_cut_list_csv",
    "tube_cut_sheet",
    "uniform_node_fraction",
    "winding_schedule",
    "winding_schedule_csv",
]

_BETA_L1 = 4.73004074  # first root of cos x cosh x = 1 (Thomson, App. D)


def uniform_node_fraction() -> float:
    """Node of the first free-free bending mode of a uniform beam, as a fraction of L."""
    b = _BETA_L1
    s = (math.cosh(b) - math.cos(b)) / (math.sinh(b) - math.sin(b))

    def phi(u: float) -> float:
        return math.cosh(b * u) + math.cos(b * u) - s * (math.sinh(b * u) + math.sin(b * u))

    return float(brentq(phi, 0.05, 0.45, xtol=1e-14))


def _pos(name: str, v: object) -> float:
    return _positive(name, v, "number")


# --- tubes ----------------------------------------------------------------------------------
@dataclass(frozen=True)
class TubeCut:
    """One chime: cut length, section and the hanging hole at the computed node (metres)."""

    name: str
    length_m: float
    outer_diameter_m: float
    wall_m: float
    node_from_top_m: float
    hole_diameter_m: float = 0.004
    node_tolerance_m: float = 0.0
    material_name: str = ""
    target_hz: float | None = None  # the strike note's target
    predicted_hz: float | None = None  # the strike note (not mode 1) as certified
    material_kind: str = "metal"  # which cautions apply: metal, or wood (bamboo, ...)
    mode1_hz: float | None = None  # the first bending mode, for reference
    a4_hz: float = 440.0  # the pitch reference of the notes shown
    missed: str = ""  # non-empty: the design missed its target (why)

    def __post_init__(self) -> None:
        if not isinstance(self.name, str) or not self.name.strip():
            raise InputError(f"name: {self.name!r} must be a non-empty text")
        L = _pos(f"{self.name}: length_m", self.length_m)
        D = _pos(f"{self.name}: outer_diameter_m", self.outer_diameter_m)
        w = _pos(f"{self.name}: wall_m", self.wall_m)
        if w >= D / 2:
            raise InputError(
                f"{self.name}: wall_m {w!r} must be less than half the outer diameter ({D / 2!r} m)"
            )
        d = _pos(f"{self.name}: hole_diameter_m", self.hole_diameter_m)
        if d >= 0.5 * D:
            raise InputError(
                f"{self.name}: hole_diameter_m {d!r} must be under half the outer "
                f"diameter ({0.5 * D!r} m)"
            )
        n = float(self.node_from_top_m)
        if not (d <= n <= L / 2):
            raise InputError(
                f"{self.name}: node_from_top_m {n!r} must lie between the hole "
                f"diameter and half the length ({d!r}..{L / 2!r} m)"
            )
        tol = float(self.node_tolerance_m)
        if not math.isfinite(tol) or tol < 0:
            raise InputError(f"{self.name}: node_tolerance_m {tol!r} must be >= 0")
        for f in ("target_hz", "predicted_hz", "mode1_hz"):
            v = getattr(self, f)
            if v is not None:
                _pos(f"{self.name}: {f}", v)


def _tube_rows(tubes: Sequence[TubeCut]) -> list[dict[str, str]]:
    frac = uniform_node_fraction()
    rows = []
    for t in tubes:
        dev = ""
        if t.target_hz and t.predicted_hz:
            dev = f"{cents(t.predicted_hz, t.target_hz):+.1f}"
        rows.append(
            {
                "name": t.name,
                "cut_length_mm": f"{t.length_m * 1000:.1f}",
                "outer_diameter_mm": f"{t.outer_diameter_m * 1000:.2f}",
                "wall_mm": f"{t.wall_m * 1000:.2f}",
                "hole_from_top_mm": f"{t.node_from_top_m * 1000:.1f}",
                "hole_tolerance_mm": f"{t.node_tolerance_m * 1000:.1f}",
                "hole_diameter_mm": f"{t.hole_diameter_m * 1000:.1f}",
                "uniform_node_mm": f"{frac * t.length_m * 1000:.1f}",
                "strike_note": "" if t.predicted_hz is None else _note(t.predicted_hz, t.a4_hz),
                "strike_target_hz": "" if t.target_hz is None else f"{t.target_hz:.2f}",
                "strike_hz": "" if t.predicted_hz is None else f"{t.predicted_hz:.2f}",
                "strike_cents_off": dev,
                "mode1_hz": "" if t.mode1_hz is None else f"{t.mode1_hz:.2f}",
                "a4_hz": f"{t.a4_hz:g}",
                "status": ("MISSED DESIGN: " + t.missed) if t.missed else "",
            }
        )
    return rows


def _note(f_hz: float, a4_hz: float) -> str:
    name, off = hz_to_note(f_hz, a4_hz)
    return f"{name} {off:+.1f}"


def _csv_text(comments: list[str], rows: list[dict[str, str]]) -> str:
    """``#`` comment lines, then a header and the rows written by the csv module (a title
    with a comma is quoted, so every row has as many fields as the header)."""
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=list(rows[0]), lineterminator="\n")
    writer.writeheader()
    writer.writerows(rows)
    return "\n".join(comments) + "\n" + buf.getvalue()


def _check_tubes(tubes: Sequence[TubeCut], kerf_mm: float) -> None:
    if not tubes:
        raise InputError("tubes: the list is empty; give at least one TubeCut")
    if not all(isinstance(t, TubeCut) for t in tubes):
        raise InputError("tubes: every item must be a TubeCut")
    if not (math.isfinite(kerf_mm) and 0 <= kerf_mm <= 10):
        raise InputError(f"kerf_mm: {kerf_mm!r} must lie in [0, 10] mm")


def tube_cut_list_csv(tubes: Sequence[TubeCut], kerf_mm: float = 2.0) -> str:
    """One row per tube; ``#`` comment lines give units, definitions and cautions."""
    _check_tubes(tubes, kerf_mm)
    rows = _tube_rows(tubes)
    total = sum(t.length_m for t in tubes) * 1000 + kerf_mm * len(tubes)
    head = [
        "# tonewright tube cut list",
        "# units: millimetres and hertz; hole_from_top_mm = centre of the hanging hole from "
        "the top (hanging) end, at the computed mode-1 node",
        "# uniform_node_mm = 0.2242 L, the node of a uniform free-free tube, for comparison",
        "# strike_note: the pitch a chime is heard at (the 2:3:4 series fitted to bending modes "
        "4-6), note name and cents at a4_hz, equal temperament; mode1_hz: the lowest bending "
        "mode, which is not the pitch",
        f"# stock needed: {total:.0f} mm including {kerf_mm:g} mm saw kerf per cut",
        *comment_lines("# ", 90, _kind(tubes)),
    ]
    return _csv_text(head, rows)


def tube_cut_sheet(tubes: Sequence[TubeCut], kerf_mm: float = 2.0) -> str:
    """A printable plain-text sheet: one block per tube, then the cautions."""
    _check_tubes(tubes, kerf_mm)
    frac = uniform_node_fraction()
    out = ["TUBE CUT SHEET (tonewright)", "=" * 27, ""]
    a4 = {t.a4_hz for t in tubes}
    out += [
        "Pitches are strike notes: the 2:3:4 series fitted to bending modes 4-6, the note a",
        f"chime is heard at; notes in equal temperament at A4 = {', '.join(f'{v:g}' for v in a4)} "
        "Hz.",
        "",
    ]
    for t, r in zip(tubes, _tube_rows(tubes), strict=True):
        out.append(f"{t.name}  ({t.material_name or 'material not given'})")
        out.append(f"  cut length            {r['cut_length_mm']} mm")
        out.append(
            f"  tube                  {r['outer_diameter_mm']} mm OD x {r['wall_mm']} mm wall"
        )
        out.append(
            f"  hanging hole          {r['hole_diameter_mm']} mm, centre "
            f"{r['hole_from_top_mm']} +- {r['hole_tolerance_mm']} mm from the top end"
        )
        shift = (t.node_from_top_m / (frac * t.length_m) - 1) * 100
        out.append(
            f"  (uniform-tube node    {r['uniform_node_mm']} mm = {frac:.4f} L; "
            f"given node {shift:+.1f} %)"
        )
        if t.missed:
            out.append(f"  MISSED DESIGN         {t.missed}")
        if t.predicted_hz:
            line = f"  strike note           {t.predicted_hz:.2f} Hz ({r['strike_note']} cents)"
            if t.target_hz:
                line += f"; target {t.target_hz:.2f} Hz, {r['strike_cents_off']} cents off"
            out.append(line)
        if t.mode1_hz:
            out.append(f"  lowest mode           {t.mode1_hz:.2f} Hz (bending 1; not the pitch)")
        out.append("")
    total = sum(t.length_m for t in tubes) * 1000 + kerf_mm * len(tubes)
    out.append(f"Stock needed: {total:.0f} mm including {kerf_mm:g} mm saw kerf per cut.")
    out.append(
        "Cut long, deburr, then tune by shortening from the bottom end: "
        "a shorter tube sounds higher."
    )
    out.append("")
    out += caution_lines(90, _kind(tubes))
    return "\n".join(out) + "\n"


def _kind(tubes: Sequence[TubeCut]) -> str:
    return "metal" if any(t.material_kind != "wood" for t in tubes) else "wood"


# --- strings --------------------------------------------------------------------------------
@dataclass(frozen=True)
class WoundString:
    """A string whose linear density ``mu(x)`` is built from a core and a helical wrap."""

    title: str
    length_m: float
    stations_x_m: tuple[float, ...]
    linear_density_kg_m: tuple[float, ...]
    core_diameter_m: float
    core_density_kg_m3: float
    wrap_diameter_m: float
    wrap_density_kg_m3: float

    def __post_init__(self) -> None:
        L = _pos("length_m", self.length_m)
        for name in (
            "core_diameter_m",
            "core_density_kg_m3",
            "wrap_diameter_m",
            "wrap_density_kg_m3",
        ):
            _pos(name, getattr(self, name))
        x = np.asarray(self.stations_x_m, dtype=float)
        mu = np.asarray(self.linear_density_kg_m, dtype=float)
        if x.ndim != 1 or x.size < 2 or mu.shape != x.shape:
            raise InputError(
                "stations_x_m / linear_density_kg_m: give matching lists of at least 2 values"
            )
        if np.any(np.diff(x) <= 0) or abs(x[0]) > 1e-9 or abs(x[-1] - L) > 1e-9:
            raise InputError(
                f"stations_x_m: {tuple(x)!r} must increase strictly from 0 to length_m={L!r}"
            )
        if not np.all(np.isfinite(mu)) or np.any(mu <= 0):
            raise InputError("linear_density_kg_m: every value must be positive")
        object.__setattr__(self, "stations_x_m", tuple(float(v) for v in x))
        object.__setattr__(self, "linear_density_kg_m", tuple(float(v) for v in mu))

    @property
    def core_linear_density_kg_m(self) -> float:
        return self.core_density_kg_m3 * math.pi * self.core_diameter_m**2 / 4


@dataclass(frozen=True)
class WindingSegment:
    x0_m: float
    x1_m: float
    added_kg_m: float  # mean added linear density over the segment
    added_mass_kg: float
    pitch_m: float  # inf: no wrap
    turns: float
    wire_length_m: float
    method: str  # "bare", "wrap", or "point mass" (too little for even a straight strand)


def winding_schedule(s: WoundString) -> list[WindingSegment]:
    """Pitch, turns, wire length and added mass for each segment between stations."""
    mu_c = s.core_linear_density_kg_m
    x = np.asarray(s.stations_x_m)
    mu = np.asarray(s.linear_density_kg_m)
    if np.any(mu < mu_c * (1 - 1e-12)):
        i = int(np.argmin(mu - mu_c))
        raise InputError(
            f"linear_density_kg_m[{i}]: {mu[i]:.6g} kg/m is below the bare core's "
            f"{mu_c:.6g} kg/m; use a thinner or lighter core"
        )
    mu_wire = s.wrap_density_kg_m3 * math.pi * s.wrap_diameter_m**2 / 4
    D = s.core_diameter_m + s.wrap_diameter_m
    out = []
    for i in range(x.size - 1):
        length = x[i + 1] - x[i]
        added = max(0.5 * (mu[i] + mu[i + 1]) - mu_c, 0.0)  # exact mean of a linear mu
        if added <= 1e-12 * mu_c:
            out.append(WindingSegment(x[i], x[i + 1], 0.0, 0.0, math.inf, 0.0, 0.0, "bare"))
            continue
        k = added / mu_wire
        if k <= 1.0:  # even a straight strand is heavier: add the mass as a bead or crimp
            out.append(
                WindingSegment(
                    x[i], x[i + 1], added, added * length, math.inf, 0.0, 0.0, "point mass"
                )
            )
            continue
        pitch = math.pi * D / math.sqrt(k * k - 1)
        if pitch < s.wrap_diameter_m:
            raise InputError(
                f"wrap_diameter_m: {s.wrap_diameter_m:g} m wire cannot add {added:.4g} kg/m "
                f"between x = {x[i]:.4f} and {x[i + 1]:.4f} m even close-wound; use a heavier "
                "wrap wire"
            )
        turns = length / pitch
        out.append(
            WindingSegment(
                x[i],
                x[i + 1],
                added,
                added * length,
                pitch,
                turns,
                turns * math.hypot(math.pi * D, pitch),
                "wrap",
            )
        )
    return out


def winding_schedule_csv(s: WoundString) -> str:
    """The winding schedule as CSV in millimetres and grams with ``#`` comment lines."""
    segs = winding_schedule(s)
    head = [
        f"# tonewright winding schedule: {s.title}",
        f"# core {s.core_diameter_m * 1000:.3f} mm ({s.core_linear_density_kg_m * 1000:.4f} g/m);"
        f" wrap wire {s.wrap_diameter_m * 1000:.3f} mm, single layer",
        "# x from the string's first end in mm; added_g_per_m = target mean linear density "
        "minus the core's; pitch_mm = advance per turn (empty: no wrap)",
        "# method: wrap = wind at pitch_mm; point mass = fix added_mass_g at the segment's "
        "centre (bead or crimp: too little for a wrap); bare = core only",
        f"# total added mass {sum(g.added_mass_kg for g in segs) * 1000:.3f} g",
        *comment_lines("# ", 90, "string"),
    ]
    lines = [
        *head,
        "x_start_mm,x_end_mm,added_g_per_m,added_mass_g,pitch_mm,turns,wire_length_mm,method",
    ]
    for g in segs:
        pitch = "" if math.isinf(g.pitch_m) else f"{g.pitch_m * 1000:.3f}"
        lines.append(
            f"{g.x0_m * 1000:.2f},{g.x1_m * 1000:.2f},{g.added_kg_m * 1000:.4f},"
            f"{g.added_mass_kg * 1000:.4f},{pitch},{g.turns:.2f},"
            f"{g.wire_length_m * 1000:.1f},{g.method}"
        )
    return "\n".join(lines) + "\n"
