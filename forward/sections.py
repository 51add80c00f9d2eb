"""Cross-section properties, as pure functions on arrays.

Rectangle b x h (b across the width, h the thickness), optionally with a round hole drilled
across the width, modelled by its local chord c (the hole removes a b x c strip centred at
height z_c above the bottom face):
    A   = b (h - c)
    I_y = b h^3/12 + b h (h/2 - zbar)^2 - b c^3/12 - b c (z_c - zbar)^2  (vertical bending)
    I_z = (h - c) b^3 / 12                                              (lateral bending)
    I_p = I_y + I_z                                                     (polar, rotary inertia)
Torsion constant of a solid rectangle, long side a, short side t (Timoshenko & Goodier, 1970,
*Theory of Elasticity*, 3rd ed., sec. 109, series solution):
    J = a t^3 / 3 * (1 - (192 t / (pi^5 a)) sum_{n odd} tanh(n pi a / (2 t)) / n^5).
A drilled section is treated as a rectangle of the remaining height (a short-span
approximation; holes sit in uncut zones near the nodes where twist is small).
Orthotropic section (shear modulus G_xz in the vertical plane, G_xy = r G_xz across the width):
the stress-function equation (1/G_xz) phi_yy + (1/G_xy) phi_zz = -2 theta becomes the
isotropic one on the rectangle stretched to b / sqrt(r) (Lekhnitskii, S. G., 1981, *Theory of
Elasticity of an Anisotropic Body*, sec. on torsion of orthotropic bars), so that
    G_xz J_eff = G_xz r^(3/2) J(b / sqrt(r), t),
which tends to G_xy b t^3 / 3 for a thin wide strip. A wide wooden bar twists mostly in its
width plane (G_LR for a quarter-sawn bar), not in the vertical plane (G_LT).

Round tube, outer diameter D, inner d = D - 2 wall:
    A = pi (D^2 - d^2)/4,  I = pi (D^4 - d^4)/64,  J = I_p = 2 I (exact for a circular tube).

Shear coefficients (Cowper, G. R., 1966, "The shear coefficient in Timoshenko's beam theory",
J. Appl. Mech. 33, 335-340, Table 1): rectangle 10 (1 + nu)/(12 + 11 nu); hollow circle with
m = d/D: 6 (1 + nu)(1 + m^2)^2 / ((7 + 6 nu)(1 + m^2)^2 + (20 + 12 nu) m^2).

Every function accepts complex arrays, so derivatives for design sensitivities can be taken
exactly by the complex-step method.
"""

from __future__ import annotations

import numpy as np

__all__ = [
    "cowper_hollow_circle",
    "cowper_rectangle",
    "hole_chord",
    "rectangle_section",
    "rectangle_torsion_constant",
    "tube_section",
]

_ODD = np.arange(1, 40, 2, dtype=float)


def cowper_rectangle(nu: float) -> float:
    """Cowper (1966) shear coefficient of a solid rectangle."""
    return 10.0 * (1.0 + nu) / (12.0 + 11.0 * nu)


def cowper_hollow_circle(nu: float, m: np.ndarray) -> np.ndarray:
    """Cowper (1966) shear coefficient of a hollow circle, m = inner/outer diameter."""
    m2 = m * m
    return (
        6.0
        * (1.0 + nu)
        * (1.0 + m2) ** 2
        / ((7.0 + 6.0 * nu) * (1.0 + m2) ** 2 + (20.0 + 12.0 * nu) * m2)
    )


def rectangle_torsion_constant(b: np.ndarray, h: np.ndarray) -> np.ndarray:
    """St-Venant torsion constant of a b x h rectangle by the series solution (either order)."""
    b = np.asarray(b)
    h = np.asarray(h)
    swap = np.real(h) > np.real(b)
    a = np.where(swap, h, b)
    t = np.where(swap, b, h)
    ratio = (a / t)[..., None]
    series = np.sum(np.tanh(_ODD * np.pi * ratio / 2.0) / _ODD**5, axis=-1)
    return a * t**3 / 3.0 * (1.0 - 192.0 * t / (np.pi**5 * a) * series)


def hole_chord(x: np.ndarray, x_hole: float, diameter: float) -> np.ndarray:
    """Vertical chord of a round hole (axis across the width) at positions x; 0 outside."""
    r = 0.5 * diameter
    d2 = r * r - (np.real(x) - x_hole) ** 2
    return 2.0 * np.sqrt(np.maximum(d2, 0.0))


def rectangle_section(
    b: np.ndarray,
    h: np.ndarray,
    chord: np.ndarray | float = 0.0,
    z_hole: np.ndarray | float = 0.0,
    shear_ratio: float = 1.0,
) -> dict[str, np.ndarray]:
    """Section properties of a b x h rectangle minus a b x chord strip centred at z_hole.

    Returns A, Iy (vertical bending), Iz (lateral bending), Ip (polar) and J (torsion, to be
    multiplied by the vertical-plane shear modulus; ``shear_ratio`` = G_xy / G_xz).
    """
    c = chord
    area = b * (h - c)
    zbar = (b * h * h / 2.0 - b * c * z_hole) / area
    Iy = (
        b * h**3 / 12.0
        + b * h * (h / 2.0 - zbar) ** 2
        - b * c**3 / 12.0
        - b * c * (z_hole - zbar) ** 2
    )
    Iz = (h - c) * b**3 / 12.0
    r = shear_ratio
    J = r**1.5 * rectangle_torsion_constant(b / np.sqrt(r), h - c)
    return {"A": area, "Iy": Iy, "Iz": Iz, "Ip": Iy + Iz, "J": J}


def tube_section(outer_diameter: np.ndarray, wall: np.ndarray) -> dict[str, np.ndarray]:
    """Section properties of a round tube (Iy = Iz = I, J = Ip = 2 I)."""
    D = outer_diameter
    d = D - 2.0 * wall
    area = np.pi * (D**2 - d**2) / 4.0
    inertia = np.pi * (D**4 - d**4) / 64.0
    return {"A": area, "Iy": inertia, "Iz": inertia, "Ip": 2.0 * inertia, "J": 2.0 * inertia}
