"""Finite-element eigen-models of nonuniform bars, tubes and strings.

Public entry points: the part descriptions in ``forward.geometry`` and ``forward.solve``;
for the inverse problems of the bench, ``modes_on_mesh`` (modes and the systems their
sensitivities need, on a fixed mesh), ``moduli_split`` (stiffness split by E and G),
``thickness_derivatives`` and ``mass_per_length``.
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
from tonewright.forward.modal import (
    FAMILIES,
    FamilyModes,
    MeshModes,
    ModalResult,
    Mode,
    ModuliSplit,
    families_of,
    mass_per_length,
    modes_on_mesh,
    moduli_split,
    solve,
    thickness_derivatives,
)

__all__ = [
    "FAMILIES",
    "Bar",
    "FamilyModes",
    "Field",
    "Hole",
    "Material",
    "MeshModes",
    "ModalResult",
    "Mode",
    "ModuliSplit",
    "Part",
    "PiecewiseLinear",
    "String",
    "Support",
    "Tube",
    "constant",
    "families_of",
    "hole_centre_height",
    "mass_per_length",
    "modes_on_mesh",
    "moduli_split",
    "solve",
    "thickness_derivatives",
]
