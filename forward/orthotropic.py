"""Orthotropic elastic material for solid and plane models of bars.

Wood is modelled as orthotropic with principal axes L (along the grain), R (radial, across the
growth rings) and T (tangential, along the rings). Hooke's law in Voigt form, engineering shear
strains, order (xx, yy, zz, yz, xz, xy):

    eps = S sigma,   sigma = C eps,   C = S^-1,

    S = [[ 1/E_1,      -nu_21/E_2,  -nu_31/E_3,  0,        0,        0       ],
         [-nu_12/E_1,   1/E_2,      -nu_32/E_3,  0,        0,        0       ],
         [-nu_13/E_1,  -nu_23/E_2,   1/E_3,      0,        0,        0       ],
         [ 0, 0, 0, 1/G_23, 0, 0 ], [ 0, 0, 0, 0, 1/G_13, 0 ], [ 0, 0, 0, 0, 0, 1/G_12 ]]

``nu_ij`` is the contraction along j over the extension along i under a stress along i (the
convention of the USDA *Wood Handbook*, FPL-GTR-190, 2010, ch. 5). S is symmetric, which is
the reciprocity relation nu_ij / E_i = nu_ji / E_j (Lekhnitskii, *Theory of Elasticity of an
Anisotropic Body*, 1981, sec. 3; Jones, *Mechanics of Composite Materials*, 1999, eq. 2.52).
Only nu_LR, nu_LT, nu_RT are stored; the others follow from reciprocity. C is positive definite
iff all moduli are positive and 1 - nu_12 nu_21 - nu_23 nu_32 - nu_13 nu_31
- 2 nu_21 nu_32 nu_13 > 0 with |nu_ij| < sqrt(E_i / E_j) (Lempriere, B.M. (1968), "Poisson's
ratio in orthotropic materials", AIAA J. 6(11), 2226-2227); it is checked numerically here.

``OrthotropicConstants`` holds the nine constants alone (what a material library knows about a
wood); ``Orthotropic`` adds the density and how the bar was sawn, which is what the models take.

Bar axes: x along the length (always L), y across the width, z through the thickness (the
undercut side). ``thickness_axis`` says which of R and T lies along z:

- ``"T"`` (default): rings run through the thickness, seen end-on they stand vertical
  ("quarter-sawn" bar, the top face is an LR plane). G_xz = G_LT, the shear modulus that the
  1-D beam model (``forward.geometry.Material.G``) takes for vertical bending.
- ``"R"``: rings lie roughly parallel to the top face ("flat-sawn" bar). G_xz = G_LR.

Plane stress in the x-z plane (sigma_yy = sigma_yz = sigma_xy = 0) keeps the rows and columns
(xx, zz, xz) of S and inverts them: C_ps = (S[[0,2,4]][:, [0,2,4]])^-1.
"""

from __future__ import annotations

from dataclasses import dataclass, fields, replace
from typing import Literal, NamedTuple, Self

import numpy as np

__all__ = [
    "BarAxes",
    "Orthotropic",
    "OrthotropicConstants",
    "bar_axes",
    "compliance_lrt",
    "compliance_matrix",
    "isotropic",
    "plane_stress_xz",
    "stiffness_matrix",
]

ThicknessAxis = Literal["R", "T"]


@dataclass(frozen=True)
class OrthotropicConstants:
    """The nine engineering constants of wood in its own axes L, R, T; moduli in Pa.

    Poisson ratios follow the Wood Handbook convention (nu_LR: contraction along R per extension
    along L under a stress along L). Checked when built: positive moduli, finite Poisson ratios
    and a positive-definite compliance (see the module docstring).
    """

    E_L: float
    E_R: float
    E_T: float
    G_LR: float
    G_LT: float
    G_RT: float
    nu_LR: float
    nu_LT: float
    nu_RT: float

    def __post_init__(self) -> None:
        for name in ("E_L", "E_R", "E_T", "G_LR", "G_LT", "G_RT"):
            value = getattr(self, name)
            if not (np.isfinite(value) and value > 0):
                raise ValueError(f"material {name} = {value!r}: must be a positive number")
        for name in ("nu_LR", "nu_LT", "nu_RT"):
            value = getattr(self, name)
            if not np.isfinite(value):
                raise ValueError(f"material {name} = {value!r}: must be a finite number")
        eig = np.linalg.eigvalsh(compliance_lrt(self))
        if eig.min() <= 0:
            raise ValueError(
                f"material Poisson ratios (nu_LR={self.nu_LR}, nu_LT={self.nu_LT}, "
                f"nu_RT={self.nu_RT}) make the stiffness matrix indefinite; "
                "need |nu_ij| < sqrt(E_i/E_j) and a positive determinant"
            )

    def scaled(self, e_factor: float, g_factor: float) -> Self:
        """Normal moduli times ``e_factor``, shear moduli times ``g_factor``; ratios kept."""
        return replace(
            self,
            E_L=self.E_L * e_factor,
            E_R=self.E_R * e_factor,
            E_T=self.E_T * e_factor,
            G_LR=self.G_LR * g_factor,
            G_LT=self.G_LT * g_factor,
            G_RT=self.G_RT * g_factor,
        )


