"""G-code for the undercut: parsed back and simulated move by move with a brute-force cutter.

The simulator here is independent of ``tonewright.shop.toolpath``: it samples the cutter's
surface on a dense grid instead of using the closed-form offsets, and it reads only the text
of the program.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from shop_demo import demo_part

from tonewright.errors import InputError
from tonewright.shop import toolpath as tp
from tonewright.shop.gcode import Cutter, GcodeOptions, plan_undercut, undercut_gcode
from tonewright.shop.part import ShopPart

# --- a small RS-274 reader ------------------------------------------------------------------


@dataclass
class Move:
    mode: int  # 0 rapid, 1 feed
    start: tuple[float, float, float]
    end: tuple[float, float, float]
    feed: float | None
    section: str


@dataclass
class Program:
    moves: list[Move]
    codes: list[str]  # every non-comment block, in order
    spindle_on_at_end: bool
    final: tuple[float, float, float]


def parse(text: str) -> Program:
    pos = [math.nan, math.nan, math.nan]
    mode: int | None = None
    feed: float | None = None
    spindle = False
    section = ""
    moves: list[Move] = []
    codes: list[str] = []
    for raw in text.splitlines():
        comments = re.findall(r"\(([^)]*)\)", raw)
        code = re.sub(r"\([^)]*\)", "", raw).strip().upper()
        if comments and not code and ("layer" in comments[0]):
            section = comments[0]
        if not code:
            continue
        codes.append(code)
        words = re.findall(r"([A-Z])\s*([-+]?\d*\.?\d+)", code)
        new = list(pos)
        has_axis = False
        g_words = [float(v) for letter, v in words if letter == "G"]
        if 0.0 in g_words:
            mode = 0
        if 1.0 in g_words:
            mode = 1
        for letter, v in words:
            if letter in "XYZ":
                new["XYZ".index(letter)] = float(v)
                has_axis = True
            elif letter == "F":
                feed = float(v)
            elif letter == "M" and float(v) in (3.0, 4.0):
                spindle = True
            elif letter == "M" and float(v) in (5.0, 30.0, 2.0):
                spindle = spindle and float(v) not in (5.0,)
        if has_axis and 4.0 not in g_words:
            assert mode in (0, 1), f"motion without G0/G1: {code}"
            moves.append(Move(mode, tuple(pos), tuple(new), feed, section))
            pos = new
    return Program(moves, codes, spindle, tuple(pos))


# --- brute-force cutter --------------------------------------------------------------------


def target_fn(part: ShopPart, stock: float):
    xs = np.asarray(part.stations_x_m) * 1000
    zs = -part.depth_m(np.asarray(part.stations_x_m)) * 1000 + stock
    return xs, zs


def samples_of(moves: list[Move], step: float) -> np.ndarray:
    """(x, z) samples along every distinct feed move in the X-Z plane (Y is irrelevant: the
    surface is the same across the width)."""
    segs = {(m.start[0], m.start[2], m.end[0], m.end[2]) for m in moves if m.mode == 1}
    pts = []
    for x0, z0, x1, z1 in segs:
        if math.isnan(x0):
            continue
        n = math.ceil(max(abs(x1 - x0), abs(z1 - z0)) / step) + 1
        t = np.linspace(0.0, 1.0, n)
        pts.append(np.column_stack((x0 + t * (x1 - x0), z0 + t * (z1 - z0))))
    return np.unique(np.concatenate(pts), axis=0)


def min_clearance(kind: str, r: float, pts: np.ndarray, xs: np.ndarray, zs: np.ndarray) -> float:
    """Smallest height of the cutter's surface above the target over all samples (mm)."""
    u = np.linspace(-r, r, round(2 * r / 0.01) + 1)  # 0.01 mm brute-force grid
    worst = math.inf
    for chunk in np.array_split(pts, max(1, len(pts) // 2000)):
        x, z = chunk[:, :1], chunk[:, 1:]
        for off in (u[None, :], xs[None, :] - x):  # dense offsets, then every breakpoint
            xp = x + off
            ok = (np.abs(off) <= r) & (xp >= xs[0]) & (xp <= xs[-1])
            if kind == "ball":
                lower = z + r - np.sqrt(np.maximum(r * r - off * off, 0.0))
            else:
                lower = np.broadcast_to(z, xp.shape)
            gap = np.where(ok, lower - np.interp(xp, xs, zs), np.inf)
            worst = min(worst, float(gap.min()))
    return worst


# --- fixtures ------------------------------------------------------------------------------

BALL = GcodeOptions(leave_stock_mm=0.5)
FLAT = GcodeOptions(cutter=Cutter(kind="flat", diameter_mm=6.0), leave_stock_mm=0.0)


@pytest.fixture(scope="module")
def part() -> ShopPart:
    return demo_part()


@pytest.fixture(scope="module", params=["ball", "flat"])
def case(request, part):
    opt = BALL if request.param == "ball" else FLAT
    text = undercut_gcode(part, opt)
    return opt, text, parse(text)


# --- the program as a whole ----------------------------------------------------------------


def test_modal_preamble_and_allowed_words(case):
    _, text, prog = case
    # The preamble restates every modal group before the first motion (common practice).
    first_motion = next(i for i, c in enumerate(prog.codes) if re.search(r"[XYZ]", c))
    assert "G17 G21 G40 G49 G54 G80 G90 G94" in prog.codes[:first_motion]
    g_used = {float(g) for c in prog.codes for g in re.findall(r"G(\d+\.?\d*)", c)}
    # No cutter compensation, canned cycles, arcs or incremental mode.
    assert g_used <= {0.0, 1.0, 4.0, 17.0, 21.0, 40.0, 49.0, 54.0, 80.0, 90.0, 94.0}
    assert all(ord(ch) < 128 for ch in text)
    assert all(len(line) <= 80 for line in text.splitlines() if line.startswith("("))


def test_rapids_only_at_safe_height_and_clean_end(case):
    opt, _, prog = case
    safe = opt.safe_z_mm
    for m in prog.moves:
        if m.mode == 0:
            assert m.end[2] == pytest.approx(safe, abs=1e-9)
            moved_xy = any(
                a != b and not (math.isnan(a) and math.isnan(b))
                for a, b in zip(m.start[:2], m.end[:2], strict=True)
            )
            if moved_xy:
                assert m.start[2] == pytest.approx(safe, abs=1e-9)
    assert prog.moves[0].mode == 0 and prog.moves[0].end[2] == safe
    assert prog.final[2] == pytest.approx(safe)
    assert prog.codes[-2:] == ["M5", "M30"]
    assert not prog.spindle_on_at_end
    # The spindle starts before any feed move.
    i_m3 = next(i for i, c in enumerate(prog.codes) if "M3" in c.split())
    i_g1 = next(i for i, c in enumerate(prog.codes) if re.match(r"G1\b", c))
    assert i_m3 < i_g1


def test_feeds(case):
    opt, _, prog = case
    for m in prog.moves:
        if m.mode != 1:
            continue
        assert m.feed is not None and 0 < m.feed <= opt.feed_mm_min
        dz = m.end[2] - m.start[2]
        length = math.dist(m.start, m.end)
        if dz < 0:  # downward speed within the plunge feed (+1 % for rounding the F word)
            assert m.feed * (-dz) / length <= opt.plunge_mm_min * 1.01


def test_gouge_free_and_inside_stock(case, part):
    opt, _, prog = case
    kind, r = opt.cutter.kind, opt.cutter.radius_mm
    xs, zs = target_fn(part, opt.leave_stock_mm)
    feed_moves = [m for m in prog.moves if m.mode == 1 and not math.isnan(m.start[0])]
    pts = samples_of(feed_moves, step=0.02)
    # Brute-force sampling every 0.01 mm can overstate the clearance by ~(0.005 mm)^2 / (2 r)
    # ~ 4e-6 mm near a smooth maximum (kinks are sampled exactly); the program is lifted by
    # >= 0.001 mm, so requiring >= -1e-5 mm still proves there is no gouge.
    assert min_clearance(kind, r, pts, xs, zs) >= -1e-5
    ends = np.array([m.end for m in feed_moves])
    L, W = part.length_m * 1000, part.width_m * 1000
    assert ends[:, 0].min() >= 0.0 and ends[:, 0].max() <= L
    y_lo, y_hi = (0.0, W) if kind == "ball" else (r, W - r)
    assert ends[:, 1].min() >= y_lo - 1e-9 and ends[:, 1].max() <= y_hi + 1e-9
    assert ends[:, 2].min() >= zs.min() - 1e-9  # never below the deepest target
    assert ends[:, 2].max() <= opt.safe_z_mm


def best_possible(kind: str, r: float, xs: np.ndarray, zs: np.ndarray, xe: np.ndarray):
    """Brute-force morphological opening: the lowest surface any placement of this cutter can
    leave without gouging (tips on the ``xe`` grid, cutter shape sampled every 0.01 mm)."""
    u = np.linspace(-r, r, round(2 * r / 0.01) + 1)
    shape = r - np.sqrt(np.maximum(r * r - u * u, 0.0)) if kind == "ball" else 0.0 * u
    xp = xe[:, None] + u[None, :]
    ok = (xp >= xs[0]) & (xp <= xs[-1])
    tip = np.where(ok, np.interp(xp, xs, zs) - shape[None, :], -np.inf).max(axis=1)
    out = np.full(xe.shape, np.inf)
    for uk, sk in zip(u, shape, strict=True):
        out = np.minimum(out, np.interp(xe - uk, xe, tip, left=np.inf, right=np.inf) + sk)
    return out


def test_finish_reaches_design(case, part):
    opt, _, prog = case
    kind, r = opt.cutter.kind, opt.cutter.radius_mm
    xs, zs = target_fn(part, opt.leave_stock_mm)
    finish = [m for m in prog.moves if m.mode == 1 and m.section.startswith("finishing")]
    pts = samples_of(finish, step=0.05)
    dx = 0.05
    xe = np.arange(0.0, part.length_m * 1000 + dx / 2, dx)
    # Each cutter position lowers the surface at every grid point within its radius.
    j = np.ceil((pts[:, :1] - r) / dx).astype(int) + np.arange(int(2 * r / dx) + 2)[None, :]
    u = j * dx - pts[:, :1]
    ok = (np.abs(u) <= r) & (j >= 0) & (j < xe.size)
    shape = r - np.sqrt(np.maximum(r * r - u * u, 0)) if kind == "ball" else 0.0 * u
    lower = pts[:, 1:] + shape
    left = np.full(xe.size, np.inf)
    np.minimum.at(left, j[ok], lower[ok])
    left = np.minimum(left, 0.0)
    target = np.interp(xe, xs, zs)
    ideal = np.minimum(best_possible(kind, r, xs, zs, xe), 0.0)
    need = target < 0.0
    # Against the best this cutter can do: 0.001 lift + 0.001 rounding + 0.005 simplification
    # + chords across convex kinks between 0.2 mm samples (~0.005) + sampling: under 0.02 mm.
    assert (left - ideal)[need].max() <= 0.02
    if kind == "ball":
        # The 6 mm ball fits every hollow of this design: it reaches the design itself.
        assert (left - target)[need].max() <= 0.02
    else:
        # A flat end bridges each hollow corner of the 10 mm-spaced polygon: resting on both
        # flanks it stays above the corner by less than r times the change of slope there
        # (derived geometry); the program still gets within 0.02 mm of the ideal.
        slope_change = np.diff(np.diff(zs) / np.diff(xs))
        assert 0 < (ideal - target)[need].max() <= r * slope_change.max()
        assert (left - target)[need].max() <= (ideal - target)[need].max() + 0.02
    # Passes cover the width: the largest gap in Y leaves cusps under 0.02 mm (ball) or
    # overlaps (flat). Cusp formula: circle geometry, h = r - sqrt(r^2 - (p/2)^2).
    ys = np.unique([m.end[1] for m in finish])
    gap = np.diff(ys).max()
    if kind == "ball":
        assert r - math.sqrt(r * r - (gap / 2) ** 2) <= 0.0201
        assert ys.min() == 0.0 and ys.max() == part.width_m * 1000
    else:
        assert gap <= 2 * r


def test_program_is_deterministic(part):
    assert undercut_gcode(part, BALL) == undercut_gcode(part, BALL)


def test_header_states_setup_and_cautions(case):
    _, text, _ = case
    head = " ".join(line.strip()[1:-1] for line in text[: text.index("G17")].splitlines())
    for phrase in (
        "upside down",
        "Z0 = the bar's upturned bottom face",
        "X0 = left end",
        "dust extraction",
        "sensitisers",
        "eye and hearing",
        "simulator",
        "air-cut",
        "manual and local practice",
        "hold the bar securely",
    ):
        assert phrase.lower() in head.lower(), phrase


# --- refusing what cannot be cut -----------------------------------------------------------


def pocket_part() -> ShopPart:
    # A flat-floored pocket 10 mm deep with 45-degree walls: a ball of radius rho leaves a
    # fillet about 0.09 rho thick in each floor corner (circle tangent to two lines).
    return ShopPart(
        title="pocket",
        length_m=0.2,
        width_m=0.04,
        blank_thickness_m=0.02,
        stations_x_m=(0.0, 0.09, 0.1, 0.11, 0.12, 0.2),
        stations_thickness_m=(0.02, 0.02, 0.01, 0.01, 0.02, 0.02),
    )


def test_too_large_cutter_is_an_error_naming_where():
    opt = GcodeOptions(cutter=Cutter(diameter_mm=12.0), stepdown_mm=2.0)
    with pytest.raises(InputError) as err:
        plan_undercut(pocket_part(), opt)
    msg = str(err.value)
    # The floor corners sit at x = 100 and 110 mm.
    assert "too large" in msg and "cutter.diameter_mm" in msg
    assert "x = 99" in msg and "x = 108" in msg
    fits = float(re.search(r"at most ([\d.]+) mm", msg).group(1))
    assert 0 < fits < 12
    # Following the advice works (self-consistency of the suggestion).
    ok = GcodeOptions(cutter=Cutter(diameter_mm=fits), stepdown_mm=min(2.0, fits))
    assert plan_undercut(pocket_part(), ok).max_shortfall_mm <= ok.reach_tolerance_mm


def test_flat_end_too_wide_for_a_hollow():
    # A V-shaped hollow: a 20 mm flat end leaves the bottom of the V uncut.
    part = ShopPart(
        "vee", 0.2, 0.04, 0.02, (0.0, 0.07, 0.1, 0.13, 0.2), (0.02, 0.02, 0.01, 0.02, 0.02)
    )
    with pytest.raises(InputError, match="too large"):
        plan_undercut(part, GcodeOptions(cutter=Cutter(kind="flat", diameter_mm=20.0)))


def test_short_flutes_refused(part):
    with pytest.raises(InputError, match="flute_length_mm"):
        plan_undercut(part, GcodeOptions(cutter=Cutter(flute_length_mm=10.0)))


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        ({"feed_mm_min": 0}, "feed_mm_min"),
        ({"feed_mm_min": "fast"}, "feed_mm_min"),
        ({"plunge_mm_min": 2000}, "plunge_mm_min"),
        ({"spindle_rpm": -1}, "spindle_rpm"),
        ({"stepdown_mm": 7}, "stepdown_mm"),
        ({"stepover_rough_mm": 0}, "stepover_rough_mm"),
        ({"stepover_finish_mm": 9}, "stepover_finish_mm"),
        ({"finish_allowance_mm": 3}, "finish_allowance_mm"),
        ({"leave_stock_mm": -0.1}, "leave_stock_mm"),
        ({"safe_z_mm": 0}, "safe_z_mm"),
        ({"sample_step_mm": 0}, "sample_step_mm"),
        ({"reach_tolerance_mm": 0}, "reach_tolerance_mm"),
        ({"spindle_wait_s": -1}, "spindle_wait_s"),
    ],
)
def test_option_validation(kwargs, field):
    with pytest.raises(InputError, match=field):
        GcodeOptions(**kwargs)


