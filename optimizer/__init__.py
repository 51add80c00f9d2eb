"""Inverse design of bars, tubes and strings: search the geometry until partials meet goals.

``Evaluator`` (immutable configuration) turns a design space and goals into residuals (cents)
with analytic Jacobians, counting its solves in an ``EvaluationLog``; ``design`` runs CMA-ES
then a least-squares polish and returns a ``DesignResult`` whose integer ``status`` is one of
``STATUS_MESSAGES``.
On the bench: ``calibrate_bar`` fits E and G of a blank to its measured partials
(``optimizer.calibration``); ``advise`` and ``plan_cuts`` plan the next cuts on a
half-finished bar, ``tuning_map`` shows where removal moves each partial
(``optimizer.cutplan``).
"""

from tonewright.optimizer.calibration import Calibration, IdentifiedPartial, calibrate_bar
from tonewright.optimizer.correction import (
    CorrectedDesign,
    CorrectionStep,
    HighFidelityModes,
    corrected_design,
)
from tonewright.optimizer.cutplan import (
    Advice,
    AdviceOptions,
    Cut,
    CutLimits,
    Plan,
    Shortening,
    Step,
    TuningMap,
    advise,
    plan_cuts,
    tuning_map,
)
from tonewright.optimizer.objective import (
    Clearance,
    Evaluation,
    EvaluationLog,
    Evaluator,
    Goal,
    UnwantedMode,
    mac,
)
from tonewright.optimizer.search import (
    MET,
    STATUS_MESSAGES,
    DesignResult,
    SearchSettings,
    design,
    exit_code,
)
from tonewright.optimizer.sensitivity import eigenvalue_gradients, mode_densities
from tonewright.optimizer.spaces import BarUndercut, DesignField, StringDensity, TubeDesign

__all__ = [
    "MET",
    "STATUS_MESSAGES",
    "Advice",
    "AdviceOptions",
    "BarUndercut",
    "Calibration",
    "Clearance",
    "CorrectedDesign",
    "CorrectionStep",
    "Cut",
    "CutLimits",
    "DesignField",
    "DesignResult",
    "Evaluation",
    "EvaluationLog",
    "Evaluator",
    "Goal",
    "HighFidelityModes",
    "IdentifiedPartial",
    "Plan",
    "SearchSettings",
    "Shortening",
    "Step",
    "StringDensity",
    "TubeDesign",
    "TuningMap",
    "UnwantedMode",
    "advise",
    "calibrate_bar",
    "corrected_design",
    "design",
    "eigenvalue_gradients",
    "exit_code",
    "mac",
    "mode_densities",
    "plan_cuts",
    "tuning_map",
]
