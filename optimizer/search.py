"""Inverse design: a global CMA-ES search, then a least-squares polish with analytic Jacobians.

1. Global search: CMA-ES (Hansen, N. & Ostermeier, A., 2001, "Completely derandomized
   self-adaptation in evolution strategies", Evol. Comput. 9(2), 159-195), through the ``cma``
   package's ask-and-tell interface, on variables scaled to [0, 1] with box bounds, seeded.
   The fitness is the sum of squared scaled residuals (cents / tolerance) plus a penalty where
   the cut is too tight for the cutter. It hands over as soon as every goal is within
   ``handover_cents``: the polish is far faster from there.
2. Polish: ``scipy.optimize.least_squares`` (dogbox trust region, bounds [0, 1]) with the
   analytic Jacobian from eigenvalue sensitivities.
3. Verdict: one integer ``status`` (the table ``STATUS_MESSAGES``, as scipy's
   ``least_squares``), decided here and nowhere else: met when every goal is within
   tolerance, unwanted modes are clear and the cutter fits. Otherwise the closest design is
   returned with the limits that bind: variables pressed against their bounds, the clearance
   band, or the cutter radius. A certifying model (``optimizer.correction``) and the certified
   solve of the written part can only turn a met design into a miss (``certified_status``,
   ``rechecked``); callers derive ``converged`` and exit codes from the status.
Restarts (new seed and start, full step size, a stricter hand-over) are tried while the
evaluation budget lasts.

The ``Evaluator`` is the objective's fixed configuration; what a search changes is explicit:
the solve counter and shape reference in an ``EvaluationLog``, the penalty weight of the
cutter continuation an argument of each polish, a refined mesh a new evaluator.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace

import cma
import numpy as np
from scipy.optimize import least_squares
from tonewright.acoustics.pitch import cents
from tonewright.forward import solve
from tonewright.optimizer.objective import Evaluation, EvaluationLog, Evaluator

__all__ = [
    "MET",
    "MISSED_CERTIFIER",
    "MISSED_CERTIFIER_UNWANTED",
    "MISSED_CUTTER",
    "MISSED_LIMIT",
    "MISSED_SHAPE",
    "MISSED_UNREACHABLE",
    "MISSED_UNWANTED",
    "MISSED_WRITTEN_PART",
    "STATUS_MESSAGES",
    "DesignResult",
    "SearchSettings",
    "Verdict",
    "certified_status",
    "clearance_binds",
    "design",
    "exit_code",
    "polish",
    "rechecked",
    "unreachable",
    "verdict",
]

# The one status table. 0 is the only success; every other code is a miss, by reason.
MET = 0
MISSED_LIMIT = 1
MISSED_UNWANTED = 2
MISSED_CUTTER = 3
MISSED_SHAPE = 4
MISSED_CERTIFIER = 5
MISSED_CERTIFIER_UNWANTED = 6
MISSED_WRITTEN_PART = 7
MISSED_UNREACHABLE = 8
STATUS_MESSAGES: dict[int, str] = {
    MET: "every partial within tolerance",
    MISSED_LIMIT: "out of reach within the limits (a limit binds)",
    MISSED_UNWANTED: "an unwanted mode lies in a partial's keep-clear band",
    MISSED_CUTTER: "the cut is too tight for the cutter radius",
    MISSED_SHAPE: "out of reach within the limits (no single limit binds)",
    MISSED_CERTIFIER: "the certifying model misses a goal after its corrections",
    MISSED_CERTIFIER_UNWANTED: "an unwanted mode is too near a partial in the certifying model",
    MISSED_WRITTEN_PART: "the certified solve of the written part misses the tolerance",
    MISSED_UNREACHABLE: "out of reach of any undercut within the limits (found before searching)",
}


# how a binding limit names the clearance of unwanted modes (verdict, certified_status)
CLEARANCE_BINDS = "clearance of unwanted modes"


def clearance_binds(status: int, binding: Sequence[str]) -> bool:
    """Whether a miss is (also) the clearance of a torsion or lateral mode: a different width
    may then get there where no cut can."""
    if status in (MISSED_UNWANTED, MISSED_CERTIFIER_UNWANTED):
        return True
    return any(b.startswith(CLEARANCE_BINDS) for b in binding)


def exit_code(status: int) -> int:
    """The command's exit code for a status: 0 met, 1 missed (2, bad input, never gets here)."""
    return 0 if status == MET else 1


