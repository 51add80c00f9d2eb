"""Next-cut advice on the bench: update the model to a tap, map the tuning, plan small cuts.

A maker cuts, taps, measures and cuts again; material can only be removed. Given the bar as
it is now (thickness stations from the calipers) and the partials just measured:

Model update
------------
E and G are fitted to the measured partials on the *current* geometry with the calibration
machinery of ``optimizer.calibration`` (identification of each partial by a scan over E and
G/E and a one-to-one matching, then least squares in cents; G only when a torsional or third
bending partial carries shear information). The model's remaining residual at each tuned
partial is carried forward: a prediction after a cut is

    f_pred = f_measured * f_model(after) / f_model(now),

so the plan starts from what was measured, not from what the model says.

Cuts and the tuning map
-----------------------
A cut removes depth d from the bottom face over a window [a, b] of the tool width w centred
at x (and over the mirror window centred at L - x for a symmetric pair; overlapping windows
merge):

    h'(x) = h(x) - d chi(x),

chi = 1 on the flat bottom, 0 outside, with an eased edge (a C2 quintic ramp
10 t^3 - 15 t^4 + 6 t^5, 2 mm or a quarter of the window) inside each end: a sanded or
radiused edge. Mesh nodes are pinned at the ends of every ramp, so no element straddles one
and the p-version elements keep converging fast (a sheer step inside an element would slow
them to first order).

For a simple eigenvalue with phi^T M phi = 1 (Fox, R. L. & Kapoor, M. P., 1968, "Rates of
change of eigenvalues and eigenvectors", AIAA J. 6, 2426-2429) and section coefficients
c_t(h) in K and m_t(h) in M (``forward.fem``),

    d lambda / d d = - int chi [ sum_K (dc_t/dh) (B_t phi)^2
                                 - lambda sum_M (dm_t/dh) (B_t phi)^2 ] dx,

evaluated by ``optimizer.sensitivity.eigenvalue_gradients`` on a composite quadrature split
at every ramp end (so chi is integrated exactly; ``forward.modes_on_mesh``), with dc/dh by
the complex step (Squire, W. & Trapp, G., 1998, SIAM Review 40, 110-112;
``forward.thickness_derivatives``). In cents,

    S_jk = d cents_j / d d_k = (1200 / ln 2) (d lambda_j / d d_k) / (2 lambda_j),

and the tuning map is S_jk * 0.1 mm: the change of partial j per 0.1 mm removed over window
k. Removal where a mode bends lowers it; removal where it mostly moves (beyond the outer
nodes, at the ends) raises it, the loss of mass winning.

Planning
--------
Errors e_j = 1200 log2(f_j / f_target,j), tolerances tau_j. Each step is one cut (one window
or a symmetric pair), chosen in three stages:

1. Lookahead: the least material that brings every partial within tau_j / 4 of its target,
   to first order: a small linear program (HiGHS via ``scipy.optimize.linprog``) in the
   depths d_k >= 0,
       min  sum_k l_k d_k + P sum_j (s+_j + s-_j) / tau_j
       s.t. |e_j + sum_k S_jk d_k + s+_j - s-_j| <= tau_j / 4,   0 <= d_k <= room_k,
   l_k the window length, room_k the thickness above the minimum thickness in the window;
   the slacks s keep it feasible when removal cannot reach the target.
2. Under-shoot bounds on every partial after the step (cents):
       sharp beyond tolerance (e_j > tau_j):   e'_j >= (1 - kappa) e_j,
       within tolerance:                        e'_j >= min(e_j, -tau_j / 2),
       flat beyond tolerance (e_j < -tau_j):    e_j <= e'_j <= (1 - kappa) e_j,
   kappa the closure (0.75: a step closes at most 75 % of a partial's error), so no partial
   is ever predicted below its target minus its tolerance by a step.
3. The linear program's windows are taken in order, raising ones (at the ends) first, since
   after the lowering cuts they would need a partial to dip below its bound on the way, then
   the biggest; the first whose depth, capped by the step-depth limit, the room and the
   bounds (linearised), is still worth cutting becomes the step. Without one, the greedy
   closed-form minimiser of sum_j ((e_j + S_jk d) / tau_j)^2 over each window's admissible
   depths is used, if it lowers that sum. The forward model is re-solved with the cut; if
   the re-solved partials break a bound, the depth is scaled back and re-solved.

Planning stops when every partial is within tolerance. With measurement uncertainties u_j
(one standard deviation), "within" means |e_j| <= tau_j - min(2 u_j, tau_j / 2): a reading
just inside the band is not taken for done.

Shortening
----------
Trimming delta from each end raises every partial. When a partial is flat beyond tolerance,
the trim that puts every partial at least half its tolerance sharp (from where cuts can
finish) is found by secant steps on forward solves of the trimmed bar.

References: Fox & Kapoor (1968) and Squire & Trapp (1998) above; HiGHS: Huangfu, Q. & Hall,
J. A. J. (2018), "Parallelizing the dual revised simplex method", Math. Prog. Comp. 10,
119-142.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.optimize import linprog
from tonewright.acoustics.pitch import CENTS_PER_LN, cents_to_ratio
from tonewright.forward import (
    Bar,
    Field,
    Hole,
    PiecewiseLinear,
    Support,
    modes_on_mesh,
    thickness_derivatives,
)
from tonewright.optimizer.calibration import DEFAULT_COUNTS, Calibration, calibrate_bar
from tonewright.optimizer.objective import Goal
from tonewright.optimizer.sensitivity import eigenvalue_gradients

from tonewright.errors import InputError

__all__ = [
    "CLOSURE",
    "EDGE_RAMP",
    "Advice",
    "AdviceOptions",
    "Cut",
    "CutLimits",
    "CutThickness",
    "Plan",
    "Shortening",
    "Step",
    "TuningMap",
    "advise",
    "anchored",
    "apply_cut",
    "candidate_centres",
    "cut_windows",
    "model_frequencies",
    "plan_cuts",
    "removal_shape",
    "shortening_option",
    "thinnest",
    "trim_ends",
    "tuning_map",
]

CLOSURE = 0.75  # a step closes at most this share of a partial's error
EDGE_RAMP = 2e-3  # m; eased edge at each end of a window (at most a quarter of it)
MIN_DEPTH = 5e-6  # m; a shallower step is not worth planning (within the sanding noise)
DEPTH_QUANTUM = 1e-6  # m; depths are rounded down to whole micrometres (under-shoot)
AIM = 0.25  # the linear program aims each partial within this share of its tolerance
SLACK_COST = 1e3  # mm^2 of removed profile area worth one tolerance of error (the LP)
BOUND_SLACK_CENTS = 0.01  # re-solved partials may miss a bound by this much (solver noise)
DEGREE = 8


# ---------------------------------------------------------------------------------------------
# Cuts on a thickness field


def removal_shape(x: np.ndarray, a: float, b: float, ramp: float) -> np.ndarray:
    """Share of the full depth removed at x by a cut over [a, b]: 1 on the flat bottom, 0
    outside, and a C2 quintic ramp 10 t^3 - 15 t^4 + 6 t^5 of length ``ramp`` inside each end
    (a sanded or radiused edge; a smooth edge also keeps the finite elements converging fast,
    where a sheer step would slow them to first order)."""
    x = np.asarray(x, dtype=float)
    r = min(ramp, 0.25 * (b - a))
    if r <= 0:
        return ((x >= a) & (x < b)).astype(float)
    t = np.clip(np.minimum(x - a, b - x) / r, 0.0, 1.0)
    return t**3 * (10.0 - 15.0 * t + 6.0 * t * t)


def _shape_breaks(a: float, b: float, ramp: float) -> list[float]:
    r = min(ramp, 0.25 * (b - a))
    return [a, a + r, b - r, b] if r > 0 else [a, b]


@dataclass(frozen=True, eq=False)
class CutThickness:
    """A thickness field with removals: ``base(x) - sum depth * removal_shape(x, a, b, ramp)``.

    ``cuts`` holds ``(a, b, depth, ramp)`` in metres. The ends of every ramp are breakpoints,
    so quadrature splits there and the removal is integrated exactly.
    """

    base: Field
    cuts: tuple[tuple[float, float, float, float], ...] = ()

    def __call__(self, x: np.ndarray) -> np.ndarray:
        x = np.asarray(x, dtype=float)
        h = self.base(x)
        for a, b, d, r in self.cuts:
            h = h - d * removal_shape(x, a, b, r)
        return h

    @property
    def breakpoints(self) -> np.ndarray:
        edges = [e for a, b, _, r in self.cuts for e in _shape_breaks(a, b, r)]
        return np.unique(np.concatenate([np.asarray(self.base.breakpoints, float), edges]))


@dataclass(frozen=True)
class Cut:
    """One step: remove ``depth_m`` over the ``windows_m`` (one window, a symmetric pair, or
    a pair merged at the centre); ``centre_m`` is the left window's centre, ``width_m`` the
    tool width, ``ramp_m`` the length of the eased edge at each end of a window."""

    centre_m: float
    width_m: float
    depth_m: float
    windows_m: tuple[tuple[float, float], ...]
    ramp_m: float = 0.0

    @property
    def length_m(self) -> float:
        """Total length of bar surface the step passes over."""
        return float(sum(b - a for a, b in self.windows_m))

    @property
    def positions_m(self) -> tuple[float, ...]:
        """Centre of each window, from the left end."""
        return tuple(0.5 * (a + b) for a, b in self.windows_m)


def cut_windows(
    length: float, centre: float, width: float, symmetric: bool
) -> tuple[tuple[float, float], ...]:
    """Removal intervals of a cut centred at ``centre`` (and ``length - centre``), merged."""
    a, b = max(0.0, centre - 0.5 * width), min(length, centre + 0.5 * width)
    if not symmetric:
        return ((a, b),)
    ma, mb = length - b, length - a
    if ma <= b:  # the pair overlaps at the centre: one longer window
        return ((min(a, ma), max(b, mb)),)
    return ((a, b), (ma, mb)) if a < ma else ((ma, mb), (a, b))


def apply_cut(bar: Bar, cut: Cut) -> Bar:
    """The bar after the cut (a new Bar; the thickness field gains the removal)."""
    base = bar.thickness
    cuts: tuple[tuple[float, float, float], ...] = ()
    if isinstance(base, CutThickness):
        base, cuts = base.base, base.cuts
    new = tuple((a, b, cut.depth_m, cut.ramp_m) for a, b in cut.windows_m)
    return replace(bar, thickness=CutThickness(base, cuts + new))


def thinnest(bar: Bar, windows: Sequence[tuple[float, float]]) -> float:
    """Smallest thickness inside the windows: at their ends, just either side of every
    breakpoint inside, and on a fine sample (for curved fields)."""
    bps = np.asarray(bar.thickness.breakpoints, dtype=float)
    out = np.inf
    for a, b in windows:
        eps = 1e-9 * bar.length
        inner = bps[(bps > a) & (bps < b)]
        x = np.concatenate(
            [[a + eps, b - eps], inner - eps, inner + eps, np.linspace(a + eps, b - eps, 41)]
        )
        out = min(out, float(np.min(bar.thickness(x))))
    return out


def _anchor_points(bar: Bar) -> np.ndarray:
    """Where the thickness changes fast: the ends of every cut's eased edges and of profile
    segments steeper than 45 degrees (the tell-tale of a step measured with calipers)."""
    th = bar.thickness
    pts: list[float] = []
    base = th
    if isinstance(th, CutThickness):
        pts += [e for a, b, _, r in th.cuts for e in _shape_breaks(a, b, r)]
        base = th.base
    if isinstance(base, PiecewiseLinear) and base.x.size > 1:
        steep = np.abs(np.diff(base.y)) > np.diff(base.x)
        pts += list(base.x[:-1][steep]) + list(base.x[1:][steep])
    x = np.unique(np.asarray(pts, dtype=float))
    return x[(x > 0.0) & (x < bar.length)]


def anchored(bar: Bar) -> Bar:
    """The bar with mesh nodes pinned where its thickness changes fast.

    ``forward.modal.discretise`` puts a node at every support; a point mass of zero adds
    nothing to the mass matrix, so massless point masses at the anchor points pin nodes there
    without changing the physics. Elements then never straddle a cut's edge, and the
    accuracy-controlled solve converges on a few elements instead of refining the whole bar.
    """
    have = {s.x for s in bar.supports}
    extra = tuple(Support("mass", float(x), 0.0) for x in _anchor_points(bar) if x not in have)
    return replace(bar, supports=bar.supports + extra) if extra else bar


def _hole_keep_out(holes: Sequence[Hole]) -> list[tuple[float, float]]:
    # a cut next to a hole would thin the wall around it: keep one diameter clear either side
    return [(h.x - 1.5 * h.diameter, h.x + 1.5 * h.diameter) for h in holes]


def candidate_centres(
    length: float,
    width: float,
    symmetric: bool,
    spacing: float | None = None,
    holes: Sequence[Hole] = (),
) -> tuple[NDArray[np.float64], list[tuple[tuple[float, float], ...]]]:
    """Window centres on a grid symmetric about the middle (spacing default: a quarter of the
    tool width, at most 5 mm), and their windows; symmetric pairs are listed by their left
    centre (the middle included). Windows touching a hole's keep-out are left out."""
    step = spacing if spacing is not None else min(0.25 * width, 5e-3)
    half = 0.5 * length
    k_max = int(np.floor((half - 0.5 * width) / step + 1e-9))
    left = half - step * np.arange(k_max + 1)
    if left[-1] - 0.5 * width > 1e-9 * length:
        left = np.append(left, 0.5 * width)  # the end window, flush with the end
    centres = np.sort(left) if symmetric else np.unique(np.concatenate([left, length - left]))
    keep_out = _hole_keep_out(holes)
    out_c, out_w = [], []
    for c in centres:
        windows = cut_windows(length, float(c), width, symmetric)
        if any(a < ko_b and b > ko_a for a, b in windows for ko_a, ko_b in keep_out):
            continue
        out_c.append(float(c))
        out_w.append(windows)
    return np.array(out_c), out_w


