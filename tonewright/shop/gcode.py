"""RS-274 program for a CNC router cutting a bar's undercut, with the cutter offset computed here.

Work coordinates (millimetres, stated again in every program header): the bar lies upside
down, undercut face up, turned over about its long axis so its left end stays on the left;
``X`` runs along the bar from the left end, ``Y`` across the width from the long edge nearest
the operator, ``Z = 0`` is the bar's upturned bottom face before cutting and ``Z`` is negative
into the wood. The design surface is ``z(x) = -(T - t(x))`` (minus the depth of cut) and the
target is that plus the leave-stock.

Toolpath: parallel passes along ``X`` stepping over in ``Y`` (zig-zag raster) across the full
width; roughing layers, each at most ``stepdown_mm`` deeper than the last, follow ``max(level,
finish + allowance)``; then one finishing layer follows the finish surface. Tip heights come
from the exact gouge-free offsets in :mod:`tonewright.shop.toolpath` (no G41/G42 in the
controller), sampled every ``sample_step_mm`` (at least 8 samples per cutter radius) and
refined by bisection wherever a chord strays more than 0.002 mm from the offset curve, lifted
where a chord would dip and rounded *up* to the 0.001 mm output resolution, so no point of the
cutter goes below the target. Rapids (G0) only run at the safe height, or straight up to it;
descending moves are slowed to the plunge feed; no canned cycles.

Before any code is emitted the finishing envelope is compared with the target: if the cutter
cannot reach the design somewhere it is needed (a tight hollow, a narrow cut) by more than
``reach_tolerance_mm``, an :class:`~tonewright.errors.InputError` names where, by how much, and
the largest cutter that would fit.
"""

from __future__ import annotations

import math
import textwrap
import unicodedata
from dataclasses import dataclass, field
from typing import Literal

import numpy as np

from tonewright.errors import InputError
from tonewright.shop import toolpath as tp
from tonewright.shop.cautions import caution_lines
from tonewright.shop.part import ShopPart

__all__ = ["Cutter", "GcodeOptions", "PassSet", "UndercutPlan", "plan_undercut", "undercut_gcode"]

_MARGIN_MM = 0.001  # extra lift above the exact offset: one unit of output resolution
_REFINE_MM = 0.002  # chord-to-curve gap that triggers adding a sample to the tool path
_SIMPLIFY_MM = 0.005  # a dropped vertex may sit at most this far under its chord
_DENSE_MM = 0.02  # tool-position spacing (at least r/100) when checking what the finish leaves
_CUSP_MM = 0.02  # default finishing cusp height for ball ends (well below hand sanding)


def _check(
    name: str, value: float, lo: float, hi: float, unit: str, *, lo_open: bool = True
) -> float:
    try:
        v = float(value)
    except (TypeError, ValueError):
        raise InputError(f"{name}: {value!r} is not a number ({unit})") from None
    ok = math.isfinite(v) and (v > lo if lo_open else v >= lo) and v <= hi
    if not ok:
        bracket = "(" if lo_open else "["
        raise InputError(f"{name}: {value!r} must lie in {bracket}{lo:g}, {hi:g}] {unit}")
    return v


@dataclass(frozen=True)
class Cutter:
    """A router cutter: ``ball`` (ball end) or ``flat`` (square end), sizes in millimetres."""

    kind: Literal["ball", "flat"] = "ball"
    diameter_mm: float = 6.0
    flute_length_mm: float = 20.0

    def __post_init__(self) -> None:
        if self.kind not in ("ball", "flat"):
            raise InputError(f"cutter.kind: {self.kind!r} must be 'ball' or 'flat'")
        _check("cutter.diameter_mm", self.diameter_mm, 0.0, 50.0, "mm")
        _check("cutter.flute_length_mm", self.flute_length_mm, 0.0, 150.0, "mm")

    @property
    def radius_mm(self) -> float:
        return 0.5 * self.diameter_mm


