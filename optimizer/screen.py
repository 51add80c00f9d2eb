"""Can a blank reach its goals at all? A cheap screen before any search.

A central undercut of a free bar lowers every bending partial, the fundamental most (it
thins the bar where the first mode bends most), so the partials' ratios rise with the cut
(Fletcher, N. H. & Rossing, T. D., 1998, *The Physics of Musical Instruments*, 2nd ed.,
sec. 19.1, from memory; common practice). Two necessary conditions follow, checked with a few
beam solves on the fixed-mesh fast path:

1. pitch: the uncut blank must sound at or above the goal fundamental (a cut cannot raise it),
   and the deepest allowed cut at or below it;
2. ratios: each goal ratio f_k / f_1 must lie within what a sweep of the ``arch`` family (flat
   bottom, smooth ramps; depth x flat width on a grid, down to the depth limit) reaches, widened
   by ``RATIO_MARGIN`` because a spline with more control points reaches a little further.

A bar that fails either is reported with the limit that binds and the nearest blank that would
pass: for the ratios, the relative depth the sweep needs (found on a second sweep that ignores
the depth limit) gives the blank thickness t' = t_min / (1 - depth / t), and the length
L' = L sqrt(t' / t) that keeps the uncut pitch (f ~ t / L^2 for a uniform bar, Euler-Bernoulli);
for the pitch, L' = L sqrt(f_uncut / (s f_goal)) with s the sweep's own uncut-to-tuned ratio.
Passing is no promise that the search meets the goals (the conditions are necessary, not
sufficient); failing means no undercut of this family in these limits can.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, replace

import numpy as np
from tonewright.optimizer.objective import Evaluator, Goal
from tonewright.optimizer.spaces import BarUndercut

__all__ = ["RATIO_MARGIN", "Reach", "screen_bar"]

RATIO_MARGIN = 0.10  # a spline reaches up to ~10 % beyond the arch sweep (judgement, see tests)
PITCH_MARGIN = 0.02  # 34 cents: the sweep's grid is coarse
_DEPTHS = (0.25, 0.5, 0.75, 1.0)  # of the depth limit
_FLATS = (0.0, 0.3, 0.6, 0.9)  # the arch's flat half-width variable


@dataclass(frozen=True)
class Reach:
    """What the screen found: ``feasible`` False means the goals are out of reach."""

    feasible: bool
    binding: tuple[str, ...]
    advice: str  # the nearest blank that would pass, or ""
    uncut_hz: tuple[float, ...]  # bending partials of the uncut blank
    fundamental_range_hz: tuple[float, float]  # deepest swept cut .. uncut
    max_ratios: tuple[float, ...]  # highest f_k / f_1 the sweep reached, k = 2, 3, ...
    goal_ratios: tuple[float, ...]
    solves: int

    @property
    def message(self) -> str:
        if self.feasible:
            return "within reach by the screen"
        return "; ".join(self.binding) + (f"; {self.advice}" if self.advice else "")


def _bending_goals(goals: Sequence[Goal]) -> list[Goal]:
    return sorted((g for g in goals if g.family == "bending"), key=lambda g: g.order)


def _sweep(
    space: BarUndercut, goals: Sequence[Goal], theory: str, degree: int | None = None
) -> tuple[np.ndarray, int]:
    """Bending frequencies (rows: uncut, then depth x flat grid) of arch cuts of ``space``."""
    arch = replace(space, shape="arch", cutter_radius=0.0, length_range=None, width_range=None)
    ev = Evaluator(arch, goals, None, theory=theory, degree=degree)
    rows = [ev.evaluate(np.array([0.0, 0.5]), shapes=False).family_hz["bending"]]
    for d in _DEPTHS:
        for a in _FLATS:
            rows.append(ev.evaluate(np.array([d, a]), shapes=False).family_hz["bending"])
    return np.array(rows), len(rows)


def screen_bar(
    space: BarUndercut,
    goals: Sequence[Goal],
    theory: str = "timoshenko",
    degree: int | None = None,
) -> Reach:
    """Screen a bar blank and its limits against bending goals (see the module docstring).
    Goals without a first bending partial are passed (nothing to compare ratios with).
    ``degree``: the mesh degree to sweep on (default: chosen by the nested estimate)."""
    bend = _bending_goals(goals)
    orders = max((g.order for g in bend), default=1)
    probe = [Goal("bending", k + 1, 1.0) for k in range(max(orders, 2))]
    if not bend or bend[0].order != 1:
        return Reach(True, (), "", (), (0.0, 0.0), (), (), 0)
    if space.length_range is not None:
        # free length: the pitch is the length's to set; the ratios are screened at mid length
        mid = 0.5 * sum(space.length_range)
        space = replace(space, blank=replace(space.blank, length=mid), length_range=None)
    f, solves = _sweep(space, probe, theory, degree)
    f1_goal = bend[0].f_hz
    goal_ratios = np.array([g.f_hz / f1_goal for g in bend[1:]])
    idx = np.array([g.order - 1 for g in bend[1:]], dtype=int)
    ratios = f[:, idx] / f[:, :1] if idx.size else np.zeros((f.shape[0], 0))
    max_ratios = ratios.max(axis=0) if idx.size else np.zeros(0)
    uncut, lowest = float(f[0, 0]), float(f[:, 0].min())
    binding: list[str] = []
    advice = ""
    L, t = space.blank.length, space.blank_thickness
    limit = _depth_limit_name(space)
    short = goal_ratios > (1.0 + RATIO_MARGIN) * max_ratios
    if np.any(short):
        k = int(np.argmax(goal_ratios / np.maximum(max_ratios, 1e-9)))
        binding.append(
            f"{limit}: the deepest cuts reach f{bend[k + 1].order}/f1 = {max_ratios[k]:.2f}, "
            f"the goal is {goal_ratios[k]:.2f}"
        )
        needed = _depth_needed(space, probe, theory, idx, goal_ratios)
        solves += 2 * len(_DEPTHS) * len(_FLATS)
        if needed is not None:
            t_new = space.min_thickness / (1.0 - needed)
            advice = (
                f"nearest blank that passes: {t_new * 1e3:.1f} mm thick and "
                f"{L * np.sqrt(t_new / t) * 1e3:.0f} mm long (keeps the uncut pitch)"
            )
        else:
            advice = "no blank of this length family reaches these ratios by an undercut"
    ratio_ok = not np.any(short)
    if uncut < (1.0 - PITCH_MARGIN) * f1_goal:
        sharp = _tuned_ratio(f, ratios, goal_ratios)
        L_new = L * np.sqrt(uncut / (sharp * f1_goal))
        binding.append(
            f"blank length {L * 1e3:.0f} mm and thickness {t * 1e3:.1f} mm: the uncut blank "
            f"sounds {uncut:.1f} Hz, below the goal fundamental {f1_goal:.1f} Hz (a cut only "
            "lowers it)"
        )
        if ratio_ok:
            advice = f"nearest blank that passes: {L_new * 1e3:.0f} mm long"
    elif lowest > (1.0 + PITCH_MARGIN) * f1_goal and space.length_range is None:
        sharp = _tuned_ratio(f, ratios, goal_ratios)
        L_new = L * np.sqrt(uncut / (sharp * f1_goal))
        binding.append(
            f"{limit}: the deepest cut lowers the fundamental to {lowest:.1f} Hz, above the goal "
            f"{f1_goal:.1f} Hz"
        )
        if ratio_ok:
            advice = f"nearest blank that passes: {L_new * 1e3:.0f} mm long"
    return Reach(
        feasible=not binding,
        binding=tuple(binding),
        advice=advice,
        uncut_hz=tuple(float(v) for v in f[0]),
        fundamental_range_hz=(lowest, uncut),
        max_ratios=tuple(float(v) for v in max_ratios),
        goal_ratios=tuple(float(v) for v in goal_ratios),
        solves=solves,
    )


def _depth_limit_name(space: BarUndercut) -> str:
    limit = space.blank_thickness - space.min_thickness
    if space.max_depth > 0 and space.max_depth < limit:
        return f"maximum depth of cut ({space.max_depth * 1e3:g} mm)"
    return f"minimum thickness ({space.min_thickness * 1e3:g} mm)"


def _tuned_ratio(f: np.ndarray, ratios: np.ndarray, goal_ratios: np.ndarray) -> float:
    """Uncut over tuned fundamental at the swept cut nearest the goal ratios (1 with none)."""
    if goal_ratios.size == 0:
        return 1.0
    miss = np.sum(np.log(ratios[1:] / goal_ratios) ** 2, axis=1)
    k = int(np.argmin(miss)) + 1
    return float(f[0, 0] / f[k, 0])


def _depth_needed(
    space: BarUndercut,
    probe: Sequence[Goal],
    theory: str,
    idx: np.ndarray,
    goal_ratios: np.ndarray,
) -> float | None:
    """Relative depth (of the blank thickness) at which the arch sweep first reaches every
    goal ratio, on a sweep that ignores the depth limit (down to 5 % of the blank)."""
    t = space.blank_thickness
    free = replace(space, min_thickness=0.05 * t, max_depth=0.0)
    f, _ = _sweep(free, probe, theory)
    per = len(_FLATS)
    best = []
    for j in range(len(_DEPTHS)):
        rows = f[1 + j * per : 1 + (j + 1) * per]
        best.append(np.max(rows[:, idx] / rows[:, :1], axis=0))
    best = np.array(best)  # (depths, goals)
    depth_frac = np.array(_DEPTHS) * (free.depth_limit / t)
    for j in range(len(_DEPTHS)):
        if np.all(best[j] >= goal_ratios):
            if j == 0:
                return float(depth_frac[0])
            # linear interpolation between the last two depths on the worst goal
            k = int(np.argmax(goal_ratios / best[j - 1]))
            a, b = best[j - 1, k], best[j, k]
            s = (goal_ratios[k] - a) / (b - a) if b > a else 1.0
            return float(depth_frac[j - 1] + s * (depth_frac[j] - depth_frac[j - 1]))
    return None