@pytest.mark.parametrize(
    ("kwargs", "field"),
    [
        ({"kind": "vee"}, "cutter.kind"),
        ({"diameter_mm": 0}, "cutter.diameter_mm"),
        ({"flute_length_mm": -2}, "cutter.flute_length_mm"),
    ],
)
def test_cutter_validation(kwargs, field):
    with pytest.raises(InputError, match=field):
        Cutter(**kwargs)


def test_leave_stock_larger_than_cut_refused(part):
    shallow = ShopPart("shallow", 0.2, 0.04, 0.02, (0.0, 0.1, 0.2), (0.02, 0.0198, 0.02))
    with pytest.raises(InputError, match="leave_stock_mm"):
        plan_undercut(shallow, GcodeOptions(leave_stock_mm=0.5))


# --- the offset kernels against brute force and closed forms ------------------------------


def test_ball_in_a_vee_closed_form():
    # A ball resting in a symmetric V of slope m touches both flanks: its centre sits at
    # r sqrt(1 + m^2) above the apex (distance from a point to a line; derived geometry).
    r, m = 3.0, 0.5
    xs = np.array([-20.0, 0.0, 20.0])
    zs = m * np.abs(xs)  # a hollow
    c = tp.ball_centre_height(np.array([0.0]), xs, zs, r)[0]
    assert c == pytest.approx(r * math.sqrt(1 + m * m), rel=1e-12)
    # On a ridge the ball balances on the apex: centre r above it.
    assert tp.ball_centre_height(np.array([0.0]), xs, -zs, r)[0] == pytest.approx(r)
    # Flat end over the V spans 2r: it rests on the flanks at +-r, m r above the apex.
    assert tp.flat_tip_height(np.array([0.0]), xs, zs, r)[0] == pytest.approx(m * r)


