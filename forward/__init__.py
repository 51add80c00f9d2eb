"""Finite-element eigen-models of nonuniform bars, tubes and strings.

Public entry points: the part descriptions in ``forward.geometry`` and ``forward.solve``.
"""

from tonewright.forward.geometry import (
    Bar,
    Field,
    Hole,
    Material,
    Part,
    PiecewiseLinear,
    String,
    Support,
    Tube,
    constant,
    hole_centre_height,
)
from tonewright.forward.modal import FAMILIES, ModalResult, Mode, families_of, solve

__all__ = [
    "FAMILIES",
    "Bar",
    "Field",
    "Hole",
    "Material",
    "ModalResult",
    "Mode",
    "Part",
    "PiecewiseLinear",
    "String",
    "Support",
    "Tube",
    "constant",
    "families_of",
    "hole_centre_height",
    "solve",
]