@dataclass(frozen=True)
class GcodeOptions:
    """Cutting data. The defaults are deliberately gentle for a small router in hardwood
    (common practice, no source): check them against the cutter maker's data."""

    cutter: Cutter = field(default_factory=Cutter)
    spindle_rpm: float = 16000.0
    feed_mm_min: float = 1000.0
    plunge_mm_min: float = 300.0
    stepdown_mm: float = 2.0
    stepover_rough_mm: float | None = None  # None: 40 % of the diameter
    stepover_finish_mm: float | None = None  # None: 0.02 mm cusps (ball), 50 % diameter (flat)
    finish_allowance_mm: float = 0.5
    leave_stock_mm: float = 0.0
    safe_z_mm: float = 10.0
    sample_step_mm: float = 0.2
    reach_tolerance_mm: float = 0.1
    spindle_wait_s: float = 5.0

    def __post_init__(self) -> None:
        if not isinstance(self.cutter, Cutter):
            raise InputError(f"cutter: {self.cutter!r} must be a Cutter")
        D = self.cutter.diameter_mm
        _check("spindle_rpm", self.spindle_rpm, 0.0, 60000.0, "rev/min")
        _check("feed_mm_min", self.feed_mm_min, 0.0, 20000.0, "mm/min")
        _check("plunge_mm_min", self.plunge_mm_min, 0.0, float(self.feed_mm_min), "mm/min")
        _check("stepdown_mm", self.stepdown_mm, 0.0, min(D, self.cutter.flute_length_mm), "mm")
        if self.stepover_rough_mm is not None:
            _check("stepover_rough_mm", self.stepover_rough_mm, 0.0, D, "mm")
        if self.stepover_finish_mm is not None:
            _check("stepover_finish_mm", self.stepover_finish_mm, 0.0, D, "mm")
        _check(
            "finish_allowance_mm",
            self.finish_allowance_mm,
            0.0,
            self.stepdown_mm,
            "mm",
            lo_open=False,
        )
        _check("leave_stock_mm", self.leave_stock_mm, 0.0, 5.0, "mm", lo_open=False)
        _check("safe_z_mm", self.safe_z_mm, 0.0, 100.0, "mm")
        _check("sample_step_mm", self.sample_step_mm, 0.005, 2.0, "mm")
        _check("reach_tolerance_mm", self.reach_tolerance_mm, 0.0, 5.0, "mm")
        _check("spindle_wait_s", self.spindle_wait_s, 0.0, 60.0, "s", lo_open=False)

    @property
    def rough_stepover_mm(self) -> float:
        if self.stepover_rough_mm is not None:
            return float(self.stepover_rough_mm)
        return 0.4 * self.cutter.diameter_mm

    @property
    def finish_stepover_mm(self) -> float:
        if self.stepover_finish_mm is not None:
            return float(self.stepover_finish_mm)
        if self.cutter.kind == "ball":
            return tp.stepover_for_cusp(self.cutter.radius_mm, _CUSP_MM)
        return 0.5 * self.cutter.diameter_mm


@dataclass(frozen=True, eq=False)
class PassSet:
    """One layer: the same X-Z profile run at every Y in ``ys`` (alternating direction)."""

    label: str
    x: np.ndarray
    z: np.ndarray
    ys: np.ndarray


@dataclass(frozen=True, eq=False)
class UndercutPlan:
    """Everything the program is written from (millimetres, work coordinates)."""

    layers: tuple[PassSet, ...]
    target_x: np.ndarray  # stations
    target_z: np.ndarray  # design surface plus leave-stock
    finish_x: np.ndarray  # dense finishing tip path (before simplification)
    finish_z: np.ndarray
    max_shortfall_mm: float  # most material left over the target (square to it) where needed
    deepest_tip_mm: float


def _um_round(v: np.ndarray) -> np.ndarray:
    return np.round(np.asarray(v, dtype=float) * 1000.0) / 1000.0


def _um_ceil(v: np.ndarray) -> np.ndarray:
    return np.ceil(np.asarray(v, dtype=float) * 1000.0) / 1000.0


def _finish_tips(
    kind: tp.CutterKind, r: float, xs: np.ndarray, zs: np.ndarray, L: float, h: float
) -> tuple[np.ndarray, np.ndarray]:
    """Dense gouge-free tip path over [0, L] on a micrometre grid (at least 8 points per
    cutter radius, so small cutters still find tight corners)."""
    h = max(min(h, r / 8.0), 0.001)
    special = np.concatenate((xs, xs - r, xs + r))
    grid = np.concatenate((np.arange(0.0, L, h), [L], special))
    grid = np.unique(_um_round(grid[(grid >= 0.0) & (grid <= L)]))
    z = tp.tip_height(kind, grid, xs, zs, r)
    # Refine where the path bends between samples (the ball wedged in a hollow, a flat end
    # leaving a ridge): insert midpoints until every chord is within _REFINE_MM of the curve.
    for _ in range(12):
        mid = _um_round(0.5 * (grid[:-1] + grid[1:]))
        room = (mid > grid[:-1]) & (mid < grid[1:])
        z_mid = tp.tip_height(kind, mid[room], xs, zs, r)
        bent = np.abs(0.5 * (z[:-1] + z[1:])[room] - z_mid) > _REFINE_MM
        if not bent.any():
            break
        grid = np.concatenate((grid, mid[room][bent]))
        z = np.concatenate((z, z_mid[bent]))
        order = np.argsort(grid)
        grid, z = grid[order], z[order]
    required = tp.tip_height(kind, tp.inner_points(grid), xs, zs, r)
    z = tp.lift_chords(grid, z, required) + _MARGIN_MM
    return grid, _um_ceil(z)


