"""Inverse design: a global CMA-ES search, then a least-squares polish with analytic Jacobians.

1. Global search: CMA-ES (Hansen, N. & Ostermeier, A., 2001, "Completely derandomized
   self-adaptation in evolution strategies", Evol. Comput. 9(2), 159-195), through the ``cma``
   package's ask-and-tell interface, on variables scaled to [0, 1] with box bounds, seeded.
   The fitness is the sum of squared scaled residuals (cents / tolerance) plus a penalty where
   the cut is too tight for the cutter. It hands over as soon as every goal is within
   ``handover_cents``: the polish is far faster from there.
2. Polish: ``scipy.optimize.least_squares`` (dogbox trust region, bounds [0, 1]) with the
   analytic Jacobian from eigenvalue sensitivities.
3. Verdict: converged when every goal is within tolerance, unwanted modes are clear and the
   cutter fits. Otherwise the closest design is returned with the limits that bind: variables
   pressed against their bounds, the clearance band, or the cutter radius.
Restarts (new seed and start, full step size, a stricter hand-over) are tried while the
evaluation budget lasts.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import cma
import numpy as np
from scipy.optimize import least_squares
from tonewright.forward import solve
from tonewright.optimizer.objective import Evaluation, Evaluator

__all__ = ["DesignResult", "SearchSettings", "design", "polish", "verdict"]

Progress = Callable[[str, int, float], None]


@dataclass(frozen=True)
class SearchSettings:
    seed: int = 1
    budget: int = 2000  # forward solves over all attempts
    sigma0: float = 0.25
    restarts: int = 3
    handover_cents: float = 100.0
    polish_iterations: int = 60


@dataclass(frozen=True, eq=False)
class DesignResult:
    """The closest design found, how it meets the goals, and why it stopped."""

    u: np.ndarray
    evaluation: Evaluation
    converged: bool
    status: int  # 0 converged, 1 out of tolerance, 2 unwanted mode too near, 3 cutter too big
    message: str
    binding: tuple[str, ...]
    solves: int
    attempts: int


def _penalised(ev: Evaluation, curvature_margin: float, cutter_radius: float) -> float:
    f = float(np.sum(ev.residuals**2))
    if curvature_margin < 0:
        f += 1e4 * (1.0 + (-curvature_margin * cutter_radius) ** 2)
    return f


def _global_search(
    evaluator: Evaluator,
    x0: np.ndarray,
    settings: SearchSettings,
    seed: int,
    budget: int,
    progress: Progress | None,
    handover: float,
) -> np.ndarray:
    space = evaluator.space
    radius = getattr(space, "cutter_radius", 0.0)

    def fitness(u: np.ndarray) -> tuple[float, Evaluation, bool]:
        ev = evaluator.evaluate(u)
        margin = space.curvature_margin(u)
        return _penalised(ev, margin, radius), ev, margin >= 0

    if space.n == 1:  # CMA-ES needs two or more dimensions: scan instead
        grid = np.linspace(0.0, 1.0, 41)[:, None]
        scores = [fitness(g)[0] for g in grid]
        return grid[int(np.argmin(scores))]
    es = cma.CMAEvolutionStrategy(
        np.clip(x0, 0.05, 0.95),
        settings.sigma0,
        {
            "bounds": [0.0, 1.0],
            "seed": int(seed),
            "maxfevals": int(budget),
            "verbose": -9,
            "verb_log": 0,
            "verb_disp": 0,
            "tolfun": 1e-10,
        },
    )
    best_u, best_f = np.asarray(x0, dtype=float), np.inf
    used = 0
    while not es.stop() and used < budget:
        X = es.ask()
        scored = [fitness(np.asarray(x)) for x in X]
        used += len(X)
        F = [s[0] for s in scored]
        es.tell(X, F)
        k = int(np.argmin(F))
        if F[k] < best_f:
            best_f, best_u = F[k], np.asarray(X[k], dtype=float)
        ev = scored[k][1]
        worst = float(np.max(np.abs(ev.errors_cents)))
        if progress:
            progress("search", evaluator.solves, worst)
        if worst < handover and ev.clearance_ok and scored[k][2]:
            best_u = np.asarray(X[k], dtype=float)
            break
    return best_u


def _cutter_residual(space, u: np.ndarray, weight: float) -> np.ndarray:
    """How far the cut is too tight for the cutter (0 when it fits): weight x (-margin x R),
    margin = min(1/R + depth''), aimed 0.1 % inside the limit so that the hinge, which always
    leaves a sliver, leaves it on the safe side."""
    radius = getattr(space, "cutter_radius", 0.0)
    if radius <= 0:
        return np.zeros(0)
    return np.array([weight * max(0.0, 1e-3 - space.curvature_margin(u) * radius)])


def _cutter_jacobian(space, u: np.ndarray, weight: float) -> np.ndarray:
    # geometry only (no solve): a forward difference is cheap and accurate enough for a hinge
    r0 = _cutter_residual(space, u, weight)
    J = np.zeros((r0.size, u.size))
    for k in range(u.size):
        step = 1e-6 if u[k] < 1.0 - 1e-6 else -1e-6
        v = u.copy()
        v[k] += step
        J[:, k] = (_cutter_residual(space, v, weight) - r0) / step
    return J


def polish(evaluator: Evaluator, u0: np.ndarray, settings: SearchSettings, progress) -> np.ndarray:
    """Least squares on the goal and clearance residuals plus a cutter hinge, so that a start
    whose cut is too tight (e.g. a larger neighbour's design) is pulled back within the shop
    limit rather than abandoned. A hinge trades against the goals and may leave a sliver of
    violation: its weight then grows tenfold (a penalty continuation), three times at most."""
    space = evaluator.space
    u = np.clip(np.asarray(u0, dtype=float), 0.0, 1.0)
    for weight in (1e2, 1e3, 1e4, 1e5):
        u = _polish_once(evaluator, u, settings, progress, weight)
        if space.curvature_margin(u) >= 0:
            return u
    if space.curvature_margin(u0) < 0:
        return u  # nothing that fits to step back to; the verdict reports the cutter
    # step back toward the start, which fitted, until the cutter fits again
    t = 1.0
    while space.curvature_margin(u0 + t * (u - u0)) < 0 and t > 1e-3:
        t *= 0.5
    return u0 + t * (u - u0)


def _polish_once(evaluator: Evaluator, u0: np.ndarray, settings, progress, weight: float):
    space = evaluator.space

    def fun(u: np.ndarray) -> np.ndarray:
        return np.concatenate([evaluator.evaluate(u).residuals, _cutter_residual(space, u, weight)])

    def jac(u: np.ndarray) -> np.ndarray:
        ev = evaluator.evaluate(u, jacobian=True)
        if progress:
            progress("polish", evaluator.solves, float(np.max(np.abs(ev.errors_cents))))
        return np.vstack([ev.jacobian, _cutter_jacobian(space, u, weight)])

    # dogbox sees a bound as active only when the variable sits exactly on it; a variable a
    # rounding error inside truncates every step to nothing and stops the polish at once
    u0 = np.where(u0 < 1e-9, 0.0, np.where(u0 > 1.0 - 1e-9, 1.0, u0))
    sol = least_squares(
        fun,
        u0,
        jac=jac,
        bounds=(0.0, 1.0),
        method="dogbox",
        x_scale="jac",
        xtol=1e-12,
        ftol=1e-12,
        gtol=1e-12,
        max_nfev=settings.polish_iterations,
    )
    return sol.x


def verdict(evaluator: Evaluator, u: np.ndarray) -> tuple[bool, int, str, tuple[str, ...]]:
    ev = evaluator.evaluate(u)
    goals = evaluator.goals
    space = evaluator.space
    binding = space.binding(u)
    if space.curvature_margin(u) < 0:
        return (
            False,
            3,
            "the cut is too tight for the cutter radius",
            tuple([*binding, "cutter radius"]),
        )
    if not ev.within_tolerance(goals):
        worst = int(np.argmax(np.abs(ev.errors_cents) / [g.tolerance_cents for g in goals]))
        g = goals[worst]
        msg = (
            f"out of reach within the limits: {g.label} is {ev.errors_cents[worst]:+.1f} cents "
            f"from its target (tolerance {g.tolerance_cents:g})"
        )
        # a torsion or lateral mode at the edge of a partial's band: the search traded the
        # partials against keeping it clear
        crowded = [m for m in ev.unwanted if m.coincidence_hz < m.gap_hz < 1.25 * m.band_hz]
        if crowded:
            m = crowded[0]
            binding = [
                *binding,
                f"clearance of unwanted modes ({m.family} mode {m.order} at {m.f_hz:.0f} Hz "
                f"crowds the {m.nearest_goal}; try another width or thickness)",
            ]
        if not binding:
            binding = [
                "no single limit: the shape cannot reach these ratios within its cut "
                "region; try more control points, shorter uncut ends, a free length or "
                "another blank"
            ]
        return False, 1, msg, tuple(binding)
    if not ev.clearance_ok:
        bad = [m for m in ev.unwanted if not m.clear]
        m = bad[0] if bad else ev.unwanted[0]
        msg = (
            f"{m.family} mode {m.order} at {m.f_hz:.1f} Hz is {m.gap_hz:.1f} Hz from the "
            f"{m.nearest_goal} (keep {m.band_hz:.0f} Hz clear or within {m.coincidence_hz:g} Hz)"
        )
        return False, 2, msg, tuple([*binding, "clearance of unwanted modes"])
    return True, 0, "every partial within tolerance", tuple(binding)


def _certified_gap(evaluator: Evaluator, u: np.ndarray) -> float:
    """Largest difference, as a fraction of the tolerance, between the search mesh and an
    independent solve converged to 0.01 cent."""
    part = evaluator.space.part(u)
    counts = {f: n for f, n in evaluator.counts.items()}
    modal = solve(part, counts, tol_cents=0.01, theory=evaluator.theory)
    ev = evaluator.evaluate(u)
    worst = 0.0
    for g, f_loop in zip(evaluator.goals, ev.achieved_hz, strict=True):
        if g.family == "strike":
            f = np.exp(
                sum(a * np.log(modal.frequency("bending", k) / d) for k, d, a in g.components)
            )
        else:
            f = modal.frequency(g.family, g.order)
        worst = max(worst, abs(1200 * np.log2(f / f_loop)) / g.tolerance_cents)
    return worst


def design(
    evaluator: Evaluator,
    settings: SearchSettings = SearchSettings(),
    progress: Progress | None = None,
    start: np.ndarray | None = None,
) -> DesignResult:
    """Search the evaluator's design space for a design meeting its goals.

    ``start``: a design of a similar part (a neighbouring bar of an instrument, in the same
    scaled variables). It is polished first; only when that polish misses does the global
    search run, from the space's usual start.
    """
    space = evaluator.space
    rng = np.random.default_rng(settings.seed)
    x0 = space.start()
    best_u, best_score = x0, np.inf
    attempts = 0
    warm = None
    if start is not None:
        u = polish(evaluator, np.asarray(start, dtype=float), settings, progress)  # clips
        attempts = 1
        if verdict(evaluator, u)[0]:
            warm = u
        else:
            ev = evaluator.evaluate(u)
            best_u = u
            best_score = _penalised(
                ev, space.curvature_margin(u), getattr(space, "cutter_radius", 0.0)
            )
    for attempt in range(0 if warm is not None else settings.restarts + 1):
        attempts = attempt + 1
        remaining = settings.budget - evaluator.solves
        if remaining <= 0:
            break
        # share the budget: a stalled run must leave room for the restarts
        share = remaining // (settings.restarts + 1 - attempt)
        # each restart searches longer before handing over: a polish that stalled (usually on
        # an unwanted mode's band) needs a start closer to a feasible basin
        handover = settings.handover_cents / 4.0**attempt
        u = _global_search(
            evaluator, x0, settings, settings.seed + 1000 * attempt, share, progress, handover
        )
        u = polish(evaluator, u, settings, progress)
        ok, status, _, _ = verdict(evaluator, u)
        ev = evaluator.evaluate(u)
        score = _penalised(ev, space.curvature_margin(u), getattr(space, "cutter_radius", 0.0))
        if ok:
            best_u = u
            break
        if score < best_score:
            best_u, best_score = u, score
        x0 = rng.uniform(0.1, 0.9, space.n)
    if warm is not None:
        best_u = warm
    # certify on an accuracy-controlled mesh; if the search mesh was too coarse for the final
    # shape, refine it and polish again (at most twice)
    for _ in range(2):
        if _certified_gap(evaluator, best_u) <= 0.1:
            break
        evaluator.refine()
        best_u = polish(evaluator, best_u, settings, progress)
    ok, status, message, binding = verdict(evaluator, best_u)
    return DesignResult(
        u=best_u,
        evaluation=evaluator.evaluate(best_u),
        converged=ok,
        status=status,
        message=message,
        binding=binding,
        solves=evaluator.solves,
        attempts=attempts,
    )
