"""Inverse design of bars, tubes and strings: search the geometry until partials meet goals.

``Evaluator`` turns a design space and goals into residuals (cents) with analytic Jacobians;
``design`` runs CMA-ES then a least-squares polish and returns a ``DesignResult``.
"""

from tonewright.optimizer.correction import (
    CorrectedDesign,
    CorrectionStep,
    HighFidelityModes,
    corrected_design,
)
from tonewright.optimizer.objective import Clearance, Evaluation, Evaluator, Goal, UnwantedMode, mac
from tonewright.optimizer.search import DesignResult, SearchSettings, design
from tonewright.optimizer.sensitivity import eigenvalue_gradients, mode_densities
from tonewright.optimizer.spaces import BarUndercut, DesignField, StringDensity, TubeDesign

__all__ = [
    "BarUndercut",
    "Clearance",
    "CorrectedDesign",
    "CorrectionStep",
    "DesignField",
    "DesignResult",
    "Evaluation",
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
    "mac",
    "mode_densities",
]