def _densify(x: np.ndarray, z: np.ndarray, step: float) -> tuple[np.ndarray, np.ndarray]:
    """Points along the polyline no further apart than ``step`` in x or in z (the cutter moves
    continuously along each chord, which matters on steep walls)."""
    n = np.maximum(np.ceil(np.maximum(np.abs(np.diff(x)), np.abs(np.diff(z))) / step), 1)
    n = n.astype(int)
    seg = np.repeat(np.arange(x.size - 1), n)
    frac = (np.arange(seg.size) - np.repeat(np.cumsum(n) - n, n)) / np.repeat(n, n)
    xd = np.append(x[seg] + frac * np.diff(x)[seg], x[-1])
    zd = np.append(z[seg] + frac * np.diff(z)[seg], z[-1])
    return xd, zd


def _shortfall(
    kind: tp.CutterKind, r: float, x: np.ndarray, z: np.ndarray, xs: np.ndarray, zs: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Thickness the finished surface leaves above the target, measured square to the target
    surface (vertical gap times ``1/sqrt(1 + m^2)``, the flatter slope at a breakpoint), where
    the target is below Z0; evaluated along the densified tool path. Returns ``(x, excess)``."""
    xd, zd = _densify(x, z, max(_DENSE_MM, r / 100.0))
    target = np.interp(xd, xs, zs)
    left = np.minimum(tp.envelope(kind, xd, zd, xd, r), 0.0)
    m = np.diff(zs) / np.diff(xs)
    last = m.size - 1
    i_left = np.clip(np.searchsorted(xs, xd, side="left") - 1, 0, last)
    i_right = np.clip(np.searchsorted(xs, xd, side="right") - 1, 0, last)
    slope = np.minimum(np.abs(m[i_left]), np.abs(m[i_right]))
    return xd, np.where(target < 0.0, (left - target) / np.sqrt(1.0 + slope * slope), 0.0)


def _intervals(x: np.ndarray, mask: np.ndarray) -> list[tuple[float, float]]:
    edges = np.flatnonzero(np.diff(np.concatenate(([0], mask.astype(int), [0]))))
    return [(float(x[a]), float(x[b - 1])) for a, b in zip(edges[::2], edges[1::2], strict=True)]


def _finish(
    kind: tp.CutterKind,
    r: float,
    xs: np.ndarray,
    zs: np.ndarray,
    L: float,
    h: float,
    ys: np.ndarray,
) -> tuple[np.ndarray, np.ndarray, PassSet | None, np.ndarray, np.ndarray]:
    """Dense finishing tips, the emitted finishing layer, and where and how much it leaves."""
    x, zf = _finish_tips(kind, r, xs, zs, L, h)
    finish = _layer("finishing layer", x, zf, ys, zf < 0.0)
    if finish is None:
        return x, zf, None, x, np.full(x.shape, np.inf)
    # What the emitted (simplified) path leaves: its own vertices inside the cut span, the
    # dense path (in the air, at or above Z0) outside it.
    before, after = x < finish.x[0], x > finish.x[-1]
    xp = np.concatenate((x[before], finish.x, x[after]))
    zp = np.concatenate((zf[before], finish.z, zf[after]))
    return x, zf, finish, *_shortfall(kind, r, xp, zp, xs, zs)


def _largest_fitting_diameter(
    kind: tp.CutterKind, r: float, xs: np.ndarray, zs: np.ndarray, L: float, h: float, tol: float
) -> float:
    """Bisection on the radius, rounded down to 0.1 mm in diameter and confirmed."""
    lo, hi = 0.0, r
    for _ in range(max(1, math.ceil(math.log2(r / 0.02)))):  # to 0.02 mm in radius
        mid = 0.5 * (lo + hi)
        if _finish(kind, mid, xs, zs, L, h, np.zeros(1))[4].max() <= tol:
            lo = mid
        else:
            hi = mid
    d = math.floor(20.0 * lo) / 10.0
    while d > 0.1 and _finish(kind, d / 2, xs, zs, L, h, np.zeros(1))[4].max() > tol:
        d = round(d - 0.1, 1)  # the grid makes the fit slightly non-monotonic: confirm it
    return d


def _ys(kind: str, r: float, W: float, stepover: float) -> np.ndarray:
    if kind == "ball":
        lo, hi = 0.0, W  # the ball's lowest point must reach both long edges
    elif W <= 2.0 * r:
        return _um_round(np.array([0.5 * W]))
    else:
        lo, hi = r, W - r  # a swept flat end covers +-r about its centre
    n = math.ceil((hi - lo) / stepover - 1e-9) + 1
    return _um_round(np.linspace(lo, hi, max(n, 2)))


def _layer(
    label: str, x: np.ndarray, z: np.ndarray, ys: np.ndarray, cut: np.ndarray
) -> PassSet | None:
    """Keep the span where ``cut`` holds, plus one vertex either side; drop redundant vertices."""
    idx = np.flatnonzero(cut)
    if idx.size == 0:
        return None
    i0, i1 = max(idx[0] - 1, 0), min(idx[-1] + 1, x.size - 1)
    xx, zz = x[i0 : i1 + 1], z[i0 : i1 + 1]
    keep = tp.simplify_above(xx, zz, _SIMPLIFY_MM)
    return PassSet(label, xx[keep], zz[keep], ys)


def plan_undercut(part: ShopPart, options: GcodeOptions | None = None) -> UndercutPlan:
    """Compute roughing and finishing layers; raise InputError when the cutter cannot do it."""
    opt = options or GcodeOptions()
    cutter = opt.cutter
    kind, r = cutter.kind, cutter.radius_mm
    L = part.length_m * 1000.0
    W = part.width_m * 1000.0
    xs = np.asarray(part.stations_x_m) * 1000.0
    zs = -part.depth_m(np.asarray(part.stations_x_m)) * 1000.0 + opt.leave_stock_mm
    deepest_cut = opt.leave_stock_mm - float(zs.min())
    if deepest_cut <= 0.0:
        raise InputError(
            "stations_thickness_m: every station is at the blank thickness; nothing to cut"
        )
    if zs.min() >= 0.0:
        raise InputError(
            f"leave_stock_mm: {opt.leave_stock_mm:g} mm leaves nothing to cut (deepest cut "
            f"{deepest_cut:.2f} mm); lower the leave-stock"
        )
    h = opt.sample_step_mm
    ys_finish = _ys(kind, r, W, opt.finish_stepover_mm)
    x, zf, finish, x_short, short = _finish(kind, r, xs, zs, L, h, ys_finish)
    tol = opt.reach_tolerance_mm
    if finish is None:
        raise InputError(
            f"cutter.diameter_mm: a {cutter.diameter_mm:g} mm {kind}-end cutter cannot reach into "
            "this undercut anywhere; use a smaller cutter"
        )
    if short.max() > tol:
        spans = _intervals(x_short, short > tol)
        where = "; ".join(f"x = {a:.1f} to {b:.1f} mm" for a, b in spans[:3])
        fits = _largest_fitting_diameter(kind, r, xs, zs, L, h, tol)
        raise InputError(
            f"cutter.diameter_mm: a {cutter.diameter_mm:g} mm {kind}-end cutter is too large for "
            f"this undercut: it leaves up to {short.max():.2f} mm over the design at {where} "
            f"(allowed {tol:g} mm); use a {kind} end of at most {fits:.1f} mm diameter"
        )
    deepest = float(zf.min())
    if -deepest > cutter.flute_length_mm:
        raise InputError(
            f"cutter.flute_length_mm: {cutter.flute_length_mm:g} mm is shorter than the "
            f"{-deepest:.2f} mm deep cut; the shank would rub: use a longer cutter"
        )

    zr = zf + _um_ceil(opt.finish_allowance_mm)
    layers: list[PassSet | None] = []
    ys_rough = _ys(kind, r, W, opt.rough_stepover_mm)
    n_rough = math.ceil(-zr.min() / opt.stepdown_mm - 1e-9) if zr.min() < 0 else 0
    above = 0.0
    for k in range(1, n_rough + 1):
        level = float(_um_ceil(-k * opt.stepdown_mm))
        label = f"roughing layer {k} of {n_rough}: down to Z{max(level, zr.min()):.3f}"
        layers.append(_layer(label, x, np.maximum(zr, level), ys_rough, zr < above))
        above = level
    layers.append(finish)
    return UndercutPlan(
        layers=tuple(lay for lay in layers if lay is not None),
        target_x=xs,
        target_z=zs,
        finish_x=x,
        finish_z=zf,
        max_shortfall_mm=float(short.max()),
        deepest_tip_mm=deepest,
    )


# --- writing the program ------------------------------------------------------------------
def _comment(text: str) -> str:
    ascii_text = unicodedata.normalize("NFKD", text).encode("ascii", "ignore").decode()
    return "(" + ascii_text.replace("(", "[").replace(")", "]") + ")"


def _wrapped(text: str, width: int = 68) -> list[str]:
    return [_comment(line) for line in textwrap.wrap(text, width=width)] or [_comment("")]


def _fmt(v: float) -> str:
    s = f"{v:.3f}"
    return "0.000" if s == "-0.000" else s


class _Writer:
    """Collects lines and keeps the modal feed so F is only written when it changes."""

    def __init__(self, opt: GcodeOptions) -> None:
        self.opt = opt
        self.lines: list[str] = []
        self.feed: int | None = None
        self.pos = (math.nan, math.nan, math.nan)
        self.cut_length = 0.0
        self.cut_time = 0.0

    def emit(self, line: str) -> None:
        self.lines.append(line)

    def rapid_up(self) -> None:
        self.emit(f"G0 Z{_fmt(self.opt.safe_z_mm)}")
        self.pos = (self.pos[0], self.pos[1], self.opt.safe_z_mm)

    def rapid_xy(self, x: float, y: float) -> None:
        self.emit(f"G0 X{_fmt(x)} Y{_fmt(y)}")
        self.pos = (x, y, self.pos[2])

    def cut(self, x: float, y: float, z: float) -> None:
        x0, y0, z0 = self.pos
        length = math.dist((x0, y0, z0), (x, y, z))
        feed = self.opt.feed_mm_min
        if z < z0 and length > 0:  # keep the downward speed within the plunge feed
            feed = min(feed, self.opt.plunge_mm_min * length / (z0 - z))
        feed_i = max(1, int(feed // 10 * 10) if feed >= 10 else int(feed))
        words = ["G1"]
        if x != x0:
            words.append(f"X{_fmt(x)}")
        if y != y0:
            words.append(f"Y{_fmt(y)}")
        if z != z0:
            words.append(f"Z{_fmt(z)}")
        if len(words) == 1:
            return
        if feed_i != self.feed:
            words.append(f"F{feed_i}")
            self.feed = feed_i
        self.emit(" ".join(words))
        self.pos = (x, y, z)
        self.cut_length += length
        self.cut_time += length / feed_i


def _header(part: ShopPart, opt: GcodeOptions, plan: UndercutPlan) -> list[str]:
    c = opt.cutter
    L, W = part.length_m * 1000, part.width_m * 1000
    T = part.blank_thickness_m * 1000
    r = c.radius_mm
    deepest_design = float(np.min(plan.target_z) - opt.leave_stock_mm)
    x_deep = float(plan.target_x[np.argmin(plan.target_z)])
    xs_all = np.concatenate([lay.x for lay in plan.layers])
    ys_all = np.concatenate([lay.ys for lay in plan.layers])
    tip = "the ball's tip" if c.kind == "ball" else "the cutter's flat end"
    out: list[str] = []
    add = out.extend
    add(_wrapped(f"tonewright undercut program - {part.title}"))
    add(_wrapped(f"material: {part.material_name or 'not given'}; {part.grain_note}"))
    add(
        _wrapped(
            "units mm [G21], absolute [G90]; no cutter compensation in the controller: "
            "the offset for the cutter below is already in the coordinates"
        )
    )
    out.append(_comment(""))
    add(
        _wrapped(
            "SETUP - the bar lies upside down, undercut face up, turned over about its "
            "long axis so its left end stays on the left."
        )
    )
    add(_wrapped("X: along the bar from its left end [X0 = left end]."))
    add(_wrapped("Y: across the width from the long edge nearest you [Y0 = that edge]."))
    add(
        _wrapped(
            f"Z: Z0 = the bar's upturned bottom face before cutting [touch off with {tip}]; "
            "Z negative into the wood. The face must be flat: plane the blank first."
        )
    )
    add(
        _wrapped(
            f"blank {L:.1f} x {W:.1f} x {T:.1f} mm; deepest design cut "
            f"{-deepest_design:.2f} mm at X{x_deep:.1f}; thinnest point "
            f"{part.min_thickness_m * 1000:.2f} mm."
        )
    )
    add(
        _wrapped(
            f"cutter: {c.diameter_mm:g} mm {c.kind} end, flute length "
            f"{c.flute_length_mm:g} mm; spindle {opt.spindle_rpm:g} rev/min; feed "
            f"{opt.feed_mm_min:g} mm/min; plunge {opt.plunge_mm_min:g} mm/min."
        )
    )
    n_rough = len(plan.layers) - 1
    add(
        _wrapped(
            f"roughing: {n_rough} layers, step-down {opt.stepdown_mm:g} mm, stepover "
            f"{opt.rough_stepover_mm:.2f} mm, leaving {opt.finish_allowance_mm:g} mm."
        )
    )
    fin = f"finishing: one layer, stepover {opt.finish_stepover_mm:.2f} mm"
    if c.kind == "ball":
        fin += f", cusps up to {tp.cusp_height(r, opt.finish_stepover_mm):.3f} mm high"
    add(_wrapped(fin + "."))
    add(
        _wrapped(
            f"leave-stock {opt.leave_stock_mm:g} mm above the design for hand tuning; "
            f"computed: the finish leaves at most {plan.max_shortfall_mm:.3f} mm over design "
            "plus leave-stock [measured square to the surface; cusps not counted]."
        )
    )
    add(
        _wrapped(
            f"the cutter reaches X{xs_all.min() - r:.1f} to X{xs_all.max() + r:.1f}, "
            f"Y{ys_all.min() - r:.1f} to Y{ys_all.max() + r:.1f}, down to Z"
            f"{plan.deepest_tip_mm:.3f}: keep clamps and fixtures outside that area."
        )
    )
    add(
        _wrapped(
            "hold the bar securely: a fixture with end stops, clamps outside the cutter's "
            "reach, the bar bedded flat so it cannot lift or rock."
        )
    )
    add(
        _wrapped(
            f"safe height Z{opt.safe_z_mm:g}: every rapid move runs there; it must clear "
            "every clamp and fixture."
        )
    )
    out.append(_comment(""))
    out.extend(_comment(line) for line in caution_lines(68, part.caution_kind))
    out.append(_comment(""))
    return out


def undercut_gcode(part: ShopPart, options: GcodeOptions | None = None) -> str:
    """The whole program as text (ASCII, one block per line, newline-terminated)."""
    opt = options or GcodeOptions()
    plan = plan_undercut(part, opt)
    w = _Writer(opt)
    header = _header(part, opt, plan)
    for line in header:
        w.emit(line)
    w.emit("G17 G21 G40 G49 G54 G80 G90 G94")
    w.rapid_up()
    first = plan.layers[0]
    w.rapid_xy(float(first.x[0]), float(first.ys[0]))
    w.emit(f"S{opt.spindle_rpm:.0f} M3")
    if opt.spindle_wait_s > 0:
        w.lines.extend(
            _wrapped(
                "wait for the spindle to reach speed; G4 P is in seconds on "
                "most router controllers: check yours"
            )
        )
        w.emit(f"G4 P{opt.spindle_wait_s:g}")
    for layer in plan.layers:
        w.emit(_comment(layer.label))
        forward = True
        for j, y in enumerate(layer.ys):
            xs, zs = (layer.x, layer.z) if forward else (layer.x[::-1], layer.z[::-1])
            if j == 0:
                if (w.pos[0], w.pos[1]) != (float(xs[0]), float(y)):
                    w.rapid_xy(float(xs[0]), float(y))
                w.cut(float(xs[0]), float(y), float(zs[0]))
            else:
                w.cut(float(xs[0]), float(y), float(zs[0]))  # step over at the pass end
            for xv, zv in zip(xs[1:], zs[1:], strict=True):
                w.cut(float(xv), float(y), float(zv))
            forward = not forward
        w.rapid_up()
    w.emit("M5")
    w.emit("M30")
    w.lines[len(header) - 1 : len(header) - 1] = _wrapped(
        f"feed moves: {w.cut_length / 1000:.1f} m, about {w.cut_time:.0f} min at the "
        "programmed feeds [rapids and acceleration not counted]"
    )
    return "\n".join(w.lines) + "\n"