# ---------------------------------------------------------------------------------------------
# Forward model with window sensitivities


@dataclass(frozen=True, eq=False)
class _Analysis:
    model_hz: NDArray[np.float64]  # per goal
    S: NDArray[np.float64]  # d cents / d depth (cents per metre), (n_goals, n_windows)
    error_cents: float  # discretisation error estimate (nested p - 1 vs p)


def _counts(goals: Sequence[Goal]) -> dict[str, int]:
    counts: dict[str, int] = {}
    for g in goals:
        counts[g.family] = max(counts.get(g.family, 0), g.order)
    return counts


def _analyse(
    bar: Bar,
    goals: Sequence[Goal],
    windows: Sequence[Sequence[tuple[float, float]]],
    theory: str = "timoshenko",
    tol_cents: float = 0.01,
    ramp: float = EDGE_RAMP,
) -> _Analysis:
    """Goal frequencies and their window sensitivities, mesh refined to ``tol_cents``."""
    counts = _counts(goals)
    bar = anchored(bar)
    edges = [e for win in windows for a, b in win for e in _shape_breaks(a, b, ramp)]
    for elements in (8, 16, 32, 64):
        mesh = modes_on_mesh(
            bar, counts, elements=elements, degree=DEGREE, theory=theory, extra_breakpoints=edges
        )
        worst = 0.0
        for fam, count in counts.items():
            modes = mesh.families[fam]
            if modes.lam.size < count:
                raise InputError(f"target: the bar has fewer than {count} {fam} modes")
            worst = max(worst, float(np.max(modes.error_cents[:count])))
        if worst <= tol_cents:
            break
    x = mesh.x
    chi = np.zeros((len(windows), x.size))
    for k, win in enumerate(windows):
        for a, b in win:
            chi[k] += removal_shape(x, a, b, ramp)
    chi = np.minimum(chi, 1.0)
    dch = thickness_derivatives(bar, x)
    grads = {}
    for fam, modes in mesh.families.items():
        system = modes.system
        names = {t.coefficient for t in system.stiffness + system.mass}
        # removal: thickness = h - depth in the window, so d coef / d depth = -dc/dh chi
        dcoef = {name: -dch[name][None, :] * chi for name in names}
        grads[fam] = (
            eigenvalue_gradients(system, modes.lam, modes.vectors, dcoef) if windows else None
        )
    f_hz = np.empty(len(goals))
    S = np.zeros((len(goals), len(windows)))
    for j, g in enumerate(goals):
        lam = mesh.families[g.family].lam[g.order - 1]
        f_hz[j] = np.sqrt(lam) / (2.0 * np.pi)
        if windows:
            S[j] = CENTS_PER_LN * grads[g.family][g.order - 1] / (2.0 * lam)
    return _Analysis(f_hz, S, worst)


