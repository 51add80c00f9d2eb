"""Blank sizes for a keyboard: thickness and width from the maker's stock, lengths on a smooth
curve, each bar's choice explained.

For every bar and every stock thickness t, a *pre-design* tunes an ``arch`` undercut (flat
bottom, smooth ramps: two shape variables) and a free length to the bar's goals by least
squares (``search.polish``): it says whether that thickness can reach the goals within the
limits (minimum thickness, depth, length range) and at what length. Bending does not depend on
the width (E I, kappa G A, rho A and rho I of a rectangle all scale with it), so the width is
then chosen for the unwanted modes alone: lateral bending (f ~ b / L^2 at fixed shape, since
E I_z / rho A ~ b^2) and torsion, kept out of each goal partial's keep-clear band.

Keyboard rules are a shortest path over the bars from bass to treble (dynamic programming on
the stock indices, exact for these chain constraints): thickness and width never increase,
steps between neighbours are at most the given sizes, bars of one group (an octave, when asked)
share a thickness; among schedules that keep every bar reachable, thicker stock (longer,
stronger bars) and larger clearance margins are preferred, and changes of stock cost a little.
Lengths follow a quadratic in the note number of log(L / sqrt(t)) (a uniform bar's
f ~ t / L^2, Euler-Bernoulli, so L / sqrt(t) removes the thickness steps), fitted to the
pre-designs; a bar far (over 5 %) from the curve keeps its own length, and no bar is longer
than the one below it.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass, replace

import numpy as np
from tonewright.forward.geometry import Bar, constant
from tonewright.forward.modal import modes_on_mesh
from tonewright.optimizer.objective import (
    Clearance,
    EvaluationLog,
    Evaluator,
    Goal,
    ratios_by_order,
)
from tonewright.optimizer.screen import screen_bar
from tonewright.optimizer.search import SearchSettings, polish
from tonewright.optimizer.spaces import BarUndercut

__all__ = [
    "BarNeeds",
    "BlankChoice",
    "ClearingWidth",
    "StockRules",
    "blank_schedule",
    "clearance_margin",
    "clearing_width",
    "unwanted_scale",
]

_INFEASIBLE = 1e3  # cost of a bar that cannot reach its goals with a stock size
_UNCLEAR = 10.0  # cost of a width that leaves an unwanted mode in a band
_CHANGE = 0.05  # cost of a change of stock between neighbours
SPARE = 1.5  # preferred clearance, in keep-clear bands (see blank_schedule)


@dataclass(frozen=True)
class StockRules:
    """The stock and the keyboard's rules (metres). ``groups``: one label per bar; bars with
    the same label share a thickness (None: no sharing)."""

    thicknesses: tuple[float, ...]
    widths: tuple[float, ...]
    length_range: tuple[float, float]
    max_thickness_step: float | None = None
    max_width_step: float | None = None
    groups: tuple[int, ...] | None = None


@dataclass(frozen=True)
class BarNeeds:
    """One bar's goals and the shop limits its undercut must keep (metres)."""

    note: str
    midi: int
    goals: tuple[Goal, ...]
    clearance: Clearance | None
    min_thickness: float | None  # None: 20 % of the blank
    max_depth: float
    end_keep: float
    node_zone: float = 0.0


@dataclass(frozen=True)
class BlankChoice:
    """The blank proposed for one bar, and why."""

    note: str
    length: float
    width: float
    thickness: float
    reachable: bool  # the pre-design reached the goals with this thickness
    clear: bool  # no unwanted mode in a band at this width (by the pre-design's cut)
    thickness_reason: str
    width_reason: str
    binding: tuple[str, ...]  # when not reachable: the limits that bind
    advice: str  # when not reachable: the nearest blank the screen passes

    @property
    def explanation(self) -> str:
        return f"{self.thickness_reason}; {self.width_reason}"


