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
high-fidelity solve. The update is relaxed when it overshoots: a check that comes out worse
than the best so far sends the loop back to the best design with half the step (the shift
s <- s + gain (-d - s), gain 1, 1/2, 1/4), and the design returned is the best one checked.

A high-fidelity model that also returns the clearance families' modes (``HighFidelityModes``,
the 3D model) corrects those the same way: each beam mode is scaled by its high-fidelity
ratio r_m = f_hi,m / f_beam,m at the current design (``Evaluator.with_unwanted_scale``), so
the polish keeps the modes the high-fidelity model sees out of the bands, and the loop ends
only when the high-fidelity modes themselves are clear. If the corrected beam model has no
solution beside the current design, it is searched afresh; if that search fails too, the
loop stops and reports the limit that binds.

The evaluator passed in is never changed: each shifted goal set and each mode scaling is a new
evaluator, and the solves are counted in an ``EvaluationLog``. The status of the result is
decided by ``optimizer.search.certified_status``.
"""

from __future__ import annotations

from collections.abc import Callable, Sequence
from dataclasses import dataclass, replace

import numpy as np
from tonewright.acoustics.pitch import cents, cents_to_ratio
from tonewright.optimizer.objective import EvaluationLog, Evaluator, Goal
from tonewright.optimizer.search import (
    MISSED_CERTIFIER,
    MISSED_LIMIT,
    MISSED_SHAPE,
    STATUS_MESSAGES,
    DesignResult,
    SearchSettings,
    Verdict,
    certified_status,
    design,
    polish,
    verdict,
)

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
    modes: tuple[tuple[str, int, float], ...] = ()  # every mode found: (family, order, Hz)


@dataclass(frozen=True)
class CorrectionStep:
    beam_hz: np.ndarray
    high_fidelity_hz: np.ndarray
    errors_cents: np.ndarray  # high-fidelity against the original goals
    defect_cents: np.ndarray
    clear: bool | None = None  # unwanted modes clear in the high-fidelity model (None: unseen)
    modes: tuple[tuple[str, int, float], ...] = ()  # the high-fidelity model's modes, if given


@dataclass(frozen=True, eq=False)
class CorrectedDesign:
    """The corrected design (its status decided once, in ``result.status``) and each
    high-fidelity check on the way."""

    result: DesignResult
    steps: tuple[CorrectionStep, ...]
    chosen: int = -1  # the step the result stands on: the best check, not always the last

    @property
    def final(self) -> CorrectionStep:
        """The high-fidelity check of the returned design."""
        return self.steps[self.chosen]

    @property
    def converged(self) -> bool:
        return self.result.converged

    @property
    def message(self) -> str:
        return self.result.message


def _at_degree(evaluator: Evaluator, degree: int) -> Evaluator:
    return evaluator.refined(degree) if degree > evaluator.degree else evaluator


def corrected_design(
    evaluator: Evaluator,
    start: DesignResult,
    high_fidelity: HighFidelity,
    settings: SearchSettings | None = None,
    max_steps: int = 6,
    progress: Callable[[str, int, float], None] | None = None,
    log: EvaluationLog | None = None,
    search_again: bool = True,
) -> CorrectedDesign:
    """Correct a beam-model design ``start`` until ``high_fidelity`` meets the goals.

    ``evaluator`` (the real goals) is kept as it is, on the mesh ``start`` was judged on;
    ``log`` continues the solve count (by default from ``start.solves``). ``search_again``:
    when the corrected beam model has no solution next to the design, search it afresh (else
    stop there: a later stage will)."""
    settings = settings or SearchSettings()
    log = EvaluationLog(solves=start.solves) if log is None else log
    if start.evaluator is not None:
        evaluator = _at_degree(evaluator, start.evaluator.degree)
    goals = tuple(evaluator.goals)
    tol = np.array([g.tolerance_cents for g in goals])
    target = np.array([g.f_hz for g in goals])
    u = start.u
    steps: list[CorrectionStep] = []
    current = evaluator  # the beam model with shifted goals and scaled unwanted modes
    shift = np.zeros(len(goals))  # cents: the beam goals are the real ones moved by this
    gain = 1.0  # relaxation of the update; halved each time a check comes out worse
    best: tuple[float, int, np.ndarray, Evaluator, np.ndarray] | None = None
    stuck = False
    for i in range(max_steps):
        beam_ev = current.evaluate(u, log=log)
        beam = beam_ev.achieved_hz
        seen = high_fidelity(u, goals)
        clear = None
        modes: tuple[tuple[str, int, float], ...] = ()
        if isinstance(seen, HighFidelityModes):
            hi = np.asarray(seen.goals_hz, dtype=float)
            modes = tuple(seen.modes)
            if current.clearance is not None:
                # judge the clearance on the high-fidelity modes: scale each beam mode by the
                # ratio the high-fidelity model shows at this design
                current = current.with_unwanted_scale(
                    _mode_ratios(seen.families, beam_ev.family_hz)
                )
                clear = current.evaluate(u, log=log).clearance_ok
        else:
            hi = np.asarray(seen, dtype=float)
        errors = cents(hi, target)
        defect = cents(hi, beam)
        steps.append(CorrectionStep(beam, hi, errors, defect, clear, modes))
        if progress:
            progress("correct", log.solves, float(np.max(np.abs(errors))))
        met = bool(np.all(np.abs(errors) <= tol) and clear is not False)
        # a design with an unwanted mode in a band ranks below any that is clear
        score = float(np.max(np.abs(errors) / tol)) + (0.0 if clear is not False else 1e3)
        if best is None or score < best[0]:
            best = (score, i, u, current, shift)
        else:
            # the update overshot (the defect moved more than the design did): back to the
            # best design so far, with a smaller step (a relaxed fixed-point iteration)
            gain *= 0.5
            _, j, u, current, shift = best
            defect = steps[j].defect_cents
        if met or i == max_steps - 1 or stuck or gain < 0.2:
            break  # stuck: the corrected beam model had no solution, more checks cannot help
        # relaxed defect correction: at gain 1 the beam goals are moved by minus the defect
        shift = shift + gain * (-defect - shift)
        shifted = [
            replace(g, f_hz=g.f_hz * float(cents_to_ratio(s)))
            for g, s in zip(goals, shift, strict=True)
        ]
        current = current.with_goals(shifted)
        u = polish(current, u, settings, progress, log)
        if not verdict(current, u, log).met and not search_again:
            stuck = True
        elif not verdict(current, u, log).met:
            # the corrected beam model has no solution next to this design (typically an
            # unwanted mode the high-fidelity model moved into a band): search it afresh from
            # the corrected optimum, beam solves being cheap beside high-fidelity ones
            fresh = replace(settings, budget=log.solves + settings.budget)
            again = design(current, fresh, progress, start=u, log=log)
            u, stuck = again.u, not again.converged
            current = again.evaluator or current
    assert best is not None
    _, chosen, u, current, _ = best
    evaluation = current.evaluate(u, log=log)
    bad = [m for m in evaluation.unwanted if not m.clear]
    detail = (
        f": {bad[0].family} mode {bad[0].order} at {bad[0].f_hz:.1f} Hz, {bad[0].gap_hz:.1f} Hz "
        f"from the {bad[0].nearest_goal} (keep {bad[0].band_hz:.0f} Hz clear)"
        if bad
        else ""
    )
    last = steps[chosen]
    beam_verdict = verdict(current, u, log)
    judged = certified_status(
        beam_verdict,
        last.errors_cents,
        tol,
        last.clear,
        len(steps),
        [g.label for g in goals],
        detail,
    )
    if judged.status == MISSED_CERTIFIER and beam_verdict.status in (MISSED_LIMIT, MISSED_SHAPE):
        # the corrected beam model cannot get there within the limits either: the miss is
        # the blank's, so say which limit binds, with the certifying model's numbers
        judged = Verdict(
            beam_verdict.status,
            f"{STATUS_MESSAGES[beam_verdict.status]}: {judged.message}",
            beam_verdict.binding,
        )
    result = replace(
        start,
        u=u,
        evaluation=evaluation,
        status=judged.status,
        message=judged.message,
        binding=judged.binding,
        solves=log.solves,
        evaluator=_at_degree(evaluator, current.degree),
    )
    return CorrectedDesign(result=result, steps=tuple(steps), chosen=chosen)


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