def model_frequencies(
    bar: Bar, goals: Sequence[Goal], theory: str = "timoshenko", tol_cents: float = 0.01
) -> NDArray[np.float64]:
    """Frequencies (Hz) of the goals' modes, mesh refined to ``tol_cents``."""
    return _analyse(bar, goals, [], theory, tol_cents).model_hz


@dataclass(frozen=True, eq=False)
class TuningMap:
    """Change of each goal partial per depth removed, by window position.

    ``positions_m`` are window centres along the whole bar (the plan's map uses single
    windows; a map of symmetric pairs shows each pair at both
    of its centres); ``cents_per_m[j, k]`` is d cents / d depth for goal j and window k.
    """

    labels: tuple[str, ...]
    positions_m: NDArray[np.float64]
    width_m: float
    symmetric: bool
    cents_per_m: NDArray[np.float64]
    model_hz: NDArray[np.float64]

    @property
    def cents_per_tenth_mm(self) -> NDArray[np.float64]:
        """Change in cents per 0.1 mm removed."""
        return self.cents_per_m * 1e-4


def _labels(goals: Sequence[Goal]) -> tuple[str, ...]:
    return tuple(g.label for g in goals)


def _map_from(
    goals: Sequence[Goal], length: float, centres, S, model_hz, width, symmetric
) -> TuningMap:
    if symmetric:
        # pairs listed by their left centre; show each at both of its centres
        right = length - centres
        mirror = right > centres + 1e-9 * length
        pos = np.concatenate([centres, right[mirror][::-1]])
        values = np.concatenate([S, S[:, mirror][:, ::-1]], axis=1)
    else:
        pos, values = centres, S
    return TuningMap(_labels(goals), pos, width, symmetric, values, model_hz)