@dataclass(frozen=True)
class Verdict:
    status: int
    message: str  # the table's message, and what exactly missed
    binding: tuple[str, ...]

    @property
    def met(self) -> bool:
        return self.status == MET


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
    """The closest design found, how it meets the goals, and why it stopped (``status``, one
    of ``STATUS_MESSAGES``). ``evaluator``: the objective it was judged by (its mesh may be
    finer than the one the search started with)."""

    u: np.ndarray
    evaluation: Evaluation
    status: int
    message: str
    binding: tuple[str, ...]
    solves: int
    attempts: int
    evaluator: Evaluator | None = None

    @property
    def converged(self) -> bool:
        return self.status == MET


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
    log: EvaluationLog,
) -> np.ndarray:
    space = evaluator.space
    radius = getattr(space, "cutter_radius", 0.0)

    def fitness(u: np.ndarray) -> tuple[float, Evaluation, bool]:
        ev = evaluator.evaluate(u, log=log, shapes=False)  # residuals only: eigenvalues
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
            progress("search", log.solves, worst)
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


CUTTER_WEIGHTS = (1e2, 1e3, 1e4, 1e5)  # the penalty continuation of the cutter hinge


def polish(
    evaluator: Evaluator,
    u0: np.ndarray,
    settings: SearchSettings,
    progress: Progress | None,
    log: EvaluationLog | None = None,
) -> np.ndarray:
    """Least squares on the goal and clearance residuals plus a cutter hinge, so that a start
    whose cut is too tight (e.g. a larger neighbour's design) is pulled back within the shop
    limit rather than abandoned. A hinge trades against the goals and may leave a sliver of
    violation: its weight then grows tenfold (a penalty continuation, ``CUTTER_WEIGHTS``),
    three times at most; each weight is an argument of one polish, never stored."""
    log = EvaluationLog() if log is None else log
    space = evaluator.space
    u = np.clip(np.asarray(u0, dtype=float), 0.0, 1.0)
    for weight in CUTTER_WEIGHTS:
        u = _polish_once(evaluator, u, settings, progress, weight, log)
        if space.curvature_margin(u) >= 0:
            return u
    if space.curvature_margin(u0) < 0:
        return u  # nothing that fits to step back to; the verdict reports the cutter
    # step back toward the start, which fitted, until the cutter fits again
    t = 1.0
    while space.curvature_margin(u0 + t * (u - u0)) < 0 and t > 1e-3:
        t *= 0.5
    return u0 + t * (u - u0)


def _polish_once(
    evaluator: Evaluator, u0: np.ndarray, settings, progress, weight: float, log: EvaluationLog
):
    space = evaluator.space

    def fun(u: np.ndarray) -> np.ndarray:
        residuals = evaluator.evaluate(u, log=log).residuals
        return np.concatenate([residuals, _cutter_residual(space, u, weight)])

    def jac(u: np.ndarray) -> np.ndarray:
        ev = evaluator.evaluate(u, jacobian=True, log=log)
        if progress:
            progress("polish", log.solves, float(np.max(np.abs(ev.errors_cents))))
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