@dataclass(frozen=True)
class _PreDesign:
    ok: bool
    length: float
    u: np.ndarray  # arch variables (depth, flat) at that length
    worst_cents: float
    binding: tuple[str, ...]


def _min_thickness(needs: BarNeeds, t: float) -> float:
    return needs.min_thickness if needs.min_thickness is not None else 0.2 * t


def _arch(needs: BarNeeds, material, L: float, w: float, t: float, length_range=None):
    bar = Bar(L, constant(w), constant(t), material)
    return BarUndercut(
        bar,
        t,
        shape="arch",
        max_depth=needs.max_depth,
        min_thickness=_min_thickness(needs, t),
        end_keep=needs.end_keep,
        node_zone=needs.node_zone,
        length_range=length_range,
    )


def _uniform_length(f_hz: float, t: float, material, sharp: float) -> float:
    """Length of a uniform free-free bar whose fundamental is ``sharp`` x f (Euler-Bernoulli:
    f = (4.7300^2 / 2 pi L^2) sqrt(E t^2 / 12 rho); Rayleigh, 1877, *The Theory of Sound*,
    sec. 174)."""
    c = np.sqrt(material.E / (12.0 * material.rho)) * t
    return float(np.sqrt(4.7300**2 * c / (2.0 * np.pi * sharp * f_hz)))


def _sharpness(goals: Sequence[Goal]) -> float:
    """Uncut over tuned fundamental to start from: about 3 for 1:4:10, 2 for two partials,
    1.3 for the fundamental alone (common practice, no source)."""
    n = sum(g.family == "bending" for g in goals)
    return {1: 1.3, 2: 2.0}.get(n, 3.0)


def _pre_design(
    needs: BarNeeds,
    material,
    t: float,
    w: float,
    rules: StockRules,
    theory: str,
    start: tuple[float, np.ndarray] | None,
) -> _PreDesign:
    """Arch cut and length (two partials or more) or arch cut alone (the fundamental) tuned
    by least squares; ``start``: the neighbour's (length, arch variables) to start from."""
    goals = [g for g in needs.goals if g.family == "bending"]
    f1 = min(g.f_hz for g in goals)
    lo, hi = rules.length_range
    bending = len(goals)
    L0 = _uniform_length(f1, t, material, _sharpness(goals))
    if start is not None and bending > 1:
        L0 = start[0]  # the neighbour's length: the polish then moves it by a few %
    elif start is not None:
        L0 = min(L0, start[0])  # a keyboard's bars never grow toward the treble
    L0 = float(np.clip(L0, lo, hi))
    settings = SearchSettings(polish_iterations=40)
    if bending == 1:
        # the fundamental alone: a fixed length, the cut lowers it to pitch
        space = _arch(needs, material, L0, w, t)
        ev = Evaluator(space, goals, None, theory=theory)
        u0 = start[1][:2] if start is not None else np.array([0.5, 0.5])
        u = polish(ev, u0, settings, None, EvaluationLog())
        e = ev.evaluate(u)
        L = L0
    else:
        # pitch and ratios by the cut and the length (within the range around the start)
        span = (max(lo, 0.7 * L0), min(hi, 1.4 * L0))
        space = _arch(needs, material, span[1], w, t, length_range=span)
        ev = Evaluator(space, goals, None, theory=theory)
        x = (L0 - span[0]) / (span[1] - span[0]) if span[1] > span[0] else 0.5
        shape = start[1][:2] if start is not None else np.array([0.7, 0.4])
        u = polish(ev, np.array([*shape, x]), settings, None, EvaluationLog())
        e = ev.evaluate(u)
        L = space.length(u)
    worst = float(np.max(np.abs(e.errors_cents)))
    # a pre-design within 10 cents (or 5 tolerances): the spline search finishes the job
    slack = max(10.0, 5.0 * max(g.tolerance_cents for g in goals))
    binding = tuple(space.binding(u)) if worst > slack else ()
    return _PreDesign(worst <= slack, float(L), np.asarray(u[:2]), worst, binding)