def tuning_map(
    bar: Bar,
    goals: Sequence[Goal],
    width: float,
    *,
    symmetric: bool = True,
    centres: ArrayLike | None = None,
    theory: str = "timoshenko",
    tol_cents: float = 0.01,
    ramp: float = EDGE_RAMP,
) -> TuningMap:
    """The tuning map of ``bar`` for removals of tool width ``width`` (metres).

    ``centres`` (left centres for symmetric pairs) default to ``candidate_centres``.
    """
    if centres is None:
        c, windows = candidate_centres(bar.length, width, symmetric, holes=bar.holes)
    else:
        c = np.asarray(centres, dtype=float)
        windows = [cut_windows(bar.length, float(x), width, symmetric) for x in c]
    an = _analyse(bar, goals, windows, theory, tol_cents, ramp)
    return _map_from(goals, bar.length, c, an.S, an.model_hz, width, symmetric)


# ---------------------------------------------------------------------------------------------
# Planning


@dataclass(frozen=True)
class CutLimits:
    """What one step may do, in metres: tool ``width``, ``max_step_depth`` per step, never
    thinner than ``min_thickness``; ``symmetric`` pairs (or single windows); ``closure``, the
    largest share of a partial's error a step may close; ``ramp``, the eased edge."""

    min_thickness: float
    width: float = 0.02
    max_step_depth: float = 5e-4
    symmetric: bool = True
    closure: float = CLOSURE
    ramp: float = EDGE_RAMP