def test_cusp_formula_round_trip():
    # Scallop height between ball passes, h = r - sqrt(r^2 - (p/2)^2) (circle geometry).
    r = 3.0
    p = tp.stepover_for_cusp(r, 0.02)
    assert tp.cusp_height(r, p) == pytest.approx(0.02, rel=1e-12)
    assert tp.cusp_height(r, 2.0) == pytest.approx(3.0 - math.sqrt(8.0))


profiles = st.lists(st.floats(-10.0, 0.0, allow_nan=False), min_size=3, max_size=8)


@settings(max_examples=40, deadline=None, derandomize=True, database=None)
@given(zs=profiles, r=st.floats(0.5, 8.0), kind=st.sampled_from(["ball", "flat"]))
def test_offsets_match_brute_force(zs, r, kind):
    xs = np.linspace(0.0, 10.0 * (len(zs) - 1), len(zs))
    zs = np.asarray(zs)
    x = np.linspace(0.0, xs[-1], 301)
    tip = tp.tip_height(kind, x, xs, zs, r)
    # Brute force: the highest point of surface-plus-cutter-shape over a 2001-point window.
    u = np.linspace(-r, r, 2001)
    xp = x[:, None] + u[None, :]
    inside = (xp >= xs[0]) & (xp <= xs[-1])
    shape = r - np.sqrt(np.maximum(r * r - u * u, 0.0)) if kind == "ball" else 0.0 * u
    brute = np.where(inside, np.interp(xp, xs, zs) - shape[None, :], -np.inf).max(axis=1)
    # The closed form is exact; grid spacing 2r/2000 can underestimate by slope * spacing.
    assert np.all(tip >= brute - 1e-12)
    assert np.all(tip <= brute + 10.0 * (2 * r / 2000) + 1e-9)


