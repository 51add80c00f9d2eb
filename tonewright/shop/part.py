"""What the shop outputs consume: one bar, its undercut profile, holes, nodes and partials.

Geometry convention (shared by every shop output):

- ``x`` runs along the bar from its left end (0) to its right end (``length_m``);
- the top face is flat; the undercut is on the bottom face;
- the thickness to leave, ``t(x)``, is measured from the top face and is piecewise linear
  between the stations ``(stations_x_m, stations_thickness_m)``;
- in side views the blank's bottom face is at height 0 and its top face at ``T`` (the blank
  thickness), so the bar's bottom surface is at ``T - t(x)``; ``T - t(x)`` is also the depth
  of cut measured from the blank's bottom face;
- a hole ``(x, diameter, height)`` is drilled across the width; ``height`` is its centre above
  the bar's bottom surface at ``x`` (the same convention as ``forward.geometry.Hole``).

All lengths are metres here; outputs convert to millimetres.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from tonewright.errors import InputError

__all__ = ["CORNER_TURN", "CUT_MIN_MM", "MISSED_MARK", "ShopPart"]

MISSED_MARK = "MISSED DESIGN"

# Station positions closer than this to 0 or L count as the end (floating-point slack).
_END_SLACK_M = 1e-9
# A cut shallower than this (mm) is no cut: the tables print two decimals.
CUT_MIN_MM = 0.01
# A corner: the profile's slope turns by more than this (radians, about 1 degree) at a station.
CORNER_TURN = 0.02


def _positive(name: str, value: object, what: str = "length in metres") -> float:
    """``value`` as a positive finite float, else an InputError naming ``name`` and ``what``."""
    try:
        v = float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        raise InputError(f"{name}: {value!r} is not a number; give a {what}") from None
    if not math.isfinite(v) or v <= 0:
        raise InputError(f"{name}: {value!r} must be a positive finite {what}")
    return v


def _number(name: str, value: object) -> float:
    try:
        v = float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError):
        raise InputError(f"{name}: {value!r} is not a number") from None
    if not math.isfinite(v):
        raise InputError(f"{name}: {value!r} must be finite")
    return v


def _floats(name: str, values: object) -> tuple[float, ...]:
    try:
        out = tuple(float(v) for v in values)  # type: ignore[union-attr]
    except (TypeError, ValueError):
        raise InputError(f"{name}: {values!r} must be a sequence of numbers") from None
    if not all(math.isfinite(v) for v in out):
        raise InputError(f"{name}: {values!r} contains a non-finite value")
    return out


@dataclass(frozen=True)
class ShopPart:
    """A bar ready for the shop: validated at construction, immutable afterwards.

    ``holes``: ``(x_m, diameter_m, height_m)`` with the height of the hole centre above the
    bar's bottom surface at ``x_m``. ``partials``: ``(label, target_hz or None, predicted_hz)``.
    """

    title: str
    length_m: float
    width_m: float
    blank_thickness_m: float
    stations_x_m: tuple[float, ...]
    stations_thickness_m: tuple[float, ...]
    holes: tuple[tuple[float, float, float], ...] = ()
    node_positions_m: tuple[float, ...] = ()
    node_tolerance_m: float = 0.0
    material_name: str = ""
    grain_note: str = "grain along the length"
    partials: tuple[tuple[str, float | None, float], ...] = ()
    notes: tuple[str, ...] = ()
    certified_by: str = ""  # the model whose partials the sheets show
    missed: str = ""  # non-empty: the design missed its target (why); marked on every sheet
    caution_kind: str = "wood"  # which cautions the sheets carry: "wood" or "metal"

    def __post_init__(self) -> None:
        put = object.__setattr__
        if not isinstance(self.title, str) or not self.title.strip():
            raise InputError(f"title: {self.title!r} must be a non-empty text")
        L = _positive("length_m", self.length_m)
        W = _positive("width_m", self.width_m)
        T = _positive("blank_thickness_m", self.blank_thickness_m)
        put(self, "length_m", L)
        put(self, "width_m", W)
        put(self, "blank_thickness_m", T)

        xs = _floats("stations_x_m", self.stations_x_m)
        ts = _floats("stations_thickness_m", self.stations_thickness_m)
        if len(xs) < 2:
            raise InputError(f"stations_x_m: {len(xs)} station(s) given; need at least 2 (0 and L)")
        if len(ts) != len(xs):
            raise InputError(
                f"stations_thickness_m: {len(ts)} values for {len(xs)} stations; give one each"
            )
        steps = np.diff(xs)
        if np.any(steps <= 0):
            i = int(np.argmax(steps <= 0))
            raise InputError(
                f"stations_x_m: {xs[i + 1]!r} after {xs[i]!r}; positions must increase strictly"
            )
        if abs(xs[0]) > _END_SLACK_M or abs(xs[-1] - L) > _END_SLACK_M:
            raise InputError(
                f"stations_x_m: span {xs[0]!r}..{xs[-1]!r} m must run from 0 to length_m={L!r}"
            )
        xs = (0.0, *xs[1:-1], L)  # snap the ends exactly
        for i, t in enumerate(ts):
            if t <= 0 or t > T * (1 + 1e-12):
                raise InputError(
                    f"stations_thickness_m[{i}]: {t!r} m must be > 0 and <= blank_thickness_m={T!r}"
                )
        put(self, "stations_x_m", xs)
        put(self, "stations_thickness_m", tuple(min(t, T) for t in ts))

        holes = []
        for i, hole in enumerate(self.holes):
            values = _floats(f"holes[{i}]", hole)
            if len(values) != 3:
                raise InputError(f"holes[{i}]: {hole!r} must be (x_m, diameter_m, height_m)")
            hx, hd, hh = values
            holes.append((hx, hd, hh))
            self._check_hole(i, hx, hd, hh)
        put(self, "holes", tuple(holes))

        nodes = _floats("node_positions_m", self.node_positions_m)
        for i, n in enumerate(nodes):
            if not 0 <= n <= L:
                raise InputError(f"node_positions_m[{i}]: {n!r} m must lie within 0..{L!r}")
        put(self, "node_positions_m", nodes)
        tol = _number("node_tolerance_m", self.node_tolerance_m)
        if tol < 0:
            raise InputError(f"node_tolerance_m: {self.node_tolerance_m!r} must be >= 0 metres")
        put(self, "node_tolerance_m", tol)

        if self.caution_kind not in ("wood", "metal"):
            raise InputError(f"caution_kind: {self.caution_kind!r} must be 'wood' or 'metal'")
        for name in ("material_name", "grain_note", "certified_by", "missed"):
            if not isinstance(getattr(self, name), str):
                raise InputError(f"{name}: {getattr(self, name)!r} must be text")

        partials = []
        for i, item in enumerate(self.partials):
            if not isinstance(item, tuple | list) or len(item) != 3 or not isinstance(item[0], str):
                raise InputError(
                    f"partials[{i}]: {item!r} must be (label, target_hz or None, predicted_hz)"
                )
            label, target, predicted = item
            if target is not None:
                target = _number(f"partials[{i}] target_hz", target)
                if target <= 0:
                    raise InputError(f"partials[{i}] target_hz: {target!r} must be > 0 or None")
            predicted = _number(f"partials[{i}] predicted_hz", predicted)
            if predicted <= 0:
                raise InputError(f"partials[{i}] predicted_hz: {predicted!r} must be > 0")
            partials.append((label, target, predicted))
        put(self, "partials", tuple(partials))

        notes = (self.notes,) if isinstance(self.notes, str) else self.notes
        if not all(isinstance(n, str) for n in notes):
            raise InputError(f"notes: {self.notes!r} must be lines of text")
        put(self, "notes", tuple(notes))

    def _check_hole(self, i: int, hx: float, hd: float, hh: float) -> None:
        L = self.length_m
        if hd <= 0:
            raise InputError(f"holes[{i}] diameter: {hd!r} m must be positive")
        if hx - hd / 2 < 0 or hx + hd / 2 > L:
            raise InputError(f"holes[{i}] x: {hx!r} m puts the hole outside the bar (0..{L!r})")
        # The hole's circle (side view) must stay inside the material at every point.
        phi = np.linspace(0.0, 2 * np.pi, 73)
        px = hx + 0.5 * hd * np.cos(phi)
        pz = self.bottom_surface_m(hx) + hh + 0.5 * hd * np.sin(phi)
        if np.any(pz <= self.bottom_surface_m(px)) or np.any(pz >= self.blank_thickness_m):
            raise InputError(
                f"holes[{i}] height: {hh!r} m (diameter {hd!r} m at x={hx!r} m) breaks through a "
                "face; the hole must lie inside the bar"
            )

    # --- geometry along the bar (vectorised; x in metres) ---------------------------------
    def thickness_m(self, x: np.ndarray | float) -> np.ndarray:
        """Thickness to leave at ``x`` (piecewise linear between the stations)."""
        return np.interp(x, self.stations_x_m, self.stations_thickness_m)

    def depth_m(self, x: np.ndarray | float) -> np.ndarray:
        """Depth of cut at ``x`` measured from the blank's bottom face: ``T - t(x)``."""
        return self.blank_thickness_m - self.thickness_m(x)

    def bottom_surface_m(self, x: np.ndarray | float) -> np.ndarray:
        """Height of the bar's bottom surface above the blank's bottom face (same as depth)."""
        return self.depth_m(x)

    @property
    def min_thickness_m(self) -> float:
        return float(min(self.stations_thickness_m))

    def corners_m(self) -> tuple[float, ...]:
        """The profile's corners: where the cut starts and ends (depth over ``CUT_MIN_MM``),
        its thinnest point, and every station where the slope turns by more than
        ``CORNER_TURN`` (a step's edge, a user profile's vertex; a design's fine stations
        along a smooth curve turn far less). Positions in metres, increasing."""
        x = np.asarray(self.stations_x_m)
        depth = self.blank_thickness_m - np.asarray(self.stations_thickness_m)
        cut = np.flatnonzero(depth > CUT_MIN_MM * 1e-3)
        if cut.size == 0:
            return ()
        out = [x[max(cut[0] - 1, 0)], x[min(cut[-1] + 1, x.size - 1)]]
        out.append(x[int(np.argmin(self.stations_thickness_m))])
        slope = np.diff(-depth) / np.diff(x)
        turn = np.abs(np.diff(np.arctan(slope)))
        out += list(x[1:-1][turn > CORNER_TURN])
        # to 0.01 mm: a step's sides, a kink's neighbours and a round station coincide
        out = np.unique(np.round(np.asarray(out, dtype=float), 5))
        keep = np.concatenate(([True], np.diff(out) > 0.05e-3))  # a step's two sides are one
        return tuple(float(v) for v in out[keep])

    def round_stations_m(self, spacing_mm: float, cut_only: bool = False) -> tuple[float, ...]:
        """Stations at whole multiples of ``spacing_mm`` plus the corners (and both ends),
        in metres. ``cut_only``: grid stations only over the cut (from its start to its end),
        where a maker measures; the ends stay."""
        L = self.length_m
        step = spacing_mm * 1e-3
        grid = np.arange(0, np.floor(L / step + 1e-9) + 1) * step
        corners = self.corners_m()
        if cut_only and corners:
            lo, hi = corners[0], corners[-1]
            grid = grid[(grid >= lo - 1e-9) & (grid <= hi + 1e-9)]
        xs = np.unique(np.concatenate((grid, corners, [0.0, L])))
        keep = np.concatenate(([True], np.diff(xs) > 1e-6))
        return tuple(float(v) for v in xs[keep])

    def thickness_sides_m(self, x_m: float) -> tuple[float, ...]:
        """The thickness at ``x_m``; at a step (a jump over a few micrometres) both sides,
        left first, so a table can give the step as two rows at the same x."""
        left, right = (float(v) for v in self.thickness_m(np.array([x_m - 3e-6, x_m + 3e-6])))
        if abs(left - right) > 0.005e-3:
            return (left, right)
        return (float(self.thickness_m(x_m)),)

    def is_corner_m(self, x_m: float) -> bool:
        return any(abs(x_m - c) < 1e-6 for c in self.corners_m())

    @property
    def file_stem(self) -> str:
        """A file-name-safe version of the title."""
        keep = "".join(c if c.isalnum() else "_" for c in self.title.strip().lower())
        return "_".join(part for part in keep.split("_") if part) or "part"