@dataclass(frozen=True)
class AdviceOptions:
    """Settings of ``advise``: the cut limits, how many ``steps`` to plan, the beam
    ``theory``, and how far (cents) a partial may lie from its mode to be identified."""

    limits: CutLimits
    steps: int = 3
    theory: str = "timoshenko"
    identification_cents: float = 30.0


@dataclass(frozen=True, eq=False)
class Step:
    """One planned cut with the partials predicted after it (re-solved forward model);
    ``serves`` names the partial whose error it closes by the largest share."""

    cut: Cut
    predicted_hz: NDArray[np.float64]
    predicted_cents: NDArray[np.float64]
    serves: str
    thinnest_m: float


@dataclass(frozen=True, eq=False)
class Shortening:
    """Trim ``trim_m`` from each end: the new length and the partials predicted after it."""

    trim_m: float
    length_m: float
    predicted_hz: NDArray[np.float64]
    predicted_cents: NDArray[np.float64]
    raise_cents: NDArray[np.float64]


@dataclass(frozen=True, eq=False)
class Plan:
    """Steps in order; ``status`` 0 in tune (no cut), 1 steps planned, 2 no safe step."""

    goals: tuple[Goal, ...]
    start_hz: NDArray[np.float64]
    start_cents: NDArray[np.float64]
    steps: tuple[Step, ...]
    tuning_map: TuningMap
    status: int
    message: str
    notes: tuple[str, ...] = ()
    shortening: Shortening | None = None
    flat: tuple[str, ...] = field(default=())


def _cents(f_hz: NDArray, goals: Sequence[Goal]) -> NDArray[np.float64]:
    return CENTS_PER_LN * np.log(f_hz / np.array([g.f_hz for g in goals]))


def _bounds(e: NDArray, tau: NDArray, closure: float) -> tuple[NDArray, NDArray]:
    """Lowest and highest admissible error after a step (see the module docstring)."""
    sharp, flat = e > tau, e < -tau
    lo = np.where(sharp, (1.0 - closure) * e, np.where(flat, e, np.minimum(e, -0.5 * tau)))
    hi = np.where(flat, (1.0 - closure) * e, np.inf)
    return lo, hi


def _depth_limits(e, S, lo, hi) -> NDArray[np.float64]:
    """Largest depth per window keeping every linearised error within [lo, hi]."""
    with np.errstate(divide="ignore", invalid="ignore"):
        down = np.where(S < 0, (e - lo)[:, None] / -S, np.inf)
        up = np.where(S > 0, (hi - e)[:, None] / S, np.inf)
    return np.maximum(np.minimum(down, up).min(axis=0), 0.0)


def _lookahead(e, S, tau, room, lengths) -> NDArray[np.float64] | None:
    """Least removal (linear program) putting every partial within a quarter of its
    tolerance of target, to first order; slacks price what removal cannot reach."""
    n_j, n_k = S.shape
    S_mm = S * 1e-3  # cents per mm
    band = AIM * tau
    c = np.concatenate([lengths * 1e3, np.tile(SLACK_COST / tau, 2)])
    A = np.hstack([S_mm, np.eye(n_j), -np.eye(n_j)])  # e + S d + s+ - s- in [-band, band]
    A_ub = np.vstack([A, -A])
    b_ub = np.concatenate([band - e, band + e])
    bounds = [(0.0, max(r, 0.0) * 1e3) for r in room] + [(0.0, None)] * (2 * n_j)
    res = linprog(c, A_ub=A_ub, b_ub=b_ub, bounds=bounds, method="highs")
    if res.status != 0:
        return None
    return res.x[:n_k] * 1e-3