@settings(max_examples=25, deadline=None, derandomize=True, database=None)
@given(
    z=st.lists(st.floats(-5.0, 5.0, allow_nan=False), min_size=3, max_size=40),
    tol=st.floats(0.0, 0.05),
)
def test_simplify_never_lowers_the_path(z, tol):
    x = np.arange(len(z), dtype=float)
    z = np.asarray(z)
    keep = tp.simplify_above(x, z, tol)
    assert keep[0] == 0 and keep[-1] == len(z) - 1
    chord = np.interp(x, x[keep], z[keep])
    assert np.all(chord >= z - 1e-12) and np.all(chord <= z + tol + 1e-12)


# --- random undercuts through the whole pipeline (slow) -----------------------------------


@pytest.mark.slow
@settings(max_examples=12, deadline=None, derandomize=True, database=None)
@given(
    depths=st.lists(st.floats(0.0, 12.0), min_size=3, max_size=9),
    kind=st.sampled_from(["ball", "flat"]),
    diameter=st.sampled_from([3.0, 6.0, 10.0]),
    stock=st.sampled_from([0.0, 0.4]),
)
def test_random_undercuts_are_cut_safely_or_refused(depths, kind, diameter, stock):
    # Any invented undercut: the program is either refused with a clear error, or it is
    # gouge-free and its finish comes within 0.02 mm of the best this cutter can do.
    L, n = 200.0, len(depths)
    x = np.concatenate(([0.0], np.linspace(30.0, 170.0, n), [L])) / 1000
    t = np.concatenate(([16.0], 16.0 - np.asarray(depths), [16.0])) / 1000
    part = ShopPart("random", L / 1000, 0.03, 0.016, tuple(x), tuple(t))
    opt = GcodeOptions(
        cutter=Cutter(kind=kind, diameter_mm=diameter, flute_length_mm=30.0),
        stepdown_mm=min(2.0, diameter),
        leave_stock_mm=stock,
        reach_tolerance_mm=1.0,  # lenient, so that more cases run through the checks
    )
    try:
        text = undercut_gcode(part, opt)
    except InputError as err:
        assert "cutter" in str(err) or "nothing to cut" in str(err)
        return
    prog = parse(text)
    r = opt.cutter.radius_mm
    xs, zs = target_fn(part, stock)
    feed = [m for m in prog.moves if m.mode == 1 and not math.isnan(m.start[0])]
    assert min_clearance(kind, r, samples_of(feed, step=0.02), xs, zs) >= -1e-5
    finish = [m for m in feed if m.section.startswith("finishing")]
    pts = samples_of(finish, step=0.05)
    xe = np.arange(0.0, L + 0.025, 0.05)
    u = xe[:, None] - pts[None, :, 0]
    shape = r - np.sqrt(np.maximum(r * r - u * u, 0)) if kind == "ball" else 0.0 * u
    left = np.minimum(np.where(np.abs(u) <= r, pts[None, :, 1] + shape, np.inf).min(axis=1), 0)
    ideal = np.minimum(best_possible(kind, r, xs, zs, xe), 0.0)
    need = np.interp(xe, xs, zs) < 0.0
    # Same budget as the demo test (see test_finish_reaches_design).
    assert (left - ideal)[need].max() <= 0.02
