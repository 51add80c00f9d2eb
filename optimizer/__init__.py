"""Inverse design of bars, tubes and strings: search the geometry until partials meet goals.

``Evaluator`` (immutable configuration) turns a design space and goals into residuals (cents)
with analytic Jacobians, counting its solves in an ``EvaluationLog``; ``design`` runs CMA-ES
then a least-squares polish and returns a ``DesignResult`` whose integer ``status`` is one of
``STATUS_MESSAGES``.
"""

from tonewright.optimizer.correction import (
    CorrectedDesign,
    CorrectionStep,
    HighFidelityModes,
    corrected_design,
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
    "BarUndercut",
    "Clearance",
    "CorrectedDesign",
    "CorrectionStep",
    "DesignField",
    "DesignResult",
    "Evaluation",
    "EvaluationLog",
    "Evaluator",
    "Goal",
    "HighFidelityModes",
    "SearchSettings",
    "StringDensity",
    "TubeDesign",
    "UnwantedMode",
    "corrected_design",
    "design",
    "eigenvalue_gradients",
    "exit_code",
    "mac",
    "mode_densities",
]