def _choose(e, S, tau, lo, hi, room, max_depth, lengths) -> tuple[int, float] | None:
    """Window and depth of the next step, or None when no admissible step helps.

    The linear program's windows come first: raising windows (at the ends) before lowering
    ones, since done after the lowering cuts they would need a partial to dip below its
    bound on the way; then the biggest job. Each is capped by the step depth, the room and
    the bounds. Without one, the greedy closed-form minimiser of sum ((e + S d) / tau)^2 on
    each window's admissible depths, if it lowers that sum.
    """
    cap = np.minimum(np.minimum(room, max_depth), _depth_limits(e, S, lo, hi))
    d_lp = _lookahead(e, S, tau, room, lengths)
    if d_lp is not None:
        used = np.flatnonzero(d_lp >= MIN_DEPTH)
        raises = np.any(S[:, used] > 0, axis=0) & (S[:, used].sum(axis=0) > 0)
        volume = d_lp[used] * lengths[used]
        for k in used[np.lexsort((-volume, ~raises))]:
            d = float(min(d_lp[k], cap[k]))
            if d >= MIN_DEPTH:
                return int(k), d
    W = S / tau[:, None]
    num = -(W * (e / tau)[:, None]).sum(axis=0)
    den = (W**2).sum(axis=0)
    d_all = np.clip(np.divide(num, den, out=np.zeros_like(num), where=den > 0), 0.0, cap)
    phi = (((e[:, None] + S * d_all) / tau[:, None]) ** 2).sum(axis=0)
    phi = np.where(d_all >= MIN_DEPTH, phi, np.inf)
    k = int(np.argmin(phi))
    if not phi[k] < float(np.sum((e / tau) ** 2)) * (1.0 - 1e-3):
        return None
    return k, float(d_all[k])


def _violation(e_new, lo, hi) -> NDArray[np.float64]:
    return np.maximum(lo - e_new, e_new - hi)


def plan_cuts(
    bar: Bar,
    goals: Sequence[Goal],
    now_hz: ArrayLike,
    limits: CutLimits,
    *,
    steps: int = 3,
    theory: str = "timoshenko",
    tol_cents: float = 0.01,
    uncertainty_cents: ArrayLike | None = None,
) -> Plan:
    """Plan up to ``steps`` cuts within ``limits`` that bring ``now_hz`` (one per goal)
    toward the goals.

    ``bar`` is the current geometry with the fitted material; lengths in metres.
    ``uncertainty_cents`` (one standard deviation per goal, NaN or None: exact) makes "in
    tune" mean within tolerance with two standard deviations to spare (at most half the
    tolerance is given up), so a reading just inside the band is not taken for done.
    """
    width, symmetric, ramp = limits.width, limits.symmetric, limits.ramp
    goals = tuple(goals)
    f_now = np.asarray(now_hz, dtype=float)
    tau = np.array([g.tolerance_cents for g in goals])
    u = np.zeros_like(tau) if uncertainty_cents is None else np.asarray(uncertainty_cents, float)
    u = np.where(np.isfinite(u), u, 0.0)
    tau_done = tau - np.minimum(2.0 * u, 0.5 * tau)
    notes = ["advice under-shoots on purpose; tap again after each step"]
    centres, windows = candidate_centres(bar.length, width, symmetric, holes=bar.holes)
    # the map shows single windows along the whole bar; solved together with the plan's
    map_centres, map_windows = candidate_centres(bar.length, width, False)
    an = _analyse(bar, goals, windows + map_windows, theory, tol_cents, ramp)
    tmap = _map_from(
        goals, bar.length, map_centres, an.S[:, len(windows) :], an.model_hz, width, False
    )
    an = replace(an, S=an.S[:, : len(windows)])
    bias = f_now / an.model_hz
    e0 = _cents(f_now, goals)
    if an.error_cents > 0.1:
        notes.append(f"the model is accurate to {an.error_cents:.2g} cent only on this shape")
    lengths = np.array([sum(b - a for a, b in w) for w in windows])
    flat = tuple(g.label for g, e, t in zip(goals, e0, tau, strict=True) if e < -t)

    planned: list[Step] = []
    e, current, reason = e0, bar, ""
    for _ in range(steps):
        if np.all(np.abs(e) <= tau_done):
            break
        lo, hi = _bounds(e, tau, limits.closure)
        room = np.array([thinnest(current, w) - limits.min_thickness for w in windows])
        choice = _choose(e, an.S, tau, lo, hi, room, limits.max_step_depth, lengths)
        if choice is None:
            reason = _why_stuck(e, an.S, tau, lo, hi, room)
            break
        k, d = choice
        accepted = None
        for _attempt in range(4):
            d = np.floor(d / DEPTH_QUANTUM) * DEPTH_QUANTUM
            if d < MIN_DEPTH:
                break
            cut = Cut(float(centres[k]), width, float(d), tuple(windows[k]), ramp)
            after = apply_cut(current, cut)
            an_after = _analyse(after, goals, windows, theory, tol_cents, ramp)
            e_new = _cents(an_after.model_hz * bias, goals)
            v = _violation(e_new, lo, hi)
            if np.all(v <= BOUND_SLACK_CENTS):
                accepted = (cut, after, an_after, e_new)
                break
            # scale back along the (nearly linear) path of the worst partial
            j = int(np.argmax(v))
            moved = abs(e_new[j] - e[j])
            allowed = abs((lo[j] if e_new[j] < lo[j] else hi[j]) - e[j])
            d *= 0.97 * allowed / moved if moved > 0 else 0.5
        if accepted is None:
            reason = "the forward model does not confirm the next cut within the bounds"
            break
        cut, current, an, e_new = accepted
        # the partial whose error the step closes by the largest share
        gain = (np.abs(e) - np.abs(e_new)) / np.maximum(np.abs(e), tau)
        planned.append(
            Step(
                cut=cut,
                predicted_hz=an.model_hz * bias,
                predicted_cents=e_new,
                serves=goals[int(np.argmax(gain))].label
                if np.any(gain > 0)
                else "raises first, so later cuts keep every partial in bounds",
                thinnest_m=thinnest(current, cut.windows_m),
            )
        )
        e = e_new

    in_tune_now = bool(np.all(np.abs(e0) <= tau_done))
    within = bool(np.all(np.abs(e0) <= tau))
    if in_tune_now:
        status, message = 0, "every partial is within its tolerance: no cut needed"
        if np.any(u > 0):
            message += " (with two standard deviations of the measurement to spare)"
    elif planned:
        done = bool(np.all(np.abs(e) <= tau_done))
        status = 1
        message = f"{len(planned)} step(s) planned" + (
            "; every partial is predicted within tolerance after the last" if done else ""
        )
        if not done and reason:
            message += f"; then {reason}"
    elif within:
        status = 0
        message = (
            "every partial is within its tolerance, some near its edge given the measurement "
            "uncertainty, and no light pass is safe: tap again to confirm"
        )
    else:
        status, message = 2, f"no safe cut: {reason}" if reason else "no safe cut"
    shortening = None
    if flat:
        first = goals[0].label
        if first in flat:
            notes.append(
                f"{first} is flat beyond tolerance: removing material in the arch only "
                "lowers it further; only removal at the very ends or shortening the bar "
                "raises it. Never remove more from the arch to fix it."
            )
        else:
            notes.append(
                f"{', '.join(flat)} flat beyond tolerance: material cannot be put back; "
                "shortening the bar (or thinning its ends) raises every partial"
            )
        shortening = shortening_option(bar, goals, f_now, theory=theory, tol_cents=tol_cents)
    return Plan(
        goals, f_now, e0, tuple(planned), tmap, status, message, tuple(notes), shortening, flat
    )