def verdict(evaluator: Evaluator, u: np.ndarray, log: EvaluationLog | None = None) -> Verdict:
    """The status of a design in the evaluator's (beam) model, what missed, what binds."""
    ev = evaluator.evaluate(u, log=log)
    goals = evaluator.goals
    space = evaluator.space
    binding = space.binding(u)
    if space.curvature_margin(u) < 0:
        return Verdict(
            MISSED_CUTTER, STATUS_MESSAGES[MISSED_CUTTER], tuple([*binding, "cutter radius"])
        )
    if not ev.within_tolerance(goals):
        worst = int(np.argmax(np.abs(ev.errors_cents) / [g.tolerance_cents for g in goals]))
        g = goals[worst]
        detail = (
            f"{g.label} is {ev.errors_cents[worst]:+.1f} cents from its target "
            f"(tolerance {g.tolerance_cents:g})"
        )
        # a torsion or lateral mode at the edge of a partial's band: the search traded the
        # partials against keeping it clear
        crowded = [m for m in ev.unwanted if m.coincidence_hz < m.gap_hz < 1.25 * m.band_hz]
        if crowded:
            m = crowded[0]
            binding = [
                *binding,
                f"{CLEARANCE_BINDS} ({m.family} mode {m.order} at {m.f_hz:.0f} Hz "
                f"crowds the {m.nearest_goal}; try another width or thickness)",
            ]
        status = MISSED_LIMIT
        if not binding:
            status = MISSED_SHAPE
            binding = [
                "no single limit: the shape cannot reach these ratios within its cut "
                "region; try more control points, shorter uncut ends, a free length or "
                "another blank"
            ]
        return Verdict(status, f"{_headline(status)}: {detail}", tuple(binding))
    if not ev.clearance_ok:
        bad = [m for m in ev.unwanted if not m.clear]
        m = bad[0] if bad else ev.unwanted[0]
        msg = (
            f"{m.family} mode {m.order} at {m.f_hz:.1f} Hz is {m.gap_hz:.1f} Hz from the "
            f"{m.nearest_goal} (keep {m.band_hz:.0f} Hz clear or within {m.coincidence_hz:g} Hz)"
        )
        return Verdict(MISSED_UNWANTED, msg, tuple([*binding, CLEARANCE_BINDS]))
    return Verdict(MET, STATUS_MESSAGES[MET], tuple(binding))


def _headline(status: int) -> str:
    # both reach-misses read "out of reach within the limits"; the binding list says which
    return STATUS_MESSAGES[status].split(" (")[0]


def certified_status(
    beam: Verdict,
    certified_errors_cents: np.ndarray,
    tolerance_cents: Sequence[float],
    certified_clear: bool | None,
    checks: int,
    labels: Sequence[str],
    unwanted_detail: str = "",
) -> Verdict:
    """The status of a corrected design: the beam model's verdict against the shifted goals,
    judged again by the certifying model's errors against the real goals (and, when it sees
    them, its unwanted modes)."""
    tol = np.asarray(tolerance_cents, dtype=float)
    errors = np.asarray(certified_errors_cents, dtype=float)
    if not np.all(np.abs(errors) <= tol):
        worst = int(np.argmax(np.abs(errors) / tol))
        message = (
            f"after {checks} high-fidelity checks {labels[worst]} is still "
            f"{errors[worst]:+.2f} cents off (tolerance {tol[worst]:g})"
        )
        return Verdict(MISSED_CERTIFIER, message, beam.binding)
    if certified_clear is False:
        message = STATUS_MESSAGES[MISSED_CERTIFIER_UNWANTED] + unwanted_detail
        return Verdict(MISSED_CERTIFIER_UNWANTED, message, beam.binding)
    if beam.status in (MET, MISSED_LIMIT, MISSED_SHAPE):
        # the beam misses its shifted goals by the defect's drift only: the model that
        # certifies meets the real goals, so no limit binds
        message = f"meets every goal in the certifying model ({checks - 1} correction(s))"
        return Verdict(MET, message, beam.binding if beam.status == MET else ())
    return beam  # the cutter or the beam's own clearance: the certifier cannot clear those


def rechecked(
    result: DesignResult, errors_cents: Sequence[float], tolerance_cents: Sequence[float]
) -> DesignResult:
    """The result once an independent solve of the part as written has been compared with the
    goals: a met design whose written part misses becomes ``MISSED_WRITTEN_PART``."""
    within = all(abs(e) <= t for e, t in zip(errors_cents, tolerance_cents, strict=True))
    if result.status != MET or within:
        return result
    return replace(result, status=MISSED_WRITTEN_PART, message=STATUS_MESSAGES[MISSED_WRITTEN_PART])


