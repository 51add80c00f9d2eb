"""Design spaces: maps from scaled variables u in [0, 1]^n to parts, with derivatives.

Bars (undercut on the bottom face, symmetric unless asked otherwise). The cut lies inside a
central region [e, L - e]; s is the position in that region (symmetric: s = |x - L/2| / c with
c = L/2 - e, s = 0 at the centre; asymmetric: s = (x - e) / (L - 2 e)). Depth shapes:
- ``spline``: a clamped cubic B-spline of the depth, coefficients a = (d0, d0, d1, ..., 0, 0)
  (symmetric) so that the slope is zero at the centre and the cut meets the uncut surface
  tangentially with a continuous curvature. By the convex-hull property of B-splines
  (de Boor, 1978, *A Practical Guide to Splines*), 0 <= depth <= max(d_k): the depth and
  thickness limits are exact bounds on the variables;
- ``arch``: a flat bottom of depth d over |s| <= a, then a C2 quintic ramp
  (1 - 10 t^3 + 15 t^4 - 6 t^5) up to the uncut surface;
- ``steps``: k flat cuts of equal width and independent depth, as cut with a saw and router.
Optional free width: a variable after the shape's maps to [b_min, b_max] (constant along the
bar); bending barely depends on it, so it moves the lateral and torsion modes (the clearance).
Optional free length: the last variable maps to [L_min, L_max]; the cut region scales with it.

Tubes: optional free length, optional wall-thickness spline. Strings: a linear-density spline
(windings or added masses) between given bounds.

Every space gives d(design field)/du at the quadrature points; section-coefficient derivatives
follow by the complex-step method (Squire & Trapp, 1998, SIAM Review 40, 110-112), which is
exact to rounding for the analytic section formulas.
"""

from __future__ import annotations

from dataclasses import dataclass, replace
from functools import lru_cache
from typing import Literal

import numpy as np
from scipy.interpolate import BSpline
from tonewright.forward.geometry import Bar, Part, String, Tube, constant
from tonewright.forward.modal import bar_coefficients, hole_data, tube_coefficients

__all__ = [
    "BarUndercut",
    "DesignField",
    "StringDensity",
    "TubeDesign",
    "undercut_terms",
    "undercut_thickness",
]

_H = 1e-30  # complex step
CUT_MIN_DEPTH = 1e-5  # m: shallower is no cut (the shop tables print 0.01 mm)


@dataclass(frozen=True, eq=False)
class DesignField:
    """A field defined by a function of x, with known kinks (a forward.geometry.Field)."""

    values: object  # callable x -> array
    kinks: np.ndarray

    def __call__(self, x: np.ndarray) -> np.ndarray:
        return self.values(x)

    @property
    def breakpoints(self) -> np.ndarray:
        return self.kinks


def _clamped_basis(n_coef: int, s: np.ndarray, derivative: int = 0) -> np.ndarray:
    """Cubic clamped B-spline basis with uniform interior knots on [0, 1], shape (len(s), n)."""
    s = np.ascontiguousarray(np.clip(np.real(s), 0.0, 1.0), dtype=float)
    return _basis_cached(n_coef, s.tobytes(), derivative)


@lru_cache(maxsize=128)
def _basis_cached(n_coef: int, s_bytes: bytes, derivative: int) -> np.ndarray:
    s = np.frombuffer(s_bytes, dtype=float)
    interior = np.linspace(0.0, 1.0, n_coef - 2)
    knots = np.concatenate(([0.0] * 3, interior, [1.0] * 3))
    out = np.empty((s.size, n_coef))
    eye = np.eye(n_coef)
    for k in range(n_coef):
        spline = BSpline(knots, eye[k], 3, extrapolate=False)
        out[:, k] = (spline.derivative(derivative) if derivative else spline)(s)
    out = np.nan_to_num(out)
    out.setflags(write=False)
    return out