def _why_stuck(e, S, tau, lo, hi, room) -> str:
    sharp = [j for j in range(e.size) if e[j] > tau[j]]
    if np.all(room <= MIN_DEPTH):
        return "the bar is at its minimum thickness wherever a cut could go"
    if sharp and not any(np.any((S[j] < 0) & (room > MIN_DEPTH)) for j in sharp):
        return "no window with room left lowers the sharp partials"
    return (
        "every cut that lowers the sharp partials would push another partial below its "
        "bound (flat): consider accepting the bar, or shortening it and re-tuning"
    )


# ---------------------------------------------------------------------------------------------
# Shortening


@dataclass(frozen=True, eq=False)
class _Shifted:
    """A field seen from a new left end ``shift`` metres further along the bar."""

    base: Field
    shift: float
    length: float

    def __call__(self, x: np.ndarray) -> np.ndarray:
        return self.base(np.asarray(x, dtype=float) + self.shift)

    @property
    def breakpoints(self) -> np.ndarray:
        b = np.asarray(self.base.breakpoints, float) - self.shift
        return b[(b > 0.0) & (b < self.length)]


def trim_ends(bar: Bar, trim: float) -> Bar:
    """The bar with ``trim`` metres cut off each end (holes and supports move with it)."""
    L = bar.length - 2.0 * trim
    holes = tuple(replace(h, x=h.x - trim) for h in bar.holes)
    supports = tuple(
        Support(s.kind, float(np.clip(s.x - trim, 0.0, L)), s.value) for s in bar.supports
    )
    return replace(
        bar,
        length=L,
        width=_Shifted(bar.width, trim, L),
        thickness=_Shifted(bar.thickness, trim, L),
        holes=holes,
        supports=supports,
    )


