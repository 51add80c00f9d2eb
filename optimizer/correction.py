"""Designs that are right in a higher-fidelity model: defect correction of the beam model.

The beam model is fast but, on a bar cut from one side, can be tens of cents off a solid model
(the neutral axis rises where the bar is thin; stress spreads slowly through thickness changes
in shear-soft wood). The correction keeps the beam model for the search and moves its goals by
the defect the high-fidelity model shows (an output space-mapping / defect correction scheme,
Bandler, J. W. et al., 2004, "Space mapping: the state of the art", IEEE Trans. Microwave
Theory Tech. 52(1), 337-361; Boehmer, K., Hemker, P. & Stetter, H. J., 1984, "The defect
correction approach", Computing Suppl. 5, 1-32):

    d_k   = cents(f_hi,k(u) / f_beam,k(u))          defect of goal k at the current design
    g_k'  = g_k * 2^(-d_k / 1200)                   beam goal that lands the high-fidelity model
    u'    = polish(beam residuals against g')        a few Jacobian steps from u

repeated until the high-fidelity frequencies meet the original goals within tolerance. The
defect varies slowly with the design, so a few iterations suffice; each costs one
high-fidelity solve.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace

import numpy as np

from optimizer.objective import Evaluator, Goal
from optimizer.search import DesignResult, SearchSettings, polish, verdict

__all__ = ["CorrectedDesign", "CorrectionStep", "corrected_design"]

HighFidelity = Callable[[np.ndarray, Sequence[Goal]], np.ndarray]
"""``hf(u, goals) -> frequencies (Hz)`` of the goals' modes in the high-fidelity model."""


@dataclass(frozen=True)
class CorrectionStep:
    beam_hz: np.ndarray
    high_fidelity_hz: np.ndarray
    errors_cents: np.ndarray  # high-fidelity against the original goals
    defect_cents: np.ndarray


@dataclass(frozen=True, eq=False)
class CorrectedDesign:
    result: DesignResult
    steps: tuple[CorrectionStep, ...]
    converged: bool
    message: str


def _cents(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    return 1200.0 * np.log2(np.asarray(a) / np.asarray(b))


def corrected_design(
    evaluator: Evaluator,
    start: DesignResult,
    high_fidelity: HighFidelity,
    settings: SearchSettings | None = None,
    max_steps: int = 6,
    progress: Callable[[str, int, float], None] | None = None,
) -> CorrectedDesign:
    """Correct a beam-model design ``start`` until ``high_fidelity`` meets the goals."""
    settings = settings or SearchSettings()
    goals = tuple(evaluator.goals)
    tol = np.array([g.tolerance_cents for g in goals])
    target = np.array([g.f_hz for g in goals])
    u = start.u
    result = start
    steps: list[CorrectionStep] = []
    try:
        for i in range(max_steps):
            beam = evaluator.evaluate(u).achieved_hz
            hi = np.asarray(high_fidelity(u, goals), dtype=float)
            errors = _cents(hi, target)
            defect = _cents(hi, beam)
            steps.append(CorrectionStep(beam, hi, errors, defect))
            if progress:
                progress("correct", evaluator.solves, float(np.max(np.abs(errors))))
            if np.all(np.abs(errors) <= tol) or i == max_steps - 1:
                break
            shifted = [
                replace(g, f_hz=g.f_hz * 2.0 ** (-d / 1200.0))
                for g, d in zip(goals, defect, strict=True)
            ]
            evaluator.set_goals(shifted)
            u = polish(evaluator, u, settings, progress)
        _, status, message, binding = verdict(evaluator, u)
        if status == 1 and np.all(np.abs(steps[-1].errors_cents) <= tol):
            # the beam misses its shifted goals by the defect's drift only: the model that
            # certifies meets the real goals, so no limit binds
            status, message, binding = 0, "every partial within tolerance", ()
        result = replace(
            start,
            u=u,
            evaluation=evaluator.evaluate(u),
            converged=status == 0,
            status=status,
            message=message,
            binding=binding,
            solves=evaluator.solves,
        )
    finally:
        evaluator.set_goals(goals)
    last = steps[-1]
    met = bool(np.all(np.abs(last.errors_cents) <= tol))
    if met and result.status in (0, 1):
        message = f"meets every goal in the certifying model ({len(steps) - 1} correction(s))"
    elif met:
        message = result.message
    else:
        worst = int(np.argmax(np.abs(last.errors_cents) / tol))
        message = (
            f"after {len(steps)} high-fidelity checks {goals[worst].label} is still "
            f"{last.errors_cents[worst]:+.2f} cents off (tolerance {tol[worst]:g})"
        )
    converged = met and result.status in (0, 1)
    return CorrectedDesign(result=result, steps=tuple(steps), converged=converged, message=message)