def _unwanted_hz(bar: Bar, clearance: Clearance) -> dict[str, np.ndarray]:
    counts = dict.fromkeys(clearance.families, 4)
    modes = modes_on_mesh(bar, counts, elements=8, degree=7)
    return {
        fam: np.sqrt(np.maximum(fm.lam, 0.0)) / (2 * np.pi) for fam, fm in modes.families.items()
    }


def clearance_margin(
    bar: Bar,
    goals: Sequence[Goal],
    clearance: Clearance | None,
    scale: Mapping[str, np.ndarray] | None = None,
    coincident_is_clear: bool = True,
) -> tuple[float, str]:
    """Smallest gap / band over the unwanted modes (lateral, torsion) and the goal partials
    (>= 1: every mode clear; a mode within the coincidence distance counts as clear), and the
    nearest mode, named. ``scale``: the beam's frequencies of each family multiplied by these
    ratios by order (e.g. 3D over beam at a design, as the design's ``Evaluator`` does).
    ``coincident_is_clear=False``: a mode within the coincidence distance counts by its gap
    (a new width must not rely on a coincidence the retuned cut will not keep)."""
    if clearance is None:
        return np.inf, "no clearance asked"
    f_goal = np.array([g.f_hz for g in goals])
    band = clearance.keep_clear_hz(f_goal)
    worst, label = np.inf, ""
    for fam, f in _unwanted_hz(bar, clearance).items():
        f = f * ratios_by_order((scale or {}).get(fam), f.size)
        for k, fk in enumerate(f):
            if fk > 1.3 * f_goal.max():
                break
            gaps = np.abs(fk - f_goal)
            ratio = gaps / band
            if coincident_is_clear:
                ratio = np.where(gaps <= clearance.coincidence_hz, np.inf, ratio)
            j = int(np.argmin(ratio))
            if ratio[j] < worst:
                worst = float(ratio[j])
                label = (
                    f"{fam} {k + 1} at {fk:.0f} Hz is {gaps[j]:.0f} Hz from {goals[j].label} "
                    f"(keep {band[j]:.0f} Hz clear)"
                )
    return worst, label


def unwanted_scale(
    bar: Bar, clearance: Clearance, observed: Sequence[tuple[str, int, float]]
) -> dict[str, np.ndarray]:
    """Ratios by order of observed unwanted-mode frequencies (family, order, Hz; e.g. the 3D
    model's at a design) to the beam's of the same bar: the space mapping that lets the cheap
    beam model predict how those modes move with the width."""
    beam = _unwanted_hz(bar, clearance)
    out = {}
    for fam, f in beam.items():
        seen = sorted((k, hz) for fm, k, hz in observed if fm == fam and k <= f.size)
        if seen:
            out[fam] = np.array([hz / f[k - 1] for k, hz in seen])
    return out


@dataclass(frozen=True)
class ClearingWidth:
    width: float  # m
    margin: float  # smallest gap / band (as ``clearance_margin``)
    nearest: str  # the nearest unwanted mode, named


def clearing_width(
    bar: Bar,
    goals: Sequence[Goal],
    clearance: Clearance,
    scale: Mapping[str, np.ndarray],
    narrowest: float,
    step: float = 0.5e-3,
    widest: float | None = None,
) -> ClearingWidth | None:
    """A width for this cut that keeps every unwanted mode out of the goals' bands: the
    widest, from ``step`` under the bar's width down to ``narrowest`` (m), that clears with
    ``SPARE`` bands (the cut will be retuned at the new width and move the modes a little),
    else the one of largest margin that clears at all; None when none does. Narrower only,
    unless ``widest`` is given: then the narrowest wider width up to it (for advice on the
    blank: a bar can be cut narrower from its blank, never wider). The frequencies are the
    beam's at each width times ``scale`` (the ratios at the present width, see
    ``unwanted_scale``): torsion rises as the bar narrows (G J / rho I_p ~ t^2 / b^2 for
    b >> t) and lateral bending falls (E I_z / rho A ~ b^2), which the beam gets right even
    where its levels are off."""
    w0 = float(bar.width(0.0))
    if widest is not None:
        candidates = np.arange(w0 + step, widest + 1e-12, step)
    else:
        candidates = np.arange(w0 - step, narrowest - 1e-12, -step)
    best: ClearingWidth | None = None
    for w in candidates:
        other = replace(bar, width=constant(w))
        margin, label = clearance_margin(other, goals, clearance, scale, False)
        if margin >= SPARE:
            return ClearingWidth(float(w), margin, label)
        if margin >= 1.0 and (best is None or margin > best.margin):
            best = ClearingWidth(float(w), margin, label)
    return best