@dataclass(frozen=True)
class Orthotropic(OrthotropicConstants):
    """Orthotropic material with L along the bar: the nine constants (Pa), the density
    ``rho`` (kg/m^3) and which wood axis lies through the bar's thickness.

    ``thickness_axis``: ``"T"`` (default, quarter-sawn: rings vertical seen end-on) or ``"R"``
    (flat-sawn: rings parallel to the top face).
    """

    rho: float
    thickness_axis: ThicknessAxis = "T"

    def __post_init__(self) -> None:
        super().__post_init__()
        if not (np.isfinite(self.rho) and self.rho > 0):
            raise ValueError(f"material rho = {self.rho!r}: must be a positive number")
        if self.thickness_axis not in ("R", "T"):
            raise ValueError(
                f"material thickness_axis = {self.thickness_axis!r}: allowed 'R' or 'T'"
            )

    @classmethod
    def from_constants(
        cls, constants: OrthotropicConstants, rho: float, thickness_axis: ThicknessAxis = "T"
    ) -> Orthotropic:
        """The material of a bar cut from wood with these ``constants``."""
        nine = {f.name: getattr(constants, f.name) for f in fields(OrthotropicConstants)}
        return cls(**nine, rho=rho, thickness_axis=thickness_axis)


def isotropic(E: float, nu: float, rho: float) -> Orthotropic:
    """An isotropic material (metal, glass) as a special case: G = E / (2 (1 + nu))."""
    if not (-1.0 < nu < 0.5):
        raise ValueError(f"material nu = {nu!r}: allowed -1 < nu < 0.5")
    if not (np.isfinite(E) and E > 0):
        raise ValueError(f"material E = {E!r}: must be a positive number")
    G = E / (2.0 * (1.0 + nu))
    return Orthotropic(E, E, E, G, G, G, nu, nu, nu, rho)


class BarAxes(NamedTuple):
    """Engineering constants in the bar axes x (length), y (width), z (thickness)."""

    E_x: float
    E_y: float
    E_z: float
    G_yz: float
    G_xz: float
    G_xy: float
    nu_xy: float
    nu_xz: float
    nu_yz: float


def bar_axes(material: Orthotropic) -> BarAxes:
    """Map L, R, T onto x, y, z according to ``material.thickness_axis``."""
    m = material
    nu_TR = m.nu_RT * m.E_T / m.E_R  # reciprocity nu_RT / E_R = nu_TR / E_T
    if m.thickness_axis == "T":  # y = R, z = T
        return BarAxes(m.E_L, m.E_R, m.E_T, m.G_RT, m.G_LT, m.G_LR, m.nu_LR, m.nu_LT, m.nu_RT)
    return BarAxes(m.E_L, m.E_T, m.E_R, m.G_RT, m.G_LR, m.G_LT, m.nu_LT, m.nu_LR, nu_TR)


def _compliance(E1, E2, E3, G23, G13, G12, nu12, nu13, nu23) -> np.ndarray:
    S = np.zeros((6, 6))
    S[0, 0], S[1, 1], S[2, 2] = 1.0 / E1, 1.0 / E2, 1.0 / E3
    S[0, 1] = S[1, 0] = -nu12 / E1
    S[0, 2] = S[2, 0] = -nu13 / E1
    S[1, 2] = S[2, 1] = -nu23 / E2
    S[3, 3], S[4, 4], S[5, 5] = 1.0 / G23, 1.0 / G13, 1.0 / G12
    return S


def compliance_lrt(m: OrthotropicConstants) -> np.ndarray:
    """6x6 compliance in the wood's own axes, Voigt order (L, R, T, RT, LT, LR), 1/Pa."""
    return _compliance(m.E_L, m.E_R, m.E_T, m.G_RT, m.G_LT, m.G_LR, m.nu_LR, m.nu_LT, m.nu_RT)


def compliance_matrix(material: Orthotropic) -> np.ndarray:
    """6x6 compliance S in bar axes, Voigt order (xx, yy, zz, yz, xz, xy), 1/Pa."""
    a = bar_axes(material)
    return _compliance(a.E_x, a.E_y, a.E_z, a.G_yz, a.G_xz, a.G_xy, a.nu_xy, a.nu_xz, a.nu_yz)


def stiffness_matrix(material: Orthotropic) -> np.ndarray:
    """6x6 stiffness C = S^-1 in bar axes, Voigt order (xx, yy, zz, yz, xz, xy), Pa.

    Symmetric positive definite (checked when the material is built).
    """
    C = np.linalg.inv(compliance_matrix(material))
    return 0.5 * (C + C.T)


def plane_stress_xz(material: Orthotropic) -> np.ndarray:
    """3x3 plane-stress stiffness for the side profile, order (xx, zz, xz), Pa."""
    S = compliance_matrix(material)
    keep = [0, 2, 4]
    C = np.linalg.inv(S[np.ix_(keep, keep)])
    return 0.5 * (C + C.T)