def shortening_option(
    bar: Bar,
    goals: Sequence[Goal],
    now_hz: ArrayLike,
    *,
    theory: str = "timoshenko",
    tol_cents: float = 0.01,
) -> Shortening | None:
    """The trim per end that puts every partial at least half its tolerance sharp (from
    there cuts can finish the tuning), or None when no partial is flat or the holes leave no
    room to trim. The trim is found by secant steps on min_j (e_j(trim) - tau_j / 2) = 0."""
    f_now = np.asarray(now_hz, dtype=float)
    tau = np.array([g.tolerance_cents for g in goals])
    e = _cents(f_now, goals)
    if np.all(e >= 0):
        return None
    # holes keep a diameter of wood to the end
    ends = [min(h.x, bar.length - h.x) - 1.5 * h.diameter for h in bar.holes]
    limit = min([*ends, 0.1 * bar.length])
    if limit <= 0:
        return None
    f0 = model_frequencies(bar, goals, theory, tol_cents)

    def rise(t: float) -> NDArray[np.float64]:
        f = model_frequencies(trim_ends(bar, t), goals, theory, tol_cents)
        return CENTS_PER_LN * np.log(f / f0)

    def short_of(t: float) -> float:  # < 0 while some partial is less than tau / 2 sharp
        return float(np.min(e + rise(t) - 0.5 * tau)) if t > 0 else float(np.min(e - 0.5 * tau))

    t_a, g_a = 0.0, short_of(0.0)
    t_b = min(1e-3, 0.5 * limit)
    g_b = short_of(t_b)
    for _ in range(8):
        if abs(g_b) < 0.05 or g_b == g_a:
            break
        t_new = float(np.clip(t_b - g_b * (t_b - t_a) / (g_b - g_a), 1e-5, limit))
        t_a, g_a = t_b, g_b
        t_b, g_b = t_new, short_of(t_new)
    trim = min(float(np.ceil(t_b / 1e-4) * 1e-4), limit)  # whole tenths of a mm, sharp side
    raised = rise(trim)
    predicted = f_now * cents_to_ratio(raised)
    return Shortening(trim, bar.length - 2 * trim, predicted, _cents(predicted, goals), raised)


# ---------------------------------------------------------------------------------------------
# The whole advice


@dataclass(frozen=True, eq=False)
class Advice:
    """Calibration on the current geometry, the partials now (measured, or the fitted model's
    where a goal partial was not measured), and the plan."""

    calibration: Calibration
    bar: Bar  # current geometry, fitted material
    goals: tuple[Goal, ...]
    now_hz: NDArray[np.float64]
    measured: tuple[bool, ...]
    plan: Plan


def advise(
    bar: Bar,
    goals: Sequence[Goal],
    f_hz: ArrayLike,
    options: AdviceOptions,
    sd_cents: ArrayLike | None = None,
) -> Advice:
    """Fit the material to measured partials ``f_hz`` on the current ``bar`` and plan cuts.

    ``goals`` are the tuned partials (bending or torsion); ``sd_cents`` the partials'
    measurement uncertainties (one standard deviation; NaN: unknown); lengths in metres.
    """
    theory = options.theory
    goals = tuple(goals)
    bad = [g.label for g in goals if g.family not in ("bending", "torsion")]
    if bad:
        raise InputError(
            f"target: {', '.join(bad)} cannot be tuned by cuts here; advise tunes bending "
            "and torsional partials of a bar"
        )
    counts: dict[str, int] = dict(DEFAULT_COUNTS)
    for fam, n in _counts(goals).items():
        counts[fam] = max(counts.get(fam, 0), n + (1 if fam == "bending" else 0))
    cal = calibrate_bar(
        anchored(bar),
        f_hz,
        sd_cents,
        theory=theory,
        tolerance_cents=options.identification_cents,
        counts=counts,
    )
    fitted = replace(bar, material=replace(bar.material, E=cal.E, G=cal.G))
    model_now = model_frequencies(fitted, goals, theory)
    found: Mapping[tuple[str, int], float] = {
        (p.family, p.order): p.frequency_hz for p in cal.identified
    }
    now = np.array(
        [found.get((g.family, g.order), m) for g, m in zip(goals, model_now, strict=True)]
    )
    measured = tuple((g.family, g.order) in found for g in goals)
    f_in = np.atleast_1d(np.asarray(f_hz, dtype=float))
    sd_in = None if sd_cents is None else np.atleast_1d(np.asarray(sd_cents, dtype=float))
    uncertainty = np.zeros(len(goals))
    if sd_in is not None:
        for j, (g, m) in enumerate(zip(goals, measured, strict=True)):
            if m:  # the identified partial is one of the inputs, value for value
                i = int(np.argmin(np.abs(f_in - found[(g.family, g.order)])))
                uncertainty[j] = sd_in[i]
    plan = plan_cuts(
        fitted,
        goals,
        now,
        options.limits,
        steps=options.steps,
        theory=theory,
        uncertainty_cents=uncertainty,
    )
    return Advice(cal, fitted, goals, now, measured, plan)