def _chain(costs: np.ndarray, values: Sequence[float], step: float | None) -> list[int]:
    """Cheapest index path over rows (bars) with values never increasing along the path and
    neighbouring steps at most ``step``; costs (bars, options); changes cost _CHANGE."""
    n, m = costs.shape
    v = np.asarray(values)
    allowed = v[None, :] <= v[:, None] + 1e-12  # [prev, next]: next never larger
    if step is not None:
        allowed &= np.abs(v[:, None] - v[None, :]) <= step + 1e-12
    move = np.where(allowed, _CHANGE * (1 - np.eye(m)), np.inf)
    total = costs[0].copy()
    back = np.zeros((n, m), dtype=int)
    for i in range(1, n):
        cand = total[:, None] + move
        back[i] = np.argmin(cand, axis=0)
        total = cand[back[i], np.arange(m)] + costs[i]
    path = [int(np.argmin(total))]
    for i in range(n - 1, 0, -1):
        path.append(int(back[i][path[-1]]))
    return path[::-1]


def _grouped_chain(costs, values, step, groups) -> list[int]:
    """``_chain`` with the bars of one group forced onto one option (their costs summed)."""
    if groups is None:
        return _chain(costs, values, step)
    labels = list(dict.fromkeys(groups))
    summed = np.array(
        [costs[[i for i, g in enumerate(groups) if g == lab]].sum(0) for lab in labels]
    )
    pick = _chain(summed, values, step)
    by = dict(zip(labels, pick, strict=True))
    return [by[g] for g in groups]