def unreachable(
    evaluator: Evaluator, binding: Sequence[str], detail: str, log: EvaluationLog | None = None
) -> DesignResult:
    """The result for a part the feasibility screen (``optimizer.screen``) ruled out: no
    search is run; the uncut blank (every depth variable 0) is returned with the limits
    that bind."""
    log = EvaluationLog() if log is None else log
    space = evaluator.space
    u = np.zeros(space.n)
    for k in (space.length_index, getattr(space, "width_index", None)):
        if k is not None:
            u[k] = 0.5
    message = (
        f"{_headline(MISSED_UNREACHABLE)}: {detail}" if detail else _headline(MISSED_UNREACHABLE)
    )
    return DesignResult(
        u=u,
        evaluation=evaluator.evaluate(u, log=log),
        status=MISSED_UNREACHABLE,
        message=message,
        binding=tuple(binding),
        solves=log.solves,
        attempts=0,
        evaluator=evaluator,
    )


def _certified_gap(evaluator: Evaluator, u: np.ndarray, log: EvaluationLog) -> float:
    """Largest difference, as a fraction of the tolerance, between the search mesh and an
    independent solve converged to 0.01 cent."""
    part = evaluator.space.part(u)
    counts = {f: n for f, n in evaluator.counts.items()}
    modal = solve(part, counts, tol_cents=0.01, theory=evaluator.theory)
    ev = evaluator.evaluate(u, log=log)
    worst = 0.0
    for g, f_loop in zip(evaluator.goals, ev.achieved_hz, strict=True):
        if g.family == "strike":
            f = np.exp(
                sum(a * np.log(modal.frequency("bending", k) / d) for k, d, a in g.components)
            )
        else:
            f = modal.frequency(g.family, g.order)
        worst = max(worst, abs(float(cents(f, f_loop))) / g.tolerance_cents)
    return worst


def design(
    evaluator: Evaluator,
    settings: SearchSettings = SearchSettings(),
    progress: Progress | None = None,
    start: np.ndarray | None = None,
    log: EvaluationLog | None = None,
) -> DesignResult:
    """Search the evaluator's design space for a design meeting its goals.

    ``start``: a design of a similar part (a neighbouring bar of an instrument, in the same
    scaled variables). It is polished first; only when that polish misses does the global
    search run, from the space's usual start. ``log``: the solve counter to continue (the
    budget counts its solves); a new one by default. The returned result carries the
    evaluator it was judged by, refined when the search mesh proved too coarse.
    """
    log = EvaluationLog() if log is None else log
    space = evaluator.space
    radius = getattr(space, "cutter_radius", 0.0)
    rng = np.random.default_rng(settings.seed)
    x0 = space.start()
    best_u, best_score = x0, np.inf
    attempts = 0
    warm = None
    if start is not None:
        u = polish(evaluator, np.asarray(start, dtype=float), settings, progress, log)  # clips
        attempts = 1
        if verdict(evaluator, u, log).met:
            warm = u
        else:
            ev = evaluator.evaluate(u, log=log)
            best_u = u
            best_score = _penalised(ev, space.curvature_margin(u), radius)
    for attempt in range(0 if warm is not None else settings.restarts + 1):
        attempts = attempt + 1
        remaining = settings.budget - log.solves
        if remaining <= 0:
            break
        # share the budget: a stalled run must leave room for the restarts
        share = remaining // (settings.restarts + 1 - attempt)
        # each restart searches longer before handing over: a polish that stalled (usually on
        # an unwanted mode's band) needs a start closer to a feasible basin
        handover = settings.handover_cents / 4.0**attempt
        seed = settings.seed + 1000 * attempt
        u = _global_search(evaluator, x0, settings, seed, share, progress, handover, log)
        u = polish(evaluator, u, settings, progress, log)
        met = verdict(evaluator, u, log).met
        ev = evaluator.evaluate(u, log=log)
        score = _penalised(ev, space.curvature_margin(u), radius)
        if met:
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
        if _certified_gap(evaluator, best_u, log) <= 0.1:
            break
        evaluator = evaluator.refined()
        best_u = polish(evaluator, best_u, settings, progress, log)
    judged = verdict(evaluator, best_u, log)
    return DesignResult(
        u=best_u,
        evaluation=evaluator.evaluate(best_u, log=log),
        status=judged.status,
        message=judged.message,
        binding=judged.binding,
        solves=log.solves,
        attempts=attempts,
        evaluator=evaluator,
    )
