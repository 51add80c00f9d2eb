"""Immutable descriptions of the parts the forward model solves: bars, tubes and strings.

All quantities are SI (metres, pascals, kilograms). Cross-section data along the part are
*fields*: callables of the axial position ``x`` (metres, from the left end) that also list their
``breakpoints``, the positions where the field is not smooth. Quadrature is split there, so a
piecewise-linear profile is integrated exactly however coarse the mesh.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Literal, Protocol, runtime_checkable

import numpy as np

__all__ = [
    "Bar",
    "Field",
    "Hole",
    "Material",
    "Part",
    "PiecewiseLinear",
    "String",
    "Support",
    "Tube",
    "constant",
    "hole_centre_height",
    "strongest_corners",
]


@runtime_checkable
class Field(Protocol):
    """A quantity along the part: ``field(x) -> values`` plus where it has kinks."""

    def __call__(self, x: np.ndarray) -> np.ndarray: ...

    @property
    def breakpoints(self) -> np.ndarray: ...


@dataclass(frozen=True, eq=False)
class PiecewiseLinear:
    """Linear interpolation between stations ``(x, y)``; constant beyond the end stations."""

    x: np.ndarray
    y: np.ndarray

    def __post_init__(self) -> None:
        x = np.asarray(self.x, dtype=float)
        y = np.asarray(self.y, dtype=float)
        if x.ndim != 1 or x.shape != y.shape or x.size == 0:
            raise ValueError("stations need matching 1-D x and y arrays")
        if np.any(np.diff(x) <= 0):
            raise ValueError("station positions must increase strictly")
        object.__setattr__(self, "x", x)
        object.__setattr__(self, "y", y)

    def __call__(self, x: np.ndarray) -> np.ndarray:
        return np.interp(x, self.x, self.y)

    @property
    def breakpoints(self) -> np.ndarray:
        return self.x


def constant(value: float) -> PiecewiseLinear:
    """A uniform field."""
    return PiecewiseLinear(np.array([0.0]), np.array([float(value)]))


@dataclass(frozen=True)
class Material:
    """Beam-model material: modulus along the axis, shear modulus, density, Poisson ratio.

    ``E`` and ``G`` in Pa, ``rho`` in kg/m^3. For wood, ``E`` is E_L (along the grain) and
    ``G`` is G_LT, the shear modulus that governs vertical bending shear and torsion.
    ``loss_factor`` (dimensionless) sets modal damping for sound previews only.
    ``shear_ratio`` is G_xy / G_xz, the shear modulus in the plane of the width over the one in
    the vertical plane (wood, quarter-sawn: G_LR / G_LT; isotropic: 1). It sets lateral-bending
    shear and the torsion of a wide orthotropic section (``forward.sections``).
    """

    E: float
    G: float
    rho: float
    nu: float = 0.3
    loss_factor: float = 0.01
    shear_ratio: float = 1.0

    def __post_init__(self) -> None:
        for name in ("E", "G", "rho"):
            if not getattr(self, name) > 0:
                raise ValueError(f"material {name} must be positive")


@dataclass(frozen=True)
class Hole:
    """A round hole drilled across the width (through the full width).

    ``x``: centre position along the bar; ``diameter``; ``height``: centre above the bar's
    bottom face at that position (None: at mid-thickness).
    """

    x: float
    diameter: float
    height: float | None = None


def hole_centre_height(height: float | None, local_thickness: float) -> float:
    """Height of a hole's centre above the bottom face: ``height`` if given, else (None) half
    the ``local_thickness`` at the hole, the mid-thickness default of :class:`Hole`."""
    return 0.5 * local_thickness if height is None else height


SupportKind = Literal["clamp", "pin", "spring", "mass", "touch"]


@dataclass(frozen=True)
class Support:
    """A point support at ``x``.

    - ``clamp``: every displacement and rotation held;
    - ``pin``: transverse displacements held (vertical and lateral), rotations free;
    - ``spring``: a cord or spring of stiffness ``value`` (N/m) on the vertical displacement;
    - ``mass``: a point mass ``value`` (kg) moving with the part (all translations);
    - ``touch``: a light touch holding the vertical (transverse) displacement only.
    """

    kind: SupportKind
    x: float
    value: float = 0.0


@dataclass(frozen=True)
class Bar:
    """A bar of rectangular section, width and thickness varying along its length.

    The bottom face carries the undercut; the top face is flat. ``width`` and ``thickness``
    are fields in metres.
    """

    length: float
    width: Field
    thickness: Field
    material: Material
    holes: tuple[Hole, ...] = ()
    supports: tuple[Support, ...] = ()


@dataclass(frozen=True)
class Tube:
    """A round tube; ``outer_diameter`` and ``wall`` are fields in metres."""

    length: float
    outer_diameter: Field
    wall: Field
    material: Material
    supports: tuple[Support, ...] = ()


@dataclass(frozen=True)
class String:
    """A taut string: tension (N), linear density (kg/m) and bending stiffness EI (N m^2).

    Ends are held by the ``supports`` (the part-file layer adds pins at both ends by default).
    """

    length: float
    tension: float
    linear_density: Field
    bending_stiffness: Field = field(default_factory=lambda: constant(0.0))
    supports: tuple[Support, ...] = ()


Part = Bar | Tube | String


def strongest_corners(
    fields: tuple[Field, ...], points: np.ndarray, length: float, limit: int
) -> np.ndarray:
    """Up to ``limit`` of ``points`` (breakpoints) where the fields bend most sharply.

    All of them when there are few (caliper stations, a designed cut's edges). From dense
    stations (a design written at 1 mm or finer) only real corners, a change of slope over
    0.05 (about 3 degrees), so that meshes put element ends at corners and keep a sampled smooth
    curve coarse: between stations its slope changes by h'' dx, a few 1e-4.
    """
    points = np.asarray(points, dtype=float)
    if points.size <= limit:
        return points
    eps = 1e-6 * length
    turn = np.zeros(points.size)
    for f in fields:
        left = (f(points) - f(points - eps)) / eps
        right = (f(points + eps) - f(points)) / eps
        turn += np.abs(right - left)
    order = np.argsort(-turn, kind="stable")[:limit]
    return np.sort(points[order[turn[order] > 0.05]])
