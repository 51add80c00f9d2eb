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

A high-fidelity model that also returns the clearance families' modes (``HighFidelityModes``,
the 3D model) corrects those the same way: each beam mode is scaled by its high-fidelity
ratio r_m = f_hi,m / f_beam,m at the current design (``Evaluator.set_unwanted_scale``), so
the polish keeps the modes the high-fidelity model sees out of the bands, and the loop ends
only when the high-fidelity modes themselves are clear. If the corrected beam model has no
solution beside the current design, it is searched afresh; if that search fails too, the
loop stops and reports the limit that binds.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace

import numpy as np
from tonewright.optimizer.objective import Evaluator, Goal
from tonewright.optimizer.search import DesignResult, SearchSettings, design, polish, verdict

__all__ = ["CorrectedDesign", "CorrectionStep", "HighFidelityModes", "corrected_design"]

HighFidelity = Callable[[np.ndarray, Sequence[Goal]], "np.ndarray | HighFidelityModes"]
"""``hf(u, goals)``: frequencies (Hz) of the goals' modes in the high-fidelity model, or a
``HighFidelityModes`` that also carries the clearance families' modes."""


@dataclass(frozen=True)
class HighFidelityModes:
    """A high-fidelity solve's goal frequencies and, by family, the frequencies (ascending) of
    the modes that must keep clear of the partials (torsion, lateral)."""

    goals_hz: np.ndarray
    families: dict[str, np.ndarray]


@dataclass(frozen=True)
class CorrectionStep:
    beam_hz: np.ndarray
    high_fidelity_hz: np.ndarray
    errors_cents: np.ndarray  # high-fidelity against the original goals
    defect_cents: np.ndarray
    clear: bool | None = None  # unwanted modes clear in the high-fidelity model (None: unseen)


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
    scale0 = dict(evaluator.unwanted_scale)
    stuck = False
    try:
        for i in range(max_steps):
            beam_ev = evaluator.evaluate(u)
            beam = beam_ev.achieved_hz
            seen = high_fidelity(u, goals)
            clear = None
            if isinstance(seen, HighFidelityModes):
                hi = np.asarray(seen.goals_hz, dtype=float)
                if evaluator.clearance is not None:
                    # judge the clearance on the high-fidelity modes: scale each beam mode by
                    # the ratio the high-fidelity model shows at this design
                    evaluator.set_unwanted_scale(_mode_ratios(seen.families, beam_ev.family_hz))
                    clear = evaluator.evaluate(u).clearance_ok
            else:
                hi = np.asarray(seen, dtype=float)
            errors = _cents(hi, target)
            defect = _cents(hi, beam)
            steps.append(CorrectionStep(beam, hi, errors, defect, clear))
            if progress:
                progress("correct", evaluator.solves, float(np.max(np.abs(errors))))
            if (np.all(np.abs(errors) <= tol) and clear is not False) or i == max_steps - 1:
                break
            if stuck:  # the corrected beam model had no solution: more checks cannot help
                break
            shifted = [
                replace(g, f_hz=g.f_hz * 2.0 ** (-d / 1200.0))
                for g, d in zip(goals, defect, strict=True)
            ]
            evaluator.set_goals(shifted)
            u = polish(evaluator, u, settings, progress)
            if not verdict(evaluator, u)[0]:
                # the corrected beam model has no solution next to this design (typically an
                # unwanted mode the high-fidelity model moved into a band): search it afresh,
                # beam solves being cheap beside high-fidelity ones
                fresh = replace(settings, budget=evaluator.solves + settings.budget)
                again = design(evaluator, fresh, progress, start=u)
                u, stuck = again.u, not again.converged
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
        evaluator.set_unwanted_scale(scale0)
    last = steps[-1]
    met = bool(np.all(np.abs(last.errors_cents) <= tol))
    if met and last.clear is False:
        met = False
        bad = [m for m in result.evaluation.unwanted if not m.clear]
        m = bad[0] if bad else None
        message = "an unwanted mode is too near a partial in the certifying model" + (
            f": {m.family} mode {m.order} at {m.f_hz:.1f} Hz, {m.gap_hz:.1f} Hz from the "
            f"{m.nearest_goal} (keep {m.band_hz:.0f} Hz clear)"
            if m
            else ""
        )
    elif met and result.status in (0, 1):
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


def _mode_ratios(high: dict[str, np.ndarray], beam: dict[str, np.ndarray]) -> dict[str, np.ndarray]:
    """Per family, high-fidelity over beam frequency of each mode order both models found."""
    out = {}
    for fam, f_hi in high.items():
        f_beam = beam.get(fam)
        if f_beam is None:
            continue
        n = min(np.size(f_hi), np.size(f_beam))
        if n:
            out[fam] = np.asarray(f_hi[:n], dtype=float) / np.asarray(f_beam[:n], dtype=float)
    return out