@dataclass(frozen=True)
class BarUndercut:
    """Undercut of a bar blank; see the module docstring for the shapes."""

    blank: Bar
    blank_thickness: float
    shape: Literal["spline", "arch", "steps"] = "spline"
    control_points: int = 5
    steps: int = 3
    symmetric: bool = True
    max_depth: float = 0.0  # metres; the smaller of this and blank - min_thickness
    min_thickness: float = 0.003
    end_keep: float = 0.0  # uncut length at each end
    node_zone: float = 0.0  # uncut width around each mode-1 node
    cutter_radius: float = 0.0  # minimum concave radius of the cut surface
    length_range: tuple[float, float] | None = None  # free length when given
    width_range: tuple[float, float] | None = None  # free (constant) width when given

    # -- variables ------------------------------------------------------------------------
    @property
    def depth_limit(self) -> float:
        limit = self.blank_thickness - self.min_thickness
        return min(self.max_depth, limit) if self.max_depth > 0 else limit

    @property
    def n_shape(self) -> int:
        if self.shape == "spline":
            return self.control_points * (1 if self.symmetric else 2)
        if self.shape == "arch":
            return 2
        return self.steps * (1 if self.symmetric else 2)

    @property
    def n(self) -> int:
        return self.n_shape + (1 if self.width_range else 0) + (1 if self.length_range else 0)

    @property
    def width_index(self) -> int | None:
        return self.n_shape if self.width_range else None

    @property
    def length_index(self) -> int | None:
        if not self.length_range:
            return None
        return self.n_shape + (1 if self.width_range else 0)

    def names(self) -> list[str]:
        if self.shape == "arch":
            base = ["depth", "flat half-width"]
        else:
            label = "depth at control point" if self.shape == "spline" else "depth of step"
            base = [f"{label} {k + 1}" for k in range(self.n_shape)]
        return (
            base
            + (["width"] if self.width_range else [])
            + (["length"] if self.length_range else [])
        )

    def width(self, u: np.ndarray) -> float | None:
        """The designed width (m), or None when the blank's width is kept."""
        if not self.width_range:
            return None
        lo, hi = self.width_range
        return float(lo + np.real(u[self.n_shape]) * (hi - lo))

    def start(self) -> np.ndarray:
        """A middling cut: half the allowed depth, flat half-width 0.5, mid length."""
        u = np.full(self.n, 0.5)
        if self.shape == "spline":
            u[: self.n_shape] = 0.5 * np.linspace(1.0, 0.6, self.n_shape)
        return u

    def length(self, u: np.ndarray) -> float:
        if not self.length_range:
            return self.blank.length
        lo, hi = self.length_range
        return float(lo + np.real(u[self.length_index]) * (hi - lo))

    def cut_edge(self, length: float) -> float:
        """Distance e from each end where the cut region begins."""
        node = 0.2242 * length  # mode-1 node of a uniform free bar; cuts move it outward
        zone = node + 0.5 * self.node_zone if self.node_zone > 0 else 0.0
        return max(self.end_keep, zone)

    # -- geometry -------------------------------------------------------------------------
    def _s(self, x: np.ndarray, length: float) -> np.ndarray:
        e = self.cut_edge(length)
        if self.symmetric:
            return np.abs(x - 0.5 * length) / (0.5 * length - e)
        return (x - e) / (length - 2.0 * e)

    def _inside(self, x: np.ndarray, length: float) -> np.ndarray:
        e = self.cut_edge(length)
        return (x > e) & (x < length - e)

    def depth_and_jacobian(self, u: np.ndarray, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Depth of cut at x and its derivative with respect to the shape variables."""
        L = self.length(u)
        inside = self._inside(x, L)
        s = self._s(x, L)
        if self.shape == "spline":
            if self.symmetric:
                n = self.control_points
                basis = _clamped_basis(n + 3, s)
                expand = np.zeros((n + 3, n))
                expand[0, 0] = expand[1, 0] = 1.0
                expand[2 : n + 1, 1:] = np.eye(n - 1)
            else:
                n = self.n_shape
                basis = _clamped_basis(n + 4, s)
                expand = np.zeros((n + 4, n))
                expand[2 : n + 2] = np.eye(n)
            J = (basis @ expand) * inside[:, None] * self.depth_limit
            depth = J @ u[: self.n_shape]
            return depth, J.T
        if self.shape == "steps":
            k = self.steps
            if self.symmetric:
                idx = np.minimum((s * k).astype(int), k - 1)
            else:
                idx = np.minimum((np.real(s) * 2 * k).astype(int), 2 * k - 1)
            J = np.zeros((x.size, self.n_shape))
            J[np.arange(x.size), np.clip(idx, 0, self.n_shape - 1)] = 1.0
            J *= inside[:, None] * self.depth_limit
            return J @ u[: self.n_shape], J.T

        # arch: complex step through the nonlinear shape
        def depth_of(v: np.ndarray) -> np.ndarray:
            depth, a = v[0] * self.depth_limit, 0.9 * v[1]
            t = (np.abs(np.real(s)) - a) / (1.0 - a)
            return depth * _smooth_ramp(t) * inside

        depth = np.real(depth_of(u[:2].astype(complex)))
        J = np.empty((2, x.size))
        for k in range(2):
            v = u[:2].astype(complex)
            v[k] += 1j * _H
            J[k] = np.imag(depth_of(v)) / _H
        return depth, J

    def kinks(self, u: np.ndarray) -> np.ndarray:
        L = self.length(u)
        e = self.cut_edge(L)
        pts = [e, L - e]
        if self.shape == "spline":  # knots: the depth is a cubic between them
            c = L - 2.0 * e
            if self.symmetric:
                s = np.linspace(0.0, 1.0, self.control_points + 1)[:-1]
                pts += list(0.5 * L - 0.5 * c * s) + list(0.5 * L + 0.5 * c * s[1:])
            else:
                pts += list(e + c * np.linspace(0.0, 1.0, self.n_shape + 2)[1:-1])
        if self.shape == "steps":
            if self.symmetric:
                c = 0.5 * L - e
                for j in range(1, self.steps):
                    pts += [0.5 * L - j * c / self.steps, 0.5 * L + j * c / self.steps]
            else:
                pts += list(np.linspace(e, L - e, 2 * self.steps + 1)[1:-1])
        return np.array(sorted(pts))

    def part(self, u: np.ndarray) -> Bar:
        L = self.length(u)
        t0 = self.blank_thickness

        def thickness(x: np.ndarray) -> np.ndarray:
            return t0 - self.depth_and_jacobian(u, np.asarray(x, dtype=float))[0]

        field = DesignField(thickness, self.kinks(u))
        blank = self.blank
        if self.width_range:
            blank = replace(blank, width=constant(self.width(u)))
        return replace(blank, length=L, thickness=field)

    def coefficient_jacobian(
        self, u: np.ndarray, part: Part, x: np.ndarray
    ) -> dict[str, np.ndarray]:
        """d(section coefficient)/du_k at x for the shape variables and the width (length
        excluded), in the order of the variables."""
        _, dDepth = self.depth_and_jacobian(u, x)
        m = part.material
        chord, z = hole_data(part, x)
        b, t = part.width(x), part.thickness(x)
        c = bar_coefficients(b, t + 1j * _H, chord, z, m.E, m.G, m.rho, m.nu, m.shear_ratio)
        # thickness = blank - depth, so d/du = -dc/dh * ddepth/du
        out = {name: -(np.imag(v) / _H) * dDepth for name, v in c.items()}
        if self.width_range:
            lo, hi = self.width_range
            cb = bar_coefficients(b + 1j * _H, t, chord, z, m.E, m.G, m.rho, m.nu, m.shear_ratio)
            for name, v in cb.items():
                out[name] = np.vstack([out[name], (hi - lo) * np.imag(v)[None, :] / _H])
        return out

    def curvature_margin(self, u: np.ndarray, samples: int = 400) -> float:
        """Smallest (1/R_cutter + depth'') over the cut, in 1/m; negative where a cutter of the
        given radius cannot follow the concave part of the cut (the surface is z = -depth)."""
        if self.cutter_radius <= 0:
            return np.inf
        L = self.length(u)
        e = self.cut_edge(L)
        x = np.linspace(e, L - e, samples)
        depth = self.depth_and_jacobian(u, x)[0]
        dx = x[1] - x[0]
        second = np.gradient(np.gradient(depth, dx), dx)
        return float(np.min(second[2:-2] + 1.0 / self.cutter_radius))

    def binding(self, u: np.ndarray) -> list[str]:
        """The shop limits the design presses against (within 2 %)."""
        out = []
        L = self.length(u)
        x = np.linspace(0.0, L, 2001)
        deepest = float(self.depth_and_jacobian(u, x)[0].max())
        if deepest >= 0.98 * self.depth_limit:
            limit = self.blank_thickness - self.min_thickness
            if self.max_depth > 0 and self.max_depth < limit:
                out.append(f"maximum depth of cut ({self.max_depth * 1e3:g} mm)")
            else:
                out.append(f"minimum thickness ({self.min_thickness * 1e3:g} mm)")
        if self.length_range:
            lo, hi = self.length_range
            if L <= lo + 0.02 * (hi - lo) or L >= hi - 0.02 * (hi - lo):
                out.append(f"length range ({lo * 1e3:g} to {hi * 1e3:g} mm)")
        if self.width_range:
            v = float(np.real(u[self.n_shape]))
            if v <= 0.02 or v >= 0.98:
                lo, hi = self.width_range
                out.append(f"width range ({lo * 1e3:g} to {hi * 1e3:g} mm)")
        if self.cutter_radius > 0 and self.curvature_margin(u) < 0.05 / self.cutter_radius:
            out.append(f"cutter radius ({self.cutter_radius * 1e3:g} mm)")
        return out

    def describe(self, u: np.ndarray) -> dict[str, float]:
        L = self.length(u)
        e = self.cut_edge(L)
        x = np.linspace(0.0, L, 4001)
        depth = self.depth_and_jacobian(u, x)[0]
        cut = x[depth > CUT_MIN_DEPTH]  # where the cut really starts, not its allowed region
        extra = {"width_mm": self.width(u) * 1e3} if self.width_range else {}
        return {
            **extra,
            "length_mm": L * 1e3,
            "cut_starts_mm": float(cut[0]) * 1e3 if cut.size else e * 1e3,
            "cut_ends_mm": float(cut[-1]) * 1e3 if cut.size else (L - e) * 1e3,
            "shape_from_mm": e * 1e3,
            "max_depth_mm": float(depth.max()) * 1e3,
            "min_thickness_mm": float((self.blank_thickness - depth).min()) * 1e3,
        }


@dataclass(frozen=True)
class _LengthOnly:
    """The one thing a fixed-length undercut reads of its blank (for depths and kinks)."""

    length: float


def undercut_terms(space: BarUndercut, u: np.ndarray) -> dict[str, object]:
    """A bar design in its own terms, for writing: shape, symmetric, ``cut_edge`` (m from each
    end where the shape's region begins), ``depths`` (m: B-spline control depths or step
    depths, centre outward when symmetric; an arch's flat depth) and, for an arch, ``flat``
    (its flat bottom as a share of the region's half-length). ``undercut_thickness`` of
    these terms is the design's thickness at every x."""
    u = np.asarray(u, dtype=float)
    L = space.length(u)
    D = space.depth_limit
    terms: dict[str, object] = {
        "shape": space.shape,
        "symmetric": space.symmetric,
        "cut_edge": space.cut_edge(L),
    }
    if space.shape == "arch":
        terms["depths"] = (float(u[0]) * D,)
        terms["flat"] = 0.9 * float(u[1])
    else:
        terms["depths"] = tuple(float(v) * D for v in u[: space.n_shape])
    return terms


def undercut_thickness(
    length: float,
    blank_thickness: float,
    shape: str,
    symmetric: bool,
    cut_edge: float,
    depths: tuple[float, ...],
    flat: float | None = None,
) -> DesignField:
    """The thickness field ``blank - depth(x)`` of the terms ``undercut_terms`` gives (metres),
    through the very shapes ``BarUndercut`` designs with, kinks included."""
    n = len(depths)
    deepest = max(max(depths), 1e-9)
    space = BarUndercut(
        blank=_LengthOnly(length),  # type: ignore[arg-type]
        blank_thickness=blank_thickness,
        shape=shape,  # type: ignore[arg-type]
        control_points=(n if symmetric else n // 2) if shape == "spline" else 5,
        steps=(n if symmetric else n // 2) if shape == "steps" else 3,
        symmetric=symmetric,
        max_depth=deepest,
        min_thickness=0.0,
        end_keep=cut_edge,
    )
    if shape == "arch":
        u = np.array([depths[0] / deepest, (flat or 0.0) / 0.9])
    else:
        u = np.asarray(depths, dtype=float) / deepest

    def thickness(x: np.ndarray) -> np.ndarray:
        return blank_thickness - space.depth_and_jacobian(u, np.asarray(x, dtype=float))[0]

    return DesignField(thickness, space.kinks(u))


def _smooth_ramp(t: np.ndarray) -> np.ndarray:
    """1 at t <= 0, 0 at t >= 1, quintic with zero slope and curvature at both ends
    (complex-step safe: the imaginary part is never clipped)."""
    tr = np.real(t)
    inside = (tr > 0) & (tr < 1)
    val = 1.0 - t**3 * (10.0 - 15.0 * t + 6.0 * t * t)
    return np.where(inside, val, np.where(tr >= 1, 0.0, 1.0))


@dataclass(frozen=True)
class TubeDesign:
    """A tube: free length (always) and optionally a symmetric wall-thickness spline."""

    blank: Tube
    length_range: tuple[float, float]
    wall_range: tuple[float, float] | None = None
    control_points: int = 0

    @property
    def n(self) -> int:
        return 1 + (self.control_points if self.wall_range else 0)

    @property
    def length_index(self) -> int:
        return self.n - 1

    def names(self) -> list[str]:
        return [f"wall at control point {k + 1}" for k in range(self.n - 1)] + ["length"]

    def start(self) -> np.ndarray:
        return np.full(self.n, 0.5)

    def length(self, u: np.ndarray) -> float:
        lo, hi = self.length_range
        return float(lo + np.real(u[-1]) * (hi - lo))

    def wall_and_jacobian(self, u: np.ndarray, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        if not self.wall_range:
            wall = self.blank.wall(x)
            return wall, np.zeros((0, x.size))
        lo, hi = self.wall_range
        n = self.control_points
        L = self.length(u)
        s = np.abs(x - 0.5 * L) / (0.5 * L)
        basis = _clamped_basis(n + 1, s)
        expand = np.zeros((n + 1, n))
        expand[0, 0] = expand[1, 0] = 1.0
        expand[2:, 1:] = np.eye(n - 1)
        J = basis @ expand * (hi - lo)
        return lo + J @ u[:n], J.T

    def part(self, u: np.ndarray) -> Tube:
        L = self.length(u)

        def wall(x: np.ndarray) -> np.ndarray:
            return self.wall_and_jacobian(u, np.asarray(x, dtype=float))[0]

        field = DesignField(wall, np.empty(0)) if self.wall_range else self.blank.wall
        return replace(self.blank, length=L, wall=field)

    def coefficient_jacobian(
        self, u: np.ndarray, part: Part, x: np.ndarray
    ) -> dict[str, np.ndarray]:
        _, dwall = self.wall_and_jacobian(u, x)
        if dwall.shape[0] == 0:
            return {}
        c = tube_coefficients(part.outer_diameter(x), part.wall(x) + 1j * _H, part.material)
        return {name: (np.imag(v) / _H) * dwall for name, v in c.items()}

    def curvature_margin(self, u: np.ndarray) -> float:
        return np.inf

    def binding(self, u: np.ndarray) -> list[str]:
        out = []
        if np.real(u[-1]) <= 0.01 or np.real(u[-1]) >= 0.99:
            lo, hi = self.length_range
            out.append(f"length range ({lo * 1e3:g} to {hi * 1e3:g} mm)")
        if self.wall_range and np.any((u[:-1] <= 0.01) | (u[:-1] >= 0.99)):
            lo, hi = self.wall_range
            out.append(f"wall range ({lo * 1e3:g} to {hi * 1e3:g} mm)")
        return out

    def describe(self, u: np.ndarray) -> dict[str, float]:
        return {"length_mm": self.length(u) * 1e3}


@dataclass(frozen=True)
class StringDensity:
    """A string whose linear density follows a spline between bounds (windings, masses)."""

    blank: String
    density_range: tuple[float, float]
    control_points: int = 5
    symmetric: bool = True

    @property
    def n(self) -> int:
        return self.control_points

    length_index = None

    def names(self) -> list[str]:
        return [f"linear density at control point {k + 1}" for k in range(self.n)]

    def start(self) -> np.ndarray:
        lo, hi = self.density_range
        mu0 = float(np.mean(self.blank.linear_density(np.linspace(0, self.blank.length, 5))))
        return np.full(self.n, np.clip((mu0 - lo) / (hi - lo), 0.05, 0.95))

    def length(self, u: np.ndarray) -> float:
        return self.blank.length

    def density_and_jacobian(self, u: np.ndarray, x: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        lo, hi = self.density_range
        L = self.blank.length
        n = self.control_points
        if self.symmetric:
            s = np.abs(x - 0.5 * L) / (0.5 * L)
            basis = _clamped_basis(n + 1, s)
            expand = np.zeros((n + 1, n))
            expand[0, 0] = expand[1, 0] = 1.0
            expand[2:, 1:] = np.eye(n - 1)
            J = basis @ expand
        else:
            J = _clamped_basis(n, x / L)
        J = J * (hi - lo)
        return lo + J @ u, J.T

    def part(self, u: np.ndarray) -> String:
        def density(x: np.ndarray) -> np.ndarray:
            return self.density_and_jacobian(u, np.asarray(x, dtype=float))[0]

        return replace(self.blank, linear_density=DesignField(density, np.empty(0)))

    def coefficient_jacobian(
        self, u: np.ndarray, part: Part, x: np.ndarray
    ) -> dict[str, np.ndarray]:
        return {"mu": self.density_and_jacobian(u, x)[1]}

    def curvature_margin(self, u: np.ndarray) -> float:
        return np.inf

    def binding(self, u: np.ndarray) -> list[str]:
        if np.any((u <= 0.01) | (u >= 0.99)):
            lo, hi = self.density_range
            return [f"linear density range ({lo:g} to {hi:g} kg/m)"]
        return []

    def describe(self, u: np.ndarray) -> dict[str, float]:
        x = np.linspace(0, self.blank.length, 201)
        mu = self.density_and_jacobian(u, x)[0]
        return {"min_density_kg_m": float(mu.min()), "max_density_kg_m": float(mu.max())}