def blank_schedule(
    bars: Sequence[BarNeeds],
    material,
    rules: StockRules,
    theory: str = "timoshenko",
    progress: Callable[[str], None] | None = None,
) -> tuple[BlankChoice, ...]:
    """The blank of every bar (bars in pitch order, bass first); see the module docstring."""
    ts = sorted(rules.thicknesses, reverse=True)
    ws = sorted(rules.widths, reverse=True)
    w_mid = ws[len(ws) // 2]
    n = len(bars)
    pre: dict[tuple[int, int], _PreDesign] = {}
    for j, t in enumerate(ts):
        previous = None
        for i, b in enumerate(bars):
            p = _pre_design(b, material, t, w_mid, rules, theory, previous)
            pre[i, j] = p
            previous = (p.length, p.u) if p.ok else None
        if progress:
            progress(f"pre-designed every bar on {t * 1e3:g} mm stock")
    # thickness: reachable first, then thicker (index 0 is the thickest)
    cost_t = np.array(
        [
            [(0.0 if pre[i, j].ok else _INFEASIBLE) + 0.1 * j for j in range(len(ts))]
            for i in range(n)
        ]
    )
    pick_t = _grouped_chain(cost_t, ts, rules.max_thickness_step, rules.groups)
    thickness = [ts[j] for j in pick_t]
    lengths = _smooth_lengths(bars, thickness, [pre[i, pick_t[i]] for i in range(n)], rules)
    # width: the cut of the pre-design at the chosen length, every stock width
    margins = np.zeros((n, len(ws)))
    labels: list[list[str]] = []
    for i, b in enumerate(bars):
        p = pre[i, pick_t[i]]
        row = []
        for k, w in enumerate(ws):
            space = _arch(b, material, lengths[i], w, thickness[i])
            margin, label = clearance_margin(space.part(p.u), b.goals, b.clearance)
            margins[i, k] = margin
            row.append(label)
        labels.append(row)
    capped = np.minimum(margins, 3.0)
    # the final (spline) cut moves the unwanted modes a little from the arch's: a width is
    # preferred with half a band to spare, accepted with less, avoided inside a band
    cost_w = np.where(
        margins >= SPARE, -0.1 * capped, np.where(margins >= 1.0, 1.0, _UNCLEAR + 1.0 - capped)
    )
    cost_w = cost_w + 0.01 * np.arange(len(ws))[None, :]  # wider, all else equal
    pick_w = _chain(cost_w, ws, rules.max_width_step)
    out = []
    for i, b in enumerate(bars):
        j, k = pick_t[i], pick_w[i]
        p = pre[i, j]
        ok_t = [ts[q] * 1e3 for q in range(len(ts)) if pre[i, q].ok]
        binding, advice = p.binding, ""
        if not p.ok:
            space = _arch(b, material, lengths[i], ws[k], ts[j])
            reach = screen_bar(replace(space, shape="spline"), b.goals, theory)
            binding = (
                reach.binding
                or p.binding
                or (f"the arch pre-design is {p.worst_cents:.0f} cents off",)
            )
            advice = reach.advice
        t_reason = _thickness_reason(ts[j], ok_t, p)
        w_reason = _width_reason(ws, k, margins[i], labels[i])
        out.append(
            BlankChoice(
                note=b.note,
                length=float(lengths[i]),
                width=float(ws[k]),
                thickness=float(ts[j]),
                reachable=p.ok,
                clear=bool(margins[i, k] >= 1.0),
                thickness_reason=t_reason,
                width_reason=w_reason,
                binding=tuple(binding),
                advice=advice,
            )
        )
    return tuple(out)


def _smooth_lengths(bars, thickness, pres, rules: StockRules) -> np.ndarray:
    m = np.array([b.midi for b in bars], dtype=float)
    L = np.array([p.length for p in pres])
    t = np.asarray(thickness)
    ok = np.array([p.ok for p in pres])
    y = np.log(L / np.sqrt(t))
    lo, hi = rules.length_range
    if ok.sum() >= 4:
        coef = np.polyfit(m[ok], y[ok], 2)
        fitted = np.exp(np.polyval(coef, m)) * np.sqrt(t)
        # keep a bar on the curve only where the curve stays near its own pre-design
        near = np.abs(np.log(fitted / L)) < 0.05
        L = np.where(near | ~ok, fitted, L)
    # never longer than the bar below (a keyboard's bars shorten toward the treble)
    return np.clip(np.minimum.accumulate(L), lo, hi)


def _thickness_reason(t: float, ok_mm: list[float], p: _PreDesign) -> str:
    if not p.ok:
        return f"{t * 1e3:g} mm: no stock thickness reaches the goals within the limits"
    others = ", ".join(f"{v:g}" for v in ok_mm)
    at = f"{p.length * 1e3:.0f} mm"
    return f"{t * 1e3:g} mm: reaches the goals at {at} (stock that does: {others} mm)"


def _width_reason(ws, k: int, margins: np.ndarray, labels: list[str]) -> str:
    w = ws[k] * 1e3
    if not np.isfinite(margins[k]):
        return f"{w:g} mm: no unwanted mode below 1.3 x the top partial"
    if margins[k] >= 1.0:
        text = f"{w:g} mm clears every partial's band (nearest: {labels[k]})"
    else:
        text = f"{w:g} mm leaves {labels[k]}: no stock width within the rules clears it"
    wider = [q for q in range(k) if margins[q] < 1.0]
    if wider and margins[k] >= 1.0:
        q = wider[-1]
        text += f"; {ws[q] * 1e3:g} mm would leave {labels[q]}"
    return text
